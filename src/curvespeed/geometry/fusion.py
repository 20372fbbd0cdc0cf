"""Several recorded drives of one route fused into one centreline.

A receiver's slowly drifting error moves a whole stretch of a drive by up to its size (metres for
a consumer receiver, common practice) and bends it a little; another drive of the same road,
logged at another time, drifts independently. Averaged station by station, drives cancel part of
each other's drift, which no smoothing of a single drive can. :func:`build_fused_geometry`:

1. brings every drive into the first one's map frame (geographic drives each carry their own
   local projection);
2. takes the longest drive's geometry as the reference (``part`` applies to it, where it
   reverses) and places every fix of every drive on it: its station (the nearest point of the
   reference) and its offset across it. The first drive sets the route's direction: a drive
   that runs the other way is turned round, with a warning naming it (so the fused route
   never runs the way of whichever drive happens to be longest); one whose fixes lie far from
   the reference (more than :data:`MAX_OFFSET_M`, typically) is not the same route and is
   refused, named;
3. averages the fixes of all drives (merged and averaged per drive as for a single drive, see
   :mod:`.drive`) in cells along the reference station, and fits the route to those means as to
   any points;
4. reports how far the drives lie from each other and from the fused centreline: each drive's
   offsets, smoothed over :data:`SPREAD_WINDOW_M`, give its offset at every station. The
   spread between the drives is their root mean square about the drives' mean offset there
   (zero for copies of one drive, whichever way each runs); the centreline's offset is that
   mean, where the fitted line leaves the drives (it rounds the tightest bends off a little,
   as any smoothing does). Both as RMS and largest value, with the station, in the geometry's
   provenance, and each drive's RMS offset from the centreline.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence

import numpy as np
from scipy.spatial import cKDTree

from ..errors import CurvespeedWarning, RouteGeometryError
from ..order_stats import median
from ..route import Route, make_route
from .drive import prepare_drive
from .model import Geometry
from .points import build_geometry

#: A drive whose fixes lie further than this from the reference, in median, is another route.
MAX_OFFSET_M = 25.0
#: Fixes of all drives are averaged in cells this long along the reference, or as long as the
#: widest median spacing of a drive's points (so every cell holds a point of each drive), or
#: the largest cell a drive used on its own.
FUSION_CELL_M = 1.0
#: Offsets of a drive from the fused centreline are averaged over this length (metres) before
#: the spread is taken: the spread describes where the drives lie, not their white noise.
SPREAD_WINDOW_M = 50.0


def build_fused_geometry(routes: Sequence[Route], **options) -> Geometry:
    """The geometry of several drives of one route (see module docstring).

    ``options`` are those of :func:`~.points.build_geometry`; ``part`` applies to the longest
    drive, which is the reference.
    """
    routes = _common_frame(list(routes))
    longest = int(np.argmax([float(r.chord_stations()[-1]) for r in routes]))
    part = options.pop("part", None)
    reference = build_geometry(routes[longest], part=part, **options)
    placed, backwards = [], []
    for i, route in enumerate(routes):            # in the order given, for the report
        drive = prepare_drive(route, part if i == longest else None)
        station, offset = _place(reference, drive.x_m, drive.y_m)
        if median(np.abs(offset)) > MAX_OFFSET_M:
            raise RouteGeometryError(
                f"{route.source}: its fixes lie {median(np.abs(offset)):.0f} m (median) "
                f"from the route of {routes[longest].source}: it is not a drive of the same route; "
                "fuse only drives of one route")
        backwards.append(bool(np.corrcoef(np.arange(station.size), station)[0, 1] < 0))
        if backwards[-1]:                         # driven the other way from the reference
            drive = _reversed(drive)
            station, offset = station[::-1], offset[::-1]
        placed.append((route, drive, station, offset))
    _warn_other_way(routes, backwards)
    fused = _average(placed, routes[0], reference, reverse=backwards[0])
    geometry = build_geometry(fused, **options)
    spread = _spread(geometry, placed)
    provenance = dict(geometry.provenance)
    provenance.update(spread)
    return _with_provenance(geometry, provenance)


def _common_frame(routes: list[Route]) -> list[Route]:
    """Every route in the first one's frame (geographic drives reprojected)."""
    first = routes[0].projection
    geographic = [r.projection is not None for r in routes]
    if any(geographic) and not all(geographic):
        metric = routes[geographic.index(False)].source
        raise RouteGeometryError(
            f"{metric}: in metres, while other drives are latitude/longitude; give every drive "
            "in the same kind of coordinates")
    if first is None:
        return routes
    out = [routes[0]]
    for r in routes[1:]:
        lat, lon = r.projection.to_latlon(r.x_m, r.y_m)
        x, y = first.to_metres(lat, lon)
        out.append(Route(np.asarray(x), np.asarray(y), r.z_m, r.where, r.source, first,
                         r.time_s, r.name))
    return out


