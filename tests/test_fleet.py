"""Fleet planning (``mechanics.fleet``, ``console.fleet_file``, ``burndesk fleet``).

What is checked, and against what:

* The vectorised plan against the single-spacecraft code under a two-body model:
  ``mechanics.planner.plan_campaign`` (which flies every burn numerically) on the same inputs
  gives the same legs, split counts and apsides; impulsive delta-v, mass, duration and timing
  agree within tolerances built from the physics of what the fleet plan leaves out (see
  :func:`check_against_planner`).
* Per-leg impulsive delta-v against ``mechanics.impulsive`` (``apsis_burn_dv`` along the
  scalar ``planner.design_legs``, ``hohmann``), the split rule and the intermediate goals
  against the scalar ``rocket`` / ``impulsive`` functions, first apsis times against
  ``kepler.time_to_anomaly``.
* Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed. (2013), Ex. 6-1 (from
  memory): Hohmann transfer from 191.34411 km to 35781.34857 km altitude with mu = 398600.4418
  km^3/s^2 and R = 6378.137 km: dv_a = 2.457038 km/s, dv_b = 1.478187 km/s.  Half the transfer
  period from Kepler's third law, T = 2 pi sqrt(a^3 / mu).
* Earth GM 3.986004418e14 m^3/s^2 and radius 6378137 m: WGS 84, NIMA TR8350.2, 3rd ed. (2000).
* UTC strings against ``console.timeutil.format_utc`` and Python's ``datetime``.
* Bad rows, CSV round trips and the command line end to end.
"""

from __future__ import annotations

import csv
import math
import os
import subprocess
import sys
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from console.fleet_file import (QUEUE_HEADER, SUMMARY_HEADER, output_paths, plan_table, read_fleet,
                                run_fleet, utc_strings)
from console.timeutil import format_utc, parse_utc
from mechanics.bodies import Body
from mechanics.elements import Elements, apsides_to_elements, elements_to_rv, rv_to_elements
from mechanics.fleet import (APSIS_NAMES, TARGET_CODE, FleetInput, FleetInputError, plan_fleet)
from mechanics.impulsive import apsis_burn_dv, hohmann, opposite_apsis_after, vis_viva_speed
from mechanics.kepler import time_to_anomaly
from mechanics.planner import CIRCULAR_START_E, SPLIT_MARGIN, _leg_radii, design_legs, plan_campaign
from mechanics.rocket import burn_duration, propellant_for_dv, time_to_half_dv
from mechanics.scenario import PlanOptions, Scenario, Target
from mechanics.vehicle import Thruster, Vehicle

ROOT = Path(__file__).resolve().parents[1]
EXE = Path(sys.executable).parent / "burndesk"
EARTH = Body("earth", 3.986004418e14, 6378137.0, 1.0826298213e-3, min_safe_alt_m=200e3)
R = EARTH.radius_m
MU = EARTH.mu_m3_s2
EPOCH = "2027-03-14T06:00:00Z"
EPOCH_S = datetime(2027, 3, 14, 6, tzinfo=timezone.utc).timestamp()
DEG = math.pi / 180.0


@pytest.fixture(autouse=True)
def _default_profiles(monkeypatch):
    monkeypatch.delenv("BURNDESK_PROFILES", raising=False)
    monkeypatch.delenv("BURNDESK_DEBUG", raising=False)


# --------------------------------------------------------------------------- helpers

def scenario(hp_km, ha_km, target, vehicle, *, lead_s=0.0, i_deg=28.5, argp_deg=0.0, nu_deg=0.0):
    el = apsides_to_elements(R + hp_km * 1e3, R + ha_km * 1e3, i_deg * DEG, 0.4, argp_deg * DEG, nu_deg * DEG)
    r, v = elements_to_rv(el, MU)
    return Scenario("t", EARTH, EPOCH_S, tuple(r), tuple(v), "two-body", vehicle, target,
                    PlanOptions("inertial", "auto", lead_s))


def fleet_input(scenarios, masses=None) -> FleetInput:
    """The FleetInput of a list of scenarios (one spacecraft each)."""
    def col(fn):
        return np.array([fn(sc) for sc in scenarios], dtype=float)

    def opt(x):
        return math.nan if x is None else x

    return FleetInput(
        epoch_s=col(lambda sc: sc.epoch_s), r_m=np.array([sc.r_m for sc in scenarios], dtype=float),
        v_m_s=np.array([sc.v_m_s for sc in scenarios], dtype=float), mu_m3_s2=col(lambda sc: sc.body.mu_m3_s2),
        body_radius_m=col(lambda sc: sc.body.radius_m),
        target_code=np.array([TARGET_CODE[sc.target.kind] for sc in scenarios]),
        target_periapsis_radius_m=col(lambda sc: opt(sc.target.periapsis_radius_m)),
        target_apoapsis_radius_m=col(lambda sc: opt(sc.target.apoapsis_radius_m)),
        target_via_radius_m=col(lambda sc: opt(sc.target.via_radius_m)),
        thrust_n=col(lambda sc: sc.vehicle.thrust_n), mdot_kg_s=col(lambda sc: sc.vehicle.mdot_kg_s),
        mass_kg=col(lambda sc: sc.vehicle.wet_mass_kg) if masses is None else np.asarray(masses, float),
        dry_mass_kg=col(lambda sc: sc.vehicle.dry_mass_kg), unusable_kg=col(lambda sc: sc.vehicle.unusable_kg),
        reserve_kg=col(lambda sc: sc.vehicle.reserve_kg),
        max_burn_duration_s=col(lambda sc: sc.vehicle.max_burn_duration_s),
        max_burn_arc_rad=col(lambda sc: sc.vehicle.max_burn_arc_rad),
        lead_time_s=col(lambda sc: sc.options.lead_time_s),
    )


