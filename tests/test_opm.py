"""CCSDS orbit parameter messages: reading, writing, round trips, refusals, scenario and session use.

Independent references used here (not taken from the code under test):

* The OPM layout, keywords, units and syntax: CCSDS 502.0-B-3, *Orbit Data Messages* (2023),
  sec. 3.2.2-3.2.4 (Tables 3-1, 3-2, 3-3), 3.2.4.11 (TNW: x along the velocity, W along the
  orbital angular momentum, N completing the right-handed set), 7.4 (KVN), 7.5.10 (time format,
  including the day-of-year form), 7.7.1 (units in square brackets), 7.8.7 (comment placement).
  The message in ``HAND`` was written here from that description; it is not an example copied
  from the standard.
* Circular speed sqrt(mu / r) and the perifocal state from the eccentric anomaly,
  r = a (cos E - e, sqrt(1 - e^2) sin E), v = sqrt(mu a) / r (-sin E, sqrt(1 - e^2) cos E), with
  Kepler's equation M = E - e sin E (Vallado, *Fundamentals of Astrodynamics and Applications*,
  4th ed. (2013), sec. 2.2-2.3, from memory).
* Earth GM 398600.4418 km^3/s^2: WGS 84, NIMA TR8350.2, 3rd ed. (2000).
* Day 073 of 2027 is 14 March (31 + 28 + 14), counted by hand.
"""

from __future__ import annotations

import json
import math
import re
import subprocess
import sys
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from console.opm import (INERTIAL_FRAMES, looks_like_opm, read_opm, read_opm_file, save_text,
                         session_to_opm, write_opm)
from console.profiles import load_body
from console.scenario_file import load_scenario, load_scenario_with_state, load_state_file
from console.timeutil import format_utc
from mechanics.flight import tracking_frame
sys.path.insert(0, str(Path(__file__).parent))
from campaign_files import VEHICLE, write_campaign  # noqa: E402  (tests/ helper)

EXE = str(Path(sys.executable).parent / "burndesk")
MU_KM = 398600.4418  # WGS 84 GM, km^3/s^2 (NIMA TR8350.2, 3rd ed., 2000)
EPOCH_S = datetime(2027, 3, 14, 6, 0, 0, 250000, tzinfo=timezone.utc).timestamp()

# A circular 7000 km orbit inclined 30 deg, at its ascending node on the x axis: r = (7000, 0, 0) km,
# v = sqrt(mu / r) (0, cos 30, sin 30) km/s, written by hand to 12 decimals from the formula.
V_CIRC = math.sqrt(MU_KM / 7000.0)
VY, VZ = V_CIRC * math.cos(math.radians(30.0)), V_CIRC * math.sin(math.radians(30.0))
HAND = f"""CCSDS_OPM_VERS = 3.0
COMMENT written by hand from CCSDS 502.0-B-3 sec. 3.2 and 7
CREATION_DATE = 2027-03-14T05:00:00Z
ORIGINATOR = TESTOPS

COMMENT metadata, Table 3-2
OBJECT_NAME = WREN-3
OBJECT_ID = 2027-012A
CENTER_NAME = EARTH
REF_FRAME = GCRF
TIME_SYSTEM = UTC

COMMENT state vector, day-of-year epoch form (7.5.10)
EPOCH = 2027-073T06:00:00.250
X = 7000.0 [km]
Y = 0.0 [km]
Z = 0.0 [km]
X_DOT = 0.0 [km/s]
Y_DOT = {VY:.12f} [km/s]
Z_DOT = {VZ:.12f}

COMMENT osculating elements
SEMI_MAJOR_AXIS = 7000.0 [km]
ECCENTRICITY = 0.0
INCLINATION = 30.0 [deg]
RA_OF_ASC_NODE = 0.0 [deg]
ARG_OF_PERICENTER = 0.0 [deg]
TRUE_ANOMALY = 0.0 [deg]
GM = 398600.4418 [km**3/s**2]

COMMENT spacecraft
MASS = 160.5 [kg]
DRAG_COEFF = 2.2

COMMENT first manoeuvre
MAN_EPOCH_IGNITION = 2027-03-14T07:00:00.000
MAN_DURATION = 120.0 [s]
MAN_DELTA_MASS = -0.25 [kg]
MAN_REF_FRAME = TNW
MAN_DV_1 = 0.0015 [km/s]
MAN_DV_2 = 0.0 [km/s]
MAN_DV_3 = 0.0 [km/s]

MAN_EPOCH_IGNITION = 2027-03-14T08:00:00.000
MAN_DURATION = 0.0 [s]
MAN_DELTA_MASS = -0.1 [kg]
MAN_REF_FRAME = EME2000
MAN_DV_1 = 0.0 [km/s]
MAN_DV_2 = -0.0005 [km/s]
MAN_DV_3 = 0.0002 [km/s]
USER_DEFINED_EARTH_MODEL = WGS-84
"""

def line_of(text: str, start: str, nth: int = 1) -> int:
    hits = [k for k, ln in enumerate(text.splitlines(), start=1) if ln.startswith(start)]
    return hits[nth - 1]


