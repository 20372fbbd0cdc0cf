"""Regenerate the invented demo routes in this folder.

Run from the repository root::

    python routes/make_demo_routes.py

Every route here is invented: the geometry is designed from scratch in this script (no survey,
map or GPS data), placed at arbitrary coordinates, and corresponds to no real road. Each
alignment is built the way road designers lay one out, as straights, clothoid (Euler spiral)
transitions and circular arcs: curvature is a piecewise-linear function of station, heading is
its exact integral, and position is the integral of (cos heading, sin heading), done with
Gauss-Legendre quadrature between consecutive output stations and curvature breakpoints.
Elevation comes the same way from a piecewise-linear grade (constant grades joined by parabolic
vertical curves). Stations here are design stations (arc length along the alignment, measured
in plan); the README quotes lengths measured along the written polylines.

Output is deterministic: no randomness, fixed number formats, ``\\n`` line ends. After writing,
the script reads each file back and checks point spacing, the turn between consecutive chords,
self-intersection, loop closure and grades, and prints the figures quoted in README.md.

Needs numpy and pyproj (pyproj for the latitude/longitude files).
"""

from __future__ import annotations

import json
import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

# Checks applied to every written file.
MIN_STEP_M = 1e-3            # no two consecutive points closer than this
MAX_CHORD_TURN_DEG = 30.0    # sharpest allowed turn between consecutive chords
LOOP_CLOSURE_TOL_M = 1e-6    # design end point vs start point on the loop, before rounding

# Gauss-Legendre nodes for the position integral. Heading is a quadratic in station between
# breakpoints and output intervals are at most 5 m, so 8 nodes integrate cos/sin of it to
# round-off (the turn across one interval is below 0.4 rad).
_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(8)


# --------------------------------------------------------------------------------------------
# Alignment construction
# --------------------------------------------------------------------------------------------

