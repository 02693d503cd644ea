"""Anomalies, Kepler's equation and two-body propagation.

All functions are vectorised over numpy arrays (broadcasting their arguments) and also take
plain floats.

References
----------
Vallado, D. A., *Fundamentals of Astrodynamics and Applications*, 4th ed., 2013, sec. 2.2-2.3
(anomaly relations, eqs. 2-9 to 2-14; Kepler's equation, Algorithm 2; hyperbolic form,
Algorithm 4).
Mikkola, S., "A cubic approximation for Kepler's equation", Celestial Mechanics 40 (1987)
329-334 (the starting value used by :func:`solve_kepler`).
"""

from __future__ import annotations

import math

import numpy as np

from .elements import Elements, elements_to_rv, mod_2pi, rv_to_elements

TWO_PI = 2.0 * math.pi

#: Largest |E - e sin E - M| accepted from the elliptic solver, rad.
KEPLER_RESIDUAL_RAD = 1e-12


def _out(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def wrap_2pi(angle_rad):
    """Angle wrapped into [0, 2 pi)."""
    return _out(mod_2pi(angle_rad))


def wrap_pi(angle_rad):
    """Angle wrapped into [-pi, pi)."""
    return _out(mod_2pi(np.asarray(angle_rad, dtype=float) + math.pi) - math.pi)


def true_to_eccentric(nu_rad, e):
    """Eccentric anomaly E (rad) from true anomaly for 0 <= e < 1 (Vallado eq. 2-9), same turn."""
    nu = np.asarray(nu_rad, dtype=float)
    e = np.asarray(e, dtype=float)
    half = np.arctan2(np.sqrt(1.0 - e) * np.sin(nu / 2.0), np.sqrt(1.0 + e) * np.cos(nu / 2.0))
    return _out(2.0 * half)


def eccentric_to_true(E_rad, e):
    """True anomaly (rad) from eccentric anomaly for 0 <= e < 1 (Vallado eq. 2-10), same turn."""
    E = np.asarray(E_rad, dtype=float)
    e = np.asarray(e, dtype=float)
    half = np.arctan2(np.sqrt(1.0 + e) * np.sin(E / 2.0), np.sqrt(1.0 - e) * np.cos(E / 2.0))
    return _out(2.0 * half)


def true_to_hyperbolic(nu_rad, e):
    """Hyperbolic anomaly H from true anomaly for e > 1 (Vallado eq. 2-35)."""
    nu = np.asarray(nu_rad, dtype=float)
    e = np.asarray(e, dtype=float)
    return _out(2.0 * np.arctanh(np.sqrt((e - 1.0) / (e + 1.0)) * np.tan(nu / 2.0)))


def hyperbolic_to_true(H, e):
    """True anomaly (rad, in (-pi, pi)) from hyperbolic anomaly for e > 1."""
    H = np.asarray(H, dtype=float)
    e = np.asarray(e, dtype=float)
    return _out(2.0 * np.arctan(np.sqrt((e + 1.0) / (e - 1.0)) * np.tanh(H / 2.0)))


def solve_kepler(M_rad, e):
    """Eccentric anomaly E from Kepler's equation M = E - e sin E, for 0 <= e < 1.

    Mikkola's cubic starter (accurate to about 1e-3 rad for every e < 1) followed by a fixed
    number of Halley steps, then a residual check; any element still above
    ``KEPLER_RESIDUAL_RAD`` (none has been seen) is finished by safeguarded Newton steps.

    Parameters
    ----------
    M_rad : float or ndarray
        Mean anomaly, rad (any turn).
    e : float or ndarray
        Eccentricity, 0 <= e < 1, broadcastable against ``M_rad``.

    Returns
    -------
    float or ndarray
        E in the same turn as M (E - M = e sin E), rad.

    Raises
    ------
    ValueError
        If any e is outside [0, 1) or M is not finite.

    References
    ----------
    Mikkola (1987), eqs. 7-9 (starter); Vallado (2013), Algorithm 2 (the equation itself).
    """
    M = np.asarray(M_rad, dtype=float)
    e = np.asarray(e, dtype=float)
    if np.any(~np.isfinite(M)):
        raise ValueError("mean anomaly is not finite")
    if np.any((e < 0.0) | (e >= 1.0) | ~np.isfinite(e)):
        raise ValueError("Kepler's elliptic equation needs 0 <= e < 1")
    M, e = np.broadcast_arrays(M, e)
    if M.ndim == 0:
        return _solve_kepler_one(float(M), float(e))
    if M.size > _CHUNK:  # blocks that stay in cache (and out of fresh, page-faulting memory)
        flat_M, flat_e = M.ravel(), e.ravel()
        out = np.empty(M.size)
        for k in range(0, M.size, _CHUNK):
            out[k:k + _CHUNK] = _solve_kepler_block(flat_M[k:k + _CHUNK], flat_e[k:k + _CHUNK])
        return out.reshape(M.shape)
    return _solve_kepler_block(M, e)


_CHUNK = 1 << 14


def _solve_kepler_block(M, e):
    """The vectorised solve on one block (arrays of equal shape), in-place where possible."""
    m = np.remainder(M + math.pi, TWO_PI)
    m -= math.pi  # in [-pi, pi)
    # Mikkola's starter.
    denom = 4.0 * e + 0.5
    alpha = (1.0 - e) / denom
    beta = 0.5 * m / denom
    z = beta * beta
    z += alpha * alpha * alpha
    np.sqrt(z, out=z)
    np.copysign(z, beta, out=z)
    z += beta
    np.cbrt(z, out=z)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.where(z != 0.0, z - alpha / z, 0.0)
    s2 = s * s
    s -= 0.078 * s2 * s2 * s / (1.0 + e)
    E = e * s * (3.0 - 4.0 * s * s)
    E += m
    # Two Halley steps take the starter's ~1e-3 rad to machine precision (cubic convergence).
    # cos E enters only the derivative, so it comes from sin E (sign from |E| vs pi/2): a
    # rounding error there slows nothing and cannot move the root, which is fixed by sin E.
    for _ in range(2):
        es = np.sin(E)
        ec = es * es
        np.subtract(1.0, ec, out=ec)
        np.maximum(ec, 0.0, out=ec)
        np.sqrt(ec, out=ec)
        np.copysign(ec, 0.5 * math.pi - np.abs(E), out=ec)
        es *= e
        ec *= e
        f = E - es
        f -= m
        np.subtract(1.0, ec, out=ec)  # f'
        den = f * es
        den /= ec
        np.subtract(ec, 0.5 * den, out=den)
        f /= den
        E -= f
    res = np.abs(E - e * np.sin(E) - m)
    bad = res > KEPLER_RESIDUAL_RAD
    if np.any(bad):
        E = _kepler_newton_fallback(E, e, m, bad)
    E += M - m  # back to the turn of M
    return E


def _solve_kepler_one(M: float, e: float) -> float:
    """Scalar twin of :func:`solve_kepler` (same starter, Halley steps to convergence)."""
    turns = round(M / TWO_PI)
    m = M - turns * TWO_PI
    denom = 4.0 * e + 0.5
    alpha = (1.0 - e) / denom
    beta = 0.5 * m / denom
    z = math.copysign(abs(beta + math.copysign(math.sqrt(beta * beta + alpha ** 3), beta)) ** (1.0 / 3.0),
                      beta)
    s = z - alpha / z if z != 0.0 else 0.0
    s -= 0.078 * s ** 5 / (1.0 + e)
    E = m + e * (3.0 * s - 4.0 * s ** 3)
    for _ in range(50):
        se, ce = math.sin(E), math.cos(E)
        f = E - e * se - m
        f1 = 1.0 - e * ce
        step = f / (f1 - 0.5 * f * e * se / f1)
        E -= step
        if abs(step) < 1e-15 and abs(E - e * math.sin(E) - m) <= KEPLER_RESIDUAL_RAD:
            break
    else:  # pragma: no cover - Halley from Mikkola's start converges in a few steps
        E = float(_kepler_newton_fallback(np.array([E]), np.array([e]), np.array([m]),
                                          np.array([True]))[0])
    return E + turns * TWO_PI


def _kepler_newton_fallback(E, e, m, bad):
    """Bracketed Newton for the (rare) elements the fixed iteration left unconverged."""
    E = E.copy()
    idx = np.nonzero(bad)
    mb, eb = m[idx], e[idx]
    lo = np.where(mb >= 0.0, 0.0, -math.pi)
    hi = np.where(mb >= 0.0, math.pi, 0.0)
    x = np.clip(E[idx], lo, hi)
    for _ in range(100):
        f = x - eb * np.sin(x) - mb
        lo = np.where(f < 0.0, x, lo)
        hi = np.where(f > 0.0, x, hi)
        step = f / (1.0 - eb * np.cos(x))
        x_new = x - step
        outside = (x_new <= lo) | (x_new >= hi)
        x = np.where(outside, 0.5 * (lo + hi), x_new)
        if np.all(np.abs(x - eb * np.sin(x) - mb) <= KEPLER_RESIDUAL_RAD):
            break
    E[idx] = x
    return E


def solve_kepler_hyperbolic(M_rad, e):
    """Hyperbolic anomaly H from M = e sinh H - H, for e > 1 (Vallado Algorithm 4).

    Newton's method.  For |M| < 6 e the start is min((6 |M| / e)^(1/3), |M| / (e - 1)), which
    lies on or above the root (sinh H >= H + H^3 / 6); the function is convex for H > 0, so
    the iterates descend monotonically from there, also near e = 1 where a start below the
    root would be thrown far out by the small slope e cosh H - 1.  For larger |M| the start is
    logarithmic.
    """
    M = np.asarray(M_rad, dtype=float)
    e = np.asarray(e, dtype=float)
    if np.any((e <= 1.0) | ~np.isfinite(e)):
        raise ValueError("Kepler's hyperbolic equation needs e > 1")
    M, e = np.broadcast_arrays(M, e)
    sign = np.sign(M)
    Ma = np.abs(M)
    small = Ma < 6.0 * e
    Ms = np.where(small, Ma, 0.0)  # keeps |M| / (e - 1) finite where it is not used
    upper = np.minimum(np.cbrt(6.0 * Ms / e), Ms / (e - 1.0))
    H = np.where(small, upper, np.log(2.0 * Ma / e + 1.8))
    for _ in range(60):
        f = e * np.sinh(H) - H - Ma
        step = f / (e * np.cosh(H) - 1.0)
        H = H - step
        if np.all(np.abs(step) <= 1e-14 * np.maximum(1.0, np.abs(H))):
            break
    return _out(sign * H)


def mean_motion(a_m, mu_m3_s2):
    """Mean motion sqrt(mu / |a|^3), rad/s."""
    a = np.abs(np.asarray(a_m, dtype=float))
    return _out(np.sqrt(mu_m3_s2 / a ** 3))


def period(a_m, mu_m3_s2):
    """Orbital period 2 pi sqrt(a^3 / mu), s.

    Raises
    ------
    ValueError
        For an open orbit (a <= 0): a hyperbola has no period.
    """
    a = np.asarray(a_m, dtype=float)
    if np.any(a <= 0.0):
        raise ValueError("orbit is hyperbolic: no period")
    return _out(TWO_PI * np.sqrt(a ** 3 / mu_m3_s2))


def true_to_mean(nu_rad, e):
    """Mean anomaly (rad) from true anomaly: [0, 2 pi) for e < 1, signed for e > 1."""
    e_arr = np.asarray(e, dtype=float)
    nu = np.asarray(nu_rad, dtype=float)
    if np.all(e_arr < 1.0):
        E = true_to_eccentric(nu, e_arr)
        return wrap_2pi(np.asarray(E) - e_arr * np.sin(E))
    if np.all(e_arr > 1.0):
        H = np.asarray(true_to_hyperbolic(wrap_pi(nu), e_arr))
        return _out(e_arr * np.sinh(H) - H)
    raise ValueError("true_to_mean takes all-elliptic or all-hyperbolic input")


def mean_to_true(M_rad, e):
    """True anomaly (rad, [0, 2 pi)) from mean anomaly, elliptic or hyperbolic."""
    e_arr = np.asarray(e, dtype=float)
    if np.all(e_arr < 1.0):
        return wrap_2pi(eccentric_to_true(solve_kepler(M_rad, e_arr), e_arr))
    if np.all(e_arr > 1.0):
        return wrap_2pi(hyperbolic_to_true(solve_kepler_hyperbolic(M_rad, e_arr), e_arr))
    raise ValueError("mean_to_true takes all-elliptic or all-hyperbolic input")


def propagate_elements_kepler(el: Elements, dt_s, mu_m3_s2: float) -> Elements:
    """Advance elements along an unperturbed conic by ``dt_s`` seconds (may be negative)."""
    M0 = np.asarray(true_to_mean(el.nu_rad, el.e))
    n = np.asarray(mean_motion(el.a_m, mu_m3_s2))
    M = M0 + n * np.asarray(dt_s, dtype=float)
    e = np.asarray(el.e, dtype=float)
    if np.all(e < 1.0):
        M = np.mod(M, TWO_PI)
    nu = mean_to_true(M, e)
    return Elements(el.a_m, el.e, el.i_rad, el.raan_rad, el.argp_rad, nu)


def propagate_kepler(r_m, v_m_s, dt_s, mu_m3_s2: float):
    """Two-body propagation of Cartesian states.

    Parameters
    ----------
    r_m, v_m_s : array_like, shape (..., 3)
        Initial position (m) and velocity (m/s).
    dt_s : float or array_like, shape (...)
        Time span, s (negative to go back), broadcast against the states.
    mu_m3_s2 : float
        Gravitational parameter, m^3/s^2.

    Returns
    -------
    r_m, v_m_s : ndarray, shape (..., 3)

    Notes
    -----
    The new state is f r0 + g v0 (and fdot r0 + gdot v0) with Lagrange's coefficients written
    in the change of eccentric (or hyperbolic) anomaly, which Kepler's equation gives with
    e cos E0 = 1 - r0/a and e sin E0 = r0.v0 / sqrt(mu a) taken from the state itself.  The
    state stays exactly in the plane of (r0, v0), and dt = 0 returns the state unchanged, even
    for orbits inside the circular or equatorial thresholds of the element conventions.

    References
    ----------
    Vallado (2013), sec. 2.3 and eq. 2-67 (f and g in the eccentric anomaly); Curtis (2014),
    sec. 3.7, eqs. 3.69 (f and g in the universal anomaly).
    """
    r0 = np.asarray(r_m, dtype=float)
    v0 = np.asarray(v_m_s, dtype=float)
    rv_to_elements(r0, v0, mu_m3_s2)  # the same refusals (rectilinear, parabolic, non-finite)
    dt = np.asarray(dt_s, dtype=float)
    r0n = np.sqrt(np.sum(r0 * r0, axis=-1))
    v2 = np.sum(v0 * v0, axis=-1)
    a = 1.0 / (2.0 / r0n - v2 / mu_m3_s2)
    n = np.sqrt(mu_m3_s2 / np.abs(a) ** 3)
    # e cos E0 and e sin E0 straight from the state (no periapsis direction needed, so the
    # circular and equatorial conventions of the element set play no part here)
    ec0 = 1.0 - r0n / a
    es0 = np.sum(r0 * v0, axis=-1) / np.sqrt(mu_m3_s2 * np.abs(a))
    if np.all(a > 0.0):
        e = np.sqrt(ec0 * ec0 + es0 * es0)
        E0 = np.arctan2(es0, ec0)
        dE = np.asarray(solve_kepler(E0 - es0 + n * dt, e)) - E0
        sin_d, one_minus_cos = np.sin(dE), 1.0 - np.cos(dE)
        f = 1.0 - a / r0n * one_minus_cos
        # g = dt - (dE - sin dE)/n, rewritten with Kepler's equation in difference form so that
        # no two large numbers are subtracted over many revolutions (which would spoil the energy)
        g = (r0n / a * sin_d + es0 * one_minus_cos) / n
        r1 = f[..., None] * r0 + g[..., None] * v0
        r1n = np.sqrt(np.sum(r1 * r1, axis=-1))
        fdot = -np.sqrt(mu_m3_s2 * a) / (r1n * r0n) * sin_d
        gdot = 1.0 - a / r1n * one_minus_cos
    elif np.all(a < 0.0):
        e = np.sqrt(ec0 * ec0 - es0 * es0)
        H0 = np.arcsinh(es0 / e)
        dH = np.asarray(solve_kepler_hyperbolic(es0 - H0 + n * dt, e)) - H0
        sinh_d, one_minus_cosh = np.sinh(dH), 1.0 - np.cosh(dH)
        f = 1.0 - a / r0n * one_minus_cosh
        g = (-es0 * one_minus_cosh - r0n / a * sinh_d) / n  # = dt - (sinh dH - dH)/n, no cancellation
        r1 = f[..., None] * r0 + g[..., None] * v0
        r1n = np.sqrt(np.sum(r1 * r1, axis=-1))
        fdot = -np.sqrt(-mu_m3_s2 * a) / (r1n * r0n) * sinh_d
        gdot = 1.0 - a / r1n * one_minus_cosh
    else:
        el = rv_to_elements(r0, v0, mu_m3_s2)
        return elements_to_rv(propagate_elements_kepler(el, dt_s, mu_m3_s2), mu_m3_s2)
    v1 = fdot[..., None] * r0 + gdot[..., None] * v0
    return r1, v1


def time_to_anomaly(el: Elements, nu_target_rad, mu_m3_s2: float):
    """Time (s, >= 0) until the true anomaly next equals ``nu_target_rad`` on a closed orbit."""
    e = np.asarray(el.e, dtype=float)
    if np.any(e >= 1.0):
        raise ValueError("orbit is hyperbolic: it passes each anomaly at most once")
    M_now = np.asarray(true_to_mean(el.nu_rad, e))
    M_target = np.asarray(true_to_mean(nu_target_rad, e))
    n = np.asarray(mean_motion(el.a_m, mu_m3_s2))
    return _out(np.mod(M_target - M_now, TWO_PI) / n)
