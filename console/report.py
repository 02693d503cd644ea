"""Text and JSON renderings of burndesk results (the edge: units and UTC strings)."""

from __future__ import annotations

import json
import math

from .timeutil import format_utc


def _deg(x):
    return round(math.degrees(x), 9)


def utc_or_none(t_s):
    return None if t_s is None else format_utc(t_s)


def orbit_json(summary, scenario_name: str | None = None) -> dict:
    """The ``burndesk orbit --json`` document."""
    el = summary.elements
    doc = {
        "scenario": scenario_name,
        "epoch": format_utc(summary.epoch_s),
        "body": summary.body.name,
        "model": summary.model,
        "kind": summary.kind,
        "elements": {
            "a_km": el.a_m / 1e3,
            "e": el.e,
            "i_deg": _deg(el.i_rad),
            "raan_deg": _deg(el.raan_rad),
            "argp_deg": _deg(el.argp_rad),
            "nu_deg": _deg(el.nu_rad),
        },
        "arglat_deg": _deg(float(el.arglat_rad)),
        "periapsis_alt_km": summary.periapsis_alt_m / 1e3,
        "apoapsis_alt_km": None if summary.apoapsis_alt_m is None else summary.apoapsis_alt_m / 1e3,
        "period_s": summary.period_s,
        "next_periapsis": utc_or_none(summary.next_periapsis_s),
        "next_apoapsis": utc_or_none(summary.next_apoapsis_s),
        "notes": list(summary.notes),
    }
    m = summary.mean
    if m is not None:
        R = summary.body.radius_m
        doc["mean"] = {
            "a_km": m.a_m / 1e3,
            "e": m.e,
            "i_deg": _deg(m.i_rad),
            "raan_deg": _deg(m.raan_rad),
            "argp_deg": _deg(m.argp_rad),
            "periapsis_alt_km": (m.periapsis_radius_m - R) / 1e3,
            "apoapsis_alt_km": (m.apoapsis_radius_m - R) / 1e3,
            "anomalistic_period_s": m.anomalistic_period_s,
            "nodal_period_s": m.nodal_period_s,
            "raan_rate_deg_day": math.degrees(m.raan_dot) * 86400.0,
            "argp_rate_deg_day": math.degrees(m.argp_dot) * 86400.0,
        }
    return doc


def orbit_text(summary, scenario_name: str | None = None) -> str:
    """The readable ``burndesk orbit`` summary."""
    d = orbit_json(summary, scenario_name)
    el = d["elements"]
    lines = []
    if scenario_name:
        lines.append(f"{scenario_name}")
    lines.append(f"epoch            {d['epoch']}   body {d['body']}   model {d['model']}")
    lines.append(f"orbit            {d['kind']}")
    lines.append(f"a                {el['a_km']:14.3f} km     e     {el['e']:.7f}")
    lines.append(f"i                {el['i_deg']:14.4f} deg    raan  {el['raan_deg']:.4f} deg")
    lines.append(f"argp             {el['argp_deg']:14.4f} deg    nu    {el['nu_deg']:.4f} deg"
                 f"   (u {d['arglat_deg']:.4f} deg)")
    apo = "-" if d["apoapsis_alt_km"] is None else f"{d['apoapsis_alt_km']:.3f} km"
    lines.append(f"periapsis alt    {d['periapsis_alt_km']:14.3f} km     apoapsis alt  {apo}")
    per = "-" if d["period_s"] is None else f"{d['period_s']:.3f} s ({d['period_s'] / 60:.2f} min)"
    lines.append(f"period           {per}")
    if "mean" in d:
        m = d["mean"]
        lines.append(f"mean apsides     {m['periapsis_alt_km']:.3f} x {m['apoapsis_alt_km']:.3f} km"
                     f"   (a {m['a_km']:.3f} km, e {m['e']:.6f})")
        lines.append(f"J2 drift         raan {m['raan_rate_deg_day']:+.4f} deg/day   "
                     f"argp {m['argp_rate_deg_day']:+.4f} deg/day")
    lines.append(f"next periapsis   {d['next_periapsis'] or '-'}")
    lines.append(f"next apoapsis    {d['next_apoapsis'] or '-'}")
    for note in d["notes"]:
        lines.append(f"note: {note}")
    return "\n".join(lines)


def dumps(doc: dict) -> str:
    return json.dumps(doc, indent=2, allow_nan=False)
