"""Constraints given by position, put on the route: a point snapped to its nearest station.

A stop, or each end of a speed zone, friction section or superelevation range, may be given by ``x_m``/``y_m`` in the route's metric frame or by WGS84 latitude and
longitude (on a geographic route, through the route's own local projection). The point goes to
the nearest point of the resampled route's polyline; the distance between the two is the
snapping distance, kept on the :class:`~curvespeed.limits.Stop` so that the command line can
report it and the sidecar records it. For latitude/longitude the distance is the geodesic one on
the WGS84 ellipsoid (pyproj), between the given point and the snapped point taken back to
latitude/longitude. A point farther than :data:`MAX_SNAP_DISTANCE_M` from the route is refused:
it belongs to another road, or its coordinates are in another frame or order.

Core numerics: nothing here reads or writes files.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .errors import LimitsError
from .friction import FrictionPosition, FrictionSection
from .limits import (RouteConstraints, SpeedZone, Stop, StopPosition, Superelevation,
                     SuperelevationPosition, ZonePosition)
from .route import MAX_COORDINATE_M

#: Farthest a position may lie from the route and still be snapped to it, m: a few lane widths
#: (3.5 m each, common practice) plus consumer GNSS error (a few metres); a point farther off
#: is on another road or in another frame.
MAX_SNAP_DISTANCE_M = 25.0


def snap_to_polyline(x_m: np.ndarray, y_m: np.ndarray, station_m: np.ndarray,
                     px: float, py: float) -> tuple[float, float, float, float]:
    """Nearest point of the polyline through (``x_m``, ``y_m``) to (``px``, ``py``).

    Returns ``(station, distance, x, y)`` of that point, metres; the station is interpolated
    along the segment it lies on. The first of equally near points wins.
    """
    x0, y0 = x_m[:-1], y_m[:-1]
    dx, dy = np.diff(x_m), np.diff(y_m)
    seg2 = dx * dx + dy * dy
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(seg2 > 0.0, ((px - x0) * dx + (py - y0) * dy) / seg2, 0.0)
    t = np.clip(t, 0.0, 1.0)
    fx, fy = x0 + t * dx, y0 + t * dy
    d2 = (fx - px) ** 2 + (fy - py) ** 2
    k = int(np.argmin(d2))
    station = float(station_m[k] + t[k] * (station_m[k + 1] - station_m[k]))
    return station, math.sqrt(float(d2[k])), float(fx[k]), float(fy[k])


def _describe(pos: StopPosition) -> str:
    name = f" '{pos.name}'" if pos.name else ""
    origin = f"{pos.origin}: " if pos.origin else ""
    if pos.lat_deg is not None:
        return f"{origin}stop{name} at lat {pos.lat_deg:.7f}, lon {pos.lon_deg:.7f}"
    return f"{origin}stop{name} at x {_metres(pos.x_m)} m, y {_metres(pos.y_m)} m"


def _metres(value: float) -> str:
    """A coordinate to the centimetre, or in 7 significant digits when that is long."""
    return f"{value:.2f}" if abs(value) < 1e9 else f"{value:.7g}"


def snap_point(geometry, a: float, b: float, geographic: bool, what: str,
               max_distance_m: float = MAX_SNAP_DISTANCE_M) -> tuple[float, float]:
    """``(station, distance)`` of the route's point nearest (``a``, ``b``): x/y metres, or
    lat/lon degrees when ``geographic`` (the distance then geodesic on WGS84). ``what`` names
    the point in errors. Raises :class:`LimitsError` when it is farther than
    ``max_distance_m``, or geographic on a route without a geographic reference."""
    projection = getattr(geometry, "projection", None)
    if geographic:
        if projection is None:
            raise LimitsError(f"{what}: the route is in metres (x/y) with no geographic "
                              "reference, so a latitude/longitude cannot be placed on it; give "
                              "it as x_m/y_m in the route's frame, or by station")
        px, py = (float(np.asarray(v).ravel()[0]) for v in projection.to_metres(a, b))
    else:
        px, py = float(a), float(b)
        if not (abs(px) <= MAX_COORDINATE_M and abs(py) <= MAX_COORDINATE_M):
            raise LimitsError(f"{what}: a coordinate beyond {MAX_COORDINATE_M:g} m is farther "
                              "than any place on Earth from the route's origin; check the units "
                              "(metres) and the frame, or give it by station")
    station, distance, fx, fy = snap_to_polyline(geometry.x_m, geometry.y_m,
                                                 geometry.station_m, px, py)
    if geographic:
        from pyproj import Geod

        lat, lon = (float(np.asarray(v).ravel()[0]) for v in projection.to_latlon(fx, fy))
        distance = float(Geod(ellps="WGS84").inv(b, a, lon, lat)[2])
    if not distance <= max_distance_m:
        raise LimitsError(f"{what} is {distance:.1f} m from the route (nearest at station "
                          f"{station:.1f} m), farther than the {max_distance_m:g} m a point may "
                          "be snapped over: it is on another road, or its coordinates are in "
                          "another frame or order (lat before lon). Check the position, or give "
                          "it by station")
    return station, distance


def place_stop(pos: StopPosition, geometry, max_distance_m: float = MAX_SNAP_DISTANCE_M
               ) -> Stop:
    """``pos`` snapped to ``geometry`` as a :class:`Stop` with its snapping distance."""
    geographic = pos.lat_deg is not None
    a, b = (pos.lat_deg, pos.lon_deg) if geographic else (pos.x_m, pos.y_m)
    station, distance = snap_point(geometry, a, b, geographic, _describe(pos), max_distance_m)
    return Stop(station_m=station, origin=pos.origin, dwell_s=pos.dwell_s, name=pos.name,
                snap_distance_m=distance)


def place_range(pos, geometry, kind: str, max_distance_m: float = MAX_SNAP_DISTANCE_M
                ) -> tuple[float, float, float]:
    """``(start station, end station, snapping distance)`` of a range given by the positions of
    its two ends (``pos.start``, ``pos.end``, ``pos.geographic``, ``pos.origin``), both snapped
    to ``geometry``; the distance is the larger of the two. ``kind`` names the range in errors
    ("speed zone", "friction section", ...). An end that snaps before the start along the
    route is refused (give the ends in driving order)."""
    unit = "" if pos.geographic else " m"
    here = f"{pos.origin}: " if pos.origin else ""
    ends = []
    for label, (a, b) in (("start", pos.start), ("end", pos.end)):
        what = f"{here}{kind} {label} at {a:g}{unit}, {b:g}{unit}"
        ends.append(snap_point(geometry, a, b, pos.geographic, what, max_distance_m))
    (s0, d0), (s1, d1) = ends
    if not s1 > s0:
        raise LimitsError(f"{here}{kind}: its end snaps to station {s1:.1f} m, not after its "
                          f"start at {s0:.1f} m; give the ends in driving order (start first)")
    return s0, s1, max(d0, d1)


def place_zone(pos: ZonePosition, geometry, max_distance_m: float = MAX_SNAP_DISTANCE_M
               ) -> SpeedZone:
    """``pos`` with both ends snapped to ``geometry`` as a :class:`SpeedZone`
    (:func:`place_range`)."""
    s0, s1, d = place_range(pos, geometry, "speed zone", max_distance_m)
    return SpeedZone(s0, s1, pos.max_speed_mps, origin=pos.origin, snap_distance_m=d)


def place_friction(pos: FrictionPosition, geometry,
                   max_distance_m: float = MAX_SNAP_DISTANCE_M) -> FrictionSection:
    """``pos`` with both ends snapped to ``geometry`` as a :class:`FrictionSection`."""
    s0, s1, d = place_range(pos, geometry, "friction section", max_distance_m)
    return FrictionSection(s0, s1, pos.friction_coefficient, pos.lateral_friction_coefficient,
                           origin=pos.origin, snap_distance_m=d)


def place_superelevation(pos: SuperelevationPosition, geometry,
                         max_distance_m: float = MAX_SNAP_DISTANCE_M) -> Superelevation:
    """``pos`` with both ends snapped to ``geometry`` as a :class:`Superelevation`."""
    s0, s1, d = place_range(pos, geometry, "superelevation", max_distance_m)
    return Superelevation(s0, s1, pos.rate, origin=pos.origin, snap_distance_m=d)


def place_positions(constraints: RouteConstraints, geometry, stops: bool = True,
                    max_distance_m: float = MAX_SNAP_DISTANCE_M) -> RouteConstraints:
    """``constraints`` with every zone, friction section and superelevation range (and, with
    ``stops``, every stop) given by position snapped to ``geometry`` and added after those
    given by station; the same object when there is nothing to place."""
    todo_stops = constraints.stop_positions if stops else ()
    if not (todo_stops or constraints.zone_positions or constraints.friction_positions
            or constraints.superelevation_positions):
        return constraints
    zones = tuple(place_zone(z, geometry, max_distance_m) for z in constraints.zone_positions)
    friction = tuple(place_friction(f, geometry, max_distance_m)
                     for f in constraints.friction_positions)
    banks = tuple(place_superelevation(e, geometry, max_distance_m)
                  for e in constraints.superelevation_positions)
    placed = tuple(place_stop(p, geometry, max_distance_m) for p in todo_stops)
    return dataclasses.replace(
        constraints, zones=constraints.zones + zones, zone_positions=(),
        friction=constraints.friction + friction, friction_positions=(),
        superelevation=constraints.superelevation + banks, superelevation_positions=(),
        stops=constraints.stops + placed,
        stop_positions=() if stops else constraints.stop_positions)