def _place(geometry: Geometry, x, y) -> tuple[np.ndarray, np.ndarray]:
    """Station on ``geometry`` nearest each point, and the point's signed offset (left +)."""
    gx, gy = geometry.x_m, geometry.y_m
    _, k = cKDTree(np.column_stack((gx, gy))).query(np.column_stack((x, y)))
    k = np.clip(k, 0, gx.size - 2)
    # project on the segment to the next node (or the previous one, whichever is nearer)
    best_s = np.empty(k.size)
    best_d = np.full(k.size, np.inf)
    best_side = np.zeros(k.size)
    for j in (k - 1, k):
        j = np.clip(j, 0, gx.size - 2)
        ax, ay = gx[j], gy[j]
        dx, dy = gx[j + 1] - ax, gy[j + 1] - ay
        length2 = dx * dx + dy * dy
        t = np.clip(((x - ax) * dx + (y - ay) * dy) / np.where(length2 > 0, length2, 1.0), 0, 1)
        px, py = ax + t * dx, ay + t * dy
        dist = np.hypot(x - px, y - py)
        better = dist < best_d
        best_d[better] = dist[better]
        best_s[better] = (geometry.station_m[j] + t * (geometry.station_m[j + 1]
                                                       - geometry.station_m[j]))[better]
        side = np.sign(dx * (y - ay) - dy * (x - ax))
        best_side[better] = side[better]
    return best_s, best_d * best_side


def _reversed(drive):
    from dataclasses import replace

    rev = {name: getattr(drive, name)[::-1] for name in ("x_m", "y_m", "count", "where", "time")}
    if drive.z_m is not None:
        rev["z_m"] = drive.z_m[::-1]
    return replace(drive, **rev)


def _warn_other_way(routes: list[Route], backwards: list[bool]) -> None:
    """Name each drive that runs the other way from the first one (turned round to fuse); by
    its number too, as the tracks of one file (--all-tracks) share its name."""
    for i, (route, back) in enumerate(zip(routes, backwards)):
        if i and back != backwards[0]:
            warnings.warn(
                f"{route.source}: drive {i + 1} of {len(routes)} is driven the other way from "
                f"drive 1 ({routes[0].source}), which sets the route's direction; it is fused "
                "turned round (if the drives kept to their own lanes, the fused centreline "
                "lies between them: fuse drives of one direction for a lane)",
                CurvespeedWarning, stacklevel=3)


