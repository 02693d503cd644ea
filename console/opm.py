"""CCSDS Orbit Parameter Messages (OPM) in keyword = value notation (KVN): read and write.

An OPM carries one spacecraft's osculating state at an epoch, optionally its Keplerian elements,
its mass and other spacecraft parameters, a covariance, and manoeuvre blocks.  burndesk reads one
as the state of a scenario or of an orbit-determination record, and writes a planned burn queue
as one (the state at the plan epoch followed by one manoeuvre block per burn).

What burndesk honours
---------------------
* ``CENTER_NAME = EARTH`` only.
* ``REF_FRAME`` one of ``EME2000``, ``GCRF``, ``ICRF``: Earth-centred inertial frames whose axes
  differ by milliarcseconds (tens of centimetres at GEO radius), which is negligible for burn
  planning; burndesk treats them alike as "the body's inertial equatorial frame".
* ``TIME_SYSTEM = UTC`` only (UTC seconds are taken as SI seconds, as everywhere in burndesk;
  a leap second, ``ss = 60``, is refused).
* ``CCSDS_OPM_VERS`` 1.0, 2.0 or 3.0.
* Manoeuvre frames (``MAN_REF_FRAME``) ``EME2000``, ``GCRF``, ``ICRF`` (inertial) or the local
  orbital frames ``TNW`` (T along the velocity, W along the orbital angular momentum, N = W x T),
  ``RTN`` and its synonym ``RSW``.

Anything else (another centre, a rotating or true-of-date frame, TAI, TT, TDB, GPS, ...) is a
``ValueError`` naming the line, the keyword and the value: burndesk never guesses a frame or a
time scale.

Reading is strict, as the standard is: only its keywords, in its fixed order, each once per
block; units, when written, exactly as the standard prints them (``X = 6655.9942 [km]``; a value
in ``[m]`` is refused, never converted); comments only where the standard allows them (after the
version line, at the start of the metadata, at the start of a data block).  Every error names the
line.  Comments are kept on the document.  ``USER_DEFINED_x`` parameters are kept as text and not
interpreted; the covariance block is kept (SI units) and not used.  When Keplerian elements are
given they are checked against the state vector (with the message's own GM): a disagreement of
more than ``ELEMENTS_TOLERANCE_M`` in position is refused.

Writing (:func:`write_opm`, :func:`plan_to_opm`, :func:`session_to_opm`) produces a version 3.0
message that this reader reads back to the printed precision: positions to 1 mm (km with 6
decimals), velocities to 1 um/s (km/s with 9 decimals), times to 1 us, masses to 1 mg,
delta-v components to 1 nm/s.  Each burn becomes one manoeuvre block: ignition epoch, duration,
mass change (negative), frame and delta-v components.  An inertially fixed burn is written in the
message's inertial frame (its delta-v vector is the finite burn's delta-v along the fixed
direction); a burn that tracks the velocity vector is written in ``TNW``, whose axes follow the
vehicle as the tracking attitude does.

References
----------
CCSDS 502.0-B-3, *Orbit Data Messages*, Recommended Standard (Blue Book), April 2023:
sec. 3.2.2 (Table 3-1, OPM header), 3.2.3 (Table 3-2, metadata; 3.2.3.2 time systems; 3.2.3.3
reference frames), 3.2.4 (Table 3-3, data blocks and their units; 3.2.4.7-3.2.4.9 manoeuvres and
the mass they require; 3.2.4.11 manoeuvre frames RTN/RSW/TNW), 7.3 (lines), 7.4 (KVN, fixed order
7.4.8), 7.5 (values; 7.5.10 time format), 7.7.1 (units in square brackets), 7.8 (comments and
where they may stand, 7.8.7).  Issue 2 (502.0-B-2, 2009) uses the same OPM keywords apart from
the header's optional CLASSIFICATION and MESSAGE_ID.
"""

from __future__ import annotations

import calendar
import math
import re
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from mechanics.elements import Elements, elements_to_rv, rv_to_elements

from .timeutil import format_utc

#: Versions of CCSDS_OPM_VERS this reader accepts.
VERSIONS = ("1.0", "2.0", "3.0")
#: Version written.
WRITE_VERSION = "3.0"
CENTERS = ("EARTH",)
#: Earth-centred inertial frames treated alike (milliarcsecond differences).
INERTIAL_FRAMES = ("EME2000", "GCRF", "ICRF")
TIME_SYSTEMS = ("UTC",)
LOCAL_FRAMES = ("TNW", "RTN", "RSW")
MANEUVER_FRAMES = INERTIAL_FRAMES + LOCAL_FRAMES
#: Largest line the standard allows (7.3.2), characters.
MAX_LINE = 254
#: Largest OPM file read, bytes.
MAX_FILE_BYTES = 1_000_000
#: Keplerian elements and state vector must agree to this, m (position rebuilt from the elements).
ELEMENTS_TOLERANCE_M = 1000.0

_KM = 1000.0
_DEG = math.pi / 180.0

# --------------------------------------------------------------------------- keyword tables

# (keyword, kind, unit as the standard prints it or None, SI scale, mandatory in its block)
# kinds: "version", "text", "time", "number"
_Key = tuple

