"""Session journal under abuse: SIGKILL while writing, two writers, a size-limited process,
truncated and overwritten files, and recovery into a new file.

Child processes run ``tests/journal_child.py``; a child prints a seq only after ``append`` (or
``append_many``) returned, so every printed seq is a record the tool reported as written.
Random choices are seeded, so a failure can be replayed.
"""

from __future__ import annotations

import hashlib
import importlib.util
import os
import random
import shutil
import signal
import sqlite3
import stat
import struct
import subprocess
import sys
import time
from pathlib import Path

import pytest

from mechanics.session.journal import Journal, JournalError, recover

CHILD = Path(__file__).with_name("journal_child.py")
PAGE_SIZE = 4096  # SQLite's default page size (SQLite documentation, from memory); checked below

_spec = importlib.util.spec_from_file_location("journal_child_for_tests", CHILD)
child = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(child)


def run_child(*args: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, str(CHILD), *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)


def reported_seqs(output: bytes) -> list[int]:
    """Seqs from complete ``ok ...`` lines (a line cut by the kill is ignored)."""
    seqs: list[int] = []
    for line in output.split(b"\n")[:-1]:
        if line.startswith(b"ok "):
            seqs.extend(int(x) for x in line.split()[1:])
    return seqs


def digest(*paths: Path) -> dict[str, str | None]:
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest() if p.exists() else None for p in paths}


def raw_rows(path: Path) -> list[tuple]:
    con = sqlite3.connect(path, isolation_level=None)
    try:
        return con.execute(
            "SELECT seq, written_utc, kind, payload, schema, checksum FROM events ORDER BY seq"
        ).fetchall()
    finally:
        con.close()


# --------------------------------------------------------------------------------------------
# SIGKILL


def test_sigkill_while_appending_loses_no_reported_record(tmp_path: Path):
    path = tmp_path / "crash.journal"
    Journal.create(path).close()
    rng = random.Random(20270314)
    reported: list[int] = []
    trials = 20
    for trial in range(trials):
        proc = run_child("append-loop", str(path), str(trial))
        ready = proc.stdout.readline()
        assert ready.startswith(b"ready "), proc.stderr.read().decode()
        assert int(ready.split()[1]) >= (max(reported) if reported else 0)
        time.sleep(rng.uniform(0.0, 0.12))
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        assert proc.returncode == -signal.SIGKILL, proc.stderr.read().decode()
        reported += reported_seqs(proc.stdout.read())
        proc.stdout.close()
        proc.stderr.close()

        with Journal.open(path) as j:  # opens, and records() checks checksums and gapless seqs
            recs = j.records()
        seqs = [r.seq for r in recs]
        assert seqs == list(range(1, len(recs) + 1))
        assert set(reported) <= set(seqs), f"trial {trial}: a reported record is missing"
        for rec in recs:
            first, size = rec.payload["batch"]
            assert rec.kind == "test_loop"
            assert rec.payload == child.payload_for(rec.seq, [first, size])
            # the whole batch is there: append_many is all or nothing
            assert first <= rec.seq < first + size
            assert first + size - 1 <= len(recs), f"trial {trial}: half of batch {first}+{size}"
    assert len(reported) > trials, "the child hardly wrote anything: the kills tested nothing"


def test_sigkill_while_creating_leaves_no_half_journal(tmp_path: Path):
    rng = random.Random(7)
    for trial in range(10):
        path = tmp_path / f"c{trial}.journal"
        proc = run_child("create", str(path))
        time.sleep(rng.uniform(0.0, 0.15))
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        proc.stdout.close()
        proc.stderr.close()
        if path.exists():
            with Journal.open(path) as j:
                assert j.count() == 0
                assert j.append("k", {}) == 1
            assert stat.S_IMODE(os.stat(path).st_mode) == 0o600
    # leftovers can only be hidden temporaries, never a journal under the requested name
    for name in os.listdir(tmp_path):
        assert name.startswith(".") or name.endswith((".journal", ".journal-wal", ".journal-shm")), name


# --------------------------------------------------------------------------------------------
# two writers


