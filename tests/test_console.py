"""The console (Textual) driven as an operator drives it: keys into a running app.

Every test runs the real app headless (``app.run_test``) on a real session file and checks the
app's state (journal entries, the derived view) as well as what the screen shows.  The clock is
frozen so countdowns are deterministic.  Campaigns are two-body (fast replans) except one J2
check of the queue against ``burndesk plan --json``.
"""

from __future__ import annotations

import csv
import html
import json
import math
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from console.app import BurndeskApp, open_or_create
from console.screens import ExportScreen
from console.timeutil import format_duration, format_utc, parse_utc
from mechanics.elements import Elements, apsides_to_elements, elements_to_rv
from mechanics.session.events import BurnRecorded, EntryRetracted, GaugeReadingTaken, StateEntered, TargetSet

ROOT = Path(__file__).resolve().parents[1]
EXE = str(Path(sys.executable).parent / "burndesk")
NOW = parse_utc("2027-03-14T06:10:00Z")
R_EARTH = 6378137.0

#: WREN-3 (profiles/vehicles/wren3.toml) raised 380 x 402 -> 560 km, two-body: nine split burns
TWO_BODY = """
name = "console test"
body = "earth"
vehicle = "wren3"
epoch = "2027-03-14T06:00:00Z"
[state]
periapsis_alt = "380 km"
apoapsis_alt = "402 km"
i = "97.6 deg"
raan = "131.0 deg"
argp = "48.0 deg"
nu = "300.0 deg"
[target]
kind = "circular"
altitude = "560 km"
[options]
model = "two-body"
attitude = "inertial"
lead_time = "45 min"
"""


# --------------------------------------------------------------------------- helpers

def make_scenario(tmp_path, text=TWO_BODY, name="scenario.toml") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def make_session(tmp_path, scenario=None, name="campaign.burn"):
    """A new session file from a scenario; returns the open Session."""
    scenario = scenario or make_scenario(tmp_path)
    session, note = open_or_create(tmp_path / name, scenario)
    assert "created" in note
    return session


def console(session) -> BurndeskApp:
    return BurndeskApp(session, clock=lambda: NOW)


async def settle(pilot, timeout_s: float = 60.0) -> None:
    """Let the replan worker finish and its result reach the widgets."""
    app = pilot.app
    waited = 0.0
    await pilot.pause()
    while app.replanning or app.current_view is None:
        await pilot.pause(0.05)
        waited += 0.05
        assert waited < timeout_s, "replan did not finish"
    await pilot.pause()


def screen_text(app) -> str:
    """The characters on screen (from the app's SVG screenshot)."""
    svg = app.export_screenshot()
    parts = re.findall(r"<text[^>]*>(.*?)</text>", svg, flags=re.S)
    return html.unescape("".join(parts)).replace("\xa0", " ")


async def type_into(pilot, inp, text: str, keys: bool = False) -> None:
    """Focus an input, clear it with keys, then paste ``text`` as a terminal paste does (or type
    it key by key with ``keys=True``)."""
    from textual import events

    inp.focus()
    await pilot.press("end", "ctrl+u")
    if keys:
        await pilot.press(*list(text))
    else:
        pilot.app.post_message(events.Paste(text))
        await pilot.pause()
    assert inp.value == text


async def pick(pilot, cycle, value: str) -> None:
    """Step a choice widget with the right arrow until it shows ``value``."""
    cycle.focus()
    await pilot.pause()
    for _ in range(len(cycle.options)):
        if cycle.value == value:
            return
        await pilot.press("right")
    assert cycle.value == value


def state_input(app, name):
    return app.screen.query_one(f"#state-editor #in-{name}")


def events(session):
    return [e.event for e in session.state.entries]


# --------------------------------------------------------------------------- state entry

STATE_CASES = {
    "apsides": {"periapsis_alt": "390 km", "apoapsis_alt": "412.5 km", "i": "97.6 deg", "raan": "131 deg",
                "argp": "50 deg", "nu": "10 deg"},
    "elements": {"a": "6790 km", "e": "0.0021", "i": "97.55 deg", "raan": "131.2 deg", "argp": "47 deg",
                 "nu": "0.2 rad"},
    "vector": {"r": "-2293.4476 3683.3950 5175.5297 km", "v": "4.3921994 -4.0586434 4.8265951 km/s"},
}


