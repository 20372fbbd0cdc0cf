"""Read speeds to check and resample them onto a route's stations (``check --speeds``).

Two kinds of file are accepted, chosen by extension:

``.csv``
    Any comma-separated table with the columns ``station_m`` and ``speed_mps`` (read by name, so
    a profile written by ``curvespeed plan`` works, as does a two-column recorded drive).
    Stations are metres along *this* route and must increase; speeds must not be negative.
    Squared speed is interpolated linearly in station (the discrete model of
    :mod:`curvespeed.problem`); a file at the route's own stations (a profile of this route,
    stations within 1 mm) is taken as written. A file that carries positions (a profile:
    ``x_m,y_m``, and ``lat,lon`` on a geographic route, compared in the route's projection) must
    be of *this* route: a position further than :func:`route_match_tolerance_m` from the route
    at the same station, or a first or last station that far beyond the route's ends, is
    refused (the profile was planned on another route or with other settings).
``.gpx``
    A GPS track whose points carry ``<time>`` (read with :func:`curvespeed.io.read_route`).
    The route must be geographic too (latitude/longitude CSV, GeoJSON or GPX). Each track
    point is taken through its latitude/longitude into the *route's* projection and placed on
    the route: among the route stations within ``max_offset_m`` of the point (a k-d tree
    search), the nearest one that keeps the station moving forward, refined by projecting the
    point onto the neighbouring segments (a point may fall back by up to three times the noise,
    as GPS jitter does while standing still). Station over time is then smoothed by a cubic
    smoothing spline whose residual budget is the GPS noise (FITPACK's ``s = n sigma^2``), made
    non-decreasing, and speed is its derivative, clipped at zero. Near the first and last few
    points the smoothing is one-sided and less certain: record from a little before the route's
    start to a little after its end. Leading and trailing points farther than
    ``max_offset_m`` from the route are dropped with a warning; such a point in the middle is an
    error. On a closed route the trace may start anywhere; the first lap from its start is
    checked (later laps are ignored with a warning).

Coverage: speeds must cover the whole route. A file that leaves more than
:func:`end_tolerance_m` uncovered at either end is refused with an error naming the missing
station range (a short file is never padded silently); within that tolerance the end speed is
held. Speeds beyond the route's end are ignored with a warning.

Every error is a :class:`~curvespeed.errors.SpeedFileError` naming the file and the line (CSV)
or point (``trkpt N``) where it applies.
"""

from __future__ import annotations

import math
import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import CurvespeedWarning, SpeedFileError
from ..export import check_stations_and_speeds
from ..geometry import Geometry
from .table_csv import MAX_SPEED_MPS, read_table_csv

#: Speeds file extensions (lower case) and the format each selects.
SPEED_EXTENSIONS = {".csv": "csv", ".gpx": "gpx"}

#: Position noise of a GPS track, metres (standard deviation per coordinate): consumer
#: receivers in open sky are good to a few metres (common practice).
DEFAULT_TRACE_NOISE_M = 2.0
#: A track point farther than this from the route is off the route, metres: lane offsets of a
#: multi-lane road plus several times the GPS noise.
DEFAULT_MAX_OFFSET_M = 25.0
#: Smallest uncovered length at either end that is refused, metres (see end_tolerance_m).
END_TOLERANCE_M = 1.0
#: Stations written within this of the route's own are taken as those stations, metres:
#: profiles print stations to 0.1 mm, and re-interpolating over that rounding would add
#: acceleration noise (~1e-4 of the acceleration per step) that a jerk check amplifies.
_SAME_STATION_M = 1e-3
#: Fastest plausible travel between two track points, m/s: bounds the forward search window.
_MAX_PLAUSIBLE_SPEED_MPS = 100.0
#: A profile's position may lie this many times the route's position noise from the route at
#: the same station (see :func:`route_match_tolerance_m`), and never less than
#: :data:`ROUTE_MATCH_MIN_M` metres.
ROUTE_MATCH_NOISE_MULTIPLE = 10.0
ROUTE_MATCH_MIN_M = 5.0


