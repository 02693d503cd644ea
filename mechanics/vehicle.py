"""Vehicles: mass budget, thrusters, burn limits and drift tolerances.

Effective thrust along the burn axis = sum(count * thrust * cos(cant)); mass flow =
sum(count * thrust / (isp * g0)).  A canted thruster spends its full flow for the axial part of
its thrust, so the effective specific impulse is effective thrust / (mass flow * g0).

References
----------
Sutton, G. P., Biblarz, O., *Rocket Propulsion Elements*, 9th ed., 2017, eq. 2-5 (mass flow)
and sec. 3.8 (thrust loss of canted nozzles, cos factor).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

from .constants import G0_M_S2


@dataclass(frozen=True)
class Thruster:
    """A set of identical thrusters firing together.

    Attributes
    ----------
    count : int
    thrust_n : float
        Vacuum thrust of one thruster, N.
    isp_s : float
        Vacuum specific impulse, s.
    cant_rad : float
        Angle between each thruster's axis and the burn axis, rad, in [0, pi/2).
    """

    count: int
    thrust_n: float
    isp_s: float
    cant_rad: float = 0.0

    def __post_init__(self) -> None:
        if not isinstance(self.count, int) or isinstance(self.count, bool) or self.count < 1:
            raise ValueError("thrusters.count must be a whole number >= 1")
        if not (math.isfinite(self.thrust_n) and self.thrust_n > 0.0):
            raise ValueError("thrusters.thrust must be positive")
        if not (math.isfinite(self.isp_s) and self.isp_s > 0.0):
            raise ValueError("thrusters.isp must be positive")
        if not (math.isfinite(self.cant_rad) and 0.0 <= self.cant_rad < 0.5 * math.pi - 1e-9):
            raise ValueError("thrusters.cant must be between 0 and 90 deg (exclusive)")

    @property
    def axial_thrust_n(self) -> float:
        return self.count * self.thrust_n * math.cos(self.cant_rad)

    @property
    def mdot_kg_s(self) -> float:
        return self.count * self.thrust_n / (self.isp_s * G0_M_S2)


@dataclass(frozen=True)
class Tolerances:
    """Drift thresholds.  Defaults are common practice starting points; vehicle settings win.

    Attributes
    ----------
    dv_watch, dv_alarm : float
        |delivered / planned delta-v - 1| beyond which a burn is "watch" or "alarm".
    ignition_s : float
        Allowed |actual - planned ignition|, s.
    duration_frac : float
        Allowed |actual / planned duration - 1|.
    isp_frac : float
        Allowed |Isp implied by propellant use / rated effective Isp - 1|.
    """

    dv_watch: float = 0.02
    dv_alarm: float = 0.05
    ignition_s: float = 5.0
    duration_frac: float = 0.02
    isp_frac: float = 0.05

    def __post_init__(self) -> None:
        for name in ("dv_watch", "dv_alarm", "ignition_s", "duration_frac", "isp_frac"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value > 0.0):
                raise ValueError(f"tolerances.{name} must be positive")
        if self.dv_alarm < self.dv_watch:
            raise ValueError("tolerances.dv_alarm must not be below tolerances.dv_watch")


@dataclass(frozen=True)
class Vehicle:
    """A spacecraft's propulsion and mass budget.

    Attributes
    ----------
    name : str
    dry_mass_kg : float
    propellant_kg : float
        Propellant loaded (at the scenario epoch).
    unusable_kg : float
        Residual that cannot be expelled.
    reserve_kg : float
        Held back (disposal, contingencies); plans may not use it.
    thrusters : tuple of Thruster
    max_burn_duration_s : float
        Longest single burn, s (``inf`` for no limit).
    max_burn_arc_rad : float
        Largest orbit arc travelled during one burn, rad (``inf`` for no limit).
    tolerances : Tolerances
    """

    name: str
    dry_mass_kg: float
    propellant_kg: float
    thrusters: tuple
    unusable_kg: float = 0.0
    reserve_kg: float = 0.0
    max_burn_duration_s: float = math.inf
    max_burn_arc_rad: float = math.inf
    tolerances: Tolerances = field(default_factory=Tolerances)

    def __post_init__(self) -> None:
        if not (math.isfinite(self.dry_mass_kg) and self.dry_mass_kg > 0.0):
            raise ValueError("dry_mass must be positive")
        for name in ("propellant_kg", "unusable_kg", "reserve_kg"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value >= 0.0):
                raise ValueError(f"{name.removesuffix('_kg')} must not be negative")
        if self.unusable_kg + self.reserve_kg > self.propellant_kg:
            raise ValueError("unusable_propellant + reserve_propellant exceed the loaded propellant")
        if not self.thrusters:
            raise ValueError("thrusters: at least one [[thrusters]] entry is needed")
        if not (self.max_burn_duration_s > 0.0):
            raise ValueError("limits.max_burn_duration must be positive")
        if not (self.max_burn_arc_rad > 0.0):
            raise ValueError("limits.max_burn_arc must be positive")

    @property
    def thrust_n(self) -> float:
        """Effective thrust along the burn axis, N."""
        return sum(t.axial_thrust_n for t in self.thrusters)

    @property
    def mdot_kg_s(self) -> float:
        """Total propellant mass flow, kg/s."""
        return sum(t.mdot_kg_s for t in self.thrusters)

    @property
    def isp_s(self) -> float:
        """Effective specific impulse along the burn axis, s."""
        return self.thrust_n / (self.mdot_kg_s * G0_M_S2)

    @property
    def wet_mass_kg(self) -> float:
        return self.dry_mass_kg + self.propellant_kg

    @property
    def usable_kg(self) -> float:
        """Loaded minus unusable propellant, kg."""
        return self.propellant_kg - self.unusable_kg

    def to_dict(self) -> dict:
        """Plain JSON-ready dict (an unlimited limit is ``None``)."""
        d = asdict(self)
        d["thrusters"] = [asdict(t) for t in self.thrusters]
        for key in ("max_burn_duration_s", "max_burn_arc_rad"):
            if math.isinf(d[key]):
                d[key] = None
        return d

    @staticmethod
    def from_dict(d: dict) -> "Vehicle":
        d = dict(d)
        for key in ("max_burn_duration_s", "max_burn_arc_rad"):
            if d.get(key) is None:
                d[key] = math.inf
        d["thrusters"] = tuple(Thruster(**t) for t in d["thrusters"])
        d["tolerances"] = Tolerances(**d.get("tolerances", {}))
        return Vehicle(**d)
