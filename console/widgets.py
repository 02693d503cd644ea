"""Widgets of the burndesk console.

Attributes down, messages up: the app sets reactive attributes on these widgets (``view``,
``now_s``, ``row``, ...) and they redraw; what an operator does in them goes up as Textual
messages.  No widget touches the session journal or runs numerical work.

Drift levels always carry their word and a mark (``ok``, ``WATCH !``, ``ALARM !!``) besides any
colour, so every screen reads on a monochrome terminal.
"""

from __future__ import annotations

import math
import re

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import DataTable, Input, Label, Static

from .forms import (ALL_TARGET_FIELDS, STATE_FIELDS, STATE_FORMS, TARGET_FIELDS, TARGET_KINDS, state_text,
                    target_text)
from .timeutil import format_duration, format_utc

#: every state field once, so that each form shows its fields in its own order
STATE_FIELD_ORDER = ("opm", "r", "v", "a", "e", "periapsis_alt", "apoapsis_alt", "i", "raan", "argp", "nu")
LEVEL_TEXT = {"ok": "ok", "watch": "WATCH !", "alarm": "ALARM !!"}
LEVEL_STYLE = {"ok": "green", "watch": "bold yellow", "alarm": "bold red"}

FIELD_LABELS = {
    "epoch": "epoch UTC", "r": "r x y z", "v": "v x y z", "a": "a", "e": "e", "i": "i", "raan": "RAAN",
    "argp": "arg peri", "nu": "true anom", "periapsis_alt": "peri alt", "apoapsis_alt": "apo alt",
    "altitude": "altitude", "via_alt": "via alt", "opm": "OPM file",
}
FIELD_HINTS = {
    "epoch": "2027-03-14T06:00:00Z", "r": "6778 0 0 km", "v": "0 7.67 0 km/s", "a": "6921 km",
    "e": "0.0016", "i": "97.6 deg", "raan": "131 deg", "argp": "48 deg", "nu": "300 deg",
    "periapsis_alt": "380 km", "apoapsis_alt": "402 km", "altitude": "560 km", "via_alt": "900 km",
    "opm": "od/wren3.opm (EPOCH from the file)",
}


def utc_field_text(t_s: float) -> str:
    """UTC for a field: whole seconds when that loses nothing, else milliseconds."""
    return format_utc(t_s, 0) if abs(t_s - round(t_s)) < 5e-4 else format_utc(t_s)


APSIS_SHORT = {"periapsis": "peri", "apoapsis": "apo"}


def level_text(level: str | None) -> Text:
    """The drift level as a word and a mark, coloured as well."""
    if level is None:
        return Text("-")
    return Text(LEVEL_TEXT[level], style=LEVEL_STYLE[level])


def _safe_render(fn):
    """Render through ``fn``; a failure shows as one line instead of ending the console."""
    def render(self):
        try:
            return fn(self)
        except Exception as exc:  # a drawing bug must never take the console down
            return Text(f"cannot draw this panel ({type(exc).__name__}: {exc})", style="bold red")
    render.__name__ = fn.__name__
    return render


# --------------------------------------------------------------------------- small parts

class Cycle(Static, can_focus=True):
    """A choice among a few words: left/right (or space) steps through them."""

    BINDINGS = [Binding("left", "step(-1)", "Previous", show=False),
                Binding("right,space", "step(1)", "Next", show=False)]

    value = reactive("")

    class Changed(Message):
        """The operator picked another option."""

        def __init__(self, cycle: "Cycle", value: str) -> None:
            super().__init__()
            self.cycle = cycle
            self.value = value

        @property
        def control(self) -> "Cycle":
            return self.cycle

    def __init__(self, options, value: str | None = None, **kw) -> None:
        super().__init__(**kw)
        self.options = tuple(options)
        self.set_reactive(Cycle.value, value if value is not None else self.options[0])

    def render(self) -> Text:
        return Text.assemble(("◂ ", "dim"), (self.value, "bold"), (" ▸", "dim"))

    def action_step(self, step: int) -> None:
        k = self.options.index(self.value) if self.value in self.options else 0
        self.value = self.options[(k + step) % len(self.options)]
        self.post_message(self.Changed(self, self.value))

    def on_click(self) -> None:
        self.action_step(1)


