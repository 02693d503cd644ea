"""Fleet planning: a first-cut burn queue for many spacecraft at once, numpy-vectorised.

This is the single-spacecraft design of :mod:`mechanics.planner` with its finite-burn flight
replaced by closed forms, so that 10^4 spacecraft plan in well under a second:

* **Two-body timing.**  Every orbit is an unperturbed conic; apsis passage times come from
  Kepler's equation (time of periapsis passage from the mean anomaly at the epoch), and
  successive passes of an apsis are one period of the orbit in force at that time apart.
  Under a body with J2 this is not the mean-element timing of ``burndesk plan``.
* **Impulsive design, finite durations.**  The legs are those of
  :func:`mechanics.planner.design_legs` (same targets, same cheaper-order rule for two-apsis
  targets, same ``SKIP_LEG_M``; a start orbit with e < ``CIRCULAR_START_E`` burns first at the
  earliest moment after the lead time).  A leg is split, by the single planner's rule, into
  the smallest N for which the leg's impulsive duration shared over N burns, and the arc that
  sweeps at the start orbit's rate, stay within ``SPLIT_MARGIN`` of the vehicle's duration
  and arc limits (``FleetPlan.within_limits`` flags burns that still break a limit); burn k
  of N aims at the opposite-apsis radius reached by k/N of the leg's impulsive delta-v.  Each burn is an impulsive tangential apsis burn; its duration and propellant come
  from the rocket equation at the mass it starts with, and its ignition from the half-delta-v
  centring rule t_ign = t_apsis - m0/mdot (1 - exp(-dv / (2 c))).
* **Propellant.**  Burns draw on the propellant on board; a burn is feasible when the
  propellant used up to and including it stays within the usable amount (on board minus
  unusable); the margin is what remains above the unusable residual and the reserve.

What it leaves out, and ``burndesk plan`` (one spacecraft, integrated) does: the finite-burn
loss (a fixed-attitude burn of arc theta delivers less than its delta-v along the orbit, by a
fraction of order theta^2 / 24, so durations here are short by that much), the line-of-apsides
and period changes a finite burn causes, J2 and mean elements, trimming of the final orbit.
Under a two-body model the legs, apsides and split counts are those of the integrated plan;
durations agree to the finite loss, ignition times to about the duration difference plus a
second or two (the tests state the tolerances and why).  Use it to size and schedule a fleet;
fly each spacecraft's own plan.

Inputs and outputs are flat arrays (SI units; times in UTC seconds since 1970): one row per
spacecraft in :class:`FleetInput`, one row per burn (with its spacecraft index) in
:class:`FleetPlan`, ordered by spacecraft and then by time.

References
----------
Vallado, D. A., *Fundamentals of Astrodynamics and Applications*, 4th ed., 2013, sec. 2.2-2.3
(Kepler's equation, time of flight), sec. 6.3 (Hohmann and bi-elliptic transfers, tangential
apsis burns), sec. 6.8 (finite burns and their loss).
Curtis, H. D., *Orbital Mechanics for Engineering Students*, 3rd ed., 2014, eq. 6.1 (rocket
equation for an impulsive manoeuvre).
Sutton, G. P., Biblarz, O., *Rocket Propulsion Elements*, 9th ed., 2017, eq. 2-5 (mass flow).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .constants import PARABOLIC_BAND
from .elements import rv_to_elements
from .impulsive import vis_viva_speed
from .kepler import TWO_PI, eccentric_to_true, solve_kepler, true_to_mean
from .planner import CIRCULAR_START_E, MAX_SPLIT, SKIP_LEG_M, SPLIT_MARGIN
from .scenario import TARGET_KINDS

#: Target kind codes: the index in :data:`mechanics.scenario.TARGET_KINDS`
#: (circular 0, apsides 1, apoapsis 2, periapsis 3, bielliptic 4).
TARGET_CODE = {kind: k for k, kind in enumerate(TARGET_KINDS)}
CIRCULAR, APSIDES, APOAPSIS_KIND, PERIAPSIS_KIND, BIELLIPTIC = (TARGET_CODE[k] for k in TARGET_KINDS)

#: Apsis codes of a burn (and of a leg's burn point): periapsis 0, apoapsis 1; ``ANY`` (2) is
#: a leg that starts on a circular orbit and burns at the earliest moment.
PERIAPSIS, APOAPSIS, ANY = 0, 1, 2
APSIS_NAMES = ("periapsis", "apoapsis")

#: Most legs a design has (a bi-elliptic transfer).
MAX_LEGS = 3


class FleetInputError(ValueError):
    """A spacecraft's inputs cannot be planned.

    Attributes
    ----------
    index : int
        Row of the offending spacecraft in the :class:`FleetInput` arrays.
    field : str
        What is wrong: ``"state"``, ``"target"``, ``"vehicle"``, ``"mass"``, ``"epoch"`` or
        ``"lead_time"``.
    reason : str
        The physical reason, without the row.
    """

    def __init__(self, index: int, field: str, reason: str):
        super().__init__(f"spacecraft {index}: {field}: {reason}")
        self.index = int(index)
        self.field = field
        self.reason = reason


@dataclass(frozen=True)
class FleetInput:
    """N spacecraft to plan (every attribute an array of shape (N,) unless noted).

    Attributes
    ----------
    epoch_s : UTC seconds since 1970 of each state.
    r_m, v_m_s : (N, 3) osculating position (m) and velocity (m/s), the body's inertial frame.
    mu_m3_s2, body_radius_m : the central body of each spacecraft.
    target_code : int codes of :data:`TARGET_CODE`.
    target_periapsis_radius_m, target_apoapsis_radius_m, target_via_radius_m : m, NaN where the
        kind does not use them (as :class:`mechanics.scenario.Target`: circular and bi-elliptic
        give the target radius in both apsis fields, apoapsis / periapsis only the moved one).
    thrust_n, mdot_kg_s : effective thrust along the burn axis (N) and total mass flow (kg/s).
    mass_kg : mass at the epoch, kg.
    dry_mass_kg, unusable_kg, reserve_kg : kg; the propellant on board is mass - dry.
    max_burn_duration_s, max_burn_arc_rad : vehicle limits (``inf`` for none).
    lead_time_s : earliest ignition after the epoch, s.
    """

    epoch_s: np.ndarray
    r_m: np.ndarray
    v_m_s: np.ndarray
    mu_m3_s2: np.ndarray
    body_radius_m: np.ndarray
    target_code: np.ndarray
    target_periapsis_radius_m: np.ndarray
    target_apoapsis_radius_m: np.ndarray
    target_via_radius_m: np.ndarray
    thrust_n: np.ndarray
    mdot_kg_s: np.ndarray
    mass_kg: np.ndarray
    dry_mass_kg: np.ndarray
    unusable_kg: np.ndarray
    reserve_kg: np.ndarray
    max_burn_duration_s: np.ndarray
    max_burn_arc_rad: np.ndarray
    lead_time_s: np.ndarray

    @property
    def count(self) -> int:
        return int(np.shape(self.epoch_s)[0])


@dataclass(frozen=True)
class FleetPlan:
    """The fleet's burns (shape (M,), ordered by spacecraft, then time) and per-spacecraft
    totals (shape (N,)).

    Attributes
    ----------
    craft : int, spacecraft index of each burn.
    number : int, 1-based position of the burn in its spacecraft's queue.
    leg : int, 0-based leg of the design.
    apsis : int, :data:`PERIAPSIS` or :data:`APOAPSIS` of the orbit the burn is made on (a
        first burn at the earliest moment on a circular orbit is named after the apsis its
        burn point becomes: periapsis when raising).
    earliest : bool, the burn goes at the earliest moment (circular start), not at an apsis.
    sense : +1 prograde, -1 retrograde.
    apsis_time_s : time of the impulse (the apsis passage the burn is centred on).
    ignition_s, cutoff_s, duration_s : finite burn at constant thrust, half-delta-v centred.
    dv_m_s : impulsive delta-v of the burn, m/s.
    propellant_kg, mass_before_kg : rocket equation at the mass the burn starts with.
    goal_radius_m : radius of the opposite apsis after the burn, m.
    burn_radius_m : radius of the burn point, m.
    arc_rad : orbit arc swept during the burn (duration times the angular rate at the burn
        point, averaged over the orbits before and after the impulse), rad.
    feasible : the propellant used up to and including this burn is within the usable amount.
    within_limits : duration and arc within the vehicle's limits.  The split count is chosen,
        as by the single planner, from the leg's impulsive duration shared equally and the
        angular rate of the leg's start orbit; the first burns of a split leg are the longest
        (same delta-v, more mass) and the rate at a raised periapsis grows, so a leg with a
        large mass fraction or a large raise can break a limit (the single planner warns then).

    burn_count, first_burn : how many burns each spacecraft has and the row of its first.
    total_dv_m_s, total_duration_s, propellant_used_kg : sums over the spacecraft's burns.
    propellant_after_kg : on board after the plan, kg.
    usable_kg : on board minus unusable at the epoch, kg.
    margin_kg : propellant after the plan above unusable + reserve (negative: the plan eats
        into the reserve or beyond), kg.
    craft_feasible : every burn feasible.
    circular_start : the start orbit counted as circular (e < CIRCULAR_START_E).
    final_periapsis_radius_m, final_apoapsis_radius_m : orbit after the plan, m.
    lowest_periapsis_radius_m : lowest periapsis of the start, intermediate and final orbits, m.
    """

    craft: np.ndarray
    number: np.ndarray
    leg: np.ndarray
    apsis: np.ndarray
    earliest: np.ndarray
    sense: np.ndarray
    apsis_time_s: np.ndarray
    ignition_s: np.ndarray
    cutoff_s: np.ndarray
    duration_s: np.ndarray
    dv_m_s: np.ndarray
    propellant_kg: np.ndarray
    mass_before_kg: np.ndarray
    goal_radius_m: np.ndarray
    burn_radius_m: np.ndarray
    arc_rad: np.ndarray
    feasible: np.ndarray
    within_limits: np.ndarray
    burn_count: np.ndarray
    first_burn: np.ndarray
    total_dv_m_s: np.ndarray
    total_duration_s: np.ndarray
    propellant_used_kg: np.ndarray
    propellant_after_kg: np.ndarray
    usable_kg: np.ndarray
    margin_kg: np.ndarray
    craft_feasible: np.ndarray
    circular_start: np.ndarray
    final_periapsis_radius_m: np.ndarray
    final_apoapsis_radius_m: np.ndarray
    lowest_periapsis_radius_m: np.ndarray

    @property
    def burn_total(self) -> int:
        return int(self.craft.shape[0])


# --------------------------------------------------------------------------- small kernels

def _burn_dv(r_burn, r_other_before, r_other_after, mu):
    """Signed tangential delta-v (m/s) at an apsis moving the opposite apsis (arrays).

    The vectorised form of :func:`mechanics.impulsive.apsis_burn_dv` (Vallado 2013,
    eqs. 6-2 to 6-6): vis-viva speed at the burn radius on the orbit after minus before.
    """
    v0 = vis_viva_speed(r_burn, 0.5 * (r_burn + r_other_before), mu)
    v1 = vis_viva_speed(r_burn, 0.5 * (r_burn + r_other_after), mu)
    return np.asarray(v1 - v0, dtype=float)


def _opposite_after(r_burn, r_other, dv_signed, mu):
    """Opposite apsis radius (m) after a tangential burn at an apsis (vectorised
    :func:`mechanics.impulsive.opposite_apsis_after`; only used for intermediate goals of a
    split leg, which lie between two closed orbits, so the orbit stays closed)."""
    v1 = np.asarray(vis_viva_speed(r_burn, 0.5 * (r_burn + r_other), mu)) + dv_signed
    energy = 0.5 * v1 * v1 - mu / r_burn
    return -mu / energy - r_burn


def _leg_radii(burn_at, rp, ra):
    """(burn radius, opposite radius) of a leg on an orbit (rp, ra): apoapsis legs burn at ra,
    periapsis and earliest-moment legs at rp (as the single planner)."""
    at_apo = burn_at == APOAPSIS
    return np.where(at_apo, ra, rp), np.where(at_apo, rp, ra)


def _first_bad(mask) -> int | None:
    mask = np.asarray(mask, dtype=bool)
    if mask.any():
        return int(np.argmax(mask))
    return None


def _refuse(mask, field: str, reason) -> None:
    """Raise :class:`FleetInputError` for the first spacecraft where ``mask`` holds."""
    i = _first_bad(mask)
    if i is not None:
        raise FleetInputError(i, field, reason(i) if callable(reason) else reason)


# --------------------------------------------------------------------------- leg design

def design_fleet_legs(rp_m, ra_m, circular, target_code, tp_m, ta_m, via_m, mu_m3_s2):
    """Impulsive legs for every spacecraft: the vectorised :func:`mechanics.planner.design_legs`.

    Parameters
    ----------
    rp_m, ra_m : ndarray, shape (N,)
        Apsis radii of the start orbits, m.
    circular : ndarray of bool, shape (N,)
        Start orbit counts as circular (its first leg burns at the earliest moment).
    target_code : ndarray of int, shape (N,)
    tp_m, ta_m, via_m : ndarray, shape (N,)
        Target periapsis, apoapsis and bi-elliptic intermediate radii, m (NaN where unused).
    mu_m3_s2 : float or ndarray, shape (N,)

    Returns
    -------
    burn_at, goal_m, sense : ndarray, shape (N, MAX_LEGS)
        Apsis code of each leg's burn point (:data:`PERIAPSIS`, :data:`APOAPSIS`, :data:`ANY`),
        radius the opposite apsis is moved to (m), +1 / -1; kept legs first.
    count : ndarray of int, shape (N,)
        Legs kept (legs moving an apsis by less than ``SKIP_LEG_M`` are dropped).

    Raises
    ------
    FleetInputError
        For a target one burn of its kind cannot reach (field ``"target"``).

    References
    ----------
    Vallado (2013), sec. 6.3 (Hohmann-type and bi-elliptic sequences of tangential burns).
    """
    n = rp_m.shape[0]
    mu = np.broadcast_to(np.asarray(mu_m3_s2, dtype=float), (n,))
    code = np.asarray(target_code)
    burn_at = np.full((n, MAX_LEGS), PERIAPSIS, dtype=np.int8)
    goal = np.full((n, MAX_LEGS), np.nan)
    sense = np.ones((n, MAX_LEGS), dtype=np.int8)
    designed = np.zeros(n, dtype=np.int8)
    first_at = np.where(circular, ANY, PERIAPSIS)

    # one apsis moved: apoapsis target burns at periapsis, periapsis target at apoapsis
    m = code == APOAPSIS_KIND
    _refuse(m & ~circular & (ta_m < rp_m), "target",
            "target apoapsis is below the current periapsis: one burn cannot do it (use kind apsides)")
    burn_at[m, 0] = first_at[m]
    goal[m, 0] = ta_m[m]
    sense[m, 0] = np.where(ta_m[m] > np.where(circular[m], rp_m[m], ra_m[m]), 1, -1)
    designed[m] = 1

    m = code == PERIAPSIS_KIND
    _refuse(m & circular & (tp_m > ra_m), "target",
            "target periapsis is above the current circular orbit: that raises the apoapsis "
            "(use kind apoapsis or apsides)")
    _refuse(m & ~circular & (tp_m > ra_m), "target",
            "target periapsis is above the current apoapsis: one burn cannot do it (use kind apsides)")
    burn_at[m, 0] = np.where(circular[m], ANY, APOAPSIS)
    goal[m, 0] = tp_m[m]
    sense[m, 0] = np.where(tp_m[m] > rp_m[m], 1, -1)
    designed[m] = 1

    # two apsides: the cheapest of the four (two on a circular start) orders; as in the single
    # planner, a later order replaces an earlier one only when cheaper by more than 1e-9 m/s
    m = (code == CIRCULAR) | (code == APSIDES)
    if m.any():
        idx = np.nonzero(m)[0]
        rp, ra, circ, mu_m = rp_m[idx], ra_m[idx], circular[idx], mu[idx]
        rpt, rat = tp_m[idx], ta_m[idx]
        best = np.full(idx.shape, np.inf)
        legs = np.zeros((idx.size, 2, 3))  # (leg, [burn_at, goal, sense])
        for start in (PERIAPSIS, APOAPSIS):
            if start == APOAPSIS:
                ok = ~circ
            else:
                ok = np.ones(idx.size, dtype=bool)
            rb1 = rp if start == PERIAPSIS else ra
            ro1 = ra if start == PERIAPSIS else rp
            start_code = np.where(circ, ANY, start)
            for x1, x2 in ((rat, rpt), (rpt, rat)):
                dv1 = _burn_dv(rb1, ro1, x1, mu_m)
                dv2 = _burn_dv(x1, rb1, x2, mu_m)
                total = np.abs(dv1) + np.abs(dv2)
                better = ok & (total < best - 1e-9)
                best = np.where(better, total, best)
                second_at = np.where(x1 > rb1, APOAPSIS, PERIAPSIS)
                cand = np.stack([np.stack([start_code, x1, np.where(dv1 >= 0, 1, -1)], axis=-1),
                                 np.stack([second_at, x2, np.where(dv2 >= 0, 1, -1)], axis=-1)], axis=1)
                legs = np.where(better[:, None, None], cand, legs)
        burn_at[idx, :2] = legs[:, :, 0].astype(np.int8)
        goal[idx, :2] = legs[:, :, 1]
        sense[idx, :2] = legs[:, :, 2].astype(np.int8)
        designed[idx] = 2

    m = code == BIELLIPTIC
    _refuse(m & (via_m < np.maximum(ra_m, tp_m)), "target",
            "target via altitude must lie above both the current apoapsis and the target")
    burn_at[m, 0] = first_at[m]
    goal[m, 0] = via_m[m]
    sense[m, 0] = 1
    burn_at[m, 1] = APOAPSIS
    goal[m, 1] = tp_m[m]
    sense[m, 1] = np.where(tp_m[m] > rp_m[m], 1, -1)
    burn_at[m, 2] = PERIAPSIS
    goal[m, 2] = tp_m[m]
    sense[m, 2] = -1
    designed[m] = 3
    _refuse(designed == 0, "target", "target kind code is not known")

    # drop legs that move an apsis by less than SKIP_LEG_M, keeping the order of the rest
    keep = np.zeros((n, MAX_LEGS), dtype=bool)
    cur_p, cur_a = rp_m.copy(), ra_m.copy()
    for g in range(MAX_LEGS):
        live = g < designed
        b, o = _leg_radii(burn_at[:, g], cur_p, cur_a)
        gl = np.where(live, goal[:, g], o)
        keep[:, g] = live & (np.abs(gl - o) >= SKIP_LEG_M)
        cur_p = np.where(live, np.minimum(b, gl), cur_p)
        cur_a = np.where(live, np.maximum(b, gl), cur_a)
    order = np.argsort(~keep, axis=1, kind="stable")
    rows = np.arange(n)[:, None]
    return (burn_at[rows, order], goal[rows, order], sense[rows, order],
            keep.sum(axis=1).astype(np.int64))


# --------------------------------------------------------------------------- the plan

def _check_inputs(f: FleetInput) -> None:
    n = f.count
    for name in ("epoch_s", "mu_m3_s2", "body_radius_m", "target_code", "thrust_n", "mdot_kg_s",
                 "mass_kg", "dry_mass_kg", "unusable_kg", "reserve_kg", "max_burn_duration_s",
                 "max_burn_arc_rad", "lead_time_s", "target_periapsis_radius_m",
                 "target_apoapsis_radius_m", "target_via_radius_m"):
        if np.shape(getattr(f, name)) != (n,):
            raise ValueError(f"fleet input {name} must have shape ({n},), got {np.shape(getattr(f, name))}")
    for name in ("r_m", "v_m_s"):
        if np.shape(getattr(f, name)) != (n, 3):
            raise ValueError(f"fleet input {name} must have shape ({n}, 3), got {np.shape(getattr(f, name))}")
    _refuse(~np.isfinite(f.epoch_s), "epoch", "epoch is not finite")
    _refuse(~(np.all(np.isfinite(f.r_m), axis=1) & np.all(np.isfinite(f.v_m_s), axis=1)), "state",
            "state holds a non-finite number")
    _refuse(~(np.isfinite(f.mu_m3_s2) & (f.mu_m3_s2 > 0.0) & np.isfinite(f.body_radius_m)
              & (f.body_radius_m > 0.0)), "state", "body constants must be positive and finite")
    _refuse(~(np.isfinite(f.thrust_n) & (f.thrust_n > 0.0)), "vehicle",
            "vehicle has no thrust along the burn axis")
    _refuse(~(np.isfinite(f.mdot_kg_s) & (f.mdot_kg_s > 0.0)), "vehicle", "mass flow must be positive")
    _refuse(~(np.isfinite(f.dry_mass_kg) & (f.dry_mass_kg > 0.0)), "vehicle", "dry mass must be positive")
    for name in ("unusable_kg", "reserve_kg"):
        x = getattr(f, name)
        _refuse(~(np.isfinite(x) & (x >= 0.0)), "vehicle", f"{name.removesuffix('_kg')} propellant must "
                "not be negative")
    _refuse(~(np.isfinite(f.mass_kg) & (f.mass_kg >= f.dry_mass_kg * (1.0 - 1e-12))), "mass",
            "vehicle mass must be at least its dry mass")
    _refuse(~((f.max_burn_duration_s > 0.0) & (f.max_burn_arc_rad > 0.0)), "vehicle",
            "burn limits must be positive")
    _refuse(~(np.isfinite(f.lead_time_s) & (f.lead_time_s >= 0.0)), "lead_time",
            "lead time must be a non-negative duration")


def plan_fleet(f: FleetInput) -> FleetPlan:
    """Plan every spacecraft of ``f`` at once (see the module notes for the model).

    Parameters
    ----------
    f : FleetInput
        N spacecraft.

    Returns
    -------
    FleetPlan
        One row per burn plus per-spacecraft totals.

    Raises
    ------
    FleetInputError
        For the first spacecraft whose inputs cannot be planned (an open orbit, a periapsis or a
        target inside the body, a target its kind cannot reach, no thrust, a mass below dry;
        as the single planner: a leg needing more than ``MAX_SPLIT`` burns, or a burn lasting
        longer than one orbit).

    References
    ----------
    Vallado (2013), sec. 2.2-2.3 and 6.3; Curtis (2014) eq. 6.1 (see the module notes).
    """
    _check_inputs(f)
    n = f.count
    mu = np.asarray(f.mu_m3_s2, dtype=float)
    R = np.asarray(f.body_radius_m, dtype=float)
    r = np.asarray(f.r_m, dtype=float)
    v = np.asarray(f.v_m_s, dtype=float)
    sq = np.sqrt(mu)
    # Elements with mu folded into the velocity (v / sqrt(mu) with mu = 1 gives the same a, e
    # and angles), so that every spacecraft may have its own body.
    rmag = np.sqrt(np.sum(r * r, axis=1))
    _refuse(rmag <= R, "state", lambda i: f"position is inside the body "
            f"({(rmag[i] - R[i]) / 1e3:.1f} km altitude)")
    vs = v / sq[:, None]
    h = np.cross(r, vs)
    hmag = np.sqrt(np.sum(h * h, axis=1))
    _refuse(hmag <= 1e-12 * rmag * np.maximum(np.sqrt(np.sum(vs * vs, axis=1)), 1e-300), "state",
            "velocity is along the radius: rectilinear motion has no orbit plane")
    v2 = np.sum(vs * vs, axis=1)
    e_vec = (v2 - 1.0 / rmag)[:, None] * r - np.sum(r * vs, axis=1)[:, None] * vs
    _refuse(~(np.sqrt(np.sum(e_vec * e_vec, axis=1)) < 1.0 - PARABOLIC_BAND), "state",
            "orbit is hyperbolic or parabolic (e >= 1): no apoapsis; the planner needs a closed orbit")
    el = rv_to_elements(r, vs, 1.0)
    a = np.asarray(el.a_m, dtype=float)
    e = np.asarray(el.e, dtype=float)
    rp0, ra0 = a * (1.0 - e), a * (1.0 + e)
    _refuse(rp0 <= R, "state", "orbit intersects the body: periapsis is below the surface")
    code = np.asarray(f.target_code)
    tp = np.asarray(f.target_periapsis_radius_m, dtype=float)
    ta = np.asarray(f.target_apoapsis_radius_m, dtype=float)
    tv = np.asarray(f.target_via_radius_m, dtype=float)
    needs_p = np.isin(code, (CIRCULAR, APSIDES, PERIAPSIS_KIND, BIELLIPTIC))
    needs_a = np.isin(code, (CIRCULAR, APSIDES, APOAPSIS_KIND, BIELLIPTIC))
    needs_v = code == BIELLIPTIC
    for need, x, name in ((needs_p, tp, "periapsis"), (needs_a, ta, "apoapsis"), (needs_v, tv, "via")):
        _refuse(need & ~(np.isfinite(x) & (x > 0.0)), "target", f"target {name} radius must be positive")
        _refuse(need & (x <= R), "target", f"target {name} is inside the body")
    _refuse((code == APSIDES) & (ta < tp), "target", "target apoapsis is below the target periapsis")
    circular = e < CIRCULAR_START_E
    burn_at, goal, sense, nlegs = design_fleet_legs(rp0, ra0, circular, code, tp, ta, tv, mu)

    thrust = np.asarray(f.thrust_n, dtype=float)
    mdot = np.asarray(f.mdot_kg_s, dtype=float)
    c = thrust / mdot
    lim_d = np.asarray(f.max_burn_duration_s, dtype=float) * SPLIT_MARGIN
    lim_arc = np.asarray(f.max_burn_arc_rad, dtype=float) * SPLIT_MARGIN
    earliest = np.asarray(f.epoch_s, dtype=float) + np.asarray(f.lead_time_s, dtype=float)
    dry_floor = np.asarray(f.dry_mass_kg, dtype=float) + np.asarray(f.unusable_kg, dtype=float)

    # Running state of every spacecraft: orbit (rp, ra, period, a periapsis passage time),
    # time of the last cutoff, mass, lowest periapsis so far.
    cur_p, cur_a = rp0.copy(), ra0.copy()
    period = TWO_PI * np.sqrt(a ** 3 / mu)
    M0 = np.asarray(true_to_mean(np.asarray(el.nu_rad, dtype=float), e), dtype=float)
    t_peri = np.asarray(f.epoch_s, dtype=float) - M0 / TWO_PI * period
    t_now = np.asarray(f.epoch_s, dtype=float).copy()
    mass = np.asarray(f.mass_kg, dtype=float).copy()
    lowest = rp0.copy()
    chunks: list[dict] = []

    for g in range(MAX_LEGS):
        live = np.nonzero(g < nlegs)[0]
        if live.size == 0:
            break
        at = burn_at[live, g]
        gl = goal[live, g]
        sg = sense[live, g].astype(float)
        mu_l = mu[live]
        r_b, r_o = _leg_radii(at, cur_p[live], cur_a[live])
        dv_leg = _burn_dv(r_b, r_o, gl, mu_l)
        # split count from the leg's impulsive burn at the mass the leg starts with
        dur = mass[live] / mdot[live] * -np.expm1(-np.abs(dv_leg) / c[live])
        a_l = 0.5 * (cur_p[live] + cur_a[live])
        # the burn point's angular rate: the faster of the leg's start and end orbits (v/r)
        rate = np.maximum(np.asarray(vis_viva_speed(r_b, a_l, mu_l)),
                          np.asarray(vis_viva_speed(r_b, 0.5 * (r_b + gl), mu_l))) / r_b
        need = np.maximum(np.maximum(dur / lim_d[live], dur * rate / lim_arc[live]), 1.0)
        # the single planner's refusals: more than MAX_SPLIT burns, or a burn longer than an orbit
        row = np.full(n, -1)
        row[live] = np.arange(live.size)

        def leg_text(i):
            return f"a leg of {abs(dv_leg[row[i]]):.1f} m/s"

        _refuse(np.isin(np.arange(n), live[need > MAX_SPLIT]), "vehicle",
                lambda i: f"{leg_text(i)} would need {need[row[i]]:.3g} burns to keep within the "
                          f"vehicle's burn limits (at most {MAX_SPLIT} per leg): the thrust of "
                          f"{thrust[i]:.3g} N is too low for this change")
        splits = np.ceil(need - 1e-9).astype(np.int64)
        m_l = mass[live]
        # equal delta-v per burn: the first, heaviest burn is the longest; add burns until it fits
        for _ in range(MAX_SPLIT):
            first = m_l / mdot[live] * -np.expm1(-np.abs(dv_leg) / splits / c[live])
            short = ((first > lim_d[live]) | (first * rate > lim_arc[live])) & (splits < MAX_SPLIT)
            if not short.any():
                break
            splits[short] += 1
        per_burn = np.minimum(m_l / mdot[live] * -np.expm1(-np.abs(dv_leg) / splits / c[live]),
                              np.maximum(m_l - dry_floor[live], 0.0) / mdot[live])
        orbit_s = TWO_PI * np.sqrt(a_l ** 3 / mu_l)
        _refuse(np.isin(np.arange(n), live[per_burn > orbit_s]), "vehicle",
                lambda i: f"a burn of leg {g + 1} would last {per_burn[row[i]]:.3g} s, longer than one "
                          f"orbit ({orbit_s[row[i]]:.0f} s): the thrust of {thrust[i]:.3g} N is too low "
                          "for burns centred on an apsis")
        later = np.where(at == ANY, np.where(sg > 0, PERIAPSIS, APOAPSIS), at)
        # as the single planner: the first burn of a circular start goes at the earliest moment
        first_any = circular[live] & (g == 0)
        for k in range(int(splits.max())):
            sel = np.nonzero(splits > k)[0]
            idx = live[sel]
            nk = splits[sel]
            last = nk == k + 1
            goal_k = np.where(last, gl[sel],
                              _opposite_after(r_b[sel], r_o[sel], dv_leg[sel] * (k + 1) / nk, mu_l[sel]))
            chunks.append(_fly_pass(idx, g, k, goal_k, sg[sel], later[sel],
                                    first_any[sel] if k == 0 else np.zeros(sel.size, dtype=bool),
                                    cur_p, cur_a, period, t_peri, t_now, mass, lowest, earliest,
                                    mu, mdot, c, e, a))
    return _assemble(chunks, f, n, cur_p, cur_a, mass, lowest, circular)


def _fly_pass(idx, g, k, goal_k, sg, later, any_now, cur_p, cur_a, period, t_peri, t_now, mass,
              lowest, earliest, mu, mdot, c, e0, a0) -> dict:
    """One burn for each spacecraft in ``idx``; updates the running state arrays in place."""
    m0 = mass[idx]
    mu_i = mu[idx]
    rp, ra, P, tpp = cur_p[idx], cur_a[idx], period[idx], t_peri[idx]
    not_before = np.maximum(t_now[idx], earliest[idx])
    r_b, r_o = _leg_radii(later, rp, ra)
    if any_now.any():
        # Earliest-moment burn on a circular start orbit: ignite at not_before; the burn point
        # is where the spacecraft is when half the delta-v is in (first estimated with the
        # mean radius, as the single planner does).
        j = np.nonzero(any_now)[0]
        ii = idx[j]
        mid = 0.5 * (rp[j] + ra[j])
        dv0 = np.abs(_burn_dv(mid, mid, goal_k[j], mu_i[j]))
        t_c0 = not_before[j] + m0[j] / mdot[ii] * -np.expm1(-dv0 / (2.0 * c[ii]))
        E = solve_kepler(TWO_PI * (t_c0 - tpp[j]) / P[j], e0[ii])
        nu = np.asarray(eccentric_to_true(E, e0[ii]))
        p = a0[ii] * (1.0 - e0[ii] ** 2)
        r_b = r_b.copy()
        r_o = r_o.copy()
        r_b[j] = a0[ii] * (1.0 - e0[ii] * np.cos(E))
        r_o[j] = p / (1.0 - e0[ii] * np.cos(nu))
    dv_signed = _burn_dv(r_b, r_o, goal_k, mu_i)
    dv = np.abs(dv_signed)
    prop = m0 * -np.expm1(-dv / c[idx])
    duration = prop / mdot[idx]
    t_pre = m0 / mdot[idx] * -np.expm1(-dv / (2.0 * c[idx]))
    # the first passage of the burn apsis that leaves room for the pre-apsis part of the burn
    t_ref = tpp + np.where(later == APOAPSIS, 0.5 * P, 0.0)
    t_c = t_ref + P * np.ceil((not_before + t_pre - t_ref) / P)
    t_c = np.where(any_now, not_before + t_pre, t_c)
    t_ign = t_c - t_pre
    # arc: duration times the angular rate at the burn point, averaged over the orbits before
    # and after the impulse (half the delta-v is delivered on each side of the apsis)
    rate = 0.5 * (np.asarray(vis_viva_speed(r_b, 0.5 * (r_b + r_o), mu_i))
                  + np.asarray(vis_viva_speed(r_b, 0.5 * (r_b + goal_k), mu_i))) / r_b
    # the orbit after the impulse: the burn point stays an apsis, the other is the goal
    new_p, new_a = np.minimum(r_b, goal_k), np.maximum(r_b, goal_k)
    new_P = TWO_PI * np.sqrt((0.5 * (new_p + new_a)) ** 3 / mu_i)
    cur_p[idx], cur_a[idx], period[idx] = new_p, new_a, new_P
    t_peri[idx] = np.where(r_b <= goal_k, t_c, t_c - 0.5 * new_P)
    t_now[idx] = t_ign + duration
    mass[idx] = m0 - prop
    lowest[idx] = np.minimum(lowest[idx], new_p)
    apsis = np.where(any_now, np.where(sg > 0, PERIAPSIS, APOAPSIS), later)
    return {"craft": idx, "leg": np.full(idx.size, g), "apsis": apsis, "earliest": any_now,
            "sense": sg.astype(np.int8), "apsis_time_s": t_c, "ignition_s": t_ign,
            "cutoff_s": t_ign + duration, "duration_s": duration, "dv_m_s": dv, "propellant_kg": prop,
            "mass_before_kg": m0, "goal_radius_m": goal_k, "burn_radius_m": r_b,
            "arc_rad": duration * rate}


def _assemble(chunks, f: FleetInput, n, cur_p, cur_a, mass, lowest, circular) -> FleetPlan:
    keys = ("craft", "leg", "apsis", "earliest", "sense", "apsis_time_s", "ignition_s", "cutoff_s",
            "duration_s", "dv_m_s", "propellant_kg", "mass_before_kg", "goal_radius_m",
            "burn_radius_m", "arc_rad")
    if chunks:
        cols = {key: np.concatenate([ch[key] for ch in chunks]) for key in keys}
    else:
        cols = {key: np.zeros(0) for key in keys}
        cols["craft"] = np.zeros(0, dtype=np.int64)
    order = np.argsort(cols["craft"], kind="stable")  # chunks are in time order per spacecraft
    cols = {key: val[order] for key, val in cols.items()}
    craft = cols["craft"].astype(np.int64)
    counts = np.bincount(craft, minlength=n)
    first = np.cumsum(counts) - counts
    number = np.arange(craft.size) - first[craft] + 1
    on_board = np.asarray(f.mass_kg, dtype=float) - np.asarray(f.dry_mass_kg, dtype=float)
    usable = on_board - np.asarray(f.unusable_kg, dtype=float)
    prop = cols["propellant_kg"]
    cum = np.cumsum(prop)
    before = cum - prop  # propellant of all earlier rows
    cum_in_craft = cum - before[first[craft]] if craft.size else cum
    feasible = cum_in_craft <= usable[craft] + 1e-9
    used = np.bincount(craft, weights=cols["propellant_kg"], minlength=n)
    after = on_board - used
    margin = after - np.asarray(f.unusable_kg, dtype=float) - np.asarray(f.reserve_kg, dtype=float)
    return FleetPlan(
        craft=craft, number=number, leg=cols["leg"].astype(np.int64), apsis=cols["apsis"].astype(np.int8),
        earliest=cols["earliest"].astype(bool), sense=cols["sense"].astype(np.int8),
        apsis_time_s=cols["apsis_time_s"], ignition_s=cols["ignition_s"], cutoff_s=cols["cutoff_s"],
        duration_s=cols["duration_s"], dv_m_s=cols["dv_m_s"], propellant_kg=cols["propellant_kg"],
        mass_before_kg=cols["mass_before_kg"], goal_radius_m=cols["goal_radius_m"],
        burn_radius_m=cols["burn_radius_m"], arc_rad=cols["arc_rad"], feasible=feasible,
        within_limits=((cols["duration_s"] <= np.asarray(f.max_burn_duration_s, dtype=float)[craft] * (1.0 + 1e-9))
                       & (cols["arc_rad"] <= np.asarray(f.max_burn_arc_rad, dtype=float)[craft] * (1.0 + 1e-9))),
        burn_count=counts, first_burn=first,
        total_dv_m_s=np.bincount(craft, weights=cols["dv_m_s"], minlength=n),
        total_duration_s=np.bincount(craft, weights=cols["duration_s"], minlength=n),
        propellant_used_kg=used, propellant_after_kg=after, usable_kg=usable, margin_kg=margin,
        craft_feasible=used <= usable + 1e-9, circular_start=circular,
        final_periapsis_radius_m=cur_p, final_apoapsis_radius_m=cur_a,
        lowest_periapsis_radius_m=lowest,
    )


__all__ = ["FleetInput", "FleetPlan", "FleetInputError", "plan_fleet", "design_fleet_legs",
           "TARGET_CODE", "APSIS_NAMES", "PERIAPSIS", "APOAPSIS", "ANY", "MAX_LEGS", "MAX_SPLIT"]