@dataclass(frozen=True)
class SpeedTrace:
    """Speeds at every station of a geometry, read from a file.

    Attributes
    ----------
    speed_mps : ndarray, shape (n_nodes,)
        Speed at each station, m/s.
    source : str
        The file name as given.
    kind : str
        "csv" or "gpx".
    covered_m : tuple of float
        Station range the file covered, metres (before the ends were held).
    station_m, time_s : ndarray or None
        For a GPX track: each used point's station on the route (metres, unwrapped on a closed
        route) and time (seconds from the first point); None for a CSV file.
    """

    speed_mps: np.ndarray
    source: str
    kind: str
    covered_m: tuple[float, float]
    station_m: np.ndarray | None = None
    time_s: np.ndarray | None = None


def end_tolerance_m(geometry: Geometry, noise_m: float = 0.0) -> float:
    """Uncovered length at either end that is accepted (end speed held), metres.

    The larger of :data:`END_TOLERANCE_M`, one station spacing, and three times the position
    noise (a GPS track's first point may lie a little before or after the route's start).
    """
    return max(END_TOLERANCE_M, geometry.spacing_m, 3.0 * noise_m)


def route_match_tolerance_m(geometry: Geometry) -> float:
    """How far a profile's position may lie from the route at the same station, metres.

    A profile planned on this route with the same settings carries the route's own positions
    (printed to 0.1 mm), so it differs by nothing. Planned with other settings (spacing, stated
    noise) the fitted path moves sideways by up to about the position noise, and its stations,
    arc length along that path, shift along it by the difference in length so far (on the
    bundled mountain road planned at 2 m instead of 1 m: 8 mm at most). The tolerance is
    :data:`ROUTE_MATCH_NOISE_MULTIPLE` times the noise the fit used, so a noisy log's own
    scatter never trips it, and at least :data:`ROUTE_MATCH_MIN_M`: more than such shifts on
    design-grade points, yet less than the distance to the next road or the other carriageway
    somewhere along a route (lanes are about 3.5 m wide, common practice).
    """
    noise = (geometry.provenance.get("position_noise") or {}).get("used_m") or 0.0
    return max(ROUTE_MATCH_MIN_M, ROUTE_MATCH_NOISE_MULTIPLE * float(noise))


def read_speed_trace(path: str | os.PathLike, geometry: Geometry, *,
                     noise_m: float = DEFAULT_TRACE_NOISE_M,
                     max_offset_m: float = DEFAULT_MAX_OFFSET_M) -> SpeedTrace:
    """Read a speeds file and resample it onto ``geometry``'s stations.

    Parameters
    ----------
    path : str or path-like
        ``.csv`` with ``station_m,speed_mps`` or ``.gpx`` track with time stamps.
    geometry : Geometry
        The route the speeds belong to.
    noise_m : float
        GPS position noise of a track, metres (sets the smoothing); unused for CSV.
    max_offset_m : float
        Farthest a track point may lie from the route, metres; unused for CSV.

    Raises
    ------
    SpeedFileError
        Unknown extension, unreadable file, missing columns, stations not increasing, negative
        speeds, a GPX without times, a track off the route, or a file that covers less than the
        route.
    RouteFormatError
        A GPX file the GPX reader refuses.
    """
    source = str(path)
    kind = SPEED_EXTENSIONS.get(Path(path).suffix.lower())
    if kind is None:
        raise SpeedFileError(f"{source}: speeds are read from .csv (station_m,speed_mps) or .gpx "
                             "(a track with time stamps); give one of those")
    if not (math.isfinite(noise_m) and noise_m > 0.0):
        raise SpeedFileError(f"{source}: trace noise must be a positive number of metres, got "
                             f"{noise_m:g}")
    if kind == "csv":
        return _read_csv(path, geometry)
    return _read_gpx(path, geometry, noise_m, max_offset_m)


# --- CSV ---------------------------------------------------------------------------------------