class Field(Vertical):
    """A labelled one-line text field with its validation message underneath."""

    error = reactive("")

    def __init__(self, name: str, label: str | None = None, placeholder: str = "", value: str = "", **kw) -> None:
        super().__init__(id=f"f-{name}", classes="field", **kw)
        self.field_name = name
        self._initial = value
        self._label = label or FIELD_LABELS.get(name, name)
        self._placeholder = placeholder or ("e.g. " + FIELD_HINTS[name] if name in FIELD_HINTS else "")

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field-row"):
            yield Label(self._label, classes="field-label")
            yield Input(self._initial, placeholder=self._placeholder, compact=True, id=f"in-{self.field_name}",
                        classes="field-input")
        yield Static("", classes="field-error")

    def on_mount(self) -> None:
        if self.app.is_headless:  # a blinking cursor would make screenshots differ
            self.query_one(Input).cursor_blink = False

    @property
    def input(self) -> Input:
        return self.query_one(Input)

    @property
    def value(self) -> str:
        return self.input.value

    @value.setter
    def value(self, text: str) -> None:
        inp = self.input
        inp.value = text
        if inp.has_focus:  # typing replaces what was filled in
            inp.select_all()
        else:  # show the start of a long value
            inp.cursor_position = 0

    def watch_error(self, message: str) -> None:
        err = self.query_one(".field-error", Static)
        err.update(Text("✗ " + message, style="bold red") if message else "")
        err.display = bool(message)
        self.set_class(bool(message), "-invalid")


class FormBase(Vertical):
    """Fields by name; Enter moves on to the next field (forms are applied with a key)."""

    def fields(self) -> dict[str, Field]:
        return {f.field_name: f for f in self.query(Field)}

    def raw(self) -> dict[str, str]:
        return {name: f.value for name, f in self.fields().items()}

    def show_errors(self, errors: dict[str, str]) -> None:
        """Put each message beside its field (unknown fields and ``GENERAL`` go to the end)."""
        fields = self.fields()
        rest = []
        for name, f in fields.items():
            f.error = errors.get(name, "")
        for name, msg in errors.items():
            if name not in fields or not fields[name].display:
                rest.append(msg)
        general = self.query(".form-error")
        if general:
            g = general.first(Static)
            g.update(Text("\n".join("✗ " + m for m in rest), style="bold red") if rest else "")
            g.display = bool(rest)

    def clear_errors(self) -> None:
        self.show_errors({})

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.screen.focus_next()


class StateEditor(FormBase):
    """An orbit in any of the three forms, with its epoch."""

    def __init__(self, epoch_label: str = "epoch UTC", **kw) -> None:
        super().__init__(**kw)
        self.epoch_label = epoch_label
        self._filled: dict[str, str] = {}

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field-row"):
            yield Label("form", classes="field-label")
            yield Cycle(STATE_FORMS, "apsides", classes="form-cycle")
        yield Field("epoch", self.epoch_label)
        for name in STATE_FIELD_ORDER:
            yield Field(name)
        yield Static("", classes="form-error")

    def on_mount(self) -> None:
        self._show_form(self.form)
        self.query_one(".form-error", Static).display = False

    @property
    def cycle(self) -> Cycle:
        return self.query_one(Cycle)

    @property
    def form(self) -> str:
        return self.cycle.value

    def _show_form(self, form: str) -> None:
        wanted = set(STATE_FIELDS[form]) | {"epoch"}
        for name, f in self.fields().items():
            f.display = name in wanted

    def set_form(self, form: str) -> None:
        self.cycle.value = form
        self._show_form(form)

    def values(self) -> tuple[str, dict, str]:
        """(form, field text of that form, epoch text)."""
        raw = self.raw()
        return self.form, {k: raw[k] for k in STATE_FIELDS[self.form]}, raw["epoch"]

    def fill(self, form: str, r_m, v_m_s, epoch_s: float, body) -> None:
        """Show a state in ``form`` (the fields of the other forms keep their text)."""
        self.set_form(form)
        fields = self.fields()
        texts = state_text(form, r_m, v_m_s, body)
        texts["epoch"] = utc_field_text(epoch_s)
        for name, text in texts.items():
            fields[name].value = text
        self._filled = {"form": form, **{k: texts[k] for k in texts}}
        self.clear_errors()

    def accept(self) -> None:
        """Take the fields as they stand as clean (after they were applied)."""
        form, raw, epoch = self.values()
        self._filled = {"form": form, "epoch": epoch, **raw}

    class FormSwitched(Message):
        """The operator picked another state form."""

        def __init__(self, editor: "StateEditor", form: str) -> None:
            super().__init__()
            self.editor = editor
            self.form = form

        @property
        def control(self) -> "StateEditor":
            return self.editor

    def on_cycle_changed(self, event: Cycle.Changed) -> None:
        event.stop()
        self._show_form(event.value)
        self.clear_errors()
        self.post_message(self.FormSwitched(self, event.value))

    @property
    def dirty(self) -> bool:
        """True when the operator changed something since the last fill."""
        if not self._filled:
            return False
        form, raw, epoch = self.values()
        if form != self._filled.get("form"):
            return True
        return epoch != self._filled.get("epoch") or any(raw[k] != self._filled.get(k) for k in raw)