def integrate_piecewise_linear(knot_s: np.ndarray, knot_v: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Exact integral from knot_s[0] to s of the piecewise-linear function through the knots."""
    ds = np.diff(knot_s)
    cum = np.concatenate(([0.0], np.cumsum(0.5 * (knot_v[:-1] + knot_v[1:]) * ds)))
    i = np.clip(np.searchsorted(knot_s, s, side="right") - 1, 0, knot_s.size - 2)
    u = s - knot_s[i]
    slope = (knot_v[i + 1] - knot_v[i]) / ds[i]
    return cum[i] + knot_v[i] * u + 0.5 * slope * u * u


@dataclass
class Alignment:
    """A horizontal alignment with a vertical profile, built piece by piece.

    Curvature (1/m, positive turning left) is held as knots at design stations and varies
    linearly between them, so a linear ramp is a clothoid and a constant stretch is a straight
    or a circular arc. Each piece also carries a grade (rise over run); grade changes between
    pieces are smoothed by parabolic vertical curves centred on the piece boundary.
    """

    heading0_rad: float = 0.0
    x0_m: float = 0.0
    y0_m: float = 0.0
    z0_m: float = 0.0
    vertical_curve_m: float = 80.0
    knot_s: list = field(default_factory=lambda: [0.0])
    knot_k: list = field(default_factory=lambda: [0.0])
    pieces: list = field(default_factory=list)  # (label, s_start, s_end, grade, radius or None)

    @property
    def length_m(self) -> float:
        return self.knot_s[-1]

    def _ramp(self, length_m: float, k_end: float) -> None:
        if not length_m > 0.0:
            raise ValueError(f"piece length must be positive, got {length_m}")
        self.knot_s.append(self.knot_s[-1] + length_m)
        self.knot_k.append(k_end)

    def line(self, length_m: float, grade: float, label: str = "straight") -> "Alignment":
        """A straight of the given length (curvature must already be zero)."""
        if self.knot_k[-1] != 0.0:
            raise ValueError("a straight must start where curvature is zero")
        s0 = self.length_m
        self._ramp(length_m, 0.0)
        self.pieces.append((label, s0, self.length_m, grade, None))
        return self

    def curve(self, deflection_deg: float, radius_m: float, spiral_m: float, grade: float,
              label: str = "curve") -> "Alignment":
        """Clothoid in, circular arc, clothoid out; deflection positive to the left.

        Each clothoid turns the heading by spiral_m / (2 radius_m), so the arc length is
        radius_m * |deflection| - spiral_m.
        """
        k = math.copysign(1.0 / radius_m, deflection_deg)
        arc_m = radius_m * math.radians(abs(deflection_deg)) - spiral_m
        if arc_m <= 0.0:
            raise ValueError(f"{label}: spirals of {spiral_m} m leave no arc at R {radius_m} m")
        s0 = self.length_m
        self._ramp(spiral_m, k)
        self._ramp(arc_m, k)
        self._ramp(spiral_m, 0.0)
        self.pieces.append((label, s0, self.length_m, grade, radius_m))
        return self

    def curvature_run(self, steps: list[tuple[float, float]], grade: float, label: str,
                      radius_m: float | None = None) -> "Alignment":
        """Free sequence of (length_m, curvature at its end) ramps, ending at zero curvature."""
        s0 = self.length_m
        for length_m, k_end in steps:
            self._ramp(length_m, k_end)
        if self.knot_k[-1] != 0.0:
            raise ValueError(f"{label}: a curvature run must end at zero curvature")
        self.pieces.append((label, s0, self.length_m, grade, radius_m))
        return self

    # -- evaluation ---------------------------------------------------------------------------

    def heading(self, s: np.ndarray) -> np.ndarray:
        ks, kk = np.asarray(self.knot_s), np.asarray(self.knot_k)
        return self.heading0_rad + integrate_piecewise_linear(ks, kk, s)

    def curvature(self, s: np.ndarray) -> np.ndarray:
        return np.interp(s, self.knot_s, self.knot_k)

    def plan(self, s_out: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Plan position (x, y) in metres at the given stations (sorted, within the length)."""
        grid = np.union1d(s_out, np.asarray(self.knot_s))
        a, b = grid[:-1], grid[1:]
        mid, half = 0.5 * (a + b), 0.5 * (b - a)
        th = self.heading(mid[:, None] + half[:, None] * _GL_NODES[None, :])
        dx = (half[:, None] * _GL_WEIGHTS * np.cos(th)).sum(axis=1)
        dy = (half[:, None] * _GL_WEIGHTS * np.sin(th)).sum(axis=1)
        x = self.x0_m + np.concatenate(([0.0], np.cumsum(dx)))
        y = self.y0_m + np.concatenate(([0.0], np.cumsum(dy)))
        idx = np.searchsorted(grid, s_out)
        return x[idx], y[idx]

    def grade_runs(self) -> list[tuple[float, float, float]]:
        """(s_start, s_end, grade) with consecutive pieces of equal grade merged."""
        runs: list[list[float]] = []
        for _, s0, s1, g, _ in self.pieces:
            if runs and runs[-1][2] == g:
                runs[-1][1] = s1
            else:
                runs.append([s0, s1, g])
        return [tuple(r) for r in runs]

    def grade_knots(self) -> tuple[np.ndarray, np.ndarray]:
        """Grade as knots: constant on each run, linear across each vertical curve."""
        runs = self.grade_runs()
        gs, gv = [runs[0][0]], [runs[0][2]]
        for prev, nxt in zip(runs[:-1], runs[1:]):
            # Vertical curve centred on the boundary, at most a quarter of either run each side.
            half = 0.5 * min(self.vertical_curve_m,
                             0.5 * (prev[1] - prev[0]), 0.5 * (nxt[1] - nxt[0]))
            gs += [nxt[0] - half, nxt[0] + half]
            gv += [prev[2], nxt[2]]
        gs.append(runs[-1][1])
        gv.append(runs[-1][2])
        return np.asarray(gs), np.asarray(gv)

    def elevation(self, s: np.ndarray) -> np.ndarray:
        gs, gv = self.grade_knots()
        return self.z0_m + integrate_piecewise_linear(gs, gv, s)

    def grade(self, s: np.ndarray) -> np.ndarray:
        gs, gv = self.grade_knots()
        return np.interp(s, gs, gv)


def stations_every(length_m: float, spacing_m: float) -> np.ndarray:
    """Stations 0, spacing, 2 spacing, ... up to a length that is a whole number of spacings."""
    n = round(length_m / spacing_m)
    if abs(n * spacing_m - length_m) > 1e-9:
        raise ValueError(f"length {length_m} m is not a multiple of {spacing_m} m")
    return spacing_m * np.arange(n + 1)


def finish_to_multiple(al: Alignment, nominal_m: float, spacing_m: float, grade: float) -> None:
    """Add a last straight of about nominal_m so the total length is a whole number of steps."""
    total = al.length_m + nominal_m
    target = spacing_m * math.ceil(total / spacing_m - 1e-9)
    al.line(nominal_m + (target - total), grade, label="final straight")
    # Snap the last knot so that multiples of the spacing hit it exactly.
    al.knot_s[-1] = target
    label, s0, _, g, r = al.pieces[-1]
    al.pieces[-1] = (label, s0, target, g, r)


# --------------------------------------------------------------------------------------------
# The three routes
# --------------------------------------------------------------------------------------------

MOUNTAIN_NAME = "Switchback Climb"
MOUNTAIN_SPACING_M = 5.0

LOOP_NAME = "Oval Test Loop"
LOOP_SPACING_M = 5.0          # nominal; the loop uses its length divided into whole steps
# Arbitrary origin in open ocean, chosen so that the loop cannot be mistaken for a real site.
LOOP_ORIGIN_LAT_DEG = 47.5
LOOP_ORIGIN_LON_DEG = -32.25

SHUTTLE_NAME = "Yard Shuttle Route"
SHUTTLE_SPACING_M = 2.5
# Arbitrary origin in open ocean, southern hemisphere, for the same reason.
SHUTTLE_ORIGIN_LAT_DEG = -38.0
SHUTTLE_ORIGIN_LON_DEG = -20.0
# Intended stops (for a later limits file): station along the written polyline, metres.
SHUTTLE_STOPS_M = {"Gate": 0.0, "Workshops": 290.0, "Canteen": 900.0, "Labs": 1300.0}


def _hairpin(al: Alignment, side: int, radius_m: float, grade: float) -> None:
    """A 180-degree switchback: approach curve, hairpin arc, departure curve.

    side is +1 for a left-hand hairpin, -1 for a right-hand one. The approach and departure
    curves (20 degrees at R 70 m) open the spacing between legs to roughly 55-75 m. The whole
    switchback is one grade run, flatter than the legs (common practice), so the vertical
    curves to and from it lie on the approach and departure.
    """
    al.curve(side * 20, 70, 20, grade, label="hairpin approach")
    al.line(10, grade)
    al.curve(side * 140, radius_m, radius_m, grade, label="hairpin")
    al.line(10, grade)
    al.curve(side * 20, 70, 20, grade, label="hairpin departure")


def mountain_road() -> Alignment:
    """Open mountain road: valley curves, a stack of five hairpins, sweeping curves above."""
    al = Alignment(heading0_rad=0.0, z0_m=640.0, vertical_curve_m=80.0)
    # Valley section: moderate grades, sweeping curves, one short dip.
    al.line(320, 0.035)
    al.curve(+40, 260, 60, 0.035)
    al.line(300, 0.050)
    al.curve(-65, 140, 50, 0.045)
    al.line(220, 0.020)
    al.curve(+30, 300, 60, -0.020)
    al.line(300, 0.050)
    al.curve(+75, 85, 40, 0.060)
    al.line(240, 0.080)
    # Switchback stack: legs at 8.5-9 %, hairpins at 4-5 %.
    _hairpin(al, -1, 20, 0.050)
    al.line(420, 0.085)
    _hairpin(al, +1, 18, 0.050)
    al.line(400, 0.088)
    _hairpin(al, -1, 22, 0.050)
    al.line(380, 0.090)
    _hairpin(al, +1, 16, 0.045)
    al.line(360, 0.085)
    _hairpin(al, -1, 15, 0.040)
    # Upper section: leaves the stack sideways, sweeping curves up to the saddle.
    al.line(200, 0.075)
    al.curve(+90, 120, 45, 0.065)
    al.line(320, 0.080)
    al.curve(-60, 200, 60, 0.060)
    al.line(280, 0.070)
    al.curve(+45, 90, 40, 0.055)
    al.line(320, 0.070)
    al.curve(-35, 250, 60, 0.040)
    finish_to_multiple(al, 240, MOUNTAIN_SPACING_M, 0.020)
    return al


def _handling_section(k: float) -> list[tuple[float, float]]:
    """Left-right-left reverse curves with a curvature profile symmetric about its middle.

    Symmetric curvature makes heading antisymmetric about the middle, so the section leaves
    with its entry heading and with no sideways offset (the integral of sin heading is zero).
    Deflection balance: each reverse clothoid (+k to -k over 30 m) turns by zero net, so the
    two left parts turn 2 x (20/2 + 10) x k and the right arc turns back 40 x k.
    """
    return [(20, +k), (10, +k), (30, -k), (40, -k), (30, +k), (10, +k), (20, 0.0)]


def test_loop() -> Alignment:
    """Closed oval, run counter-clockwise, with a handling section on the back straight."""
    radius, spiral = 180.0, 80.0
    k_s = 1.0 / 50.0
    back_before, back_after = 1000.0, 80.0

    # Advance of the handling section along its entry direction, from the same integrator.
    probe = Alignment()
    probe.curvature_run(_handling_section(k_s), 0.0, "probe")
    hx, hy = probe.plan(np.array([probe.length_m]))
    if abs(hy[0]) > 1e-9:
        raise RuntimeError(f"handling section leaves a sideways offset of {hy[0]:.3e} m")
    # The two turns are identical, so the loop closes when the front straight matches the
    # advance of the back straight (straight, handling section, straight).
    front = back_before + float(hx[0]) + back_after

    al = Alignment(heading0_rad=0.0)
    al.line(front / 2, 0.0, label="front straight (first half)")
    al.curve(+180, radius, spiral, 0.0, label="turn 1")
    al.line(back_before, 0.0, label="back straight")
    al.curvature_run(_handling_section(k_s), 0.0, "handling section (S-bends)", radius_m=50.0)
    al.line(back_after, 0.0, label="back straight (after handling section)")
    al.curve(+180, radius, spiral, 0.0, label="turn 2")
    al.line(front / 2, 0.0, label="front straight (second half)")
    return al


def shuttle_route() -> Alignment:
    """Open low-speed route on an invented yard grid with right-angle corners."""
    al = Alignment(heading0_rad=math.pi / 2, z0_m=6.0, vertical_curve_m=30.0)
    al.line(140, 0.0)
    al.curve(-90, 10, 5, 0.0, label="corner")
    al.line(260, 0.010)
    al.curve(+90, 12, 6, 0.010, label="corner")
    al.line(150, 0.040, label="ramp")
    al.curve(-90, 8, 4, 0.0, label="corner")
    al.line(120, 0.0)
    al.curve(+20, 40, 8, 0.0, label="bend")
    al.line(60, 0.0)
    al.curve(-20, 40, 8, 0.0, label="bend")
    al.line(140, 0.0)
    al.curve(-90, 15, 8, 0.0, label="corner")
    al.line(160, -0.030, label="ramp")
    al.curve(+90, 10, 5, 0.0, label="corner")
    al.line(220, 0.0)
    al.curve(+90, 9, 5, 0.0, label="corner")
    finish_to_multiple(al, 180, SHUTTLE_SPACING_M, 0.005)
    return al


# --------------------------------------------------------------------------------------------
# Writers (fixed formats, so the bytes do not change between runs)
# --------------------------------------------------------------------------------------------

def _fmt(values: np.ndarray, decimals: int) -> list[str]:
    # "+ 0.0" turns a rounded -0.0 into 0.0 so no "-0.00" appears.
    return [f"{v:.{decimals}f}" for v in np.round(values, decimals) + 0.0]


def _tmerc(lat0: float, lon0: float):
    from pyproj import CRS, Transformer

    local = CRS.from_proj4(f"+proj=tmerc +lat_0={lat0} +lon_0={lon0} +k=1 +x_0=0 +y_0=0 "
                           "+ellps=WGS84 +units=m +no_defs")
    wgs84 = CRS.from_epsg(4326)
    inv = Transformer.from_crs(local, wgs84, always_xy=True)
    fwd = Transformer.from_crs(wgs84, local, always_xy=True)
    return fwd, inv


def _write(path: Path, text: str) -> None:
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)


