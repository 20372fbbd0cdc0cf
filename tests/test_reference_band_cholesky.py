"""The banded Cholesky factorisation and solves (``geometry/band_cholesky.py`` with its compiled
kernel ``geometry/_band_solve.c``) and the uniform B-spline design rows
(``geometry/basis_rows.py``, compiled in ``geometry/_basis_rows.c``) against the reference
library they replace on a plan's path: LAPACK through ``scipy.linalg.cholesky_banded``,
``cho_solve_banded`` and ``solveh_banded``, and ``scipy.sparse`` products.

Tolerances. A banded Cholesky factor computed in floating point is the exact factor of
``A + E`` with ``|E| <= gamma_(u+2) |U^T| |U|`` (Higham, Accuracy and Stability of Numerical
Algorithms, the Cholesky backward error, from memory), ``gamma_k ~ k eps``; two
implementations of the same column order differ only in where rounding falls (the reference's
BLAS kernels fuse multiply-adds), so their factors agree to a few ``(u + 2) eps`` of the largest
entry. Solutions agree to that times the condition number (forward error of a backward-stable
solve). Each check below states its bound from these.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from numpy.linalg import LinAlgError
from scipy.linalg import cho_solve_banded, cholesky_banded, solveh_banded

from curvespeed.geometry import band_cholesky
from curvespeed.geometry.band_cholesky import factor_band, solve_band, solve_factored

# the compiled kernel is what is checked (without a C compiler the module is LAPACK itself)
pytest.importorskip("curvespeed.geometry._band_solve")
EPS = np.finfo(float).eps


def spd_band(rng, n: int, u: int) -> np.ndarray:
    """A random symmetric positive definite band in LAPACK's upper storage (diagonally
    dominant: its condition number is below about 3)."""
    band = rng.uniform(-1.0, 1.0, (u + 1, n))
    band[-1] = 2.0 * u + 2.0 + rng.uniform(0.0, 1.0, n)
    return band


def lower_of(upper: np.ndarray) -> np.ndarray:
    """The same matrix in LAPACK's lower band storage."""
    u, n = upper.shape[0] - 1, upper.shape[1]
    out = np.zeros_like(upper)
    for d in range(u + 1):
        out[d, : n - d] = upper[u - d, d:]
    return out


def inside(u: int, n: int, lower: bool) -> np.ndarray:
    """The entries of band storage that lie inside the matrix (LAPACK leaves the rest)."""
    mask = np.ones((u + 1, n), dtype=bool)
    for d in range(u + 1):
        if lower:
            mask[d, n - d:] = False
        else:
            mask[u - d, :d] = False
    return mask


def dense_of(upper: np.ndarray) -> np.ndarray:
    u, n = upper.shape[0] - 1, upper.shape[1]
    a = np.zeros((n, n))
    for d in range(u + 1):
        idx = np.arange(n - d)
        a[idx, idx + d] = a[idx + d, idx] = upper[u - d, d:]
    return a


@pytest.mark.parametrize("u", [0, 1, 5, 11])
@pytest.mark.parametrize("lower", [False, True])
def test_factor_matches_lapack(u, lower):
    """The factor of a random positive definite band against LAPACK's ``dpbtrf``; both
    storages; within ``4 (u + 2) eps`` of the largest entry of the band (see the module)."""
    rng = np.random.default_rng(10 * u + lower)
    n = 400
    band = spd_band(rng, n, u)
    band = lower_of(band) if lower else band
    expected = cholesky_banded(band, lower=lower)
    before = band.copy()
    got = factor_band(band, lower=lower)
    assert np.array_equal(band, before)              # not overwritten unless asked
    mask = inside(u, n, lower)
    tol = 4 * (u + 2) * EPS * np.max(np.abs(band))
    assert np.max(np.abs(got[mask] - expected[mask])) <= tol
    assert got.shape == band.shape and got.flags.f_contiguous