class TargetEditor(FormBase):
    """The target: kind and the fields the kind needs (plus an optional inclination)."""

    def __init__(self, **kw) -> None:
        super().__init__(**kw)
        self._filled: dict[str, str] = {}

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field-row"):
            yield Label("target", classes="field-label")
            yield Cycle(TARGET_KINDS, "circular", classes="kind-cycle")
        for name in ALL_TARGET_FIELDS:
            yield Field(name, placeholder="(keep plane)" if name == "i" else "")
        yield Static("", classes="form-error")

    def on_mount(self) -> None:
        self._show_kind(self.kind)
        self.query_one(".form-error", Static).display = False

    @property
    def kind(self) -> str:
        return self.query_one(Cycle).value

    def _show_kind(self, kind: str) -> None:
        wanted = set(TARGET_FIELDS[kind]) | {"i"}
        for name, f in self.fields().items():
            f.display = name in wanted

    def values(self) -> tuple[str, dict]:
        raw = self.raw()
        return self.kind, {k: raw[k] for k in TARGET_FIELDS[self.kind] + ("i",)}

    def fill(self, target, body) -> None:
        kind, texts = target_text(target, body)
        self.query_one(Cycle).value = kind
        self._show_kind(kind)
        fields = self.fields()
        for name, text in texts.items():
            fields[name].value = text
        self._filled = {"kind": kind, **texts}
        self.clear_errors()

    def accept(self) -> None:
        """Take the fields as they stand as clean (after they were applied)."""
        kind, raw = self.values()
        self._filled = {"kind": kind, **raw}

    @property
    def dirty(self) -> bool:
        if not self._filled:
            return False
        kind, raw = self.values()
        return kind != self._filled.get("kind") or any(raw[k] != self._filled.get(k, "") for k in raw)

    def on_cycle_changed(self, event: Cycle.Changed) -> None:
        event.stop()
        self._show_kind(event.value)
        self.clear_errors()