def _read_csv(path, geometry: Geometry) -> SpeedTrace:
    table = read_table_csv(path)
    source = table.source
    station, speed = table.require("station_m", "speed_mps", what="check --speeds")
    where = table.where
    check_stations_and_speeds(station, speed, source, where)
    from .profile_csv import check_step_kind_column

    check_step_kind_column(table, speed)            # as export reads the same file
    _check_same_route(table, station, geometry)
    first, last = float(station[0]), float(station[-1])
    _check_coverage(source, first, last, geometry, end_tolerance_m(geometry),
                    where_first=where[0], where_last=where[-1])
    if station.size == geometry.n_nodes and \
            np.max(np.abs(station - geometry.station_m)) <= _SAME_STATION_M:
        # the route's own stations (a profile of this route): take the speeds as written
        return SpeedTrace(speed.copy(), source, "csv", (first, last))
    b = np.interp(geometry.station_m, station, speed * speed)
    return SpeedTrace(np.sqrt(b), source, "csv", (first, last))


def _check_same_route(table, station: np.ndarray, geometry: Geometry) -> None:
    """Refuse a profile whose positions do not match the route, or that runs on past its ends
    (a profile of another route, or planned with other settings).

    Positions are the file's ``lat,lon`` taken into the route's projection when both are
    geographic, else its ``x_m,y_m``; a file with neither (a recorded drive as
    ``station_m,speed_mps``) carries nothing to compare and is taken as given. The route's
    position at each of the file's stations is interpolated between its nodes (the chord
    differs from the path by ds^2 / (8 R), millimetres at 1 m stations).
    """
    if geometry.projection is not None and table.has("lat", "lon"):
        px, py = geometry.projection.to_metres(table.columns["lat"], table.columns["lon"])
        columns = "lat,lon"
    elif table.has("x_m", "y_m"):
        px, py = table.columns["x_m"], table.columns["y_m"]
        columns = "x_m,y_m"
    else:
        return
    tol = route_match_tolerance_m(geometry)
    source, where = table.source, table.where
    length = geometry.length_m
    advice = ("the profile was planned on another route or with other settings; plan it again "
              f"on this route (curvespeed plan {geometry.source})")
    inside = (station >= 0.0) & (station <= length)
    rx = np.interp(station, geometry.station_m, geometry.x_m)
    ry = np.interp(station, geometry.station_m, geometry.y_m)
    off = np.where(inside, np.hypot(np.asarray(px) - rx, np.asarray(py) - ry), 0.0)
    bad = np.flatnonzero(off > tol)
    if bad.size:
        k = int(bad[0])
        raise SpeedFileError(
            f"{source}: {where[k]}: at station {station[k]:.1f} m the profile's position "
            f"({columns}) lies {off[k]:.1f} m from the route {geometry.source} at the same "
            f"station (more than the {tol:.1f} m allowed: {ROUTE_MATCH_NOISE_MULTIPLE:g} times "
            f"the route's position noise, at least {ROUTE_MATCH_MIN_M:g} m); {advice}")
    # A profile that stops short of the route's end (or starts after its start) is refused by
    # the coverage check, which names the missing stations; one that runs on past either end
    # belongs to a longer route.
    first, last = float(station[0]), float(station[-1])
    for k, beyond in ((0, -first), (-1, last - length)):
        if beyond > tol:
            raise SpeedFileError(
                f"{source}: {where[k]}: the profile runs over stations {first:.1f}-{last:.1f} m "
                f"but the route {geometry.source} runs 0.0-{length:.1f} m: its "
                f"{'first' if k == 0 else 'last'} station lies {beyond:.1f} m beyond the "
                f"route's {'start' if k == 0 else 'end'} (more than the {tol:.1f} m allowed); "
                f"{advice}")


