"""What the console's forms hold, read into SI values (no Textual here).

Each reader takes the raw text of a form's fields and returns SI values, or raises
:class:`FormErrors` mapping each offending field to a message.  The messages are those of the
shared parsers (:func:`console.scenario_file.parse_state`, :func:`parse_target`,
:func:`console.timeutil.parse_utc`, :func:`console.units.parse_value`), so the console and the
files say the same thing about the same mistake.
"""

from __future__ import annotations

import math
import re

import numpy as np

from .timeutil import format_utc, parse_utc
from .units import parse_value

#: fields of each state form, in display order
STATE_FIELDS = {
    "vector": ("r", "v"),
    "elements": ("a", "e", "i", "raan", "argp", "nu"),
    "apsides": ("periapsis_alt", "apoapsis_alt", "i", "raan", "argp", "nu"),
    "opm": ("opm",),  # a CCSDS orbit parameter message file: its EPOCH is the epoch
}
STATE_FORMS = tuple(STATE_FIELDS)
#: fields that may stay empty, per form
OPTIONAL_STATE = {"vector": (), "elements": (), "apsides": ("i", "raan", "argp", "nu"), "opm": ()}
#: the unit kind of every scalar state field (vectors are checked by parse_state)
_STATE_KINDS = {"a": "length", "e": "dimensionless", "i": "angle", "raan": "angle", "argp": "angle",
                "nu": "angle", "periapsis_alt": "length", "apoapsis_alt": "length"}

TARGET_FIELDS = {
    "circular": ("altitude",),
    "apsides": ("periapsis_alt", "apoapsis_alt"),
    "apoapsis": ("altitude",),
    "periapsis": ("altitude",),
    "bielliptic": ("altitude", "via_alt"),
}
TARGET_KINDS = tuple(TARGET_FIELDS)
ALL_TARGET_FIELDS = ("altitude", "periapsis_alt", "apoapsis_alt", "via_alt", "i")

GENERAL = ""  # the key of a message that belongs to no single field

_FIELD = re.compile(r"^(?:state|target|after)\.([a-z_]+)")


class FormErrors(ValueError):
    """Messages per field (``GENERAL`` for the form as a whole)."""

    def __init__(self, errors: dict[str, str]):
        self.errors = dict(errors)
        super().__init__("; ".join(self.errors.values()))


def field_of(message: str, default: str = GENERAL) -> str:
    """The field a parser's message names (``"state.a: ..."`` -> ``"a"``)."""
    m = _FIELD.match(message)
    return m.group(1) if m else default


def read_epoch(text: str, field: str = "epoch") -> float:
    try:
        return parse_utc(text.strip(), field)
    except ValueError as exc:
        raise FormErrors({field: str(exc)}) from None


def read_timed_state(form: str, raw: dict, epoch_text: str, body, base_dir=None,
                     where: str = "state", epoch_field: str = "epoch") -> tuple[float, tuple, tuple]:
    """(epoch UTC s, r, v) from a state form and its epoch field.

    In the ``"opm"`` form the message's EPOCH is the epoch: the epoch field may stay empty, and
    if it is filled it must agree with the message to a microsecond.  A relative file name is
    taken in ``base_dir`` (the session's folder).

    Raises
    ------
    FormErrors
        Per field, as :func:`read_state`; for a message, the ``opm`` field names the file line.
    """
    if form != "opm":
        errors, epoch, r = {}, None, None
        try:
            epoch = read_epoch(epoch_text, epoch_field)
        except FormErrors as exc:
            errors.update(exc.errors)
        try:
            r, v = read_state(form, raw, body, where)
        except FormErrors as exc:
            errors.update(exc.errors)
        if errors:
            raise FormErrors(errors)
        return epoch, r, v
    from pathlib import Path

    from .scenario_file import load_state_file

    text = str(raw.get("opm", "")).strip()
    if not text:
        raise FormErrors({"opm": f"{where}.opm: give the orbit parameter message's file"})
    path = Path(text).expanduser()
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    try:
        st = load_state_file(path, body)
    except (ValueError, RuntimeError) as exc:
        raise FormErrors({"opm": f"{where}.opm: {exc}"}) from None
    if epoch_text.strip():
        given = read_epoch(epoch_text, epoch_field)
        if abs(given - st.epoch_s) > 1e-6:
            raise FormErrors({epoch_field: f"{epoch_field}: {epoch_text.strip()} disagrees with the message's "
                                           f"EPOCH {format_utc(st.epoch_s, 6)}: clear it or correct it"})
    return st.epoch_s, st.r_m, st.v_m_s


