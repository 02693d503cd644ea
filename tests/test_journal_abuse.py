"""Campaign sessions abused through the real command line.

``tests/test_journal_crash.py`` kills a bare journal writer; here the writers are real
``burndesk session record / gauge / retract`` processes on a real campaign session:

* SIGKILL at random moments of a writer's life (seeded; ``BURNDESK_ABUSE_TRIALS`` trials,
  default 8): afterwards the session opens and replays with nothing rejected, every command
  that exited 0 has its entry, and every entry is whole (checksums, gapless numbering);
* two writers at once: both succeed, or one is refused on one line (exit 2) and wrote nothing;
* truncated, garbled and rotten session files: ``session show`` refuses on one line naming the
  damage (exit 2), ``session recover`` salvages the intact prefix into a new file that opens;
* read-only folder and file: ``show`` works, writers are refused clearly (run without root's
  power to ignore permission bits: as ``nobody``, or as root without CAP_DAC_OVERRIDE);
* a full disk (a process file-size limit, and a small tmpfs where one can be mounted): the
  write is refused on one line, nothing committed is lost, no partial record.

Figures (kills, kills that landed after the commit, records lost) are printed in the terminal
summary of the run.
"""

from __future__ import annotations

import collections
import hashlib
import json
import math
import os
import random
import resource
import shutil
import signal
import stat
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pytest

from console.scenario_file import load_scenario
from console.session_ops import Session
from console.timeutil import format_utc, parse_utc
from mechanics.kepler import propagate_kepler
from mechanics.session.journal import Journal

EXE = str(Path(sys.executable).parent / "burndesk")
TRIALS = int(os.environ.get("BURNDESK_ABUSE_TRIALS", "8"))
FIGURES: collections.Counter = collections.Counter()

SCENARIO = """
name = "abuse campaign"
body = "earth"
vehicle = "craft.toml"
epoch = "2027-03-14T06:00:00Z"
[state]
periapsis_alt = "380 km"
apoapsis_alt = "402 km"
i = 97.6
raan = 20
argp = 30
nu = 300
[target]
kind = "circular"
altitude = "420 km"
[options]
model = "two-body"
lead_time = "10 min"
"""

VEHICLE = """
name = "ABUSE-1"
dry_mass = "142 kg"
propellant = "18 kg"
unusable_propellant = "0.45 kg"
reserve_propellant = "3.5 kg"
[[thrusters]]
count = 4
thrust = "1 N"
isp = "220 s"
cant = "12 deg"
"""


class _Figures:
    def pytest_terminal_summary(self, terminalreporter):
        if FIGURES:
            terminalreporter.section("burndesk journal abuse figures")
            for key in sorted(FIGURES):
                terminalreporter.write_line(f"{key:<44} {FIGURES[key]:>6}")


@pytest.fixture(scope="module", autouse=True)
def _report_figures(request):
    pm = request.config.pluginmanager
    if not pm.has_plugin("burndesk-abuse-figures"):
        pm.register(_Figures(), "burndesk-abuse-figures")
    yield


# --------------------------------------------------------------------------- helpers

def env():
    return {k: v for k, v in os.environ.items() if k not in ("BURNDESK_DEBUG", "BURNDESK_PROFILES")}


def cli(*args, ok=None, prefix=(), **kw) -> subprocess.CompletedProcess:
    proc = subprocess.run([*prefix, EXE, *map(str, args)], capture_output=True, text=True, timeout=300,
                          env=env(), **kw)
    assert "Traceback" not in proc.stderr, proc.stderr
    if ok is not None:
        assert proc.returncode in ok, (proc.returncode, proc.stdout, proc.stderr)
    return proc


def refused(proc, *words) -> str:
    """A clean refusal: exit 2, one line on stderr, holding every word given."""
    assert proc.returncode == 2, (proc.returncode, proc.stdout, proc.stderr)
    lines = proc.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("burndesk: "), proc.stderr
    for w in words:
        assert w in lines[0], (w, lines[0])
    return lines[0]


def new_session(folder: Path, name="campaign.burn") -> Path:
    (folder / "craft.toml").write_text(VEHICLE)
    (folder / "scenario.toml").write_text(SCENARIO)
    path = folder / name
    Session.create(path, load_scenario(folder / "scenario.toml"), source="scenario.toml").close()
    return path


