"""Burn planning with real engines: apsis timing, finite burns, split burns, propellant.

The plan is built in three layers.

1. **Impulsive design** (:func:`design_legs`): the target becomes a sequence of tangential
   apsis manoeuvres ("legs").  Each leg burns at one apsis of the current (mean) orbit and
   moves the opposite apsis to a new radius; the cheapest ordering is chosen for two-apsis
   targets (Hohmann-type), and a bi-elliptic target gets its three legs.  A start orbit whose
   mean eccentricity is below ``CIRCULAR_START_E`` has no useful apsis: its first burn goes at
   the earliest opportunity after the lead time.
2. **Splitting**: a leg whose single burn would break the vehicle's ``max_burn_duration`` or
   ``max_burn_arc`` becomes a group of N burns on successive passes of the same apsis; burn k
   aims at the opposite-apsis radius reached by k/N of the leg's impulsive delta-v, the last
   one trims to the leg's goal.  N is the smallest count that keeps every burn within both
   limits (with ``SPLIT_MARGIN`` to spare, since finite burns run longer than the impulsive
   estimate).  ``split = N`` forces N; ``split = "off"`` plans one burn and warns.
3. **Finite burns**: each burn is flown numerically (:func:`mechanics.flight.fly`, same force
   model as the coasts) at constant thrust and mass flow.  Its centre is the apsis passage
   predicted from the mean elements; ignition is placed so that **half of the burn's delta-v
   is delivered before the apsis** (t_ign = t_apsis - m0/mdot (1 - exp(-dv / (2 c)))).  This
   "half delta-v" rule centres the delivered impulse, not the clock time, on the apsis, so the
   line of apsides does not turn as the vehicle lightens; the half-duration rule (CCSDS OPM's
   mid-burn convention) ignites later by a few tenths of a percent of the duration, and each
   burn reports that alternative ignition too.  The duration is solved (secant method) so that
   the flown orbit's radius opposite the burn point meets the goal to ``GOAL_TOLERANCE_M``.
   When a plan has two or more legs, the last two are iterated together (the burn-point radius
   of the last leg is the goal of the one before, and the last leg's finite arc disturbs it)
   until the final orbit meets both target apsides.
4. **Plane change** (optional target inclination): the inclination change is shared between
   the legs so that the sum of the combined delta-v (law of cosines at each burn) is least
   (:func:`share_plane_change`), and burns are centred on the nodes, where a push along the
   orbit normal turns the plane about the line of nodes (right ascension of the node kept).
   A circular start orbit's first burn goes at the first node after the lead time; an
   elliptical one must have its apsides on the line of nodes.  Each such burn is pitched out of
   the orbit plane by an angle beta; its duration and beta are solved together (Newton's
   method with a finite-difference, then Broyden-updated Jacobian) so that the flown orbit meets
   both the radius goal and the burn's share of the inclination.

Under ``"two-body+J2"`` every radius compared with a goal is taken from the orbit-averaged
(mean) elements of :mod:`mechanics.mean`; under ``"two-body"`` from the osculating conic.

References
----------
Vallado (2013), sec. 6.3 (Hohmann, bi-elliptic) and sec. 6.8 (finite burns, the loss of a
fixed-attitude burn); Curtis (2014) sec. 6.2 and 11.3 (finite burn integration).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .bodies import Body
from .elements import rv_to_elements
from .flight import Thrust, _rhs_factory, fly
from .impulsive import apsis_burn_dv, opposite_apsis_after, vis_viva_speed
from .kepler import TWO_PI, propagate_kepler
from .mean import MeanOrbit, mean_orbit_samples
from .scenario import Scenario, Target

#: Mean eccentricity below which a start orbit counts as circular for planning (its first burn
#: goes at the earliest opportunity; in LEO this is an apsis difference under ~1.4 km).
CIRCULAR_START_E = 1e-4
#: How close the flown orbit must come to the goal radius of the last burn of a leg, m.
GOAL_TOLERANCE_M = 1.0
#: ... and to the intermediate goals of a split leg (the last burn trims), m.
INTERMEDIATE_TOLERANCE_M = 50.0
#: How close the final orbit must come to the target apsides, m.
TARGET_TOLERANCE_M = 50.0
#: Fraction of a vehicle limit the impulsive estimate may use when choosing N.
SPLIT_MARGIN = 0.97
#: Legs that move an apsis by less than this are dropped, m.
SKIP_LEG_M = 20.0
#: A leg added to a one-leg plan to hold the other apsis (see ``plan_campaign``) is kept only
#: if it delivers at least this, m/s; a smaller trim is left to the operator (the final miss
#: is reported).
MIN_TRIM_DV_M_S = 0.05
#: Most burns one leg may be split into (the largest forced ``split`` too).
MAX_SPLIT = 200
#: A plane-change burn whose centre lies further than this from a node is reported (rad); an
#: elliptical start orbit whose apsides lie further than this from its nodes is refused.
NODE_OFFSET_LIMIT_RAD = math.radians(5.0)
#: Mean inclination below which (or above pi minus which) an orbit counts as equatorial: every
#: point is a node.
EQUATORIAL_I_RAD = 1e-5
#: Below this mean eccentricity a plane change starts at a node even when the apsides lie off
#: the line of nodes (the start orbit is then treated as circular).
PLANE_NEAR_CIRCULAR_E = 0.01
#: A goal inclination this close to 0 or 180 deg is solved as a tilt about the burn point's
#: radius (smooth through the equatorial plane, where the inclination has a corner).
EQUATORIAL_GOAL_RAD = math.radians(1.0)
#: Largest inclination change planned (beyond it a burn reverses much of the velocity).
MAX_PLANE_CHANGE_RAD = math.radians(90.0)
#: A target with (ra - rp) / (ra + rp) below this counts as round: its last burn's centre time
#: is solved as well as its duration (see ``_Campaign._fly_last``).
ROUND_TARGET_E = 0.01


@dataclass(frozen=True)
class Leg:
    """One impulsive apsis manoeuvre of the design.

    Attributes
    ----------
    burn_at : str
        ``"periapsis"``, ``"apoapsis"`` (of the orbit before the leg) or ``"any"`` (circular).
    goal_radius_m : float
        Radius the opposite apsis is moved to, m.
    sense : int
        +1 prograde (raise), -1 retrograde (lower).
    i_before_rad, i_after_rad : float or None
        Design inclination before and after the leg, rad (``None``: the leg keeps its plane).
    """

    burn_at: str
    goal_radius_m: float
    sense: int
    i_before_rad: float | None = None
    i_after_rad: float | None = None


@dataclass(frozen=True)
class PlannedBurn:
    """One burn of the queue (SI units, times in UTC seconds since 1970)."""

    index: int
    leg: int
    apsis: str
    apsis_time_s: float
    ignition_s: float
    cutoff_s: float
    duration_s: float
    dv_m_s: float
    impulsive_dv_m_s: float
    propellant_kg: float
    mass_before_kg: float
    mass_after_kg: float
    thrust_n: float
    mdot_kg_s: float
    attitude_mode: str
    direction: tuple
    sense: int
    arc_rad: float
    goal_radius_m: float
    after_periapsis_radius_m: float
    after_apoapsis_radius_m: float
    ignition_half_duration_s: float
    state_before: tuple
    state_after: tuple
    centre_direction: tuple
    placement: str
    after_radius_at_burn_point_m: float = 0.0
    goal_i_rad: float | None = None
    after_i_rad: float = float("nan")
    out_of_plane_rad: float = 0.0
    node_offset_rad: float = 0.0
    centre_shift_s: float = 0.0  # burn centre minus apsis (or node) passage, s (see _fly_shifted)

    @property
    def finite_loss_m_s(self) -> float:
        return self.dv_m_s - self.impulsive_dv_m_s

    @property
    def carries_plane_change(self) -> bool:
        return self.goal_i_rad is not None


@dataclass(frozen=True)
class Plan:
    """A burn queue and its propellant figures."""

    feasible: bool
    model: str
    epoch_s: float
    body: Body
    r_m: tuple
    v_m_s: tuple
    mass_kg: float
    burns: tuple
    loaded_kg: float
    usable_kg: float
    unusable_kg: float
    reserve_kg: float
    after_plan_kg: float
    margin_kg: float
    dv_remaining_m_s: float
    final_periapsis_radius_m: float
    final_apoapsis_radius_m: float
    thrust_factor: float
    warnings: tuple = field(default_factory=tuple)
    final_i_rad: float = float("nan")
    target_i_rad: float | None = None

    @property
    def total_dv_m_s(self) -> float:
        return sum(b.dv_m_s for b in self.burns)

    @property
    def total_impulsive_dv_m_s(self) -> float:
        return sum(b.impulsive_dv_m_s for b in self.burns)

    @property
    def total_propellant_kg(self) -> float:
        return sum(b.propellant_kg for b in self.burns)

    @property
    def total_duration_s(self) -> float:
        return sum(b.duration_s for b in self.burns)


# --------------------------------------------------------------------------- impulsive design

def design_legs(rp_m: float, ra_m: float, circular: bool, target: Target, mu_m3_s2: float,
                keep_all: bool = False) -> list[Leg]:
    """Impulsive legs taking mean apsides (rp, ra) to ``target`` (see module notes).

    Legs that move an apsis by less than ``SKIP_LEG_M`` are dropped unless ``keep_all``.

    Raises
    ------
    ValueError
        For a target one burn of its kind cannot reach (e.g. an apoapsis below the periapsis).
    """
    kind = target.kind
    if kind == "apoapsis":
        x = target.apoapsis_radius_m
        if not circular and x < rp_m:
            raise ValueError("target apoapsis is below the current periapsis: one burn cannot do it "
                             "(use kind \"apsides\")")
        legs = [Leg("any" if circular else "periapsis", x, 1 if x > (rp_m if circular else ra_m) else -1)]
    elif kind == "periapsis":
        x = target.periapsis_radius_m
        if circular and x > ra_m:
            raise ValueError("target periapsis is above the current circular orbit: that raises "
                             "the apoapsis (use kind \"apoapsis\" or \"apsides\")")
        if not circular and x > ra_m:
            raise ValueError("target periapsis is above the current apoapsis: one burn cannot do it "
                             "(use kind \"apsides\")")
        legs = [Leg("any" if circular else "apoapsis", x, 1 if x > rp_m else -1)]
    elif kind in ("circular", "apsides"):
        legs = _two_leg_design(rp_m, ra_m, circular, target.periapsis_radius_m,
                               target.apoapsis_radius_m, mu_m3_s2)
    else:  # bielliptic
        via, r_t = target.via_radius_m, target.periapsis_radius_m
        if via < max(ra_m, r_t):
            raise ValueError("target via_alt must lie above both the current apoapsis and the target")
        first_at = "any" if circular else "periapsis"
        legs = [Leg(first_at, via, 1), Leg("apoapsis", r_t, 1 if r_t > rp_m else -1),
                Leg("periapsis", r_t, -1)]
    current = (rp_m, ra_m)
    kept = []
    for leg in legs:
        burn_r, other_r = _leg_radii(leg, current)
        if keep_all or abs(leg.goal_radius_m - other_r) >= SKIP_LEG_M:
            kept.append(leg)
        current = tuple(sorted((burn_r, leg.goal_radius_m)))
    return kept


def _leg_radii(leg: Leg, apsides) -> tuple[float, float]:
    rp, ra = apsides
    if leg.burn_at == "apoapsis":
        return ra, rp
    return rp, ra  # periapsis, or "any" on a circular orbit (rp ~ ra)


def _two_leg_design(rp, ra, circular, rp_t, ra_t, mu):
    best = None
    starts = ("any",) if circular else ("periapsis", "apoapsis")
    for start in starts:
        rb1, ro1 = (ra, rp) if start == "apoapsis" else (rp, ra)
        for x1, x2 in ((ra_t, rp_t), (rp_t, ra_t)):
            dv1 = apsis_burn_dv(rb1, ro1, x1, mu)
            dv2 = apsis_burn_dv(x1, rb1, x2, mu)
            total = abs(dv1) + abs(dv2)
            second_at = "apoapsis" if x1 > rb1 else "periapsis"
            legs = [Leg(start, x1, 1 if dv1 >= 0 else -1), Leg(second_at, x2, 1 if dv2 >= 0 else -1)]
            if best is None or total < best[0] - 1e-9:
                best = (total, legs)
    return best[1]


def _leg_speeds(legs, rp_m: float, ra_m: float, mu_m3_s2: float):
    """Speeds (m/s) at each leg's burn point before and after its impulsive burn."""
    apsides = (rp_m, ra_m)
    out = []
    for leg in legs:
        burn_r, other_r = _leg_radii(leg, apsides)
        out.append((float(vis_viva_speed(burn_r, 0.5 * (burn_r + other_r), mu_m3_s2)),
                    float(vis_viva_speed(burn_r, 0.5 * (burn_r + leg.goal_radius_m), mu_m3_s2))))
        apsides = tuple(sorted((burn_r, leg.goal_radius_m)))
    return out


