"""UTC time strings at the edge: ISO 8601 in, ISO 8601 out, POSIX seconds inside.

Inside burndesk a time is a float ``*_s``: seconds since 1970-01-01T00:00:00Z on the UTC time
scale with leap seconds ignored (UTC differences are taken as SI seconds; a campaign rarely
spans a leap second, and a time written as 23:59:60 is refused rather than guessed).
"""

from __future__ import annotations

import calendar
import datetime as _dt
import math
import re
import time

_ISO = re.compile(
    r"^(\d{4})-(\d{2})-(\d{2})[T ](\d{2}):(\d{2})(?::(\d{2})(\.\d{1,9})?)?"
    r"(Z|[+-]\d{2}:?\d{2})?$"
)


def parse_utc(text, field: str = "epoch") -> float:
    """Seconds since 1970 (UTC, no leap seconds) from an ISO 8601 UTC string.

    Accepts ``YYYY-MM-DDTHH:MM[:SS[.fff...]]`` followed by ``Z`` or ``+00:00``.

    Raises
    ------
    ValueError
        Naming ``field``, for anything else (no zone, another offset, a leap second, an
        impossible date).
    """
    if isinstance(text, _dt.datetime):  # an unquoted TOML datetime
        if text.tzinfo is None or text.utcoffset() != _dt.timedelta(0):
            raise ValueError(f"{field}: {text.isoformat()} is not UTC: give UTC with a trailing Z")
        return calendar.timegm(text.utctimetuple()) + text.microsecond * 1e-6
    if not isinstance(text, str):
        raise ValueError(f"{field}: expected an ISO 8601 UTC string like 2027-03-14T06:00:00Z, "
                         f"got {type(text).__name__}")
    s = text.strip()
    m = _ISO.match(s)
    if not m:
        raise ValueError(f"{field}: {text!r} is not an ISO 8601 UTC time like 2027-03-14T06:00:00Z")
    year, month, day, hour, minute = (int(m.group(k)) for k in range(1, 6))
    second = int(m.group(6) or 0)
    frac = float(m.group(7)) if m.group(7) else 0.0
    zone = m.group(8)
    if zone is None:
        raise ValueError(f"{field}: {text!r} has no time zone: times are UTC, end them with Z")
    if zone != "Z" and zone.replace(":", "") != "+0000":
        raise ValueError(f"{field}: {text!r} is not UTC (offset {zone}): give UTC with a trailing Z")
    if second == 60:
        raise ValueError(f"{field}: {text!r} names a leap second, which burndesk does not handle")
    if not (1 <= month <= 12) or not (1 <= day <= calendar.monthrange(year, month)[1]) \
            or hour > 23 or minute > 59 or second > 59 or year < 1900:
        raise ValueError(f"{field}: {text!r} is not a valid date and time")
    return calendar.timegm((year, month, day, hour, minute, second, 0, 0, 0)) + frac


def format_utc(t_s: float, digits: int = 3) -> str:
    """ISO 8601 UTC string with ``digits`` decimals of seconds (default ms) and a trailing Z.

    Raises ``ValueError`` for a time that is not finite or lies beyond the calendar.
    """
    if not math.isfinite(t_s):
        raise ValueError("time is not finite")
    scale = 10 ** digits
    total = round(t_s * scale)
    whole, part = divmod(total, scale)
    try:
        tm = time.gmtime(whole)
        base = time.strftime("%Y-%m-%dT%H:%M:%S", tm)
    except (OverflowError, OSError, ValueError):  # beyond the platform's calendar
        raise ValueError(f"time {t_s:.6g} s from 1970 is too far from the present to be written "
                         "as a UTC date") from None
    return f"{base}.{part:0{digits}d}Z" if digits else base + "Z"


def format_duration(seconds: float) -> str:
    """Countdown style: ``T-1d 02:03:04`` for the future, ``T+00:00:05`` for the past."""
    sign = "-" if seconds >= 0 else "+"
    s = int(round(abs(seconds)))
    days, rem = divmod(s, 86400)
    h, rem = divmod(rem, 3600)
    m, sec = divmod(rem, 60)
    day_part = f"{days}d " if days else ""
    return f"T{sign}{day_part}{h:02d}:{m:02d}:{sec:02d}"


def now_s() -> float:
    """The current UTC time, seconds since 1970."""
    return time.time()
