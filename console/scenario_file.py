"""Scenario and state files (TOML, burndesk's own format; see README "Scenario files").

Values are numbers or strings with units read by pint (``"475 km"``, ``"7.6 km/s"``,
``"51.6 deg"``); bare numbers mean km, km/s and degrees (kg, N and s for masses, forces and
times).  Every error names the file and the key.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from mechanics.bodies import Body, check_model
from mechanics.elements import Elements, apsides_to_elements, elements_to_rv, rv_to_elements
from mechanics.scenario import PlanOptions, Scenario, Target

from .profiles import check_keys, load_body, load_vehicle, read_toml
from .timeutil import format_utc, parse_utc
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
    """A state read from a file or a form: osculating r, v at an epoch, and how it was given.

    ``notes`` are things the operator should hear about the input (e.g. an OPM's MASS, which is
    informational); ``opm`` is the :class:`console.opm.OpmDocument` the state came from, if any.
    """

    epoch_s: float | None
    r_m: tuple
    v_m_s: tuple
    form: str
    notes: tuple = ()
    opm: object = None


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
        raise ValueError(f"{where}.opm: an orbit parameter message is read only from a scenario or "
                         "STATE file (its path resolves against that file's folder)")
    if form == "vector":
        if has_vector and any(k in table for k in OPTIONAL_APSIDES):
            extra = next(k for k in OPTIONAL_APSIDES if k in table)
            raise ValueError(f"{where}.{extra}: not used with r and v: remove it")
        for key in ("r", "v"):
            if key not in table:
                raise ValueError(f"{where}.{key}: missing (the vector form needs r and v)")
        r = _vector(table["r"], "length", f"{where}.r")
        for k, c in enumerate(r):
            _within_reach(c, f"{where}.r[{k}]", table["r"])
        v = _vector(table["v"], "speed", f"{where}.v")
        check_vector(r, v, body, f"{where}.r", f"{where}.v", where)
        return r, v, form
    if form == "elements":
        for key in FORMS["elements"]:
            if key not in table:
                raise ValueError(f"{where}.{key}: missing (the elements form needs a, e, i, raan, argp, nu)")
        a = _within_reach(parse_value(table["a"], "length", f"{where}.a", allow_zero=False), f"{where}.a",
                          table["a"])
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


def check_vector(r, v, body: Body, r_field: str, v_field: str, where: str) -> None:
    """Refuse a position inside the body, a parabolic state, or a periapsis inside the body
    (an open orbit only if it is still approaching it)."""
    rmag = math.sqrt(sum(c * c for c in r))
    if rmag <= body.radius_m:
        raise ValueError(f"{r_field}: position is inside the body ({(rmag - body.radius_m) / 1e3:.1f} km altitude)")
    try:
        el = rv_to_elements(np.array(r), np.array(v), body.mu_m3_s2)
    except ValueError as exc:
        raise ValueError(f"{v_field}: {exc}") from None
    if el.periapsis_radius_m <= body.radius_m and (el.e < 1.0 or _approaching(r, v)):
        raise ValueError(f"{where}: periapsis is inside the body "
                         f"({(el.periapsis_radius_m - body.radius_m) / 1e3:.1f} km altitude)")


def _is_opm_table(table) -> bool:
    return isinstance(table, dict) and "opm" in table


def read_state(table, body: Body, base_dir: Path, where: str = "state", vehicle=None) -> StateInput:
    """A ``[state]`` table in any form, including ``opm = "FILE"`` (resolved against ``base_dir``).

    The epoch is ``None`` unless the state came from an OPM (whose EPOCH it is).
    """
    if _is_opm_table(table):
        return read_opm_state(table, body, base_dir, where, vehicle)
    r, v, form = parse_state(table, body, where)
    return StateInput(None, r, v, form)


def read_opm_state(table, body: Body, base_dir: Path, where: str = "state", vehicle=None) -> StateInput:
    """``[state] opm = "FILE"``: the state of an orbit parameter message (see :mod:`console.opm`)."""
    from .opm import read_opm_file

    check_keys(table, STATE_KEYS, where)
    for key in sorted(set(table) - {"opm"}):
        if key == "frame":
            raise ValueError(f"{where}.frame: the OPM's REF_FRAME gives the frame: remove frame")
        raise ValueError(f"{where}.{key}: not used with opm (the message holds the whole state): remove it")
    ref = table["opm"]
    if not isinstance(ref, str) or not ref.strip():
        raise ValueError(f"{where}.opm: expected the path of an OPM file (text)")
    path = Path(ref.strip())
    if not path.is_absolute():
        path = Path(base_dir) / path
    return opm_state(read_opm_file(path), body, f"{where}.opm", vehicle)


def opm_state(doc, body: Body, where: str, vehicle=None) -> StateInput:
    """Check an :class:`console.opm.OpmDocument` against the body and turn it into a state.

    Raises
    ------
    ValueError
        When its CENTER_NAME is not the body, or its orbit is inside the body.
    """
    pre = f"{where}: " if where else ""
    if doc.center_name != " ".join(body.name.replace("_", " ").split()).upper():
        raise ValueError(f"{pre}{doc.where('CENTER_NAME')}: CENTER_NAME {doc.metadata['CENTER_NAME']} "
                         f"does not match the body {body.name!r}")
    check_vector(doc.r_m, doc.v_m_s, body, f"{pre}{doc.where('X')} (X, Y, Z)",
                 f"{pre}{doc.where('X_DOT')} (X_DOT, Y_DOT, Z_DOT)", f"{pre}{doc.source}")
    notes = []
    if doc.mass_kg is not None:
        if vehicle is not None:
            diff = doc.mass_kg - vehicle.wet_mass_kg
            notes.append(f"{doc.where('MASS')}: MASS {doc.mass_kg:.3f} kg is informational; the plan uses "
                         f"the vehicle's {vehicle.wet_mass_kg:.3f} kg (dry + loaded propellant)"
                         + (f", {diff:+.3f} kg from the OPM: check the vehicle profile" if abs(diff) >= 1e-3 else ""))
        else:
            notes.append(f"{doc.where('MASS')}: MASS {doc.mass_kg:.3f} kg is informational (not used)")
    if doc.keplerian is not None and abs(doc.keplerian.gm_m3_s2 / body.mu_m3_s2 - 1.0) > 1e-9:
        notes.append(f"{doc.where('GM')}: GM {doc.keplerian.gm_m3_s2 / 1e9:.6f} km^3/s^2 differs from the "
                     f"body's {body.mu_m3_s2 / 1e9:.6f}; burndesk uses the state vector and the body's GM")
    if doc.maneuvers:
        notes.append(f"{doc.source}: its {len(doc.maneuvers)} manoeuvre block(s) are not used; the state is "
                     "the one at EPOCH")
    if doc.user_defined:
        notes.append(f"{doc.source}: USER_DEFINED parameters ({', '.join(doc.user_defined)}) are kept "
                     "but not interpreted")
    return StateInput(doc.epoch_s, tuple(doc.r_m), tuple(doc.v_m_s), "opm", tuple(notes), doc)


def _state_epoch(epoch_s, st: StateInput, where: str) -> float:
    """The epoch of a state: the file's ``epoch``, or the OPM's EPOCH (and both must agree)."""
    if st.opm is None:
        return epoch_s
    if epoch_s is not None and abs(epoch_s - st.epoch_s) > 1e-6:
        raise ValueError(f"{where}: epoch: {format_utc(epoch_s, 6)} disagrees with the OPM's EPOCH "
                         f"{format_utc(st.epoch_s, 6)} ({st.opm.where('EPOCH')}): "
                         "remove epoch (the OPM gives it) or make them agree")
    return st.epoch_s


def _approaching(r, v) -> bool:
    return float(np.dot(r, v)) < 0.0


#: Largest orbit size accepted (m), about 6700 au: beyond it a "state" is a typo, not an orbit
#: (nearly parabolic orbits reach a few 1e12 m).
MAX_LENGTH_M = 1e15


def _within_reach(x: float, field: str, value) -> float:
    if abs(x) > MAX_LENGTH_M:
        raise ValueError(f"{field}: {value!r} is beyond {MAX_LENGTH_M / 1e3:.0e} km: not an orbit "
                         "burndesk can plan")
    return x


def _altitude(value, body: Body, field: str) -> float:
    """Altitude (m) above the body's radius; refuses one at or inside the surface."""
    h = _within_reach(parse_value(value, "length", field, allow_negative=True), field, value)
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


