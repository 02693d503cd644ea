"""The documented JSON schemas (docs/plan.schema.json, docs/session.schema.json) against real
``burndesk plan --json`` and ``burndesk session show --json`` output.

Validation uses the ``jsonschema`` package (JSON Schema draft 2020-12).  The schemas forbid
unlisted fields, so a field added to console/report.py without documenting it fails here.
"""

from __future__ import annotations

import copy
import json
import subprocess
import sys
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pytest
from jsonschema import Draft202012Validator

from console.opm import write_opm
from console.scenario_file import load_scenario
sys.path.insert(0, str(Path(__file__).parent))
from campaign_files import write_campaign  # noqa: E402  (tests/ helper)

ROOT = Path(__file__).resolve().parents[1]
EXE = str(Path(sys.executable).parent / "burndesk")
PLAN_SCHEMA = json.loads((ROOT / "docs" / "plan.schema.json").read_text())
SESSION_SCHEMA = json.loads((ROOT / "docs" / "session.schema.json").read_text())

# Field lists required by the planning issue (plan --json) and the session issue (show --json).
ISSUE_PLAN_FIELDS = {"feasible", "model", "epoch", "body", "initial_state", "burns", "totals", "propellant",
                     "warnings"}
ISSUE_BODY = {"name", "mu_m3_s2", "radius_m", "j2"}
ISSUE_BURN = {"index", "apsis", "apsis_time", "ignition", "cutoff", "duration_s", "dv_mps", "impulsive_dv_mps",
              "propellant_kg", "mass_before_kg", "thrust_N", "mdot_kg_s", "attitude", "after"}
ISSUE_TOTALS = {"dv_mps", "impulsive_dv_mps", "finite_loss_mps", "propellant_kg", "duration_s"}
ISSUE_PLAN_PROPELLANT = {"loaded_kg", "usable_kg", "reserve_kg", "after_plan_kg", "margin_kg", "dv_remaining_mps"}
ISSUE_SESSION_BURN = {"status", "actual", "drift"}
ISSUE_SESSION_PROPELLANT = {"loaded_kg", "used_kg", "remaining_kg", "usable_kg", "reserve_kg", "margin_kg",
                            "dv_remaining_mps"}


def run(*args, ok=(0,)):
    proc = subprocess.run([EXE, *map(str, args)], capture_output=True, text=True, timeout=300)
    assert proc.returncode in ok, (proc.returncode, proc.stdout, proc.stderr)
    return proc


def setup(tmp_path, attitude="inertial", alt="700 km", prop="60 kg"):
    return write_campaign(tmp_path, name="schema test", attitude=attitude, alt=alt, propellant=prop,
                          file_name=f"s_{attitude}_{alt.split()[0]}.toml")


def errors(schema, doc):
    return sorted(f"{list(e.absolute_path)}: {e.message}" for e in Draft202012Validator(schema).iter_errors(doc))


def test_schemas_are_valid_draft_2020_12():
    for schema in (PLAN_SCHEMA, SESSION_SCHEMA):
        assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
        Draft202012Validator.check_schema(schema)


def test_schemas_require_the_issue_fields():
    d = PLAN_SCHEMA["$defs"]
    assert ISSUE_PLAN_FIELDS <= set(PLAN_SCHEMA["required"])
    assert ISSUE_BODY <= set(d["body"]["required"])
    assert ISSUE_BURN <= set(d["burn"]["required"])
    assert ISSUE_TOTALS <= set(d["totals"]["required"])
    assert ISSUE_PLAN_PROPELLANT <= set(PLAN_SCHEMA["properties"]["propellant"]["required"])
    s = SESSION_SCHEMA
    assert ISSUE_PLAN_FIELDS | {"calibration"} <= set(s["required"])
    assert ISSUE_BURN | ISSUE_SESSION_BURN <= set(s["$defs"]["burn"]["required"])
    assert {"thrust_factor", "burns_used"} <= set(s["properties"]["calibration"]["required"])
    assert ISSUE_SESSION_PROPELLANT <= set(s["properties"]["propellant"]["required"])
    # the session's burn is the plan's burn plus the campaign fields, described alike
    pb, sb = PLAN_SCHEMA["$defs"]["burn"]["properties"], s["$defs"]["burn"]["properties"]
    assert {k: v for k, v in sb.items() if k in pb} == pb
    assert s["$defs"]["attitude"] == d["attitude"] and s["$defs"]["utc"] == d["utc"]


@pytest.mark.parametrize("attitude, alt, prop, code", [
    ("inertial", "700 km", "60 kg", 0),
    ("tracking", "700 km", "60 kg", 0),
    ("inertial", "900 km", "6 kg", 3),     # infeasible: the document is still printed
])
def test_plan_json_matches_its_schema(tmp_path, attitude, alt, prop, code):
    doc = json.loads(run("plan", setup(tmp_path, attitude, alt, prop), "--json", ok=(code,)).stdout)
    assert doc["feasible"] is (code == 0)
    assert errors(PLAN_SCHEMA, doc) == []


