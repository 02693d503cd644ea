"""Session journal: API, format, refusals and permissions (fast tests, small files on disk).

The on-disk format checks here are specified by the journal module itself (columns, canonical
JSON, checksum framing); SQLite behaviour relied on (WAL, triggers, application id) is from the
SQLite documentation, from memory.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
import shutil
import sqlite3
import stat
import subprocess
import sys
import tempfile
from concurrent.futures import ThreadPoolExecutor
from datetime import datetime, timezone
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import mechanics.session.journal as J
from mechanics.session.journal import (
    APPLICATION_ID,
    SCHEMA_VERSION,
    Journal,
    JournalError,
    Record,
)

CHILD = Path(__file__).with_name("journal_child.py")
ISO_MS_Z = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$")


def raw(path: Path) -> sqlite3.Connection:
    """A plain sqlite3 connection, bypassing the journal API (autocommit)."""
    return sqlite3.connect(path, isolation_level=None)


def raw_rows(path: Path) -> list[tuple]:
    con = raw(path)
    try:
        return con.execute(
            "SELECT seq, written_utc, kind, payload, schema, checksum FROM events ORDER BY seq"
        ).fetchall()
    finally:
        con.close()


@pytest.fixture
def jpath(tmp_path: Path) -> Path:
    return tmp_path / "campaign.journal"


@pytest.fixture
def journal(jpath: Path):
    with Journal.create(jpath) as j:
        yield j


# --------------------------------------------------------------------------------------------
# round trip and format


def test_round_trip_gapless_seq(journal: Journal):
    entries = [
        ("scenario_loaded", {"name": "demo", "mass_kg": 1250.5}),
        ("burn_recorded", {"burn": 1, "dv_m_s": 12.25, "ok": True, "note": None}),
        ("entry_retracted", {"entry": 2, "why": "typo: ignition é 06:00"}),
    ]
    seqs = [journal.append(k, p) for k, p in entries[:2]]
    seqs += journal.append_many([entries[2], ("gauge_read", {"kg": [1.0, 2.5]})])
    assert seqs == [1, 2, 3, 4]
    recs = journal.records()
    assert [r.seq for r in recs] == [1, 2, 3, 4]
    assert [(r.kind, r.payload) for r in recs[:3]] == entries
    assert recs[3].payload == {"kg": [1.0, 2.5]}
    assert all(r.schema == SCHEMA_VERSION for r in recs)
    assert journal.count() == 4
    assert journal.append_many([]) == []
    assert journal.count() == 4


def test_records_survive_reopen(jpath: Path):
    with Journal.create(jpath) as j:
        for i in range(5):
            j.append("k", {"i": i, "x_m": i / 3})
        before = j.records()
    with Journal.open(jpath) as j:
        assert j.records() == before
        assert j.append("k", {"i": 5}) == 6
    with Journal.open(jpath, readonly=True) as j:
        assert [r.payload["i"] for r in j.records()] == [0, 1, 2, 3, 4, 5]


def test_records_upto_is_an_inclusive_prefix(journal: Journal):
    journal.append_many([("k", {"i": i}) for i in range(6)])
    assert [r.seq for r in journal.records(upto=3)] == [1, 2, 3]
    assert journal.records(upto=0) == []
    assert len(journal.records(upto=99)) == 6
    for bad in (-1, 2.0, True, "3"):
        with pytest.raises(JournalError, match="upto"):
            journal.records(upto=bad)


def test_written_time_is_iso_utc_with_ms_from_the_wall_clock(journal: Journal):
    def ms(t: datetime) -> datetime:
        return t.replace(microsecond=t.microsecond // 1000 * 1000)

    before = ms(datetime.now(timezone.utc))
    journal.append("k", {})
    journal.append_many([("k", {}), ("k", {})])
    after = datetime.now(timezone.utc)
    for rec in journal.records():
        assert ISO_MS_Z.match(rec.written_utc), rec.written_utc
        written = datetime.strptime(rec.written_utc, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=timezone.utc)
        assert before <= written <= after


def test_payload_json_is_canonical_and_checksum_framing_is_stable(journal: Journal, jpath: Path):
    journal.append("k", {"b": 1, "a": {"d": 2, "c": [1.5, "é"]}})
    journal.append("k", {"a": {"c": [1.5, "é"], "d": 2}, "b": 1})  # same dict, other key order
    rows = raw_rows(jpath)
    expected_text = '{"a":{"c":[1.5,"\\u00e9"],"d":2},"b":1}'  # sorted keys, compact, ASCII
    assert rows[0][3] == rows[1][3] == expected_text
    for seq, written, kind, text, schema, checksum in rows:
        framed = json.dumps([seq, written, kind, text, schema], separators=(",", ":"))
        assert checksum == hashlib.sha256(framed.encode("ascii")).hexdigest()


def test_floats_and_big_ints_round_trip_exactly(journal: Journal):
    payload = {"tiny": 5e-324, "big": 1.7976931348623157e308, "third": 1 / 3, "neg0": -0.0,
               "int": 2**80, "negint": -(2**63)}
    journal.append("k", payload)
    back = journal.records()[0].payload
    assert back == payload
    assert math.copysign(1.0, back["neg0"]) == -1.0
    assert type(back["int"]) is int


json_leaf = st.one_of(
    st.none(), st.booleans(), st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=20),
)
json_value = st.recursive(
    json_leaf,
    lambda kids: st.one_of(st.lists(kids, max_size=4),
                           st.dictionaries(st.text(max_size=8), kids, max_size=4)),
    max_leaves=12,
)


def test_any_json_payload_round_trips():
    with tempfile.TemporaryDirectory() as tmp:
        with Journal.create(Path(tmp) / "p.journal") as j:

            @settings(max_examples=60, deadline=None, database=None)
            @given(payload=st.dictionaries(st.text(max_size=8), json_value, max_size=5),
                   kind=st.text(min_size=1, max_size=30).filter(lambda s: s == s.strip() and s.isprintable()))
            def check(payload, kind):
                seq = j.append(kind, payload)
                rec = j.records()[-1]
                assert (rec.seq, rec.kind, rec.payload) == (seq, kind, payload)

            check()


def test_one_journal_shared_by_threads_stays_gapless(journal: Journal):
    def work(name: str) -> list[int]:
        return [journal.append("k", {"thread": name, "i": i}) for i in range(100)]

    with ThreadPoolExecutor(max_workers=3) as pool:
        results = list(pool.map(work, ["a", "b", "c"]))
    assert sorted(s for seqs in results for s in seqs) == list(range(1, 301))
    recs = journal.records()
    for name, seqs in zip("abc", results):
        assert [r.payload["i"] for r in recs if r.payload["thread"] == name] == list(range(100))
        assert [r.seq for r in recs if r.payload["thread"] == name] == seqs


# --------------------------------------------------------------------------------------------
# refusals of bad records


@pytest.mark.parametrize(
    "payload, words",
    [
        ({"dv_m_s": float("nan")}, r"payload\['dv_m_s'\] is NaN"),
        ({"dv_m_s": float("inf")}, r"payload\['dv_m_s'\] is infinite"),
        ({"burns": [{"t_s": 1.0}, {"t_s": -float("inf")}]}, r"payload\['burns'\]\[1\]\['t_s'\] is infinite"),
    ],
)
def test_nan_and_infinity_are_refused(journal: Journal, payload, words):
    journal.append("k", {"fine": 1})
    with pytest.raises(ValueError, match=words):
        journal.append("k", payload)
    with pytest.raises(JournalError, match="finite"):
        journal.append_many([("k", {"fine": 2}), ("k", payload)])
    assert [r.payload for r in journal.records()] == [{"fine": 1}]


@pytest.mark.parametrize(
    "payload, words",
    [
        ({"when": datetime(2027, 3, 14)}, r"payload\['when'\] is of type datetime"),
        ({"s": {1, 2}}, "of type set"),
        ({"raw": b"\x00"}, "of type bytes"),
        ({"obj": object()}, "of type object"),
        ({1: "x"}, "key 1 of type int"),
        ({"a": {("t",): 1}}, "key .* of type tuple"),
        ([("a", 1)], "payload must be a dict, got list"),
        (None, "payload must be a dict, got NoneType"),
    ],
)
def test_non_json_payloads_are_refused(journal: Journal, jpath: Path, payload, words):
    with pytest.raises(JournalError, match=words) as info:
        journal.append("k", payload)
    assert str(jpath) in str(info.value)
    assert journal.count() == 0


def test_numpy_scalars_are_refused_with_their_type(journal: Journal):
    np = pytest.importorskip("numpy")
    with pytest.raises(JournalError, match="of type int64"):
        journal.append("k", {"n": np.int64(3)})
    journal.append("k", {"x": float(np.float64(2.5))})
    assert journal.records()[0].payload == {"x": 2.5}


@pytest.mark.parametrize("kind", ["", " padded", "tab\t", "new\nline", 7, None, "x" * 201, "\ud800"])
def test_bad_kinds_are_refused(journal: Journal, kind):
    with pytest.raises(JournalError, match="event kind"):
        journal.append(kind, {})
    assert journal.count() == 0


def test_append_many_entries_must_be_pairs(journal: Journal):
    with pytest.raises(JournalError, match="entry 1: expected a .kind, payload. pair"):
        journal.append_many([("k", {}), ("k", {}, "extra")])
    assert journal.count() == 0


# --------------------------------------------------------------------------------------------
# append-only, enforced by the file itself


def test_triggers_refuse_update_delete_and_out_of_order_insert(journal: Journal, jpath: Path):
    journal.append_many([("k", {"i": i}) for i in range(3)])
    before = raw_rows(jpath)
    con = raw(jpath)
    try:
        with pytest.raises(sqlite3.DatabaseError, match="append-only: UPDATE"):
            con.execute("UPDATE events SET payload = '{}' WHERE seq = 2")
        with pytest.raises(sqlite3.DatabaseError, match="append-only: UPDATE"):
            con.execute("UPDATE events SET seq = seq + 10")
        with pytest.raises(sqlite3.DatabaseError, match="append-only: DELETE"):
            con.execute("DELETE FROM events WHERE seq = 3")
        with pytest.raises(sqlite3.DatabaseError, match="append-only: DELETE"):
            con.execute("DELETE FROM events")
        row = before[0]
        with pytest.raises(sqlite3.DatabaseError, match="append-only: a new record must take the next seq"):
            con.execute("INSERT OR REPLACE INTO events VALUES (?, ?, ?, ?, ?, ?)", row)
        with pytest.raises(sqlite3.DatabaseError, match="next seq"):
            con.execute("INSERT INTO events VALUES (?, ?, ?, ?, ?, ?)", (9, *row[1:]))
    finally:
        con.close()
    assert raw_rows(jpath) == before
    assert journal.append("k", {"i": 3}) == 4


def test_the_api_offers_no_way_to_change_a_record():
    public = {name for name in dir(Journal) if not name.startswith("_")}
    assert public == {"create", "open", "path", "readonly", "schema", "closed", "append",
                      "append_many", "records", "count", "close"}


# --------------------------------------------------------------------------------------------
# opening: what is refused and how


def test_newer_schema_is_refused(jpath: Path):
    with Journal.create(jpath) as j:
        j.append("k", {})
    con = raw(jpath)  # simulates a future burndesk that migrated the file
    con.execute("UPDATE meta SET value = ? WHERE key = 'schema'", (str(SCHEMA_VERSION + 1),))
    con.close()
    expected = (f"written by a newer burndesk (schema {SCHEMA_VERSION + 1} > {SCHEMA_VERSION}): "
                "upgrade to open it")
    for readonly in (False, True):
        with pytest.raises(JournalError) as info:
            Journal.open(jpath, readonly=readonly)
        assert str(info.value) == f"{jpath}: {expected}"


def test_unreadable_schema_version_is_reported_as_damage(jpath: Path):
    Journal.create(jpath).close()
    con = raw(jpath)
    con.execute("UPDATE meta SET value = 'one' WHERE key = 'schema'")
    con.close()
    with pytest.raises(JournalError, match="damaged .unreadable schema version 'one'.*recover"):
        Journal.open(jpath)


def test_missing_file_folder_and_empty_file(tmp_path: Path):
    with pytest.raises(JournalError, match="does not exist"):
        Journal.open(tmp_path / "nope.journal")
    with pytest.raises(JournalError, match="is a folder"):
        Journal.open(tmp_path)
    (tmp_path / "empty").write_bytes(b"")
    with pytest.raises(JournalError, match="empty file, not a burndesk session journal"):
        Journal.open(tmp_path / "empty")


def test_not_a_journal(tmp_path: Path):
    text = tmp_path / "notes.txt"
    text.write_text("burn 1 at 06:00\n" * 20)
    with pytest.raises(JournalError, match="not a burndesk session journal .it is not an SQLite database"):
        Journal.open(text)

    other = tmp_path / "other.db"
    con = raw(other)
    con.execute("CREATE TABLE events (seq INTEGER PRIMARY KEY, what TEXT)")
    con.execute("INSERT INTO events VALUES (1, 'x')")
    con.close()
    with pytest.raises(JournalError, match=r"other\.db: not a burndesk session journal .an SQLite database of some other program"):
        Journal.open(other, readonly=True)

    no_meta = tmp_path / "no_meta.db"
    con = raw(no_meta)
    con.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    con.execute("CREATE TABLE t (x)")
    con.close()
    with pytest.raises(JournalError, match="not a burndesk session journal .it has no journal meta table"):
        Journal.open(no_meta)

    wrong_magic = tmp_path / "magic.journal"
    Journal.create(wrong_magic).close()
    con = raw(wrong_magic)
    con.execute("UPDATE meta SET value = 'something-else' WHERE key = 'magic'")
    con.close()
    with pytest.raises(JournalError, match="not a burndesk session journal .wrong magic"):
        Journal.open(wrong_magic)


def test_bad_arguments_are_refused_clearly(tmp_path: Path, jpath: Path):
    for bad in (None, 3, b"x.journal", ""):
        with pytest.raises(JournalError, match="session journal path must be"):
            Journal.create(bad)
    Journal.create(jpath).close()
    with pytest.raises(JournalError, match="readonly must be True or False"):
        Journal.open(jpath, readonly="yes")
    for bad in (-1.0, float("nan"), "5"):
        with pytest.raises(JournalError, match="busy_timeout_s"):
            Journal.open(jpath, busy_timeout_s=bad)


def test_closed_journal_refuses_work(jpath: Path):
    with Journal.create(jpath) as j:
        j.append("k", {})
    assert j.closed
    j.close()  # idempotent
    for call in (lambda: j.append("k", {}), j.records, j.count):
        with pytest.raises(JournalError, match="is closed"):
            call()


def test_readonly_journal_refuses_appends(jpath: Path):
    with Journal.create(jpath) as j:
        j.append("k", {"i": 0})
    with Journal.open(jpath, readonly=True) as j:
        assert j.readonly
        with pytest.raises(JournalError, match="open read-only; nothing was written"):
            j.append("k", {"i": 1})
        assert [r.payload for r in j.records()] == [{"i": 0}]


def test_checksum_detects_a_damaged_row(jpath: Path):
    with Journal.create(jpath) as j:
        j.append_many([("k", {"note": f"entry-{i:03d}", "dv_m_s": 1.0}) for i in range(10)])
    data = bytearray(jpath.read_bytes())
    at = data.find(b"entry-007")
    assert at > 0
    data[at + 6] = ord("9")  # a plausible bit of rot: same length, still valid JSON
    jpath.write_bytes(bytes(data))
    with Journal.open(jpath, readonly=True) as j:
        assert len(j.records(upto=7)) == 7
        with pytest.raises(JournalError, match="record 8 fails its checksum.*recover"):
            j.records()


# --------------------------------------------------------------------------------------------
# creation: never overwrite, owner-only


def test_create_refuses_to_overwrite(tmp_path: Path, jpath: Path):
    with Journal.create(jpath) as j:
        j.append("k", {})
    before = jpath.read_bytes()
    with pytest.raises(JournalError, match="already exists; refusing to overwrite"):
        Journal.create(jpath)
    assert jpath.read_bytes() == before

    other = tmp_path / "precious.txt"
    other.write_text("keep me")
    with pytest.raises(JournalError, match="already exists"):
        Journal.create(other)
    assert other.read_text() == "keep me"

    link = tmp_path / "dangling.journal"
    link.symlink_to(tmp_path / "elsewhere.journal")
    with pytest.raises(JournalError, match="already exists"):
        Journal.create(link)
    assert not (tmp_path / "elsewhere.journal").exists()


def test_create_needs_an_existing_folder(tmp_path: Path):
    target = tmp_path / "no" / "such" / "c.journal"
    with pytest.raises(JournalError, match=r"the folder .*such does not exist"):
        Journal.create(target)
    assert not (tmp_path / "no").exists()


@pytest.mark.parametrize("umask", [0o000, 0o022, 0o277])
def test_create_is_owner_only_whatever_the_umask(tmp_path: Path, umask: int):
    path = tmp_path / "c.journal"
    old = os.umask(umask)
    try:
        with Journal.create(path) as j:
            j.append("k", {"i": 1})
            side = [Path(str(path) + s) for s in ("-wal", "-shm")]
            modes = {p.name: stat.S_IMODE(os.stat(p).st_mode) for p in [path, *side] if p.exists()}
    finally:
        os.umask(old)
    assert modes[path.name] == 0o600
    assert set(modes.values()) == {0o600}, modes
    assert sorted(os.listdir(tmp_path)) == ["c.journal"]  # no temporary left behind


# --------------------------------------------------------------------------------------------
# writers: busy session, failing writes


def test_second_writer_gets_a_clean_busy_error(journal: Journal, jpath: Path):
    journal.append("k", {"i": 0})
    other = raw(jpath)
    other.execute("BEGIN IMMEDIATE")  # another process holding the write lock
    try:
        with Journal.open(jpath, busy_timeout_s=0.05) as second:
            with pytest.raises(JournalError, match=r"session is busy: another burndesk is writing .*campaign\.journal"):
                second.append("k", {"i": 1})
            assert second.count() == 1  # readers are not blocked
    finally:
        other.execute("ROLLBACK")
        other.close()
    assert journal.append("k", {"i": 1}) == 2
    assert [r.payload["i"] for r in journal.records()] == [0, 1]


class FullAtCommit(sqlite3.Connection):
    """A connection whose COMMIT fails the way a full disk makes it fail."""

    def execute(self, sql, *args):
        if sql.strip().upper() == "COMMIT":
            raise sqlite3.OperationalError("database or disk is full")
        return super().execute(sql, *args)


def test_failing_commit_leaves_nothing_partial(jpath: Path, monkeypatch):
    with Journal.create(jpath) as j:
        j.append_many([("k", {"i": i}) for i in range(3)])
        before = j.records()
    monkeypatch.setattr(
        J, "_connect",
        lambda target, *, uri, timeout_s: sqlite3.connect(
            target, uri=uri, timeout=timeout_s, isolation_level=None, factory=FullAtCommit),
    )
    with Journal.open(jpath) as j:
        with pytest.raises(JournalError, match="the disk is full .*not committed and earlier records are intact") as info:
            j.append("k", {"i": 3})
        assert str(jpath) in str(info.value)
        # rolled back, so the next attempt fails the same way instead of nesting transactions
        with pytest.raises(JournalError, match="the disk is full"):
            j.append_many([("k", {"i": 3}), ("k", {"i": 4})])
        assert j.records() == before
    monkeypatch.undo()
    with Journal.open(jpath) as j:
        assert j.records() == before
        assert j.append("k", {"i": 3}) == 4


def test_real_sqlite_full_error_is_reported_and_rolled_back(jpath: Path, monkeypatch):
    """SQLite's own SQLITE_FULL, from a page limit (PRAGMA max_page_count) on the connection."""
    with Journal.create(jpath) as j:
        j.append("k", {"i": 0})
        before = j.records()
    real_connect = J._connect

    def limited(target, *, uri, timeout_s):
        con = real_connect(target, uri=uri, timeout_s=timeout_s)
        pages = con.execute("PRAGMA page_count").fetchone()[0]
        con.execute(f"PRAGMA max_page_count = {pages}")
        return con

    monkeypatch.setattr(J, "_connect", limited)
    with Journal.open(jpath) as j:
        with pytest.raises(JournalError, match="the disk is full"):
            j.append("k", {"i": 1, "pad": "p" * 50_000})
        assert j.records() == before
        # all or nothing: the small records of a batch are not kept when a big one fails
        with pytest.raises(JournalError, match="the disk is full"):
            j.append_many([("k", {"i": 1}), ("k", {"i": 2}), ("k", {"i": 3, "pad": "p" * 50_000})])
        assert j.records() == before
    monkeypatch.undo()
    with Journal.open(jpath) as j:
        assert j.records() == before
        assert j.append("k", {"i": 1, "pad": "p" * 50_000}) == 2