def scenario_and_state(doc: dict, base_dir: Path, where: str) -> tuple[Scenario, StateInput]:
    """(:class:`Scenario`, the :class:`StateInput` it was built from) of a scenario document.

    ``epoch`` may be left out when the state is an OPM (``[state] opm = "FILE"``), whose EPOCH
    is then the epoch; when both are given they must agree.
    """
    check_keys(doc, SCENARIO_KEYS, where)
    for key in ("body", "epoch", "state"):
        if key not in doc and not (key == "epoch" and _is_opm_table(doc.get("state"))):
            raise ValueError(f"{where}: {key}: missing")
    body = load_body(doc["body"], base_dir, field=f"{where}: body")
    vehicle = load_vehicle(doc["vehicle"], base_dir, field=f"{where}: vehicle") if "vehicle" in doc else None
    epoch = parse_utc(doc["epoch"], f"{where}: epoch") if "epoch" in doc else None
    st = _prefixed(lambda: read_state(doc["state"], body, base_dir, vehicle=vehicle), where)
    epoch = _state_epoch(epoch, st, where)
    r, v = st.r_m, st.v_m_s
    model, options = _prefixed(lambda: parse_options(doc.get("options", {}), body), where)
    target = _prefixed(lambda: parse_target(doc["target"], body), where) if "target" in doc else None
    name = doc.get("name", Path(where).stem)
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"{where}: name: expected text")
    return Scenario(name=name.strip(), body=body, epoch_s=epoch, r_m=r, v_m_s=v, model=model,
                    vehicle=vehicle, target=target, options=options), replace(st, epoch_s=epoch)


