"""burndesk benchmarks: one command, figures beside baselines measured in the same run.

    .venv/bin/python tests/bench/run.py [--quick] [--json FILE]

Each figure is printed with the baseline it is compared against (measured now, on this machine)
and the ratio, plus the target of the performance budget.  No test asserts on time; this is the
place where speed and memory are measured.

Figures (JSON keys):
  replan_ms                 median full replan of the demo scenario (J2, split burns)
  replan_split_ms           median replan of a >= 10-burn split campaign (two-body model)
  kepler_solves_per_s       vectorised solves of 10^6 random (M, e), e up to 0.99, residual < 1e-12
  propagate_speedup_vs_ivp  10^4 two-body states over one day: our propagation vs scipy DOP853
  cli_start_s, python_start_s   `burndesk --version` vs `python -c pass`
  console_first_frame_s     console start to its first full frame (demo session)
  journal_replay_10k_s      open + read + reduce a 10^4-event session journal
  console_rss_mb            resident memory of the console with the demo session
  fleet_10k_s               `burndesk fleet` planning of 10^4 spacecraft
"""

from __future__ import annotations

import argparse
import json
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
PY = sys.executable
BIN = str(Path(PY).parent / "burndesk")

TARGETS = {
    "replan_ms": ("<=", 30.0),
    "replan_split_ms": ("<=", 150.0),
    "kepler_solves_per_s": (">=", 5e6),
    "propagate_speedup_vs_ivp": (">=", 200.0),
    "cli_start_s": ("<=", "python_start_s + 0.25"),
    "console_first_frame_s": ("<=", 1.5),
    "journal_replay_10k_s": ("<=", 0.5),
    "console_rss_mb": ("<=", 150.0),
    "fleet_10k_s": ("<=", 2.0),
}


