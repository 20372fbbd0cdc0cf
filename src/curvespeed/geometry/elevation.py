"""Elevation along the fitted path: a smoothing spline against station, and its grade."""

from __future__ import annotations

import math
import warnings

import numpy as np
from numpy.linalg import LinAlgError

from ..errors import CurvespeedWarning, RouteGeometryError
from ..order_stats import median
from .noise import choose_noise, estimate_noise
from .pspline import fit_pspline, residual_target

#: Elevations are never taken to be more precise than this (standard deviation, metres):
#: heights are quoted to the centimetre (common practice).
MIN_ELEVATION_NOISE_M = 0.01
#: Elevation noise assumed when the points are too few to estimate it (metres): surveyed or
#: map-derived heights (common practice).
DEFAULT_ELEVATION_NOISE_M = 0.1
#: Grades steeper than this (rise over run) are beyond what roads have: the steepest public
#: streets are about 35 % over a few tens of metres, and design guides cap main roads near
#: 10-15 % (common practice). A grade beyond it is almost always elevation noise or a stray
#: height, so it is reported with its stations.
MAX_ROAD_GRADE = 0.35


def fit_elevation(point_station, z, count, stated_noise, length, closed, node_station, source):
    """Elevation and grade at ``node_station`` from point elevations at ``point_station``.

    The noise is estimated from the heights' own scatter against station (as for positions,
    :func:`~.noise.choose_noise`), the fit is the same P-spline in one dimension, periodic on
    loops. Returns ``(z_nodes, grade, NoiseChoice)``.
    """
    order = np.argsort(point_station, kind="stable")
    s, zz, cnt = np.clip(point_station[order], 0.0, length), z[order], count[order]
    # points closer than a hundredth of the usual gap (fixes merged or averaged around a
    # stop) would make the difference-based estimate divide by almost nothing
    gaps = np.diff(s)
    usual = median(gaps) if gaps.size else 0.0
    keep = np.concatenate(([True], gaps > 0.01 * usual))
    s, zz, cnt = s[keep], zz[keep], cnt[keep]
    scale = 1.0 / np.sqrt(np.minimum(cnt, 4.0 * median(cnt)))
    estimate = estimate_noise(s, zz[:, None], length, closed, scale=scale)
    noise = choose_noise("elevation", stated_noise, estimate, MIN_ELEVATION_NOISE_M,
                         DEFAULT_ELEVATION_NOISE_M, source, stacklevel=4)
    m = s.size
    gaps = np.diff(s)
    knot_spacing = max(median(gaps) / 2, length / (4 * m)) if m > 1 else length
    try:
        fit = fit_pspline(s, zz[:, None], 1.0 / (noise.used * scale), residual_target(m), length,
                          closed, knot_spacing)
    except (LinAlgError, ValueError) as exc:
        raise RouteGeometryError(
            f"{source}: the smoothing spline for the elevation could not be fitted ({exc}); "
            "check the elevations for gross outliers, or ignore them (--no-elevation)") from exc
    if fit.too_rough:
        rms = math.sqrt(fit.residual_ss / m) * noise.used
        warnings.warn(
            f"{source}: the elevations scatter about the smoothest profile by {rms:.3g} m (RMS), "
            f"more than an elevation noise of {noise.used:.3g} m allows; check for outliers",
            CurvespeedWarning, stacklevel=3)
    nodes = np.clip(node_station, 0.0, length)
    return fit.spline(nodes)[:, 0], fit.spline(nodes, nu=1)[:, 0], noise


#: What a steep grade most likely means in recorded or listed points, and what to do.
POINTS_GRADE_HINT = (
    "The elevations are probably noisy (satellite receivers' heights drift by metres) or hold "
    "a stray value; check them, state their noise, or ignore elevation (--no-elevation)")


def warn_steep_grades(station: np.ndarray, grade: np.ndarray, source: str,
                      stacklevel: int = 3, hint: str = POINTS_GRADE_HINT) -> None:
    """Warn, naming the stations, where the grade is beyond what roads have; ``hint`` says
    what to check."""
    steep = np.abs(grade) > MAX_ROAD_GRADE
    if not steep.any():
        return
    edges = np.flatnonzero(np.diff(np.concatenate(([0], steep.view(np.int8), [0]))))
    spans = [(station[a], station[b - 1]) for a, b in zip(edges[::2], edges[1::2])]
    k = int(np.argmax(np.abs(grade)))
    listed = ", ".join(f"{a:.0f}-{b:.0f} m" for a, b in spans[:5])
    more = f" and {len(spans) - 5} more stretch(es)" if len(spans) > 5 else ""
    warnings.warn(
        f"{source}: grades of up to {100 * grade[k]:+.0f} % (at station {station[k]:.0f} m) at "
        f"stations {listed}{more}: beyond what roads have ({100 * MAX_ROAD_GRADE:.0f} %). "
        f"{hint}",
        CurvespeedWarning, stacklevel=stacklevel)