_BLOCKS: dict[str, tuple[_Key, ...]] = {
    "header": (
        ("CCSDS_OPM_VERS", "version", None, None, True),
        ("CLASSIFICATION", "text", None, None, False),
        ("CREATION_DATE", "time", None, None, True),
        ("ORIGINATOR", "text", None, None, True),
        ("MESSAGE_ID", "text", None, None, False),
    ),
    "metadata": (
        ("OBJECT_NAME", "text", None, None, True),
        ("OBJECT_ID", "text", None, None, True),
        ("CENTER_NAME", "text", None, None, True),
        ("REF_FRAME", "text", None, None, True),
        ("REF_FRAME_EPOCH", "time", None, None, False),
        ("TIME_SYSTEM", "text", None, None, True),
    ),
    "state vector": (
        ("EPOCH", "time", None, None, True),
        ("X", "number", "km", _KM, True),
        ("Y", "number", "km", _KM, True),
        ("Z", "number", "km", _KM, True),
        ("X_DOT", "number", "km/s", _KM, True),
        ("Y_DOT", "number", "km/s", _KM, True),
        ("Z_DOT", "number", "km/s", _KM, True),
    ),
    # all or none (3.1.2); TRUE_ANOMALY and MEAN_ANOMALY share one place
    "Keplerian elements": (
        ("SEMI_MAJOR_AXIS", "number", "km", _KM, True),
        ("ECCENTRICITY", "number", None, 1.0, True),
        ("INCLINATION", "number", "deg", _DEG, True),
        ("RA_OF_ASC_NODE", "number", "deg", _DEG, True),
        ("ARG_OF_PERICENTER", "number", "deg", _DEG, True),
        ("TRUE_ANOMALY", "number", "deg", _DEG, True),
        ("GM", "number", "km**3/s**2", _KM ** 3, True),
    ),
    "spacecraft parameters": (
        ("MASS", "number", "kg", 1.0, False),
        ("SOLAR_RAD_AREA", "number", "m**2", 1.0, False),
        ("SOLAR_RAD_COEFF", "number", None, 1.0, False),
        ("DRAG_AREA", "number", "m**2", 1.0, False),
        ("DRAG_COEFF", "number", None, 1.0, False),
    ),
    "covariance": (("COV_REF_FRAME", "text", None, None, False),) + tuple(
        (name, "number", unit, scale, True) for name, unit, scale in (
            ("CX_X", "km**2", 1e6), ("CY_X", "km**2", 1e6), ("CY_Y", "km**2", 1e6),
            ("CZ_X", "km**2", 1e6), ("CZ_Y", "km**2", 1e6), ("CZ_Z", "km**2", 1e6),
            ("CX_DOT_X", "km**2/s", 1e6), ("CX_DOT_Y", "km**2/s", 1e6), ("CX_DOT_Z", "km**2/s", 1e6),
            ("CX_DOT_X_DOT", "km**2/s**2", 1e6),
            ("CY_DOT_X", "km**2/s", 1e6), ("CY_DOT_Y", "km**2/s", 1e6), ("CY_DOT_Z", "km**2/s", 1e6),
            ("CY_DOT_X_DOT", "km**2/s**2", 1e6), ("CY_DOT_Y_DOT", "km**2/s**2", 1e6),
            ("CZ_DOT_X", "km**2/s", 1e6), ("CZ_DOT_Y", "km**2/s", 1e6), ("CZ_DOT_Z", "km**2/s", 1e6),
            ("CZ_DOT_X_DOT", "km**2/s**2", 1e6), ("CZ_DOT_Y_DOT", "km**2/s**2", 1e6),
            ("CZ_DOT_Z_DOT", "km**2/s**2", 1e6),
        )),
    # repeated, one block per manoeuvre, every keyword in each (3.2.4.8)
    "maneuver": (
        ("MAN_EPOCH_IGNITION", "time", None, None, True),
        ("MAN_DURATION", "number", "s", 1.0, True),
        ("MAN_DELTA_MASS", "number", "kg", 1.0, True),
        ("MAN_REF_FRAME", "text", None, None, True),
        ("MAN_DV_1", "number", "km/s", _KM, True),
        ("MAN_DV_2", "number", "km/s", _KM, True),
        ("MAN_DV_3", "number", "km/s", _KM, True),
    ),
    "user-defined parameters": (),
}
_ORDER = tuple(_BLOCKS)
_ALIASES = {"MEAN_ANOMALY": "TRUE_ANOMALY"}
_INDEX: dict[str, tuple[str, int, _Key]] = {}
for _block, _keys in _BLOCKS.items():
    for _pos, _key in enumerate(_keys):
        _INDEX[_key[0]] = (_block, _pos, _key)
for _alias, _name in _ALIASES.items():
    _b, _p, _k = _INDEX[_name]
    _INDEX[_alias] = (_b, _p, (_alias,) + _k[1:])
_USER = "USER_DEFINED_"
_REF = "CCSDS 502.0-B-3"

_KVN = re.compile(r"^\s*([A-Za-z0-9_]+)\s*=\s*(.*?)\s*$")
_COMMENT = re.compile(r"^\s*COMMENT(?:\s(.*))?$")
_UNIT = re.compile(r"^(.*?)\s+\[([^\[\]]*)\]$")
_NUMBER = re.compile(r"^[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?$")
_TIME_YMD = re.compile(r"^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2}):(\d{2})(\.\d+)?Z?$")
_TIME_YDOY = re.compile(r"^(\d{4})-(\d{3})T(\d{2}):(\d{2}):(\d{2})(\.\d+)?Z?$")
_VERSION = re.compile(r"^\d+\.\d+$")


# --------------------------------------------------------------------------- the document

@dataclass(frozen=True)
class OpmComment:
    """One COMMENT line: where it stood and its text (white space kept, 7.8.5)."""

    line: int
    block: str
    text: str


@dataclass(frozen=True)
class OpmKeplerian:
    """The optional osculating Keplerian elements (SI units, radians).

    ``anomaly`` says which anomaly the message gave (``"true"`` or ``"mean"``); ``nu_rad`` is the
    true anomaly either way.
    """

    a_m: float
    e: float
    i_rad: float
    raan_rad: float
    argp_rad: float
    anomaly_rad: float
    anomaly: str
    nu_rad: float
    gm_m3_s2: float

    def elements(self) -> Elements:
        return Elements(self.a_m, self.e, self.i_rad, self.raan_rad, self.argp_rad, self.nu_rad)


@dataclass(frozen=True)
class OpmManeuver:
    """One manoeuvre block.

    Attributes
    ----------
    ignition_s : float
        UTC seconds since 1970.
    duration_s : float
        0 for an impulsive manoeuvre.
    delta_mass_kg : float
        Mass change (negative), kg.
    ref_frame : str
        Frame of ``dv_m_s`` (one of ``MANEUVER_FRAMES``).
    dv_m_s : tuple of 3 floats
        Delta-v components in ``ref_frame``, m/s.
    line : int
        Line of ``MAN_EPOCH_IGNITION``.
    comments : tuple of str
        The comments that opened the block.
    """

    ignition_s: float
    duration_s: float
    delta_mass_kg: float
    ref_frame: str
    dv_m_s: tuple
    line: int
    comments: tuple = ()