class StatePanel(Vertical):
    """The **State** area: the latest known orbit, its editor and the target editor."""

    view = reactive(None, always_update=True)

    def compose(self) -> ComposeResult:
        yield Static("", id="state-summary")
        yield StateEditor(id="state-editor")
        yield Static("", id="state-hint")
        yield TargetEditor(id="target-editor")

    def on_mount(self) -> None:
        self.border_title = "State"

    @property
    def editor(self) -> StateEditor:
        return self.query_one(StateEditor)

    @property
    def target_editor(self) -> TargetEditor:
        return self.query_one(TargetEditor)

    def watch_view(self, v) -> None:
        summary = self.query_one("#state-summary", Static)
        if v is None:
            summary.update(Text("loading the session…", style="dim"))
            return
        try:
            summary.update(latest_summary(v))
            if not self.editor.dirty:
                self.editor.fill(self.editor.form, v.latest.r_m, v.latest.v_m_s, v.latest.epoch_s,
                                 v.scenario.body)
            if not self.target_editor.dirty:
                self.target_editor.fill(v.scenario.target, v.scenario.body)
        except Exception as exc:  # a drawing bug must not end the console
            summary.update(Text(f"cannot show the latest state ({type(exc).__name__}: {exc})", style="bold red"))
        self.refresh_hint()

    def refresh_hint(self) -> None:
        parts = []
        if self.editor.dirty:
            parts.append("orbit edited: F2 applies")
        if self.target_editor.dirty:
            parts.append("target edited: F3 sets it")
        text = " · ".join(parts)
        if text == getattr(self, "_hint_text", None):
            return  # unchanged: no relayout on every key typed
        self._hint_text = text
        hint = self.query_one("#state-hint", Static)
        hint.update(Text(text, style="italic yellow"))
        hint.display = bool(parts)

    def on_input_changed(self, event: Input.Changed) -> None:
        self.refresh_hint()

    def on_state_editor_form_switched(self, event: StateEditor.FormSwitched) -> None:
        event.stop()
        v = self.view
        if v is not None:  # show the latest state in the form just picked
            self.editor.fill(event.form, v.latest.r_m, v.latest.v_m_s, v.latest.epoch_s, v.scenario.body)
        self.refresh_hint()

    def on_cycle_changed(self, event: Cycle.Changed) -> None:
        self.refresh_hint()


def latest_summary(v) -> Text:
    from mechanics.elements import rv_to_elements

    R = v.scenario.body.radius_m
    el = rv_to_elements(list(v.latest.r_m), list(v.latest.v_m_s), v.scenario.body.mu_m3_s2)
    t = Text()
    t.append("orbit at ", style="dim")
    t.append(utc_field_text(v.latest.epoch_s), style="bold")
    apo = float(el.apoapsis_radius_m)
    apo_text = f"{(apo - R) / 1e3:.1f}" if math.isfinite(apo) else "open"
    t.append(f"\n{(float(el.periapsis_radius_m) - R) / 1e3:.1f} x {apo_text} km · "
             f"i {math.degrees(float(el.i_rad)):.2f}°\n")
    t.append(f"{v.latest.mass_kg:.2f} kg · ")
    t.append(f"from {v.latest.source}", style="dim")
    return t


# --------------------------------------------------------------------------- header line

class StatusLine(Widget):
    """One line: session, UTC clock, the next ignition and its countdown, replanning state."""

    now_s = reactive(0.0)
    view = reactive(None, always_update=True)
    busy = reactive(False)
    problem = reactive("")
    title = reactive("")

    @_safe_render
    def render(self) -> Text:
        left = Text()
        left.append(" burndesk ", style="bold reverse")
        left.append(f" {self.title}")
        right = Text()
        if self.busy:
            right.append("⟳ replanning… ", style="bold yellow")
        elif self.problem:
            right.append(f"✗ {self.problem} ", style="bold red")
        v = self.view
        nxt = v.next_burn if v is not None else None
        if nxt is not None:
            b = nxt.planned
            right.append(f"next: burn {b.index} ", style="bold")
            right.append(f"{format_utc(b.ignition_s, 0)[11:]} ")
            right.append(format_duration(b.ignition_s - self.now_s), style="bold magenta")
            right.append(" │ ")
        elif v is not None:
            right.append("no burn planned │ ", style="dim")
        right.append("UTC ", style="dim")
        right.append(format_utc(self.now_s, 0).replace("T", " ")[:-1], style="bold")
        right.append(" ")
        width = self.size.width
        gap = width - left.cell_len - right.cell_len
        if gap < 1:
            left.truncate(max(width - right.cell_len - 1, 0), overflow="ellipsis")
            gap = max(width - left.cell_len - right.cell_len, 1)
        return Text.assemble(left, " " * gap, right, no_wrap=True, overflow="crop")


# --------------------------------------------------------------------------- burn queue

