"""Modal screens of the burndesk console: help, record a burn, gauge reading, retract, export.

Each form reads its fields with :mod:`console.forms` and, when they read, posts a ``Submitted``
message up to the app, which writes the journal and then either dismisses the screen or hands
the refusal back (``show_errors``).  Nothing here writes the journal.
"""

from __future__ import annotations

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.message import Message
from textual.screen import ModalScreen
from textual.widgets import Footer, Label, Static

from .forms import FormErrors, read_entry, read_gauge, read_record
from .report import CAUTIONS
from .timeutil import format_utc
from .widgets import Cycle, Field, FormBase, StateEditor


class _Dialog(ModalScreen):
    """A modal with a titled dialog box and its own footer (its keys plus the app's)."""

    # a modal screen hides the app's bindings: help and quit are offered here again
    BINDINGS = [Binding("f1", "app.help", "Help", key_display="F1"),
                Binding("ctrl+q", "app.quit", "Quit", key_display="^Q")]
    DEFAULT_CLASSES = "dialog-screen"
    TITLE_TEXT = ""

    def dialog_title(self) -> str:
        return self.TITLE_TEXT

    def on_mount(self) -> None:
        box = self.query_one(".dialog")
        box.border_title = self.dialog_title()

    def action_cancel(self) -> None:
        self.dismiss(None)


class _FormDialog(_Dialog):
    """A dialog holding a form; F2 submits, Esc cancels."""

    BINDINGS = [Binding("f2", "submit", "Submit", key_display="F2"), Binding("escape", "cancel", "Cancel", key_display="Esc")]
    AUTO_FOCUS = "Input"

    def show_errors(self, errors: dict) -> None:
        """Messages beside the fields (called by the app when it refuses an entry)."""
        forms = list(self.query(FormBase))
        for form in forms:
            names = set(form.fields())
            form.show_errors({k: m for k, m in errors.items() if k in names})
        known = set().union(*(set(f.fields()) for f in forms)) if forms else set()
        rest = [m for k, m in errors.items() if k not in known]
        general = self.query_one(".dialog-error", Static)
        general.update(Text("\n".join("✗ " + m for m in rest), style="bold red") if rest else "")
        general.display = bool(rest)

    def on_mount(self) -> None:
        super().on_mount()
        self.query_one(".dialog-error", Static).display = False


# --------------------------------------------------------------------------- help

class HelpScreen(_Dialog):
    """Every key of the console, and the cautions."""

    BINDINGS = [Binding("escape", "cancel", "Close", key_display="Esc"),
                Binding("f1", "cancel", "Close", show=False)]
    TITLE_TEXT = "Help"

    def __init__(self, keys: list[tuple[str, str]]) -> None:
        super().__init__()
        self.keys = keys

    def compose(self) -> ComposeResult:
        with VerticalScroll(classes="dialog help"):
            yield Static(self._keys_table(), id="help-keys")
            yield Static(self._cautions(), id="help-cautions")
        yield Footer()

    def _keys_table(self) -> Table:
        t = Table(box=None, padding=(0, 2), show_header=True, header_style="bold", expand=True)
        t.add_column("key", no_wrap=True, style="bold")
        t.add_column("does")
        for key, text in self.keys:
            t.add_row(key, text)
        return t

    def _cautions(self) -> Text:
        t = Text()
        t.append("\nCautions\n", style="bold")
        for c in CAUTIONS:
            t.append("! ", style="bold red")
            t.append(c + "\n")
        t.append("Drift levels read without colour: ok, WATCH !, ALARM !!.", style="dim")
        return t


# --------------------------------------------------------------------------- record a burn