@dataclass(frozen=True)
class OpmDocument:
    """An OPM read into SI units.

    Attributes
    ----------
    header, metadata : dict
        Keyword -> value text as written (header: CCSDS_OPM_VERS, CREATION_DATE, ORIGINATOR,
        optional CLASSIFICATION, MESSAGE_ID; metadata: OBJECT_NAME, OBJECT_ID, CENTER_NAME,
        REF_FRAME, optional REF_FRAME_EPOCH, TIME_SYSTEM).
    creation_s, epoch_s : float
        CREATION_DATE and EPOCH as UTC seconds since 1970.
    r_m : tuple of 3 floats
        Position at the epoch, m, in ``ref_frame``.
    v_m_s : tuple of 3 floats
        Velocity at the epoch, m/s.
    keplerian : OpmKeplerian or None
    mass_kg : float or None
        Spacecraft mass at the epoch (MASS), kg.
    spacecraft : dict
        The other spacecraft parameters given, SI: ``solar_rad_area_m2``, ``solar_rad_coeff``,
        ``drag_area_m2``, ``drag_coeff``.
    covariance : tuple of 21 floats or None
        Lower triangle row by row, m^2, m^2/s, m^2/s^2 (kept, not used).
    covariance_frame : str or None
    maneuvers : tuple of OpmManeuver
    user_defined : dict
        ``USER_DEFINED_x`` keyword -> value text (kept, not interpreted).
    comments : tuple of OpmComment
        Every comment of the message, in order.
    lines : dict
        Keyword -> line number (header, metadata, state vector, elements, spacecraft).
    source : str
        File name or "OPM" (used in messages).
    """

    header: dict
    metadata: dict
    creation_s: float
    epoch_s: float
    r_m: tuple
    v_m_s: tuple
    keplerian: OpmKeplerian | None = None
    mass_kg: float | None = None
    spacecraft: dict = field(default_factory=dict)
    covariance: tuple | None = None
    covariance_frame: str | None = None
    maneuvers: tuple = ()
    user_defined: dict = field(default_factory=dict)
    comments: tuple = ()
    lines: dict = field(default_factory=dict)
    source: str = "OPM"

    @property
    def object_name(self) -> str:
        return self.metadata["OBJECT_NAME"]

    @property
    def object_id(self) -> str:
        return self.metadata["OBJECT_ID"]

    @property
    def center_name(self) -> str:
        return _normal(self.metadata["CENTER_NAME"])

    @property
    def ref_frame(self) -> str:
        return _normal(self.metadata["REF_FRAME"])

    @property
    def time_system(self) -> str:
        return _normal(self.metadata["TIME_SYSTEM"])

    def where(self, keyword: str) -> str:
        """``"FILE line N"`` for a keyword of the message (for messages)."""
        n = self.lines.get(keyword)
        return f"{self.source} line {n}" if n else self.source


# --------------------------------------------------------------------------- reading

def looks_like_opm(text: str) -> bool:
    """True if the first non-blank line is a ``CCSDS_OPM_VERS`` assignment."""
    for raw in text.splitlines():
        if raw.strip():
            m = _KVN.match(raw)
            return bool(m) and m.group(1) == "CCSDS_OPM_VERS"
    return False


def read_opm_file(path) -> OpmDocument:
    """Read an OPM file (see :func:`read_opm`); errors name the file and the line."""
    from .files import read_file_bytes

    path = Path(path)
    # a regular file only, read with a size limit: a pipe or /dev/zero is refused, never waited on
    raw = read_file_bytes(path, "OPM file", MAX_FILE_BYTES, a_what="an OPM file")
    try:
        text = raw.decode("ascii")
    except UnicodeDecodeError as exc:
        line = raw[:exc.start].count(b"\n") + 1
        raise ValueError(f"{path} line {line}: not ASCII text; an OPM holds printable ASCII only "
                         f"({_REF} 7.3.4)") from None
    return read_opm(text, str(path))


def read_opm(text: str, source: str = "OPM") -> OpmDocument:
    """Parse the KVN text of an OPM into an :class:`OpmDocument` (SI units inside).

    Parameters
    ----------
    text : str
        The whole message.
    source : str
        Name used in error messages (normally the file name).

    Returns
    -------
    OpmDocument

    Raises
    ------
    ValueError
        ``"SOURCE line N: ..."`` for a line that is not KVN or a comment, an unknown keyword, a
        keyword out of the standard's order or repeated, a second state vector, an empty value,
        a bad number or time, a unit other than the standard's, a comment where the standard
        allows none, a centre, frame, time system or version burndesk does not honour, a block
        left incomplete (missing keyword), manoeuvres without MASS, Keplerian elements that
        disagree with the state vector.

    References
    ----------
    CCSDS 502.0-B-3, sec. 3.2 (Tables 3-1 to 3-3), 7.3-7.5, 7.7.1, 7.8.
    """
    return _Reader(source).read(text)


def _normal(value: str) -> str:
    """Normative text compared case-blind, underscores as blanks, blanks collapsed (7.5.3, 7.5.9)."""
    return " ".join(value.replace("_", " ").split()).upper()


class _Block:
    def __init__(self, name: str, line: int, comments):
        self.name = name
        self.line = line
        self.values: dict[str, tuple[object, int]] = {}
        self.pos = -1
        self.comments = list(comments)


