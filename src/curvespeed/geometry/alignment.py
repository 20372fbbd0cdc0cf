"""The design alignment behind a curvature estimate: straights, arcs and clothoids.

Roads are laid out from elements whose curvature is constant (straight, arc) or linear in station
(clothoid), joined with or without a jump of curvature (common practice). A smoothing spline
cannot follow a jump or a corner of curvature: it spreads it over several metres and rings on
either side, which is exactly where a vehicle enters a bend. :func:`reconstruct` recovers the
piecewise-linear curvature a fine smoothing scale describes:

1. *Segments.* Straight lines are fitted to the estimate between candidate breaks by optimal
   partitioning (dynamic programming over the stations, the cost of a segment being its
   residual sum of squares in units of the estimate's variance, plus a penalty per break), each
   line over the segment's interior only: within ``gap`` of a break the smoothing blurs it.
2. *Breaks.* Two neighbouring lines that meet near their boundary (within two gaps) join at a kink (clothoid to
   arc or straight); lines that do not meet there are a step (an arc entered without a
   clothoid), placed where the estimate crosses the mean of the two sides (a symmetric smoother
   crosses there). A segment shorter than the smoothing spreads a step is the smear of one and
   becomes a step too.
   A long element whose line hardly changes is taken as level (an arc or a straight): a tilt
   from noise or from the neighbours' smear would slope the bound along the arc.
3. *Uncertainty.* The same line fits applied to the estimate's noise replicates give the
   standard deviation of the reconstructed curvature; the bound is the curvature plus ``gamma``
   standard deviations plus how far the fine estimate, averaged over the smear, departs from
   the line (in case a line hides a gentle break within the noise) -- one level along each
   element's interior, from its departure beyond the noise, so that the bound does not wobble
   with the noise along an arc -- and around a step the larger side's over the step's
   location uncertainty.

The caller decides where to trust it (:mod:`.curvature` compares it with the model-free adaptive
estimate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..order_stats import median

#: Penalty per break, in units of log(stations) of the normalised residual sum: a break must
#: explain this much more than noise would (a Bayesian information criterion with a factor 4
#: for the correlation the smoothing leaves between neighbouring stations' errors).
BREAK_PENALTY = 8.0
#: An element's line is precise enough to stand on its own when ``gamma`` of its standard
#: deviations are at most this fraction of the element's largest |curvature| ...
PRECISE_FRACTION = 0.05
#: ... or this much curvature (1/m), whichever is more: 5e-4 1/m is 0.45 m/s^2 of lateral
#: acceleration at 30 m/s, a fifth of a comfortable 2-3 m/s^2 (common practice). The bound adds
#: those standard deviations anyway; this only keeps lines that noise swamps (a consumer
#: receiver's log) from standing in for the adaptive estimate.
PRECISE_FLOOR_1PM = 2e-4
#: Longest segment considered (stations): longer elements are found as several segments whose
#: lines agree, at no cost to the curvature.
MAX_SEGMENT_STATIONS = 4000


@dataclass(frozen=True)
class Reconstruction:
    """Piecewise-linear curvature at the stations, its standard deviation and bound (1/m), the
    breaks (stations, metres; ``step`` True for a jump of curvature), and how closely the fine
    estimate follows it: ``follows`` is True at the stations of elements whose interior (more
    than ``gap`` from a break) stays within ``gamma`` standard deviations of its line, and whose
    line is precise (``gamma`` of its standard deviations at most :data:`PRECISE_FRACTION` of
    the curvature, or :data:`PRECISE_FLOOR_1PM`)."""

    kappa: np.ndarray
    sd: np.ndarray
    bound: np.ndarray
    breaks_m: np.ndarray
    step: np.ndarray
    follows: np.ndarray
    near_step: np.ndarray      # stations within a step's location uncertainty
    lines: tuple = ()          # each element's line (intercept, slope), in station-index units
    reach_m: np.ndarray | None = None   # how far each break may be off, metres
    misfit_level: np.ndarray | None = None  # the element's misfit level at each station (1/m)
    hidden_level: np.ndarray | None = None  # of it, the departure beyond noise (1/m; 0 if none)


def reconstruct(station: np.ndarray, kappa: np.ndarray, deltas: np.ndarray, spread_m: float,
                gamma: float) -> Reconstruction | None:
    """Piecewise-linear curvature behind ``kappa`` (see module docstring).

    ``deltas`` (stations x replicates) are the estimate's changes under noise replicates,
    ``spread_m`` how far its smoothing spreads a step. None when the route is too short for
    one segment.
    """
    n = station.size
    ds = float(station[1] - station[0])
    gap = max(1, int(math.ceil(0.5 * spread_m / ds)))
    sd = np.sqrt(np.mean(deltas**2, axis=1))
    sigma = max(median(sd), 1e-9)
    if n < 2 * (2 * gap + 4):
        return None
    fits = _LineFits(kappa, deltas)
    bounds = _partition(fits, n, gap, sigma, max(1.0, spread_m / (4 * ds)))
    bounds, smears = _collapse_smears(bounds, int(math.ceil(2 * spread_m / ds)))
    lines = [fits.line(*_interior(a, b, n, gap)) for a, b in zip(bounds[:-1], bounds[1:])]
    # an element whose line changes by less than its noise is taken as an arc or a straight
    levels = [fits.level_if_flat(*_interior(a, b, n, gap), gamma, 4 * (2 * gap + 1))
              for a, b in zip(bounds[:-1], bounds[1:])]
    lines = [line if level is None else (level, 0.0) for line, level in zip(lines, levels)]
    ends_sd = [np.hypot(_line_sd(fits, *_interior(*bounds[m - 1:m + 1], n, gap), levels[m - 1],
                                 bounds[m]),
                        _line_sd(fits, *_interior(*bounds[m:m + 2], n, gap), levels[m],
                                 bounds[m]))
               for m in range(1, len(bounds) - 1)]
    breaks, step, reach = _place_breaks(kappa, sd, gamma, bounds, lines, gap, smears, ends_sd)
    edges = np.concatenate(([-np.inf], breaks, [np.inf]))
    x = np.arange(n, dtype=float)
    seg = np.searchsorted(edges, x, side="right") - 1
    cut = _segment_cuts(seg, edges.size - 1)
    k = np.empty(n)
    sd_pl = np.empty(n)
    follows = np.zeros(n, dtype=bool)
    for m, (a, b) in enumerate(zip(bounds[:-1], bounds[1:])):
        sel = slice(cut[m], cut[m + 1])          # the stations of segment m (seg == m)
        lo, hi = _interior(a, b, n, gap)
        k[sel] = lines[m][0] + lines[m][1] * x[sel]
        sd_pl[sel] = _line_sd(fits, lo, hi, levels[m], x[sel])
        inner = np.arange(lo, hi)
        line = lines[m][0] + lines[m][1] * inner
        line_sd = _line_sd(fits, lo, hi, levels[m], inner)    # (inner may reach past a break)
        precise = max(PRECISE_FRACTION * float(np.max(np.abs(line))), PRECISE_FLOOR_1PM)
        follows[sel] = bool(gamma * float(np.max(line_sd)) <= precise
                            and np.all(np.abs(kappa[inner] - line) <= gamma * (sd[inner] + line_sd)))
    # a line may miss a gentle break the fine scale shows within its noise: what the fine scale
    # reads beyond the line, averaged over the smear (which averages its noise down), is added
    misfit = np.abs(_moving_mean(kappa - k, gap))
    level, hidden = _flatten_misfit(misfit, _moving_mean(deltas, gap), cut, edges, gap, gamma)
    # near an element's ends the fine scale is blurred across the break, so its misfit there
    # reads low: the element's level (a departure its line hides) holds to its ends
    bound = np.abs(k) + gamma * sd_pl + np.maximum(misfit, np.nan_to_num(level[seg], nan=0.0))
    # next to a step the misfit is the smear of the jump itself, not a departure of either
    # line: there the elements' own levels stand in for it (where they have one)
    sides = np.abs(k) + gamma * sd_pl + np.where(np.isnan(level[seg]), misfit, level[seg])
    near_step = np.zeros(n, dtype=bool)
    for b, r, is_step in zip(breaks, reach, step):
        if is_step:    # either side's value may hold anywhere the step may lie
            sel = np.abs(x - b) <= r + 1.0
            bound[sel] = sides[sel].max()
            near_step |= sel
    return Reconstruction(k, sd_pl, bound, station[0] + breaks * ds, np.array(step, bool),
                          follows, near_step, tuple(lines), np.asarray(reach, float) * ds,
                          np.nan_to_num(level[seg], nan=0.0), hidden[seg])


def _line_sd(fits: _LineFits, lo: int, hi: int, level, at):
    """Standard deviation of an element's line (or level, when it has one) at ``at``."""
    at = np.atleast_1d(np.asarray(at, dtype=float))
    if level is None:
        return fits.line_sd(lo, hi, at)
    return np.full(at.shape, fits.level_sd(lo, hi))