def _average(placed, first: Route, reference: Geometry, reverse: bool = False) -> Route:
    """One point per cell along the reference: the count-weighted mean station and offset of
    every drive's fixes in it, put back on the reference (averaging the offsets, not the
    positions, keeps a cell on a bend from being pulled to the inside of it). ``first`` (the
    first drive) gives the result its source, name and frame; ``reverse`` lists the points
    from the reference's end (the first drive runs that way)."""
    station = np.concatenate([s for _, _, s, _ in placed])
    offset = np.concatenate([o for _, _, _, o in placed])
    w = np.concatenate([np.minimum(d.count, 4.0 * median(d.count)) for _, d, _, _ in placed])
    has_z = all(d.z_m is not None for _, d, _, _ in placed)
    z = np.concatenate([d.z_m for _, d, _, _ in placed]) if has_z else None
    # a cell long enough to hold a point of every drive, so each mean averages the drives
    spacing = max(median(np.abs(np.diff(s))) for _, _, s, _ in placed)
    cell = max(FUSION_CELL_M, spacing, max(d.cell_m for _, d, _, _ in placed))
    index = np.floor(station / cell).astype(np.int64)
    order = np.argsort(index, kind="stable")
    index = index[order]
    starts = np.flatnonzero(np.concatenate(([True], index[1:] != index[:-1])))
    weight = np.add.reduceat(w[order], starts)

    def mean(values):
        return np.add.reduceat(values[order] * w[order], starts) / weight

    s_mean, d_mean = mean(station), mean(offset)
    heading = np.interp(s_mean, reference.station_m, reference.heading_rad)
    x = np.interp(s_mean, reference.station_m, reference.x_m) - np.sin(heading) * d_mean
    y = np.interp(s_mean, reference.station_m, reference.y_m) + np.cos(heading) * d_mean
    labels = [f"cell at station {k * cell:.0f} m" for k in index[starts]]
    z_mean = None if z is None else mean(z)
    if reverse:
        x, y, labels = x[::-1], y[::-1], labels[::-1]
        z_mean = None if z_mean is None else z_mean[::-1]
    return make_route(x, y, z_mean, where=labels,
                      source=first.source, projection=first.projection, name=first.name)


def _spread(geometry: Geometry, placed) -> dict:
    """Each drive's smoothed offset from the fused centreline; the drives' spread about their
    mean offset, and that mean (the centreline's offset from the drives), station by station.
    """
    stations = geometry.station_m
    offsets = []
    per_drive = []
    for route, drive, _, _ in placed:
        s, d = _place(geometry, drive.x_m, drive.y_m)
        order = np.argsort(s, kind="stable")
        s, d = s[order], d[order]
        smooth = _moving_mean(s, d, SPREAD_WINDOW_M, stations)
        offsets.append(smooth)
        per_drive.append({"source": route.source, "points": int(route.n_points),
                          "rms_offset_m": float(np.sqrt(np.nanmean(smooth**2)))})
    table = np.array(offsets)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)     # a station no drive reaches: nan
        mean = np.nanmean(table, axis=0)
        spread = np.sqrt(np.nanmean((table - mean) ** 2, axis=0))
    return {"drives": per_drive, "spread_between_drives_m": _rms_and_max(spread, stations),
            "centreline_offset_m": _rms_and_max(np.abs(mean), stations)}


def _rms_and_max(values: np.ndarray, stations: np.ndarray) -> dict:
    """RMS and largest of ``values`` along ``stations`` (nan where no drive is), and where."""
    k = int(np.nanargmax(values)) if np.any(np.isfinite(values)) else 0
    return {"rms": float(np.sqrt(np.nanmean(values**2))), "max": float(np.nanmax(values)),
            "max_station_m": float(stations[k])}


def _moving_mean(s: np.ndarray, d: np.ndarray, window: float, at: np.ndarray) -> np.ndarray:
    """Mean of ``d`` over ``s`` within ``window / 2`` of each station ``at`` (nan where none)."""
    c = np.concatenate(([0.0], np.cumsum(d)))
    lo = np.searchsorted(s, at - 0.5 * window)
    hi = np.searchsorted(s, at + 0.5 * window)
    n = hi - lo
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(n > 0, (c[hi] - c[lo]) / np.maximum(n, 1), math.nan)


def _with_provenance(geometry: Geometry, provenance: dict) -> Geometry:
    from dataclasses import replace

    return replace(geometry, provenance=provenance)