def run(*args, ok=(0,), cwd=None):
    proc = subprocess.run([EXE, *map(str, args)], capture_output=True, text=True, timeout=300, cwd=cwd)
    assert proc.returncode in ok, (proc.returncode, proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr
    return proc


# --------------------------------------------------------------------------------------------
# reading
# --------------------------------------------------------------------------------------------

def test_hand_written_message_parses_to_the_expected_state():
    doc = read_opm(HAND, "hand.opm")
    assert doc.epoch_s == pytest.approx(EPOCH_S, abs=1e-6)           # 2027-073 = 14 March
    assert doc.r_m == pytest.approx((7000e3, 0.0, 0.0), abs=1e-9)
    assert doc.v_m_s == pytest.approx((0.0, VY * 1e3, VZ * 1e3), abs=5e-10)
    assert doc.object_name == "WREN-3" and doc.object_id == "2027-012A"
    assert doc.center_name == "EARTH" and doc.ref_frame == "GCRF" and doc.time_system == "UTC"
    assert doc.header["ORIGINATOR"] == "TESTOPS" and doc.header["CREATION_DATE"] == "2027-03-14T05:00:00Z"
    assert doc.creation_s == pytest.approx(EPOCH_S - 3600.25, abs=1e-6)
    assert doc.mass_kg == 160.5 and doc.spacecraft == {"drag_coeff": 2.2}
    k = doc.keplerian
    assert k.a_m == 7000e3 and k.e == 0.0 and k.i_rad == pytest.approx(math.radians(30.0), abs=1e-15)
    assert k.gm_m3_s2 == pytest.approx(MU_KM * 1e9, rel=1e-15) and k.anomaly == "true"
    m1, m2 = doc.maneuvers
    assert m1.ref_frame == "TNW" and m1.dv_m_s == pytest.approx((1.5, 0.0, 0.0), abs=1e-12)
    assert m1.duration_s == 120.0 and m1.delta_mass_kg == -0.25 and m1.comments == ("first manoeuvre",)
    assert m1.ignition_s == pytest.approx(EPOCH_S + 3600 - 0.25, abs=1e-6)
    assert m2.ref_frame == "EME2000" and m2.dv_m_s == pytest.approx((0.0, -0.5, 0.2), abs=1e-12)
    assert m2.duration_s == 0.0 and m2.line == line_of(HAND, "MAN_EPOCH_IGNITION", 2)
    assert doc.user_defined == {"USER_DEFINED_EARTH_MODEL": "WGS-84"}
    # every comment kept, with its block and line (7.8.7 placements)
    blocks = [(c.block, c.text) for c in doc.comments]
    assert blocks == [("header", "written by hand from CCSDS 502.0-B-3 sec. 3.2 and 7"),
                      ("metadata", "metadata, Table 3-2"),
                      ("state vector", "state vector, day-of-year epoch form (7.5.10)"),
                      ("Keplerian elements", "osculating elements"), ("spacecraft parameters", "spacecraft"),
                      ("maneuver 1", "first manoeuvre")]
    assert doc.comments[0].line == 2
    assert doc.lines["X"] == line_of(HAND, "X =")


def test_mean_anomaly_is_turned_into_the_true_anomaly():
    # e = 0.1, E = 90 deg: M = E - e sin E; perifocal r = a (-e, sqrt(1-e^2)), v = sqrt(mu/a) (-1, 0)
    # (Kepler's equation, Vallado (2013) sec. 2.2, from memory); i = 45 deg, raan = argp = 0.
    a, e = 8000.0, 0.1
    M = math.degrees(math.pi / 2 - e)
    s45 = math.sqrt(0.5)
    y = a * math.sqrt(1 - e * e)
    r = (-e * a, y * s45, y * s45)
    v = (-math.sqrt(MU_KM / a), 0.0, 0.0)
    text = HAND.split("COMMENT osculating")[0] + f"""
SEMI_MAJOR_AXIS = {a}
ECCENTRICITY = {e}
INCLINATION = 45 [deg]
RA_OF_ASC_NODE = 0 [deg]
ARG_OF_PERICENTER = 0 [deg]
MEAN_ANOMALY = {M:.12f} [deg]
GM = {MU_KM} [km**3/s**2]
"""
    for key, value in zip(("X", "Y", "Z", "X_DOT", "Y_DOT", "Z_DOT"), r + v):
        text = "\n".join(f"{key} = {value:.12f}" if ln.startswith(f"{key} =") else ln for ln in text.splitlines())
    doc = read_opm(text)
    nu_expected = 2 * math.atan(math.sqrt((1 + e) / (1 - e)) * math.tan(math.pi / 4))
    assert doc.keplerian.anomaly == "mean"
    assert doc.keplerian.nu_rad == pytest.approx(nu_expected, abs=1e-12)
    # the same elements with the mean anomaly 10 deg off no longer match the state vector
    bad = text.replace(f"MEAN_ANOMALY = {M:.12f}", f"MEAN_ANOMALY = {M + 10:.12f}")
    with pytest.raises(ValueError, match=rf"^OPM line {line_of(bad, 'SEMI_MAJOR_AXIS')}: the Keplerian "
                                         r"elements disagree with the state vector"):
        read_opm(bad)


def _drop(key):
    return lambda t: "\n".join(ln for ln in t.splitlines() if not ln.startswith(key))


def _sub(old, new, count=1):
    def f(t):
        assert old in t, old
        return t.replace(old, new, count)
    return f


def _after(key, extra):
    return lambda t: "\n".join(ln + ("\n" + extra if ln.startswith(key) else "") for ln in t.splitlines())


def _swap_blocks(t):
    """The spacecraft parameters moved in front of the Keplerian elements."""
    head, rest = t.split("COMMENT osculating elements\n")
    kep, rest = rest.split("COMMENT spacecraft\n")
    sc, tail = rest.split("COMMENT first manoeuvre\n")
    return head + "COMMENT spacecraft\n" + sc + "COMMENT osculating elements\n" + kep + "COMMENT first manoeuvre\n" + tail


# (case id, transform of HAND, start of the line the message must name, pattern of the reason)
MALFORMED = [
    ("missing keyword", _drop("Z_DOT"), "Y_DOT", r"missing keyword Z_DOT \(expected after Y_DOT\) in the state vector block"),
    ("missing mandatory metadata", _drop("OBJECT_ID"), "OBJECT_NAME",
     r"missing keyword OBJECT_ID \(expected after OBJECT_NAME\) in the metadata block"),
    ("missing GM", _drop("GM ="), "TRUE_ANOMALY", r"missing keyword GM .*all or none"),
    ("missing dv", _drop("MAN_DV_3 = 0.0 [km/s]"), "MAN_DV_2 = 0.0", r"missing keyword MAN_DV_3 .*in the maneuver block"),
    ("missing state", lambda t: t.split("COMMENT state vector")[0], "TIME_SYSTEM",
     r"missing keyword EPOCH: the message ends without its state vector"),
    ("bad number", _sub("X = 7000.0 [km]", "X = 7O00.0 [km]"), "X = 7O00", r"X = '7O00\.0' is not a number"),
    ("two numbers", _sub("Y = 0.0 [km]", "Y = 0.0 1.0 [km]"), "Y =", r"is not a number"),
    ("not finite", _sub("Y = 0.0 [km]", "Y = 1e999 [km]"), "Y =", r"not a finite number"),
    ("wrong unit", _sub("X = 7000.0 [km]", "X = 7000000.0 [m]"), "X =", r"X is in \[m\].*unit for X is \[km\]"),
    ("wrong speed unit", _sub(f"Y_DOT = {VY:.12f} [km/s]", f"Y_DOT = {VY * 1e3:.9f} [m/s]"), "Y_DOT",
     r"\[m/s\].*\[km/s\]"),
    ("unit on a ratio", _sub("ECCENTRICITY = 0.0", "ECCENTRICITY = 0.0 [n/a]"), "ECCENTRICITY",
     r"dimensionless"),
    ("unit without blank", _sub("X = 7000.0 [km]", "X = 7000.0[km]"), "X =", r"square brackets"),
    ("unit on text", _sub("OBJECT_NAME = WREN-3", "OBJECT_NAME = WREN-3 [kg]"), "OBJECT_NAME", r"takes no unit"),
    ("duplicate keyword", _after("Y = 0.0", "Y = 0.0 [km]"), ("Y = 0.0", 2), r"duplicate Y \(already on line 16\)"),
    ("duplicate state vector block", lambda t: t + "EPOCH = 2027-03-14T06:00:00\nX = 1 [km]\n", "EPOCH = 2027-03-14",
     r"a second state vector \(EPOCH already on line 14\)"),
    ("duplicate metadata", lambda t: t + "OBJECT_NAME = OTHER\n", "OBJECT_NAME = OTHER", r"duplicate OBJECT_NAME"),
    ("duplicate elements block", _after("DRAG_COEFF", "SEMI_MAJOR_AXIS = 7000.0 [km]"), ("SEMI_MAJOR_AXIS", 2),
     r"duplicate SEMI_MAJOR_AXIS \(already on line 23\)"),
    ("duplicate header", _after("ORIGINATOR", "CCSDS_OPM_VERS = 3.0"), ("CCSDS_OPM_VERS", 2), r"second header"),
    ("out of order", _sub("X = 7000.0 [km]\nY = 0.0 [km]", "Y = 0.0 [km]\nX = 7000.0 [km]"), "X =",
     r"X out of order.*7\.4\.8"),
    ("second state vector later", _after("MASS", "EPOCH = 2027-03-14T06:00:00"), "EPOCH = 2027-03-14T06",
     r"a second state vector"),
    ("block out of order", _swap_blocks, "SEMI_MAJOR_AXIS", r"SEMI_MAJOR_AXIS belongs to the Keplerian elements "
     r"block, which comes before the spacecraft parameters"),
    ("manoeuvre not opened by its epoch", _drop("MAN_EPOCH_IGNITION = 2027-03-14T07"), "MAN_DURATION = 120",
     r"MAN_DURATION before MAN_EPOCH_IGNITION"),
    ("unknown keyword", _after("MASS", "SPIN_RATE = 3"), "SPIN_RATE", r"unknown keyword SPIN_RATE"),
    ("lower-case keyword", _sub("MASS = ", "Mass = "), "Mass", r"upper case"),
    ("not KVN", _after("MASS", "just words"), "just words", r"not a 'KEYWORD = value' line"),
    ("empty value", _sub("ORIGINATOR = TESTOPS", "ORIGINATOR ="), "ORIGINATOR", r"has no value"),
    ("comment inside a block", _after("X = 7000", "COMMENT between components"), "COMMENT between",
     r"COMMENT inside the state vector block"),
    ("comment after the header's first keywords", _after("CREATION_DATE", "COMMENT late"), "COMMENT late",
     r"COMMENT inside the header block"),
    ("trailing comment", lambda t: t + "COMMENT the end\n", "COMMENT the end", r"opens no block"),
    ("impossible date", _sub("2027-073T06:00:00.250", "2027-02-30T06:00:00.250"), "EPOCH", r"not a valid date"),
    ("day of year", _sub("2027-073T06:00:00.250", "2027-366T06:00:00.250"), "EPOCH", r"day of year 366"),
    ("leap second", _sub("2027-073T06:00:00.250", "2027-073T23:59:60.000"), "EPOCH", r"leap second"),
    ("time zone", _sub("2027-073T06:00:00.250", "2027-03-14T06:00:00+01:00"), "EPOCH", r"not a time like"),
    ("other centre", _sub("CENTER_NAME = EARTH", "CENTER_NAME = MARS"), "CENTER_NAME",
     r"CENTER_NAME = MARS: .*Earth-centred"),
    ("rotating frame", _sub("REF_FRAME = GCRF", "REF_FRAME = ITRF2000"), "REF_FRAME", r"REF_FRAME = ITRF2000"),
    ("TEME", _sub("REF_FRAME = GCRF", "REF_FRAME = TEME"), "REF_FRAME", r"REF_FRAME = TEME"),
    ("TAI", _sub("TIME_SYSTEM = UTC", "TIME_SYSTEM = TAI"), "TIME_SYSTEM", r"TIME_SYSTEM = TAI: .*UTC only"),
    ("TDB", _sub("TIME_SYSTEM = UTC", "TIME_SYSTEM = TDB"), "TIME_SYSTEM", r"TIME_SYSTEM = TDB"),
    ("GPS", _sub("TIME_SYSTEM = UTC", "TIME_SYSTEM = GPS"), "TIME_SYSTEM", r"TIME_SYSTEM = GPS"),
    ("manoeuvre frame", _sub("MAN_REF_FRAME = TNW", "MAN_REF_FRAME = ITRF-97"), "MAN_REF_FRAME",
     r"MAN_REF_FRAME = ITRF-97"),
    ("version", _sub("CCSDS_OPM_VERS = 3.0", "CCSDS_OPM_VERS = 4.0"), "CCSDS_OPM_VERS", r"4\.0 is not a version"),
    ("positive mass change", _sub("MAN_DELTA_MASS = -0.25", "MAN_DELTA_MASS = 0.25"), "MAN_DELTA_MASS = 0.25",
     r"negative"),
    ("manoeuvres without mass", _drop("MASS ="), "MAN_EPOCH_IGNITION", r"MASS.*3\.2\.4\.9"),
    ("negative mass", _sub("MASS = 160.5", "MASS = -160.5"), "MASS", r"must be positive"),
    ("inclination", _sub("INCLINATION = 30.0", "INCLINATION = 190.0"), "INCLINATION", r"between 0 and 180"),
    ("elements disagree", _sub("RA_OF_ASC_NODE = 0.0", "RA_OF_ASC_NODE = 1.0"), "SEMI_MAJOR_AXIS",
     r"disagree with the state vector"),
    ("tab", _sub("MASS = 160.5", "MASS =\t160.5"), "MASS", r"tab"),
    ("long line", _sub("COMMENT spacecraft", "COMMENT " + "x" * 260), "COMMENT xxx", r"at most 254"),
    ("not an OPM", _sub("CCSDS_OPM_VERS = 3.0", "CCSDS_OEM_VERS = 3.0"), "CCSDS_OEM_VERS",
     r"starts with CCSDS_OPM_VERS"),
]


@pytest.mark.parametrize("case, transform, where, reason", MALFORMED, ids=[c[0] for c in MALFORMED])
def test_malformed_messages_name_the_line(case, transform, where, reason):
    text = transform(HAND)
    with pytest.raises(ValueError) as info:
        read_opm(text, "od.opm")
    msg = str(info.value)
    n = line_of(text, *where) if isinstance(where, tuple) else line_of(text, where)
    assert msg.startswith(f"od.opm line {n}: "), (msg, n)
    assert re.search(reason, msg), msg
    assert "\n" not in msg


def test_line_endings_of_the_standard_are_all_read():
    # 7.3.7: CR, LF, CR LF or LF CR; line numbers stay those of the text
    plain = read_opm(HAND)
    for eol in ("\r\n", "\n\r", "\r"):
        doc = read_opm(HAND.replace("\n", eol))
        assert (doc.epoch_s, doc.r_m, doc.v_m_s) == (plain.epoch_s, plain.r_m, plain.v_m_s)
        assert doc.lines == plain.lines
    with pytest.raises(ValueError, match=rf"^OPM line {line_of(HAND, 'X =')}: X is in \[m\]"):
        read_opm(HAND.replace("X = 7000.0 [km]", "X = 7000.0 [m]").replace("\n", "\r\n"))


def test_xml_and_empty_input_are_refused():
    with pytest.raises(ValueError, match=r"^x line 1: this is XML"):
        read_opm('<?xml version="1.0"?>\n<opm/>\n', "x")
    with pytest.raises(ValueError, match=r"is empty, not an OPM"):
        read_opm("\n\n", "x")
    assert looks_like_opm("\n  CCSDS_OPM_VERS = 2.0\n") and not looks_like_opm('epoch = "x"\n')


def test_optional_blocks_version_2_and_covariance():
    # a version 2.0 message with only the mandatory keywords, then one with a covariance block
    base = "\n".join(ln for ln in HAND.split("COMMENT osculating")[0].splitlines() if not ln.startswith("COMMENT"))
    base = base.replace("CCSDS_OPM_VERS = 3.0", "CCSDS_OPM_VERS = 2.0")
    doc = read_opm(base)
    assert doc.keplerian is None and doc.mass_kg is None and doc.maneuvers == () and doc.comments == ()
    names = ["CX_X", "CY_X", "CY_Y", "CZ_X", "CZ_Y", "CZ_Z", "CX_DOT_X", "CX_DOT_Y", "CX_DOT_Z",
             "CX_DOT_X_DOT", "CY_DOT_X", "CY_DOT_Y", "CY_DOT_Z", "CY_DOT_X_DOT", "CY_DOT_Y_DOT",
             "CZ_DOT_X", "CZ_DOT_Y", "CZ_DOT_Z", "CZ_DOT_X_DOT", "CZ_DOT_Y_DOT", "CZ_DOT_Z_DOT"]
    units = {0: "km**2", 1: "km**2/s", 2: "km**2/s**2"}

    def unit(name):
        return units[name.count("DOT")]
    cov = base + "\nCOMMENT covariance\nCOV_REF_FRAME = RTN\n" + "\n".join(
        f"{n} = {k + 1}.0e-6 [{unit(n)}]" for k, n in enumerate(names)) + "\n"
    doc = read_opm(cov)
    assert doc.covariance_frame == "RTN" and len(doc.covariance) == 21
    assert doc.covariance[0] == pytest.approx(1e-6 * 1e6) and doc.covariance[20] == pytest.approx(21e-6 * 1e6)
    with pytest.raises(ValueError, match=rf"line {line_of(cov, 'CZ_DOT_Y_DOT')}: missing keyword CZ_DOT_Z_DOT"):
        read_opm(_drop("CZ_DOT_Z_DOT")(cov))
    with pytest.raises(ValueError, match=r"CX_DOT_X is in \[km\*\*2\]"):
        read_opm(cov.replace("CX_DOT_X = 7.0e-6 [km**2/s]", "CX_DOT_X = 7.0e-6 [km**2]"))


def test_reading_a_file_names_the_file(tmp_path):
    p = tmp_path / "od.opm"
    p.write_text(HAND.replace("X = 7000.0 [km]", "X = 7000.0 [m]"))
    with pytest.raises(ValueError, match=rf"^{p} line {line_of(HAND, 'X =')}: X is in \[m\]"):
        read_opm_file(p)
    with pytest.raises(ValueError, match=r"gone\.opm: OPM file not found"):
        read_opm_file(tmp_path / "gone.opm")
    p.write_bytes(HAND.replace("WREN-3", "WREN-\u00e9").encode())
    with pytest.raises(ValueError, match=rf"line {line_of(HAND, 'OBJECT_NAME')}: not ASCII"):
        read_opm_file(p)


# --------------------------------------------------------------------------------------------
# writing and round trips
# --------------------------------------------------------------------------------------------

def test_opm_to_state_to_opm_round_trip(tmp_path):
    body = load_body("earth")
    doc = read_opm(HAND, "hand.opm")
    text = write_opm(epoch_s=doc.epoch_s, r_m=doc.r_m, v_m_s=doc.v_m_s, body=body, mass_kg=doc.mass_kg,
                     object_name=doc.object_name, object_id=doc.object_id, ref_frame=doc.ref_frame,
                     creation_s=doc.creation_s)
    back = read_opm(text)
    assert back.epoch_s == pytest.approx(doc.epoch_s, abs=1e-6)          # printed to 1 us
    assert back.r_m == pytest.approx(doc.r_m, abs=5e-4)                 # printed to 1 mm
    assert back.v_m_s == pytest.approx(doc.v_m_s, abs=5e-7)             # printed to 1 um/s
    assert back.mass_kg == pytest.approx(doc.mass_kg, abs=5e-7)
    assert (back.object_name, back.object_id, back.ref_frame) == ("WREN-3", "2027-012A", "GCRF")
    assert back.header["CREATION_DATE"] == "2027-03-14T05:00:00.000000"
    # the elements written beside the state pass the reader's consistency check and say the same
    assert back.keplerian.a_m == pytest.approx(7000e3, abs=1e-3)
    assert back.keplerian.i_rad == pytest.approx(math.radians(30.0), abs=1e-11)
    # a second pass reproduces the state vector and the mass exactly (the elements, derived from
    # the rounded state, may move in their last printed digit)
    again = write_opm(epoch_s=back.epoch_s, r_m=back.r_m, v_m_s=back.v_m_s, body=body, mass_kg=back.mass_kg,
                      object_name=back.object_name, object_id=back.object_id, ref_frame=back.ref_frame,
                      creation_s=back.creation_s, elements=False)
    first = write_opm(epoch_s=doc.epoch_s, r_m=doc.r_m, v_m_s=doc.v_m_s, body=body, mass_kg=doc.mass_kg,
                      object_name=doc.object_name, object_id=doc.object_id, ref_frame=doc.ref_frame,
                      creation_s=doc.creation_s, elements=False)
    assert again == first


@settings(max_examples=40, deadline=None)
@given(
    rp_km=st.floats(6600.0, 45000.0), ra_extra_km=st.floats(0.0, 30000.0),
    i_deg=st.floats(0.0, 180.0), raan_deg=st.floats(0.0, 360.0), argp_deg=st.floats(0.0, 360.0),
    nu_deg=st.floats(0.0, 360.0), dt_s=st.floats(0.0, 3e8), mass=st.floats(1.0, 5000.0),
)
def test_write_read_round_trip_property(rp_km, ra_extra_km, i_deg, raan_deg, argp_deg, nu_deg, dt_s, mass):
    from mechanics.elements import apsides_to_elements, elements_to_rv

    body = load_body("earth")
    el = apsides_to_elements(rp_km * 1e3, (rp_km + ra_extra_km) * 1e3, math.radians(i_deg),
                             math.radians(raan_deg), math.radians(argp_deg), math.radians(nu_deg))
    r, v = elements_to_rv(el, body.mu_m3_s2)
    t = round(1.7e9 + dt_s, 6)
    back = read_opm(write_opm(epoch_s=t, r_m=tuple(r), v_m_s=tuple(v), body=body, mass_kg=mass, creation_s=t))
    assert back.epoch_s == pytest.approx(t, abs=1e-6)
    assert np.max(np.abs(np.array(back.r_m) - r)) <= 5e-4 + 1e-9
    assert np.max(np.abs(np.array(back.v_m_s) - v)) <= 5e-7 + 1e-12
    assert back.mass_kg == pytest.approx(mass, abs=5e-7)


def _setup(tmp_path, attitude="inertial", kind="circular", alt="700 km"):
    return write_campaign(tmp_path, name="opm plan", attitude=attitude, kind=kind, alt=alt,
                          vehicle_name="OPM test vehicle")


def _t(text):
    return datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=timezone.utc).timestamp()


