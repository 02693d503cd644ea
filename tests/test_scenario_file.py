"""Scenario, profile and STATE files (console.scenario_file, console.profiles).

Expected states are checked with simple physics written here rather than with the conversion
code under test: vis-viva, the conic equation r = p / (1 + e cos nu), the specific angular
momentum h = sqrt(mu p) and the geometry of the node line (Vallado, *Fundamentals of
Astrodynamics and Applications*, 4th ed. (2013), sec. 2.2-2.5, from memory).

Earth constants: WGS 84 GM = 3.986004418e14 m^3/s^2 and a = 6378137 m (NIMA TR8350.2,
3rd ed. (2000)), as written in profiles/bodies/earth.toml.
"""

from __future__ import annotations

import math
import re
import textwrap
from pathlib import Path

import numpy as np
import pytest

from console.profiles import load_body, load_vehicle, profiles_dir
from console.scenario_file import load_scenario, load_state_file

ROOT = Path(__file__).resolve().parents[1]
PROFILES = ROOT / "profiles"

MU_EARTH = 3.986004418e14   # WGS 84 GM, NIMA TR8350.2 3rd ed. (2000)
R_EARTH = 6378137.0         # WGS 84 semi-major axis, NIMA TR8350.2 3rd ed. (2000)
DEG = math.pi / 180.0

HEAD = 'body = "earth"\nepoch = "2027-03-14T06:00:00Z"\n'
APSIDES = "[state]\nperiapsis_alt = 400\napoapsis_alt = 600\n"


@pytest.fixture(autouse=True)
def _default_profiles(monkeypatch):
    monkeypatch.delenv("BURNDESK_PROFILES", raising=False)


def write(tmp_path: Path, text: str, name: str = "scenario.toml") -> Path:
    path = tmp_path / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def refused(path: Path, *patterns: str) -> str:
    """Load ``path``, expect a ValueError naming the file, return the message."""
    with pytest.raises(ValueError) as info:
        load_scenario(path)
    msg = str(info.value)
    assert str(path.name) in msg, msg
    for p in patterns:
        assert re.search(p, msg), f"{p!r} not in {msg!r}"
    return msg


# --------------------------------------------------------------------------------------------
# state forms
# --------------------------------------------------------------------------------------------

def _orbit_invariants(r, v, mu):
    """(a, e, i, raan, u, radial speed, |h|) from r, v using textbook relations."""
    r = np.asarray(r)
    v = np.asarray(v)
    rn = np.linalg.norm(r)
    energy = 0.5 * v @ v - mu / rn
    a = -mu / (2.0 * energy)
    h = np.cross(r, v)
    hn = np.linalg.norm(h)
    p = hn * hn / mu
    e = math.sqrt(max(0.0, 1.0 - p / a))
    i = math.acos(h[2] / hn)
    node = np.cross([0.0, 0.0, 1.0], h)
    raan = math.atan2(node[1], node[0]) % (2 * math.pi)
    n_hat = node / np.linalg.norm(node)
    # argument of latitude: angle from the node to r, in the direction of motion
    u = math.atan2((np.cross(n_hat, r) @ h) / hn, n_hat @ r) % (2 * math.pi)
    return a, e, i, raan, u, (r @ v) / rn, hn


def test_vector_form_with_units(tmp_path):
    path = write(tmp_path, HEAD + """
        [state]
        r = ["6778 km", "0 km", "0 km"]
        v = ["0 km/s", "7668.6 m/s", "1 km/s"]
        """)
    sc = load_scenario(path)
    assert sc.r_m == pytest.approx((6778e3, 0.0, 0.0), abs=1e-9)
    assert sc.v_m_s == pytest.approx((0.0, 7668.6, 1000.0), abs=1e-9)


def test_vector_form_bare_numbers_and_string_form(tmp_path):
    bare = load_scenario(write(tmp_path, HEAD + "[state]\nr = [6778, 100, -50]\nv = [0.1, 7.6, 0.2]\n", "a.toml"))
    text = load_scenario(write(tmp_path, HEAD + '[state]\nr = "6778 100 -50 km"\nv = "0.1, 7.6, 0.2 km/s"\n',
                               "b.toml"))
    assert bare.r_m == pytest.approx((6778e3, 100e3, -50e3), abs=1e-9)   # bare: km
    assert bare.v_m_s == pytest.approx((100.0, 7600.0, 200.0), abs=1e-9)  # bare: km/s
    assert text.r_m == pytest.approx(bare.r_m, abs=1e-9)
    assert text.v_m_s == pytest.approx(bare.v_m_s, abs=1e-9)