QUEUE_COLUMNS = (("idx", "#"), ("apsis", "apsis"), ("ignition", "ignition UTC"), ("countdown", "countdown"),
                 ("dur", "dur s"), ("dv", "dv m/s"), ("prop", "prop kg"), ("status", "status"),
                 ("drift", "drift"))


def row_key(row) -> str:
    return f"{row.status}-{row.index}-{row.seq or 0}"


class QueueTable(DataTable):
    """The **Burn queue**: one row per burn, the next one marked ``▶`` and bold."""

    view = reactive(None, always_update=True)
    now_s = reactive(0.0)

    def __init__(self, **kw) -> None:
        super().__init__(cursor_type="row", zebra_stripes=True, **kw)
        self.rows_by_key: dict[str, object] = {}
        self._next_key: str | None = None

    def on_mount(self) -> None:
        for key, label in QUEUE_COLUMNS:
            self.add_column(label, key=key)

    def selected_row(self):
        if not self.rows_by_key or self.row_count == 0:
            return None
        try:
            key = self.coordinate_to_cell_key((self.cursor_row, 0)).row_key.value
        except Exception:
            return None
        return self.rows_by_key.get(key)

    def watch_view(self, v) -> None:
        try:
            self._fill(v)
        except Exception as exc:  # a drawing bug must not end the console; the journal is safe
            self.app.notify(f"cannot draw the queue ({type(exc).__name__}: {exc})", severity="error",
                            markup=False)

    def _fill(self, v) -> None:
        keep = self.selected_row()
        keep_key = row_key(keep) if keep is not None else None
        self.clear()
        self.rows_by_key = {}
        if v is None:
            return
        nxt = v.next_burn
        self._next_key = row_key(nxt) if nxt is not None else None
        for row in v.rows:
            key = row_key(row)
            self.rows_by_key[key] = row
            self.add_row(*self._cells(row, key == self._next_key), key=key)
        target = keep_key if keep_key in self.rows_by_key else self._next_key
        if target is not None:
            self.move_cursor(row=self.get_row_index(target), animate=False)

    def watch_now_s(self, now_s: float) -> None:
        for key, row in self.rows_by_key.items():
            if row.status == "planned":
                try:
                    self.update_cell(key, "countdown", self._countdown(row, key == self._next_key))
                except Exception:
                    pass

    def _countdown(self, row, is_next: bool) -> Text:
        if row.status == "done":
            return Text("flown", style="dim")
        if row.status == "retracted":
            return Text("—", style="dim")
        return Text(format_duration(row.planned.ignition_s - self.now_s),
                    style="bold magenta" if is_next else "")

    def _cells(self, row, is_next: bool):
        b = row.planned
        a = row.actual or {}
        done = row.status == "done"
        ign = a.get("ignition_s", b.ignition_s) if done else b.ignition_s
        dur = a.get("duration_s", b.duration_s) if done else b.duration_s
        dv = a.get("dv_m_s") if done and a.get("dv_m_s") is not None else b.dv_m_s
        prop = a.get("propellant_kg") if done and a.get("propellant_kg") is not None else b.propellant_kg
        style = "bold" if is_next else ("dim" if row.status == "retracted" else "")
        mark = "▶" if is_next else " "
        drift = level_text(row.drift.level if row.drift else None)
        return (Text(f"{mark}{row.index}", style=style), Text(APSIS_SHORT.get(b.apsis, b.apsis), style=style),
                Text(format_utc(ign, 0), style=style), self._countdown(row, is_next),
                Text(f"{dur:.1f}", style=style, justify="right"), Text(f"{dv:.3f}", style=style, justify="right"),
                Text(f"{prop:.3f}", style=style, justify="right"), Text(row.status, style=style), drift)


class QueueFooter(Static):
    """One line under the queue: feasibility, final orbit, calibration, warnings."""

    view = reactive(None, always_update=True)

    def watch_view(self, v) -> None:
        self.update(queue_summary(v) if v is not None else "")


