"""Scenario and state files (TOML, burndesk's own format; see README "Scenario files").

Values are numbers or strings with units read by pint (``"475 km"``, ``"7.6 km/s"``,
``"51.6 deg"``); bare numbers mean km, km/s and degrees (kg, N and s for masses, forces and
times).  Every error names the file and the key.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from mechanics.bodies import Body, check_model
from mechanics.elements import Elements, apsides_to_elements, elements_to_rv, rv_to_elements
from mechanics.scenario import PlanOptions, Scenario, Target

from .profiles import check_keys, load_body, load_vehicle, read_toml
from .timeutil import parse_utc
from .units import parse_value

SCENARIO_KEYS = {"name", "description", "body", "vehicle", "epoch", "state", "target", "options"}
FORMS = {
    "vector": ("r", "v"),
    "elements": ("a", "e", "i", "raan", "argp", "nu"),
    "apsides": ("periapsis_alt", "apoapsis_alt"),
}
OPTIONAL_APSIDES = ("i", "raan", "argp", "nu")
STATE_KEYS = set(FORMS["vector"]) | set(FORMS["elements"]) | set(FORMS["apsides"]) | {"opm", "frame"}


@dataclass(frozen=True)
class StateInput:
    """A state read from a file or a form: osculating r, v at an epoch, and how it was given."""

    epoch_s: float | None
    r_m: tuple
    v_m_s: tuple
    form: str


def _vector(value, kind: str, field: str):
    if isinstance(value, str):
        parts = value.replace(",", " ").split()
        unit = None
        if len(parts) == 4:
            parts, unit = parts[:3], parts[3]
        if len(parts) != 3:
            raise ValueError(f"{field}: expected three components, e.g. [\"6778 km\", \"0 km\", \"0 km\"]")
        value = [p + (" " + unit if unit else "") for p in parts]
    if not isinstance(value, list) or len(value) != 3:
        raise ValueError(f"{field}: expected a list of three components")
    return tuple(parse_value(c, kind, f"{field}[{k}]", allow_negative=True) for k, c in enumerate(value))


def parse_state(table, body: Body, where: str = "state") -> tuple[tuple, tuple, str]:
    """Osculating (r, v, form) from a ``[state]`` table holding exactly one form.

    Raises
    ------
    ValueError
        Naming the key: unknown key, two forms at once, an incomplete form, bad values, a
        periapsis inside the body, an elements set that is not a closed orbit.
    """
    if not isinstance(table, dict):
        raise ValueError(f"{where}: expected a table")
    check_keys(table, STATE_KEYS, where)
    if "frame" in table:
        frame = table["frame"]
        if not isinstance(frame, str) or frame.strip().lower() not in ("inertial", "icrf", "gcrf", "eme2000", "j2000"):
            raise ValueError(f"{where}.frame: {frame!r} is not supported; states are in the body's "
                             "inertial equatorial frame (inertial, GCRF, EME2000)")
    # i, raan, argp, nu belong to both the elements and the apsides form: decide by the others.
    has_vector = any(k in table for k in FORMS["vector"])
    has_elements = any(k in table for k in ("a", "e"))
    has_apsides = any(k in table for k in FORMS["apsides"])
    present = [n for n, flag in (("vector", has_vector), ("elements", has_elements), ("apsides", has_apsides)) if flag]
    if "opm" in table:
        present.append("opm")
    if not present:
        raise ValueError(f"{where}: give one state form: r and v; or a, e, i, raan, argp, nu; "
                         "or periapsis_alt and apoapsis_alt")
    if len(present) > 1:
        raise ValueError(f"{where}: holds more than one state form ({' and '.join(present)}): keep exactly one")
    form = present[0]
    mu = body.mu_m3_s2
    if form == "opm":
        raise ValueError(f"{where}.opm: reading orbit parameter messages is not available in this version")
    if form == "vector":
        if has_vector and any(k in table for k in OPTIONAL_APSIDES):
            extra = next(k for k in OPTIONAL_APSIDES if k in table)
            raise ValueError(f"{where}.{extra}: not used with r and v: remove it")
        for key in ("r", "v"):
            if key not in table:
                raise ValueError(f"{where}.{key}: missing (the vector form needs r and v)")
        r = _vector(table["r"], "length", f"{where}.r")
        v = _vector(table["v"], "speed", f"{where}.v")
        rmag = math.sqrt(sum(c * c for c in r))
        if rmag <= body.radius_m:
            raise ValueError(f"{where}.r: position is inside the body ({(rmag - body.radius_m) / 1e3:.1f} km altitude)")
        try:
            el = rv_to_elements(np.array(r), np.array(v), mu)
        except ValueError as exc:
            raise ValueError(f"{where}.v: {exc}") from None
        if el.periapsis_radius_m <= body.radius_m and (el.e < 1.0 or _approaching(r, v)):
            raise ValueError(f"{where}: periapsis is inside the body "
                             f"({(el.periapsis_radius_m - body.radius_m) / 1e3:.1f} km altitude)")
        return r, v, form
    if form == "elements":
        for key in FORMS["elements"]:
            if key not in table:
                raise ValueError(f"{where}.{key}: missing (the elements form needs a, e, i, raan, argp, nu)")
        a = parse_value(table["a"], "length", f"{where}.a", allow_zero=False)
        e = parse_value(table["e"], "dimensionless", f"{where}.e")
        if e >= 1.0:
            raise ValueError(f"{where}.e: {e!r} is not below 1: the elements form takes closed orbits "
                             "(give r and v for an open one)")
        i = parse_value(table["i"], "angle", f"{where}.i")
        if i > math.pi + 1e-12:
            raise ValueError(f"{where}.i: must be between 0 and 180 deg")
        angles = {k: parse_value(table[k], "angle", f"{where}.{k}", allow_negative=True)
                  for k in ("raan", "argp", "nu")}
        el = Elements(a, e, min(i, math.pi), angles["raan"], angles["argp"], angles["nu"])
        if el.periapsis_radius_m <= body.radius_m:
            raise ValueError(f"{where}.a: periapsis is inside the body "
                             f"({(el.periapsis_radius_m - body.radius_m) / 1e3:.1f} km altitude)")
    else:
        for key in FORMS["apsides"]:
            if key not in table:
                raise ValueError(f"{where}.{key}: missing (the apsides form needs periapsis_alt and apoapsis_alt)")
        hp = _altitude(table["periapsis_alt"], body, f"{where}.periapsis_alt")
        ha = _altitude(table["apoapsis_alt"], body, f"{where}.apoapsis_alt")
        if ha < hp:
            raise ValueError(f"{where}.apoapsis_alt: is below periapsis_alt")
        i = parse_value(table.get("i", 0.0), "angle", f"{where}.i")
        if i > math.pi + 1e-12:
            raise ValueError(f"{where}.i: must be between 0 and 180 deg")
        angles = {k: parse_value(table.get(k, 0.0), "angle", f"{where}.{k}", allow_negative=True)
                  for k in ("raan", "argp", "nu")}
        el = apsides_to_elements(body.radius_m + hp, body.radius_m + ha, min(i, math.pi),
                                 angles["raan"], angles["argp"], angles["nu"])
    r, v = elements_to_rv(el, mu)
    return tuple(map(float, r)), tuple(map(float, v)), form


def _approaching(r, v) -> bool:
    return float(np.dot(r, v)) < 0.0


def _altitude(value, body: Body, field: str) -> float:
    """Altitude (m) above the body's radius; refuses one at or inside the surface."""
    h = parse_value(value, "length", field, allow_negative=True)
    if h <= 0.0:
        raise ValueError(f"{field}: {value!r} puts the orbit inside the body (altitude must be above 0)")
    return h


