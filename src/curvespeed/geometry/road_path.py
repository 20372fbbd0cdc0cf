"""A path along lanes of designed roads: the lane centre as a Geometry, exactly.

A path is a chain of :class:`PathPiece` objects, each a stretch ``[s_start_m, s_end_m]`` of one
road's reference line (a :class:`~curvespeed.geometry.design_curves.ReferenceLine`), driven
forward or against its station, at a lateral offset ``t(s)`` (left of the reference line
positive: the lane offset plus the widths of the lanes in between and half the lane's own).

The lane centre ``P(s) = r(s) + t(s) n(s)`` (``n`` the unit left normal) is evaluated in closed
form. With ``g = |r'|``, ``kappa`` the reference line's curvature, ``A = g (1 - kappa t)`` and
``B = t'`` (primes: derivatives along ``s``), ``P' = A T + B n`` and the lane centre's signed
curvature is

    kappa_P = (g kappa (A^2 + B^2) + A B' - B A') / (A^2 + B^2)^(3/2),

which is ``kappa / (1 - kappa t)`` where the offset is constant (concentric arcs). Stations of
the path are arc length along the lane centre, ``sigma = integral |P'| ds`` (Gauss-Legendre
quadrature between breakpoints of the data, to round-off); on the reference line itself of
lines, arcs, clothoids and poly3 they equal the design station ``s``. Nodes follow the
:mod:`~curvespeed.geometry.model` convention, and each node's station is turned back into a
road station by Newton's method on the quadrature.

Height is the road's elevation plus ``t tan(phi)`` for the road's roll angle ``phi``
(superelevation, positive where the road falls to its right); grade is ``dz / dsigma``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import legendre

from ..errors import RouteGeometryError
from ..limits import SpeedZone, Superelevation
from .design_curves import Piecewise3, ReferenceLine, sum_piecewise
from .model import Geometry
from .points import MAX_STATIONS
from .road_checks import check_path_values

#: Gauss-Legendre nodes per piece of the arc-length table: the integrand |P'| is smooth between
#: breakpoints and the pieces are at most _TABLE_STEP_M long, so 10 nodes reach round-off.
_GL_NODES, _GL_WEIGHTS = legendre.leggauss(10)
_TABLE_STEP_M = 2.0
_NEWTON_STEPS = 6
#: Newton stops once no station moves by more than this, metres (round-off of the quadrature).
_NEWTON_TOL_M = 1e-11
#: A chain whose end lies this close to its start, with the same heading (to _CLOSE_RAD), is a
#: loop; metres and radians. Design data close a loop to round-off.
_CLOSE_M = 1e-3
_CLOSE_RAD = 1e-4
#: Superelevation rates are rounded to this many decimals, so that equal rates form one range
#: (rise over run; 1e-6 is a height difference of 1 micrometre per metre of cross-section).
_RATE_DECIMALS = 6


@dataclass(frozen=True)
class PathPiece:
    """One stretch of one road's lane centre, driven forward or in reverse.

    Attributes
    ----------
    reference : ReferenceLine
        The road's plan geometry.
    s_start_m, s_end_m : float
        Road station range, ``s_start_m < s_end_m``.
    reverse : bool
        Driven from ``s_end_m`` toward ``s_start_m``.
    offset : tuple of Piecewise3
        Their sum is the lateral offset ``t(s)`` of the lane centre, metres, left positive.
    elevation, roll : Piecewise3
        Height of the reference line (metres) and roll angle (radians, positive where the road
        falls to the right of its station direction).
    breakpoints_m : tuple of float
        Stations inside the range where the data change element (for the quadrature).
    speed_records : tuple of (float, float, float, str)
        ``(s_from_m, s_to_m, max_speed_mps, origin)`` in road stations.
    label : str
        For messages: road and lane.
    """

    reference: ReferenceLine
    s_start_m: float
    s_end_m: float
    reverse: bool
    offset: tuple
    elevation: Piecewise3
    roll: Piecewise3
    breakpoints_m: tuple = ()
    speed_records: tuple = ()
    label: str = ""


def lane_centre(piece: PathPiece, s) -> dict:
    """The lane centre at road stations ``s``: position, heading and curvature in the
    direction of travel, ``|dsigma/ds|``, height, grade and roll angle in the direction of
    travel."""
    s = np.atleast_1d(np.asarray(s, dtype=float))
    ref = piece.reference.evaluate(s)
    t, t1, t2 = (sum_piecewise(piece.offset, s, d) for d in (0, 1, 2))
    g, g1, k, k1 = ref.speed, ref.speed_rate_1pm, ref.curvature_1pm, ref.curvature_rate_1pm2
    a = g * (1.0 - k * t)
    a1 = g1 * (1.0 - k * t) - g * (k1 * t + k * t1)
    b, b1 = t1, t2
    q = a * a + b * b
    speed = np.sqrt(q)
    curvature = (g * k * q + a * b1 - b * a1) / q**1.5
    heading = ref.heading_rad + np.arctan2(b, a)
    x = ref.x_m - t * np.sin(ref.heading_rad)
    y = ref.y_m + t * np.cos(ref.heading_rad)
    phi, phi1 = piece.roll(s), piece.roll(s, 1)
    z = piece.elevation(s) + t * np.tan(phi)
    dz = piece.elevation(s, 1) + t1 * np.tan(phi) + t * phi1 / np.cos(phi) ** 2
    sign = -1.0 if piece.reverse else 1.0
    bad = ~(np.isfinite(curvature) & np.isfinite(x) & np.isfinite(y) & np.isfinite(z))
    if bad.any():
        k_bad = int(np.flatnonzero(bad)[0])
        raise RouteGeometryError(
            f"{piece.label}: at road station {s[k_bad]:.2f} m the design data give no finite "
            "position, height or curvature (a cubic whose tangent vanishes, or values too "
            "large); check the plan element and profiles there")
    if np.any(a <= 0):
        k_bad = int(np.flatnonzero(a <= 0)[0])
        raise RouteGeometryError(
            f"{piece.label}: at road station {s[k_bad]:.2f} m the lane centre lies "
            f"{abs(t[k_bad]):.2f} m from the reference line, beyond its centre of curvature "
            f"(radius {1 / abs(k[k_bad]):.2f} m): the lane folds over itself there; check the "
            "lane widths and the plan geometry")
    return {"x": x, "y": y, "heading": heading + (math.pi if piece.reverse else 0.0),
            "curvature": sign * curvature, "speed": speed, "z": z, "grade": sign * dz / speed,
            "roll": sign * phi}


def _knots(piece: PathPiece) -> np.ndarray:
    inner = [b for b in piece.breakpoints_m if piece.s_start_m < b < piece.s_end_m]
    edges = np.unique(np.concatenate(([piece.s_start_m], inner, [piece.s_end_m])))
    out = [edges[:1]]
    for a, b in zip(edges[:-1], edges[1:]):
        n = max(1, math.ceil((b - a) / _TABLE_STEP_M))
        out.append(a + (b - a) * np.arange(1, n + 1) / n)
    knots = np.concatenate(out)
    knots[-1] = piece.s_end_m
    return knots


def _integral(piece: PathPiece, a, b) -> np.ndarray:
    """Lane-centre arc length from road station ``a`` to ``b`` (arrays, one piece of data)."""
    a, b = np.atleast_1d(a), np.atleast_1d(b)
    half = 0.5 * (b - a)
    s = (0.5 * (a + b))[:, None] + half[:, None] * _GL_NODES
    speed = lane_centre(piece, s.ravel())["speed"].reshape(s.shape)
    return half * (speed @ _GL_WEIGHTS)


@dataclass(frozen=True)
class _Table:
    knots: np.ndarray
    sigma: np.ndarray           # arc length from s_start_m, forward

    @property
    def length_m(self) -> float:
        return float(self.sigma[-1])


def _table(piece: PathPiece) -> _Table:
    knots = _knots(piece)
    pieces = _integral(piece, knots[:-1], knots[1:])
    return _Table(knots, np.concatenate(([0.0], np.cumsum(pieces))))


def _road_station(piece: PathPiece, table: _Table, sigma_forward) -> np.ndarray:
    """Road stations where the forward arc length is ``sigma_forward`` (Newton on the table)."""
    target = np.asarray(sigma_forward, dtype=float)
    s = np.interp(target, table.sigma, table.knots)
    for _ in range(_NEWTON_STEPS):
        j = np.clip(np.searchsorted(table.knots, s, side="right") - 1, 0, table.knots.size - 2)
        sigma = table.sigma[j] + _integral(piece, table.knots[j], s)
        step = (sigma - target) / lane_centre(piece, s)["speed"]
        s = np.clip(s - step, piece.s_start_m, piece.s_end_m)
        if np.max(np.abs(step), initial=0.0) < _NEWTON_TOL_M:
            break
    return s


def station_of(piece: PathPiece, table: _Table, s) -> np.ndarray:
    """Path station (from the piece's start, in the direction of travel) of road stations."""
    s = np.clip(np.atleast_1d(np.asarray(s, dtype=float)), piece.s_start_m, piece.s_end_m)
    j = np.clip(np.searchsorted(table.knots, s, side="right") - 1, 0, table.knots.size - 2)
    forward = table.sigma[j] + _integral(piece, table.knots[j], s)
    return table.length_m - forward if piece.reverse else forward


@dataclass(frozen=True)
class RoadPath:
    """A path's geometry with what the road data say along it.

    Attributes
    ----------
    geometry : Geometry
        The lane centre at uniform stations (exact: no curvature bound).
    piece_index : ndarray of int
        Which piece each node lies on.
    road_station_m : ndarray
        The road station of each node.
    superelevation : tuple of Superelevation
        Cross-slope toward the inside of each curve, node by node, merged where equal.
    zones : tuple of SpeedZone
        Speed records as zones in path stations.
    piece_starts_m : ndarray
        Path station where each piece starts (one more entry: the length).
    """

    geometry: Geometry
    piece_index: np.ndarray
    road_station_m: np.ndarray
    superelevation: tuple
    zones: tuple
    piece_starts_m: np.ndarray


def build_road_path(pieces, spacing_m: float = 1.0, closed: bool | None = None,
                    name: str = "road", source: str = "road", projection=None) -> RoadPath:
    """Sample the chain of pieces at uniform stations of the lane centre.

    ``closed=None`` makes the path a loop when its end meets its start with the same heading;
    ``True`` demands it (a clear error otherwise), ``False`` keeps it open.
    """
    if not (math.isfinite(spacing_m) and spacing_m > 0):
        raise RouteGeometryError(f"{source}: station spacing must be a positive number of "
                                 f"metres (got {spacing_m!r}); use --spacing 1 for example")
    if not pieces:
        raise RouteGeometryError(f"{source}: the chosen roads have no lane section of positive "
                                 "length; there is nothing to drive")
    try:
        tables = [_table(p) for p in pieces]
    except RouteGeometryError as exc:             # name the file, as every reader's message does
        raise RouteGeometryError(f"{source}: {exc}") from None
    lengths = np.array([t.length_m for t in tables])
    starts = np.concatenate(([0.0], np.cumsum(lengths)))
    total = float(starts[-1])
    if total / spacing_m > MAX_STATIONS:
        raise RouteGeometryError(f"{source}: {total:.0f} m at {spacing_m:g} m spacing is "
                                 f"{total / spacing_m:.3g} stations (at most {MAX_STATIONS:.0e}); "
                                 f"use --spacing {total / MAX_STATIONS:.3g} or more")
    n = max(1, math.ceil(total / spacing_m - 1e-9))
    station = total * np.arange(n + 1) / n
    which = np.clip(np.searchsorted(starts, station, side="right") - 1, 0, len(pieces) - 1)
    names = ("x", "y", "heading", "curvature", "z", "grade", "roll")
    values = {k: np.empty(n + 1) for k in names}
    road_s = np.empty(n + 1)
    for i in np.unique(which):
        mask = which == i
        piece, table = pieces[i], tables[i]
        local = np.clip(station[mask] - starts[i], 0.0, table.length_m)
        forward = table.length_m - local if piece.reverse else local
        s = _road_station(piece, table, forward)
        road_s[mask] = s
        centre = lane_centre(piece, s)
        for k in names:
            values[k][mask] = centre[k]
    _warn_gaps(pieces, tables, source)
    has_z = any(p.elevation.starts_m.size or p.roll.starts_m.size for p in pieces)
    check_path_values(values, station, road_s, which, pieces, source, has_z)
    heading = np.unwrap(values["heading"])
    heading -= 2 * math.pi * round(heading[0] / (2 * math.pi))
    is_loop = _meets_itself(values["x"], values["y"], heading)
    if closed and not is_loop:
        gap = math.hypot(values["x"][-1] - values["x"][0], values["y"][-1] - values["y"][0])
        raise RouteGeometryError(f"{source}: the path's end lies {gap:.3f} m from its start; "
                                 "it is not a loop, so it cannot be planned as closed (drop "
                                 "--closed, or choose roads that return to the start)")
    loop = is_loop if closed is None else bool(closed)
    if loop:
        for k in ("x", "y", "curvature", "z", "grade", "roll"):
            values[k][-1] = values[k][0]
        heading[-1] = heading[0] + 2 * math.pi * round((heading[-1] - heading[0]) / (2 * math.pi))
    geometry = Geometry(
        station_m=station, x_m=values["x"], y_m=values["y"], heading_rad=heading,
        curvature_1pm=values["curvature"], z_m=values["z"] if has_z else None,
        grade=values["grade"] if has_z else None, closed=loop,
        spacing_m=float(station[1] - station[0]), projection=projection, source=source,
        name=name, provenance={"design_data": "exact", "pieces": [p.label for p in pieces]})
    return RoadPath(geometry, which, road_s,
                    _superelevation(station, values["curvature"], values["roll"]),
                    _zones(pieces, tables, starts), starts)


#: Consecutive pieces whose ends lie farther apart than this (metres, in plan or in height) or
#: whose headings differ by more than _JOIN_RAD are reported: the data do not join up there.
_JOIN_M = 0.01
_JOIN_RAD = 1e-3


def _warn_gaps(pieces, tables, source: str) -> None:
    """Warn where one piece does not end where the next begins (position, height, heading)."""
    import warnings

    from ..errors import CurvespeedWarning

    for a, b in zip(pieces[:-1], pieces[1:]):
        end = lane_centre(a, a.s_start_m if a.reverse else a.s_end_m)
        start = lane_centre(b, b.s_end_m if b.reverse else b.s_start_m)
        gap = float(np.hypot(end["x"] - start["x"], end["y"] - start["y"])[0])
        rise = float(abs(end["z"] - start["z"])[0])
        turn = float(abs((end["heading"] - start["heading"] + math.pi) % (2 * math.pi)
                         - math.pi)[0])
        if gap > _JOIN_M or rise > _JOIN_M or turn > _JOIN_RAD:
            warnings.warn(f"{source}: {a.label} ends {gap:.3f} m in plan and {rise:.3f} m in "
                          f"height from where {b.label} begins, heading {math.degrees(turn):.2f}"
                          " degrees apart; the path jumps there. Check the roads' links and "
                          "start points", CurvespeedWarning, stacklevel=3)


def _meets_itself(x, y, heading) -> bool:
    turn = (heading[-1] - heading[0]) / (2 * math.pi)
    return (math.hypot(x[-1] - x[0], y[-1] - y[0]) < _CLOSE_M
            and abs(turn - round(turn)) * 2 * math.pi < _CLOSE_RAD and round(turn) != 0)


def superelevation_rate(curvature, roll) -> np.ndarray:
    """Cross-slope toward the inside of the curve (rise over run) from the roll angle in the
    direction of travel (positive: falling to the right). A right-hand curve (negative
    curvature) has its inside on the right, so a road falling to the right is banked toward
    it; on a left-hand curve the same roll is adverse. On a straight the sign does not matter
    (no lateral demand) and the roll's is kept."""
    inside = np.where(np.asarray(curvature) > 0, -1.0, 1.0)
    return inside * np.tan(roll)


def _superelevation(station, curvature, roll) -> tuple:
    rate = np.round(superelevation_rate(curvature, roll), _RATE_DECIMALS)
    ds = float(station[1] - station[0])
    out = []
    k = 0
    while k < rate.size:
        j = k
        while j + 1 < rate.size and rate[j + 1] == rate[k]:
            j += 1
        if rate[k] != 0.0:
            out.append(Superelevation(float(station[k] - 0.25 * ds),
                                      float(station[j] + 0.25 * ds), float(rate[k]),
                                      origin="road data (superelevation)"))
        k = j + 1
    return tuple(out)


def _zones(pieces, tables, starts) -> tuple:
    zones = []
    for piece, table, start in zip(pieces, tables, starts[:-1]):
        for s_from, s_to, mps, origin in piece.speed_records:
            a, b = max(s_from, piece.s_start_m), min(s_to, piece.s_end_m)
            if b <= a:
                continue
            ends = np.sort(station_of(piece, table, [a, b]))
            zones.append(SpeedZone(float(start + ends[0]), float(start + ends[1]), float(mps),
                                   origin=origin))
    return tuple(zones)