def queue_summary(v) -> Text:
    t = Text()
    if v.plan_error:
        t.append("✗ PLAN ERROR ", style="bold red")
        t.append(v.plan_error)
        return t
    if v.plan is not None:
        t.append("FEASIBLE" if v.feasible else "✗ NOT FEASIBLE", style="bold green" if v.feasible else "bold red")
        R = v.scenario.body.radius_m
        kind = "mean" if v.scenario.model == "two-body+J2" else "osc."
        t.append(f" · final {kind} {(v.plan.final_periapsis_radius_m - R) / 1e3:.1f} x "
                 f"{(v.plan.final_apoapsis_radius_m - R) / 1e3:.1f} km")
        if v.plan.target_i_rad is not None:
            t.append(f", i {math.degrees(v.plan.final_i_rad):.3f} deg")
    else:
        t.append("no target or vehicle: nothing to plan", style="dim")
    cal = v.calibration
    t.append(f" · thrust factor {cal.thrust_factor:.4f}")
    planned = sum(1 for r in v.rows if r.status == "planned")
    done = sum(1 for r in v.rows if r.status == "done")
    t.append(f" · {done} flown, {planned} to go")
    if v.warnings:
        t.append(f" · ! {len(v.warnings)} warning(s), see Drift", style="yellow")
    return t


# --------------------------------------------------------------------------- burn details

class BurnDetails(Static):
    """Everything about the selected burn."""

    row = reactive(None, always_update=True)
    view = reactive(None, always_update=True)

    def watch_row(self, row) -> None:
        self._draw()

    def watch_view(self, v) -> None:
        self._draw()

    def _draw(self) -> None:
        try:
            self.update(burn_details(self.row, self.view) if self.row is not None and self.view is not None
                        else Text("select a burn in the queue (↑ ↓)", style="dim"))
        except Exception as exc:
            self.update(Text(f"cannot show this burn ({type(exc).__name__}: {exc})", style="bold red"))


def burn_details(row, v):
    from rich.console import Group

    b = row.planned
    R = v.scenario.body.radius_m
    g = Table.grid(padding=(0, 1))
    g.add_column(style="dim", no_wrap=True)
    g.add_column()
    head = Text(f"burn {row.index}", style="bold")
    head.append(f" · {b.apsis} · leg {b.leg + 1} · {row.status}" + (f" · entry {row.seq}" if row.seq else ""))
    g.add_row("ignition", format_utc(b.ignition_s))
    g.add_row("cutoff", format_utc(b.cutoff_s))
    g.add_row("apsis", format_utc(b.apsis_time_s))
    g.add_row("duration", f"{b.duration_s:.1f} s · arc {math.degrees(b.arc_rad):.1f} deg")
    g.add_row("delta-v", f"{b.dv_m_s:.3f} m/s (impulsive {b.impulsive_dv_m_s:.3f}, "
                         f"finite loss {b.finite_loss_m_s:.3f})")
    g.add_row("propellant", f"{b.propellant_kg:.3f} kg")
    g.add_row("mass", f"{b.mass_before_kg:.3f} → {b.mass_after_kg:.3f} kg")
    g.add_row("engine", f"{b.thrust_n:.3f} N · {b.mdot_kg_s * 1e3:.4f} g/s")
    if b.attitude_mode == "inertial":
        x, y, z = b.direction
        ra = math.degrees(math.atan2(y, x)) % 360.0
        dec = math.degrees(math.asin(max(-1.0, min(1.0, z))))
        g.add_row("attitude", f"inertial, fixed along ({x:+.4f}, {y:+.4f}, {z:+.4f})")
        g.add_row("", f"RA {ra:.2f} deg, Dec {dec:+.2f} deg")
    else:
        g.add_row("attitude", f"tracking, {'prograde' if b.sense > 0 else 'retrograde'}")
        if b.carries_plane_change:
            t, h, n = b.direction
            g.add_row("", f"(v, r x v, v x h) components ({t:+.4f}, {h:+.4f}, {n:+.4f})")
    if b.carries_plane_change:
        g.add_row("plane", f"{math.degrees(b.out_of_plane_rad):+.2f} deg out of the orbit plane (toward "
                           f"r x v); inclination to {math.degrees(b.goal_i_rad):.4f} deg")
    later = b.ignition_half_duration_s - b.ignition_s
    g.add_row("centring", f"half-dv rule; the half-duration rule would ignite {later:+.3f} s later "
                          f"({format_utc(b.ignition_half_duration_s)})")
    shift = b.centre_shift_s
    if shift:
        g.add_row("", f"centre {shift:+.1f} s from the {b.apsis} passage (centre time solved together with the burn)")
    kind = "mean" if v.scenario.model == "two-body+J2" else "osculating"
    after_i = b.after_i_rad
    g.add_row("after", f"{(b.after_periapsis_radius_m - R) / 1e3:.3f} x "
                       f"{(b.after_apoapsis_radius_m - R) / 1e3:.3f} km"
                       + (f", i {math.degrees(after_i):.4f} deg"
                          if math.isfinite(after_i) and b.carries_plane_change else "")
                       + f" ({kind})")
    a = row.actual
    if a:
        g.add_row("", "")
        g.add_row("flown", Text("as recorded", style="bold"))
        g.add_row("ignition", f"{format_utc(a['ignition_s'])} ({a['ignition_s'] - b.ignition_s:+.1f} s)")
        g.add_row("duration", f"{a['duration_s']:.1f} s")
        if a.get("propellant_kg") is not None:
            g.add_row("propellant", f"{a['propellant_kg']:.3f} kg ({a.get('propellant_source')})")
        if a.get("dv_m_s") is not None:
            g.add_row("delta-v", f"{a['dv_m_s']:.3f} m/s delivered")
    d = row.drift
    if d is not None:
        lt = level_text(d.level)
        lt.append(f"  dv ratio {d.dv_ratio:.4f}, thrust factor {d.thrust_factor:.4f}")
        g.add_row("drift", lt)
        for f in d.flags:
            g.add_row("", Text("! " + f, style="yellow"))
    return Group(head, g)


