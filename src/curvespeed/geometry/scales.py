"""The ladder of smoothing scales behind the adaptive curvature (:mod:`.curvature`), and the
noise replicates that measure each scale's uncertainty.

A scale is the path fit's penalised spline solved at another smoothing weight. Scales whose
weight the banded solve still handles on the path fit's own knot grid share its normal equations
(the path fit's own), and coarser scales use grids of half as many intervals, nested in it. The
projections ``B^T W noise`` of the noise replicates onto every nested grid come from the finest
grid's by the two-scale relation of B-splines, so each chunk of replicates is drawn and passed
over the points once per family of nested grids, not once per scale (on a log of 300,000 fixes
this was a quarter of the route stage). The numbers are those of one scale at a time up to
round-off; only work is shared.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator

import numpy as np

from .pspline import (
    SPLINE_DEGREE,
    SplineFit,
    derivative_basis,
    derivative_values,
    halve_projection,
    penalised_system,
)
from .basis_rows import BasisRows
from .uniform_spline import UniformSpline

try:
    from . import _replicate_curvature
except ImportError:         # no C compiler at install: the numpy path below
    _replicate_curvature = None

#: Noise replicates for the standard deviation of curvature (its relative error is about
#: 1 / sqrt(2 * REPLICATES) = 13 %).
REPLICATES = 32
#: Replicates generated and smoothed at a time.
CHUNK = 8
#: Rows of a random walk's steps drawn at a time.
_WALK_BLOCK = 65_536
#: Stations whose replicate curvatures are evaluated at a time.
_NODE_BLOCK = 100_000
#: Largest rho = log10(lam / lam0) solved on one knot grid; coarser scales use coarser grids
#: (the banded solve keeps its accuracy below about 12).
_MAX_RHO = 10.0
#: rho change that doubles the smoothing length (length ~ h * 10**(rho / 8)).
DOUBLING_RHO = 8.0 * math.log10(2.0)
#: Half-width, in smoothing lengths ``(lam h^7 / w)^(1/8)``, of the neighbourhood whose largest
#: curvature the bound takes: how far the finest scale spreads a step of curvature, ringing
#: included. Calibrated on steps from a straight into arcs of R 25 and 100 m and on a winding
#: road with two such steps, points every 1 m with noise of 0, 1, 5 and 20 cm: at 3 the bound
#: fell 3 % short of the true curvature next to a step, at 3.5 it just covered it, at 4 (used)
#: it covers it with 0.1 % to spare (tests/test_reference_steps.py checks coverage).
SPREAD_LENGTHS = 4.0


def noise_chunk(seed: int, chunk: int, weight, time, drift_rate) -> np.ndarray:
    """``CHUNK`` noise replicates (columns ``0..CHUNK-1`` across, the rest along x/y: shape
    (m, 2 * CHUNK)): white with sigma ``1 / weight``, plus a random walk in ``time`` whose
    variance grows by ``drift_rate`` per unit time. Each chunk has its own seed, so the result
    does not depend on how many are made at once."""
    rng = np.random.default_rng([seed, chunk])
    noise = rng.standard_normal((weight.size, 2 * CHUNK))
    noise /= weight[:, None]            # in place: a log of 10^6 fixes makes 128 MB a chunk
    if drift_rate and time is not None:
        step = np.sqrt(drift_rate * np.maximum(np.diff(time), 0.0))
        # the walk's steps drawn and summed a block of rows at a time (the generator fills
        # rows in order, so the numbers are those of one draw), not another 128 MB at once
        total = np.zeros(2 * CHUNK)
        for lo in range(0, step.size, _WALK_BLOCK):
            walk = rng.standard_normal((min(_WALK_BLOCK, step.size - lo), 2 * CHUNK))
            walk *= step[lo: lo + walk.shape[0], None]
            np.cumsum(walk, axis=0, out=walk)
            walk += total
            noise[1 + lo: 1 + lo + walk.shape[0]] += walk
            total = walk[-1].copy()
    return noise


#: Coarse grids are made nested (each a multiple of the coarsest) when the coarsest has at
#: least this many intervals: then no grid moves by more than 1 / NESTED_MIN_INTERVALS of its
#: intervals, and a long route draws its noise once for all coarse grids (a log of 10^6 fixes
#: drew it for five families of grids, 20 draws of 0.4 s, instead of two).
NESTED_MIN_INTERVALS = 1000


def grid_of(fit: SplineFit, level: int, coarsest: int) -> tuple[int, float] | None:
    """Knot intervals and ``rho`` of the scale ``level`` doublings coarser than the path fit
    (None: too coarse for its own grid). A grid coarser than the path fit's has half the
    intervals of the one before, rounded down; on a long route (:data:`NESTED_MIN_INTERVALS`)
    the coarsest grid's intervals (of level ``coarsest``) doubled back up instead, so that the
    coarse grids nest."""
    def coarsening(lv: int) -> tuple[int, float]:
        rho = fit.log_lambda + lv * DOUBLING_RHO
        times = max(0, math.ceil((rho - _MAX_RHO) / DOUBLING_RHO))
        return times, rho - times * DOUBLING_RHO

    times, rho = coarsening(level)
    n_int = fit.n_intervals // 2**times
    most = coarsening(coarsest)[0]
    if times and fit.n_intervals // 2**most >= NESTED_MIN_INTERVALS:
        n_int = (fit.n_intervals // 2**most) * 2**(most - times)
    floor = 2 * (SPLINE_DEGREE + 1) if fit.periodic else SPLINE_DEGREE + 1
    if n_int < floor:
        return None
    return n_int, rho


def scale_families(fit: SplineFit, u_points, values, weight, u_nodes, levels,
                   noise: Callable[[int], np.ndarray], keep_level: int | None = None
                   ) -> Iterator["Family"]:
    """The scales of ``levels`` (ascending, until one is too coarse) with their replicates
    added, a family of nested knot grids at a time. ``noise(c)`` draws chunk ``c`` of the
    replicates; the scale at ``keep_level`` keeps each replicate's curvature change
    (``deltas``). Each family is yielded while its finest grid's normal equations are held."""
    grids: dict[int, list[tuple[int, float]]] = {}
    for level in levels:
        grid = grid_of(fit, level, levels[-1])
        if grid is None:
            break
        grids.setdefault(grid[0], []).append((level, grid[1]))
    chains: list[list[int]] = []
    for n_int in grids:          # a grid nested in the last one joins its family
        if chains and chains[-1][-1] == 2 * n_int:
            chains[-1].append(n_int)
        else:
            chains.append([n_int])
    for chain in chains:
        members = []
        for n_int in chain:
            if n_int == fit.n_intervals and fit.system is not None:
                system = fit.system.unbounded()
            else:
                system = penalised_system(u_points, values, weight, fit.span, fit.periodic,
                                          n_int)
            for level, rho in grids[n_int]:
                scale = Scale.build(system, rho, n_int, fit, u_nodes)
                scale.level = level
                scale.deltas = [] if level == keep_level else None
                members.append(scale)
            if n_int != chain[0]:
                system.release_points()
        family = Family(members)
        for c in range(REPLICATES // CHUNK):
            for scale, delta in family.responses(noise(c), overwrite=True):
                scale.add_replicates(delta, u_nodes)
        yield family
        for scale in members:       # (kept for Family.smoothed while the family is used)
            scale.bases = None


class Family:
    """Scales on nested knot grids (each with half the intervals of the one before) whose
    projections of data all come from the finest grid's (:func:`.pspline.halve_projection`)."""

    def __init__(self, scales: list["Scale"]):
        self.scales = scales
        self.factors = [sc.system.factor(sc.rho) for sc in scales]

    def responses(self, values: np.ndarray, overwrite: bool = False, skip: tuple = ()
                  ) -> Iterator[tuple["Scale", np.ndarray]]:
        """Each scale's spline coefficients for other data ``values`` at the same points, but
        for the scales of the levels in ``skip`` (``overwrite``: ``values`` may be scaled in
        place)."""
        rhs = self.scales[0].system.project(values, overwrite=overwrite)
        del values              # (a chunk of noise: 128 MB on a log of 10^6 fixes)
        n_int = self.scales[0].n_int
        for scale, factor in zip(self.scales, self.factors):
            while n_int > scale.n_int:
                rhs = halve_projection(rhs, scale.periodic)
                n_int //= 2
            if scale.level not in skip:
                yield scale, scale.system.solve_projected(factor, rhs)

    def smoothed(self, values: np.ndarray, u_nodes: np.ndarray, skip: tuple = ()
                 ) -> list[tuple["Scale", np.ndarray]]:
        """Each scale's curvature at the nodes for other positions ``values`` (m, 2) at the
        same points (open grids), but for the levels in ``skip``."""
        out = []
        for scale, coef in self.responses(values, skip=skip):
            d1, d2 = scale.derivatives(coef, u_nodes)
            out.append((scale, cross(d1, d2) / np.hypot(d1[:, 0], d1[:, 1]) ** 3))
        return out


class Scale:
    """One smoothing scale: its curvature at the nodes, spread width, and the running sum of
    squared curvature changes over the noise replicates."""

    def __init__(self, system, rho, n_int, periodic):
        self.system, self.rho, self.n_int, self.periodic = system, rho, n_int, periodic
        self.level = 0       # doublings coarser than the path fit (set by scale_families)
        self.bases = None         # (block, derivative bases) while the family is used
        self.kappa = self.d1 = self.d2 = self.width = None      # set by build
        self.deltas: list[np.ndarray] | None = None    # the replicates' changes, when kept

    @classmethod
    def build(cls, system, rho: float, n_int: int, fit: SplineFit, u_nodes) -> "Scale":
        """The scale of ``system`` (``n_int`` intervals) at ``rho``."""
        scale = cls(system, rho, n_int, fit.periodic)
        d1, d2 = scale.derivatives(system.coefficients(rho), u_nodes)
        scale.d1, scale.d2 = d1, d2
        scale.kappa = cross(d1, d2) / np.hypot(d1[:, 0], d1[:, 1]) ** 3
        scale.width = SPREAD_LENGTHS * smoothing_length(system, rho, u_nodes, fit.span)
        scale.sum_sq = np.zeros_like(scale.kappa)
        scale.lowered = np.zeros_like(scale.kappa)  # how much it rounds off peaks (smoothing_bias)
        scale.misread = None        # where the road it was read from does not smooth to it
        return scale

    def derivatives(self, coef: np.ndarray, u_nodes: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
        """First and second derivatives at ``u_nodes`` of the spline of this scale's grid with
        coefficients ``coef`` (a periodic grid's not yet wrapped). Where one block holds every
        node, inside the grid, from the derivative bases the noise replicates use
        (:meth:`_bases`, made once and kept) by the design rows' product; otherwise by
        evaluating the spline (:class:`.uniform_spline.UniformSpline`). Both sum the same
        products in the same order (the product from zero: a sum of zeros may differ in the
        sign of its zero)."""
        if self.periodic:
            coef = coef[np.arange(self.n_int + SPLINE_DEGREE) % self.n_int]
        span = float(self.system.knots[self.n_int + SPLINE_DEGREE])
        if u_nodes.size > _NODE_BLOCK or not (u_nodes.min() >= 0.0 and u_nodes.max() <= span):
            spline = UniformSpline(self.system.knots, coef, SPLINE_DEGREE)
            return spline(u_nodes, nu=1), spline(u_nodes, nu=2)
        compiled = _replicate_curvature is not None
        bases = self._bases(u_nodes, slice(0, _NODE_BLOCK), compiled)
        if compiled:
            first, v1, v2 = bases
            n_coef = self.n_int + SPLINE_DEGREE
            bases = (BasisRows(first, v1, n_coef), BasisRows(first, v2, n_coef))
        return bases[0].times(coef), bases[1].times(coef)

    @property
    def sd(self) -> np.ndarray:
        """Standard deviation of curvature over the replicates, 1/m."""
        return np.sqrt(self.sum_sq / REPLICATES)

    def _bases(self, u_nodes: np.ndarray, at: slice, compiled: bool):
        """The first and second derivatives of this scale's B-splines at ``u_nodes[at]``: as
        the compiled kernel takes them (:func:`.pspline.derivative_values`), or as design
        matrices' rows (:class:`.basis_rows.BasisRows`), three times faster than evaluating a
        spline of the replicates' coefficients. Kept for the next chunk of replicates when one
        block holds every node (on longer routes a family's scales would hold a block each)."""
        if self.bases is not None and self.bases[0] == (at, compiled):
            return self.bases[1]
        u = u_nodes[at]
        span = float(self.system.knots[self.n_int + SPLINE_DEGREE])
        if compiled:
            first, v1 = derivative_values(span, self.n_int, u, 1)
            bases = (first, v1, derivative_values(span, self.n_int, u, 2)[1])
        else:
            bases = (derivative_basis(span, self.n_int, u, 1),
                     derivative_basis(span, self.n_int, u, 2))
        self.bases = ((at, compiled), bases) if u.size == u_nodes.size else None
        return bases

    def add_replicates(self, delta: np.ndarray, u_nodes: np.ndarray,
                       compiled: bool | None = None) -> None:
        """Add the curvature changes of smoothed noise replicates (their spline coefficients,
        ``delta``: the fit is linear in the data) and keep them. ``compiled``: by the compiled
        kernel (default: when it was built) or by numpy, its reference."""
        if compiled is None:
            compiled = _replicate_curvature is not None
        if self.periodic:
            delta = delta[np.arange(self.n_int + SPLINE_DEGREE) % self.n_int]
        n_rep = delta.shape[1] // 2
        change = np.empty((u_nodes.size, n_rep))
        # the kernel adds the squared changes of a chunk of 8 to the running sum itself
        summed = compiled and n_rep == 8
        if compiled:
            delta = np.ascontiguousarray(delta, dtype=float)
        for lo in range(0, u_nodes.size, _NODE_BLOCK):     # bounded memory on long routes
            at = slice(lo, lo + _NODE_BLOCK)
            bases = self._bases(u_nodes, at, compiled)
            if compiled:
                first, v1, v2 = bases
                _replicate_curvature.changes(
                    first, v1, v2, delta, self.d1[at], self.d2[at], self.kappa[at], change[at],
                    self.sum_sq[at] if summed else None, first.size, SPLINE_DEGREE + 1,
                    delta.shape[0], n_rep)
                continue
            e1 = bases[0].times(delta).reshape(-1, 2, n_rep)
            e2 = bases[1].times(delta).reshape(-1, 2, n_rep)
            p1, p2 = self.d1[at, :, None] + e1, self.d2[at, :, None] + e2
            speed_sq = p1[:, 0] ** 2 + p1[:, 1] ** 2           # the kernel's |r'|^3, alike
            change[at] = cross(p1, p2) / (speed_sq * np.sqrt(speed_sq)) - self.kappa[at, None]
        if not summed:
            self.sum_sq += np.sum(change**2, axis=1)
        if self.deltas is not None:
            self.deltas.append(change)


def cross(a, b):
    return a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]


def smoothing_length(system, rho, u_nodes, span) -> np.ndarray:
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
