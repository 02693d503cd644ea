"""Fleet files (``burndesk fleet``): one spacecraft per CSV row in, one burn per CSV row out.

burndesk's own format.  The first non-comment row is the header; the unit of every number is
in its column name, so cells hold plain numbers (no unit strings).  Lines whose first cell
starts with ``#`` and empty lines (also rows of empty cells) are skipped.  Line numbers in
messages count every line of the file (the header is usually line 1).

Columns (any order; unknown columns are refused):

=========================  =========================================================================
``id``                     required, unique text naming the spacecraft
``epoch_utc``              required, ISO 8601 UTC with a trailing Z (``2027-03-14T06:00:00Z``)
``vehicle``                required, a vehicle profile name (``profiles/vehicles/NAME.toml``) or a
                           path, relative to the fleet file's folder
``body``                   optional, body profile name or path (default ``earth``)
state, one form per file:  ``periapsis_alt_km, apoapsis_alt_km`` (+ optional ``i_deg, raan_deg,
                           argp_deg, nu_deg``, default 0); or ``a_km, e, i_deg, raan_deg,
                           argp_deg, nu_deg``; or ``x_km, y_km, z_km, vx_km_s, vy_km_s, vz_km_s``
                           (osculating, the body's inertial equatorial frame)
``target_kind``            required: circular, apsides, apoapsis, periapsis or bielliptic
``target_alt_km``          circular, apoapsis, periapsis, bielliptic: the target altitude
``target_periapsis_alt_km``, ``target_apoapsis_alt_km``   apsides
``target_via_alt_km``      bielliptic: the intermediate apoapsis altitude
``lead_time_s``            optional, earliest ignition after the epoch (default 0)
``propellant_kg``          optional, propellant on board at the epoch (default: the profile's load)
=========================  =========================================================================

A target column a row's kind does not use must be empty in that row.

Outputs (written whole: temporary file, then renamed):

* the queue, one row per burn, in time order per spacecraft: :data:`QUEUE_HEADER`;
* the summary, one row per spacecraft (also those that need no burn): :data:`SUMMARY_HEADER`.

The plan is :func:`mechanics.fleet.plan_fleet` (two-body timing, impulsive design with finite
durations); ``burndesk plan`` makes the integrated finite-burn plan of one spacecraft.

References
----------
RFC 4180 (CSV quoting), ISO 8601 (UTC time strings).
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .files import read_file_bytes, write_text_file

#: Largest fleet file read, bytes.
MAX_FLEET_BYTES = 200_000_000

STATE_FORMS = {
    # form: (required columns, optional columns)
    "apsides": (("periapsis_alt_km", "apoapsis_alt_km"), ("i_deg", "raan_deg", "argp_deg", "nu_deg")),
    "elements": (("a_km", "e", "i_deg", "raan_deg", "argp_deg", "nu_deg"), ()),
    "vector": (("x_km", "y_km", "z_km", "vx_km_s", "vy_km_s", "vz_km_s"), ()),
}
#: Columns that tell the state forms apart.
FORM_MARKERS = {
    "apsides": ("periapsis_alt_km", "apoapsis_alt_km"),
    "elements": ("a_km", "e"),
    "vector": STATE_FORMS["vector"][0],
}
TARGET_COLUMNS = ("target_alt_km", "target_periapsis_alt_km", "target_apoapsis_alt_km", "target_via_alt_km")
TARGET_NEEDS = {
    "circular": ("target_alt_km",),
    "apsides": ("target_periapsis_alt_km", "target_apoapsis_alt_km"),
    "apoapsis": ("target_alt_km",),
    "periapsis": ("target_alt_km",),
    "bielliptic": ("target_alt_km", "target_via_alt_km"),
}
REQUIRED_COLUMNS = ("id", "epoch_utc", "vehicle", "target_kind")
OPTIONAL_COLUMNS = ("body", "lead_time_s", "propellant_kg")
ALL_COLUMNS = (set(REQUIRED_COLUMNS) | set(OPTIONAL_COLUMNS) | set(TARGET_COLUMNS)
               | {c for req, opt in STATE_FORMS.values() for c in req + opt})

QUEUE_HEADER = ["id", "burn", "leg", "apsis", "ignition_utc", "duration_s", "dv_m_s", "sense",
                "propellant_kg", "mass_before_kg", "goal_alt_km", "feasible", "within_limits"]
SUMMARY_HEADER = ["id", "body", "vehicle", "burns", "total_dv_m_s", "total_duration_s",
                  "propellant_used_kg", "propellant_after_kg", "margin_kg", "feasible",
                  "first_ignition_utc", "last_cutoff_utc", "final_periapsis_alt_km",
                  "final_apoapsis_alt_km", "note"]


@dataclass(frozen=True)
class FleetTable:
    """A parsed fleet file: the planner's input plus what the outputs need to name rows.

    Attributes
    ----------
    path : Path
    ids : list of str
    lines : ndarray of int, the file line of each row
    form : str, the state form of the file
    columns : tuple of str, the header
    kinds : list of str, target kind of each row
    body_names, vehicle_names : list of str, the profile references as written (body
        default ``earth``)
    body_radius_m, min_safe_alt_m : ndarray
    fleet : mechanics.fleet.FleetInput
    """

    path: Path
    ids: list
    lines: np.ndarray
    form: str
    columns: tuple
    kinds: list
    body_names: list
    vehicle_names: list
    body_radius_m: np.ndarray
    min_safe_alt_m: np.ndarray
    fleet: object

    def where(self, k: int, column: str) -> str:
        """``FILE, line L (row k+1, id 'x'), column C`` for messages."""
        return (f"{self.path}, line {int(self.lines[k])} (row {k + 1}, id {self.ids[k]!r}), "
                f"column {column}")


class _Rows:
    """Raw rows and the helpers that turn their cells into arrays with row-naming errors."""

    def __init__(self, path: Path, header, rows, lines):
        self.path = path
        self.header = header
        self.rows = rows
        self.lines = np.asarray(lines, dtype=np.int64)
        self.n = len(rows)
        self.cols = dict(zip(header, zip(*rows))) if rows else {h: () for h in header}
        self.ids = None

    def where(self, k: int, column: str) -> str:
        ident = f", id {self.ids[k]!r}" if self.ids is not None else ""
        return f"{self.path}, line {int(self.lines[k])} (row {k + 1}{ident}), column {column}"

    def fail(self, k: int, column: str, reason: str):
        raise ValueError(f"{self.where(k, column)}: {reason}")

    def refuse(self, mask, column: str, reason) -> None:
        """Fail on the first row where ``mask`` holds (``reason`` may be a function of it)."""
        mask = np.asarray(mask, dtype=bool)
        if mask.any():
            k = int(np.argmax(mask))
            self.fail(k, column, reason(k) if callable(reason) else reason)

    def text(self, column: str) -> list:
        return [c.strip() for c in self.cols[column]] if column in self.cols else [""] * self.n

    def numbers(self, column: str, *, required: bool, why: str = "") -> np.ndarray:
        """Floats of a column, NaN where empty; refuses a missing required value, text that is
        not a plain number, and NaN / infinity."""
        if column not in self.cols:
            if required:
                raise ValueError(f"{self.path}: column {column}: missing from the header{why}")
            return np.full(self.n, np.nan)
        raw = np.array(self.cols[column], dtype=str) if self.n else np.zeros(0, dtype=str)
        cells = getattr(np, "strings", np.char).strip(raw)
        empty = cells == ""
        if required:
            self.refuse(empty, column, f"missing value{why}")
        out = np.full(self.n, np.nan)
        full = ~empty
        try:
            out[full] = cells[full].astype(float)
        except ValueError:
            for k in np.nonzero(full)[0]:
                try:
                    float(cells[k])
                except ValueError:
                    self.fail(int(k), column, f"{str(cells[k])!r} is not a plain number (the unit is "
                                              "in the column name; write numbers only)")
        self.refuse(full & ~np.isfinite(out), column, "must be a finite number")
        return out


def _read_rows(path: Path) -> _Rows:
    # the shared reader refuses pipes and devices (which would block or never end) and big files
    raw = read_file_bytes(path, "fleet file", MAX_FLEET_BYTES)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ValueError(f"{path}: fleet file is not UTF-8 text") from None
    reader = csv.reader(io.StringIO(text, newline=""))
    header, rows, lines = None, [], []
    try:
        for row in reader:
            if not any(c.strip() for c in row) or row[0].lstrip().startswith("#"):
                continue
            if header is None:
                header = [c.strip() for c in row]
                header_line = reader.line_num
                continue
            rows.append(row)
            lines.append(reader.line_num)
    except csv.Error as exc:
        raise ValueError(f"{path}, line {reader.line_num}: not valid CSV ({exc})") from None
    if header is None:
        raise ValueError(f"{path}: no header row (the first line names the columns, e.g. "
                         "id,epoch_utc,vehicle,periapsis_alt_km,...)")
    seen = set()
    for name in header:
        if not name:
            raise ValueError(f"{path}, line {header_line}: the header has an empty column name")
        if name in seen:
            raise ValueError(f"{path}, line {header_line}: column {name} appears twice in the header")
        if name not in ALL_COLUMNS:
            raise ValueError(f"{path}, line {header_line}: column {name}: not known (allowed: "
                             f"{', '.join(sorted(ALL_COLUMNS))})")
        seen.add(name)
    for name in REQUIRED_COLUMNS:
        if name not in seen:
            raise ValueError(f"{path}, line {header_line}: column {name}: missing from the header")
    if not rows:
        raise ValueError(f"{path}: no spacecraft rows after the header")
    for k, row in enumerate(rows):
        if len(row) != len(header):
            raise ValueError(f"{path}, line {lines[k]} (row {k + 1}): has {len(row)} cells, the header "
                             f"has {len(header)}")
    return _Rows(path, header, rows, lines)


def _state_form(r: _Rows, header_line_path: Path) -> str:
    cols = set(r.header)
    present = [form for form, marks in FORM_MARKERS.items() if any(c in cols for c in marks)]
    if not present:
        raise ValueError(f"{header_line_path}: no state columns: give periapsis_alt_km, apoapsis_alt_km; "
                         "or a_km, e, i_deg, raan_deg, argp_deg, nu_deg; or x_km, y_km, z_km, vx_km_s, "
                         "vy_km_s, vz_km_s")
    if len(present) > 1:
        raise ValueError(f"{header_line_path}: the header holds more than one state form "
                         f"({' and '.join(present)}): keep exactly one per file")
    form = present[0]
    req, opt = STATE_FORMS[form]
    for c in req:
        if c not in cols:
            raise ValueError(f"{header_line_path}: column {c}: missing from the header (the {form} form "
                             f"needs {', '.join(req)})")
    state_cols = {c for req2, opt2 in STATE_FORMS.values() for c in req2 + opt2}
    for c in r.header:
        if c in state_cols and c not in req + opt:
            raise ValueError(f"{header_line_path}: column {c}: not used with the {form} form: remove it")
    return form


def _profiles(r: _Rows, column: str, values: list, loader, base_dir: Path):
    """Load each distinct profile reference once; (list of profiles, index of each row)."""
    index: dict = {}
    inv = np.empty(r.n, dtype=np.int64)
    loaded = []
    for k, ref in enumerate(values):
        j = index.get(ref)
        if j is None:
            try:
                loaded.append(loader(ref, base_dir, field=column))
            except ValueError as exc:
                r.fail(k, column, str(exc).removeprefix(f"{column}: "))
            j = index[ref] = len(loaded) - 1
        inv[k] = j
    return loaded, inv


def read_fleet(path) -> FleetTable:
    """Read and check a fleet file (see the module notes for the columns).

    Raises
    ------
    ValueError
        Naming the file, the line (and row and id) and the column, with the reason.
    """
    from mechanics.elements import Elements, elements_to_rv
    from mechanics.fleet import TARGET_CODE, FleetInput

    from .profiles import load_body, load_vehicle
    from .timeutil import parse_utc

    path = Path(path)
    r = _read_rows(path)
    base_dir = path.resolve().parent
    n = r.n

    ids = r.text("id")
    r.refuse([not s for s in ids], "id", "missing value: every spacecraft needs an id")
    r.refuse([len(s) > 100 or not s.isprintable() for s in ids], "id",
             "must be printable text of at most 100 characters")
    first_row: dict = {}
    for k, s in enumerate(ids):
        j = first_row.setdefault(s, k)
        if j != k:
            r.fail(k, "id", f"{s!r} repeats the id of line {int(r.lines[j])}: ids must be unique")
    r.ids = ids

    epoch_text = r.text("epoch_utc")
    epochs: dict = {}
    epoch_s = np.empty(n)
    for k, s in enumerate(epoch_text):
        t = epochs.get(s)
        if t is None:
            try:
                t = epochs[s] = parse_utc(s, "epoch_utc") if s else None
            except ValueError as exc:
                r.fail(k, "epoch_utc", str(exc).removeprefix("epoch_utc: "))
            if t is None:
                r.fail(k, "epoch_utc", "missing value")
        epoch_s[k] = t

    vehicle_refs = r.text("vehicle")
    r.refuse([not s for s in vehicle_refs], "vehicle", "missing value: name a vehicle profile or a file")
    vehicles, v_inv = _profiles(r, "vehicle", vehicle_refs, load_vehicle, base_dir)
    body_refs = [s or "earth" for s in r.text("body")]
    bodies, b_inv = _profiles(r, "body", body_refs, load_body, base_dir)

    def per_body(attr):
        return np.array([getattr(b, attr) for b in bodies], dtype=float)[b_inv]

    def per_vehicle(attr):
        return np.array([getattr(v, attr) for v in vehicles], dtype=float)[v_inv]

    mu = per_body("mu_m3_s2")
    R = per_body("radius_m")

    form = _state_form(r, path)
    if form == "vector":
        pos = np.stack([r.numbers(c, required=True) for c in ("x_km", "y_km", "z_km")], axis=1) * 1e3
        vel = np.stack([r.numbers(c, required=True) for c in ("vx_km_s", "vy_km_s", "vz_km_s")], axis=1) * 1e3
        rmag = np.sqrt(np.sum(pos * pos, axis=1))
        r.refuse(rmag <= R, "x_km, y_km, z_km",
                 lambda k: f"position is inside the body ({(rmag[k] - R[k]) / 1e3:.1f} km altitude)")
    else:
        angles = {}
        for c in ("i_deg", "raan_deg", "argp_deg", "nu_deg"):
            x = r.numbers(c, required=form == "elements")
            angles[c] = np.radians(np.where(np.isnan(x), 0.0, x))
        r.refuse((angles["i_deg"] < 0.0) | (angles["i_deg"] > math.pi + 1e-12), "i_deg",
                 "must be between 0 and 180 deg")
        inc = np.minimum(angles["i_deg"], math.pi)
        if form == "elements":
            a = r.numbers("a_km", required=True) * 1e3
            e = r.numbers("e", required=True)
            r.refuse(a <= 0.0, "a_km", "must be positive")
            r.refuse(e < 0.0, "e", "must not be negative")
            r.refuse(e >= 1.0, "e", lambda k: f"{e[k]!r} is not below 1: the elements form takes closed "
                                              "orbits (use the x_km ... vz_km_s columns for an open one)")
            r.refuse(a * (1.0 - e) <= R, "a_km", lambda k: "periapsis is inside the body "
                     f"({(a[k] * (1.0 - e[k]) - R[k]) / 1e3:.1f} km altitude)")
        else:
            hp = r.numbers("periapsis_alt_km", required=True) * 1e3
            ha = r.numbers("apoapsis_alt_km", required=True) * 1e3
            r.refuse(hp <= 0.0, "periapsis_alt_km", "puts the orbit inside the body (altitude must be above 0)")
            r.refuse(ha < hp, "apoapsis_alt_km", "is below periapsis_alt_km")
            a = R + 0.5 * (hp + ha)
            e = (ha - hp) / (2.0 * R + hp + ha)
        el = Elements(a, e, inc, angles["raan_deg"], angles["argp_deg"], angles["nu_deg"])
        pos, vel = elements_to_rv(el, mu)

    kinds = r.text("target_kind")
    r.refuse([s not in TARGET_NEEDS for s in kinds], "target_kind",
             lambda k: f"{kinds[k]!r} is not known: use one of {', '.join(TARGET_NEEDS)}")
    code = np.array([TARGET_CODE[s] for s in kinds], dtype=np.int64)
    target = {}
    for c in TARGET_COLUMNS:
        x = r.numbers(c, required=False)
        users = np.array([c in TARGET_NEEDS[s] for s in kinds], dtype=bool)
        if c not in r.cols and users.any():
            k = int(np.argmax(users))
            r.fail(k, c, f"missing from the header (kind {kinds[k]!r} needs "
                         f"{', '.join(TARGET_NEEDS[kinds[k]])})")
        r.refuse(users & np.isnan(x), c, lambda k: f"missing value (kind {kinds[k]!r} needs "
                 f"{', '.join(TARGET_NEEDS[kinds[k]])})")
        r.refuse(~users & ~np.isnan(x), c, lambda k: f"not used by kind {kinds[k]!r}: leave it empty")
        r.refuse(users & (x <= 0.0), c, "puts the orbit inside the body (altitude must be above 0)")
        target[c] = R + x * 1e3
    alt, peri, apo, via = (target[c] for c in TARGET_COLUMNS)
    r.refuse((code == TARGET_CODE["apsides"]) & (apo < peri), "target_apoapsis_alt_km",
             "is below target_periapsis_alt_km")
    r.refuse((code == TARGET_CODE["bielliptic"]) & (via < alt), "target_via_alt_km",
             "must lie above target_alt_km")
    uses_alt_as = {"circular": "both", "apoapsis": "apo", "periapsis": "peri", "bielliptic": "both"}
    tp = np.array(peri)
    ta = np.array(apo)
    for kind, which in uses_alt_as.items():
        m = code == TARGET_CODE[kind]
        if which in ("both", "peri"):
            tp[m] = alt[m]
        if which in ("both", "apo"):
            ta[m] = alt[m]

    lead = r.numbers("lead_time_s", required=False)
    r.refuse(lead < 0.0, "lead_time_s", "must not be negative")
    lead = np.where(np.isnan(lead), 0.0, lead)
    dry = per_vehicle("dry_mass_kg")
    prop = r.numbers("propellant_kg", required=False)
    r.refuse(prop < 0.0, "propellant_kg", "must not be negative")
    prop = np.where(np.isnan(prop), per_vehicle("propellant_kg"), prop)

    fleet = FleetInput(
        epoch_s=epoch_s, r_m=np.asarray(pos, dtype=float).reshape(n, 3),
        v_m_s=np.asarray(vel, dtype=float).reshape(n, 3), mu_m3_s2=mu, body_radius_m=R,
        target_code=code, target_periapsis_radius_m=tp, target_apoapsis_radius_m=ta,
        target_via_radius_m=via, thrust_n=per_vehicle("thrust_n"), mdot_kg_s=per_vehicle("mdot_kg_s"),
        mass_kg=dry + prop, dry_mass_kg=dry, unusable_kg=per_vehicle("unusable_kg"),
        reserve_kg=per_vehicle("reserve_kg"), max_burn_duration_s=per_vehicle("max_burn_duration_s"),
        max_burn_arc_rad=per_vehicle("max_burn_arc_rad"), lead_time_s=lead,
    )
    return FleetTable(path=path, ids=ids, lines=r.lines, form=form, columns=tuple(r.header), kinds=kinds,
                      body_names=body_refs, vehicle_names=vehicle_refs, body_radius_m=R,
                      min_safe_alt_m=per_body("min_safe_alt_m"), fleet=fleet)


def _error_columns(table: FleetTable, k: int, field: str) -> str:
    if field == "state":
        return ", ".join(STATE_FORMS[table.form][0])
    if field == "target":
        return ", ".join(("target_kind",) + TARGET_NEEDS[table.kinds[k]])
    if field == "mass":
        return "propellant_kg" if "propellant_kg" in table.columns else "vehicle"
    return {"epoch": "epoch_utc", "lead_time": "lead_time_s"}.get(field, "vehicle")


def plan_table(table: FleetTable):
    """:func:`mechanics.fleet.plan_fleet` on a table; errors name the row and the columns."""
    from mechanics.fleet import FleetInputError, plan_fleet

    try:
        return plan_fleet(table.fleet)
    except FleetInputError as exc:
        raise ValueError(f"{table.where(exc.index, _error_columns(table, exc.index, exc.field))}: "
                         f"{exc.reason}") from None


# --------------------------------------------------------------------------- output

def utc_strings(t_s) -> list:
    """ISO 8601 UTC strings with milliseconds and a trailing Z for an array of times (s since
    1970), vectorised; the same text as :func:`console.timeutil.format_utc` gives one by one."""
    t = np.asarray(t_s, dtype=float)
    if not np.all(np.isfinite(t)):
        raise ValueError("time is not finite")
    ms = np.round(t * 1e3).astype(np.int64)
    text = np.datetime_as_string(ms.astype("datetime64[ms]"), unit="ms")
    return [s + "Z" for s in text.tolist()]


def _quote(text: str) -> str:
    """A CSV cell: quoted when it holds a comma, a quote, a line break or edge blanks."""
    if any(ch in text for ch in ',"\r\n') or text != text.strip():
        return '"' + text.replace('"', '""') + '"'
    return text


def queue_text(table: FleetTable, plan) -> str:
    """The queue CSV (header + one row per burn) as text."""
    from mechanics.fleet import APSIS_NAMES

    ids = np.array([_quote(s) for s in table.ids], dtype=object)
    c = plan.craft
    cols = (
        ids[c].tolist(), plan.number.tolist(), (plan.leg + 1).tolist(),
        np.array(APSIS_NAMES, dtype=object)[plan.apsis].tolist(), utc_strings(plan.ignition_s),
        plan.duration_s.tolist(), plan.dv_m_s.tolist(),
        np.where(plan.sense > 0, "prograde", "retrograde").tolist(),
        plan.propellant_kg.tolist(), plan.mass_before_kg.tolist(),
        ((plan.goal_radius_m - table.body_radius_m[c]) / 1e3).tolist(),
        np.where(plan.feasible, "true", "false").tolist(),
        np.where(plan.within_limits, "true", "false").tolist(),
    )
    fmt = "%s,%d,%d,%s,%s,%.3f,%.6f,%s,%.6f,%.6f,%.6f,%s,%s\n"
    return ",".join(QUEUE_HEADER) + "\n" + "".join([fmt % row for row in zip(*cols)])


def _notes(table: FleetTable, plan) -> list:
    notes = []
    low = plan.lowest_periapsis_radius_m - table.body_radius_m
    over = np.bincount(plan.craft, weights=~plan.within_limits, minlength=len(table.ids)).astype(int)
    for k in range(len(table.ids)):
        parts = []
        if plan.burn_count[k] == 0:
            parts.append("the orbit already meets the target: no burn is needed")
        if not plan.craft_feasible[k]:
            parts.append(f"infeasible: needs {plan.propellant_used_kg[k]:.3f} kg, {plan.usable_kg[k]:.3f} kg usable")
        elif plan.margin_kg[k] < 0.0:
            parts.append(f"eats {-plan.margin_kg[k]:.3f} kg into the reserve")
        if over[k]:
            parts.append(f"{over[k]} burn(s) exceed the vehicle's duration or arc limit")
        if low[k] < table.min_safe_alt_m[k]:
            parts.append(f"periapsis down to {low[k] / 1e3:.1f} km, below the safe altitude of "
                         f"{table.min_safe_alt_m[k] / 1e3:.0f} km")
        notes.append("; ".join(parts))
    return notes


def summary_text(table: FleetTable, plan) -> str:
    """The summary CSV (header + one row per spacecraft) as text."""
    n = len(table.ids)
    has = plan.burn_count > 0
    first = plan.first_burn
    last = np.where(has, first + plan.burn_count - 1, 0)
    ign = utc_strings(plan.ignition_s[np.where(has, first, 0)]) if plan.burn_total else [""] * n
    cut = utc_strings(plan.cutoff_s[last]) if plan.burn_total else [""] * n
    R = table.body_radius_m
    cols = (
        [_quote(s) for s in table.ids], [_quote(s) for s in table.body_names],
        [_quote(s) for s in table.vehicle_names], plan.burn_count.tolist(),
        plan.total_dv_m_s.tolist(), plan.total_duration_s.tolist(), plan.propellant_used_kg.tolist(),
        plan.propellant_after_kg.tolist(), plan.margin_kg.tolist(),
        np.where(plan.craft_feasible, "true", "false").tolist(),
        [s if h else "" for s, h in zip(ign, has.tolist())], [s if h else "" for s, h in zip(cut, has.tolist())],
        ((plan.final_periapsis_radius_m - R) / 1e3).tolist(), ((plan.final_apoapsis_radius_m - R) / 1e3).tolist(),
        [_quote(s) for s in _notes(table, plan)],
    )
    fmt = "%s,%s,%s,%d,%.6f,%.3f,%.6f,%.6f,%.6f,%s,%s,%s,%.6f,%.6f,%s\n"
    return ",".join(SUMMARY_HEADER) + "\n" + "".join([fmt % row for row in zip(*cols)])


def output_paths(fleet_path, out=None) -> tuple[Path, Path]:
    """(queue, summary) paths: ``--out`` or the fleet file's stem + ``.queue.csv`` beside it;
    the summary is the queue's name with ``.queue.csv`` (or ``.csv``) replaced by
    ``.summary.csv``."""
    fleet_path = Path(fleet_path)
    queue = Path(out) if out else fleet_path.with_name(fleet_path.stem + ".queue.csv")
    name = queue.name
    if name.lower().endswith(".queue.csv"):
        base = name[: -len(".queue.csv")]
    elif name.lower().endswith(".csv"):
        base = name[: -len(".csv")]
    else:
        base = name
    return queue, queue.with_name(base + ".summary.csv")


def check_outputs(fleet_path, paths, force: bool) -> None:
    """Refuse, before planning, outputs that would overwrite the input, an existing file
    (without ``force``) or write through a link, or that lie in a missing folder."""
    src = Path(fleet_path).resolve()
    for p in paths:
        if not p.parent.is_dir():
            raise ValueError(f"{p}: folder {p.parent} does not exist")
        if p.is_symlink():
            raise ValueError(f"{p}: is a link; refusing to write through it")
        if p.exists() and p.resolve() == src:
            raise ValueError(f"{p}: is the fleet file itself; choose another --out")
        if p.exists() and not force:
            raise ValueError(f"{p}: already exists; refusing to overwrite it (use --force)")
        if p.is_dir():
            raise ValueError(f"{p}: is a folder")


def write_text(path: Path, text: str) -> Path:
    """Write ``text`` whole (see :mod:`console.files`)."""
    return write_text_file(path, text, what="fleet output", encoding="utf-8")


@dataclass(frozen=True)
class FleetRun:
    """What ``burndesk fleet`` did: the table, the plan, the files written, a short report."""

    table: FleetTable
    plan: object
    written: tuple
    feasible: bool
    text: str


def run_fleet(fleet_path, out=None, force: bool = False) -> FleetRun:
    """Read a fleet file, plan it, write the queue and the summary.

    Raises
    ------
    ValueError
        For a bad file (naming line, row, id and column) or outputs that may not be written.
    """
    queue_path, summary_path = output_paths(fleet_path, out)
    check_outputs(fleet_path, (queue_path, summary_path), force)
    table = read_fleet(fleet_path)
    plan = plan_table(table)
    written = (write_text(queue_path, queue_text(table, plan)),
               write_text(summary_path, summary_text(table, plan)))
    n = len(table.ids)
    bad = np.nonzero(~plan.craft_feasible)[0]
    reserve = int(np.count_nonzero(plan.craft_feasible & (plan.margin_kg < 0.0)))
    lines = [f"fleet {table.path.name}: {n} spacecraft, {plan.burn_total} burns, "
             f"{np.sum(plan.propellant_used_kg):.3f} kg of propellant "
             "(first cut: two-body timing, impulsive design with finite durations)"]
    if bad.size:
        shown = ", ".join(table.ids[k] for k in bad[:5]) + (", ..." if bad.size > 5 else "")
        lines.append(f"{bad.size} infeasible (not enough usable propellant): {shown}")
    if reserve:
        lines.append(f"{reserve} feasible but eating into the reserve")
    over = np.unique(plan.craft[~plan.within_limits]).size
    if over:
        lines.append(f"{over} with burns beyond the vehicle's duration or arc limit (see the summary notes)")
    return FleetRun(table, plan, written, bool(bad.size == 0), "\n".join(lines))
