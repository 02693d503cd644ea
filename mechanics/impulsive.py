"""Impulsive manoeuvres: speeds, tangential apsis burns, Hohmann, bi-elliptic, plane changes.

Every function takes SI floats (m, m/s, rad) and the gravitational parameter ``mu_m3_s2``.
Delta-v values are magnitudes (m/s, >= 0) unless named ``signed``.

References
----------
Vallado, D. A., *Fundamentals of Astrodynamics and Applications*, 4th ed., 2013, sec. 6.3
(Hohmann and bi-elliptic transfers, Algorithms 36-37, eqs. 6-2 to 6-12; the crossover radius
ratios 11.94 and 15.58) and sec. 6.4 (plane changes, eq. 6-19 and the combined change of
Algorithm 40).
Curtis, H. D., *Orbital Mechanics for Engineering Students*, 3rd ed., 2014, sec. 6.2-6.3.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Radius ratios (final / initial) bounding the region where bi-elliptic transfers can beat
#: Hohmann: below the first never, above the second always (for any intermediate radius).
#: Vallado (2013) sec. 6.3; re-derived here by :func:`bielliptic_crossover_ratios`.
HOHMANN_ALWAYS_BETTER_BELOW = 11.938765
BIELLIPTIC_ALWAYS_BETTER_ABOVE = 15.581719


def vis_viva_speed(r_m, a_m, mu_m3_s2: float):
    """Speed (m/s) at radius r on an orbit of semi-major axis a: v^2 = mu (2/r - 1/a).

    Raises
    ------
    ValueError
        When r lies beyond the apoapsis of the orbit (v^2 < 0).

    References
    ----------
    Vallado (2013), eq. 1-31.
    """
    r = np.asarray(r_m, dtype=float)
    a = np.asarray(a_m, dtype=float)
    v2 = mu_m3_s2 * (2.0 / r - 1.0 / a)
    if np.any(v2 < 0.0):
        raise ValueError("radius lies beyond the orbit's apoapsis: no real speed")
    v = np.sqrt(v2)
    return float(v) if v.ndim == 0 else v


def circular_speed(r_m, mu_m3_s2: float):
    """Circular orbit speed sqrt(mu / r), m/s."""
    v = np.sqrt(mu_m3_s2 / np.asarray(r_m, dtype=float))
    return float(v) if v.ndim == 0 else v


def escape_speed(r_m, mu_m3_s2: float):
    """Escape speed sqrt(2 mu / r), m/s."""
    v = np.sqrt(2.0 * mu_m3_s2 / np.asarray(r_m, dtype=float))
    return float(v) if v.ndim == 0 else v


def _check_radius(name: str, r: float) -> None:
    if not (math.isfinite(r) and r > 0.0):
        raise ValueError(f"{name} must be a positive finite radius, got {r!r}")


def apsis_burn_dv(r_burn_m: float, r_other_before_m: float, r_other_after_m: float,
                  mu_m3_s2: float) -> float:
    """Signed tangential delta-v (m/s) at an apsis that moves the opposite apsis.

    The burn point stays an apsis; the orbit goes from apsides (r_burn, r_other_before) to
    (r_burn, r_other_after).  Positive is prograde.

    References
    ----------
    Vallado (2013), eqs. 6-2 to 6-6 (the Hohmann burns are two instances).
    """
    for name, r in (("burn radius", r_burn_m), ("opposite apsis before", r_other_before_m),
                    ("opposite apsis after", r_other_after_m)):
        _check_radius(name, r)
    v0 = vis_viva_speed(r_burn_m, 0.5 * (r_burn_m + r_other_before_m), mu_m3_s2)
    v1 = vis_viva_speed(r_burn_m, 0.5 * (r_burn_m + r_other_after_m), mu_m3_s2)
    return v1 - v0


def opposite_apsis_after(r_burn_m: float, r_other_m: float, dv_signed_m_s: float,
                         mu_m3_s2: float) -> float:
    """Opposite apsis radius (m) after a tangential burn of ``dv_signed_m_s`` at an apsis.

    Raises
    ------
    ValueError
        When the burn opens the orbit (no opposite apsis).
    """
    v0 = vis_viva_speed(r_burn_m, 0.5 * (r_burn_m + r_other_m), mu_m3_s2)
    v1 = v0 + dv_signed_m_s
    if v1 <= 0.0:
        raise ValueError("burn reverses the velocity: not a tangential apsis change")
    energy = 0.5 * v1 * v1 - mu_m3_s2 / r_burn_m
    if energy >= 0.0:
        raise ValueError("burn reaches escape speed: orbit is hyperbolic, no apoapsis")
    a1 = -mu_m3_s2 / (2.0 * energy)
    return 2.0 * a1 - r_burn_m


@dataclass(frozen=True)
class Hohmann:
    """Two-burn transfer between circular orbits.

    Attributes
    ----------
    dv1_m_s, dv2_m_s : float
        Burn magnitudes at departure and arrival, m/s.
    transfer_a_m : float
        Semi-major axis of the transfer ellipse, m.
    time_of_flight_s : float
        Half the transfer period, s.
    """

    dv1_m_s: float
    dv2_m_s: float
    transfer_a_m: float
    time_of_flight_s: float

    @property
    def total_dv_m_s(self) -> float:
        return self.dv1_m_s + self.dv2_m_s


def hohmann(r1_m: float, r2_m: float, mu_m3_s2: float) -> Hohmann:
    """Hohmann transfer between coplanar circular orbits of radii r1 and r2 (either order).

    References
    ----------
    Vallado (2013), Algorithm 36, eqs. 6-2 to 6-4.
    """
    _check_radius("initial radius", r1_m)
    _check_radius("final radius", r2_m)
    at = 0.5 * (r1_m + r2_m)
    dv1 = abs(vis_viva_speed(r1_m, at, mu_m3_s2) - circular_speed(r1_m, mu_m3_s2))
    dv2 = abs(circular_speed(r2_m, mu_m3_s2) - vis_viva_speed(r2_m, at, mu_m3_s2))
    tof = math.pi * math.sqrt(at ** 3 / mu_m3_s2)
    return Hohmann(dv1, dv2, at, tof)


@dataclass(frozen=True)
class BiElliptic:
    """Three-burn transfer via an intermediate apoapsis."""

    dv1_m_s: float
    dv2_m_s: float
    dv3_m_s: float
    time_of_flight_s: float

    @property
    def total_dv_m_s(self) -> float:
        return self.dv1_m_s + self.dv2_m_s + self.dv3_m_s


def bielliptic(r1_m: float, r_via_m: float, r2_m: float, mu_m3_s2: float) -> BiElliptic:
    """Bi-elliptic transfer r1 -> r_via -> r2 between circular orbits.

    Raises
    ------
    ValueError
        When the intermediate radius is below the larger of the two orbits.

    References
    ----------
    Vallado (2013), Algorithm 37, eqs. 6-7 to 6-12.
    """
    for name, r in (("initial radius", r1_m), ("intermediate radius", r_via_m), ("final radius", r2_m)):
        _check_radius(name, r)
    if r_via_m < max(r1_m, r2_m):
        raise ValueError("intermediate apoapsis must lie above both the initial and the final orbit")
    a1 = 0.5 * (r1_m + r_via_m)
    a2 = 0.5 * (r2_m + r_via_m)
    dv1 = abs(vis_viva_speed(r1_m, a1, mu_m3_s2) - circular_speed(r1_m, mu_m3_s2))
    dv2 = abs(vis_viva_speed(r_via_m, a2, mu_m3_s2) - vis_viva_speed(r_via_m, a1, mu_m3_s2))
    dv3 = abs(vis_viva_speed(r2_m, a2, mu_m3_s2) - circular_speed(r2_m, mu_m3_s2))
    tof = math.pi * (math.sqrt(a1 ** 3 / mu_m3_s2) + math.sqrt(a2 ** 3 / mu_m3_s2))
    return BiElliptic(dv1, dv2, dv3, tof)


def bielliptic_advice(r1_m: float, r2_m: float, r_via_m: float | None = None,
                      mu_m3_s2: float | None = None) -> str:
    """One-line advice on whether a bi-elliptic transfer can beat Hohmann for r2 / r1.

    With ``r_via_m`` and ``mu_m3_s2`` the actual totals are compared too.
    """
    ratio = max(r1_m, r2_m) / min(r1_m, r2_m)
    if ratio < HOHMANN_ALWAYS_BETTER_BELOW:
        text = (f"radius ratio {ratio:.3f} < {HOHMANN_ALWAYS_BETTER_BELOW:.2f}: Hohmann is cheaper "
                "than any bi-elliptic")
    elif ratio > BIELLIPTIC_ALWAYS_BETTER_ABOVE:
        text = (f"radius ratio {ratio:.3f} > {BIELLIPTIC_ALWAYS_BETTER_ABOVE:.2f}: any bi-elliptic "
                "beats Hohmann (time of flight is much longer)")
    else:
        text = (f"radius ratio {ratio:.3f} between {HOHMANN_ALWAYS_BETTER_BELOW:.2f} and "
                f"{BIELLIPTIC_ALWAYS_BETTER_ABOVE:.2f}: a bi-elliptic wins only with a high enough "
                "intermediate apoapsis")
    if r_via_m is not None and mu_m3_s2 is not None:
        h = hohmann(r1_m, r2_m, mu_m3_s2).total_dv_m_s
        b = bielliptic(r1_m, r_via_m, r2_m, mu_m3_s2).total_dv_m_s
        text += f"; this one: bi-elliptic {b:.1f} m/s vs Hohmann {h:.1f} m/s"
    return text


def bielliptic_crossover_ratios() -> tuple[float, float]:
    """Radius ratios (r2/r1) where bi-elliptic starts to beat Hohmann.

    Returns
    -------
    lower : float
        Ratio where Hohmann equals the bi-elliptic with an infinitely distant intermediate
        apoapsis (below it Hohmann always wins).
    upper : float
        Ratio above which every bi-elliptic (r_via >= r2) beats Hohmann: the bi-elliptic with
        r_via = r2 has the Hohmann cost, and the sign of d(total)/d(r_via) there flips.

    Computed in units mu = r1 = 1 with Brent's method.

    References
    ----------
    Vallado (2013), sec. 6.3 (the values 11.94 and 15.58).
    """
    from scipy.optimize import brentq

    def hoh(x):
        return hohmann(1.0, x, 1.0).total_dv_m_s

    def bi_inf(x):  # r_via -> infinity: (sqrt2 - 1)(1 + 1/sqrt(x))
        return (math.sqrt(2.0) - 1.0) * (1.0 + 1.0 / math.sqrt(x))

    lower = brentq(lambda x: hoh(x) - bi_inf(x), 5.0, 14.0, xtol=1e-13)

    def slope_at_r2(x):
        # one-sided second-order difference of the total in r_via, at r_via = r2
        h = 1e-4 * x

        def tot(rv):
            return bielliptic(1.0, rv, x, 1.0).total_dv_m_s

        return (-3.0 * tot(x) + 4.0 * tot(x + h) - tot(x + 2.0 * h)) / (2.0 * h)

    upper = brentq(slope_at_r2, 12.0, 20.0, xtol=1e-10)
    return lower, upper


def plane_change_dv(v1_m_s: float, v2_m_s: float, di_rad: float) -> float:
    """Delta-v (m/s) to turn a velocity of speed v1 into speed v2 through angle di.

    dv = sqrt(v1^2 + v2^2 - 2 v1 v2 cos di) (law of cosines).

    References
    ----------
    Vallado (2013), eq. 6-19 (combined change), Curtis (2014) eq. 6.8.
    """
    return math.sqrt(max(0.0, v1_m_s ** 2 + v2_m_s ** 2 - 2.0 * v1_m_s * v2_m_s * math.cos(di_rad)))


@dataclass(frozen=True)
class CombinedTransfer:
    """Hohmann transfer with the plane change shared between its two burns."""

    dv1_m_s: float
    dv2_m_s: float
    di1_rad: float
    di2_rad: float
    time_of_flight_s: float

    @property
    def total_dv_m_s(self) -> float:
        return self.dv1_m_s + self.dv2_m_s


def hohmann_with_plane_change(r1_m: float, r2_m: float, di_rad: float, mu_m3_s2: float) -> CombinedTransfer:
    """Circular-to-circular transfer with an inclination change split optimally between burns.

    Both burns are at nodes (the transfer is started at a node).  The split s (fraction of
    ``di`` done at the first burn) minimises the total delta-v: a one-variable bounded minimum.

    References
    ----------
    Vallado (2013), sec. 6.4.3 (minimum combined plane change, Algorithm 40 approach).
    """
    from scipy.optimize import minimize_scalar

    _check_radius("initial radius", r1_m)
    _check_radius("final radius", r2_m)
    at = 0.5 * (r1_m + r2_m)
    va1, vt1 = circular_speed(r1_m, mu_m3_s2), vis_viva_speed(r1_m, at, mu_m3_s2)
    vt2, vb2 = vis_viva_speed(r2_m, at, mu_m3_s2), circular_speed(r2_m, mu_m3_s2)

    def total(s):
        return plane_change_dv(va1, vt1, s * di_rad) + plane_change_dv(vt2, vb2, (1.0 - s) * di_rad)

    if di_rad == 0.0:
        s = 0.0
    else:
        s = float(minimize_scalar(total, bounds=(0.0, 1.0), method="bounded",
                                  options={"xatol": 1e-10}).x)
    tof = math.pi * math.sqrt(at ** 3 / mu_m3_s2)
    return CombinedTransfer(plane_change_dv(va1, vt1, s * di_rad),
                            plane_change_dv(vt2, vb2, (1.0 - s) * di_rad),
                            s * di_rad, (1.0 - s) * di_rad, tof)


def circularize_dv(r_apsis_m: float, r_other_m: float, mu_m3_s2: float) -> float:
    """Signed delta-v (m/s) to circularise at an apsis of radius r_apsis (the other is r_other)."""
    return apsis_burn_dv(r_apsis_m, r_other_m, r_apsis_m, mu_m3_s2)