def share_plane_change(legs, rp_m: float, ra_m: float, circular: bool, i0_rad: float, i_target_rad: float,
                       mu_m3_s2: float) -> list[Leg]:
    """Share the inclination change i_target - i0 between ``legs`` at least total delta-v.

    Each leg's burn turns the velocity at its burn point from speed v1 to v2 through its share
    di_k; its delta-v is sqrt(v1^2 + v2^2 - 2 v1 v2 cos di_k) (law of cosines).  The shares
    (non-negative fractions summing to one) minimise the sum over the legs: one leg takes it
    all; two legs, a bounded one-variable minimum; three legs (bi-elliptic), SLSQP on the
    simplex.  Without legs (the apsides already meet the target) a pure plane-change leg is
    made: at the first node of a circular orbit, else at the apoapsis (the slower apsis).

    Parameters
    ----------
    legs : list of Leg
        The in-plane design (:func:`design_legs`).
    rp_m, ra_m : float
        Mean apsis radii of the start orbit, m.
    circular : bool
        Whether the start orbit counts as circular.
    i0_rad, i_target_rad : float
        Start and target inclination, rad.
    mu_m3_s2 : float
        Gravitational parameter, m^3/s^2.

    Returns
    -------
    list of Leg
        The legs with ``i_before_rad`` and ``i_after_rad`` set.

    References
    ----------
    Vallado (2013), eq. 6-19 (combined change) and sec. 6.4.3 (minimum combined plane change).
    """
    from dataclasses import replace

    from .impulsive import plane_change_dv

    if not legs:
        legs = [Leg("any", ra_m, 1) if circular else Leg("apoapsis", rp_m, 1)]
    speeds = _leg_speeds(legs, rp_m, ra_m, mu_m3_s2)
    di = i_target_rad - i0_rad
    n = len(legs)

    def total(fr):
        return sum(plane_change_dv(v1, v2, abs(f * di)) for (v1, v2), f in zip(speeds, fr))

    if n == 1:
        fractions = [1.0]
    elif n == 2:
        from scipy.optimize import minimize_scalar

        s = float(minimize_scalar(lambda x: total((x, 1.0 - x)), bounds=(0.0, 1.0), method="bounded",
                                  options={"xatol": 1e-10}).x)
        fractions = [s, 1.0 - s]
    else:
        from scipy.optimize import minimize

        start = np.full(n, 1.0 / n)
        res = minimize(total, start, method="SLSQP", bounds=[(0.0, 1.0)] * n,
                       constraints=[{"type": "eq", "fun": lambda f: float(np.sum(f)) - 1.0}],
                       options={"ftol": 1e-12, "maxiter": 200})
        f = np.clip(res.x if res.success else start, 0.0, 1.0)
        fractions = list(f / f.sum())
    out, i_now = [], i0_rad
    for k, (leg, f) in enumerate(zip(legs, fractions)):
        i_next = i_target_rad if k == n - 1 else i_now + f * di
        out.append(replace(leg, i_before_rad=i_now, i_after_rad=i_next))
        i_now = i_next
    return out


def design_dv(legs, rp_m: float, ra_m: float, mu_m3_s2: float) -> float:
    """Total impulsive delta-v (m/s) of the legs from mean apsides (rp, ra), plane changes included
    (a leg without one costs |v2 - v1|, its apsis burn)."""
    from .impulsive import plane_change_dv

    total = 0.0
    for leg, (v1, v2) in zip(legs, _leg_speeds(legs, rp_m, ra_m, mu_m3_s2)):
        di = 0.0 if leg.i_after_rad is None else leg.i_after_rad - leg.i_before_rad
        total += plane_change_dv(v1, v2, abs(di))
    return total


def _node_offset(mean: MeanOrbit, direction) -> float:
    """Angle (rad, 0..pi/2) between ``direction`` (projected on the orbit plane) and the line of
    nodes of ``mean``; 0 for an equatorial orbit, where every point is a node."""
    if math.sin(mean.i_rad) < EQUATORIAL_I_RAD:
        return 0.0
    i, raan = mean.i_rad, mean.raan_rad
    co, so, ci, si = math.cos(raan), math.sin(raan), math.cos(i), math.sin(i)
    dx, dy, dz = (float(c) for c in direction)
    u = math.atan2(-dx * ci * so + dy * ci * co + dz * si, dx * co + dy * so)
    return math.acos(min(1.0, abs(math.cos(u))))


# --------------------------------------------------------------------------- helpers

def _orbit_normal(mean: MeanOrbit):
    """Unit orbit normal of a mean orbit (inertial frame)."""
    si, ci = math.sin(mean.i_rad), math.cos(mean.i_rad)
    return np.array([si * math.sin(mean.raan_rad), -si * math.cos(mean.raan_rad), ci])


def _eccentricity_vector(mean: MeanOrbit):
    """Eccentricity vector e P of a mean orbit (P toward periapsis; inertial frame)."""
    co, so = math.cos(mean.raan_rad), math.sin(mean.raan_rad)
    cw, sw = math.cos(mean.argp_rad), math.sin(mean.argp_rad)
    ci, si = math.cos(mean.i_rad), math.sin(mean.i_rad)
    return mean.e * np.array([co * cw - so * sw * ci, so * cw + co * sw * ci, sw * si])


def _angular_rate(y) -> float:
    """Angular rate |r x v| / r^2 (rad/s) of a state (position, velocity first)."""
    r, v = np.asarray(y[:3], float), np.asarray(y[3:6], float)
    return float(np.linalg.norm(np.cross(r, v)) / np.dot(r, r))


def _unit(x):
    x = np.asarray(x, dtype=float)
    return x / np.linalg.norm(x)


def _radius_toward(mean: MeanOrbit, direction) -> float:
    """Radius (m) of the mean ellipse in the inertial ``direction`` (projected on its plane).

    The direction's argument of latitude u is measured from the node n = (cos O, sin O, 0)
    toward m = h x n = (-cos i sin O, cos i cos O, sin i); then r = p / (1 + e cos(u - argp)).
    """
    i, raan = mean.i_rad, mean.raan_rad
    co, so, ci, si = math.cos(raan), math.sin(raan), math.cos(i), math.sin(i)
    dx, dy, dz = (float(c) for c in direction)
    u = math.atan2(-dx * ci * so + dy * ci * co + dz * si, dx * co + dy * so)
    p = mean.a_m * (1.0 - mean.e * mean.e)
    return p / (1.0 + mean.e * math.cos(u - mean.argp_rad))