class _Reader:
    def __init__(self, source: str):
        self.source = source
        self.blocks: list[_Block] = []
        self.comments: list[OpmComment] = []
        self.pending: list[tuple[int, str]] = []
        self.last_line = 0

    def err(self, line: int, msg: str) -> ValueError:
        return ValueError(f"{self.source} line {line}: {msg}")

    # -- lines ---------------------------------------------------------------------------------
    def read(self, text: str) -> OpmDocument:
        if not isinstance(text, str):
            raise ValueError(f"{self.source}: expected the text of an OPM")
        first = True
        # lines end in CR, LF, CR LF or LF CR (7.3.7)
        text = text.replace("\r\n", "\n").replace("\n\r", "\n").replace("\r", "\n")
        for n, raw in enumerate(text.split("\n"), start=1):
            if len(raw) > MAX_LINE:
                raise self.err(n, f"is {len(raw)} characters long; an OPM line holds at most {MAX_LINE} "
                                  f"({_REF} 7.3.2)")
            bad = next((c for c in raw if not (" " <= c <= "~")), None)
            if bad is not None:
                what = "a tab" if bad == "\t" else f"character {bad!r}"
                raise self.err(n, f"contains {what}; an OPM holds printable ASCII and blanks only "
                                  f"({_REF} 7.3.4)")
            if not raw.strip():
                continue
            self.last_line = n
            if first:
                first = False
                if raw.lstrip().startswith("<"):
                    raise self.err(n, "this is XML; burndesk reads the KVN (keyword = value) form of an OPM")
                m = _KVN.match(raw)
                if not m or m.group(1) != "CCSDS_OPM_VERS":
                    # name the keyword only: a file that is not an OPM at all (a path in a
                    # scenario can point anywhere) must not have its content echoed
                    got = f"keyword {m.group(1)!r}" if m else "a line that is not 'KEYWORD = value'"
                    raise self.err(n, f"an OPM starts with CCSDS_OPM_VERS, found {got} "
                                      f"({_REF} 7.3.6, Table 3-1)")
            c = _COMMENT.match(raw)
            if c:
                self.pending.append((n, c.group(1) or ""))
                continue
            m = _KVN.match(raw)
            if not m:
                raise self.err(n, f"{raw.strip()[:60]!r} is not a 'KEYWORD = value' line ({_REF} 7.4)")
            key, value = m.group(1), m.group(2)
            if key != key.upper():
                raise self.err(n, f"keyword {key!r} must be upper case ({_REF} 7.4.4)")
            self.assign(n, key, value)
        if first:
            raise ValueError(f"{self.source}: is empty, not an OPM")
        if self.pending:
            raise self.err(self.pending[0][0], "a COMMENT at the end of the message opens no block; "
                                               f"comments stand at the start of a block ({_REF} 7.8.7)")
        self.close(self.blocks[-1])
        return self.document()

    def assign(self, n: int, key: str, value: str) -> None:
        if key.startswith(_USER) and len(key) > len(_USER):
            block_name, pos, spec = "user-defined parameters", 0, (key, "text", None, None, False)
        elif key in _INDEX:
            block_name, pos, spec = _INDEX[key]
        else:
            raise self.err(n, f"unknown keyword {key}: an OPM uses only the keywords of {_REF} "
                              "Tables 3-1 to 3-3")
        cur = self.blocks[-1] if self.blocks else None
        if cur is not None and block_name == cur.name:
            if block_name == "maneuver" and pos == 0:
                self.close(cur)
                self.open(block_name, n)
            elif self._slot_taken(cur, key):
                self._duplicate(n, key, cur)
            elif pos > cur.pos or block_name == "user-defined parameters":
                header_start = cur.name == "header" and list(cur.values) == ["CCSDS_OPM_VERS"]
                if self.pending and not header_start:
                    raise self.err(self.pending[0][0], f"a COMMENT inside the {cur.name} block; comments "
                                                       f"stand only at the start of a block ({_REF} 7.8.7)")
                cur.comments += self.pending
                self._take_comments(cur)
            else:
                after = _BLOCKS[cur.name][cur.pos][0]
                raise self.err(n, f"{key} out of order: it comes before {after} in the {cur.name} "
                                  f"block (the order is fixed, {_REF} 7.4.8, Table 3-{_table(cur.name)})")
        elif cur is None or _ORDER.index(block_name) > _ORDER.index(cur.name):
            if cur is not None:
                self.close(cur)
            if block_name == "maneuver" and pos != 0:
                raise self.err(n, f"{key} before MAN_EPOCH_IGNITION: each manoeuvre block starts with "
                                  f"MAN_EPOCH_IGNITION ({_REF} 3.2.4.8, Table 3-3)")
            self.open(block_name, n)
        else:
            earlier = [b for b in self.blocks if b.name == block_name]
            if earlier and self._slot_taken(earlier[0], key):
                self._duplicate(n, key, earlier[0])
            if earlier:
                raise self.err(n, f"{key} belongs to the {block_name} block, which ended before the "
                                  f"{cur.name} began (the order is fixed, {_REF} 7.4.8)")
            raise self.err(n, f"{key} belongs to the {block_name} block, which comes before the "
                              f"{cur.name} (the order is fixed, {_REF} 7.4.8)")
        cur = self.blocks[-1]
        cur.pos = pos
        cur.values[key] = (self.value(n, key, value, spec), n)

    @staticmethod
    def _slot_taken(block: _Block, key: str) -> bool:
        if key in ("TRUE_ANOMALY", "MEAN_ANOMALY"):
            return bool({"TRUE_ANOMALY", "MEAN_ANOMALY"} & set(block.values))
        return key in block.values

    def _duplicate(self, n: int, key: str, block: _Block):
        first = next((ln for k, (_, ln) in block.values.items()
                      if k == key or {k, key} <= {"TRUE_ANOMALY", "MEAN_ANOMALY"}), block.line)
        if block.name == "state vector" and key == "EPOCH":
            raise self.err(n, f"a second state vector (EPOCH already on line {first}); an OPM holds one")
        if block.name == "header" and key == "CCSDS_OPM_VERS":
            raise self.err(n, f"a second header (CCSDS_OPM_VERS already on line {first}); an OPM holds one")
        what = "manoeuvre block" if block.name == "maneuver" else f"{block.name} block"
        raise self.err(n, f"duplicate {key} (already on line {first}); each keyword stands once in "
                          f"the {what}")

    def _take_comments(self, block: _Block) -> None:
        for line, text in self.pending:
            self.comments.append(OpmComment(line, self._label(block), text))
        self.pending = []

    def _label(self, block: _Block) -> str:
        if block.name == "maneuver":
            return f"maneuver {sum(1 for b in self.blocks if b.name == 'maneuver')}"
        return block.name

    def open(self, name: str, n: int) -> None:
        block = _Block(name, n, self.pending)
        self.blocks.append(block)
        self._take_comments(block)

    # -- values --------------------------------------------------------------------------------
    def value(self, n: int, key: str, text: str, spec):
        _, kind, unit, scale, _mand = spec
        if not text:
            raise self.err(n, f"{key} has no value ({_REF} 7.5.1)")
        m = _UNIT.match(text)
        given_unit = None
        if kind == "number":
            if m:
                text, given_unit = m.group(1).strip(), m.group(2).strip()
            elif "[" in text or "]" in text:
                raise self.err(n, f"{key} = {text!r}: a unit goes after the value and a blank, in "
                                  f"square brackets, e.g. [km] ({_REF} 7.7.1.1)")
        elif m and not key.startswith(_USER):
            raise self.err(n, f"{key} takes no unit, found [{m.group(2)}]")
        if given_unit is not None:
            if unit is None:
                raise self.err(n, f"{key} is dimensionless: write no unit (found [{given_unit}]; "
                                  f"'[n/a]' must not appear, {_REF} 7.7.1.2-7.7.1.3)")
            if given_unit != unit:
                raise self.err(n, f"{key} is in [{given_unit}], but the standard's unit for {key} is "
                                  f"[{unit}] ({_REF} 7.7.1.1, Table 3-3): write the value in {unit}")
        if kind == "number":
            if not _NUMBER.match(text):
                raise self.err(n, f"{key} = {text!r} is not a number ({_REF} 7.5.5-7.5.7)")
            x = float(text)
            if not math.isfinite(x):
                raise self.err(n, f"{key} = {text!r} is not a finite number")
            return self.check_number(n, key, x) * scale
        if kind == "time":
            return _parse_time(text, key, lambda msg: self.err(n, msg))
        if kind == "version":
            if not _VERSION.match(text):
                raise self.err(n, f"CCSDS_OPM_VERS = {text!r} is not a version like 3.0")
            if text not in VERSIONS:
                raise self.err(n, f"CCSDS_OPM_VERS = {text} is not a version burndesk reads "
                                  f"({', '.join(VERSIONS)})")
            return text
        # text
        norm = _normal(text)
        if key == "CENTER_NAME" and norm not in CENTERS:
            raise self.err(n, f"CENTER_NAME = {text}: burndesk honours Earth-centred messages only "
                              "(CENTER_NAME = EARTH)")
        if key == "REF_FRAME" and norm not in INERTIAL_FRAMES:
            raise self.err(n, f"REF_FRAME = {text}: burndesk honours the Earth-centred inertial frames "
                              f"{', '.join(INERTIAL_FRAMES)} only")
        if key == "TIME_SYSTEM" and norm not in TIME_SYSTEMS:
            raise self.err(n, f"TIME_SYSTEM = {text}: burndesk honours UTC only (no conversion from "
                              "other time scales is guessed)")
        if key in ("MAN_REF_FRAME", "COV_REF_FRAME") and norm not in MANEUVER_FRAMES:
            raise self.err(n, f"{key} = {text}: burndesk honours {', '.join(MANEUVER_FRAMES)} only")
        return text

    def check_number(self, n: int, key: str, x: float) -> float:
        """Physical range checks of single values (the semi-major axis is checked with the
        eccentricity, whose sign convention it follows)."""
        if key in ("GM", "MASS") and x <= 0.0:
            raise self.err(n, f"{key} = {x!r}: {'the mass' if key == 'MASS' else 'GM'} must be positive")
        if key in ("ECCENTRICITY", "SOLAR_RAD_AREA", "DRAG_AREA", "SOLAR_RAD_COEFF", "DRAG_COEFF",
                   "MAN_DURATION") and x < 0.0:
            raise self.err(n, f"{key} = {x!r} must not be negative")
        if key == "INCLINATION" and not 0.0 <= x <= 180.0:
            raise self.err(n, f"INCLINATION = {x!r} deg must be between 0 and 180 deg")
        if key == "MAN_DELTA_MASS" and not x < 0.0:
            raise self.err(n, f"MAN_DELTA_MASS = {x!r}: the mass change of a manoeuvre is negative "
                              f"({_REF} 3.2.4.7)")
        return x

    # -- blocks --------------------------------------------------------------------------------
    def close(self, block: _Block) -> None:
        keys = _BLOCKS[block.name]
        given = set(block.values)
        if block.name == "Keplerian elements" and "MEAN_ANOMALY" in given:
            given.add("TRUE_ANOMALY")
        missing = [k for k, spec in enumerate(keys) if spec[4] and spec[0] not in given]
        if not missing:
            return
        first = missing[0]
        name = "TRUE_ANOMALY or MEAN_ANOMALY" if keys[first][0] == "TRUE_ANOMALY" else keys[first][0]
        before = [(block.values[k][1], k) for k in block.values
                  if _INDEX[k][1] < first and not k.startswith(_USER)] if block.name != "user-defined parameters" else []
        line, prev = max(before) if before else (block.line, None)
        where = f" (expected after {prev})" if prev else ""
        why = {"Keplerian elements": f" (all or none of the elements, {_REF} 3.1.2)",
               "covariance": f" (all 21 terms or none, {_REF} Table 3-3)",
               "maneuver": f" (every manoeuvre keyword in each block, {_REF} 3.2.4.8)"}.get(block.name, "")
        raise self.err(line, f"missing keyword {name}{where} in the {block.name} block that starts on "
                             f"line {block.line}{why}")

    def document(self) -> OpmDocument:
        by = {}
        for b in self.blocks:
            if b.name != "maneuver":
                by[b.name] = b
        end = self.last_line
        for name in ("header", "metadata", "state vector"):
            if name not in by:
                need = _BLOCKS[name][0][0]
                raise ValueError(f"{self.source} line {end}: missing keyword {need}: the message ends "
                                 f"without its {name} ({_REF} Table 3-{_table(name)})")

        def val(block, key):
            return by[block].values[key][0]

        lines = {k: ln for name, b in by.items() if name != "user-defined parameters"
                 for k, (_, ln) in b.values.items()}
        header = {k: v for k, (v, _) in by["header"].values.items() if k != "CREATION_DATE"}
        header["CREATION_DATE"] = _raw_time(val("header", "CREATION_DATE"))
        metadata = {k: (v if k != "REF_FRAME_EPOCH" else _raw_time(v)) for k, (v, _) in by["metadata"].values.items()}
        epoch = val("state vector", "EPOCH")[0]
        r = tuple(val("state vector", k) for k in ("X", "Y", "Z"))
        v = tuple(val("state vector", k) for k in ("X_DOT", "Y_DOT", "Z_DOT"))
        if math.sqrt(sum(c * c for c in r)) == 0.0:
            raise ValueError(f"{self.source} line {lines['X']}: the position vector is zero")
        kep = None
        if "Keplerian elements" in by:
            kep = self.keplerian(by["Keplerian elements"], r, v)
        mass = None
        spacecraft = {}
        if "spacecraft parameters" in by:
            sp = by["spacecraft parameters"].values
            mass = sp["MASS"][0] if "MASS" in sp else None
            for key, name in (("SOLAR_RAD_AREA", "solar_rad_area_m2"), ("SOLAR_RAD_COEFF", "solar_rad_coeff"),
                              ("DRAG_AREA", "drag_area_m2"), ("DRAG_COEFF", "drag_coeff")):
                if key in sp:
                    spacecraft[name] = sp[key][0]
        cov = cov_frame = None
        if "covariance" in by:
            cv = by["covariance"].values
            cov = tuple(cv[k[0]][0] for k in _BLOCKS["covariance"][1:])
            cov_frame = cv["COV_REF_FRAME"][0] if "COV_REF_FRAME" in cv else None
        maneuvers = []
        for b in self.blocks:
            if b.name == "maneuver":
                mv = b.values
                maneuvers.append(OpmManeuver(
                    ignition_s=mv["MAN_EPOCH_IGNITION"][0][0], duration_s=mv["MAN_DURATION"][0],
                    delta_mass_kg=mv["MAN_DELTA_MASS"][0], ref_frame=_normal(mv["MAN_REF_FRAME"][0]),
                    dv_m_s=tuple(mv[k][0] for k in ("MAN_DV_1", "MAN_DV_2", "MAN_DV_3")),
                    line=mv["MAN_EPOCH_IGNITION"][1], comments=tuple(t for _, t in b.comments)))
        if maneuvers:
            if mass is None:
                raise ValueError(f"{self.source} line {maneuvers[0].line}: a message with manoeuvres must "
                                 f"give MASS in its spacecraft parameters ({_REF} 3.2.4.9)")
            spent = -sum(m.delta_mass_kg for m in maneuvers)
            if spent >= mass:
                raise ValueError(f"{self.source} line {maneuvers[-1].line}: the manoeuvres spend "
                                 f"{spent:.6f} kg, more than the MASS of {mass:.6f} kg")
        user = {k: val for k, (val, _) in by["user-defined parameters"].values.items()} \
            if "user-defined parameters" in by else {}
        return OpmDocument(
            header=header, metadata=metadata, creation_s=val("header", "CREATION_DATE")[0],
            epoch_s=epoch, r_m=r, v_m_s=v, keplerian=kep, mass_kg=mass, spacecraft=spacecraft,
            covariance=cov, covariance_frame=cov_frame, maneuvers=tuple(maneuvers),
            user_defined=user, comments=tuple(self.comments), lines=lines, source=self.source)

    def keplerian(self, block: _Block, r, v) -> OpmKeplerian:
        from mechanics.kepler import mean_to_true

        kv = block.values
        a, e = kv["SEMI_MAJOR_AXIS"][0], kv["ECCENTRICITY"][0]
        line_a = kv["SEMI_MAJOR_AXIS"][1]
        if abs(e - 1.0) < 1e-10:
            raise self.err(kv["ECCENTRICITY"][1], "ECCENTRICITY = 1: a parabolic orbit has no "
                                                  "semi-major axis; give the state vector alone")
        if (e < 1.0) != (a > 0.0):
            raise self.err(line_a, "SEMI_MAJOR_AXIS has the wrong sign for the eccentricity "
                                   "(positive for e < 1, negative for e > 1)")
        anomaly = "mean" if "MEAN_ANOMALY" in kv else "true"
        key = "MEAN_ANOMALY" if anomaly == "mean" else "TRUE_ANOMALY"
        m_rad = kv[key][0]
        nu = float(mean_to_true(m_rad, e)) if anomaly == "mean" else m_rad
        gm = kv["GM"][0]
        el = Elements(a, e, kv["INCLINATION"][0], kv["RA_OF_ASC_NODE"][0], kv["ARG_OF_PERICENTER"][0], nu)
        try:
            r_el, v_el = elements_to_rv(el, gm)
        except ValueError as exc:
            raise self.err(line_a, f"the Keplerian elements do not describe an orbit ({exc})") from None
        miss = float(np.linalg.norm(np.asarray(r_el) - np.asarray(r)))
        if not miss <= ELEMENTS_TOLERANCE_M:
            raise self.err(line_a, f"the Keplerian elements disagree with the state vector: they put the "
                                   f"spacecraft {miss / 1e3:.3f} km away (more than "
                                   f"{ELEMENTS_TOLERANCE_M / 1e3:g} km); check the message")
        return OpmKeplerian(a, e, el.i_rad, el.raan_rad, el.argp_rad, m_rad, anomaly, float(nu), gm)


