"""Fleet benchmark: ``burndesk fleet`` on 10^4 spacecraft, beside a per-spacecraft scalar loop.

``bench_fleet(quick)`` writes a 10^4-row fleet CSV into a temporary folder (LEO smallsats that
need split burns, a mid-size bus given by a profile path, GTO/GEO buses; every target kind;
distinct epochs; some rows with their own propellant load) and times the installed ``burndesk
fleet FILE --out ... --force`` end to end as a subprocess (start-up, profile loading, reading,
planning, writing both CSV files).

The baseline is the same plan made the plain way: a Python loop over the spacecraft calling
the scalar functions (``parse_utc``, ``apsides_to_elements`` / ``elements_to_rv`` /
``rv_to_elements``, ``planner.design_legs``, ``impulsive.apsis_burn_dv`` /
``opposite_apsis_after``, ``rocket.propellant_for_dv`` / ``time_to_half_dv``,
``kepler.solve_kepler``, ``format_utc``) on a sample of rows, timed in-process and scaled to
10^4 rows (the sample size is in the JSON as ``fleet_baseline_rows_timed``; start-up and
profile loading are left out of the baseline, which flatters it).  The baseline's burns are
compared with the fleet queue row by row (``fleet_baseline_max_*``): the two must agree to
rounding, which checks the vectorised code against the scalar one on every target kind.

Keys: fleet_10k_s, fleet_baseline_10k_s, fleet_rows, fleet_burns, fleet_infeasible,
fleet_baseline_rows_timed, fleet_baseline_max_ignition_diff_s, fleet_baseline_max_dv_diff_m_s,
fleet_baseline_max_duration_diff_s.
"""

from __future__ import annotations

import csv
import math
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))
BIN = str(Path(sys.executable).parent / "burndesk")

ROWS = 10_000

#: A mid-size bus written beside the fleet file and named by path (invented figures).
KESTREL = """\
name = "KESTREL"
description = "Benchmark bus: two 22 N hydrazine thrusters"
dry_mass = "380 kg"
propellant = "95 kg"
unusable_propellant = "1.5 kg"
reserve_propellant = "8 kg"

[[thrusters]]
count = 2
thrust = "22 N"
isp = "229 s"

[limits]
max_burn_duration = "20 min"
max_burn_arc = "25 deg"
"""

HEADER = ["id", "epoch_utc", "vehicle", "periapsis_alt_km", "apoapsis_alt_km", "i_deg", "raan_deg",
          "argp_deg", "nu_deg", "target_kind", "target_alt_km", "target_periapsis_alt_km",
          "target_apoapsis_alt_km", "target_via_alt_km", "lead_time_s", "propellant_kg"]