def write_mountain(al: Alignment, path: Path) -> None:
    s = stations_every(al.length_m, MOUNTAIN_SPACING_M)
    x, y = al.plan(s)
    z = al.elevation(s)
    lines = [f'# Invented demo route "{MOUNTAIN_NAME}" for curvespeed: designed from scratch, '
             "corresponds to no real road.",
             "x_m,y_m,z_m"]
    lines += [",".join(t) for t in zip(_fmt(x, 2), _fmt(y, 2), _fmt(z, 2))]
    _write(path, "\n".join(lines) + "\n")


def write_loop(al: Alignment, path: Path) -> None:
    n = round(al.length_m / LOOP_SPACING_M)
    s = al.length_m * np.arange(n + 1) / n
    x, y = al.plan(s)
    gap = math.hypot(x[-1] - x[0], y[-1] - y[0])
    if gap > LOOP_CLOSURE_TOL_M:
        raise RuntimeError(f"{path.name}: design loop misses its start by {gap:.3e} m")
    _, inv = _tmerc(LOOP_ORIGIN_LAT_DEG, LOOP_ORIGIN_LON_DEG)
    lon, lat = inv.transform(x[:-1], y[:-1])
    lon_t, lat_t = _fmt(np.asarray(lon), 7), _fmt(np.asarray(lat), 7)
    positions = [f"      [{a}, {b}]" for a, b in zip(lon_t, lat_t)]
    positions.append(positions[0])  # closed: the last position repeats the first exactly
    header = {
        "name": LOOP_NAME,
        "description": ("Invented demo route for curvespeed: a closed proving-ground style "
                        "test loop designed from scratch, placed at arbitrary coordinates in "
                        "open ocean; it corresponds to no real road or site."),
    }
    text = ('{\n  "type": "Feature",\n  "properties": '
            + json.dumps(header, indent=4).replace("\n}", "\n  }")
            + ',\n  "geometry": {\n    "type": "LineString",\n    "coordinates": [\n'
            + ",\n".join(positions) + "\n    ]\n  }\n}\n")
    _write(path, text)