class _Flight:
    """Model-aware coasting, burning and averaging for one plan."""

    def __init__(self, body: Body, model: str):
        self.body = body
        self.model = model
        rhs = _rhs_factory(body, model, None)
        self._acc = lambda y: np.asarray(rhs(0.0, np.concatenate([y[:6], [1.0]]))[3:6])

    def coast(self, y, dt_s: float):
        if dt_s == 0.0:
            return np.array(y, dtype=float)
        if self.model == "two-body":
            r, v = propagate_kepler(y[:3], y[3:6], dt_s, self.body.mu_m3_s2)
            return np.concatenate([r, v, [y[6]]])
        y1, _ = fly(y, dt_s, self.body, self.model)
        return y1

    def burn(self, y, duration_s: float, thrust: Thrust):
        y1, _ = fly(y, duration_s, self.body, self.model, thrust=thrust)
        return y1

    def mean(self, y):
        """(mean orbit, flown revolution samples or None) of a state."""
        mean, times, states = mean_orbit_samples(y[:3], y[3:6], self.body, self.model)
        return mean, (None if times is None else (times, states))

    def coast_from(self, snap: "_Snapshot", t_s: float):
        """State at ``t_s`` on the coast after ``snap``.

        Inside the revolution ``snap`` has flown and sampled, quintic Hermite interpolation
        between the two neighbouring samples (positions, velocities and accelerations at both
        ends; error ~ (n h)^6 r / 720, millimetres for 64 samples per revolution in LEO);
        beyond it, integration from the last sample.
        """
        y, t0 = snap.y, snap.t_s
        if snap.samples is not None and t_s > t0:
            times, states = snap.samples
            dt = t_s - t0
            k = int(np.searchsorted(times, dt, side="right")) - 1
            if k + 1 < len(times):
                out = self._hermite(times[k], states[k], times[k + 1], states[k + 1], dt)
                return np.concatenate([out, [snap.y[6]]])
            y = np.concatenate([states[k, :6], [snap.y[6]]])
            t0 = t0 + float(times[k])
        return self.coast(y, t_s - t0)

    def _hermite(self, ta, ya, tb, yb, t):
        """Quintic Hermite interpolation of position (and its derivative for velocity)."""
        acc = self._acc
        h = tb - ta
        s = (t - ta) / h
        pa, va, aa = ya[:3], ya[3:6], acc(ya)
        pb, vb, ab = yb[:3], yb[3:6], acc(yb)
        s2, s3 = s * s, s * s * s
        s4, s5 = s3 * s, s3 * s2
        h00 = 1 - 10 * s3 + 15 * s4 - 6 * s5
        h10 = s - 6 * s3 + 8 * s4 - 3 * s5
        h20 = 0.5 * s2 - 1.5 * s3 + 1.5 * s4 - 0.5 * s5
        h01 = 10 * s3 - 15 * s4 + 6 * s5
        h11 = -4 * s3 + 7 * s4 - 3 * s5
        h21 = 0.5 * s3 - s4 + 0.5 * s5
        d00 = (-30 * s2 + 60 * s3 - 30 * s4) / h
        d10 = (1 - 18 * s2 + 32 * s3 - 15 * s4) / h
        d20 = (s - 4.5 * s2 + 6 * s3 - 2.5 * s4) / h
        d01 = (30 * s2 - 60 * s3 + 30 * s4) / h
        d11 = (-12 * s2 + 28 * s3 - 15 * s4) / h
        d21 = (1.5 * s2 - 4 * s3 + 2.5 * s4) / h
        pos = h00 * pa + h10 * h * va + h20 * h * h * aa + h01 * pb + h11 * h * vb + h21 * h * h * ab
        vel = d00 * pa + d10 * h * va + d20 * h * h * aa + d01 * pb + d11 * h * vb + d21 * h * h * ab
        return np.concatenate([pos, vel])


def _osculating_mean(y, body: Body) -> MeanOrbit:
    """Two-body mean orbit (the osculating one, with its mean motion)."""
    from .mean import mean_orbit

    return mean_orbit(y[:3], y[3:6], body, "two-body")


def _osculating(y, mu: float) -> MeanOrbit:
    """The osculating conic of a state in MeanOrbit form (for radii toward a direction)."""
    el = rv_to_elements(y[:3], y[3:6], mu)
    return MeanOrbit(el.a_m, el.e, el.i_rad, el.raan_rad, el.argp_rad, 0.0, 0.0, 0.0, 1.0)


@dataclass
class _Engine:
    thrust_n: float
    mdot_kg_s: float

    @property
    def c_m_s(self) -> float:
        return self.thrust_n / self.mdot_kg_s

    def duration_for_dv(self, m0: float, dv: float) -> float:
        return m0 / self.mdot_kg_s * -math.expm1(-abs(dv) / self.c_m_s)

    def pre_apsis_time(self, m0: float, duration: float) -> float:
        """Half-delta-v rule: time from ignition until half the burn's delta-v is delivered."""
        return m0 / self.mdot_kg_s * (1.0 - math.sqrt(max(m0 - self.mdot_kg_s * duration, 1e-300) / m0))


# --------------------------------------------------------------------------- planner

class PlanningError(ValueError):
    """A plan cannot be made (the message says why, in physical terms)."""


def plan_campaign(scenario: Scenario, *, thrust_factor: float = 1.0, mass_kg: float | None = None,
                  first_index: int = 1, earliest_s: float | None = None) -> Plan:
    """Plan the burn queue that takes ``scenario``'s state to its target.

    Parameters
    ----------
    scenario : Scenario
        Needs a vehicle and a target.
    thrust_factor : float
        Calibration k (achieved / rated): thrust and mass flow are both scaled by k.
    mass_kg : float, optional
        Vehicle mass at the scenario epoch (default: dry + loaded propellant).
    first_index : int
        Number given to the first burn (sessions continue the numbering).
    earliest_s : float, optional
        No ignition before this time (default: epoch + lead time).

    Returns
    -------
    Plan

    Raises
    ------
    ValueError
        For a missing vehicle or target, an open orbit, a target inside the body, zero thrust.
    """
    sc = scenario
    if sc.vehicle is None:
        raise ValueError("a plan needs a vehicle: add vehicle = \"NAME\" to the scenario")
    if sc.target is None:
        raise ValueError("a plan needs a target: add a [target] table to the scenario")
    if not (math.isfinite(thrust_factor) and 0.05 <= thrust_factor <= 5.0):
        raise ValueError(f"thrust factor {thrust_factor!r} is implausible (expected about 1)")
    body, veh, target = sc.body, sc.vehicle, sc.target
    for name in ("periapsis_radius_m", "apoapsis_radius_m", "via_radius_m"):
        r = getattr(target, name)
        if r is not None and r <= body.radius_m:
            raise ValueError(f"target {name.replace('_radius_m', '')} is inside the body")
    engine = _Engine(veh.thrust_n * thrust_factor, veh.mdot_kg_s * thrust_factor)
    if engine.thrust_n <= 0.0:
        raise ValueError("vehicle has no thrust along the burn axis")
    m0 = veh.wet_mass_kg if mass_kg is None else float(mass_kg)
    if not (math.isfinite(m0) and m0 > veh.dry_mass_kg * (1.0 - 1e-12)):
        raise ValueError("vehicle mass must be at least its dry mass")
    fl = _Flight(body, sc.model)
    y0 = np.concatenate([np.asarray(sc.r_m, float), np.asarray(sc.v_m_s, float), [m0]])
    osc0 = rv_to_elements(y0[:3], y0[3:6], body.mu_m3_s2)
    if osc0.e >= 1.0:
        raise ValueError("orbit is hyperbolic: no apoapsis; the planner needs a closed orbit")
    mean0, samples0 = fl.mean(y0)
    if mean0.periapsis_radius_m <= body.radius_m:
        raise ValueError("orbit intersects the body: periapsis is below the surface")
    circular = mean0.e < CIRCULAR_START_E
    plane = (target.i_rad is not None
             and abs(target.i_rad - mean0.i_rad) * mean0.a_m > TARGET_TOLERANCE_M)
    if plane:
        change = abs(target.i_rad - mean0.i_rad)
        if change > MAX_PLANE_CHANGE_RAD:
            raise ValueError(f"target.i: a plane change of {math.degrees(change):.1f} deg is beyond this "
                             f"planner (at most {math.degrees(MAX_PLANE_CHANGE_RAD):.0f} deg): its burns "
                             "would all but stop the vehicle")
        if not circular and math.sin(mean0.i_rad) >= EQUATORIAL_I_RAD:
            off = math.acos(min(1.0, abs(math.cos(mean0.argp_rad))))
            if off > NODE_OFFSET_LIMIT_RAD and mean0.e < PLANE_NEAR_CIRCULAR_E:
                # near-circular (e.g. the mean eccentricity J2 leaves on a "circular" LEO):
                # start at a node as from a circular orbit; the apsides hardly matter there
                circular = True
            elif off > NODE_OFFSET_LIMIT_RAD:
                raise ValueError(
                    f"target.i: a plane change is made at the nodes, but the apsides of the current "
                    f"orbit lie {math.degrees(off):.1f} deg from its line of nodes (at most "
                    f"{math.degrees(NODE_OFFSET_LIMIT_RAD):.0f} deg): plan it from a near-circular orbit "
                    "or when the apsides line up with the nodes")
    rp0, ra0, mu = mean0.periapsis_radius_m, mean0.apoapsis_radius_m, body.mu_m3_s2

    def design(keep_all=False):
        legs = design_legs(rp0, ra0, circular, target, mu, keep_all=keep_all)
        return share_plane_change(legs, rp0, ra0, circular, mean0.i_rad, target.i_rad, mu) if plane else legs

    earliest = sc.epoch_s + sc.options.lead_time_s if earliest_s is None else earliest_s
    node_plan = plane and circular and math.sin(mean0.i_rad) >= EQUATORIAL_I_RAD

    def fly(legs):
        warnings: list[str] = []
        state = _Campaign(sc, fl, engine, veh, warnings, earliest, node_plan)
        burns = state.fly_legs(legs, _Snapshot(y0, sc.epoch_s, mean0, samples0), circular)
        return state, warnings, burns

    legs = design()
    state, warnings, burns = fly(legs)
    if target.kind in ("circular", "apsides") and len(legs) == 1 and not state.ran_dry:
        # A leg dropped from the design as impulsively needless may be needed after all: the
        # finite burn of the other moves its own apsis.  Fly both and keep the better.
        full = design(keep_all=True)
        miss = _target_miss(target, state.final_mean)
        if len(full) == 2 and miss > TARGET_TOLERANCE_M:
            state2, warnings2, burns2 = fly(full)
            added = [b for b in burns2 if full[b.leg] not in legs]
            if (not state2.ran_dry and _target_miss(target, state2.final_mean) < miss
                    and sum(b.dv_m_s for b in added) >= MIN_TRIM_DV_M_S):
                state, warnings, burns, legs = state2, warnings2, burns2, full
    final_y, final_mean = state.final_y, state.final_mean
    # Propellant book-keeping.
    used = sum(b.propellant_kg for b in burns)
    loaded = veh.propellant_kg
    on_board = m0 - veh.dry_mass_kg
    after = on_board - used
    usable_now = on_board - veh.unusable_kg
    margin = after - veh.unusable_kg - veh.reserve_kg
    feasible = used <= usable_now + 1e-9 and not state.ran_dry
    if not feasible:
        need_dv = design_dv(legs, rp0, ra0, mu)
        need_kg = m0 * -math.expm1(-need_dv / engine.c_m_s)
        warnings.append(f"infeasible: the target needs about {need_dv:.1f} m/s, i.e. {need_kg:.3f} kg "
                        f"of propellant (impulsive estimate), but only {usable_now:.3f} kg is usable")
    elif margin < -1e-9:  # the feasibility test's tolerance: rounding is no inroad on the reserve
        warnings.append(f"propellant after the plan ({after:.3f} kg) eats {-margin:.3f} kg into the "
                        f"reserve of {veh.reserve_kg:.3f} kg")
    final_mass = float(final_y[6])
    dv_rem = engine.c_m_s * math.log(final_mass / (final_mass - margin)) if margin > 0.0 else 0.0
    burns = _renumber(burns, first_index)
    for b in burns:
        if b.ignition_s < earliest - 1e-6:
            warnings.append(f"burn {b.index} ignites before the lead time allows")
    if target.kind in ("apoapsis", "periapsis") and len(legs) == 1 and burns:
        # (a two-apsis target reports its misses below; the advice to use one would be wrong)
        _note_other_apsis(legs[0], mean0, final_mean, warnings)
    if burns and not state.ran_dry:
        _note_final_miss(target, final_mean, body.radius_m, warnings)
    if plane and burns and not state.ran_dry:
        miss = abs(final_mean.i_rad - target.i_rad)
        if miss * final_mean.a_m > TARGET_TOLERANCE_M:
            warnings.append(f"final inclination misses the target by {math.degrees(miss):.4f} deg")
    plan = Plan(
        feasible=feasible, model=sc.model, epoch_s=sc.epoch_s, body=body,
        r_m=tuple(sc.r_m), v_m_s=tuple(sc.v_m_s), mass_kg=m0,
        burns=tuple(burns), loaded_kg=loaded, usable_kg=loaded - veh.unusable_kg,
        unusable_kg=veh.unusable_kg, reserve_kg=veh.reserve_kg, after_plan_kg=after, margin_kg=margin,
        dv_remaining_m_s=dv_rem,
        final_periapsis_radius_m=final_mean.periapsis_radius_m,
        final_apoapsis_radius_m=final_mean.apoapsis_radius_m,
        thrust_factor=thrust_factor, warnings=tuple(dict.fromkeys(warnings)),
        final_i_rad=final_mean.i_rad, target_i_rad=target.i_rad,
    )
    return plan


