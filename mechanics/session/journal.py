"""Append-only SQLite event journal of a campaign session.

The journal stores opaque records, one row per event: a gapless sequence number (1, 2, 3, ...),
the UTC wall-clock time the row was written, an event ``kind`` (str), a JSON ``payload`` (dict)
and the schema version of the row, plus a SHA-256 checksum over those fields so that a damaged
row is detected instead of replayed.  What the events mean is not known here: the event types
and the reducer that folds them into the session view live beside this module.

Durability and safety
---------------------
* Write-ahead logging with ``synchronous=FULL``: a record is on disk before :meth:`Journal.append`
  returns; a process killed at any moment leaves either the whole transaction or none of it.
* Rows are never updated or deleted: the module has no such operation, and triggers in the file
  refuse ``UPDATE`` and ``DELETE`` on the events table (and any insert that is not the next seq)
  whoever issues them.
* Writers take the write lock with ``BEGIN IMMEDIATE``; a second writer waits up to
  ``busy_timeout_s`` and then fails with "session is busy".
* New files are created owner-only (0o600) under a temporary name and linked into place, so an
  interrupted creation leaves no half-made journal and an existing file is never overwritten.
* :func:`recover` salvages every intact, checksum-valid record of a damaged journal into a new
  file, reading a private copy so the source is never modified.

This is the one module under ``mechanics/`` that does I/O.

References
----------
SQLite documentation, from memory: "Database File Format" (sec. 1.3 the database
header: page size at offset 16, reserved bytes at 20, change counter at 24, in-header database
size at 28, application id at 68, version-valid-for at 92; sec. 1.6 b-tree pages; sec. 2.1 the
record format and serial types; sec. 4 the WAL file format and its checksum), "Write-Ahead
Logging", "PRAGMA synchronous", "PRAGMA application_id", "PRAGMA quick_check", "BEGIN IMMEDIATE",
"CREATE TRIGGER / RAISE()".  ISO 8601 for the written time.
"""

from __future__ import annotations

import errno
import hashlib
import json
import math
import os
import secrets
import shutil
import sqlite3
import stat
import struct
import tempfile
import threading
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

__all__ = [
    "APPLICATION_ID",
    "BUSY_TIMEOUT_S",
    "MAGIC",
    "SCHEMA_VERSION",
    "Journal",
    "JournalError",
    "Record",
    "RecoveryReport",
    "recover",
]

SCHEMA_VERSION = 1
"""Schema version written by this build (meta table and every row)."""

MAGIC = "burndesk-session-journal"
"""Value of the ``magic`` key in the meta table."""

APPLICATION_ID = 0x42444A4C
"""SQLite ``PRAGMA application_id`` of a session journal (bytes 68-71 of the file header)."""

BUSY_TIMEOUT_S = 5.0
"""Default time (s) a writer waits for another writer to finish before giving up."""

RECOVERY_HINT = (
    "recover its intact records into a new session file with "
    "'burndesk session recover DAMAGED NEW'; the damaged file is left as it is"
)

_SQLITE_MAGIC = b"SQLite format 3\x00"
_WAL_MAGICS = (0x377F0682, 0x377F0683)
_MAX_KIND_CHARS = 200
_COLUMNS = ("seq", "written_utc", "kind", "payload", "schema", "checksum")

_SCHEMA_SQL = (
    """CREATE TABLE meta (
        key   TEXT PRIMARY KEY NOT NULL,
        value TEXT NOT NULL
    )""",
    """CREATE TABLE events (
        seq         INTEGER PRIMARY KEY NOT NULL CHECK (seq >= 1),
        written_utc TEXT    NOT NULL CHECK (typeof(written_utc) = 'text'
                                            AND length(written_utc) = 24),
        kind        TEXT    NOT NULL CHECK (typeof(kind) = 'text' AND length(kind) > 0),
        payload     TEXT    NOT NULL CHECK (typeof(payload) = 'text'),
        schema      INTEGER NOT NULL CHECK (typeof(schema) = 'integer' AND schema >= 1),
        checksum    TEXT    NOT NULL CHECK (typeof(checksum) = 'text' AND length(checksum) = 64)
    )""",
    """CREATE TRIGGER events_no_update BEFORE UPDATE ON events
       BEGIN
           SELECT RAISE(ABORT, 'burndesk session journal is append-only: UPDATE of events refused');
       END""",
    """CREATE TRIGGER events_no_delete BEFORE DELETE ON events
       BEGIN
           SELECT RAISE(ABORT, 'burndesk session journal is append-only: DELETE of events refused');
       END""",
    """CREATE TRIGGER events_next_seq BEFORE INSERT ON events
       WHEN NEW.seq IS NOT (SELECT COALESCE(MAX(seq), 0) + 1 FROM events)
       BEGIN
           SELECT RAISE(ABORT, 'burndesk session journal is append-only: a new record must take the next seq');
       END""",
)

_INSERT_SQL = (
    "INSERT INTO events (seq, written_utc, kind, payload, schema, checksum) "
    "VALUES (?, ?, ?, ?, ?, ?)"
)
_SELECT_SQL = "SELECT seq, written_utc, kind, payload, schema, checksum FROM events"


class JournalError(ValueError):
    """A session journal cannot be created, opened, read or written.

    The message names the file and the reason, in words an operator can act on.
    """


@dataclass(frozen=True)
class Record:
    """One journal row as read back (checksum already verified).

    Attributes
    ----------
    seq : int
        Sequence number, 1 for the first record, gapless.
    written_utc : str
        UTC wall-clock time the row was written, ISO 8601 with milliseconds and ``Z``
        (``2027-03-14T06:00:00.123Z``).
    kind : str
        Event kind, opaque to the journal.
    payload : dict
        The JSON payload parsed back (tuples written come back as lists).
    schema : int
        Schema version the row was written with.
    """

    seq: int
    written_utc: str
    kind: str
    payload: dict
    schema: int