def test_elements_form(tmp_path):
    path = write(tmp_path, HEAD + """
        [state]
        a = "7000 km"
        e = 0.02
        i = "51.6 deg"
        raan = 40
        argp = "1.0 rad"
        nu = 75
        """)
    sc = load_scenario(path)
    mu = sc.body.mu_m3_s2
    a, e, i, raan, u, vr, hn = _orbit_invariants(sc.r_m, sc.v_m_s, mu)
    p = 7000e3 * (1 - 0.02 ** 2)
    nu = 75 * DEG
    assert np.linalg.norm(sc.r_m) == pytest.approx(p / (1 + 0.02 * math.cos(nu)), abs=1e-3)  # m
    assert a == pytest.approx(7000e3, abs=1e-3)
    assert e == pytest.approx(0.02, abs=1e-10)
    assert i == pytest.approx(51.6 * DEG, abs=1e-12)
    assert raan == pytest.approx(40 * DEG, abs=1e-12)
    assert u == pytest.approx(1.0 + nu, abs=1e-12)
    assert hn == pytest.approx(math.sqrt(mu * p), rel=1e-12)
    assert vr == pytest.approx(math.sqrt(mu / p) * 0.02 * math.sin(nu), abs=1e-6)  # m/s


def test_apsides_form_defaults_put_r_at_periapsis_on_x(tmp_path):
    sc = load_scenario(write(tmp_path, HEAD + APSIDES))
    rp, ra = R_EARTH + 400e3, R_EARTH + 600e3
    a = 0.5 * (rp + ra)
    vp = math.sqrt(MU_EARTH * (2 / rp - 1 / a))  # vis-viva
    # no i, raan, argp, nu: equatorial, periapsis on the x axis, body at periapsis
    assert sc.r_m == pytest.approx((rp, 0.0, 0.0), abs=1e-6)
    assert sc.v_m_s == pytest.approx((0.0, vp, 0.0), abs=1e-9)


def test_apsides_form_with_orientation(tmp_path):
    sc = load_scenario(write(tmp_path, HEAD + """
        [state]
        periapsis_alt = "380 km"
        apoapsis_alt = "402 km"
        i = "97.6 deg"
        raan = "131 deg"
        argp = "48 deg"
        nu = "0 deg"
        """))
    rp, ra = R_EARTH + 380e3, R_EARTH + 402e3
    a_exp = 0.5 * (rp + ra)
    a, e, i, raan, u, vr, _ = _orbit_invariants(sc.r_m, sc.v_m_s, MU_EARTH)
    assert np.linalg.norm(sc.r_m) == pytest.approx(rp, abs=1e-6)           # nu = 0: at periapsis
    assert vr == pytest.approx(0.0, abs=1e-9)
    assert np.linalg.norm(sc.v_m_s) == pytest.approx(math.sqrt(MU_EARTH * (2 / rp - 1 / a_exp)), abs=1e-9)
    assert a == pytest.approx(a_exp, abs=1e-3)
    assert e == pytest.approx((ra - rp) / (ra + rp), abs=1e-10)
    assert i == pytest.approx(97.6 * DEG, abs=1e-12)
    assert raan == pytest.approx(131 * DEG, abs=1e-12)
    assert u == pytest.approx(48 * DEG, abs=1e-9)


def test_apsides_form_nu_180_is_at_apoapsis(tmp_path):
    sc = load_scenario(write(tmp_path, HEAD + APSIDES + "i = 30\nnu = 180\n"))
    rp, ra = R_EARTH + 400e3, R_EARTH + 600e3
    assert np.linalg.norm(sc.r_m) == pytest.approx(ra, abs=1e-6)
    assert np.linalg.norm(sc.v_m_s) == pytest.approx(math.sqrt(MU_EARTH * (2 / ra - 2 / (rp + ra))), abs=1e-9)


def test_demo_scenario_loads():
    sc = load_scenario(PROFILES / "scenarios" / "demo.toml")
    assert sc.body.name == "earth"
    assert sc.vehicle is not None and sc.vehicle.name == "WREN-3"
    assert sc.model == "two-body+J2"
    assert sc.target.kind == "circular"
    assert sc.target.periapsis_radius_m == pytest.approx(R_EARTH + 560e3, abs=1e-6)
    assert sc.options.lead_time_s == 2700.0
    # epoch 2027-03-14T06:00:00Z, from the standard library
    from datetime import datetime, timezone
    assert sc.epoch_s == datetime(2027, 3, 14, 6, tzinfo=timezone.utc).timestamp()


# --------------------------------------------------------------------------------------------
# unknown keys, form mix-ups, missing keys
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    "text, pattern",
    [
        (HEAD + "colour = 1\n" + APSIDES, r"unknown key 'colour'"),
        (HEAD + APSIDES + "altitude = 500\n", r"state: unknown key 'altitude'"),
        (HEAD + APSIDES + '[target]\nkind = "circular"\naltitude = 500\nheight = 1\n',
         r"target: unknown key 'height'"),
        (HEAD + APSIDES + '[options]\nmodel = "two-body"\nintegrator = "rk4"\n',
         r"options: unknown key 'integrator'"),
    ],
)
def test_unknown_keys_are_refused(tmp_path, text, pattern):
    refused(write(tmp_path, text), pattern)


