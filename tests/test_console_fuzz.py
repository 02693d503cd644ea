"""The console driven at random: seeded random key sequences into a running app.

Each sequence plans 20-50 keys (operator macros are kept whole, so a few run longer) drawn from
every binding key (F1-F8, Esc, Ctrl+Q), arrows, Tab and Shift+Tab, Enter, Backspace, Delete,
Home/End, PgUp/PgDn, Space, a few Ctrl keys (Ctrl+U, Ctrl+K, Ctrl+W, Ctrl+A, Ctrl+E, Ctrl+C), Y/N,
and typed text: digits, letters, units (``km``, ``deg``, ``km/s``, ``kg``, ``mi``), ``-``, ``.``,
``e``, NaN/inf words, epochs good and bad, path characters (``/``, ``~``, ``..``), non-ASCII
characters, long typed strings (30-50 characters) and long pastes (200-3000 characters).  Some
keys come as operator macros (close what is open, open a dialog or Tab to a field, type a value,
F2/F3, Y/N) so that entries really reach the journal: state entries, targets, gauge readings,
retractions, burn records, exports.  Keys go in bursts (all sent at once, faster than the app
handles them), typed (3 ms apart: the app, and a replan an action has just started, run between
them) or one by one; sequences are sprinkled with terminal resizes (80x24, 100x30, 160x45),
pauses and waits for the replan.  Every replan of the app is held back 0.2 s in its worker
thread (``ReplanMeter``), so the keys typed after an action land while it runs, as they would
under J2; the campaigns are two-body (fast replans) except one short sequence on the J2 demo
campaign, typed while its first replan runs.  The app's clock advances one second per reading,
so the countdowns and the clock change while dialogs are open.

After every sequence:

* the app did not crash (no exception reached Textual, which would end ``run_test`` with it and a
  non-zero return code), and no failure was contained either: no "internal error" notification
  (the app's ``guarded`` handler), no "cannot draw/show" panel or notification;
* the replan worker finished (the app's flag and a count of ``view`` calls still running);
* the journal, replayed from the file by a fresh read-only ``Session`` after
  :func:`mechanics.session.reducer.clear_cache`, rejects no entry and gives the view the console
  shows: the app's ``current_view`` (the one every panel shows) and the rows of the queue table
  on screen against the replayed rows, latest state (epoch, mass, r, v), calibration, ledger,
  gauges, plan error and warnings, compared exactly (``repr`` of the floats).  If the last
  replan failed, the replay must fail too.

Ctrl+Q is part of the random stream (rarely, alone or inside a burst): the app may then exit (the
first Ctrl+Q only warns when the State form holds unapplied edits); keys sent after it go to the
closing app.  The exit must be clean (return code 0, no exception); the view it showed at exit is
checked against the journal when it was current, then a new app on the reopened session file
carries on with the rest of the sequence and must show the journal's view (a restart restores
the campaign).

Files: the tests run with the working directory and ``$HOME`` inside ``tmp_path``, because the
export dialog takes whatever folder is typed, relative to the working directory, ``~``
expanded, and creates it; and every folder creation (``os.mkdir``) and CSV write of the export
outside ``tmp_path`` is refused for the test and counted (a typed ``/...`` or ``../...``
folder).  The repository's top level is listed before and after and must not change.

Size: ``BURNDESK_FUZZ_SEQUENCES`` (default 64, split over four sessions starting at different
terminal sizes; the app handles about 40 random keys a second here, so the default stays near a
minute), ``BURNDESK_FUZZ_SEED`` (default 20270314).  A failure names the seed, the sequence and
its keys.  Run with ``-s`` to see the counts of each session.

Figures (each session also starts with one gauge reading pressed key by key):

* default run (about 85 s): 64 sequences + 1 on J2, about 2 800 keys (about 150 of them
  handled while a replan ran), 5 long pastes, 13 resizes, 1 quit and restart, 26 replans,
  20 journal entries (gauge readings, state entries, a target, a retraction, a burn record),
  2 export folders written, 3 export folders outside the test folder refused, 74 checks of the
  screen against the journal: 0 crashes, 0 contained failures, 0 mismatches.
* ``BURNDESK_FUZZ_SEQUENCES=1000`` (about 20 min): 1000 sequences + 1 on J2, 43 158 keys (1 740
  handled while a replan ran), 56 pastes, 228 resizes, 21 quits and restarts, 240 replans, 214
  journal entries (132 gauge readings, 51 state entries, 16 targets, 12 retractions, 3 burn
  records), 42 export folders written, 46 outside the test folder refused, 1030 checks: 0
  crashes, 0 contained failures, 0 mismatches.

The counts of a run vary a little (the keys are the same, their timing against the app is not).
"""