def _table(block: str) -> int:
    return {"header": 1, "metadata": 2}.get(block, 3)


def _parse_time(text: str, key: str, err):
    """(UTC seconds since 1970, text) from a 7.5.10 time string."""
    m = _TIME_YMD.match(text)
    if m:
        year, month, day, hh, mm, ss = (int(m.group(k)) for k in range(1, 7))
        frac = m.group(7)
        if not (1 <= month <= 12) or not (1 <= day <= calendar.monthrange(year, month)[1]):
            raise err(f"{key} = {text!r} is not a valid date")
    else:
        m = _TIME_YDOY.match(text)
        if not m:
            raise err(f"{key} = {text!r} is not a time like 2027-03-14T06:00:00.000 or "
                      f"2027-073T06:00:00.000 ({_REF} 7.5.10)")
        year, doy, hh, mm, ss = (int(m.group(k)) for k in range(1, 6))
        frac = m.group(6)
        if not 1 <= doy <= (366 if calendar.isleap(year) else 365):
            raise err(f"{key} = {text!r}: day of year {doy} does not exist in {year}")
        base = calendar.timegm((year, 1, 1, 0, 0, 0, 0, 0, 0)) + (doy - 1) * 86400
        tm = time.gmtime(base)
        month, day = tm.tm_mon, tm.tm_mday
    if ss == 60:
        raise err(f"{key} = {text!r} names a leap second, which burndesk does not handle")
    if hh > 23 or mm > 59 or ss > 59 or year < 1900:
        raise err(f"{key} = {text!r} is not a valid time of day")
    t = calendar.timegm((year, month, day, hh, mm, ss, 0, 0, 0)) + (float(frac) if frac else 0.0)
    return (float(t), text)


