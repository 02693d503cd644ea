"""J2: secular rates, the zonal acceleration, mean elements and their drift.

Outside values here are rules of thumb ("common practice"); the rest are cross-checks against
burndesk's numerical flight of the force model (mechanics.flight.fly, scipy DOP853) and a
finite-difference gradient of the J2 potential written in this file.
"""

import math

import numpy as np
import pytest

from console.profiles import load_body
from mechanics.bodies import Body
from mechanics.elements import Elements, elements_to_rv, rv_to_elements
from mechanics.flight import fly
from mechanics.j2 import (
    SUN_SYNC_RAAN_RATE_RAD_S,
    j2_acceleration,
    propagate_mean_elements,
    secular_rates,
    sun_synchronous_inclination,
)
from mechanics.kepler import mean_motion, period, propagate_elements_kepler
from mechanics.mean import MeanOrbit, mean_orbit

DEG = math.pi / 180.0
DAY_S = 86400.0
EARTH = load_body("earth")
MU = EARTH.mu_m3_s2


def angle_diff(a, b):
    return (np.asarray(a) - np.asarray(b) + math.pi) % (2.0 * math.pi) - math.pi


# ---------------------------------------------------------------------------------------------
# Secular rates
# ---------------------------------------------------------------------------------------------

def test_nodal_regression_of_a_station_like_orbit():
    # Common practice: a ~400 km circular orbit at 51.6 deg regresses its node by about
    # 5 deg/day.  The tolerance (0.1 deg/day) covers what "about" means for a rule of thumb.
    raan_dot, _, _ = secular_rates(EARTH.radius_m + 400e3, 0.0, 51.6 * DEG, EARTH)
    assert raan_dot / DEG * DAY_S == pytest.approx(-5.0, abs=0.1)


def test_sun_synchronous_inclination_at_800_km():
    # Common practice: sun-synchronous at 800 km altitude is near 98.6 deg.
    i = sun_synchronous_inclination(EARTH.radius_m + 800e3, 0.0, EARTH)
    assert i / DEG == pytest.approx(98.6, abs=0.1)
    # at that inclination the node turns once per tropical year (~0.9856 deg/day, common practice)
    raan_dot, _, _ = secular_rates(EARTH.radius_m + 800e3, 0.0, i, EARTH)
    assert raan_dot == pytest.approx(SUN_SYNC_RAAN_RATE_RAD_S, rel=1e-12)
    assert raan_dot / DEG * DAY_S == pytest.approx(0.9856, abs=1e-4)


def test_sun_synchronous_impossible_high_up():
    # at geostationary radius J2 turns the node far too slowly for any inclination
    with pytest.raises(ValueError, match="no sun-synchronous inclination"):
        sun_synchronous_inclination(42164e3, 0.0, EARTH)


def test_rate_signs_and_zeros():
    a = EARTH.radius_m + 700e3
    # polar orbit: no node motion; retrograde: the node advances
    assert secular_rates(a, 0.01, 90 * DEG, EARTH)[0] == pytest.approx(0.0, abs=1e-20)
    assert secular_rates(a, 0.01, 120 * DEG, EARTH)[0] > 0.0
    assert secular_rates(a, 0.01, 30 * DEG, EARTH)[0] < 0.0
    # critical inclination, sin^2 i = 4/5 (63.43 deg, Vallado sec. 9.6, from memory): argp frozen
    crit = math.asin(math.sqrt(0.8))
    assert crit / DEG == pytest.approx(63.43, abs=0.01)
    assert secular_rates(a, 0.01, crit, EARTH)[1] == pytest.approx(0.0, abs=1e-20)
    assert secular_rates(a, 0.01, 30 * DEG, EARTH)[1] > 0.0
    assert secular_rates(a, 0.01, 80 * DEG, EARTH)[1] < 0.0
    # without J2 the rates are the Kepler ones
    flat = Body("flat", EARTH.mu_m3_s2, EARTH.radius_m)
    assert secular_rates(a, 0.01, 0.5, flat) == (0.0, 0.0, mean_motion(a, MU))


def test_rates_vectorised():
    a = np.array([7000e3, 7500e3, 8000e3])
    i = np.array([0.1, 1.0, 2.0])
    raan_dot, argp_dot, m_dot = secular_rates(a, 0.01, i, EARTH)
    for k in range(3):
        one = secular_rates(a[k], 0.01, i[k], EARTH)
        assert (raan_dot[k], argp_dot[k], m_dot[k]) == pytest.approx(one, rel=1e-15)


def test_rates_refuse_open_orbits():
    with pytest.raises(ValueError, match="hyperbolic"):
        secular_rates(-1e7, 1.5, 0.1, EARTH)


# ---------------------------------------------------------------------------------------------
# The J2 acceleration against the gradient of its potential
# ---------------------------------------------------------------------------------------------