def median_time(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


# --------------------------------------------------------------------------- planning

def bench_replan(quick: bool) -> dict:
    from console.scenario_file import load_scenario
    from mechanics import flight
    from mechanics.planner import plan_campaign

    sc = load_scenario(ROOT / "profiles" / "scenarios" / "demo.toml")
    plan_campaign(sc)  # warm imports and caches of scipy
    n = 3 if quick else 9
    ours = median_time(lambda: plan_campaign(sc), n)
    with flight.reference_integrator():
        base = median_time(lambda: plan_campaign(sc), 1 if quick else 3)
    burns = len(plan_campaign(sc).burns)
    return {"replan_ms": ours * 1e3, "replan_baseline_ms": base * 1e3, "replan_burns": burns}


def split_scenario():
    from mechanics.bodies import Body
    from mechanics.elements import apsides_to_elements, elements_to_rv
    from mechanics.scenario import PlanOptions, Scenario, Target
    from mechanics.vehicle import Thruster, Vehicle

    earth = Body("earth", 3.986004418e14, 6378137.0, 1.0826298213e-3)
    R = earth.radius_m
    veh = Vehicle("bench", 200.0, 40.0, (Thruster(2, 1.0, 220.0),), max_burn_duration_s=900.0,
                  max_burn_arc_rad=math.radians(30.0))
    el = apsides_to_elements(R + 400e3, R + 420e3, 0.9, 0.3, 0.2, 0.1)
    r, v = elements_to_rv(el, earth.mu_m3_s2)
    return Scenario("split bench", earth, 1.8e9, tuple(r), tuple(v), "two-body", veh,
                    Target("circular", R + 600e3, R + 600e3), PlanOptions("inertial", "auto", 0.0))


def bench_split(quick: bool) -> dict:
    from mechanics import flight
    from mechanics.planner import plan_campaign

    sc = split_scenario()
    plan = plan_campaign(sc)
    n = 3 if quick else 7
    ours = median_time(lambda: plan_campaign(sc), n)
    with flight.reference_integrator():
        base = median_time(lambda: plan_campaign(sc), 1)
    return {"replan_split_ms": ours * 1e3, "replan_split_baseline_ms": base * 1e3,
            "replan_split_burns": len(plan.burns)}


# --------------------------------------------------------------------------- Kepler

def naive_kepler(M, e, iterations=12):
    import numpy as np

    E = M.copy()
    for _ in range(iterations):
        E = E - (E - e * np.sin(E) - M) / (1.0 - e * np.cos(E))
    return E


def bench_kepler(quick: bool) -> dict:
    import numpy as np

    from mechanics.kepler import solve_kepler

    rng = np.random.default_rng(7)
    n = 1_000_000
    M = rng.uniform(-math.pi, math.pi, n)
    e = rng.uniform(0.0, 0.99, n)
    solve_kepler(M[:1000], e[:1000])
    t = median_time(lambda: solve_kepler(M, e), 3 if quick else 7)
    E = solve_kepler(M, e)
    residual = float(np.max(np.abs(E - e * np.sin(E) - M)))
    tb = median_time(lambda: naive_kepler(M, e), 1 if quick else 3)
    Eb = naive_kepler(M, e)
    return {"kepler_solves_per_s": n / t, "kepler_baseline_solves_per_s": n / tb,
            "kepler_max_residual": residual,
            "kepler_baseline_max_residual": float(np.max(np.abs(Eb - e * np.sin(Eb) - M)))}


# --------------------------------------------------------------------------- propagation

def bench_propagate(quick: bool) -> dict:
    import numpy as np
    from scipy.integrate import solve_ivp

    from mechanics.elements import Elements, elements_to_rv
    from mechanics.kepler import propagate_kepler

    mu = 3.986004418e14
    rng = np.random.default_rng(11)
    n = 10_000
    a = rng.uniform(6.8e6, 4.3e7, n)
    e = rng.uniform(0.0, 0.3, n)
    e = np.minimum(e, 1.0 - 6.6e6 / a)  # keep every periapsis above 6600 km
    el = Elements(a, e, rng.uniform(0, math.pi, n), rng.uniform(0, 2 * math.pi, n),
                  rng.uniform(0, 2 * math.pi, n), rng.uniform(0, 2 * math.pi, n))
    r, v = elements_to_rv(el, mu)
    day = 86400.0
    t = median_time(lambda: propagate_kepler(r, v, day, mu), 3 if quick else 7)
    r1, v1 = propagate_kepler(r, v, day, mu)

    def rhs(_t, y):
        rr = y[:3]
        return np.concatenate([y[3:], -mu * rr / np.linalg.norm(rr) ** 3])

    k = 20 if quick else 50  # integrate a sample, scale to 10^4
    idx = rng.choice(n, k, replace=False)
    t0 = time.perf_counter()
    worst = 0.0
    for i in idx:
        sol = solve_ivp(rhs, (0.0, day), np.r_[r[i], v[i]], method="DOP853", rtol=1e-13, atol=1e-9)
        worst = max(worst, float(np.linalg.norm(sol.y[:3, -1] - r1[i])))
    t_ivp = (time.perf_counter() - t0) / k * n
    return {"propagate_s_10k": t, "propagate_ivp_s_10k": t_ivp, "propagate_speedup_vs_ivp": t_ivp / t,
            "propagate_max_difference_m": worst}


# --------------------------------------------------------------------------- start-up, journal

def bench_start(quick: bool) -> dict:
    n = 3 if quick else 7
    py = median_time(lambda: subprocess.run([PY, "-c", "pass"], check=True), n)
    cli = median_time(lambda: subprocess.run([BIN, "--version"], check=True, capture_output=True), n)
    return {"python_start_s": py, "cli_start_s": cli}


def bench_journal(quick: bool) -> dict:
    from console.scenario_file import load_scenario
    from console.session_ops import Session
    from mechanics.session.events import GaugeReadingTaken, to_payload

    sc = load_scenario(ROOT / "profiles" / "scenarios" / "demo.toml")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "bench.burn"
        s = Session.create(path, sc)
        events = [to_payload(GaugeReadingTaken(sc.epoch_s + k, 18.0 - 1e-4 * k, "PVT")) for k in range(9_999)]
        s.journal.append_many(events)
        s.close()

        def replay():
            with Session.open(path, readonly=True) as s2:
                assert len(s2.state.entries) == 10_000

        t = median_time(replay, 3 if quick else 5)

        def raw():
            import sqlite3

            conn = sqlite3.connect(path)
            rows = conn.execute("SELECT payload FROM events ORDER BY seq").fetchall()
            [json.loads(r[0]) for r in rows]
            conn.close()

        base = median_time(raw, 3 if quick else 5)
    return {"journal_replay_10k_s": t, "journal_raw_read_10k_s": base}


# --------------------------------------------------------------------------- report

def check(key, value, results):
    op, target = TARGETS[key]
    if isinstance(target, str):
        target = results["python_start_s"] + 0.25
    ok = value <= target if op == "<=" else value >= target
    return f"{op} {target:.4g}", "ok" if ok else "MISSED"


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="fewer repeats (a rough look)")
    p.add_argument("--json", help="write the figures to this JSON file")
    p.add_argument("--only", help="comma-separated groups: replan,split,kepler,propagate,start,journal,console,fleet")
    args = p.parse_args(argv)
    groups = {
        "replan": bench_replan, "split": bench_split, "kepler": bench_kepler,
        "propagate": bench_propagate, "start": bench_start, "journal": bench_journal,
    }
    try:
        from console_bench import bench_console  # tests/bench/console_bench.py
        groups["console"] = bench_console
    except ImportError:
        pass
    try:
        from fleet_bench import bench_fleet  # tests/bench/fleet_bench.py
        groups["fleet"] = bench_fleet
    except ImportError:
        pass
    wanted = args.only.split(",") if args.only else list(groups)
    results = {"date": time.strftime("%Y-%m-%d"), "machine": f"{os.cpu_count()} cores, {sys.platform}",
               "python": sys.version.split()[0], "quick": args.quick}
    for name in wanted:
        t = time.perf_counter()
        results.update(groups[name](args.quick))
        print(f"[{name} done in {time.perf_counter() - t:.1f} s]", file=sys.stderr)
    baselines = {
        "replan_ms": ("replan_baseline_ms", "same plan, reference DOP853 integrator", True),
        "replan_split_ms": ("replan_split_baseline_ms", "same plan, reference DOP853 integrator", True),
        "kepler_solves_per_s": ("kepler_baseline_solves_per_s", "naive 12-step Newton, numpy", False),
        "propagate_speedup_vs_ivp": (None, "scipy solve_ivp DOP853, rtol 1e-13", False),
        "cli_start_s": ("python_start_s", "python -c pass", True),
        "console_first_frame_s": ("console_baseline_first_frame_s", "empty Textual app", True),
        "journal_replay_10k_s": ("journal_raw_read_10k_s", "raw sqlite3 read + json.loads", True),
        "console_rss_mb": ("console_baseline_rss_mb", "empty Textual app", True),
        "fleet_10k_s": ("fleet_baseline_10k_s", "per-spacecraft scalar loop, extrapolated", True),
    }
    print(f"{'figure':<26} {'value':>12} {'baseline':>12} {'ratio':>8}  {'target':<12} {'':<6} baseline is")
    for key, (bkey, what, lower_better) in baselines.items():
        if key not in results:
            continue
        value = results[key]
        base = results.get(bkey) if bkey else None
        ratio = "" if base in (None, 0) else f"{(base / value if lower_better else value / base):.2f}x"
        target, verdict = check(key, value, results)
        print(f"{key:<26} {value:>12.4g} {'' if base is None else f'{base:.4g}':>12} {ratio:>8}  "
              f"{target:<12} {verdict:<6} {what}")
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=2, sort_keys=True) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
