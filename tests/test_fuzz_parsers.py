"""Fuzzing every parser an operator's files and keystrokes reach.

Scenario, vehicle, body and STATE files (TOML trees written by a small TOML writer below, the
standard library having none), unit strings, UTC epochs and CCSDS OPM files are mutated at
random: wrong types, wrong units, NaN and infinity, huge and tiny numbers, unknown keys, nested
garbage, dropped / duplicated / reordered lines, stray bytes.  The property is the same
everywhere: an input either parses to finite, physically sane values, or is refused with a
``ValueError`` whose one-line message names the file (or field) and the key or line at fault;
never another exception, never a hang.  A sample of the fuzzed scenario files also goes through
the real command line (``burndesk orbit`` / ``burndesk plan``): exit 0, 2 or 3 only, no
traceback, and one line on stderr for a refusal.

Figures: every parser's count of inputs tried (parsed / refused) is printed in the terminal
summary of the run.  ``BURNDESK_FUZZ_SCALE=N`` multiplies every example count by N for a longer
campaign (``BURNDESK_FUZZ_REPORT=FILE`` also writes the counts as JSON); the default run is
sized to take seconds.  ``BURNDESK_FUZZ_HANG_S`` (default 20 s) is the hang guard: a parser call
that has not returned after that long fails the test instead of stalling the suite.  It guards
against hangs only (parsing takes milliseconds); it is not a timing requirement.
"""

from __future__ import annotations

import calendar
import collections
import datetime as dt
import json
import math
import os
import re
import signal
import string
import subprocess
import sys
import tempfile
import tomllib
from contextlib import contextmanager
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from console import opm as opm_mod
from console.opm import read_opm, read_opm_file
from console.profiles import load_body, load_vehicle
from console.scenario_file import (OPTION_KEYS, SCENARIO_KEYS, STATE_KEYS, TARGET_KEYS,
                                   load_scenario_with_state, load_state_file)
from console.timeutil import parse_utc
from console.units import KINDS, parse_value

ROOT = Path(__file__).resolve().parents[1]
EXE = str(Path(sys.executable).parent / "burndesk")

SCALE = float(os.environ.get("BURNDESK_FUZZ_SCALE", "1"))
HANG_S = float(os.environ.get("BURNDESK_FUZZ_HANG_S", "20"))


def examples(default: int) -> int:
    return max(1, int(round(default * SCALE)))


FUZZ = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                                  HealthCheck.filter_too_much])

# --------------------------------------------------------------------------- figures

TRIED: collections.Counter = collections.Counter()
OUTCOMES: collections.Counter = collections.Counter()
SLOWEST: dict = {}


class _Figures:
    """Prints the counts in pytest's terminal summary (registered once per session)."""

    def pytest_terminal_summary(self, terminalreporter):
        if not TRIED:
            return
        tr = terminalreporter
        tr.section("burndesk fuzz figures (inputs tried per parser)")
        for name in sorted(TRIED):
            slowest = f"  slowest {SLOWEST[name]:.3f} s" if name in SLOWEST else ""
            tr.write_line(f"{name:<22} {TRIED[name]:>8} tried  {OUTCOMES[name, 'parsed']:>8} parsed  "
                          f"{OUTCOMES[name, 'refused']:>8} refused{slowest}")
        tr.write_line(f"{'total':<22} {sum(TRIED.values()):>8} tried (scale {SCALE:g})")
        out = os.environ.get("BURNDESK_FUZZ_REPORT")
        if out:
            Path(out).write_text(json.dumps({
                "scale": SCALE,
                "parsers": {name: {"tried": TRIED[name], "parsed": OUTCOMES[name, "parsed"],
                                   "refused": OUTCOMES[name, "refused"],
                                   "slowest_s": SLOWEST.get(name)} for name in sorted(TRIED)},
            }, indent=2))


@pytest.fixture(scope="module", autouse=True)
def _report_figures(request):
    pm = request.config.pluginmanager
    if not pm.has_plugin("burndesk-fuzz-figures"):
        pm.register(_Figures(), "burndesk-fuzz-figures")
    yield


class ParserHang(Exception):
    """A parser call did not return within the hang guard."""


@contextmanager
def hang_guard(name: str):
    import time

    def alarm(signum, frame):
        raise ParserHang(f"{name}: no answer after {HANG_S:g} s")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, HANG_S)
    t0 = time.perf_counter()
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0.0)
        signal.signal(signal.SIGALRM, old)
        SLOWEST[name] = max(SLOWEST.get(name, 0.0), time.perf_counter() - t0)


def attempt(name: str, fn, check_refusal):
    """Run one parser call: returns its result, or None after checking a ValueError's message.

    Any other exception (and a hang) propagates and fails the property."""
    TRIED[name] += 1
    with hang_guard(name):
        try:
            result = fn()
        except ValueError as exc:
            check_refusal(str(exc))
            OUTCOMES[name, "refused"] += 1
            return None
    OUTCOMES[name, "parsed"] += 1
    return result


# --------------------------------------------------------------------------- messages

VEHICLE_FILE_KEYS = {"name", "description", "dry_mass", "propellant", "unusable_propellant",
                     "reserve_propellant", "thrusters", "limits", "tolerances", "count", "thrust",
                     "isp", "cant", "label", "max_burn_duration", "max_burn_arc", "dv_watch",
                     "dv_alarm", "ignition", "duration"}
