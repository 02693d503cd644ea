"""The session reducer: events in, campaign view out.

* :func:`apply` folds one event into a :class:`SessionState` (the ordered, validated facts).  It
  is pure and cheap; it refuses an event that does not fit the history (``ValueError``).
* :func:`view` derives everything an operator sees from a state: the latest known orbit and mass,
  the burn queue (done burns with their measured performance, retracted ones, and the remaining
  burns replanned with the calibrated engine from the latest state), drift flags, calibration and
  the propellant ledger.  Nothing it returns is ever stored; results are memoised in memory only.

Calibration: for each recorded burn a thrust factor k (achieved / rated, scaling thrust and mass
flow together, as for a pressure-fed engine) is fitted so that the state known before the burn,
flown through the actual ignition and on-time with k times the rated thrust and the commanded
attitude, reproduces the semi-major axis of the orbit-determination state at its epoch (both
osculating, at the same epoch).  The running factor is the mean of the fitted k, shown with its
sample spread; it scales thrust and mass flow for every remaining burn.

References
----------
Tsiolkovsky rocket equation (Curtis 2014, eq. 11.30) for the delivered delta-v; secant method
(Press et al., *Numerical Recipes*, 3rd ed., 2007, sec. 9.2) for the fit.
"""

from __future__ import annotations

import bisect
import json
import math
import threading
from dataclasses import asdict, dataclass, replace

import numpy as np

from ..constants import G0_M_S2
from ..elements import rv_to_elements
from ..flight import Thrust, fly
from ..kepler import propagate_kepler
from ..planner import Plan, PlannedBurn, plan_campaign
from ..scenario import Scenario, Target
from ..vehicle import Vehicle
from .events import (BurnRecorded, EntryRetracted, GaugeReadingTaken, OrbitState, ScenarioLoaded,
                     StateEntered, TargetSet, VehicleChanged)


# --------------------------------------------------------------------------- state (facts)

@dataclass(frozen=True)
class Entry:
    """One journal entry: its sequence number and event."""

    seq: int
    event: object


@dataclass(frozen=True)
class Facts:
    """What the validation of a new event needs, kept up to date as events are folded in.

    Attributes
    ----------
    scenario : Scenario
        The scenario in force (loaded one plus active target and vehicle changes).
    next_burn : int
        Number of the next burn to record (one past the last active burn record).
    latest_epoch_s : float
        Epoch of the latest known orbit (scenario, state entry or burn record).
    recorded_kg : float
        Propellant use recorded by active burn records (those that give it).
    last_cutoff_s : float or None
        Cutoff of the last active burn record.
    """

    scenario: Scenario
    next_burn: int = 1
    latest_epoch_s: float = -math.inf
    recorded_kg: float = 0.0
    last_cutoff_s: float | None = None


def _advance(facts: Facts | None, event) -> Facts:
    """Facts after one (valid, non-retraction) event."""
    if isinstance(event, ScenarioLoaded):
        sc = Scenario.from_dict(event.scenario)
        return Facts(sc, 1, sc.epoch_s, 0.0, None)
    if isinstance(event, TargetSet):
        return replace(facts, scenario=replace(facts.scenario, target=Target(**event.target)
                                               if event.target else None))
    if isinstance(event, VehicleChanged):
        return replace(facts, scenario=replace(facts.scenario, vehicle=Vehicle.from_dict(event.vehicle)))
    if isinstance(event, StateEntered):
        return replace(facts, latest_epoch_s=event.state.epoch_s)
    if isinstance(event, BurnRecorded):
        return replace(facts, next_burn=event.burn + 1, latest_epoch_s=event.after.epoch_s,
                       recorded_kg=facts.recorded_kg + (event.propellant_kg or 0.0),
                       last_cutoff_s=event.ignition_s + event.duration_s)
    return facts


