"""Reference tests for the numerics the fits use in place of general libraries: the
uniform-knot spline evaluation (``geometry/uniform_spline.py``), the root finder
(``geometry/roots.py``) and the chi-square quantile of the noise bound (``geometry/noise.py``).

Sources named beside each check:
- scipy.interpolate.BSpline (de Boor's recursion) as the reference library for B-spline values,
  derivatives, derivative splines and design matrices;
- B-splines sum to one on every knot interval (partition of unity; any spline text);
- scipy.optimize.brentq as the reference for Brent's method;
- scipy.stats.chi2.ppf and scipy.special.ndtr as the reference for the chi-square quantile.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from scipy.interpolate import BSpline
from scipy.optimize import brentq

from curvespeed.geometry.noise import chi_square_quantile
from curvespeed.geometry.pspline import SPLINE_DEGREE, penalised_system
from curvespeed.geometry.roots import brent_root
from curvespeed.geometry.uniform_spline import (UniformSpline, basis_polynomials,
                                                basis_values, design_rows)


def _knots(span: float, n_int: int) -> np.ndarray:
    """The penalised spline's own uniform knots (ends exactly 0 and span)."""
    u = np.linspace(0.0, span, 50)
    return penalised_system(u, np.column_stack((u, u)), np.ones(50), span, False, n_int).knots


@pytest.mark.parametrize("k", [1, 2, 3, 4, 5])
def test_basis_pieces_match_scipy_and_sum_to_one(k):
    """The power-basis pieces of the uniform B-splines on one interval, evaluated at points
    across it (ends included), equal scipy's design matrix on integer knots; exact rationals
    rounded once, so 1e-14 (values are at most 1) is round-off of Horner's rule. Their sum is 1
    (partition of unity) and the sum of each derivative 0, to the same round-off."""
    knots = np.arange(-k, k + 2, dtype=float)          # interval [0, 1] with full support
    tau = np.concatenate(([0.0, 1.0 - 1e-12], np.random.default_rng(k).uniform(0, 1, 50)))
    expected = BSpline.design_matrix(tau, knots, k).toarray()[:, : k + 1]
    got = basis_values(k, tau).T
    assert np.max(np.abs(got - expected)) <= 1e-14
    assert np.max(np.abs(got.sum(axis=1) - 1.0)) <= 1e-14
    for nu in range(1, k + 1):
        assert np.max(np.abs(basis_values(k, tau, nu).sum(axis=0))) <= 1e-12 * math.perm(k, nu)
    assert basis_polynomials(k).shape == (k + 1, k + 1)
    # the table is the closed form's exact rationals rounded once: the same expansion in
    # fractions.Fraction, entry by entry, to the last bit
    exact = [[Fraction(0)] * (k + 1) for _ in range(k + 1)]
    for r in range(k + 1):
        for i in range(k - r + 1):
            scale = Fraction((-1) ** i * math.comb(k + 1, i), math.factorial(k))
            for p in range(k + 1):
                exact[p][r] += scale * math.comb(k, p) * (k - r - i) ** (k - p)
    assert np.array_equal(basis_polynomials(k), [[float(v) for v in row] for row in exact])


@pytest.mark.parametrize("columns", [None, 2])
def test_uniform_spline_matches_scipy_bspline(columns):
    """Values and derivatives 0..6 of a degree-5 spline on the penalised spline's knots, at
    the span's ends, just outside them (NaN, as BSpline(..., extrapolate=False) gives) and at
    random points, scalar and array, equal scipy's: both evaluate the same polynomial pieces
    (de Boor's recursion against Horner's rule on the power basis), so 1e-12 of the largest
    value is round-off (8e-15 seen)."""
    rng = np.random.default_rng(3)
    k, n_int, span = SPLINE_DEGREE, 40, 97.3
    knots = _knots(span, n_int)
    shape = (n_int + k,) if columns is None else (n_int + k, columns)
    coef = rng.standard_normal(shape)
    ref, own = BSpline(knots, coef, k, extrapolate=False), UniformSpline(knots, coef, k)
    x = np.concatenate(([0.0, span, -1e-9, span + 1e-9], rng.uniform(0.0, span, 400)))
    for nu in range(k + 2):
        expected, got = ref(x, nu=nu), own(x, nu=nu)
        assert got.shape == expected.shape
        assert np.array_equal(np.isnan(got), np.isnan(expected))
        scale = max(np.nanmax(np.abs(expected)), 1.0)
        assert np.nanmax(np.abs(got - expected)) <= 1e-12 * scale, nu
    assert np.allclose(own(31.7, nu=2), ref(31.7, nu=2), rtol=0.0, atol=1e-12 * scale)
    assert np.shape(own(31.7)) == np.shape(ref(31.7))
    # a window of the knots, as a local response is returned
    lo, hi = 7, 30
    window = UniformSpline(knots[lo: hi + k + 1], coef[lo:hi], k)
    xw = rng.uniform(knots[lo + k], knots[hi], 200)
    expected = BSpline(knots[lo: hi + k + 1], coef[lo:hi], k, extrapolate=False)(xw, nu=1)
    assert np.max(np.abs(window(xw, nu=1) - expected)) <= 1e-12 * np.max(np.abs(expected))