@dataclass(frozen=True)
class RecoveryReport:
    """Outcome of :func:`recover`.

    Attributes
    ----------
    source, destination : str
        The damaged journal (never modified) and the new journal written.
    recovered : int
        Records copied into ``destination``: seq 1 to ``recovered``, each with its original
        written time, kind, payload and schema.
    stopped_at : int or None
        Seq of the first record that could not be recovered (it is missing, damaged or beyond the
        end of what could be read), or None when the source read cleanly to its end.
    intact_after_stop : int
        Checksum-valid records with a seq after ``stopped_at`` that were found but not carried
        over: a journal is only meaningful as an unbroken prefix (later events may refer to
        earlier ones by seq).
    problems : tuple of str
        What was found wrong (integrity check lines, read errors), at most a few dozen lines.
    """

    source: str
    destination: str
    recovered: int
    stopped_at: int | None
    intact_after_stop: int
    problems: tuple[str, ...]

    @property
    def complete(self) -> bool:
        """True when the source read cleanly and every record in it was recovered."""
        return self.stopped_at is None

    def summary(self) -> str:
        """One paragraph for the operator."""
        head = f"recovered {self.recovered} record(s) from {self.source} into {self.destination}"
        if self.stopped_at is None:
            return head + "; the source read cleanly to its end"
        text = (
            f"{head}; the source is damaged and the salvage stopped at record {self.stopped_at}, "
            "which is missing or damaged (or the journal ended before it)"
        )
        if self.intact_after_stop:
            text += (
                f"; {self.intact_after_stop} intact record(s) after it were not carried over "
                "because the records before them are lost"
            )
        if self.problems:
            text += "; first problem: " + self.problems[0]
        return text


# --------------------------------------------------------------------------------------------
# small helpers


def _utc_now() -> str:
    """Wall-clock UTC now as ``YYYY-MM-DDTHH:MM:SS.mmmZ``."""
    now = datetime.now(timezone.utc)
    return now.strftime("%Y-%m-%dT%H:%M:%S.") + f"{now.microsecond // 1000:03d}Z"


def _as_path(path: object, what: str = "session journal path") -> Path:
    if isinstance(path, bytes) or not isinstance(path, (str, os.PathLike)):
        raise JournalError(f"{what} must be a file path (str or Path), got {type(path).__name__}")
    text = os.fspath(path)
    if not isinstance(text, str) or not text.strip():
        raise JournalError(f"{what} must be a non-empty file path, got {text!r}")
    if "\x00" in text:
        raise JournalError(f"{what} {text!r} contains a NUL character")
    return Path(text)


def _check_kind(kind: object, where: str) -> str:
    if not isinstance(kind, str):
        raise JournalError(f"{where}: event kind must be a string, got {type(kind).__name__}")
    if not kind or kind != kind.strip() or not kind.isprintable() or len(kind) > _MAX_KIND_CHARS:
        raise JournalError(
            f"{where}: event kind must be 1 to {_MAX_KIND_CHARS} printable characters without "
            f"surrounding spaces, got {kind!r}"
        )
    try:
        kind.encode("utf-8")
    except UnicodeEncodeError as exc:
        raise JournalError(f"{where}: event kind {kind!r} is not valid text ({exc.reason})") from None
    return kind


def _check_json_value(value: object, field: str) -> None:
    """Refuse anything JSON would not carry back unchanged (NaN, inf, odd types, odd keys)."""
    if value is None or isinstance(value, (bool, str)):
        return
    if isinstance(value, int):
        return
    if isinstance(value, float):
        if math.isnan(value):
            raise JournalError(f"{field} is NaN: a journal payload must hold finite numbers")
        if math.isinf(value):
            raise JournalError(f"{field} is infinite: a journal payload must hold finite numbers")
        return
    if isinstance(value, (list, tuple)):
        for i, item in enumerate(value):
            _check_json_value(item, f"{field}[{i}]")
        return
    if isinstance(value, dict):
        for key, item in value.items():
            if not isinstance(key, str):
                raise JournalError(
                    f"{field} has a key {key!r} of type {type(key).__name__}: payload keys must be strings"
                )
            _check_json_value(item, f"{field}[{key!r}]")
        return
    raise JournalError(
        f"{field} is of type {type(value).__name__}, which a journal payload cannot hold "
        "(use None, bool, int, float, str, list or dict)"
    )


def _canonical_payload(payload: object, where: str) -> str:
    """The payload as canonical JSON text (sorted keys, compact, ASCII, no NaN)."""
    if not isinstance(payload, dict):
        raise JournalError(f"{where}: payload must be a dict, got {type(payload).__name__}")
    try:
        _check_json_value(payload, "payload")
        return json.dumps(payload, sort_keys=True, allow_nan=False, ensure_ascii=True,
                          separators=(",", ":"))
    except JournalError as exc:
        raise JournalError(f"{where}: {exc}") from None
    except RecursionError:
        raise JournalError(f"{where}: payload is nested too deeply to store") from None
    except (TypeError, ValueError) as exc:  # e.g. an int too long to convert to text
        raise JournalError(f"{where}: payload cannot be stored as JSON ({exc})") from None


def _checksum(seq: int, written_utc: str, kind: str, payload_text: str, schema: int) -> str:
    """SHA-256 (hex) over the row's fields, unambiguously framed as a JSON array."""
    framed = json.dumps([seq, written_utc, kind, payload_text, schema], ensure_ascii=True,
                        separators=(",", ":"))
    return hashlib.sha256(framed.encode("ascii")).hexdigest()


def _row_problem(row: tuple) -> str | None:
    """Why a raw ``(seq, written_utc, kind, payload, schema, checksum)`` row is not intact."""
    if len(row) != 6:
        return "has the wrong number of columns"
    seq, written, kind, payload_text, schema, checksum = row
    if type(seq) is not int or type(schema) is not int:
        return "has a non-integer seq or schema"
    if not all(isinstance(x, str) for x in (written, kind, payload_text, checksum)):
        return "has a column of the wrong type"
    try:
        expected = _checksum(seq, written, kind, payload_text, schema)
    except (UnicodeError, ValueError):
        return "holds text that cannot be checked"
    if expected != checksum:
        return "fails its checksum (the row is damaged)"
    if schema > SCHEMA_VERSION:
        return f"was written by a newer burndesk (row schema {schema} > {SCHEMA_VERSION})"
    return None


def _to_record(row: tuple) -> Record:
    seq, written, kind, payload_text, schema, _ = row
    payload = json.loads(payload_text)
    if not isinstance(payload, dict):
        raise ValueError("payload is not a JSON object")
    return Record(seq=seq, written_utc=written, kind=kind, payload=payload, schema=schema)


def _uri(path: Path, **params: str) -> str:
    uri = path.absolute().as_uri()
    if params:
        uri += "?" + "&".join(f"{k}={v}" for k, v in params.items())
    return uri


def _connect(target: str, *, uri: bool, timeout_s: float) -> sqlite3.Connection:
    """Open an SQLite connection in autocommit mode (transactions are issued explicitly).

    The connection may be used from any thread; :class:`Journal` serialises its use with a lock.
    """
    return sqlite3.connect(target, uri=uri, timeout=timeout_s, isolation_level=None,
                           check_same_thread=False)


