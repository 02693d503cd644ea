"""Text and JSON renderings of burndesk results (the edge: units and UTC strings)."""

from __future__ import annotations

import json
import math

from .timeutil import format_utc


def _deg(x):
    return round(math.degrees(x), 9)


#: 9999-12-31T23:59:59Z: ISO 8601 (and JSON date-times) have four-digit years.
LAST_WRITABLE_S = 253402300799.0


def utc_or_none(t_s):
    return None if t_s is None or t_s > LAST_WRITABLE_S else format_utc(t_s)


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
        "notes": list(summary.notes) + [
            f"next {name} lies beyond the year 9999: not written as a date"
            for name, t in (("periapsis", summary.next_periapsis_s), ("apoapsis", summary.next_apoapsis_s))
            if t is not None and t > LAST_WRITABLE_S],
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


CAUTIONS = (
    "Not flight-certified: every plan needs an independent check before upload.",
    "Screen the planned burns and the resulting orbits for conjunctions with catalogued objects "
    "before upload.",
    "Follow your operator's procedures and your licensing authority's rules, including disposal rules.",
)


def _attitude(b) -> dict:
    if b.attitude_mode == "inertial":
        out = {"mode": "inertial", "direction": [round(c, 12) for c in b.direction]}
    else:
        out = {"mode": "tracking", "sense": "prograde" if b.sense > 0 else "retrograde"}
    if b.carries_plane_change:
        out["out_of_plane_deg"] = math.degrees(b.out_of_plane_rad)
        if b.attitude_mode == "tracking":
            out["tracking_direction"] = [round(c, 12) for c in b.direction]
    return out


def _apsides(rp_m: float, ra_m: float, i_rad: float, radius_m: float) -> dict:
    out = {"periapsis_alt_km": (rp_m - radius_m) / 1e3, "apoapsis_alt_km": (ra_m - radius_m) / 1e3}
    if math.isfinite(i_rad):
        out["i_deg"] = math.degrees(i_rad)
    return out


def _i_note(d: dict) -> str:
    return f", i {d['i_deg']:.4f} deg" if "i_deg" in d else ""


def burn_json(b, radius_m: float) -> dict:
    """One burn of the ``plan --json`` document."""
    return {
        "index": b.index,
        "leg": b.leg + 1,
        "apsis": b.apsis,
        "apsis_time": format_utc(b.apsis_time_s),
        "ignition": format_utc(b.ignition_s),
        "cutoff": format_utc(b.cutoff_s),
        "duration_s": b.duration_s,
        "dv_mps": b.dv_m_s,
        "impulsive_dv_mps": b.impulsive_dv_m_s,
        "finite_loss_mps": b.finite_loss_m_s,
        "propellant_kg": b.propellant_kg,
        "mass_before_kg": b.mass_before_kg,
        "mass_after_kg": b.mass_after_kg,
        "thrust_N": b.thrust_n,
        "mdot_kg_s": b.mdot_kg_s,
        "attitude": _attitude(b),
        "arc_deg": math.degrees(b.arc_rad),
        "centring": {
            "rule": "half-dv",
            "ignition_half_duration": format_utc(b.ignition_half_duration_s),
            "half_dv_earlier_by_s": b.ignition_half_duration_s - b.ignition_s,
            "centre_shift_s": b.centre_shift_s,
        },
        "goal_alt_km": (b.goal_radius_m - radius_m) / 1e3,
        "after": _apsides(b.after_periapsis_radius_m, b.after_apoapsis_radius_m,
                          b.after_i_rad, radius_m),
    }