def test_derivative_spline_and_design_rows_match_scipy():
    """The derivative spline (twice) has scipy's knots, degree and coefficients (scipy pads its
    coefficients with zeros to the knots' length; the others are compared), to round-off of
    one difference quotient per step (1e-14 relative); the dense design matrix equals
    BSpline.design_matrix to 1e-14."""
    rng = np.random.default_rng(5)
    k, n_int, span = SPLINE_DEGREE, 25, 61.0
    knots = _knots(span, n_int)
    coef = rng.standard_normal((n_int + k, 2))
    ref = BSpline(knots, coef, k, extrapolate=False).derivative(2)
    own = UniformSpline(knots, coef, k).derivative(2)
    assert own.k == ref.k == k - 2
    assert np.array_equal(own.t, ref.t)
    n = own.c.shape[0]
    assert n == n_int + k - 2
    assert np.max(np.abs(own.c - ref.c[:n])) <= 1e-14 * np.max(np.abs(ref.c))
    assert not np.any(ref.c[n:])
    x = rng.uniform(0.0, span, 80)
    expected = BSpline.design_matrix(x, knots, k).toarray()
    assert np.max(np.abs(design_rows(k, knots, x) - expected)) <= 1e-14


def _test_functions():
    """Smooth, flat-near-the-root, wiggly and steep functions with roots in (-7, 8)."""
    rng = np.random.default_rng(1)
    for i in range(120):
        r, p, s = rng.uniform(-5, 5), int(rng.integers(1, 6)), rng.uniform(0.1, 10)
        yield [lambda x, r=r, s=s: math.log1p(math.exp(s * (x - r))) - math.log(2.0),
               lambda x, r=r, p=p: math.copysign(abs(x - r) ** p, x - r),
               lambda x, r=r, s=s: math.tanh(s * (x - r)) + 0.1 * math.sin(3.0 * x),
               lambda x, r=r, s=s: math.exp(x - r) - 1.0 - s * 1e-3][i % 4]


def test_brent_root_takes_scipy_brentq_steps():
    """Brent's method here and scipy's brentq give the same root, bit for bit, after the same
    number of evaluations (the same steps), at the fits' tolerance (1e-4) and at 1e-12, or
    both give up after 100 iterations; and refuse a bracket without a sign change."""
    cases = 0
    for f in _test_functions():
        for xtol in (1e-4, 1e-12):
            calls = [0, 0]

            def counted(x, which, f=f):
                calls[which] += 1
                return f(x)

            try:
                expected = brentq(counted, -7.0, 8.0, xtol=xtol, args=(0,))
            except RuntimeError:
                expected = None
            try:
                got = brent_root(lambda x: counted(x, 1), -7.0, 8.0, xtol)
            except ArithmeticError:
                got = None
            assert got == expected and calls[0] == calls[1], (got, expected, calls)
            cases += expected is not None
    assert cases > 150
    with pytest.raises(ValueError, match="different signs"):
        brent_root(lambda x: x * x + 1.0, -1.0, 1.0, 1e-6)


def test_chi_square_quantile_matches_scipy():
    """The lower quantiles of the chi-square distribution at Phi(z) for z = -3 .. 0, from 4 to
    3e7 degrees of freedom (a short route to a log of millions of fixes), equal scipy's
    chi2.ppf(ndtr(z), dof) to 1e-13 relative (4e-15 seen: both are accurate to a few units of
    round-off, far below the 1e-3 a wrong term of the series or the prefactor would leave)."""
    from scipy.special import ndtr
    from scipy.stats import chi2

    for z in (-3.0, -2.0, -1.0, -0.5, 0.0):
        for dof in (4.0, 5.5, 9.3, 19.99, 59.9, 60.1, 123.4, 1e3, 3.3e4, 1e6, 3e7):
            expected = chi2.ppf(float(ndtr(z)), dof)
            assert abs(chi_square_quantile(dof, z) / expected - 1.0) <= 1e-13, (z, dof)
