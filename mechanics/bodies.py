"""Central bodies: the few constants the mechanics needs.

Loading a body from a TOML profile happens at the edge (:mod:`console.profiles`); here a body is
just numbers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass


@dataclass(frozen=True)
class Body:
    """A central body.

    Attributes
    ----------
    name : str
        Profile name, e.g. ``"earth"``.
    mu_m3_s2 : float
        Gravitational parameter GM, m^3/s^2.
    radius_m : float
        Equatorial radius, m (also the reference radius of ``j2``).
    j2 : float
        Unnormalised second zonal harmonic J2 (dimensionless), 0 for none.
    rotation_rad_s : float
        Sidereal rotation rate, rad/s (informational; planning uses the inertial frame).
    min_safe_alt_m : float
        Altitude below which a periapsis draws a warning (atmosphere or terrain), m.
    """

    name: str
    mu_m3_s2: float
    radius_m: float
    j2: float = 0.0
    rotation_rad_s: float = 0.0
    min_safe_alt_m: float = 0.0

    def __post_init__(self) -> None:
        for field, value in (("mu_m3_s2", self.mu_m3_s2), ("radius_m", self.radius_m)):
            if not (math.isfinite(value) and value > 0.0):
                raise ValueError(f"body {self.name!r}: {field} must be a positive finite number, got {value!r}")
        for field, value in (("j2", self.j2), ("rotation_rad_s", self.rotation_rad_s),
                             ("min_safe_alt_m", self.min_safe_alt_m)):
            if not math.isfinite(value):
                raise ValueError(f"body {self.name!r}: {field} must be finite, got {value!r}")
        if abs(self.j2) > 0.1:
            raise ValueError(f"body {self.name!r}: j2 = {self.j2!r} is not a plausible oblateness term")

    @property
    def default_model(self) -> str:
        """``"two-body+J2"`` for a body with a J2 term, else ``"two-body"``."""
        return "two-body+J2" if self.j2 != 0.0 else "two-body"


MODELS = ("two-body", "two-body+J2")


def check_model(model: str, body: Body) -> str:
    """Return ``model`` if it is a known force model usable with ``body``.

    Raises
    ------
    ValueError
        For an unknown model name, or "two-body+J2" on a body without a J2 term.
    """
    if model not in MODELS:
        raise ValueError(f"model {model!r} is not known: use one of {', '.join(MODELS)}")
    if model == "two-body+J2" and body.j2 == 0.0:
        raise ValueError(f"model 'two-body+J2' needs a J2 term, and body {body.name!r} has none")
    return model
