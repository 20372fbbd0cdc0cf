"""The route as read from a file: an ordered list of points in a metric frame.

Readers (``curvespeed.io``) turn files into :class:`Route` through :func:`make_route`, which owns
the checks every format shares: finite values of a size found on Earth, repeated points dropped
and at least three distinct points. What needs the points' noise to judge (standstills, dense
fixes, reversals, outliers) is done when the geometry is fitted (:mod:`curvespeed.geometry`),
with :func:`check_reversals` for paths that double back between well-separated points.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from .errors import CurvespeedWarning, RouteGeometryError
from .geodesy import LocalProjection
from .order_stats import median

#: A turn sharper than this between consecutive chords is treated as the path doubling back.
REVERSAL_TURN_DEG = 150.0
#: Largest plan coordinate accepted, metres. Every planar frame of the Earth stays well inside
#: it (the equator is 4.0e7 m long; projected grids with zone prefixes reach a few 1e7 m).
MAX_COORDINATE_M = 1.0e8
#: Largest elevation magnitude accepted, metres: the highest summit is below 9 km and the deepest
#: trench above -11 km, so anything beyond 100 km is in other units or wrong.
MAX_ELEVATION_M = 1.0e5
#: A point is reported as a spike when it lies at least this far off the line through its two
#: neighbours, metres, and at least :data:`SPIKE_NOISE_SIGMAS` times what the points' own noise
#: puts there ...
SPIKE_OFFSET_M = 1.0
#: ... (the points' own scatter about the lines through their neighbours, as a standard
#: deviation from the median offset, 1.4826 times it for normal errors; 6 of those is passed by
#: chance about once in 5e8 points for normal errors: a consumer receiver's simulated log at
#: 10 Hz, 0.5 m of noise and fixes 1.5 m apart, had 14 of its 1,400 fixes named, 1.7-2 m off,
#: all of them noise) ...
SPIKE_NOISE_SIGMAS = 6.0
#: ... the path turns there by at least this much, degrees ...
SPIKE_TURN_DEG = 30.0
#: ... and the turns at the neighbours undo it: each has the opposite sign and the three add up
#: to at most this fraction of the middle one (the path carries on in its old direction).
SPIKE_NET_TURN_FRACTION = 0.25
#: A point at a reversal is named as a stray point when removing it removes the reversal and
#: it lies more than this many usual steps (median chord around it) from its neighbours.
STRAY_STEPS = 3.0
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

    In order: values must be finite and within :data:`MAX_COORDINATE_M` (elevation
    :data:`MAX_ELEVATION_M`); consecutive points closer than ``min_separation_m`` are dropped with
    a warning (a logger that stood still); then at least three points must remain.

    Raises
    ------
    RouteGeometryError
        For a non-finite or out-of-Earth value or fewer than three distinct points, naming the
        point and what to do.

    Warns
    -----
    CurvespeedWarning
        Repeated points dropped.
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
    for arr, what, limit in ((x, "x", MAX_COORDINATE_M), (y, "y", MAX_COORDINATE_M),
                             (z, "elevation", MAX_ELEVATION_M)):
        if arr is None or not arr.size:
            continue
        bad = np.flatnonzero(np.abs(arr) > limit)
        if bad.size:
            raise RouteGeometryError(
                f"{source}: {labels[bad[0]]}: {what} = {arr[bad[0]]:.6g} m is beyond any "
                f"place on Earth (more than {limit:g} m); check the units (metres) and the "
                "column order, or remove that point")

    dropped = 0
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
        repeats = (f" ({dropped} of {n} were repeats of the point before)" if dropped else "")
        raise RouteGeometryError(
            f"{source}: only {x.size} distinct point(s){repeats}; a route needs at least 3")

    if t is not None:
        t = t - t[0]
    route_name = name or source.rsplit("/", 1)[-1].rsplit(".", 1)[0]
    return Route(x, y, z, labels, source, projection, t, route_name)


def _turns(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Signed turn at every interior point (radians, left positive); entry k is point k + 1."""
    heading = np.arctan2(np.diff(y), np.diff(x))
    return np.angle(np.exp(1j * np.diff(heading)))