def plan_json(plan, scenario=None) -> dict:
    """The ``burndesk plan --json`` document (see docs/plan.schema.json)."""
    R = plan.body.radius_m
    body = plan.body
    doc = {
        "feasible": plan.feasible,
        "model": plan.model,
        "epoch": format_utc(plan.epoch_s),
        "body": {"name": body.name, "mu_m3_s2": body.mu_m3_s2, "radius_m": body.radius_m, "j2": body.j2},
        "initial_state": {"r_m": list(plan.r_m), "v_mps": list(plan.v_m_s), "mass_kg": plan.mass_kg},
        "apsides_kind": "mean" if plan.model == "two-body+J2" else "osculating",
        "thrust_factor": plan.thrust_factor,
        "burns": [burn_json(b, R) for b in plan.burns],
        "totals": {
            "dv_mps": plan.total_dv_m_s,
            "impulsive_dv_mps": plan.total_impulsive_dv_m_s,
            "finite_loss_mps": plan.total_dv_m_s - plan.total_impulsive_dv_m_s,
            "propellant_kg": plan.total_propellant_kg,
            "duration_s": plan.total_duration_s,
        },
        "final": _apsides(plan.final_periapsis_radius_m, plan.final_apoapsis_radius_m, plan.final_i_rad, R),
        "propellant": {
            "loaded_kg": plan.loaded_kg,
            "usable_kg": plan.usable_kg,
            "unusable_kg": plan.unusable_kg,
            "reserve_kg": plan.reserve_kg,
            "after_plan_kg": plan.after_plan_kg,
            "margin_kg": plan.margin_kg,
            "dv_remaining_mps": plan.dv_remaining_m_s,
        },
        "warnings": list(plan.warnings),
        "cautions": list(CAUTIONS),
    }
    if scenario is not None:
        doc["scenario"] = scenario.name
        if scenario.vehicle is not None:
            v = scenario.vehicle
            doc["vehicle"] = {"name": v.name, "thrust_N": v.thrust_n, "mdot_kg_s": v.mdot_kg_s,
                              "isp_s": v.isp_s, "dry_mass_kg": v.dry_mass_kg}
    return doc


def plan_text(plan, scenario=None) -> str:
    """The readable burn queue."""
    d = plan_json(plan, scenario)
    kind = d["apsides_kind"]
    out = []
    title = d.get("scenario", "plan")
    out.append(f"{title}   epoch {d['epoch']}   model {d['model']}   "
               f"{'FEASIBLE' if d['feasible'] else 'INFEASIBLE'}")
    if d.get("vehicle"):
        v = d["vehicle"]
        out.append(f"vehicle {v['name']}: thrust {v['thrust_N']:.3f} N effective, "
                   f"mdot {v['mdot_kg_s'] * 1e3:.4f} g/s, Isp {v['isp_s']:.1f} s"
                   + (f", thrust factor {plan.thrust_factor:.4f}" if plan.thrust_factor != 1.0 else ""))
    out.append("")
    head = (f"{'#':>3}  {'apsis':<9} {'ignition (UTC)':<24} {'dur s':>8} {'dv m/s':>9} {'loss':>6} "
            f"{'prop kg':>8} {'mass kg':>9}  after {kind} peri x apo km")
    out.append(head)
    out.append("-" * len(head))
    for b in d["burns"]:
        out.append(f"{b['index']:>3}  {b['apsis']:<9} {b['ignition']:<24} {b['duration_s']:>8.1f} "
                   f"{b['dv_mps']:>9.3f} {b['finite_loss_mps']:>6.3f} {b['propellant_kg']:>8.3f} "
                   f"{b['mass_before_kg']:>9.3f}  {b['after']['periapsis_alt_km']:.3f} x "
                   f"{b['after']['apoapsis_alt_km']:.3f}"
                   + (f", i {b['after']['i_deg']:.4f}, {b['attitude']['out_of_plane_deg']:+.2f} deg out of plane"
                      if "out_of_plane_deg" in b["attitude"] else ""))
    t = d["totals"]
    out.append("-" * len(head))
    out.append(f"totals: {len(d['burns'])} burns, dv {t['dv_mps']:.3f} m/s (impulsive "
               f"{t['impulsive_dv_mps']:.3f}, finite loss {t['finite_loss_mps']:.3f}), propellant "
               f"{t['propellant_kg']:.3f} kg, burning {t['duration_s']:.0f} s")
    f = d["final"]
    target_i = "" if plan.target_i_rad is None else f" (target i {math.degrees(plan.target_i_rad):.4f} deg)"
    out.append(f"final {kind} orbit: {f['periapsis_alt_km']:.3f} x {f['apoapsis_alt_km']:.3f} km{_i_note(f)}"
               + target_i)
    p = d["propellant"]
    out.append(f"propellant: loaded {p['loaded_kg']:.3f} kg, usable {p['usable_kg']:.3f}, after plan "
               f"{p['after_plan_kg']:.3f}, reserve {p['reserve_kg']:.3f}, margin {p['margin_kg']:.3f} kg "
               f"(buys {p['dv_remaining_mps']:.1f} m/s)")
    out.append("times: ignition puts half of each burn's delta-v before the apsis (half-dv rule)")
    for b in d["burns"]:
        if b["centring"].get("centre_shift_s"):
            out.append(f"note: burn {b['index']} is centred {b['centring']['centre_shift_s']:+.1f} s from its "
                       f"{b['apsis']} passage (centre time solved together with the burn)")
    for w in d["warnings"]:
        out.append(f"WARNING: {w}")
    for c in d["cautions"]:
        out.append(f"caution: {c}")
    return "\n".join(out)


