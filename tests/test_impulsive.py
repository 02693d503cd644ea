"""Impulsive manoeuvres: Hohmann, bi-elliptic, apsis burns, plane changes.

References: Vallado, Fundamentals of Astrodynamics and Applications (4th ed.), Ex. 6-1, Ex. 6-2
and sec. 6.3; burndesk's Kepler propagation for end-to-end checks.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from mechanics.impulsive import (
    BIELLIPTIC_ALWAYS_BETTER_ABOVE,
    HOHMANN_ALWAYS_BETTER_BELOW,
    apsis_burn_dv,
    bielliptic,
    bielliptic_advice,
    bielliptic_crossover_ratios,
    circular_speed,
    circularize_dv,
    escape_speed,
    hohmann,
    hohmann_with_plane_change,
    opposite_apsis_after,
    plane_change_dv,
    vis_viva_speed,
)
from mechanics.elements import Elements, elements_to_rv, rv_to_elements
from mechanics.kepler import propagate_kepler

KM = 1e3
DEG = math.pi / 180.0
MU = 398600.4418e9  # Vallado's Earth GM (= WGS-84), m^3/s^2
R_EARTH_M = 6378.137e3  # Vallado's Earth radius (= WGS-84 a)


# ---------------------------------------------------------------------------------------------
# Published examples
# ---------------------------------------------------------------------------------------------

def test_vallado_ex_6_1_hohmann():
    # Vallado, Ex. 6-1 (recomputed): 191.34411 km -> 35781.34857 km altitude,
    # 2.457038 + 1.478187 = 3.935224 km/s in 5.256713 h.  Tolerance: half a unit of the
    # printed last digit (0.5 mm/s, 0.5e-6 h), 1 mm/s on the total (sum of two roundings).
    h = hohmann(R_EARTH_M + 191.34411 * KM, R_EARTH_M + 35781.34857 * KM, MU)
    assert h.dv1_m_s == pytest.approx(2457.038, abs=0.5e-3)
    assert h.dv2_m_s == pytest.approx(1478.187, abs=0.5e-3)
    assert h.total_dv_m_s == pytest.approx(3935.224, abs=1e-3)
    assert h.time_of_flight_s / 3600.0 == pytest.approx(5.256713, abs=0.5e-6)
    assert h.transfer_a_m == pytest.approx(R_EARTH_M + 0.5 * (191.34411 + 35781.34857) * KM)


def test_vallado_ex_6_2_bielliptic():
    # Vallado, Ex. 6-2 (recomputed): 191.34411 km via 503873 km to 376310 km
    # altitude: bi-elliptic total 3.904057 km/s against Hohmann 3.966193 km/s.
    # Time of flight 593.92 h from memory.
    r1, rb, r2 = (R_EARTH_M + x * KM for x in (191.34411, 503873.0, 376310.0))
    b = bielliptic(r1, rb, r2, MU)
    assert b.total_dv_m_s == pytest.approx(3904.057, abs=0.5e-3)
    assert hohmann(r1, r2, MU).total_dv_m_s == pytest.approx(3966.193, abs=0.5e-3)
    assert b.time_of_flight_s / 3600.0 == pytest.approx(593.92, abs=0.005)
    assert "bi-elliptic 3904.1 m/s vs Hohmann 3966.2 m/s" in bielliptic_advice(r1, r2, rb, MU)


def test_crossover_ratios():
    # Vallado, sec. 6.3 (confirmed): 11.938765 and 15.581719.
    lower, upper = bielliptic_crossover_ratios()
    assert lower == pytest.approx(11.938765, abs=1e-6)
    assert upper == pytest.approx(15.581719, abs=1e-6)
    assert HOHMANN_ALWAYS_BETTER_BELOW == pytest.approx(lower, abs=1e-6)
    assert BIELLIPTIC_ALWAYS_BETTER_ABOVE == pytest.approx(upper, abs=1e-6)


@pytest.mark.parametrize("ratio, expect", [
    (11.5, "never"),   # below 11.94: no intermediate radius beats Hohmann
    (13.0, "some"),    # between: only far enough intermediate radii win
    (15.0, "some"),
    (16.5, "always"),  # above 15.58: every intermediate radius above r2 wins
])
def test_crossover_meaning_by_brute_force(ratio, expect):
    # Direct search over intermediate radii (mu = r1 = 1), independent of the Brent solution.
    hoh = hohmann(1.0, ratio, 1.0).total_dv_m_s
    vias = ratio * np.concatenate([np.linspace(1.0 + 1e-6, 2.0, 200), np.geomspace(2.0, 1e8, 400)])
    wins = np.array([bielliptic(1.0, rv, ratio, 1.0).total_dv_m_s < hoh for rv in vias])
    if expect == "never":
        assert not wins.any()
    elif expect == "always":
        assert wins.all()
    else:
        assert wins.any() and not wins.all()
        assert not wins[0] and wins[-1]


def test_advice_bands():
    assert "Hohmann is cheaper" in bielliptic_advice(1.0, 10.0)
    assert "only with a high enough" in bielliptic_advice(13.0, 1.0)
    assert "any bi-elliptic beats Hohmann" in bielliptic_advice(1.0, 20.0)


# ---------------------------------------------------------------------------------------------
# Speeds
# ---------------------------------------------------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(a=st.floats(6.6e6, 5e7), e=st.floats(0.0, 0.9), nu=st.floats(0.0, 2 * math.pi))
def test_vis_viva_matches_state_speed(a, e, nu):
    r, v = elements_to_rv(Elements(a, e, 0.3, 0.2, 0.1, nu), MU)
    assert vis_viva_speed(np.linalg.norm(r), a, MU) == pytest.approx(np.linalg.norm(v), rel=1e-12)


def test_speed_relations():
    r = 7000e3
    assert vis_viva_speed(r, r, MU) == pytest.approx(circular_speed(r, MU), rel=1e-15)
    assert escape_speed(r, MU) == pytest.approx(math.sqrt(2.0) * circular_speed(r, MU), rel=1e-15)
    v = vis_viva_speed(np.array([7000e3, 8000e3]), 7500e3, MU)
    assert v.shape == (2,) and v[0] > v[1]
    with pytest.raises(ValueError, match="beyond the orbit's apoapsis"):
        vis_viva_speed(9000e3, 4000e3, MU)


# ---------------------------------------------------------------------------------------------
# Hohmann end to end with Kepler propagation
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("r1, r2", [(6778e3, 42164e3), (42164e3, 6778e3), (7000e3, 7100e3)])
def test_hohmann_flown_with_kepler(r1, r2):
    # Constructed: burn dv1 along the velocity on the r1 circle, coast the time of flight, then
    # dv2 along the velocity must leave a circle of radius r2.  Raising and lowering both.
    h = hohmann(r1, r2, MU)
    sense = 1.0 if r2 > r1 else -1.0
    r0, v0 = elements_to_rv(Elements(r1, 0.0, 0.4, 0.3, 0.0, 1.0), MU)
    v_after = v0 + sense * h.dv1_m_s * v0 / np.linalg.norm(v0)
    r, v = propagate_kepler(r0, v_after, h.time_of_flight_s, MU)
    assert np.linalg.norm(r) == pytest.approx(r2, abs=1e-3)  # arrives at the opposite apsis
    assert abs(np.dot(r, v)) <= 1e-9 * np.linalg.norm(r) * np.linalg.norm(v)
    assert np.dot(r, r0) == pytest.approx(-r1 * r2, rel=1e-12)  # half a turn later
    v_final = v + sense * h.dv2_m_s * v / np.linalg.norm(v)
    el = rv_to_elements(r, v_final, MU)
    assert el.a_m == pytest.approx(r2, abs=1e-3)
    assert el.e < 1e-10
    # lowering costs what raising costs
    back = hohmann(r2, r1, MU)
    assert (back.dv1_m_s, back.dv2_m_s) == pytest.approx((h.dv2_m_s, h.dv1_m_s), rel=1e-13)


# ---------------------------------------------------------------------------------------------
# Apsis burns
# ---------------------------------------------------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(r_burn=st.floats(6.6e6, 4.5e7), other=st.floats(6.6e6, 4.5e7),
       target=st.floats(6.6e6, 4.5e7))
def test_apsis_burn_round_trip(r_burn, other, target):
    dv = apsis_burn_dv(r_burn, other, target, MU)
    assert opposite_apsis_after(r_burn, other, dv, MU) == pytest.approx(target, rel=1e-9)
    assert (dv > 0) == (target > other) or dv == 0.0
    # applied to the state at that apsis (periapsis, or apoapsis at nu = pi), the same burn
    # gives the new semi-major axis
    el = Elements(0.5 * (r_burn + other), abs(other - r_burn) / (other + r_burn), 0.5, 0.1, 0.2,
                  0.0 if other >= r_burn else math.pi)
    r, v = elements_to_rv(el, MU)
    assert np.linalg.norm(r) == pytest.approx(r_burn, rel=1e-12)
    new = rv_to_elements(r, v + dv * v / np.linalg.norm(v), MU)
    assert new.a_m == pytest.approx(0.5 * (r_burn + target), rel=1e-9)


def test_circularize():
    rp, ra = 7000e3, 9000e3
    dv = circularize_dv(ra, rp, MU)
    assert dv == pytest.approx(circular_speed(ra, MU) - vis_viva_speed(ra, 0.5 * (rp + ra), MU))
    assert dv > 0.0
    assert circularize_dv(rp, ra, MU) < 0.0  # at periapsis: slow down


def test_apsis_burn_refusals():
    with pytest.raises(ValueError, match="hyperbolic, no apoapsis"):
        opposite_apsis_after(7000e3, 7000e3, 4000.0, MU)
    with pytest.raises(ValueError, match="reverses the velocity"):
        opposite_apsis_after(7000e3, 7000e3, -9000.0, MU)
    with pytest.raises(ValueError, match="burn radius must be a positive finite radius"):
        apsis_burn_dv(-1.0, 7000e3, 8000e3, MU)
    with pytest.raises(ValueError, match="final radius"):
        hohmann(7000e3, float("nan"), MU)
    with pytest.raises(ValueError, match="intermediate apoapsis must lie above"):
        bielliptic(7000e3, 8000e3, 9000e3, MU)


# ---------------------------------------------------------------------------------------------
# Plane changes
# ---------------------------------------------------------------------------------------------

def test_plane_change_law_of_cosines():
    v = 7500.0
    for di in (0.0, 1 * DEG, 28.5 * DEG, 90 * DEG, 180 * DEG):
        assert plane_change_dv(v, v, di) == pytest.approx(2.0 * v * math.sin(di / 2.0), abs=1e-9)
    # speed change only
    assert plane_change_dv(7000.0, 7500.0, 0.0) == pytest.approx(500.0, abs=1e-9)
    # right angle: Pythagoras
    assert plane_change_dv(3.0, 4.0, 90 * DEG) == pytest.approx(5.0, rel=1e-15)


def test_combined_plane_change_is_the_minimum():
    r1, r2, di = 6678e3, 42164e3, 28.5 * DEG
    c = hohmann_with_plane_change(r1, r2, di, MU)
    assert c.di1_rad + c.di2_rad == pytest.approx(di, abs=1e-12)
    # most of the change belongs at the slower, higher burn
    assert c.di2_rad > c.di1_rad > 0.0
    # brute force over the split, computed with the law of cosines in this test
    h = hohmann(r1, r2, MU)
    va1, vt1 = circular_speed(r1, MU), circular_speed(r1, MU) + h.dv1_m_s
    vb2, vt2 = circular_speed(r2, MU), circular_speed(r2, MU) - h.dv2_m_s

    def total(s):
        return (math.sqrt(va1**2 + vt1**2 - 2 * va1 * vt1 * math.cos(s * di))
                + math.sqrt(vt2**2 + vb2**2 - 2 * vt2 * vb2 * math.cos((1 - s) * di)))

    grid = min(total(s) for s in np.linspace(0.0, 1.0, 10001))
    assert c.total_dv_m_s <= grid + 1e-6
    assert c.total_dv_m_s == pytest.approx(grid, abs=1e-3)
    assert c.total_dv_m_s < total(0.0) and c.total_dv_m_s < total(1.0)
    assert c.time_of_flight_s == pytest.approx(h.time_of_flight_s, rel=1e-15)
    flat = hohmann_with_plane_change(r1, r2, 0.0, MU)
    assert flat.total_dv_m_s == pytest.approx(h.total_dv_m_s, rel=1e-14)
