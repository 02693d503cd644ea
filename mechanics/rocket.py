"""The rocket equation and engine sizing.

References
----------
Tsiolkovsky rocket equation, dv = Isp g0 ln(m0 / m1): Curtis, *Orbital Mechanics for Engineering
Students*, 3rd ed., 2014, eq. 6.1 (impulsive manoeuvre propellant) and sec. 11.3 eq. 11.30;
Sutton, G. P., Biblarz, O., *Rocket Propulsion Elements*, 9th ed., 2017, eqs. 2-5 (mass flow
from thrust and specific impulse) and 4-7 (the equation).
"""

from __future__ import annotations

import math

import numpy as np

from .constants import G0_M_S2


def _positive(name: str, x) -> None:
    arr = np.asarray(x, dtype=float)
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0.0):
        raise ValueError(f"{name} must be positive and finite")


def _out(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def exhaust_velocity(isp_s):
    """Effective exhaust velocity Isp g0, m/s (g0 = 9.80665 m/s^2 exactly)."""
    _positive("specific impulse", isp_s)
    return _out(np.asarray(isp_s, dtype=float) * G0_M_S2)


def delta_v(isp_s, m0_kg, m1_kg):
    """Ideal delta-v (m/s) from burning a mass m0 down to m1: Isp g0 ln(m0 / m1).

    Raises
    ------
    ValueError
        When m1 > m0 (a burn cannot add mass) or a mass is not positive.
    """
    _positive("initial mass", m0_kg)
    _positive("final mass", m1_kg)
    m0 = np.asarray(m0_kg, dtype=float)
    m1 = np.asarray(m1_kg, dtype=float)
    if np.any(m1 > m0):
        raise ValueError("final mass exceeds the initial mass: a burn cannot add mass")
    return _out(exhaust_velocity(isp_s) * np.log(m0 / m1))


def propellant_for_dv(isp_s, m0_kg, dv_m_s):
    """Propellant (kg) to deliver ``dv_m_s`` starting from mass m0: m0 (1 - exp(-dv / (Isp g0)))."""
    _positive("initial mass", m0_kg)
    dv = np.asarray(dv_m_s, dtype=float)
    if not np.all(np.isfinite(dv)) or np.any(dv < 0.0):
        raise ValueError("delta-v must be a finite non-negative speed")
    return _out(np.asarray(m0_kg, dtype=float) * -np.expm1(-dv / exhaust_velocity(isp_s)))


def final_mass(isp_s, m0_kg, dv_m_s):
    """Mass (kg) left after delivering ``dv_m_s`` from m0."""
    return _out(np.asarray(m0_kg, dtype=float) - np.asarray(propellant_for_dv(isp_s, m0_kg, dv_m_s)))


def mass_flow(thrust_n, isp_s):
    """Propellant mass flow F / (Isp g0), kg/s."""
    _positive("thrust", thrust_n)
    return _out(np.asarray(thrust_n, dtype=float) / exhaust_velocity(isp_s))


def burn_duration(thrust_n, isp_s, m0_kg, dv_m_s):
    """Burn time (s) to deliver ``dv_m_s`` at constant thrust: propellant / mass flow."""
    return _out(np.asarray(propellant_for_dv(isp_s, m0_kg, dv_m_s)) / np.asarray(mass_flow(thrust_n, isp_s)))


def time_to_half_dv(thrust_n, isp_s, m0_kg, dv_m_s):
    """Time (s) from ignition until half of ``dv_m_s`` has been delivered.

    m0 / mdot (1 - exp(-dv / (2 Isp g0))); later than half the duration because the vehicle
    lightens as it burns.
    """
    return burn_duration(thrust_n, isp_s, m0_kg, 0.5 * np.asarray(dv_m_s, dtype=float))


def dv_capability(isp_s, mass_kg, propellant_available_kg):
    """Delta-v (m/s) that ``propellant_available_kg`` buys at total mass ``mass_kg``.

    Zero when nothing is available; raises when more is available than the vehicle weighs.
    """
    m = float(mass_kg)
    p = float(propellant_available_kg)
    if not (math.isfinite(m) and m > 0.0):
        raise ValueError("vehicle mass must be positive and finite")
    if not math.isfinite(p):
        raise ValueError("available propellant must be finite")
    if p <= 0.0:
        return 0.0
    if p >= m:
        raise ValueError("available propellant exceeds the vehicle mass")
    return float(delta_v(isp_s, m, m - p))