def _j2_potential(r):
    # V_J2 = -(mu / r) J2 (R / r)^2 P2(z / r), P2(x) = (3 x^2 - 1) / 2; acceleration = +grad V
    x, y, z = r
    rmag = math.sqrt(x * x + y * y + z * z)
    s = z / rmag
    return -MU / rmag * EARTH.j2 * (EARTH.radius_m / rmag) ** 2 * 0.5 * (3.0 * s * s - 1.0)


@pytest.mark.parametrize("r", [
    [7000e3, 0.0, 0.0], [0.0, 0.0, 7000e3], [4000e3, -3000e3, 5000e3], [-6500e3, 2000e3, -1000e3],
])
def test_j2_acceleration_is_gradient_of_potential(r):
    r = np.array(r, dtype=float)
    h = 10.0  # m; central differences, truncation ~ (h / r)^2 ~ 1e-12 relative
    grad = np.array([(_j2_potential(r + h * ek) - _j2_potential(r - h * ek)) / (2.0 * h)
                     for ek in np.eye(3)])
    acc = j2_acceleration(r, EARTH)
    assert np.linalg.norm(acc - grad) <= 1e-7 * np.linalg.norm(acc)
    # the bulge pulls harder over the equator: inward there, outward-along-z over the pole
    if r[2] == 0.0:
        assert acc @ r < 0.0
    if r[0] == r[1] == 0.0:
        assert acc @ r > 0.0


def test_j2_acceleration_vectorised():
    r = np.array([[7000e3, 0.0, 0.0], [4000e3, -3000e3, 5000e3]])
    acc = j2_acceleration(r, EARTH)
    assert acc.shape == (2, 3)
    assert acc[1] == pytest.approx(j2_acceleration(r[1], EARTH), rel=1e-15)


# ---------------------------------------------------------------------------------------------
# Secular propagation of mean elements
# ---------------------------------------------------------------------------------------------

def test_propagate_mean_elements_models():
    el = Elements(EARTH.radius_m + 700e3, 0.01, 51.6 * DEG, 0.5, 1.0, 2.0)
    dt = 3.0 * DAY_S
    kep = propagate_mean_elements(el, dt, EARTH, "two-body")
    ref = propagate_elements_kepler(el, dt, MU)
    assert kep == ref
    sec = propagate_mean_elements(el, dt, EARTH, "two-body+J2")
    raan_dot, argp_dot, _ = secular_rates(el.a_m, el.e, el.i_rad, EARTH)
    assert (sec.a_m, sec.e, sec.i_rad) == (el.a_m, el.e, el.i_rad)
    assert angle_diff(sec.raan_rad, el.raan_rad + raan_dot * dt) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(sec.argp_rad, el.argp_rad + argp_dot * dt) == pytest.approx(0.0, abs=1e-12)
    with pytest.raises(ValueError, match="not known"):
        propagate_mean_elements(el, dt, EARTH, "n-body")


# ---------------------------------------------------------------------------------------------
# Mean elements
# ---------------------------------------------------------------------------------------------

def test_mean_equals_osculating_under_two_body():
    el = Elements(EARTH.radius_m + 700e3, 0.02, 51.6 * DEG, 0.5, 1.0, 2.0)
    r, v = elements_to_rv(el, MU)
    m = mean_orbit(r, v, EARTH, "two-body")
    osc = rv_to_elements(r, v, MU)
    assert (m.a_m, m.e, m.i_rad, m.raan_rad, m.argp_rad) == (
        osc.a_m, osc.e, osc.i_rad, osc.raan_rad, osc.argp_rad)
    assert m.raan_dot == 0.0 and m.argp_dot == 0.0
    assert m.lam_dot == pytest.approx(mean_motion(el.a_m, MU), rel=1e-15)
    back = m.elements()
    assert angle_diff(back.nu_rad, osc.nu_rad) == pytest.approx(0.0, abs=1e-10)
    assert m.anomalistic_period_s == pytest.approx(period(el.a_m, MU), rel=1e-14)


def _flown_means(el, n_steps, step_orbits):
    """Mean orbits at t = 0, step, 2 step, ... from states flown with the J2 model."""
    r, v = elements_to_rv(el, MU)
    first = mean_orbit(r, v, EARTH, "two-body+J2")
    step_s = step_orbits * first.nodal_period_s
    y = np.concatenate([r, v, [100.0]])
    means, times = [first], [0.0]
    for k in range(1, n_steps + 1):
        y, _ = fly(y, step_s, EARTH, "two-body+J2")
        means.append(mean_orbit(y[:3], y[3:6], EARTH, "two-body+J2"))
        times.append(k * step_s)
    return means, times


@pytest.fixture(scope="module")
def station_like():
    # 700 km, e = 0.001, 51.6 deg; mean orbits at 0, 2, 4, 6 nodal periods
    return _flown_means(Elements(EARTH.radius_m + 700e3, 0.001, 51.6 * DEG, 0.7, 1.0, 0.3), 3, 2)