def _moving_mean(y: np.ndarray, gap: int) -> np.ndarray:
    """Mean over the ``2 gap + 1`` stations centred on each (ends padded with the end value),
    along the first axis."""
    padded = np.concatenate((np.repeat(y[:1], gap, axis=0), y, np.repeat(y[-1:], gap, axis=0)))
    c = np.cumsum(padded, axis=0)
    c = np.concatenate((np.zeros_like(c[:1]), c))
    return (c[2 * gap + 1:] - c[:-2 * gap - 1]) / (2 * gap + 1)


def _segment_cuts(seg: np.ndarray, n_segments: int) -> np.ndarray:
    """Where each segment's stations begin in ``seg`` (ascending), and the end: segment ``m``
    is ``cut[m]:cut[m + 1]``, the stations a mask ``seg == m`` selects, without a pass over
    every station per segment."""
    return np.searchsorted(seg, np.arange(n_segments + 1), side="left")


def _flatten_misfit(misfit, noise_avg, cut, edges, gap, gamma):
    """Make the misfit one level along each element's interior (in place); return each
    element's level (NaN for an element without such an interior) and the height of the
    departure beyond noise in it, ``sqrt(3) e`` (0 where none or no such interior).

    Away from its breaks (more than two ``gap`` from them) what the fine scale reads beyond an
    element's line is mostly its own noise (``noise_avg``: the replicates' changes averaged the
    same way), which wanders by its standard deviation from station to station: carried into
    the bound pointwise, it made a profile that rides the lateral limit through an arc brake and
    accelerate over its wiggles. A line that hides a gentle break shows instead as residual
    beyond the noise over the element: its root-mean-square excess ``e`` (a tent-shaped departure
    of height ``d`` has ``e = d / sqrt(3)``). The level is ``sqrt(3) e`` plus the noise's mean
    standard deviation (what the pointwise misfit of pure noise averages to, about); a departure
    beyond ``gamma`` standard deviations at a station is added there as before.
    """
    x = np.arange(misfit.size, dtype=float)
    noise_sd = np.sqrt(np.mean(noise_avg**2, axis=1))
    levels = np.full(edges.size - 1, np.nan)
    hidden = np.zeros(edges.size - 1)
    for m in range(edges.size - 1):
        part = slice(cut[m], cut[m + 1])         # segment m's stations, then its interior
        sel = (x[part] - edges[m] > 2 * gap) & (edges[m + 1] - x[part] > 2 * gap)
        if np.count_nonzero(sel) < 2 * gap + 1:
            continue
        r, sd = misfit[part][sel], noise_sd[part][sel]
        excess = math.sqrt(max(float(np.mean(r**2) - np.mean(sd**2)), 0.0))
        hidden[m] = math.sqrt(3.0) * excess
        levels[m] = hidden[m] + float(np.mean(sd))
        misfit[part][sel] = np.maximum(levels[m], r - gamma * sd)
    return levels, hidden