def write_shuttle(al: Alignment, path: Path) -> None:
    s = stations_every(al.length_m, SHUTTLE_SPACING_M)
    x, y = al.plan(s)
    z = al.elevation(s)
    _, inv = _tmerc(SHUTTLE_ORIGIN_LAT_DEG, SHUTTLE_ORIGIN_LON_DEG)
    lon, lat = inv.transform(x, y)
    desc = ("Invented demo route for curvespeed: a planned low-speed shuttle route on a yard, "
            "designed from scratch and placed at arbitrary coordinates in open ocean; it "
            "corresponds to no real road or site.")
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<gpx version="1.1" creator="curvespeed demo generator" '
           'xmlns="http://www.topografix.com/GPX/1/1" '
           'xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance" '
           'xsi:schemaLocation="http://www.topografix.com/GPX/1/1 '
           'http://www.topografix.com/GPX/1/1/gpx.xsd">',
           "  <metadata>",
           f"    <name>{SHUTTLE_NAME}</name>",
           f"    <desc>{desc}</desc>",
           "  </metadata>",
           "  <trk>",
           f"    <name>{SHUTTLE_NAME}</name>",
           "    <trkseg>"]
    for a, b, e in zip(_fmt(np.asarray(lat), 7), _fmt(np.asarray(lon), 7), _fmt(z, 2)):
        out.append(f'      <trkpt lat="{a}" lon="{b}"><ele>{e}</ele></trkpt>')
    out += ["    </trkseg>", "  </trk>", "</gpx>"]
    _write(path, "\n".join(out) + "\n")