def _check_coverage(source: str, first: float, last: float, geometry: Geometry, tol: float,
                    where_first: str, where_last: str, warn_beyond: bool = True) -> None:
    """Raise if the speeds leave more than ``tol`` of the route uncovered; warn if too long."""
    length = geometry.length_m
    missing = []
    if first > tol:
        missing.append(f"{0.0:.1f}-{min(first, length):.1f} m at the start (the first speed, "
                       f"{where_first}, is at station {first:.1f} m)")
    if last < length - tol:
        missing.append(f"{max(last, 0.0):.1f}-{length:.1f} m at the end (the last speed, "
                       f"{where_last}, is at station {last:.1f} m)")
    if missing:
        raise SpeedFileError(
            f"{source}: the speeds cover stations {first:.1f}-{last:.1f} m but the route (from "
            f"{geometry.source}) runs 0.0-{length:.1f} m; missing {' and '.join(missing)}. Give "
            "speeds for the whole route (or cut the route to the part the speeds cover)")
    if warn_beyond and last > length + tol:
        warnings.warn(f"{source}: speeds run to station {last:.1f} m ({where_last}), beyond the "
                      f"route's end at {length:.1f} m; ignored them there. Check that the speeds "
                      "belong to this route", CurvespeedWarning, stacklevel=4)


# --- GPX track ---------------------------------------------------------------------------------

def _read_gpx(path, geometry: Geometry, noise_m: float, max_offset_m: float) -> SpeedTrace:
    from . import read_route

    source = str(path)
    track = read_route(path)
    if track.time_s is None:
        raise SpeedFileError(f"{source}: the track points carry no <time>, so no speed can be "
                             "derived; give a track recorded with time stamps, or a CSV with "
                             "station_m,speed_mps")
    if geometry.projection is None:
        raise SpeedFileError(f"{source}: a GPS track can only be placed on a route given in "
                             f"latitude/longitude, but {geometry.source} is in a local metric "
                             "frame; give the route as lat,lon CSV, GeoJSON or GPX, or give the "
                             "speeds as a CSV with station_m,speed_mps")
    t = np.asarray(track.time_s, dtype=float)
    where = track.where
    step = np.diff(t)
    stalled = np.flatnonzero(step <= 0.0)
    if stalled.size:
        k = int(stalled[0]) + 1
        raise SpeedFileError(f"{source}: {where[k]}: time {t[k]:g} s (from the first point) is "
                             f"not after {where[k - 1]}'s {t[k - 1]:g} s; time stamps must "
                             "increase along the track")
    # the track's own projection is centred on the track: go through latitude/longitude into
    # the route's frame
    lat, lon = track.projection.to_latlon(track.x_m, track.y_m)
    x, y = geometry.projection.to_metres(lat, lon)
    station, keep = map_to_stations(x, y, t, geometry, max_offset_m, noise_m,
                                    labels=where, source=source)
    t, station = t[keep], station[keep]
    if t.size < 4:
        raise SpeedFileError(f"{source}: only {t.size} track point(s) lie on the route; at least 4"
                             " are needed to derive speeds")
    return _speeds_from_track(source, t, station, geometry, noise_m, where[keep])