def _apsis_misses(target: Target, final: MeanOrbit):
    """(name, target radius, final mean radius) of each apsis the target names, m."""
    return [(name, want, got) for name, want, got in (
        ("periapsis", target.periapsis_radius_m, final.periapsis_radius_m),
        ("apoapsis", target.apoapsis_radius_m, final.apoapsis_radius_m)) if want is not None]


def _target_miss(target: Target, final: MeanOrbit) -> float:
    """Largest distance (m) of a final mean apsis from its target radius."""
    return max((abs(got - want) for _, want, got in _apsis_misses(target, final)), default=0.0)


def _note_final_miss(target: Target, final: MeanOrbit, radius_m: float, warnings: list) -> None:
    """Say so when the final (mean) apsides miss the target's by more than the tolerance.

    The legs aim at radii along their burn lines; an eccentricity left across those lines (e.g.
    by the J2 drift of the apsides between burns) is invisible there and shows here.
    """
    misses = [f"{name} {(got - radius_m) / 1e3:.3f} km against {(want - radius_m) / 1e3:.3f} km"
              for name, want, got in _apsis_misses(target, final) if abs(got - want) > TARGET_TOLERANCE_M]
    if misses:
        warnings.append("final orbit misses the target: " + ", ".join(misses)
                        + f" (tolerance {TARGET_TOLERANCE_M:.0f} m)")


def _note_other_apsis(leg: Leg, before: MeanOrbit, after: MeanOrbit, warnings: list) -> None:
    """A one-leg plan holds the burn-point apsis only to first order: say how far it moved."""
    if leg.burn_at == "apoapsis":
        moved = after.apoapsis_radius_m - before.apoapsis_radius_m
        name = "apoapsis"
    elif leg.burn_at == "periapsis":
        moved = after.periapsis_radius_m - before.periapsis_radius_m
        name = "periapsis"
    else:
        return
    if abs(moved) > 1000.0:
        warnings.append(f"the {name} moves by {moved / 1e3:+.2f} km over the burns (finite-burn "
                        "effect); use target kind \"apsides\" to hold it")


def _renumber(burns, first_index):
    from dataclasses import replace

    return [replace(b, index=first_index + k) for k, b in enumerate(burns)]


@dataclass
class _Snapshot:
    """Where the campaign stood before a burn: state, time, mean orbit."""

    y: np.ndarray
    t_s: float
    mean: MeanOrbit
    samples: tuple | None = None  # (times from t_s, states) of the revolution after t_s


