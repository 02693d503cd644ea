"""Planner behaviour: impulsive figures, finite losses, centring, splitting, propellant, refusals."""

from __future__ import annotations

import math

import numpy as np
import pytest

from mechanics.bodies import Body
from mechanics.elements import apsides_to_elements, elements_to_rv, rv_to_elements
from mechanics.flight import Thrust, fly
from mechanics.kepler import propagate_kepler
from mechanics.planner import design_legs, plan_campaign
from mechanics.scenario import PlanOptions, Scenario, Target
from mechanics.vehicle import Thruster, Vehicle

# Vallado (2013) Ex. 6-1 uses mu = 398600.4418 km^3/s^2 and R = 6378.137 km (from memory; the
# same pair as WGS 84 in profiles/bodies/earth.toml).
EARTH = Body("earth", 3.986004418e14, 6378137.0, 1.0826298213e-3, min_safe_alt_m=150e3)
R = EARTH.radius_m
MU = EARTH.mu_m3_s2


def scenario(hp_km, ha_km, target, vehicle, *, model="two-body", attitude="inertial", split="auto",
             lead_s=0.0, i_deg=28.5, argp_deg=0.0, nu_deg=0.0):
    el = apsides_to_elements(R + hp_km * 1e3, R + ha_km * 1e3, math.radians(i_deg), 0.4,
                             math.radians(argp_deg), math.radians(nu_deg))
    r, v = elements_to_rv(el, MU)
    return Scenario("test", EARTH, 1.8e9, tuple(r), tuple(v), model, vehicle, target,
                    PlanOptions(attitude, split, lead_s))


def vehicle(thrust_n, isp_s=300.0, dry=1000.0, prop=4000.0, **kw):
    return Vehicle("test", dry, prop, (Thruster(1, thrust_n, isp_s),), **kw)


def test_vallado_6_1_impulsive_figures_with_a_strong_engine():
    # Vallado (2013) Ex. 6-1 (from memory; recomputed): 191.34411 km -> 35781.34857 km,
    # dv_a = 2.457038 km/s, dv_b = 1.478187 km/s, time of flight 5.256713 h.
    target = Target("circular", R + 35781.34857e3, R + 35781.34857e3)
    p = plan_campaign(scenario(191.34411, 191.34411, target, vehicle(5e6), i_deg=0.0))
    assert len(p.burns) == 2
    b1, b2 = p.burns
    assert b1.impulsive_dv_m_s == pytest.approx(2457.038, abs=0.01)
    assert b2.impulsive_dv_m_s == pytest.approx(1478.187, abs=0.01)
    assert b2.apsis_time_s - b1.apsis_time_s == pytest.approx(5.256713 * 3600.0, abs=2.0)
    assert (b1.apsis, b2.apsis) == ("periapsis", "apoapsis")
    # the flown orbit meets the target to < 100 m
    assert abs(p.final_periapsis_radius_m - target.periapsis_radius_m) < 100.0
    assert abs(p.final_apoapsis_radius_m - target.apoapsis_radius_m) < 100.0


def test_finite_loss_tends_to_zero_as_thrust_grows():
    target = Target("apoapsis", None, R + 1500e3)
    losses = []
    thrusts = (700.0, 2000.0, 7000.0, 200000.0)
    for thrust in thrusts:
        p = plan_campaign(scenario(500, 500, target, vehicle(thrust, dry=800.0, prop=200.0), split="off"))
        losses.append(p.burns[0].finite_loss_m_s)
    assert all(a > b for a, b in zip(losses, losses[1:])), losses
    assert abs(losses[-1]) < 1e-3
    # loss scales about with the square of the burn arc, i.e. 1/thrust^2 (cosine-loss model)
    assert losses[1] / losses[2] == pytest.approx((thrusts[2] / thrusts[1]) ** 2, rel=0.1)


@pytest.mark.parametrize("thrust_n", [2000.0, 700.0, 350.0, 200.0])
def test_inertial_burn_loss_matches_the_cosine_loss_approximation(thrust_n):
    # A thrust direction fixed along the apsis velocity delivers, over an arc x centred on the
    # apsis, the fraction sin(x/2)/(x/2) of its delta-v along the track (a standard derivation:
    # the mean of cos(theta) for theta uniform in [-x/2, x/2]).  High Isp keeps the mass, hence
    # the acceleration, nearly constant as the derivation assumes.
    target = Target("apoapsis", None, R + 800e3)
    veh = vehicle(thrust_n, isp_s=3000.0, dry=1000.0, prop=100.0)
    p = plan_campaign(scenario(500, 500, target, veh, split="off"))
    b = p.burns[0]
    x = b.arc_rad
    predicted = b.dv_m_s * (1.0 - math.sin(x / 2.0) / (x / 2.0))
    assert math.degrees(x) <= 31.0
    assert b.finite_loss_m_s == pytest.approx(predicted, rel=0.03)


