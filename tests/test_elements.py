"""Element conversions: published examples, singular-orbit conventions and round trips.

Tolerances are physical (metres, m/s, degrees); comparisons against books name the example.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from mechanics.constants import CIRCULAR_E, EQUATORIAL_I_RAD
from mechanics.elements import (
    Elements,
    apsides_to_elements,
    apsis_radii,
    eccentricity_vector,
    elements_to_rv,
    orbit_kind,
    rv_to_elements,
)
from mechanics.kepler import period

KM = 1e3
DEG = math.pi / 180.0
MU_VALLADO_M3_S2 = 398600.4418e9  # Vallado (2013) Earth GM, km^3/s^2 -> m^3/s^2
MU_CURTIS_M3_S2 = 398600.0e9  # Curtis (2014) Earth GM


def angle_diff(a, b):
    """Signed difference a - b wrapped into [-pi, pi), rad."""
    return (np.asarray(a) - np.asarray(b) + math.pi) % (2.0 * math.pi) - math.pi


# ---------------------------------------------------------------------------------------------
# Published examples
# ---------------------------------------------------------------------------------------------

VALLADO_2_5_R_M = np.array([6524.834, 6862.875, 6448.296]) * KM
VALLADO_2_5_V_M_S = np.array([4.901327, 5.533756, -1.976341]) * KM


def test_vallado_ex_2_5_rv_to_elements():
    # Vallado, Fundamentals of Astrodynamics and Applications, 4th ed., Ex. 2-5 (values
    # confirmed in a stored copy).  The printed p, a and i differ from a
    # full-precision evaluation of the same state by up to 8 m (p), 5 m (a) and 0.0009 deg (i);
    # the inclination is cross-checked below from the angular momentum computed here, so the
    # tolerances on those three are a few units of the printed last digit, not half a unit.
    el = rv_to_elements(VALLADO_2_5_R_M, VALLADO_2_5_V_M_S, MU_VALLADO_M3_S2)
    assert el.p_m == pytest.approx(11067.79 * KM, abs=10.0)  # 10 m
    assert el.a_m == pytest.approx(36127.34 * KM, abs=10.0)
    assert el.e == pytest.approx(0.832853, abs=1e-6)
    assert el.i_rad / DEG == pytest.approx(87.870, abs=0.002)
    assert el.raan_rad / DEG == pytest.approx(227.898, abs=0.0005)
    assert el.argp_rad / DEG == pytest.approx(53.38, abs=0.005)
    assert el.nu_rad / DEG == pytest.approx(92.335, abs=0.0005)
    assert orbit_kind(el.e, el.i_rad) == "elliptical"


def test_vallado_ex_2_5_inclination_and_p_from_angular_momentum():
    # Independent evaluation in the test (h = r x v, i = acos(h_z / |h|), p = h^2 / mu): this is
    # what shows the book's printed i = 87.870 deg and p = 11067.79 km are rounded differently,
    # not that the module is off.
    h = np.cross(VALLADO_2_5_R_M, VALLADO_2_5_V_M_S)
    hmag = np.linalg.norm(h)
    el = rv_to_elements(VALLADO_2_5_R_M, VALLADO_2_5_V_M_S, MU_VALLADO_M3_S2)
    assert el.i_rad == pytest.approx(math.acos(h[2] / hmag), abs=1e-12)
    assert el.p_m == pytest.approx(hmag * hmag / MU_VALLADO_M3_S2, rel=1e-12)
    e_vec = eccentricity_vector(VALLADO_2_5_R_M, VALLADO_2_5_V_M_S, MU_VALLADO_M3_S2)
    assert np.linalg.norm(e_vec) == pytest.approx(el.e, rel=1e-13)


def _vallado_2_5_published():
    """The elements printed in Vallado Ex. 2-5 (p, e, i, RAAN, argp, nu), SI."""
    return dict(p_m=11067.79 * KM, e=0.832853, i_rad=87.870 * DEG, raan_rad=227.898 * DEG,
                argp_rad=53.38 * DEG, nu_rad=92.335 * DEG)


def _state_from_p(p_m, e, i_rad, raan_rad, argp_rad, nu_rad):
    el = Elements(p_m / (1.0 - e * e), e, i_rad, raan_rad, argp_rad, nu_rad)
    return elements_to_rv(el, MU_VALLADO_M3_S2)


def test_vallado_ex_2_6_inverse_of_ex_2_5():
    # Vallado Ex. 2-6 converts elements back to a state; here the check is the inverse of
    # Ex. 2-5: the *published* (rounded) Ex. 2-5 elements, starting from p as the book does,
    # must give back the Ex. 2-5 state.  The tolerance is the sum of the state's sensitivities
    # to half a unit in each printed last digit (argp, printed to 0.01 deg, dominates at about
    # 1 km), computed here by finite differences, plus 200 m for the book's own i/p rounding
    # noted in the Ex. 2-5 test.  A wrong rotation or anomaly convention misses by thousands
    # of km.  The tight full-precision round trip of the same state is the next test.
    pub = _vallado_2_5_published()
    half_units = dict(p_m=0.005 * KM, e=0.5e-6, i_rad=0.0005 * DEG, raan_rad=0.0005 * DEG,
                      argp_rad=0.005 * DEG, nu_rad=0.0005 * DEG)
    r, v = _state_from_p(**pub)
    bound_r = 200.0
    bound_v = 0.2
    for name, du in half_units.items():
        bumped = dict(pub)
        bumped[name] += du
        rb, vb = _state_from_p(**bumped)
        bound_r += np.linalg.norm(rb - r)
        bound_v += np.linalg.norm(vb - v)
    assert 500.0 < bound_r < 3000.0  # the bound itself is what the text above says it is
    assert np.linalg.norm(r - VALLADO_2_5_R_M) < bound_r
    assert np.linalg.norm(v - VALLADO_2_5_V_M_S) < bound_v


def test_vallado_ex_2_5_full_precision_round_trip():
    el = rv_to_elements(VALLADO_2_5_R_M, VALLADO_2_5_V_M_S, MU_VALLADO_M3_S2)
    r, v = elements_to_rv(el, MU_VALLADO_M3_S2)
    assert np.linalg.norm(r - VALLADO_2_5_R_M) < 1e-6  # 1 micrometre
    assert np.linalg.norm(v - VALLADO_2_5_V_M_S) < 1e-9  # 1 nm/s


def test_curtis_ex_4_3():
    # Curtis, Orbital Mechanics for Engineering Students, Ex. 4.3 (mu = 398600 km^3/s^2):
    # e, i, a confirmed in a stored copy; h, RAAN, argp, theta from memory.
    # Tolerances are half a unit in the printed last digit.
    r = np.array([-6045.0, -3490.0, 2500.0]) * KM
    v = np.array([-3.457, 6.618, 2.533]) * KM
    el = rv_to_elements(r, v, MU_CURTIS_M3_S2)
    assert el.e == pytest.approx(0.17121, abs=0.5e-5)
    assert el.i_rad / DEG == pytest.approx(153.249, abs=0.0005)
    assert el.a_m == pytest.approx(8788.1 * KM, abs=0.05 * KM)
    # from memory: h = 58310 km^2/s, RAAN 255.3 deg, argp 20.07 deg, theta 28.45 deg
    h_km2_s = np.linalg.norm(np.cross(r, v)) / 1e6
    assert h_km2_s == pytest.approx(58310.0, abs=5.0)
    assert math.sqrt(el.p_m * MU_CURTIS_M3_S2) / 1e6 == pytest.approx(h_km2_s, rel=1e-12)
    assert el.raan_rad / DEG == pytest.approx(255.3, abs=0.05)
    assert el.argp_rad / DEG == pytest.approx(20.07, abs=0.005)
    assert el.nu_rad / DEG == pytest.approx(28.45, abs=0.005)


# ---------------------------------------------------------------------------------------------
# Hyperbolic orbits (constructed case, not a book value)
# ---------------------------------------------------------------------------------------------

def _hyperbola():
    # Constructed: e = 1.5, periapsis radius 7000 km -> a = rp / (1 - e) = -14000 km.
    return Elements(a_m=7000e3 / (1.0 - 1.5), e=1.5, i_rad=0.5, raan_rad=1.0, argp_rad=2.0,
                    nu_rad=0.8)


def test_hyperbolic_constructed_round_trip():
    mu = MU_VALLADO_M3_S2
    el = _hyperbola()
    r, v = elements_to_rv(el, mu)
    # vis-viva written out here: positive energy, a = -mu / (2 energy) < 0
    energy = 0.5 * np.dot(v, v) - mu / np.linalg.norm(r)
    assert energy > 0.0
    assert -mu / (2.0 * energy) == pytest.approx(el.a_m, rel=1e-12)
    back = rv_to_elements(r, v, mu)
    assert back.a_m < 0.0
    assert back.a_m == pytest.approx(el.a_m, rel=1e-12)
    assert back.e == pytest.approx(1.5, abs=1e-12)
    for name in ("i_rad", "raan_rad", "argp_rad", "nu_rad"):
        assert angle_diff(getattr(back, name), getattr(el, name)) == pytest.approx(0.0, abs=1e-12)
    r2, v2 = elements_to_rv(back, mu)
    assert np.linalg.norm(r2 - r) < 1e-6
    assert np.linalg.norm(v2 - v) < 1e-9
    assert orbit_kind(back.e, back.i_rad) == "hyperbolic"
    assert back.periapsis_radius_m == pytest.approx(7000e3, rel=1e-12)
    assert np.isinf(back.apoapsis_radius_m)
    rp, ra = apsis_radii(r, v, mu)
    assert rp == pytest.approx(7000e3, rel=1e-12)
    assert np.isinf(ra)


def test_hyperbolic_has_no_period():
    with pytest.raises(ValueError, match="hyperbolic: no period"):
        period(_hyperbola().a_m, MU_VALLADO_M3_S2)


def test_hyperbolic_anomaly_beyond_asymptote_refused():
    # asymptote at acos(-1/e) = 131.8 deg for e = 1.5
    el = _hyperbola().replace(nu_rad=140.0 * DEG)
    with pytest.raises(ValueError, match="asymptote"):
        elements_to_rv(el, MU_VALLADO_M3_S2)


# ---------------------------------------------------------------------------------------------
# Singular-orbit conventions, both sides of the thresholds
# ---------------------------------------------------------------------------------------------

MU = 3.986004418e14  # WGS-84 GM (NIMA TR8350.2), m^3/s^2
A_TEST_M = 7000e3
RAAN0, ARGP0, NU0 = 1.1, 2.3, 0.7  # arbitrary orientation, rad


def _geometry(r, v):
    """Geometric angles computed here, independent of the module: argument of latitude from the
    node line, longitude (angle from +x measured in the direction of motion) of a vector."""
    h = np.cross(r, v)
    node = np.array([-h[1], h[0], 0.0])
    h_hat = h / np.linalg.norm(h)
    n_hat = node / np.linalg.norm(node) if np.linalg.norm(node) > 0 else None

    def arglat(x):
        return math.atan2(np.dot(h_hat, np.cross(n_hat, x)), np.dot(n_hat, x))

    def longitude(x):
        ang = math.atan2(x[1], x[0])
        return ang if h[2] > 0 else -ang

    return arglat, longitude


@pytest.mark.parametrize("e", [0.0, 0.5 * CIRCULAR_E, 0.99 * CIRCULAR_E])
def test_circular_side_uses_argument_of_latitude(e):
    r, v = elements_to_rv(Elements(A_TEST_M, e, 0.9, RAAN0, ARGP0, NU0), MU)
    el = rv_to_elements(r, v, MU)
    arglat, _ = _geometry(r, v)
    assert orbit_kind(el.e, el.i_rad) == "circular"
    assert el.argp_rad == 0.0
    assert angle_diff(el.nu_rad, arglat(r)) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.nu_rad, ARGP0 + NU0) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.arglat_rad, ARGP0 + NU0) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.raan_rad, RAAN0) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("e", [1.01 * CIRCULAR_E, 2.0 * CIRCULAR_E, 1e-6])
def test_elliptic_side_keeps_periapsis(e):
    r, v = elements_to_rv(Elements(A_TEST_M, e, 0.9, RAAN0, ARGP0, NU0), MU)
    el = rv_to_elements(r, v, MU)
    assert orbit_kind(el.e, el.i_rad) == "elliptical"
    assert el.e == pytest.approx(e, abs=1e-14)
    # Near the threshold the periapsis direction comes from an eccentricity vector of size
    # 1e-9 computed with ~1e-15 rounding noise: argp is good to ~1e-6 rad there, while
    # argp + nu (the argument of latitude) stays exact.
    assert angle_diff(el.argp_rad, ARGP0) == pytest.approx(0.0, abs=1e-5)
    assert angle_diff(el.argp_rad + el.nu_rad, ARGP0 + NU0) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("i", [0.0, 0.5 * EQUATORIAL_I_RAD, 0.99 * EQUATORIAL_I_RAD])
def test_equatorial_side_uses_longitude_of_periapsis(i):
    r, v = elements_to_rv(Elements(A_TEST_M, 0.1, i, RAAN0, ARGP0, NU0), MU)
    el = rv_to_elements(r, v, MU)
    _, longitude = _geometry(r, v)
    e_vec = eccentricity_vector(r, v, MU)
    assert orbit_kind(el.e, el.i_rad) == "equatorial"
    assert el.raan_rad == 0.0
    assert angle_diff(el.argp_rad, longitude(e_vec)) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.argp_rad, RAAN0 + ARGP0) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.nu_rad, NU0) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("i", [math.pi, math.pi - 0.5 * EQUATORIAL_I_RAD,
                               math.pi - 0.99 * EQUATORIAL_I_RAD])
def test_retrograde_equatorial_longitude_in_direction_of_motion(i):
    r, v = elements_to_rv(Elements(A_TEST_M, 0.1, i, RAAN0, ARGP0, NU0), MU)
    el = rv_to_elements(r, v, MU)
    _, longitude = _geometry(r, v)
    e_vec = eccentricity_vector(r, v, MU)
    assert orbit_kind(el.e, el.i_rad) == "equatorial"
    assert el.raan_rad == 0.0
    # measured clockwise from +x, the direction of motion of a retrograde equatorial orbit
    assert angle_diff(el.argp_rad, longitude(e_vec)) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.argp_rad, ARGP0 - RAAN0) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("i", [1.01 * EQUATORIAL_I_RAD, 2.0 * EQUATORIAL_I_RAD,
                               math.pi - 2.0 * EQUATORIAL_I_RAD])
def test_inclined_side_keeps_node(i):
    r, v = elements_to_rv(Elements(A_TEST_M, 0.1, i, RAAN0, ARGP0, NU0), MU)
    el = rv_to_elements(r, v, MU)
    assert orbit_kind(el.e, el.i_rad) == "elliptical"
    assert el.i_rad == pytest.approx(i, abs=1e-15)
    assert angle_diff(el.raan_rad, RAAN0) == pytest.approx(0.0, abs=1e-12)
    assert angle_diff(el.argp_rad, ARGP0) == pytest.approx(0.0, abs=1e-12)


@pytest.mark.parametrize("i", [0.0, 0.5 * EQUATORIAL_I_RAD, math.pi,
                               math.pi - 0.5 * EQUATORIAL_I_RAD])
@pytest.mark.parametrize("e", [0.0, 0.5 * CIRCULAR_E])
def test_circular_equatorial_uses_true_longitude(e, i):
    r, v = elements_to_rv(Elements(A_TEST_M, e, i, RAAN0, ARGP0, NU0), MU)
    el = rv_to_elements(r, v, MU)
    _, longitude = _geometry(r, v)
    assert orbit_kind(el.e, el.i_rad) == "circular-equatorial"
    assert el.raan_rad == 0.0
    assert el.argp_rad == 0.0
    assert angle_diff(el.nu_rad, longitude(r)) == pytest.approx(0.0, abs=1e-12)


# ---------------------------------------------------------------------------------------------
# Round trips (positions and velocities, not angles)
# ---------------------------------------------------------------------------------------------

E_SPECIAL = [0.0, 1e-12, 0.5 * CIRCULAR_E, CIRCULAR_E, 2.0 * CIRCULAR_E, 1e-6, 0.5, 0.95]
I_SPECIAL = [0.0, 0.5 * EQUATORIAL_I_RAD, EQUATORIAL_I_RAD, 2.0 * EQUATORIAL_I_RAD,
             math.pi / 2, math.pi - 2.0 * EQUATORIAL_I_RAD, math.pi - EQUATORIAL_I_RAD,
             math.pi - 0.5 * EQUATORIAL_I_RAD, math.pi]
angles = st.floats(0.0, 2.0 * math.pi, exclude_max=True)


def _round_trip_bounds(a_m, e, i_rad, r, v, el):
    """Allowed round-trip error (m, m/s).

    1 micrometre and 1e-9 m/s of rounding, plus, below the thresholds only, what the conventions
    throw away on purpose: a circular orbit drops its periapsis direction (moving the state by at
    most 2 a e, i.e. < 2 a CIRCULAR_E: 1.4 cm at 7000 km, 8 cm at GEO); an equatorial orbit
    drops its node (out-of-plane shift at most 2 |r| i or 2 |r| (pi - i)).  Which side of a
    threshold applies is decided by the recomputed elements ``el`` (a value set exactly at a
    threshold can land on either side after rounding).
    """
    rmag, vmag = np.linalg.norm(r), np.linalg.norm(v)
    tol_r, tol_v = 1e-6, 1e-9
    if el.e < CIRCULAR_E:
        e = max(e, el.e)
        tol_r += 2.5 * a_m * e
        tol_v += 2.5 * vmag * e
    tilt = max(min(i_rad, math.pi - i_rad), min(el.i_rad, math.pi - el.i_rad))
    if min(el.i_rad, math.pi - el.i_rad) < EQUATORIAL_I_RAD:
        tol_r += 2.5 * rmag * tilt
        tol_v += 2.5 * vmag * tilt
    return tol_r, tol_v


@settings(max_examples=300, deadline=None)
@given(a_m=st.floats(6.6e6, 4.5e7),
       e=st.one_of(st.sampled_from(E_SPECIAL), st.floats(0.0, 0.95)),
       i_rad=st.one_of(st.sampled_from(I_SPECIAL), st.floats(0.0, math.pi)),
       raan=angles, argp=angles, nu=angles)
def test_elements_state_elements_round_trip(a_m, e, i_rad, raan, argp, nu):
    r, v = elements_to_rv(Elements(a_m, e, i_rad, raan, argp, nu), MU)
    el = rv_to_elements(r, v, MU)
    assert 0.0 <= el.i_rad <= math.pi
    for x in (el.raan_rad, el.argp_rad, el.nu_rad):
        assert 0.0 <= x < 2.0 * math.pi
    r2, v2 = elements_to_rv(el, MU)
    tol_r, tol_v = _round_trip_bounds(a_m, e, i_rad, r, v, el)
    assert np.linalg.norm(r2 - r) <= tol_r
    assert np.linalg.norm(v2 - v) <= tol_v
    assert el.a_m == pytest.approx(a_m, rel=1e-11)


@settings(max_examples=150, deadline=None)
@given(a_m=st.floats(-5e7, -5e6), e=st.floats(1.01, 5.0), i_rad=st.floats(0.0, math.pi),
       raan=angles, argp=angles, frac=st.floats(-0.95, 0.95))
def test_hyperbolic_round_trip(a_m, e, i_rad, raan, argp, frac):
    nu = frac * math.acos(-1.0 / e)  # inside the asymptotes
    r, v = elements_to_rv(Elements(a_m, e, i_rad, raan, argp, nu), MU)
    el = rv_to_elements(r, v, MU)
    assert el.a_m < 0.0 and el.e > 1.0
    r2, v2 = elements_to_rv(el, MU)
    tol_r, tol_v = _round_trip_bounds(a_m, e, i_rad, r, v, el)
    # far out on the hyperbola |r| reaches ~1e9 m: allow 1e-13 relative of the radius too
    assert np.linalg.norm(r2 - r) <= tol_r + 1e-13 * np.linalg.norm(r)
    assert np.linalg.norm(v2 - v) <= tol_v + 1e-13 * np.linalg.norm(v)


def test_vectorised_conversion_matches_scalar():
    rng = np.random.default_rng(7)
    n = 50
    el = Elements(rng.uniform(7e6, 4e7, n), rng.uniform(0.0, 0.9, n), rng.uniform(0, math.pi, n),
                  rng.uniform(0, 2 * math.pi, n), rng.uniform(0, 2 * math.pi, n),
                  rng.uniform(0, 2 * math.pi, n))
    r, v = elements_to_rv(el, MU)
    assert r.shape == (n, 3) and v.shape == (n, 3)
    batch = rv_to_elements(r, v, MU)
    for k in range(n):
        one = rv_to_elements(r[k], v[k], MU)
        assert isinstance(one.a_m, float)
        # the single-state path is a plain-float twin of the array path: equal to rounding
        assert one.a_m == pytest.approx(batch.a_m[k], rel=1e-14)
        assert one.e == pytest.approx(batch.e[k], rel=1e-12, abs=1e-15)
        for name in ("i_rad", "raan_rad", "argp_rad", "nu_rad"):
            assert getattr(one, name) == pytest.approx(getattr(batch, name)[k], abs=1e-12)


def test_apsides_to_elements_and_back():
    rp, ra = 6778e3, 42164e3
    el = apsides_to_elements(rp, ra, i_rad=0.3, raan_rad=0.2, argp_rad=0.1, nu_rad=0.0)
    assert el.periapsis_radius_m == pytest.approx(rp, rel=1e-15)
    assert el.apoapsis_radius_m == pytest.approx(ra, rel=1e-15)
    r, v = elements_to_rv(el, MU)
    assert np.linalg.norm(r) == pytest.approx(rp, rel=1e-14)  # nu = 0 is periapsis
    assert np.dot(r, v) == pytest.approx(0.0, abs=1e-6 * rp)
    rp2, ra2 = apsis_radii(r, v, MU)
    assert rp2 == pytest.approx(rp, abs=1e-6)
    assert float(ra2) == pytest.approx(ra, abs=1e-5)
    circ = apsides_to_elements(rp, rp)
    assert circ.e == 0.0


# ---------------------------------------------------------------------------------------------
# Refusals with a physical meaning
# ---------------------------------------------------------------------------------------------

def test_parabolic_elements_refused():
    with pytest.raises(ValueError, match="parabolic"):
        elements_to_rv(Elements(7e6, 1.0, 0.1, 0.0, 0.0, 0.0), MU)


def test_parabolic_state_refused():
    r = np.array([7000e3, 0.0, 0.0])
    v = np.array([0.0, math.sqrt(2.0 * MU / 7000e3), 0.0])  # escape speed, perpendicular: e = 1
    with pytest.raises(ValueError, match="parabolic"):
        rv_to_elements(r, v, MU)


@pytest.mark.parametrize("el, match", [
    (Elements(7e6, -0.1, 0.1, 0.0, 0.0, 0.0), "negative"),
    (Elements(-7e6, 0.1, 0.1, 0.0, 0.0, 0.0), "sign"),
    (Elements(7e6, 1.5, 0.1, 0.0, 0.0, 0.0), "sign"),
    (Elements(7e6, 0.1, float("nan"), 0.0, 0.0, 0.0), "element i is not finite"),
    (Elements(float("inf"), 0.1, 0.1, 0.0, 0.0, 0.0), "element a is not finite"),
])
def test_bad_elements_refused(el, match):
    with pytest.raises(ValueError, match=match):
        elements_to_rv(el, MU)


@pytest.mark.parametrize("r, v, match", [
    ([0.0, 0.0, 0.0], [7e3, 0.0, 0.0], "centre"),
    ([7e6, 0.0, 0.0], [3e3, 0.0, 0.0], "rectilinear"),
    ([7e6, 0.0, float("nan")], [0.0, 7e3, 0.0], "non-finite"),
    ([7e6, 0.0], [0.0, 7e3], "three components"),
])
def test_bad_states_refused(r, v, match):
    with pytest.raises(ValueError, match=match):
        rv_to_elements(r, v, MU)


def test_apsides_refusals():
    with pytest.raises(ValueError, match="apoapsis is below periapsis"):
        apsides_to_elements(8000e3, 7000e3)
    with pytest.raises(ValueError, match="periapsis radius must be positive"):
        apsides_to_elements(0.0, 7000e3)
    with pytest.raises(ValueError, match="apoapsis radius must be positive"):
        apsides_to_elements(7000e3, float("nan"))


def test_angles_stay_below_two_pi():
    # Found by the round-trip property: a node exactly on +x came out as -1e-17 rad before
    # wrapping, and np.mod(-1e-17, 2 pi) rounds to 2 pi itself, outside the documented [0, 2 pi).
    r, v = elements_to_rv(Elements(6600e3, 0.0, math.pi / 2, 0.0, 1.0, 0.0), MU)
    el = rv_to_elements(r, v, MU)
    for x in (el.raan_rad, el.argp_rad, el.nu_rad, el.arglat_rad):
        assert 0.0 <= x < 2.0 * math.pi
    assert angle_diff(el.raan_rad, 0.0) == pytest.approx(0.0, abs=1e-12)