@pytest.mark.parametrize(
    "state, pattern",
    [
        ("r = [7000, 0, 0]\nv = [0, 7.5, 0]\nperiapsis_alt = 400\napoapsis_alt = 600\n",
         r"more than one state form \(vector and apsides\)"),
        ("a = 7000\ne = 0.01\ni = 10\nraan = 0\nargp = 0\nnu = 0\nperiapsis_alt = 400\napoapsis_alt = 600\n",
         r"more than one state form \(elements and apsides\)"),
        ("r = [7000, 0, 0]\nv = [0, 7.5, 0]\na = 7000\n", r"more than one state form \(vector and elements\)"),
        ("r = [7000, 0, 0]\nv = [0, 7.5, 0]\ni = 10\n", r"state\.i: not used with r and v"),
    ],
)
def test_two_state_forms_at_once(tmp_path, state, pattern):
    refused(write(tmp_path, HEAD + "[state]\n" + state), pattern)


@pytest.mark.parametrize(
    "state, pattern",
    [
        ("r = [7000, 0, 0]\n", r"state\.v: missing"),
        ("v = [0, 7.5, 0]\n", r"state\.r: missing"),
        ("a = 7000\ne = 0.01\ni = 10\nraan = 0\nargp = 0\n", r"state\.nu: missing"),
        ("a = 7000\ni = 10\nraan = 0\nargp = 0\nnu = 0\n", r"state\.e: missing"),
        ("periapsis_alt = 400\n", r"state\.apoapsis_alt: missing"),
        ("apoapsis_alt = 400\ni = 20\n", r"state\.periapsis_alt: missing"),
        ("i = 20\nraan = 10\n", r"state: give one state form"),
        ("", r"state: give one state form"),
    ],
)
def test_missing_keys_of_a_form(tmp_path, state, pattern):
    refused(write(tmp_path, HEAD + "[state]\n" + state), pattern)


@pytest.mark.parametrize(
    "text, pattern",
    [
        ('epoch = "2027-03-14T06:00:00Z"\n' + APSIDES, r"body: missing"),
        ('body = "earth"\n' + APSIDES, r"epoch: missing"),
        (HEAD, r"state: missing"),
        (HEAD + "state = 5\n", r"state: expected a table"),
        (HEAD + "target = 5\n" + APSIDES, r"target: expected a table"),
        (HEAD + "options = 5\n" + APSIDES, r"options: expected a table"),
        (HEAD + "name = 5\n" + APSIDES, r"name: expected text"),
        ('body = "earth"\nepoch = "2027-03-14T06:00:00"\n' + APSIDES, r"epoch: .*no time zone"),
        # an unquoted TOML datetime must carry UTC (a local datetime has no zone)
        ('body = "earth"\nepoch = 2027-03-14T06:00:00\n' + APSIDES, r"epoch: .* is not UTC"),
        ('body = "earth"\nepoch = 2027-03-14T06:00:00+02:00\n' + APSIDES, r"epoch: .* is not UTC"),
        (HEAD + APSIDES + 'frame = "ecef"\n', r"state\.frame: 'ecef' is not supported"),
    ],
)
def test_top_level_mistakes(tmp_path, text, pattern):
    refused(write(tmp_path, text), pattern)


# --------------------------------------------------------------------------------------------
# physically impossible or non-finite values
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    "state, pattern",
    [
        # vector form: position inside, and an elliptic orbit whose periapsis is inside
        ("r = [6000, 0, 0]\nv = [0, 8, 0]\n", r"state\.r: position is inside the body"),
        ("r = [6778, 0, 0]\nv = [0, 6.0, 0]\n", r"state: periapsis is inside the body"),
        # an incoming hyperbola that would hit the body
        ("r = [6778, 0, 0]\nv = [-11, 5, 0]\n", r"state: periapsis is inside the body"),
        # elements form: a (1 - e) below the radius
        ("a = 7000\ne = 0.1\ni = 10\nraan = 0\nargp = 0\nnu = 0\n", r"state\.a: periapsis is inside the body"),
        # apsides form: altitudes at or below the surface
        ("periapsis_alt = -10\napoapsis_alt = 600\n", r"state\.periapsis_alt: .*inside the body"),
        ("periapsis_alt = 0\napoapsis_alt = 600\n", r"state\.periapsis_alt: .*inside the body"),
        ('periapsis_alt = "-1 m"\napoapsis_alt = "-0.5 m"\n', r"state\.periapsis_alt: .*inside the body"),
    ],
)
def test_periapsis_inside_the_body_each_form(tmp_path, state, pattern):
    refused(write(tmp_path, HEAD + "[state]\n" + state), pattern)


