"""CSV exports: ``burndesk plan --csv DIR`` re-read against ``plan --json``, one column definition
shared with ``burndesk session export``, units in the headers, refusals."""

from __future__ import annotations

import csv
import json
import subprocess
import sys
from pathlib import Path

import pytest

from console.exports import (ACTUAL_COLUMNS, ATTITUDE_COLUMNS, PLAN_QUEUE_HEADER, PLANNED_COLUMNS,
                             headers)
sys.path.insert(0, str(Path(__file__).parent))
from campaign_files import write_campaign  # noqa: E402  (tests/ helper)

EXE = str(Path(sys.executable).parent / "burndesk")

#: every numeric column carries its unit in its name (or is a plain ratio / unit vector)
UNIT_SUFFIXES = ("_s", "_kg", "_m_s", "_N", "_kg_s", "_km", "_utc", "_deg")
NO_UNIT = {"burn", "status", "apsis", "attitude", "sense", "direction_x", "direction_y", "direction_z"}


def run(*args, ok=(0,)):
    proc = subprocess.run([EXE, *map(str, args)], capture_output=True, text=True, timeout=300)
    assert proc.returncode in ok, (proc.returncode, proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr
    return proc


def scenario(tmp_path, attitude="inertial"):
    return write_campaign(tmp_path, name="export test", attitude=attitude,
                          file_name=f"scenario_{attitude}.toml")


def read_rows(path):
    with open(path, newline="") as fh:
        reader = csv.DictReader(fh)
        return reader.fieldnames, list(reader)


@pytest.mark.parametrize("attitude", ["inertial", "tracking"])
def test_plan_csv_rereads_to_the_json_numbers(tmp_path, attitude):
    out = tmp_path / "out"
    out.mkdir()
    proc = run("plan", scenario(tmp_path, attitude), "--json", "--csv", out)
    doc = json.loads(proc.stdout)
    assert f"wrote {out / 'queue.csv'}" in proc.stderr
    names, rows = read_rows(out / "queue.csv")
    assert names == PLAN_QUEUE_HEADER
    assert all(n in NO_UNIT or n.endswith(UNIT_SUFFIXES) for n in names)
    assert len(rows) == len(doc["burns"]) >= 2
    for r, b in zip(rows, doc["burns"]):
        assert int(r["burn"]) == b["index"] and r["apsis"] == b["apsis"]
        assert r["ignition_utc"] == b["ignition"] and r["cutoff_utc"] == b["cutoff"]
        assert float(r["duration_s"]) == pytest.approx(b["duration_s"], abs=5e-4)
        for col, key in (("dv_m_s", "dv_mps"), ("impulsive_dv_m_s", "impulsive_dv_mps"),
                         ("propellant_kg", "propellant_kg"), ("mass_before_kg", "mass_before_kg"),
                         ("thrust_N", "thrust_N")):
            assert float(r[col]) == pytest.approx(b[key], abs=5e-7), col
        assert float(r["mdot_kg_s"]) == pytest.approx(b["mdot_kg_s"], abs=5e-10)
        assert float(r["after_periapsis_alt_km"]) == pytest.approx(b["after"]["periapsis_alt_km"], abs=5e-7)
        assert float(r["after_apoapsis_alt_km"]) == pytest.approx(b["after"]["apoapsis_alt_km"], abs=5e-7)
        assert r["attitude"] == b["attitude"]["mode"] == attitude
        if attitude == "inertial":
            d = [float(r[f"direction_{c}"]) for c in "xyz"]
            assert d == pytest.approx(b["attitude"]["direction"], abs=5e-13)
        else:
            assert r["sense"] == b["attitude"]["sense"]
            assert r["direction_x"] == r["direction_y"] == r["direction_z"] == ""
    total = sum(float(r["propellant_kg"]) for r in rows)
    assert total == pytest.approx(doc["totals"]["propellant_kg"], abs=1e-5)


def test_one_column_definition_serves_plan_and_session(tmp_path):
    scen = scenario(tmp_path)
    plan_dir, sess_dir = tmp_path / "plan", tmp_path / "session"
    plan_dir.mkdir()
    sess_dir.mkdir()
    run("plan", scen, "--csv", plan_dir)
    sess = tmp_path / "c.burn"
    run("session", "init", sess, "--scenario", scen)
    run("session", "export", sess, "--csv", sess_dir)
    p_names, p_rows = read_rows(plan_dir / "queue.csv")
    s_names, s_rows = read_rows(sess_dir / "queue.csv")
    planned = headers(PLANNED_COLUMNS)
    attitude = headers(ATTITUDE_COLUMNS)
    assert s_names == ["burn", "status", *planned, *headers(ACTUAL_COLUMNS), *attitude]
    assert p_names == ["burn", *planned, *attitude]
    # a fresh session plans what `plan` plans: the shared columns hold the same cells
    assert [[r[n] for n in ["burn", *planned, *attitude]] for r in p_rows] == \
           [[r[n] for n in ["burn", *planned, *attitude]] for r in s_rows]
    assert all(r["status"] == "planned" and r["actual_ignition_utc"] == "" for r in s_rows)


def test_plan_csv_refusals(tmp_path):
    scen = scenario(tmp_path)
    proc = run("plan", scen, "--csv", tmp_path / "missing", ok=(2,))
    assert "export folder does not exist" in proc.stderr and proc.stdout == ""
    out = tmp_path / "out"
    out.mkdir()
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    (out / "queue.csv").symlink_to(victim)
    proc = run("plan", scen, "--csv", out, ok=(2,))
    assert "link" in proc.stderr and victim.read_text() == "keep me"