def session_json(session, v) -> dict:
    """``burndesk session show --json``: the plan document for the whole campaign."""
    sc = v.scenario
    R = sc.body.radius_m
    body = sc.body
    burns = []
    tot_dv = tot_imp = tot_prop = tot_dur = 0.0
    for row in v.rows:
        d = burn_json(row.planned, R)
        d["index"] = row.index
        d["status"] = row.status
        d["entry"] = row.seq
        a = row.actual
        d["actual"] = None if a is None else {
            "ignition": format_utc(a["ignition_s"]),
            "duration_s": a["duration_s"],
            "propellant_kg": a["propellant_kg"],
            "propellant_source": a["propellant_source"],
            "dv_mps": a["dv_m_s"],
        }
        d["drift"] = None if row.drift is None else {
            "dv_ratio": row.drift.dv_ratio,
            "level": row.drift.level,
            "thrust_factor": row.drift.thrust_factor,
            "residual_km": row.drift.residual_m / 1e3,
            "isp_ratio": row.drift.isp_ratio,
            "flags": list(row.drift.flags),
        }
        if row.status == "done":
            tot_dv += a["dv_m_s"] or 0.0
            tot_imp += row.planned.impulsive_dv_m_s
            tot_prop += a["propellant_kg"] or 0.0
            tot_dur += a["duration_s"]
        elif row.status == "planned":
            tot_dv += row.planned.dv_m_s
            tot_imp += row.planned.impulsive_dv_m_s
            tot_prop += row.planned.propellant_kg
            tot_dur += row.planned.duration_s
        burns.append(d)
    lg = v.ledger
    plan = v.plan
    doc = {
        "session": str(session.journal.path),
        "scenario": sc.name,
        "feasible": v.feasible,
        "model": sc.model,
        "epoch": format_utc(v.latest.epoch_s),
        "latest_source": v.latest.source,
        "body": {"name": body.name, "mu_m3_s2": body.mu_m3_s2, "radius_m": body.radius_m, "j2": body.j2},
        "initial_state": {"r_m": list(v.latest.r_m), "v_mps": list(v.latest.v_m_s), "mass_kg": v.latest.mass_kg},
        "apsides_kind": "mean" if sc.model == "two-body+J2" else "osculating",
        "burns": burns,
        "totals": {"dv_mps": tot_dv, "impulsive_dv_mps": tot_imp, "finite_loss_mps": tot_dv - tot_imp,
                   "propellant_kg": tot_prop, "duration_s": tot_dur},
        "final": None if plan is None else _apsides(plan.final_periapsis_radius_m, plan.final_apoapsis_radius_m,
                                                    plan.final_i_rad, R),
        "calibration": {"thrust_factor": v.calibration.thrust_factor,
                        "burns_used": v.calibration.burns_used,
                        "spread": v.calibration.spread,
                        "factors": list(v.calibration.factors)},
        "propellant": {
            "loaded_kg": lg.loaded_kg,
            "used_kg": lg.used_recorded_kg,
            "used_planned_kg": lg.used_planned_kg,
            "remaining_kg": lg.remaining_kg,
            "usable_kg": lg.usable_kg,
            "unusable_kg": lg.unusable_kg,
            "reserve_kg": lg.reserve_kg,
            "remaining_plan_kg": lg.remaining_plan_kg,
            "after_plan_kg": lg.after_plan_kg,
            "margin_kg": lg.margin_kg,
            "dv_remaining_mps": lg.dv_remaining_m_s,
            "per_burn": [{"burn": b, "planned_kg": p, "recorded_kg": u, "source": s}
                         for b, p, u, s in lg.per_burn],
            "gauges": [{"entry": g.seq, "epoch": format_utc(g.epoch_s), "gauge_kg": g.gauge_kg,
                        "book_kg": g.book_kg, "difference_kg": g.difference_kg, "method": g.method}
                       for g in lg.gauges],
        },
        "plan_error": v.plan_error,
        "warnings": list(v.warnings) + [f"entry {r.seq} ({r.kind}) not replayed: {r.reason}"
                                        for r in session.rejected],
        "entries": [{"entry": s, "written": w, "kind": k, "summary": t, "status": st or "active"}
                    for s, w, k, t, st in session.entries()],
        "cautions": list(CAUTIONS),
    }
    return doc