@pytest.mark.parametrize(
    "state, pattern",
    [
        ("a = -7000\ne = 0.01\ni = 10\nraan = 0\nargp = 0\nnu = 0\n", r"state\.a: .*negative"),
        ("a = 7000\ne = -0.01\ni = 10\nraan = 0\nargp = 0\nnu = 0\n", r"state\.e: .*negative"),
        ("a = 7000\ne = 0.01\ni = -10\nraan = 0\nargp = 0\nnu = 0\n", r"state\.i: .*negative"),
        ("a = nan\ne = 0.01\ni = 10\nraan = 0\nargp = 0\nnu = 0\n", r"state\.a: .*not a finite"),
        ("a = 7000\ne = 0.01\ni = 10\nraan = inf\nargp = 0\nnu = 0\n", r"state\.raan: .*not a finite"),
        ("r = [7000, nan, 0]\nv = [0, 7.5, 0]\n", r"state\.r\[1\]: .*not a finite"),
        ('r = [7000, 0, 0]\nv = [0, "inf km/s", 0]\n', r"state\.v\[1\]:"),
        ("periapsis_alt = 400\napoapsis_alt = inf\n", r"state\.apoapsis_alt: .*not a finite"),
        ("periapsis_alt = 700\napoapsis_alt = 600\n", r"state\.apoapsis_alt: is below periapsis_alt"),
        ("r = [7000, 0]\nv = [0, 7.5, 0]\n", r"state\.r: expected a list of three"),
        ('r = "1 2 3 4 5"\nv = [0, 7.5, 0]\n', r"state\.r: expected three components"),
        ("r = [7000, 0, 0]\nv = [7.5, 0, 0]\n", r"state\.v: .*rectilinear"),
        ('periapsis_alt = "400 kg"\napoapsis_alt = 600\n', r"state\.periapsis_alt: .*not a length"),
        ('periapsis_alt = "9**9**9 km"\napoapsis_alt = 600\n', r"state\.periapsis_alt:"),
        ("periapsis_alt = true\napoapsis_alt = 600\n", r"state\.periapsis_alt: .*true/false"),
    ],
)
def test_negative_non_finite_and_malformed_values(tmp_path, state, pattern):
    refused(write(tmp_path, HEAD + "[state]\n" + state), pattern)


@pytest.mark.parametrize("e", ["1.0", "1", "1.5", '"1.2"'])
def test_elements_form_refuses_open_orbits(tmp_path, e):
    text = HEAD + f"[state]\na = 7000\ne = {e}\ni = 10\nraan = 0\nargp = 0\nnu = 0\n"
    refused(write(tmp_path, text), r"state\.e: .*not below 1")


@pytest.mark.parametrize(
    "state",
    [
        "a = 7000\ne = 0.01\ni = 180.5\nraan = 0\nargp = 0\nnu = 0\n",
        'a = 7000\ne = 0.01\ni = "3.2 rad"\nraan = 0\nargp = 0\nnu = 0\n',
        "periapsis_alt = 400\napoapsis_alt = 600\ni = 181\n",
    ],
)
def test_inclination_above_180_deg_is_refused(tmp_path, state):
    refused(write(tmp_path, HEAD + "[state]\n" + state), r"state\.i: must be between 0 and 180 deg")


def test_inclination_of_exactly_180_deg_is_accepted(tmp_path):
    sc = load_scenario(write(tmp_path, HEAD + APSIDES + "i = 180\n"))
    h = np.cross(sc.r_m, sc.v_m_s)
    assert h[2] / np.linalg.norm(h) == pytest.approx(-1.0, abs=1e-12)  # retrograde equatorial


def test_hyperbolic_vector_state_is_accepted(tmp_path):
    # leaving periapsis on an escape trajectory: v above escape speed sqrt(2 mu / r)
    sc = load_scenario(write(tmp_path, HEAD + "[state]\nr = [6778, 0, 0]\nv = [0, 12, 0]\n"))
    r = np.linalg.norm(sc.r_m)
    assert np.linalg.norm(sc.v_m_s) > math.sqrt(2 * MU_EARTH / r)


# --------------------------------------------------------------------------------------------
# profiles: bare names, relative paths, sources
# --------------------------------------------------------------------------------------------

def test_bare_profile_names_come_from_profiles_folder(tmp_path):
    sc = load_scenario(write(tmp_path, 'body = "mars"\nvehicle = "heron"\nepoch = "2027-03-14T06:00:00Z"\n'
                                       "[state]\nperiapsis_alt = 300\napoapsis_alt = 400\n"))
    # JPL Horizons Mars (499) GM and equatorial radius, as written in profiles/bodies/mars.toml
    assert sc.body.mu_m3_s2 == pytest.approx(42828.375662e9, rel=1e-12)
    assert sc.body.radius_m == pytest.approx(3396.19e3, rel=1e-12)
    assert np.linalg.norm(sc.r_m) == pytest.approx(3396.19e3 + 300e3, abs=1e-6)
    # the vehicle profile's own numbers (profiles/vehicles/heron.toml)
    assert sc.vehicle.name == "HERON"
    assert sc.vehicle.dry_mass_kg == 620.0
    assert sc.vehicle.propellant_kg == 520.0