def after_state(session: Path, out: Path) -> int | None:
    """Write the OD state just after the next planned burn (as flown to plan); its number."""
    with Session.open(session, readonly=True) as s:
        v = s.view()
        row = v.next_burn
        mu = v.scenario.body.mu_m3_s2
    if row is None:
        return None
    b = row.planned
    t = math.ceil(b.cutoff_s * 1e6 + 1.0) / 1e6  # just after cutoff, on a microsecond
    r, vel = propagate_kepler(np.array(b.state_after[:3]), np.array(b.state_after[3:6]), t - b.cutoff_s, mu)
    out.write_text(f'epoch = "{format_utc(t, 6)}"\n[state]\n'
                   f"r = [{', '.join(repr(float(c) / 1e3) for c in r)}]\n"
                   f"v = [{', '.join(repr(float(c) / 1e3) for c in vel)}]\n")
    return row.index


def replay(session: Path):
    """Open the session read-only: every record whole, nothing rejected; its entries."""
    with Journal.open(session, readonly=True) as j:
        records = j.records()  # verifies every checksum and the gapless numbering
    assert [r.seq for r in records] == list(range(1, len(records) + 1))
    with Session.open(session, readonly=True) as s:
        assert s.rejected == [], s.rejected
        state = s.state
    return records, state


def gauges_by_method(records) -> dict:
    return {r.payload["method"]: r.payload for r in records if r.kind == "gauge_reading_taken"}


def active_burns(state) -> list[int]:
    gone = state.retracted
    return [e.event.burn for e in state.entries
            if e.seq not in gone and type(e.event).__name__ == "BurnRecorded"]


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# --------------------------------------------------------------------------- SIGKILL

def _writer_command(session: Path, folder: Path, trial: int, rng: random.Random):
    """(kind, argv, expectation) of a random writer for this trial."""
    records, state = replay(session)
    burns = active_burns(state)
    roll = rng.random()
    if roll < 0.4:
        number = after_state(session, folder / f"after{trial}.toml")
        if number is not None:
            return "record", ["session", "record", session, "--burn", number, "--after",
                              folder / f"after{trial}.toml"], ("burn", number)
    if roll < 0.55 and burns:
        last = max(e.seq for e in state.entries if e.seq not in state.retracted
                   and type(e.event).__name__ == "BurnRecorded")
        return "retract", ["session", "retract", session, "--entry", last, "--reason", f"trial {trial}"], \
            ("retracted", last)
    kg = round(17.0 - trial * 1e-3, 6)
    return "gauge", ["session", "gauge", session, "--propellant", kg, "--epoch", "2027-03-14T07:00:00Z",
                     "--method", f"PVT trial {trial}"], ("gauge", f"PVT trial {trial}", kg)


def _assert_present(expect, records, state) -> bool:
    """True when the effect of a command is in the session."""
    if expect[0] == "gauge":
        got = gauges_by_method(records).get(expect[1])
        if got is None:
            return False
        assert got["propellant_kg"] == expect[2]  # whole, as commanded
        return True
    if expect[0] == "burn":
        return expect[1] in active_burns(state)
    return expect[1] in state.retracted