@pytest.mark.parametrize("u, columns", [(0, 1), (5, 1), (5, 16), (11, 3)])
@pytest.mark.parametrize("lower", [False, True])
def test_solves_match_lapack(u, columns, lower):
    """Solves from a factor (``dpbtrs`` through ``cho_solve_banded``) and in one call
    (``dpbsv`` through ``solveh_banded``), one or many right-hand sides, 1-D and 2-D; the
    condition number is below 3, so ``8 (u + 2) eps`` of the largest entry of the answer."""
    rng = np.random.default_rng(100 * u + columns + lower)
    n = 300
    band = spd_band(rng, n, u)
    band = lower_of(band) if lower else band
    rhs = rng.standard_normal((n, columns))
    if columns == 1:
        rhs = rhs[:, 0]
    expected = solveh_banded(band, rhs, lower=lower)
    tol = 8 * (u + 2) * EPS * np.max(np.abs(expected))
    kept = rhs.copy()
    got = solve_band(band, rhs, lower=lower)
    assert got.shape == expected.shape and np.array_equal(rhs, kept)
    assert np.max(np.abs(got - expected)) <= tol
    factor = cholesky_banded(band, lower=lower)
    from_factor = solve_factored(factor, rhs, lower=lower)
    assert np.max(np.abs(from_factor - cho_solve_banded((factor, lower), rhs))) <= tol


def test_overwrite_factors_in_place():
    """``overwrite`` on a float64 upper band in Fortran order factors it where it is (the
    smoothing scales' use), giving the same numbers as a copy."""
    rng = np.random.default_rng(3)
    band = np.asfortranarray(spd_band(rng, 200, 5))
    copy = factor_band(band)
    got = factor_band(band, overwrite=True)
    assert got is band and np.array_equal(got, copy)


@pytest.mark.parametrize("lower", [False, True])
def test_near_singular_band_matches_lapack(lower):
    """A nearly singular band: the penalised spline's own matrix at a large smoothing weight,
    fourth differences of 200 coefficients plus a weight of 1e-9 on each, condition number
    about 1e12 (numpy.linalg.cond on the dense matrix). Both solvers are backward stable, so
    their answers differ by at most about ``cond * (u + 2) eps`` relative; 10 times that."""
    from curvespeed.geometry.penalised_system import difference_penalty

    n, u = 200, 5
    cyclic = difference_penalty(n, periodic=False)       # (u + 1, n): entry [d, i] = (i, i + d)
    upper = np.zeros((u + 1, n))
    for d in range(u + 1):
        upper[u - d, d:] = cyclic[d, : n - d]
    upper[u] += 1e-9
    cond = np.linalg.cond(dense_of(upper))
    assert 1e10 < cond < 1e14
    band = lower_of(upper) if lower else upper
    rhs = np.random.default_rng(5).standard_normal((n, 2))
    expected = solveh_banded(band, rhs, lower=lower)
    got = solve_band(band, rhs, lower=lower)
    rel = np.max(np.abs(got - expected)) / np.max(np.abs(expected))
    assert rel <= 10 * cond * (u + 2) * EPS


def lapack_failure(band, lower):
    with pytest.raises(LinAlgError) as caught:
        cholesky_banded(band, lower=lower, check_finite=False)
    return int(re.search(r"(\d+)", str(caught.value)).group(1))


@pytest.mark.parametrize("lower", [False, True])
@pytest.mark.parametrize("case", ["negative", "indefinite", "zero"])
def test_not_positive_definite_fails_where_lapack_does(case, lower):
    """A band that is not positive definite raises numpy's LinAlgError (scipy.linalg's is the
    same class, so callers keep catching it) naming the order of the leading minor that
    failed, the order LAPACK's ``info`` reports: a negative pivot at row 137, an indefinite
    tridiagonal matrix (2 on the diagonal, -1.2 beside it: its leading minors turn negative
    at a point fixed by the recurrence) and a zero matrix."""
    rng = np.random.default_rng(1)
    n, u = 300, 3
    band = spd_band(rng, n, u)
    if case == "negative":
        band[u, 136] = -1.0
    elif case == "indefinite":
        band = np.zeros((2, n))
        band[1], band[0, 1:] = 2.0, -1.2
    else:
        band = np.zeros((u + 1, n))
    band = lower_of(band) if lower else band
    order = lapack_failure(band, lower)
    with pytest.raises(LinAlgError, match=rf"leading minor of order {order} is not"):
        factor_band(band, lower=lower)
    with pytest.raises(LinAlgError, match=rf"order {order}\b"):
        solve_band(band, np.ones(n), lower=lower)
    assert issubclass(LinAlgError, __import__("scipy.linalg").linalg.LinAlgError)