@dataclass(frozen=True)
class SessionState:
    """The ordered facts of a campaign (every entry, retracted or not) and their summary."""

    entries: tuple = ()
    retracted: frozenset = frozenset()
    facts: Facts | None = None

    def active(self):
        """Entries in force: not retracted, and not retractions themselves."""
        gone = self.retracted
        return [e for e in self.entries if e.seq not in gone and not isinstance(e.event, EntryRetracted)]

    def entry(self, seq: int) -> Entry | None:
        k = bisect.bisect_left(self.entries, seq, key=lambda e: e.seq)
        if k < len(self.entries) and self.entries[k].seq == seq:
            return self.entries[k]
        return None

    @property
    def last_seq(self) -> int:
        return self.entries[-1].seq if self.entries else 0


def _summarize(entries, retracted) -> Facts:
    facts = None
    for e in entries:
        if e.seq not in retracted and not isinstance(e.event, EntryRetracted):
            facts = _advance(facts, e.event)
    return facts


def scenario_of(state: SessionState) -> Scenario:
    """The scenario in force: the loaded one with the active target and vehicle changes."""
    if state.facts is None:
        raise ValueError("session has no scenario")
    return state.facts.scenario


def next_burn_number(state: SessionState) -> int:
    """Number of the next burn to fly: one past the last recorded (active) burn."""
    return state.facts.next_burn if state.facts else 1


def _check_orbit(state_ev: OrbitState, sc: Scenario, what: str) -> None:
    r = np.asarray(state_ev.r_m)
    v = np.asarray(state_ev.v_m_s)
    if np.linalg.norm(r) <= sc.body.radius_m:
        raise ValueError(f"{what}: position is inside the body")
    el = rv_to_elements(r, v, sc.body.mu_m3_s2)
    if el.e >= 1.0:
        raise ValueError(f"{what}: orbit is hyperbolic (e = {el.e:.4f}): no apoapsis")
    if el.periapsis_radius_m <= sc.body.radius_m:
        raise ValueError(f"{what}: periapsis is inside the body "
                         f"({(el.periapsis_radius_m - sc.body.radius_m) / 1e3:.1f} km altitude)")


def _check(facts: Facts | None, retracted, lookup, last_seq: int, seq: int, event) -> None:
    """Refuse an event that does not fit the history (shared by :func:`apply` and :func:`replay`)."""
    if seq <= last_seq:
        raise ValueError(f"entry {seq} is out of order (last is {last_seq})")
    if facts is None:
        if not isinstance(event, ScenarioLoaded):
            raise ValueError("a session starts with its scenario")
        Scenario.from_dict(event.scenario)
        return
    if isinstance(event, ScenarioLoaded):
        raise ValueError("the session already has its scenario; start a new session for another")
    sc = facts.scenario
    if isinstance(event, EntryRetracted):
        target = lookup(event.entry)
        if target is None:
            raise ValueError(f"entry {event.entry} does not exist")
        if isinstance(target, ScenarioLoaded):
            raise ValueError(f"entry {event.entry} is the scenario itself and cannot be retracted")
        if isinstance(target, EntryRetracted):
            raise ValueError(f"entry {event.entry} is a retraction; record the fact again instead")
        if event.entry in retracted:
            raise ValueError(f"entry {event.entry} is already retracted")
    elif isinstance(event, BurnRecorded):
        if event.burn != facts.next_burn:
            raise ValueError(f"burn {event.burn} is not the next burn to record (next is {facts.next_burn})")
        if event.ignition_s < facts.latest_epoch_s:
            raise ValueError("ignition is before the latest known orbit; retract that entry first "
                             "if it was wrong")
        if event.propellant_kg is not None and sc.vehicle is not None:
            on_board = sc.vehicle.propellant_kg - facts.recorded_kg
            if event.propellant_kg > on_board + 1e-9:
                raise ValueError(f"propellant used {event.propellant_kg:.3f} kg exceeds the "
                                 f"{on_board:.3f} kg on board")
        _check_orbit(event.after, sc, "post-burn orbit")
    elif isinstance(event, StateEntered):
        _check_orbit(event.state, sc, "state")
        if facts.last_cutoff_s is not None and event.state.epoch_s < facts.last_cutoff_s:
            raise ValueError(f"state epoch is before burn {facts.next_burn - 1}'s cutoff; it would "
                             "undo a recorded burn")
    elif isinstance(event, TargetSet):
        Target(**event.target)
    elif isinstance(event, VehicleChanged):
        Vehicle.from_dict(event.vehicle)
    elif not isinstance(event, GaugeReadingTaken):
        raise ValueError(f"unknown event {type(event).__name__}")