from __future__ import annotations

import asyncio
import collections
import dataclasses
import errno
import os
import random
import sys
import threading
import time
import unicodedata
from pathlib import Path

import pytest
from textual import events
from textual.keys import REPLACED_KEYS, _character_to_key, _get_unicode_name_from_key

import console.app as app_module
import console.exports as exports_module
import mechanics.session.reducer as reducer
from console.app import BurndeskApp
from console.session_ops import Session
from console.timeutil import format_utc
from console.widgets import LedgerView, QueueTable, StatusLine, row_key

sys.path.insert(0, str(Path(__file__).parent))
from test_console import NOW, ROOT, make_session, screen_text  # noqa: E402  (shared console helpers)

TOTAL_SEQUENCES = int(os.environ.get("BURNDESK_FUZZ_SEQUENCES", "64"))
BASE_SEED = int(os.environ.get("BURNDESK_FUZZ_SEED", "20270314"))
SHARDS = ((80, 24), (100, 30), (160, 45), (100, 30))  # starting terminal size of each session
SIZES = ((80, 24), (100, 30), (160, 45))
SETTLE_LIMIT_S = 300.0  # a hang guard, not a timing check
REPLAN_DELAY_S = 0.2  # every replan of the app held back this long (see ReplanMeter)

# --------------------------------------------------------------------------- the key alphabet

BINDING_KEYS = ("f1", "f2", "f3", "f4", "f5", "f6", "f7", "f8", "escape")
NAV_KEYS = ("up", "down", "left", "right", "tab", "shift+tab", "enter", "backspace", "delete", "home", "end",
            "pageup", "pagedown", "space", "ctrl+u", "ctrl+k", "ctrl+w", "ctrl+a", "ctrl+e", "ctrl+c", "y", "n")
WORDS = ("km", "deg", "rad", "km/s", "m/s", "kg", "g", "s", "min", "-", ".", "e", "E", "+", "1e9", "-0", "0",
         "nan", "inf", "-inf", "1e-300", "1e308", "380 km", "560 km", "600 km", "390 km", "97.6 deg", "0.001",
         "0.9999", "6790 km", "-2293 3683 5175 km", "4.39 -4.05 4.82 km/s", "2027-03-14T06:20:00Z",
         "2027-03-14T06:10:00Z", "2027-02-30T25:61:00Z", "2027-03-14T05:00:00+01:00", "yesterday", "PVT",
         "1", "2", "3", "17.5 kg", "~", "/", "..", "../x", "/tmp", "~/x", "°", "µ", "é", "Ω", "∞", "−", "日本",
         "🚀", "\u00a0", "  ", "km km", "1 2", "10 mi", "3 furlong")
PATH_WORDS = ("out", "x y", "a/b/c", "~/exports", "../escape", "/", "/tmp/burndesk-fuzz", ".", "..", "é-ø",
              "campaign.burn", "")
#: values for the fields of the State area by their Tab position from the queue (1 and 9 are choices)
FIELD_VALUES = {
    2: ("2027-03-14T06:20:00Z", "2027-03-14T07:30:00Z", "2027-03-14T05:00:00Z", "2027-03-15T00:00:00Z", "now"),
    3: ("385 km", "390 km", "370 km", "395.5 km", "-50 km", "385"),
    4: ("410 km", "420 km", "450 km", "300 km", "4e5 m"),
    5: ("97.7 deg", "98 deg", "1.7 rad", "200 deg"),
    6: ("131.5 deg", "-10 deg", "400 deg"),
    7: ("50 deg", "0 deg"),
    8: ("10 deg", "350 deg", "-1e9 deg"),
    10: ("600 km", "520 km", "1000 km", "10 km", "-7000 km"),
    11: ("97.8 deg", "0 deg", "180 deg", "x"),
}
LETTERS = "abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789 -.,:/+e°µ"


def chars(text: str) -> list[str]:
    return list(text)


