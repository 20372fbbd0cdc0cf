"""Recorded drives made ready for the path fit: standstills, reversals and dense fixes.

A positioning log is not a list of path points. While the vehicle stands, its fixes wander
within the receiver's noise; when it crawls, or when the receiver logs faster than the vehicle
moves one noise width, consecutive fixes zig-zag; when it backs up, the path runs backwards.
Fitted as path points by chord length, any of these turns into phantom curvature, cusps or a
path of the wrong length. :func:`prepare_drive` deals with them in the order fixes were taken:

1. *A pilot trajectory.* Positions are smoothed against time (or the sampling order when the
   file has no time stamps) with the same penalised spline as the path fit, its smoothing set
   by the white noise the fixes show in that order (:func:`~.noise.estimate_scatter` with two
   noisy components: along and across the path). In time, a vehicle's position is smooth
   whatever it does, so the pilot is well behaved through stops, crawling and reversing.
2. *Standstills.* Runs of fixes where the pilot moves slower than :data:`REST_SPEED_MPS` (with
   time stamps; without, a small fraction of the typical step) and stays within
   :data:`REST_EXTENT_M` (or a few noise widths) are merged into one point at their mean.
3. *Reversals.* Where the pilot leaves a standstill in the direction it arrived from (turn
   above ``REVERSAL_TURN_DEG``), the vehicle backed up: the drive is split into parts there,
   each driven forwards, and one part is kept (:func:`prepare_drive`'s ``part``).
4. *Dense fixes.* Fixes are grouped by the pilot's arc length into cells of
   :data:`CELL_NOISE_WIDTHS` times the noise, and each group becomes one point at its mean,
   carrying how many fixes it averages. Consecutive points are then further apart than their
   noise, so the path fit's chord-length parameter is sound; where fixes are already that far
   apart (survey points, sparse logs) nothing changes.

The pilot only decides what is merged and grouped; the path itself is fitted to the points
that come out (:mod:`.points`).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from ..errors import CurvespeedWarning, RouteGeometryError
from ..order_stats import median, percentile
from ..route import REVERSAL_TURN_DEG, Route
from .arclength import ArcLength
from .noise import estimate_scatter
from .pspline import fit_pspline, residual_target

#: A vehicle whose smoothed position moves slower than this stands still, m/s. The smoothed
#: fixes of a standing receiver drift at about 0.1-0.2 m/s with consumer noise (a 1.5 m
#: Gauss-Markov error over a minute, smoothed over seconds); vehicles rarely drive slower than
#: walking pace, 1-1.5 m/s, except to stop (common practice).
REST_SPEED_MPS = 0.5
#: Without time stamps: standing still is moving less than this fraction of a typical step
#: (the 75th percentile of the pilot's step) per fix.
REST_STEP_FRACTION = 0.025
#: The pilot's speed is taken over this window (seconds; without time stamps, fixes), centred
#: on each fix: long enough that a standing receiver's wander averages out, short enough that
#: a stop of a few seconds still shows.
REST_WINDOW_S = 2.0
REST_WINDOW_FIXES = 5.0
#: A slow run is only merged when the pilot stays within this distance (metres) of its start,
#: or within REST_NOISE_WIDTHS noise standard deviations if that is more: a crawl over a
#: longer distance is driven road and is kept.
REST_EXTENT_M = 5.0
REST_NOISE_WIDTHS = 6.0
#: Fixes closer along the pilot than this many noise standard deviations are averaged into one
#: point. At 4, an averaged point's own noise is at most a quarter of the distance to the next
#: (and far less where several fixes are averaged), so the chord between them is dominated by
#: the path, not the noise.
CELL_NOISE_WIDTHS = 4.0
#: To tell a reversal from a tight turn, directions are compared this far (metres) before and
#: after a standstill, or REVERSAL_NOISE_WIDTHS noise widths if that is more.
REVERSAL_PROBE_M = 3.0
REVERSAL_NOISE_WIDTHS = 4.0
#: Positions are never taken to be more precise than this (standard deviation, metres).
MIN_NOISE_M = 1e-3
#: Fewer points than this are taken as they are: too few to tell noise from the path, and
#: too few to be a recorded drive.
MIN_FIXES = 20


@dataclass(frozen=True)
class DrivePart:
    """One stretch driven forwards between reversals: fixes ``first..last`` (indices)."""

    first: int
    last: int
    length_m: float
    label: str


@dataclass(frozen=True)
class DrivePoints:
    """Points ready for the path fit.

    Attributes
    ----------
    x_m, y_m : ndarray
        Point positions (means of the fixes each stands for), metres, in driving order.
    z_m : ndarray or None
        Mean elevation of those fixes.
    count : ndarray of int
        How many fixes each point averages.
    where : ndarray of str
        Where each point came from in the file ("line 12", "trkpt 16-45").
    time : ndarray
        Mean time of the fixes each point stands for (seconds; without time stamps, the mean
        position in the sampling order).
    order_noise_m : float
        White noise of the fixes per coordinate, estimated in the order they were taken.
    drift_rate : float or None
        How fast the slowly drifting part of the error wanders: the variance of its change over
        a time ``T`` is ``drift_rate * T`` per coordinate (m^2/s; without time stamps, m^2 per
        fix). Estimated from the fixes taken while standing still; None when the drive has no
        standstill long enough to tell.
    cell_m : float
        Size of the cells fixes were averaged over (0: none averaged).
    rest_runs, rest_fixes : int
        Standstills merged and the fixes they held.
    parts : tuple of DrivePart
        The stretches driven forwards; more than one where the vehicle reversed.
    part : int
        Which of them these points are (0-based).
    n_fixes : int
        Fixes read.
    """

    x_m: np.ndarray
    y_m: np.ndarray
    z_m: np.ndarray | None
    count: np.ndarray
    where: np.ndarray
    time: np.ndarray
    order_noise_m: float
    drift_rate: float | None
    cell_m: float
    rest_runs: int
    rest_fixes: int
    parts: tuple[DrivePart, ...] = field(default=())
    part: int = 0
    n_fixes: int = 0


def prepare_drive(route: Route, part: int | None = None) -> DrivePoints:
    """Merge standstills, split at reversals and average dense fixes (see module docstring).

    ``part`` (0-based) picks the stretch to keep where the vehicle reversed; by default the
    longest, with a warning naming all of them.
    """
    source = route.source
    x = np.asarray(route.x_m, dtype=float)
    y = np.asarray(route.y_m, dtype=float)
    z = None if route.z_m is None else np.asarray(route.z_m, dtype=float)
    where = np.asarray(route.where, dtype=object)
    n = x.size
    t, has_time = _sampling_parameter(route)
    xy = np.column_stack((x, y))
    span = float(t[-1] - t[0])
    sigma = estimate_scatter(t - t[0], xy, span, False, components=2, bound=False)
    sigma = max(sigma, MIN_NOISE_M)
    if n < MIN_FIXES or not math.isfinite(sigma):      # too few fixes to tell: nothing to do
        return DrivePoints(x, y, z, np.ones(n, dtype=int), where, t, MIN_NOISE_M, None, 0.0, 0, 0,
                           (DrivePart(0, n - 1, _chord_length(x, y), _span(where, 0, n - 1)),),
                           0, n)
    pilot = fit_pspline(t - t[0], xy, 1.0 / sigma, residual_target(2 * n), span, False,
                        _median_step(t))
    u = t - t[0]
    velocity = pilot.spline(u, nu=1)
    position = pilot.spline(u)
    speed = _window_speed(position, t, REST_WINDOW_S if has_time else REST_WINDOW_FIXES)
    arc = ArcLength.from_fit(pilot)
    s_pilot = arc.station(u)
    if has_time:
        slow = speed < REST_SPEED_MPS
        extent = max(REST_EXTENT_M, REST_NOISE_WIDTHS * sigma)
    else:   # no clock: only a run that scatters like noise is taken as standing still
        slow = speed < REST_STEP_FRACTION * percentile(speed, 75)
        extent = REST_NOISE_WIDTHS * sigma
    runs = _rest_runs(slow, position, extent, to_the_ends=has_time)
    # In sampling order the noise estimate also sees how irregularly survey points are spaced;
    # in chord length (moving fixes only) it does not. Cells follow the smaller of the two.
    moving = np.ones(n, dtype=bool)
    for a, b in runs:
        moving[a: b + 1] = False
    sigma_cell = max(min(sigma, _chord_noise(x[moving], y[moving])), MIN_NOISE_M)
    drift = _drift_rate(t, xy, runs)

    parts = _forward_parts(runs, velocity, slow, s_pilot, sigma, where, n)
    if len(parts) > 1:
        chosen = _choose_part(parts, part, source)
    else:
        if part not in (None, 0):
            raise RouteGeometryError(
                f"{source}: --part {part + 1} asked for, but the vehicle never reverses: the "
                "drive is one part; leave out --part")
        chosen = 0
    keep = parts[chosen]
    lo, hi = keep.first, keep.last
    runs = [(max(a, lo), min(b, hi)) for a, b in runs if b >= lo and a <= hi]
    runs = [(a, b) for a, b in runs if b > a]

    # One point per standstill, then cells along the pilot's arc length.
    label = np.arange(lo, hi + 1)
    for a, b in runs:
        label[a - lo: b - lo + 1] = a
    cell = CELL_NOISE_WIDTHS * sigma_cell
    moving = moving[lo: hi + 1]
    cell_index = np.floor((s_pilot[lo: hi + 1] - s_pilot[lo]) / cell).astype(np.int64)
    # a new group starts where a standstill starts or ends, or the cell changes
    key = np.where(moving, cell_index, -1 - label)
    starts = np.flatnonzero(np.concatenate(([True], key[1:] != key[:-1])))
    group = np.concatenate((starts, [hi - lo + 1]))
    count = np.diff(group)
    gx = np.add.reduceat(x[lo: hi + 1], starts) / count
    gy = np.add.reduceat(y[lo: hi + 1], starts) / count
    gz = None if z is None else np.add.reduceat(z[lo: hi + 1], starts) / count
    gt = np.add.reduceat(t[lo: hi + 1], starts) / count
    gwhere = where[lo + starts]          # a single fix keeps its own label (most of a log)
    for g in np.flatnonzero(count > 1):
        gwhere[g] = _span(where, lo + group[g], lo + group[g + 1] - 1)
    averaged = int(np.sum(count[count > 1])) - sum(b - a + 1 for a, b in runs)
    return DrivePoints(gx, gy, gz, count, gwhere, gt, float(sigma), drift,
                       cell if averaged > 0 else 0.0, len(runs),
                       sum(b - a + 1 for a, b in runs), tuple(parts), chosen, n)


# ---------------------------------------------------------------------------------------------

def _sampling_parameter(route: Route) -> tuple[np.ndarray, bool]:
    """Time stamps when every fix has one and they increase; else the sampling order."""
    n = route.n_points
    if route.time_s is not None:
        t = np.asarray(route.time_s, dtype=float)
        if t.size == n and np.all(np.diff(t) > 0):
            return t, True
    return np.arange(n, dtype=float), False


def _chord_noise(x: np.ndarray, y: np.ndarray) -> float:
    """Noise across the path estimated in chord length (inf when too few points)."""
    if x.size < 2:              # every fix in a standstill: the fit refuses one place
        return math.inf
    keep = np.concatenate(([True], np.hypot(np.diff(x), np.diff(y)) > 0))
    x, y = x[keep], y[keep]
    u = np.concatenate(([0.0], np.cumsum(np.hypot(np.diff(x), np.diff(y)))))
    if u.size < 2:
        return math.inf
    return estimate_scatter(u, np.column_stack((x, y)), float(u[-1]), False)


def _median_step(t: np.ndarray) -> float:
    return median(np.diff(t)) / 2.0


def _chord_length(x: np.ndarray, y: np.ndarray) -> float:
    return float(np.sum(np.hypot(np.diff(x), np.diff(y))))


def _span(where: np.ndarray, a: int, b: int) -> str:
    """"line 12-40" for fixes a..b labelled "line 12" .. "line 40" (else "A to B")."""
    first, last = str(where[a]), str(where[b])
    if a == b:
        return first
    head_a, _, num_a = first.rpartition(" ")
    head_b, _, num_b = last.rpartition(" ")
    if head_a and head_a == head_b and num_a.isdigit() and num_b.isdigit():
        return f"{head_a} {num_a}-{num_b}"
    return f"{first} to {last}"


def _window_speed(position: np.ndarray, t: np.ndarray, window: float) -> np.ndarray:
    """The pilot's speed over ``window`` (seconds, or fixes without a clock) centred on each fix:
    its displacement across the window over the window's time. Over a few seconds the smoothed
    fixes of a standing receiver barely move, though they wander to and fro in between."""
    half = 0.5 * window
    lo = np.searchsorted(t, t - half)
    hi = np.minimum(np.searchsorted(t, t + half, side="right") - 1, t.size - 1)
    span = np.maximum(t[hi] - t[lo], 1e-12)
    return np.hypot(*(position[hi] - position[lo]).T) / span


def _rest_runs(slow: np.ndarray, position: np.ndarray, extent: float,
               to_the_ends: bool = True) -> list[tuple[int, int]]:
    """Runs of slow fixes (first, last index) whose pilot positions stay within ``extent`` of
    the run's first.

    Slow runs whose pilot positions, gap included, stay that close are one standstill: the
    smoothed fixes of a standing receiver wander, and may briefly look faster than the
    threshold. With ``to_the_ends`` (a log with time stamps), so are the fixes between the log's
    first (last) fix and a standstill whose pilot positions stay that close: the pilot, a
    spline free at its ends, and the speed window cut short there make a standing receiver
    look faster than the threshold over its first second or so (0.77 m/s at the first of a
    consumer log's 20 s standstill at 10 Hz, whose first ten fixes then became a point of their
    own 1.8 m off the standstill's, and the fit refused the zig-zag as a cusp). Without a clock
    a standstill is only what scatters like noise, and the ends are left as they are."""
    edges = np.flatnonzero(np.diff(np.concatenate(([0], slow.view(np.int8), [0]))))

    def within(a: int, b: int, origin: int | None = None) -> bool:
        here = position[a if origin is None else origin]
        return float(np.max(np.hypot(*(position[a: b + 1] - here).T))) <= extent

    runs: list[list[int]] = []
    for a, b in zip(edges[::2], edges[1::2] - 1):
        if runs and within(runs[-1][0], int(b)):
            runs[-1][1] = int(b)
        else:
            runs.append([int(a), int(b)])
    last = slow.size - 1
    if to_the_ends and runs and 0 < runs[0][0] and within(0, runs[0][0], origin=runs[0][0]):
        runs[0][0] = 0
    if (to_the_ends and runs and runs[-1][1] < last
            and within(runs[-1][1], last, origin=runs[-1][1])):
        runs[-1][1] = last
    return [(a, b) for a, b in runs if b > a and within(a, b)]


#: Standstills shorter than this many fixes say nothing about the drift.
_MIN_REST_FIXES = 8


def _drift_rate(t: np.ndarray, xy: np.ndarray, runs) -> float | None:
    """Variance growth rate of the slowly drifting error, from fixes taken while standing.

    While the vehicle stands every fix is the same place plus error, so the mean square
    change between two fixes ``L`` apart is ``2 sigma_w^2 + V(L)`` per coordinate, ``V`` the
    drift's variogram; for a Gauss-Markov drift with correlation time ``tau`` it grows as
    ``2 sigma_d^2 L / tau`` for ``L`` well below ``tau`` (common practice). A straight line
    fitted to the pooled mean squares against ``L`` (lags up to half of each standstill) gives
    that rate as its slope; None without standstills of at least ``_MIN_REST_FIXES`` fixes.
    """
    lags, squares, weights = [], [], []
    for a, b in runs:
        if b - a + 1 < _MIN_REST_FIXES:
            continue
        tt, pp = t[a: b + 1], xy[a: b + 1]
        for lag in range(1, (b - a + 1) // 2 + 1):
            d = pp[lag:] - pp[:-lag]
            lags.append(float(np.mean(tt[lag:] - tt[:-lag])))
            squares.append(float(np.mean(np.sum(d * d, axis=1))) / 2.0)
            weights.append(d.shape[0])
    if len(lags) < 3:
        return None
    lag, sq, w = np.array(lags), np.array(squares), np.sqrt(np.array(weights, dtype=float))
    design = np.column_stack((np.ones_like(lag), lag)) * w[:, None]
    slope = float(np.linalg.lstsq(design, sq * w, rcond=None)[0][1])
    return max(slope, 0.0)


def _forward_parts(runs, velocity, slow, s_pilot, sigma, where, n) -> list[DrivePart]:
    """Split the fixes where the vehicle leaves a standstill the way it came.

    The direction of travel is the pilot's velocity at the last moving fix at least ``probe``
    before the standstill and the first one at least ``probe`` after it."""
    probe = max(REVERSAL_PROBE_M, REVERSAL_NOISE_WIDTHS * sigma)
    moving = np.flatnonzero(~slow)
    cuts = []
    for a, b in runs:
        i = np.searchsorted(moving, np.searchsorted(s_pilot, s_pilot[a] - probe, side="right"))
        before = moving[i - 1] if i > 0 else None
        j = np.searchsorted(moving, np.searchsorted(s_pilot, s_pilot[b] + probe))
        after = moving[j] if j < moving.size else None
        if before is None or after is None:
            continue                      # at an end of the drive: nothing to compare
        arrive, leave = velocity[before], velocity[after]
        cos = float(arrive @ leave) / (np.linalg.norm(arrive) * np.linalg.norm(leave))
        if cos < math.cos(math.radians(REVERSAL_TURN_DEG)):
            cuts.append((a + b) // 2)
    bounds = [0, *cuts, n - 1]
    parts = []
    for i, (a, b) in enumerate(zip(bounds[:-1], bounds[1:])):
        first = a if i == 0 else a + 1
        parts.append(DrivePart(first, b, float(s_pilot[b] - s_pilot[first]),
                               _span(where, first, b)))
    return parts


def _choose_part(parts: list[DrivePart], part: int | None, source: str) -> int:
    listing = "; ".join(f"part {i + 1}: {p.label}, {p.length_m:.0f} m"
                        for i, p in enumerate(parts))
    if part is not None:
        if not 0 <= part < len(parts):
            raise RouteGeometryError(
                f"{source}: the vehicle reverses {len(parts) - 1} time(s), so the drive has "
                f"{len(parts)} parts ({listing}); there is no part {part + 1}: choose one of "
                f"1..{len(parts)}")
        return part
    chosen = int(np.argmax([p.length_m for p in parts]))
    warnings.warn(
        f"{source}: the vehicle reverses (drives backwards) {len(parts) - 1} time(s); a speed "
        f"profile runs one way, so the drive is split into {len(parts)} parts ({listing}) and "
        f"the longest, part {chosen + 1}, is used; choose another with --part",
        CurvespeedWarning, stacklevel=3)
    return chosen