@pytest.mark.parametrize("attitude, kind, alt", [("inertial", "circular", "700 km"),
                                                 ("tracking", "periapsis", "300 km")])
def test_plan_to_opm_reads_back_to_the_printed_numbers(tmp_path, attitude, kind, alt):
    scen = _setup(tmp_path, attitude, kind, alt)
    out = tmp_path / "queue.opm"
    proc = run("plan", scen, "--json", "--opm", out)
    doc = json.loads(proc.stdout)                      # stdout stays pure JSON
    assert f"wrote {out}" in proc.stderr
    opm = read_opm_file(out)
    assert format_utc(opm.epoch_s) == doc["epoch"]
    assert opm.r_m == pytest.approx(doc["initial_state"]["r_m"], abs=5e-4)
    assert opm.v_m_s == pytest.approx(doc["initial_state"]["v_mps"], abs=5e-7)
    assert opm.mass_kg == pytest.approx(doc["initial_state"]["mass_kg"], abs=5e-7)
    assert opm.object_name == "OPM test vehicle" and opm.ref_frame == "EME2000"
    assert len(opm.maneuvers) == len(doc["burns"]) >= 1
    for m, b in zip(opm.maneuvers, doc["burns"]):
        assert format_utc(m.ignition_s) == b["ignition"]
        assert m.ignition_s == pytest.approx(_t(b["ignition"]), abs=5e-4)
        assert m.duration_s == pytest.approx(b["duration_s"], abs=5e-7)
        assert -m.delta_mass_kg == pytest.approx(b["propellant_kg"], abs=5e-7)
        dv = np.array(m.dv_m_s)
        assert np.linalg.norm(dv) == pytest.approx(b["dv_mps"], abs=2e-9)
        if attitude == "inertial":
            assert m.ref_frame == "EME2000"
            assert dv / np.linalg.norm(dv) == pytest.approx(b["attitude"]["direction"], abs=1e-9)
        else:
            sense = 1.0 if b["attitude"]["sense"] == "prograde" else -1.0
            assert m.ref_frame == "TNW"
            assert dv == pytest.approx([sense * b["dv_mps"], 0.0, 0.0], abs=2e-9)
    if attitude == "tracking":
        assert all(b["attitude"]["sense"] == "retrograde" for b in doc["burns"])  # a lowering
    # the propellant of the blocks adds up to the plan's total (to the printed milligram)
    assert -sum(m.delta_mass_kg for m in opm.maneuvers) == pytest.approx(doc["totals"]["propellant_kg"], abs=1e-5)
    assert any("FEASIBLE" in c.text for c in opm.comments if c.block == "header")