TARGET_KEYS = {"kind", "altitude", "periapsis_alt", "apoapsis_alt", "via_alt", "i"}


def parse_target(table, body: Body, where: str = "target") -> Target:
    """A :class:`Target` from a ``[target]`` table."""
    check_keys(table, TARGET_KEYS, where)
    kind = table.get("kind")
    need = {
        "circular": ("altitude",),
        "apsides": ("periapsis_alt", "apoapsis_alt"),
        "apoapsis": ("altitude",),
        "periapsis": ("altitude",),
        "bielliptic": ("altitude", "via_alt"),
    }
    if not isinstance(kind, str) or kind not in need:
        raise ValueError(f"{where}.kind: {kind!r} is not known: use one of {', '.join(need)}")
    for key in need[kind]:
        if key not in table:
            raise ValueError(f"{where}.{key}: missing (kind {kind!r} needs {', '.join(need[kind])})")
    for key in TARGET_KEYS - {"kind", "i"} - set(need[kind]):
        if key in table:
            raise ValueError(f"{where}.{key}: not used by kind {kind!r}: remove it")
    R = body.radius_m

    def alt(key):
        return R + _altitude(table[key], body, f"{where}.{key}")

    i = None
    if "i" in table:
        i = parse_value(table["i"], "angle", f"{where}.i")
        if i > math.pi + 1e-12:
            raise ValueError(f"{where}.i: must be between 0 and 180 deg")
        i = min(i, math.pi)
    try:
        if kind == "circular":
            r = alt("altitude")
            return Target(kind, r, r, None, i)
        if kind == "apsides":
            rp, ra = alt("periapsis_alt"), alt("apoapsis_alt")
            if ra < rp:
                raise ValueError(f"{where}.apoapsis_alt: is below periapsis_alt")
            return Target(kind, rp, ra, None, i)
        if kind == "apoapsis":
            return Target(kind, None, alt("altitude"), None, i)
        if kind == "periapsis":
            return Target(kind, alt("altitude"), None, None, i)
        r = alt("altitude")
        via = alt("via_alt")
        if via < r:
            raise ValueError(f"{where}.via_alt: must lie above the target altitude")
        return Target(kind, r, r, via, i)
    except ValueError as exc:
        msg = str(exc)
        raise ValueError(msg if msg.startswith(where) else f"{where}: {msg}") from None