def read_state(form: str, raw: dict, body, where: str = "state") -> tuple[tuple, tuple]:
    """Osculating (r, v) from the text of a state form's fields.

    Parameters
    ----------
    form : str
        ``"vector"``, ``"elements"`` or ``"apsides"``.
    raw : dict of str
        Field text by name (``"r"``: ``"6778 0 0 km"``, ``"periapsis_alt"``: ``"380 km"``, ...).
    body : mechanics.bodies.Body
    where : str
        Prefix of the messages (``"state"``, or ``"after"`` for a post-burn orbit).

    Returns
    -------
    r_m, v_m_s : tuple of 3 floats
        m and m/s, inertial frame.

    Raises
    ------
    FormErrors
        Every field that cannot be read on its own, else the first problem of the whole set.
    """
    from .scenario_file import parse_state

    if form not in STATE_FIELDS:
        raise FormErrors({GENERAL: f"{where}: unknown form {form!r}"})
    table, errors = {}, {}
    for key in STATE_FIELDS[form]:
        text = str(raw.get(key, "")).strip()
        if not text:
            if key not in OPTIONAL_STATE[form]:
                errors[key] = f"{where}.{key}: missing"
            continue
        table[key] = text
        kind = _STATE_KINDS.get(key)
        if kind is not None:
            try:
                parse_value(text, kind, f"{where}.{key}", allow_negative=True)
            except ValueError as exc:
                errors[key] = str(exc)
    if errors:
        raise FormErrors(errors)
    try:
        r, v, _form = parse_state(table, body, where)
    except ValueError as exc:
        raise FormErrors({field_of(str(exc)): str(exc)}) from None
    return r, v


def read_target(kind: str, raw: dict, body):
    """A :class:`mechanics.scenario.Target` from the target form (``i`` may stay empty)."""
    from .scenario_file import parse_target

    if kind not in TARGET_FIELDS:
        raise FormErrors({GENERAL: f"target.kind: {kind!r} is not known: use one of {', '.join(TARGET_KINDS)}"})
    table, errors = {"kind": kind}, {}
    for key in TARGET_FIELDS[kind] + ("i",):
        text = str(raw.get(key, "")).strip()
        if text:
            table[key] = text
        elif key != "i":
            errors[key] = f"target.{key}: missing"
    if errors:
        raise FormErrors(errors)
    try:
        return parse_target(table, body, "target")
    except ValueError as exc:
        raise FormErrors({field_of(str(exc)): str(exc)}) from None


def read_record(raw: dict, after_form: str, after_raw: dict, body, base_dir=None) -> dict:
    """What a burn did, from the record form.

    Returns
    -------
    dict
        ``ignition_s`` (UTC s), ``duration_s`` (s), ``propellant_kg`` (kg or None: book-kept from
        the fit), ``propellant_source``, ``after`` (:class:`OrbitState`).
    """
    from mechanics.session.events import OrbitState

    errors = {}
    out = {}
    for key, fn in (("ignition", lambda t: parse_utc(t, "ignition")),
                    ("duration", lambda t: parse_value(t, "time", "duration", allow_zero=False))):
        try:
            out[key] = fn(str(raw.get(key, "")).strip())
        except ValueError as exc:
            errors[key] = str(exc)
    prop = str(raw.get("propellant", "")).strip()
    out["propellant"] = None
    if prop:
        try:
            out["propellant"] = parse_value(prop, "mass", "propellant")
        except ValueError as exc:
            errors["propellant"] = str(exc)
    source = str(raw.get("source", "book-keeping"))
    if source not in ("gauge", "book-keeping"):
        errors["source"] = f"propellant source: {source!r}: use gauge or book-keeping"
    try:
        epoch, r, v = read_timed_state(after_form, after_raw, str(raw.get("after_epoch", "")), body,
                                       base_dir, "after", "after_epoch")
    except FormErrors as exc:
        errors.update(exc.errors)
    if errors:
        raise FormErrors(errors)
    return {"ignition_s": out["ignition"], "duration_s": out["duration"], "propellant_kg": out["propellant"],
            "propellant_source": source, "after": OrbitState(epoch, r, v)}


