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

import math
from dataclasses import dataclass

import numpy as np
from scipy.interpolate import BSpline

from .alignment import reconstruct
from .pspline import (
    SPLINE_DEGREE,
    SplineFit,
    derivative_basis,
    null_space_fit,
    null_space_spline,
    penalised_system,
)
from .smoothing_bias import layout, lowered
from .steps import FineScale, confirm_steps, transition_zone

#: Scales tried above the path fit's own, each smoothing over twice the length of the last.
LEVELS = 8
#: Noise replicates for the standard deviation of curvature (its relative error is about
#: 1 / sqrt(2 * REPLICATES) = 13 %).
REPLICATES = 32
#: Half-width of the confidence intervals the choice of scale compares, in standard deviations.
#: Smaller keeps more detail, and more noise: with nine scales compared at every station, an
#: interval of 3 (the usual range for this rule is 2 to 3) still rejected coarse scales by
#: chance often enough to leave curvature of 1.6e-3 1/m in the middle of a straight logged by
#: RTK at 100 Hz (simulated, tests/test_reference_recorded_drives.py); at 4 it did not, and the
#: bound still covered every curvature step tried (see SPREAD_LENGTHS).
GAMMA = 4.0
#: Half-width, in smoothing lengths ``(lam h^7 / w)^(1/8)``, of the neighbourhood whose largest
#: curvature the bound takes: how far the finest scale spreads a step of curvature, ringing
#: included. Calibrated on steps from a straight into arcs of R 25 and 100 m and on a winding
#: road with two such steps, points every 1 m with noise of 0, 1, 5 and 20 cm: at 3 the bound
#: fell 3 % short of the true curvature next to a step, at 3.5 it just covered it, at 4 (used)
#: it covers it with 0.1 % to spare (tests/test_reference_curvature.py checks coverage).
SPREAD_LENGTHS = 4.0
#: Where the chosen scale changes, it changes gradually: by one level over this many spread
#: widths of the finest scale, always towards the finer side, so the curvature estimate stays
#: continuous (a jump would read as lateral jerk) and no coarse scale reaches a change.
RAMP_WIDTHS = 2.0
#: Largest rho = log10(lam / lam0) solved on one knot grid; coarser scales use coarser grids
#: (the banded solve keeps its accuracy below about 12).
_MAX_RHO = 10.0
#: rho change that doubles the smoothing length (length ~ h * 10**(rho / 8)).
_DOUBLING_RHO = 8.0 * math.log10(2.0)