def test_tnw_components_follow_the_standards_definition():
    from console.opm import _tnw_from_tracking

    # TNW per CCSDS 502.0-B-3 3.2.4.11: T along v, W along r x v, N = W x T (built here directly).
    r = np.array([6800e3, 1200e3, -300e3])
    v = np.array([-1200.0, 6900.0, 2500.0])
    T = v / np.linalg.norm(v)
    W = np.cross(r, v) / np.linalg.norm(np.cross(r, v))
    N = np.cross(W, T)
    rng = np.random.default_rng(7)
    for _ in range(5):
        d = rng.normal(size=3)
        d /= np.linalg.norm(d)
        inertial = tracking_frame(r, v).T @ d        # burndesk's tracking components -> inertial
        tnw = np.array(_tnw_from_tracking(d))
        assert tnw == pytest.approx([inertial @ T, inertial @ N, inertial @ W], abs=1e-12)


def test_plan_opm_refuses_to_overwrite_unless_forced(tmp_path):
    scen = _setup(tmp_path)
    out = tmp_path / "queue.opm"
    out.write_text("keep me")
    proc = run("plan", scen, "--opm", out, ok=(2,))
    assert "already exists" in proc.stderr and "--force" in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1 and proc.stdout == ""
    assert out.read_text() == "keep me"
    run("plan", scen, "--opm", out, "--force")
    assert read_opm_file(out).maneuvers
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    link = tmp_path / "link.opm"
    link.symlink_to(victim)
    proc = run("plan", scen, "--opm", link, "--force", ok=(2,))
    assert "link" in proc.stderr and victim.read_text() == "keep me"
    proc = run("plan", scen, "--opm", tmp_path / "nowhere" / "q.opm", ok=(2,))
    assert "does not exist" in proc.stderr