class Gen:
    """Random key sequences: lists of tokens ``(kind, payload)``.

    kinds: ``burst`` (keys sent at once, faster than the app handles them), ``burst+idle`` (the
    same, then wait until the app is idle: a dialog just opened has its focus), ``typed`` (keys a few
    milliseconds apart: the app, and a replan just started, run between them), ``paced`` (keys
    pressed one by one, each handled before the next), ``paste`` (a long text pasted in one go, as a
    terminal's bracketed paste), ``pause`` (s), ``settle`` (wait for the replan), ``resize``
    ((w, h)), ``quit`` (Ctrl+Q).
    """

    def __init__(self, rng: random.Random):
        self.rng = rng

    def text(self) -> str:
        r = self.rng
        u = r.random()
        if u < 0.55:
            return r.choice(WORDS)
        if u < 0.88:
            return "".join(r.choice(LETTERS) for _ in range(r.randint(1, 8)))
        if u < 0.95:
            return "".join(r.choice(LETTERS) for _ in range(r.randint(30, 50)))  # long, typed
        return "".join(chr(r.randint(0xA1, 0x2FFF)) for _ in range(r.randint(1, 6)))  # any unicode

    def loose_keys(self, n: int) -> list[str]:
        r = self.rng
        keys: list[str] = []
        while len(keys) < n:
            v = r.random()
            if v < 0.005:
                keys.append("ctrl+q")  # quits (or warns of unapplied edits): keys may follow it
            elif v < 0.25:
                keys.append(r.choice(BINDING_KEYS))
            elif v < 0.6:
                keys.append(r.choice(NAV_KEYS))
            else:
                keys += chars(self.text())
        return keys

    def macro(self) -> list[list[str]]:
        """Bursts an operator types for one action, the values good or bad at random; each burst
        is handled before the next (a dialog opens, a field takes the focus); ``None``: wait for
        the replan first."""
        r = self.rng

        def value(options) -> list[str]:
            return chars(r.choice(options) if r.random() < 0.8 else self.text())

        kind = r.choice(("state", "state", "state", "target", "gauge", "gauge", "retract", "export", "record",
                         "help"))
        if kind in ("state", "target"):  # Esc to the queue, Tab to a field of the State area, type, apply
            k = r.randint(1, 8) if kind == "state" else r.randint(9, 11)
            keys = (value(FIELD_VALUES[k]) if k not in (1, 9) else [r.choice(("right", "left", "space"))])
            apply = ("f2" if k < 9 else "f3") if r.random() < 0.85 else r.choice(("f2", "f3", "enter"))
            bursts = [["escape"], ["tab"] * k, keys + [apply]]
        elif kind == "gauge":
            bursts = [["f5"], value(("17.5 kg", "18 kg", "0 kg", "-1 kg", "nan kg", "17500 g", "1e9 kg", "12", "kg"))
                      + ["f2"]]
        elif kind == "retract":
            bursts = [["f6"], value(("1", "2", "3", "4", "5", "8", "0", "-1", "x", "99999999999")) + ["f2"],
                      [r.choice(("y", "n", "y", "escape"))]]
        elif kind == "export":
            bursts = [["f7"], (chars(r.choice(PATH_WORDS)) if r.random() < 0.7 else []) + ["f2"]]
        elif kind == "record":  # from the ignition field: on-time, then Tab to the OD epoch and the apsides
            bursts = [None, ["f4"]] if r.random() < 0.7 else [["f4"]]  # None: wait for the replan first
            if r.random() < 0.3:
                bursts += [["tab"], value(("480 s", "-3 s", "0 s", "1e6 s", "abc")), ["tab"] * 4]
            else:
                bursts += [["tab"] * 5]
            bursts += [value(("2027-03-14T12:00:00Z", "2027-03-15T00:00:00Z", "2027-03-14T06:00:00Z", "soon")),
                       ["tab"], value(("400 km", "395 km", "-5 km")), ["tab"],
                       value(("420 km", "430 km", "12 kg")) + ["f2"]]
        else:
            bursts = [["f1"], self.loose_keys(r.randint(0, 3)) + [r.choice(("escape", "f1"))]]
        if r.random() < 0.7:  # first close a dialog left open, then back to the queue
            bursts = [["escape"], ["escape"]] + bursts[1 if bursts[0] == ["escape"] else 0:]
        return bursts

    def sequence(self, allow_quit: bool = True) -> list[tuple[str, object]]:
        r = self.rng
        target = r.randint(20, 50)
        tokens: list[tuple[str, object]] = []
        n = 0
        while n < target:
            u = r.random()
            if u < 0.08:
                tokens.append(("resize", r.choice(SIZES)))
            elif u < 0.11:
                tokens.append(("pause", r.choice((None, 0.0, 0.01, 0.05))))
            elif u < 0.13:
                tokens.append(("settle", None))
            elif u < 0.145:
                tokens.append(("paste", "".join(r.choice(LETTERS) for _ in range(r.randint(200, 3000)))))
            elif u < 0.16 and allow_quit:
                tokens.append(("quit", None))
                n += 1
            elif u < 0.6:
                bursts = self.macro()  # kept whole
                for k, keys in enumerate(bursts):
                    if keys is None:
                        tokens.append(("settle", None))
                        continue
                    tokens.append(("typed" if k == len(bursts) - 1 else "burst+idle", keys))
                    n += len(keys)
                if r.random() < 0.6:  # typing on while the replan the action started runs
                    keys = self.loose_keys(r.randint(2, 8))
                    tokens.append(("typed", keys))
                    n += len(keys)
            else:
                keys = self.loose_keys(r.randint(4, 16))[:max(target - n, 1)]
                tokens.append(("paced" if r.random() < 0.1 else "burst", keys))
                n += len(keys)
        return tokens