def fleet_rows(n: int, seed: int = 42) -> list[list[str]]:
    """n rows of a varied fleet (apsides state form), every target reachable by its kind."""
    import random

    from console.timeutil import format_utc, parse_utc

    rng = random.Random(seed)
    t0 = parse_utc("2027-03-14T00:00:00Z")
    rows = []
    for k in range(n):
        u = rng.random()
        if u < 0.55:  # LEO smallsat (splits: 4 x 1 N)
            vehicle = "wren3"
        elif u < 0.85:
            vehicle = "./kestrel.toml"
        else:
            vehicle = "heron"
        if vehicle == "heron":
            if rng.random() < 0.6:  # GTO
                hp, ha = rng.uniform(200, 600), rng.uniform(35000, 36500)
                kind = rng.choice(["periapsis", "circular", "apsides", "apoapsis"])
            else:  # low circular parking orbit to GEO-ish (some infeasible)
                hp = rng.uniform(300, 500)
                ha = hp
                kind = rng.choice(["circular", "bielliptic", "apsides"])
            targets = {
                "periapsis": (f"{ha - rng.uniform(0.0, 800.0):.3f}", "", "", ""),
                "circular": (f"{rng.uniform(20000, 36000):.3f}", "", "", ""),
                "apsides": ("", f"{rng.uniform(1000, 20000):.3f}", f"{rng.uniform(20000, 40000):.3f}", ""),
                "apoapsis": (f"{rng.uniform(40000, 60000):.3f}", "", "", ""),
                "bielliptic": (f"{rng.uniform(20000, 30000):.3f}", "", "", f"{rng.uniform(50000, 90000):.3f}"),
            }
        else:
            hp = rng.uniform(300, 700)
            ha = hp + rng.choice([0.0, rng.uniform(1.0, 5.0), rng.uniform(20.0, 200.0)])
            kind = rng.choice(["circular", "circular", "apsides", "apoapsis", "periapsis", "bielliptic"])
            alt = rng.uniform(max(250.0, hp - 100.0), hp + 300.0)
            lo = rng.uniform(250.0, 600.0)
            targets = {
                "circular": (f"{alt:.3f}", "", "", ""),
                "apsides": ("", f"{lo:.3f}", f"{lo + rng.uniform(0, 400):.3f}", ""),
                "apoapsis": (f"{hp + rng.uniform(50, 400):.3f}", "", "", ""),
                "periapsis": (f"{rng.uniform(200.0, hp):.3f}", "", "", ""),
                "bielliptic": (f"{alt:.3f}", "", "", f"{max(alt, ha) + rng.uniform(500, 3000):.3f}"),
            }
        t_alt, t_p, t_a, t_via = targets[kind]
        epoch = format_utc(t0 + rng.uniform(0.0, 5 * 86400.0))
        prop = f"{rng.uniform(5.0, 18.0):.3f}" if vehicle == "wren3" and rng.random() < 0.3 else ""
        rows.append([f"sc-{k:05d}", epoch, vehicle, f"{hp:.4f}", f"{ha:.4f}",
                     f"{rng.uniform(0, 110):.4f}", f"{rng.uniform(0, 360):.4f}", f"{rng.uniform(0, 360):.4f}",
                     f"{rng.uniform(0, 360):.4f}", kind, t_alt, t_p, t_a, t_via,
                     f"{rng.uniform(0, 7200):.1f}", prop])
    return rows


def write_fleet(folder: Path, n: int = ROWS, seed: int = 42) -> Path:
    (folder / "kestrel.toml").write_text(KESTREL)
    path = folder / "fleet.csv"
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(HEADER)
        w.writerows(fleet_rows(n, seed))
    return path


# --------------------------------------------------------------------------- scalar baseline

