"""Orbit-averaged (mean) elements and apsis timing.

Under J2 the osculating semi-major axis of a low orbit swings by about 10 km within one
revolution and the osculating eccentricity vector by ~1e-3, so targets and "did we get there"
checks use orbit-averaged values.  burndesk's definition (documented in DEVELOPERS.md):

* fly the force model for one revolution of the mean argument of latitude lambda = argp + M
  (window T = 2 pi / lambda_dot) and take ``MEAN_SAMPLES`` equally spaced samples in time;
* mean a = time average of the osculating a;
* mean orbit normal = time average of the osculating unit angular-momentum vector, giving the
  mean i and RAAN; mean eccentricity vector = time average of the osculating eccentricity
  vector, resolved in the mean orbit plane, giving mean e and argp;
* mean lambda at the start = time average of (osculating lambda - lambda_dot t);
* angles drifting secularly (RAAN, argp) are taken back from mid-window to the start with the
  first-order J2 rates.

Equally spaced samples over one period integrate the short-period terms (periodic in the
argument of latitude) to zero with spectral accuracy.  Under ``"two-body"`` the osculating
elements are the mean elements.

References
----------
Vallado (2013), sec. 9.6 (secular rates) and sec. 9.7 (mean versus osculating elements).
Trefethen, L. N., Weideman, J. A. C., "The exponentially convergent trapezoidal rule", SIAM
Review 56 (2014) 385-458 (rectangle rule on periodic integrands).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .bodies import Body, check_model
from .constants import CIRCULAR_E, EQUATORIAL_I_RAD
from .elements import Elements, rv_to_elements
from .j2 import secular_rates
from .kepler import TWO_PI, mean_motion, mean_to_true, true_to_eccentric, true_to_mean, wrap_2pi

#: Samples per revolution used for the time averages.
MEAN_SAMPLES = 64


@dataclass(frozen=True)
class MeanOrbit:
    """Mean elements at an instant plus their secular rates.

    Attributes
    ----------
    a_m, e, i_rad, raan_rad, argp_rad : float
        Mean elements (SI).  ``argp_rad`` is 0 on a circular orbit (e < CIRCULAR_E).
    lam_rad : float
        Mean argument of latitude lambda = argp + M, rad, in [0, 2 pi).
    raan_dot, argp_dot, lam_dot : float
        Secular rates, rad/s.
    """

    a_m: float
    e: float
    i_rad: float
    raan_rad: float
    argp_rad: float
    lam_rad: float
    raan_dot: float
    argp_dot: float
    lam_dot: float

    @property
    def periapsis_radius_m(self) -> float:
        return self.a_m * (1.0 - self.e)

    @property
    def apoapsis_radius_m(self) -> float:
        return self.a_m * (1.0 + self.e)

    @property
    def mean_anomaly_rad(self) -> float:
        return float(np.mod(self.lam_rad - self.argp_rad, TWO_PI))

    @property
    def anomalistic_period_s(self) -> float:
        """Time between periapsis passages, s."""
        return TWO_PI / (self.lam_dot - self.argp_dot)

    @property
    def nodal_period_s(self) -> float:
        """Time between passages of the same argument of latitude (draconic period), s."""
        return TWO_PI / self.lam_dot

    @property
    def circular(self) -> bool:
        return self.e < CIRCULAR_E

    def time_to_apsis(self, which: str) -> float:
        """Time (s, >= 0) to the next mean periapsis (``which="periapsis"``) or apoapsis.

        Raises
        ------
        ValueError
            On a circular orbit, which has no apsides.
        """
        if self.circular:
            raise ValueError("orbit is circular: no periapsis or apoapsis")
        target = {"periapsis": 0.0, "apoapsis": math.pi}[which]
        return float(np.mod(target - self.mean_anomaly_rad, TWO_PI)) / (self.lam_dot - self.argp_dot)

    def time_to_arglat(self, u_rad: float) -> float:
        """Time (s, >= 0) until the mean argument of latitude lambda next equals ``u_rad``."""
        return float(np.mod(u_rad - self.lam_rad, TWO_PI)) / self.lam_dot

    def advanced(self, dt_s: float) -> "MeanOrbit":
        """The mean orbit ``dt_s`` seconds later (secular drift only)."""
        return MeanOrbit(
            self.a_m, self.e, self.i_rad,
            wrap_2pi(self.raan_rad + self.raan_dot * dt_s),
            wrap_2pi(self.argp_rad + self.argp_dot * dt_s),
            wrap_2pi(self.lam_rad + self.lam_dot * dt_s),
            self.raan_dot, self.argp_dot, self.lam_dot,
        )

    def elements(self) -> Elements:
        """The mean elements as an :class:`Elements` set (true anomaly from the mean anomaly)."""
        nu = mean_to_true(self.mean_anomaly_rad, self.e)
        return Elements(self.a_m, self.e, self.i_rad, self.raan_rad, self.argp_rad, nu)


def _lambda(el: Elements):
    """Osculating mean argument of latitude argp + M (rad), elliptic elements."""
    return np.mod(np.asarray(el.argp_rad) + np.asarray(true_to_mean(el.nu_rad, el.e)), TWO_PI)


def mean_orbit(r_m, v_m_s, body: Body, model: str) -> MeanOrbit:
    """Mean orbit of an osculating Cartesian state under ``model``.

    Parameters
    ----------
    r_m, v_m_s : array_like, shape (3,)
        Osculating position (m) and velocity (m/s) in the inertial frame.
    body : Body
    model : str
        ``"two-body"`` (osculating = mean) or ``"two-body+J2"`` (orbit-averaged, see module).

    Raises
    ------
    ValueError
        For an open orbit ("orbit is hyperbolic: no mean elements") or one that hits the body.
    """
    check_model(model, body)
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    osc = rv_to_elements(r, v, body.mu_m3_s2)
    if osc.e >= 1.0:
        raise ValueError("orbit is hyperbolic: no mean elements, no apoapsis or period")
    if model == "two-body":
        n = float(mean_motion(osc.a_m, body.mu_m3_s2))
        return MeanOrbit(osc.a_m, osc.e, osc.i_rad, osc.raan_rad, osc.argp_rad,
                         float(_lambda(osc)), 0.0, 0.0, n)
    if osc.periapsis_radius_m <= body.radius_m:
        raise ValueError("orbit intersects the body: periapsis is below the surface")
    mean, _, _ = _averaged(r, v, body, model)
    return mean


def mean_orbit_samples(r_m, v_m_s, body: Body, model: str):
    """Like :func:`mean_orbit`, also returning the flown revolution it averaged.

    Returns
    -------
    mean : MeanOrbit
    times_s : ndarray, shape (MEAN_SAMPLES,)
        Sample times from the start, s (``None`` under ``"two-body"``).
    states : ndarray, shape (MEAN_SAMPLES, 7)
        Flown states (r, v, unit mass) at those times (``None`` under ``"two-body"``).
    """
    check_model(model, body)
    if model == "two-body":
        return mean_orbit(r_m, v_m_s, body, model), None, None
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    osc = rv_to_elements(r, v, body.mu_m3_s2)
    if osc.e >= 1.0:
        raise ValueError("orbit is hyperbolic: no mean elements, no apoapsis or period")
    if osc.periapsis_radius_m <= body.radius_m:
        raise ValueError("orbit intersects the body: periapsis is below the surface")
    return _averaged(r, v, body, model)


def predicted_mean_a(r_m, v_m_s, body: Body) -> float:
    """First-order estimate of the orbit-averaged semi-major axis (m) from one J2 state.

    The J2 problem conserves the total energy v^2/2 - mu/r + mu J2 R^2 P2(sin phi) / r^3, so
    1/a_osc = const + 2 J2 R^2 P2(sin phi) / r^3; averaging over a revolution replaces the last
    term by its mean, (1 - e^2)^(-3/2) (3/4 sin^2 i - 1/2) / a^3.  Used to choose the averaging
    window before flying it.
    """
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    osc = rv_to_elements(r, v, body.mu_m3_s2)
    rn = float(np.linalg.norm(r))
    sin_phi = float(r[2]) / rn
    p2 = 1.5 * sin_phi * sin_phi - 0.5
    a = osc.a_m
    mean_term = (0.75 * math.sin(osc.i_rad) ** 2 - 0.5) * (1.0 - osc.e ** 2) ** -1.5 / a ** 3
    inv_a = 1.0 / a - 2.0 * body.j2 * body.radius_m ** 2 * (p2 / rn ** 3 - mean_term)
    return 1.0 / inv_a


#: Above this eccentricity orbit-averaged elements are refused: the 64 samples, even spaced in
#: eccentric anomaly, no longer resolve the periapsis passage (checked up to e = 0.99).
MAX_MEAN_E = 0.995


def _averaged(r, v, body, model):
    from .flight import fly_samples

    osc = rv_to_elements(r, v, body.mu_m3_s2)
    if osc.e > MAX_MEAN_E:
        raise ValueError(f"orbit is too eccentric (e = {osc.e:.6f} > {MAX_MEAN_E}) for orbit-averaged "
                         "mean elements: use model \"two-body\"")
    a_guess = predicted_mean_a(r, v, body)
    _, _, lam_dot = _rates(a_guess, osc.e, osc.i_rad, body)
    y0 = np.concatenate([r, v, [1.0]])
    for _ in range(3):
        window = TWO_PI / lam_dot
        times, weights = _sample_times(osc, window)
        states = fly_samples(y0, times, body, model)
        mean = _average(times, states, window, lam_dot, body, weights)
        _, _, lam_dot_new = _rates(mean.a_m, mean.e, mean.i_rad, body)
        # a window off by a fraction x leaves about x times the short-period amplitude (~6 km
        # in LEO) in the averages: 2e-5 keeps that under 0.15 m
        converged = abs(lam_dot_new / lam_dot - 1.0) < 2e-5
        lam_dot = lam_dot_new
        if converged:
            break
    return mean, times, states


#: Above this eccentricity the samples are spaced evenly in eccentric anomaly, not in time.
E_SAMPLING_ABOVE = 0.05


def _sample_times(osc: Elements, window_s: float):
    """Sample times over one window and their quadrature weights (summing to the count).

    Near-circular orbits: equally spaced in time, equal weights.  Eccentric ones: equally
    spaced in the eccentric anomaly E of the start's conic, with weights dt/dE = (1 - e cos E)
    (the time average is the E-average weighted so), which crowds the samples around periapsis
    where the osculating elements change fastest; the rule stays exact for trigonometric
    polynomials in E, so it converges as fast on eccentric orbits as equal time steps do on
    circular ones.
    """
    n = MEAN_SAMPLES
    e = float(osc.e)
    if e < E_SAMPLING_ABOVE:
        return np.arange(n) * (window_s / n), np.ones(n)
    E0 = float(true_to_eccentric(osc.nu_rad, e))
    E = E0 + np.arange(n) * (TWO_PI / n)
    M = E - e * np.sin(E)
    times = (M - M[0]) * (window_s / TWO_PI)
    weights = 1.0 - e * np.cos(E)
    return times, weights * (n / weights.sum())


def _rates(a_m, e, i_rad, body):
    """RAAN, argp and lambda rates; on an equatorial orbit RAAN is held at 0 and argp (the
    longitude of periapsis, measured in the direction of motion) takes the node's turn too."""
    raan_dot, argp_dot, m_dot = secular_rates(a_m, e, i_rad, body)
    if i_rad < EQUATORIAL_I_RAD or i_rad > math.pi - EQUATORIAL_I_RAD:
        argp_dot += math.cos(i_rad) * raan_dot
        raan_dot = 0.0
    return raan_dot, argp_dot, argp_dot + m_dot