def key_event(key: str, app) -> events.Key:
    """The key event a terminal sends: named keys as Textual's pilot makes them, characters as typed."""
    if len(key) == 1:
        ev = events.Key(_character_to_key(key), key)
    else:
        original = REPLACED_KEYS.get(key, key)
        try:
            char = unicodedata.lookup(_get_unicode_name_from_key(original))
        except KeyError:
            char = None
        ev = events.Key(key, char)
    ev.set_sender(app)
    return ev


# --------------------------------------------------------------------------- instrumentation

@dataclasses.dataclass
class Stats:
    sequences: int = 0
    keys_sent: int = 0
    keys_delivered: int = 0
    keys_during_replan: int = 0
    resizes: int = 0
    pastes: int = 0
    quits: int = 0
    replans: int = 0
    replans_failed: int = 0
    entries_added: int = 0
    exports_written: int = 0
    refused_outside: int = 0
    checks: int = 0
    kinds: collections.Counter = dataclasses.field(default_factory=collections.Counter)  # entries added

    def add(self, other: "Stats") -> None:
        for f in dataclasses.fields(self):
            setattr(self, f.name, getattr(self, f.name) + getattr(other, f.name))

    def line(self) -> str:
        return ", ".join(f"{f.name} {dict(v) if isinstance(v, dict) else v}"
                         for f in dataclasses.fields(self) for v in [getattr(self, f.name)])

    def count_entries(self, path) -> None:
        with Session.open(path, readonly=True) as s:
            self.kinds.update(type(e.event).__name__ for e in s.state.entries[1:])


class ReplanMeter:
    """Wraps :func:`mechanics.session.reducer.view` for the app's worker: counts calls and how many
    are running (the app's worker imports ``view`` at each replan, so it gets this one).

    ``delay_s`` holds each replan back (in the worker thread, the UI runs meanwhile), so that a
    two-body replan lasts about as long as a J2 one and the keys typed after an action land
    while it runs."""

    def __init__(self, real, delay_s: float = 0.0):
        self.real = real
        self.delay_s = delay_s
        self.lock = threading.Lock()
        self.running = 0
        self.calls = 0

    def __call__(self, state):
        with self.lock:
            self.running += 1
            self.calls += 1
        try:
            if self.delay_s:
                time.sleep(self.delay_s)
            return self.real(state)
        finally:
            with self.lock:
                self.running -= 1


class FuzzApp(BurndeskApp):
    """The console, with every notification kept and every key counted."""

    CSS_PATH = str(Path(app_module.__file__).with_name(BurndeskApp.CSS_PATH))  # a subclass looks beside itself

    def __init__(self, session, stats: Stats, meter: ReplanMeter):
        ticks = [NOW]

        def clock():  # one second later at each reading: countdowns and the clock keep changing
            ticks[0] += 1.0
            return ticks[0]

        super().__init__(session, clock=clock)
        self.stats = stats
        self.meter = meter
        self.notes: list[tuple[str, str]] = []

    def notify(self, message, *args, **kwargs):
        self.notes.append((str(kwargs.get("title", "")), str(message)))
        return super().notify(message, *args, **kwargs)

    async def on_event(self, event) -> None:
        if isinstance(event, events.Key) and not event.is_forwarded:
            self.stats.keys_delivered += 1
            if self.meter.running:
                self.stats.keys_during_replan += 1
        await super().on_event(event)