# --------------------------------------------------------------------------------------------
# read-only file and folder


def _write_access_is_enforced(path: Path) -> bool:
    """False when running with privileges that ignore permission bits (root)."""
    return not os.access(path, os.W_OK)


def test_readonly_file_in_process(jpath: Path):
    with Journal.create(jpath) as j:
        j.append("k", {"i": 0})
    os.chmod(jpath, 0o400)
    try:
        if not _write_access_is_enforced(jpath):
            pytest.skip("running as root: chmod 0o400 does not stop this process writing; "
                        "test_permissions_as_an_unprivileged_user covers it in a child process")
        with Journal.open(jpath, readonly=True) as j:
            assert [r.payload for r in j.records()] == [{"i": 0}]
        with pytest.raises(JournalError, match="cannot open the session journal for writing: the file is read-only"):
            Journal.open(jpath)
    finally:
        os.chmod(jpath, 0o600)
    assert sorted(os.listdir(jpath.parent)) == [jpath.name]  # no read-only -wal/-shm left behind
    with Journal.open(jpath) as j:
        assert j.append("k", {"i": 1}) == 2


def test_readonly_folder_in_process(tmp_path: Path):
    folder = tmp_path / "ro"
    folder.mkdir()
    path = folder / "c.journal"
    with Journal.create(path) as j:
        j.append("k", {"i": 0})
    os.chmod(folder, 0o500)
    try:
        if not _write_access_is_enforced(folder):
            pytest.skip("running as root: a 0o500 folder is still writable for this process; "
                        "test_permissions_as_an_unprivileged_user covers it in a child process")
        with Journal.open(path, readonly=True) as j:
            assert [r.payload for r in j.records()] == [{"i": 0}]
        with pytest.raises(JournalError, match="its folder .* is read-only"):
            Journal.open(path)
        with pytest.raises(JournalError, match="cannot create the session journal: the folder .* is read-only"):
            Journal.create(folder / "new.journal")
    finally:
        os.chmod(folder, 0o700)


