"""Files at the edge: reading inputs safely, writing outputs whole and never through a link.

Reading (:func:`read_file_bytes`): regular files only, at most a size limit.

Writing (:func:`write_text_file`, CSV, OPM and fleet outputs):

A file is written to a hidden temporary twin in the same folder, flushed, then given its name:
renamed over an existing file when replacing is allowed, else linked to the new name (which
fails if the name exists), so a reader never sees half a file and nothing is overwritten by
surprise.  Neither name may be a symbolic link.  An OSError (read-only folder, full disk)
becomes a ValueError naming the file.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

#: Largest profile, scenario, state or OPM file read, bytes.
MAX_FILE_BYTES = 1_000_000

_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)


def write_text_file(path, text: str, *, what: str = "file", replace: bool = True,
                    encoding: str = "utf-8", newline: str = "") -> Path:
    """Write ``text`` to ``path`` whole (see the module notes); returns the path.

    Raises
    ------
    ValueError
        When ``path`` or its temporary twin is a link, ``path`` exists and ``replace`` is off, or
        the file cannot be written.
    """
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    for p in (path, tmp):
        if p.is_symlink():
            raise ValueError(f"{p}: is a link; refusing to write through it")
    if not replace and path.exists():
        raise ValueError(f"{path}: already exists; refusing to overwrite it (use --force)")
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC | _NOFOLLOW, 0o644)
        with os.fdopen(fd, "w", newline=newline, encoding=encoding) as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        if replace:
            os.replace(tmp, path)
        else:
            _link_new(tmp, path, text, encoding, newline)
    except FileExistsError:
        raise ValueError(f"{path}: already exists; refusing to overwrite it (use --force)") from None
    except OSError as exc:  # read-only folder, full disk, ...: a clear refusal, not a crash
        raise ValueError(f"{path}: cannot write the {what} ({exc.strerror or exc})") from None
    finally:
        try:
            if tmp.exists() and not tmp.is_symlink():
                tmp.unlink()
        except OSError:
            pass
    return path


def _link_new(tmp: Path, path: Path, text: str, encoding: str, newline: str) -> None:
    """Give the finished temporary file the name ``path`` without replacing a file there: a
    hard link where the file system has them, else an exclusive create and a copy."""
    try:
        os.link(tmp, path)
        return
    except FileExistsError:
        raise
    except OSError:
        pass
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _NOFOLLOW, 0o644)
    with os.fdopen(fd, "w", newline=newline, encoding=encoding) as fh:
        fh.write(text)


def read_file_bytes(path: Path, what: str = "file", limit: int = MAX_FILE_BYTES,
                    a_what: str | None = None) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes; errors name the file.

    The file is opened without blocking and checked with ``fstat`` before anything is read, and
    at most ``limit + 1`` bytes are read: a named pipe (which would block), a device such as
    ``/dev/zero`` (which never ends) or a folder is refused instead of hanging or filling memory.
    """
    path = Path(path)
    a_what = a_what or f"a {what}"
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise ValueError(f"{path}: {what} not found") from None
    except PermissionError:
        raise ValueError(f"{path}: {what} cannot be read (permission denied)") from None
    except OSError as exc:
        raise ValueError(f"{path}: {what} cannot be read ({exc.strerror or exc})") from None
    try:
        st = os.fstat(fd)
        if stat.S_ISDIR(st.st_mode):
            raise ValueError(f"{path}: is a folder, not {a_what}")
        if not stat.S_ISREG(st.st_mode):
            raise ValueError(f"{path}: is not a regular file (a device, pipe or socket), so not {a_what}")
        if st.st_size > limit:
            raise ValueError(f"{path}: {what} is {st.st_size} bytes, larger than the {limit} allowed")
        with os.fdopen(fd, "rb") as fh:
            fd = -1
            raw = fh.read(limit + 1)
    except OSError as exc:
        raise ValueError(f"{path}: {what} cannot be read ({exc.strerror or exc})") from None
    finally:
        if fd >= 0:
            os.close(fd)
    if len(raw) > limit:
        raise ValueError(f"{path}: {what} is larger than the {limit} bytes allowed")
    return raw