def _interior(a: int, b: int, n: int, gap: int) -> tuple[int, int]:
    """Stations of segment [a, b) its line is fitted to: all but ``gap`` next to a break."""
    lo = a if a == 0 else a + gap
    hi = b if b == n else b - gap
    return lo, max(hi, lo + 2)


class _LineFits:
    """Least-squares lines through windows of a series (and of its replicates) from cumulative
    sums, in O(1) per window."""

    def __init__(self, y: np.ndarray, deltas: np.ndarray):
        x = np.arange(y.size, dtype=float)
        zero = np.zeros(1)
        self.c0 = np.concatenate((zero, np.cumsum(np.ones_like(x))))
        self.c1 = np.concatenate((zero, np.cumsum(x)))
        self.c2 = np.concatenate((zero, np.cumsum(x * x)))
        self.cy = np.concatenate((zero, np.cumsum(y)))
        self.cxy = np.concatenate((zero, np.cumsum(x * y)))
        self.cyy = np.concatenate((zero, np.cumsum(y * y)))
        self.deltas = deltas
        self._lines: dict[tuple[int, int], tuple[np.ndarray, np.ndarray, float]] = {}
        self._level_sd: dict[tuple[int, int], float] = {}

    def _sums(self, a, b):
        return (self.c0[b] - self.c0[a], self.c1[b] - self.c1[a], self.c2[b] - self.c2[a],
                self.cy[b] - self.cy[a], self.cxy[b] - self.cxy[a], self.cyy[b] - self.cyy[a])

    def cost(self, a, b):
        """Residual sum of squares of the line through [a, b) (arrays of windows)."""
        n, sx, sxx, sy, sxy, syy = self._sums(a, b)
        den = n * sxx - sx * sx
        slope = np.where(den > 0, (n * sxy - sx * sy) / np.where(den > 0, den, 1.0), 0.0)
        icpt = (sy - slope * sx) / n
        rss = (syy - 2 * slope * sxy - 2 * icpt * sy + slope * slope * sxx
               + 2 * slope * icpt * sx + icpt * icpt * n)
        return np.maximum(rss, 0.0)

    def line(self, a: int, b: int) -> tuple[float, float]:
        n, sx, sxx, sy, sxy, _ = (float(v) for v in self._sums(a, b))
        den = n * sxx - sx * sx
        slope = (n * sxy - sx * sy) / den if den > 0 else 0.0
        return (sy - slope * sx) / n, slope

    def level_if_flat(self, a: int, b: int, gamma: float, min_stations: int) -> float | None:
        """The mean of [a, b) when it is precise (``gamma`` standard deviations of it over the
        replicates within :data:`PRECISE_FRACTION` of it, or :data:`PRECISE_FLOOR_1PM`), the
        line through [a, b) changes the curvature along it by no more than that, and [a, b)
        has at least ``min_stations``; else None.

        Design alignments are made of arcs and straights (constant) and clothoids (linear,
        changing by far more than that): a tilt of an arc's line, from noise or from the
        smoothing of its neighbours, put a slope on the bound along the arc, and a profile
        riding the lateral limit there followed it. A gentle clothoid taken for a level is
        covered by the misfit's level (:func:`_flatten_misfit`): a ramp's residual about its
        mean has a root-mean-square of its rise over 2 sqrt(3), which the level turns back into
        half the rise, the ramp's top. A short element keeps its line: its slope says little,
        and the steps' candidate transitions (:mod:`.steps`) are built from it; so does an
        imprecise one (a consumer receiver's log), whose line the adaptive estimate judges."""
        if b - a < min_stations:
            return None
        n, _, _, sy, _, _ = (float(v) for v in self._sums(a, b))
        level = sy / n
        small = max(PRECISE_FRACTION * abs(level), PRECISE_FLOOR_1PM)
        if (gamma * self.level_sd(a, b) > small
                or abs(self.line(a, b)[1]) * (b - a) > small):
            return None
        return level

    def level_sd(self, a: int, b: int) -> float:
        """Standard deviation over the replicates of the mean of [a, b) (kept per element, which
        is asked for it several times: each a pass over its stations' replicates)."""
        key = (a, b)
        if key not in self._level_sd:
            self._level_sd[key] = math.sqrt(float(np.mean(np.mean(self.deltas[a:b], axis=0)
                                                          ** 2)))
        return self._level_sd[key]

    def line_sd(self, a: int, b: int, at: np.ndarray) -> np.ndarray:
        """Standard deviation over the replicates of the line through [a, b), at ``at``."""
        mean, slope, centre = self._replicate_lines(a, b)
        values = mean[None, :] + (at - centre)[:, None] * slope[None, :]
        return np.sqrt(np.mean(values**2, axis=1))

    def _replicate_lines(self, a: int, b: int) -> tuple[np.ndarray, np.ndarray, float]:
        """Least-squares lines through each replicate's [a, b): the mean, the slope and the
        centre station they pivot on (the centred normal equations, solved directly: a
        general least-squares solver per element took most of a long log's reconstruction).
        Kept per element, which is asked for several times."""
        key = (a, b)
        if key not in self._lines:
            x = np.arange(a, b, dtype=float)
            centre = float(x.mean())
            x -= centre
            d = self.deltas[a:b]
            sxx = float(x @ x)
            slope = (x @ d) / sxx if sxx > 0 else np.zeros(d.shape[1])
            self._lines[key] = (d.mean(axis=0), slope, centre)
        return self._lines[key]