def _raw_time(value) -> str:
    return value[1]


# --------------------------------------------------------------------------- writing

def _ascii(text: str, fallback: str = "UNKNOWN") -> str:
    """Printable ASCII on one line (other characters become '?')."""
    out = "".join(c if " " <= c <= "~" else "?" for c in " ".join(str(text).split()))
    return out or fallback


def _fixed(x: float, decimals: int) -> str:
    """Fixed-point text with at most 16 digits (7.5.6), never '-0.000'."""
    x = float(x)
    if not math.isfinite(x):
        raise ValueError(f"cannot write {x!r} into an OPM")
    whole = len(str(int(abs(x)))) if abs(x) >= 1.0 else 1
    d = max(1, min(decimals, 16 - whole))
    s = f"{x:.{d}f}"
    if float(s) == 0.0:
        s = s.lstrip("-")
    return s


def _time(t_s: float) -> str:
    return format_utc(t_s, 6)[:-1]  # 7.5.10 form, microseconds, time system UTC (no Z)


def _tnw_from_tracking(direction) -> tuple:
    """Components in TNW from components in burndesk's tracking frame.

    The tracking frame (:func:`mechanics.flight.tracking_frame`) has axes (t along v, h along the
    orbit normal, b = t x h); TNW has T = t, W = h and N = W x T = h x t = -b.
    """
    t, h, b = (float(c) for c in direction)
    return (t, -b, h)