BODY_FILE_KEYS = {"name", "description", "mu", "radius", "j2", "rotation_rate", "min_safe_alt",
                  "value", "source"}
ALL_KEYS = (set(SCENARIO_KEYS) | set(STATE_KEYS) | set(TARGET_KEYS) | set(OPTION_KEYS)
            | VEHICLE_FILE_KEYS | BODY_FILE_KEYS | {"epoch", "state", "kind"})
MULTI_LETTER = sorted(k for k in ALL_KEYS if len(k) > 1)
_KEY_WORD = re.compile(r"\b(?:" + "|".join(map(re.escape, MULTI_LETTER)) + r")\b")
_DOTTED = re.compile(r"\b[A-Za-z_]+(?:\[\d+\])?\.[A-Za-z_]+\b|\b[A-Za-z_]+\[\d+\]")
_LINE = re.compile(r"\bline \d+")
_FILE_NAME = re.compile(r"\S*/\S*")  # a path
FILE_LEVEL = ("not valid TOML", "not UTF-8", "bytes", "not found", "is a folder", "regular file",
              "nested too deeply", "cannot be read", "not ASCII", "is empty")


def names_a_key(msg: str) -> bool:
    msg = _FILE_NAME.sub(" ", msg)  # a path (".../vehicle.toml") is no field name
    return bool(_KEY_WORD.search(msg) or _DOTTED.search(msg) or _LINE.search(msg)
                or any(p in msg for p in FILE_LEVEL))


def file_refusal(*files: Path):
    """Checker of a refusal: one non-empty line naming one of ``files`` and a key/field/line."""
    names = [f.name for f in files]

    def check(msg: str) -> None:
        assert msg.strip(), "empty error message"
        assert "\n" not in msg, f"multi-line error message: {msg!r}"
        assert any(n in msg for n in names), f"message names none of {names}: {msg!r}"
        assert names_a_key(msg), f"message names no key, field or line: {msg!r}"
    return check


# --------------------------------------------------------------------------- a small TOML writer

def toml_string(s: str) -> str:
    """A TOML basic string (control characters and DEL escaped)."""
    out = ['"']
    for c in s:
        if c in '"\\':
            out.append("\\" + c)
        elif ord(c) < 0x20 or ord(c) == 0x7F:
            out.append(f"\\u{ord(c):04X}")
        else:
            out.append(c)
    out.append('"')
    return "".join(out)


def toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return toml_string(v)
    if isinstance(v, (dt.datetime, dt.date, dt.time)):
        return v.isoformat()
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{toml_string(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def toml_document(tree: dict) -> str:
    """TOML text of a tree: scalars and arrays first, then one [table] per top-level table."""
    lines = [f"{toml_string(k)} = {toml_value(v)}" for k, v in tree.items() if not isinstance(v, dict)]
    for k, v in tree.items():
        if isinstance(v, dict):
            lines.append(f"[{toml_string(k)}]")
            lines += [f"{toml_string(kk)} = {toml_value(vv)}" for kk, vv in v.items()]
    return "\n".join(lines) + "\n"


def same_tree(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same_tree(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(same_tree(x, y) for x, y in zip(a, b))
    return type(a) is type(b) and a == b


# --------------------------------------------------------------------------- junk values

EDGE_FLOATS = [math.nan, math.inf, -math.inf, 0.0, -0.0, 5e-324, 2.2e-308, 1e-300, 1e-9, 1e-3,
               0.999999, 1.0, 1.0000001, 89.9, 90.0, 180.0, 180.0000001, 359.999, 1e6, 1e9, 1e18,
               1e300, 1.7976931348623157e308, -1.0, -1e300, 6378.137, 6378.136]
EDGE_INTS = [0, 1, -1, 2, 200, 201, 1000, 1001, 2 ** 31, 2 ** 63 - 1, -2 ** 63, 10 ** 30, -10 ** 30]
UNITS = ["km", "m", "cm", "mm", "AU", "ft", "mi", "nmi", "km/s", "m/s", "km/h", "deg", "degree",
         "rad", "arcsec", "turn", "kg", "g", "lb", "t", "N", "kN", "mN", "lbf", "s", "min", "h",
         "day", "year", "%", "ppm", "dimensionless", "rad/s", "deg/s", "km^3/s^2", "m**3/s**2",
         "km**3 / s**2", "kg/s", "g/s", "degC", "K", "J", "W", "Hz", "m s", "m * s", "m / s / s",
         "km km km km km km km km km km km km km km km km km km km km km km", "m**99",
         "m^-99", "1/s", "foo", "kilofoo", "km2", "µm", "°"]
CODE_LIKE = ["__import__('os').system('touch PWNED')", "$(touch PWNED)", "`touch PWNED`",
             "1; rm -rf /", "{{7*7}}", "%s%s%s%n", "eval('1')", "lambda: 0", "\x00", "\u202e",
             "../../etc/passwd", "/dev/zero", "C:\\Windows", "km\nkm", "1 km # comment"]


def number_text():
    return st.one_of(
        st.sampled_from(["0", "1", "-1", "1.5", ".5", "5.", "1e3", "1E-3", "+2", "1e999", "-1e999",
                         "nan", "inf", "-inf", "1_000", "0x10", "1,5", "1.2.3", "--1", "", " ",
                         "1e", "e3", "٣", "1e-400", "123456789012345678901234567890"]),
        st.floats(allow_nan=True, allow_infinity=True).map(repr),
        st.integers(-10 ** 30, 10 ** 30).map(str),
    )


_SEPS = [" ", "  ", "   ", " * ", "/", "*", "\t"]
#: Long products of units with odd separators, some ending badly (a regex backtracking trap).
UNIT_PRODUCTS = st.builds(
    lambda names, seps, tail: "".join(n + s for n, s in zip(names, seps))[:-1] + tail,
    st.one_of(st.lists(st.sampled_from(["m", "km", "s", "kg", "deg", "N", "x"]), min_size=1, max_size=40),
              st.lists(st.sampled_from(["m", "s", "N"]), min_size=25, max_size=40)),
    st.one_of(st.lists(st.sampled_from(_SEPS), min_size=40, max_size=40),
              st.sampled_from(_SEPS).map(lambda sep: [sep] * 40)),
    st.sampled_from(["", "!", "^2", "**-3", " )"]))


@st.composite
def unit_strings(draw):
    """Number + unit texts: right and wrong units, odd spacing, garbage around them."""
    number = draw(number_text())
    unit = draw(st.one_of(st.sampled_from(UNITS), st.text(max_size=12), UNIT_PRODUCTS))
    sep = draw(st.sampled_from(["", " ", "  ", "\t", " * ", "\u00a0"]))
    text = f"{number}{sep}{unit}"
    if draw(st.integers(0, 9)) == 0:
        text = draw(st.sampled_from(["", " ", "  "])) + text + draw(st.sampled_from(["", " ", "!", " km"]))
    return text


TEXT = st.text(alphabet=st.characters(exclude_categories=("Cs",)), max_size=40)
SCALARS = st.one_of(
    st.sampled_from(EDGE_FLOATS), st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(EDGE_INTS), st.integers(-2 ** 63, 2 ** 63 - 1), st.booleans(),
    unit_strings(), TEXT, st.sampled_from(CODE_LIKE),
    st.datetimes(timezones=st.one_of(st.none(), st.just(dt.timezone.utc),
                                     st.builds(lambda h: dt.timezone(dt.timedelta(hours=h)),
                                               st.integers(-12, 12)))),
    st.dates(),
)
KEYS = st.one_of(st.sampled_from(sorted(ALL_KEYS) + ["Epoch", "EPOCH", "periapsis_alt ", "a ",
                                                     "thruster", "target.kind", "", "__class__"]),
                 st.text(alphabet=st.characters(exclude_categories=("Cs",)), max_size=12))
JUNK = st.recursive(SCALARS, lambda children: st.one_of(
    st.lists(children, max_size=3), st.dictionaries(KEYS, children, max_size=3)), max_leaves=6)


# --------------------------------------------------------------------------- tree mutations

def _slots(tree, out=None):
    """Every (container, key) pair of a tree, tables and arrays included."""
    out = [] if out is None else out
    items = tree.items() if isinstance(tree, dict) else enumerate(tree)
    for k, v in items:
        out.append((tree, k))
        if isinstance(v, (dict, list)):
            _slots(v, out)
    return out


def _tables(tree, out=None):
    out = [] if out is None else out
    if isinstance(tree, dict):
        out.append(tree)
    items = tree.values() if isinstance(tree, dict) else tree
    for v in items:
        if isinstance(v, (dict, list)):
            _tables(v, out)
    return out


@st.composite
def mutated(draw, base: dict, max_mutations: int = 3):
    """A deep copy of ``base`` with 0 to ``max_mutations`` random edits."""
    tree = json.loads(json.dumps(base))
    rnd = draw(st.randoms(use_true_random=False))
    for _ in range(draw(st.integers(0, max_mutations))):
        slots = _slots(tree)
        op = draw(st.sampled_from(["replace", "replace", "rescale", "unit", "delete", "add",
                                   "swap", "wrap"]))
        if not slots and op != "add":
            op = "add"
        if op == "add":
            table = rnd.choice(_tables(tree))
            table[draw(KEYS)] = draw(JUNK)
            continue
        parent, key = rnd.choice(slots)
        value = parent[key]
        if op == "replace":
            parent[key] = draw(JUNK)
        elif op == "rescale" and isinstance(value, (int, float)) and not isinstance(value, bool):
            k = draw(st.integers(-320, 320))
            try:
                parent[key] = float(value) * 10.0 ** k if value else draw(st.sampled_from(EDGE_FLOATS))
            except OverflowError:  # 10.0 ** 309 and beyond
                parent[key] = math.copysign(math.inf, value)
        elif op == "unit" and isinstance(value, str):
            m = re.match(r"^\s*(\S+)\s*(.*)$", value)
            parent[key] = (m.group(1) if m else value) + " " + draw(st.sampled_from(UNITS))
        elif op == "delete":
            if isinstance(parent, dict):
                del parent[key]
            elif parent:
                parent.pop(key)
        elif op == "swap":  # two values trade places (scalars only: no table inside itself)
            other_parent, other_key = rnd.choice(slots)
            other = other_parent[other_key]
            if not isinstance(value, (dict, list)) and not isinstance(other, (dict, list)):
                parent[key], other_parent[other_key] = other, value
        elif op == "wrap":
            parent[key] = draw(st.sampled_from([[value], {"value": value}, [value, value, value, value]]))
    return tree


# --------------------------------------------------------------------------- valid bases

EPOCH = "2027-03-14T06:00:00Z"
MU_KM = 398600.4418  # WGS 84 GM, km^3/s^2 (NIMA TR8350.2, 3rd ed., 2000), as in the earth profile
V_CIRC_KM_S = math.sqrt(MU_KM / 7000.0)
_I = math.radians(30.0)
OPM_TEXT = f"""CCSDS_OPM_VERS = 3.0
COMMENT fuzz base message, every block present
CREATION_DATE = 2027-03-14T05:00:00.000
ORIGINATOR = FUZZ-OPS
MESSAGE_ID = FZ-0001

COMMENT metadata
OBJECT_NAME = FUZZSAT
OBJECT_ID = 2027-099A
CENTER_NAME = EARTH
REF_FRAME = GCRF
TIME_SYSTEM = UTC

COMMENT state vector
EPOCH = 2027-073T06:00:00.000
X = 7000.000000 [km]
Y = 0.000000 [km]
Z = 0.000000 [km]
X_DOT = 0.000000000 [km/s]
Y_DOT = {V_CIRC_KM_S * math.cos(_I):.9f} [km/s]
Z_DOT = {V_CIRC_KM_S * math.sin(_I):.9f} [km/s]

SEMI_MAJOR_AXIS = 7000.0 [km]
ECCENTRICITY = 0.0
INCLINATION = 30.0 [deg]
RA_OF_ASC_NODE = 0.0 [deg]
ARG_OF_PERICENTER = 0.0 [deg]
TRUE_ANOMALY = 0.0 [deg]
GM = {MU_KM} [km**3/s**2]

MASS = 160.0 [kg]
SOLAR_RAD_AREA = 1.2 [m**2]
SOLAR_RAD_COEFF = 1.3
DRAG_AREA = 1.1 [m**2]
DRAG_COEFF = 2.2

COV_REF_FRAME = RTN
""" + "\n".join(f"{k[0]} = 1.0e-6 [{k[2]}]" for k in opm_mod._BLOCKS["covariance"][1:]) + """

COMMENT burn one
MAN_EPOCH_IGNITION = 2027-03-14T07:00:00.000
MAN_DURATION = 120.0 [s]
MAN_DELTA_MASS = -0.25 [kg]
MAN_REF_FRAME = TNW
MAN_DV_1 = 0.001 [km/s]
MAN_DV_2 = 0.0 [km/s]
MAN_DV_3 = 0.0 [km/s]

MAN_EPOCH_IGNITION = 2027-03-14T08:00:00.000
MAN_DURATION = 0.0 [s]
MAN_DELTA_MASS = -0.1 [kg]
MAN_REF_FRAME = EME2000
MAN_DV_1 = 0.0 [km/s]
MAN_DV_2 = 0.0005 [km/s]
MAN_DV_3 = 0.0 [km/s]

USER_DEFINED_EARTH_MODEL = WGS-84
"""

VEHICLES = [
    {"name": "FUZZ-A", "description": "four canted thrusters", "dry_mass": "142 kg",
     "propellant": "18 kg", "unusable_propellant": "0.45 kg", "reserve_propellant": "3.5 kg",
     "thrusters": [{"count": 4, "thrust": "1.0 N", "isp": "220 s", "cant": "12 deg", "label": "A"}],
     "limits": {"max_burn_duration": "15 min", "max_burn_arc": "30 deg"},
     "tolerances": {"dv_watch": "2 %", "dv_alarm": "5 %", "ignition": "5 s", "duration": "2 %",
                    "isp": "5 %"}},
    {"name": "FUZZ-B", "dry_mass": 620, "propellant": 520, "reserve_propellant": 25,
     "thrusters": [{"count": 1, "thrust": 400, "isp": 318},
                   {"count": 2, "thrust": "22 N", "isp": "290 s", "cant": 0.1}]},
]
BODIES = [
    {"name": "fuzzearth", "description": "Earth-like",
     "mu": {"value": "3.986004418e14 m^3/s^2", "source": "NIMA TR8350.2 (WGS 84)"},
     "radius": {"value": "6378137 m", "source": "NIMA TR8350.2 (WGS 84)"},
     "j2": {"value": 1.0826298213e-3, "source": "EGM96 via NIMA TR8350.2"},
     "rotation_rate": {"value": "7.292115e-5 rad/s", "source": "NIMA TR8350.2 (WGS 84)"},
     "min_safe_alt": {"value": "200 km", "source": "burndesk setting"}},
    {"name": "fuzzmoon", "mu": {"value": 4902.800118, "source": "DE440"},
     "radius": {"value": 1737.151, "source": "Wieczorek (2015)"}},
]
STATES = [
    {"periapsis_alt": "380 km", "apoapsis_alt": "402 km", "i": "97.6 deg", "raan": "131 deg",
     "argp": "48 deg", "nu": "300 deg"},
    {"a": "6878 km", "e": 0.001, "i": 51.6, "raan": 10, "argp": 20, "nu": 30},
    {"r": ["6778 km", "0 km", "0 km"], "v": ["0 km/s", "7.67 km/s", "0.1 km/s"], "frame": "GCRF"},
    {"r": "6778, 0, 0 km", "v": [0.0, 7.67, 0.0]},
    {"opm": "state.opm"},
]
TARGETS = [
    {"kind": "circular", "altitude": "560 km"},
    {"kind": "apsides", "periapsis_alt": 500, "apoapsis_alt": "800 km"},
    {"kind": "apoapsis", "altitude": 700},
    {"kind": "periapsis", "altitude": "350 km"},
    {"kind": "bielliptic", "altitude": "600 km", "via_alt": "2000 km"},
    {"kind": "circular", "altitude": "560 km", "i": "97.6 deg"},
]
OPTIONS = [
    {"model": "two-body", "attitude": "tracking", "split": "auto", "lead_time": "10 min"},
    {"model": "two-body+J2", "attitude": "inertial", "split": 2},
    {"split": "off"},
]


@st.composite
def scenario_trees(draw, max_mutations: int = 3):
    state = draw(st.sampled_from(STATES))
    doc = {"name": "fuzz campaign", "description": "fuzzed", "body": draw(st.sampled_from(["earth", "body.toml"])),
           "vehicle": "vehicle.toml", "epoch": EPOCH, "state": state,
           "target": draw(st.sampled_from(TARGETS)), "options": draw(st.sampled_from(OPTIONS))}
    if "opm" in state and draw(st.booleans()):
        del doc["epoch"]  # the OPM's EPOCH is the epoch
    return draw(mutated(doc, max_mutations))


@st.composite
def state_trees(draw):
    state = draw(st.sampled_from(STATES))
    doc = {"description": "OD solution", "epoch": EPOCH, "state": state}
    if "opm" in state and draw(st.booleans()):
        del doc["epoch"]
    return draw(mutated(doc))


def write_set(folder: Path, scenario=None, vehicle=None, body=None, opm_text=None) -> dict:
    """Write a scenario and the files it may reference (valid unless given) into ``folder``."""
    paths = {}
    for name, tree, default in (("vehicle.toml", vehicle, VEHICLES[0]), ("body.toml", body, BODIES[0])):
        (folder / name).write_text(toml_document(tree if tree is not None else default), encoding="utf-8")
        paths[name] = folder / name
    (folder / "state.opm").write_text(OPM_TEXT if opm_text is None else opm_text, encoding="ascii")
    paths["state.opm"] = folder / "state.opm"
    if scenario is not None:
        (folder / "scenario.toml").write_text(toml_document(scenario), encoding="utf-8")
        paths["scenario.toml"] = folder / "scenario.toml"
    return paths


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


def fresh(workdir: Path) -> Path:
    return Path(tempfile.mkdtemp(dir=workdir))


def _earth():
    return load_body("earth")


# --------------------------------------------------------------------------- the writer itself

@settings(max_examples=examples(150), **FUZZ)
@given(tree=st.dictionaries(KEYS, JUNK, max_size=6))
def test_toml_writer_round_trips(tree):
    """The fuzzers' TOML writer writes exactly the tree it is given (checked by tomllib)."""
    assert same_tree(tomllib.loads(toml_document(tree)), tree)


def test_base_documents_are_valid(workdir):
    """Every unmutated base parses: the fuzzing starts from valid files."""
    folder = fresh(workdir)
    write_set(folder)
    assert read_opm(OPM_TEXT, "base.opm").maneuvers
    for vehicle in VEHICLES:
        (folder / "v.toml").write_text(toml_document(vehicle))
        assert load_vehicle("v.toml", folder).thrust_n > 0
    for body in BODIES:
        (folder / "b.toml").write_text(toml_document(body))
        assert load_body("b.toml", folder).mu_m3_s2 > 0
    for state in STATES:
        for target in TARGETS:
            doc = {"body": "earth", "vehicle": "vehicle.toml", "epoch": EPOCH, "state": state,
                   "target": target, "options": OPTIONS[0]}
            (folder / "s.toml").write_text(toml_document(doc))
            sc, _ = load_scenario_with_state(folder / "s.toml")
            assert sc.target.kind == target["kind"]
        (folder / "st.toml").write_text(toml_document({"epoch": EPOCH, "state": state}))
        assert load_state_file(folder / "st.toml", _earth()).epoch_s == parse_utc(EPOCH)


# --------------------------------------------------------------------------- files

def _sane_state(r_m, v_m_s, body) -> None:
    assert all(map(math.isfinite, (*r_m, *v_m_s)))
    assert math.sqrt(sum(c * c for c in r_m)) > body.radius_m


@settings(max_examples=examples(200), **FUZZ)
@given(tree=scenario_trees())
def test_scenario_files(workdir, tree):
    folder = fresh(workdir)
    paths = write_set(folder, scenario=tree)
    got = attempt("scenario file", lambda: load_scenario_with_state(paths["scenario.toml"]),
                  file_refusal(*paths.values()))
    if got is not None:
        sc, st_in = got
        _sane_state(sc.r_m, sc.v_m_s, sc.body)
        assert math.isfinite(sc.epoch_s)
        assert sc.vehicle is None or (sc.vehicle.thrust_n > 0 and sc.vehicle.dry_mass_kg > 0)


@settings(max_examples=examples(120), **FUZZ)
@given(tree=st.sampled_from(VEHICLES).flatmap(mutated))
def test_vehicle_files(workdir, tree):
    folder = fresh(workdir)
    path = folder / "vehicle.toml"
    path.write_text(toml_document(tree), encoding="utf-8")
    veh = attempt("vehicle file", lambda: load_vehicle("vehicle.toml", folder), file_refusal(path))
    if veh is not None:
        assert veh.thrust_n > 0 and math.isfinite(veh.thrust_n)
        assert veh.mdot_kg_s > 0 and math.isfinite(veh.isp_s)
        assert veh.dry_mass_kg > 0 and veh.usable_kg >= 0
        assert veh.unusable_kg + veh.reserve_kg <= veh.propellant_kg


@settings(max_examples=examples(120), **FUZZ)
@given(tree=st.sampled_from(BODIES).flatmap(mutated))
def test_body_files(workdir, tree):
    folder = fresh(workdir)
    path = folder / "body.toml"
    path.write_text(toml_document(tree), encoding="utf-8")
    body = attempt("body file", lambda: load_body("body.toml", folder), file_refusal(path))
    if body is not None:
        assert body.mu_m3_s2 > 0 and body.radius_m > 0 and math.isfinite(body.mu_m3_s2)
        assert abs(body.j2) <= 0.1 and math.isfinite(body.min_safe_alt_m)


@settings(max_examples=examples(150), **FUZZ)
@given(tree=state_trees())
def test_state_files(workdir, tree):
    folder = fresh(workdir)
    paths = write_set(folder)
    path = folder / "after.toml"
    path.write_text(toml_document(tree), encoding="utf-8")
    earth = _earth()
    got = attempt("STATE file", lambda: load_state_file(path, earth),
                  file_refusal(path, paths["state.opm"]))
    if got is not None:
        _sane_state(got.r_m, got.v_m_s, earth)
        assert math.isfinite(got.epoch_s)


@settings(max_examples=examples(60), **FUZZ)
@given(raw=st.one_of(st.binary(max_size=300),
                     st.text(max_size=300).map(lambda t: t.encode("utf-8", "surrogatepass")),
                     st.sampled_from([b"", b"\x00" * 64, b"\xef\xbb\xbfname = 1\n", b"a = [" * 2000,
                                      b"a = " + b"[" * 20000 + b"]" * 20000,
                                      b"a = " + b"{b=" * 5000 + b"1" + b"}" * 5000])))
def test_raw_bytes_as_any_file(workdir, raw):
    """Bytes that are not even TOML: every file reader refuses them with the file named."""
    folder = fresh(workdir)
    path = folder / "raw.toml"
    path.write_bytes(raw)
    check = file_refusal(path)
    attempt("raw bytes: scenario", lambda: load_scenario_with_state(path), check)
    attempt("raw bytes: vehicle", lambda: load_vehicle("raw.toml", folder), check)
    attempt("raw bytes: body", lambda: load_body("raw.toml", folder), check)
    attempt("raw bytes: STATE", lambda: load_state_file(path, _earth()), check)


# --------------------------------------------------------------------------- unit strings

#: Independent conversion factors to SI for the units whose kind is certain (SI brochure,
#: 9th ed. 2019, Tables 2, 4 and 8: minute, hour, degree; kilo, centi, milli prefixes).
ORACLE = {
    "length": {"m": 1.0, "km": 1000.0, "cm": 0.01, "mm": 0.001},
    "speed": {"m/s": 1.0, "km/s": 1000.0},
    "angle": {"deg": math.pi / 180.0, "rad": 1.0},
    "mass": {"kg": 1.0, "g": 0.001},
    "force": {"N": 1.0, "kN": 1000.0, "mN": 0.001},
    "time": {"s": 1.0, "min": 60.0, "h": 3600.0},
}
DEFAULT_FACTOR = {"length": 1000.0, "speed": 1000.0, "angle": math.pi / 180.0, "mass": 1.0,
                  "force": 1.0, "time": 1.0}


@settings(max_examples=examples(400), **FUZZ)
@given(value=st.one_of(unit_strings(), TEXT, st.sampled_from(CODE_LIKE), SCALARS, JUNK),
       kind=st.sampled_from(sorted(KINDS)), allow_negative=st.booleans(), allow_zero=st.booleans())
def test_unit_strings(value, kind, allow_negative, allow_zero):
    field = "fuzz_field"

    def check(msg):
        assert msg.strip() and "\n" not in msg, repr(msg)
        assert msg.startswith(field + ":"), msg

    x = attempt("unit string", lambda: parse_value(value, kind, field, allow_negative=allow_negative,
                                                   allow_zero=allow_zero), check)
    if x is None:
        return
    assert isinstance(x, float) and math.isfinite(x)
    assert allow_negative or x >= 0.0
    assert allow_zero or x != 0.0
    # where the answer is known independently, it is the right one
    if isinstance(value, str) and kind in ORACLE:
        m = re.fullmatch(r"\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(\S*)\s*", value)
        if m and m.group(2) in ORACLE[kind]:
            assert x == pytest.approx(float(m.group(1)) * ORACLE[kind][m.group(2)], rel=1e-12, abs=1e-300)
        elif m and not m.group(2):
            assert x == pytest.approx(float(m.group(1)) * DEFAULT_FACTOR[kind], rel=1e-12, abs=1e-300)
    if isinstance(value, (int, float)) and not isinstance(value, bool) and kind in DEFAULT_FACTOR:
        assert x == pytest.approx(float(value) * DEFAULT_FACTOR[kind], rel=1e-12, abs=1e-300)


@settings(max_examples=examples(100), **FUZZ)
@given(unit=UNIT_PRODUCTS, kind=st.sampled_from(sorted(KINDS)))
def test_long_unit_products(unit, kind):
    """Long unit products are read or refused at once (no backtracking blow-up)."""
    def check(msg):
        assert msg.startswith("fuzz_field:") and "\n" not in msg, repr(msg)

    x = attempt("unit string", lambda: parse_value("1 " + unit, kind, "fuzz_field"), check)
    assert x is None or math.isfinite(x)


# --------------------------------------------------------------------------- epochs

@st.composite
def iso_like(draw):
    """Strings shaped like ISO 8601 times: each part right most of the time, sometimes wrong."""
    def part(good, bad):
        return draw(st.one_of(good, good, good, bad))

    year = part(st.integers(1900, 2100), st.integers(0, 99999))
    parts = [part(st.just(f"{year:04d}"), st.just(str(year))), part(st.just("-"), st.sampled_from(["/", ""])),
             f"{part(st.integers(1, 12), st.integers(0, 13)):02d}", part(st.just("-"), st.just("")),
             f"{part(st.integers(1, 28), st.integers(0, 32)):02d}",
             part(st.just("T"), st.sampled_from([" ", "t", "_"])),
             f"{part(st.integers(0, 23), st.integers(0, 25)):02d}", ":",
             f"{part(st.integers(0, 59), st.integers(0, 61)):02d}"]
    if draw(st.booleans()):
        parts += [":", f"{part(st.integers(0, 59), st.integers(0, 61)):02d}"]
        if draw(st.booleans()):
            parts.append("." + "".join(draw(st.lists(st.sampled_from(string.digits), min_size=0, max_size=12))))
    parts.append(part(st.sampled_from(["Z", "+00:00", "+0000"]),
                      st.sampled_from(["z", "-00:00", "+01:00", "", " Z", "UTC", "Z\n", "+00:00:00"])))
    return "".join(parts)


VALID_ISO = st.builds(lambda t, frac, zone: t.strftime("%Y-%m-%dT%H:%M:%S") + frac + zone,
                      st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(9999, 12, 31)),
                      st.sampled_from(["", ".5", ".123", ".123456", ".123456789"]),
                      st.sampled_from(["Z", "+00:00", "+0000"]))


@settings(max_examples=examples(400), **FUZZ)
@given(value=st.one_of(iso_like(), VALID_ISO, TEXT, SCALARS, st.datetimes(), st.times(), st.none()))
def test_epochs(value):
    field = "fuzz_epoch"

    def check(msg):
        assert msg.strip() and "\n" not in msg, repr(msg)
        assert msg.startswith(field + ":"), msg

    t = attempt("epoch", lambda: parse_utc(value, field), check)
    if t is None:
        return
    assert isinstance(t, float) and math.isfinite(t)
    if isinstance(value, str):
        # independent reading by the standard library, where it can read the text (it keeps
        # microseconds, and a float of seconds since 1970 resolves a few ulp)
        try:
            ref = dt.datetime.fromisoformat(value.strip().replace("Z", "+00:00"))
        except ValueError:
            ref = None
        if ref is not None and ref.tzinfo is not None:
            ref_s = calendar.timegm(ref.utctimetuple()) + ref.microsecond * 1e-6
            assert t == pytest.approx(ref_s, abs=1e-6 + 4 * math.ulp(ref_s))


# --------------------------------------------------------------------------- OPM

OPM_LINES = OPM_TEXT.split("\n")
NUMBER_JUNK = ["nan", "inf", "1e999", "-1e999", "0x10", "1,5", "1.2.3", "", "-", "+.5e-3", "1e-400",
               "1 2", "١", "7000.0 [m]", "7000.0 [km", "7000.0 []", "7000.0 [KM]", "7000.0[km]",
               "2027-03-14T06:00:00", "EARTH", "-0.0", "1e308", "99999999999999999999999999"]


@st.composite
def opm_texts(draw):
    lines = list(OPM_LINES)
    rnd = draw(st.randoms(use_true_random=False))
    for _ in range(draw(st.integers(1, 4))):
        op = draw(st.sampled_from(["drop", "duplicate", "swap", "move", "value", "value", "unit",
                                   "garbage", "unicode", "case", "comment", "truncate", "long",
                                   "spaces", "keyword"]))
        k = rnd.randrange(len(lines))
        line = lines[k]
        if op == "drop" and len(lines) > 1:
            del lines[k]
        elif op == "duplicate":
            lines.insert(rnd.randrange(len(lines) + 1), line)
        elif op == "swap" and k + 1 < len(lines):
            lines[k], lines[k + 1] = lines[k + 1], line
        elif op == "move":
            del lines[k]
            lines.insert(rnd.randrange(len(lines) + 1), line)
        elif op == "value" and "=" in line:
            key = line.split("=", 1)[0]
            lines[k] = key + "= " + draw(st.one_of(st.sampled_from(NUMBER_JUNK), TEXT))
        elif op == "unit" and "[" in line:
            lines[k] = re.sub(r"\[[^\]]*\]", "[" + draw(st.sampled_from(UNITS + ["n/a", ""])) + "]", line)
        elif op == "garbage":
            pos = rnd.randrange(len(line) + 1)
            lines[k] = line[:pos] + draw(st.text(max_size=5)) + line[pos:]
        elif op == "unicode":
            lines[k] = line.replace("E", draw(st.sampled_from(["Ε", "Ｅ", "e\u0301", "\u200bE"])), 1)
        elif op == "case":
            lines[k] = line.lower() if rnd.random() < 0.5 else line.swapcase()
        elif op == "comment":
            lines.insert(k, "COMMENT " + draw(TEXT))
        elif op == "truncate":
            lines = lines[:k] + [line[:rnd.randrange(len(line) + 1)]]
        elif op == "long":
            lines[k] = line + " " * draw(st.integers(200, 400))
        elif op == "spaces":
            lines[k] = line.replace(" = ", draw(st.sampled_from(["=", "  =  ", " == ", "\t=\t", " : "])))
        elif op == "keyword" and "=" in line:
            lines[k] = draw(st.sampled_from(sorted(opm_mod._INDEX) + ["USER_DEFINED_", "X_dot", "EPOCH2"])) \
                + " =" + line.split("=", 1)[1]
    sep = draw(st.sampled_from(["\n", "\n", "\r\n", "\r", "\n\r"]))
    return sep.join(lines)


def opm_refusal(source: str):
    def check(msg: str) -> None:
        assert msg.strip() and "\n" not in msg, repr(msg)
        assert msg.startswith(source), msg
        assert re.search(r"\bline \d+\b", msg) or "is empty" in msg or "not ASCII" in msg, msg
    return check


@settings(max_examples=examples(300), **FUZZ)
@given(text=opm_texts())
def test_opm_texts(text):
    doc = attempt("OPM text", lambda: read_opm(text, "fuzz.opm"), opm_refusal("fuzz.opm"))
    if doc is not None:
        assert all(map(math.isfinite, (*doc.r_m, *doc.v_m_s, doc.epoch_s)))
        assert math.sqrt(sum(c * c for c in doc.r_m)) > 0.0


@settings(max_examples=examples(100), **FUZZ)
@given(text=opm_texts(), junk=st.binary(max_size=8), at=st.floats(0.0, 1.0))
def test_opm_files(workdir, text, junk, at):
    """OPM files with stray bytes, read as a STATE file (the checks against the body included)."""
    folder = fresh(workdir)
    raw = text.encode("utf-8")
    pos = int(at * len(raw))
    path = folder / "od.opm"
    path.write_bytes(raw[:pos] + junk + raw[pos:])
    attempt("OPM file", lambda: read_opm_file(path), opm_refusal(str(path)))
    earth = _earth()
    got = attempt("OPM as STATE file", lambda: load_state_file(path, earth), file_refusal(path))
    if got is not None:
        _sane_state(got.r_m, got.v_m_s, earth)


# --------------------------------------------------------------------------- the real command line

def _cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if k not in ("BURNDESK_DEBUG", "BURNDESK_PROFILES")}
    return subprocess.run([EXE, *args], capture_output=True, text=True, timeout=600, cwd=cwd, env=env)


def check_cli(proc: subprocess.CompletedProcess, name: str) -> None:
    TRIED[name] += 1
    OUTCOMES[name, "parsed" if proc.returncode in (0, 3) else "refused"] += 1
    assert "Traceback" not in proc.stderr, proc.stderr
    assert proc.returncode in (0, 2, 3), (proc.returncode, proc.stderr)
    if proc.returncode == 2:
        lines = proc.stderr.splitlines()
        assert len(lines) == 1 and lines[0].startswith("burndesk: ") and len(lines[0]) > 12, proc.stderr
    else:
        assert proc.stdout.strip()


@settings(max_examples=examples(4), **FUZZ)
@given(tree=scenario_trees(max_mutations=2))
def test_cli_orbit_on_fuzzed_scenarios(workdir, tree):
    folder = fresh(workdir)
    write_set(folder, scenario=tree)
    check_cli(_cli("orbit", "scenario.toml", cwd=folder), "CLI orbit")


@settings(max_examples=examples(3), **FUZZ)
@given(tree=scenario_trees(max_mutations=2), as_json=st.booleans())
def test_cli_plan_on_fuzzed_scenarios(workdir, tree, as_json):
    folder = fresh(workdir)
    write_set(folder, scenario=tree)
    check_cli(_cli("plan", "scenario.toml", *(["--json"] if as_json else []), cwd=folder), "CLI plan")
