"""Design matrices of splines on uniform knots, kept as what they are: each row (a point) holds
``k + 1`` consecutive B-spline values, so a row is its first column and those values.

The products a penalised spline fit needs, ``B c`` (the spline at the points) and ``B^T v``
(data projected onto the basis), and the rows' values themselves (:func:`values_at`), are
compiled in ``_basis_rows.c``; the numpy code here is its
reference, the same operations in the same order (the two agree to the last bit), and runs
where no C compiler was found at install. No general sparse-matrix library is loaded
(importing scipy.sparse pulls in scipy's array layer, about a quarter of a plan's process
time).
"""

from __future__ import annotations

import numpy as np

from .uniform_spline import basis_values, derivative_table

try:
    from . import _basis_rows
except ImportError:         # no C compiler at install: the numpy code below
    _basis_rows = None


class BasisRows:
    """The design matrix ``B`` (``first.size`` rows, ``n_columns`` columns) whose row ``i`` is
    ``values[i, r]`` in column ``first[i] + r`` (``r = 0 .. k``), wrapped modulo ``n_columns``
    when ``wrap`` (a periodic spline's coefficients)."""

    def __init__(self, first: np.ndarray, values: np.ndarray, n_columns: int,
                 wrap: bool = False):
        first = np.ascontiguousarray(first, dtype=np.int64)
        values = np.ascontiguousarray(values, dtype=float)
        if values.ndim != 2 or values.shape[0] != first.size or first.ndim != 1:
            raise ValueError(f"{first.size} rows' first columns for values of shape "
                             f"{values.shape}")
        width = values.shape[1]
        if first.size and (first.min() < 0 or (not wrap and first.max() + width > n_columns)):
            raise ValueError(f"rows reach outside the {n_columns} columns")
        self.first, self.values = first, values
        self.n_columns, self.wrap = int(n_columns), bool(wrap)

    @property
    def shape(self) -> tuple[int, int]:
        return self.first.size, self.n_columns

    def _columns(self, r: int) -> np.ndarray:
        cols = self.first + r
        return cols % self.n_columns if self.wrap else cols

    def times(self, coef: np.ndarray, compiled: bool | None = None) -> np.ndarray:
        """``B coef`` for ``coef`` of shape (n_columns,) or (n_columns, d): each row's terms
        summed in column order from zero. ``compiled``: by the kernel (default: when it was
        built) or by numpy."""
        coef = np.asarray(coef, dtype=float)
        if coef.shape[0] != self.n_columns:
            raise ValueError(f"{coef.shape[0]} coefficients for {self.n_columns} columns")
        m, width = self.values.shape
        d = coef.size // self.n_columns
        out = np.zeros((m,) + coef.shape[1:])
        if _use_kernel(compiled):
            _basis_rows.times(self.first, self.values, np.ascontiguousarray(coef), out, m,
                              width, self.n_columns, d, self.wrap)
            return out
        flat, columns = out.reshape(m, d), coef.reshape(self.n_columns, d)
        for r in range(width):
            flat += self.values[:, r, None] * columns[self._columns(r)]
        return out

    def transpose_times(self, data: np.ndarray, compiled: bool | None = None) -> np.ndarray:
        """``B^T data`` for ``data`` of shape (rows,) or (rows, d): the rows' terms added in
        row order, each row's in column order, from zero. ``compiled`` as for :meth:`times`."""
        data = np.asarray(data, dtype=float)
        m, width = self.values.shape
        if data.shape[0] != m:
            raise ValueError(f"{data.shape[0]} data rows for {m} basis rows")
        d = data.size // m if m else 0
        out = np.zeros((self.n_columns,) + data.shape[1:])
        if _use_kernel(compiled):
            _basis_rows.transpose_times(self.first, self.values, np.ascontiguousarray(data),
                                        out, m, width, self.n_columns, d, self.wrap)
            return out
        flat, rows = out.reshape(self.n_columns, d), data.reshape(m, d)
        cols = np.column_stack([self._columns(r) for r in range(width)]).ravel()
        for j in range(d):          # bincount adds its weights in order, from zero
            flat[:, j] += np.bincount(cols, weights=(self.values * rows[:, j, None]).ravel(),
                                      minlength=self.n_columns)
        return out

    def take_rows(self, rows: np.ndarray) -> "BasisRows":
        """The matrix of the rows ``rows`` only."""
        return BasisRows(self.first[rows], self.values[rows], self.n_columns, self.wrap)


def values_at(k: int, tau: np.ndarray, nu: int, h: float,
              compiled: bool | None = None) -> np.ndarray:
    """Design rows' values: :func:`.uniform_spline.basis_values` at ``tau`` as rows (shape
    ``(tau.size, k + 1)``, C order), by the kernel's Horner passes point by point (default:
    when it was built) or by numpy's over the whole array and a transposed copy, the
    reference: the same operations, the same numbers."""
    tau = np.ascontiguousarray(tau, dtype=float).ravel()
    if not _use_kernel(compiled) or nu > k:
        return np.ascontiguousarray(basis_values(k, tau, nu, h).T)
    table = derivative_table(k, nu, h)
    out = np.empty((tau.size, k + 1))
    _basis_rows.values(tau, table, out, tau.size, table.shape[0], k + 1)
    return out


def _use_kernel(compiled: bool | None) -> bool:
    if compiled is None:
        return _basis_rows is not None
    if compiled and _basis_rows is None:
        raise RuntimeError("the compiled basis-row kernel was not built")
    return compiled