def _error_class(err: BaseException) -> str:
    name = str(getattr(err, "sqlite_errorname", "") or "")
    low = str(err).lower()
    if name.startswith(("SQLITE_BUSY", "SQLITE_LOCKED")) or "locked" in low or "busy" in low:
        return "busy"
    if name == "SQLITE_FULL" or "full" in low:
        return "full"
    if name.startswith("SQLITE_CORRUPT") or name == "SQLITE_NOTADB" or "malformed" in low \
            or "not a database" in low or "decode" in low:
        return "corrupt"
    if name.startswith("SQLITE_IOERR") or "i/o error" in low:
        return "io"
    if name.startswith("SQLITE_READONLY") or "readonly" in low or "read-only" in low:
        return "readonly"
    if name.startswith("SQLITE_CANTOPEN") or "unable to open" in low:
        return "cantopen"
    return "other"


def _fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _u16(buf: bytes, pos: int) -> int:
    return struct.unpack_from(">H", buf, pos)[0]


def _u32(buf: bytes, pos: int) -> int:
    return struct.unpack_from(">I", buf, pos)[0]


def _header_page_size(head: bytes) -> int | None:
    if len(head) < 100 or not head.startswith(_SQLITE_MAGIC):
        return None
    size = _u16(head, 16)
    size = 65536 if size == 1 else size
    if size < 512 or size > 65536 or size & (size - 1):
        return None
    return size


def _wal_has_content(path: Path) -> bool:
    try:
        return os.stat(str(path) + "-wal").st_size > 0
    except OSError:
        return False