def apply(state: SessionState, seq: int, event) -> SessionState:
    """Fold one event into the state, refusing one that does not fit the history.

    Parameters
    ----------
    state : SessionState
    seq : int
        The event's journal sequence number (strictly increasing).
    event
        One of the event classes of :mod:`mechanics.session.events`.

    Raises
    ------
    ValueError
        With the reason, for an event that does not fit (nothing is changed).
    """

    def lookup(k):
        found = state.entry(k)
        return None if found is None else found.event

    _check(state.facts, state.retracted, lookup, state.last_seq, seq, event)
    entries = state.entries + (Entry(seq, event),)
    if isinstance(event, EntryRetracted):
        retracted = state.retracted | {event.entry}
        return SessionState(entries, retracted, _summarize(entries, retracted))
    return SessionState(entries, state.retracted, _advance(state.facts, event))


def replay(records, rejected: list | None = None) -> SessionState:
    """State from journal records (objects with ``seq`` and ``event``, or (seq, event) pairs).

    The same checks as :func:`apply`, in one pass (linear in the number of events).  With a
    ``rejected`` list, events that do not fit are appended to it as (seq, reason) and skipped;
    without one, the first misfit raises ``ValueError``.
    """
    entries: list = []
    events: dict = {}
    retracted: set = set()
    facts = None
    last = 0
    for rec in records:
        seq, event = (rec.seq, rec.event) if hasattr(rec, "event") else rec
        try:
            _check(facts, retracted, events.get, last, seq, event)
        except ValueError as exc:
            if rejected is None:
                raise
            rejected.append((seq, str(exc)))
            continue
        entries.append(Entry(seq, event))
        events[seq] = event
        last = seq
        if isinstance(event, EntryRetracted):
            retracted.add(event.entry)
            facts = _summarize(entries, retracted)
        else:
            facts = _advance(facts, event)
    return SessionState(tuple(entries), frozenset(retracted), facts)


# --------------------------------------------------------------------------- derived view

@dataclass(frozen=True)
class Drift:
    """Performance of one recorded burn against its plan."""

    dv_ratio: float
    level: str
    thrust_factor: float
    delivered_dv_m_s: float
    residual_m: float
    flags: tuple = ()
    isp_ratio: float | None = None


@dataclass(frozen=True)
class QueueRow:
    """One row of the queue: a done, retracted or planned burn."""

    index: int
    status: str
    planned: PlannedBurn
    seq: int | None = None
    actual: dict | None = None
    drift: Drift | None = None


@dataclass(frozen=True)
class GaugeRow:
    seq: int
    epoch_s: float
    gauge_kg: float
    book_kg: float
    method: str

    @property
    def difference_kg(self) -> float:
        return self.gauge_kg - self.book_kg


@dataclass(frozen=True)
class Ledger:
    """Propellant accounting (kg unless named)."""

    loaded_kg: float
    used_planned_kg: float
    used_recorded_kg: float
    remaining_kg: float
    usable_kg: float
    unusable_kg: float
    reserve_kg: float
    remaining_plan_kg: float
    after_plan_kg: float
    margin_kg: float
    dv_remaining_m_s: float
    per_burn: tuple = ()
    gauges: tuple = ()


@dataclass(frozen=True)
class Calibration:
    thrust_factor: float
    spread: float | None
    burns_used: int
    factors: tuple = ()


@dataclass(frozen=True)
class KnownState:
    epoch_s: float
    r_m: tuple
    v_m_s: tuple
    mass_kg: float
    source: str
    seq: int


