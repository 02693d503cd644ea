"""Numerical flight of the force model, with or without thrust.

The state is the 7-vector (x, y, z, vx, vy, vz, m) in SI units in the body's inertial frame.
Forces: point-mass gravity, the J2 zonal term under ``"two-body+J2"``, and a constant-magnitude
thrust with constant mass flow along a direction that is either fixed in inertial space or fixed
in the velocity-following frame.  Integration is scipy's DOP853 (explicit Runge-Kutta of order
8(5,3)) with tolerances tight enough for millimetre-level agreement over a revolution.

References
----------
Hairer, E., Norsett, S. P., Wanner, G., *Solving Ordinary Differential Equations I*, 2nd ed.,
1993, sec. II.10 (DOP853), as implemented by ``scipy.integrate.solve_ivp``.
Vallado (2013), eq. 8-30 (J2 acceleration).
"""

from __future__ import annotations

import math
import threading
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from .bodies import Body, check_model

#: Relative and absolute tolerances of the flight integration (position m, velocity m/s, kg).
RTOL = 1e-11
ATOL = np.array([1e-5, 1e-5, 1e-5, 1e-8, 1e-8, 1e-8, 1e-9])


@dataclass(frozen=True)
class Thrust:
    """A constant thrust arc.

    Attributes
    ----------
    thrust_n : float
        Effective thrust along the burn axis, N (already reduced by thruster cant).
    mdot_kg_s : float
        Total propellant mass flow, kg/s.
    mode : str
        ``"inertial"``: ``direction`` is a unit vector in the inertial frame, fixed for the
        whole burn.  ``"tracking"``: ``direction`` holds components in the velocity-following
        frame (along v, along the orbit normal h, along v x h), fixed in that frame.
    direction : tuple of 3 floats
        Unit vector, see ``mode``.
    """

    thrust_n: float
    mdot_kg_s: float
    mode: str
    direction: tuple

    def __post_init__(self) -> None:
        if self.mode not in ("inertial", "tracking"):
            raise ValueError(f"attitude mode {self.mode!r} is not known: use inertial or tracking")
        if not (math.isfinite(self.thrust_n) and self.thrust_n > 0.0):
            raise ValueError("thrust must be positive and finite")
        if not (math.isfinite(self.mdot_kg_s) and self.mdot_kg_s > 0.0):
            raise ValueError("mass flow must be positive and finite")
        d = np.asarray(self.direction, dtype=float)
        if d.shape != (3,) or not np.all(np.isfinite(d)) or abs(np.linalg.norm(d) - 1.0) > 1e-9:
            raise ValueError("burn direction must be a finite unit vector")

    def scaled(self, factor: float) -> "Thrust":
        """The same arc with thrust and mass flow both scaled (a pressure-fed engine's drift)."""
        return Thrust(self.thrust_n * factor, self.mdot_kg_s * factor, self.mode, self.direction)


def tracking_frame(r_m, v_m_s):
    """Unit vectors (along v, along h = r x v, along v x h) as rows of a 3x3 array."""
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    t_hat = v / np.linalg.norm(v)
    h = np.cross(r, v)
    n_hat = h / np.linalg.norm(h)
    b_hat = np.cross(t_hat, n_hat)
    return np.array([t_hat, n_hat, b_hat])