def test_two_writer_processes_interleave_without_loss(tmp_path: Path):
    path = tmp_path / "two.journal"
    Journal.create(path).close()
    n = 150
    procs = {name: run_child("writer", str(path), name, str(n)) for name in ("alpha", "bravo")}
    outs = {}
    for name, proc in procs.items():
        out, err = proc.communicate(timeout=120)
        assert proc.returncode == 0, err.decode()
        outs[name] = reported_seqs(out)
    with Journal.open(path) as j:
        recs = j.records()
    assert [r.seq for r in recs] == list(range(1, 2 * n + 1))
    for name in procs:
        mine = [r for r in recs if r.payload["writer"] == name]
        assert [r.payload["i"] for r in mine] == list(range(n))  # each writer's order kept
        assert [r.seq for r in mine] == outs[name]  # each got exactly the seqs it was told
    assert not set(outs["alpha"]) & set(outs["bravo"])


# --------------------------------------------------------------------------------------------
# a write that fails for lack of space


def test_write_failing_for_lack_of_space_commits_nothing_partial(tmp_path: Path):
    """The child may not grow any file past 64 KiB (RLIMIT_FSIZE), so a write hits the limit."""
    path = tmp_path / "full.journal"
    Journal.create(path).close()
    proc = run_child("fill", str(path), str(64 * 1024))
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 0, err.decode()
    lines = out.decode().splitlines()
    errors = [line for line in lines if line.startswith("error ")]
    assert len(errors) == 1, lines
    assert "the record was not committed and earlier records are intact" in errors[0]
    assert ("disk is full" in errors[0]) or ("disk I/O error" in errors[0])
    assert str(path) in errors[0]
    reported = reported_seqs(out)
    assert reported == list(range(1, len(reported) + 1)) and reported
    with Journal.open(path) as j:
        recs = j.records()
        assert [r.seq for r in recs] == reported  # nothing lost, nothing half-written
        assert all(r.payload == {"i": r.seq - 1, "pad": "p" * 1000} for r in recs)
        assert j.append("test_fill", {"after": True}) == len(reported) + 1


# --------------------------------------------------------------------------------------------
# damaged files and recovery


N_RECORDS = 300


@pytest.fixture
def intact(tmp_path: Path):
    """A closed journal of 300 records, each with a findable marker, and its records."""
    path = tmp_path / "intact.journal"
    with Journal.create(path) as j:
        for start in range(1, N_RECORDS + 1, 50):
            j.append_many([("burn_recorded", {"note": f"marker-{i:04d}", "pad": "x" * 150})
                           for i in range(start, start + 50)])
        recs = j.records()
    data = path.read_bytes()
    assert data[:16] == b"SQLite format 3\x00"
    assert int.from_bytes(data[16:18], "big") == PAGE_SIZE
    return path, recs, data


def page_of(data: bytes, seq: int) -> int:
    at = data.find(b"marker-%04d" % seq)
    assert at >= 0
    return at // PAGE_SIZE


def check_recovered(dst: Path, originals, report, lost_pages: set[int], data: bytes):
    """The salvage is exactly the intact prefix, and everything on intact pages was found."""
    k = report.recovered
    with Journal.open(dst) as j:
        assert j.records() == originals[:k]  # same seq, written time, kind, payload, schema
    assert stat.S_IMODE(os.stat(dst).st_mode) == 0o600
    assert report.stopped_at == k + 1
    lost_candidates = [s for s in range(1, N_RECORDS + 1) if page_of(data, s) in lost_pages]
    assert lost_candidates
    assert k >= min(lost_candidates) - 1
    assert k < N_RECORDS
    on_intact_pages = [s for s in range(1, N_RECORDS + 1) if page_of(data, s) not in lost_pages]
    after = [s for s in on_intact_pages if s > k + 1]
    assert report.intact_after_stop >= len(after)