@pytest.mark.parametrize("lower", [False, True])
def test_nan_spreads_as_in_lapack(lower):
    """A NaN on the diagonal is no failure for LAPACK's band factorisation (its pivot test
    ``ajj <= 0`` is false for NaN): the NaN spreads to the entries that depend on it, the same
    entries in both, and the entries before it agree as in :func:`test_factor_matches_lapack`."""
    rng = np.random.default_rng(4)
    n, u = 120, 3
    band = spd_band(rng, n, u)
    band[u, 50] = np.nan
    band = lower_of(band) if lower else band
    expected = cholesky_banded(band, lower=lower, check_finite=False)
    got = factor_band(band, lower=lower)
    mask = inside(u, n, lower)
    assert np.array_equal(np.isnan(got[mask]), np.isnan(expected[mask]))
    assert np.isnan(got[mask]).sum() > 0.5 * mask.sum()      # it did spread
    finite = mask & ~np.isnan(expected)
    assert np.max(np.abs(got[finite] - expected[finite])) <= 4 * (u + 2) * EPS * np.nanmax(
        np.abs(band))


def test_bad_shapes_are_refused():
    rng = np.random.default_rng(2)
    band = spd_band(rng, 50, 2)
    factor = factor_band(band)
    with pytest.raises(ValueError, match=r"right-hand side of shape \(49,\) for a band of 50"):
        solve_factored(factor, np.ones(49))
    with pytest.raises(ValueError, match="a band must be a 2-D array"):
        factor_band(np.ones(5))
    with pytest.raises(ValueError, match="wrong size or type"):
        band_cholesky._band_solve.factor(np.ones((49, 3)), 50, 2)


def sparse_of(rows) -> "object":
    import scipy.sparse as sp

    width = rows.values.shape[1]
    cols = rows.first[:, None] + np.arange(width)
    if rows.wrap:
        cols %= rows.n_columns
    # copies: scipy sorts a row's wrapped columns in place when it first needs them sorted
    return sp.csr_matrix((rows.values.ravel().copy(), cols.ravel(),
                          np.arange(0, rows.first.size * width + 1, width)), shape=rows.shape)


def random_rows(seed: int, wrap: bool, ascending: bool):
    from curvespeed.geometry.basis_rows import BasisRows

    rng = np.random.default_rng(seed)
    m, k, n = 700, 5, 60
    first = np.sort(rng.integers(0, n - k if not wrap else n, m))
    first[100:140] = first[100]                         # a long run on one interval
    if not ascending:
        rng.shuffle(first)
    return BasisRows(first, rng.uniform(-1.0, 1.0, (m, k + 1)), n, wrap=wrap), rng


@pytest.mark.parametrize("compiled", [True, False])
@pytest.mark.parametrize("wrap", [False, True])
@pytest.mark.parametrize("ascending", [True, False])
@pytest.mark.parametrize("columns", [0, 1, 2, 16])
def test_basis_rows_products_match_scipy_sparse(compiled, wrap, ascending, columns):
    """``B c`` and ``B^T v`` of the design rows, compiled (``geometry/_basis_rows.c``) and in
    numpy, against the same matrix in ``scipy.sparse`` CSR form (duplicated first columns,
    runs, gaps, rows out of order, wrapped columns). Each entry is a sum of at most N
    products; two orders of summation differ by at most ``2 N eps`` times the sum of the
    terms' magnitudes (Higham, the summation error bound, from memory), checked entry by
    entry with N the largest number of terms (the same order gives equal numbers)."""
    if compiled:
        pytest.importorskip("curvespeed.geometry._basis_rows")
    rows, rng = random_rows(columns + 2 * wrap + 4 * ascending, wrap, ascending)
    k, n, m = rows.values.shape[1] - 1, rows.n_columns, rows.first.size
    dense = sparse_of(rows)
    shape = (n,) if columns == 0 else (n, columns)
    coef = rng.standard_normal(shape)
    data = rng.standard_normal((m,) + shape[1:])
    got, expected = rows.times(coef, compiled), dense @ coef
    bound = 2 * (k + 1) * EPS * (abs(dense) @ np.abs(coef))
    assert got.shape == expected.shape and np.all(np.abs(got - expected) <= bound)
    got, expected = rows.transpose_times(data, compiled), dense.T @ data
    terms = int(np.max(np.bincount(dense.indices, minlength=n)))
    bound = 2 * terms * EPS * (abs(dense).T @ np.abs(data))
    assert got.shape == expected.shape and np.all(np.abs(got - expected) <= bound)
    assert np.max(np.abs(expected)) > 1.0                # the products are not all zero
    picked = np.array([5, 3, 400, 699])
    bound = 2 * (k + 1) * EPS * (abs(dense[picked]) @ np.abs(coef))
    got = rows.take_rows(picked).times(coef, compiled)
    assert np.all(np.abs(got - dense[picked] @ coef) <= bound)