def map_to_stations(x_m: np.ndarray, y_m: np.ndarray, time_s: np.ndarray, geometry: Geometry,
                    max_offset_m: float = DEFAULT_MAX_OFFSET_M,
                    noise_m: float = DEFAULT_TRACE_NOISE_M, *, labels=None,
                    source: str = "track") -> tuple[np.ndarray, np.ndarray]:
    """Place track points (route frame, metres) on the route with a forward-only search.

    Returns ``(station_m, used)``: the station of every point (metres; unwrapped past the route
    length on a closed route; nan for points not used) and a boolean mask of the points used
    (leading and trailing points off the route are not). See the module docstring.
    """
    from scipy.spatial import cKDTree

    x_m = np.asarray(x_m, dtype=float)
    y_m = np.asarray(y_m, dtype=float)
    labels = (np.array([f"point {i + 1}" for i in range(x_m.size)], dtype=object)
              if labels is None else labels)
    closed = geometry.closed
    n = geometry.n_nodes
    m = n - 1 if closed else n
    gx, gy = geometry.x_m[:m], geometry.y_m[:m]
    gs = geometry.station_m[:m]
    length = geometry.length_m
    tree = cKDTree(np.column_stack((gx, gy)))
    points = np.column_stack((x_m, y_m))
    nearest, _ = tree.query(points)
    off = nearest > max_offset_m
    used = np.ones(x_m.size, dtype=bool)
    if off.all():
        raise SpeedFileError(f"{source}: no track point lies within {max_offset_m:g} m of the "
                             f"route {geometry.source} (the closest is {nearest.min():.1f} m "
                             "away); check that the track belongs to this route")
    lead = int(np.argmin(off))
    trail = x_m.size - int(np.argmin(off[::-1]))
    used[:lead] = False
    used[trail:] = False
    inner_off = np.flatnonzero(off[lead:trail])
    if inner_off.size:
        k = lead + int(inner_off[0])
        raise SpeedFileError(f"{source}: {labels[k]}: {nearest[k]:.1f} m from the route "
                             f"{geometry.source} (more than {max_offset_m:g} m): the track leaves "
                             "the route here; give a track that follows this route")
    dropped = int((~used).sum())
    if dropped:
        warnings.warn(f"{source}: ignored {dropped} track point(s) before the route's start or "
                      f"after its end (more than {max_offset_m:g} m from it)", CurvespeedWarning,
                      stacklevel=3)

    back_m = 3.0 * noise_m + geometry.spacing_m
    station = np.full(x_m.size, np.nan)
    prev = None
    prev_t = None
    neighbours = tree.query_ball_point(points[lead:trail], r=max_offset_m)
    for i, candidates in zip(range(lead, trail), neighbours):
        cand = np.asarray(candidates, dtype=int)
        dist = np.hypot(gx[cand] - x_m[i], gy[cand] - y_m[i])
        if prev is None:
            j = int(cand[np.argmin(dist)])
            s_i = _project(x_m[i], y_m[i], j, geometry, m)
            station[i] = s_i
            prev, prev_t = s_i, time_s[i]
            continue
        ahead = (time_s[i] - prev_t) * _MAX_PLAUSIBLE_SPEED_MPS + 2.0 * max_offset_m
        # node stations lie within the route; a station past an open route's end is compared
        # with the end node
        delta = gs[cand] - (prev if closed else min(max(prev, 0.0), float(gs[-1])))
        if closed:
            ahead = min(ahead, 0.5 * length)
            delta = np.mod(delta + 0.5 * length, length) - 0.5 * length
        window = (delta >= -back_m - geometry.spacing_m) & (delta <= ahead)
        if not window.any():
            j = int(cand[np.argmin(dist)])
            raise SpeedFileError(
                f"{source}: {labels[i]}: the track jumps along the route from station "
                f"{_wrap(prev, closed, length):.1f} m to {gs[j]:.1f} m; a track must follow the "
                "route in its direction of travel (reverse the track or the route, or split it)")
        pick = np.flatnonzero(window)
        j = int(cand[pick[np.argmin(dist[pick])]])
        s_i = _project(x_m[i], y_m[i], j, geometry, m)
        d = s_i - _wrap(prev, closed, length)
        if closed:
            d = (d + 0.5 * length) % length - 0.5 * length
        station[i] = prev + d
        prev, prev_t = station[i], time_s[i]
    return station, used


def _wrap(station: float, closed: bool, length: float) -> float:
    return station % length if closed else station


def _project(x: float, y: float, j: int, geometry: Geometry, m: int) -> float:
    """Station of the point's projection on the segments either side of node ``j``, metres."""
    s = geometry.station_m
    best_d, best_s = math.inf, float(s[j])
    for a, b in ((j - 1, j), (j, j + 1)):
        if geometry.closed:
            a, b = a % m, b % m
        elif a < 0 or b >= m:
            continue
        ax, ay = geometry.x_m[a], geometry.y_m[a]
        dx, dy = geometry.x_m[b] - ax, geometry.y_m[b] - ay
        seg2 = dx * dx + dy * dy
        u = 0.0 if seg2 == 0.0 else ((x - ax) * dx + (y - ay) * dy) / seg2
        # inside the segment, except past the open route's ends, where the station runs on
        # (negative before the start, beyond the length after the end)
        lo = -math.inf if (not geometry.closed and a == 0) else 0.0
        hi = math.inf if (not geometry.closed and b == m - 1) else 1.0
        u = min(max(u, lo), hi)
        d = math.hypot(ax + u * dx - x, ay + u * dy - y)
        if d < best_d:
            sa = float(s[a])
            best_d, best_s = d, sa + u * geometry.spacing_m
    return best_s


