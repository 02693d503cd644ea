"""The ``burndesk`` command line.

Heavy packages (numpy, scipy, pint, textual) are imported inside the commands that need them,
so ``burndesk --version`` starts fast.  Bad input exits 2 with one line on stderr, never a
traceback.
"""

from __future__ import annotations

import argparse
import os
import sys

VERSION = "0.1.0"

EXIT_OK = 0
EXIT_BAD_INPUT = 2
EXIT_INFEASIBLE = 3
EXIT_INTERNAL = 70


def _demo_scenario() -> str:
    from .profiles import profiles_dir

    return str(profiles_dir() / "scenarios" / "demo.toml")


def cmd_orbit(args) -> int:
    from mechanics.summary import summarize

    from .report import dumps, orbit_json, orbit_text
    from .scenario_file import load_scenario

    sc = load_scenario(args.scenario)
    summary = summarize(sc.r_m, sc.v_m_s, sc.epoch_s, sc.body, sc.model)
    print(dumps(orbit_json(summary, sc.name)) if args.json else orbit_text(summary, sc.name))
    return EXIT_OK


def cmd_plan(args) -> int:
    from mechanics.planner import plan_campaign

    from .report import dumps, plan_json, plan_text
    from .scenario_file import load_scenario

    sc = load_scenario(args.scenario)
    plan = plan_campaign(sc)
    print(dumps(plan_json(plan, sc)) if args.json else plan_text(plan, sc))
    return EXIT_OK if plan.feasible else EXIT_INFEASIBLE


def cmd_default(args) -> int:
    args.scenario = _demo_scenario()
    args.json = False
    return cmd_orbit(args)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="burndesk",
        description="Plan and fly orbit-change burn campaigns. Not flight-certified: verify every "
                    "plan independently and screen for conjunctions before upload.",
    )
    p.add_argument("--version", action="version", version=f"burndesk {VERSION}")
    p.set_defaults(func=cmd_default)
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    o = sub.add_parser("orbit", help="summarise the orbit of a scenario")
    o.add_argument("scenario", help="scenario file (TOML)")
    o.add_argument("--json", action="store_true", help="print JSON instead of text")
    o.set_defaults(func=cmd_orbit)

    pl = sub.add_parser("plan", help="plan the burn queue of a scenario")
    pl.add_argument("scenario", help="scenario file (TOML) with a vehicle and a [target]")
    pl.add_argument("--json", action="store_true", help="print JSON instead of the table")
    pl.set_defaults(func=cmd_plan)
    return p


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except ValueError as exc:
        print(f"burndesk: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("burndesk: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # never a traceback for the operator; BURNDESK_DEBUG=1 shows it
        if os.environ.get("BURNDESK_DEBUG"):
            raise
        print(f"burndesk: internal error ({type(exc).__name__}: {exc}); nothing was changed. "
              "Set BURNDESK_DEBUG=1 to see the details.", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