def scalar_plan(row: dict, vehicle, body) -> list[tuple]:
    """One spacecraft planned with the scalar functions (the model of mechanics.fleet):
    list of (leg, apsis, ignition_s, duration_s, dv_m_s, propellant_kg, goal_radius_m)."""
    from console.timeutil import parse_utc
    from mechanics.elements import apsides_to_elements, elements_to_rv, rv_to_elements
    from mechanics.impulsive import apsis_burn_dv, opposite_apsis_after, vis_viva_speed
    from mechanics.kepler import eccentric_to_true, solve_kepler, true_to_mean
    from mechanics.planner import CIRCULAR_START_E, SPLIT_MARGIN, design_legs
    from mechanics.rocket import propellant_for_dv, time_to_half_dv
    from mechanics.scenario import Target

    mu, R = body.mu_m3_s2, body.radius_m
    epoch = parse_utc(row["epoch_utc"])
    deg = math.pi / 180.0
    el0 = apsides_to_elements(R + 1e3 * float(row["periapsis_alt_km"]), R + 1e3 * float(row["apoapsis_alt_km"]),
                              deg * float(row["i_deg"]), deg * float(row["raan_deg"]),
                              deg * float(row["argp_deg"]), deg * float(row["nu_deg"]))
    r, v = elements_to_rv(el0, mu)
    el = rv_to_elements(r, v, mu)
    kind = row["target_kind"]

    def rad(key):
        return R + 1e3 * float(row[key]) if row[key] else None

    alt = rad("target_alt_km")
    target = {
        "circular": lambda: Target(kind, alt, alt),
        "apsides": lambda: Target(kind, rad("target_periapsis_alt_km"), rad("target_apoapsis_alt_km")),
        "apoapsis": lambda: Target(kind, None, alt),
        "periapsis": lambda: Target(kind, alt, None),
        "bielliptic": lambda: Target(kind, alt, alt, rad("target_via_alt_km")),
    }[kind]()
    rp, ra = el.a_m * (1 - el.e), el.a_m * (1 + el.e)
    circular = el.e < CIRCULAR_START_E
    legs = design_legs(rp, ra, circular, target, mu)
    thrust, mdot = vehicle.thrust_n, vehicle.mdot_kg_s
    isp = vehicle.isp_s
    mass = vehicle.dry_mass_kg + (float(row["propellant_kg"]) if row["propellant_kg"] else vehicle.propellant_kg)
    earliest = epoch + float(row["lead_time_s"] or 0.0)
    period = 2 * math.pi * math.sqrt(el.a_m ** 3 / mu)
    t_peri = epoch - float(true_to_mean(el.nu_rad, el.e)) / (2 * math.pi) * period
    t_now = epoch
    a0, e0 = el.a_m, el.e
    out = []
    for g, leg in enumerate(legs):
        r_b, r_o = (ra, rp) if leg.burn_at == "apoapsis" else (rp, ra)
        dv_leg = apsis_burn_dv(r_b, r_o, leg.goal_radius_m, mu)
        dur = float(propellant_for_dv(isp, mass, abs(dv_leg))) / mdot
        rate = max(vis_viva_speed(r_b, 0.5 * (rp + ra), mu),
                   vis_viva_speed(r_b, 0.5 * (r_b + leg.goal_radius_m), mu)) / r_b
        lim_d = vehicle.max_burn_duration_s * SPLIT_MARGIN
        lim_arc = vehicle.max_burn_arc_rad * SPLIT_MARGIN
        need = max(dur / lim_d, dur * rate / lim_arc, 1.0)
        n = int(math.ceil(need - 1e-9))
        while n < 200:  # the first, heaviest burn of dv/n is the longest: add burns until it fits
            first = float(propellant_for_dv(isp, mass, abs(dv_leg) / n)) / mdot
            if first <= lim_d and first * rate <= lim_arc:
                break
            n += 1
        later = leg.burn_at if leg.burn_at != "any" else ("periapsis" if leg.sense > 0 else "apoapsis")
        for k in range(n):
            goal = leg.goal_radius_m if k == n - 1 else opposite_apsis_after(r_b, r_o, dv_leg * (k + 1) / n, mu)
            not_before = max(t_now, earliest)
            pb, po = (ra, rp) if later == "apoapsis" else (rp, ra)
            if k == 0 and g == 0 and circular:
                mid = 0.5 * (rp + ra)
                t_c0 = not_before + float(time_to_half_dv(thrust, isp, mass, abs(apsis_burn_dv(mid, mid, goal, mu))))
                E = solve_kepler(2 * math.pi * (t_c0 - t_peri) / period, e0)
                nu = eccentric_to_true(E, e0)
                pb = a0 * (1 - e0 * math.cos(E))
                po = a0 * (1 - e0 ** 2) / (1 - e0 * math.cos(nu))
                dv = abs(apsis_burn_dv(pb, po, goal, mu))
                t_pre = float(time_to_half_dv(thrust, isp, mass, dv))
                t_c = not_before + t_pre
                apsis = "periapsis" if leg.sense > 0 else "apoapsis"
            else:
                dv = abs(apsis_burn_dv(pb, po, goal, mu))
                t_pre = float(time_to_half_dv(thrust, isp, mass, dv))
                t_ref = t_peri + (0.5 * period if later == "apoapsis" else 0.0)
                t_c = t_ref + period * math.ceil((not_before + t_pre - t_ref) / period)
                apsis = later
            prop = float(propellant_for_dv(isp, mass, dv))
            duration = prop / mdot
            out.append((g, apsis, t_c - t_pre, duration, dv, prop, goal))
            rp, ra = min(pb, goal), max(pb, goal)
            period = 2 * math.pi * math.sqrt((0.5 * (rp + ra)) ** 3 / mu)
            t_peri = t_c if pb <= goal else t_c - 0.5 * period
            t_now = t_c - t_pre + duration
            mass -= prop
    return out


