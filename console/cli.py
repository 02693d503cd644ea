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
    from .scenario_file import load_scenario_with_state

    sc, st = load_scenario_with_state(args.scenario)
    _check_plan_outputs(args)
    plan = plan_campaign(sc)
    print(dumps(plan_json(plan, sc)) if args.json else plan_text(plan, sc))
    for note in st.notes:
        print(f"burndesk: note: {note}", file=sys.stderr)
    _write_plan_outputs(args, plan, sc, st)
    return EXIT_OK if plan.feasible else EXIT_INFEASIBLE


def _check_plan_outputs(args) -> None:
    """Refuse before planning what would be refused after it (an existing OPM, a missing folder)."""
    from pathlib import Path

    opm, folder = getattr(args, "opm", None), getattr(args, "csv", None)
    if opm and Path(opm).exists() and not getattr(args, "force", False):
        raise ValueError(f"{opm}: already exists; refusing to overwrite it (use --force)")
    if folder and not Path(folder).is_dir():
        raise ValueError(f"{folder}: export folder does not exist")


def _write_plan_outputs(args, plan, sc, st) -> None:
    """``--opm OUT.opm`` and ``--csv DIR``; what was written is named on stderr (stdout keeps
    the table or the JSON)."""
    if getattr(args, "opm", None):
        from .opm import plan_to_opm, save_text

        path = save_text(plan_to_opm(plan, sc, source=st.opm), args.opm, force=getattr(args, "force", False))
        print(f"burndesk: wrote {path}", file=sys.stderr)
    if getattr(args, "csv", None):
        from .exports import export_plan_csv

        for path in export_plan_csv(plan, args.csv):
            print(f"burndesk: wrote {path}", file=sys.stderr)


def cmd_fleet(args) -> int:
    """``burndesk fleet FILE.csv``: first-cut plans of many spacecraft (see console/fleet_file.py)."""
    from .fleet_file import run_fleet

    run = run_fleet(args.file, out=args.out, force=args.force)
    print(run.text)
    for path in run.written:
        print(f"burndesk: wrote {path}", file=sys.stderr)
    return EXIT_OK if run.feasible else EXIT_INFEASIBLE


def _session_exit(v) -> int:
    return EXIT_OK if v.feasible or (v.plan is not None and not v.plan.burns) else EXIT_INFEASIBLE


def cmd_session_init(args) -> int:
    from .scenario_file import load_scenario
    from .session_ops import Session

    sc = load_scenario(args.scenario)
    with Session.create(args.session, sc, source=str(args.scenario)) as s:
        v = s.view()
        print(f"session {args.session} created from {args.scenario}: "
              f"{sum(1 for r in v.rows if r.status == 'planned')} burn(s) planned")
        return _session_exit(v)


def cmd_session_show(args) -> int:
    from .report import dumps, session_json, session_text
    from .session_ops import Session

    with Session.open(args.session, readonly=True) as s:
        v = s.view()
        print(dumps(session_json(s, v)) if args.json else session_text(s, v))
        return _session_exit(v)


def _after_state(args, body):
    from mechanics.session.events import OrbitState

    from .scenario_file import load_state_file

    st = load_state_file(args.after, body)
    for note in st.notes:
        print(f"burndesk: note: {note}", file=sys.stderr)
    return OrbitState(st.epoch_s, st.r_m, st.v_m_s)