def write_opm(*, epoch_s: float, r_m, v_m_s, body, mass_kg: float | None = None, burns=(),
              object_name: str = "UNKNOWN", object_id: str = "UNKNOWN", ref_frame: str = "EME2000",
              originator: str = "BURNDESK", creation_s: float | None = None, header_comments=(),
              state_comments=(), elements: bool = True) -> str:
    """OPM text (KVN, version 3.0) for a state and a burn queue.

    Parameters
    ----------
    epoch_s : float
        UTC seconds since 1970 of the state.
    r_m, v_m_s : sequence of 3 floats
        Osculating position (m) and velocity (m/s) in the body's inertial frame.
    body : mechanics.bodies.Body
        Must be the Earth (CENTER_NAME EARTH); its GM goes with the Keplerian elements.
    mass_kg : float, optional
        Spacecraft mass at the epoch, kg (required when there are burns, 3.2.4.9).
    burns : sequence of mechanics.planner.PlannedBurn
        One manoeuvre block each, in order.
    object_name, object_id, originator : str
        Header and metadata text (printable ASCII; blanks kept).
    ref_frame : str
        EME2000, GCRF or ICRF: the frame of the state, the elements and the inertial burns.
    creation_s : float, optional
        CREATION_DATE (default: now).
    header_comments, state_comments : sequence of str
        Extra COMMENT lines after the version line and at the start of the state vector.
    elements : bool
        Also write the osculating Keplerian elements (with GM), for the reader's consistency check.

    Returns
    -------
    str

    Raises
    ------
    ValueError
        For another body than the Earth, a frame burndesk does not honour, burns without a mass,
        non-finite numbers.

    References
    ----------
    CCSDS 502.0-B-3, Tables 3-1 to 3-3, 3.2.4.7-3.2.4.11, 7.5.6, 7.5.10, 7.7.1, 7.8.7.
    """
    if _normal(getattr(body, "name", "")) not in CENTERS:
        raise ValueError(f"OPM output: body {getattr(body, 'name', body)!r} is not the Earth; burndesk "
                         "writes Earth-centred messages only (CENTER_NAME = EARTH)")
    frame = _normal(ref_frame)
    if frame not in INERTIAL_FRAMES:
        raise ValueError(f"OPM output: REF_FRAME {ref_frame!r} is not one of {', '.join(INERTIAL_FRAMES)}")
    burns = tuple(burns)
    if burns and mass_kg is None:
        raise ValueError("OPM output: manoeuvres need the spacecraft mass at the epoch (MASS)")
    creation = time.time() if creation_s is None else creation_s
    lines: list[str] = []

    def kv(key, value, unit=None):
        lines.append(f"{key:<18} = {value}" + (f" [{unit}]" if unit else ""))

    def comment(text):
        text = _ascii(text, "")
        width = MAX_LINE - len("COMMENT ")
        while True:
            lines.append(("COMMENT " + text[:width]).rstrip())
            text = text[width:]
            if not text:
                break

    kv("CCSDS_OPM_VERS", WRITE_VERSION)
    for c in header_comments:
        comment(c)
    kv("CREATION_DATE", _time(creation))
    kv("ORIGINATOR", _ascii(originator))
    lines.append("")
    kv("OBJECT_NAME", _ascii(object_name))
    kv("OBJECT_ID", _ascii(object_id))
    kv("CENTER_NAME", "EARTH")
    kv("REF_FRAME", frame)
    kv("TIME_SYSTEM", "UTC")
    lines.append("")
    for c in state_comments:
        comment(c)
    kv("EPOCH", _time(epoch_s))
    for key, x in zip(("X", "Y", "Z"), r_m):
        kv(key, _fixed(x / _KM, 6), "km")
    for key, x in zip(("X_DOT", "Y_DOT", "Z_DOT"), v_m_s):
        kv(key, _fixed(x / _KM, 9), "km/s")
    if elements:
        el = rv_to_elements(np.asarray(r_m, float), np.asarray(v_m_s, float), body.mu_m3_s2)
        lines.append("")
        comment("osculating elements of the state above (GM of the body profile)")
        kv("SEMI_MAJOR_AXIS", _fixed(el.a_m / _KM, 6), "km")
        kv("ECCENTRICITY", _fixed(el.e, 12))
        for key, x in (("INCLINATION", el.i_rad), ("RA_OF_ASC_NODE", el.raan_rad),
                       ("ARG_OF_PERICENTER", el.argp_rad), ("TRUE_ANOMALY", el.nu_rad)):
            kv(key, _fixed(math.degrees(float(x)), 9), "deg")
        kv("GM", _fixed(body.mu_m3_s2 / _KM ** 3, 6), "km**3/s**2")
    if mass_kg is not None:
        lines.append("")
        comment("mass at the epoch: dry mass plus propellant on board")
        kv("MASS", _fixed(mass_kg, 6), "kg")
    for k, b in enumerate(burns, start=1):
        lines.append("")
        if b.attitude_mode == "inertial":
            man_frame = frame
            dv = tuple(b.dv_m_s * float(c) for c in b.direction)
            how = "inertially fixed attitude"
        else:
            man_frame = "TNW"
            dv = tuple(b.dv_m_s * c for c in _tnw_from_tracking(b.direction))
            how = "attitude tracking the velocity (" + ("prograde" if b.sense > 0 else "retrograde") + ")"
        if b.carries_plane_change:
            how += f", {math.degrees(b.out_of_plane_rad):+.3f} deg out of the orbit plane (plane change)"
        if b.centre_shift_s:
            how += f"; burn centre {b.centre_shift_s:+.3f} s from that passage"
        comment(f"burn {b.index} ({k} of {len(burns)}): centred on {b.apsis} at {_time(b.apsis_time_s)} UTC, "
                f"{how}")
        comment(f"finite delta-v {b.dv_m_s:.3f} m/s (impulsive {b.impulsive_dv_m_s:.3f} m/s), thrust "
                f"{b.thrust_n:.4f} N, mass flow {b.mdot_kg_s * 1e3:.5f} g/s, mass before "
                f"{b.mass_before_kg:.3f} kg")
        kv("MAN_EPOCH_IGNITION", _time(b.ignition_s))
        kv("MAN_DURATION", _fixed(b.duration_s, 6), "s")
        kv("MAN_DELTA_MASS", _fixed(-b.propellant_kg, 6), "kg")
        kv("MAN_REF_FRAME", man_frame)
        for key, x in zip(("MAN_DV_1", "MAN_DV_2", "MAN_DV_3"), dv):
            kv(key, _fixed(x / _KM, 12), "km/s")
    return "\n".join(lines) + "\n"