@dataclass(frozen=True)
class SessionView:
    scenario: Scenario
    latest: KnownState
    rows: tuple
    plan: Plan | None
    plan_error: str | None
    calibration: Calibration
    ledger: Ledger
    warnings: tuple = ()
    last_seq: int = 0

    @property
    def next_burn(self) -> QueueRow | None:
        for row in self.rows:
            if row.status == "planned":
                return row
        return None

    @property
    def feasible(self) -> bool:
        return self.plan is not None and self.plan.feasible


def planned_to_dict(b: PlannedBurn) -> dict:
    """JSON-ready dict of a planned burn (stored in a burn record as what was commanded)."""
    d = asdict(b)
    return json.loads(json.dumps(d))


def planned_from_dict(d: dict) -> PlannedBurn:
    kw = dict(d)
    for key in ("direction", "state_before", "state_after", "centre_direction"):
        kw[key] = tuple(kw[key])
    return PlannedBurn(**kw)


_CACHE: dict = {}
_CACHE_MAX = 256
_CACHE_LOCK = threading.Lock()


def clear_cache() -> None:
    """Forget memoised plans and fits (they are recomputed on demand)."""
    with _CACHE_LOCK:
        _CACHE.clear()


def _memo(key, fn):
    """Memoised ``fn()`` under ``key`` (the console's worker and UI threads both derive views)."""
    with _CACHE_LOCK:
        if key in _CACHE:
            return _CACHE[key]
    value = fn()
    with _CACHE_LOCK:
        if len(_CACHE) >= _CACHE_MAX:
            _CACHE.pop(next(iter(_CACHE)))
        _CACHE[key] = value
    return value


def _coast(sc: Scenario, y, dt_s: float):
    if dt_s == 0.0:
        return np.array(y, dtype=float)
    if sc.model == "two-body":
        r, v = propagate_kepler(y[:3], y[3:6], dt_s, sc.body.mu_m3_s2)
        return np.concatenate([r, v, [y[6]]])
    return fly(y, dt_s, sc.body, sc.model)[0]


def fit_thrust_factor(sc: Scenario, pre: KnownState, rec: BurnRecorded) -> tuple[float, float, np.ndarray]:
    """Fitted thrust factor k, position residual (m) and the flown state at the OD epoch.

    Raises
    ------
    ValueError
        When no factor between 0.05 and 3 reproduces the observed orbit.
    """
    veh = sc.vehicle
    planned = rec.planned
    mode = planned["attitude_mode"]
    direction = tuple(planned["direction"])
    y_pre = np.concatenate([pre.r_m, pre.v_m_s, [pre.mass_kg]])
    y_ign = _coast(sc, y_pre, rec.ignition_s - pre.epoch_s)
    obs_r = np.asarray(rec.after.r_m)
    obs_v = np.asarray(rec.after.v_m_s)
    a_obs = rv_to_elements(obs_r, obs_v, sc.body.mu_m3_s2).a_m
    post_coast = rec.after.epoch_s - (rec.ignition_s + rec.duration_s)

    def flown(k):
        thrust = Thrust(veh.thrust_n * k, veh.mdot_kg_s * k, mode, direction)
        y_cut = fly(y_ign, rec.duration_s, sc.body, sc.model, thrust=thrust)[0]
        return _coast(sc, y_cut, post_coast)

    def miss(k):
        y = flown(k)
        return rv_to_elements(y[:3], y[3:6], sc.body.mu_m3_s2).a_m - a_obs

    k0, k1 = 1.0, 0.97
    f0, f1 = miss(k0), miss(k1)
    for _ in range(30):
        if abs(f1) < 1e-3 or f1 == f0:
            break
        k0, k1, f0 = k1, min(max(k1 - f1 * (k1 - k0) / (f1 - f0), 0.05), 3.0), f1
        f1 = miss(k1)
    if abs(f1) > 10.0:
        raise ValueError(f"burn {rec.burn}: no thrust factor reproduces the observed orbit "
                         f"(semi-major axis still off by {f1 / 1e3:.3f} km)")
    y = flown(k1)
    residual = float(np.linalg.norm(y[:3] - obs_r))
    return k1, residual, y


