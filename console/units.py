"""Unit-aware values at the edge: ``"475 km"``, ``"7.6 km/s"``, ``"51.6 deg"`` -> SI floats.

Bare numbers take the field's default unit (km, km/s, degrees, kg, N, s).  pint is imported on
first use so commands that need no units start fast.  pint parses with its own tokenizer; no
text is ever evaluated as code.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")
_NAME = r"(?:%|[A-Za-z_\u00b5\u00b0][A-Za-z0-9_\u00b5\u00b0]*)"
_POWER = r"(?:\s*(?:\*\*|\^)\s*[+-]?\d{1,2})?"
# One unambiguous separator between names (a run of blanks, or * or / with optional blanks
# around it): an ambiguous one made the regex backtrack exponentially on long inputs.
_UNIT = re.compile(rf"^{_NAME}{_POWER}(?:(?:\s*[*/]\s*|\s+){_NAME}{_POWER})*$")

#: kind -> (pint dimensionality, SI unit, default unit for bare numbers, human name)
KINDS = {
    "length": ("[length]", "m", "km", "a length"),
    "speed": ("[length] / [time]", "m/s", "km/s", "a speed"),
    "angle": ("", "rad", "deg", "an angle"),
    "mass": ("[mass]", "kg", "kg", "a mass"),
    "force": ("[length] * [mass] / [time] ** 2", "N", "N", "a force"),
    "time": ("[time]", "s", "s", "a duration"),
    "mass_flow": ("[mass] / [time]", "kg/s", "kg/s", "a mass flow"),
    "gravitational_parameter": ("[length] ** 3 / [time] ** 2", "m**3/s**2", "km**3/s**2",
                                "a gravitational parameter"),
    "rate": ("1 / [time]", "rad/s", "rad/s", "an angular rate"),
    "dimensionless": ("", "", "", "a plain number"),
    "ratio": ("", "", "", "a ratio"),
}

MAX_TEXT = 200


@lru_cache(maxsize=1)
def registry():
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


def parse_value(value, kind: str, field: str, *, allow_negative: bool = False,
                allow_zero: bool = True) -> float:
    """SI float from a TOML value (number or unit string) for a field of the given kind.

    Raises
    ------
    ValueError
        Naming ``field``: wrong type, wrong dimension, unparseable text, NaN/inf, and (unless
        allowed) negative or zero values.
    """
    dim, si, default, human = KINDS[kind]
    if isinstance(value, bool):
        raise ValueError(f"{field}: expected {human}, got a true/false value")
    if isinstance(value, (int, float)):
        try:
            number = float(value)
        except OverflowError:
            raise ValueError(f"{field}: {value!r} is too large") from None
        if not math.isfinite(number):
            raise ValueError(f"{field}: {value!r} is not a finite number")
        result = _to_si(number, default, si, field) if default else number
    elif isinstance(value, str):
        result = _parse_text(value, kind, field)
    else:
        raise ValueError(f"{field}: expected {human} (a number or a string such as "
                         f"'10 {default or ''}'), got {type(value).__name__}")
    if not math.isfinite(result):
        raise ValueError(f"{field}: {value!r} is not finite")
    if not allow_negative and result < 0.0:
        raise ValueError(f"{field}: {value!r} must not be negative")
    if not allow_zero and result == 0.0:
        raise ValueError(f"{field}: {value!r} must be greater than zero")
    return result


#: Plain units an operator types most, with their factor to SI: read without pint, whose unit
#: registry takes about half a second to build.  The factors are definitions (SI prefixes, and
#: the minute, hour, day and degree accepted for use with the SI; SI Brochure, 9th ed., 2019,
#: from memory) and agree with pint's (tests/test_units_time.py compares them).
_FAST = {
    "m": ("length", 1.0), "km": ("length", 1e3),
    "m/s": ("speed", 1.0), "km/s": ("speed", 1e3),
    "deg": ("angle", math.pi / 180.0), "degree": ("angle", math.pi / 180.0), "rad": ("angle", 1.0),
    "kg": ("mass", 1.0), "g": ("mass", 1e-3),
    "N": ("force", 1.0), "mN": ("force", 1e-3), "kN": ("force", 1e3),
    "s": ("time", 1.0), "min": ("time", 60.0), "h": ("time", 3600.0), "day": ("time", 86400.0),
    "kg/s": ("mass_flow", 1.0), "g/s": ("mass_flow", 1e-3),
    "m^3/s^2": ("gravitational_parameter", 1.0), "km^3/s^2": ("gravitational_parameter", 1e9),
    "rad/s": ("rate", 1.0),
    "%": ("ratio", 0.01),
}


def _fast_key(unit: str) -> str:
    return unit.replace(" ", "").replace("**", "^")


def _to_si(number: float, unit: str, si: str, field: str) -> float:
    if unit == si:
        return number
    fast = _FAST.get(_fast_key(unit))
    if fast is not None:
        return number * fast[1]
    ureg = registry()
    return float(ureg.Quantity(number, unit).to(si).magnitude)


def _parse_text(text: str, kind: str, field: str) -> float:
    dim, si, default, human = KINDS[kind]
    s = text.strip()
    if not s:
        raise ValueError(f"{field}: empty value, expected {human}")
    if len(s) > MAX_TEXT:
        raise ValueError(f"{field}: value is too long to be {human}")
    try:
        number = float(s)
    except ValueError:
        number = None
    if number is not None:
        if not math.isfinite(number):
            raise ValueError(f"{field}: {text!r} is not a finite number")
        return _to_si(number, default, si, field) if default else number
    m = _NUMBER.match(s)
    if not m or not m.group(2):
        raise ValueError(f"{field}: cannot read {text!r} as {human}: write a number and a unit, "
                         f"e.g. '10 {default or 'm'}'")
    unit_text = m.group(2)
    if not _UNIT.match(unit_text):
        raise ValueError(f"{field}: {unit_text!r} in {text!r} is not a unit")
    fast = _FAST.get(_fast_key(unit_text))
    if fast is not None:
        fits = fast[0] == kind or (fast[0] == "ratio" and kind == "dimensionless")
        if not fits:
            raise ValueError(f"{field}: {text!r} is not {human} (unit {unit_text})")
        result = float(m.group(1)) * fast[1]
        if not math.isfinite(result):
            raise ValueError(f"{field}: {text!r} is not finite")
        return result
    ureg = registry()
    try:
        q = ureg.Quantity(float(m.group(1)), ureg.parse_units(unit_text))
    except Exception as exc:  # pint raises several error types for bad text
        raise ValueError(f"{field}: cannot read {text!r} as {human} ({_short(exc)})") from None
    if not hasattr(q, "dimensionality"):
        raise ValueError(f"{field}: cannot read {text!r} as {human}")
    try:
        if kind in ("dimensionless", "ratio"):
            # pint counts angles (deg, rad, turn) as dimensionless: a plain number or a ratio
            # takes only units without an angle scale (%, ppm, dimensionless).
            if not (q.dimensionless and q.unitless):
                raise ValueError
            magnitude = q.to("").magnitude
        elif kind == "angle":
            # pint counts %, ppm as "unitless": they are ratios, not angles.
            if not q.dimensionless or q.unitless:
                raise ValueError
            magnitude = q.to("rad").magnitude
        else:
            magnitude = q.to(si).magnitude
    except Exception:
        raise ValueError(f"{field}: {text!r} is not {human} (unit {str(q.units) or 'none'})") from None
    try:
        result = float(magnitude)
    except (TypeError, ValueError, OverflowError):
        raise ValueError(f"{field}: cannot read {text!r} as {human}") from None
    if not math.isfinite(result):
        raise ValueError(f"{field}: {text!r} is not finite")
    return result


def _short(exc: Exception) -> str:
    msg = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return msg[:80]


def quantity_text(value_si: float, kind: str, unit: str | None = None, digits: int = 3) -> str:
    """Format an SI value in the kind's display unit, e.g. ``"475.000 km"``."""
    dim, si, default, _ = KINDS[kind]
    unit = unit or default
    if kind == "angle" and unit == "deg":
        return f"{math.degrees(value_si):.{digits}f} deg"
    shown = _to_si(1.0, unit, si, "") if unit else 1.0
    return f"{value_si / shown:.{digits}f} {unit}".rstrip()
