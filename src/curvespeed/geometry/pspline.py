"""Penalised spline fit (P-spline) whose smoothing is set by the expected residual sum.

A quintic B-spline on uniform knots, fitted by penalised least squares with a penalty on the
fourth differences of its coefficients (Eilers and Marx, 1996); the smoothing weight is found so
that the weighted residual sum equals what noise of known size plausibly leaves (the discrepancy
principle). Normal equations are banded, so each trial weight costs one banded Cholesky solve and
a fit is O(m) in the number of points. The reasons for each choice are in
:func:`curvespeed.geometry.points.build_geometry`'s docstring.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.linalg import LinAlgError

from .basis_rows import BasisRows, values_at
from .penalised_system import PENALTY_ORDER, SPLINE_DEGREE, PenalisedSystem
from .roots import brent_root
from .uniform_spline import UniformSpline, design_rows, locate

_LOG_LAMBDA_RANGE = (-6.0, 12.0)     # smoothing weight searched: rho = log10(lam / lam0)
_LOG_LAMBDA_XTOL = 1e-4              # in rho: residual sum within ~0.05 % of its target
_LOG_LAMBDA_PROBES = (16.0, 14.0)    # rho up to which a wider knot spacing is estimated
_LOG_LAMBDA_AIM = 8.0                # rho aimed at after widening the knot spacing
_LOG_LAMBDA_REFINE = 5.0             # below: smoothing over < ~2 knot intervals, refine grid
_MAX_START_INTERVALS = 200_000       # first knot grid at most this fine (refined if needed)
_MAX_REGRIDS = 8
_MIN_PERIODIC_INTERVALS = 2 * (SPLINE_DEGREE + 1)

def residual_target(n_components: int) -> float:
    """Weighted residual sum of squares the smoothing aims at, for noise of known size.

    With weights ``1 / sigma`` each noisy residual component contributes one unit on average, so
    the sum over ``n`` components is chi-square with about ``n`` degrees of freedom: mean ``n``,
    standard deviation ``sqrt(2 n)``. The target is its mean plus two standard deviations, the
    largest residual the stated noise plausibly produces (~98 % one-sided). Aiming at the mean
    alone would, about half the time, chase the noise on data that are smooth (a straight
    line, a constant grade), because the penalty's null-space fit then leaves a little less
    than ``n`` and the rule demands a rougher fit to reach it.
    """
    return float(n_components + 2.0 * math.sqrt(2.0 * n_components))



# ---------------------------------------------------------------------------------------------
# Penalised spline fit (P-spline), smoothing set by the expected residual sum.

@dataclass(frozen=True)
class SplineFit:
    """A B-spline c(u) on uniform knots over ``[0, span]`` (one period when ``periodic``)."""

    spline: UniformSpline
    span: float
    n_intervals: int
    periodic: bool
    residual_ss: float        # weighted residual sum of squares reached
    target_ss: float          # the one asked for
    too_rough: bool           # even the least smoothing left more residual than the target
    log_lambda: float         # log10 of the smoothing weight relative to the trace ratio
    system: "PenalisedSystem | None" = None   # the normal equations solved (None: null space)


def fit_pspline(u, values, weight, target_ss, span, periodic, knot_spacing) -> SplineFit:
    """Penalised least-squares quintic B-spline through ``values`` (m, d) at ``u`` (m,).

    ``weight`` is ``1 / sigma``, one number or one per point. Minimises ``sum w^2 |values - c(u)|^2 + lam * sum |fourth differences of coefficients|^2``
    with ``lam`` found by Brent's method on ``rho = log10(lam / lam0)`` so that the weighted
    residual sum equals ``target_ss``. If even the penalty's null-space fit (a cubic in ``u``;
    a constant on a loop), which has the largest residual of all, stays below the target, that
    fit is returned.

    The smoothing length of a P-spline scales as ``h * 10**(rho / (2 * order))`` for knot
    spacing ``h`` (up to a constant set by how ``lam0`` is normalised); the banded solve stays
    accurate up to ``rho`` of about 12, where the fit is smooth over more than ten knot
    intervals. When the data want more smoothing than that, the root is estimated from the
    residual at ``rho = 16`` (or 14 if that solve breaks down) and the knot spacing widened so
    that it falls near ``rho = 8`` (several knot intervals per smoothing length, where a
    P-spline is indistinguishable from the smoothing spline), and the fit is repeated on the
    coarser grid. When the root lies below ``rho = 5`` (smoothing over only a couple of knot
    intervals) the grid is refined the same way, down to ``knot_spacing``; the first grid has
    at most ``_MAX_START_INTERVALS`` intervals. A solve whose residual exceeds the null-space
    fit's has lost accuracy and is treated as failed.
    """
    values = np.asarray(values, dtype=float)
    n_floor = _MIN_PERIODIC_INTERVALS if periodic else 1
    null_ss, null_fit = null_space_fit(u, values, weight, span, periodic)
    if null_ss <= target_ss:
        return null_space_spline(null_fit, null_ss, target_ss, span, periodic, n_floor)
    n_fine = max(n_floor, math.ceil(span / knot_spacing - 1e-9))
    # Dense points usually need smoothing over many of them: start coarser and refine only if
    # the root then calls for less smoothing than the grid resolves well.
    n_int = max(n_floor, min(n_fine, _MAX_START_INTERVALS))
    lo, hi = _LOG_LAMBDA_RANGE

    def excess(system, rho):
        return math.log(system.residual(rho) / target_ss)

    for _ in range(_MAX_REGRIDS):
        system = PenalisedSystem(u, values, weight, span, periodic, n_int, null_ss)
        top = _highest_usable(system, lo, hi)
        root = None
        if system.residual(top) <= target_ss:             # wants more smoothing: widen
            if n_int == n_floor:
                break
            rho_est = top
            for probe in _LOG_LAMBDA_PROBES:   # far beyond hi the banded Cholesky may break down
                try:
                    at_probe = excess(system, probe)
                except LinAlgError:
                    continue
                # Where log(residual / target) crosses zero, interpolated between top and the
                # probe (a rough estimate is enough: the root is found on the new grid).
                at_top = excess(system, top)
                rho_est = (probe if at_probe <= 0
                           else top + (probe - top) * -at_top / (at_probe - at_top))
                break
        elif system.residual(lo) >= target_ss:           # wants less than the grid allows
            if n_int == n_fine:
                break
            rho_est = lo - 2 * PENALTY_ORDER              # refine by 10x at least
        else:
            root = rho_est = brent_root(lambda r: excess(system, r), lo, top, _LOG_LAMBDA_XTOL)
            if rho_est >= _LOG_LAMBDA_REFINE or n_int == n_fine:
                break
        factor = 10.0 ** ((rho_est - _LOG_LAMBDA_AIM) / (2 * PENALTY_ORDER))
        n_new = min(n_fine, max(n_floor, int(n_int / factor)))
        if n_new == n_int:
            break
        n_int = n_new

    too_rough = False
    if root is not None:
        rho = root
    elif system.residual(top) <= target_ss:
        rho = top
    else:
        rho, too_rough = lo, True
    coef = system.coefficients(rho)
    if periodic:
        coef = coef[np.arange(n_int + SPLINE_DEGREE) % n_int]
    spline = UniformSpline(system.knots, coef, SPLINE_DEGREE)
    return SplineFit(spline, span, n_int, periodic, system.residual(rho), target_ss, too_rough,
                     rho, system)


def penalised_system(u, values, weight, span, periodic, n_int) -> "PenalisedSystem":
    """The normal equations of the P-spline on ``n_int`` uniform intervals, to be solved at any
    smoothing weight (``coefficients(rho)``) and for other data (``response(rho, values)``)."""
    return PenalisedSystem(u, np.asarray(values, dtype=float), weight, span, periodic, n_int,
                            math.inf)


def _highest_usable(system: PenalisedSystem, lo: float, hi: float) -> float:
    """The largest ``rho`` in ``hi, hi - 2, ...`` whose solve keeps its accuracy."""
    rho = hi
    while True:
        try:
            system.residual(rho)
            return rho
        except LinAlgError:
            if rho - 2.0 < lo:
                raise
            rho -= 2.0


def null_space_fit(u, values, weight, span, periodic):
    """Least-squares fit in the penalty's null space: a cubic in u (open) or a constant (loop).

    Returns its weighted residual sum, the largest any penalised fit can have, and a function
    evaluating it.
    """
    w2 = np.broadcast_to(np.asarray(weight, dtype=float) ** 2, u.shape)
    if periodic:
        mean = (w2 @ values) / w2.sum()
        resid = values - mean
        return float(w2 @ np.sum(resid**2, axis=1)), lambda uq: np.broadcast_to(
            mean, (np.size(uq), mean.size)).copy()
    degree = min(PENALTY_ORDER - 1, u.size - 1)

    def legendre_columns(uq):
        t = 2.0 * np.asarray(uq, dtype=float) / span - 1.0
        cols = [np.ones_like(t), t]              # Legendre polynomials: well conditioned
        for p in range(2, degree + 1):
            cols.append(((2 * p - 1) * t * cols[-1] - (p - 1) * cols[-2]) / p)
        return cols[: degree + 1]

    basis = legendre_columns(u)
    columns = values.T.copy()                    # (d, m), contiguous, never the caller's data
    gram = np.array([[np.sum(w2 * a * b) for b in basis] for a in basis])
    coef = np.linalg.solve(gram, np.array([[np.sum(w2 * a * v) for v in columns] for a in basis]))
    resid = columns
    for a, c in zip(basis, coef):
        for j in range(resid.shape[0]):
            resid[j] -= c[j] * a

    def evaluate(uq):
        return sum(a[:, None] * c for a, c in zip(legendre_columns(uq), coef))

    return float(np.sum(w2 * resid**2)), evaluate


def null_space_spline(null_fit, null_ss, target_ss, span, periodic, n_int) -> SplineFit:
    """The null-space fit written exactly as a quintic B-spline on ``n_int`` uniform intervals."""
    k = SPLINE_DEGREE
    h = span / n_int
    knots = h * np.arange(-k, n_int + k + 1, dtype=float)
    knots[k], knots[n_int + k] = 0.0, span
    n_coef = n_int + k
    samples = np.linspace(0.0, span, 4 * n_coef)
    if periodic:
        coef = null_fit(np.zeros(n_coef))        # a constant: equal coefficients
    else:    # a cubic lies in the spline space, so least squares on samples reproduces it
        design = design_rows(k, knots, samples)
        coef = np.linalg.lstsq(design, null_fit(samples), rcond=None)[0]
    spline = UniformSpline(knots, coef, k)
    return SplineFit(spline, span, n_int, periodic, null_ss, target_ss, False, math.inf)


def derivative_basis(span: float, n_int: int, u: np.ndarray, nu: int) -> BasisRows:
    """The matrix ``M`` with ``M.times(c)`` the ``nu``-th derivative at ``u`` (within
    ``[0, span]``) of the spline on the uniform grid of ``n_int`` intervals with coefficients
    ``c`` (the knots of :func:`penalised_system`; a periodic system's coefficients wrapped to
    ``n_int + degree``): the rows of :func:`derivative_values`."""
    k = SPLINE_DEGREE
    first, vals = derivative_values(span, n_int, u, nu)
    return BasisRows(first, vals, n_int + k)


def derivative_values(span: float, n_int: int, u: np.ndarray,
                      nu: int) -> tuple[np.ndarray, np.ndarray]:
    """The ``nu``-th derivatives at ``u`` of the ``degree + 1`` B-splines of the uniform grid
    (:func:`derivative_basis`) that are nonzero there: the first one's index (int64, one per
    point) and their values (shape ``(u.size, degree + 1)``, C order). Each point's interval
    carries the same polynomial pieces (:func:`.uniform_spline.basis_values`): a few passes over
    the points, where a general design matrix and de Boor's derivative formula took most of the
    replicates' evaluation on a long log."""
    h = span / n_int
    first, tau = locate(np.clip(u, 0.0, span) / h, n_int)
    return first, values_at(SPLINE_DEGREE, tau, nu, h)