def test_osculating_a_swings_by_kilometres_under_j2():
    # Common practice (rule of thumb): the osculating a of a low orbit swings by ~10 km per
    # revolution under J2; flown here, 11.5 km peak to peak at 700 km, 51.6 deg.
    el = Elements(EARTH.radius_m + 700e3, 0.001, 51.6 * DEG, 0.7, 1.0, 0.3)
    r, v = elements_to_rv(el, MU)
    t = period(el.a_m, MU)
    _, sol = fly(np.concatenate([r, v, [1.0]]), t, EARTH, "two-body+J2", dense=True)
    y = sol(np.linspace(0.0, t, 200))
    osc_a = rv_to_elements(y[:3].T, y[3:6].T, MU).a_m
    assert 5e3 < osc_a.max() - osc_a.min() < 20e3


def test_mean_a_constant_over_several_orbits(station_like):
    # Mean a recomputed from flown states after 2, 4, 6 orbits: constant to 1 m (measured
    # below 0.1 mm), while the osculating a swings by ~10 km (test above).
    means, _ = station_like
    a = np.array([m.a_m for m in means])
    assert a.max() - a.min() < 1.0
    i = np.array([m.i_rad for m in means])
    assert i.max() - i.min() < 1e-8  # rad; J2 has no secular effect on i
    e = np.array([m.e for m in means])
    assert e.max() - e.min() < 1e-6


def test_mean_raan_drift_matches_secular_rate(station_like):
    # The measured drift of the mean node over 6 orbits (-1.76 deg) against the first-order
    # rate (Vallado eq. 9-41): they differ by terms of order J2 relative to the drift (measured
    # 7e-4); the bound is 2 J2 of the drift.  A wrong factor or a missing cos i fails by far.
    means, times = station_like
    first = means[0]
    assert first.raan_dot == secular_rates(first.a_m, first.e, first.i_rad, EARTH)[0]
    for m, t in zip(means[1:], times[1:]):
        drift = angle_diff(m.raan_rad, first.raan_rad)
        predicted = first.raan_dot * t
        assert abs(drift - predicted) <= 2.0 * EARTH.j2 * abs(predicted)
    assert abs(first.raan_dot * times[-1]) / DEG > 1.5


def test_mean_argument_of_latitude_follows_its_rate(station_like):
    # burndesk's mean lambda drifts from lam0 + lam_dot t by ~2.6e-6 of the advance (measured:
    # about 0.001 deg, ~120 m along track, per orbit at 700 km).  Bound 1e-5 of the advance.
    means, times = station_like
    first = means[0]
    for m, t in zip(means[1:], times[1:]):
        err = angle_diff(m.lam_rad, first.advanced(t).lam_rad)
        assert abs(err) <= 1e-5 * first.lam_dot * t


def test_mean_orbit_timing_helpers():
    el = Elements(EARTH.radius_m + 700e3, 0.01, 51.6 * DEG, 0.7, 1.0, 0.3)
    m = mean_orbit(*elements_to_rv(el, MU), EARTH, "two-body+J2")
    t_peri = m.time_to_apsis("periapsis")
    t_apo = m.time_to_apsis("apoapsis")
    assert 0.0 <= t_peri < m.anomalistic_period_s and 0.0 <= t_apo < m.anomalistic_period_s
    assert abs(t_apo - t_peri) == pytest.approx(0.5 * m.anomalistic_period_s, rel=1e-12)
    assert angle_diff(m.advanced(t_peri).mean_anomaly_rad, 0.0) == pytest.approx(0.0, abs=1e-9)
    assert angle_diff(m.advanced(t_apo).mean_anomaly_rad, math.pi) == pytest.approx(0.0, abs=1e-9)
    assert m.nodal_period_s < m.anomalistic_period_s  # argp advances below 63.4 deg
    circ = MeanOrbit(7e6, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1e-3)
    with pytest.raises(ValueError, match="circular: no periapsis or apoapsis"):
        circ.time_to_apsis("periapsis")


def test_mean_orbit_refusals():
    r, v = elements_to_rv(Elements(-1e7, 1.5, 0.5, 0.0, 0.0, 0.0), MU)
    with pytest.raises(ValueError, match="hyperbolic"):
        mean_orbit(r, v, EARTH, "two-body+J2")
    with pytest.raises(ValueError, match="hyperbolic"):
        mean_orbit(r, v, EARTH, "two-body")
    r, v = elements_to_rv(Elements(EARTH.radius_m + 300e3, 0.1, 0.5, 0.0, 0.0, 0.0), MU)
    with pytest.raises(ValueError, match="periapsis is below the surface"):
        mean_orbit(r, v, EARTH, "two-body+J2")
    r, v = elements_to_rv(Elements(EARTH.radius_m + 700e3, 0.01, 0.5, 0.0, 0.0, 0.0), MU)
    with pytest.raises(ValueError, match="not known"):
        mean_orbit(r, v, EARTH, "two-body+drag")
    flat = Body("flat", EARTH.mu_m3_s2, EARTH.radius_m)
    with pytest.raises(ValueError, match="needs a J2 term"):
        mean_orbit(r, v, flat, "two-body+J2")
