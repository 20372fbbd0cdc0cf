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
3. averages the points of all drives (each drive's fixes merged and averaged as for a single
   drive, see :mod:`.drive`) in groups along the reference, and fits the route to those means
   as a drive's own points are fitted (:func:`~.points.fit_drive_points`). A group takes the
   next points in station order until it holds a point of every drive that runs there (a
   drive with no point within :data:`GAP_SPACINGS` of its usual spacing has a gap, or has
   ended, and is not waited for): every mean averages the drives, and a group is no longer
   than the sparsest drive's spacing there, so where the drives were slow (a tight bend) the
   means lie as densely as each drive's own points (copies of one drive give its own points).
   Drives parked at the same end of the road end where their drifts put them, metres apart
   along it; the groups past the first of those ends join the group holding it, so the route
   ends at their mean. Each mean carries the fixes it averages, as a drive's points do: its
   weight in the fit and in the noise estimate (weighed as one fix each, the means of a bend
   driven slowly were smoothed as much as the straights' single fixes, and the bend rounded
   off); and their mean time, with the drift rate of the mean of independent drives (their
   mean rate over their number), so the curvature's uncertainty counts the drift the mean
   keeps (drives that do not drift independently, copies of one drive, keep more of it than
   is counted). Fixes beyond an end of the reference are placed on its end segment
   continued, and put back there;
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
from ..order_stats import distinct, median, percentile
from ..route import Route, make_route
from .drive import DrivePart, DrivePoints, prepare_drive
from .model import Geometry
from .points import MAX_WEIGHT_COUNT_FACTOR, build_geometry, fit_drive_points

#: A drive whose fixes lie further than this from the reference, in median, is another route.
MAX_OFFSET_M = 25.0
#: A group of the drives' points waits for a drive's next point only while it lies within this
#: many of the drive's usual spacings (the 95th percentile of its steps along the reference)
#: of the group's first point: a drive logged at 10 Hz steps at most 2.5 m at 25 m/s, so a
#: drive that has no point for 5 m there has a gap in its log, or has ended.
GAP_SPACINGS = 2.0
#: A drive's points are ordered by station, except that one stepping back along the reference by
#: less than this many noise widths of its fixes keeps its driving order: a drive's points lie
#: 4 noise widths apart along its own path (:data:`.drive.CELL_NOISE_WIDTHS`), so a smaller
#: step back is its noise (a standstill's mean behind the fixes that approached it), not a
#: stretch driven twice.
STEP_BACK_NOISE_WIDTHS = 4.0
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
    fused = _fused_points(placed, reference, reverse=backwards[0])
    first = routes[0]
    route = make_route(fused.x_m, fused.y_m, fused.z_m, where=list(fused.where),
                       source=first.source, projection=first.projection, name=first.name)
    geometry = fit_drive_points(route, fused, **options)
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
    """Station on ``geometry`` nearest each point, and the point's signed offset (left +).
    Beyond an end of an open geometry, the station and offset along and across its end segment
    continued (negative, or past its length): the point is put back where it was (a point
    placed at the end itself, at its distance across, would be moved sideways)."""
    gx, gy = geometry.x_m, geometry.y_m
    _, k = cKDTree(np.column_stack((gx, gy))).query(np.column_stack((x, y)))
    k = np.clip(k, 0, gx.size - 2)
    last = gx.size - 2
    # project on the segment to the next node (or the previous one, whichever is nearer)
    best_s = np.empty(k.size)
    best_d = np.full(k.size, np.inf)
    best_side = np.zeros(k.size)
    for j in (k - 1, k):
        j = np.clip(j, 0, last)
        ax, ay = gx[j], gy[j]
        dx, dy = gx[j + 1] - ax, gy[j + 1] - ay
        length2 = dx * dx + dy * dy
        t = ((x - ax) * dx + (y - ay) * dy) / np.where(length2 > 0, length2, 1.0)
        open_end = not geometry.closed
        t = np.clip(t, np.where((j == 0) & open_end, -np.inf, 0.0),
                    np.where((j == last) & open_end, np.inf, 1.0))
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


def _fused_points(placed, reference: Geometry, reverse: bool = False) -> DrivePoints:
    """One point per group of the drives' points (see :func:`_groups`): the count-weighted
    mean station and offset of its points, put back on the reference (averaging the offsets,
    not the positions, keeps a group on a bend from being pulled to the inside of it), with the
    fixes it averages, their mean time and height. ``reverse`` lists the points from the
    reference's end (the first drive runs that way)."""
    drives = [d for _, d, _, _ in placed]
    station = np.concatenate([s for _, _, s, _ in placed])
    offset = np.concatenate([o for _, _, _, o in placed])
    # as in a single drive's fit, a point stands for at most a few times a drive's usual count
    w = np.concatenate([np.minimum(d.count, MAX_WEIGHT_COUNT_FACTOR * median(d.count))
                        for d in drives])
    # time since the drive's first point: only its steps matter (the drift's random walk)
    elapsed = np.concatenate([np.abs(d.time - d.time[0]) for d in drives])
    has_z = all(d.z_m is not None for d in drives)
    order, starts = _groups([s for _, _, s, _ in placed],
                            [d.order_noise_m for d in drives])
    weight = np.add.reduceat(w[order], starts)

    def mean(values):
        return np.add.reduceat(values[order] * w[order], starts) / weight

    s_mean = mean(station)
    x, y = _on_reference(reference, s_mean, mean(offset))
    where = np.array([f"drives' mean at station {s:.0f} m" for s in s_mean], dtype=object)
    time = mean(elapsed)
    z = mean(np.concatenate([d.z_m for d in drives])) if has_z else None
    if reverse:
        x, y, where, weight, time = x[::-1], y[::-1], where[::-1], weight[::-1], time[::-1]
        z = None if z is None else z[::-1]
        time = time[0] - time
    # the drift of the mean of drives that drift independently (variance over their number);
    # a drive without a standstill to measure its drift by is taken to drift as the others
    rates = [d.drift_rate for d in drives if d.drift_rate is not None]
    drift = sum(rates) / len(rates) / len(drives) if rates else None
    n = x.size
    return DrivePoints(
        x, y, z, weight, where, time, max(d.order_noise_m for d in drives),
        drift, max(d.cell_m for d in drives),
        sum(d.rest_runs for d in drives), sum(d.rest_fixes for d in drives),
        (DrivePart(0, n - 1, float(np.sum(np.hypot(np.diff(x), np.diff(y)))),
                   f"{where[0]} to {where[-1]}"),), 0, sum(d.n_fixes for d in drives))