def halve_projection(rhs: np.ndarray, periodic: bool) -> np.ndarray:
    """``B^T W v`` on the grid of half as many intervals, from ``rhs = B^T W v`` on this one
    (an even number of intervals over the same span): each coarse B-spline is the sum of seven
    fine ones weighted ``C(6, i) / 2^5`` (the two-scale relation of uniform B-splines of degree
    5; de Boor, A Practical Guide to Splines, knot insertion, from memory), so the projection of
    the points onto the coarse grid needs no pass over the points. Exact up to round-off
    (tests/test_reference_geometry.py compares it with the coarse grid's own projection)."""
    k = SPLINE_DEGREE
    n_fine = rhs.shape[0]
    n_coarse = (n_fine // 2) if periodic else (n_fine - k) // 2 + k
    if periodic:     # padded[p] = rhs[(p - k) mod n]
        rhs = np.concatenate((rhs[n_fine - k:], rhs))
    out = np.zeros((n_coarse,) + rhs.shape[1:])
    scratch = np.empty_like(out)
    for i in range(k + 2):      # coarse j takes fine 2 j - k + i (a periodic one: padded 2 j + i)
        if periodic:
            lo, hi, first = 0, n_coarse, i
        else:                   # fine B-splines outside the span vanish on it
            lo = (k - i + 1) // 2
            hi = min(n_coarse, (n_fine - 1 + k - i) // 2 + 1)
            first = 2 * lo - k + i
        part = scratch[: hi - lo]
        np.multiply(rhs[first: first + 2 * (hi - lo) - 1: 2], math.comb(k + 1, i) / 2.0**k,
                    out=part)
        out[lo:hi] += part
    return out