def burns_of(plan, k):
    s = slice(int(plan.first_burn[k]), int(plan.first_burn[k] + plan.burn_count[k]))
    return {name: getattr(plan, name)[s] for name in (
        "leg", "apsis", "earliest", "sense", "apsis_time_s", "ignition_s", "cutoff_s", "duration_s",
        "dv_m_s", "propellant_kg", "mass_before_kg", "goal_radius_m", "burn_radius_m", "arc_rad",
        "feasible", "within_limits")}


SMALL = Vehicle("smallsat", 200.0, 40.0, (Thruster(2, 1.0, 220.0),), max_burn_duration_s=900.0,
                max_burn_arc_rad=30 * DEG)
BUS = Vehicle("bus", 620.0, 520.0, (Thruster(1, 400.0, 318.0),), unusable_kg=6.0, reserve_kg=25.0,
              max_burn_duration_s=4800.0, max_burn_arc_rad=40 * DEG)
BIG = Vehicle("big", 1000.0, 4000.0, (Thruster(1, 4000.0, 318.0),), max_burn_duration_s=1800.0,
              max_burn_arc_rad=20 * DEG)


def circ(alt_km):
    return Target("circular", R + alt_km * 1e3, R + alt_km * 1e3)


CASES = {
    "circular raise, split": scenario(400, 420, circ(600), SMALL, argp_deg=10, nu_deg=200),
    "apsides, split": scenario(400, 420, Target("apsides", R + 450e3, R + 800e3), SMALL, nu_deg=90),
    "apoapsis, lead time": scenario(400, 420, Target("apoapsis", None, R + 700e3), SMALL, lead_s=3000.0),
    "periapsis lowered": scenario(500, 560, Target("periapsis", R + 300e3, None), SMALL, nu_deg=300),
    "circular start": scenario(500, 500, circ(700), SMALL, lead_s=1234.0, nu_deg=40),
    "GTO apogee burn": scenario(250, 35786, circ(35786), BUS, argp_deg=178, nu_deg=20, lead_s=3600.0),
    "bi-elliptic": scenario(500, 500, Target("bielliptic", R + 20000e3, R + 20000e3, R + 60000e3), BIG),
}