# --------------------------------------------------------------------------------------------
# Read-back checks
# --------------------------------------------------------------------------------------------

def _segments_cross(x: np.ndarray, y: np.ndarray, closed: bool) -> list[tuple[int, int]]:
    """Pairs of non-adjacent polyline segments that intersect (proper or touching)."""
    p, q = np.stack([x[:-1], y[:-1]], 1), np.stack([x[1:], y[1:]], 1)
    m = len(p)
    hits = []

    def orient(a, b, c):
        return np.sign((b[..., 0] - a[..., 0]) * (c[..., 1] - a[..., 1])
                       - (b[..., 1] - a[..., 1]) * (c[..., 0] - a[..., 0]))

    for i in range(m):
        j = np.arange(i + 2, m)
        if closed and i == 0:
            j = j[j != m - 1]  # first and last segments share the seam point
        if j.size == 0:
            continue
        a, b, c, d = p[i], q[i], p[j], q[j]
        o1, o2 = orient(a, b, c), orient(a, b, d)
        o3, o4 = orient(c, d, a[None, :]), orient(c, d, b[None, :])
        cross = (o1 * o2 <= 0) & (o3 * o4 <= 0)
        # Collinear non-overlapping segments give all-zero orientations: check boxes too.
        boxes = ((np.minimum(c[:, 0], d[:, 0]) <= max(a[0], b[0]))
                 & (np.maximum(c[:, 0], d[:, 0]) >= min(a[0], b[0]))
                 & (np.minimum(c[:, 1], d[:, 1]) <= max(a[1], b[1]))
                 & (np.maximum(c[:, 1], d[:, 1]) >= min(a[1], b[1])))
        hits += [(i, int(k)) for k in j[cross & boxes]]
    return hits