def test_the_schema_check_can_fail(tmp_path):
    doc = json.loads(run("plan", setup(tmp_path), "--json").stdout)
    for mutate, where in [
        (lambda d: d.pop("feasible"), "'feasible' is a required property"),
        (lambda d: d.__setitem__("epoch", "2027-06-01T00:00:00Z"), "does not match"),
        (lambda d: d["burns"][0].__setitem__("duration_s", "455 s"), "is not of type 'number'"),
        (lambda d: d["burns"][0]["attitude"].__setitem__("mode", "spinning"), "is not valid under any"),
        (lambda d: d.__setitem__("surprise", 1), "Additional properties are not allowed"),
        (lambda d: d["initial_state"]["r_m"].pop(), "is too short"),
    ]:
        bad = copy.deepcopy(doc)
        mutate(bad)
        errs = errors(PLAN_SCHEMA, bad)
        assert errs and any(where in e for e in errs), errs


def _t(text):
    return datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=timezone.utc).timestamp()


def test_session_show_json_matches_its_schema(tmp_path):
    from mechanics.flight import Thrust, fly
    from mechanics.kepler import propagate_kepler

    scen = setup(tmp_path)
    sess = tmp_path / "c.burn"
    run("session", "init", sess, "--scenario", scen)
    doc = json.loads(run("session", "show", sess, "--json").stdout)
    assert errors(SESSION_SCHEMA, doc) == []
    # fly burn 1 with 97 % of the rated engine, record it (orbit determination as an OPM),
    # take a gauge reading, record it a second time after retracting the first record
    sc = load_scenario(scen)
    b, s0 = doc["burns"][0], doc["initial_state"]
    r, v = propagate_kepler(np.array(s0["r_m"]), np.array(s0["v_mps"]), _t(b["ignition"]) - _t(doc["epoch"]),
                            sc.body.mu_m3_s2)
    k = 0.97
    thrust = Thrust(sc.vehicle.thrust_n * k, sc.vehicle.mdot_kg_s * k, "inertial", tuple(b["attitude"]["direction"]))
    y = fly(np.r_[r, v, s0["mass_kg"]], b["duration_s"], sc.body, "two-body", thrust)[0]
    t_od = _t(b["cutoff"]) + 600.0
    r2, v2 = propagate_kepler(y[:3], y[3:6], 600.0, sc.body.mu_m3_s2)
    od = tmp_path / "od.opm"
    od.write_text(write_opm(epoch_s=t_od, r_m=tuple(r2), v_m_s=tuple(v2), body=sc.body))
    run("session", "record", sess, "--burn", 1, "--after", od, "--propellant", "11.9 kg", "--source", "gauge")
    run("session", "gauge", sess, "--propellant", "48.0 kg", "--epoch", "2027-06-01T02:00:00Z")
    doc = json.loads(run("session", "show", sess, "--json").stdout)
    entry = doc["burns"][0]["entry"]
    run("session", "retract", sess, "--entry", entry, "--reason", "schema test")
    run("session", "record", sess, "--burn", 1, "--after", od)
    doc = json.loads(run("session", "show", sess, "--json").stdout)
    statuses = [x["status"] for x in doc["burns"]]
    assert "retracted" in statuses and "done" in statuses and "planned" in statuses
    done = next(x for x in doc["burns"] if x["status"] == "done")
    assert done["actual"] is not None and done["drift"] is not None
    assert doc["propellant"]["gauges"] and doc["propellant"]["per_burn"]
    assert errors(SESSION_SCHEMA, doc) == []
    # and the schema notices a drift level it does not know
    bad = copy.deepcopy(doc)
    next(x for x in bad["burns"] if x["status"] == "done")["drift"]["level"] = "panic"
    assert errors(SESSION_SCHEMA, bad)


@pytest.mark.parametrize("attitude", ["inertial", "tracking"])
def test_a_plane_change_plan_matches_the_schemas(tmp_path, attitude):
    # the plane-change fields (out_of_plane_deg, tracking_direction, i_deg, centre_shift_s) are
    # documented: plan --json and session show --json of a transfer to a geostationary orbit
    scen = tmp_path / "geo.toml"
    scen.write_text(f"""
name = "schema plane"
body = "earth"
vehicle = "heron"
epoch = "2027-06-10T00:00:00Z"
[state]
periapsis_alt = "250 km"
apoapsis_alt = "35786 km"
i = "7 deg"
raan = "60 deg"
argp = "180 deg"
nu = "20 deg"
[target]
kind = "circular"
altitude = "35786 km"
i = "0 deg"
[options]
attitude = "{attitude}"
""")
    doc = json.loads(run("plan", scen, "--json").stdout)
    assert errors(PLAN_SCHEMA, doc) == []
    last = doc["burns"][-1]
    assert "out_of_plane_deg" in last["attitude"] and "i_deg" in last["after"]
    assert ("tracking_direction" in last["attitude"]) is (attitude == "tracking")
    assert abs(doc["final"]["i_deg"]) < 1e-3
    sess = tmp_path / "geo.burn"
    run("session", "init", sess, "--scenario", scen)
    assert errors(SESSION_SCHEMA, json.loads(run("session", "show", sess, "--json").stdout)) == []
    text = run("plan", scen).stdout
    assert "deg out of plane" in text and "target i 0.0000 deg" in text