def test_sigkill_of_cli_writers_loses_no_acknowledged_entry(tmp_path):
    session = new_session(tmp_path)
    rng = random.Random(20270314)
    # how long an unkilled writer lives, so that kills spread over its whole life
    t0 = time.monotonic()
    cli("session", "gauge", session, "--propellant", 17.5, "--epoch", "2027-03-14T07:00:00Z",
        "--method", "warm-up", ok=(0,))
    life_s = time.monotonic() - t0
    acknowledged = []
    killed = 0
    for trial in range(TRIALS):
        kind, argv, expect = _writer_command(session, tmp_path, trial, rng)
        before, _ = replay(session)
        proc = subprocess.Popen([EXE, *map(str, argv)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                text=True, env=env())
        try:
            proc.wait(timeout=rng.uniform(0.1, 1.4) * life_s)
        except subprocess.TimeoutExpired:
            proc.send_signal(signal.SIGKILL)
            proc.wait(timeout=60)
        out, err = proc.communicate()
        assert "Traceback" not in err
        records, state = replay(session)
        # what was there before is still there, unchanged
        assert records[:len(before)] == before, f"trial {trial}: an earlier entry changed"
        assert len(records) - len(before) in (0, 1), f"trial {trial}: more than one new entry"
        present = _assert_present(expect, records, state)
        if proc.returncode == 0:
            acknowledged.append(expect)
            FIGURES["SIGKILL: writers that finished (exit 0)"] += 1
            assert present, f"trial {trial}: {kind} exited 0 but its entry is missing"
        else:
            assert proc.returncode == -signal.SIGKILL, (proc.returncode, out, err)
            killed += 1
            FIGURES["SIGKILL: writers killed"] += 1
            FIGURES[f"SIGKILL: killed {'after' if present else 'before'} the commit"] += 1
            assert len(records) - len(before) == int(present)
        FIGURES[f"SIGKILL: {kind} commands"] += 1
    records, state = replay(session)
    lost = [e for e in acknowledged if e[0] == "gauge" and not _assert_present(e, records, state)]
    FIGURES["SIGKILL: acknowledged records lost"] += len(lost)
    assert not lost
    assert killed >= 1, "no writer was killed: the trials tested nothing"
    cli("session", "show", session, ok=(0, 3))


# --------------------------------------------------------------------------- two writers

def _both(argv_a, argv_b):
    procs = [subprocess.Popen([EXE, *map(str, a)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                              text=True, env=env()) for a in (argv_a, argv_b)]
    return [(p.wait(timeout=300), *p.communicate()) for p in procs]


def test_two_cli_writers_at_once(tmp_path):
    session = new_session(tmp_path)
    written = []
    for round_ in range(2):
        argv = [["session", "gauge", session, "--propellant", 17.0 - k, "--epoch", "2027-03-14T07:00:00Z",
                 "--method", f"round {round_} writer {k}"] for k in (0, 1)]
        results = _both(*argv)
        for k, (rc, out, err) in enumerate(results):
            assert "Traceback" not in err
            if rc == 0:
                written.append(f"round {round_} writer {k}")
            else:
                refused(subprocess.CompletedProcess([], rc, out, err))
                assert "busy" in err or "changed meanwhile" in err, err
                FIGURES["two writers: refused cleanly"] += 1
        assert any(rc == 0 for rc, _, _ in results)
    records, _ = replay(session)
    assert sorted(gauges_by_method(records)) == sorted(written)  # exactly the acknowledged ones
    # two operators record the same burn at once: one wins, the other is told why
    number = after_state(session, tmp_path / "after.toml")
    results = _both(*[["session", "record", session, "--burn", number, "--after", tmp_path / "after.toml"]] * 2)
    codes = sorted(rc for rc, _, _ in results)
    assert codes == [0, 2], results
    err = next(e for rc, _, e in results if rc == 2)
    refused(subprocess.CompletedProcess([], 2, "", err))
    assert any(w in err for w in ("not the next burn", "changed meanwhile", "busy")), err
    records, state = replay(session)
    assert active_burns(state) == [number]
    FIGURES["two writers: rounds"] += 3


# --------------------------------------------------------------------------- damaged files

@pytest.fixture
def filled_session(tmp_path):
    """A closed session of 1 scenario + 60 gauge entries spread over several pages."""
    path = new_session(tmp_path)
    with Session.open(path) as s:
        for k in range(60):
            s.gauge(parse_utc("2027-03-14T07:00:00Z") + k, 17.0 - k * 1e-3, f"PVT {k:03d} " + "x" * 250)
    with Journal.open(path, readonly=True) as j:
        records = j.records()
    return path, records


def _damage(data: bytes, how: str) -> bytes:
    page = int.from_bytes(data[16:18], "big")
    if how == "truncated":
        return data[:len(data) // 2 + 100]
    if how == "garbled page":
        k = len(data) // page // 2
        return data[:k * page] + random.Random(1).randbytes(page) + data[(k + 1) * page:]
    if how == "rotten row":
        at = data.find(b"PVT 040")
        return data[:at] + b"PVT 041" + data[at + 7:]
    if how == "first page destroyed":
        return random.Random(2).randbytes(page) + data[page:]
    raise ValueError(how)


@pytest.mark.parametrize("how, words", [
    ("truncated", ("damaged", "recover")),
    ("garbled page", ("damaged", "recover")),
    ("rotten row", ("checksum", "recover")),
    ("first page destroyed", ("not a burndesk session journal", "recover")),
])
def test_damaged_session_is_refused_and_recovered(tmp_path, filled_session, how, words):
    path, originals = filled_session
    damaged = tmp_path / "damaged.burn"
    damaged.write_bytes(_damage(path.read_bytes(), how))
    before = digest(damaged)
    refused(cli("session", "show", damaged), damaged.name, *words)
    if how == "truncated":  # writers are refused the same way (checked once: each run costs a second)
        refused(cli("session", "gauge", damaged, "--propellant", 1, "--epoch", "2027-03-14T08:00:00Z"),
                damaged.name, *words)
    rescued = tmp_path / "rescued.burn"
    proc = cli("session", "recover", damaged, rescued, ok=(0, 3))
    assert "recovered" in proc.stdout
    wal = Path(str(damaged) + "-wal")  # SQLite's (empty) side file of a reader may appear
    assert digest(damaged) == before and (not wal.exists() or wal.stat().st_size == 0)  # only read
    with Journal.open(rescued, readonly=True) as j:
        salvaged = j.records()
    assert salvaged == originals[:len(salvaged)] and len(salvaged) >= 1  # an intact prefix
    assert stat.S_IMODE(os.stat(rescued).st_mode) == 0o600
    cli("session", "show", rescued, ok=(0, 3))
    if how == "truncated":
        cli("session", "gauge", rescued, "--propellant", 1, "--epoch", "2027-03-14T08:00:00Z", ok=(0,))
        refused(cli("session", "recover", damaged, rescued), "already exists")
    FIGURES[f"damaged file ({how}): records salvaged of {len(originals)}"] = len(salvaged)


@pytest.mark.parametrize("content, words", [
    (b"", ("empty file",)),
    (b"name = 'not a journal'\n", ("not a burndesk session journal",)),
    (b"SQLite format 3\x00" + bytes(50), ("damaged",)),
])
def test_files_that_are_no_session_are_refused(tmp_path, content, words):
    path = tmp_path / "odd.burn"
    path.write_bytes(content)
    refused(cli("session", "show", path), "odd.burn", *words)


# --------------------------------------------------------------------------- permissions

def _unprivileged(folder: Path):
    """A command prefix under which permission bits bind, or None (with the reason)."""
    if os.geteuid() != 0:
        return [], "not root"
    probe_dir = folder / "probe"
    probe_dir.mkdir()
    os.chmod(probe_dir, 0o500)
    try:
        # 'nobody' first: it needs to reach this interpreter and the test folder
        try:
            done = subprocess.run([EXE, "--version"], capture_output=True, text=True, timeout=60,
                                  user=65534, group=65534, extra_groups=[])
            if done.returncode == 0:
                return "nobody", "as nobody"
        except (OSError, subprocess.SubprocessError):
            pass
        setpriv = shutil.which("setpriv")
        if setpriv:
            prefix = [setpriv, "--bounding-set", "-dac_override,-dac_read_search,-fowner", "--"]
            touch = subprocess.run([*prefix, "/bin/sh", "-c", f"touch '{probe_dir}/x'"], capture_output=True,
                                   timeout=60)
            works = subprocess.run([*prefix, EXE, "--version"], capture_output=True, timeout=60)
            if touch.returncode != 0 and works.returncode == 0:
                return prefix, "as root without CAP_DAC_OVERRIDE (setpriv)"
        return None, "running as root; 'nobody' cannot reach this Python and setpriv cannot drop capabilities"
    finally:
        os.chmod(probe_dir, 0o700)


def test_read_only_folder_and_file(tmp_path):
    folder = Path(tempfile.mkdtemp(prefix="burndesk-ro-"))
    try:
        how, why = _unprivileged(folder)
        if how is None:
            pytest.skip(why)
        kw = {}
        prefix = how if isinstance(how, list) else []
        if how == "nobody":
            kw = dict(user=65534, group=65534, extra_groups=[])
        session = new_session(folder)
        if how == "nobody":
            for p in [folder, *folder.iterdir()]:
                os.chown(p, 65534, 65534)
        export = folder / "export"
        export.mkdir()
        if how == "nobody":
            os.chown(export, 65534, 65534)
        cli("session", "gauge", session, "--propellant", 17, "--epoch", "2027-03-14T07:00:00Z", ok=(0,),
            prefix=prefix, **kw)
        assert after_state(session, folder / "after.toml") == 1
        if how == "nobody":
            os.chown(folder / "after.toml", 65534, 65534)
        records, _ = replay(session)
        listing = sorted(os.listdir(folder))
        os.chmod(export, 0o500)
        os.chmod(folder, 0o500)
        try:
            shown = cli("session", "show", session, "--json", ok=(0, 3), prefix=prefix, **kw)
            assert json.loads(shown.stdout)
            refused(cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z",
                        prefix=prefix, **kw), "read-only")
            refused(cli("session", "record", session, "--burn", 1, "--after", folder / "after.toml",
                        prefix=prefix, **kw), "read-only")
            refused(cli("session", "export", session, "--csv", export, prefix=prefix, **kw), "cannot write")
            refused(cli("plan", folder / "scenario.toml", "--csv", export, prefix=prefix, **kw), "cannot write")
            refused(cli("session", "init", folder / "new.burn", "--scenario", folder / "scenario.toml",
                        prefix=prefix, **kw), "read-only")
            assert sorted(os.listdir(folder)) == listing  # no -wal, -shm or new file appeared
            assert os.listdir(export) == []
        finally:
            os.chmod(folder, 0o700)
            os.chmod(export, 0o700)
        os.chmod(session, 0o400)
        try:
            cli("session", "show", session, ok=(0, 3), prefix=prefix, **kw)
            refused(cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z",
                        prefix=prefix, **kw), "read-only")
        finally:
            os.chmod(session, 0o600)
        assert replay(session)[0] == records  # nothing lost, nothing added
        cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z", ok=(0,),
            prefix=prefix, **kw)
        FIGURES[f"read-only checks run {why}"] += 1
    finally:
        shutil.rmtree(folder, ignore_errors=True)