@pytest.fixture()
def sandbox(tmp_path, monkeypatch):
    """cwd and $HOME inside tmp_path; export folders and files outside it refused; repo root unchanged."""
    ignore = {".pytest_cache", ".hypothesis", "__pycache__"}
    before = sorted(p.name for p in ROOT.iterdir() if p.name not in ignore)
    home = tmp_path / "home"
    home.mkdir()
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("HOME", str(home))
    root = tmp_path.resolve()
    refused: list[tuple[str, bool]] = []  # (path, existed before)

    def inside(path) -> bool:
        p = Path(os.path.abspath(os.fspath(path))).resolve()
        return p == root or root in p.parents

    real_mkdir = os.mkdir

    def mkdir(path, *args, **kwargs):
        if not inside(path):
            refused.append((os.fspath(path), os.path.lexists(path)))
            raise PermissionError(errno.EACCES, "outside the test folder", os.fspath(path))
        return real_mkdir(path, *args, **kwargs)

    real_write = exports_module.write_csv

    def write_csv(folder, name, header, rows):
        if not inside(Path(folder) / name):
            refused.append((os.fspath(Path(folder) / name), os.path.lexists(Path(folder) / name)))
            raise PermissionError(errno.EACCES, "outside the test folder", os.fspath(folder))
        return real_write(folder, name, header, rows)

    monkeypatch.setattr(os, "mkdir", mkdir)
    monkeypatch.setattr(exports_module, "write_csv", write_csv)
    meter = ReplanMeter(reducer.view, REPLAN_DELAY_S)
    monkeypatch.setattr(reducer, "view", meter)
    yield {"refused": refused, "meter": meter, "root": root}
    monkeypatch.undo()
    after = sorted(p.name for p in ROOT.iterdir() if p.name not in ignore)
    assert after == before, f"the fuzz left files in the repository: {sorted(set(after) - set(before))}"


# --------------------------------------------------------------------------- checks

def fingerprint(v) -> str:
    """What the console shows of a view, floats exact (``repr``), as one string."""
    lg, cal, lt = v.ledger, v.calibration, v.latest
    rows = [(r.index, r.status, r.seq, r.planned.ignition_s, r.planned.duration_s, r.planned.propellant_kg,
             r.planned.dv_m_s, None if r.actual is None else (r.actual["ignition_s"], r.actual["duration_s"],
                                                                  r.actual["propellant_kg"]),
             None if r.drift is None else (r.drift.level, r.drift.dv_ratio, r.drift.thrust_factor, r.drift.flags))
            for r in v.rows]
    return repr({
        "last_seq": v.last_seq,
        "rows": rows,
        "calibration": (cal.thrust_factor, cal.spread, cal.burns_used, cal.factors),
        "latest": (lt.epoch_s, lt.mass_kg, tuple(lt.r_m), tuple(lt.v_m_s), lt.source, lt.seq),
        "ledger": (lg.loaded_kg, lg.used_planned_kg, lg.used_recorded_kg, lg.remaining_kg, lg.remaining_plan_kg,
                   lg.after_plan_kg, lg.margin_kg, lg.dv_remaining_m_s, lg.per_burn,
                   tuple((g.seq, g.epoch_s, g.gauge_kg, g.book_kg, g.method) for g in lg.gauges)),
        "plan": None if v.plan is None else (v.plan.feasible, v.plan.final_periapsis_radius_m,
                                             v.plan.final_apoapsis_radius_m, v.plan.total_propellant_kg),
        "plan_error": v.plan_error,
        "warnings": v.warnings,
        "target": v.scenario.target,
    })


def replayed(path):
    """(view or the reason it fails, session) from the journal file alone, caches cleared."""
    reducer.clear_cache()
    s = Session.open(path, readonly=True)
    try:
        try:
            return s.view(), s
        except ValueError as exc:
            return exc, s
    finally:
        s.close()


def contained_failures(app, start: int = 0) -> list[str]:
    bad = ("internal error", "cannot draw", "cannot show", "Traceback")
    return [f"{t}: {m}" for t, m in app.notes[start:] if any(b in m for b in bad)]


def check_console_against_journal(app, path, stats: Stats, where: str) -> None:
    """The view on screen is the journal's view (see the module notes)."""
    assert app._exception is None, f"{where}: the app crashed: {app._exception!r}"
    assert not contained_failures(app), f"{where}: {contained_failures(app)}"
    main = app.screen_stack[0]
    text = screen_text(app)
    for word in ("cannot draw", "cannot show", "internal error", "Traceback"):
        assert word not in text, f"{where}: {word!r} on screen"
    stats.checks += 1
    v, s = replayed(path)
    assert not s.rejected, f"{where}: the journal holds entries its replay rejects: {s.rejected}"
    assert s.state.last_seq == app.session.state.last_seq == app.session.journal.count()
    if app.problem == "replan failed":  # the last good view stays: then the journal's view fails too
        assert isinstance(v, ValueError), f"{where}: the console's replan failed, the replay did not"
        stats.replans_failed += 1
        return
    assert not isinstance(v, Exception), f"{where}: replay failed ({v}) but the console shows a view"
    shown = app.current_view
    assert shown is not None and shown.last_seq == s.state.last_seq, f"{where}: the view on screen is stale"
    assert fingerprint(shown) == fingerprint(v), f"{where}: the console's view differs from the journal's"
    table = main.query_one(QueueTable)
    assert table.view is shown and main.query_one(LedgerView).view is shown
    assert main.query_one(StatusLine).view is shown
    assert list(table.rows_by_key) == [row_key(r) for r in v.rows], f"{where}: queue rows on screen differ"
    assert table.row_count == len(v.rows)
    for r in v.rows:
        if r.status == "planned":
            assert str(table.get_row(row_key(r))[2]) == format_utc(r.planned.ignition_s, 0)