# --------------------------------------------------------------------------- drift

class DriftView(Static):
    """Per recorded burn: delta-v ratio, level, flags, thrust factor; the running factor."""

    view = reactive(None, always_update=True)

    def watch_view(self, v) -> None:
        try:
            self.update(drift_table(v) if v is not None else "")
        except Exception as exc:
            self.update(Text(f"cannot show drift ({type(exc).__name__}: {exc})", style="bold red"))


def drift_table(v):
    """The drift view: the running factor, then one block per recorded burn with its flags."""
    from rich.console import Group

    cal = v.calibration
    head = Text()
    head.append("thrust factor ", style="dim")
    head.append(f"{cal.thrust_factor:.4f}", style="bold")
    head.append(f" ± {cal.spread:.4f}" if cal.spread is not None else " (no spread yet)")
    head.append(f" from {cal.burns_used} burn(s); 1 = rated", style="dim")
    rows = [r for r in v.rows if r.status in ("done", "retracted")]
    parts = [head]
    if not rows:
        parts.append(Text("no burn recorded yet: F4 records what a burn did", style="dim"))
    for r in rows:
        d = r.drift
        t = Text()
        t.append(f"burn {r.index}  ", style="bold")
        if r.status == "retracted":
            t.append(f"retracted (entry {r.seq})", style="dim")
        elif d is None:
            t.append("no fit: no thrust factor reproduces the observed orbit", style="bold red")
        else:
            t.append_text(level_text(d.level))
            t.append(f"  dv ratio {d.dv_ratio:.4f}  factor {d.thrust_factor:.4f}")
            if d.isp_ratio is not None:
                t.append(f"  Isp ratio {d.isp_ratio:.3f}")
        parts.append(t)
        for f in (d.flags if d is not None and r.status != "retracted" else ()):
            parts.append(Text("    ! " + f, style="yellow"))
    others = [w for w in v.warnings if not re.match(r"burn \d+: drift ", w)]
    if others:
        parts.append(Text(""))
    for w in others:
        parts.append(Text("! " + w, style="yellow"))
    return Group(*parts)


# --------------------------------------------------------------------------- ledger

