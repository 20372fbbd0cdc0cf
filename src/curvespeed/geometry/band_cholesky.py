"""Banded Cholesky factorisation and solves of symmetric positive definite systems.

Matrices and factors are held in LAPACK's band storage, shape ``(u + 1, n)`` for bandwidth
``u``: upper, ``band[u + i - j, j] = A[i, j]`` for ``i <= j`` (factor ``U``, ``A = U^T U``);
lower, ``band[i - j, j] = A[i, j]`` for ``i >= j`` (factor ``L = U^T``). Entries outside the
matrix are never read. The work is done by the compiled kernel ``_band_solve.c`` on the upper
band's columns, which in Fortran order are the contiguous rows it takes, for any number of
right-hand sides at once; a lower band is turned into the upper one by ``u + 1`` slice copies.
Without a C compiler at install scipy's LAPACK wrappers do the same work (imported only then:
loading scipy was about a quarter of a plan's process time).

A matrix that is not positive definite raises :class:`numpy.linalg.LinAlgError` (the class
scipy.linalg raises too), naming the order of the leading minor that failed.
"""

from __future__ import annotations

import numpy as np
from numpy.linalg import LinAlgError

try:
    from . import _band_solve
except ImportError:         # no C compiler at install: LAPACK through scipy
    _band_solve = None


def _check_band(band: np.ndarray) -> np.ndarray:
    band = np.asarray(band)
    if band.ndim != 2 or band.shape[0] < 1 or band.shape[1] < 1:
        raise ValueError(f"a band must be a 2-D array (bandwidth + 1, n), not shape {band.shape}")
    return band


def _to_upper(band: np.ndarray) -> np.ndarray:
    """Lower band storage to upper (of the same matrix, or of a lower factor's transpose), in
    Fortran order: ``out[u - d, j + d] = band[d, j]``."""
    u, n = band.shape[0] - 1, band.shape[1]
    out = np.zeros((u + 1, n), order="F")
    for d in range(u + 1):
        out[u - d, d:] = band[d, : n - d]
    return out


def _to_lower(upper: np.ndarray) -> np.ndarray:
    """Upper band storage to lower: :func:`_to_upper` undone."""
    u, n = upper.shape[0] - 1, upper.shape[1]
    out = np.zeros((u + 1, n), order="F")
    for d in range(u + 1):
        out[d, : n - d] = upper[u - d, d:]
    return out


def factor_band(band, lower: bool = False, overwrite: bool = False) -> np.ndarray:
    """The Cholesky factor of the symmetric positive definite band ``band`` (LAPACK storage,
    upper or ``lower``), in the same storage (Fortran order). ``overwrite``: a float64 upper
    band in Fortran order is factored in place. Raises LinAlgError if the matrix is not
    positive definite."""
    band = _check_band(band)
    if _band_solve is None:
        from scipy.linalg import cholesky_banded
        return cholesky_banded(band, lower=lower, overwrite_ab=overwrite, check_finite=False)
    if lower:
        upper = _to_upper(band)
    elif overwrite and band.dtype == np.float64 and band.flags.f_contiguous:
        upper = band
    else:
        upper = np.array(band, dtype=float, order="F")
    u, n = upper.shape[0] - 1, upper.shape[1]
    failed = _band_solve.factor(upper.T, n, u)
    if failed:
        raise LinAlgError(f"the banded matrix is not positive definite (its leading minor of "
                          f"order {failed} is not)")
    return _to_lower(upper) if lower else upper


def solve_factored(factor, rhs, lower: bool = False) -> np.ndarray:
    """``x`` with ``A x = rhs`` from the Cholesky factor of ``A`` (:func:`factor_band`, the same
    ``lower``); ``rhs`` of shape ``(n,)`` or ``(n, c)`` is not changed."""
    factor = _check_band(factor)
    rhs = np.asarray(rhs)
    if rhs.ndim not in (1, 2) or rhs.shape[0] != factor.shape[1]:
        raise ValueError(f"right-hand side of shape {rhs.shape} for a band of "
                         f"{factor.shape[1]} columns")
    if _band_solve is None:
        from scipy.linalg import cho_solve_banded
        return cho_solve_banded((factor, lower), rhs, check_finite=False)
    upper = _to_upper(factor) if lower else factor
    rows = np.ascontiguousarray(upper.T, dtype=float)
    out = np.array(rhs, dtype=float, order="C")             # solved in place, by rows
    if out.size:
        n, u = rows.shape[0], rows.shape[1] - 1
        _band_solve.solve(rows, out, n, u, out.size // n)
    return out


def solve_band(band, rhs, lower: bool = False, overwrite: bool = False) -> np.ndarray:
    """``x`` with ``A x = rhs`` for the symmetric positive definite band ``A`` (LAPACK storage):
    one factorisation and one solve. ``overwrite`` as for :func:`factor_band`."""
    factor = factor_band(band, lower=lower, overwrite=overwrite)
    return solve_factored(factor, rhs, lower=lower)