# --------------------------------------------------------------------------- a full disk

def _limit_file_size(limit):
    def pre():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit fails with EFBIG
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return pre


def test_write_failing_for_lack_of_space_on_the_command_line(tmp_path):
    """The writer may not grow a file past 96 KiB (RLIMIT_FSIZE): a 120 kB entry cannot be written."""
    session = new_session(tmp_path)
    cli("session", "gauge", session, "--propellant", 17, "--epoch", "2027-03-14T07:00:00Z", ok=(0,))
    before, _ = replay(session)
    assert session.stat().st_size < 96 * 1024
    proc = subprocess.run([EXE, "session", "gauge", str(session), "--propellant", "16", "--epoch",
                           "2027-03-14T08:00:00Z", "--method", "y" * 120_000], capture_output=True, text=True,
                          timeout=300, env=env(), preexec_fn=_limit_file_size(96 * 1024))
    assert "Traceback" not in proc.stderr
    line = refused(proc, str(session), "not committed")
    assert "disk is full" in line or "I/O error" in line
    assert replay(session)[0] == before  # nothing lost, nothing half-written
    cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z", ok=(0,))
    FIGURES["full disk (file-size limit): refused writes"] += 1


@pytest.fixture
def small_disk(tmp_path):
    """A 1 MiB tmpfs mounted on a folder (root only), unmounted afterwards."""
    mnt = tmp_path / "disk"
    mnt.mkdir()
    if os.geteuid() != 0 or not shutil.which("mount"):
        pytest.skip("mounting a small tmpfs needs root; the file-size-limit test covers a failing write")
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m,mode=0700", "tmpfs", str(mnt)],
                          capture_output=True, text=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here ({done.stderr.strip()}); the file-size-limit test covers a "
                    "failing write")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", str(mnt)], capture_output=True)


