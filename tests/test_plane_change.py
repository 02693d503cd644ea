"""Combined plane changes: sharing the inclination change, node placement, finite burns.

External figures: the law of cosines for a velocity turned through an angle (Vallado (2013)
eq. 6-19 and Curtis (2014) eq. 6.8, from memory) and Vallado Ex. 6-1's LEO and GEO radii
(from memory, as in test_plan.py).  The optimum split of the inclination change is checked
against a brute-force grid computed here, independent of the planner's optimiser.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from mechanics.bodies import Body
from mechanics.elements import apsides_to_elements, elements_to_rv
from mechanics.impulsive import hohmann_with_plane_change
from mechanics.planner import design_legs, plan_campaign, share_plane_change
from mechanics.scenario import PlanOptions, Scenario, Target
from mechanics.vehicle import Thruster, Vehicle

EARTH = Body("earth", 3.986004418e14, 6378137.0, 1.0826298213e-3, min_safe_alt_m=150e3)
R = EARTH.radius_m
MU = EARTH.mu_m3_s2
DEG = math.pi / 180.0
LEO = R + 191.34411e3    # Vallado (2013) Ex. 6-1 (from memory)
GEO = R + 35781.34857e3


def scenario(hp_km, ha_km, target, vehicle, *, model="two-body", attitude="inertial", split="auto",
             i_deg=28.5, raan_deg=30.0, argp_deg=0.0, nu_deg=10.0, lead_s=0.0):
    el = apsides_to_elements(R + hp_km * 1e3, R + ha_km * 1e3, i_deg * DEG, raan_deg * DEG,
                             argp_deg * DEG, nu_deg * DEG)
    r, v = elements_to_rv(el, MU)
    return Scenario("plane", EARTH, 1.8e9, tuple(r), tuple(v), model, vehicle, target,
                    PlanOptions(attitude, split, lead_s))


def vehicle(thrust_n, isp_s=300.0, dry=1000.0, prop=4000.0, **kw):
    return Vehicle("test", dry, prop, (Thruster(1, thrust_n, isp_s),), **kw)


def speeds(r1, r2):
    at = 0.5 * (r1 + r2)
    return (math.sqrt(MU / r1), math.sqrt(MU * (2 / r1 - 1 / at)),
            math.sqrt(MU * (2 / r2 - 1 / at)), math.sqrt(MU / r2))


def cosines(v1, v2, di):
    return np.sqrt(v1 * v1 + v2 * v2 - 2 * v1 * v2 * np.cos(di))


def test_the_shared_plane_change_is_the_brute_force_minimum():
    di = 28.5 * DEG
    legs = design_legs(LEO, LEO, True, Target("circular", GEO, GEO), MU)
    shared = share_plane_change(legs, LEO, LEO, True, 28.5 * DEG, 0.0, MU)
    first = abs(shared[0].i_after_rad - shared[0].i_before_rad)
    assert shared[-1].i_after_rad == 0.0 and shared[0].i_before_rad == pytest.approx(28.5 * DEG)
    # independent: the total over a grid of 20001 splits, law of cosines at both burns
    va, vt1, vt2, vb = speeds(LEO, GEO)
    s = np.linspace(0.0, 1.0, 20001)
    total = cosines(va, vt1, s * di) + cosines(vt2, vb, (1 - s) * di)
    k = int(np.argmin(total))
    assert first == pytest.approx(s[k] * di, abs=2e-4 * di)
    ours = float(cosines(va, vt1, first) + cosines(vt2, vb, di - first))
    assert ours <= total[k] + 1e-6              # m/s: no worse than the best grid point
    assert ours < float(total[0]) - 1.0          # better than all of it at apoapsis by > 1 m/s
    # and the same as the textbook-style two-burn function of mechanics.impulsive
    c = hohmann_with_plane_change(LEO, GEO, di, MU)
    assert ours == pytest.approx(c.total_dv_m_s, abs=1e-6)


def test_leo_to_geo_with_the_plane_change_impulsive_and_finite():
    # a strong engine: burns of seconds, the finite figures approach the impulsive ones
    target = Target("circular", GEO, GEO, i_rad=0.0)
    p = plan_campaign(scenario(191.34411, 191.34411, target, vehicle(5e6, dry=1000.0, prop=9000.0)))
    c = hohmann_with_plane_change(LEO, GEO, 28.5 * DEG, MU)
    assert len(p.burns) == 2
    assert p.total_impulsive_dv_m_s == pytest.approx(c.total_dv_m_s, abs=0.5)   # m/s
    assert p.burns[0].impulsive_dv_m_s == pytest.approx(c.dv1_m_s, abs=0.5)
    assert abs(p.total_dv_m_s - p.total_impulsive_dv_m_s) < 2.0                  # m/s of finite loss
    assert abs(p.final_periapsis_radius_m - GEO) < 100.0 and abs(p.final_apoapsis_radius_m - GEO) < 100.0
    assert abs(p.final_i_rad) * GEO < 100.0                                      # out-of-plane m
    assert p.final_i_rad == pytest.approx(0.0, abs=1e-5)
    # both burns are centred on the nodes (equator crossings) of a 28.5 deg orbit
    for b in p.burns:
        z = b.centre_direction[2]
        assert abs(z) < math.sin(0.5 * DEG), (b.index, z)


def test_finite_loss_of_a_combined_burn_tends_to_zero_as_thrust_grows():
    target = Target("apoapsis", None, R + 1500e3, i_rad=29.0 * DEG)
    losses = []
    for thrust in (1000.0, 4000.0, 16000.0, 1e6):
        p = plan_campaign(scenario(500, 500, target, vehicle(thrust, dry=800.0, prop=400.0), split="off"))
        assert abs(p.final_i_rad - 29.0 * DEG) * (R + 1500e3) < 100.0
        losses.append(p.total_dv_m_s - p.total_impulsive_dv_m_s)
    assert all(a > b for a, b in zip(losses, losses[1:])), losses
    assert abs(losses[-1]) < 0.01


def test_pure_plane_change_costs_two_v_sin_half_di():
    # same apsides, new inclination: one burn at a node, dv = 2 v sin(di/2) (law of cosines, v1 = v2)
    target = Target("circular", R + 700e3, R + 700e3, i_rad=29.5 * DEG)
    p = plan_campaign(scenario(700, 700, target, vehicle(2e5, dry=1000.0, prop=500.0)))
    v = math.sqrt(MU / (R + 700e3))
    assert len(p.burns) == 1
    assert p.burns[0].impulsive_dv_m_s == pytest.approx(2 * v * math.sin(0.5 * DEG), abs=0.05)
    assert p.total_dv_m_s == pytest.approx(p.total_impulsive_dv_m_s, abs=0.05)
    assert abs(p.burns[0].out_of_plane_rad) > 85 * DEG     # nearly all of it along the normal
    assert abs(p.final_i_rad - 29.5 * DEG) * (R + 700e3) < 50.0
    assert abs(p.final_periapsis_radius_m - (R + 700e3)) < 100.0
    assert abs(p.final_apoapsis_radius_m - (R + 700e3)) < 100.0


@pytest.mark.parametrize("model", ["two-body", "two-body+J2"])
@pytest.mark.parametrize("attitude", ["inertial", "tracking"])
def test_split_raise_with_plane_change_meets_both(model, attitude):
    # a low-thrust vehicle: the legs split over several node/apsis passes; every burn within
    # the limits, final mean apsides and inclination on target
    veh = vehicle(20.0, isp_s=225.0, dry=300.0, prop=60.0, max_burn_duration_s=1200.0,
                  max_burn_arc_rad=30 * DEG)
    target = Target("circular", R + 800e3, R + 800e3, i_rad=52.0 * DEG)
    p = plan_campaign(scenario(600, 600, target, veh, model=model, attitude=attitude, i_deg=51.6))
    assert p.feasible
    assert len(p.burns) >= 4
    assert all(b.duration_s <= 1200.0 + 1e-6 and b.arc_rad <= 30 * DEG + 1e-9 for b in p.burns)
    assert abs(p.final_periapsis_radius_m - target.periapsis_radius_m) < 100.0
    assert abs(p.final_apoapsis_radius_m - target.apoapsis_radius_m) < 100.0
    assert abs(p.final_i_rad - 52.0 * DEG) * (R + 800e3) < 100.0
    # raising the inclination: first at a node, the push toward +h at the ascending node
    first = p.burns[0]
    assert abs(first.centre_direction[2]) < math.sin(1.0 * DEG)
    ascending = float(np.dot(first.centre_direction, [math.cos(30 * DEG), math.sin(30 * DEG), 0.0])) > 0
    assert (first.out_of_plane_rad > 0) == ascending
    # inclination rises burn by burn toward the target
    steps = [b.after_i_rad for b in p.burns]
    assert all(b > a for a, b in zip(steps, steps[1:])), [math.degrees(x) for x in steps]


def test_an_elliptical_orbit_with_apsides_on_the_nodes():
    target = Target("apsides", R + 600e3, R + 1500e3, i_rad=40.5 * DEG)
    for argp in (0.0, 180.0, 3.0):
        p = plan_campaign(scenario(400, 1400, target, vehicle(400.0, dry=800.0, prop=300.0),
                                   model="two-body+J2", i_deg=40.0, argp_deg=argp))
        assert abs(p.final_periapsis_radius_m - target.periapsis_radius_m) < 100.0
        assert abs(p.final_apoapsis_radius_m - target.apoapsis_radius_m) < 100.0
        assert abs(p.final_i_rad - 40.5 * DEG) * (R + 1500e3) < 100.0


def test_apsides_off_the_nodes_are_refused_with_the_reason():
    target = Target("apsides", R + 600e3, R + 1500e3, i_rad=40.5 * DEG)
    with pytest.raises(ValueError, match=r"target\.i: .* 30\.0 deg from its line of nodes"):
        plan_campaign(scenario(400, 1400, target, vehicle(400.0), i_deg=40.0, argp_deg=30.0))


def test_an_inclination_already_met_plans_as_without_it():
    base = scenario(500, 500, Target("circular", R + 600e3, R + 600e3), vehicle(400.0), i_deg=28.5)
    p0 = plan_campaign(base)
    p1 = plan_campaign(replace(base, target=Target("circular", R + 600e3, R + 600e3, i_rad=28.5 * DEG)))
    assert [b.ignition_s for b in p0.burns] == [b.ignition_s for b in p1.burns]
    assert all(b.goal_i_rad is None for b in p1.burns)


def test_equatorial_start_may_burn_anywhere():
    target = Target("circular", R + 900e3, R + 900e3, i_rad=1.0 * DEG)
    p = plan_campaign(scenario(600, 600, target, vehicle(2000.0, dry=800.0, prop=300.0), i_deg=0.0,
                               lead_s=600.0))
    assert p.burns[0].ignition_s == pytest.approx(1.8e9 + 600.0, abs=1e-6)   # the earliest moment
    assert abs(p.final_i_rad - 1.0 * DEG) * (R + 900e3) < 100.0


def test_plane_change_beyond_the_propellant_is_infeasible():
    target = Target("circular", R + 600e3, R + 600e3, i_rad=45.0 * DEG)
    p = plan_campaign(scenario(600, 600, target, vehicle(400.0, dry=800.0, prop=20.0), i_deg=28.5))
    assert not p.feasible
    assert any("infeasible" in w for w in p.warnings)


def test_a_weak_plane_change_burn_is_flagged_and_the_replan_still_meets_the_plane():
    # session core: burn 1 of a raise with a plane change flies at 95 % of rated thrust; the
    # replanned remainder, flown with that weak engine by the reference integrator of
    # test_plan_independent, reaches the apsides and the inclination within 1 km
    import sys
    from pathlib import Path

    from scipy.integrate import solve_ivp

    sys.path.insert(0, str(Path(__file__).parent))
    from test_plan_independent import averaged_apsides, make_rhs
    from test_session import record, start, truth_burn

    from mechanics.session.reducer import view

    veh = vehicle(60.0, isp_s=230.0, dry=500.0, prop=80.0, max_burn_duration_s=1200.0)
    target = Target("circular", R + 800e3, R + 800e3, i_rad=52.0 * DEG)
    sc = scenario(600, 600, target, veh, i_deg=51.6, lead_s=600.0)
    state = start(sc)
    b1 = view(state).next_burn.planned
    assert b1.goal_i_rad is not None
    y0 = np.r_[sc.r_m, sc.v_m_s, veh.wet_mass_kg]
    y_od, t_od, _ = truth_burn(sc, y0, sc.epoch_s, b1, 0.95)
    state = record(state, 2, 1, b1, y_od, t_od)
    v1 = view(state)
    assert v1.rows[0].drift.level == "alarm"
    assert v1.calibration.thrust_factor == pytest.approx(0.95, rel=0.01)
    remaining = [r.planned for r in v1.rows if r.status == "planned"]
    assert remaining and all(b.goal_i_rad is not None for b in remaining)
    y, t = np.r_[y_od[:6], v1.latest.mass_kg], t_od
    for b in remaining:
        y = solve_ivp(make_rhs(MU, R, EARTH.j2, False), (t, b.ignition_s), y, method="DOP853",
                      rtol=1e-11, atol=1e-6).y[:, -1]
        rhs = make_rhs(MU, R, EARTH.j2, False, 0.95 * veh.thrust_n, 0.95 * veh.mdot_kg_s, "inertial", b.direction)
        y = solve_ivp(rhs, (0.0, b.duration_s), y, method="DOP853", rtol=1e-11, atol=1e-6).y[:, -1]
        t = b.ignition_s + b.duration_s
    rp, ra, i = averaged_apsides(y, MU, R, EARTH.j2, False, with_i=True)
    assert abs(rp - (R + 800e3)) < 1000.0 and abs(ra - (R + 800e3)) < 1000.0
    assert abs(i - 52.0 * DEG) * ra < 1000.0


def test_a_plane_change_beyond_90_deg_is_refused_at_once():
    target = Target("circular", R + 1500e3, R + 1500e3, i_rad=0.0)
    with pytest.raises(ValueError, match=r"target\.i: a plane change of 120\.0 deg is beyond"):
        plan_campaign(scenario(1500, 1500, target, vehicle(1e5), i_deg=120.0))


@pytest.mark.parametrize("model", ["two-body", "two-body+J2"])
def test_geostationary_insertion_with_a_400_n_engine(model):
    # transfer orbit 250 x 35786 km at 7 deg, apoapsis on the ascending node; an equatorial
    # circular target: the inclination has a corner at zero, and the long apoapsis burn must
    # sit on the node and still circularise (see _fly_plane_burn, "three" and "four")
    bus = Vehicle("bus", 620.0, 520.0, (Thruster(1, 400.0, 318.0),), max_burn_duration_s=4800.0,
                  max_burn_arc_rad=40 * DEG)
    target = Target("circular", GEO, GEO, i_rad=0.0)
    p = plan_campaign(scenario(250, GEO / 1e3 - R / 1e3, target, bus, model=model, i_deg=7.0,
                               argp_deg=180.0, nu_deg=20.0))
    assert p.feasible
    assert abs(p.final_periapsis_radius_m - GEO) < 100.0 and abs(p.final_apoapsis_radius_m - GEO) < 100.0
    assert p.final_i_rad * GEO < 100.0                       # out-of-plane metres
    last = p.burns[-1]
    assert last.duration_s > 3000.0                          # a long burn: close to an hour
    assert abs(last.centre_direction[2]) < 1e-6              # centred on the equator crossing
    assert not [w for w in p.warnings if "miss" in w]


def test_the_station_entry_example_scenario():
    # profiles/scenarios/station_entry.toml (our own example), through the command line
    import json
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    exe = str(Path(sys.executable).parent / "burndesk")
    proc = subprocess.run([exe, "plan", str(root / "profiles" / "scenarios" / "station_entry.toml"), "--json"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    assert doc["feasible"] and not [w for w in doc["warnings"] if "miss" in w]
    assert abs(doc["final"]["periapsis_alt_km"] - 35786.0) < 0.1 and abs(doc["final"]["apoapsis_alt_km"] - 35786.0) < 0.1
    assert abs(doc["final"]["i_deg"]) < 1e-3
