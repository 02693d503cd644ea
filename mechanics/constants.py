"""Physical constants and numerical thresholds shared by the mechanics modules.

References
----------
3rd CGPM (1901), declaration on the unit of mass and the definition of weight: standard
acceleration of gravity g0 = 9.80665 m/s^2 (exact by definition).
"""

#: Standard acceleration of gravity, m/s^2 (exact, 3rd CGPM 1901). Used only to convert
#: specific impulse in seconds to exhaust velocity; it is not the local gravity of any body.
G0_M_S2 = 9.80665

#: Eccentricity below which an orbit is treated as circular for element conversion: the
#: argument of periapsis is set to zero and the true anomaly carries the argument of latitude.
CIRCULAR_E = 1e-9

#: Inclination (rad) within which an orbit is treated as equatorial (i < EQUATORIAL_I_RAD or
#: i > pi - EQUATORIAL_I_RAD): RAAN is set to zero and the argument of periapsis carries the
#: longitude of periapsis (or the true anomaly carries the true longitude when also circular).
EQUATORIAL_I_RAD = 1e-9

#: Eccentricity band around 1 treated as parabolic, which the element set cannot carry.
PARABOLIC_BAND = 1e-10

SECONDS_PER_DAY = 86400.0