class LedgerView(Widget):
    """The **Propellant ledger** figures and a text gauge of what is in the tanks."""

    view = reactive(None, always_update=True, layout=True)

    @_safe_render
    def render(self):
        v = self.view
        if v is None:
            return Text("")
        return ledger_renderable(v.ledger, max(self.size.width, 10))


GAUGE_PARTS = (("held", "▓", "grey62"), ("margin", "█", "green"), ("plan", "▒", "yellow"),
               ("used", "·", "grey42"))


def gauge_bar(lg, width: int) -> Text:
    """``[▓▓███▒▒····]``: held (unusable + reserve), margin, still planned, used (empty)."""
    inner = max(width - 2, 4)
    loaded = lg.loaded_kg if lg.loaded_kg > 0 else 1.0
    held = max(lg.unusable_kg + lg.reserve_kg, 0.0)
    margin = max(lg.margin_kg, 0.0)
    planned = max(lg.remaining_plan_kg, 0.0)
    amounts = [held, margin, planned]
    cells = [round(inner * a / loaded) for a in amounts]
    # the tank never shows more than it holds
    on_board = max(min(round(inner * max(lg.remaining_kg, 0.0) / loaded), inner), 0)
    while sum(cells) > on_board and any(cells):
        k = max(range(3), key=lambda j: cells[j])
        cells[k] -= 1
    cells.append(inner - sum(cells))
    t = Text("[")
    for (name, char, style), n in zip(GAUGE_PARTS, cells):
        t.append(char * n, style=style)
    t.append("]")
    return t


def ledger_renderable(lg, width: int):
    from rich.console import Group

    if not math.isfinite(lg.loaded_kg):
        return Text("no vehicle: no ledger", style="dim")
    g = Table.grid(padding=(0, 1), expand=True)
    g.add_column(style="dim", no_wrap=True)
    g.add_column(justify="right", no_wrap=True)
    g.add_row("propellant", Text("kg", style="dim"))
    g.add_row("loaded", f"{lg.loaded_kg:.3f}")
    g.add_row("used (plan)", f"{lg.used_planned_kg:.3f}")
    g.add_row("used (record)", f"{lg.used_recorded_kg:.3f}")
    g.add_row("on board", Text(f"{lg.remaining_kg:.3f}", style="bold"))
    g.add_row("still planned", f"{lg.remaining_plan_kg:.3f}")
    g.add_row("after plan", f"{lg.after_plan_kg:.3f}")
    g.add_row("unusable", f"{lg.unusable_kg:.3f}")
    g.add_row("reserve", f"{lg.reserve_kg:.3f}")
    g.add_row("margin", Text(f"{lg.margin_kg:.3f}", style="bold" if lg.margin_kg >= 0 else "bold red"))
    g.add_row("buys dv, m/s", f"{lg.dv_remaining_m_s:.1f}")
    legend = Text()
    for name, char, style in GAUGE_PARTS:
        legend.append(char, style=style)
        legend.append(f"{name} ")
    parts = [g, gauge_bar(lg, width), legend]
    if lg.margin_kg < 0:
        parts.append(Text("✗ the plan eats into the reserve", style="bold red"))
    for gr in lg.gauges[-3:]:
        t = Text()
        t.append(f"gauge {format_utc(gr.epoch_s, 0)[:16]}Z ", style="dim")
        t.append(f"{gr.gauge_kg:.3f} vs book {gr.book_kg:.3f}: ")
        t.append(f"{gr.difference_kg:+.3f}", style="bold")
        parts.append(t)
    return Group(*parts)


# --------------------------------------------------------------------------- orbit sketch

class OrbitSketch(Widget):
    """Current, transfer and target orbits around the body, burn points marked."""

    model = reactive(None, always_update=True)

    @_safe_render
    def render(self):
        from .sketch import render_sketch

        if self.model is None:
            return Text("no closed orbit to draw", style="dim")
        lines = render_sketch(self.model, self.size.width, self.size.height)
        return Text("\n").join(lines)


__all__ = ["BurnDetails", "Cycle", "DriftView", "Field", "LedgerView", "OrbitSketch", "QueueFooter",
           "QueueTable", "StateEditor", "StatePanel", "StatusLine", "TargetEditor", "level_text"]