def test_infeasible_plan_still_writes_its_opm_with_the_warning(tmp_path):
    scen = write_campaign(tmp_path, name="opm plan", alt="900 km", propellant="6 kg",
                          vehicle_name="OPM test vehicle")
    out = tmp_path / "q.opm"
    run("plan", scen, "--opm", out, ok=(3,))
    opm = read_opm_file(out)
    header = [c.text for c in opm.comments if c.block == "header"]
    assert any("NOT FEASIBLE" in c for c in header) and any(c.startswith("WARNING: infeasible") for c in header)


def test_writer_refusals(tmp_path):
    body = load_body("earth")
    moon = load_body("moon")
    r, v = (7000e3, 0.0, 0.0), (0.0, 7546.0, 0.0)
    with pytest.raises(ValueError, match=r"not the Earth"):
        write_opm(epoch_s=EPOCH_S, r_m=r, v_m_s=v, body=moon)
    with pytest.raises(ValueError, match=r"REF_FRAME 'ITRF2000'"):
        write_opm(epoch_s=EPOCH_S, r_m=r, v_m_s=v, body=body, ref_frame="ITRF2000")
    with pytest.raises(ValueError, match=r"not finite|cannot write"):
        write_opm(epoch_s=EPOCH_S, r_m=(float("nan"), 0.0, 0.0), v_m_s=v, body=body, elements=False)
    p = save_text("x\n", tmp_path / "a.opm")
    with pytest.raises(ValueError, match=r"already exists"):
        save_text("y\n", p)
    assert p.read_text() == "x\n"
    save_text("y\n", p, force=True)
    assert p.read_text() == "y\n" and not list(tmp_path.glob(".*.tmp"))
    assert set(INERTIAL_FRAMES) == {"EME2000", "GCRF", "ICRF"}


