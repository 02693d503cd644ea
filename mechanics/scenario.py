"""Scenario data: who, where, when, with what, and where to.

Plain frozen dataclasses in SI units, convertible to and from JSON-ready dicts (the session
journal stores them).  Reading scenario files is done at the edge (:mod:`console.scenario_file`).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace

import numpy as np

from .bodies import Body, check_model
from .vehicle import Vehicle

TARGET_KINDS = ("circular", "apsides", "apoapsis", "periapsis", "bielliptic")
ATTITUDES = ("inertial", "tracking")


@dataclass(frozen=True)
class Target:
    """Where the campaign must end.

    Attributes
    ----------
    kind : str
        One of ``TARGET_KINDS``.
    periapsis_radius_m, apoapsis_radius_m : float or None
        Target apsis radii (both equal for ``circular``; only the moved one for
        ``apoapsis`` / ``periapsis``, the other is ``None``).
    via_radius_m : float or None
        Intermediate apoapsis radius of a bi-elliptic transfer.
    i_rad : float or None
        Target inclination for a combined plane change; ``None`` keeps the plane.
    """

    kind: str
    periapsis_radius_m: float | None = None
    apoapsis_radius_m: float | None = None
    via_radius_m: float | None = None
    i_rad: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in TARGET_KINDS:
            raise ValueError(f"target.kind {self.kind!r} is not known: use one of {', '.join(TARGET_KINDS)}")
        need = {
            "circular": ("periapsis_radius_m", "apoapsis_radius_m"),
            "apsides": ("periapsis_radius_m", "apoapsis_radius_m"),
            "apoapsis": ("apoapsis_radius_m",),
            "periapsis": ("periapsis_radius_m",),
            "bielliptic": ("periapsis_radius_m", "apoapsis_radius_m", "via_radius_m"),
        }[self.kind]
        for name in need:
            value = getattr(self, name)
            if value is None or not (math.isfinite(value) and value > 0.0):
                raise ValueError(f"target: {name} must be a positive radius for kind {self.kind!r}")
        if self.periapsis_radius_m is not None and self.apoapsis_radius_m is not None \
                and self.apoapsis_radius_m < self.periapsis_radius_m:
            raise ValueError("target: apoapsis_alt is below periapsis_alt")
        if self.via_radius_m is not None and self.apoapsis_radius_m is not None \
                and self.via_radius_m < self.apoapsis_radius_m:
            raise ValueError("target: via_alt must lie above the target altitude")
        if self.i_rad is not None and not (0.0 <= self.i_rad <= math.pi):
            raise ValueError("target: i must be between 0 and 180 deg")


@dataclass(frozen=True)
class PlanOptions:
    """How to plan.

    Attributes
    ----------
    attitude : str
        ``"inertial"`` (fixed along the impulsive burn direction at the apsis) or
        ``"tracking"`` (fixed in the velocity-following frame).
    split : str or int
        ``"auto"`` (split when a burn breaks a vehicle limit), ``"off"`` or a forced count N.
    lead_time_s : float
        Earliest ignition after the epoch, s.
    """

    attitude: str = "inertial"
    split: object = "auto"
    lead_time_s: float = 0.0

    def __post_init__(self) -> None:
        if self.attitude not in ATTITUDES:
            raise ValueError(f"options.attitude {self.attitude!r} is not known: use inertial or tracking")
        if isinstance(self.split, bool) or not (self.split in ("auto", "off")
                                                or (isinstance(self.split, int) and 1 <= self.split <= 200)):
            raise ValueError("options.split must be \"auto\", \"off\" or a whole number from 1 to 200")
        if not (math.isfinite(self.lead_time_s) and self.lead_time_s >= 0.0):
            raise ValueError("options.lead_time must be a non-negative duration")


@dataclass(frozen=True)
class Scenario:
    """Everything a plan is made from.

    Attributes
    ----------
    name : str
    body : Body
    epoch_s : float
        UTC seconds since 1970 of the state.
    r_m, v_m_s : tuple of 3 floats
        Osculating state at the epoch, inertial frame.
    model : str
    vehicle : Vehicle or None
    target : Target or None
    options : PlanOptions
    """

    name: str
    body: Body
    epoch_s: float
    r_m: tuple
    v_m_s: tuple
    model: str
    vehicle: Vehicle | None = None
    target: Target | None = None
    options: PlanOptions = field(default_factory=PlanOptions)

    def __post_init__(self) -> None:
        check_model(self.model, self.body)
        r = np.asarray(self.r_m, dtype=float)
        v = np.asarray(self.v_m_s, dtype=float)
        if r.shape != (3,) or v.shape != (3,) or not (np.all(np.isfinite(r)) and np.all(np.isfinite(v))):
            raise ValueError("state: r and v must each be three finite numbers")
        if not math.isfinite(self.epoch_s):
            raise ValueError("epoch is not finite")

    def with_state(self, epoch_s: float, r_m, v_m_s) -> "Scenario":
        return replace(self, epoch_s=float(epoch_s), r_m=tuple(map(float, r_m)),
                       v_m_s=tuple(map(float, v_m_s)))

    def to_dict(self) -> dict:
        """JSON-ready dict (SI units)."""
        return {
            "name": self.name,
            "body": asdict(self.body),
            "epoch_s": self.epoch_s,
            "r_m": list(self.r_m),
            "v_m_s": list(self.v_m_s),
            "model": self.model,
            "vehicle": self.vehicle.to_dict() if self.vehicle else None,
            "target": asdict(self.target) if self.target else None,
            "options": asdict(self.options),
        }

    @staticmethod
    def from_dict(d: dict) -> "Scenario":
        return Scenario(
            name=d["name"],
            body=Body(**d["body"]),
            epoch_s=float(d["epoch_s"]),
            r_m=tuple(d["r_m"]),
            v_m_s=tuple(d["v_m_s"]),
            model=d["model"],
            vehicle=Vehicle.from_dict(d["vehicle"]) if d.get("vehicle") else None,
            target=Target(**d["target"]) if d.get("target") else None,
            options=PlanOptions(**d.get("options", {})),
        )