def cmd_session_record(args) -> int:
    from .report import LEVEL_MARK
    from .session_ops import Session
    from .timeutil import parse_utc
    from .units import parse_value

    with Session.open(args.session) as s:
        body = s.view().scenario.body
        after = _after_state(args, body)
        ign = parse_utc(args.ignition, "--ignition") if args.ignition else None
        dur = parse_value(args.duration, "time", "--duration", allow_zero=False) if args.duration else None
        prop = parse_value(args.propellant, "mass", "--propellant") if args.propellant is not None else None
        seq = s.record_burn(args.burn, after, ignition_s=ign, duration_s=dur, propellant_kg=prop,
                            propellant_source=args.source)
        v = s.view()
        row = next(r for r in v.rows if r.seq == seq)
        d = row.drift
        if d is not None:
            print(f"burn {row.index} recorded as entry {seq}: delivered {d.delivered_dv_m_s:.3f} m/s, "
                  f"{100 * (d.dv_ratio - 1):+.2f} % against the plan, drift {LEVEL_MARK[d.level]}, "
                  f"thrust factor {d.thrust_factor:.4f}")
            for flag in d.flags:
                print(f"  {flag}")
        else:
            print(f"burn {row.index} recorded as entry {seq} (no thrust factor could be fitted)")
        nxt = v.next_burn
        cal = v.calibration
        print(f"replanned with thrust factor {cal.thrust_factor:.4f} from {cal.burns_used} burn(s): "
              + (f"next is burn {nxt.index}" if nxt else "no burn left")
              + (f" ({v.plan_error})" if v.plan_error else ""))
        return _session_exit(v)


def cmd_session_state(args) -> int:
    from .session_ops import Session

    with Session.open(args.session) as s:
        body = s.view().scenario.body
        from .scenario_file import load_state_file
        from mechanics.session.events import OrbitState

        st = load_state_file(args.state, body)
        seq = s.enter_state(OrbitState(st.epoch_s, st.r_m, st.v_m_s), st.form)
        print(f"state recorded as entry {seq}; queue replanned")
        return _session_exit(s.view())


def cmd_session_gauge(args) -> int:
    from .session_ops import Session
    from .timeutil import parse_utc
    from .units import parse_value

    with Session.open(args.session) as s:
        kg = parse_value(args.propellant, "mass", "--propellant")
        seq = s.gauge(parse_utc(args.epoch, "--epoch"), kg, args.method)
        g = s.view().ledger.gauges[-1]
        print(f"gauge reading recorded as entry {seq}: gauge {g.gauge_kg:.3f} kg, book {g.book_kg:.3f} kg, "
              f"difference {g.difference_kg:+.3f} kg")
        return EXIT_OK


def cmd_session_retract(args) -> int:
    from .session_ops import Session

    with Session.open(args.session) as s:
        seq = s.retract(args.entry, args.reason or "")
        print(f"entry {args.entry} retracted by entry {seq}; queue replanned")
        return _session_exit(s.view())


def cmd_session_export(args) -> int:
    from .session_ops import Session, export_csv

    with Session.open(args.session, readonly=True) as s:
        for path in export_csv(s.view(), args.csv):
            print(path)
        return EXIT_OK


def cmd_session_recover(args) -> int:
    from mechanics.session.journal import recover

    report = recover(args.damaged, args.new)
    print(report.summary())
    return EXIT_OK if report.complete else EXIT_INFEASIBLE


def cmd_console(args) -> int:
    from .app import run_console

    return run_console(args.session, args.scenario)


