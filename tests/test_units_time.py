"""Edge-layer values: unit strings (console.units) and UTC time strings (console.timeutil).

Reference values used here are definitions, not measurements:

* 1 deg = pi/180 rad, 1 km = 1000 m, 1 min = 60 s (SI brochure, 9th ed. (2019), tables 8 and 4).
* 1 lbf = 4.4482216152605 N (NIST SP 811 (2008), appendix B.8, from memory).
* POSIX seconds of a UTC date are checked against Python's standard ``datetime`` module.
"""

from __future__ import annotations

import math
import re
from datetime import datetime, timedelta, timezone

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from console.timeutil import format_duration, format_utc, parse_utc
from console.units import MAX_TEXT, parse_value, quantity_text

DEG = math.pi / 180.0  # SI brochure: 1 deg = pi/180 rad (definition)


def _utc(*args) -> float:
    """POSIX seconds of a UTC date, from the standard library (independent reference)."""
    return datetime(*args, tzinfo=timezone.utc).timestamp()


# --------------------------------------------------------------------------------------------
# units: accepted forms
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize(
    "value, kind, expected_si",
    [
        ("475 km", "length", 475e3),
        ("475000 m", "length", 475e3),
        ("7.6 km/s", "speed", 7600.0),
        ("7600 m/s", "speed", 7600.0),
        ("51.6 deg", "angle", 51.6 * DEG),
        ("0.9 rad", "angle", 0.9),
        ("160 kg", "mass", 160.0),
        ("1.5 N", "force", 1.5),
        ("1 lbf", "force", 4.4482216152605),  # NIST SP 811 B.8 (from memory)
        ("220 s", "time", 220.0),
        ("45 min", "time", 2700.0),
        ("2 %", "ratio", 0.02),
        ("398600.4418 km^3/s^2", "gravitational_parameter", 3.986004418e14),
        ("398600.4418 km**3/s**2", "gravitational_parameter", 3.986004418e14),
        ("3.986004418e14 m^3/s^2", "gravitational_parameter", 3.986004418e14),
        ("7.292115e-5 rad/s", "rate", 7.292115e-5),
        ("  475   km  ", "length", 475e3),
    ],
)
def test_unit_strings_convert_to_si(value, kind, expected_si):
    got = parse_value(value, kind, "fld")
    assert got == pytest.approx(expected_si, rel=1e-12)


@pytest.mark.parametrize(
    "kind, number, expected_si",
    [
        ("length", 475, 475e3),          # bare number: km
        ("speed", 7.6, 7600.0),          # km/s
        ("angle", 51.6, 51.6 * DEG),     # deg
        ("mass", 160, 160.0),            # kg
        ("force", 1.5, 1.5),             # N
        ("time", 220, 220.0),            # s
        ("gravitational_parameter", 398600.4418, 3.986004418e14),  # km^3/s^2
    ],
)
def test_bare_numbers_take_the_kind_default_unit(kind, number, expected_si):
    assert parse_value(number, kind, "fld") == pytest.approx(expected_si, rel=1e-12)
    # the same number written as text without a unit means the same
    assert parse_value(str(number), kind, "fld") == pytest.approx(expected_si, rel=1e-12)


def test_degrees_and_radians_are_told_apart():
    deg = parse_value("51.6 deg", "angle", "state.i")
    rad = parse_value("0.9 rad", "angle", "state.i")
    bare = parse_value(51.6, "angle", "state.i")
    assert deg == pytest.approx(0.900589894029074, abs=1e-15)  # 51.6 * pi / 180
    assert rad == 0.9
    assert bare == deg


@settings(max_examples=60, deadline=None)
@given(st.floats(min_value=0.0, max_value=1e6, allow_nan=False, allow_infinity=False))
def test_bare_number_equals_default_unit_string(x):
    for kind, unit in (("length", "km"), ("speed", "km/s"), ("mass", "kg"), ("time", "s")):
        bare = parse_value(x, kind, "fld")
        text = parse_value(f"{x!r} {unit}", kind, "fld")
        assert text == pytest.approx(bare, rel=1e-12, abs=1e-12)


def test_negative_allowed_only_when_asked():
    assert parse_value("-30 deg", "angle", "state.raan", allow_negative=True) == pytest.approx(-30 * DEG)
    with pytest.raises(ValueError, match=r"state\.i.*must not be negative"):
        parse_value("-30 deg", "angle", "state.i")


def test_zero_refused_when_not_allowed():
    with pytest.raises(ValueError, match=r"thrusters\[1\]\.thrust.*greater than zero"):
        parse_value("0 N", "force", "thrusters[1].thrust", allow_zero=False)
    assert parse_value("0 N", "force", "x") == 0.0