@pytest.mark.parametrize("wrap", [False, True])
@pytest.mark.parametrize("ascending", [True, False])
def test_compiled_basis_rows_equal_numpy(wrap, ascending):
    """The compiled products take the numpy code's operations in its order (built without
    fused multiply-adds): equal to the last bit, for 1 to 16 columns (2: a plane curve's x and y,
    summed in registers) and an empty product."""
    kernel = pytest.importorskip("curvespeed.geometry._basis_rows")
    rows, rng = random_rows(11 + wrap + 2 * ascending, wrap, ascending)
    for shape in ((), (1,), (2,), (16,), (0,)):
        coef = rng.standard_normal((rows.n_columns,) + shape)
        data = rng.standard_normal((rows.first.size,) + shape)
        assert np.array_equal(rows.times(coef, True), rows.times(coef, False))
        assert np.array_equal(rows.transpose_times(data, True),
                              rows.transpose_times(data, False))
    assert rows.times(coef, True).shape == (rows.first.size, 0)    # the last shape, (0,)
    with pytest.raises(ValueError, match="wrong size or type"):
        kernel.times(rows.first, rows.values, np.ones(3), np.empty(rows.first.size),
                     rows.first.size, rows.values.shape[1], rows.n_columns, 1, wrap)
    with pytest.raises(ValueError, match="wrong size or type"):    # first columns as floats
        kernel.times(rows.first.astype(float), rows.values, np.ones(rows.n_columns),
                     np.empty(rows.first.size), rows.first.size, rows.values.shape[1],
                     rows.n_columns, 1, wrap)
    with pytest.raises(ValueError, match="a row reaches outside the columns"):
        kernel.times(rows.first + rows.n_columns, rows.values, np.ones(rows.n_columns),
                     np.empty(rows.first.size), rows.first.size, rows.values.shape[1],
                     rows.n_columns, 1, False)


def test_basis_rows_refuse_rows_outside_the_columns():
    from curvespeed.geometry.basis_rows import BasisRows

    with pytest.raises(ValueError, match="rows reach outside the 10 columns"):
        BasisRows(np.array([0, 5]), np.ones((2, 6)), 10)
    with pytest.raises(ValueError, match="2 rows' first columns for values of shape"):
        BasisRows(np.array([0, 1]), np.ones((3, 6)), 10)
    rows = BasisRows(np.array([0, 4]), np.ones((2, 6)), 10)
    with pytest.raises(ValueError, match="9 coefficients for 10 columns"):
        rows.times(np.ones(9))
    with pytest.raises(ValueError, match="3 data rows for 2 basis rows"):
        rows.transpose_times(np.ones(3))


def test_compiled_basis_values_equal_numpy():
    """The design rows' values by the kernel's Horner passes (point by point) are numpy's
    passes over the whole array (``uniform_spline.basis_values``, itself checked against
    scipy's BSpline in test_reference_geometry.py) to the last bit: every derivative of the
    quintic and cubic bases, at the interval's ends, its middle and random points, for knot
    intervals of several lengths; beyond the degree, zeros."""
    pytest.importorskip("curvespeed.geometry._basis_rows")
    from curvespeed.geometry.basis_rows import values_at

    rng = np.random.default_rng(3)
    tau = np.concatenate(([0.0, 1.0, 0.5], rng.uniform(0.0, 1.0, 2000)))
    for k in (3, 5):
        for nu in range(k + 2):
            for h in (1.0, 0.37, 2.5):
                got, ref = values_at(k, tau, nu, h, True), values_at(k, tau, nu, h, False)
                assert got.shape == (tau.size, k + 1) and got.flags.c_contiguous
                assert np.array_equal(got, ref), (k, nu, h)
                assert (nu > k) == (not np.any(got))