class _Campaign:
    """Flies the legs one burn at a time (scratch state of one planning run)."""

    def __init__(self, sc: Scenario, fl: _Flight, engine: _Engine, veh, warnings, earliest, node_plan=False):
        self.sc = sc
        self.fl = fl
        self.engine = engine
        self.warnings = warnings
        self.earliest = earliest
        self.ran_dry = False
        self.final_y = None
        self.final_mean = None
        self.dry_floor = veh.dry_mass_kg + veh.unusable_kg
        self.limit_s = veh.max_burn_duration_s
        self.limit_arc = veh.max_burn_arc_rad
        self._offsets: dict = {}
        self._warm: dict = {}
        self._shifts: dict = {}  # centre-time shifts solved for (leg, placement), s
        # plane change from an inclined (near-)circular orbit: the first leg's burns are centred
        # on the first node after the lead time (the transfer's apsides then lie on the nodes and
        # later legs burn at apsides as usual)
        self.node_plan = node_plan
        self.first_node: str | None = None
        # a (nearly) circular target: the last burn's centre time is solved too (see _fly_last)
        t = sc.target
        self.round_target = (t.periapsis_radius_m is not None and t.apoapsis_radius_m is not None
                             and (t.apoapsis_radius_m - t.periapsis_radius_m)
                             < ROUND_TARGET_E * (t.apoapsis_radius_m + t.periapsis_radius_m))
        self.last_leg = -1

    # -- legs ------------------------------------------------------------------------------
    def fly_legs(self, legs, snap: "_Snapshot", circular):
        self.last_leg = len(legs) - 1
        self._check_safe(snap.mean, "the current orbit")
        if not legs:
            self.final_y, self.final_mean = snap.y, snap.mean
            self.warnings.append("the orbit already meets the target: no burn is needed")
            return []
        burns: list[PlannedBurn] = []
        snapshots: list[_Snapshot] = []
        for g, leg in enumerate(legs):
            group, group_snaps, snap = self._fly_leg(g, leg, snap, circular and g == 0, legs)
            if g == len(legs) - 2 and not self.ran_dry:
                group, group_snaps, snap = self._anticipate(legs, group, group_snaps, snap)
            burns.extend(group)
            snapshots.extend(group_snaps)
            if self.ran_dry:
                break
        if len(legs) >= 2 and not self.ran_dry:
            burns, snapshots, snap = self._trim(legs, burns, snapshots, snap)
        for b in burns:
            self._check_limits(b)
        worst: dict = {}
        for b in burns:
            if b.goal_i_rad is not None and b.node_offset_rad > NODE_OFFSET_LIMIT_RAD:
                worst[b.leg] = max(worst.get(b.leg, 0.0), b.node_offset_rad)
        for g, off in sorted(worst.items()):
            self.warnings.append(f"plane-change burns of leg {g + 1} are centred up to {math.degrees(off):.1f} deg "
                                 "from a node: part of their push turns the line of nodes")
        self.final_y, self.final_mean = snap.y, snap.mean
        return burns

    def _split_count(self, mass_kg: float, dv_leg: float, r_b: float, r_other: float, r_goal: float) -> int:
        """Smallest N whose longest burn keeps within both vehicle limits (see module notes).

        The N burns of a leg deliver equal delta-v, so the first, at the highest mass, is the
        longest; its arc is judged at the faster of the burn point's angular rates on the
        leg's start and end orbits (v / r at an apsis).
        """
        split = self.sc.options.split
        if isinstance(split, int):
            return split
        if split == "off":
            return 1
        mu = self.sc.body.mu_m3_s2
        m = mass_kg
        rate = max(vis_viva_speed(r_b, 0.5 * (r_b + r_other), mu),
                   vis_viva_speed(r_b, 0.5 * (r_b + r_goal), mu)) / r_b
        lim_d, lim_arc = self.limit_s * SPLIT_MARGIN, self.limit_arc * SPLIT_MARGIN
        total = self.engine.duration_for_dv(m, dv_leg)
        need = max(total / lim_d, total * rate / lim_arc, 1.0)  # a lower bound: D1 >= total / N
        if need > MAX_SPLIT:
            raise PlanningError(
                f"a leg of {dv_leg:.1f} m/s would need {need:.3g} burns to keep within the vehicle's "
                f"burn limits (at most {MAX_SPLIT} per leg): the thrust of {self.engine.thrust_n:.3g} N "
                "is too low for this change")
        n = int(math.ceil(need - 1e-9))
        while n < MAX_SPLIT:
            first = self.engine.duration_for_dv(m, dv_leg / n)
            if first <= lim_d and first * rate <= lim_arc:
                break
            n += 1
        return n

    def _fly_leg(self, g: int, leg: Leg, snap: _Snapshot, circular: bool, legs=()):
        """Fly one leg; under ``split = "auto"`` a leg whose flown burns break a vehicle limit
        (the split count is an impulsive estimate) is flown again with one burn more."""
        n_force = None
        while True:
            saved = ({k: list(v) for k, v in self._offsets.items()}, dict(self._warm), len(self.warnings),
                     self.first_node)
            burns, snaps, after = self._fly_leg_once(g, leg, snap, circular, legs, n_force)
            if (self.sc.options.split != "auto" or self.ran_dry or len(burns) >= MAX_SPLIT
                    or all(self._within_limits(b) for b in burns)):
                return burns, snaps, after
            self._offsets, self._warm, self.first_node = saved[0], saved[1], saved[3]
            del self.warnings[saved[2]:]
            n_force = len(burns) + 1

    def _within_limits(self, b: PlannedBurn) -> bool:
        return (b.duration_s <= self.limit_s * (1.0 + 1e-9)
                and b.arc_rad <= self.limit_arc * (1.0 + 1e-9))

    def _fly_leg_once(self, g: int, leg: Leg, snap: _Snapshot, circular: bool, legs=(), n_force=None):
        mu = self.sc.body.mu_m3_s2
        r_b, r_o = _leg_radii(leg, (snap.mean.periapsis_radius_m, snap.mean.apoapsis_radius_m))
        dv_leg = apsis_burn_dv(r_b, r_o, leg.goal_radius_m, mu)
        dv_total = abs(dv_leg)
        if leg.i_after_rad is not None:
            from .impulsive import plane_change_dv

            dv_total = plane_change_dv(float(vis_viva_speed(r_b, 0.5 * (r_b + r_o), mu)),
                                       float(vis_viva_speed(r_b, 0.5 * (r_b + leg.goal_radius_m), mu)),
                                       abs(leg.i_after_rad - leg.i_before_rad))
        n = self._split_count(float(snap.y[6]), dv_total, r_b, r_o, leg.goal_radius_m) if n_force is None \
            else n_force
        m = float(snap.y[6])
        per_burn_s = min(self.engine.duration_for_dv(m, dv_total / n),
                         max(m - self.dry_floor, 0.0) / self.engine.mdot_kg_s)
        period_s = TWO_PI * math.sqrt(snap.mean.a_m ** 3 / mu)
        if per_burn_s > period_s:
            # an apsis-centred burn longer than an orbit is no apsis burn (and would be flown
            # for as long as it lasts, years at micronewtons): refuse instead
            raise PlanningError(
                f"a burn of leg {g + 1} would last {per_burn_s:.3g} s, longer than one orbit "
                f"({period_s:.0f} s): the thrust of {self.engine.thrust_n:.3g} N is too low for "
                "burns centred on an apsis")
        goals = [opposite_apsis_after(r_b, r_o, dv_leg * k / n, mu) for k in range(1, n)]
        goals.append(leg.goal_radius_m)
        later = leg.burn_at if leg.burn_at != "any" else ("periapsis" if leg.sense > 0 else "apoapsis")
        burns, snaps = [], []
        for k, goal in enumerate(goals):
            if self.node_plan and g == 0:  # every pass of the first leg at the same node
                placement = "node" if self.first_node is None else self.first_node
            else:
                placement = "any" if (k == 0 and circular) else later
            i_goal = None
            if leg.i_after_rad is not None:
                i_goal = (leg.i_after_rad if k == n - 1
                          else leg.i_before_rad + (leg.i_after_rad - leg.i_before_rad) * (k + 1) / n)
            if k == n - 1 and k > 0 and len(legs) >= 2 and g == len(legs) - 2:
                # the last burn of the second-last leg: aim off by the last leg's expected drift
                # of its burn point, measured on this leg's burns so far (no re-fly needed)
                r_b_last = goal
                r_o_last = r_b
                a_last = 0.5 * (r_b_last + r_o_last)
                drift = self._predicted_drift(legs, burns, snaps, r_b_last, r_o_last,
                                              float(snap.y[6]), a_last)
                if drift is not None and abs(drift) >= 0.5 * TARGET_TOLERANCE_M:
                    goal -= drift
            snaps.append(snap)
            tol = GOAL_TOLERANCE_M if k == len(goals) - 1 else INTERMEDIATE_TOLERANCE_M
            if self.round_target and g == self.last_leg and k == len(goals) - 1:
                burn, snap = self._fly_last(g, placement, goal, leg.sense, snap, tol, i_goal)
            elif self.node_plan and g == 0 and self.last_leg >= 1 and k == len(goals) - 1:
                burn, snap = self._fly_onto_nodes(g, placement, goal, leg.sense, snap, tol, i_goal)
            else:
                burn, snap = self._fly_burn(g, placement, goal, leg.sense, snap, tol, i_goal)
            burns.append(burn)
            if self.ran_dry:
                break
        return burns, snaps, snap

    def _predicted_drift(self, legs, group, snaps, r_b, r_o, mass_kg, a_m) -> float | None:
        """How far the last leg's finite burns will move the radius of their burn point, m.

        Each finite tangential burn centred on an apsis moves that apsis by close to
        c * sense * dv * arc^2 (a second-order effect of the arc, like the cosine loss); c is
        measured on the burns of the second-last leg flown so far (``group``, with the
        snapshots before them) and applied to the last leg, whose burn point is at ``r_b``
        and opposite apsis at ``r_o``.  ``None`` when nothing was measured.
        """
        coef = []
        for b, pre in zip(group, snaps):
            if b.arc_rad > 1e-3 and b.dv_m_s > 1e-3:  # a tiny burn measures nothing but noise
                before = _radius_toward(pre.mean, b.centre_direction)
                coef.append((b.after_radius_at_burn_point_m - before)
                            / (b.sense * b.dv_m_s * b.arc_rad ** 2))
        if not coef:
            return None
        last = legs[-1]
        mu = self.sc.body.mu_m3_s2
        dv_last = abs(apsis_burn_dv(r_b, r_o, last.goal_radius_m, mu))
        lim_n = self._split_count(mass_kg, dv_last, r_b, r_o, last.goal_radius_m)
        arc = self.engine.duration_for_dv(mass_kg, dv_last / lim_n) * vis_viva_speed(r_b, a_m, mu) / r_b
        return float(np.mean(coef)) * last.sense * dv_last * arc ** 2

    def _anticipate(self, legs, group, snaps, snap):
        """After a second-last leg of a single burn: re-fly it aimed so that the last leg's
        drift (see :meth:`_predicted_drift`) leaves the burn point at the target.  (A split
        leg aims its last burn so before flying it, in :meth:`_fly_leg`.)"""
        if len(group) != 1:
            return group, snaps, snap
        last = legs[-1]
        r_b, r_o = _leg_radii(last, (snap.mean.periapsis_radius_m, snap.mean.apoapsis_radius_m))
        drift = self._predicted_drift(legs, group, snaps, r_b, r_o, float(snap.y[6]), snap.mean.a_m)
        if drift is None or abs(drift) < 0.5 * TARGET_TOLERANCE_M:
            return group, snaps, snap
        prev, restart = group[-1], snaps[-1]
        history = self._offsets.get((prev.leg, prev.placement))
        if history and len(history) >= 2:
            history[-2:] = [history[-1], history[-1]]  # same pass again: reuse its offset
        new_prev, snap = self._fly_burn(prev.leg, prev.placement, legs[-2].goal_radius_m - drift,
                                        prev.sense, restart, GOAL_TOLERANCE_M, prev.goal_i_rad,
                                        self._shifts.get((prev.leg, prev.placement), 0.0))
        return group[:-1] + [new_prev], snaps, snap

    def _trim(self, legs, burns, snapshots, snap):
        """Iterate the goal of the second-last leg's last burn until the final orbit's radius at
        the last leg's burn point equals the second-last leg's goal (fixed-point iteration)."""
        g_prev, g_last = len(legs) - 2, len(legs) - 1
        desired = legs[g_prev].goal_radius_m
        for _ in range(8):
            centre = np.asarray(next(b for b in burns if b.leg == g_last).centre_direction)
            err = _radius_toward(snap.mean, centre) - desired
            err_other = _radius_toward(snap.mean, -centre) - legs[g_last].goal_radius_m
            if abs(err) <= TARGET_TOLERANCE_M and abs(err_other) <= TARGET_TOLERANCE_M:
                return burns, snapshots, snap
            idx = max(k for k, b in enumerate(burns) if b.leg == g_prev)
            prev, restart = burns[idx], snapshots[idx]
            new_prev, snap1 = self._fly_burn(g_prev, prev.placement, prev.goal_radius_m - err,
                                             prev.sense, restart, GOAL_TOLERANCE_M, prev.goal_i_rad,
                                             self._shifts.get((prev.leg, prev.placement), 0.0))
            group, group_snaps, snap = self._fly_leg(g_last, legs[g_last], snap1, False)
            burns = burns[:idx] + [new_prev] + group
            snapshots = snapshots[:idx] + [restart] + group_snaps
            if self.ran_dry:
                break
        self.warnings.append(f"final orbit misses the target by more than {TARGET_TOLERANCE_M:.0f} m "
                             "after trimming")
        return burns, snapshots, snap

    # -- one burn --------------------------------------------------------------------------
    def _fly_last(self, g, placement, goal, sense, snap, tolerance_m, i_goal):
        """The last burn of a plan to a (nearly) circular orbit: duration *and* centre time.

        A long finite burn turns the line of apsides a little (the mass, and so the
        acceleration, and the angular rate change along the arc), leaving an eccentricity
        across the burn line that radii along it cannot see: a few kilometres of apsis error
        for a circularising burn tens of degrees long.  The burn's centre is shifted in time
        (secant method on that cross-line eccentricity component, two-body estimate of the
        slope: shifting by dt turns the burn's eccentricity change by n dt) until the component
        is below ``TARGET_TOLERANCE_M / 4`` of radius.  A burn that carries a plane change
        moves by at most ``NODE_OFFSET_LIMIT_RAD`` of travel, and not at all for a goal
        inclination near 0 or 180 deg (it must stay on the node: see :meth:`_fly_onto_nodes`).
        """
        def residual(burn, after):
            across = _unit(np.cross(_orbit_normal(after.mean), burn.centre_direction))
            return float(np.dot(_eccentricity_vector(after.mean), across)) * after.mean.a_m

        def slope(burn, after):
            de = float(np.linalg.norm(_eccentricity_vector(after.mean) - _eccentricity_vector(snap.mean)))
            return de * after.mean.a_m * _angular_rate(burn.state_before)

        if placement in ("any", "node") or (
                i_goal is not None and min(i_goal, math.pi - i_goal) < EQUATORIAL_GOAL_RAD):
            return self._fly_burn(g, placement, goal, sense, snap, tolerance_m, i_goal)
        # a plane-change burn may leave its node by a little only
        return self._fly_shifted(g, placement, goal, sense, snap, tolerance_m, i_goal, residual, slope,
                                 None if i_goal is None else NODE_OFFSET_LIMIT_RAD)

    def _fly_onto_nodes(self, g, placement, goal, sense, snap, tolerance_m, i_goal):
        """The last burn of a plane change's first leg (flown from a node): centre time too.

        The later legs burn at apsides of the transfer orbit, which should lie on the line of
        nodes so that their share of the plane change is made at a node (and a goal
        inclination below the burn point's latitude, e.g. an equatorial target, can be met at
        all).  A finite burn puts the new periapsis slightly off the node it was centred on;
        the centre is shifted in time (secant on a * sin(argp) after the burn, slope a n
        cos(argp)) by at most ``NODE_OFFSET_LIMIT_RAD`` of orbit travel.
        """
        def residual(burn, after):
            return math.sin(after.mean.argp_rad) * after.mean.a_m

        def slope(burn, after):
            return math.cos(after.mean.argp_rad) * after.mean.a_m * _angular_rate(burn.state_before)

        return self._fly_shifted(g, placement, goal, sense, snap, tolerance_m, i_goal, residual, slope,
                                 NODE_OFFSET_LIMIT_RAD)

    def _fly_shifted(self, g, placement, goal, sense, snap, tolerance_m, i_goal, residual, slope, max_turn):
        """Fly a burn, then shift its centre time (secant) until ``residual`` (m) is below
        ``TARGET_TOLERANCE_M / 4``; the shift found is kept for re-flies of the same burn."""
        key = (g, placement)
        saved = (list(self._offsets.get(key, [])), self._warm.get(key), self.first_node)

        def fly(shift):
            self._offsets[key] = list(saved[0])
            if saved[1] is None:
                self._warm.pop(key, None)
            else:
                self._warm[key] = saved[1]
            self.first_node = saved[2]
            burn, after = self._fly_burn(g, placement, goal, sense, snap, tolerance_m, i_goal, shift)
            return burn, after, residual(burn, after)

        burn, after, f0 = fly(0.0)
        tol = 0.25 * TARGET_TOLERANCE_M
        if self.ran_dry or abs(f0) <= tol:
            return burn, after
        k0 = slope(burn, after)
        rate = _angular_rate(burn.state_before)
        if k0 == 0.0 or rate <= 0.0:
            return burn, after
        x0, x1 = 0.0, -f0 / k0
        best = (abs(f0), 0.0, burn, after)
        for _ in range(6):
            if max_turn is not None and abs(x1) * rate > max_turn:
                break
            burn1, after1, f1 = fly(x1)
            if abs(f1) < best[0]:
                best = (abs(f1), x1, burn1, after1)
            if abs(f1) <= tol or self.ran_dry or f1 == f0:
                break
            x0, f0, x1 = x1, f1, x1 - f1 * (x1 - x0) / (f1 - f0)
        shift = best[1]
        burn, after, _ = fly(shift)  # fly the best again: the planner's per-pass state follows it
        self._shifts[(g, burn.placement)] = shift
        return burn, after

    def _centre_time(self, placement: str, snap: _Snapshot, t_pre: float) -> float:
        not_before = max(snap.t_s, self.earliest)
        if placement == "any":
            return not_before + t_pre
        if placement in ("node", "ascending", "descending"):
            # "node": the first node (either) with the ignition after not_before
            m = snap.mean
            t_asc, t_desc = m.time_to_arglat(0.0), m.time_to_arglat(math.pi)
            step = 0.5 * m.nodal_period_s if placement == "node" else m.nodal_period_s
            t_c = snap.t_s + {"node": min(t_asc, t_desc), "ascending": t_asc, "descending": t_desc}[placement]
            while t_c - t_pre < not_before:
                t_c += step
            return t_c
        t_c = snap.t_s + snap.mean.time_to_apsis(placement)
        period = snap.mean.anomalistic_period_s
        while t_c - t_pre < not_before:
            t_c += period
        return t_c

    def _fly_burn(self, g: int, placement: str, goal: float, sense: int, snap: _Snapshot,
                  tolerance_m: float = GOAL_TOLERANCE_M, i_goal: float | None = None, shift_s: float = 0.0):
        if i_goal is not None:
            return self._fly_plane_burn(g, placement, goal, snap, tolerance_m, i_goal, shift_s)
        body, eng, fl = self.sc.body, self.engine, self.fl
        mu = body.mu_m3_s2
        m0 = float(snap.y[6])
        mean = snap.mean
        if placement == "any":
            r_b = r_o = 0.5 * (mean.periapsis_radius_m + mean.apoapsis_radius_m)
        else:
            r_b, r_o = _leg_radii(Leg(placement, goal, sense), (mean.periapsis_radius_m, mean.apoapsis_radius_m))
        dv_imp = abs(apsis_burn_dv(r_b, r_o, goal, mu))
        d_max = (m0 - self.dry_floor) / eng.mdot_kg_s
        if d_max <= 0.0:
            self.ran_dry = True
            d_max = 1e-3
        d0 = min(max(eng.duration_for_dv(m0, dv_imp), 1e-3), d_max)
        t_pre0 = eng.pre_apsis_time(m0, d0)
        t_c = self._centre_time(placement, snap, t_pre0) + shift_s
        pad = 0.5 * t_pre0 + 1.0
        t_anchor = max(snap.t_s, t_c - t_pre0 - pad)
        y_anchor = fl.coast_from(snap, t_anchor)
        y_centre = fl.coast_from(snap, t_c)
        centre_dir = _unit(y_centre[:3])
        if placement == "any":
            # the impulsive estimate from the radius actually found at the burn point
            r_b = _radius_toward(mean, centre_dir)
            r_o = _radius_toward(mean, -centre_dir)
            dv_imp = abs(apsis_burn_dv(r_b, r_o, goal, mu))
            d0 = min(max(eng.duration_for_dv(m0, dv_imp), 1e-3), d_max)
        # raise or lower as the goal asks (a trimmed goal may cross the current radius)
        sense = 1 if goal >= r_o else -1
        if self.sc.options.attitude == "inertial":
            direction = tuple(float(c) for c in sense * _unit(y_centre[3:6]))
        else:
            direction = (float(sense), 0.0, 0.0)
        thrust = Thrust(eng.thrust_n, eng.mdot_kg_s, self.sc.options.attitude, direction)

        cache = {}

        def trial(duration):
            """Fly the burn for ``duration`` from the right ignition: (duration, t_ign, y_ign, y_cut)."""
            duration = float(min(max(duration, 1e-3), d_max))
            if duration not in cache:
                if placement == "any":  # no apsis to centre on: ignite at the earliest moment
                    t_ign = max(snap.t_s, self.earliest)
                else:
                    t_ign = t_c - eng.pre_apsis_time(m0, duration)
                y_ign = (fl.coast_from(snap, t_ign) if snap.samples is not None
                         else fl.coast(y_anchor, t_ign - t_anchor) if t_ign >= t_anchor
                         else fl.coast(snap.y, t_ign - snap.t_s))
                cache[duration] = (duration, t_ign, y_ign, fl.burn(y_ign, duration, thrust))
            return cache[duration]

        def osc_radius(duration):
            return _radius_toward(_osculating(trial(duration)[3], mu), -centre_dir)

        full_cache = {}

        def full(duration):
            """Mean orbit after the burn: (true miss, offset mean - osculating, mean, samples)."""
            duration = trial(duration)[0]
            if duration not in full_cache:
                mean_after, samples = fl.mean(trial(duration)[3])
                r_mean = _radius_toward(mean_after, -centre_dir)
                full_cache[duration] = (r_mean - goal, r_mean - osc_radius(duration), mean_after, samples)
            return full_cache[duration]

        # Secant iteration on the osculating radius plus a model of the (mean - osculating)
        # offset, linear in the duration (short-period terms change little between trials),
        # checked against the full mean orbit, whose offset then corrects the model.  The model
        # starts from the previous passes of this apsis (extrapolated) or, on a first pass, from
        # the unburned orbit at the burn point.  Under "two-body" the offset is 0.
        eps = max(1e-3 * dv_imp, 1e-3)
        slope_dv = (opposite_apsis_after(r_b, r_o, sense * (dv_imp + eps), mu)
                    - opposite_apsis_after(r_b, r_o, sense * dv_imp, mu)) / eps
        slope = slope_dv * eng.thrust_n / m0 * sense  # metres of goal radius per second of burn
        two_body = self.sc.model == "two-body"
        key = (g, placement)
        history = self._offsets.setdefault(key, [])
        warm = self._warm.get(key)
        d_imp = eng.duration_for_dv(m0, dv_imp)
        if warm is not None and 0.5 < warm[0] < 2.0:  # the previous pass knows the finite-burn stretch
            d0 = min(max(d_imp * warm[0], 1e-3), d_max)
            slope = warm[1] if warm[1] * slope > 0.0 else slope
        k_offset = warm[2] if warm is not None and 0.5 < warm[0] < 2.0 else 0.0
        if two_body:
            offset = 0.0
        elif len(history) >= 2:  # the offset drifts smoothly from pass to pass: extrapolate
            offset = 2.0 * history[-1] - history[-2]
        elif history:
            offset = history[-1]
        else:
            offset = full(d0)[1]
        model = [offset, d0, k_offset]  # offset(D) = model[0] + model[2] (D - model[1])

        def approx_miss(duration):
            return osc_radius(duration) + model[0] + model[2] * (duration - model[1]) - goal

        x = d0
        best_x, best_miss = d0, math.inf
        measured_slope = None
        fulls = []
        for _outer in range(5):
            x0, f0 = x, approx_miss(x)
            x1 = x0 - f0 / slope if slope != 0.0 else x0 * 1.01
            for _ in range(12):
                if abs(f0) <= 0.3 * tolerance_m:
                    x1 = x0
                    break
                x1 = min(max(x1, 1e-3), d_max)
                f1 = approx_miss(x1)
                if abs(f1) <= 0.3 * tolerance_m or x1 == x0:
                    break
                denom = f1 - f0
                if denom != 0.0:
                    measured_slope = denom / (x1 - x0)
                x_next = x1 - f1 * (x1 - x0) / denom if denom != 0.0 else x1 - f1 / slope
                x0, f0, x1 = x1, f1, x_next
            x = min(max(x1, 1e-3), d_max)
            if two_body:
                miss_true = osc_radius(x) - goal
            else:
                miss_true, off, _, _ = full(x)
                fulls.append((x, off))
                if len(fulls) >= 2 and abs(fulls[-1][0] - fulls[-2][0]) > 1e-6:
                    model[2] = (fulls[-1][1] - fulls[-2][1]) / (fulls[-1][0] - fulls[-2][0])
                model[0], model[1] = off, x
            if abs(miss_true) < abs(best_miss):
                best_x, best_miss = x, miss_true
            if abs(miss_true) <= tolerance_m or x >= d_max - 1e-9:
                break
        if not two_body:
            history.append(model[0] + model[2] * (best_x - model[1]))
        if d_imp > 0.0:
            self._warm[key] = (best_x / d_imp, measured_slope or slope, model[2])
        duration, t_ign, y_ign, y_cut = trial(best_x)
        if two_body:
            m_after, samples = _osculating_mean(y_cut, body), None
        else:
            _, _, m_after, samples = full(best_x)
        miss = best_miss
        if abs(miss) > tolerance_m:
            if duration >= d_max - 1e-6:
                self.ran_dry = True
                self.warnings.append(f"propellant runs out during a burn of leg {g + 1}: its goal "
                                     f"radius is missed by {abs(miss) / 1e3:.3f} km")
            elif abs(miss) > 0.5 * TARGET_TOLERANCE_M:  # metre-level misses are trimmed later
                self.warnings.append(f"a burn of leg {g + 1} misses its goal radius by {abs(miss):.0f} m")
        apsis = placement if placement != "any" else ("periapsis" if sense > 0 else "apoapsis")
        if placement == "any":
            t_c = t_ign + eng.pre_apsis_time(m0, duration)
        burn = self._record(g, placement, apsis, t_c, shift_s, t_ign, duration, dv_imp, y_ign, y_cut, direction,
                            sense, goal, m_after, centre_dir)
        self._check_safe(m_after, f"the orbit after a burn of leg {g + 1}")
        return burn, _Snapshot(np.asarray(y_cut, float), t_ign + duration, m_after, samples)

    def _fly_plane_burn(self, g: int, placement: str, goal: float, snap: _Snapshot, tolerance_m: float,
                        i_goal: float, shift_s: float = 0.0):
        """A burn pitched out of the orbit plane (see module notes, item 4).

        Unknowns are the along-track and normal "burn seconds" p = D cos(beta) and
        q = D sin(beta) (D the duration, beta the angle out of the plane, positive toward the
        orbit normal h = r x v); the map from (p, q) to the two misses (radius opposite the burn
        point, m; inclination times the burn radius, m) is nearly diagonal, which keeps Newton's
        method (forward-difference Jacobian, then Broyden updates, step halving) to a few flights.
        Near an equatorial goal the centre time (third) and, for the last burn to a round orbit,
        a radial component (fourth) join them; see the comments at ``three`` and ``four``.
        The impulsive start: the velocity turned from v1 to v2 through the burn's share di;
        along-track v2 cos(di) - v1, normal v2 sin(di) signed by the node (a push along +h
        raises the inclination at the ascending node, lowers it at the descending one).
        """
        from .impulsive import plane_change_dv

        body, eng, fl = self.sc.body, self.engine, self.fl
        mu = body.mu_m3_s2
        m0 = float(snap.y[6])
        mean = snap.mean
        free = placement in ("any", "node", "ascending", "descending")
        if free:
            r_b = r_o = 0.5 * (mean.periapsis_radius_m + mean.apoapsis_radius_m)
        else:
            r_b, r_o = _leg_radii(Leg(placement, goal, 1), (mean.periapsis_radius_m, mean.apoapsis_radius_m))
        d_max = (m0 - self.dry_floor) / eng.mdot_kg_s
        if d_max <= 0.0:
            self.ran_dry = True
            d_max = 1e-3

        def impulsive(r_b, r_o):
            v1 = float(vis_viva_speed(r_b, 0.5 * (r_b + r_o), mu))
            v2 = float(vis_viva_speed(r_b, 0.5 * (r_b + goal), mu))
            di = i_goal - mean.i_rad
            return v1, v2, di, plane_change_dv(v1, v2, abs(di))

        v1, v2, di, dv_imp = impulsive(r_b, r_o)
        d0 = min(max(eng.duration_for_dv(m0, dv_imp), 1e-3), d_max)
        t_pre0 = eng.pre_apsis_time(m0, d0)
        t_c = self._centre_time(placement, snap, t_pre0) + shift_s
        y_centre = fl.coast_from(snap, t_c)
        lat = math.asin(min(1.0, abs(float(y_centre[2])) / float(np.linalg.norm(y_centre[:3]))))
        if lat > min(i_goal, math.pi - i_goal) and math.sin(mean.i_rad) >= EQUATORIAL_I_RAD:
            # no plane through this point has the goal inclination (a plane through latitude
            # lat has i >= lat): centre on the equator crossing nearby (Newton on z(t))
            quarter = 0.25 * mean.nodal_period_s
            for _ in range(6):
                z, vz = float(y_centre[2]), float(y_centre[5])
                if vz == 0.0 or abs(z / vz) > quarter or abs(z) < 1e-6:
                    break
                t_c -= z / vz
                y_centre = fl.coast_from(snap, t_c)
        centre_dir = _unit(y_centre[:3])
        t_hat = _unit(y_centre[3:6])
        h_hat = _unit(np.cross(y_centre[:3], y_centre[3:6]))
        if free:
            r_b = _radius_toward(mean, centre_dir)
            r_o = _radius_toward(mean, -centre_dir)
            v1, v2, di, dv_imp = impulsive(r_b, r_o)
            d0 = min(max(eng.duration_for_dv(m0, dv_imp), 1e-3), d_max)
        if math.sin(mean.i_rad) < EQUATORIAL_I_RAD:
            node_sign = 1.0
        else:
            node = np.array([math.cos(mean.raan_rad), math.sin(mean.raan_rad), 0.0])
            node_sign = 1.0 if float(np.dot(centre_dir, node)) >= 0.0 else -1.0
        offset = _node_offset(mean, centre_dir)
        if placement == "node":  # from now on this burn is known by its node (re-flies keep it)
            placement = "ascending" if node_sign > 0 else "descending"
            if self.first_node is None:
                self.first_node = placement
        # The plane turns about the burn point's radius r_c: its tilt phi about r_c (measured
        # from north, positive by the right-hand rule about r_c; a push along +h raises phi)
        # is smooth through an equatorial plane, where the inclination is not.  At a node
        # phi = +-i; elsewhere cos i = cos(latitude) cos(phi).
        z_perp = np.array([0.0, 0.0, 1.0]) - centre_dir[2] * centre_dir
        cos_lat = float(np.linalg.norm(z_perp))
        z_perp = z_perp / cos_lat if cos_lat > 1e-9 else _unit(np.cross(centre_dir, [1.0, 0.0, 0.0]))
        w_axis = np.cross(centre_dir, z_perp)

        def tilt(normal):
            return math.atan2(float(np.dot(normal, w_axis)), float(np.dot(normal, z_perp)))

        phi_now = tilt(_orbit_normal(mean))
        phi_goal = math.copysign(math.acos(max(-1.0, min(1.0, math.cos(i_goal) / max(cos_lat, 1e-9)))),
                                 phi_now if phi_now != 0.0 else 1.0)
        # Away from the equator the inclination itself is the smooth measure (and the mean
        # plane need not hold the osculating burn point exactly, which blurs phi under J2).
        use_tilt = min(i_goal, math.pi - i_goal) < EQUATORIAL_GOAL_RAD
        if use_tilt:
            dphi = math.remainder(phi_goal - phi_now, 2.0 * math.pi)
            dv_imp = plane_change_dv(v1, v2, abs(dphi))
            d0 = min(max(eng.duration_for_dv(m0, dv_imp), 1e-3), d_max)
        else:  # the push along +h turns phi up; phi and i move together where sign(phi) = sign(cos u)
            dphi = math.copysign(abs(di) / max(cos_lat, 0.1), (phi_goal - phi_now) or di)
        dv_t = v2 * math.cos(dphi) - v1
        dv_n = v2 * math.sin(dphi)
        norm = math.hypot(dv_t, dv_n)
        x = (np.array([d0 * dv_t / norm, d0 * dv_n / norm]) if norm > 0.0 else np.array([1e-3, 0.0]))
        # Near an equatorial goal the plane must also not tilt about the along-track axis: a
        # long burn spread over its arc turns the plane a little about it, and an inclination
        # of zero shows every such turn.  The burn's centre time is then a third unknown and
        # the normal's component along r_c a third miss (the node stays at the burn point).
        # (A burn not ignited at its centre, "any", has no such freedom.)
        three = use_tilt and placement != "any"
        if three:
            x = np.append(x, 0.0)
        # ... and when that burn also ends the plan on a round orbit, it cannot sit on both the
        # node and the apsis (J2 turns the apsides between the legs): a radial thrust component
        # (fourth unknown) turns the line of apsides, nulling the eccentricity across the burn
        # line (fourth miss, as in _fly_last).
        four = three and self.round_target and g == self.last_leg and tolerance_m == GOAL_TOLERANCE_M
        if four:
            x = np.append(x, 0.0)
        b_hat = np.cross(t_hat, h_hat)
        two_body = self.sc.model == "two-body"
        t_start = max(snap.t_s, self.earliest)
        cache = {}
        # The last burn of a plan's last leg flown from a node (a single-apsis target reached
        # over several passes of one node): the apsis it moves drifts off the line through the
        # node as J2 turns the argument of periapsis, so it aims at that apsis's radius.
        aim_apsis = (g == self.last_leg and placement in ("ascending", "descending")
                     and tolerance_m == GOAL_TOLERANCE_M and not self.round_target)

        def flight(xv):
            p, q = float(xv[0]), float(xv[1])
            extra = float(xv[2]) if len(xv) > 2 else 0.0
            c = float(xv[3]) if len(xv) > 3 else 0.0
            size = math.sqrt(p * p + q * q + c * c)
            duration = min(max(size, 1e-3), d_max)
            comp = (p / size, q / size, c / size) if size > 0.0 else (1.0, 0.0, 0.0)
            key = (duration, comp, extra)
            if key not in cache:
                t_ign = t_start if placement == "any" else t_c + extra - eng.pre_apsis_time(m0, duration)
                y_ign = fl.coast_from(snap, t_ign) if t_ign >= snap.t_s else fl.coast(snap.y, t_ign - snap.t_s)
                if self.sc.options.attitude == "inertial":
                    direction = tuple(float(v) for v in _unit(comp[0] * t_hat + comp[1] * h_hat + comp[2] * b_hat))
                else:  # (along v, along h, along v x h)
                    direction = tuple(float(v) for v in _unit(np.array(comp)))
                thrust = Thrust(eng.thrust_n, eng.mdot_kg_s, self.sc.options.attitude, direction)
                y_cut = fl.burn(y_ign, duration, thrust)
                if two_body:
                    m_after, samples = _osculating_mean(y_cut, body), None
                else:
                    m_after, samples = fl.mean(y_cut)
                di_miss = (math.remainder(tilt(_orbit_normal(m_after)) - phi_goal, 2.0 * math.pi) if use_tilt
                           else m_after.i_rad - i_goal)
                if aim_apsis:  # the apsis itself, wherever J2 has turned it (see below)
                    r_now = m_after.apoapsis_radius_m if goal >= r_b else m_after.periapsis_radius_m
                else:
                    r_now = _radius_toward(m_after, -centre_dir)
                miss = [r_now - goal, di_miss * r_b]
                if three:
                    miss.append(float(np.dot(_orbit_normal(m_after), centre_dir)) * r_b)
                if four:
                    across = _unit(np.cross(_orbit_normal(m_after), centre_dir))
                    miss.append(float(np.dot(_eccentricity_vector(m_after), across)) * m_after.a_m)
                cache[key] = (np.array(miss), duration, comp, t_ign, y_ign, y_cut, direction, m_after, samples,
                              extra)
            return cache[key]

        tol = np.array([tolerance_m] + [max(tolerance_m, 10.0)] * (len(x) - 1))
        f = flight(x)[0]
        best = (float(np.max(np.abs(f) / tol)), x)
        jac = None
        for _it in range(16):
            if np.all(np.abs(f) <= tol):
                break
            fresh = jac is None
            if fresh:
                h = max(1e-3 * float(np.hypot(x[0], x[1])), 1e-3)
                jac = np.empty((len(x), len(x)))
                for j in range(len(x)):
                    xj = x.copy()
                    xj[j] += h if j < 2 else max(h, 0.1)
                    jac[:, j] = (flight(xj)[0] - f) / (xj[j] - x[j])
            try:
                step = np.linalg.solve(jac, -f)
            except np.linalg.LinAlgError:
                step = np.linalg.lstsq(jac, -f, rcond=None)[0]
            lim = 0.5 * max(float(np.hypot(x[0], x[1])), 1.0)
            if float(np.linalg.norm(step)) > lim:  # no wild jumps: at most half the burn per step
                step *= lim / float(np.linalg.norm(step))
            for _ in range(6):
                x_new = x + step
                f_new = flight(x_new)[0]
                if np.linalg.norm(f_new / tol) < np.linalg.norm(f / tol) or np.all(np.abs(f_new) <= tol):
                    break
                step *= 0.5
            else:
                if fresh:  # no progress even along a freshly measured Newton step: stuck
                    break
                jac = None  # the updated Jacobian misled: measure it afresh, stay where we are
                continue
            ds = x_new - x
            if float(np.dot(ds, ds)) > 0.0:
                jac = jac + np.outer(f_new - f - jac @ ds, ds) / float(np.dot(ds, ds))
            x, f = x_new, f_new
            score = float(np.max(np.abs(f) / tol))
            if score < best[0]:
                best = (score, x)
        miss, duration, comp, t_ign, y_ign, y_cut, direction, m_after, samples, extra = flight(best[1])
        if best[0] > 1.0:
            if duration >= d_max - 1e-6:
                self.ran_dry = True
                self.warnings.append(f"propellant runs out during a burn of leg {g + 1}: its goal "
                                     f"radius is missed by {abs(miss[0]) / 1e3:.3f} km")
            elif float(np.max(np.abs(miss))) > 0.5 * TARGET_TOLERANCE_M:
                self.warnings.append(f"a burn of leg {g + 1} misses its goal by {abs(miss[0]):.0f} m in "
                                     f"radius and {math.degrees(abs(miss[1]) / r_b):.4f} deg in inclination")
        sense = 1 if comp[0] >= 0.0 else -1
        apsis = placement if not free else ("periapsis" if goal >= r_b else "apoapsis")
        if placement == "any":
            t_c = t_ign + eng.pre_apsis_time(m0, duration)
        burn = self._record(g, placement, apsis, t_c + extra, shift_s + extra, t_ign, duration, dv_imp, y_ign, y_cut,
                            direction, sense, goal, m_after, centre_dir, goal_i_rad=i_goal,
                            out_of_plane_rad=math.asin(max(-1.0, min(1.0, comp[1]))), node_offset_rad=offset)
        self._check_safe(m_after, f"the orbit after a burn of leg {g + 1}")
        return burn, _Snapshot(np.asarray(y_cut, float), t_ign + duration, m_after, samples)

    def _record(self, g, placement, apsis, t_centre, shift_s, t_ign, duration, dv_imp, y_ign, y_cut, direction,
                sense, goal, m_after, centre_dir, **plane) -> PlannedBurn:
        """The queue entry of a flown burn (``t_centre`` = apsis or node passage + ``shift_s``)."""
        eng = self.engine
        m0, m1 = float(y_ign[6]), float(y_cut[6])
        arc = math.acos(max(-1.0, min(1.0, float(np.dot(_unit(y_ign[:3]), _unit(y_cut[:3]))))))
        return PlannedBurn(
            index=0, leg=g, apsis=apsis, apsis_time_s=t_centre - shift_s, ignition_s=t_ign,
            cutoff_s=t_ign + duration, duration_s=duration, dv_m_s=eng.c_m_s * math.log(m0 / m1),
            impulsive_dv_m_s=dv_imp, propellant_kg=m0 - m1, mass_before_kg=m0, mass_after_kg=m1,
            thrust_n=eng.thrust_n, mdot_kg_s=eng.mdot_kg_s, attitude_mode=self.sc.options.attitude,
            direction=direction, sense=sense, arc_rad=arc, goal_radius_m=goal,
            after_periapsis_radius_m=m_after.periapsis_radius_m, after_apoapsis_radius_m=m_after.apoapsis_radius_m,
            ignition_half_duration_s=t_centre - 0.5 * duration,
            state_before=tuple(map(float, y_ign)), state_after=tuple(map(float, y_cut)),
            centre_direction=tuple(map(float, centre_dir)), placement=placement,
            after_radius_at_burn_point_m=_radius_toward(m_after, centre_dir),
            after_i_rad=m_after.i_rad, centre_shift_s=shift_s, **plane,
        )

    # -- checks ----------------------------------------------------------------------------
    def _check_safe(self, mean: MeanOrbit, what: str) -> None:
        body = self.sc.body
        alt = mean.periapsis_radius_m - body.radius_m
        if alt < body.min_safe_alt_m:
            self.warnings.append(f"periapsis of {what} is {alt / 1e3:.1f} km, below the safe altitude "
                                 f"of {body.min_safe_alt_m / 1e3:.0f} km")

    def _check_limits(self, b: PlannedBurn) -> None:
        over = []
        if b.duration_s > self.limit_s * (1.0 + 1e-9):
            over.append(f"duration {b.duration_s:.0f} s > {self.limit_s:.0f} s")
        if b.arc_rad > self.limit_arc * (1.0 + 1e-9):
            over.append(f"arc {math.degrees(b.arc_rad):.1f} deg > {math.degrees(self.limit_arc):.1f} deg")
        if over:
            why = "split = off" if self.sc.options.split == "off" else f"split = {self.sc.options.split}"
            self.warnings.append(f"a burn of leg {b.leg + 1} exceeds the vehicle limits ({', '.join(over)}; {why})")
