"""The route as read from a file: an ordered list of points in a metric frame.

Readers (``curvespeed.io``) turn files into :class:`Route` through :func:`make_route`, which owns
the checks every format shares: finite values, repeated points dropped, at least three distinct
points, no reversal. Geometry (resampling, curvature) lives in :mod:`curvespeed.geometry`.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from .errors import CurvespeedWarning, RouteGeometryError
from .geodesy import LocalProjection

#: A turn sharper than this between consecutive chords is treated as the path doubling back.
REVERSAL_TURN_DEG = 150.0


@dataclass(frozen=True)
class Route:
    """Points of a route in a local metric frame, in driving order.

    Attributes
    ----------
    x_m, y_m : ndarray, shape (n,)
        Plan position, metres (x east, y north for geographic input).
    z_m : ndarray or None
        Elevation, metres, where the file gave it for every point.
    where : ndarray of str, shape (n,)
        For each point, where it came from in the file ("line 12", "point 7"), for messages.
    source : str
        File name (or a label) the route was read from.
    projection : LocalProjection or None
        Set when the input was latitude/longitude; maps x, y back to WGS84.
    time_s : ndarray or None
        Time stamps of the points, seconds from the first, where the file carried them (GPX).
    name : str
        A short name for titles and summaries.
    """

    x_m: np.ndarray
    y_m: np.ndarray
    z_m: np.ndarray | None
    where: np.ndarray
    source: str
    projection: LocalProjection | None = None
    time_s: np.ndarray | None = None
    name: str = "route"

    @property
    def n_points(self) -> int:
        return int(self.x_m.size)

    @property
    def is_geographic(self) -> bool:
        return self.projection is not None

    def chord_stations(self) -> np.ndarray:
        """Cumulative straight-line distance along the points, metres."""
        d = np.hypot(np.diff(self.x_m), np.diff(self.y_m))
        return np.concatenate(([0.0], np.cumsum(d)))

    def gap_to_start_m(self) -> float:
        """Distance from the last point back to the first, metres."""
        return float(math.hypot(self.x_m[-1] - self.x_m[0], self.y_m[-1] - self.y_m[0]))


def make_route(
    x_m,
    y_m,
    z_m=None,
    *,
    where=None,
    source: str = "route",
    projection: LocalProjection | None = None,
    time_s=None,
    name: str | None = None,
    min_separation_m: float = 1e-3,
) -> Route:
    """Validate points and build a :class:`Route`.

    Consecutive points closer than ``min_separation_m`` are dropped with a warning (a logger that
    stood still). Raises :class:`RouteGeometryError` for non-finite values, fewer than three
    distinct points, or a reversal (the path doubling back on itself), naming the point and its
    station.
    """
    x = np.asarray(x_m, dtype=float).ravel()
    y = np.asarray(y_m, dtype=float).ravel()
    n = x.size
    if y.size != n:
        raise RouteGeometryError(f"{source}: x and y have different lengths ({n} and {y.size})")
    z = None if z_m is None else np.asarray(z_m, dtype=float).ravel()
    t = None if time_s is None else np.asarray(time_s, dtype=float).ravel()
    labels = (np.array([f"point {i + 1}" for i in range(n)], dtype=object) if where is None
              else np.asarray(where, dtype=object))

    for arr, what in ((x, "x"), (y, "y"), (z, "elevation"), (t, "time")):
        if arr is None:
            continue
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise RouteGeometryError(
                f"{source}: {labels[bad[0]]}: {what} is not a finite number; "
                "fix or remove that point")

    if n:
        step = np.hypot(np.diff(x), np.diff(y))
        keep = np.concatenate(([True], step >= min_separation_m))
        dropped = int(n - keep.sum())
        if dropped:
            first = labels[np.flatnonzero(~keep)[0]]
            warnings.warn(
                f"{source}: dropped {dropped} repeated point(s) closer than "
                f"{min_separation_m * 1000:g} mm to the one before (first at {first})",
                CurvespeedWarning, stacklevel=2)
            x, y, labels = x[keep], y[keep], labels[keep]
            z = None if z is None else z[keep]
            t = None if t is None else t[keep]

    if x.size < 3:
        raise RouteGeometryError(
            f"{source}: only {x.size} distinct point(s); a route needs at least 3")

    _check_reversals(x, y, labels, source)
    if t is not None:
        t = t - t[0]
    route_name = name or source.rsplit("/", 1)[-1].rsplit(".", 1)[0]
    return Route(x, y, z, labels, source, projection, t, route_name)


def _check_reversals(x: np.ndarray, y: np.ndarray, labels: np.ndarray, source: str) -> None:
    """Raise if the path turns back on itself between two consecutive chords."""
    dx, dy = np.diff(x), np.diff(y)
    heading = np.arctan2(dy, dx)
    turn = np.angle(np.exp(1j * np.diff(heading)))
    bad = np.flatnonzero(np.abs(turn) > math.radians(REVERSAL_TURN_DEG))
    if bad.size:
        k = int(bad[0]) + 1  # the point where the path turns back
        station = float(np.hypot(dx[:k], dy[:k]).sum())
        raise RouteGeometryError(
            f"{source}: {labels[k]} (station {station:.1f} m): the path doubles back on itself "
            f"(turn of {math.degrees(abs(turn[k - 1])):.0f} degrees between consecutive "
            "segments); remove the stray point(s) or split the route there")