def _prefixed(fn, where: str):
    try:
        return fn()
    except ValueError as exc:
        raise ValueError(f"{where}: {exc}") from None


def load_scenario(path) -> Scenario:
    """Read a scenario file."""
    return load_scenario_with_state(path)[0]


def load_scenario_with_state(path) -> tuple[Scenario, StateInput]:
    """Read a scenario file; also return how its state was given (notes, the OPM if any)."""
    path = Path(path)
    doc = read_toml(path, "scenario file")
    return scenario_and_state(doc, path.resolve().parent, str(path))


def _is_opm_file(path: Path) -> bool:
    """An OPM given directly: a ``.opm`` name, or text whose first line is CCSDS_OPM_VERS."""
    if path.suffix.lower() == ".opm":
        return True
    if not path.is_file():  # a pipe or a device is no OPM (and opening a pipe would block)
        return False
    try:
        with open(path, "rb") as fh:
            head = fh.read(4096)
    except OSError:
        return False
    from .opm import looks_like_opm

    return looks_like_opm(head.decode("ascii", errors="replace"))


def load_state_file(path, body: Body) -> StateInput:
    """Read a STATE file: ``epoch`` and a ``[state]`` table in any form (``epoch`` may be left
    out when the table is ``opm = "FILE"``), or an OPM file itself (KVN)."""
    path = Path(path)
    if _is_opm_file(path):
        from .opm import read_opm_file

        return opm_state(read_opm_file(path), body, "")
    doc = read_toml(path, "state file")
    where = str(path)
    check_keys(doc, {"epoch", "state", "description"}, where)
    for key in ("epoch", "state"):
        if key not in doc and not (key == "epoch" and _is_opm_table(doc.get("state"))):
            raise ValueError(f"{where}: {key}: missing")
    epoch = parse_utc(doc["epoch"], f"{where}: epoch") if "epoch" in doc else None
    st = _prefixed(lambda: read_state(doc["state"], body, path.resolve().parent), where)
    return replace(st, epoch_s=_state_epoch(epoch, st, where))