def test_quantity_text_shows_display_units():
    assert quantity_text(475e3, "length") == "475.000 km"
    assert quantity_text(51.6 * DEG, "angle", digits=1) == "51.6 deg"
    assert quantity_text(7600.0, "speed", "m/s", digits=0) == "7600 m/s"


# --------------------------------------------------------------------------------------------
# units: refused input, each naming the field
# --------------------------------------------------------------------------------------------

BAD_VALUES = [
    # wrong dimension
    ("5 kg", "length"),
    ("475 km", "speed"),
    ("7.6 km/s", "angle"),
    ("1 deg", "length"),
    ("3 km^2/s^2", "gravitational_parameter"),
    ("5 %", "angle"),           # a ratio is not an angle
    ("5 deg", "ratio"),         # an angle is not a ratio
    ("5 degC", "angle"),
    # unparseable
    ("abc", "length"),
    ("km", "length"),
    ("", "length"),
    ("   ", "length"),
    ("475 blorps", "length"),
    ("0x10 km", "length"),
    ("1 km; import os", "length"),
    ("__import__('os') km", "length"),
    ("1 (km)", "length"),
    ("x" * (MAX_TEXT + 1), "length"),
    # not finite
    ("nan", "length"),
    ("inf", "length"),
    ("-inf km", "length"),
    ("inf km", "length"),
    ("1e400 km", "length"),
    ("1e308 km", "length"),     # finite in km, overflows in m
    (float("nan"), "length"),
    (float("inf"), "speed"),
    (-float("inf"), "angle"),
    # negative where not allowed
    ("-5 km", "length"),
    (-5, "mass"),
    ("-1 s", "time"),
    # wrong type
    (True, "length"),
    (False, "angle"),
    ([1, 2, 3], "length"),
    ({"value": 1}, "mass"),
    (None, "time"),
]


@pytest.mark.parametrize("value, kind", BAD_VALUES)
def test_bad_values_raise_value_error_naming_the_field(value, kind):
    field = "state.periapsis_alt"
    with pytest.raises(ValueError) as info:
        parse_value(value, kind, field)
    assert str(info.value).startswith(field + ":"), str(info.value)


@pytest.mark.parametrize(
    "text",
    [
        "9**9**9 km",           # would be an enormous integer if evaluated as code
        "9^9^9 km",
        "1 km**999999999",
        "1 km^99999",
        "2**100000 m",
        "1e999999999 km",
        "1 " + "km*" * 60 + "km",
    ],
)
def test_expressions_that_could_hang_are_refused(text):
    # if any of these were evaluated the test would not finish; no timing assertion is made
    with pytest.raises(ValueError, match=r"^target\.altitude:"):
        parse_value(text, "length", "target.altitude")


def test_messages_say_why():
    with pytest.raises(ValueError, match="not a length"):
        parse_value("5 kg", "length", "f")
    with pytest.raises(ValueError, match="not .*finite"):
        parse_value("nan", "length", "f")
    with pytest.raises(ValueError, match="true/false"):
        parse_value(True, "length", "f")
    with pytest.raises(ValueError, match="list"):
        parse_value([1], "length", "f")
    with pytest.raises(ValueError, match="too long"):
        parse_value("1" * (MAX_TEXT + 5), "length", "f")


# --------------------------------------------------------------------------------------------
# timeutil
# --------------------------------------------------------------------------------------------

def test_parse_utc_z_and_zero_offset():
    expected = _utc(2027, 3, 14, 6, 0, 0)
    assert parse_utc("2027-03-14T06:00:00Z") == expected
    assert parse_utc("2027-03-14T06:00:00+00:00") == expected
    assert parse_utc("2027-03-14T06:00:00+0000") == expected
    assert parse_utc("  2027-03-14T06:00:00Z  ") == expected


def test_parse_utc_fractional_seconds():
    base = _utc(2027, 3, 14, 6, 0, 0)
    assert parse_utc("2027-03-14T06:00:00.123Z") == pytest.approx(base + 0.123, abs=1e-6)
    assert parse_utc("2027-03-14T06:00:07.5+00:00") == pytest.approx(base + 7.5, abs=1e-6)
    assert parse_utc("2027-03-14T06:00:00.000001Z") == pytest.approx(base + 1e-6, abs=1e-6)


def test_parse_utc_leap_day_and_year_end():
    assert parse_utc("2028-02-29T12:00:00Z") == _utc(2028, 2, 29, 12)
    assert parse_utc("2026-12-31T23:59:59Z") == _utc(2026, 12, 31, 23, 59, 59)


