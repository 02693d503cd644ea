"""State forms and conversions: Cartesian r, v <-> classical elements <-> apsis altitudes.

Frame: the central body's inertial equatorial frame (for the Earth, GCRF and EME2000 differ by
milliarcseconds; planning treats them alike).

Singular orbits keep one element set with documented conventions, so that every state converts
both ways without loss:

* circular (``e < CIRCULAR_E``): no periapsis.  ``argp = 0`` and ``nu`` carries the argument of
  latitude u, measured from the ascending node.
* equatorial (``i < EQUATORIAL_I_RAD`` or ``i > pi - EQUATORIAL_I_RAD``): no node.  ``raan = 0``
  and ``argp`` carries the longitude of periapsis, measured from the frame's x axis in the
  direction of motion.
* circular and equatorial: ``raan = argp = 0`` and ``nu`` carries the true longitude.
* hyperbolic (``e > 1``): ``a < 0``; elements are fine, there is no apoapsis and no period.
* parabolic (``|e - 1| < PARABOLIC_BAND``): refused, the set has no finite ``a``.

All functions accept scalars or arrays; vectors have shape (..., 3).

References
----------
Vallado, D. A., *Fundamentals of Astrodynamics and Applications*, 4th ed., 2013, sec. 2.5-2.6,
Algorithms 9 (RV2COE) and 10 (COE2RV), including its conventions for the special cases.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .constants import CIRCULAR_E, EQUATORIAL_I_RAD, PARABOLIC_BAND

TWO_PI = 2.0 * math.pi


def mod_2pi(angle_rad):
    """Angles (rad) wrapped into [0, 2 pi), as an ndarray.

    ``np.mod`` alone returns 2 pi itself for a tiny negative input (-1e-17 mod 2 pi rounds up
    to 2 pi); that value is mapped to 0 so that the documented half-open range holds.
    """
    x = np.mod(np.asarray(angle_rad, dtype=float), TWO_PI)
    return np.where(x >= TWO_PI, 0.0, x)


@dataclass(frozen=True)
class Elements:
    """Classical orbital elements (floats or equally shaped arrays).

    Attributes
    ----------
    a_m : semi-major axis, m (negative for hyperbolic orbits)
    e : eccentricity
    i_rad : inclination, rad, in [0, pi]
    raan_rad : right ascension of the ascending node, rad, in [0, 2 pi)
    argp_rad : argument of periapsis, rad, in [0, 2 pi)
    nu_rad : true anomaly, rad, in [0, 2 pi)

    See the module notes for what ``argp`` and ``nu`` carry on circular and equatorial orbits.
    """

    a_m: float
    e: float
    i_rad: float
    raan_rad: float
    argp_rad: float
    nu_rad: float

    @property
    def p_m(self):
        """Semi-latus rectum a (1 - e^2), m."""
        return self.a_m * (1.0 - self.e * self.e)

    @property
    def arglat_rad(self):
        """Argument of latitude u = argp + nu, rad, in [0, 2 pi)."""
        return mod_2pi(self.argp_rad + self.nu_rad)

    @property
    def periapsis_radius_m(self):
        return self.a_m * (1.0 - self.e)

    @property
    def apoapsis_radius_m(self):
        """Apoapsis radius, m; ``inf`` for an open (hyperbolic) orbit."""
        return np.where(self.e < 1.0, self.a_m * (1.0 + self.e), np.inf)

    def replace(self, **changes) -> "Elements":
        values = {f: getattr(self, f) for f in ("a_m", "e", "i_rad", "raan_rad", "argp_rad", "nu_rad")}
        values.update(changes)
        return Elements(**values)


def _dot(a, b):
    return np.sum(a * b, axis=-1)


def _norm(a):
    return np.sqrt(_dot(a, a))


def cross(a, b):
    """Cross product of (..., 3) arrays (np.cross without its axis bookkeeping, which costs
    more than the arithmetic for a single vector)."""
    a0, a1, a2 = a[..., 0], a[..., 1], a[..., 2]
    b0, b1, b2 = b[..., 0], b[..., 1], b[..., 2]
    return np.stack([a1 * b2 - a2 * b1, a2 * b0 - a0 * b2, a0 * b1 - a1 * b0], axis=-1)


def orbit_kind(e, i_rad):
    """Name the singular case the conventions apply to.

    Returns one of ``"elliptical"``, ``"circular"``, ``"equatorial"``,
    ``"circular-equatorial"`` or ``"hyperbolic"`` (scalar inputs only).
    """
    e = float(e)
    i_rad = float(i_rad)
    if e > 1.0:
        return "hyperbolic"
    circular = e < CIRCULAR_E
    equatorial = i_rad < EQUATORIAL_I_RAD or i_rad > math.pi - EQUATORIAL_I_RAD
    if circular and equatorial:
        return "circular-equatorial"
    if circular:
        return "circular"
    if equatorial:
        return "equatorial"
    return "elliptical"


def rv_to_elements(r_m, v_m_s, mu_m3_s2: float) -> Elements:
    """Classical elements from a Cartesian state.

    Parameters
    ----------
    r_m : array_like, shape (..., 3)
        Position in the body's inertial equatorial frame, m.
    v_m_s : array_like, shape (..., 3)
        Velocity, m/s.
    mu_m3_s2 : float
        Gravitational parameter, m^3/s^2.

    Returns
    -------
    Elements
        Floats for a single state, arrays of shape (...) otherwise.

    Raises
    ------
    ValueError
        For a degenerate state (zero radius, rectilinear motion, non-finite numbers) or a
        parabolic orbit.

    References
    ----------
    Vallado (2013), Algorithm 9, with the special-case conventions of sec. 2.5.
    """
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    if r.shape == (3,) and v.shape == (3,):  # one state: plain floats, no array overhead
        rl, vl = r.tolist(), v.tolist()
        if not all(math.isfinite(c) for c in rl + vl):
            raise ValueError("state holds a non-finite number")
        return _rv_to_elements_one(rl, vl, float(mu_m3_s2))
    if r.shape[-1:] != (3,) or v.shape[-1:] != (3,):
        raise ValueError("position and velocity must each have three components")
    if not (np.all(np.isfinite(r)) and np.all(np.isfinite(v))):
        raise ValueError("state holds a non-finite number")
    rmag = _norm(r)
    if np.any(rmag <= 0.0):
        raise ValueError("position is at the body's centre")
    h = cross(r, v)
    hmag = _norm(h)
    if np.any(hmag <= 1e-12 * rmag * np.maximum(_norm(v), 1e-300)):
        raise ValueError("velocity is along the radius: rectilinear motion has no orbit plane")
    v2 = _dot(v, v)
    rv = _dot(r, v)
    e_vec = ((v2 - mu_m3_s2 / rmag)[..., None] * r - rv[..., None] * v) / mu_m3_s2
    e = _norm(e_vec)
    if np.any(np.abs(e - 1.0) < PARABOLIC_BAND):
        raise ValueError("orbit is parabolic (e = 1): no semi-major axis")
    energy = 0.5 * v2 - mu_m3_s2 / rmag
    a = -mu_m3_s2 / (2.0 * energy)

    h_hat = h / hmag[..., None]
    i = np.arctan2(np.hypot(h[..., 0], h[..., 1]), h[..., 2])
    equatorial = (i < EQUATORIAL_I_RAD) | (i > math.pi - EQUATORIAL_I_RAD)
    circular = e < CIRCULAR_E

    # Node line: k x h; on an equatorial orbit the frame's x axis stands in for it.
    node = np.stack([-h[..., 1], h[..., 0], np.zeros_like(h[..., 0])], axis=-1)
    node_mag = _norm(node)
    x_axis = np.zeros_like(node)
    x_axis[..., 0] = 1.0
    n_hat = np.where(equatorial[..., None], x_axis,
                     node / np.where(node_mag > 0.0, node_mag, 1.0)[..., None])
    raan = np.where(equatorial, 0.0, np.arctan2(n_hat[..., 1], n_hat[..., 0]))

    # Periapsis direction; on a circular orbit the node (or x axis) stands in for it.
    e_hat = np.where(circular[..., None], n_hat, e_vec / np.where(e > 0.0, e, 1.0)[..., None])
    argp = np.arctan2(_dot(h_hat, cross(n_hat, e_hat)), _dot(n_hat, e_hat))
    argp = np.where(circular, 0.0, argp)
    nu = np.arctan2(_dot(h_hat, cross(e_hat, r)), _dot(e_hat, r))

    def out(x):
        x = np.asarray(x, dtype=float)
        return float(x) if x.ndim == 0 else x

    return Elements(
        a_m=out(a),
        e=out(e),
        i_rad=out(i),
        raan_rad=out(mod_2pi(raan)),
        argp_rad=out(mod_2pi(argp)),
        nu_rad=out(mod_2pi(nu)),
    )


def _wrap(x: float) -> float:
    y = math.fmod(x, TWO_PI)
    if y < 0.0:
        y += TWO_PI
    return 0.0 if y >= TWO_PI else y


def _rv_to_elements_one(r, v, mu: float) -> Elements:
    """Scalar twin of :func:`rv_to_elements` (same formulas and conventions, plain floats)."""
    x, y, z = r
    vx, vy, vz = v
    rmag = math.sqrt(x * x + y * y + z * z)
    if rmag <= 0.0:
        raise ValueError("position is at the body's centre")
    hx, hy, hz = y * vz - z * vy, z * vx - x * vz, x * vy - y * vx
    hmag = math.sqrt(hx * hx + hy * hy + hz * hz)
    v2 = vx * vx + vy * vy + vz * vz
    if hmag <= 1e-12 * rmag * max(math.sqrt(v2), 1e-300):
        raise ValueError("velocity is along the radius: rectilinear motion has no orbit plane")
    rv = x * vx + y * vy + z * vz
    k = v2 - mu / rmag
    ex, ey, ez = (k * x - rv * vx) / mu, (k * y - rv * vy) / mu, (k * z - rv * vz) / mu
    e = math.sqrt(ex * ex + ey * ey + ez * ez)
    if abs(e - 1.0) < PARABOLIC_BAND:
        raise ValueError("orbit is parabolic (e = 1): no semi-major axis")
    a = -mu / (2.0 * (0.5 * v2 - mu / rmag))
    hhx, hhy, hhz = hx / hmag, hy / hmag, hz / hmag
    i = math.atan2(math.hypot(hx, hy), hz)
    equatorial = i < EQUATORIAL_I_RAD or i > math.pi - EQUATORIAL_I_RAD
    circular = e < CIRCULAR_E
    if equatorial:
        nx, ny, nz = 1.0, 0.0, 0.0
        raan = 0.0
    else:
        nm = math.hypot(hx, hy)
        nx, ny, nz = -hy / nm, hx / nm, 0.0
        raan = math.atan2(ny, nx)
    if circular:
        px, py, pz = nx, ny, nz
        argp = 0.0
    else:
        px, py, pz = ex / e, ey / e, ez / e
        cx, cy, cz = ny * pz - nz * py, nz * px - nx * pz, nx * py - ny * px
        argp = math.atan2(hhx * cx + hhy * cy + hhz * cz, nx * px + ny * py + nz * pz)
    cx, cy, cz = py * z - pz * y, pz * x - px * z, px * y - py * x
    nu = math.atan2(hhx * cx + hhy * cy + hhz * cz, px * x + py * y + pz * z)
    return Elements(a_m=a, e=e, i_rad=i, raan_rad=_wrap(raan), argp_rad=_wrap(argp), nu_rad=_wrap(nu))


def elements_to_rv(el: Elements, mu_m3_s2: float):
    """Cartesian state from classical elements.

    Parameters
    ----------
    el : Elements
        Elements (floats or equally shaped arrays), with the conventions of the module notes.
    mu_m3_s2 : float
        Gravitational parameter, m^3/s^2.

    Returns
    -------
    r_m, v_m_s : ndarray, shape (..., 3)

    Raises
    ------
    ValueError
        For a parabolic or non-physical set (e < 0, a of the wrong sign for e) or a true anomaly
        beyond a hyperbola's asymptote.

    References
    ----------
    Vallado (2013), Algorithm 10.
    """
    a = np.asarray(el.a_m, dtype=float)
    e = np.asarray(el.e, dtype=float)
    i = np.asarray(el.i_rad, dtype=float)
    raan = np.asarray(el.raan_rad, dtype=float)
    argp = np.asarray(el.argp_rad, dtype=float)
    nu = np.asarray(el.nu_rad, dtype=float)
    for name, x in (("a", a), ("e", e), ("i", i), ("raan", raan), ("argp", argp), ("nu", nu)):
        if not np.all(np.isfinite(x)):
            raise ValueError(f"element {name} is not finite")
    if np.any(e < 0.0):
        raise ValueError("eccentricity is negative")
    if np.any(np.abs(e - 1.0) < PARABOLIC_BAND):
        raise ValueError("orbit is parabolic (e = 1): the element set has no semi-major axis")
    if np.any((e < 1.0) & (a <= 0.0)) or np.any((e > 1.0) & (a >= 0.0)):
        raise ValueError("semi-major axis sign does not match the eccentricity "
                         "(positive for e < 1, negative for e > 1)")
    p = a * (1.0 - e * e)
    denom = 1.0 + e * np.cos(nu)
    if np.any(denom <= 0.0):
        raise ValueError("true anomaly lies beyond the hyperbola's asymptote")
    rmag = p / denom
    cn, sn = np.cos(nu), np.sin(nu)
    r_pf = np.stack([rmag * cn, rmag * sn, np.zeros_like(rmag)], axis=-1)
    k = np.sqrt(mu_m3_s2 / p)
    v_pf = np.stack([-k * sn, k * (e + cn), np.zeros_like(rmag)], axis=-1)
    rot = perifocal_to_inertial(raan, i, argp)
    r = np.einsum("...ij,...j->...i", rot, r_pf)
    v = np.einsum("...ij,...j->...i", rot, v_pf)
    return r, v


def perifocal_to_inertial(raan_rad, i_rad, argp_rad):
    """Rotation matrix (..., 3, 3) taking perifocal coordinates to the inertial frame.

    References
    ----------
    Vallado (2013), eq. 2-102 (the R3(-raan) R1(-i) R3(-argp) product).
    """
    co, so = np.cos(raan_rad), np.sin(raan_rad)
    ci, si = np.cos(i_rad), np.sin(i_rad)
    cw, sw = np.cos(argp_rad), np.sin(argp_rad)
    rot = np.empty(np.shape(co) + (3, 3))
    rot[..., 0, 0] = co * cw - so * sw * ci
    rot[..., 0, 1] = -co * sw - so * cw * ci
    rot[..., 0, 2] = so * si
    rot[..., 1, 0] = so * cw + co * sw * ci
    rot[..., 1, 1] = -so * sw + co * cw * ci
    rot[..., 1, 2] = -co * si
    rot[..., 2, 0] = sw * si
    rot[..., 2, 1] = cw * si
    rot[..., 2, 2] = ci
    return rot


def apsides_to_elements(periapsis_radius_m, apoapsis_radius_m, i_rad=0.0, raan_rad=0.0,
                        argp_rad=0.0, nu_rad=0.0) -> Elements:
    """Elements from apsis radii (and optional orientation and position).

    Raises
    ------
    ValueError
        When the apoapsis is below the periapsis or a radius is not positive.
    """
    rp = float(periapsis_radius_m)
    ra = float(apoapsis_radius_m)
    if not (math.isfinite(rp) and rp > 0.0):
        raise ValueError("periapsis radius must be positive and finite")
    if not (math.isfinite(ra) and ra > 0.0):
        raise ValueError("apoapsis radius must be positive and finite")
    if ra < rp:
        raise ValueError("apoapsis is below periapsis")
    return Elements(a_m=0.5 * (rp + ra), e=(ra - rp) / (ra + rp), i_rad=float(i_rad),
                    raan_rad=float(raan_rad), argp_rad=float(argp_rad), nu_rad=float(nu_rad))


def apsis_radii(r_m, v_m_s, mu_m3_s2: float):
    """Periapsis and apoapsis radii (m) of the osculating orbit; apoapsis ``inf`` if open."""
    el = rv_to_elements(r_m, v_m_s, mu_m3_s2)
    return el.periapsis_radius_m, el.apoapsis_radius_m


def eccentricity_vector(r_m, v_m_s, mu_m3_s2: float):
    """Eccentricity vector (..., 3), pointing at periapsis, dimensionless."""
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    rmag = _norm(r)
    return ((_dot(v, v) - mu_m3_s2 / rmag)[..., None] * r - _dot(r, v)[..., None] * v) / mu_m3_s2
