"""The rocket equation and engine sizing.

Only constructed checks: the relations are cross-checked against a numerical quadrature of the
thrust acceleration F / m(t) written in this file (scipy.integrate.quad), not against handbook
examples.
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import quad
from scipy.optimize import brentq

from mechanics.constants import G0_M_S2
from mechanics.rocket import (
    burn_duration,
    delta_v,
    dv_capability,
    exhaust_velocity,
    final_mass,
    mass_flow,
    propellant_for_dv,
    time_to_half_dv,
)

isps = st.floats(50.0, 5000.0)  # s: cold gas to electric
masses = st.floats(1.0, 1e5)  # kg
dvs = st.floats(0.0, 5000.0)  # m/s
thrusts = st.floats(1e-3, 1e5)  # N


def test_standard_gravity_is_exact():
    # 3rd CGPM (1901): g0 = 9.80665 m/s^2 by definition.
    assert G0_M_S2 == 9.80665
    assert exhaust_velocity(300.0) == 300.0 * 9.80665
    assert exhaust_velocity(np.array([220.0, 300.0])) == pytest.approx([220.0 * 9.80665, 2941.995],
                                                                       rel=1e-15)


@settings(max_examples=300, deadline=None)
@given(isp=isps, m0=masses, dv=dvs)
def test_dv_propellant_dv_round_trip(isp, m0, dv):
    prop = propellant_for_dv(isp, m0, dv)
    assert 0.0 <= prop < m0
    m1 = final_mass(isp, m0, dv)
    assert m1 == pytest.approx(m0 - prop, rel=1e-15)
    # back to delta-v: relative 1e-9, or 1e-9 m/s when m1 is so close to m0 that the
    # logarithm of the mass ratio carries few digits
    assert delta_v(isp, m0, m1) == pytest.approx(dv, rel=1e-9, abs=1e-9 * exhaust_velocity(isp))
    if prop > 0.0:
        assert dv_capability(isp, m0, prop) == pytest.approx(dv, rel=1e-9,
                                                             abs=1e-9 * exhaust_velocity(isp))


@settings(max_examples=300, deadline=None)
@given(isp=isps, m0=masses, frac=st.floats(1e-6, 0.95))
def test_mass_ratio_round_trip(isp, m0, frac):
    m1 = m0 * (1.0 - frac)
    dv = delta_v(isp, m0, m1)
    assert dv == pytest.approx(isp * 9.80665 * math.log(m0 / m1), rel=1e-14)
    assert final_mass(isp, m0, dv) == pytest.approx(m1, rel=1e-12)


def test_tiny_delta_v_keeps_its_digits():
    # for dv << Isp g0 the propellant is m0 dv / (Isp g0) to first order; the second-order term
    # is dv / (2 Isp g0) ~ 1e-13 relative here
    m0, isp, dv = 500.0, 220.0, 1e-9
    assert propellant_for_dv(isp, m0, dv) == pytest.approx(m0 * dv / (isp * 9.80665), rel=1e-12)
    assert propellant_for_dv(isp, m0, 0.0) == 0.0


@settings(max_examples=200, deadline=None)
@given(thrust=thrusts, isp=isps)
def test_mass_flow(thrust, isp):
    assert mass_flow(thrust, isp) == pytest.approx(thrust / (isp * 9.80665), rel=1e-15)


def _dv_after(t_s, thrust, mdot, m0):
    """Delta-v (m/s) after t_s of constant thrust: quadrature of F / (m0 - mdot t)."""
    value, _ = quad(lambda t: thrust / (m0 - mdot * t), 0.0, t_s, epsabs=0.0, epsrel=1e-13)
    return value


@pytest.mark.parametrize("thrust, isp, m0, dv", [
    (1.0, 220.0, 150.0, 40.0),       # monopropellant smallsat raise
    (22.0, 290.0, 1200.0, 300.0),
    (400.0, 320.0, 3000.0, 1500.0),  # apogee engine, large mass fraction
    (0.02, 1600.0, 80.0, 100.0),     # electric, long burn
])
def test_duration_and_half_dv_time_by_quadrature(thrust, isp, m0, dv):
    mdot = mass_flow(thrust, isp)
    t_burn = burn_duration(thrust, isp, m0, dv)
    assert t_burn == pytest.approx(propellant_for_dv(isp, m0, dv) / mdot, rel=1e-14)
    # the thrust acceleration integrated over the burn gives back the delta-v
    assert _dv_after(t_burn, thrust, mdot, m0) == pytest.approx(dv, rel=1e-10)
    # half the delta-v is reached later than half the duration (the vehicle lightens)
    t_half = time_to_half_dv(thrust, isp, m0, dv)
    assert 0.5 * t_burn < t_half < t_burn
    t_half_quad = brentq(lambda t: _dv_after(t, thrust, mdot, m0) - 0.5 * dv, 0.0, t_burn,
                         xtol=1e-12 * t_burn, rtol=1e-14)
    assert t_half == pytest.approx(t_half_quad, rel=1e-9)


def test_vectorised_sizing():
    dv = np.array([10.0, 100.0, 1000.0])
    t = burn_duration(10.0, 300.0, 800.0, dv)
    assert t.shape == (3,)
    for k in range(3):
        assert t[k] == pytest.approx(burn_duration(10.0, 300.0, 800.0, dv[k]), rel=1e-15)
    assert np.all(np.diff(t) > 0)


@pytest.mark.parametrize("call, match", [
    (lambda: delta_v(300.0, 100.0, 120.0), "final mass exceeds the initial mass"),
    (lambda: delta_v(300.0, 0.0, 0.0), "initial mass must be positive"),
    (lambda: delta_v(-300.0, 100.0, 90.0), "specific impulse must be positive"),
    (lambda: exhaust_velocity(float("nan")), "specific impulse must be positive and finite"),
    (lambda: mass_flow(0.0, 300.0), "thrust must be positive"),
    (lambda: propellant_for_dv(300.0, 100.0, -1.0), "delta-v must be a finite non-negative"),
    (lambda: propellant_for_dv(300.0, 100.0, float("inf")), "delta-v must be a finite"),
    (lambda: dv_capability(300.0, 100.0, 100.0), "exceeds the vehicle mass"),
    (lambda: dv_capability(300.0, -1.0, 10.0), "vehicle mass must be positive"),
    (lambda: dv_capability(300.0, 100.0, float("nan")), "available propellant must be finite"),
])
def test_refusals(call, match):
    with pytest.raises(ValueError, match=match):
        call()


def test_no_propellant_buys_nothing():
    assert dv_capability(300.0, 100.0, 0.0) == 0.0
    assert dv_capability(300.0, 100.0, -5.0) == 0.0
