"""The burndesk console: a Textual app over one campaign session.

Layout: a status line (UTC clock, next ignition and its countdown, replanning state); the
**Burn queue** across the top; underneath, **State** (latest orbit, its editor, the target),
the **Propellant ledger**, and a panel that switches between the selected burn's details, the
drift view and the orbit sketch; the footer lists the keys.

How it works
------------
* The session journal is the only store.  Every operator action that changes the campaign is
  one journal append on the UI thread (fast: SQLite, validated by the reducer first); quitting,
  a crash or a killed terminal therefore loses nothing that was applied.
* Everything shown is derived from the journal's facts by the pure
  :func:`mechanics.session.reducer.view`, which replans the queue and can take a second or more
  under J2.  It runs in a thread worker (exclusive: a newer request supersedes an older one) and
  its result comes back as a message; the UI never waits for it and shows "replanning…" meanwhile.
  A failure keeps the last good view on screen and says why.
* Attributes down, messages up: the app sets reactive attributes on the widgets; widgets and
  dialogs post messages that the app turns into journal entries.
"""

from __future__ import annotations

import functools
import os
from pathlib import Path

from textual import events, work
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.reactive import reactive
from textual.widgets import DataTable, Footer, TabbedContent, TabPane
from textual.worker import get_current_worker

from .forms import GENERAL, FormErrors, field_of, read_target, read_timed_state
from .screens import ExportScreen, GaugeScreen, HelpScreen, RecordScreen, RetractScreen
from .timeutil import now_s as system_now_s
from .widgets import (LEVEL_TEXT, BurnDetails, DriftView, LedgerView, OrbitSketch, QueueFooter, QueueTable,
                      StatePanel, StatusLine)

DEFAULT_SESSION_NAME = "default.burn"
VIEW_TABS = ("tab-details", "tab-drift", "tab-orbit")


# --------------------------------------------------------------------------- opening sessions

def data_dir() -> Path:
    """The per-user data folder: $BURNDESK_HOME, else $XDG_DATA_HOME/burndesk, else
    ~/.local/share/burndesk."""
    home = os.environ.get("BURNDESK_HOME")
    if home:
        return Path(home)
    xdg = os.environ.get("XDG_DATA_HOME")
    base = Path(xdg) if xdg and os.path.isabs(xdg) else Path.home() / ".local" / "share"
    return base / "burndesk"


def default_session_path() -> Path:
    return data_dir() / DEFAULT_SESSION_NAME


def open_or_create(session_path=None, scenario_path=None):
    """Open a session file, or create it from a scenario; returns ``(Session, note)``.

    Without ``session_path`` the default session of the per-user data folder is used; on the
    first run it is created from the demo scenario (and the note says so).  A missing session
    other than the default needs ``scenario_path``.

    Raises
    ------
    ValueError
        A missing session without a scenario, an unreadable scenario or session file.
    """
    from .session_ops import Session

    default = session_path is None
    path = default_session_path() if default else Path(session_path)
    if path.exists():
        note = ""
        if scenario_path is not None:
            note = f"{path.name} already exists: opened it; --scenario {scenario_path} was not used"
        return Session.open(path), note
    if scenario_path is None and not default:
        raise ValueError(f"{path}: no such session file; give --scenario FILE to create it")
    if scenario_path is None:
        from .profiles import profiles_dir

        scenario_path = profiles_dir() / "scenarios" / "demo.toml"
        what = "first run: created your default session"
    else:
        what = "created the session"
    if default:
        path.parent.mkdir(parents=True, exist_ok=True, mode=0o700)
    from .scenario_file import load_scenario

    sc = load_scenario(scenario_path)
    session = Session.create(path, sc, source=str(scenario_path))
    return session, f"{what} {path} from {Path(scenario_path).name} ({sc.name})"


def run_console(session_path=None, scenario_path=None) -> int:
    """Open (or create) a session and run the console on it until the operator quits."""
    session, note = open_or_create(session_path, scenario_path)
    try:
        BurndeskApp(session, note=note).run()
    finally:
        session.close()
    return 0


# --------------------------------------------------------------------------- messages