def _unprivileged_python(folder: Path) -> tuple[list[str], dict] | None:
    """Command prefix and subprocess options that run the child without root's privileges.

    As an ordinary user: this interpreter, as that user.  As root: an interpreter run as
    ``nobody`` (root's own interpreter may sit in a folder ``nobody`` cannot enter), or None
    when no such setup can load the module and write in ``folder`` here.
    """
    if os.geteuid() != 0:
        return [sys.executable], {}
    os.chown(folder, 65534, 65534)
    candidates = [sys.executable, "/usr/bin/python3", "/usr/local/bin/python3", shutil.which("python3")]
    for py in dict.fromkeys(c for c in candidates if c):
        opts = {"user": 65534, "group": 65534, "extra_groups": []}
        try:
            done = subprocess.run([py, str(CHILD), "probe", str(folder)], capture_output=True,
                                  text=True, timeout=30, **opts)
        except (OSError, subprocess.SubprocessError):
            continue
        if done.returncode == 0 and done.stdout.strip() == "ok":
            return [py], opts
    return None


def test_permissions_as_an_unprivileged_user():
    """Read-only file and read-only folder, checked by a process that permissions do bind."""
    folder = Path(tempfile.mkdtemp(prefix="burndesk-perms-"))
    try:
        how = _unprivileged_python(folder)
        if how is None:
            pytest.skip("running as root and no interpreter can run the child as user 'nobody' "
                        "(the checkout, Python or temporary folder is out of its reach); "
                        "permission bits cannot be tested here")
        cmd, opts = how
        done = subprocess.run([*cmd, str(CHILD), "perms", str(folder)], capture_output=True,
                              text=True, timeout=60, **opts)
        assert done.returncode == 0, done.stderr
        out = json.loads(done.stdout)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    assert out["uid"] != 0
    assert out["file_ro_read"] == ["ok", [0, 1, 2]]
    assert out["file_ro_write"][0] == "error"
    assert "cannot open the session journal for writing: the file is read-only" in out["file_ro_write"][1]
    assert out["dir_ro_read"] == ["ok", [0, 1, 2]]
    assert out["dir_ro_write"][0] == "error" and "is read-only" in out["dir_ro_write"][1]
    assert out["dir_ro_create"][0] == "error"
    assert "cannot create the session journal: the folder" in out["dir_ro_create"][1]
    assert out["dir_ro_listing"] == ["a.journal"]  # nothing created in the read-only folder
    assert out["after_write"] == ["ok", 4]
    assert out["after_read"] == ["ok", [0, 1, 2, 99]]


def test_record_is_a_frozen_value():
    rec = Record(seq=1, written_utc="2027-03-14T06:00:00.123Z", kind="k", payload={}, schema=1)
    with pytest.raises(AttributeError):
        rec.seq = 2  # type: ignore[misc]
