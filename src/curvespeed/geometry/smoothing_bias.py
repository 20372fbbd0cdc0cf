"""How far a smoothing scale lowers a peak of curvature, measured like for like.

A smoothing spline keeps the level of a long arc and spreads a step of curvature over a known
width, so the largest smoothed curvature within that width of a station covers the road there
(:mod:`.curvature`). A *peak* is different: a short arc between two clothoids (a reverse or
hairpin approach: 20 m clothoids around 4.5 m of arc) is rounded off by the smoother, and no
window of the smoothed curvature reaches the top. The smoother is linear in the points, so how
much it lowers a peak can be read from a road whose curvature is known: the design alignment
reconstructed from the points (:mod:`.alignment`). That road is laid out, sampled at the
points' stations, smoothed by the same scale, and its smoothed curvature compared with its own;
where the smoothing lowered it, the scale's estimate is raised by as much, less the reconstructed
road's own noise (a peak the road reads from noise is no peak of the road).

Where the road has a short arc the alignment's two clothoid lines meet at a point above it. That
does not matter much: a smoother lowers a corner of curvature by an amount set by the change of
slope, not by the height, so the estimate plus the corner's loss is the highest peak with those
slopes that smooths to what the points show. A short arc that smooths the same is lower; the
points cannot tell the two apart when the arc is shorter than their spacing (the bundled
mountain road's hairpin approaches, 4.5 m of arc sampled every 5 m: bound 9-11 % above the arc).
"""

from __future__ import annotations

import numpy as np


def layout(station: np.ndarray, kappa: np.ndarray, at_station: np.ndarray) -> np.ndarray:
    """(len(at_station), 2) positions of the road whose curvature is ``kappa`` at ``station``
    (linear between), starting at the origin heading along x, at the stations ``at_station``.

    Heading is integrated exactly for curvature linear between the stations; position by
    Simpson's rule over each step (heading at the step's middle exact too) and between stations
    by cubic Hermite interpolation on position and heading: for curvature up to 0.07 1/m and
    1 m steps both err by well under a micrometre, far below any noise the points carry."""
    h = np.diff(station)
    k0, k1 = kappa[:-1], kappa[1:]
    heading = np.concatenate(([0.0], np.cumsum(0.5 * h * (k0 + k1))))
    mid = heading[:-1] + 0.5 * h * k0 + 0.125 * h * (k1 - k0)
    th0, th1 = heading[:-1], heading[1:]
    x = np.concatenate(([0.0], np.cumsum(h / 6 * (np.cos(th0) + 4 * np.cos(mid) + np.cos(th1)))))
    y = np.concatenate(([0.0], np.cumsum(h / 6 * (np.sin(th0) + 4 * np.sin(mid) + np.sin(th1)))))
    i = np.clip(np.searchsorted(station, at_station, side="right") - 1, 0, station.size - 2)
    t = (at_station - station[i]) / h[i]
    t2, t3 = t * t, t * t * t
    h00, h10 = 2 * t3 - 3 * t2 + 1, t3 - 2 * t2 + t
    h01, h11 = -2 * t3 + 3 * t2, t3 - t2
    out = np.empty((at_station.size, 2))
    for col, (p, dp) in enumerate(((x, np.cos(heading)), (y, np.sin(heading)))):
        out[:, col] = (h00 * p[i] + h10 * h[i] * dp[i] + h01 * p[i + 1]
                       + h11 * h[i] * dp[i + 1])
    return out


def lowered(road_kappa: np.ndarray, smoothed_kappa: np.ndarray, estimate: np.ndarray,
            road_noise=0.0) -> np.ndarray:
    """How much the smoothing lowered |curvature| at each station, in the direction the
    estimate turns, beyond ``road_noise`` (the reconstructed road's own uncertainty there, 1/m)
    (zero where it raised it: ringing beside a peak is the estimate's own business, its window
    covers that).

    The noise counts because a road's peak may be read from noise: at a log's ends the
    reconstruction's first element may follow the finest scale's blur (a consumer receiver's
    start from rest read as 0.15 +- 0.08 1/m over 10 m), and its rounding-off, widened over a
    scale's spread, held the bound at R 3-7 m over the first 36 m of a straight
    (tests/test_reference_recorded_drives.py)."""
    side = np.sign(estimate)
    return np.maximum(side * (road_kappa - smoothed_kappa) - road_noise, 0.0)
