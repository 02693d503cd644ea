"""`burndesk session ...` as an operator runs it: real files, real processes, exit codes."""

from __future__ import annotations

import csv
import json
import math
import os
import stat
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from mechanics.flight import Thrust, fly
from mechanics.kepler import propagate_kepler
sys.path.insert(0, str(Path(__file__).parent))
from campaign_files import write_campaign  # noqa: E402  (tests/ helper)

ROOT = Path(__file__).resolve().parents[1]
EXE = str(Path(sys.executable).parent / "burndesk")

def run(*args, ok=(0,)):
    proc = subprocess.run([EXE, *map(str, args)], capture_output=True, text=True, timeout=300)
    assert proc.returncode in ok, (proc.returncode, proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr
    return proc


@pytest.fixture()
def session(tmp_path):
    write_campaign(tmp_path, name="session test")
    path = tmp_path / "campaign.burn"
    run("session", "init", path, "--scenario", tmp_path / "scenario.toml")
    return path


def show(path):
    return json.loads(run("session", "show", path, "--json").stdout)


def write_after_state(tmp_path, doc, factor, name="after.toml", delay_s=1500.0):
    """Fly the next planned burn with `factor` x rated thrust; write the OD state file (km, km/s)."""
    from datetime import datetime, timezone

    def t_of(text):
        return datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=timezone.utc).timestamp()

    from console.scenario_file import load_scenario

    sc = load_scenario(tmp_path / "scenario.toml")
    b = next(b for b in doc["burns"] if b["status"] == "planned")
    st = doc["initial_state"]
    t0 = t_of(doc["epoch"])
    r, v = propagate_kepler(np.array(st["r_m"]), np.array(st["v_mps"]), t_of(b["ignition"]) - t0,
                            sc.body.mu_m3_s2)
    veh = sc.vehicle
    thrust = Thrust(veh.thrust_n * factor, veh.mdot_kg_s * factor, "inertial",
                    tuple(b["attitude"]["direction"]))
    y = fly(np.r_[r, v, st["mass_kg"]], b["duration_s"], sc.body, "two-body", thrust)[0]
    r2, v2 = propagate_kepler(y[:3], y[3:6], delay_s, sc.body.mu_m3_s2)
    epoch = datetime.fromtimestamp(t_of(b["cutoff"]) + delay_s, timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    path = tmp_path / name
    path.write_text(
        f'epoch = "{epoch}"\n[state]\n'
        f"r = [{', '.join(f'{c / 1e3:.9f}' for c in r2)}]\n"
        f"v = [{', '.join(f'{c / 1e3:.12f}' for c in v2)}]\n")
    return path, b


def test_init_creates_an_owner_only_file_and_refuses_to_overwrite(session, tmp_path):
    assert stat.S_IMODE(os.stat(session).st_mode) == 0o600
    before = session.read_bytes()
    proc = run("session", "init", session, "--scenario", tmp_path / "scenario.toml", ok=(2,))
    assert "exist" in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
    assert session.read_bytes() == before


def test_show_json_has_the_campaign_fields(session):
    doc = show(session)
    for key in ("feasible", "model", "epoch", "body", "initial_state", "burns", "totals", "propellant",
                "warnings", "calibration"):
        assert key in doc
    assert doc["calibration"] == {"thrust_factor": 1.0, "burns_used": 0, "spread": None, "factors": []}
    for key in ("loaded_kg", "used_kg", "remaining_kg", "usable_kg", "reserve_kg", "margin_kg",
                "dv_remaining_mps"):
        assert key in doc["propellant"]
    assert all(b["status"] == "planned" and b["actual"] is None and b["drift"] is None for b in doc["burns"])


def test_record_a_weak_burn_then_retract_it(session, tmp_path):
    doc = show(session)
    after, b = write_after_state(tmp_path, doc, 0.94)
    proc = run("session", "record", session, "--burn", 1, "--after", after, "--propellant", "2.0 kg",
               "--source", "gauge")
    assert "ALARM" in proc.stdout and "thrust factor 0.94" in proc.stdout
    doc2 = show(session)
    first = doc2["burns"][0]
    assert first["status"] == "done" and first["drift"]["level"] == "alarm"
    assert first["actual"]["propellant_kg"] == pytest.approx(2.0)
    assert doc2["calibration"]["burns_used"] == 1
    assert doc2["calibration"]["thrust_factor"] == pytest.approx(0.94, rel=0.01)
    assert doc2["burns"][1]["status"] == "planned" and doc2["burns"][1]["index"] == 2
    assert doc2["propellant"]["used_kg"] == pytest.approx(2.0)
    entry = first["entry"]
    run("session", "retract", session, "--entry", entry, "--reason", "test")
    doc3 = show(session)
    assert doc3["burns"][0]["status"] == "retracted"
    assert doc3["burns"][1]["status"] == "planned" and doc3["burns"][1]["index"] == 1
    assert doc3["calibration"]["burns_used"] == 0
    kinds = [e["kind"] for e in doc3["entries"]]
    assert kinds == ["scenario_loaded", "burn_recorded", "entry_retracted"]


@pytest.mark.parametrize("extra, message", [
    (["--burn", "4"], "not the next burn"),
    (["--burn", "1", "--propellant", "-1 kg"], "negative"),
    (["--burn", "1", "--duration", "0 s"], "greater than zero"),
    (["--burn", "1", "--ignition", "2027-06-01T12:00:00"], "time zone"),
])
def test_bad_records_exit_2_and_change_nothing(session, tmp_path, extra, message):
    doc = show(session)
    after, _ = write_after_state(tmp_path, doc, 1.0)
    before = [e["entry"] for e in doc["entries"]]
    proc = run("session", "record", session, "--after", after, *extra, ok=(2,))
    assert message in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
    assert [e["entry"] for e in show(session)["entries"]] == before


def test_record_with_an_orbit_inside_the_body_is_refused(session, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('epoch = "2027-06-01T06:00:00Z"\n[state]\nr = [6000, 0, 0]\nv = [0, 7.9, 0]\n')
    proc = run("session", "record", session, "--burn", 1, "--after", bad, ok=(2,))
    assert "inside the body" in proc.stderr


def test_export_csv_rereads_to_the_same_numbers(session, tmp_path):
    doc = show(session)
    after, _ = write_after_state(tmp_path, doc, 0.97)
    run("session", "record", session, "--burn", 1, "--after", after)
    run("session", "gauge", session, "--propellant", "55.5 kg", "--epoch", "2027-06-02T00:00:00Z")
    out = tmp_path / "export"
    out.mkdir()
    run("session", "export", session, "--csv", out)
    doc = show(session)
    with open(out / "queue.csv") as fh:
        rows = list(csv.DictReader(fh))
    assert [int(r["burn"]) for r in rows] == [b["index"] for b in doc["burns"]]
    for r, b in zip(rows, doc["burns"]):
        assert r["status"] == b["status"]
        assert float(r["duration_s"]) == pytest.approx(b["duration_s"], abs=1e-3)
        assert float(r["propellant_kg"]) == pytest.approx(b["propellant_kg"], abs=1e-6)
        assert r["ignition_utc"] == b["ignition"]
    assert "duration_s" in rows[0] and "propellant_kg" in rows[0]  # units in the headers
    with open(out / "ledger.csv") as fh:
        ledger = {r["item"]: float(r["propellant_kg"]) for r in csv.DictReader(fh)}
    p = doc["propellant"]
    assert ledger["remaining"] == pytest.approx(p["remaining_kg"], abs=1e-6)
    assert ledger["margin"] == pytest.approx(p["margin_kg"], abs=1e-6)
    g = p["gauges"][0]
    assert ledger[f"gauge_entry_{g['entry']}_difference"] == pytest.approx(g["difference_kg"], abs=1e-6)
    with open(out / "drift.csv") as fh:
        drift = list(csv.DictReader(fh))
    assert drift[0]["level"] == "watch"
    assert float(drift[0]["dv_ratio"]) == pytest.approx(doc["burns"][0]["drift"]["dv_ratio"], abs=1e-6)


def test_export_refuses_to_write_through_a_link(session, tmp_path):
    out = tmp_path / "export"
    out.mkdir()
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    (out / "queue.csv").symlink_to(victim)
    proc = run("session", "export", session, "--csv", out, ok=(2,))
    assert "link" in proc.stderr
    assert victim.read_text() == "keep me"


def test_state_entry_replans_from_the_new_orbit(session, tmp_path):
    doc = show(session)
    st = doc["initial_state"]
    r, v = propagate_kepler(np.array(st["r_m"]), np.array(st["v_mps"]), 300.0, 3.986004418e14)
    path = tmp_path / "od.toml"
    path.write_text(f'epoch = "2027-06-01T00:05:00Z"\n[state]\n'
                    f"r = [{', '.join(f'{c / 1e3:.9f}' for c in r)}]\n"
                    f"v = [{', '.join(f'{c / 1e3:.12f}' for c in v)}]\n")
    run("session", "state", session, "--state", path)
    doc2 = show(session)
    assert doc2["epoch"] == "2027-06-01T00:05:00.000Z"
    assert doc2["latest_source"] == "state entered"
    # same orbit, same target: the queue hardly moves (lead time now counts from 00:05)
    assert math.isclose(doc2["totals"]["dv_mps"], doc["totals"]["dv_mps"], rel_tol=1e-3)