def _drift_of(sc: Scenario, rec: BurnRecorded, k: float, residual: float, m0: float,
              prop_used: float) -> Drift:
    veh = sc.vehicle
    tol = veh.tolerances
    c = veh.thrust_n / veh.mdot_kg_s
    m1 = m0 - veh.mdot_kg_s * k * rec.duration_s
    delivered = c * math.log(m0 / m1)
    planned_dv = rec.planned["dv_m_s"]
    ratio = delivered / planned_dv if planned_dv > 0 else float("nan")
    dev = abs(ratio - 1.0)
    level = "alarm" if dev > tol.dv_alarm else "watch" if dev > tol.dv_watch else "ok"
    flags = []
    if dev > tol.dv_watch:
        flags.append(f"delivered delta-v {100 * (ratio - 1):+.1f} % against the plan")
    d_ign = rec.ignition_s - rec.planned["ignition_s"]
    if abs(d_ign) > tol.ignition_s:
        flags.append(f"ignition {d_ign:+.1f} s from the plan (tolerance {tol.ignition_s:g} s)")
    d_dur = rec.duration_s / rec.planned["duration_s"] - 1.0
    if abs(d_dur) > tol.duration_frac:
        flags.append(f"duration {100 * d_dur:+.1f} % from the plan (tolerance {100 * tol.duration_frac:g} %)")
    isp_ratio = None
    if rec.propellant_kg is not None and rec.propellant_kg > 0.0 and prop_used < m0:
        isp_implied = delivered / (G0_M_S2 * math.log(m0 / (m0 - prop_used)))
        isp_ratio = isp_implied / veh.isp_s
        if abs(isp_ratio - 1.0) > tol.isp_frac:
            flags.append(f"propellant use implies Isp {isp_implied:.1f} s, {100 * (isp_ratio - 1):+.1f} % "
                         "from rated (Isp drift or gauge error)")
    if residual > 5000.0:
        flags.append(f"the fitted burn misses the observed position by {residual / 1e3:.1f} km "
                     "(pointing error or a poor orbit determination)")
    if flags and level == "ok":
        level = "watch"
    return Drift(ratio, level, k, delivered, residual, tuple(flags), isp_ratio)