def check_against_planner(sc, fleet_burns):
    """The fleet burns of one spacecraft against ``plan_campaign`` on the same two-body scenario.

    Tolerances, from what the fleet plan leaves out (the planner flies each burn):

    * legs, apsides, split counts: identical (same design rule, same inputs);
    * mass before a burn: the planner spends its finite loss (dv / impulsive dv - 1) on every
      burn, so it is lighter by at most that loss times the propellant of the earlier burns
      (factor 1.5 for the loss's growth over a burn);
    * impulsive delta-v: the planner computes it on its flown orbit, whose apsides differ from
      the fleet's impulsive ones (its goal tolerance, finite-burn drift of the burn point), and
      towards goals derived from that orbit (and trimmed); the tolerance is the sensitivity of
      ``apsis_burn_dv`` to each of the three radii times its difference (factor 1.5 for the
      linearisation);
    * duration: longer by the finite loss, shorter by the lower mass, plus 0.2 % for the
      rocket equation's curvature;
    * apsis time: the planner's later passes follow its flown orbit, whose period differs by
      1.5 P da / a per pass (accumulated); an earliest-moment burn is centred half its
      delta-v after ignition, which moves with the duration (d t_pre / dD = sqrt(m0/m1) / 2 <= 1
      for these mass ratios); 2 s for the turn of the apsis line by finite burns and the
      planner's trim of the second-last leg (measured up to 1.5 s, in the bi-elliptic case);
    * ignition: the apsis tolerance plus the duration difference (ignition = apsis - t_pre),
      plus the planner's centre shift of a last burn to a round orbit (``centre_shift_s``).
    """
    plan = plan_campaign(sc)
    b = fleet_burns
    assert len(plan.burns) == len(b["leg"])
    assert [p.leg for p in plan.burns] == b["leg"].tolist()
    assert [p.apsis for p in plan.burns] == [APSIS_NAMES[a] for a in b["apsis"]]
    assert [p.sense for p in plan.burns] == b["sense"].tolist()
    el = rv_to_elements(np.array(sc.r_m), np.array(sc.v_m_s), MU)
    prev_p = (el.periapsis_radius_m, el.apoapsis_radius_m)
    prev_f = prev_p
    drift_s = 0.0
    loss_kg = 0.0
    for k, p in enumerate(plan.burns):
        loss = p.dv_m_s / p.impulsive_dv_m_s - 1.0
        assert 0.0 <= loss < 0.05
        # mass
        assert abs(p.mass_before_kg - b["mass_before_kg"][k]) <= 1.5 * loss_kg + 1e-9
        loss_kg += loss * p.propellant_kg
        # impulsive delta-v
        at_apo = p.apsis == "apoapsis"
        rb_f = b["burn_radius_m"][k]
        ro_f = prev_f[0] if at_apo else prev_f[1]
        if b["earliest"][k]:
            ro_f = 2.0 * el.a_m - rb_f
        goal = b["goal_radius_m"][k]
        h = 1.0
        s_b = abs(apsis_burn_dv(rb_f + h, ro_f, goal, MU) - apsis_burn_dv(rb_f, ro_f, goal, MU)) / h
        s_o = abs(apsis_burn_dv(rb_f, ro_f + h, goal, MU) - apsis_burn_dv(rb_f, ro_f, goal, MU)) / h
        s_g = abs(apsis_burn_dv(rb_f, ro_f, goal + h, MU) - apsis_burn_dv(rb_f, ro_f, goal, MU)) / h
        d_b = abs((prev_p[1] if at_apo else prev_p[0]) - (prev_f[1] if at_apo else prev_f[0]))
        d_o = abs((prev_p[0] if at_apo else prev_p[1]) - (prev_f[0] if at_apo else prev_f[1]))
        if b["earliest"][k]:
            d_b = d_o = 0.0  # same start orbit, same burn point
        d_g = abs(p.goal_radius_m - goal)  # its goals come from its own orbit, and are trimmed
        tol_dv = 1.5 * (s_b * d_b + s_o * d_o + s_g * d_g) + 1e-6 * p.impulsive_dv_m_s
        assert abs(p.impulsive_dv_m_s - b["dv_m_s"][k]) <= tol_dv, (k, p.impulsive_dv_m_s, b["dv_m_s"][k], tol_dv)
        # duration
        D = b["duration_s"][k]
        m_rel = abs(p.mass_before_kg / b["mass_before_kg"][k] - 1.0)
        dD = abs(p.duration_s - D)
        assert dD <= D * (loss + m_rel + 2e-3), (k, p.duration_s, D, loss)
        # timing
        tol_t = 2.0 + dD + drift_s
        assert abs(p.apsis_time_s - b["apsis_time_s"][k]) <= tol_t, (k, p.apsis_time_s - b["apsis_time_s"][k], tol_t)
        # the planner may time a last burn's centre off the apsis (``centre_shift_s``: it holds
        # the line of apsides of a round final orbit); the fleet plan centres on the apsis
        assert abs(p.ignition_s - b["ignition_s"][k]) <= tol_t + dD + abs(p.centre_shift_s), \
            (k, p.ignition_s - b["ignition_s"][k])
        assert p.ignition_s >= sc.epoch_s + sc.options.lead_time_s - 1e-6
        # orbits after the burn, for the next one
        prev_p = (p.after_periapsis_radius_m, p.after_apoapsis_radius_m)
        prev_f = (min(rb_f, goal), max(rb_f, goal))
        a_f, a_p = 0.5 * sum(prev_f), 0.5 * sum(prev_p)
        drift_s += 1.5 * 2.0 * math.pi * math.sqrt(a_f ** 3 / MU) * abs(a_p - a_f) / a_f
    return plan


@pytest.mark.parametrize("name", list(CASES))
def test_agrees_with_the_single_planner_under_two_body(name):
    sc = CASES[name]
    fp = plan_fleet(fleet_input([sc]))
    plan = check_against_planner(sc, burns_of(fp, 0))
    assert bool(fp.craft_feasible[0]) == plan.feasible
    # limit breaks: the fleet flags the burns the planner warns about (same split rule)
    warned = sum("exceeds the vehicle limits" in w for w in plan.warnings)
    assert int(np.count_nonzero(~fp.within_limits)) == warned


def test_planning_together_equals_planning_one_by_one():
    scs = list(CASES.values())
    together = plan_fleet(fleet_input(scs))
    for k, sc in enumerate(scs):
        alone = plan_fleet(fleet_input([sc]))
        a, b = burns_of(together, k), burns_of(alone, 0)
        for key in a:
            np.testing.assert_array_equal(a[key], b[key], err_msg=f"{key} of spacecraft {k}")
        assert together.margin_kg[k] == alone.margin_kg[0]