def _inspect_file(path: Path) -> None:
    """Refuse what is plainly not a journal, and a truncated one, before SQLite sees it."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise JournalError(f"{path}: no such session journal (the file does not exist)") from None
    except PermissionError:
        raise JournalError(f"{path}: cannot reach the session journal: permission denied") from None
    except OSError as exc:
        raise JournalError(f"{path}: cannot reach the session journal: {exc.strerror}") from None
    if stat.S_ISDIR(st.st_mode):
        raise JournalError(f"{path}: is a folder, not a burndesk session journal")
    if not stat.S_ISREG(st.st_mode):
        raise JournalError(f"{path}: is not a regular file, so not a burndesk session journal")
    try:
        with open(path, "rb") as fh:
            head = fh.read(100)
    except PermissionError:
        raise JournalError(f"{path}: cannot read the session journal: permission denied") from None
    except OSError as exc:
        raise JournalError(f"{path}: cannot read the session journal: {exc.strerror}") from None
    if not head:
        raise JournalError(f"{path}: is an empty file, not a burndesk session journal")
    if not head.startswith(_SQLITE_MAGIC):
        raise JournalError(
            f"{path}: not a burndesk session journal (it is not an SQLite database; if it was a "
            f"journal, its first page is damaged: {RECOVERY_HINT})"
        )
    if len(head) < 100:
        raise JournalError(
            f"{path}: session journal is damaged (truncated to {len(head)} bytes); {RECOVERY_HINT}"
        )
    if _u32(head, 68) != APPLICATION_ID:
        raise JournalError(
            f"{path}: not a burndesk session journal (an SQLite database of some other program)"
        )
    page_size = _header_page_size(head)
    if page_size is None:
        raise JournalError(f"{path}: session journal is damaged (bad page size); {RECOVERY_HINT}")
    pages = _u32(head, 28)
    if pages and _u32(head, 24) == _u32(head, 92) and not _wal_has_content(path):
        expected = pages * page_size
        if st.st_size < expected:
            raise JournalError(
                f"{path}: session journal is damaged (truncated: {st.st_size} bytes where its "
                f"header says {expected}); {RECOVERY_HINT}"
            )


def _check_new_path(path: Path) -> Path:
    """Parent folder of a journal about to be created, after the usual refusals."""
    parent = path.parent
    if not parent.is_dir():
        raise JournalError(
            f"{path}: cannot create the session journal: the folder {parent} does not exist"
        )
    if os.path.lexists(path):
        raise JournalError(f"{path}: already exists; refusing to overwrite it with a new journal")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise JournalError(
            f"{path}: cannot create the session journal: the folder {parent} is read-only"
        )
    return parent


def _remove_quietly(path: str) -> None:
    try:
        os.unlink(path)
    except OSError:
        pass


def _build(path: Path, rows: Iterable[tuple], extra_meta: dict[str, str] | None = None) -> None:
    """Write a complete new journal holding ``rows`` and link it into place at ``path``.

    The file is made under a hidden temporary name in the same folder with mode 0o600, filled,
    checkpointed, fsynced and then hard-linked to ``path`` (which fails if ``path`` exists), so
    ``path`` either does not exist or is a whole journal.
    """
    parent = _check_new_path(path)
    tmp = parent / f".{path.name}.creating-{os.getpid()}-{secrets.token_hex(4)}"
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_NOFOLLOW", 0), 0o600)
    except OSError as exc:
        raise JournalError(f"{path}: cannot create the session journal: {exc.strerror}") from None
    try:
        try:
            os.fchmod(fd, 0o600)  # whatever the umask did
        finally:
            os.close(fd)
        try:
            conn = _connect(_uri(tmp, mode="rw"), uri=True, timeout_s=BUSY_TIMEOUT_S)
        except sqlite3.Error as exc:
            raise JournalError(f"{path}: cannot create the session journal: {exc}") from None
        try:
            conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
            if str(mode).lower() != "wal":
                raise JournalError(
                    f"{path}: cannot create the session journal: the file system does not "
                    f"support write-ahead logging (journal mode stayed {mode!r})"
                )
            conn.execute("PRAGMA synchronous = FULL")
            conn.execute("BEGIN IMMEDIATE")
            for sql in _SCHEMA_SQL:
                conn.execute(sql)
            meta = {"magic": MAGIC, "schema": str(SCHEMA_VERSION), "created_utc": _utc_now()}
            meta.update(extra_meta or {})
            conn.executemany("INSERT INTO meta (key, value) VALUES (?, ?)", sorted(meta.items()))
            conn.executemany(_INSERT_SQL, rows)
            conn.execute("COMMIT")
            conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        except sqlite3.Error as exc:
            raise JournalError(
                f"{path}: cannot create the session journal: {_reason(exc)}; nothing was created"
            ) from None
        finally:
            conn.close()
        if os.path.exists(str(tmp) + "-wal"):
            raise JournalError(f"{path}: cannot create the session journal: its log was not merged")
        fd = os.open(tmp, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
        _link_new(tmp, path)
        _fsync_dir(parent)
    except OSError as exc:
        raise JournalError(
            f"{path}: cannot create the session journal: {exc.strerror or exc}; nothing was created"
        ) from None
    finally:
        for suffix in ("", "-wal", "-shm", "-journal"):
            _remove_quietly(str(tmp) + suffix)


def _link_new(tmp: Path, path: Path) -> None:
    """Give ``tmp`` the name ``path`` without ever replacing an existing ``path``."""
    try:
        os.link(tmp, path)
        return
    except FileExistsError:
        raise JournalError(f"{path}: already exists; refusing to overwrite it with a new journal") from None
    except OSError as exc:
        if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EMLINK, errno.ENOSYS):
            raise JournalError(f"{path}: cannot create the session journal: {exc.strerror}") from None
    # File systems without hard links: claim the name exclusively, then rename over the claim.
    try:
        os.close(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600))
    except FileExistsError:
        raise JournalError(f"{path}: already exists; refusing to overwrite it with a new journal") from None
    except OSError as exc:
        raise JournalError(f"{path}: cannot create the session journal: {exc.strerror}") from None
    os.replace(tmp, path)


def _reason(exc: BaseException) -> str:
    kind = _error_class(exc)
    if kind == "full":
        return f"the disk is full ({exc})"
    if kind == "io":
        return "disk I/O error" if str(exc).lower() == "disk i/o error" else f"disk I/O error ({exc})"
    return str(exc)


# --------------------------------------------------------------------------------------------
# the journal


class Journal:
    """An open session journal.

    Use :meth:`create` or :meth:`open`, not the constructor.  A journal is a context manager
    (closing on exit); its methods may be called from several threads (they are serialised).

    Parameters
    ----------
    path : pathlib.Path
        The journal file.
    conn : sqlite3.Connection
        Open connection in autocommit mode.
    readonly : bool
        True when opened for reading only.
    schema : int
        Schema version recorded in the file.
    busy_timeout_s : float
        How long (s) a write waits for another writer before failing.

    References
    ----------
    SQLite documentation, "Write-Ahead Logging" and "PRAGMA synchronous" (from memory).
    """

    def __init__(self, path: Path, conn: sqlite3.Connection, readonly: bool, schema: int,
                 busy_timeout_s: float) -> None:
        self._path = path
        self._conn: sqlite3.Connection | None = conn
        self._readonly = readonly
        self._schema = schema
        self._busy_timeout_s = busy_timeout_s
        self._lock = threading.RLock()

    # ---- construction

    @classmethod
    def create(cls, path: str | os.PathLike[str], *, initial: Iterable[tuple[str, dict]] = (),
               busy_timeout_s: float = BUSY_TIMEOUT_S) -> Journal:
        """Create a new, empty journal file and open it for writing.

        Parameters
        ----------
        path : str or os.PathLike
            File to create; its folder must exist and the file must not.
        initial : iterable of (str, dict), optional
            Records the file is born with (seq 1, 2, ...), each as for :meth:`append`: a
            session's first entry is written with the file itself, so no crash can leave a
            journal without it.
        busy_timeout_s : float, optional
            Time (s) a write waits for another writer, default ``BUSY_TIMEOUT_S``.

        Returns
        -------
        Journal
            The new journal, open for writing.

        Raises
        ------
        JournalError
            When the file exists (it is never overwritten), the folder is missing or read-only,
            or the file cannot be written.

        Notes
        -----
        The file gets mode 0o600 (owner read/write only) whatever the umask.
        """
        p = _as_path(path)
        _check_timeout(busy_timeout_s)
        written = _utc_now()
        rows = []
        for seq, entry in enumerate(initial, start=1):
            where = f"{p}: initial entry {seq}"
            if not isinstance(entry, tuple) or len(entry) != 2:
                raise JournalError(f"{where}: expected a (kind, payload) pair")
            kind = _check_kind(entry[0], where)
            text = _canonical_payload(entry[1], where)
            rows.append((seq, written, kind, text, SCHEMA_VERSION,
                         _checksum(seq, written, kind, text, SCHEMA_VERSION)))
        _build(p, rows)
        return cls.open(p, busy_timeout_s=busy_timeout_s)

    @classmethod
    def open(cls, path: str | os.PathLike[str], readonly: bool = False, *,
             busy_timeout_s: float = BUSY_TIMEOUT_S) -> Journal:
        """Open an existing journal.

        Parameters
        ----------
        path : str or os.PathLike
            The journal file.
        readonly : bool, optional
            Open for reading only: works on a read-only file or in a read-only folder.  There,
            when no -wal file holds pending changes, the file is read as it stands (SQLite's
            immutable mode), so a writer that starts at the same moment is not seen.
        busy_timeout_s : float, optional
            Time (s) a write waits for another writer, default ``BUSY_TIMEOUT_S``.

        Returns
        -------
        Journal

        Raises
        ------
        JournalError
            When the file is missing, is not a burndesk session journal, was written by a newer
            schema, is damaged (with a pointer to :func:`recover`), or cannot be written when
            ``readonly`` is False.
        """
        p = _as_path(path)
        _check_timeout(busy_timeout_s)
        if not isinstance(readonly, bool):
            raise JournalError(f"{p}: readonly must be True or False, got {readonly!r}")
        _inspect_file(p)
        folder = p.parent
        if readonly:
            if not _wal_has_content(p) and not (os.access(folder, os.W_OK) and os.access(p, os.W_OK)):
                # Nothing is pending in a -wal file: read the file as it stands.  SQLite could not
                # make its -shm index in a read-only folder, and beside a read-only file it would
                # make -wal and -shm files as read-only as the journal, blocking later writers.
                target = _uri(p, mode="ro", immutable="1")
            else:
                target = _uri(p, mode="ro")
        else:
            if not os.access(p, os.W_OK):
                raise JournalError(
                    f"{p}: cannot open the session journal for writing: the file is read-only "
                    "(open it read-only to view it)"
                )
            if not os.access(folder, os.W_OK | os.X_OK):
                raise JournalError(
                    f"{p}: cannot open the session journal for writing: its folder {folder} is "
                    "read-only and the journal needs to write its -wal and -shm files beside it "
                    "(open it read-only to view it, or copy it to a writable folder)"
                )
            _repair_side_files(p)
            target = _uri(p, mode="rw")
        conn = None
        try:
            conn = _connect(target, uri=True, timeout_s=busy_timeout_s)
            schema = _check_opened(p, conn, readonly)
        except JournalError:
            conn.close()
            raise
        except sqlite3.Error as exc:
            if conn is not None:
                conn.close()
            if readonly and "immutable=1" not in target and not _wal_has_content(p) \
                    and _error_class(exc) in ("io", "full") and _disk_full(p):
                # A full disk leaves no room for the -shm index SQLite makes beside the file:
                # with nothing pending in a -wal file, read the file as it stands, as in a
                # read-only folder.
                return cls._open_as_it_stands(p, busy_timeout_s)
            raise _open_error(p, exc, readonly) from None
        return cls(p, conn, readonly, schema, float(busy_timeout_s))

    @classmethod
    def _open_as_it_stands(cls, p: Path, busy_timeout_s: float) -> Journal:
        """Read-only open in SQLite's immutable mode (no -wal or -shm file is touched)."""
        try:
            conn = _connect(_uri(p, mode="ro", immutable="1"), uri=True, timeout_s=busy_timeout_s)
        except sqlite3.Error as exc:
            raise _open_error(p, exc, True) from None
        try:
            schema = _check_opened(p, conn, True)
        except JournalError:
            conn.close()
            raise
        except sqlite3.Error as exc:
            conn.close()
            raise _open_error(p, exc, True) from None
        return cls(p, conn, True, schema, float(busy_timeout_s))

    # ---- properties

    @property
    def path(self) -> Path:
        """The journal file."""
        return self._path

    @property
    def readonly(self) -> bool:
        """True when opened for reading only."""
        return self._readonly

    @property
    def schema(self) -> int:
        """Schema version recorded in the file."""
        return self._schema

    @property
    def closed(self) -> bool:
        """True once :meth:`close` has been called."""
        return self._conn is None

    # ---- writing

    def append(self, kind: str, payload: dict, *, expect_seq: int | None = None) -> int:
        """Append one record and return its seq once it is durably committed.

        Parameters
        ----------
        kind : str
            Event kind, 1 to 200 printable characters.
        payload : dict
            JSON-serialisable dict: str keys; None, bool, int, finite float, str, list, tuple or
            dict values (tuples come back as lists).
        expect_seq : int, optional
            The seq the caller validated this record for: when another writer appended
            meanwhile (the next seq differs), nothing is written and ``JournalError`` says so.

        Returns
        -------
        int
            The record's seq (1 for the first record).

        Raises
        ------
        JournalError
            Bad kind or payload (NaN, infinity, non-JSON values; nothing is written), a read-only
            or closed journal, another writer holding the session beyond the busy timeout, or a
            failing write (disk full, I/O error), after which nothing of the record is committed.
        """
        where = str(self._path)
        prepared = [(_check_kind(kind, where), _canonical_payload(payload, where))]
        with self._lock:
            return self._write(self._writable(), prepared, expect_seq)[0]

    def append_many(self, entries: Iterable[tuple[str, dict]]) -> list[int]:
        """Append several records in one transaction: all are committed or none is.

        Parameters
        ----------
        entries : iterable of (str, dict)
            ``(kind, payload)`` pairs, each as for :meth:`append`.

        Returns
        -------
        list of int
            The seqs given to the records, consecutive, in order (empty for no entries).

        Raises
        ------
        JournalError
            As for :meth:`append`; the message names the entry at fault.
        """
        self._writable()  # refuse early, before looking at the entries
        prepared: list[tuple[str, str]] = []
        for i, entry in enumerate(entries):
            where = f"{self._path}: entry {i}"
            if not isinstance(entry, tuple) or len(entry) != 2:
                raise JournalError(f"{where}: expected a (kind, payload) pair, got {entry!r:.80}")
            kind = _check_kind(entry[0], where)
            prepared.append((kind, _canonical_payload(entry[1], where)))
        if not prepared:
            return []
        with self._lock:
            return self._write(self._writable(), prepared)

    def _write(self, conn: sqlite3.Connection, prepared: list[tuple[str, str]],
               expect_seq: int | None = None) -> list[int]:
        """Append validated ``(kind, payload text)`` rows in one durable transaction."""
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.Error as exc:
            raise self._write_error(exc) from None
        try:
            last = conn.execute("SELECT COALESCE(MAX(seq), 0) FROM events").fetchone()[0]
            if expect_seq is not None and last + 1 != expect_seq:
                raise JournalError(
                    f"{self._path}: the session changed meanwhile (another burndesk wrote entry "
                    f"{last}); nothing was written: reload and try again"
                )
            written = _utc_now()
            rows = []
            for offset, (kind, text) in enumerate(prepared, start=1):
                seq = last + offset
                rows.append((seq, written, kind, text, SCHEMA_VERSION,
                             _checksum(seq, written, kind, text, SCHEMA_VERSION)))
            conn.executemany(_INSERT_SQL, rows)
            conn.execute("COMMIT")
        except BaseException as exc:
            self._rollback()
            if isinstance(exc, sqlite3.Error):
                raise self._write_error(exc) from None
            raise
        return [row[0] for row in rows]

    # ---- reading

    def records(self, upto: int | None = None) -> list[Record]:
        """All records in seq order, or those with ``seq <= upto``, checksums verified.

        Parameters
        ----------
        upto : int or None, optional
            Last seq to return (inclusive); None for every record.

        Returns
        -------
        list of Record

        Raises
        ------
        JournalError
            When a row fails its checksum or a seq is missing (naming the seq), or the file is
            damaged.
        """
        if upto is not None and (type(upto) is not int or upto < 0):
            raise JournalError(f"{self._path}: upto must be a seq (an integer >= 0) or None, got {upto!r}")
        with self._lock:
            return self._records(self._open_conn(), (1 << 63) - 1 if upto is None else upto)

    def _records(self, conn: sqlite3.Connection, limit: int) -> list[Record]:
        out: list[Record] = []
        try:
            cursor = conn.execute(_SELECT_SQL + " WHERE seq <= ? ORDER BY seq", (limit,))
            for row in cursor:
                expected = len(out) + 1
                seq = row[0]
                if seq != expected:
                    raise JournalError(
                        f"{self._path}: record {expected} is missing (the next one found is "
                        f"{seq!r}); the journal is damaged; {RECOVERY_HINT}"
                    )
                problem = _row_problem(tuple(row))
                if problem is not None:
                    raise JournalError(f"{self._path}: record {seq} {problem}; {RECOVERY_HINT}")
                try:
                    out.append(_to_record(tuple(row)))
                except ValueError as exc:
                    raise JournalError(
                        f"{self._path}: record {seq} has an unreadable payload ({exc}); {RECOVERY_HINT}"
                    ) from None
        except sqlite3.Error as exc:
            raise self._read_error(exc) from None
        return out

    def count(self) -> int:
        """Number of records (equal to the last seq, since seqs are gapless)."""
        with self._lock:
            conn = self._open_conn()
            try:
                return int(conn.execute("SELECT COUNT(*) FROM events").fetchone()[0])
            except sqlite3.Error as exc:
                raise self._read_error(exc) from None

    # ---- lifetime

    def close(self) -> None:
        """Close the journal (idempotent)."""
        with self._lock:
            conn, self._conn = self._conn, None
            if conn is not None:
                conn.close()

    def __enter__(self) -> Journal:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        state = "closed" if self._conn is None else ("read-only" if self._readonly else "open")
        return f"Journal({str(self._path)!r}, {state})"

    # ---- internals

    def _open_conn(self) -> sqlite3.Connection:
        if self._conn is None:
            raise JournalError(f"{self._path}: the session journal is closed")
        return self._conn

    def _writable(self) -> sqlite3.Connection:
        conn = self._open_conn()
        if self._readonly:
            raise JournalError(f"{self._path}: the session journal is open read-only; nothing was written")
        return conn

    def _rollback(self) -> None:
        conn = self._conn
        if conn is not None and conn.in_transaction:
            try:
                conn.execute("ROLLBACK")
            except sqlite3.Error:
                pass

    def _write_error(self, exc: sqlite3.Error) -> JournalError:
        kind = _error_class(exc)
        p = self._path
        if kind == "busy":
            return JournalError(
                f"session is busy: another burndesk is writing {p} (waited "
                f"{self._busy_timeout_s:g} s); nothing was written, try again"
            )
        if kind == "full":
            return JournalError(
                f"{p}: cannot write the record: the disk is full ({exc}); the record was not "
                "committed and earlier records are intact; free some space and try again"
            )
        if kind == "io":
            return JournalError(
                f"{p}: cannot write the record: {_reason(exc)}; the record was not "
                "committed and earlier records are intact; check the disk"
            )
        if kind == "readonly":
            return JournalError(
                f"{p}: cannot write the record: the journal or its folder is read-only ({exc})"
            )
        if kind == "corrupt":
            return JournalError(f"{p}: session journal is damaged ({exc}); {RECOVERY_HINT}")
        return JournalError(f"{p}: cannot write the record: {exc}; it was not committed")

    def _read_error(self, exc: sqlite3.Error) -> JournalError:
        kind = _error_class(exc)
        if kind == "busy":
            return JournalError(f"session is busy: another burndesk is writing {self._path}; try again")
        if kind in ("corrupt", "io"):
            return JournalError(f"{self._path}: session journal is damaged ({exc}); {RECOVERY_HINT}")
        return JournalError(f"{self._path}: cannot read the session journal: {exc}")


