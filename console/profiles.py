"""Body and vehicle profiles: TOML files, read as data only.

A reference is either a bare name (letters, digits, ``-``, ``_``), looked up in the profiles
folder (``profiles/bodies/NAME.toml`` or ``profiles/vehicles/NAME.toml``), or a path, resolved
against the folder of the file that names it.  Errors name the file and the key.
"""

from __future__ import annotations

import math
import os
import re
import tomllib
from pathlib import Path

from mechanics.bodies import Body
from mechanics.vehicle import Thruster, Tolerances, Vehicle

from .files import read_file_bytes
from .units import parse_value

#: Most dots in one dotted TOML key or table header.  tomllib's time grows faster than the
#: square of a key's depth (a 600 kB file of one dotted key took minutes), so deeper keys are
#: refused before parsing; burndesk's own files nest two levels.
MAX_KEY_DOTS = 32
_DEEP_KEY = re.compile(  # MAX_KEY_DOTS "part." in a row; possessive, so linear in the text
    r"""(?<![A-Za-z0-9_\-"'])(?:(?:[A-Za-z0-9_-]++|"[^"\n]*+"|'[^'\n]*+')[ \t]*+\.[ \t]*+)"""
    + "{%d}" % MAX_KEY_DOTS)
_BARE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]{0,63}$")


def profiles_dir() -> Path:
    """The profiles folder: ``$BURNDESK_PROFILES`` or the one beside the installed packages."""
    env = os.environ.get("BURNDESK_PROFILES")
    if env:
        return Path(env)
    return Path(__file__).resolve().parent.parent / "profiles"


def read_toml(path: Path, what: str = "file") -> dict:
    """Parse a TOML file; errors name the file (and the line for syntax errors)."""
    path = Path(path)
    raw = read_file_bytes(path, what)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ValueError(f"{path}: {what} is not UTF-8 text") from None
    deep = _DEEP_KEY.search(text)
    if deep:
        line = text.count("\n", 0, deep.start()) + 1
        raise ValueError(f"{path}: {what} is nested too deeply: line {line} has a dotted key of "
                         f"{MAX_KEY_DOTS + 1} parts or more")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path}: not valid TOML ({exc})") from None
    except RecursionError:  # tomllib recurses into nested arrays and inline tables
        raise ValueError(f"{path}: {what} is nested too deeply (arrays or tables inside each other)") from None


def resolve_ref(ref, kind: str, base_dir: Path | None, field: str) -> Path:
    """Path of a profile reference (bare name or path) of ``kind`` ("bodies" or "vehicles")."""
    if not isinstance(ref, str) or not ref.strip():
        raise ValueError(f"{field}: expected a profile name or a file path")
    ref = ref.strip()
    if _BARE.match(ref):
        path = profiles_dir() / kind / f"{ref}.toml"
        if not path.exists():
            known = sorted(p.stem for p in (profiles_dir() / kind).glob("*.toml"))
            raise ValueError(f"{field}: no {kind[:-1] if kind != 'bodies' else 'body'} profile named "
                             f"{ref!r} (known: {', '.join(known) or 'none'})")
        return path
    path = Path(ref).expanduser()
    if not path.is_absolute():
        path = (base_dir or Path.cwd()) / path
    if not path.exists():
        raise ValueError(f"{field}: {ref!r} not found (looked for {path})")
    return path


def check_keys(table: dict, allowed, where: str) -> None:
    """Refuse keys not in ``allowed``, naming the first one."""
    if not isinstance(table, dict):
        raise ValueError(f"{where}: expected a table")
    for key in table:
        if key not in allowed:
            raise ValueError(f"{where}: unknown key {key!r} (allowed: {', '.join(sorted(allowed))})")


def _constant(doc: dict, key: str, kind: str, path: Path, *, required=True, allow_zero=False):
    if key not in doc:
        if required:
            raise ValueError(f"{path}: {key}: missing")
        return None
    entry = doc[key]
    if not isinstance(entry, dict) or "value" not in entry:
        raise ValueError(f"{path}: {key}: write {{ value = ..., source = \"...\" }}")
    check_keys(entry, {"value", "source"}, f"{path}: {key}")
    source = entry.get("source")
    if not isinstance(source, str) or not source.strip():
        raise ValueError(f"{path}: {key}: every constant must name its published source")
    return parse_value(entry["value"], kind, f"{path}: {key}", allow_zero=allow_zero)


