"""Constraints given by position, put on the route: a point snapped to its nearest station.

A stop may be given by ``x_m``/``y_m`` in the route's metric frame or by WGS84 latitude and
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
from .limits import RouteConstraints, Stop, StopPosition

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
    return f"{origin}stop{name} at x {pos.x_m:.2f} m, y {pos.y_m:.2f} m"


def place_stop(pos: StopPosition, geometry, max_distance_m: float = MAX_SNAP_DISTANCE_M
               ) -> Stop:
    """``pos`` snapped to ``geometry`` as a :class:`Stop` with its snapping distance.

    Raises :class:`LimitsError` when the point is farther than ``max_distance_m`` from the
    route, or is given by latitude/longitude on a route that has none (or the reverse).
    """
    what = _describe(pos)
    projection = getattr(geometry, "projection", None)
    if pos.lat_deg is not None:
        if projection is None:
            raise LimitsError(f"{what}: the route is in metres (x/y) with no geographic "
                              "reference, so a latitude/longitude cannot be placed on it; give "
                              "the stop as x_m/y_m in the route's frame, or as station_m")
        px, py = (float(np.asarray(v).ravel()[0])
                  for v in projection.to_metres(pos.lat_deg, pos.lon_deg))
    else:
        px, py = float(pos.x_m), float(pos.y_m)
    station, distance, fx, fy = snap_to_polyline(geometry.x_m, geometry.y_m,
                                                 geometry.station_m, px, py)
    if pos.lat_deg is not None:
        from pyproj import Geod

        lat, lon = (float(np.asarray(v).ravel()[0]) for v in projection.to_latlon(fx, fy))
        distance = float(Geod(ellps="WGS84").inv(pos.lon_deg, pos.lat_deg, lon, lat)[2])
    if not distance <= max_distance_m:
        raise LimitsError(f"{what} is {distance:.1f} m from the route (nearest at station "
                          f"{station:.1f} m), farther than the {max_distance_m:g} m a stop may "
                          "be snapped over: it is on another road, or its coordinates are in "
                          "another frame or order (lat before lon). Check the position, or give "
                          "the stop by station_m")
    return Stop(station_m=station, origin=pos.origin, dwell_s=pos.dwell_s, name=pos.name,
                snap_distance_m=distance)


def place_stops(constraints: RouteConstraints, geometry,
                max_distance_m: float = MAX_SNAP_DISTANCE_M) -> RouteConstraints:
    """``constraints`` with every stop given by position snapped to ``geometry`` and added to
    the stops (in the order given); the same object when there is none."""
    if not constraints.stop_positions:
        return constraints
    placed = tuple(place_stop(p, geometry, max_distance_m) for p in constraints.stop_positions)
    return dataclasses.replace(constraints, stops=constraints.stops + placed, stop_positions=())
