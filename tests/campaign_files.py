"""The small two-body campaign several command-line tests share: one vehicle, one scenario.

A 560 kg bus with two 30 N thrusters raising a 500 x 520 km, 51.6 deg orbit; every field can
be changed per test.  Written as files because the tests drive the real `burndesk` command.
"""

from __future__ import annotations

from pathlib import Path

VEHICLE = """
name = "{vehicle_name}"
dry_mass = "500 kg"
propellant = "{propellant}"
unusable_propellant = "0.5 kg"
reserve_propellant = "5 kg"
[[thrusters]]
count = 2
thrust = "30 N"
isp = "230 s"
[limits]
max_burn_duration = "20 min"
"""

SCENARIO = """
name = "{name}"
body = "earth"
vehicle = "vehicle.toml"
epoch = "2027-06-01T00:00:00Z"
[state]
periapsis_alt = "500 km"
apoapsis_alt = "520 km"
i = "51.6 deg"
raan = "20 deg"
argp = "10 deg"
nu = "300 deg"
[target]
kind = "{kind}"
altitude = "{alt}"
[options]
model = "two-body"
attitude = "{attitude}"
lead_time = "10 min"
"""


def write_campaign(folder: Path, *, name: str = "test campaign", kind: str = "circular",
                   alt: str = "700 km", attitude: str = "inertial", propellant: str = "60 kg",
                   file_name: str = "scenario.toml", vehicle_name: str | None = None) -> Path:
    """Write vehicle.toml and the scenario into ``folder``; returns the scenario's path."""
    folder = Path(folder)
    (folder / "vehicle.toml").write_text(VEHICLE.format(vehicle_name=vehicle_name or f"{name} vehicle",
                                                        propellant=propellant))
    path = folder / file_name
    path.write_text(SCENARIO.format(name=name, kind=kind, alt=alt, attitude=attitude))
    return path