@pytest.mark.parametrize(
    "text, why",
    [
        ("2027-03-14T06:00:00", "no time zone"),
        ("2027-03-14T06:00:00+01:00", "not UTC"),
        ("2027-03-14T06:00:00-05:00", "not UTC"),
        ("2016-12-31T23:59:60Z", "leap second"),
        ("2027-02-29T00:00:00Z", "not a valid date"),
        ("2027-04-31T00:00:00Z", "not a valid date"),
        ("2027-13-01T00:00:00Z", "not a valid date"),
        ("2027-00-10T00:00:00Z", "not a valid date"),
        ("2027-03-14T24:00:00Z", "not a valid date"),
        ("2027-03-14T06:60:00Z", "not a valid date"),
        ("2027-03-14", "not an ISO 8601"),
        ("14/03/2027 06:00", "not an ISO 8601"),
        ("yesterday", "not an ISO 8601"),
        ("", "not an ISO 8601"),
    ],
)
def test_parse_utc_refuses(text, why):
    with pytest.raises(ValueError, match=rf"^epoch: .*{why}"):
        parse_utc(text, "epoch")


@pytest.mark.parametrize(
    "value",
    [1805004000, 1805004000.0, None, True, ["2027-03-14T06:00:00Z"]],
)
def test_parse_utc_refuses_non_strings(value):
    with pytest.raises(ValueError, match=r"^burn\.ignition: expected an ISO 8601"):
        parse_utc(value, "burn.ignition")


def test_parse_utc_takes_a_utc_datetime_and_refuses_others():
    # an unquoted TOML datetime arrives as a datetime object
    aware = datetime(2027, 3, 14, 6, 0, 0, 250000, tzinfo=timezone.utc)
    assert parse_utc(aware, "epoch") == parse_utc("2027-03-14T06:00:00.25Z", "epoch")
    for other in (datetime(2027, 3, 14, 6), datetime(2027, 3, 14, 6, tzinfo=timezone(timedelta(hours=2)))):
        with pytest.raises(ValueError, match=r"^epoch: .* is not UTC"):
            parse_utc(other, "epoch")
    with pytest.raises(ValueError, match="not UTC"):
        parse_utc("2027-03-14T06:00:00-00:00", "epoch")  # ISO 8601 has no negative zero offset


def test_format_utc_ms_and_z():
    t = _utc(2027, 3, 14, 6, 19, 16) + 0.5644
    assert format_utc(t) == "2027-03-14T06:19:16.564Z"
    assert format_utc(_utc(1970, 1, 1)) == "1970-01-01T00:00:00.000Z"
    # rounding that carries into the next second, minute, day
    assert format_utc(_utc(2026, 12, 31, 23, 59, 59) + 0.9996) == "2027-01-01T00:00:00.000Z"
    assert format_utc(t, digits=0) == "2027-03-14T06:19:17Z"


def test_format_utc_refuses_non_finite():
    for bad in (math.nan, math.inf):
        with pytest.raises(ValueError):
            format_utc(bad)


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=0.0, max_value=4.0e9, allow_nan=False, allow_infinity=False))
def test_format_parse_round_trip_ms(t_s):
    text = format_utc(t_s)
    assert re.fullmatch(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z", text)
    back = parse_utc(text)
    # ms precision: half a millisecond of rounding, plus float spacing at 4e9 s (~5e-7 s)
    assert abs(back - t_s) <= 0.5e-3 + 1e-6
    # and text -> seconds -> text is exact
    assert format_utc(back) == text
    # independent reading of the same string with the standard library
    ref = datetime(1970, 1, 1, tzinfo=timezone.utc) + timedelta(seconds=back)
    assert ref.strftime("%Y-%m-%dT%H:%M:%S") == text[:19]


@pytest.mark.parametrize(
    "seconds, text",
    [
        (0, "T-00:00:00"),
        (5, "T-00:00:05"),
        (-5, "T+00:00:05"),
        (59.6, "T-00:01:00"),
        (3600, "T-01:00:00"),
        (86400 + 2 * 3600 + 3 * 60 + 4, "T-1d 02:03:04"),
        (-(3 * 86400), "T+3d 00:00:00"),
        (-(12 * 3600 + 34 * 60 + 56.4), "T+12:34:56"),
    ],
)
def test_format_duration(seconds, text):
    assert format_duration(seconds) == text


def test_units_read_without_pint_agree_with_pint():
    # the fast path for common units must give pint's own conversion, to the last bits
    import console.units as U

    ureg = U.registry()
    for unit, (kind, factor) in U._FAST.items():
        si = U.KINDS[kind][1]
        expected = ureg.Quantity(2.5, unit.replace("^", "**")).to(si).magnitude if si else \
            ureg.Quantity(2.5, unit).to("").magnitude
        assert U.parse_value(f"2.5 {unit}", kind, "f") == pytest.approx(expected, rel=1e-15), unit