def check_polyline(name: str, x: np.ndarray, y: np.ndarray, closed: bool) -> dict:
    """Spacing, chord turns, self-intersection; returns summary figures."""
    step = np.hypot(np.diff(x), np.diff(y))
    if step.min() < MIN_STEP_M:
        raise RuntimeError(f"{name}: consecutive points {step.min() * 1000:.3f} mm apart "
                           f"at point {int(step.argmin()) + 1}")
    hd = np.arctan2(np.diff(y), np.diff(x))
    if closed:
        hd = np.append(hd, hd[0])
    turn = np.angle(np.exp(1j * np.diff(hd)))
    if np.degrees(np.abs(turn)).max() > MAX_CHORD_TURN_DEG:
        k = int(np.abs(turn).argmax())
        raise RuntimeError(f"{name}: turn of {np.degrees(abs(turn[k])):.1f} deg between "
                           f"chords at point {k + 2}")
    crossings = _segments_cross(x, y, closed)
    if crossings:
        raise RuntimeError(f"{name}: the path crosses itself (segments {crossings[0]})")
    # Radius through three consecutive points (circumcircle), for the summary only.
    a, b, c = step[:-1], step[1:], np.hypot(x[2:] - x[:-2], y[2:] - y[:-2])
    area2 = np.abs((x[1:-1] - x[:-2]) * (y[2:] - y[:-2]) - (y[1:-1] - y[:-2]) * (x[2:] - x[:-2]))
    with np.errstate(divide="ignore"):
        r3 = np.where(area2 > 0, a * b * c / (2.0 * np.maximum(area2, 1e-300)), np.inf)
    return {"points": int(x.size), "length_m": float(step.sum()),
            "step_min_m": float(step.min()), "step_max_m": float(step.max()),
            "max_turn_deg": float(np.degrees(np.abs(turn)).max()),
            "min_3pt_radius_m": float(r3.min()), "total_turn_rad": float(turn.sum())}


def read_back_mountain(path: Path) -> dict:
    rows = [ln for ln in path.read_text(encoding="utf-8").splitlines() if not ln.startswith("#")]
    if rows[0] != "x_m,y_m,z_m":
        raise RuntimeError(f"{path.name}: unexpected header {rows[0]!r}")
    data = np.array([[float(v) for v in r.split(",")] for r in rows[1:]])
    x, y, z = data.T
    info = check_polyline(path.name, x, y, closed=False)
    run = np.hypot(np.diff(x), np.diff(y))
    grade = np.diff(z) / run
    info.update(length_3d_m=float(np.sqrt(run ** 2 + np.diff(z) ** 2).sum()),
                climb_m=float(z[-1] - z[0]), z_min_m=float(z.min()), z_max_m=float(z.max()),
                chord_grade_max=float(grade.max()), chord_grade_min=float(grade.min()))
    return info


def read_back_loop(path: Path) -> dict:
    doc = json.loads(path.read_text(encoding="utf-8"))
    if doc["type"] != "Feature" or doc["geometry"]["type"] != "LineString":
        raise RuntimeError(f"{path.name}: not a LineString Feature")
    pos = np.array(doc["geometry"]["coordinates"], dtype=float)
    if pos.shape[1] != 2 or not np.array_equal(pos[0], pos[-1]):
        raise RuntimeError(f"{path.name}: positions must be [lon, lat] and the loop closed")
    fwd, _ = _tmerc(LOOP_ORIGIN_LAT_DEG, LOOP_ORIGIN_LON_DEG)
    x, y = (np.asarray(v) for v in fwd.transform(pos[:, 0], pos[:, 1]))
    info = check_polyline(path.name, x, y, closed=True)
    if abs(abs(info["total_turn_rad"]) - 2 * math.pi) > 1e-9:
        raise RuntimeError(f"{path.name}: total turning {info['total_turn_rad']:.6f} rad, "
                           "a simple closed curve turns by 2 pi")
    info["closed"] = True
    return info