LEVEL_MARK = {"ok": "ok", "watch": "WATCH", "alarm": "ALARM!"}


def session_text(session, v) -> str:
    d = session_json(session, v)
    kind = d["apsides_kind"]
    out = [f"{d['scenario']}   session {d['session']}",
           f"latest orbit {d['epoch']} ({d['latest_source']}), mass {d['initial_state']['mass_kg']:.3f} kg, "
           f"model {d['model']}   {'FEASIBLE' if d['feasible'] else 'NOT FEASIBLE'}"]
    cal = d["calibration"]
    spread = "" if cal["spread"] is None else f" +/- {cal['spread']:.4f}"
    out.append(f"thrust factor {cal['thrust_factor']:.4f}{spread} from {cal['burns_used']} burn(s)")
    out.append("")
    head = (f"{'#':>3}  {'status':<9} {'apsis':<9} {'ignition (UTC)':<24} {'dur s':>8} {'dv m/s':>8} "
            f"{'prop kg':>8}  {'drift':<7} after {kind} km")
    out.append(head)
    out.append("-" * len(head))
    for b in d["burns"]:
        a = b["actual"]
        ign = a["ignition"] if a else b["ignition"]
        dur = a["duration_s"] if a else b["duration_s"]
        dv = (a["dv_mps"] if a and a["dv_mps"] is not None else b["dv_mps"])
        prop = a["propellant_kg"] if a and a["propellant_kg"] is not None else b["propellant_kg"]
        drift = "-" if b["drift"] is None else f"{LEVEL_MARK[b['drift']['level']]}"
        ratio = "" if b["drift"] is None else f" {100 * (b['drift']['dv_ratio'] - 1):+.1f}%"
        out.append(f"{b['index']:>3}  {b['status']:<9} {b['apsis']:<9} {ign:<24} {dur:>8.1f} {dv:>8.3f} "
                   f"{prop:>8.3f}  {drift + ratio:<7} {b['after']['periapsis_alt_km']:.3f} x "
                   f"{b['after']['apoapsis_alt_km']:.3f}")
    out.append("-" * len(head))
    if d["final"]:
        out.append(f"final {kind} orbit: {d['final']['periapsis_alt_km']:.3f} x {d['final']['apoapsis_alt_km']:.3f} km"
                   + _i_note(d["final"]))
    if d["plan_error"]:
        out.append(f"PLAN ERROR: {d['plan_error']}")
    p = d["propellant"]
    out.append(f"propellant: loaded {p['loaded_kg']:.3f} kg, used {p['used_kg']:.3f} (planned "
               f"{p['used_planned_kg']:.3f}), on board {p['remaining_kg']:.3f}, still planned "
               f"{p['remaining_plan_kg']:.3f}, after plan {p['after_plan_kg']:.3f}")
    out.append(f"            unusable {p['unusable_kg']:.3f}, reserve {p['reserve_kg']:.3f}, margin "
               f"{p['margin_kg']:.3f} kg (buys {p['dv_remaining_mps']:.1f} m/s)")
    for g in p["gauges"]:
        out.append(f"gauge entry {g['entry']} at {g['epoch']}: gauge {g['gauge_kg']:.3f} kg, book "
                   f"{g['book_kg']:.3f} kg, difference {g['difference_kg']:+.3f} kg")
    for w in d["warnings"]:
        out.append(f"WARNING: {w}")
    out.append("")
    out.append("entries:")
    for e in d["entries"]:
        mark = "" if e["status"] == "active" else f" [{e['status']}]"
        out.append(f"  {e['entry']:>4}  {e['written']}  {e['summary']}{mark}")
    for c in d["cautions"]:
        out.append(f"caution: {c}")
    return "\n".join(out)