def _reversal_points(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Indices of the points where the path turns back (turn sharper than REVERSAL_TURN_DEG)."""
    return np.flatnonzero(np.abs(_turns(x, y)) > math.radians(REVERSAL_TURN_DEG)) + 1


def check_reversals(x: np.ndarray, y: np.ndarray, labels: np.ndarray, source: str,
                    consider: np.ndarray | None = None) -> None:
    """Raise if the path turns back on itself between two consecutive chords.

    ``consider`` (one flag per interior point) limits the check to some points, e.g. those
    between chords much longer than the noise. The message says what probably happened where
    it can tell: two points in the wrong order (exchanging them removes the reversal), or a
    stray point (an out-and-back jump: removing it removes the reversal).
    """
    dx, dy = np.diff(x), np.diff(y)
    turn = _turns(x, y)
    sharp = np.abs(turn) > math.radians(REVERSAL_TURN_DEG)
    bad = np.flatnonzero(sharp if consider is None else sharp & consider)
    if not bad.size:
        return
    k = int(bad[0]) + 1  # the point where the path turns back
    station = float(np.hypot(dx[:k], dy[:k]).sum())
    advice = "remove the stray point(s) or split the route there"
    if bad.size > 1 and bad[1] == bad[0] + 1 and k + 2 <= x.size - 1:
        lo, hi = max(k - 2, 0), min(k + 4, x.size)
        sx, sy = x[lo:hi].copy(), y[lo:hi].copy()
        i = k - lo
        sx[[i, i + 1]], sy[[i, i + 1]] = sx[[i + 1, i]], sy[[i + 1, i]]
        if not _reversal_points(sx, sy).size:
            advice = (f"{labels[k]} and {labels[k + 1]} look swapped (out of order): exchange "
                      "them")
    if advice.startswith("remove"):
        best = None
        for c in (k, k + 1):
            if c > x.size - 2:
                continue
            lo, hi = max(c - 3, 0), min(c + 4, x.size)
            rest = np.r_[lo:c, c + 1:hi]
            if _reversal_points(x[rest], y[rest]).size:
                continue                  # removing it does not straighten the path
            away = max(math.hypot(x[c] - x[c - 1], y[c] - y[c - 1]),
                       math.hypot(x[c] - x[c + 1], y[c] - y[c + 1]))
            apart = math.hypot(x[c + 1] - x[c - 1], y[c + 1] - y[c - 1])
            usual = median(np.hypot(np.diff(x[rest]), np.diff(y[rest])))
            if away <= STRAY_STEPS * usual:
                continue                  # no farther out than the points' own steps
            if best is None or away / max(apart, 1e-9) > best[0]:
                best = (away / max(apart, 1e-9), c, away, apart)
        if best is not None:
            _, c, away, apart = best
            advice = (f"{labels[c]} looks like a stray point ({away:.1f} m from its neighbours, "
                      f"which lie {apart:.1f} m apart): remove it, or split the route there")
    raise RouteGeometryError(
        f"{source}: {labels[k]} (station {station:.1f} m): the path doubles back on itself "
        f"(turn of {math.degrees(abs(turn[k - 1])):.0f} degrees between consecutive "
        f"segments); {advice}")


def warn_spikes(x: np.ndarray, y: np.ndarray, labels: np.ndarray, source: str,
                consider: np.ndarray | None = None) -> None:
    """Warn about points that stick out of the line like a spike (see SPIKE_OFFSET_M).

    ``consider`` (one flag per point) limits the check to some points, e.g. single fixes far
    apart compared with the noise (averaged fixes of a dense log scatter by design). A spike
    must also stand out of the points' own scatter (:data:`SPIKE_NOISE_SIGMAS`): in a dense,
    noisy log a few points out of thousands lie that far off by chance."""
    if x.size < 5:
        return
    turn = _turns(x, y)                       # turn[j] is at point j + 1
    mid = turn[1:-1]                          # points 2 .. n-3
    before, after = turn[:-2], turn[2:]
    # offset of each point from the line through its two neighbours
    ax, ay = x[1:-3], y[1:-3]
    bx, by = x[3:-1], y[3:-1]
    px, py = x[2:-2], y[2:-2]
    chord = np.hypot(bx - ax, by - ay)
    cross = np.abs((bx - ax) * (py - ay) - (by - ay) * (px - ax))
    offset = np.where(chord > 0, cross / np.where(chord > 0, chord, 1.0),
                      np.hypot(px - ax, py - ay))
    spike = ((np.abs(mid) >= math.radians(SPIKE_TURN_DEG))
             & (np.sign(before) == -np.sign(mid)) & (np.sign(after) == -np.sign(mid))
             & (np.abs(before + mid + after) <= SPIKE_NET_TURN_FRACTION * np.abs(mid))
             & (offset >= SPIKE_OFFSET_M))
    if consider is not None:
        spike &= consider[1:-3] & consider[2:-2] & consider[3:-1]
    if spike.any():
        looked_at = offset if consider is None else offset[consider[2:-2]]
        scatter = 1.4826 * median(looked_at) if looked_at.size else 0.0
        spike &= offset >= SPIKE_NOISE_SIGMAS * scatter
    found = np.flatnonzero(spike)
    if not found.size:
        return
    worst = int(found[np.argmax(offset[found])])
    k = worst + 2
    station = float(np.hypot(np.diff(x[:k + 1]), np.diff(y[:k + 1])).sum())
    more = f" and {found.size - 1} more point(s) like it" if found.size > 1 else ""
    warnings.warn(
        f"{source}: {labels[k]} (station {station:.1f} m) sticks out {offset[worst]:.1f} m from "
        f"the line through its neighbours and the path turns {math.degrees(abs(mid[worst])):.0f} "
        f"degrees there and back{more}; unless the points' noise covers it, the fitted path "
        "follows it as a sharp kink that slows the profile. If it is an outlier remove it",
        CurvespeedWarning, stacklevel=4)