class ViewReady(Message):
    """A replan finished (posted from the worker thread)."""

    def __init__(self, generation: int, view, sketch) -> None:
        super().__init__()
        self.generation = generation
        self.view = view
        self.sketch = sketch


class ViewFailed(Message):
    """A replan failed; the last good view stays."""

    def __init__(self, generation: int, reason: str) -> None:
        super().__init__()
        self.generation = generation
        self.reason = reason


def guarded(fn):
    """Run an action or handler; a refusal or a bug becomes a message, never a traceback."""
    @functools.wraps(fn)
    def wrapper(self, *args, **kwargs):
        try:
            return fn(self, *args, **kwargs)
        except ValueError as exc:
            self.notify(str(exc), title="refused", severity="error", markup=False)
        except Exception as exc:
            if os.environ.get("BURNDESK_DEBUG"):
                raise
            self.notify(f"internal error ({type(exc).__name__}: {exc}); nothing more was changed",
                        title="error", severity="error", markup=False)
    return wrapper


# --------------------------------------------------------------------------- the app

class FieldScroll(VerticalScroll, can_focus=False):
    """A scrolling panel that Tab passes through to its fields (focusing a field scrolls to it)."""


class BurndeskApp(App):
    """The console over one open :class:`console.session_ops.Session`.

    Parameters
    ----------
    session : Session
        Open for writing; the caller closes it.
    clock : callable, optional
        Returns UTC seconds since 1970; default the system clock.  Tests and screenshots pass a
        fixed one (countdowns and the header use it).
    note : str
        Shown once at start (e.g. "first run: created your default session ...").
    """

    CSS_PATH = "burndesk.tcss"
    TITLE = "burndesk"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [
        Binding("f1", "help", "Help", key_display="F1"),
        Binding("f2", "apply_state", "Apply", key_display="F2"),
        Binding("f3", "apply_target", "Target", key_display="F3"),
        Binding("f4", "record", "Record", key_display="F4"),
        Binding("f5", "gauge", "Gauge", key_display="F5"),
        Binding("f6", "retract", "Retract", key_display="F6"),
        Binding("f7", "export", "Export", key_display="F7"),
        Binding("f8", "cycle_view", "View", key_display="F8"),
        Binding("escape", "focus_queue", "Queue", key_display="Esc"),
        Binding("ctrl+q", "quit", "Quit", key_display="^Q"),
    ]
    #: keys that only make sense on the main screen (hidden while a dialog is up)
    MAIN_ONLY = {"apply_state", "apply_target", "record", "gauge", "retract", "export", "cycle_view",
                 "focus_queue"}
    #: keys that are not bindings of the app, for the help screen
    OTHER_KEYS = [
        ("Tab / Shift+Tab", "move between the queue and the fields"),
        ("↑ ↓  PgUp PgDn", "select a burn in the queue (its details show on the right)"),
        ("← → / Space", "change a choice: state form, target kind, propellant source"),
        ("Enter", "in a field: go to the next field (nothing is applied until F2 / F3)"),
        ("F2 in a dialog", "submit the dialog (record the burn, the gauge reading, export)"),
        ("Esc in a dialog", "close it without changing anything"),
        ("Y / N", "confirm or refuse a retraction"),
    ]

    now_s = reactive(0.0)
    replanning = reactive(False)
    problem = reactive("")

    def __init__(self, session, *, clock=None, note: str = "") -> None:
        super().__init__()
        self.session = session
        self._clock = clock or system_now_s
        self.note = note
        self.current_view = None
        self.sketch_model = None
        self._generation = 0
        self._pending_verdict: int | None = None

    # -- layout ------------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        yield StatusLine(id="status")
        with Vertical(id="queue-area"):
            yield QueueTable(id="queue")
            yield QueueFooter(id="queue-footer")
        with Horizontal(id="lower"):
            with FieldScroll(id="state-area"):
                yield StatePanel(id="state")
            with VerticalScroll(id="ledger-area"):
                yield LedgerView(id="ledger")
            with TabbedContent(id="views", initial="tab-details"):
                with TabPane("Details", id="tab-details"):
                    with VerticalScroll():
                        yield BurnDetails(id="details")
                with TabPane("Drift", id="tab-drift"):
                    with VerticalScroll():
                        yield DriftView(id="drift")
                with TabPane("Orbit", id="tab-orbit"):
                    yield OrbitSketch(id="sketch")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.query_one("#queue-area").border_title = "Burn queue"
        self.query_one("#state-area").border_title = "State"
        self.query_one("#ledger-area").border_title = "Propellant ledger"
        status = self.query_one(StatusLine)
        status.title = self._session_title()
        self.now_s = self._clock()
        self.set_interval(1.0, self._tick)
        self.query_one(QueueTable).focus()
        if self.note:
            self.notify(self.note, title="session", timeout=12, markup=False)
        # the first frame goes out before the replan thread starts competing for the interpreter
        self.call_after_refresh(self.request_replan)
        self.replanning = True

    def _session_title(self) -> str:
        from mechanics.session.reducer import scenario_of

        try:
            name = scenario_of(self.session.state).name
        except ValueError:
            name = "?"
        return f"{name} · {self.session.journal.path.name}"

    # -- replanning in a worker --------------------------------------------------------------
    def request_replan(self) -> None:
        """Derive the view of the session's current facts in the background."""
        self._generation += 1
        self.replanning = True
        self._replan(self.session.state, self._generation)

    @work(thread=True, exclusive=True, group="replan", exit_on_error=False)
    def _replan(self, state, generation: int) -> None:
        from mechanics.session.reducer import view

        from .sketch import model_from_view

        worker = get_current_worker()
        try:
            v = view(state)
            try:
                sketch = model_from_view(v)
            except Exception:  # a sketch problem must not hide the queue
                sketch = None
        except ValueError as exc:
            reason = str(exc)
        except Exception as exc:
            reason = f"{type(exc).__name__}: {exc}"
        else:
            if not worker.is_cancelled:
                self.post_message(ViewReady(generation, v, sketch))
            return
        if not worker.is_cancelled:
            self.post_message(ViewFailed(generation, reason))

    @guarded
    def on_view_ready(self, message: ViewReady) -> None:
        if message.generation != self._generation:
            return  # superseded by a newer request
        self.current_view = message.view
        self.sketch_model = message.sketch
        self.replanning = False
        self.problem = ""
        self._show_view()
        if self._pending_verdict is not None:
            seq, self._pending_verdict = self._pending_verdict, None
            self._announce_verdict(seq)

    def on_view_failed(self, message: ViewFailed) -> None:
        if message.generation != self._generation:
            return
        self.replanning = False
        self.problem = "replan failed"
        self._pending_verdict = None
        self.notify(f"replanning failed: {message.reason}. The last good view stays on screen.",
                    title="replan failed", severity="error", timeout=15, markup=False)

    def _show_view(self) -> None:
        v = self.current_view
        self.query_one(StatusLine).view = v
        self.query_one(QueueTable).view = v
        self.query_one(QueueFooter).view = v
        self.query_one(StatePanel).view = v
        self.query_one(LedgerView).view = v
        self.query_one(DriftView).view = v
        self.query_one(OrbitSketch).model = self.sketch_model
        details = self.query_one(BurnDetails)
        details.view = v
        details.row = self.query_one(QueueTable).selected_row()
        self._fit_queue()

    def _fit_queue(self, height: int | None = None) -> None:
        """The queue takes the rows it needs, up to 40 % of the screen."""
        v = self.current_view
        n = len(v.rows) if v is not None else 3
        cap = max(7, int(0.4 * (height if height is not None else self.size.height)))
        self.query_one("#queue-area").styles.height = max(7, min(n + 4, cap))

    def on_resize(self, event) -> None:
        self._fit_queue(event.size.height)

    def _announce_verdict(self, seq: int) -> None:
        v = self.current_view
        row = next((r for r in v.rows if r.seq == seq), None)
        if row is None:
            return
        d = row.drift
        if d is None:
            self.notify(f"burn {row.index} recorded (entry {seq}); no thrust factor reproduces the "
                        "observed orbit: check the orbit determination", title="drift", severity="error",
                        timeout=15, markup=False)
        else:
            severity = {"ok": "information", "watch": "warning", "alarm": "error"}[d.level]
            self.notify(f"burn {row.index}: delivered delta-v {100 * (d.dv_ratio - 1):+.2f} % against "
                        f"the plan, drift {LEVEL_TEXT[d.level]}; thrust factor {d.thrust_factor:.4f}; "
                        f"queue replanned with factor {v.calibration.thrust_factor:.4f}",
                        title=f"burn {row.index} {LEVEL_TEXT[d.level]}", severity=severity, timeout=15,
                        markup=False)
        self.query_one(TabbedContent).active = "tab-drift"

    # -- reactive attributes down ------------------------------------------------------------
    def watch_now_s(self, now_s: float) -> None:
        self.query_one(StatusLine).now_s = now_s
        self.query_one(QueueTable).now_s = now_s

    def watch_replanning(self, busy: bool) -> None:
        self.query_one(StatusLine).busy = busy
        self.query_one("#queue-area").border_subtitle = "replanning…" if busy else ""

    def watch_problem(self, problem: str) -> None:
        self.query_one(StatusLine).problem = problem

    def _tick(self) -> None:
        self.now_s = self._clock()
        self._check_outside_changes()

    def _check_outside_changes(self) -> None:
        """Another burndesk wrote the same session: take its entries in."""
        try:
            count = self.session.journal.count()
            if count != self.session.journal_next_seq() - 1:
                self.session.reload()
                self.notify("the session was changed outside this console; replanning", title="session",
                            markup=False)
                self.request_replan()
        except Exception as exc:
            if self.problem != "journal unreadable":
                self.problem = "journal unreadable"
                self.notify(f"cannot read the session journal: {exc}", title="session", severity="error",
                            markup=False)

    # -- messages up -------------------------------------------------------------------------
    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        table = self.query_one(QueueTable)
        if event.data_table is table:
            # an empty queue (before the first replan, or while it is refilled) highlights no row
            key = event.row_key.value if event.row_key is not None else None
            self.query_one(BurnDetails).row = table.rows_by_key.get(key)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if event.data_table is self.query_one(QueueTable):
            self.query_one(TabbedContent).active = "tab-details"

    # -- actions -----------------------------------------------------------------------------
    def check_action(self, action: str, parameters) -> bool | None:
        if self.return_code is not None:
            return False  # quitting: a key typed meanwhile opens nothing
        if action in self.MAIN_ONLY and len(self.screen_stack) > 1:
            return False
        return True

    async def on_event(self, event) -> None:
        if isinstance(event, events.Key) and self.return_code is not None:
            return  # keys typed after quitting go nowhere: the screens are being taken down
        await super().on_event(event)

    def _session_dir(self) -> Path:
        """Where relative file names typed in the console are taken: beside the session file."""
        return Path(self.session.journal.path).resolve().parent

    def _body(self):
        from mechanics.session.reducer import scenario_of

        return scenario_of(self.session.state).body

    def action_help(self) -> None:
        if isinstance(self.screen, HelpScreen):
            return
        keys = [(key_label(b.key), _KEY_TEXT.get(b.description, b.description)) for b in self.BINDINGS]
        self.push_screen(HelpScreen(keys + self.OTHER_KEYS))

    @guarded
    def action_apply_state(self) -> None:
        panel = self.query_one(StatePanel)
        ed = panel.editor
        if not ed.dirty and self.current_view is not None:
            self.notify("nothing to apply: the State form shows the latest orbit; edit it first",
                        severity="warning", markup=False)
            return
        body = self._body()
        form, raw, epoch_text = ed.values()
        try:
            epoch, r, v = read_timed_state(form, raw, epoch_text, body, self._session_dir())
        except FormErrors as exc:
            ed.show_errors(exc.errors)
            self.notify("state not applied: see the State form", severity="warning", markup=False)
            return
        from mechanics.session.events import OrbitState

        try:
            seq = self.session.enter_state(OrbitState(epoch, r, v), form)
        except ValueError as exc:
            msg = str(exc)
            ed.show_errors({("epoch" if "epoch" in msg else field_of(msg)): msg})
            self.notify("state not applied: see the State form", severity="warning", markup=False)
            return
        ed.accept()
        ed.clear_errors()
        panel.refresh_hint()
        self.notify(f"state at {epoch_text.strip()} recorded as entry {seq}; replanning", title="state",
                    markup=False)
        self.request_replan()

    @guarded
    def action_apply_target(self) -> None:
        panel = self.query_one(StatePanel)
        ed = panel.target_editor
        if not ed.dirty and self.current_view is not None:
            self.notify("nothing to set: the target form shows the target in force; edit it first",
                        severity="warning", markup=False)
            return
        kind, raw = ed.values()
        try:
            target = read_target(kind, raw, self._body())
        except FormErrors as exc:
            ed.show_errors(exc.errors)
            self.notify("target not set: see the State form", severity="warning", markup=False)
            return
        try:
            seq = self.session.set_target(target)
        except ValueError as exc:
            ed.show_errors({GENERAL: str(exc)})
            return
        ed.accept()
        ed.clear_errors()
        panel.refresh_hint()
        self.notify(f"target {kind} recorded as entry {seq}; replanning", title="target", markup=False)
        self.request_replan()

    def _view_is_current(self) -> bool:
        v = self.current_view
        return v is not None and not self.replanning and v.last_seq == self.session.state.last_seq

    def _already_closed(self, dialog) -> bool:
        """A dialog submitted twice (F2 F2 faster than the app handles them) is closed by the first
        submission; the second must write nothing."""
        return dialog not in self.screen_stack

    @guarded
    def action_record(self) -> None:
        if not self._view_is_current():
            self.notify("wait for the replan to finish: the burn you record must be the one on screen",
                        severity="warning", markup=False)
            return
        nxt = self.current_view.next_burn
        if nxt is None:
            self.notify("no planned burn to record" + (f" ({self.current_view.plan_error})"
                                                      if self.current_view.plan_error else ""),
                        severity="warning", markup=False)
            return
        self.push_screen(RecordScreen(nxt.planned, self._body(), self._session_dir()))

    @guarded
    def on_record_screen_submitted(self, message: RecordScreen.Submitted) -> None:
        if self._already_closed(message.dialog):
            return
        dialog = message.dialog
        if not self._view_is_current():
            dialog.show_errors({GENERAL: "the queue changed meanwhile: wait for the replan, check the burn, "
                                         "then F2 again"})
            return
        nxt = self.current_view.next_burn
        if nxt is None or nxt.index != message.burn:
            dialog.show_errors({GENERAL: f"burn {message.burn} is no longer the next burn; Esc and start again"})
            return
        val = message.values
        try:
            seq = self.session.record_burn(message.burn, val["after"], ignition_s=val["ignition_s"],
                                           duration_s=val["duration_s"], propellant_kg=val["propellant_kg"],
                                           propellant_source=val["propellant_source"],
                                           planned=nxt.planned)
        except ValueError as exc:
            msg = str(exc)
            key = GENERAL
            if "epoch" in msg:
                key = "epoch"
            elif msg.startswith("propellant"):
                key = "propellant"
            elif msg.startswith("ignition"):
                key = "ignition"
            dialog.show_errors({key: msg})
            return
        dialog.dismiss(seq)
        self._pending_verdict = seq
        self.notify(f"burn {message.burn} recorded as entry {seq}; fitting the thrust factor and replanning…",
                    title="record", markup=False)
        self.request_replan()

    @guarded
    def action_gauge(self) -> None:
        v = self.current_view
        book = v.ledger.remaining_kg if v is not None else float("nan")
        self.push_screen(GaugeScreen(self.now_s, book))

    @guarded
    def on_gauge_screen_submitted(self, message: GaugeScreen.Submitted) -> None:
        if self._already_closed(message.dialog):
            return
        try:
            seq = self.session.gauge(message.epoch_s, message.propellant_kg, message.method)
        except ValueError as exc:
            message.dialog.show_errors({GENERAL: str(exc)})
            return
        message.dialog.dismiss(seq)
        self.notify(f"gauge reading {message.propellant_kg:.3f} kg recorded as entry {seq}", title="gauge",
                    markup=False)
        self.request_replan()

    @guarded
    def action_retract(self) -> None:
        self.push_screen(RetractScreen(self.session.entries()))

    @guarded
    def on_retract_screen_submitted(self, message: RetractScreen.Submitted) -> None:
        if self._already_closed(message.dialog):
            return
        try:
            seq = self.session.retract(message.entry, message.reason)
        except ValueError as exc:
            message.dialog.show_errors({"entry": str(exc)})
            return
        message.dialog.dismiss(seq)
        self.notify(f"entry {message.entry} retracted by entry {seq}; replanning", title="retract",
                    markup=False)
        self.request_replan()

    @guarded
    def action_export(self) -> None:
        if not self._view_is_current():
            self.notify("wait for the replan to finish before exporting", severity="warning", markup=False)
            return
        path = self.session.journal.path
        self.push_screen(ExportScreen(str(path.parent / f"{path.stem}-export")))

    @guarded
    def on_export_screen_submitted(self, message: ExportScreen.Submitted) -> None:
        from .session_ops import export_csv

        if self._already_closed(message.dialog):
            return
        try:
            folder = Path(message.folder).expanduser()
        except RuntimeError as exc:  # "~name" of no known user
            message.dialog.show_errors({"folder": f"folder: {message.folder!r}: cannot expand '~' ({exc})"})
            return
        if not folder.is_absolute():  # relative to the session file, not to wherever we started
            folder = self._session_dir() / folder
        try:
            if not folder.exists():
                if not folder.parent.is_dir():
                    raise ValueError(f"{folder.parent} does not exist: only the last folder of the path "
                                     "is created")
                folder.mkdir()
            written = export_csv(self.current_view, folder)
        except (ValueError, OSError) as exc:
            message.dialog.show_errors({"folder": f"folder: {exc}"})
            return
        message.dialog.dismiss(folder)
        self.notify(f"wrote {', '.join(p.name for p in written)} in {folder}", title="export", markup=False)

    async def action_quit(self) -> None:
        """Quit; unapplied edits in the State form need a second Ctrl+Q (applied ones are safe)."""
        try:
            panel = self.query_one(StatePanel)
            unapplied = panel.editor.dirty or panel.target_editor.dirty
        except Exception:
            unapplied = False
        if unapplied and not getattr(self, "_quit_warned", False):
            self._quit_warned = True
            self.notify("the State form has edits that were not applied (F2 / F3); Ctrl+Q again quits "
                        "without them", title="quit", severity="warning", markup=False)
            return
        self.exit()

    def action_cycle_view(self) -> None:
        tabs = self.query_one(TabbedContent)
        k = VIEW_TABS.index(tabs.active) if tabs.active in VIEW_TABS else -1
        tabs.active = VIEW_TABS[(k + 1) % len(VIEW_TABS)]

    def action_focus_queue(self) -> None:
        self.query_one(QueueTable).focus()


def key_label(key: str) -> str:
    """How a key is written for people: f1 -> F1, escape -> Esc, ctrl+q -> Ctrl+Q."""
    if key == "escape":
        return "Esc"
    return "+".join(part.capitalize() if len(part) > 1 else part.upper() for part in key.split("+"))


_KEY_TEXT = {
    "Help": "this help",
    "Apply": "record the orbit in the State form as a new state (the queue replans)",
    "Target": "record the target in the State form (the queue replans)",
    "Record": "record what the next burn did; drift and calibration follow",
    "Gauge": "record a propellant gauge reading",
    "Retract": "withdraw a journal entry by number (asks first; history is kept)",
    "Export": "write queue.csv, ledger.csv, drift.csv into a folder",
    "View": "switch the right panel: burn details, drift, orbit sketch",
    "Queue": "back to the burn queue",
    "Quit": "leave (everything applied is already in the journal)",
}


__all__ = ["BurndeskApp", "data_dir", "default_session_path", "open_or_create", "run_console"]