def _repair_side_files(path: Path) -> None:
    """Make our own read-only -wal / -shm files writable again, or say which one blocks us.

    They hold no settings of their own: SQLite creates them with the journal's mode, so a
    journal viewed while it was read-only can leave them read-only after it is made writable.
    """
    for suffix in ("-wal", "-shm"):
        side = str(path) + suffix
        try:
            st = os.stat(side)
        except OSError:
            continue
        if os.access(side, os.W_OK):
            continue
        if st.st_uid == os.getuid():
            try:
                os.chmod(side, 0o600)
                continue
            except OSError:
                pass
        raise JournalError(
            f"{path}: cannot open the session journal for writing: its {suffix} file {side} is "
            "read-only and not yours to change (open it read-only to view it)"
        )


def _check_timeout(busy_timeout_s: object) -> None:
    if isinstance(busy_timeout_s, bool) or not isinstance(busy_timeout_s, (int, float)) \
            or not math.isfinite(busy_timeout_s) or busy_timeout_s < 0:
        raise JournalError(f"busy_timeout_s must be a finite time >= 0 s, got {busy_timeout_s!r}")


def _check_opened(path: Path, conn: sqlite3.Connection, readonly: bool) -> int:
    """Validate an opened connection as a journal; returns its schema version."""
    if not readonly:
        conn.execute("PRAGMA synchronous = FULL")
        mode = conn.execute("PRAGMA journal_mode").fetchone()[0]
        if str(mode).lower() != "wal":
            conn.execute("PRAGMA journal_mode = WAL")
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    if "meta" not in tables:
        raise JournalError(f"{path}: not a burndesk session journal (it has no journal meta table)")
    meta = dict(conn.execute("SELECT key, value FROM meta").fetchall())
    if meta.get("magic") != MAGIC:
        raise JournalError(f"{path}: not a burndesk session journal (wrong magic in its meta table)")
    try:
        schema = int(str(meta.get("schema")))
    except ValueError:
        raise JournalError(f"{path}: session journal is damaged (unreadable schema version "
                           f"{meta.get('schema')!r}); {RECOVERY_HINT}") from None
    if schema > SCHEMA_VERSION:
        raise JournalError(
            f"{path}: written by a newer burndesk (schema {schema} > {SCHEMA_VERSION}): "
            "upgrade to open it"
        )
    if schema < 1:
        raise JournalError(f"{path}: session journal is damaged (schema version {schema}); {RECOVERY_HINT}")
    columns = tuple(r[1] for r in conn.execute("PRAGMA table_info(events)"))
    if columns != _COLUMNS:
        raise JournalError(f"{path}: not a burndesk session journal (its events table is not one)")
    lines = [str(r[0]) for r in conn.execute("PRAGMA quick_check").fetchall()]
    if lines != ["ok"]:
        raise JournalError(
            f"{path}: session journal is damaged ({lines[0][:200]}); {RECOVERY_HINT}"
        )
    return schema