def test_leg_delta_v_matches_mechanics_impulsive():
    for name, sc in CASES.items():
        fp = plan_fleet(fleet_input([sc]))
        b = burns_of(fp, 0)
        el = rv_to_elements(np.array(sc.r_m), np.array(sc.v_m_s), MU)
        rp, ra = el.periapsis_radius_m, el.apoapsis_radius_m
        circular = el.e < CIRCULAR_START_E
        legs = design_legs(rp, ra, circular, sc.target, MU)
        assert sorted(set(b["leg"].tolist())) == list(range(len(legs))), name
        apsides = (rp, ra)
        for g, leg in enumerate(legs):
            r_b, r_o = _leg_radii(leg, apsides)
            expected = abs(apsis_burn_dv(r_b, r_o, leg.goal_radius_m, MU))
            got = float(np.sum(b["dv_m_s"][b["leg"] == g]))
            # a split leg is N equal slices of the leg's speed change at the same radius
            assert got == pytest.approx(expected, rel=1e-9, abs=1e-9), (name, g)
            apsides = tuple(sorted((r_b, leg.goal_radius_m)))
    sc = CASES["circular start"]
    h = hohmann(R + 500e3, R + 700e3, MU)
    b = burns_of(plan_fleet(fleet_input([sc])), 0)
    assert np.sum(b["dv_m_s"][b["leg"] == 0]) == pytest.approx(h.dv1_m_s, abs=1e-6)
    assert np.sum(b["dv_m_s"][b["leg"] == 1]) == pytest.approx(h.dv2_m_s, abs=1e-6)


# --------------------------------------------------------------------------- properties

KINDS = ("circular", "apsides", "apoapsis", "periapsis", "bielliptic")


def random_row(hp, dh, kind, t1, t2, nu, thrust, limit_s, limit_deg, lead):
    ha = hp + dh
    if kind == "circular":
        target = circ(t1)
    elif kind == "apsides":
        lo, hi = sorted((t1, t2))
        target = Target("apsides", R + lo * 1e3, R + hi * 1e3)
    elif kind == "apoapsis":
        target = Target("apoapsis", None, R + max(t1, hp + 30.0) * 1e3)
    elif kind == "periapsis":
        target = Target("periapsis", R + min(t1, ha - 0.01) * 1e3, None)
    else:
        target = Target("bielliptic", R + t1 * 1e3, R + t1 * 1e3, R + (max(t1, ha) + t2 + 100.0) * 1e3)
    veh = Vehicle("v", 300.0, 200.0, (Thruster(1, thrust, 230.0),), max_burn_duration_s=limit_s,
                  max_burn_arc_rad=limit_deg * DEG)
    return scenario(hp, ha, target, veh, lead_s=lead, nu_deg=nu, argp_deg=33.0)


row_strategy = st.tuples(
    st.floats(250.0, 1500.0), st.sampled_from([0.0, 0.5, 3.0, 40.0, 900.0]), st.sampled_from(KINDS),
    st.floats(250.0, 2000.0), st.floats(250.0, 2000.0), st.floats(0.0, 359.0),
    st.floats(20.0, 500.0), st.sampled_from([600.0, 3600.0, math.inf]), st.sampled_from([10.0, 30.0, 90.0]),
    st.floats(0.0, 20000.0),
)