def test_truncated_journal_is_refused_and_its_prefix_recovered(tmp_path: Path, intact):
    path, originals, data = intact
    cut = len(data) // 2 + 123
    damaged = tmp_path / "truncated.journal"
    damaged.write_bytes(data[:cut])
    with pytest.raises(JournalError, match=r"truncated\.journal: session journal is damaged .truncated.*recover"):
        Journal.open(damaged)
    before = digest(damaged)
    report = recover(damaged, tmp_path / "rescued.journal")
    assert digest(damaged) == before and not Path(str(damaged) + "-wal").exists()
    lost = set(range(cut // PAGE_SIZE, len(data) // PAGE_SIZE))
    check_recovered(tmp_path / "rescued.journal", originals, report, lost, data)
    assert report.problems
    assert "stopped at record" in report.summary()


def test_garbage_in_the_middle_is_detected_and_the_rest_recovered(tmp_path: Path, intact):
    path, originals, data = intact
    page = page_of(data, 150)
    garbage = random.Random(3).randbytes(PAGE_SIZE)
    damaged = tmp_path / "garbled.journal"
    damaged.write_bytes(data[:page * PAGE_SIZE] + garbage + data[(page + 1) * PAGE_SIZE:])
    try:
        with Journal.open(damaged, readonly=True) as j:
            j.records()
        raise AssertionError("damage went unnoticed")
    except JournalError as exc:
        assert "damaged" in str(exc) and "recover" in str(exc)
    report = recover(damaged, tmp_path / "rescued.journal")
    check_recovered(tmp_path / "rescued.journal", originals, report, {page}, data)
    assert report.stopped_at <= 150
    assert report.intact_after_stop == N_RECORDS - max(
        s for s in range(1, N_RECORDS + 1) if page_of(data, s) == page)
    assert "intact record(s) after it were not carried over" in report.summary()


def test_destroyed_first_page_still_recovers_every_record(tmp_path: Path, intact):
    path, originals, data = intact
    damaged = tmp_path / "headless.journal"
    damaged.write_bytes(random.Random(4).randbytes(PAGE_SIZE) + data[PAGE_SIZE:])
    with pytest.raises(JournalError, match="not a burndesk session journal .it is not an SQLite database"):
        Journal.open(damaged)
    report = recover(damaged, tmp_path / "rescued.journal")
    assert report.recovered == N_RECORDS and report.intact_after_stop == 0
    assert report.stopped_at == N_RECORDS + 1  # damage was found, so the end is not certain
    with Journal.open(tmp_path / "rescued.journal") as j:
        assert j.records() == originals
        assert j.append("k", {}) == N_RECORDS + 1


def test_rotten_row_stops_the_salvage_at_that_record(tmp_path: Path, intact):
    path, originals, data = intact
    at = data.find(b"marker-0200")
    rotten = bytearray(data)
    rotten[at + 10] = ord("1")  # marker-0201 now, so its checksum fails
    damaged = tmp_path / "rotten.journal"
    damaged.write_bytes(bytes(rotten))
    report = recover(damaged, tmp_path / "rescued.journal")
    assert (report.recovered, report.stopped_at, report.intact_after_stop) == (199, 200, 100)
    assert any("record 200 fails its checksum" in p for p in report.problems)
    with Journal.open(tmp_path / "rescued.journal") as j:
        assert j.records() == originals[:199]


def test_recovering_a_healthy_open_journal_copies_it_exactly(tmp_path: Path):
    src = tmp_path / "live.journal"
    with Journal.create(src) as j:
        j.append_many([("k", {"i": i}) for i in range(40)])
        j.append("k", {"i": 40})
        wal = Path(str(src) + "-wal")
        assert wal.stat().st_size > 0  # the newest records are still only in the -wal file
        before = digest(src, wal)
        report = recover(src, tmp_path / "copy.journal")
        assert digest(src, wal) == before  # the source is never modified
        assert report.complete and report.stopped_at is None and report.problems == ()
        assert report.recovered == 41
        assert "read cleanly" in report.summary()
        expected_rows = raw_rows(src)
    assert raw_rows(tmp_path / "copy.journal") == expected_rows  # same times and checksums


def wal_checksum(data: bytes, big_endian: bool, s0: int, s1: int) -> tuple[int, int]:
    """SQLite's WAL checksum over 32-bit word pairs (SQLite file format, sec. 4.1; from memory)."""
    words = struct.unpack((">" if big_endian else "<") + f"{len(data) // 4}I", data)
    for i in range(0, len(words), 2):
        s0 = (s0 + words[i] + s1) & 0xFFFFFFFF
        s1 = (s1 + words[i + 1] + s0) & 0xFFFFFFFF
    return s0, s1


def test_recovery_reads_committed_log_frames_but_never_uncommitted_ones(tmp_path: Path):
    """A snapshot as a kill in the middle of a commit leaves it: the last transaction's frames
    are all in the -wal file with valid checksums, but its commit mark never got written."""
    src = tmp_path / "live.journal"
    snap = tmp_path / "snapshot.journal"
    with Journal.create(src) as j:
        j.append_many([("k", {"i": i, "pad": "c" * 300}) for i in range(20)])
        j.append_many([("k", {"i": i, "pad": "u" * 300}) for i in range(20, 40)])
        shutil.copyfile(src, snap)
        shutil.copyfile(str(src) + "-wal", str(snap) + "-wal")
    wal = bytearray(Path(str(snap) + "-wal").read_bytes())
    magic, page_size = struct.unpack_from(">I", wal, 0)[0], struct.unpack_from(">I", wal, 8)[0]
    big = magic == 0x377F0683
    frame = 24 + page_size
    last = 32 + ((len(wal) - 32) // frame - 1) * frame
    assert struct.unpack_from(">I", wal, last + 4)[0] != 0  # the last frame marks a commit
    s0, s1 = struct.unpack_from(">II", wal, last - frame + 16)  # running checksum so far
    page = bytes(wal[last + 24:last + frame])
    # our checksum reproduces SQLite's own for the frame as written ...
    assert wal_checksum(bytes(wal[last:last + 8]) + page, big, s0, s1) == struct.unpack_from(">II", wal, last + 16)
    # ... so the frame can be re-sealed, valid, without its commit mark
    wal[last + 4:last + 8] = bytes(4)
    wal[last + 16:last + 24] = struct.pack(">II", *wal_checksum(bytes(wal[last:last + 8]) + page, big, s0, s1))
    Path(str(snap) + "-wal").write_bytes(bytes(wal))
    assert b"u" * 300 in wal  # the unfinished transaction's records are in the log
    with Journal.open(snap, readonly=True) as j:
        assert j.count() == 20  # SQLite agrees: the second transaction never happened
    # Main file garbled (SQLite still reads what the log holds), or emptied (SQLite then ignores
    # the log and only the page scan of the log finds the records).
    for name, main in (("garbled", random.Random(6).randbytes(snap.stat().st_size)), ("emptied", b"")):
        damaged = tmp_path / f"{name}.journal"
        damaged.write_bytes(main)
        Path(str(damaged) + "-wal").write_bytes(bytes(wal))
        with pytest.raises(JournalError):
            Journal.open(damaged, readonly=True)
        report = recover(damaged, tmp_path / f"{name}-rescued.journal")
        assert report.problems and report.stopped_at == 21, name
        assert (report.recovered, report.intact_after_stop) == (20, 0), name
        with Journal.open(tmp_path / f"{name}-rescued.journal") as j:
            assert [r.payload["i"] for r in j.records()] == list(range(20))
        assert Path(str(damaged) + "-wal").read_bytes() == wal  # the source was not touched


def test_recover_refusals(tmp_path: Path, intact):
    path, originals, data = intact
    existing = tmp_path / "existing.journal"
    existing.write_text("do not touch")
    with pytest.raises(JournalError, match="already exists; refusing to overwrite"):
        recover(path, existing)
    assert existing.read_text() == "do not touch"
    with pytest.raises(JournalError, match="must be a new file, not the source"):
        recover(path, path)
    with pytest.raises(JournalError, match="no such session journal to recover"):
        recover(tmp_path / "missing.journal", tmp_path / "out.journal")
    with pytest.raises(JournalError, match="folder .* does not exist"):
        recover(path, tmp_path / "nowhere" / "out.journal")
    junk = tmp_path / "junk.bin"
    junk.write_bytes(random.Random(5).randbytes(3 * PAGE_SIZE))
    with pytest.raises(JournalError, match="not a burndesk session journal.*nothing was recovered"):
        recover(junk, tmp_path / "out.journal")
    assert not (tmp_path / "out.journal").exists()