#: Free space (bytes) below which a failing open is put down to a full disk: SQLite needs room
#: for a 32 KiB -shm index and a few -wal frames beside the journal.
_FULL_DISK_BYTES = 256 * 1024


def _disk_full(path: Path) -> bool:
    """True when the file system holding ``path`` has (almost) no space left."""
    try:
        st = os.statvfs(path.parent)
    except (OSError, AttributeError):  # no statvfs on this platform
        return False
    return st.f_bavail * st.f_frsize < _FULL_DISK_BYTES


def _open_error(path: Path, exc: sqlite3.Error, readonly: bool) -> JournalError:
    kind = _error_class(exc)
    if kind == "busy":
        return JournalError(f"session is busy: another burndesk is writing {path}; try again")
    if kind in ("io", "full") and _disk_full(path):
        # not damage: SQLite could not make its -shm / -wal files (SQLITE_IOERR_SHMSIZE)
        return JournalError(f"{path}: cannot open the session journal: the disk holding it is full "
                            f"({exc}); nothing was changed: free some space and try again")
    if kind in ("corrupt", "io"):
        return JournalError(f"{path}: session journal is damaged ({exc}); {RECOVERY_HINT}")
    if kind in ("readonly", "cantopen"):
        if readonly:
            return JournalError(
                f"{path}: cannot read the session journal ({exc}): its folder is read-only and it "
                "has changes not yet merged from its -wal file; copy the journal with its -wal "
                "file to a writable folder and open the copy"
            )
        return JournalError(
            f"{path}: cannot open the session journal for writing ({exc}): the file or its folder "
            "is read-only (open it read-only to view it)"
        )
    return JournalError(f"{path}: cannot open the session journal: {exc}")