def _partition(fits: _LineFits, n: int, gap: int, sigma: float, corr: float) -> list[int]:
    """Segment boundaries [0, ..., n] minimising cost + penalty (optimal partitioning with the
    pruning of Killick, Fearnhead and Eckley, JASA 107, 2012, from memory), in the compiled
    twin (``_partition.c``) when it was built, else in :func:`_partition_python`."""
    try:
        from . import _partition as compiled
    except ImportError:         # no C compiler at install: the reference loop
        return _partition_python(fits, n, gap, sigma, corr)
    prev = np.zeros(n + 1, dtype=np.int64)
    compiled.partition(fits.c0, fits.c1, fits.c2, fits.cy, fits.cxy, fits.cyy, n, gap,
                       BREAK_PENALTY * math.log(n), 1.0 / (sigma * sigma * corr),
                       2 * gap + 4, MAX_SEGMENT_STATIONS, prev)
    cuts = [n]
    while cuts[-1] > 0:
        cuts.append(int(prev[cuts[-1]]))
    return cuts[::-1]


def _partition_python(fits: _LineFits, n: int, gap: int, sigma: float,
                      corr: float) -> list[int]:
    """The reference loop of :func:`_partition` (a Python loop over the stations, about
    0.1 ms each: a second on a 10 km route)."""
    beta = BREAK_PENALTY * math.log(n)
    scale = 1.0 / (sigma * sigma * corr)
    minlen = 2 * gap + 4
    best = np.full(n + 1, np.inf)
    best[0] = -beta
    prev = np.zeros(n + 1, dtype=np.intp)
    candidates = np.array([0], dtype=np.intp)      # ascending: starts still worth trying
    for j in range(minlen, n + 1):
        first = int(np.searchsorted(candidates, j - MAX_SEGMENT_STATIONS))
        ready = int(np.searchsorted(candidates, j - minlen, side="right"))
        i = candidates[first:ready]
        if i.size:
            lo = np.where(i == 0, 0, i + gap)
            hi = j if j == n else j - gap
            total = best[i] + fits.cost(lo, hi) * scale + beta
            m = int(np.argmin(total))
            best[j], prev[j] = total[m], i[m]
            # a start whose cost already exceeds the best can never win later (pruning)
            candidates = np.concatenate((i[total - beta <= best[j]], candidates[ready:], [j]))
        else:
            candidates = np.concatenate((candidates[first:], [j]))
    cuts = [n]
    while cuts[-1] > 0:
        cuts.append(int(prev[cuts[-1]]))
    return cuts[::-1]