def test_names_are_written_as_printable_ascii():
    body = load_body("earth")
    text = write_opm(epoch_s=EPOCH_S, r_m=(7000e3, 0, 0), v_m_s=(0, 7546.0, 0), body=body,
                     object_name="Wr\u00e9n\n3", header_comments=["caf\u00e9 " + "y" * 300])
    doc = read_opm(text)   # would refuse a non-ASCII or over-long line
    assert doc.object_name == "Wr?n 3"
    assert "".join(c.text for c in doc.comments if c.block == "header").endswith("y" * 300)


# --------------------------------------------------------------------------------------------
# scenarios and STATE files
# --------------------------------------------------------------------------------------------

def _opm_scenario(tmp_path, epoch_line="", state='opm = "od/hand.opm"', body="earth", text=HAND):
    (tmp_path / "od").mkdir(exist_ok=True)
    (tmp_path / "od" / "hand.opm").write_text(text)
    (tmp_path / "vehicle.toml").write_text(VEHICLE.format(vehicle_name="OPM test vehicle", propellant="60 kg"))
    p = tmp_path / "scen.toml"
    p.write_text(f'name = "from OD"\nbody = "{body}"\nvehicle = "vehicle.toml"\n{epoch_line}\n'
                 f'[state]\n{state}\n[target]\nkind = "circular"\naltitude = "900 km"\n'
                 '[options]\nmodel = "two-body"\n')
    return p