@settings(max_examples=25, deadline=None)
@given(st.lists(row_strategy, min_size=1, max_size=12))
def test_fleet_follows_the_scalar_rules(rows):
    """Split counts, goals, durations, apsis times and ordering from the scalar functions."""
    scs = [random_row(*r) for r in rows]
    fp = plan_fleet(fleet_input(scs))
    for k, sc in enumerate(scs):
        b = burns_of(fp, k)
        veh = sc.vehicle
        el = rv_to_elements(np.array(sc.r_m), np.array(sc.v_m_s), MU)
        rp, ra = el.periapsis_radius_m, el.apoapsis_radius_m
        circular = el.e < CIRCULAR_START_E
        legs = design_legs(rp, ra, circular, sc.target, MU)
        mass = veh.wet_mass_kg
        apsides = (rp, ra)
        row = 0
        for g, leg in enumerate(legs):
            r_b, r_o = _leg_radii(leg, apsides)
            dv_leg = apsis_burn_dv(r_b, r_o, leg.goal_radius_m, MU)
            # the split rule: the smallest N whose first (heaviest, so longest) burn of dv/N
            # keeps within both limits, its arc at the burn point's faster angular rate (v/r) of
            # the leg's start and end orbits
            rate = max(vis_viva_speed(r_b, 0.5 * sum(apsides), MU),
                       vis_viva_speed(r_b, 0.5 * (r_b + leg.goal_radius_m), MU)) / r_b
            lim_d = veh.max_burn_duration_s * SPLIT_MARGIN
            lim_arc = veh.max_burn_arc_rad * SPLIT_MARGIN
            n = 1
            while True:
                first = burn_duration(veh.thrust_n, veh.isp_s, mass, abs(dv_leg) / n)
                if first <= lim_d * (1 + 1e-12) and first * rate <= lim_arc * (1 + 1e-12):
                    break
                n += 1
            assert int(np.count_nonzero(b["leg"] == g)) == n
            for j in range(1, n):
                goal = opposite_apsis_after(r_b, r_o, dv_leg * j / n, MU)
                assert b["goal_radius_m"][row + j - 1] == pytest.approx(goal, rel=1e-12, abs=1e-6)
            assert b["goal_radius_m"][row + n - 1] == leg.goal_radius_m
            for j in range(n):
                m0 = b["mass_before_kg"][row + j]
                assert m0 == pytest.approx(mass, rel=1e-12)
                prop = propellant_for_dv(veh.isp_s, m0, b["dv_m_s"][row + j])
                assert b["propellant_kg"][row + j] == pytest.approx(prop, rel=1e-9, abs=1e-12)
                assert b["duration_s"][row + j] == pytest.approx(prop / veh.mdot_kg_s, rel=1e-9, abs=1e-9)
                mass -= prop
            row += n
            apsides = tuple(sorted((b["burn_radius_m"][row - 1], leg.goal_radius_m)))
        assert row == len(b["leg"])
        if row:
            earliest = sc.epoch_s + sc.options.lead_time_s
            assert b["ignition_s"][0] >= earliest - 1e-6
            assert np.all(b["ignition_s"][1:] >= b["cutoff_s"][:-1] - 1e-6)
            if not b["earliest"][0]:
                # the first burn is centred on an apsis passage of the start orbit (Kepler)
                nu_t = 0.0 if b["apsis"][0] == 0 else math.pi
                first = sc.epoch_s + time_to_anomaly(el, nu_t, MU)
                period = 2.0 * math.pi * math.sqrt(el.a_m ** 3 / MU)
                turns = (b["apsis_time_s"][0] - first) / period
                assert turns == pytest.approx(round(turns), abs=1e-6) and round(turns) >= 0
                # ... the first one that leaves room for the part of the burn before the apsis
                assert b["ignition_s"][0] - period < earliest
            else:
                assert b["ignition_s"][0] == pytest.approx(earliest, abs=1e-6)
            # half-delta-v centring: ignition = apsis - time to deliver half the delta-v
            t_pre = [time_to_half_dv(veh.thrust_n, veh.isp_s, m0, dv)
                     for m0, dv in zip(b["mass_before_kg"], b["dv_m_s"])]
            np.testing.assert_allclose(b["apsis_time_s"] - b["ignition_s"], t_pre, rtol=1e-9, atol=1e-6)
            # later burns: the first usable passage of their apsis on the orbit the burn before
            # left (apsides: burn point and goal; period from Kepler's third law)
            for j in range(row - 1):
                rb, goal = b["burn_radius_m"][j], b["goal_radius_m"][j]
                period = 2.0 * math.pi * math.sqrt((0.5 * (rb + goal)) ** 3 / MU)
                same_point = b["apsis"][j + 1] == (0 if rb <= goal else 1)
                turns = (b["apsis_time_s"][j + 1] - b["apsis_time_s"][j]) / period - (0.0 if same_point else 0.5)
                assert turns == pytest.approx(round(turns), abs=1e-6) and round(turns) >= 0
                not_before = max(b["cutoff_s"][j], earliest)
                assert b["ignition_s"][j + 1] >= not_before - 1e-6
                assert b["ignition_s"][j + 1] - period < not_before
        used = float(np.sum(b["propellant_kg"]))
        assert fp.propellant_used_kg[k] == pytest.approx(used, rel=1e-12, abs=1e-12)
        usable = veh.propellant_kg - veh.unusable_kg
        assert bool(fp.craft_feasible[k]) == (used <= usable + 1e-9)
        cum = np.cumsum(b["propellant_kg"])
        np.testing.assert_array_equal(b["feasible"], cum <= usable + 1e-9)


# --------------------------------------------------------------------------- refusals in mechanics

def test_refusals_name_the_spacecraft_and_field():
    good = CASES["circular raise, split"]
    r = np.array(good.r_m)
    hyper = good.with_state(good.epoch_s, r, 1.5 * np.array(good.v_m_s))
    low_target = replace(good, target=Target("apoapsis", None, R + 300e3))
    for bad, field, words in ((hyper, "state", "hyperbolic"), (low_target, "target", "below the current periapsis")):
        with pytest.raises(FleetInputError) as info:
            plan_fleet(fleet_input([good, good, bad]))
        assert info.value.index == 2 and info.value.field == field and words in info.value.reason
    with pytest.raises(FleetInputError) as info:
        plan_fleet(fleet_input([good, good], masses=[good.vehicle.wet_mass_kg, 10.0]))
    assert info.value.index == 1 and info.value.field == "mass"
    # the single planner's refusals, same wording
    for veh, words in ((replace(SMALL, max_burn_duration_s=1.0), "burns to keep within"),
                       (Vehicle("weak", 200.0, 40.0, (Thruster(1, 1e-4, 220.0),)), "longer than one orbit")):
        bad = replace(good, vehicle=veh)
        with pytest.raises(FleetInputError) as info:
            plan_fleet(fleet_input([good, bad]))
        assert info.value.index == 1 and info.value.field == "vehicle" and words in info.value.reason
        with pytest.raises(ValueError, match=words):
            plan_campaign(bad)