class RecordScreen(_FormDialog):
    """What the next burn did: ignition, on-time, propellant, and the orbit after it."""

    BINDINGS = [Binding("f2", "submit", "Record", key_display="F2"), Binding("escape", "cancel", "Cancel", key_display="Esc")]

    class Submitted(Message):
        def __init__(self, screen: "RecordScreen", burn: int, values: dict) -> None:
            super().__init__()
            self.dialog = screen
            self.burn = burn
            self.values = values

    def __init__(self, planned, body, base_dir=None) -> None:
        super().__init__()
        self.planned = planned
        self.body = body
        self.base_dir = base_dir  # where a relative OPM file name is taken (the session's folder)

    def dialog_title(self) -> str:
        return f"Record burn {self.planned.index}"

    def compose(self) -> ComposeResult:
        b = self.planned
        with VerticalScroll(classes="dialog record"):
            yield Static(Text.assemble(
                ("as commanded: ", "dim"), f"{b.apsis}, ignition {format_utc(b.ignition_s)}, "
                f"{b.duration_s:.1f} s, {b.dv_m_s:.3f} m/s, {b.propellant_kg:.3f} kg"), classes="dialog-note")
            with FormBase(id="record-burn"):
                yield Field("ignition", "ignition", value=format_utc(b.ignition_s))
                yield Field("duration", "on-time", placeholder="e.g. 382.6 s", value=f"{b.duration_s:.3f} s")
                yield Field("propellant", "prop used", placeholder="blank: book-kept from the fit")
                with Horizontal(classes="field-row"):
                    yield Label("source", classes="field-label")
                    yield Cycle(("book-keeping", "gauge"), id="source")
            yield Static(Text("orbit after the burn (orbit determination)", style="bold"), classes="dialog-note")
            yield StateEditor(epoch_label="OD epoch", id="record-after")
            yield Static("", classes="dialog-error")
        yield Footer()

    def action_submit(self) -> None:
        form_raw = self.query_one("#record-burn", FormBase).raw()
        form_raw["source"] = self.query_one("#source", Cycle).value
        ed = self.query_one("#record-after", StateEditor)
        form, after_raw, epoch = ed.values()
        raw = dict(form_raw, after_epoch=epoch)
        try:
            values = read_record(raw, form, after_raw, self.body, self.base_dir)
        except FormErrors as exc:
            errors = dict(exc.errors)
            if "after_epoch" in errors:
                errors["epoch"] = errors.pop("after_epoch")
            self.show_errors(errors)
            return
        self.show_errors({})
        self.post_message(self.Submitted(self, self.planned.index, values))


# --------------------------------------------------------------------------- gauge reading

class GaugeScreen(_FormDialog):
    """A propellant gauge reading (book-keeping is compared with it)."""

    BINDINGS = [Binding("f2", "submit", "Record", key_display="F2"), Binding("escape", "cancel", "Cancel", key_display="Esc")]
    TITLE_TEXT = "Gauge reading"
    AUTO_FOCUS = "#in-propellant"

    class Submitted(Message):
        def __init__(self, screen: "GaugeScreen", epoch_s: float, propellant_kg: float, method: str) -> None:
            super().__init__()
            self.dialog = screen
            self.epoch_s = epoch_s
            self.propellant_kg = propellant_kg
            self.method = method

    def __init__(self, epoch_s: float, book_kg: float) -> None:
        super().__init__()
        self.epoch_s = epoch_s
        self.book_kg = book_kg

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog gauge"):
            yield Static(Text(f"book-keeping says {self.book_kg:.3f} kg on board", style="dim"),
                         classes="dialog-note")
            with FormBase(id="gauge-form"):
                yield Field("epoch", "epoch UTC", value=format_utc(self.epoch_s, 0))
                yield Field("propellant", "on board", placeholder="e.g. 10.2 kg")
                yield Field("method", "method", placeholder="PVT", value="PVT")
            yield Static("", classes="dialog-error")
        yield Footer()

    def action_submit(self) -> None:
        try:
            epoch, kg, method = read_gauge(self.query_one(FormBase).raw())
        except FormErrors as exc:
            self.show_errors(exc.errors)
            return
        self.show_errors({})
        self.post_message(self.Submitted(self, epoch, kg, method))


# --------------------------------------------------------------------------- retract