def expected_state(form, mu):
    """The state typed, converted independently of the console's parser."""
    c = STATE_CASES[form]
    if form == "apsides":
        el = apsides_to_elements(R_EARTH + 390e3, R_EARTH + 412.5e3, math.radians(97.6), math.radians(131.0),
                                 math.radians(50.0), math.radians(10.0))
        return elements_to_rv(el, mu)
    if form == "elements":
        el = Elements(6790e3, 0.0021, math.radians(97.55), math.radians(131.2), math.radians(47.0), 0.2)
        return elements_to_rv(el, mu)
    r = np.array([float(x) for x in c["r"].split()[:3]]) * 1e3
    v = np.array([float(x) for x in c["v"].split()[:3]]) * 1e3
    return r, v


@pytest.mark.parametrize("form", ["apsides", "elements", "vector"])
async def test_entering_a_state_in_each_form_records_it_and_replans(tmp_path, form):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            n0 = len(session.state.entries)
            await pick(pilot, app.screen.query_one("#state-editor .form-cycle"), form)
            await type_into(pilot, state_input(app, "epoch"), "2027-03-14T06:20:00Z")
            for k, (name, text) in enumerate(STATE_CASES[form].items()):
                await type_into(pilot, state_input(app, name), text, keys=k == 0)
            await pilot.press("f2")
            await settle(pilot)
            assert len(session.state.entries) == n0 + 1
            ev = events(session)[-1]
            assert isinstance(ev, StateEntered) and ev.form == form
            v = app.current_view
            assert v.latest.source == "state entered"
            assert v.latest.epoch_s == parse_utc("2027-03-14T06:20:00Z")
            r, vel = expected_state(form, v.scenario.body.mu_m3_s2)
            # what was typed, within metres (vector text carries 0.1 m and 0.1 mm/s)
            assert np.allclose(v.latest.r_m, r, atol=1.0, rtol=0.0)
            assert np.allclose(v.latest.v_m_s, vel, atol=1e-3, rtol=0.0)
            # the queue was replanned from the new state
            assert v.next_burn.planned.mass_before_kg == pytest.approx(v.latest.mass_kg)
            assert all(row.planned.ignition_s > v.latest.epoch_s for row in v.rows)
            text = screen_text(app)
            assert "2027-03-14T06:20:00Z" in text
    finally:
        session.close()


async def test_a_state_from_an_orbit_parameter_message(tmp_path):
    # the OPM form: a relative file name is taken beside the session; the message's EPOCH is the
    # epoch; a filled epoch field that disagrees with it is refused beside the field
    from console.opm import write_opm

    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            body = app.current_view.scenario.body
            r, vel = expected_state("apsides", body.mu_m3_s2)
            t = parse_utc("2027-03-14T06:20:00Z")
            (session.journal.path.parent / "od").mkdir()
            (session.journal.path.parent / "od" / "after.opm").write_text(
                write_opm(epoch_s=t, r_m=r, v_m_s=vel, body=body, object_name="WREN-3"))
            n0 = session.journal.count()
            await pick(pilot, app.screen.query_one("#state-editor .form-cycle"), "opm")
            await type_into(pilot, state_input(app, "opm"), "od/after.opm")
            await type_into(pilot, state_input(app, "epoch"), "2027-03-14T06:21:00Z")
            await pilot.press("f2")
            await pilot.pause()
            assert session.journal.count() == n0
            assert "disagrees" in app.screen.query_one("#state-editor #f-epoch").error
            await type_into(pilot, state_input(app, "epoch"), "")
            await pilot.press("f2")
            await settle(pilot)
            assert session.journal.count() == n0 + 1
            v = app.current_view
            assert v.latest.epoch_s == t
            assert np.allclose(v.latest.r_m, r, atol=1e-3, rtol=0.0)  # the message carries 1 mm
    finally:
        session.close()