def test_already_at_target_and_infeasible_rows():
    at_target = scenario(600, 600, circ(600), SMALL)
    thirsty = scenario(400, 400, circ(2000), SMALL)
    fp = plan_fleet(fleet_input([at_target, thirsty]))
    assert fp.burn_count[0] == 0 and fp.craft_feasible[0] and fp.propellant_used_kg[0] == 0.0
    b = burns_of(fp, 1)
    assert not fp.craft_feasible[1]
    k = int(np.argmin(b["feasible"]))  # the first burn that no longer fits
    usable = SMALL.propellant_kg - SMALL.unusable_kg
    assert np.sum(b["propellant_kg"][:k]) <= usable < np.sum(b["propellant_kg"][:k + 1])
    assert not b["feasible"][k:].any()


# --------------------------------------------------------------------------- files

HEADER = ("id,epoch_utc,vehicle,periapsis_alt_km,apoapsis_alt_km,i_deg,raan_deg,argp_deg,nu_deg,"
          "target_kind,target_alt_km,target_periapsis_alt_km,target_apoapsis_alt_km,target_via_alt_km,"
          "lead_time_s")
ROWS = [
    f"wren-a,{EPOCH},wren3,380,402,97.6,131,48,300,circular,560,,,,2700",
    f"wren-b,{EPOCH},wren3,500,500,97.6,131,0,10,apsides,,450,700,,0",
    "heron-1,2027-03-15T00:00:00Z,heron,250,35786,7,20,178,0,periapsis,35786,,,,3600",
]
NOLIMIT = """\
name = "NOLIMIT"
dry_mass = "1000 kg"
propellant = "9000 kg"
[[thrusters]]
count = 1
thrust = "20000 N"
isp = "320 s"
"""


def write(tmp_path, rows, header=HEADER, name="fleet.csv"):
    path = tmp_path / name
    path.write_text("\n".join([header, *rows]) + "\n")
    return path


