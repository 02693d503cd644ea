"""Orbit summary: elements, apsides, period and the next apsis passages of a state.

Under ``"two-body"`` the times come from the osculating conic.  Under ``"two-body+J2"`` they come
from the orbit-averaged elements (:mod:`mechanics.mean`) and the J2 secular rates: the next
mean periapsis is when the mean anomaly next wraps to zero, on the anomalistic period.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .bodies import Body, check_model
from .elements import Elements, orbit_kind, rv_to_elements
from .kepler import mean_motion, period, true_to_mean
from .mean import MeanOrbit, mean_orbit


@dataclass(frozen=True)
class OrbitSummary:
    """What ``burndesk orbit`` reports (SI units; ``None`` where undefined, see ``notes``)."""

    epoch_s: float
    body: Body
    model: str
    elements: Elements
    kind: str
    periapsis_alt_m: float
    apoapsis_alt_m: float | None
    period_s: float | None
    next_periapsis_s: float | None
    next_apoapsis_s: float | None
    mean: MeanOrbit | None
    notes: tuple = field(default_factory=tuple)


def summarize(r_m, v_m_s, epoch_s: float, body: Body, model: str) -> OrbitSummary:
    """Summarise an osculating state at ``epoch_s`` (see module notes)."""
    check_model(model, body)
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    mu = body.mu_m3_s2
    el = rv_to_elements(r, v, mu)
    kind = orbit_kind(el.e, el.i_rad)
    notes = []
    if kind == "circular":
        notes.append("circular orbit (e < 1e-9): argp is 0 and nu is the argument of latitude")
    elif kind == "equatorial":
        notes.append("equatorial orbit: raan is 0 and argp is the longitude of periapsis")
    elif kind == "circular-equatorial":
        notes.append("circular equatorial orbit: raan and argp are 0 and nu is the true longitude")
    rp_alt = el.periapsis_radius_m - body.radius_m
    if el.e > 1.0:
        notes.append("orbit is hyperbolic: no apoapsis and no period")
        M = float(true_to_mean(el.nu_rad, el.e))
        n = float(mean_motion(el.a_m, mu))
        next_peri = epoch_s + (-M / n) if M < 0.0 else None
        if next_peri is None:
            notes.append("already past periapsis on an open orbit: no next periapsis")
        notes.append("open orbit: the epoch's two-body conic is used for timing")
        return OrbitSummary(epoch_s, body, model, el, kind, rp_alt, None, None, next_peri, None,
                            None, tuple(notes))
    ra_alt = float(el.apoapsis_radius_m) - body.radius_m
    per = float(period(el.a_m, mu))
    mean = mean_orbit(r, v, body, model)
    if model == "two-body+J2":
        notes.append("next apsis times use orbit-averaged elements and J2 secular rates "
                     f"(mean periapsis {(mean.periapsis_radius_m - body.radius_m) / 1e3:.3f} km, "
                     f"mean apoapsis {(mean.apoapsis_radius_m - body.radius_m) / 1e3:.3f} km)")
    if mean.circular:
        notes.append("orbit is circular: no periapsis or apoapsis passages")
        next_peri = next_apo = None
    else:
        next_peri = epoch_s + mean.time_to_apsis("periapsis")
        next_apo = epoch_s + mean.time_to_apsis("apoapsis")
    if rp_alt < body.min_safe_alt_m:
        notes.append(f"periapsis {rp_alt / 1e3:.1f} km is below the safe altitude "
                     f"{body.min_safe_alt_m / 1e3:.0f} km for {body.name}")
    return OrbitSummary(epoch_s, body, model, el, kind, rp_alt, ra_alt, per, next_peri, next_apo,
                        mean if model == "two-body+J2" else None, tuple(notes))