@pytest.mark.parametrize("field,text,needle", [
    ("periapsis_alt", "abc km", "state.periapsis_alt"),
    ("periapsis_alt", "-50 km", "inside the body"),
    ("apoapsis_alt", "12 kg", "state.apoapsis_alt"),
    ("epoch", "yesterday", "epoch"),
])
async def test_a_bad_entry_shows_a_message_and_changes_nothing(tmp_path, field, text, needle):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            n0 = session.journal.count()
            view0 = app.current_view
            await type_into(pilot, state_input(app, field), text, keys=True)
            await pilot.press("f2")
            await pilot.pause()
            assert session.journal.count() == n0
            assert len(session.state.entries) == n0
            assert not app.replanning and app.current_view is view0
            f = app.screen.query_one(f"#state-editor #f-{field}")
            assert needle in f.error
            assert "✗ " + f.error[:16] in screen_text(app)  # shown beside the field
    finally:
        session.close()


async def test_applying_an_unedited_form_writes_nothing(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await pilot.press("f2", "f3")
            await pilot.pause()
            assert session.journal.count() == 1
            assert any("nothing to apply" in str(n.message) for n in app._notifications)
    finally:
        session.close()


async def test_a_state_with_a_non_utc_epoch_is_refused_inline(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await type_into(pilot, state_input(app, "epoch"), "2027-03-14T05:00:00+01:00")
            await pilot.press("f2")
            await pilot.pause()
            assert "not UTC" in app.screen.query_one("#state-editor #f-epoch").error
            assert session.journal.count() == 1
    finally:
        session.close()


async def test_setting_a_target_replans_to_it(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await type_into(pilot, app.screen.query_one("#target-editor #in-altitude"), "600 km")
            await pilot.press("f3")
            await settle(pilot)
            assert isinstance(events(session)[-1], TargetSet)
            plan = app.current_view.plan
            R = app.current_view.scenario.body.radius_m
            # planner goal tolerance on the final apsides: 50 m (DEVELOPERS.md)
            assert abs(plan.final_periapsis_radius_m - (R + 600e3)) < 50.0
            assert abs(plan.final_apoapsis_radius_m - (R + 600e3)) < 50.0
            # a bad target changes nothing
            n = session.journal.count()
            await type_into(pilot, app.screen.query_one("#target-editor #in-altitude"), "-10 km")
            await pilot.press("f3")
            await pilot.pause()
            assert session.journal.count() == n
            assert "inside the body" in app.screen.query_one("#target-editor #f-altitude").error
    finally:
        session.close()


async def test_a_target_inclination_plans_a_plane_change(tmp_path):
    import math

    from console.widgets import burn_details

    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await type_into(pilot, app.screen.query_one("#target-editor #in-i"), "97.8 deg")
            await pilot.press("f3")
            await settle(pilot)
            ev = events(session)[-1]
            assert isinstance(ev, TargetSet) and ev.target["i_rad"] == pytest.approx(math.radians(97.8))
            v = app.current_view
            assert abs(v.plan.final_i_rad - math.radians(97.8)) * v.plan.final_apoapsis_radius_m < 100.0
            assert all(r.planned.goal_i_rad is not None for r in v.rows)
            details = burn_details(v.rows[0], v)
            from rich.console import Console

            out = Console(width=100, record=True)
            out.print(details)
            assert "out of the orbit plane" in out.export_text()
            # an inclination outside 0..180 deg is refused beside the field, nothing written
            n = session.journal.count()
            await type_into(pilot, app.screen.query_one("#target-editor #in-i"), "200 deg")
            await pilot.press("f3")
            await pilot.pause()
            assert session.journal.count() == n
    finally:
        session.close()


# --------------------------------------------------------------------------- the queue

async def test_queue_matches_the_planner_for_the_same_scenario(tmp_path):
    from console.scenario_file import load_scenario
    from mechanics.planner import plan_campaign

    scenario = make_scenario(tmp_path)
    plan = plan_campaign(load_scenario(scenario))
    session = make_session(tmp_path, scenario)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            rows = [r for r in app.current_view.rows if r.status == "planned"]
            assert len(rows) == len(plan.burns) > 2  # split burns at both apsides
            table = app.screen.query_one("#queue")
            assert table.row_count == len(plan.burns)
            for row, b in zip(rows, plan.burns):
                assert row.index == b.index
                assert row.planned.ignition_s == pytest.approx(b.ignition_s, abs=1e-3)
                assert row.planned.duration_s == pytest.approx(b.duration_s, abs=1e-3)
                assert row.planned.propellant_kg == pytest.approx(b.propellant_kg, abs=1e-6)
                cells = [str(c) for c in table.get_row(f"planned-{b.index}-0")]
                assert cells[2] == format_utc(b.ignition_s, 0)
                assert cells[3] == format_duration(b.ignition_s - NOW)
                assert cells[4] == f"{b.duration_s:.1f}"
                assert cells[7] == "planned"
            # the next burn is marked, in the table and in the header
            assert str(table.get_row("planned-1-0")[0]).startswith("▶")
            text = screen_text(app)
            assert f"next: burn 1 {format_utc(plan.burns[0].ignition_s, 0)[11:]}" in text
            assert format_duration(plan.burns[0].ignition_s - NOW) in text
            for title in ("State", "Burn queue", "Propellant ledger"):
                assert title in text
    finally:
        session.close()


async def test_queue_matches_burndesk_plan_json_under_j2(tmp_path):
    demo = ROOT / "profiles" / "scenarios" / "demo.toml"
    doc = json.loads(subprocess.run([EXE, "plan", str(demo), "--json"], capture_output=True, text=True,
                                    timeout=300, check=True).stdout)
    session = make_session(tmp_path, demo)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            rows = [r for r in app.current_view.rows if r.status == "planned"]
            assert [r.index for r in rows] == [b["index"] for b in doc["burns"]]
            for row, b in zip(rows, doc["burns"]):
                assert format_utc(row.planned.ignition_s) == b["ignition"]
                assert row.planned.duration_s == pytest.approx(b["duration_s"], abs=1e-3)
    finally:
        session.close()


async def test_selecting_a_burn_shows_its_details(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(160, 45)) as pilot:
            await settle(pilot)
            first_apo = next(r.index for r in app.current_view.rows if r.planned.apsis == "apoapsis")
            await pilot.press("escape", *["down"] * (first_apo - 1))
            row = app.screen.query_one("#details").row
            assert row.index == first_apo and row.planned.apsis == "apoapsis"
            text = screen_text(app)
            assert f"burn {first_apo} · apoapsis" in text
            assert format_utc(row.planned.cutoff_s) in text
            for word in ("cutoff", "mass", "attitude", "finite loss", "half-duration"):
                assert word in text
    finally:
        session.close()


# --------------------------------------------------------------------------- recording a burn

def fly_next_burn(view, factor: float, od_delay_s: float = 1200.0):
    """Fly the next planned burn with ``factor`` x rated thrust and flow (two-body coasts)."""
    from mechanics.flight import Thrust, fly
    from mechanics.kepler import propagate_kepler

    sc = view.scenario
    veh = sc.vehicle
    b = view.next_burn.planned
    mu = sc.body.mu_m3_s2
    r, v = propagate_kepler(np.array(view.latest.r_m), np.array(view.latest.v_m_s),
                            b.ignition_s - view.latest.epoch_s, mu)
    y = np.r_[r, v, view.latest.mass_kg]
    thrust = Thrust(veh.thrust_n * factor, veh.mdot_kg_s * factor, b.attitude_mode, b.direction)
    y = fly(y, b.duration_s, sc.body, sc.model, thrust=thrust)[0]
    r, v = propagate_kepler(y[:3], y[3:6], od_delay_s, mu)
    return b, b.ignition_s + b.duration_s + od_delay_s, r, v


async def record_weak_burn(pilot, app, factor=0.94):
    b, t_od, r, v = fly_next_burn(app.current_view, factor)
    await pilot.press("f4")
    await pilot.pause()
    dialog = app.screen
    assert dialog.query_one("#record-burn #in-ignition").value == format_utc(b.ignition_s)
    await pick(pilot, dialog.query_one("#record-after .form-cycle"), "vector")
    await type_into(pilot, dialog.query_one("#record-after #in-epoch"), format_utc(t_od))
    await type_into(pilot, dialog.query_one("#record-after #in-r"), " ".join(f"{x / 1e3:.5f}" for x in r) + " km")
    await type_into(pilot, dialog.query_one("#record-after #in-v"),
                    " ".join(f"{x / 1e3:.8f}" for x in v) + " km/s")
    await pilot.press("f2")
    await pilot.pause()
    return b


async def test_recording_a_weak_burn_shows_alarm_and_replans_with_the_calibration(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            rated = app.current_view.scenario.vehicle.thrust_n
            await record_weak_burn(pilot, app, 0.94)
            assert app.screen is app.screen_stack[0]  # the form closed
            ev = events(session)[-1]
            assert isinstance(ev, BurnRecorded) and ev.burn == 1
            await settle(pilot)
            v = app.current_view
            done = v.rows[0]
            assert done.status == "done" and done.drift.level == "alarm"
            assert done.drift.dv_ratio == pytest.approx(0.94, abs=0.005)
            assert v.calibration.thrust_factor == pytest.approx(0.94, rel=0.01)
            planned = [r for r in v.rows if r.status == "planned"]
            assert planned[0].index == 2
            assert all(r.planned.thrust_n == pytest.approx(0.94 * rated, rel=0.01) for r in planned)
            table = app.screen.query_one("#queue")
            seq = session.state.entries[-1].seq
            assert "ALARM" in str(table.get_row(f"done-1-{seq}")[8])
            assert app.screen.query_one("#views").active == "tab-drift"
            text = screen_text(app)
            assert "ALARM" in text and "0.94" in text
            assert any("ALARM" in str(n.message) for n in app._notifications)
    finally:
        session.close()


async def test_a_bad_record_keeps_the_form_and_the_journal(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await pilot.press("f4")
            await pilot.pause()
            dialog = app.screen
            await type_into(pilot, dialog.query_one("#record-burn #in-duration"), "-3 s")
            await type_into(pilot, dialog.query_one("#record-after #in-epoch"), "2027-03-14T07:00:00Z")
            await type_into(pilot, dialog.query_one("#record-after #in-periapsis_alt"), "380 km")
            await type_into(pilot, dialog.query_one("#record-after #in-apoapsis_alt"), "420 km")
            await pilot.press("f2")
            await pilot.pause()
            assert app.screen is dialog
            assert "duration" in dialog.query_one("#record-burn #f-duration").error
            assert session.journal.count() == 1
            # the duration fixed, the OD epoch before the cutoff is refused by the session
            await type_into(pilot, dialog.query_one("#record-burn #in-duration"), "450 s")
            await pilot.press("f2")
            await pilot.pause()
            assert app.screen is dialog
            assert "epoch" in dialog.query_one("#record-after #f-epoch").error
            assert session.journal.count() == 1
            await pilot.press("escape")
            assert app.screen is app.screen_stack[0]
    finally:
        session.close()


# --------------------------------------------------------------------------- gauge, retract, export

async def test_gauge_reading_shows_book_against_gauge(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(160, 45)) as pilot:
            await settle(pilot)
            await pilot.press("f5")
            await pilot.pause()
            await type_into(pilot, app.screen.query_one("#in-propellant"), "17.5 kg")
            await pilot.press("f2")
            await settle(pilot)
            ev = events(session)[-1]
            assert isinstance(ev, GaugeReadingTaken) and ev.propellant_kg == 17.5 and ev.epoch_s == NOW
            g = app.current_view.ledger.gauges[-1]
            assert g.difference_kg == pytest.approx(-0.5, abs=1e-9)  # 18 kg loaded, nothing flown
            assert "-0.500" in screen_text(app)
    finally:
        session.close()


async def test_retract_asks_first_and_then_withdraws_the_entry(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await type_into(pilot, state_input(app, "periapsis_alt"), "385 km")
            await pilot.press("f2")
            await settle(pilot)
            assert app.current_view.latest.source == "state entered"
            await pilot.press("f6")
            await pilot.pause()
            await type_into(pilot, app.screen.query_one("#in-entry"), "2")
            await pilot.press("f2", "n")  # asked, then refused: nothing written
            assert session.journal.count() == 2
            await pilot.press("f2", "y")
            await pilot.pause()
            assert isinstance(events(session)[-1], EntryRetracted) and events(session)[-1].entry == 2
            await settle(pilot)
            assert app.current_view.latest.source == "scenario"
            # the scenario entry itself cannot be retracted: the refusal shows in the dialog
            await pilot.press("f6")
            await pilot.pause()
            await type_into(pilot, app.screen.query_one("#in-entry"), "1")
            await pilot.press("f2", "y")
            await pilot.pause()
            assert "cannot be retracted" in screen_text(app)
            assert session.journal.count() == 3
    finally:
        session.close()


async def test_export_writes_the_three_csv_files(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await pilot.press("f7")
            await pilot.pause()
            await type_into(pilot, app.screen.query_one("#in-folder"), str(tmp_path / "out"))
            await pilot.press("f2")
            await pilot.pause()
            with open(tmp_path / "out" / "queue.csv", newline="") as fh:
                rows = list(csv.DictReader(fh))
            assert [int(r["burn"]) for r in rows] == [r.index for r in app.current_view.rows]
            assert (tmp_path / "out" / "ledger.csv").exists() and (tmp_path / "out" / "drift.csv").exists()
    finally:
        session.close()


async def test_export_takes_relative_folders_beside_the_session_and_creates_one_level(tmp_path, monkeypatch):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)  # where the console was started: nothing may land here
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await pilot.press("f7")
            await pilot.pause()
            await type_into(pilot, app.screen.query_one("#in-folder"), "deep/er/out")
            await pilot.press("f2")
            await pilot.pause()
            assert isinstance(app.screen, ExportScreen)  # refused: two missing levels
            assert not (session.journal.path.parent / "deep").exists()
            await type_into(pilot, app.screen.query_one("#in-folder"), "out")
            await pilot.press("f2")
            await pilot.pause()
            assert (session.journal.path.parent / "out" / "queue.csv").exists()
            assert list(elsewhere.iterdir()) == []
    finally:
        session.close()


# --------------------------------------------------------------------------- restart, failures

async def test_restart_restores_the_session(tmp_path):
    session = make_session(tmp_path)
    path = session.journal.path
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            await type_into(pilot, state_input(app, "apoapsis_alt"), "405 km")
            await pilot.press("f2")
            await settle(pilot)
            await record_weak_burn(pilot, app, 0.97)
            await settle(pilot)
            before = [(r.index, r.status, r.planned.ignition_s, r.planned.duration_s) for r in app.current_view.rows]
            latest = app.current_view.latest
            # an unapplied edit makes the first Ctrl+Q ask; the second one quits without it
            await type_into(pilot, state_input(app, "periapsis_alt"), "999 km")
            await pilot.press("ctrl+q")
            assert app.is_running
            await pilot.press("ctrl+q")
    finally:
        session.close()
    from console.session_ops import Session

    session = Session.open(path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            after = [(r.index, r.status, r.planned.ignition_s, r.planned.duration_s) for r in app.current_view.rows]
            assert after == before
            assert app.current_view.latest == latest
            assert len(session.state.entries) == 3
            assert "WATCH" in screen_text(app)  # burn 1 at 97 %: beyond 2 %, within 5 %
    finally:
        session.close()


async def test_a_failed_replan_keeps_the_last_good_view(tmp_path, monkeypatch):
    import mechanics.session.reducer as reducer

    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            good = app.current_view

            def broken(state):
                raise RuntimeError("solver blew up")

            monkeypatch.setattr(reducer, "view", broken)
            app.request_replan()
            for _ in range(200):
                await pilot.pause(0.02)
                if not app.replanning:
                    break
            assert not app.replanning
            assert app.current_view is good
            assert app.problem == "replan failed"
            assert any("solver blew up" in str(n.message) for n in app._notifications)
            assert "replan failed" in screen_text(app)
            assert app.screen.query_one("#queue").row_count == len(good.rows)
    finally:
        session.close()


async def test_help_lists_every_key_and_the_cautions(tmp_path):
    from console.app import key_label
    from console.report import CAUTIONS

    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 40)) as pilot:
            await settle(pilot)
            await pilot.press("f1")
            await pilot.pause()
            listed = dict(app.screen.keys)
            for b in BurndeskApp.BINDINGS:
                assert key_label(b.key) in listed
            text = " ".join(screen_text(app).split())
            for key in listed:
                assert " ".join(key.split()) in text
            for c in CAUTIONS:
                assert " ".join(c.split()[:4]) in text
            await pilot.press("escape")
            assert app.screen is app.screen_stack[0]
    finally:
        session.close()


@pytest.mark.parametrize("size", [(80, 24), (160, 45)])
async def test_the_console_opens_small_and_large(tmp_path, size):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=size) as pilot:
            await settle(pilot)
            await pilot.press("f4", "escape", "f8", "f8")
            assert app.is_running and app.screen is app.screen_stack[0]
            text = screen_text(app)
            assert "Burn queue" in text  # at 80 x 24 the rest may be squeezed, but nothing breaks
            if size == (160, 45):
                for title in ("State", "Propellant ledger", "current", "target"):
                    assert title in text
    finally:
        session.close()


async def test_stray_keys_on_every_screen_do_no_harm(tmp_path):
    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            for opener in ("f1", "f4", "f5", "f6", "f7"):
                await pilot.press(opener, "x", "tab", "enter", "left", "f3", "escape")
                if app.screen is not app.screen_stack[0]:
                    await pilot.press("escape")
            await pilot.press("f8", "down", "pageup", "end", "f2", "f3", "escape")
            await settle(pilot)
            assert app.is_running and app.screen is app.screen_stack[0]
            assert session.journal.count() >= 1
            assert app.current_view is not None and not app.problem
    finally:
        session.close()


# --------------------------------------------------------------------------- command line

def test_bare_burndesk_opens_the_default_session_creating_it_once(tmp_path, monkeypatch):
    import console.app as app_module
    from console.cli import main

    opened = []

    def fake_run(self):
        opened.append((self.session.journal.path, self.note, len(self.session.state.entries)))

    monkeypatch.setenv("BURNDESK_HOME", str(tmp_path / "home"))
    monkeypatch.setattr(app_module.BurndeskApp, "run", fake_run)
    assert main([]) == 0
    assert main([]) == 0
    assert opened[0][0] == tmp_path / "home" / "default.burn"
    assert "first run" in opened[0][1] and "demo.toml" in opened[0][1]
    assert opened[1] == (opened[0][0], "", 1)  # opened, not created again
    assert main(["console", "--session", str(tmp_path / "x.burn"), "--scenario", str(make_scenario(tmp_path))]) == 0
    assert "created the session" in opened[2][1]
    assert main(["console", "--session", str(tmp_path / "x.burn")]) == 0
    assert opened[3][1] == ""


def test_console_refuses_a_missing_session_without_a_scenario(tmp_path, capsys):
    from console.cli import main

    assert main(["console", "--session", str(tmp_path / "nope.burn")]) == 2
    err = capsys.readouterr().err
    assert "no such session file" in err and "--scenario" in err and "Traceback" not in err
    assert not (tmp_path / "nope.burn").exists()


def test_default_folder_follows_xdg_and_burndesk_home(tmp_path, monkeypatch):
    from console.app import data_dir

    monkeypatch.delenv("BURNDESK_HOME", raising=False)
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    assert data_dir() == tmp_path / "xdg" / "burndesk"
    monkeypatch.setenv("BURNDESK_HOME", str(tmp_path / "bd"))
    assert data_dir() == tmp_path / "bd"


async def test_help_and_quit_reach_through_a_dialog(tmp_path):
    # a modal dialog hides the app's keys; F1 and Ctrl+Q are offered again by every dialog
    from console.screens import GaugeScreen, HelpScreen, RecordScreen

    session = make_session(tmp_path)
    try:
        app = console(session)
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot)
            for opener, kind in (("f4", RecordScreen), ("f5", GaugeScreen)):
                await pilot.press(opener)
                await pilot.pause()
                assert isinstance(app.screen, kind)
                await pilot.press("f1")
                await pilot.pause()
                assert isinstance(app.screen, HelpScreen)
                await pilot.press("escape")
                await pilot.pause()
                assert isinstance(app.screen, kind)      # back in the dialog
                await pilot.press("escape")
                await pilot.pause()
            await pilot.press("f4")
            await pilot.pause()
            n = session.journal.count()
            await pilot.press("ctrl+q")
            await pilot.pause()
            assert app.return_code is not None           # quit from the dialog, nothing written
            assert session.journal.count() == n
    finally:
        session.close()