def test_loss_grows_with_the_arc():
    target = Target("apoapsis", None, R + 800e3)
    arcs, losses = [], []
    for thrust in (2000.0, 700.0, 350.0, 200.0):
        b = plan_campaign(scenario(500, 500, target, vehicle(thrust, isp_s=3000.0, prop=100.0),
                                   split="off")).burns[0]
        arcs.append(b.arc_rad)
        losses.append(b.finite_loss_m_s)
    assert arcs == sorted(arcs) and losses == sorted(losses)


def test_half_dv_centring_ignites_earlier_and_keeps_the_apsis_line():
    # Our rule: half of the burn's delta-v before the apsis.  The alternative (half the duration
    # before the apsis, the CCSDS OPM mid-burn convention) ignites later by
    # m0/mdot (1 - sqrt(m1/m0)) - D/2, and turns the line of apsides further.
    el0 = apsides_to_elements(R + 500e3, R + 900e3, 0.9, 0.3, 1.0, 5.0)
    r, v = elements_to_rv(el0, MU)
    veh = Vehicle("t", 100.0, 100.0, (Thruster(1, 100.0, 150.0),))
    sc = Scenario("c", EARTH, 0.0, tuple(r), tuple(v), "two-body", veh,
                  Target("apoapsis", None, R + 2500e3), PlanOptions("inertial", "off", 0.0))
    b = plan_campaign(sc).burns[0]
    m0, m1 = b.mass_before_kg, b.mass_after_kg
    expected = m0 / b.mdot_kg_s * (1.0 - math.sqrt(m1 / m0)) - 0.5 * b.duration_s
    assert b.ignition_half_duration_s - b.ignition_s == pytest.approx(expected, abs=1e-6)
    assert expected > 0.0
    turn = {}
    thrust = Thrust(b.thrust_n, b.mdot_kg_s, "inertial", b.direction)
    for rule, t_ign in (("half-dv", b.ignition_s), ("half-duration", b.ignition_half_duration_s)):
        rr, vv = propagate_kepler(r, v, t_ign, MU)
        y1, _ = fly(np.r_[rr, vv, m0], b.duration_s, EARTH, "two-body", thrust)
        turn[rule] = abs(rv_to_elements(y1[:3], y1[3:6], MU).argp_rad - el0.argp_rad)
    assert turn["half-dv"] < turn["half-duration"]


def test_split_auto_keeps_every_burn_within_the_limits():
    veh = vehicle(40.0, isp_s=230.0, dry=500.0, prop=80.0, max_burn_duration_s=300.0,
                  max_burn_arc_rad=math.radians(20.0))
    p = plan_campaign(scenario(500, 500, Target("circular", R + 700e3, R + 700e3), veh))
    assert len(p.burns) > 2
    assert all(b.duration_s <= 300.0 and b.arc_rad <= math.radians(20.0) for b in p.burns)
    assert not any("exceeds the vehicle limits" in w for w in p.warnings)
    assert abs(p.final_periapsis_radius_m - (R + 700e3)) < 100.0
    assert abs(p.final_apoapsis_radius_m - (R + 700e3)) < 100.0


def test_split_off_plans_one_burn_per_leg_and_warns():
    veh = vehicle(40.0, isp_s=230.0, dry=500.0, prop=80.0, max_burn_duration_s=300.0)
    p = plan_campaign(scenario(500, 500, Target("circular", R + 700e3, R + 700e3), veh, split="off"))
    assert len(p.burns) == 2
    assert any("exceeds the vehicle limits" in w and "split = off" in w for w in p.warnings)


def test_split_forced_n():
    veh = vehicle(400.0, isp_s=230.0, dry=500.0, prop=80.0)
    p = plan_campaign(scenario(500, 500, Target("circular", R + 700e3, R + 700e3), veh, split=3))
    assert len(p.burns) == 6
    # each burn of a leg delivers about a third of the leg
    first_leg = [b.dv_m_s for b in p.burns if b.leg == 0]
    assert max(first_leg) / min(first_leg) < 1.05