def cmd_default(args) -> int:
    """Bare ``burndesk``: the console on the default session (created from the demo on first run)."""
    from .app import run_console

    return run_console(None, None)


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (exit 2), like every other bad input."""

    def error(self, message):  # noqa: D102 - argparse hook
        self.exit(EXIT_BAD_INPUT, f"burndesk: {message} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="burndesk",
        description="Plan and fly orbit-change burn campaigns. Not flight-certified: verify every "
                    "plan independently and screen for conjunctions before upload.",
    )
    p.add_argument("--version", action="version", version=f"burndesk {VERSION}")
    p.set_defaults(func=cmd_default)
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    o = sub.add_parser("orbit", help="summarise the orbit of a scenario")
    o.add_argument("scenario", help="scenario file (TOML)")
    o.add_argument("--json", action="store_true", help="print JSON instead of text")
    o.set_defaults(func=cmd_orbit)

    pl = sub.add_parser("plan", help="plan the burn queue of a scenario")
    pl.add_argument("scenario", help="scenario file (TOML) with a vehicle and a [target]")
    pl.add_argument("--json", action="store_true", help="print JSON instead of the table")
    pl.add_argument("--opm", metavar="OUT.opm",
                    help="also write the queue as a CCSDS orbit parameter message (KVN)")
    pl.add_argument("--csv", metavar="DIR", help="also write queue.csv into this existing folder")
    pl.add_argument("--force", action="store_true", help="let --opm overwrite an existing file")
    pl.set_defaults(func=cmd_plan)

    fl = sub.add_parser("fleet", help="first-cut burn queues of many spacecraft from a CSV file "
                                      "(two-body timing, impulsive design with finite durations)")
    fl.add_argument("file", help="fleet CSV, one spacecraft per row (README \"Fleet planning\")")
    fl.add_argument("--out", metavar="OUT.csv",
                    help="queue to write (default: FILE's stem + .queue.csv beside it); the "
                         "per-spacecraft summary goes beside it as *.summary.csv")
    fl.add_argument("--force", action="store_true", help="overwrite existing output files")
    fl.set_defaults(func=cmd_fleet)

    co = sub.add_parser("console", help="the interactive console (opens or creates a session)")
    co.add_argument("--session", help="session file (default: your default session in the burndesk "
                                      "data folder, $BURNDESK_HOME or $XDG_DATA_HOME/burndesk)")
    co.add_argument("--scenario", help="scenario file (TOML) to create the session from when it does not exist")
    co.set_defaults(func=cmd_console)

    se = sub.add_parser("session", help="campaign sessions: record burns, drift, calibration, ledger")
    ss = se.add_subparsers(dest="action", metavar="ACTION", required=True, parser_class=_Parser)
    a = ss.add_parser("init", help="create a session from a scenario (never overwrites)")
    a.add_argument("session", help="session file to create")
    a.add_argument("--scenario", required=True, help="scenario file (TOML)")
    a.set_defaults(func=cmd_session_init)
    a = ss.add_parser("show", help="the campaign: queue, drift, calibration, ledger, entries")
    a.add_argument("session")
    a.add_argument("--json", action="store_true")
    a.set_defaults(func=cmd_session_show)
    a = ss.add_parser("record", help="record what a burn did")
    a.add_argument("session")
    a.add_argument("--burn", type=int, required=True, help="burn number (the next in the queue)")
    a.add_argument("--after", required=True,
                   help="STATE.toml (epoch and [state]) or an OPM file from orbit determination")
    a.add_argument("--ignition", help="actual ignition, ISO 8601 UTC (default: as commanded)")
    a.add_argument("--duration", help="actual on-time, e.g. 382.5 or '6.4 min' (default: as commanded)")
    a.add_argument("--propellant", help="propellant used, e.g. 0.71 or '710 g' (default: book-kept from the fit)")
    a.add_argument("--source", choices=("gauge", "book-keeping"), default="book-keeping",
                   help="where --propellant comes from")
    a.set_defaults(func=cmd_session_record)
    a = ss.add_parser("state", help="enter a new orbit-determination state")
    a.add_argument("session")
    a.add_argument("--state", required=True, help="STATE.toml: epoch and [state]")
    a.set_defaults(func=cmd_session_state)
    a = ss.add_parser("gauge", help="record a propellant gauge reading")
    a.add_argument("session")
    a.add_argument("--propellant", required=True, help="propellant on board, e.g. 10.2 or '10.2 kg'")
    a.add_argument("--epoch", required=True, help="time of the reading, ISO 8601 UTC")
    a.add_argument("--method", default="PVT", help="how it was measured (default PVT)")
    a.set_defaults(func=cmd_session_gauge)
    a = ss.add_parser("retract", help="withdraw an entry (history is kept)")
    a.add_argument("session")
    a.add_argument("--entry", type=int, required=True, help="entry number (see session show)")
    a.add_argument("--reason", help="why")
    a.set_defaults(func=cmd_session_retract)
    a = ss.add_parser("export", help="write queue.csv, ledger.csv, drift.csv")
    a.add_argument("session")
    a.add_argument("--csv", required=True, help="existing folder to write into")
    a.set_defaults(func=cmd_session_export)
    a = ss.add_parser("recover", help="copy the intact entries of a damaged session into a new file")
    a.add_argument("damaged", help="the damaged session file (only read)")
    a.add_argument("new", help="the new session file to write (must not exist)")
    a.set_defaults(func=cmd_session_recover)
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
