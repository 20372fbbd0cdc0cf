"""Checks of a route's points and of the path fitted to them, with the refusals and warnings
they give (:func:`curvespeed.geometry.points.build_geometry` calls them): the fit's arguments,
points far off the fitted path, a path that doubles back between well-separated points, and a
fitted path that nearly stands still and turns (a cusp).
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..errors import CurvespeedWarning, RouteGeometryError
from ..order_stats import median
from ..route import check_reversals
from .arclength import ArcLength

#: A point further from the fitted path than this many noise standard deviations is reported
#: as a likely outlier (for Gaussian noise, beyond 6 sigma happens once in 5e8 points) ...
OUTLIER_SIGMAS = 6.0
#: ... and than this distance (metres): smaller misses come from the fit's own limits at sharp
#: changes of curvature on precise points, and positioning outliers are metres (common practice).
OUTLIER_MIN_M = 0.5
#: Where the fitted path's speed along its parameter falls below this fraction of its median it
#: nearly stands still and turns (a cusp); curvature there describes the points' scatter.
CUSP_SPEED_FRACTION = 0.05


def check_arguments(spacing_m, position_noise_m, elevation_noise_m, closure_tolerance_m,
                    source) -> None:
    """Refuse a spacing, noise or closure tolerance that is not a positive number of metres."""
    require_positive(spacing_m, "station spacing", source,
                     "give the distance between output stations in metres, e.g. 1")
    if position_noise_m is not None:
        require_positive(position_noise_m, "position noise", source,
                         "give the standard deviation of the point positions in metres, "
                         "e.g. 0.05 for surveyed or map coordinates, or leave it to the data")
    if elevation_noise_m is not None:
        require_positive(elevation_noise_m, "elevation noise", source,
                         "give the standard deviation of the elevations in metres, e.g. 0.1, "
                         "or leave it to the data")
    if closure_tolerance_m is not None:
        require_positive(closure_tolerance_m, "closure tolerance", source,
                         "give the largest gap in metres between last and first point that "
                         "still makes a loop")


def warn_outliers(fit, u, xy, sigma, source) -> None:
    """Warn about points much further from the fitted path than the noise allows.

    The yardstick is the larger of the point's noise and the typical residual (its robust
    spread), so slowly drifting errors that the fit leaves in the residual do not count."""
    miss = np.hypot(*(xy - fit.spline(np.clip(u, 0.0, fit.span))).T)
    typical = median(miss) / 1.1774     # median of a Rayleigh(sigma) distance
    resid = miss / np.maximum(sigma, typical)
    bad = np.flatnonzero((resid > OUTLIER_SIGMAS) & (miss > OUTLIER_MIN_M))
    if bad.size:
        worst = int(bad[np.argmax(resid[bad])])
        more = f" and {bad.size - 1} more point(s)" if bad.size > 1 else ""
        warnings.warn(
            f"{source}: point {worst + 1} of the fit lies {resid[worst] * sigma[worst]:.2f} m from "
            f"the fitted path, {resid[worst]:.0f} times the noise{more}: a likely outlier; the "
            "path is pulled towards it. Remove it if it is one", CurvespeedWarning, stacklevel=4)


def check_path_reversals(x, y, where, count, source, noise_m) -> None:
    """Refuse a path that doubles back between single points much further apart than the noise.

    Reversals inside the noise (standing, crawling, dense fixes: averaged points) were dealt
    with before; one between chords of several noise widths is a point out of order or astray.
    """
    long = np.hypot(np.diff(x), np.diff(y)) > 3.0 * noise_m
    single = count == 1
    check_reversals(x, y, where, source,
                    consider=long[:-1] & long[1:] & single[:-2] & single[1:-1] & single[2:])


def require_positive(value, what: str, source: str, hint: str) -> None:
    """Refuse ``value`` unless it is a finite positive number (``what`` names it, ``hint``
    says what to give)."""
    ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    if not ok or not math.isfinite(value) or value <= 0:
        raise RouteGeometryError(
            f"{source}: {what} must be a positive number of metres (got {value!r}); {hint}")


def check_cusps(arc: ArcLength, s_first, point_station, where, source, noise_m) -> None:
    """Raise where the fitted path nearly stops and turns back (speed along u collapses)."""
    speed = arc.node_speed
    floor = CUSP_SPEED_FRACTION * median(speed)
    j, q = np.unravel_index(int(np.argmin(speed)), speed.shape)
    if speed[j, q] >= floor:
        return
    u_bad = arc.start + arc.h * (j + 0.5 * (1.0 + arc.nodes[q]))
    s_bad = float(arc.station(np.array([u_bad]))[0]) - s_first
    near = where[int(np.argmin(np.abs(point_station - s_bad)))]
    raise RouteGeometryError(
        f"{source}: station {s_bad:.1f} m (near {near}): the smoothed path nearly stands still "
        "and turns there (a cusp): the points bunch up or zig-zag, as in a trace recorded while "
        "standing. Remove or thin out those points, or, if they are only noisy, raise the "
        f"position noise (now {noise_m:g} m)")