# --------------------------------------------------------------------------------------------
# recovery


def recover(src_path: str | os.PathLike[str], dst_path: str | os.PathLike[str]) -> RecoveryReport:
    """Salvage the intact records of a (damaged) journal into a new journal file.

    The source is copied (with its -wal file) into a private temporary folder and read from the
    copy, so the source is never modified.  Records are read first through SQLite, in seq
    order, record by record; when SQLite cannot read further, the copy's pages (the main file
    and the committed frames of its -wal file) are scanned directly for table cells.  Every
    candidate row must pass its checksum.  The unbroken run of records 1, 2, ..., k is written
    to ``dst_path`` with the original written times and schema versions: records after a gap are
    counted but not carried over, since later events may refer to earlier ones by seq.

    Parameters
    ----------
    src_path : str or os.PathLike
        The damaged journal; only read.
    dst_path : str or os.PathLike
        The new journal to write; must not exist, its folder must.

    Returns
    -------
    RecoveryReport
        How many records were recovered, where the salvage stopped, and what was wrong.

    Raises
    ------
    JournalError
        When ``dst_path`` exists or cannot be created, the source is missing, was written by a
        newer schema, or holds nothing recognisable as a session journal.

    References
    ----------
    SQLite documentation, "Database File Format" secs. 1.6, 2.1 and 4 (from memory).
    """
    src = _as_path(src_path, "journal to recover")
    dst = _as_path(dst_path, "recovered journal path")
    if not os.path.exists(src):
        raise JournalError(f"{src}: no such session journal to recover (the file does not exist)")
    if not os.path.isfile(src):
        raise JournalError(f"{src}: is not a file, so not a session journal to recover")
    if os.path.lexists(dst) and os.path.samefile(src, dst):
        raise JournalError(f"{dst}: the recovered journal must be a new file, not the source")
    _check_new_path(dst)

    problems: list[str] = []
    found: dict[int, tuple] = {}
    conflicts: set[int] = set()
    with tempfile.TemporaryDirectory(prefix="burndesk-recover-") as tmpdir:
        copy = Path(tmpdir) / "copy.journal"
        try:
            shutil.copyfile(src, copy)
            if os.path.isfile(str(src) + "-wal"):
                shutil.copyfile(str(src) + "-wal", str(copy) + "-wal")
        except OSError as exc:
            raise JournalError(f"{src}: cannot read the journal to recover it: {exc.strerror}") from None
        os.chmod(copy, 0o600)
        # Pristine bytes for the page scan, taken before SQLite touches the copy.
        db_bytes = copy.read_bytes()
        wal_path = Path(str(copy) + "-wal")
        wal_bytes = wal_path.read_bytes() if wal_path.is_file() else b""
        head = db_bytes[:100]
        clean, meta = _salvage_with_sqlite(copy, found, problems)
        if meta.get("magic") == MAGIC:
            try:
                schema = int(str(meta.get("schema", "0")))
            except ValueError:
                schema = 0
            if schema > SCHEMA_VERSION:
                raise JournalError(
                    f"{src}: written by a newer burndesk (schema {schema} > {SCHEMA_VERSION}): "
                    "upgrade to recover it"
                )
        if not clean:
            for row in _salvage_raw(db_bytes, wal_bytes):
                seq = row[0]
                if seq in found and found[seq] != row:
                    conflicts.add(seq)
                else:
                    found[seq] = row
    recognised = (
        meta.get("magic") == MAGIC
        or (len(head) >= 72 and head.startswith(_SQLITE_MAGIC) and _u32(head, 68) == APPLICATION_ID)
        or bool(found)
    )
    if not recognised:
        raise JournalError(
            f"{src}: not a burndesk session journal, and no journal record could be found in it; "
            "nothing was recovered"
        )

    rows: list[tuple] = []
    while (len(rows) + 1) in found and (len(rows) + 1) not in conflicts:
        rows.append(found[len(rows) + 1])
    stop = len(rows) + 1
    if stop in conflicts:
        problems.insert(0, f"two different intact copies of record {stop} were found")
    stopped_at = None if clean else stop
    after = sum(1 for seq in found if seq > stop) if stopped_at is not None else 0
    extra = {"recovered_from": str(src.absolute()), "recovered_utc": _utc_now()}
    if "created_utc" in meta:
        extra["source_created_utc"] = str(meta["created_utc"])
    _build(dst, rows, extra)
    return RecoveryReport(
        source=str(src), destination=str(dst), recovered=len(rows), stopped_at=stopped_at,
        intact_after_stop=after, problems=tuple(problems[:40]),
    )


def _salvage_with_sqlite(copy: Path, found: dict[int, tuple], problems: list[str]) -> tuple[bool, dict]:
    """Read what SQLite can read, in seq order; returns (clean, meta)."""
    meta: dict = {}
    clean = True
    try:
        conn = _connect(_uri(copy, mode="ro"), uri=True, timeout_s=0.0)
    except sqlite3.Error as exc:
        problems.append(f"SQLite cannot open the file: {exc}")
        return False, meta
    try:
        try:
            lines = [str(r[0]) for r in conn.execute("PRAGMA integrity_check(30)").fetchall()]
            if lines != ["ok"]:
                clean = False
                problems.extend(f"integrity check: {line}" for line in lines)
        except sqlite3.Error as exc:
            clean = False
            problems.append(f"integrity check could not run: {exc}")
        try:
            meta = dict(conn.execute("SELECT key, value FROM meta").fetchall())
        except sqlite3.Error as exc:
            clean = False
            problems.append(f"meta table unreadable: {exc}")
        expected = 1
        try:
            cursor = conn.execute(_SELECT_SQL + " ORDER BY seq")
            while True:
                try:
                    row = cursor.fetchone()
                except sqlite3.Error as exc:
                    clean = False
                    problems.append(f"reading stopped after record {expected - 1}: {exc}")
                    break
                if row is None:
                    break
                row = tuple(row)
                problem = _row_problem(row)
                if problem is not None:
                    clean = False
                    problems.append(f"record {row[0]!r} {problem}")
                    continue
                if row[0] != expected:
                    clean = False
                    problems.append(f"record {expected} is missing (next found: {row[0]})")
                found.setdefault(row[0], row)
                expected = row[0] + 1
        except sqlite3.Error as exc:
            clean = False
            problems.append(f"events table unreadable: {exc}")
        if not clean:
            # Row by row: a lookup by seq walks from the root and can pass damage a scan cannot.
            seq = 1
            while True:
                if seq not in found:
                    try:
                        row = conn.execute(_SELECT_SQL + " WHERE seq = ?", (seq,)).fetchone()
                    except sqlite3.Error:
                        break
                    if row is None or _row_problem(tuple(row)) is not None:
                        break
                    found[seq] = tuple(row)
                seq += 1
    finally:
        conn.close()
    return clean, meta