def test_earth_profile_constants():
    body = load_body("earth")
    assert body.mu_m3_s2 == MU_EARTH
    assert body.radius_m == R_EARTH


def test_profiles_folder_from_environment(tmp_path, monkeypatch):
    (tmp_path / "bodies").mkdir()
    (tmp_path / "bodies" / "tiny.toml").write_text(
        'mu = { value = "1e9 m^3/s^2", source = "test value" }\n'
        'radius = { value = "1000 m", source = "test value" }\n')
    monkeypatch.setenv("BURNDESK_PROFILES", str(tmp_path))
    assert profiles_dir() == tmp_path
    body = load_body("tiny")
    assert (body.name, body.mu_m3_s2, body.radius_m, body.j2) == ("tiny", 1e9, 1000.0, 0.0)


def test_relative_paths_resolve_against_the_scenario_folder(tmp_path, monkeypatch):
    craft = tmp_path / "craft"
    craft.mkdir()
    (craft / "lark.toml").write_text(textwrap.dedent("""
        name = "LARK"
        dry_mass = "50 kg"
        propellant = "5 kg"
        [[thrusters]]
        count = 2
        thrust = "0.5 N"
        isp = "200 s"
        """))
    (craft / "flat.toml").write_text(
        'name = "flat"\nmu = { value = "1e12 m^3/s^2", source = "test value" }\n'
        'radius = { value = "500 km", source = "test value" }\n')
    path = write(tmp_path, """
        body = "../craft/flat.toml"
        vehicle = "../craft/lark.toml"
        epoch = "2027-03-14T06:00:00Z"
        [state]
        periapsis_alt = 100
        apoapsis_alt = 200
        """, "missions/m1.toml")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)  # must not matter
    sc = load_scenario(path)
    assert sc.vehicle.name == "LARK"
    assert sc.vehicle.thrust_n == pytest.approx(1.0, abs=1e-12)  # 2 x 0.5 N, no cant
    assert sc.body.name == "flat"
    assert sc.model == "two-body"  # body has no J2: two-body by default
    # a relative path that does not exist names the path under the scenario's folder
    bad = write(tmp_path, 'body = "earth"\nvehicle = "../craft/none.toml"\nepoch = "2027-03-14T06:00:00Z"\n'
                + APSIDES, "missions/m2.toml")
    with pytest.raises(ValueError, match=r"m2\.toml: vehicle: '\.\./craft/none\.toml' not found "
                                         r"\(looked for .*missions[/\\]\.\.[/\\]craft[/\\]none\.toml\)"):
        load_scenario(bad)


@pytest.mark.parametrize("key, kind", [("body", "bodies"), ("vehicle", "vehicles")])
def test_unknown_profile_name_lists_known_ones(tmp_path, key, kind):
    body = '"earth"' if key == "vehicle" else '"vulcan"'
    text = f'body = {body}\nepoch = "2027-03-14T06:00:00Z"\n' + \
        ('vehicle = "vulcan"\n' if key == "vehicle" else "") + APSIDES
    msg = refused(write(tmp_path, text), rf"{key}: no .* profile named 'vulcan' \(known: ")
    known = sorted(p.stem for p in (PROFILES / kind).glob("*.toml"))
    assert known
    for name in known:
        assert name in msg


@pytest.mark.parametrize(
    "mu_line, pattern",
    [
        ('mu = { value = "1e12 m^3/s^2" }', r"mu: every constant must name its published source"),
        ('mu = { value = "1e12 m^3/s^2", source = "   " }', r"mu: every constant must name its published source"),
        ('mu = "1e12 m^3/s^2"', r"mu: write \{ value = \.\.\., source"),
        ('mu = { value = "1e12 m^3/s^2", source = "x", note = "y" }', r"mu: unknown key 'note'"),
        ('mu = { value = "1e12 m/s", source = "x" }', r"mu: .*not a gravitational parameter"),
        ('mu = { value = 0, source = "x" }', r"mu: .*greater than zero"),
    ],
)
def test_body_profile_constants_need_a_source_and_sense(tmp_path, mu_line, pattern):
    (tmp_path / "odd.toml").write_text(mu_line + '\nradius = { value = "500 km", source = "test value" }\n')
    path = write(tmp_path, 'body = "odd.toml"\nepoch = "2027-03-14T06:00:00Z"\n' + APSIDES)
    # the message names the profile file that holds the mistake
    with pytest.raises(ValueError, match=r"odd\.toml: " + pattern):
        load_scenario(path)