@dataclass(frozen=True)
class CurvatureEstimate:
    """Curvature at the nodes with its uncertainty and the bound planning uses (1/m).

    ``width_m`` is the half-width over which the chosen smoothing spreads a change of
    curvature, ``level`` the scale chosen (0: the path fit's own; fractions blend two scales).
    """

    kappa: np.ndarray
    sd: np.ndarray
    bound: np.ndarray
    width_m: np.ndarray
    level: np.ndarray


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
    if fit.system is None:      # the points are within noise of a cubic (a circle on a loop)
        chunks = [_noise_chunk(seed, c, weight, time, drift_rate)
                  for c in range(REPLICATES // _CHUNK)]
        across, along = [c[:, :_CHUNK] for c in chunks], [c[:, _CHUNK:] for c in chunks]
        return _null_space_estimate(fit, u_points, weight, u_nodes, np.hstack(across + along))
    rebuilt = _reconstruction(fit, u_points, values, weight, u_nodes, station, time,
                              drift_rate, seed)
    # the reconstructed road laid out at the points, to measure each scale's rounding of peaks
    road = None if rebuilt is None else layout(
        station, rebuilt[0].kappa, np.interp(u_points, u_nodes, station))
    scales = []
    for level in range(LEVELS + 1):
        scale = _Scale.build(fit, u_points, values, weight, u_nodes, level)
        if scale is None:
            break
        # Noise replicates a few at a time (a log of 10^6 fixes would need 0.5 GB for all at
        # once), and one scale's normal equations at a time (each holds the basis of every
        # point); the replicates are drawn again for each scale from the same seeds.
        for c in range(REPLICATES // _CHUNK):
            scale.add_replicates(_noise_chunk(seed, c, weight, time, drift_rate), u_nodes)
        if road is not None:
            scale.lowered = lowered(rebuilt[0].kappa, scale.smoothed(road, u_nodes),
                                    scale.kappa)
        scale.system = None
        scales.append(scale)
    kappa = np.array([sc.kappa for sc in scales])
    sd = np.array([np.sqrt(sc.sum_sq / REPLICATES) for sc in scales])
    width = np.array([sc.width for sc in scales])
    chosen = _choose_scales(kappa, sd, width, station)
    level = _ramp(chosen, station, RAMP_WIDTHS * float(np.median(width[0])))
    idx = np.arange(station.size)
    low = np.floor(level).astype(np.intp)
    high = np.minimum(low + 1, kappa.shape[0] - 1)
    f = level - low
    k = (1 - f) * kappa[low, idx] + f * kappa[high, idx]
    s = (1 - f) * sd[low, idx] + f * sd[high, idx]
    w = (1 - f) * width[low, idx] + f * width[high, idx]
    # every scale up to the one used bounds the curvature on its own: its estimate plus GAMMA
    # standard deviations plus how much it rounds off a peak, widened by how far it spreads a
    # change; the tightest holds
    bound = np.full(station.size, np.inf)
    for j in range(kappa.shape[0]):
        valid = j <= high
        if valid.any():
            own = _running_max(np.abs(kappa[j]) + GAMMA * sd[j] + scales[j].lowered, station,
                               width[j])
            bound[valid] = np.minimum(bound[valid], own[valid])
    # and never below the estimate used plus its uncertainty, widened by the finest spread
    bound = np.maximum(bound, _running_max(np.abs(k) + GAMMA * s, station, width[0]))
    if rebuilt is not None:
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
    return CurvatureEstimate(k, s, bound, w, level)


#: The scale the design alignment is read from: one doubling finer than the path fit, so a
#: break of curvature is spread over half the length (its extra noise is averaged out again by
#: the straight lines fitted over whole elements).
ALIGNMENT_LEVEL = -1


def _reconstruction(fit, u_points, values, weight, u_nodes, station, time, drift_rate, seed):
    """The piecewise-linear curvature of the design alignment (:mod:`.alignment`), or None."""
    if fit.periodic:        # not yet: a loop's elements would need the seam closed
        return None
    fine = _Scale.build(fit, u_points, values, weight, u_nodes, ALIGNMENT_LEVEL)
    if fine is None or station.size < 3:
        return None
    fine.deltas = []
    for c in range(REPLICATES // _CHUNK):
        fine.add_replicates(_noise_chunk(seed, c, weight, time, drift_rate), u_nodes)
    deltas = np.hstack(fine.deltas)
    spread = float(np.median(fine.width))
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
    return trusted[element] | (rebuilt.follows & ~np.isin(element, np.unique(element[disagree])))


#: Replicates generated and smoothed at a time.
_CHUNK = 8
#: Stations whose replicate curvatures are evaluated at a time.
_NODE_BLOCK = 100_000


def _noise_chunk(seed: int, chunk: int, weight, time, drift_rate) -> np.ndarray:
    """``_CHUNK`` noise replicates (columns ``0.._CHUNK-1`` across, the rest along x/y: shape
    (m, 2 * _CHUNK)): white with sigma ``1 / weight``, plus a random walk in ``time`` whose
    variance grows by ``drift_rate`` per unit time. Each chunk has its own seed, so the result
    does not depend on how many are made at once."""
    rng = np.random.default_rng([seed, chunk])
    noise = rng.standard_normal((weight.size, 2 * _CHUNK))
    noise /= weight[:, None]            # in place: a log of 10^6 fixes makes 128 MB a chunk
    if drift_rate and time is not None:
        step = np.sqrt(drift_rate * np.maximum(np.diff(time), 0.0))
        walk = rng.standard_normal((weight.size - 1, 2 * _CHUNK))
        walk *= step[:, None]
        noise[1:] += np.cumsum(walk, axis=0, out=walk)
    return noise


class _Scale:
    """One smoothing scale: its curvature at the nodes, spread width, and the running sum of
    squared curvature changes over the noise replicates."""

    def __init__(self, system, rho, n_int, periodic, kappa, d1, d2, width):
        self.system, self.rho, self.n_int, self.periodic = system, rho, n_int, periodic
        self.kappa, self.d1, self.d2, self.width = kappa, d1, d2, width
        self.sum_sq = np.zeros_like(kappa)
        self.lowered = np.zeros_like(kappa)     # how much it rounds off peaks (smoothing_bias)
        self.deltas: list[np.ndarray] | None = None    # the replicates' changes, when kept

    @classmethod
    def build(cls, fit, u_points, values, weight, u_nodes, level) -> "_Scale | None":
        """The scale ``level`` doublings coarser than the path fit (None: too coarse)."""
        rho = fit.log_lambda + level * _DOUBLING_RHO
        coarsen = max(0, math.ceil((rho - _MAX_RHO) / _DOUBLING_RHO))
        n_int = fit.n_intervals // 2**coarsen
        rho -= coarsen * _DOUBLING_RHO
        floor = 2 * (SPLINE_DEGREE + 1) if fit.periodic else SPLINE_DEGREE + 1
        if n_int < floor:
            return None
        system = penalised_system(u_points, values, weight, fit.span, fit.periodic, n_int)
        coef = system.coefficients(rho)
        if fit.periodic:
            coef = coef[np.arange(n_int + SPLINE_DEGREE) % n_int]
        base = BSpline(system.knots, coef, SPLINE_DEGREE, extrapolate=False)
        d1, d2 = base(u_nodes, nu=1), base(u_nodes, nu=2)
        kappa = _cross(d1, d2) / np.hypot(d1[:, 0], d1[:, 1]) ** 3
        width = SPREAD_LENGTHS * _smoothing_length(system, rho, u_nodes, fit.span)
        return cls(system, rho, n_int, fit.periodic, kappa, d1, d2, width)

    def _bases(self, u_nodes: np.ndarray, at: slice):
        """The first and second derivatives of this scale's B-splines at ``u_nodes[at]``, as
        sparse matrices (kept for the next chunk of replicates when one block holds every
        node): three times faster than evaluating a spline of the replicates' coefficients."""
        cached = getattr(self, "_basis_cache", None)
        if cached is not None and cached[0] == at:
            return cached[1]
        u = u_nodes[at]
        bases = (derivative_basis(self.system.knots, SPLINE_DEGREE, u, 1),
                 derivative_basis(self.system.knots, SPLINE_DEGREE, u, 2))
        self._basis_cache = (at, bases)
        return bases

    def smoothed(self, values: np.ndarray, u_nodes: np.ndarray) -> np.ndarray:
        """Curvature at the nodes of other positions ``values`` (m, 2) at the same points,
        smoothed by this scale (open systems)."""
        coef = self.system.response(self.rho, values)
        spline = BSpline(self.system.knots, coef, SPLINE_DEGREE, extrapolate=False)
        d1 = spline(u_nodes, nu=1)
        return _cross(d1, spline(u_nodes, nu=2)) / np.hypot(d1[:, 0], d1[:, 1]) ** 3

    def add_replicates(self, noise: np.ndarray, u_nodes: np.ndarray) -> None:
        """Smooth noise replicates with this scale's normal equations (the fit is linear in
        the data) and add their squared curvature changes."""
        delta = self.system.response(self.rho, noise)
        if self.periodic:
            delta = delta[np.arange(self.n_int + SPLINE_DEGREE) % self.n_int]
        change = np.empty((u_nodes.size, delta.shape[1] // 2))
        for lo in range(0, u_nodes.size, _NODE_BLOCK):     # bounded memory on long routes
            at = slice(lo, lo + _NODE_BLOCK)
            first, second = self._bases(u_nodes, at)
            e1 = (first @ delta).reshape(-1, 2, change.shape[1])
            e2 = (second @ delta).reshape(-1, 2, change.shape[1])
            p1, p2 = self.d1[at, :, None] + e1, self.d2[at, :, None] + e2
            varied = _cross(p1, p2) / np.hypot(p1[:, 0], p1[:, 1]) ** 3
            change[at] = varied - self.kappa[at, None]
        self.sum_sq += np.sum(change**2, axis=1)
        if self.deltas is not None:
            self.deltas.append(change)


def _null_space_estimate(fit, u_points, weight, u_nodes, noise) -> CurvatureEstimate:
    """Curvature of a null-space fit and its spread over the noise replicates' own such fits."""
    d1, d2 = fit.spline(u_nodes, nu=1), fit.spline(u_nodes, nu=2)
    kappa = _cross(d1, d2) / np.hypot(d1[:, 0], d1[:, 1]) ** 3
    null_ss, null_fit = null_space_fit(u_points, noise, weight, fit.span, fit.periodic)
    pert = null_space_spline(null_fit, null_ss, null_ss, fit.span, fit.periodic,
                             fit.n_intervals).spline
    e1 = pert(u_nodes, nu=1).reshape(u_nodes.size, 2, -1)
    e2 = pert(u_nodes, nu=2).reshape(u_nodes.size, 2, -1)
    p1, p2 = d1[:, :, None] + e1, d2[:, :, None] + e2
    varied = _cross(p1, p2) / np.hypot(p1[:, 0], p1[:, 1]) ** 3
    sd = np.sqrt(np.mean((varied - kappa[:, None]) ** 2, axis=1))
    zero = np.zeros(u_nodes.size)
    return CurvatureEstimate(kappa, sd, np.abs(kappa) + GAMMA * sd, zero,
                             zero.astype(np.intp))


def _cross(a, b):
    return a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]


def _smoothing_length(system, rho, u_nodes, span) -> np.ndarray:
    """Local smoothing length ``(lam h^7 / w)^(1/8)`` (metres) at the nodes, ``w`` the data
    weight per metre there (from the diagonal of ``B^T W B``)."""
    n_int = system.n_coefficients if system.periodic else system.n_coefficients - SPLINE_DEGREE
    h = span / n_int
    density = system.weight_density() / h             # weight per metre, per coefficient
    # spread each coefficient's share over its neighbours: a smoothing window of 9 knots
    window = np.ones(9) / 9
    density = np.convolve(np.pad(density, 4, mode="edge"), window, mode="valid")
    centre = (np.arange(density.size) - (SPLINE_DEGREE - 1) / 2) * h    # Greville abscissae
    local = np.interp(u_nodes, centre, density, period=span if system.periodic else None)
    # where there are no points (a bridged gap) the smoothing reaches across the gap
    local = np.maximum(local, 1e-9 * float(np.max(density)))
    lam = system.lam0 * 10.0**rho
    return np.minimum((lam * h**7 / local) ** 0.125, span)


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


def _ramp(level: np.ndarray, station: np.ndarray, ramp_m: float) -> np.ndarray:
    """The largest function below ``level`` that changes by at most one per ``ramp_m`` metres
    (a lower envelope of cones, by a forward and a backward pass)."""
    out = level.astype(float)
    step = np.diff(station) / max(ramp_m, 1e-9)
    for i in range(1, out.size):
        out[i] = min(out[i], out[i - 1] + step[i - 1])
    for i in range(out.size - 2, -1, -1):
        out[i] = min(out[i], out[i + 1] + step[i])
    return out


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
    for level in np.unique(j):
        sel = j == level
        t = table[level]
        out[sel] = np.maximum(t[lo[sel]], t[hi[sel] - 2**level + 1])
    return out
