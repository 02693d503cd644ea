"""J2: secular rates of the mean elements and the zonal acceleration.

References
----------
Vallado, D. A., *Fundamentals of Astrodynamics and Applications*, 4th ed., 2013, sec. 9.6,
eqs. 9-41 (node), 9-42 (argument of periapsis) and 9-43 (mean anomaly), first order in J2;
sec. 8.7, eq. 8-30 (the J2 term of the zonal acceleration).
"""

from __future__ import annotations

import math

import numpy as np

from .bodies import Body
from .elements import Elements
from .kepler import TWO_PI, mean_motion, wrap_2pi

#: Sun-synchronous node rate: 360 deg per tropical year, rad/s (common practice value; the
#: tropical year of 365.2422 days is from memory).
SUN_SYNC_RAAN_RATE_RAD_S = TWO_PI / (365.2422 * 86400.0)


def secular_rates(a_m, e, i_rad, body: Body):
    """First-order J2 secular rates of the mean elements.

    Parameters
    ----------
    a_m : float or ndarray
        Mean semi-major axis, m (elliptic orbits only).
    e : float or ndarray
        Mean eccentricity, 0 <= e < 1.
    i_rad : float or ndarray
        Mean inclination, rad.
    body : Body
        Central body (``mu_m3_s2``, ``radius_m``, ``j2``).

    Returns
    -------
    raan_dot, argp_dot, mean_anomaly_dot : float or ndarray
        Rates in rad/s; the last includes the Keplerian mean motion.

    References
    ----------
    Vallado (2013), eqs. 9-41 to 9-43.
    """
    if all(isinstance(q, float) for q in (a_m, e, i_rad)):  # plain floats: no numpy overhead
        if a_m <= 0.0 or e >= 1.0:
            raise ValueError("orbit is hyperbolic: J2 secular rates need a closed orbit")
        n = math.sqrt(body.mu_m3_s2 / a_m ** 3)
        k = n * body.j2 * (body.radius_m / (a_m * (1.0 - e * e))) ** 2
        s2 = math.sin(i_rad) ** 2
        return (-1.5 * k * math.cos(i_rad), 0.75 * k * (4.0 - 5.0 * s2),
                n + 0.75 * k * math.sqrt(1.0 - e * e) * (2.0 - 3.0 * s2))
    a = np.asarray(a_m, dtype=float)
    e = np.asarray(e, dtype=float)
    i = np.asarray(i_rad, dtype=float)
    if np.any(a <= 0.0) or np.any(e >= 1.0):
        raise ValueError("orbit is hyperbolic: J2 secular rates need a closed orbit")
    n = np.asarray(mean_motion(a, body.mu_m3_s2))
    p = a * (1.0 - e * e)
    k = n * body.j2 * (body.radius_m / p) ** 2
    s2 = np.sin(i) ** 2
    raan_dot = -1.5 * k * np.cos(i)
    argp_dot = 0.75 * k * (4.0 - 5.0 * s2)
    m_dot = n + 0.75 * k * np.sqrt(1.0 - e * e) * (2.0 - 3.0 * s2)

    def out(x):
        return float(x) if np.ndim(x) == 0 else x

    return out(raan_dot), out(argp_dot), out(m_dot)


def propagate_mean_elements(el: Elements, dt_s, body: Body, model: str) -> Elements:
    """Advance mean elements by ``dt_s`` seconds.

    Under ``"two-body"`` this is the conic (elements fixed, mean anomaly at the mean motion);
    under ``"two-body+J2"`` RAAN, argument of periapsis and mean anomaly advance at their
    first-order secular rates, with a, e, i fixed.  The input is taken to be *mean* elements:
    feeding osculating elements of a low orbit leaves kilometre-level short-period errors (use
    :func:`mechanics.mean.mean_elements` first).

    References
    ----------
    Vallado (2013), sec. 9.6, eq. 9-44 (secular update of the elements).
    """
    from .kepler import mean_to_true, propagate_elements_kepler, true_to_mean

    if model == "two-body":
        return propagate_elements_kepler(el, dt_s, body.mu_m3_s2)
    if model != "two-body+J2":
        raise ValueError(f"model {model!r} is not known")
    dt = np.asarray(dt_s, dtype=float)
    raan_dot, argp_dot, m_dot = secular_rates(el.a_m, el.e, el.i_rad, body)
    M = np.asarray(true_to_mean(el.nu_rad, el.e)) + np.asarray(m_dot) * dt
    nu = mean_to_true(np.mod(M, TWO_PI), el.e)
    return Elements(
        el.a_m, el.e, el.i_rad,
        wrap_2pi(np.asarray(el.raan_rad) + np.asarray(raan_dot) * dt),
        wrap_2pi(np.asarray(el.argp_rad) + np.asarray(argp_dot) * dt),
        nu,
    )


def j2_acceleration(r_m, body: Body):
    """Acceleration (m/s^2, shape (..., 3)) of the J2 zonal term alone.

    References
    ----------
    Vallado (2013), eq. 8-30.
    """
    r = np.asarray(r_m, dtype=float)
    x, y, z = r[..., 0], r[..., 1], r[..., 2]
    r2 = x * x + y * y + z * z
    rmag = np.sqrt(r2)
    k = -1.5 * body.j2 * body.mu_m3_s2 * body.radius_m ** 2 / (r2 * r2 * rmag)
    z2 = 5.0 * z * z / r2
    return np.stack([k * x * (1.0 - z2), k * y * (1.0 - z2), k * z * (3.0 - z2)], axis=-1)


def sun_synchronous_inclination(a_m, e, body: Body) -> float:
    """Inclination (rad) whose J2 node rate matches the mean motion of the Sun (Earth only).

    Raises
    ------
    ValueError
        When no inclination gives that rate (orbit too high for J2 to turn the node fast
        enough).
    """
    raan_dot_unit, _, _ = secular_rates(a_m, e, 0.0, body)  # = -1.5 k  (cos i = 1)
    cos_i = SUN_SYNC_RAAN_RATE_RAD_S / raan_dot_unit
    if not -1.0 <= cos_i <= 1.0:
        raise ValueError("no sun-synchronous inclination at this semi-major axis")
    return math.acos(cos_i)