def _fill(folder: Path, leave_bytes: int) -> Path:
    """Fill the file system of ``folder`` until about ``leave_bytes`` are free."""
    filler = folder / "filler"
    st = os.statvfs(folder)
    free = st.f_bavail * st.f_frsize
    with open(filler, "wb") as fh:
        try:
            fh.write(bytes(max(free - leave_bytes, 0)))
            fh.flush()
        except OSError:
            pass
    return filler


def test_full_tmpfs(small_disk, tmp_path):
    (small_disk / "craft.toml").write_text(VEHICLE)
    (small_disk / "scenario.toml").write_text(SCENARIO)
    session = small_disk / "campaign.burn"
    cli("session", "init", session, "--scenario", small_disk / "scenario.toml", ok=(0, 3))
    cli("session", "gauge", session, "--propellant", 17, "--epoch", "2027-03-14T07:00:00Z", ok=(0,))
    before, _ = replay(session)
    # almost full: the session opens, but a 120 kB entry does not fit
    filler = _fill(small_disk, 80 * 1024)
    line = refused(cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z",
                       "--method", "y" * 120_000), str(session))
    assert "disk is full" in line or "I/O error" in line
    # completely full: no room even for SQLite's -shm index
    filler.unlink()
    filler = _fill(small_disk, 0)
    refused(cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z"),
            str(session), "disk", "full")
    shown = cli("session", "show", session, ok=(0, 3))  # still readable, as it stands
    assert "abuse campaign" in shown.stdout
    refused(cli("session", "recover", session, small_disk / "copy.burn"), "full")
    refused(cli("session", "init", small_disk / "other.burn", "--scenario", small_disk / "scenario.toml"),
            "other.burn", "nothing was created")
    assert not (small_disk / "other.burn").exists() and not (small_disk / "copy.burn").exists()
    filler.unlink()
    assert replay(session)[0] == before  # nothing committed lost, nothing half-written
    cli("session", "gauge", session, "--propellant", 16, "--epoch", "2027-03-14T08:00:00Z", ok=(0,))
    assert len(replay(session)[0]) == len(before) + 1
    FIGURES["full disk (tmpfs): refused writes"] += 3