def _plan_comments(plan, warnings, cautions) -> list[str]:
    out = [f"burn queue planned by burndesk ({plan.model} force model); "
           + ("FEASIBLE" if plan.feasible else "NOT FEASIBLE: do not upload")]
    out += [f"WARNING: {w}" for w in warnings]
    out += [f"caution: {c}" for c in cautions]
    out.append("each manoeuvre block: MAN_DV is the finite burn's delta-v; ignition puts half of it "
               "before the apsis")
    return out


def plan_to_opm(plan, scenario=None, *, source: OpmDocument | None = None, **kw) -> str:
    """OPM text of a :class:`mechanics.planner.Plan`: the state at the plan epoch and every burn.

    ``source`` (the OPM the scenario's state came from, if any) lends its OBJECT_NAME, OBJECT_ID
    and REF_FRAME; otherwise the vehicle's name is the object name.  Keyword arguments go to
    :func:`write_opm`.
    """
    from .report import CAUTIONS

    opts = dict(kw)
    if source is not None:
        opts.setdefault("object_name", source.object_name)
        opts.setdefault("object_id", source.object_id)
        opts.setdefault("ref_frame", source.ref_frame)
    elif scenario is not None and scenario.vehicle is not None:
        opts.setdefault("object_name", scenario.vehicle.name)
    comments = _plan_comments(plan, plan.warnings, CAUTIONS)
    if scenario is not None:
        comments.insert(0, f"scenario: {scenario.name}")
    if source is not None:
        comments.append(f"state from {Path(source.source).name} (created "
                        f"{source.header['CREATION_DATE']} by {source.header['ORIGINATOR']})")
    opts.setdefault("header_comments", comments)
    opts.setdefault("state_comments", ["osculating state at the plan epoch"])
    return write_opm(epoch_s=plan.epoch_s, r_m=plan.r_m, v_m_s=plan.v_m_s, body=plan.body,
                     mass_kg=plan.mass_kg, burns=plan.burns, **opts)


def session_to_opm(v, **kw) -> str:
    """OPM text of a session's remaining queue, from its latest known state.

    ``v`` is a :class:`mechanics.session.reducer.SessionView`; the planned (not yet flown) burns
    become the manoeuvre blocks.
    """
    from .report import CAUTIONS

    sc = v.scenario
    burns = [row.planned for row in v.rows if row.status == "planned"]
    opts = dict(kw)
    if sc.vehicle is not None:
        opts.setdefault("object_name", sc.vehicle.name)
    plan = v.plan
    comments = [f"scenario: {sc.name}; remaining queue from the latest known state ({v.latest.source})"]
    if plan is not None:
        comments += _plan_comments(plan, v.warnings, CAUTIONS)
    elif v.plan_error:
        comments.append(f"no plan: {v.plan_error}")
    opts.setdefault("header_comments", comments)
    opts.setdefault("state_comments", ["latest known osculating state"])
    return write_opm(epoch_s=v.latest.epoch_s, r_m=v.latest.r_m, v_m_s=v.latest.v_m_s, body=sc.body,
                     mass_kg=v.latest.mass_kg, burns=burns, **opts)


def save_text(text: str, path, *, force: bool = False, what: str = "OPM file") -> Path:
    """Write ``text`` to ``path``: refuses an existing file unless ``force``, never follows a link.

    The text goes to a temporary file in the same folder first and is renamed over the target, so
    a reader never sees half a message.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise ValueError(f"{path}: folder {folder} does not exist")
    if path.is_symlink():
        raise ValueError(f"{path}: is a link; refusing to write through it")
    if path.exists() and not force:
        raise ValueError(f"{path}: already exists; refusing to overwrite it (use --force)")
    if path.is_dir():
        raise ValueError(f"{path}: is a folder")
    from .files import write_text_file

    return write_text_file(path, text, what=what, replace=force, encoding="ascii", newline="\n")


__all__ = ["OpmDocument", "OpmKeplerian", "OpmManeuver", "OpmComment", "read_opm", "read_opm_file",
           "looks_like_opm", "write_opm", "plan_to_opm", "session_to_opm", "save_text",
           "INERTIAL_FRAMES", "TIME_SYSTEMS", "CENTERS", "MANEUVER_FRAMES"]
