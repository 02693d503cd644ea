"""Campaign events: frozen facts with past-tense names, JSON-ready.

An event records something that happened (a scenario was loaded, a state was entered, a burn
was flown and measured, a gauge was read, an entry was retracted).  Nothing derived (queue,
ledger, drift, calibration) is ever an event.  A burn record does carry the burn *as it was
commanded* (``planned``): that is a fact of history, and keeping it makes old drift figures
independent of later changes to the planner.

Each event class has a ``KIND`` string (the journal's ``kind`` column) and converts to and from a
plain dict (the journal's JSON payload).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

SCHEMA_VERSION = 1


def _finite(name: str, value, *, positive=False, nonneg=False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name}: expected a number") from None
    if not math.isfinite(x):
        raise ValueError(f"{name}: must be finite")
    if positive and x <= 0.0:
        raise ValueError(f"{name}: must be positive")
    if nonneg and x < 0.0:
        raise ValueError(f"{name}: must not be negative")
    return x


def _vec3(name: str, value) -> tuple:
    if not isinstance(value, (list, tuple)) or len(value) != 3:
        raise ValueError(f"{name}: expected three numbers")
    return tuple(_finite(f"{name}[{k}]", c) for k, c in enumerate(value))


@dataclass(frozen=True)
class OrbitState:
    """An osculating state at an epoch (UTC seconds since 1970), inertial frame, SI."""

    epoch_s: float
    r_m: tuple
    v_m_s: tuple

    def __post_init__(self) -> None:
        object.__setattr__(self, "epoch_s", _finite("epoch", self.epoch_s))
        object.__setattr__(self, "r_m", _vec3("r", self.r_m))
        object.__setattr__(self, "v_m_s", _vec3("v", self.v_m_s))

    def to_dict(self) -> dict:
        return {"epoch_s": self.epoch_s, "r_m": list(self.r_m), "v_m_s": list(self.v_m_s)}

    @staticmethod
    def from_dict(d: dict) -> "OrbitState":
        return OrbitState(d["epoch_s"], tuple(d["r_m"]), tuple(d["v_m_s"]))


@dataclass(frozen=True)
class ScenarioLoaded:
    """The campaign started from a scenario (``Scenario.to_dict()``)."""

    KIND = "scenario_loaded"
    scenario: dict
    source: str = ""


@dataclass(frozen=True)
class StateEntered:
    """Orbit determination delivered a new state (not tied to a burn)."""

    KIND = "state_entered"
    state: OrbitState
    form: str = "vector"
    note: str = ""


@dataclass(frozen=True)
class TargetSet:
    """The target changed (``Target`` as a dict)."""

    KIND = "target_set"
    target: dict


@dataclass(frozen=True)
class VehicleChanged:
    """The vehicle profile changed (``Vehicle.to_dict()``); propellant on board is kept."""

    KIND = "vehicle_changed"
    vehicle: dict


@dataclass(frozen=True)
class BurnRecorded:
    """A burn was flown; this is what was commanded and what was measured.

    Attributes
    ----------
    burn : int
        Queue number of the burn.
    planned : dict
        The burn as commanded (see :func:`mechanics.session.reducer.planned_to_dict`).
    ignition_s, duration_s : float
        Actual ignition (UTC seconds) and on-time (s).
    propellant_kg : float or None
        Propellant used, from a gauge or book-keeping; ``None`` to let the tool book-keep it.
    propellant_source : str
        ``"gauge"``, ``"book-keeping"`` or ``"estimated"`` (when ``propellant_kg`` is None).
    after : OrbitState
        Post-burn orbit from orbit determination (its epoch at or after cutoff).
    """

    KIND = "burn_recorded"
    burn: int
    planned: dict
    ignition_s: float
    duration_s: float
    propellant_kg: float | None
    propellant_source: str
    after: OrbitState
    note: str = ""

    def __post_init__(self) -> None:
        if isinstance(self.burn, bool) or not isinstance(self.burn, int) or self.burn < 1:
            raise ValueError("burn: expected a burn number >= 1")
        object.__setattr__(self, "ignition_s", _finite("ignition", self.ignition_s))
        object.__setattr__(self, "duration_s", _finite("duration", self.duration_s, positive=True))
        if self.propellant_kg is not None:
            object.__setattr__(self, "propellant_kg", _finite("propellant", self.propellant_kg, nonneg=True))
        if self.propellant_source not in ("gauge", "book-keeping", "estimated"):
            raise ValueError("propellant source must be gauge, book-keeping or estimated")
        if self.after.epoch_s < self.ignition_s + self.duration_s - 1e-6:
            if self.after.epoch_s < self.ignition_s:
                raise ValueError("post-burn orbit epoch is before the ignition")
            raise ValueError("post-burn orbit epoch falls inside the burn: use an orbit after cutoff")


@dataclass(frozen=True)
class GaugeReadingTaken:
    """A propellant gauge reading (e.g. pressure-volume-temperature) at an epoch."""

    KIND = "gauge_reading_taken"
    epoch_s: float
    propellant_kg: float
    method: str = "gauge"

    def __post_init__(self) -> None:
        object.__setattr__(self, "epoch_s", _finite("epoch", self.epoch_s))
        object.__setattr__(self, "propellant_kg", _finite("propellant", self.propellant_kg, nonneg=True))


@dataclass(frozen=True)
class EntryRetracted:
    """An earlier entry (journal sequence number) is withdrawn; history itself stays."""

    KIND = "entry_retracted"
    entry: int
    reason: str = ""

    def __post_init__(self) -> None:
        if isinstance(self.entry, bool) or not isinstance(self.entry, int) or self.entry < 1:
            raise ValueError("entry: expected a journal entry number >= 1")


EVENT_TYPES = {cls.KIND: cls for cls in (ScenarioLoaded, StateEntered, TargetSet, VehicleChanged,
                                         BurnRecorded, GaugeReadingTaken, EntryRetracted)}


def to_payload(event) -> tuple[str, dict]:
    """(kind, JSON-ready payload) of an event."""
    payload = {}
    for f in fields(event):
        value = getattr(event, f.name)
        payload[f.name] = value.to_dict() if isinstance(value, OrbitState) else value
    return event.KIND, _plain(payload)


def _plain(x):
    if isinstance(x, dict):
        return {k: _plain(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_plain(v) for v in x]
    return x


def from_payload(kind: str, payload: dict):
    """The event of a journal row.

    Raises
    ------
    ValueError
        For an unknown kind or a payload that does not fit it.
    """
    cls = EVENT_TYPES.get(kind)
    if cls is None:
        raise ValueError(f"unknown event kind {kind!r} (written by a newer burndesk?)")
    try:
        kw = dict(payload)
        for f in fields(cls):
            if f.name in ("state", "after") and isinstance(kw.get(f.name), dict):
                kw[f.name] = OrbitState.from_dict(kw[f.name])
        return cls(**kw)
    except (TypeError, KeyError) as exc:
        raise ValueError(f"event {kind!r} has a malformed payload ({exc})") from None