def _collapse_smears(bounds: list[int], short: int) -> tuple[list[int], dict[int, float]]:
    """Merge every interior segment shorter than ``short`` stations into one boundary at its
    middle: it is the smear of a step, not an element. Returns the boundaries and, for each
    merged one, half the smear's length (stations): how far the break may be from it."""
    out = [bounds[0]]
    half: dict[int, float] = {}
    k = 1
    while k < len(bounds) - 1:
        a, b = bounds[k], bounds[k + 1]
        if b - a < short and k + 1 < len(bounds) - 1:
            out.append((a + b) // 2)
            half[(a + b) // 2] = 0.5 * (b - a)
            k += 2
            continue
        out.append(a)
        k += 1
    out.append(bounds[-1])
    return out, half


def _place_breaks(kappa, sd, gamma, bounds, lines, gap, smears, ends_sd):
    """Each break's position (in stations), whether it is a step, and how far it may be off:
    for a step read off a smear, anywhere the smear spans (a jump, or a clothoid too short to
    resolve); else ``gamma`` times the noise of where the estimate crosses the mid level (its
    standard deviation over the slope of the crossing), and at least one station. A kink (two
    lines that meet) may be off by ``gamma`` times the standard deviation of where they cross,
    at most two gaps (no floor: lines fitted to exact points place a kink to a fraction of a
    station, and the rates are spread only where a kink's reach exceeds a station step).

    Lines meet near their boundary when the point where they cross is within two gaps of it,
    widened by ``gamma`` times that point's own standard deviation (``ends_sd``: of the two
    lines' difference at the boundary, over their difference of slope): an arc running into a
    clothoid whose curvature changes slowly crosses it at a point known only to a few metres.
    The point must also lie on the two segments, after the previous break: lines of nearly the
    same slope can cross far away, and with an uncertainty as large (an RTK log at 2 Hz put a
    kink of the boundary at 441 m at 141 m, beyond two other breaks, and the curvature between
    the breaks, read off a segment of negative length, held a bend's bound at 0.01-0.1 1/m over
    300 m of a 178 m-radius curve)."""
    breaks, step, reach = [], [], []
    for m in range(1, len(bounds) - 1):
        b = bounds[m]
        (ia, sa), (ib, sb) = lines[m - 1], lines[m]
        va, vb = ia + sa * b, ib + sb * b
        meet = b + (vb - va) / (sa - sb) if sa != sb else math.inf
        meet_sd = float(ends_sd[m - 1][0]) / abs(sa - sb) if sa != sb else math.inf
        kink = math.isfinite(meet) and abs(meet - b) <= 2 * gap + gamma * meet_sd
        first = max(bounds[m - 1], breaks[-1] if breaks else -math.inf)
        if kink and not first < meet < bounds[m + 1]:
            # it joins these two lines, so it lies on their segments, after the last break;
            # lines that cross farther off but agree at the boundary within their noise
            # (nearly the same line) join there
            kink = first < b and abs(vb - va) <= gamma * float(ends_sd[m - 1][0])
            meet = float(b)
        if kink:                                                                    # a kink
            breaks.append(meet)
            step.append(False)
            # where the lines cross is known to gamma times its standard deviation (at most
            # two gaps, as a step's: the lines' interiors end there)
            reach.append(min(gamma * meet_sd, 2.0 * gap))
            continue
        level = 0.5 * (va + vb)
        # searched after the previous break (its window may reach past this boundary)
        after = int(math.floor(breaks[-1])) + 1 if breaks else 0
        lo, hi = max(b - gap - 2, 0, min(after, b)), min(b + gap + 2, kappa.size - 1)
        seg = kappa[lo: hi + 1] - level
        cross = np.flatnonzero(np.sign(seg[:-1]) * np.sign(seg[1:]) <= 0)
        located = 2.0 * gap
        if cross.size:
            j = cross[np.argmin(np.abs(cross + lo - b))]
            a_, b_ = seg[j], seg[j + 1]
            breaks.append(lo + j + (0.5 if a_ == b_ else a_ / (a_ - b_)))
            slope = abs(b_ - a_)                                # per station
            if slope > 0:
                located = gamma * float(sd[lo + j]) / slope
        else:
            breaks.append(float(b))
        step.append(True)
        reach.append(max(smears.get(b, 0.0), min(located, 2.0 * gap), 1.0))
    return np.array(breaks, dtype=float), step, reach
