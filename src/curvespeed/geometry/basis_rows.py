"""Design matrices of splines on uniform knots, kept as what they are: each row (a point) holds
``k + 1`` consecutive B-spline values, so a row is its first column and those values.

The products a penalised spline fit needs, ``B c`` (the spline at the points) and ``B^T v``
(data projected onto the basis), are ``k + 1`` passes over the points in numpy; no general
sparse-matrix library is loaded (importing scipy.sparse pulls in scipy's array layer, about a
quarter of a plan's process time).
"""

from __future__ import annotations

import numpy as np


class BasisRows:
    """The design matrix ``B`` (``first.size`` rows, ``n_columns`` columns) whose row ``i`` is
    ``values[i, r]`` in column ``first[i] + r`` (``r = 0 .. k``), wrapped modulo ``n_columns``
    when ``wrap`` (a periodic spline's coefficients)."""

    def __init__(self, first: np.ndarray, values: np.ndarray, n_columns: int,
                 wrap: bool = False):
        first = np.asarray(first, dtype=np.int64)
        values = np.asarray(values, dtype=float)
        if values.ndim != 2 or values.shape[0] != first.size:
            raise ValueError(f"{first.size} rows' first columns for values of shape "
                             f"{values.shape}")
        width = values.shape[1]
        if first.size and (first.min() < 0 or (not wrap and first.max() + width > n_columns)):
            raise ValueError(f"rows reach outside the {n_columns} columns")
        self.first, self.n_columns, self.wrap = first, int(n_columns), bool(wrap)
        self.by_offset = np.ascontiguousarray(values.T)     # (k + 1, rows): one pass each
        # B^T v sums each column's share over runs of rows with the same first column: the
        # rows in ascending order of it (the points along the route already are)
        ascending = first.size < 2 or bool(np.all(first[1:] >= first[:-1]))
        self._order = None if ascending else np.argsort(first, kind="stable")
        ordered = first if ascending else first[self._order]
        self._starts = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
        self._run_first = ordered[self._starts]

    @property
    def shape(self) -> tuple[int, int]:
        return self.first.size, self.n_columns

    def _columns(self, cols: np.ndarray) -> np.ndarray:
        return cols % self.n_columns if self.wrap else cols

    def times(self, coef: np.ndarray) -> np.ndarray:
        """``B coef`` for ``coef`` of shape (n_columns,) or (n_columns, d): each row's terms
        summed in column order from the first."""
        coef = np.asarray(coef, dtype=float)
        if coef.shape[0] != self.n_columns:
            raise ValueError(f"{coef.shape[0]} coefficients for {self.n_columns} columns")
        tail = (slice(None),) + (None,) * (coef.ndim - 1)
        out = None
        for r, vals in enumerate(self.by_offset):
            term = vals[tail] * coef[self._columns(self.first + r)]
            if out is None:
                out = term
            else:
                out += term
        return out

    def transpose_times(self, data: np.ndarray) -> np.ndarray:
        """``B^T data`` for ``data`` of shape (rows,) or (rows, d)."""
        data = np.asarray(data, dtype=float)
        if data.shape[0] != self.first.size:
            raise ValueError(f"{data.shape[0]} data rows for {self.first.size} basis rows")
        out = np.zeros((self.n_columns,) + data.shape[1:])
        if not self.first.size:
            return out
        by_offset = self.by_offset
        if self._order is not None:
            data, by_offset = data[self._order], by_offset[:, self._order]
        tail = (slice(None),) + (None,) * (data.ndim - 1)
        for r, vals in enumerate(by_offset):
            runs = np.add.reduceat(vals[tail] * data, self._starts, axis=0)
            out[self._columns(self._run_first + r)] += runs      # distinct columns per r
        return out

    def take_rows(self, rows: np.ndarray) -> "BasisRows":
        """The matrix of the rows ``rows`` only."""
        return BasisRows(self.first[rows], self.by_offset[:, rows].T, self.n_columns, self.wrap)