# --------------------------------------------------------------------------- driving

async def unless_quit(pilot, awaitable) -> None:
    """Await one of the pilot's waits, or stop waiting when the app has quit meanwhile: the
    pilot's waits count on the app to answer (its animator, its widgets' queues), which a closed
    app never does (Ctrl+Q may sit anywhere in the keys)."""
    app = pilot.app
    task = asyncio.ensure_future(awaitable)
    while not task.done():
        if app.return_code is not None:
            task.cancel()
            try:
                await task
            except BaseException:  # the wait itself, cut short: not a finding
                pass
            return
        await asyncio.wait({task}, timeout=0.05)
    task.result()


async def settle(pilot, meter: ReplanMeter) -> None:
    """Wait until the replan worker finished and its result (or failure) reached the widgets."""
    app = pilot.app
    waited = 0.0
    await unless_quit(pilot, pilot.pause(0))
    while app.return_code is None and (app.replanning or meter.running
                                       or (app.current_view is None and not app.problem)):
        await unless_quit(pilot, pilot.pause(0.01))
        waited += 0.01
        assert waited < SETTLE_LIMIT_S, "the replan never finished"
    await unless_quit(pilot, pilot.pause(0))


async def run_token(pilot, kind: str, payload, stats: Stats) -> None:
    app = pilot.app
    if kind in ("burst", "burst+idle", "quit"):
        keys = ["ctrl+q"] if kind == "quit" else payload
        for k in keys:
            app.post_message(key_event(k, app))
        stats.keys_sent += len(keys)
        # until the screen has handled what was sent; within a macro, also what that caused (a
        # dialog opened, its focus set)
        for _ in range(2 if kind == "burst+idle" else 1):
            await unless_quit(pilot, pilot.pause(0))
    elif kind in ("typed", "paced"):  # typed: a fast typist, the app (and a replan) run between keys
        for k in payload:
            app.post_message(key_event(k, app))
            stats.keys_sent += 1
            await (asyncio.sleep(0.003) if kind == "typed" else unless_quit(pilot, pilot.pause(0)))
        await unless_quit(pilot, pilot.pause(0))
    elif kind == "paste":
        stats.pastes += 1
        app.post_message(events.Paste(payload))
        await unless_quit(pilot, pilot.pause(0))
    elif kind == "press":  # each key handled, and the app idle, before the next
        stats.keys_sent += len(payload)
        await unless_quit(pilot, pilot.press(*payload))
    elif kind == "pause":
        await unless_quit(pilot, pilot.pause(payload))
    elif kind == "settle":
        await settle(pilot, app.meter)
    elif kind == "resize":
        stats.resizes += 1
        await unless_quit(pilot, pilot.resize_terminal(*payload))
        await unless_quit(pilot, pilot.pause())


def describe(tokens, upto: int | None = None) -> str:
    out = []
    for kind, payload in tokens[:upto]:
        if kind in ("burst", "burst+idle", "paced", "typed", "press"):
            out.append(f"{kind}[{' '.join(payload)[:120]}]")
        else:
            out.append(f"{kind}({payload})" if payload is not None else kind)
    return " ".join(out)


