"""CSV exports with the unit in every numeric header (``duration_s``, ``dv_m_s``, ``thrust_N``).

One definition of the burn-queue columns serves both ``burndesk plan --csv DIR`` and
``burndesk session export --csv DIR``: :data:`PLANNED_COLUMNS` are the planned figures of a burn,
:data:`ACTUAL_COLUMNS` what a session recorded, :data:`ATTITUDE_COLUMNS` how the burn is pointed.
Times are ISO 8601 UTC with milliseconds, exactly as in the JSON documents.

Files are written whole (temporary file, then renamed) into an existing folder under fixed names,
and a name that is a link is refused, so nothing outside the folder is ever overwritten.
"""

from __future__ import annotations

import math

import csv
import io
from pathlib import Path

from .files import write_text_file

from .timeutil import format_utc


def _km(x_m: float) -> str:
    return f"{x_m / 1e3:.6f}"


#: (header, cell(burn, body_radius_m)) for the planned figures of a burn
#: (a :class:`mechanics.planner.PlannedBurn`).
PLANNED_COLUMNS = (
    ("apsis", lambda b, R: b.apsis),
    ("ignition_utc", lambda b, R: format_utc(b.ignition_s)),
    ("cutoff_utc", lambda b, R: format_utc(b.cutoff_s)),
    ("duration_s", lambda b, R: f"{b.duration_s:.3f}"),
    ("dv_m_s", lambda b, R: f"{b.dv_m_s:.6f}"),
    ("impulsive_dv_m_s", lambda b, R: f"{b.impulsive_dv_m_s:.6f}"),
    ("propellant_kg", lambda b, R: f"{b.propellant_kg:.6f}"),
    ("mass_before_kg", lambda b, R: f"{b.mass_before_kg:.6f}"),
    ("thrust_N", lambda b, R: f"{b.thrust_n:.6f}"),
    ("mdot_kg_s", lambda b, R: f"{b.mdot_kg_s:.9f}"),
    ("after_periapsis_alt_km", lambda b, R: _km(b.after_periapsis_radius_m - R)),
    ("after_apoapsis_alt_km", lambda b, R: _km(b.after_apoapsis_radius_m - R)),
    ("after_i_deg", lambda b, R: f"{math.degrees(b.after_i_rad):.6f}"
     if math.isfinite(b.after_i_rad) else ""),
)

#: (header, cell(actual)) for a recorded burn (the session's ``actual`` dict; empty when none).
ACTUAL_COLUMNS = (
    ("actual_ignition_utc", lambda a: format_utc(a["ignition_s"]) if a else ""),
    ("actual_duration_s", lambda a: f"{a['duration_s']:.3f}" if a else ""),
    ("actual_propellant_kg",
     lambda a: f"{a['propellant_kg']:.6f}" if a and a.get("propellant_kg") is not None else ""),
    ("actual_dv_m_s", lambda a: f"{a['dv_m_s']:.6f}" if a and a.get("dv_m_s") is not None else ""),
)

#: (header, cell(burn)) for the pointing: mode, sense, and for an inertially fixed burn its unit
#: direction in the inertial frame (empty for a burn that tracks the velocity); for a burn that
#: carries a plane change, its angle out of the orbit plane (empty otherwise).
ATTITUDE_COLUMNS = (
    ("attitude", lambda b: b.attitude_mode),
    ("sense", lambda b: "prograde" if b.sense > 0 else "retrograde"),
    ("direction_x", lambda b: f"{b.direction[0]:.12f}" if b.attitude_mode == "inertial" else ""),
    ("direction_y", lambda b: f"{b.direction[1]:.12f}" if b.attitude_mode == "inertial" else ""),
    ("direction_z", lambda b: f"{b.direction[2]:.12f}" if b.attitude_mode == "inertial" else ""),
    ("out_of_plane_deg",
     lambda b: f"{math.degrees(b.out_of_plane_rad):.6f}" if b.carries_plane_change else ""),
)


def headers(columns) -> list[str]:
    return [name for name, _ in columns]


def planned_cells(b, radius_m: float) -> list[str]:
    return [cell(b, radius_m) for _, cell in PLANNED_COLUMNS]


def actual_cells(actual) -> list[str]:
    return [cell(actual or {}) for _, cell in ACTUAL_COLUMNS]


def attitude_cells(b) -> list[str]:
    return [cell(b) for _, cell in ATTITUDE_COLUMNS]


def write_csv(folder, name: str, header, rows) -> Path:
    """Write one CSV file ``folder/name`` (header row, then rows); returns its path.

    Raises
    ------
    ValueError
        When the file name or its temporary twin is a link, or the file cannot be written
        (read-only folder, full disk).
    """
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(header)
    w.writerows(rows)
    return write_text_file(Path(folder) / name, buf.getvalue(), what="CSV file")


#: Header of a plan's queue.csv.
PLAN_QUEUE_HEADER = ["burn"] + headers(PLANNED_COLUMNS) + headers(ATTITUDE_COLUMNS)


def export_plan_csv(plan, folder) -> list[Path]:
    """Write a plan's ``queue.csv`` (one row per burn, :data:`PLAN_QUEUE_HEADER`) into ``folder``.

    The folder must exist; an existing ``queue.csv`` there is replaced, as by
    ``burndesk session export``.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise ValueError(f"{folder}: export folder does not exist")
    R = plan.body.radius_m
    rows = [[b.index, *planned_cells(b, R), *attitude_cells(b)] for b in plan.burns]
    return [write_csv(folder, "queue.csv", PLAN_QUEUE_HEADER, rows)]


__all__ = ["PLANNED_COLUMNS", "ACTUAL_COLUMNS", "ATTITUDE_COLUMNS", "PLAN_QUEUE_HEADER", "headers",
           "planned_cells", "actual_cells", "attitude_cells", "write_csv", "export_plan_csv"]