class RetractScreen(_FormDialog):
    """Withdraw an entry by its number, after a confirmation; history itself stays."""

    BINDINGS = [Binding("f2", "submit", "Retract…", key_display="F2"), Binding("escape", "cancel", "Cancel", key_display="Esc"),
                Binding("y", "confirm", "Yes, retract", key_display="Y"), Binding("n", "back", "No", key_display="N")]
    TITLE_TEXT = "Retract an entry"
    AUTO_FOCUS = "#in-entry"

    class Submitted(Message):
        def __init__(self, screen: "RetractScreen", entry: int, reason: str) -> None:
            super().__init__()
            self.dialog = screen
            self.entry = entry
            self.reason = reason

    def __init__(self, entries) -> None:
        super().__init__()
        self.entries = list(entries)
        self.pending: int | None = None

    def compose(self) -> ComposeResult:
        with VerticalScroll(classes="dialog retract"):
            yield Static(self._entries_table(), id="retract-entries")
            with FormBase(id="retract-form"):
                yield Field("entry", "entry no.", placeholder="e.g. 2")
                yield Field("reason", "reason", placeholder="why (kept in the journal)")
            yield Static("", id="retract-confirm")
            yield Static("", classes="dialog-error")
        yield Footer()

    def on_mount(self) -> None:
        super().on_mount()
        self.query_one("#retract-confirm", Static).display = False

    def _entries_table(self) -> Table:
        t = Table(box=None, padding=(0, 1), expand=True, show_header=True, header_style="bold")
        t.add_column("entry", justify="right", no_wrap=True)
        t.add_column("what")
        t.add_column("status", no_wrap=True)
        for seq, _written, _kind, summary, status in self.entries:
            t.add_row(str(seq), summary, Text(status or "active", style="dim" if status else ""))
        return t

    def check_action(self, action: str, parameters) -> bool | None:
        confirming = self.pending is not None
        if action in ("confirm", "back"):
            return confirming
        if action == "submit":
            return not confirming
        return True

    def _summary(self, entry: int) -> str | None:
        for seq, _w, _k, summary, status in self.entries:
            if seq == entry:
                return summary + (f" [{status}]" if status else "")
        return None

    def action_submit(self) -> None:
        form = self.query_one(FormBase)
        try:
            entry = read_entry(form.raw()["entry"])
        except FormErrors as exc:
            self.show_errors(exc.errors)
            return
        summary = self._summary(entry)
        if summary is None:
            self.show_errors({"entry": f"entry: there is no entry {entry}"})
            return
        self.show_errors({})
        self.pending = entry
        note = self.query_one("#retract-confirm", Static)
        note.update(Text.assemble(("Retract entry ", "bold"), (str(entry), "bold"), f": {summary}?\n",
                                  ("Y", "bold reverse"), " yes, retract   ", ("N", "bold reverse"), " no, go back"))
        note.display = True
        self.set_focus(None)
        self.refresh_bindings()

    def action_back(self) -> None:
        self.pending = None
        self.query_one("#retract-confirm", Static).display = False
        self.query_one(FormBase).fields()["entry"].input.focus()
        self.refresh_bindings()

    def action_confirm(self) -> None:
        if self.pending is None:
            return
        reason = self.query_one(FormBase).raw()["reason"].strip()
        self.post_message(self.Submitted(self, self.pending, reason))

    def show_errors(self, errors: dict) -> None:
        if errors and self.pending is not None:
            self.action_back()
        super().show_errors(errors)


# --------------------------------------------------------------------------- export

class ExportScreen(_FormDialog):
    """Write queue.csv, ledger.csv and drift.csv into a folder."""

    BINDINGS = [Binding("f2", "submit", "Export", key_display="F2"), Binding("escape", "cancel", "Cancel", key_display="Esc")]
    TITLE_TEXT = "Export CSV"

    class Submitted(Message):
        def __init__(self, screen: "ExportScreen", folder: str) -> None:
            super().__init__()
            self.dialog = screen
            self.folder = folder

    def __init__(self, folder: str) -> None:
        super().__init__()
        self.folder = folder

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog export"):
            yield Static(Text("queue.csv, ledger.csv and drift.csv (units in the headers); a relative "
                              "folder is taken beside the session file, and only its last part is "
                              "created if missing", style="dim"), classes="dialog-note")
            with FormBase(id="export-form"):
                yield Field("folder", "folder", placeholder="/path/to/folder", value=self.folder)
            yield Static("", classes="dialog-error")
        yield Footer()

    def action_submit(self) -> None:
        folder = self.query_one(FormBase).raw()["folder"].strip()
        if not folder:
            self.show_errors({"folder": "folder: give a folder to write into"})
            return
        self.show_errors({})
        self.post_message(self.Submitted(self, folder))


__all__ = ["ExportScreen", "GaugeScreen", "HelpScreen", "RecordScreen", "RetractScreen"]