async def fuzz_session(session, path, n_sequences: int, seed: int, size, stats: Stats, meter: ReplanMeter,
                       allow_quit: bool = True) -> Session:
    """Run ``n_sequences`` random sequences on a session, restarting the app after each quit.

    Returns the session that is open at the end (a quit reopens it from the file)."""
    rng = random.Random(seed)
    gen = Gen(rng)
    pending: list = list(OPENING)  # tokens of the sequence under way (continued after a restart)
    done = 0
    where = f"seed {seed}, opening"
    sent = ""  # the keys of the sequence so far, for the failure message
    while done < n_sequences or pending:
        app = FuzzApp(session, stats, meter)
        n0 = session.journal.count()
        quit_now = False
        try:
            async with app.run_test(size=size) as pilot:
                await settle(pilot, meter)
                check_console_against_journal(app, path, stats, f"{where} (app started)")
                while done < n_sequences or pending:
                    if not pending:
                        pending = gen.sequence(allow_quit)
                        where = f"seed {seed}, sequence {done + 1}"
                        stats.sequences += 1
                        sent = ""
                    tokens = list(pending)
                    for k, (kind, payload) in enumerate(tokens):
                        sent += " " + describe([(kind, payload)])
                        await run_token(pilot, kind, payload, stats)
                        if app._exception is not None:
                            break  # leaving run_test raises it
                        if app.return_code is not None:  # the app quit: the rest goes to a new app
                            pending = tokens[k + 1:] or [("settle", None)]  # (then the check)
                            quit_now = True
                            break
                    if quit_now or app._exception is not None:
                        break
                    pending = []
                    await settle(pilot, meter)
                    try:
                        check_console_against_journal(app, path, stats, where)
                    except AssertionError as exc:
                        raise AssertionError(f"{exc}\nkeys:{sent}") from None
                    if where.startswith(f"seed {seed}, sequence"):
                        done += 1
        except AssertionError:
            raise
        except Exception as exc:  # an exception that ended the app (run_test re-raises it)
            raise AssertionError(f"{where}: the console crashed: {exc!r}\nkeys:{sent}") from exc
        assert app.return_code in (None, 0), f"{where}: exit code {app.return_code}"
        assert not contained_failures(app), f"{where}: {contained_failures(app)}"
        stats.entries_added += session.journal.count() - n0
        if not quit_now:
            break
        stats.quits += 1
        # the view on screen at exit, when it was current, is the journal's
        if not app.replanning and app.current_view is not None and \
                app.current_view.last_seq == session.state.last_seq:
            v, _ = replayed(path)
            if not isinstance(v, Exception):
                assert fingerprint(app.current_view) == fingerprint(v), f"{where}: view at exit differs"
        session.close()
        session = Session.open(path)
        where = f"{where} (after a restart)"
    return session


#: each session starts with one sure journal entry (a gauge reading), pressed key by key: the
#: campaign then always holds an entry the console wrote and replanned after
OPENING = (("press", ["f5"]), ("press", ["ctrl+u", *"17.5 kg", "f2"]), ("settle", None))


def count_exports(root: Path) -> int:
    return sum(1 for _ in root.rglob("queue.csv"))


# --------------------------------------------------------------------------- the tests

ALL = Stats()


@pytest.mark.parametrize("shard", range(len(SHARDS)))
async def test_random_key_sequences_keep_the_console_and_the_journal_in_step(tmp_path, sandbox, shard):
    n = TOTAL_SEQUENCES // len(SHARDS) + (1 if shard < TOTAL_SEQUENCES % len(SHARDS) else 0)
    session = make_session(tmp_path)
    path = session.journal.path
    stats = Stats()
    try:
        session = await fuzz_session(session, path, n, BASE_SEED + shard, SHARDS[shard], stats, sandbox["meter"])
    finally:
        session.close()
    stats.replans = sandbox["meter"].calls
    stats.count_entries(path)
    stats.exports_written = count_exports(tmp_path)
    stats.refused_outside = len(sandbox["refused"])
    ALL.add(stats)
    print(f"\nshard {shard}: {stats.line()}\nso far: {ALL.line()}")
    assert stats.sequences == n and stats.checks >= n
    assert stats.keys_delivered > 0
    # the opening gauge reading at least: the console wrote the journal and replanned after it
    assert stats.kinds["GaugeReadingTaken"] >= 1 and stats.replans >= stats.quits + 2
    # nothing escaped the test folder: every refused folder or file is as it was before
    for p, existed in sandbox["refused"]:
        assert os.path.lexists(p) == existed, p


async def test_keys_typed_while_the_first_j2_replan_runs(tmp_path, sandbox):
    """One short sequence on the J2 demo campaign, sent before its slow first replan is done."""
    session = make_session(tmp_path, ROOT / "profiles" / "scenarios" / "demo.toml")
    path = session.journal.path
    stats = Stats()
    meter = sandbox["meter"]
    rng = random.Random(BASE_SEED - 1)
    gen = Gen(rng)
    app = FuzzApp(session, stats, meter)
    try:
        async with app.run_test(size=(80, 24)) as pilot:
            while not meter.running and app.replanning:  # the first replan has started
                await pilot.pause(0.005)
            tokens = [t for t in gen.sequence(allow_quit=False) if t[0] != "settle"]
            tokens = [("burst", ["down", "up", "f1", "escape", "tab", "tab"] + chars("385 km")
                       + ["f2", "f8", "down", "f7"])] + tokens
            for kind, payload in tokens:
                await run_token(pilot, kind, payload, stats)
                assert app._exception is None, describe(tokens)
            await settle(pilot, meter)
            check_console_against_journal(app, path, stats, "J2 sequence")
            stats.sequences = 1
    finally:
        session.close()
    assert app.return_code in (None, 0)
    stats.replans = meter.calls
    stats.count_entries(path)
    stats.entries_added = sum(stats.kinds.values())
    ALL.add(stats)
    print(f"\nJ2: {stats.line()}\nso far: {ALL.line()}")
    assert stats.keys_during_replan > 0  # the keys did land while the J2 replan ran