def test_scenario_state_from_an_opm(tmp_path, monkeypatch):
    p = _opm_scenario(tmp_path)
    monkeypatch.chdir(tmp_path / "od")               # the path resolves against the scenario's folder
    sc, st_in = load_scenario_with_state(p)
    doc = read_opm(HAND)
    assert sc.epoch_s == doc.epoch_s and sc.r_m == doc.r_m and sc.v_m_s == doc.v_m_s
    assert st_in.form == "opm" and st_in.opm.object_id == "2027-012A"
    # MASS is reported, never put in place of the vehicle's mass
    assert sc.vehicle.wet_mass_kg == 560.0
    mass_note = next(n for n in st_in.notes if "MASS" in n)
    assert "160.500 kg is informational" in mass_note and "560.000 kg" in mass_note
    assert f"line {line_of(HAND, 'MASS')}" in mass_note
    assert any("manoeuvre block" in n for n in st_in.notes)
    # the same epoch written in the scenario is accepted; another one is refused
    same = _opm_scenario(tmp_path, 'epoch = "2027-03-14T06:00:00.250Z"')
    assert load_scenario(same).epoch_s == doc.epoch_s
    other = _opm_scenario(tmp_path, 'epoch = "2027-03-14T06:00:00Z"')
    with pytest.raises(ValueError, match=rf"scen\.toml: epoch: .*disagrees with the OPM's EPOCH .*line "
                                         rf"{line_of(HAND, 'EPOCH')}"):
        load_scenario(other)


@pytest.mark.parametrize("kwargs, pattern", [
    ({"body": "moon"}, r"scen\.toml: state\.opm: .*hand\.opm line 9: CENTER_NAME EARTH does not match the "
                       r"body 'moon'"),
    ({"state": 'opm = "od/hand.opm"\nframe = "gcrf"'}, r"state\.frame: the OPM's REF_FRAME gives the frame"),
    ({"state": 'opm = "od/hand.opm"\ni = 5'}, r"state\.i: not used with opm"),
    ({"state": 'opm = "od/hand.opm"\nr = [7000, 0, 0]'}, r"state\.r: not used with opm"),
    ({"state": "opm = 5"}, r"state\.opm: expected the path"),
    ({"state": 'opm = "od/missing.opm"'}, r"missing\.opm: OPM file not found"),
    ({"text": HAND.replace("X = 7000.0 [km]", "X = 6000.0 [km]").replace("SEMI_MAJOR_AXIS", "X_").split("COMMENT osc")[0]},
     r"hand\.opm line 15 \(X, Y, Z\): position is inside the body"),
    ({"text": HAND.replace("TIME_SYSTEM = UTC", "TIME_SYSTEM = TT")}, r"hand\.opm line 11: TIME_SYSTEM = TT"),
])
def test_scenario_opm_refusals(tmp_path, kwargs, pattern):
    p = _opm_scenario(tmp_path, **kwargs)
    with pytest.raises(ValueError, match=pattern):
        load_scenario(p)


def test_scenario_without_epoch_needs_an_opm(tmp_path):
    p = _opm_scenario(tmp_path, state='periapsis_alt = 500\napoapsis_alt = 520')
    with pytest.raises(ValueError, match=r"scen\.toml: epoch: missing"):
        load_scenario(p)


def test_state_file_forms_with_an_opm(tmp_path):
    body = load_body("earth")
    (tmp_path / "od.opm").write_text(HAND)
    doc = read_opm(HAND)
    direct = load_state_file(tmp_path / "od.opm", body)               # the OPM itself
    assert (direct.epoch_s, direct.r_m, direct.v_m_s, direct.form) == (doc.epoch_s, doc.r_m, doc.v_m_s, "opm")
    assert any("MASS 160.500 kg is informational" in n for n in direct.notes)
    (tmp_path / "od.txt").write_text(HAND)                             # recognised by its content
    assert load_state_file(tmp_path / "od.txt", body).r_m == doc.r_m
    table = tmp_path / "s.toml"
    table.write_text('[state]\nopm = "od.opm"\n')                      # epoch comes from the OPM
    assert load_state_file(table, body).epoch_s == doc.epoch_s
    table.write_text('epoch = "2027-03-14T06:00:01Z"\n[state]\nopm = "od.opm"\n')
    with pytest.raises(ValueError, match=r"s\.toml: epoch: .*disagrees"):
        load_state_file(table, body)
    with pytest.raises(ValueError, match=rf"^{tmp_path / 'od.opm'} line 9: CENTER_NAME EARTH does not match "
                                         r"the body 'moon'$"):
        load_state_file(tmp_path / "od.opm", load_body("moon"))
    (tmp_path / "bad.opm").write_text(HAND.replace("Y = 0.0 [km]", "Y = zero [km]"))
    with pytest.raises(ValueError, match=rf"bad\.opm line {line_of(HAND, 'Y =')}: Y = 'zero' is not a number"):
        load_state_file(tmp_path / "bad.opm", body)