def test_body_profile_missing_radius(tmp_path):
    (tmp_path / "odd.toml").write_text('mu = { value = "1e12 m^3/s^2", source = "x" }\n')
    with pytest.raises(ValueError, match=r"odd\.toml: radius: missing"):
        load_body("./odd.toml", tmp_path)


@pytest.mark.parametrize(
    "body, pattern",
    [
        ("5", r"body: expected a profile name or a file path"),
        ('""', r"body: expected a profile name or a file path"),
        ('"./nowhere.toml"', r"body: '\./nowhere\.toml' not found \(looked for .*nowhere\.toml\)"),
    ],
)
def test_bad_body_reference(tmp_path, body, pattern):
    with pytest.raises(ValueError, match=pattern):
        load_scenario(write(tmp_path, f'body = {body}\nepoch = "2027-03-14T06:00:00Z"\n' + APSIDES))


# --------------------------------------------------------------------------------------------
# the file itself
# --------------------------------------------------------------------------------------------

def test_missing_file(tmp_path):
    with pytest.raises(ValueError, match=r"absent\.toml: scenario file not found"):
        load_scenario(tmp_path / "absent.toml")


def test_folder_instead_of_file(tmp_path):
    with pytest.raises(ValueError, match=r"is a folder, not a scenario file"):
        load_scenario(tmp_path)


def test_invalid_toml_names_the_file(tmp_path):
    path = write(tmp_path, 'body = "earth\nepoch = 1\n', "broken.toml")
    with pytest.raises(ValueError, match=r"broken\.toml: not valid TOML \(.*line 1"):
        load_scenario(path)


def test_non_utf8_bytes(tmp_path):
    path = tmp_path / "latin.toml"
    path.write_bytes(b'name = "caf\xe9"\n' + (HEAD + APSIDES).encode())
    with pytest.raises(ValueError, match=r"latin\.toml: scenario file is not UTF-8 text"):
        load_scenario(path)


# --------------------------------------------------------------------------------------------
# [options]
# --------------------------------------------------------------------------------------------

def _flat_body(tmp_path):
    (tmp_path / "flat.toml").write_text(
        'mu = { value = "3.986004418e14 m^3/s^2", source = "test value" }\n'
        'radius = { value = "6378137 m", source = "test value" }\n')
    return 'body = "flat.toml"\nepoch = "2027-03-14T06:00:00Z"\n'


def test_model_defaults_follow_the_body(tmp_path):
    assert load_scenario(write(tmp_path, HEAD + APSIDES, "a.toml")).model == "two-body+J2"
    assert load_scenario(write(tmp_path, _flat_body(tmp_path) + APSIDES, "b.toml")).model == "two-body"
    sc = load_scenario(write(tmp_path, HEAD + APSIDES + '[options]\nmodel = "two-body"\n', "c.toml"))
    assert sc.model == "two-body"


@pytest.mark.parametrize(
    "head, options, pattern",
    [
        (None, 'model = "n-body"', r"options\.model: model 'n-body' is not known"),
        (None, "model = 2", r"options\.model: expected text"),
        ("flat", 'model = "two-body+J2"', r"options\.model: .*needs a J2 term"),
        (None, 'attitude = "sun-pointing"', r"options\.attitude: 'sun-pointing' is not known"),
        (None, "lead_time = -5", r"options\.lead_time: .*negative"),
        (None, 'lead_time = "5 km"', r"options\.lead_time: .*not a duration"),
    ],
)
def test_bad_options(tmp_path, head, options, pattern):
    head_text = _flat_body(tmp_path) if head == "flat" else HEAD
    refused(write(tmp_path, head_text + APSIDES + "[options]\n" + options + "\n"), pattern)


@pytest.mark.parametrize("split, expected", [('"auto"', "auto"), ('"off"', "off"), ("1", 1), ("7", 7),
                                             ("200", 200)])
def test_split_values_accepted(tmp_path, split, expected):
    sc = load_scenario(write(tmp_path, HEAD + APSIDES + f"[options]\nsplit = {split}\n"))
    assert sc.options.split == expected


@pytest.mark.parametrize("split", ["0", "201", "-3", "2.5", "3.0", '"3"', '"sometimes"', "true", "[2]"])
def test_split_values_refused(tmp_path, split):
    refused(write(tmp_path, HEAD + APSIDES + f"[options]\nsplit = {split}\n"),
            r"options\.split: .*use \"auto\", \"off\" or a whole number from 1 to 200")


def test_lead_time_and_attitude(tmp_path):
    sc = load_scenario(write(tmp_path, HEAD + APSIDES + '[options]\nlead_time = "45 min"\nattitude = "tracking"\n'))
    assert sc.options.lead_time_s == 2700.0
    assert sc.options.attitude == "tracking"