# --------------------------------------------------------------------------- what the fuzz found

async def test_arrow_keys_before_the_first_replan_do_not_end_the_console(tmp_path, sandbox):
    """Found by the fuzz: Down/Up on the still empty queue highlighted "no row" and the console
    ended with an AttributeError."""
    session = make_session(tmp_path)
    meter = sandbox["meter"]
    app = FuzzApp(session, Stats(), meter)
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            while not meter.running and app.replanning:
                await pilot.pause(0.005)
            assert app.current_view is None  # the queue is still empty
            await run_token(pilot, "burst", ["down", "up", "pagedown", "end", "enter"], app.stats)
            assert app._exception is None
            await settle(pilot, meter)
            check_console_against_journal(app, session.journal.path, app.stats, "arrows before the first view")
    finally:
        session.close()
    assert app.return_code in (None, 0)


@pytest.mark.parametrize("opener,typed,submit", [
    ("f5", "17.5 kg", ["f2", "f2", "f2"]),
    ("f6", "2", ["y", "y", "y"]),  # after F2 asked "retract entry 2?"
    ("f7", "out", ["f2", "f2"]),
])
async def test_a_dialog_submitted_twice_in_a_row_writes_once(tmp_path, sandbox, opener, typed, submit):
    """Found by the fuzz: F2 F2 in the gauge dialog, faster than the app answers, recorded the
    reading twice, then the second close took the main screen off the stack ("internal error")."""
    session = make_session(tmp_path)
    path = session.journal.path
    meter = sandbox["meter"]
    app = FuzzApp(session, Stats(), meter)
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot, meter)
            if opener == "f6":  # something to retract: a state entry (entry 2)
                await pilot.press("tab", "tab", "tab", *chars("385 km"), "f2")
                await settle(pilot, meter)
                assert session.journal.count() == 2
            n0 = session.journal.count()
            await pilot.press(opener)
            await pilot.press("ctrl+u", *chars(typed))
            if opener == "f6":
                await pilot.press("f2")
                assert app.screen.pending == 2
            await run_token(pilot, "burst", submit, app.stats)  # all at once
            await settle(pilot, meter)
            assert app.screen is app.screen_stack[0]  # the dialog closed, the main screen stayed
            assert session.journal.count() == n0 + (0 if opener == "f7" else 1)
            if opener == "f7":
                assert (tmp_path / "out" / "queue.csv").exists()
            check_console_against_journal(app, path, app.stats, f"{opener} submitted twice")
    finally:
        session.close()


async def test_an_export_folder_of_an_unknown_user_is_refused_in_the_dialog(tmp_path, sandbox):
    """Found by the fuzz: "~name" of no known user ended as an "internal error"."""
    session = make_session(tmp_path)
    meter = sandbox["meter"]
    app = FuzzApp(session, Stats(), meter)
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot, meter)
            await pilot.press("f7", "ctrl+u", *chars("~no-such-user-xq/out"), "f2")
            assert type(app.screen).__name__ == "ExportScreen"  # still open, with the reason
            error = app.screen.query_one("#f-folder").error
            assert error.startswith("folder:") and "~" in error
            assert not contained_failures(app)
    finally:
        session.close()


async def test_keys_typed_right_after_quitting_leave_a_clean_exit(tmp_path, sandbox):
    """Found by the fuzz: F1 typed just after Ctrl+Q opened help on a closing app, whose drawing
    failed (NoMatches) and the console ended with code 1 and a traceback."""
    session = make_session(tmp_path)
    meter = sandbox["meter"]
    app = FuzzApp(session, Stats(), meter)
    try:
        async with app.run_test(size=(100, 30)) as pilot:
            await settle(pilot, meter)
            await run_token(pilot, "burst", ["ctrl+q", "f1", "f5", "a", "down", "tab", "f7"], app.stats)
            for _ in range(100):
                if app.return_code is not None:
                    break
                await pilot.pause(0.01)
    finally:
        session.close()
    assert app.return_code == 0 and app._exception is None