def _rhs_factory(body: Body, model: str, thrust: Thrust | None):
    mu = body.mu_m3_s2
    j2k = -1.5 * body.j2 * mu * body.radius_m ** 2 if model == "two-body+J2" else 0.0
    if thrust is None:
        def rhs(t, y):
            x, yy, z, vx, vy, vz, _m = y
            r2 = x * x + yy * yy + z * z
            r = math.sqrt(r2)
            g = -mu / (r2 * r)
            if j2k:
                k = j2k / (r2 * r2 * r)
                z2 = 5.0 * z * z / r2
                ax = g * x + k * x * (1.0 - z2)
                ay = g * yy + k * yy * (1.0 - z2)
                az = g * z + k * z * (3.0 - z2)
            else:
                ax, ay, az = g * x, g * yy, g * z
            return [vx, vy, vz, ax, ay, az, 0.0]
        return rhs

    f = thrust.thrust_n
    mdot = thrust.mdot_kg_s
    d0, d1, d2 = (float(c) for c in thrust.direction)
    inertial = thrust.mode == "inertial"

    def rhs_thrust(t, y):
        x, yy, z, vx, vy, vz, m = y
        r2 = x * x + yy * yy + z * z
        r = math.sqrt(r2)
        g = -mu / (r2 * r)
        if j2k:
            k = j2k / (r2 * r2 * r)
            z2 = 5.0 * z * z / r2
            ax = g * x + k * x * (1.0 - z2)
            ay = g * yy + k * yy * (1.0 - z2)
            az = g * z + k * z * (3.0 - z2)
        else:
            ax, ay, az = g * x, g * yy, g * z
        if inertial:
            ux, uy, uz = d0, d1, d2
        else:
            vm = math.sqrt(vx * vx + vy * vy + vz * vz)
            tx, ty, tz = vx / vm, vy / vm, vz / vm
            hx, hy, hz = yy * vz - z * vy, z * vx - x * vz, x * vy - yy * vx
            hm = math.sqrt(hx * hx + hy * hy + hz * hz)
            hx, hy, hz = hx / hm, hy / hm, hz / hm
            bx, by, bz = ty * hz - tz * hy, tz * hx - tx * hz, tx * hy - ty * hx
            ux = d0 * tx + d1 * hx + d2 * bx
            uy = d0 * ty + d1 * hy + d2 * by
            uz = d0 * tz + d1 * hz + d2 * bz
        acc = f / m
        return [vx, vy, vz, ax + acc * ux, ay + acc * uy, az + acc * uz, -mdot]

    return rhs_thrust


_BACKEND = {"name": "lsoda"}


@contextmanager
def reference_integrator():
    """Within this block :func:`fly` uses scipy's ``solve_ivp`` DOP853 (the slower, pure-Python
    reference) instead of LSODA; benchmarks and cross-checks use it."""
    previous = _BACKEND["name"]
    _BACKEND["name"] = "dop853"
    try:
        yield
    finally:
        _BACKEND["name"] = previous


def _check_start(y0, body: Body, model: str):
    check_model(model, body)
    y0 = np.asarray(y0, dtype=float)
    if y0.shape != (7,) or not np.all(np.isfinite(y0)):
        raise ValueError("flight state must be 7 finite numbers (r, v, mass)")
    if y0[6] <= 0.0:
        raise ValueError("vehicle mass must be positive")
    return y0


#: Tolerances of the sampling integrator (LSODA), tighter than DOP853's because its error
#: control is looser: measured 3 mm over three LEO revolutions at these settings.
SAMPLE_RTOL = 1e-12
#: Absolute tolerances of the sampling integrator (position m, velocity m/s, kg): averaging over
#: a revolution needs millimetres, not the micrometres of a burn (measured: mean apsides
#: within 5 cm of the DOP853 reference).
SAMPLE_ATOL = np.array([1e-3, 1e-3, 1e-3, 1e-6, 1e-6, 1e-6, 1e-7])
_FORTRAN = threading.Lock()  # ODEPACK and the Hairer codes keep Fortran state: one call at a time


def _lsoda(rhs, y0, times):
    from scipy.integrate import odeint

    with _FORTRAN:
        out, info = odeint(rhs, y0, times, rtol=SAMPLE_RTOL, atol=SAMPLE_ATOL, mxstep=200000, tfirst=True,
                           full_output=True)
    if info["message"] != "Integration successful.":  # pragma: no cover - non-finite states only
        raise ValueError(f"flight integration failed: {info['message']}")
    return out