def view(state: SessionState) -> SessionView:
    """Everything derived from the facts (see module notes).  Pure; memoised in memory."""
    sc = scenario_of(state)
    veh = sc.vehicle
    warnings: list[str] = []
    known = KnownState(sc.epoch_s, tuple(sc.r_m), tuple(sc.v_m_s),
                       veh.wet_mass_kg if veh else float("nan"), "scenario", state.entries[0].seq)
    done_rows: dict[int, QueueRow] = {}
    factors: list[float] = []
    gauges: list[GaugeRow] = []
    readings: list = []
    burned: list = []
    per_burn = []
    used_recorded = used_planned = 0.0
    active_seqs = {e.seq for e in state.active()}
    for e in state.entries:
        ev = e.event
        active = e.seq in active_seqs
        if isinstance(ev, BurnRecorded):
            planned = planned_from_dict(ev.planned)
            if not active:
                done_rows.setdefault(-e.seq, QueueRow(ev.burn, "retracted", planned, e.seq,
                                                      _actual_dict(ev, None, None)))
                continue
            if veh is None:
                raise ValueError("a burn record needs the session's vehicle")
            key = ("fit", json.dumps([sc.to_dict(), asdict(known), ev.planned, ev.ignition_s,
                                      ev.duration_s, ev.after.to_dict()], sort_keys=True))
            try:
                k, residual, _ = _memo(key, lambda: fit_thrust_factor(sc, known, ev))
            except ValueError as exc:
                warnings.append(str(exc))
                k, residual = float("nan"), float("nan")
            m0 = known.mass_kg
            booked = ev.propellant_kg if ev.propellant_kg is not None else (
                veh.mdot_kg_s * (k if math.isfinite(k) else 1.0) * ev.duration_s)
            drift = _drift_of(sc, ev, k, residual, m0, booked) if math.isfinite(k) else None
            if math.isfinite(k):
                factors.append(k)
            done_rows[ev.burn] = QueueRow(ev.burn, "done", planned, e.seq,
                                          _actual_dict(ev, booked, drift), drift)
            used_recorded += booked
            used_planned += planned.propellant_kg
            burned.append((ev.ignition_s + ev.duration_s, booked))
            per_burn.append((ev.burn, planned.propellant_kg, booked,
                             ev.propellant_source if ev.propellant_kg is not None else "estimated"))
            known = KnownState(ev.after.epoch_s, ev.after.r_m, ev.after.v_m_s, m0 - booked,
                               f"burn {ev.burn} orbit determination", e.seq)
        elif isinstance(ev, StateEntered) and active:
            known = KnownState(ev.state.epoch_s, ev.state.r_m, ev.state.v_m_s, known.mass_kg,
                               "state entered", e.seq)
        elif isinstance(ev, GaugeReadingTaken) and active and veh is not None:
            readings.append((e.seq, ev))
    # a gauge reading is compared with the book as it stood at the reading's own epoch: every
    # recorded burn that had ended by then, whenever it was entered
    for seq, ev in readings:
        book = veh.propellant_kg - sum(kg for cutoff, kg in burned if cutoff <= ev.epoch_s)
        gauges.append(GaugeRow(seq, ev.epoch_s, ev.propellant_kg, book, ev.method))
    if factors:
        k_mean = float(np.mean(factors))
        spread = float(np.std(factors, ddof=1)) if len(factors) > 1 else None
    else:
        k_mean, spread = 1.0, None
    calibration = Calibration(k_mean, spread, len(factors), tuple(factors))

    plan, plan_error = None, None
    next_no = next_burn_number(state)
    if veh is not None and sc.target is not None:
        current = sc.with_state(known.epoch_s, known.r_m, known.v_m_s)
        key = ("plan", json.dumps([current.to_dict(), known.mass_kg, k_mean, next_no], sort_keys=True))
        try:
            plan = _memo(key, lambda: plan_campaign(current, thrust_factor=k_mean, mass_kg=known.mass_kg,
                                                    first_index=next_no))
        except ValueError as exc:
            plan_error = str(exc)
    rows = sorted(done_rows.values(), key=lambda r: (r.index, r.status != "retracted", r.seq or 0))
    if plan is not None:
        rows += [QueueRow(b.index, "planned", b) for b in plan.burns]
        warnings.extend(plan.warnings)
    remaining = (known.mass_kg - veh.dry_mass_kg) if veh else float("nan")
    if veh is not None:
        plan_used = plan.total_propellant_kg if plan else 0.0
        after = remaining - plan_used
        margin = after - veh.unusable_kg - veh.reserve_kg
        m_final = known.mass_kg - plan_used
        c = veh.isp_s * G0_M_S2
        dv_rem = c * math.log(m_final / (m_final - margin)) if 0.0 < margin < m_final else 0.0
        ledger = Ledger(veh.propellant_kg, used_planned, used_recorded, remaining,
                        veh.propellant_kg - veh.unusable_kg, veh.unusable_kg, veh.reserve_kg, plan_used,
                        after, margin, dv_rem, tuple(per_burn), tuple(gauges))
    else:
        nan = float("nan")
        ledger = Ledger(nan, 0.0, 0.0, nan, nan, nan, nan, 0.0, nan, nan, 0.0)
    for row in rows:
        if row.drift and row.drift.level != "ok":
            warnings.append(f"burn {row.index}: drift {row.drift.level} ({'; '.join(row.drift.flags)})")
    return SessionView(sc, known, tuple(rows), plan, plan_error, calibration, ledger,
                       tuple(dict.fromkeys(warnings)), state.last_seq)


def _actual_dict(ev: BurnRecorded, booked, drift) -> dict:
    return {
        "ignition_s": ev.ignition_s,
        "duration_s": ev.duration_s,
        "propellant_kg": booked if booked is not None else ev.propellant_kg,
        "propellant_source": ev.propellant_source,
        "dv_m_s": drift.delivered_dv_m_s if drift else None,
        "after": ev.after.to_dict(),
    }