def read_gauge(raw: dict) -> tuple[float, float, str]:
    """(epoch UTC s, propellant kg, method) of a gauge reading."""
    errors = {}
    epoch = kg = None
    try:
        epoch = parse_utc(str(raw.get("epoch", "")).strip(), "epoch")
    except ValueError as exc:
        errors["epoch"] = str(exc)
    try:
        kg = parse_value(str(raw.get("propellant", "")).strip(), "mass", "propellant")
    except ValueError as exc:
        errors["propellant"] = str(exc)
    method = str(raw.get("method", "")).strip() or "gauge"
    if len(method) > 40 or not method.isprintable():
        errors["method"] = "method: at most 40 printable characters"
    if errors:
        raise FormErrors(errors)
    return epoch, kg, method


def read_entry(text: str) -> int:
    """A journal entry number (>= 1)."""
    t = text.strip()
    if not t.isdigit() or int(t) < 1 or len(t) > 9:
        raise FormErrors({"entry": f"entry: {text.strip()!r} is not an entry number (1, 2, 3, ...)"})
    return int(t)


# --------------------------------------------------------------------------- prefill

def _km(x_m: float, digits: int = 4) -> str:
    return f"{x_m / 1e3:.{digits}f} km"


def _deg(x_rad: float) -> str:
    return f"{math.degrees(float(x_rad)):.7f} deg"


def state_text(form: str, r_m, v_m_s, body) -> dict:
    """Field text of a state in ``form``, precise to well under a metre."""
    from mechanics.elements import rv_to_elements

    if form == "opm":
        return {"opm": ""}  # a message is a file: nothing to show of the latest orbit
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    if form == "vector":
        return {"r": " ".join(f"{c / 1e3:.4f}" for c in r) + " km",
                "v": " ".join(f"{c / 1e3:.7f}" for c in v) + " km/s"}
    el = rv_to_elements(r, v, body.mu_m3_s2)
    angles = {"i": _deg(el.i_rad), "raan": _deg(el.raan_rad), "argp": _deg(el.argp_rad),
              "nu": _deg(el.nu_rad)}
    if form == "elements":
        return {"a": _km(float(el.a_m)), "e": f"{float(el.e):.10f}", **angles}
    R = body.radius_m
    return {"periapsis_alt": _km(float(el.periapsis_radius_m) - R),
            "apoapsis_alt": _km(float(el.apoapsis_radius_m) - R), **angles}


def target_text(target, body) -> tuple[str, dict]:
    """(kind, field text) of a target."""
    R = body.radius_m
    out = {k: "" for k in ALL_TARGET_FIELDS}
    if target is None:
        return "circular", out

    def alt(x):
        return "" if x is None else f"{(x - R) / 1e3:.3f} km"

    kind = target.kind
    if kind in ("circular", "bielliptic"):
        out["altitude"] = alt(target.periapsis_radius_m)
    if kind == "bielliptic":
        out["via_alt"] = alt(target.via_radius_m)
    if kind == "apsides":
        out["periapsis_alt"] = alt(target.periapsis_radius_m)
        out["apoapsis_alt"] = alt(target.apoapsis_radius_m)
    if kind == "apoapsis":
        out["altitude"] = alt(target.apoapsis_radius_m)
    if kind == "periapsis":
        out["altitude"] = alt(target.periapsis_radius_m)
    if target.i_rad is not None:
        out["i"] = f"{math.degrees(target.i_rad):.4f} deg"
    return kind, out