# --------------------------------------------------------------------------------------------
# [target]
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    "target, kind, rp_alt_km, ra_alt_km, via_alt_km, i_deg",
    [
        ('kind = "circular"\naltitude = "560 km"', "circular", 560, 560, None, None),
        ('kind = "apsides"\nperiapsis_alt = 500\napoapsis_alt = 800\ni = 50', "apsides", 500, 800, None, 50),
        ('kind = "apoapsis"\naltitude = 1000', "apoapsis", None, 1000, None, None),
        ('kind = "periapsis"\naltitude = "250000 m"', "periapsis", 250, None, None, None),
        ('kind = "bielliptic"\naltitude = 50000\nvia_alt = 100000', "bielliptic", 50000, 50000, 100000, None),
    ],
)
def test_target_kinds(tmp_path, target, kind, rp_alt_km, ra_alt_km, via_alt_km, i_deg):
    sc = load_scenario(write(tmp_path, HEAD + APSIDES + "[target]\n" + target + "\n"))
    t = sc.target
    assert t.kind == kind

    def radius(alt_km):
        return None if alt_km is None else R_EARTH + alt_km * 1e3

    for got, want in ((t.periapsis_radius_m, radius(rp_alt_km)), (t.apoapsis_radius_m, radius(ra_alt_km)),
                      (t.via_radius_m, radius(via_alt_km))):
        if want is None:
            assert got is None
        else:
            assert got == pytest.approx(want, abs=1e-6)
    if i_deg is None:
        assert t.i_rad is None
    else:
        assert t.i_rad == pytest.approx(i_deg * DEG, abs=1e-15)


@pytest.mark.parametrize(
    "target, pattern",
    [
        ("altitude = 500", r"target\.kind: None is not known"),
        ('kind = "spiral"\naltitude = 500', r"target\.kind: 'spiral' is not known: use one of circular"),
        ('kind = ["circular"]\naltitude = 500', r"target\.kind: \['circular'\] is not known"),
        ('kind = { a = 1 }\naltitude = 500', r"target\.kind: .* is not known"),
        ('kind = "circular"', r"target\.altitude: missing \(kind 'circular' needs altitude\)"),
        ('kind = "apsides"\nperiapsis_alt = 500', r"target\.apoapsis_alt: missing"),
        ('kind = "apoapsis"', r"target\.altitude: missing"),
        ('kind = "periapsis"', r"target\.altitude: missing"),
        ('kind = "bielliptic"\naltitude = 50000', r"target\.via_alt: missing"),
        ('kind = "circular"\naltitude = 500\nvia_alt = 900', r"target\.via_alt: not used by kind 'circular'"),
        ('kind = "apoapsis"\naltitude = 500\nperiapsis_alt = 300', r"target\.periapsis_alt: not used by kind"),
        ('kind = "apsides"\nperiapsis_alt = 900\napoapsis_alt = 800', r"target\.apoapsis_alt: is below periapsis_alt"),
        ('kind = "bielliptic"\naltitude = 50000\nvia_alt = 1000', r"target\.via_alt: must lie above"),
        ('kind = "circular"\naltitude = -100', r"target\.altitude: .*inside the body"),
        ('kind = "circular"\naltitude = "nan km"', r"target\.altitude:"),
        ('kind = "circular"\naltitude = 800\ni = 200', r"target\.i: must be between 0 and 180 deg"),
        ('kind = "circular"\naltitude = 800\ni = -5', r"target\.i: .*negative"),
    ],
)
def test_bad_targets(tmp_path, target, pattern):
    refused(write(tmp_path, HEAD + APSIDES + "[target]\n" + target + "\n"), pattern)


# --------------------------------------------------------------------------------------------
# vehicle profiles (as read through a scenario)
# --------------------------------------------------------------------------------------------

VEHICLE = """
name = "TEST"
dry_mass = "100 kg"
propellant = "10 kg"
[[thrusters]]
count = 1
thrust = "{thrust}"
isp = "220 s"
"""


@pytest.mark.parametrize(
    "thrust, pattern",
    [
        ("0 N", r"thrusters\[1\]\.thrust: '0 N' must be greater than zero"),
        ("-1 N", r"thrusters\[1\]\.thrust: .*negative"),
        ("1 kg", r"thrusters\[1\]\.thrust: .*not a force"),
    ],
)
def test_vehicle_thrust_checked(tmp_path, thrust, pattern):
    (tmp_path / "veh.toml").write_text(VEHICLE.format(thrust=thrust))
    with pytest.raises(ValueError, match=pattern) as info:
        load_vehicle("./veh.toml", tmp_path)
    assert "veh.toml" in str(info.value)