def _check_plausible_speed(source: str, speed: np.ndarray, when: np.ndarray, t: np.ndarray,
                           labels) -> None:
    """Refuse a track whose speeds (derived from its time stamps) exceed what a speeds CSV may
    hold (:data:`~curvespeed.io.table_csv.MAX_SPEED_MPS`), naming the fix nearest the fastest
    moment and its time step: time stamps in the wrong unit or resolution, most likely."""
    k = int(np.argmax(speed))
    if not speed[k] > MAX_SPEED_MPS:
        return
    i = int(np.clip(np.searchsorted(t, when[k]), 1, t.size - 1))
    raise SpeedFileError(
        f"{source}: {labels[i]}: the track's speed derived from its time stamps reaches "
        f"{speed[k]:.0f} m/s there ({t[i] - t[i - 1]:.3g} s after {labels[i - 1]}), above "
        f"{MAX_SPEED_MPS:g} m/s: no road vehicle is that fast; check the track's time stamps "
        "(their unit and resolution), or give the speeds as a CSV with station_m,speed_mps")


def _speeds_from_track(source: str, t: np.ndarray, station: np.ndarray, geometry: Geometry,
                       noise_m: float, labels) -> SpeedTrace:
    """Smooth station over time, differentiate, and read speed at the route's stations."""
    from scipy.interpolate import UnivariateSpline

    spline = UnivariateSpline(t, station, k=3, s=t.size * noise_m * noise_m)
    rate = spline.derivative()
    # dense in time so consecutive samples are closer than half a station spacing
    duration = float(t[-1] - t[0])
    fastest = max(float(np.max(np.abs(rate(t)))), 1e-3)
    count = int(min(max(duration * fastest / (0.5 * geometry.spacing_m), 10 * t.size), 2e6))
    tg = np.linspace(t[0], t[-1], count + 1)
    sg = np.maximum.accumulate(spline(tg))
    vg = np.maximum(rate(tg), 0.0)
    sg, first_at = np.unique(sg, return_index=True)   # arrival at each station
    vg = vg[first_at]
    _check_plausible_speed(source, vg, tg[first_at], t, labels)
    first, last = float(sg[0]), float(sg[-1])
    length = geometry.length_m
    tol = end_tolerance_m(geometry, noise_m)
    if not geometry.closed:
        # a track usually runs on a little past the route's ends: no warning for that
        _check_coverage(source, first, last, geometry, tol, where_first=str(labels[0]),
                        where_last=str(labels[-1]), warn_beyond=False)
        speeds = np.interp(geometry.station_m, sg, vg)
        return SpeedTrace(speeds, source, "gpx", (first, last), station, t - t[0])
    span = last - first
    if span < length - tol:
        start = first % length
        raise SpeedFileError(
            f"{source}: the track covers {span:.1f} m of the {length:.1f} m loop {geometry.source}"
            f" (from station {start:.1f} m); missing {(start + span) % length:.1f}-{start:.1f} m."
            " Give a track of at least one full lap")
    if span > length + tol:
        warnings.warn(f"{source}: the track covers {span / length:.2f} laps; checked the first "
                      f"lap from station {first % length:.1f} m and ignored the rest (split the "
                      "track to check other laps)", CurvespeedWarning, stacklevel=4)
    unwrapped = first + np.mod(geometry.station_m - first, length)
    speeds = np.interp(unwrapped, sg, vg)
    return SpeedTrace(speeds, source, "gpx", (first, last), station, t - t[0])