def read_back_shuttle(path: Path) -> tuple[dict, np.ndarray, np.ndarray]:
    root = ET.parse(path).getroot()
    ns = {"g": "http://www.topografix.com/GPX/1/1"}
    pts = root.findall("g:trk/g:trkseg/g:trkpt", ns)
    lat = np.array([float(p.get("lat")) for p in pts])
    lon = np.array([float(p.get("lon")) for p in pts])
    ele = np.array([float(p.find("g:ele", ns).text) for p in pts])
    fwd, _ = _tmerc(SHUTTLE_ORIGIN_LAT_DEG, SHUTTLE_ORIGIN_LON_DEG)
    x, y = (np.asarray(v) for v in fwd.transform(lon, lat))
    info = check_polyline(path.name, x, y, closed=False)
    run = np.hypot(np.diff(x), np.diff(y))
    info.update(z_min_m=float(ele.min()), z_max_m=float(ele.max()),
                chord_grade_max=float((np.diff(ele) / run).max()),
                chord_grade_min=float((np.diff(ele) / run).min()))
    return info, np.concatenate(([0.0], np.cumsum(run))), np.stack([x, y], 1)


def check_stops(al: Alignment, poly_station: np.ndarray) -> list[str]:
    """Each stop must lie on a straight with at least 15 m of straight either side."""
    s_design = stations_every(al.length_m, SHUTTLE_SPACING_M)
    notes = []
    for name, st in SHUTTLE_STOPS_M.items():
        if not 0.0 <= st <= poly_station[-1]:
            raise RuntimeError(f"stop {name} at {st} m is off the route")
        sd = float(np.interp(st, poly_station, s_design))
        window = np.clip(np.linspace(sd - 15.0, sd + 15.0, 61), 0.0, al.length_m)
        if np.abs(al.curvature(window)).max() > 0.0:
            raise RuntimeError(f"stop {name} at {st} m is within 15 m of a curve")
        piece = next(p for p in al.pieces if p[1] <= sd <= p[2])
        notes.append(f"{name}: station {st:.1f} m (design station {sd:.2f} m, on {piece[0]})")
    return notes


def _describe(al: Alignment) -> list[str]:
    out = []
    for label, s0, s1, g, r in al.pieces:
        rad = f", R {r:g} m" if r is not None else ""
        out.append(f"  {s0:8.2f} - {s1:8.2f} m  {label}{rad}, grade {100 * g:+.1f} %")
    return out


def main() -> None:
    mountain, loop, shuttle = mountain_road(), test_loop(), shuttle_route()
    paths = {"mountain": HERE / "mountain_road.csv", "loop": HERE / "test_loop.geojson",
             "shuttle": HERE / "shuttle_route.gpx"}
    write_mountain(mountain, paths["mountain"])
    write_loop(loop, paths["loop"])
    write_shuttle(shuttle, paths["shuttle"])

    m = read_back_mountain(paths["mountain"])
    lp = read_back_loop(paths["loop"])
    sh, sh_station, _ = read_back_shuttle(paths["shuttle"])
    stops = check_stops(shuttle, sh_station)

    s_fine = np.linspace(0.0, mountain.length_m, 200001)
    for title, al, info in ((MOUNTAIN_NAME, mountain, m), (LOOP_NAME, loop, lp),
                            (SHUTTLE_NAME, shuttle, sh)):
        print(f"{title}: design length {al.length_m:.2f} m")
        print("\n".join(_describe(al)))
        print("  read back: " + ", ".join(
            f"{k} {v:.4f}" if isinstance(v, float) else f"{k} {v}" for k, v in info.items()))
    g = mountain.grade(s_fine)
    print(f"{MOUNTAIN_NAME}: design grade {100 * g.min():+.1f} % to {100 * g.max():+.1f} %")
    print(f"{SHUTTLE_NAME} stops:")
    print("\n".join("  " + s for s in stops))


if __name__ == "__main__":
    main()