def read_csv(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_vallado_6_1_row(tmp_path):
    (tmp_path / "nolimit.toml").write_text(NOLIMIT)
    path = write(tmp_path, [f"geo,{EPOCH},./nolimit.toml,191.34411,191.34411,28.5,0,0,0,circular,"
                            "35781.34857,,,,0"])
    run = run_fleet(path)
    assert run.feasible
    q = read_csv(tmp_path / "fleet.queue.csv")
    assert [r["leg"] for r in q] == ["1", "2"]  # no limits: one burn per leg
    # Vallado (2013) Ex. 6-1, from memory: 2.457038 and 1.478187 km/s (rounded to 1 mm/s)
    assert float(q[0]["dv_m_s"]) == pytest.approx(2457.038, abs=1e-3)
    assert float(q[1]["dv_m_s"]) == pytest.approx(1478.187, abs=1e-3)
    assert q[0]["apsis"] == "periapsis" and q[1]["apsis"] == "apoapsis"
    # burn centres half a transfer period apart (Kepler's third law)
    p = run.plan
    a_t = R + 0.5 * (191.34411e3 + 35781.34857e3)
    half = math.pi * math.sqrt(a_t ** 3 / MU)
    assert p.apsis_time_s[1] - p.apsis_time_s[0] == pytest.approx(half, abs=1e-3)
    assert p.ignition_s[0] == pytest.approx(EPOCH_S, abs=1e-9)  # circular start: at once
    s = read_csv(tmp_path / "fleet.summary.csv")
    assert float(s[0]["final_periapsis_alt_km"]) == pytest.approx(35781.34857, abs=1e-6)
    assert float(s[0]["final_apoapsis_alt_km"]) == pytest.approx(35781.34857, abs=1e-6)


def test_three_state_forms_give_the_same_plan(tmp_path):
    hp, ha, i, raan, argp, nu = 380.0, 402.0, 97.6, 131.0, 48.0, 300.0
    a_km = 6378.137 + 0.5 * (hp + ha)
    e = (ha - hp) / (2 * 6378.137 + hp + ha)
    r, v = elements_to_rv(Elements(a_km * 1e3, e, i * DEG, raan * DEG, argp * DEG, nu * DEG), MU)
    tail = "circular,560,,,,2700"
    t_head = "target_kind,target_alt_km,target_periapsis_alt_km,target_apoapsis_alt_km,target_via_alt_km,lead_time_s"
    files = {
        "apsides": write(tmp_path, [f"s,{EPOCH},wren3,{hp},{ha},{i},{raan},{argp},{nu},{tail}"], name="a.csv"),
        "elements": write(tmp_path, [f"s,{EPOCH},wren3,{a_km!r},{e!r},{i},{raan},{argp},{nu},{tail}"],
                          header=f"id,epoch_utc,vehicle,a_km,e,i_deg,raan_deg,argp_deg,nu_deg,{t_head}", name="e.csv"),
        "vector": write(tmp_path, [f"s,{EPOCH},wren3," + ",".join(repr(float(x) / 1e3) for x in [*r, *v]) + f",{tail}"],
                        header=f"id,epoch_utc,vehicle,x_km,y_km,z_km,vx_km_s,vy_km_s,vz_km_s,{t_head}", name="v.csv"),
    }
    plans = {form: plan_table(read_fleet(path)) for form, path in files.items()}
    assert read_fleet(files["vector"]).form == "vector"
    ref = plans["apsides"]
    assert ref.burn_total == 10  # as `burndesk plan` on the demo scenario, which is this orbit
    for form, p in plans.items():
        assert p.burn_total == ref.burn_total, form
        np.testing.assert_allclose(p.ignition_s, ref.ignition_s, rtol=0, atol=1e-3)
        np.testing.assert_allclose(p.dv_m_s, ref.dv_m_s, rtol=1e-9, atol=1e-9)


def test_queue_and_summary_round_trip(tmp_path):
    path = write(tmp_path, ROWS + ['"odd, ""quoted"" id",2027-03-14T06:00:00Z,wren3,600,600,0,0,0,0,circular,600,,,,0'])
    run = run_fleet(path, out=tmp_path / "out.csv")
    table, plan = run.table, run.plan
    assert [p.name for p in run.written] == ["out.csv", "out.summary.csv"]
    q = read_csv(tmp_path / "out.csv")
    assert list(q[0]) == QUEUE_HEADER and len(q) == plan.burn_total
    for k, row in enumerate(q):
        assert row["id"] == table.ids[plan.craft[k]]
        assert int(row["burn"]) == plan.number[k] and int(row["leg"]) == plan.leg[k] + 1
        assert row["apsis"] == APSIS_NAMES[plan.apsis[k]]
        assert row["ignition_utc"] == format_utc(plan.ignition_s[k])
        assert abs(parse_utc(row["ignition_utc"]) - plan.ignition_s[k]) <= 0.5e-3 + 1e-9
        assert float(row["duration_s"]) == pytest.approx(plan.duration_s[k], abs=0.5e-3)
        assert float(row["dv_m_s"]) == pytest.approx(plan.dv_m_s[k], abs=0.5e-6)
        assert float(row["propellant_kg"]) == pytest.approx(plan.propellant_kg[k], abs=0.5e-6)
        assert float(row["mass_before_kg"]) == pytest.approx(plan.mass_before_kg[k], abs=0.5e-6)
        assert row["sense"] == ("prograde" if plan.sense[k] > 0 else "retrograde")
        assert row["feasible"] == ("true" if plan.feasible[k] else "false")
    s = read_csv(tmp_path / "out.summary.csv")
    assert list(s[0]) == SUMMARY_HEADER and [r["id"] for r in s] == table.ids
    for k, row in enumerate(s):
        mine = [r for r in q if r["id"] == row["id"]]
        assert int(row["burns"]) == len(mine)
        assert float(row["propellant_used_kg"]) == pytest.approx(sum(float(r["propellant_kg"]) for r in mine),
                                                                  abs=1e-5)
        if mine:
            assert row["first_ignition_utc"] == mine[0]["ignition_utc"]
    odd = s[-1]
    assert odd["id"] == 'odd, "quoted" id' and odd["burns"] == "0" and "already meets the target" in odd["note"]


@pytest.mark.parametrize("t_s", [0.0, EPOCH_S, EPOCH_S + 0.0004, EPOCH_S + 0.9996, -86400.0 * 365 * 30 + 0.123,
                                 4102444799.9994, 1e9 + 0.25])
def test_utc_strings_match_format_utc(t_s):
    assert utc_strings(np.array([t_s]))[0] == format_utc(t_s)
    back = datetime.strptime(utc_strings(np.array([t_s]))[0], "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=timezone.utc)
    assert abs(back.timestamp() - t_s) <= 0.5e-3 + 1e-6


def test_utc_strings_refuse_non_finite_times():
    with pytest.raises(ValueError, match="not finite"):
        utc_strings(np.array([1.0, math.nan]))


def test_output_paths():
    assert output_paths("x/fleet.csv") == (Path("x/fleet.queue.csv"), Path("x/fleet.summary.csv"))
    assert output_paths("x/fleet.csv", "y/q.csv") == (Path("y/q.csv"), Path("y/q.summary.csv"))
    assert output_paths("x/f.csv", "y/a.queue.csv") == (Path("y/a.queue.csv"), Path("y/a.summary.csv"))


def good_row(**change):
    cells = dict(zip(HEADER.split(","), ROWS[0].split(",")))
    cells.update(change)
    return ",".join(cells.values())


BAD = [
    # (header, rows, words that must appear in the message)
    (HEADER, [ROWS[0], ROWS[0].replace("wren-a", "wren-b"), ROWS[0]],
     ["line 4", "row 3", "column id", "repeats the id of line 2"]),
    (HEADER, [ROWS[0], good_row(id="x", periapsis_alt_km="380 km")], ["line 3", "column periapsis_alt_km", "plain number"]),
    (HEADER, [good_row(epoch_utc="2027-03-14T06:00:00")], ["line 2", "column epoch_utc", "no time zone"]),
    (HEADER, ["# a comment", ",,,", "", good_row(target_kind="geo")], ["line 5", "row 1", "column target_kind"]),
    (HEADER, [good_row(target_kind="geo")], ["column target_kind", "'geo' is not known"]),
    (HEADER, [good_row(target_periapsis_alt_km="400")], ["column target_periapsis_alt_km", "not used by kind"]),
    (HEADER, [good_row(target_alt_km="")], ["column target_alt_km", "missing value"]),
    (HEADER, [good_row(apoapsis_alt_km="300")], ["column apoapsis_alt_km", "below periapsis"]),
    (HEADER, [good_row(periapsis_alt_km="-5")], ["column periapsis_alt_km", "inside the body"]),
    (HEADER, [good_row(i_deg="200")], ["column i_deg", "between 0 and 180"]),
    (HEADER, [good_row(lead_time_s="nan")], ["column lead_time_s", "finite"]),
    (HEADER, [good_row(lead_time_s="-1")], ["column lead_time_s", "negative"]),
    (HEADER, [good_row(vehicle="nosuch")], ["column vehicle", "no vehicle profile named 'nosuch'"]),
    (HEADER, [good_row(target_kind="periapsis", target_alt_km="900")],
     ["column target_kind, target_alt_km", "above the current apoapsis"]),
    (HEADER, [good_row(), "x,1"], ["line 3", "has 2 cells"]),
    (HEADER + ",colour", [good_row() + ",red"], ["column colour", "not known"]),
    (HEADER.replace("vehicle,", ""), [ROWS[0].replace("wren3,", "")], ["column vehicle", "missing from the header"]),
    (HEADER + ",a_km", [good_row() + ",7000"], ["more than one state form"]),
    ("id,epoch_utc,vehicle,x_km,y_km,z_km,vx_km_s,vy_km_s,vz_km_s,target_kind,target_alt_km",
     [f"h,{EPOCH},wren3,7000,0,0,0,12,0,circular,600"], ["column x_km, y_km", "hyperbolic"]),
]


@pytest.mark.parametrize("header, rows, words", BAD)
def test_bad_rows_are_named(tmp_path, header, rows, words):
    path = write(tmp_path, rows, header=header)
    with pytest.raises(ValueError) as info:
        plan_table(read_fleet(path))
    msg = str(info.value)
    assert "\n" not in msg and str(path) in msg
    for w in words:
        assert w in msg, (w, msg)


# --------------------------------------------------------------------------- command line

def run_cli(*args, cwd):
    env = {k: v for k, v in os.environ.items() if k not in ("BURNDESK_PROFILES", "BURNDESK_DEBUG")}
    p = subprocess.run([str(EXE), *map(str, args)], cwd=cwd, env=env, capture_output=True, text=True,
                       timeout=300)
    return p.returncode, p.stdout, p.stderr


def test_cli_end_to_end(tmp_path):
    write(tmp_path, ROWS)
    rc, out, err = run_cli("fleet", "fleet.csv", cwd=tmp_path)
    assert rc == 0, err
    assert "3 spacecraft" in out and "Traceback" not in err
    queue, summary = tmp_path / "fleet.queue.csv", tmp_path / "fleet.summary.csv"
    assert f"wrote {queue.name}" in err and f"wrote {summary.name}" in err
    q = read_csv(queue)
    assert {r["id"] for r in q} == {"wren-a", "wren-b", "heron-1"}
    assert all(r["feasible"] == "true" for r in q)
    first = queue.read_text()
    # refuses to overwrite, one line on stderr, exit 2; --force writes the same plan again
    rc, out, err = run_cli("fleet", "fleet.csv", cwd=tmp_path)
    assert rc == 2 and err.count("\n") == 1 and "already exists" in err and "--force" in err
    rc, _, err = run_cli("fleet", "fleet.csv", "--force", cwd=tmp_path)
    assert rc == 0 and queue.read_text() == first
    # an infeasible spacecraft: exit 3, outputs still written
    write(tmp_path, ROWS + [f"far,{EPOCH},wren3,400,400,0,0,0,0,circular,3000,,,,0"], name="more.csv")
    rc, out, err = run_cli("fleet", "more.csv", "--out", "more-q.csv", cwd=tmp_path)
    assert rc == 3 and "1 infeasible" in out and "far" in out
    s = read_csv(tmp_path / "more-q.summary.csv")
    assert [r["feasible"] for r in s] == ["true", "true", "true", "false"]
    assert "infeasible" in s[-1]["note"]
    # a bad row: exit 2, one line naming the line and column, nothing written
    write(tmp_path, [ROWS[0], good_row(id="x", target_kind="moon")], name="bad.csv")
    rc, out, err = run_cli("fleet", "bad.csv", cwd=tmp_path)
    assert rc == 2 and err.count("\n") == 1 and "line 3" in err and "column target_kind" in err
    assert "Traceback" not in err and not (tmp_path / "bad.queue.csv").exists()
    rc, _, err = run_cli("fleet", "missing.csv", cwd=tmp_path)
    assert rc == 2 and "not found" in err


def test_a_pipe_named_as_the_fleet_file_is_refused_at_once(tmp_path):
    # the shared file reader (console/files.py) refuses a named pipe instead of blocking on it
    import os
    import subprocess
    import sys
    from pathlib import Path

    fifo = tmp_path / "fleet.csv"
    os.mkfifo(fifo)
    exe = str(Path(sys.executable).parent / "burndesk")
    proc = subprocess.run([exe, "fleet", str(fifo)], capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2
    assert "not a regular file" in proc.stderr and "Traceback" not in proc.stderr
