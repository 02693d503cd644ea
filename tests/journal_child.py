"""Child process for the journal crash, concurrency, disk-full and permission tests.

Run as ``python journal_child.py COMMAND ARGS...``.  It loads ``mechanics/session/journal.py``
by file path (the module is stdlib-only), so it also runs under an interpreter without the
project installed, e.g. the system Python as an unprivileged user.  Each line it prints is
written with a single ``os.write`` and only after the operation it reports has returned.

Commands
--------
probe [DIR]
    Print ``ok`` (checks that this interpreter and user can load the module, and write in DIR).
append-loop PATH SEED
    Open PATH and append forever, in batches of 1-3 records (``append`` or ``append_many``),
    printing ``ok SEQ...`` after each call returned; payloads follow :func:`payload_for`.
create PATH
    Create PATH, print ``created``.
writer PATH NAME N
    Append N records ``{"writer": NAME, "i": i}`` one by one, printing ``ok SEQ`` after each.
fill PATH LIMIT_BYTES
    Limit the size of files this process may write (RLIMIT_FSIZE) and append 1 kB records until
    the journal refuses; prints ``ok SEQ`` per record and then ``error MESSAGE``.
perms DIR
    Permission checks in DIR (must be owned by the running user); prints one JSON line.
"""

from __future__ import annotations

import importlib.util
import json
import os
import random
import sys
from pathlib import Path

_MODULE = Path(__file__).resolve().parent.parent / "mechanics" / "session" / "journal.py"


def load_journal():
    spec = importlib.util.spec_from_file_location("burndesk_journal_child", _MODULE)
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look the module up while the class is built
    spec.loader.exec_module(module)
    return module


def payload_for(seq: int, batch: list[int]) -> dict:
    """Payload of record ``seq`` in the crash test (a function of the seq and its batch)."""
    return {
        "seq": seq,
        "text": "x" * (seq % 37) + "é",
        "value_m_s": seq * 0.25,
        "nested": {"b": [seq, None, True], "a": -seq},
        "batch": batch,
    }


def say(line: str) -> None:
    os.write(1, (line + "\n").encode())


def append_loop(path: str, seed: str) -> None:
    journal = load_journal()
    rng = random.Random(int(seed))
    with journal.Journal.open(path) as j:
        say(f"ready {j.count()}")
        while True:
            first = j.count() + 1  # single writer: the next seqs are known
            size = rng.choice((1, 1, 2, 3))
            batch = [first, size]
            if size == 1:
                seqs = [j.append("test_loop", payload_for(first, batch))]
            else:
                seqs = j.append_many([("test_loop", payload_for(first + k, batch)) for k in range(size)])
            if seqs != list(range(first, first + size)):
                say(f"bad seqs {seqs} expected from {first}")
                sys.exit(3)
            say("ok " + " ".join(map(str, seqs)))


def create(path: str) -> None:
    journal = load_journal()
    journal.Journal.create(path).close()
    say("created")


def writer(path: str, name: str, n: str) -> None:
    journal = load_journal()
    with journal.Journal.open(path) as j:
        for i in range(int(n)):
            say(f"ok {j.append('test_writer', {'writer': name, 'i': i})}")


def fill(path: str, limit: str) -> None:
    import resource
    import signal

    journal = load_journal()
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit fails with EFBIG
    resource.setrlimit(resource.RLIMIT_FSIZE, (int(limit), int(limit)))
    j = journal.Journal.open(path)
    try:
        for i in range(10_000):
            try:
                seq = j.append("test_fill", {"i": i, "pad": "p" * 1000})
            except journal.JournalError as exc:
                say("error " + str(exc).replace("\n", " "))
                return
            say(f"ok {seq}")
        say("never failed")
    finally:
        try:
            j.close()
        except Exception as exc:  # closing may fail to merge the log: the next open does it
            say("close " + type(exc).__name__)


def perms(folder: str) -> None:
    journal = load_journal()
    J, JournalError = journal.Journal, journal.JournalError
    d = Path(folder)
    out: dict = {"uid": os.getuid()}
    path = d / "a.journal"
    with J.create(path) as j:
        j.append_many([("k", {"i": i}) for i in range(3)])

    def attempt(key, fn):
        try:
            out[key] = ["ok", fn()]
        except JournalError as exc:
            out[key] = ["error", str(exc)]

    def read_only_count():
        with J.open(path, readonly=True) as j:
            return [r.payload["i"] for r in j.records()]

    def write_one():
        with J.open(path) as j:
            return j.append("k", {"i": 99})

    os.chmod(path, 0o400)
    attempt("file_ro_read", read_only_count)
    attempt("file_ro_write", write_one)
    os.chmod(path, 0o600)
    os.chmod(d, 0o500)
    try:
        attempt("dir_ro_read", read_only_count)
        attempt("dir_ro_write", write_one)
        attempt("dir_ro_create", lambda: J.create(d / "b.journal").close())
        out["dir_ro_listing"] = sorted(os.listdir(d))
    finally:
        os.chmod(d, 0o700)
    attempt("after_write", write_one)
    attempt("after_read", read_only_count)
    say(json.dumps(out))


def main(argv: list[str]) -> None:
    command, args = argv[0], argv[1:]
    if command == "probe":
        load_journal()
        if args:  # and this user can write in the folder given
            Path(args[0], "probe").write_text("x")
            Path(args[0], "probe").unlink()
        say("ok")
    elif command == "append-loop":
        append_loop(*args)
    elif command == "create":
        create(*args)
    elif command == "writer":
        writer(*args)
    elif command == "fill":
        fill(*args)
    elif command == "perms":
        perms(*args)
    else:
        raise SystemExit(f"unknown command {command!r}")


if __name__ == "__main__":
    main(sys.argv[1:])