def load_body(ref, base_dir: Path | None = None, field: str = "body") -> Body:
    """Read a body profile (see ``profiles/bodies/earth.toml``)."""
    path = resolve_ref(ref, "bodies", base_dir, field)
    doc = read_toml(path, "body profile")
    check_keys(doc, {"name", "description", "mu", "radius", "j2", "rotation_rate", "min_safe_alt"},
               str(path))
    name = doc.get("name", path.stem)
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"{path}: name: expected text")
    mu = _constant(doc, "mu", "gravitational_parameter", path)
    radius = _constant(doc, "radius", "length", path)
    j2 = _constant(doc, "j2", "dimensionless", path, required=False, allow_zero=True) or 0.0
    rot = _constant(doc, "rotation_rate", "rate", path, required=False, allow_zero=True) or 0.0
    safe = _constant(doc, "min_safe_alt", "length", path, required=False, allow_zero=True) or 0.0
    try:
        return Body(name=name.strip(), mu_m3_s2=mu, radius_m=radius, j2=j2, rotation_rad_s=rot,
                    min_safe_alt_m=safe)
    except ValueError as exc:
        raise ValueError(f"{path}: {exc}") from None


VEHICLE_KEYS = {"name", "description", "dry_mass", "propellant", "unusable_propellant",
                "reserve_propellant", "thrusters", "limits", "tolerances"}


def load_vehicle(ref, base_dir: Path | None = None, field: str = "vehicle") -> Vehicle:
    """Read a vehicle profile (see ``profiles/vehicles/wren3.toml``)."""
    path = resolve_ref(ref, "vehicles", base_dir, field)
    doc = read_toml(path, "vehicle profile")
    return vehicle_from_table(doc, str(path))


def vehicle_from_table(doc: dict, where: str) -> Vehicle:
    """Build a :class:`Vehicle` from a parsed TOML table; errors start with ``where``."""
    check_keys(doc, VEHICLE_KEYS, where)
    for key in ("name", "dry_mass", "propellant", "thrusters"):
        if key not in doc:
            raise ValueError(f"{where}: {key}: missing")
    name = doc["name"]
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"{where}: name: expected text")

    def mass(key, required=True):
        if key not in doc:
            return 0.0
        return parse_value(doc[key], "mass", f"{where}: {key}", allow_zero=key != "dry_mass")

    thrusters_doc = doc["thrusters"]
    if not isinstance(thrusters_doc, list) or not thrusters_doc:
        raise ValueError(f"{where}: thrusters: write one or more [[thrusters]] tables")
    thrusters = []
    for k, t in enumerate(thrusters_doc, start=1):
        tw = f"{where}: thrusters[{k}]"
        check_keys(t, {"count", "thrust", "isp", "cant", "label"}, tw)
        for key in ("count", "thrust", "isp"):
            if key not in t:
                raise ValueError(f"{tw}.{key}: missing")
        count = t["count"]
        if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 1000:
            raise ValueError(f"{tw}.count: expected a whole number from 1 to 1000")
        thrust = parse_value(t["thrust"], "force", f"{tw}.thrust", allow_zero=False)
        isp = parse_value(t["isp"], "time", f"{tw}.isp", allow_zero=False)
        cant = parse_value(t.get("cant", 0.0), "angle", f"{tw}.cant")
        if cant >= math.radians(89.9):
            raise ValueError(f"{tw}.cant: must be below 90 deg (a thruster at 90 deg gives no thrust along the burn)")
        try:
            thrusters.append(Thruster(count=count, thrust_n=thrust, isp_s=isp, cant_rad=cant))
        except ValueError as exc:
            raise ValueError(f"{tw}: {exc}") from None

    limits = doc.get("limits", {})
    check_keys(limits, {"max_burn_duration", "max_burn_arc"}, f"{where}: [limits]")
    max_dur = (parse_value(limits["max_burn_duration"], "time", f"{where}: limits.max_burn_duration",
                           allow_zero=False) if "max_burn_duration" in limits else math.inf)
    max_arc = (parse_value(limits["max_burn_arc"], "angle", f"{where}: limits.max_burn_arc",
                           allow_zero=False) if "max_burn_arc" in limits else math.inf)
    if max_arc != math.inf and max_arc > math.pi:
        raise ValueError(f"{where}: limits.max_burn_arc: must not exceed 180 deg")

    tol_doc = doc.get("tolerances", {})
    check_keys(tol_doc, {"dv_watch", "dv_alarm", "ignition", "duration", "isp"}, f"{where}: [tolerances]")
    tol_kw = {}
    for key, attr, kind in (("dv_watch", "dv_watch", "ratio"), ("dv_alarm", "dv_alarm", "ratio"),
                            ("ignition", "ignition_s", "time"), ("duration", "duration_frac", "ratio"),
                            ("isp", "isp_frac", "ratio")):
        if key in tol_doc:
            tol_kw[attr] = parse_value(tol_doc[key], kind, f"{where}: tolerances.{key}", allow_zero=False)
    try:
        tolerances = Tolerances(**tol_kw)
        return Vehicle(
            name=name.strip(),
            dry_mass_kg=mass("dry_mass"),
            propellant_kg=mass("propellant"),
            unusable_kg=mass("unusable_propellant"),
            reserve_kg=mass("reserve_propellant"),
            thrusters=tuple(thrusters),
            max_burn_duration_s=max_dur,
            max_burn_arc_rad=max_arc,
            tolerances=tolerances,
        )
    except ValueError as exc:
        raise ValueError(f"{where}: {exc}") from None
