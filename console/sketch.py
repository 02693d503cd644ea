"""Orbit sketch for the console: orbits drawn in the orbit plane with Braille dots.

The sketch is schematic.  Angles around the body are true (measured in the plane of the latest
known orbit), but radii are stretched: the band of altitudes the campaign spans is spread over
the outer part of the drawing so that a 180 km raise in low orbit is visible at all.  The
caption says so.

Layers, from faint to strong: the body (sparse ring), transfer orbits (dotted), the current
orbit (solid), the target orbit (two dots thick).  Burn points are glyphs on top: the next burn
``◆``, later burns ``◇``, flown burns ``●``; the spacecraft now ``✦``.  Every layer differs by
its dot pattern or glyph as well as by its colour, so the sketch reads on a monochrome terminal.

References
----------
Unicode Standard, block "Braille Patterns" (U+2800-U+28FF): dot n of an eight-dot cell is bit
n - 1, dots 1-3 and 7 in the left column, 4-6 and 8 in the right (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from rich.text import Text

#: bit of the Braille dot at (column 0..1, row 0..3) of a cell
_DOT_BITS = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))

#: layer -> (priority, style)
LAYERS = {
    "body": (0, "grey50"),
    "transfer": (1, "yellow"),
    "current": (2, "cyan"),
    "target": (3, "green"),
}
MARKS = {"next": ("◆", "bold magenta"), "planned": ("◇", "magenta"), "done": ("●", "white"),
         "now": ("✦", "bold cyan")}


@dataclass(frozen=True)
class Conic:
    """A closed orbit in the sketch plane: apsis radii (m) and periapsis angle (rad)."""

    periapsis_radius_m: float
    apoapsis_radius_m: float
    periapsis_angle_rad: float
    layer: str


@dataclass(frozen=True)
class Mark:
    """A glyph at a point of the sketch plane (radius m, angle rad)."""

    radius_m: float
    angle_rad: float
    kind: str


@dataclass(frozen=True)
class SketchModel:
    """Everything the sketch draws, in the plane of the latest orbit."""

    body_radius_m: float
    conics: tuple
    marks: tuple

    @property
    def altitude_band_m(self) -> tuple[float, float]:
        """(lowest periapsis, highest apoapsis) altitude over the drawn orbits, m."""
        R = self.body_radius_m
        lo = min(c.periapsis_radius_m for c in self.conics) - R
        hi = max(c.apoapsis_radius_m for c in self.conics) - R
        return lo, hi


def _unit(x):
    x = np.asarray(x, dtype=float)
    n = float(np.linalg.norm(x))
    return x / n if n > 0.0 else x


def plane_axes(r_m, v_m_s, mu_m3_s2: float):
    """Unit axes (P, Q) of the sketch plane: P to periapsis (or node), Q 90 deg ahead.

    For a near-circular orbit (e < 1e-4) P points to the ascending node, or along x when the
    orbit is also equatorial.
    """
    r = np.asarray(r_m, dtype=float)
    v = np.asarray(v_m_s, dtype=float)
    h = _unit(np.cross(r, v))
    e_vec = np.cross(v, np.cross(r, v)) / mu_m3_s2 - r / np.linalg.norm(r)
    if np.linalg.norm(e_vec) > 1e-4:
        p = _unit(e_vec)
    else:
        node = np.cross([0.0, 0.0, 1.0], h)
        p = _unit(node) if np.linalg.norm(node) > 1e-9 else np.array([1.0, 0.0, 0.0])
    q = np.cross(h, p)
    return p, q


def angle_in_plane(u, axes) -> float:
    """Angle (rad) of vector ``u`` projected on the sketch plane, from P towards Q."""
    p, q = axes
    u = np.asarray(u, dtype=float)
    return math.atan2(float(np.dot(u, q)), float(np.dot(u, p)))


def model_from_view(v) -> SketchModel | None:
    """The sketch of a session view: current, transfer and target orbits, burn points."""
    from mechanics.elements import rv_to_elements

    sc = v.scenario
    mu = sc.body.mu_m3_s2
    R = sc.body.radius_m
    r = np.asarray(v.latest.r_m, dtype=float)
    vel = np.asarray(v.latest.v_m_s, dtype=float)
    el = rv_to_elements(r, vel, mu)
    if not (el.e < 1.0):
        return None
    axes = plane_axes(r, vel, mu)
    conics = [Conic(float(el.periapsis_radius_m), float(el.apoapsis_radius_m), 0.0, "current")]
    marks = []
    planned = [row for row in v.rows if row.status == "planned"]
    final = None
    for row in v.rows:
        if row.status == "retracted":
            continue
        b = row.planned
        ang = angle_in_plane(b.centre_direction, axes)
        rc = 0.5 * (float(np.linalg.norm(b.state_before[:3])) + float(np.linalg.norm(b.state_after[:3])))
        if row.status == "done":
            marks.append(Mark(rc, ang, "done"))
            continue
        marks.append(Mark(rc, ang, "next" if row is planned[0] else "planned"))
        rp, ra = b.after_periapsis_radius_m, b.after_apoapsis_radius_m
        # the burn point stays the apsis it is nearer to after the burn
        peri_angle = ang if abs(rc - rp) <= abs(rc - ra) else ang + math.pi
        final = Conic(rp, ra, peri_angle, "transfer")
        # a transfer orbit is the one a leg ends on (split burns build it up pass by pass)
        later = [r for r in planned if r.index > row.index]
        if later and later[0].planned.leg != b.leg:
            conics.append(final)
    target = sc.target
    if target is not None:
        ref_angle = final.periapsis_angle_rad if final else 0.0
        ref_rp = final.periapsis_radius_m if final else float(el.periapsis_radius_m)
        ref_ra = final.apoapsis_radius_m if final else float(el.apoapsis_radius_m)
        rp = target.periapsis_radius_m if target.periapsis_radius_m is not None else ref_rp
        ra = target.apoapsis_radius_m if target.apoapsis_radius_m is not None else ref_ra
        if ra < rp:
            rp, ra = ra, rp
        conics.append(Conic(rp, ra, ref_angle, "target"))
    marks.append(Mark(float(np.linalg.norm(r)), angle_in_plane(r, axes), "now"))
    return SketchModel(R, tuple(conics), tuple(marks))


class BrailleCanvas:
    """A character grid where every cell holds 2 x 4 dots, each dot owned by a layer."""

    def __init__(self, cols: int, rows: int):
        self.cols, self.rows = cols, rows
        self.bits = np.zeros((rows, cols), dtype=np.int32)
        self.layer = np.full((rows, cols), -1, dtype=np.int32)
        self.glyphs: dict[tuple[int, int], tuple[str, str]] = {}

    def plot(self, x, y, layer: str) -> None:
        """Set the dots at (x, y) (dot coordinates, arrays) for ``layer``."""
        prio = LAYERS[layer][0]
        xi = np.round(np.asarray(x)).astype(int)
        yi = np.round(np.asarray(y)).astype(int)
        ok = (xi >= 0) & (yi >= 0) & (xi < 2 * self.cols) & (yi < 4 * self.rows)
        xi, yi = xi[ok], yi[ok]
        cx, cy = xi // 2, yi // 4
        bits = np.array(_DOT_BITS)[xi % 2, yi % 4]
        np.bitwise_or.at(self.bits, (cy, cx), bits)
        np.maximum.at(self.layer, (cy, cx), prio)

    def glyph(self, col: int, row: int, char: str, style: str) -> None:
        if 0 <= col < self.cols and 0 <= row < self.rows:
            self.glyphs[(col, row)] = (char, style)

    def lines(self) -> list[Text]:
        styles = {prio: style for prio, style in LAYERS.values()}
        out = []
        for row in range(self.rows):
            t = Text(no_wrap=True, overflow="crop")
            for col in range(self.cols):
                g = self.glyphs.get((col, row))
                if g is not None:
                    t.append(g[0], style=g[1])
                    continue
                b = int(self.bits[row, col])
                if b:
                    t.append(chr(0x2800 + b), style=styles.get(int(self.layer[row, col]), ""))
                else:
                    t.append(" ")
            out.append(t)
        return out


def render_sketch(model: SketchModel, cols: int, rows: int) -> list[Text]:
    """Draw ``model`` into ``rows`` lines of ``cols`` characters (the caption included)."""
    cols, rows = max(int(cols), 1), max(int(rows), 1)
    caption_rows = 3 if rows >= 12 else 2 if rows >= 8 else 0
    plot_rows = max(rows - caption_rows, 1)
    canvas = BrailleCanvas(cols, plot_rows)
    w, h = 2 * cols, 4 * plot_rows
    cx, cy = (w - 1) / 2.0, (h - 1) / 2.0
    rho_max = max(min(cx, cy) - 1.0, 2.0)
    rho_body = 0.45 * rho_max
    lo, hi = model.altitude_band_m
    span = max(hi - lo, 0.2 * hi, 1e3)
    h0 = max(0.0, lo - 0.5 * span)
    R = model.body_radius_m

    def rho(radius_m):
        return rho_body + (np.asarray(radius_m) - R - h0) / (hi - h0) * (rho_max - rho_body)

    def xy(rr, ang):
        return cx + rr * np.cos(ang), cy - rr * np.sin(ang)

    # body: a sparse ring
    ang = np.linspace(0.0, 2.0 * math.pi, 90, endpoint=False)
    canvas.plot(*xy(np.full_like(ang, rho_body), ang), "body")
    n = 720
    nu = np.linspace(0.0, 2.0 * math.pi, n, endpoint=False)
    order = sorted(model.conics, key=lambda c: LAYERS[c.layer][0])
    for c in order:
        rp, ra = c.periapsis_radius_m, c.apoapsis_radius_m
        e = (ra - rp) / (ra + rp)
        p = 2.0 * rp * ra / (ra + rp)
        radius = p / (1.0 + e * np.cos(nu))
        rr = rho(radius)
        theta = c.periapsis_angle_rad + nu
        if c.layer == "transfer":
            keep = (np.arange(n) % 12) < 5
            canvas.plot(*xy(rr[keep], theta[keep]), c.layer)
        elif c.layer == "target":
            canvas.plot(*xy(rr, theta), c.layer)
            canvas.plot(*xy(rr + 1.0, theta), c.layer)
        else:
            canvas.plot(*xy(rr, theta), c.layer)
    # glyphs: later ones win a shared cell, so draw the most important last
    rank = {"planned": 0, "done": 1, "next": 2, "now": 3}
    for m in sorted(model.marks, key=lambda m: rank[m.kind]):
        x, y = xy(float(rho(m.radius_m)), m.angle_rad)
        char, style = MARKS[m.kind]
        canvas.glyph(int(round(x)) // 2, int(round(y)) // 4, char, style)
    lines = canvas.lines()
    if caption_rows:
        legend = Text(no_wrap=True, overflow="ellipsis")
        for label, glyph, style in (("current", "──", LAYERS["current"][1]),
                                    ("transfer", "··", LAYERS["transfer"][1]),
                                    ("target", "══", LAYERS["target"][1])):
            legend.append(glyph, style=style)
            legend.append(f" {label}  ")
        marks = Text(no_wrap=True, overflow="ellipsis")
        for label, kind in (("next", "next"), ("burn", "planned"), ("flown", "done"), ("now", "now")):
            char, style = MARKS[kind]
            marks.append(char, style=style)
            marks.append(f" {label}  ")
        scale = Text(f"schematic: angles true, radii stretched above {h0 / 1e3:.0f} km altitude",
                     style="dim", no_wrap=True, overflow="ellipsis")
        lines += [legend, marks, scale][:caption_rows]
    return lines[:rows]