OPTION_KEYS = {"model", "attitude", "split", "lead_time"}


def parse_options(table, body: Body, where: str = "options") -> tuple[str, PlanOptions]:
    """(model, PlanOptions) from an ``[options]`` table."""
    check_keys(table, OPTION_KEYS, where)
    model = table.get("model", body.default_model)
    if not isinstance(model, str):
        raise ValueError(f"{where}.model: expected text (two-body or two-body+J2)")
    try:
        check_model(model, body)
    except ValueError as exc:
        raise ValueError(f"{where}.model: {exc}") from None
    attitude = table.get("attitude", "inertial")
    if attitude not in ("inertial", "tracking"):
        raise ValueError(f"{where}.attitude: {attitude!r} is not known: use \"inertial\" or \"tracking\"")
    split = table.get("split", "auto")
    if isinstance(split, bool) or not (split in ("auto", "off") or (isinstance(split, int) and 1 <= split <= 200)):
        raise ValueError(f"{where}.split: {split!r}: use \"auto\", \"off\" or a whole number from 1 to 200")
    lead = parse_value(table.get("lead_time", 0.0), "time", f"{where}.lead_time")
    return model, PlanOptions(attitude=attitude, split=split, lead_time_s=lead)


def scenario_from_doc(doc: dict, base_dir: Path, where: str) -> Scenario:
    """Build a :class:`Scenario` from a parsed scenario TOML document."""
    check_keys(doc, SCENARIO_KEYS, where)
    for key in ("body", "epoch", "state"):
        if key not in doc:
            raise ValueError(f"{where}: {key}: missing")
    body = load_body(doc["body"], base_dir, field=f"{where}: body")
    vehicle = load_vehicle(doc["vehicle"], base_dir, field=f"{where}: vehicle") if "vehicle" in doc else None
    epoch = parse_utc(doc["epoch"], f"{where}: epoch")
    r, v, _form = _prefixed(lambda: parse_state(doc["state"], body), where)
    model, options = _prefixed(lambda: parse_options(doc.get("options", {}), body), where)
    target = _prefixed(lambda: parse_target(doc["target"], body), where) if "target" in doc else None
    name = doc.get("name", Path(where).stem)
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"{where}: name: expected text")
    return Scenario(name=name.strip(), body=body, epoch_s=epoch, r_m=r, v_m_s=v, model=model,
                    vehicle=vehicle, target=target, options=options)


def _prefixed(fn, where: str):
    try:
        return fn()
    except ValueError as exc:
        raise ValueError(f"{where}: {exc}") from None


def load_scenario(path) -> Scenario:
    """Read a scenario file."""
    path = Path(path)
    doc = read_toml(path, "scenario file")
    return scenario_from_doc(doc, path.resolve().parent, str(path))


def load_state_file(path, body: Body) -> StateInput:
    """Read a STATE file: ``epoch`` and a ``[state]`` table in any form."""
    path = Path(path)
    doc = read_toml(path, "state file")
    where = str(path)
    check_keys(doc, {"epoch", "state", "description"}, where)
    for key in ("epoch", "state"):
        if key not in doc:
            raise ValueError(f"{where}: {key}: missing")
    epoch = parse_utc(doc["epoch"], f"{where}: epoch")
    r, v, form = _prefixed(lambda: parse_state(doc["state"], body), where)
    return StateInput(epoch, r, v, form)