def _average(t, y, window_s: float, lam_dot: float, body: Body, w=None) -> MeanOrbit:
    """Mean orbit from states ``y`` (n, >=6) sampled at times ``t`` over one window.

    Written out component by component: the per-sample osculating quantities needed are a, the
    unit angular momentum, the eccentricity vector and lambda = u - (nu - M), with u measured
    from each sample's own node (Vallado 2013, eqs. 2-82 to 2-88 in vector form).
    """
    mu = body.mu_m3_s2
    w = np.ones(len(t)) if w is None else np.asarray(w, dtype=float)
    wsum = float(w.sum())

    def avg(q):
        return float(np.dot(w, q)) / wsum

    x, yy, z, vx, vy, vz = (y[:, k] for k in range(6))
    r = np.sqrt(x * x + yy * yy + z * z)
    v2 = vx * vx + vy * vy + vz * vz
    rv = x * vx + yy * vy + z * vz
    a = avg(1.0 / (2.0 / r - v2 / mu))
    hx, hy, hz = yy * vz - z * vy, z * vx - x * vz, x * vy - yy * vx
    hm = np.sqrt(hx * hx + hy * hy + hz * hz)
    h_hat = np.array([avg(hx / hm), avg(hy / hm), avg(hz / hm)])
    h_hat /= math.sqrt(float(h_hat @ h_hat))
    i = math.atan2(math.hypot(h_hat[0], h_hat[1]), h_hat[2])
    equatorial = i < EQUATORIAL_I_RAD or i > math.pi - EQUATORIAL_I_RAD
    if equatorial:
        n_hat = np.array([1.0, 0.0, 0.0])
        raan_mid = 0.0
    else:
        n_hat = np.array([-h_hat[1], h_hat[0], 0.0]) / math.hypot(h_hat[0], h_hat[1])
        raan_mid = math.atan2(n_hat[1], n_hat[0])
    k = v2 - mu / r
    ex_s, ey_s, ez_s = (k * x - rv * vx) / mu, (k * yy - rv * vy) / mu, (k * z - rv * vz) / mu
    e_mean = np.array([avg(ex_s), avg(ey_s), avg(ez_s)])
    m_hat = np.array([h_hat[1] * n_hat[2] - h_hat[2] * n_hat[1], h_hat[2] * n_hat[0] - h_hat[0] * n_hat[2],
                      h_hat[0] * n_hat[1] - h_hat[1] * n_hat[0]])
    ex, ey = float(e_mean @ n_hat), float(e_mean @ m_hat)
    e = math.hypot(ex, ey)
    circular = e < CIRCULAR_E
    argp_mid = 0.0 if circular else math.atan2(ey, ex)
    # osculating lambda of each sample: u from its own node, minus (nu - M)
    if equatorial:
        u = np.arctan2((hz * yy - hy * z) / hm, x)
    else:
        u = np.arctan2(z * hm, hx * yy - hy * x)
    e_s = np.sqrt(ex_s * ex_s + ey_s * ey_s + ez_s * ez_s)
    er = ex_s * x + ey_s * yy + ez_s * z
    ev = ex_s * vx + ey_s * vy + ez_s * vz
    nu = np.arctan2((er * rv - ev * r * r) / hm, er * r)
    E = 2.0 * np.arctan2(np.sqrt(1.0 - e_s) * np.sin(0.5 * nu), np.sqrt(1.0 + e_s) * np.cos(0.5 * nu))
    lam_osc = u - nu + (E - e_s * np.sin(E))
    ref = float(lam_osc[0])
    dev = np.mod(lam_osc - lam_dot * t - ref + math.pi, TWO_PI) - math.pi
    lam0 = ref + avg(dev)
    raan_dot, argp_dot, _ = _rates(a, e, i, body)
    half = 0.5 * window_s
    raan0 = 0.0 if equatorial else raan_mid - raan_dot * half
    argp0 = 0.0 if circular else argp_mid - argp_dot * half
    return MeanOrbit(a, e, i, wrap_2pi(raan0), wrap_2pi(argp0), wrap_2pi(lam0),
                     raan_dot, argp_dot, lam_dot)