def test_vehicle_effective_thrust_and_mass_flow():
    v = load_vehicle("wren3")
    # issue text: effective thrust = sum(count * thrust * cos(cant)), mdot = sum(count * thrust / (isp g0))
    # g0 = 9.80665 m/s^2 exactly (3rd CGPM, 1901)
    assert v.thrust_n == pytest.approx(4 * 1.0 * math.cos(12 * DEG), rel=1e-12)
    assert v.mdot_kg_s == pytest.approx(4 * 1.0 / (220 * 9.80665), rel=1e-12)


# --------------------------------------------------------------------------------------------
# STATE files
# --------------------------------------------------------------------------------------------

def test_state_file_apsides_and_vector_forms(tmp_path):
    body = load_body("earth")
    p1 = write(tmp_path, 'epoch = "2027-03-15T00:00:00.250Z"\n' + APSIDES + "nu = 180\n", "s1.toml")
    s1 = load_state_file(p1, body)
    from datetime import datetime, timezone
    assert s1.epoch_s == pytest.approx(datetime(2027, 3, 15, tzinfo=timezone.utc).timestamp() + 0.25, abs=1e-6)
    assert s1.form == "apsides"
    assert np.linalg.norm(s1.r_m) == pytest.approx(R_EARTH + 600e3, abs=1e-6)

    p2 = write(tmp_path, 'epoch = "2027-03-15T00:00:00Z"\ndescription = "from tracking"\n'
                         "[state]\nr = [7000, 0, 0]\nv = [0, 7.5, 0.1]\n", "s2.toml")
    s2 = load_state_file(p2, body)
    assert s2.form == "vector"
    assert s2.r_m == pytest.approx((7e6, 0.0, 0.0))
    assert s2.v_m_s == pytest.approx((0.0, 7500.0, 100.0))

    p3 = write(tmp_path, 'epoch = "2027-03-15T00:00:00Z"\n[state]\na = 7000\ne = 0.001\ni = 98\n'
                         "raan = 0\nargp = 0\nnu = 0\n", "s3.toml")
    s3 = load_state_file(p3, body)
    assert s3.form == "elements"
    assert np.linalg.norm(s3.r_m) == pytest.approx(7000e3 * (1 - 0.001), abs=1e-6)


@pytest.mark.parametrize(
    "text, pattern",
    [
        ('epoch = "2027-03-15T00:00:00Z"\nbody = "earth"\n' + APSIDES, r"s\.toml: unknown key 'body'"),
        (APSIDES, r"s\.toml: epoch: missing"),
        ('epoch = "2027-03-15T00:00:00Z"\n', r"s\.toml: state: missing"),
        ('epoch = "2027-03-15T00:00:00+02:00"\n' + APSIDES, r"s\.toml: epoch: .*not UTC"),
        ('epoch = "2027-03-15T00:00:00Z"\n' + APSIDES + "r = [7000, 0, 0]\n", r"s\.toml: state: .*more than one"),
        ('epoch = "2027-03-15T00:00:00Z"\n[state]\nperiapsis_alt = -5\napoapsis_alt = 100\n',
         r"s\.toml: state\.periapsis_alt: .*inside the body"),
    ],
)
def test_state_file_refusals(tmp_path, text, pattern):
    with pytest.raises(ValueError, match=pattern):
        load_state_file(write(tmp_path, text, "s.toml"), load_body("earth"))


def test_state_file_missing_and_invalid(tmp_path):
    body = load_body("earth")
    with pytest.raises(ValueError, match=r"gone\.toml: state file not found"):
        load_state_file(tmp_path / "gone.toml", body)
    bad = tmp_path / "bad.toml"
    bad.write_text("epoch = [\n")
    with pytest.raises(ValueError, match=r"bad\.toml: not valid TOML"):
        load_state_file(bad, body)


def test_unquoted_utc_toml_datetime_is_accepted(tmp_path):
    # TOML's own offset datetime in UTC means the same instant as the quoted string
    quoted = tmp_path / "q.toml"
    quoted.write_text('body = "earth"\nepoch = "2027-03-14T06:00:00.250Z"\n' + APSIDES)
    bare = tmp_path / "b.toml"
    bare.write_text('body = "earth"\nepoch = 2027-03-14T06:00:00.250Z\n' + APSIDES)
    assert load_scenario(bare).epoch_s == load_scenario(quoted).epoch_s


def test_absurd_sizes_are_refused_with_the_right_reason(tmp_path):
    # an overflowing semi-major axis used to surface as "velocity is along the radius"
    path = tmp_path / "far.toml"
    path.write_text('body = "earth"\nepoch = "2027-01-01T00:00:00Z"\n[state]\n'
                    'a = "1e200 km"\ne = 0.1\ni = 10\nraan = 0\nargp = 0\nnu = 0\n')
    with pytest.raises(ValueError, match=r"state\.a: .* is beyond .* not an orbit"):
        load_scenario(path)
