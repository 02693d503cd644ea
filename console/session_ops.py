"""Campaign sessions at the edge: the operations the CLI and the console both offer.

A session is a journal file (append-only SQLite, :mod:`mechanics.session.journal`).  Every
operation re-reads the journal, validates the new event against the whole history with the
reducer, and appends it only if it fits; the view is always derived from the events.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from mechanics.session.events import (BurnRecorded, EntryRetracted, GaugeReadingTaken, OrbitState,
                                      ScenarioLoaded, StateEntered, TargetSet, VehicleChanged,
                                      from_payload, to_payload)
from mechanics.session.journal import Journal, JournalError
from mechanics.session.reducer import (SessionState, SessionView, apply, next_burn_number,
                                       planned_to_dict, replay, view)

from .timeutil import format_utc


@dataclass(frozen=True)
class Rejected:
    """A journal row the reducer could not take (kept, shown, never replayed)."""

    seq: int
    kind: str
    reason: str


class Session:
    """An open campaign session (journal + replayed facts)."""

    def __init__(self, journal: Journal):
        self.journal = journal
        self.state = SessionState()
        self.rejected: list[Rejected] = []
        self.written: dict[int, str] = {}
        self.reload()

    # -- lifecycle ---------------------------------------------------------------------------
    @classmethod
    def create(cls, path, scenario, source: str = "") -> "Session":
        """Create a new session file from a scenario; refuses to overwrite an existing file."""
        if scenario.vehicle is None:
            raise ValueError("a session needs a scenario with a vehicle")
        event = ScenarioLoaded(scenario.to_dict(), source)
        apply(SessionState(), 1, event)  # validates before anything is written
        return cls(Journal.create(path, initial=[to_payload(event)]))

    @classmethod
    def open(cls, path, readonly: bool = False) -> "Session":
        return cls(Journal.open(path, readonly=readonly))

    def close(self) -> None:
        self.journal.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def reload(self) -> None:
        """Replay the whole journal (rows that do not fit are kept aside as rejected)."""
        rejected = []
        written = {}
        kinds = {}
        decoded = []
        for rec in self.journal.records():
            written[rec.seq] = rec.written_utc
            kinds[rec.seq] = rec.kind
            try:
                decoded.append((rec.seq, from_payload(rec.kind, rec.payload)))
            except ValueError as exc:
                rejected.append(Rejected(rec.seq, rec.kind, str(exc)))
        misfits: list = []
        state = replay(decoded, misfits)
        rejected += [Rejected(seq, kinds[seq], reason) for seq, reason in misfits]
        if not state.entries:
            raise ValueError(f"{self.journal.path}: session has no scenario entry")
        self.state, self.rejected, self.written = state, rejected, written

    def view(self) -> SessionView:
        return view(self.state)

    # -- appending ---------------------------------------------------------------------------
    def append(self, event) -> int:
        """Validate ``event`` against the history, then append it; returns its entry number."""
        self.reload()
        seq = self.journal_next_seq()
        new_state = apply(self.state, seq, event)  # raises ValueError, nothing written
        kind, payload = to_payload(event)
        got = self.journal.append(kind, payload, expect_seq=seq)  # refused if history moved on
        self.reload()
        assert self.state.entries[-1].seq == got and len(self.state.entries) == len(new_state.entries)
        return got

    def journal_next_seq(self) -> int:
        return max(self.written, default=0) + 1

    def record_burn(self, burn: int, after: OrbitState, *, ignition_s=None, duration_s=None,
                    propellant_kg=None, propellant_source="book-keeping", note="",
                    planned=None) -> int:
        """Record what burn ``burn`` did; defaults take the commanded ignition and duration.

        ``planned`` is the burn as commanded (a PlannedBurn); without it the current view is
        derived here, which replans (the console passes the row it shows instead).
        """
        expected = next_burn_number(self.state)
        if burn != expected:
            raise ValueError(f"burn {burn} is not the next burn to record (next is {expected})")
        if planned is None:
            v = self.view()
            row = v.next_burn
            if row is None or row.index != burn:
                raise ValueError(f"burn {burn} is not in the planned queue"
                                 + (f" ({v.plan_error})" if v.plan_error else ""))
            planned = row.planned
        elif planned.index != burn:
            raise ValueError(f"burn {burn} does not match the commanded burn {planned.index}")
        ign = planned.ignition_s if ignition_s is None else float(ignition_s)
        dur = planned.duration_s if duration_s is None else float(duration_s)
        if propellant_kg is not None and not (math.isfinite(propellant_kg) and propellant_kg >= 0.0):
            raise ValueError("propellant: must be a non-negative number of kg")
        event = BurnRecorded(burn, planned_to_dict(planned), ign, dur, propellant_kg,
                             propellant_source if propellant_kg is not None else "estimated", after, note)
        return self.append(event)

    def enter_state(self, state: OrbitState, form: str = "vector", note: str = "") -> int:
        return self.append(StateEntered(state, form, note))

    def gauge(self, epoch_s: float, propellant_kg: float, method: str = "gauge") -> int:
        return self.append(GaugeReadingTaken(epoch_s, propellant_kg, method))

    def retract(self, entry: int, reason: str = "") -> int:
        return self.append(EntryRetracted(entry, reason))

    def set_target(self, target) -> int:
        from dataclasses import asdict

        return self.append(TargetSet(asdict(target)))

    def entries(self):
        """(seq, written UTC, kind, summary, status) of every entry, for the log."""
        gone = self.state.retracted
        out = []
        for e in self.state.entries:
            status = "retracted" if e.seq in gone else ""
            out.append((e.seq, self.written.get(e.seq, ""), e.event.KIND, _summary(e.event), status))
        for r in self.rejected:
            out.append((r.seq, self.written.get(r.seq, ""), r.kind, r.reason, "rejected"))
        return sorted(out)


def _summary(ev) -> str:
    if isinstance(ev, ScenarioLoaded):
        return f"scenario {ev.scenario.get('name', '')!r} at {format_utc(ev.scenario['epoch_s'])}"
    if isinstance(ev, StateEntered):
        return f"state at {format_utc(ev.state.epoch_s)} ({ev.form})"
    if isinstance(ev, BurnRecorded):
        prop = "estimated" if ev.propellant_kg is None else f"{ev.propellant_kg:.3f} kg {ev.propellant_source}"
        return (f"burn {ev.burn}: ignition {format_utc(ev.ignition_s)}, {ev.duration_s:.1f} s, {prop}, "
                f"orbit at {format_utc(ev.after.epoch_s)}")
    if isinstance(ev, GaugeReadingTaken):
        return f"gauge {ev.propellant_kg:.3f} kg at {format_utc(ev.epoch_s)} ({ev.method})"
    if isinstance(ev, EntryRetracted):
        return f"retracts entry {ev.entry}" + (f": {ev.reason}" if ev.reason else "")
    if isinstance(ev, TargetSet):
        t = ev.target
        i = t.get("i_rad")
        return f"target {t.get('kind')}" + ("" if i is None else f", i {math.degrees(i):.4f} deg")
    if isinstance(ev, VehicleChanged):
        return f"vehicle {ev.vehicle.get('name')}"
    return ev.KIND


# --------------------------------------------------------------------------- CSV export

def export_csv(v: SessionView, folder) -> list[Path]:
    """Write queue.csv, ledger.csv and drift.csv (units in the headers) into ``folder``.

    The folder must exist; the three file names are fixed, and an existing file that is a link
    is refused, so nothing outside the folder can be overwritten.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise ValueError(f"{folder}: export folder does not exist")
    from .exports import (ACTUAL_COLUMNS, ATTITUDE_COLUMNS, PLANNED_COLUMNS, actual_cells, attitude_cells,
                          headers, planned_cells, write_csv)

    R = v.scenario.body.radius_m
    written = []

    def out(name, header, rows):
        written.append(write_csv(folder, name, header, rows))

    queue_rows = [[row.index, row.status, *planned_cells(row.planned, R), *actual_cells(row.actual),
                   *attitude_cells(row.planned)] for row in v.rows]
    out("queue.csv", ["burn", "status", *headers(PLANNED_COLUMNS), *headers(ACTUAL_COLUMNS),
                      *headers(ATTITUDE_COLUMNS)], queue_rows)
    lg = v.ledger
    ledger_rows = [["loaded", f"{lg.loaded_kg:.6f}"], ["used_planned_done", f"{lg.used_planned_kg:.6f}"],
                   ["used_recorded", f"{lg.used_recorded_kg:.6f}"], ["remaining", f"{lg.remaining_kg:.6f}"],
                   ["usable", f"{lg.usable_kg:.6f}"], ["unusable", f"{lg.unusable_kg:.6f}"],
                   ["reserve", f"{lg.reserve_kg:.6f}"], ["remaining_plan", f"{lg.remaining_plan_kg:.6f}"],
                   ["after_plan", f"{lg.after_plan_kg:.6f}"], ["margin", f"{lg.margin_kg:.6f}"]]
    for burn, planned, used, source in lg.per_burn:
        ledger_rows.append([f"burn_{burn}_planned", f"{planned:.6f}"])
        ledger_rows.append([f"burn_{burn}_recorded_{source}", f"{used:.6f}"])
    for g in lg.gauges:
        ledger_rows.append([f"gauge_entry_{g.seq}_{format_utc(g.epoch_s)}", f"{g.gauge_kg:.6f}"])
        ledger_rows.append([f"gauge_entry_{g.seq}_book", f"{g.book_kg:.6f}"])
        ledger_rows.append([f"gauge_entry_{g.seq}_difference", f"{g.difference_kg:.6f}"])
    out("ledger.csv", ["item", "propellant_kg"], ledger_rows)
    drift_rows = []
    for row in v.rows:
        if row.drift is not None:
            d = row.drift
            drift_rows.append([row.index, f"{d.dv_ratio:.6f}", d.level, f"{d.thrust_factor:.6f}",
                               f"{d.delivered_dv_m_s:.6f}", f"{d.residual_m / 1e3:.6f}",
                               "" if d.isp_ratio is None else f"{d.isp_ratio:.6f}", " | ".join(d.flags)])
    out("drift.csv", ["burn", "dv_ratio", "level", "thrust_factor", "delivered_dv_m_s", "residual_km",
                      "isp_ratio", "flags"], drift_rows)
    return written


__all__ = ["Session", "Rejected", "export_csv", "JournalError", "OrbitState"]