def test_cli_plan_from_an_opm_keeps_its_identity_and_state(tmp_path):
    p = _opm_scenario(tmp_path)
    out = tmp_path / "out.opm"
    proc = run("plan", p, "--opm", out, "--json")
    json.loads(proc.stdout)
    assert "note: " in proc.stderr and "MASS 160.500 kg is informational" in proc.stderr
    src, back = read_opm(HAND), read_opm_file(out)
    # OPM -> state -> plan -> OPM: the state at the epoch comes back to the printed precision
    assert back.epoch_s == pytest.approx(src.epoch_s, abs=1e-6)
    assert back.r_m == pytest.approx(src.r_m, abs=5e-4)
    assert back.v_m_s == pytest.approx(src.v_m_s, abs=5e-7)
    assert (back.object_name, back.object_id, back.ref_frame) == ("WREN-3", "2027-012A", "GCRF")
    assert back.mass_kg == 560.0                  # the vehicle's mass, which the plan used
    assert any("hand.opm" in c.text for c in back.comments)
    bad = _opm_scenario(tmp_path, text=HAND.replace("X = 7000.0 [km]", "X = 7000.0 [m]"))
    proc = run("plan", bad, ok=(2,))
    assert f"hand.opm line {line_of(HAND, 'X =')}: X is in [m]" in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1


def test_session_record_after_an_opm_and_the_remaining_queue_as_opm(tmp_path):
    from mechanics.flight import Thrust, fly
    from mechanics.kepler import propagate_kepler

    scen = _setup(tmp_path)
    sess = tmp_path / "c.burn"
    run("session", "init", sess, "--scenario", scen)
    doc = json.loads(run("session", "show", sess, "--json").stdout)
    b = doc["burns"][0]
    sc = load_scenario(scen)
    s0 = doc["initial_state"]
    r, v = propagate_kepler(np.array(s0["r_m"]), np.array(s0["v_mps"]), _t(b["ignition"]) - _t(doc["epoch"]),
                            sc.body.mu_m3_s2)
    thrust = Thrust(sc.vehicle.thrust_n, sc.vehicle.mdot_kg_s, "inertial", tuple(b["attitude"]["direction"]))
    y = fly(np.r_[r, v, s0["mass_kg"]], b["duration_s"], sc.body, "two-body", thrust)[0]
    t_od = round(_t(b["cutoff"]) + 900.0, 3)
    r2, v2 = propagate_kepler(y[:3], y[3:6], t_od - _t(b["cutoff"]), sc.body.mu_m3_s2)
    od = tmp_path / "post_burn_1.opm"
    od.write_text(write_opm(epoch_s=t_od, r_m=tuple(r2), v_m_s=tuple(v2), body=sc.body, mass_kg=float(y[6]),
                            object_name="OPM test vehicle"))
    proc = run("session", "record", sess, "--burn", 1, "--after", od)
    assert "burn 1 recorded" in proc.stdout and "MASS" in proc.stderr
    after = json.loads(run("session", "show", sess, "--json").stdout)
    assert after["epoch"] == format_utc(t_od)
    assert after["initial_state"]["r_m"] == pytest.approx(list(r2), abs=5e-4)
    done = after["burns"][0]
    assert done["status"] == "done" and done["drift"]["level"] == "ok"
    assert done["drift"]["thrust_factor"] == pytest.approx(1.0, abs=2e-3)
    # the remaining queue, from the latest state, as an OPM
    from console.session_ops import Session

    with Session.open(sess, readonly=True) as s:
        v_ = s.view()
        text = session_to_opm(v_)
    rest = read_opm(text)
    planned = [x for x in after["burns"] if x["status"] == "planned"]
    assert len(rest.maneuvers) == len(planned) >= 1
    assert format_utc(rest.epoch_s) == after["epoch"]
    assert rest.mass_kg == pytest.approx(after["initial_state"]["mass_kg"], abs=5e-7)
    for m, x in zip(rest.maneuvers, planned):
        assert format_utc(m.ignition_s) == x["ignition"]
        assert -m.delta_mass_kg == pytest.approx(x["propellant_kg"], abs=5e-7)


def test_the_console_record_form_reads_the_post_burn_orbit_from_a_message(tmp_path):
    # console.forms.read_record with the "opm" form: the message's EPOCH is the OD epoch
    from console.forms import FormErrors, read_record
    from console.profiles import load_body

    body = load_body("earth")
    r, v = (7000e3, 10e3, -5e3), (1.0, 7545.0, 12.0)
    t = 1.8e9
    (tmp_path / "after.opm").write_text(write_opm(epoch_s=t, r_m=r, v_m_s=v, body=body))
    raw = {"ignition": "2027-01-15T08:00:00Z", "duration": "300 s", "propellant": "", "source": "gauge",
           "after_epoch": ""}
    out = read_record(raw, "opm", {"opm": "after.opm"}, body, tmp_path)
    assert out["after"].epoch_s == t
    assert np.allclose(out["after"].r_m, r, atol=1e-3) and np.allclose(out["after"].v_m_s, v, atol=1e-6)
    with pytest.raises(FormErrors) as exc:
        read_record(dict(raw, after_epoch="2027-01-15T09:00:00Z"), "opm", {"opm": "after.opm"}, body, tmp_path)
    assert "after_epoch" in exc.value.errors
    with pytest.raises(FormErrors) as exc:
        read_record(raw, "opm", {"opm": "missing.opm"}, body, tmp_path)
    assert "not found" in exc.value.errors["opm"]
