"""Curvature from the fitted path: locally adaptive smoothing, its uncertainty, and a bound.

The path fit (:mod:`.points`) smooths just enough to explain the points within their noise (the
discrepancy principle). That is right for positions but too little for curvature, a second
derivative: on a dense log it leaves noise of several 1e-3 1/m on straights and tens of percent
on gentle arcs. Smoothing more everywhere would blur the short features a road has (clothoids,
tight bends). :func:`estimate_curvature` therefore chooses the smoothing station by station:

1. *Scales.* The same penalised spline is solved at a ladder of smoothing weights, each
   smoothing over twice the length of the one before (:data:`LEVELS` of them), from the path
   fit's own.
2. *Uncertainty.* At every scale the standard deviation of curvature from the position noise
   is found by Monte Carlo: the fit is linear in the data, so :data:`REPLICATES` noise
   vectors of the estimated size are smoothed with the same normal equations (one banded
   Cholesky per scale for all of them) and their curvature changes measured.
3. *Choice.* At each station the coarsest scale is taken whose confidence interval
   (``GAMMA`` standard deviations) still overlaps those of every finer scale: the intersection
   of confidence intervals rule (Goldenshluger and Nemirovski, Math. Methods Stat. 6, 1997;
   Katkovnik, IEEE Trans. Signal Process. 47(9), 1999; both from memory). Where curvature is
   constant (straights, arcs) the coarse scales agree and noise averages out; near a change
   the coarse scales are biased, their intervals part, and a fine scale is kept. A station
   within reach of a finer choice (its smoothing width) takes that finer choice too, so no
   coarse estimate leaks across a change.

*The bound.* Every scale bounds the true curvature on its own terms: smoothing spreads a change
of curvature over that scale's spread width (just past an arc entered without a clothoid it
reads about half the arc's curvature), and noise moves it by a few standard deviations, so the
largest ``|kappa| + GAMMA * sd`` of that scale within its spread width of a station covers the
truth there. The ``curvature_bound`` is the tightest of these bounds over the scales up to the one chosen
there (coarser ones are not trusted: they may flatten a whole curve shorter than their window):
near a sharp change a fine scale's (narrow window), on a long arc or straight a coarse scale's
(small uncertainty). A coarse scale never lends its wide window to a station near a curve, and
a fine scale's noise never inflates the bound where a coarser one knows better. Where the
design alignment behind the estimate (:mod:`.alignment`) is trusted its bound holds, and near
a step of curvature the candidate roads of :mod:`.steps` that the points cannot tell apart.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..order_stats import distinct, median
from .alignment import reconstruct
from .pspline import SplineFit, null_space_fit, null_space_spline
from .scales import CHUNK, REPLICATES, cross, noise_chunk, scale_families
from .smoothing_bias import layout, lowered
from .steps import FineScale, confirm_steps, transition_zone

try:
    from . import _scale_ramp
except ImportError:         # no C compiler at install: the Python loop of _ramp
    _scale_ramp = None

#: Scales tried above the path fit's own, each smoothing over twice the length of the last.
LEVELS = 8
#: Where the chosen scale changes, it changes gradually: by one level over this many spread
#: widths of the finest scale, always towards the finer side, so the curvature estimate stays
#: continuous (a jump would read as lateral jerk) and no coarse scale reaches a change.
RAMP_WIDTHS = 2.0
#: Half-width of the confidence intervals the choice of scale compares, in standard deviations.
#: Smaller keeps more detail, and more noise: with nine scales compared at every station, an
#: interval of 3 (the usual range for this rule is 2 to 3) still rejected coarse scales by
#: chance often enough to leave curvature of 1.6e-3 1/m in the middle of a straight logged by
#: RTK at 100 Hz (simulated, tests/test_reference_recorded_drives.py); at 4 it did not, and the
#: bound still covered every curvature step tried (see :data:`.scales.SPREAD_LENGTHS`).
GAMMA = 4.0
#: The scale the design alignment is read from: one doubling finer than the path fit, so a
#: break of curvature is spread over half the length (its extra noise is averaged out again by
#: the straight lines fitted over whole elements).
ALIGNMENT_LEVEL = -1


@dataclass(frozen=True)
class CurvatureEstimate:
    """Curvature at the nodes with its uncertainty and the bound planning uses (1/m).

    ``width_m`` is the half-width over which the chosen smoothing spreads a change of
    curvature, ``level`` the scale chosen (0: the path fit's own; fractions blend two scales).
    ``spread_m`` is how far from each node the estimate ``kappa`` may have moved a change of
    the curvature's rate (a joint of clothoid and arc or straight): ``width_m`` where the
    adaptive estimate stands, 0 where the estimate is the reconstructed alignment's lines,
    which keep their joints (within the reach of each kink the points place less well than a
    station step, that reach). ``rate_margin`` (1/m^2) is how far a line's rate may be off: its
    curvature at each end of its element lies within ``GAMMA`` standard deviations, so its rate
    within twice that over the element's length, and a kink its line hides adds four times its
    departure over that length (0 off the lines; :func:`_line_rate_margin`). The lateral jerk
    follows the rate (:mod:`curvespeed.lateral_rates`).
    """

    kappa: np.ndarray
    sd: np.ndarray
    bound: np.ndarray
    width_m: np.ndarray
    level: np.ndarray
    spread_m: np.ndarray | None = None
    rate_margin: np.ndarray | None = None


def estimate_curvature(fit: SplineFit, u_points: np.ndarray, values: np.ndarray,
                       weight: np.ndarray, u_nodes: np.ndarray, station: np.ndarray,
                       time: np.ndarray | None = None, drift_rate: float | None = None,
                       seed: int = 0) -> CurvatureEstimate:
    """Locally adaptive curvature at the nodes (parameters ``u_nodes``, stations ``station``).

    ``fit`` is the path fit, ``u_points``, ``values`` and ``weight`` (1/sigma per point) what it
    was fitted to. The noise replicates are white with that sigma, plus, when ``drift_rate`` is
    given, a random walk in ``time`` (the points' times, in driving order) whose variance grows
    by ``drift_rate`` per unit time: the slowly drifting error of satellite positions, which
    bends the path most where the vehicle is slow. They use a fixed ``seed``, so the result is
    deterministic.
    """
    def noise(chunk: int) -> np.ndarray:
        return noise_chunk(seed, chunk, weight, time, drift_rate)

    if fit.system is None:      # the points are within noise of a cubic (a circle on a loop)
        chunks = [noise(c) for c in range(REPLICATES // CHUNK)]
        across, along = [c[:, :CHUNK] for c in chunks], [c[:, CHUNK:] for c in chunks]
        return _null_space_estimate(fit, u_points, weight, u_nodes, np.hstack(across + along))
    scales, rebuilt = _scales_and_alignment(fit, u_points, values, weight, u_nodes, station,
                                            noise)
    kappa = np.array([sc.kappa for sc in scales])
    sd = np.array([sc.sd for sc in scales])
    width = np.array([sc.width for sc in scales])
    chosen = _choose_scales(kappa, sd, width, station)
    level = _ramp(chosen, station, RAMP_WIDTHS * median(width[0]))
    idx = np.arange(station.size)
    low = np.floor(level).astype(np.intp)
    high = np.minimum(low + 1, kappa.shape[0] - 1)
    f = level - low
    k = (1 - f) * kappa[low, idx] + f * kappa[high, idx]
    s = (1 - f) * sd[low, idx] + f * sd[high, idx]
    w = (1 - f) * width[low, idx] + f * width[high, idx]
    bound = _scales_bound(scales, kappa, sd, width, high, k, s, station)
    if rebuilt is None:
        return CurvatureEstimate(k, s, bound, w, level, w, None)
    k, s, bound, spread, margin = _with_alignment(rebuilt, k, s, w, bound, station)
    return CurvatureEstimate(k, s, bound, w, level, spread, margin)


def _scales_and_alignment(fit, u_points, values, weight, u_nodes, station, noise):
    """Every scale's estimate (levels 0 to LEVELS, each with how much it rounds off peaks) and
    the reconstructed alignment with its steps (None on a loop, on too few stations, or where
    no alignment is found).

    Noise replicates a few at a time (a log of 10^6 fixes would need 0.5 GB for all at once),
    and one knot grid's normal equations at a time (each holds the basis of every point). The
    design alignment is read from the finest scale first (not yet on a loop: its elements would
    need the seam closed); the reconstructed road, laid out at the points, then measures how
    much each scale rounds off its peaks.
    """
    rebuild = not fit.periodic and station.size >= 3
    levels = ([ALIGNMENT_LEVEL] if rebuild else []) + list(range(LEVELS + 1))
    rebuilt = road = None
    scales = []
    for family in scale_families(fit, u_points, values, weight, u_nodes, levels, noise,
                                 keep_level=ALIGNMENT_LEVEL):
        for scale in family.scales:
            if scale.level == ALIGNMENT_LEVEL:
                rebuilt = _reconstruction(scale, u_points, values, weight, u_nodes, station)
                road = None if rebuilt is None else layout(
                    station, rebuilt[0].kappa, np.interp(u_points, u_nodes, station))
        if road is not None:
            for scale, smoothed in family.smoothed(road, u_nodes, skip=(ALIGNMENT_LEVEL,)):
                scale.lowered = lowered(rebuilt[0].kappa, smoothed, scale.kappa,
                                        GAMMA * rebuilt[0].sd)
                # where the road smoothed alike misses what the scale reads from the points by
                # more than both their noise, the road is not the one the points show, and how
                # much the scale rounds off cannot be read from it
                scale.misread = np.abs(smoothed - scale.kappa) > GAMMA * (
                    scale.sd + rebuilt[0].sd)
        for scale in family.scales:
            scale.system = None
        scales += [scale for scale in family.scales if scale.level != ALIGNMENT_LEVEL]
    return scales, rebuilt


def _scales_bound(scales, kappa, sd, width, high, k, s, station) -> np.ndarray:
    """The adaptive estimate's bound: every scale up to the one used (``high`` per station)
    bounds the curvature on its own -- its estimate plus GAMMA standard deviations plus how much
    it rounds off a peak, widened by how far it spreads a change; the tightest holds -- and
    never below the estimate used (``k``, ``s``) plus its uncertainty, widened by the finest
    spread. A coarser scale does not count within its spread of where the reconstructed road,
    smoothed alike, misses what it reads (``misread``): there how much it rounds off is unknown.
    (A consumer receiver's simulated log at 10 Hz of the winding road was reconstructed as one
    line at 0.003 1/m through a 90 m-radius bend; a scale of 146 m of spread read the arc 14 %
    low and, with nothing rounded off that line, bounded it 6 % short: the plan used 1.067 of
    the lateral limit on the exact road.)"""
    bound = np.full(station.size, np.inf)
    for j in range(kappa.shape[0]):
        valid = j <= high
        if j > 0 and scales[j].misread is not None:       # (the finest scale always counts)
            valid &= ~_reach_mask(scales[j].misread, station, width[j])
        if valid.any():
            own = _running_max(np.abs(kappa[j]) + GAMMA * sd[j] + scales[j].lowered, station,
                               width[j])
            bound[valid] = np.minimum(bound[valid], own[valid])
    return np.maximum(bound, _running_max(np.abs(k) + GAMMA * s, station, width[0]))


def _with_alignment(rebuilt, k, s, w, bound, station):
    """The adaptive estimate (``k``, ``s``, spread ``w``, ``bound``) joined with the
    reconstructed alignment where its lines are trusted and with the candidate steps where
    they explain one: ``(kappa, sd, bound, spread, rate margin)``."""
    rebuilt, steps = rebuilt
    use = _trusted(rebuilt, k, s, w, station)
    # A trusted element's line may still run past a break the partition placed late (its
    # end lies within the adaptive estimate's spread, where the two are not compared), and
    # a line's standard deviation cannot see that the element is not one (a clothoid, an
    # arc and a clothoid read as one line at 5 cm of noise): the adaptive estimate at the
    # station, with its own uncertainty, is a floor. Where the two part by more than their
    # noise (away from the steps explained, whose smear parts them anyway) either may be
    # wrong, by as much as they part: the larger plus that difference. (Simulated: 1 cm of
    # noise on the wet road left the line's bound 16 % short 13 m into a clothoid, where
    # the adaptive estimate lagged by 8 %; 5 cm 1.3 % short on an arc;
    # tests/test_reference_steps.py.)
    gap = np.abs(rebuilt.kappa - k)
    parted = ((gap > GAMMA * (rebuilt.sd + s)) & ~transition_zone(steps, station, w)
              & ~_ringing(rebuilt, k, station, w))
    own = np.abs(k) + GAMMA * s
    own = np.where(parted, np.maximum(own, np.abs(rebuilt.kappa)) + gap, own)
    bound = np.where(use, np.where(rebuilt.near_step, np.maximum(rebuilt.bound, bound),
                                   np.maximum(rebuilt.bound, own)), bound)
    # where candidate roads the points cannot tell apart explain a step, their largest
    # curvature bounds it (:mod:`.steps`)
    bound = np.where(steps.explained, steps.bound, bound)
    # where a step may lie the reconstruction cannot say how the curvature gets there (a
    # jump, or a clothoid too short to resolve): the adaptive estimate stays
    use &= ~rebuilt.near_step
    k, s = np.where(use, rebuilt.kappa, k), np.where(use, rebuilt.sd, s)
    # and the candidate that fits them best is the estimate there (within the bound)
    k = np.where(steps.explained, steps.kappa, k)
    k = _join_seams(k, np.where(steps.explained, 2, use.astype(int)), station, w, bound)
    # the lines keep their joints where they are trusted, to where the points place them (a
    # kink's reach); a candidate step stands where the points cannot place it to better than
    # the smoothing's spread
    on_line = use & ~steps.explained
    spread = np.where(on_line, _kink_reach(rebuilt, station), w)
    margin = np.where(on_line, _line_rate_margin(rebuilt, station), 0.0)
    return k, s, bound, spread, margin


def _join_seams(kappa, source, station, width, bound) -> np.ndarray:
    """``kappa`` pieced from several estimates (``source`` per station: 0 the adaptive one,
    else lines or candidates) made continuous where the adaptive estimate meets another.

    At such a seam the two estimates of the same curvature differ by as much as they may (the
    bound covers both), but a jump between them reads as a rate the road does not have: an RTK
    log's clothoid line run 3 m past its joint into an arc jumped by 4.3e-4 1/m over one step,
    a rate of -4.6e-4 1/m^2 against the road's 0 and 1.4e-4, which the lateral jerk bound then
    spread over the arc (tests/test_lateral_rate_spread.py). The adaptive side, whose spread
    already admits a change that far, takes the jump instead, tapering it linearly to nothing
    over its spread width ``width`` from the seam, and never beyond ``bound`` (the line's value
    may lie outside the bound the adaptive side's station has: a line run past its joint).
    """
    seams = np.flatnonzero((source[:-1] != source[1:]) & ((source[:-1] == 0) | (source[1:] == 0)))
    if seams.size == 0:
        return kappa
    out = kappa.copy()
    # each adaptive station's run of adaptive stations, [first, end): a taper stays in its run
    change = np.flatnonzero(np.diff((source == 0).astype(np.int8))) + 1
    first = np.concatenate(([0], change))
    end = np.concatenate((change, [station.size]))
    run = np.searchsorted(first, np.arange(station.size), side="right") - 1
    ds = float(station[1] - station[0])
    for i in seams.tolist():
        a, other = (i + 1, i) if source[i] else (i, i + 1)   # the adaptive side's node, the other's
        reach = max(float(width[a]), ds)
        if a > other:
            at = slice(a, min(int(end[run[a]]), int(np.searchsorted(
                station, station[a] + reach, side="right"))))
            d = station[at] - station[a]
        else:
            at = slice(max(int(first[run[a]]), int(np.searchsorted(
                station, station[a] - reach, side="left"))), a + 1)
            d = station[a] - station[at]
        out[at] += (kappa[other] - kappa[a]) * np.clip(1.0 - d / reach, 0.0, 1.0)
    return np.where(source == 0, np.clip(out, -bound, bound), out)


def _kink_reach(rebuilt, station) -> np.ndarray:
    """At every station, how far the nearest kink of the reconstruction within its own reach
    may be off (metres; 0 away from kinks): a change of rate the lines place there may lie that
    far either way. An RTK log at 20 Hz put a clothoid's end on an arc 1.75 m early, the
    crossing known to 4.5 m; read as exact, the lateral jerk bound let the plan accelerate
    before the real joint (1.08 of the bound on the road).

    A kink placed to within a station step keeps its place, as before: the chord rate of the
    step it lies in already mixes the two sides, while spreading the rates two steps either way
    (the rate range's reach, :func:`curvespeed.lateral_rates.spread_rate_range`) cost 0.2 % of
    time on exact points, whose kinks the lines place to 0.2-0.4 m."""
    out = np.zeros(station.size)
    ds = float(station[1] - station[0])
    for b, r in zip(rebuilt.breaks_m[~rebuilt.step], rebuilt.reach_m[~rebuilt.step]):
        if r <= ds:
            continue
        near = np.abs(station - b) <= r
        out[near] = np.maximum(out[near], r)
    return out


def _line_rate_margin(rebuilt, station) -> np.ndarray:
    """At every station, how far the rate of its element's line may be off (1/m^2; see
    :class:`CurvatureEstimate`): ``2 GAMMA`` times the largest standard deviation of the line's
    curvature, plus 4 times the height ``d`` of the departure from the line beyond noise that
    the fine scale reads on the element (``Reconstruction.hidden_level``), over the element's
    length ``L``.

    A kink the line hides in the middle of its element, rates ``s1`` and ``s2`` either side,
    departs from the line by ``d = |s1 - s2| L / 8`` at the most and is fitted at the mean rate,
    off by ``4 d / L`` from each side's. Off the middle (computed for a line fitted across one
    kink at any place) ``4 d / L`` still covers the longer side's rate; the shorter side's rate
    may be off by more, over a stretch shorter than half the element, where the departure
    itself is larger than ``d`` (up to 7 times at a tenth of the element): not covered. An RTK
    log at 2 Hz read a R 100 m arc and the 50 m clothoid after it as one line of rate 1.53e-4
    1/m^2 against the clothoid's 2.0e-4 (84 m), and the lateral jerk bound let the plan through
    the clothoid 4.6 % over it on the road.
    """
    edges = np.concatenate(([station[0]], rebuilt.breaks_m, [station[-1]]))
    element = np.clip(np.searchsorted(edges, station, side="right") - 1, 0, edges.size - 2)
    largest = np.zeros(edges.size - 1)
    np.maximum.at(largest, element, rebuilt.sd)
    level = np.zeros(edges.size - 1)
    if rebuilt.hidden_level is not None:
        np.maximum.at(level, element, rebuilt.hidden_level)
    length = np.maximum(np.diff(edges), station[1] - station[0])
    return (2.0 * GAMMA * largest[element] + 4.0 * level[element]) / length[element]


def _reconstruction(fine, u_points, values, weight, u_nodes, station):
    """The piecewise-linear curvature of the design alignment (:mod:`.alignment`) read from the
    scale ``fine`` (its replicates kept), with the steps its points confirm; or None."""
    deltas = np.hstack(fine.deltas)
    spread = median(fine.width)
    rebuilt = reconstruct(station, fine.kappa, deltas, spread, GAMMA)
    if rebuilt is None:
        return None
    scale = FineScale(fine.system, fine.rho, fine.d1, fine.d2, fine.kappa,
                      np.sqrt(np.mean(deltas**2, axis=1)), spread)
    return rebuilt, confirm_steps(rebuilt, scale, u_points, values, weight, u_nodes, station,
                                  GAMMA)


def _ringing(rebuilt, kappa, station, width) -> np.ndarray:
    """Stations within ``width`` (the adaptive estimate's spread) of a break of the
    reconstruction where the adaptive estimate ``kappa`` lies beyond the element's line on the
    side away from the next element's curvature: a smoother overshoots so before a change of
    slope (it rings), while a line run past a break placed late has the road, and the estimate,
    already on their way toward the next element's values."""
    breaks = np.asarray(rebuilt.breaks_m, dtype=float)
    if breaks.size == 0:
        return np.zeros(station.size, dtype=bool)
    at = np.clip(np.searchsorted(breaks, station), 1, breaks.size)
    nearest = np.where(np.abs(station - breaks[at - 1])
                       <= np.abs(station - breaks[np.minimum(at, breaks.size - 1)]),
                       breaks[at - 1], breaks[np.minimum(at, breaks.size - 1)])
    across = np.interp(2.0 * nearest - station, station, rebuilt.kappa)     # mirrored
    away = np.sign(kappa - rebuilt.kappa) * np.sign(across - rebuilt.kappa) < 0
    return away & (np.abs(station - nearest) <= width)


def _trusted(rebuilt, kappa, sd, width, station) -> np.ndarray:
    """Stations whose element of the reconstruction agrees with the adaptive estimate.

    An element is trusted when, at every station of it farther from its ends than twice the
    adaptive estimate's own spread (which blurs the breaks and rings beyond them), the two agree within GAMMA times their
    combined standard deviations, and at least a quarter of it (and 5 stations) lies that far
    from its ends; or, for an element too short for that, when the fine estimate follows its
    line within its own, small, uncertainty (``Reconstruction.follows``). A road that is not made
    of such elements (a driven line, a curve the fine scale cannot resolve) keeps the adaptive
    estimate."""
    edges = np.concatenate(([station[0] - 1.0], rebuilt.breaks_m, [station[-1] + 1.0]))
    element = np.searchsorted(edges, station, side="right") - 1
    start, end = edges[element], edges[element + 1]
    inside = (station - start > 2 * width) & (end - station > 2 * width)   # its ringing too
    disagree = inside & (np.abs(rebuilt.kappa - kappa) > GAMMA * (rebuilt.sd + sd))
    n_elements = edges.size - 1
    checked = np.bincount(element[inside], minlength=n_elements)
    total = np.bincount(element, minlength=n_elements)
    # an element too short to be compared away from its ends is not trusted either
    trusted = (checked >= np.maximum(5, 0.25 * total)) & (np.bincount(
        element[disagree], minlength=n_elements) == 0)
    # too short to compare, but the fine estimate follows its line closely and precisely
    return trusted[element] | (rebuilt.follows & ~np.isin(element, distinct(element[disagree])))


def _null_space_estimate(fit, u_points, weight, u_nodes, noise) -> CurvatureEstimate:
    """Curvature of a null-space fit and its spread over the noise replicates' own such fits."""
    d1, d2 = fit.spline(u_nodes, nu=1), fit.spline(u_nodes, nu=2)
    kappa = cross(d1, d2) / np.hypot(d1[:, 0], d1[:, 1]) ** 3
    null_ss, null_fit = null_space_fit(u_points, noise, weight, fit.span, fit.periodic)
    pert = null_space_spline(null_fit, null_ss, null_ss, fit.span, fit.periodic,
                             fit.n_intervals).spline
    e1 = pert(u_nodes, nu=1).reshape(u_nodes.size, 2, -1)
    e2 = pert(u_nodes, nu=2).reshape(u_nodes.size, 2, -1)
    p1, p2 = d1[:, :, None] + e1, d2[:, :, None] + e2
    varied = cross(p1, p2) / np.hypot(p1[:, 0], p1[:, 1]) ** 3
    sd = np.sqrt(np.mean((varied - kappa[:, None]) ** 2, axis=1))
    zero = np.zeros(u_nodes.size)
    return CurvatureEstimate(kappa, sd, np.abs(kappa) + GAMMA * sd, zero,
                             zero.astype(np.intp))


def _choose_scales(kappa, sd, width, station) -> np.ndarray:
    """Intersection of confidence intervals, then no coarse choice within reach of a finer."""
    n_levels, n = kappa.shape
    lo = kappa[0] - GAMMA * sd[0]
    hi = kappa[0] + GAMMA * sd[0]
    alive = np.ones(n, dtype=bool)
    chosen = np.zeros(n, dtype=np.intp)
    for level in range(1, n_levels):
        lo = np.maximum(lo, kappa[level] - GAMMA * sd[level])
        hi = np.minimum(hi, kappa[level] + GAMMA * sd[level])
        alive &= lo <= hi
        chosen[alive] = level
    # a station within the spread width of a finer choice takes that finer choice
    final = np.full(n, n_levels - 1, dtype=np.intp)
    for level in range(n_levels):
        at = chosen <= level
        if not at.any():
            continue
        reach = _reach_mask(at, station, width[level])
        final[reach & (final > level)] = level
    return final


def _ramp(level: np.ndarray, station: np.ndarray, ramp_m: float,
          compiled: bool = True) -> np.ndarray:
    """The largest function below ``level`` that changes by at most one per ``ramp_m`` metres
    (a lower envelope of cones, by a forward and a backward pass): by the compiled twin
    (``_scale_ramp.c``, where it was built, unless ``compiled`` is False) or by the Python
    loop, its reference."""
    steps = np.diff(station) / max(ramp_m, 1e-9)
    if compiled and _scale_ramp is not None:
        out = np.array(level, dtype=float)
        _scale_ramp.ramp(out, np.ascontiguousarray(steps, dtype=float), out.size)
        return out
    # on Python floats: the same arithmetic as on numpy's scalars, four times faster
    out = level.astype(float).tolist()
    step = steps.tolist()
    for i in range(1, len(out)):
        out[i] = min(out[i], out[i - 1] + step[i - 1])
    for i in range(len(out) - 2, -1, -1):
        out[i] = min(out[i], out[i + 1] + step[i])
    return np.array(out)


def _reach_mask(mask, station, width) -> np.ndarray:
    """Stations within ``width`` (per station of the mask) of a station where ``mask`` holds."""
    idx = np.flatnonzero(mask)
    lo = np.searchsorted(station, station[idx] - width[idx], side="left")
    hi = np.searchsorted(station, station[idx] + width[idx], side="right")
    cover = np.zeros(station.size + 1, dtype=np.int64)
    np.add.at(cover, lo, 1)
    np.add.at(cover, hi, -1)
    return np.cumsum(cover[:-1]) > 0


def _running_max(values, station, width) -> np.ndarray:
    """``max(values[j])`` over stations within ``width[k]`` of station ``k`` (sparse table)."""
    n = values.size
    lo = np.searchsorted(station, station - width, side="left")
    hi = np.searchsorted(station, station + width, side="right") - 1
    table = [values]
    span = 1
    while 2 * span <= n:
        prev = table[-1]
        table.append(np.maximum(prev[:-span], prev[span:]))
        span *= 2
    length = hi - lo + 1
    j = np.floor(np.log2(length)).astype(np.intp)
    out = np.empty(n)
    for level in distinct(j):
        sel = j == level
        t = table[level]
        out[sel] = np.maximum(t[lo[sel]], t[hi[sel] - 2**level + 1])
    return out