def _varint(buf: bytes, pos: int) -> tuple[int, int]:
    """SQLite varint at ``pos``: (value, length in bytes)."""
    value = 0
    for i in range(8):
        byte = buf[pos + i]
        value = (value << 7) | (byte & 0x7F)
        if byte < 0x80:
            return value, i + 1
    return (value << 8) | buf[pos + 8], 9


def _wal_checksum(data: bytes, big_endian: bool, s0: int, s1: int) -> tuple[int, int]:
    words = struct.unpack(("<" if not big_endian else ">") + f"{len(data) // 4}I", data)
    for i in range(0, len(words), 2):
        s0 = (s0 + words[i] + s1) & 0xFFFFFFFF
        s1 = (s1 + words[i + 1] + s0) & 0xFFFFFFFF
    return s0, s1


def _wal_committed_frames(wal: bytes) -> tuple[int, list[tuple[int, bytes]]]:
    """(page size, [(page number, page bytes)]) of the committed frames of a WAL file."""
    if len(wal) < 32:
        return 0, []
    magic, _version, page_size, _ckpt, salt1, salt2, c1, c2 = struct.unpack_from(">8I", wal, 0)
    if magic not in _WAL_MAGICS or page_size < 512 or page_size > 65536 or page_size & (page_size - 1):
        return 0, []
    big = magic == 0x377F0683
    s0, s1 = _wal_checksum(wal[:24], big, 0, 0)
    if (s0, s1) != (c1, c2):
        return 0, []
    committed: list[tuple[int, bytes]] = []
    pending: list[tuple[int, bytes]] = []
    off = 32
    while off + 24 + page_size <= len(wal):
        pgno, commit_size, fs1, fs2, fc1, fc2 = struct.unpack_from(">6I", wal, off)
        if (fs1, fs2) != (salt1, salt2):
            break
        page = wal[off + 24: off + 24 + page_size]
        s0, s1 = _wal_checksum(wal[off: off + 8], big, s0, s1)
        s0, s1 = _wal_checksum(page, big, s0, s1)
        if (s0, s1) != (fc1, fc2):
            break
        pending.append((pgno, page))
        if commit_size:
            committed.extend(pending)
            pending = []
        off += 24 + page_size
    return page_size, committed


def _decode_record(body: bytes) -> list | None:
    header_size, pos = _varint(body, 0)
    if header_size > len(body):
        return None
    types = []
    while pos < header_size:
        t, n = _varint(body, pos)
        types.append(t)
        pos += n
    values: list = []
    pos = header_size
    for t in types:
        if t == 0:
            values.append(None)
        elif 1 <= t <= 6:
            size = (1, 2, 3, 4, 6, 8)[t - 1]
            if pos + size > len(body):
                return None
            values.append(int.from_bytes(body[pos:pos + size], "big", signed=True))
            pos += size
        elif t == 7:
            if pos + 8 > len(body):
                return None
            values.append(struct.unpack_from(">d", body, pos)[0])
            pos += 8
        elif t in (8, 9):
            values.append(t - 8)
        elif t >= 12:
            size = (t - 12) // 2
            if pos + size > len(body):
                return None
            chunk = body[pos:pos + size]
            values.append(chunk.decode("utf-8") if t % 2 else chunk)
            pos += size
        else:
            return None
    return values


def _leaf_cells(page: bytes, pgno: int, usable: int, pages: dict[int, bytes]) -> Iterator[tuple[int, bytes]]:
    """(rowid, record bytes) of every cell of a table leaf page, following overflow chains."""
    hoff = 100 if pgno == 1 else 0
    if len(page) < hoff + 8 or page[hoff] != 0x0D:
        return
    ncells = _u16(page, hoff + 3)
    max_local = usable - 35
    min_local = ((usable - 12) * 32 // 255) - 23
    for i in range(ncells):
        try:
            ptr = _u16(page, hoff + 8 + 2 * i)
            if ptr < hoff + 8 or ptr >= usable:
                continue
            size, n = _varint(page, ptr)
            rowid, m = _varint(page, ptr + n)
            if rowid >= 1 << 63:
                rowid -= 1 << 64
            start = ptr + n + m
            if size <= max_local:
                local = size
            else:
                k = min_local + (size - min_local) % (usable - 4)
                local = k if k <= max_local else min_local
            body = bytearray(page[start:start + local])
            if local < size:
                nxt = _u32(page, start + local)
                seen: set[int] = set()
                while len(body) < size and nxt and nxt not in seen and nxt in pages:
                    seen.add(nxt)
                    ovfl = pages[nxt]
                    body += ovfl[4:usable][: size - len(body)]
                    nxt = _u32(ovfl, 0)
            if len(body) == size:
                yield rowid, bytes(body)
        except (IndexError, struct.error, ValueError):
            continue


def _salvage_raw(db: bytes, wal: bytes) -> list[tuple]:
    """Checksum-valid event rows found by scanning pages directly (no b-tree walk)."""
    wal_page_size, frames = _wal_committed_frames(wal)
    sizes: list[int] = []
    for size in (_header_page_size(db[:100]), wal_page_size or None):
        if size and size not in sizes:
            sizes.append(size)
    for size in (4096, 1024, 512, 2048, 8192, 16384, 32768, 65536):
        if size not in sizes:
            sizes.append(size)
    reserved = db[20] if len(db) >= 100 and db.startswith(_SQLITE_MAGIC) else 0
    rows: dict[tuple, None] = {}
    for page_size in sizes:
        usable = page_size - reserved
        if usable < 480:
            continue
        latest: dict[int, bytes] = {}
        sources: list[tuple[int, bytes]] = []
        for index in range(len(db) // page_size):
            page = db[index * page_size:(index + 1) * page_size]
            latest[index + 1] = page
            sources.append((index + 1, page))
        if page_size == wal_page_size:
            for pgno, page in frames:
                latest[pgno] = page
                sources.append((pgno, page))
        for pgno, page in sources:
            for rowid, body in _leaf_cells(page, pgno, usable, latest):
                try:
                    values = _decode_record(body)
                except (IndexError, struct.error, UnicodeDecodeError, ValueError):
                    continue
                if not values or len(values) != 6 or values[0] is not None:
                    continue
                row = (rowid, *values[1:])
                if _row_problem(row) is None:
                    rows[row] = None
        if rows:
            break
    return sorted(rows, key=lambda r: r[0])