def _groups(stations: list[np.ndarray], noise: list[float]) -> tuple[np.ndarray, np.ndarray]:
    """Groups of the drives' points along the reference (``stations``: each drive's, in its
    driving order; ``noise``: each drive's noise in the order of its fixes): the order of all
    points by station, and where each group starts in it.

    A group takes points in that order until it holds a point of every drive, or the drives it
    lacks have no point within :data:`GAP_SPACINGS` of their usual spacing of its first point
    (a gap, an end). A drive's points that step back along the reference by less than
    :data:`STEP_BACK_NOISE_WIDTHS` of its noise (a standstill's mean behind the fixes before
    it) keep their driving order, so copies of one drive give its own points, in its own order,
    each once per copy.
    """
    keys = [_order_key(s, STEP_BACK_NOISE_WIDTHS * sigma) for s, sigma in zip(stations, noise)]
    key = np.concatenate(keys)
    drive = np.concatenate([np.full(s.size, k) for k, s in enumerate(stations)])
    rank = np.concatenate([np.arange(s.size) for s in stations])
    order = np.lexsort((drive, rank, key))
    key, drive = key[order], drive[order]
    reach = [GAP_SPACINGS * (percentile(np.abs(np.diff(s)), 95) if s.size > 1 else 0.0)
             for s in stations]
    # each drive's next point after every position in that order (its key)
    upcoming = [np.append(key[drive == k], math.inf)[np.cumsum(drive == k)].tolist()
                for k in range(len(stations))]
    key_list, drive_list = key.tolist(), drive.tolist()
    starts, first, present = [0], key_list[0], set()
    for i in range(key.size - 1):
        present.add(drive_list[i])
        if all(k in present or upcoming[k][i] - first > reach[k]
               for k in range(len(stations))):
            starts.append(i + 1)
            first, present = key_list[i + 1], set()
    return order, _pool_ends(np.array(starts, dtype=np.intp), key, drive, max(reach))


def _pool_ends(starts: np.ndarray, key: np.ndarray, drive: np.ndarray,
               reach: float) -> np.ndarray:
    """``starts`` with the groups at each end of the route pooled: the drives that end within
    ``reach`` of the last point end at stations their drift scatters (parked at one spot, each
    drive's end lies up to its drift away along the road), and the groups past the first of
    those ends would hold only the drives that happen to reach further, the line's end bending
    to them; they join the group holding that first end, whose mean is then the drives' end.
    Likewise at the start."""
    together = [k for k in distinct(drive) if key[drive == k].max() >= key[-1] - reach]
    ending = min(together, key=lambda k: key[drive == k].max())
    last = int(np.flatnonzero(drive == ending)[-1])
    starts = starts[: np.searchsorted(starts, last, side="right")]
    together = [k for k in distinct(drive) if key[drive == k].min() <= key[0] + reach]
    starting = max(together, key=lambda k: key[drive == k].min())
    first = int(np.flatnonzero(drive == starting)[0])
    keep = starts > first
    return np.concatenate(([0], starts[keep]))


def _order_key(station: np.ndarray, tolerance: float) -> np.ndarray:
    """``station``, held at the last one where it steps back by less than ``tolerance``."""
    key = station.tolist()
    for i in range(1, len(key)):
        if key[i - 1] - tolerance < key[i] < key[i - 1]:
            key[i] = key[i - 1]
    return np.array(key)


def _on_reference(reference: Geometry, station: np.ndarray, offset: np.ndarray):
    """Positions at ``station`` and ``offset`` (left +) from the reference, continued straight
    along its end headings beyond its ends."""
    s = reference.station_m
    heading = np.interp(station, s, reference.heading_rad)
    x = np.interp(station, s, reference.x_m)
    y = np.interp(station, s, reference.y_m)
    for end, beyond in ((0, station < s[0]), (-1, station > s[-1])):
        along = station[beyond] - s[end]
        x[beyond] += along * np.cos(reference.heading_rad[end])
        y[beyond] += along * np.sin(reference.heading_rad[end])
    return x - np.sin(heading) * offset, y + np.cos(heading) * offset


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