def scalar_baseline(path: Path, sample: int) -> tuple[float, dict, dict]:
    """(seconds per row, {id: burns}, vehicles) for the first ``sample`` rows, planned and
    formatted one by one."""
    from console.profiles import load_body, load_vehicle
    from console.timeutil import format_utc

    with open(path, newline="") as fh:
        rows = list(csv.DictReader(fh))[:sample]
    vehicles = {ref: load_vehicle(ref, path.parent) for ref in {r["vehicle"] for r in rows}}
    body = load_body("earth")
    plans = {}
    t = time.perf_counter()
    lines = []
    for row in rows:
        burns = scalar_plan(row, vehicles[row["vehicle"]], body)
        plans[row["id"]] = burns
        for j, (g, apsis, ign, dur, dv, prop, goal) in enumerate(burns, start=1):
            lines.append(f"{row['id']},{j},{g + 1},{apsis},{format_utc(ign)},{dur:.3f},{dv:.6f},{prop:.6f}")
    per_row = (time.perf_counter() - t) / len(rows)
    return per_row, plans, vehicles


def compare(queue_path: Path, plans: dict) -> dict:
    """Largest differences between the fleet queue and the scalar plans of the sampled rows."""
    from console.timeutil import parse_utc

    got: dict = {}
    with open(queue_path, newline="") as fh:
        for row in csv.DictReader(fh):
            if row["id"] in plans:
                got.setdefault(row["id"], []).append(row)
    worst = {"ignition": 0.0, "dv": 0.0, "duration": 0.0, "count": 0}
    for ident, burns in plans.items():
        rows = got.get(ident, [])
        if len(rows) != len(burns):
            worst["count"] += 1
            continue
        for row, (g, apsis, ign, dur, dv, prop, goal) in zip(rows, burns):
            if row["apsis"] != apsis or int(row["leg"]) != g + 1:
                worst["count"] += 1
            worst["ignition"] = max(worst["ignition"], abs(parse_utc(row["ignition_utc"]) - ign))
            worst["dv"] = max(worst["dv"], abs(float(row["dv_m_s"]) - dv))
            worst["duration"] = max(worst["duration"], abs(float(row["duration_s"]) - dur))
    return worst


def bench_fleet(quick: bool) -> dict:
    repeat = 3 if quick else 5
    sample = 200 if quick else 1000
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        path = write_fleet(folder)
        out = folder / "fleet.queue.csv"
        cmd = [BIN, "fleet", str(path), "--out", str(out), "--force"]
        times = []
        for _ in range(repeat):
            t = time.perf_counter()
            proc = subprocess.run(cmd, capture_output=True, text=True)
            times.append(time.perf_counter() - t)
            if proc.returncode not in (0, 3):
                raise RuntimeError(f"burndesk fleet failed ({proc.returncode}): {proc.stderr.strip()}")
        with open(out, newline="") as fh:
            burns = sum(1 for _ in fh) - 1
        with open(folder / "fleet.summary.csv", newline="") as fh:
            infeasible = sum(1 for r in csv.DictReader(fh) if r["feasible"] == "false")
        per_row, plans, _ = scalar_baseline(path, sample)
        worst = compare(out, plans)
    return {
        "fleet_10k_s": statistics.median(times),
        "fleet_baseline_10k_s": per_row * ROWS,
        "fleet_rows": ROWS,
        "fleet_burns": burns,
        "fleet_infeasible": infeasible,
        "fleet_baseline_rows_timed": sample,
        "fleet_baseline_max_ignition_diff_s": worst["ignition"],
        "fleet_baseline_max_dv_diff_m_s": worst["dv"],
        "fleet_baseline_max_duration_diff_s": worst["duration"],
        "fleet_baseline_mismatched_rows": worst["count"],
    }


if __name__ == "__main__":  # pragma: no cover
    import json

    print(json.dumps(bench_fleet("--quick" in sys.argv), indent=2))