def test_propellant_bookkeeping_to_the_milligram():
    veh = vehicle(40.0, isp_s=230.0, dry=500.0, prop=80.0, unusable_kg=1.5, reserve_kg=10.0)
    p = plan_campaign(scenario(500, 520, Target("circular", R + 650e3, R + 650e3), veh, argp_deg=30))
    used = sum(b.propellant_kg for b in p.burns)
    assert p.total_propellant_kg == pytest.approx(used, abs=1e-9)
    assert p.after_plan_kg == pytest.approx(80.0 - used, abs=1e-6)
    assert p.usable_kg == pytest.approx(78.5, abs=1e-6)
    assert p.margin_kg == pytest.approx(80.0 - used - 1.5 - 10.0, abs=1e-6)
    for a, b in zip(p.burns, p.burns[1:]):
        assert b.mass_before_kg == pytest.approx(a.mass_after_kg, abs=1e-6)
    for b in p.burns:
        assert b.propellant_kg == pytest.approx(b.mdot_kg_s * b.duration_s, rel=1e-9)
    # the margin buys the rocket-equation delta-v at the final mass
    m_final = 500.0 + 80.0 - used
    c = veh.thrust_n / veh.mdot_kg_s
    assert p.dv_remaining_m_s == pytest.approx(c * math.log(m_final / (m_final - p.margin_kg)), rel=1e-9)


def test_infeasible_when_the_plan_needs_more_than_is_usable():
    veh = vehicle(40.0, isp_s=230.0, dry=500.0, prop=5.0, unusable_kg=0.5)
    p = plan_campaign(scenario(500, 500, Target("circular", R + 900e3, R + 900e3), veh))
    assert p.feasible is False
    assert any("infeasible" in w or "runs out" in w for w in p.warnings)


def test_reserve_warning():
    veh = vehicle(400.0, isp_s=230.0, dry=500.0, prop=25.0, reserve_kg=20.0)
    p = plan_campaign(scenario(500, 500, Target("circular", R + 600e3, R + 600e3), veh))
    assert p.feasible
    assert p.margin_kg < 0.0
    assert any("reserve" in w for w in p.warnings)


def test_low_periapsis_warning_on_the_way_down():
    veh = vehicle(400.0, isp_s=230.0, dry=500.0, prop=80.0)
    p = plan_campaign(scenario(400, 400, Target("periapsis", R + 120e3, None), veh))
    assert any("below the safe altitude" in w for w in p.warnings)


def test_lead_time_is_respected():
    veh = vehicle(400.0, isp_s=230.0, dry=500.0, prop=80.0)
    sc = scenario(400, 420, Target("circular", R + 600e3, R + 600e3), veh, lead_s=3600.0, nu_deg=350)
    p = plan_campaign(sc)
    assert p.burns[0].ignition_s >= sc.epoch_s + 3600.0
    assert not any("before the lead time" in w for w in p.warnings)


def test_already_at_target_needs_no_burn():
    veh = vehicle(400.0)
    p = plan_campaign(scenario(600, 600, Target("circular", R + 600e3, R + 600e3), veh))
    assert p.burns == ()
    assert any("no burn" in w for w in p.warnings)


def test_design_prefers_the_cheaper_ordering():
    # raising both apsides from an elliptical orbit: burn first at periapsis (Hohmann order)
    legs = design_legs(R + 300e3, R + 800e3, False, Target("circular", R + 1000e3, R + 1000e3), MU)
    assert [leg.burn_at for leg in legs] == ["periapsis", "apoapsis"]
    # bi-elliptic: three legs via the intermediate apoapsis
    legs = design_legs(R + 300e3, R + 300e3, True,
                       Target("bielliptic", R + 50000e3, R + 50000e3, R + 200000e3), MU)
    assert [round(leg.goal_radius_m) for leg in legs] == [round(R + 200000e3), round(R + 50000e3),
                                                          round(R + 50000e3)]


def test_bielliptic_plan_reaches_the_target():
    target = Target("bielliptic", R + 60000e3, R + 60000e3, R + 150000e3)
    p = plan_campaign(scenario(500, 500, target, vehicle(5e5, dry=1000.0, prop=9000.0), i_deg=0))
    assert len(p.burns) == 3
    assert abs(p.final_periapsis_radius_m - target.periapsis_radius_m) < 100.0
    assert abs(p.final_apoapsis_radius_m - target.apoapsis_radius_m) < 100.0


@pytest.mark.parametrize("bad, message", [
    (dict(target=Target("circular", R - 10e3, R - 10e3)), "inside the body"),
    (dict(target=None), "needs a target"),
    (dict(vehicle=None), "needs a vehicle"),
])
def test_refusals(bad, message):
    sc = scenario(500, 500, Target("circular", R + 600e3, R + 600e3), vehicle(400.0))
    from dataclasses import replace

    with pytest.raises(ValueError, match=message):
        plan_campaign(replace(sc, **bad))


def test_hyperbolic_start_is_refused():
    r = (R + 500e3, 0.0, 0.0)
    v = (0.0, 12000.0, 0.0)
    sc = Scenario("h", EARTH, 0.0, r, v, "two-body", vehicle(400.0),
                  Target("circular", R + 600e3, R + 600e3))
    with pytest.raises(ValueError, match="hyperbolic"):
        plan_campaign(sc)


def test_zero_thrust_is_refused():
    with pytest.raises(ValueError, match="thrust"):
        Thruster(1, 0.0, 220.0)