def _dop853(rhs, y0, t1: float):
    """End state of Hairer's DOP853 (compiled, via ``scipy.integrate.ode``) from 0 to ``t1``."""
    from scipy.integrate import ode

    import warnings

    with _FORTRAN, warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # scipy warns as well as failing: we raise
        solver = ode(rhs).set_integrator("dop853", rtol=RTOL, atol=1e-8, nsteps=1_000_000)
        solver.set_initial_value(y0, 0.0)
        y1 = solver.integrate(t1)
        ok = solver.successful()
    if not ok:
        raise ValueError("flight integration failed: a million steps were not enough (the "
                         "trajectory passes very close to the body's centre, e.g. a burn that "
                         "stops the vehicle's motion)")
    return np.asarray(y1, dtype=float)


def fly(y0, t_span_s: float, body: Body, model: str, thrust: Thrust | None = None,
        dense: bool = False):
    """Integrate the force model from ``y0`` for ``t_span_s`` seconds.

    The integrator is Hairer's compiled DOP853 (``scipy.integrate.ode``) at ``RTOL``;
    ``dense=True`` and :func:`reference_integrator` use scipy's pure-Python ``solve_ivp``
    DOP853, the same method, three times slower.

    Parameters
    ----------
    y0 : array_like, shape (7,)
        Position (m), velocity (m/s) and mass (kg) at the start.
    t_span_s : float
        Duration, s (negative integrates backwards; zero returns ``y0``).
    body, model
        Central body and force model (``"two-body"`` or ``"two-body+J2"``).
    thrust : Thrust, optional
        Thrust acting over the whole span; ``None`` for a coast.
    dense : bool
        Also return the continuous solution ``sol(t)`` with t measured from the start.

    Returns
    -------
    y1 : ndarray, shape (7,)
        State at the end.
    sol : callable or None
        Dense output (only when ``dense``).

    Raises
    ------
    ValueError
        If the vehicle runs out of mass or the trajectory hits the body's centre region.

    References
    ----------
    Hairer, Norsett, Wanner (1993), sec. II.10 (DOP853).
    """
    from scipy.integrate import solve_ivp

    y0 = _check_start(y0, body, model)
    if t_span_s == 0.0:
        return (y0.copy(), (lambda t: y0.copy())) if dense else (y0.copy(), None)
    if thrust is not None and y0[6] - thrust.mdot_kg_s * abs(t_span_s) <= 0.0:
        raise ValueError("burn would consume more than the whole vehicle mass")
    rhs = _rhs_factory(body, model, thrust)
    if dense or _BACKEND["name"] == "dop853":
        res = solve_ivp(rhs, (0.0, float(t_span_s)), y0, method="DOP853", rtol=RTOL, atol=ATOL,
                        dense_output=dense)
        if not res.success:  # pragma: no cover - DOP853 fails only on non-finite states
            raise ValueError(f"flight integration failed: {res.message}")
        y1, sol = res.y[:, -1], res.sol
    else:
        y1, sol = _dop853(rhs, y0, float(t_span_s)), None
    if np.linalg.norm(y1[:3]) < 0.5 * body.radius_m:
        raise ValueError("trajectory passes through the body")
    return (y1, sol) if dense else (y1, None)


def fly_samples(y0, times_s, body: Body, model: str, thrust: Thrust | None = None):
    """States (shape (n, 7)) at the increasing ``times_s`` (s from the start, first = 0).

    Uses LSODA (compiled, ``scipy.integrate.odeint``), which returns many output times for
    the price of one integration, at ``SAMPLE_RTOL``.

    References
    ----------
    Petzold, L., "Automatic selection of methods for solving stiff and nonstiff systems of
    ordinary differential equations", SIAM J. Sci. Stat. Comput. 4 (1983) 136-148 (LSODA).
    """
    y0 = _check_start(y0, body, model)
    times = np.asarray(times_s, dtype=float)
    if times.ndim != 1 or times.size < 2 or times[0] != 0.0 or np.any(np.diff(times) <= 0.0):
        raise ValueError("sample times must start at 0 and increase")
    rhs = _rhs_factory(body, model, thrust)
    if _BACKEND["name"] == "dop853":
        from scipy.integrate import solve_ivp

        res = solve_ivp(rhs, (0.0, float(times[-1])), y0, method="DOP853", rtol=RTOL, atol=ATOL,
                        t_eval=times)
        return res.y.T
    return _lsoda(rhs, y0, times)
