"""Normal equations of the penalised spline fit on one knot grid (:mod:`.pspline`).

A quintic B-spline on uniform knots, with a penalty on the fourth differences of its
coefficients (Eilers and Marx, 1996): the banded system ``B^T W B + lam D^T D`` for corrections
to a baseline spline, assembled once per knot grid and solved for any smoothing weight ``lam``
(:class:`PenalisedSystem`), and the difference penalty itself. :mod:`.pspline` searches the
weight and the grid.
"""

from __future__ import annotations

import copy
import math

import numpy as np
from numpy.linalg import LinAlgError

from .band_cholesky import factor_band, solve_band, solve_factored
from .basis_rows import BasisRows
from .uniform_spline import UniformSpline, basis_values, locate

#: Degree of the fitted B-spline. Quintic: curvature (second derivative) is twice continuously
#: differentiable, so its rate of change along the route, which sets lateral jerk at constant
#: speed, is continuous too.
SPLINE_DEGREE = 5
#: Order of the coefficient differences the smoothing penalises (fourth differences ~ c'''').
PENALTY_ORDER = 4
class PenalisedSystem:
    """Normal equations of the P-spline on one knot grid, solved for any ``lam``.

    The unknowns are corrections ``delta`` to a baseline spline ``g`` whose coefficients lie on
    the points' chord polyline at the Greville abscissae (``g`` reproduces straight lines and is
    within noise and sagitta of the data). Solving for the small ``delta`` instead of the
    coefficients themselves keeps round-off proportional to the correction, not to the route's
    extent, when ``lam`` is large. The matrix ``B^T W B + lam D^T D`` is assembled as a cyclic
    band (entry ``[d, i]`` is row ``i``, column ``i + d`` modulo the size) and copied into LAPACK
    upper-band storage; periodic systems are first permuted to the order 0, n-1, 1, n-2, ...,
    which folds the wrap-around corners into a band of half-width ``2 * degree + 1``.
    """

    def __init__(self, u, values, weight, span, periodic, n_int, ceiling_ss):
        k = SPLINE_DEGREE
        self.periodic = bool(periodic)
        self._ceiling = ceiling_ss
        m, dims = values.shape
        h = span / n_int
        knots = h * np.arange(-k, n_int + k + 1, dtype=float)
        knots[k], knots[n_int + k] = 0.0, span
        self.knots = knots
        n = n_int if periodic else n_int + k

        # Basis values: on uniform knots every interval carries the same k+1 polynomial pieces.
        first, tau = locate(np.clip(u, 0.0, span) / h, n_int)
        vals_t = basis_values(k, tau)                      # (k+1, m): basis r at point i
        cols_t = first + np.arange(k + 1)[:, None]
        if periodic:
            cols_t %= n
        basis = BasisRows(first, vals_t.T, n, wrap=periodic)

        greville = np.convolve(knots[1:-1], np.ones(k) / k, mode="valid")[:n]
        if periodic:
            uu = np.concatenate((u - span, u, u + span))
            vv = np.concatenate((values, values, values))
        else:   # continue straight beyond the ends so the outer coefficients are near the data,
            # along the chord to the point about `reach` away (averages out the noise)
            reach = (k + 1) * h
            i = min(max(int(np.searchsorted(u, u[0] + reach)), 1), m - 1)
            j = max(min(int(np.searchsorted(u, u[-1] - reach)), m - 2), 0)
            start = values[0] - reach * (values[i] - values[0]) / (u[i] - u[0])
            end = values[-1] + reach * (values[-1] - values[j]) / (u[-1] - u[j])
            uu = np.concatenate(([u[0] - reach], u, [u[-1] + reach]))
            vv = np.vstack((start, values, end))
        baseline = np.column_stack([np.interp(greville, uu, vv[:, j]) for j in range(dims)])
        data = values - basis.times(baseline)

        w2 = np.broadcast_to(np.asarray(weight, dtype=float) ** 2, (m,))
        gram = np.zeros((k + 1, n))
        for r in range(k + 1):
            for r2 in range(r, k + 1):
                gram[r2 - r] += np.bincount(cols_t[r], weights=w2 * vals_t[r] * vals_t[r2],
                                            minlength=n)
        penalty = difference_penalty(n, periodic)
        self.lam0 = float(gram[0].sum() / penalty[0].sum())

        if periodic:
            order = np.empty(n, dtype=np.intp)
            order[0::2] = np.arange((n + 1) // 2)
            order[1::2] = n - 1 - np.arange(n // 2)
            pos = np.empty(n, dtype=np.intp)
            pos[order] = np.arange(n)
            d_idx, i_idx = np.indices((k + 1, n))
            pi, pj = pos[i_idx], pos[(i_idx + d_idx) % n]
            offset = np.abs(pi - pj)
            self.bandwidth = int(offset.max())
            where = (self.bandwidth - offset, np.maximum(pi, pj))
            self._gram_band = np.zeros((self.bandwidth + 1, n), order="F")
            self._penalty_band = np.zeros((self.bandwidth + 1, n), order="F")
            self._gram_band[where] = gram
            self._penalty_band[where] = penalty
            self._pos = pos
        else:
            self.bandwidth = k
            self._gram_band = np.zeros((k + 1, n), order="F")     # LAPACK's layout
            self._penalty_band = np.zeros((k + 1, n), order="F")
            for d in range(k + 1):
                self._gram_band[k - d, d:] = gram[d, : n - d]
                self._penalty_band[k - d, d:] = penalty[d, : n - d]
            self._pos = None
        self._n = n
        self._rhs = basis.transpose_times(w2[:, None] * data)    # B^T W (values - g(u))
        self._penalty_baseline = _apply_penalty(baseline, periodic)   # D^T D g
        self._baseline = baseline
        self._basis, self._data, self._w2 = basis, data, w2
        self._u = u
        self._cache: dict[float, tuple[np.ndarray, float]] = {}

    def _solve(self, rho: float) -> tuple[np.ndarray, float]:
        if rho not in self._cache:
            lam = self.lam0 * 10.0**rho
            band = self._gram_band + lam * self._penalty_band
            rhs = self._rhs - lam * self._penalty_baseline
            if self._pos is not None:
                permuted = np.empty_like(rhs)
                permuted[self._pos] = rhs
                rhs = permuted
            delta = solve_band(band, rhs, overwrite=True)
            if self._pos is not None:
                delta = delta[self._pos]
            resid = self._data - self._basis.times(delta)
            resid_ss = float(self._w2 @ np.sum(resid**2, axis=1))
            if resid_ss > self._ceiling * (1.0 + 1e-6):
                # More residual than the null-space fit, the most any lam can leave: round-off.
                raise LinAlgError("the banded solve lost accuracy")
            self._cache[rho] = (self._baseline + delta, resid_ss)
        return self._cache[rho]

    def residual(self, rho: float) -> float:
        return self._solve(rho)[1]

    def coefficients(self, rho: float) -> np.ndarray:
        return self._solve(rho)[0]

    @property
    def n_coefficients(self) -> int:
        return self._n

    def response(self, rho: float, values: np.ndarray) -> np.ndarray:
        """Coefficients (n, c) the smoother gives for other data ``values`` (m, c) at the same
        points and weights: ``(B^T W B + lam D^T D)^-1 B^T W values``, one banded Cholesky for
        all columns. The fit is linear in the data, so for noise replicates this is exactly
        the change of the fit the noise causes."""
        return self.solve_projected(self.factor(rho), self.project(values))

    def project(self, values: np.ndarray, overwrite: bool = False) -> np.ndarray:
        """``B^T W values``: the part of :meth:`response` that does not depend on ``lam``, to be
        shared by every smoothing weight on this knot grid (and, through
        :func:`halve_projection`, by the grids nested in it). ``overwrite``: ``values`` (float,
        C order) is weighted in place instead of in a copy."""
        if overwrite:
            values *= self._w2[:, None]
            return self._basis.transpose_times(values)
        return self._basis.transpose_times(self._w2[:, None] * values)

    def factor(self, rho: float) -> np.ndarray:
        """The banded Cholesky factor of ``B^T W B + lam D^T D``, to solve for any number of
        projected data (:meth:`solve_projected`), in LAPACK's upper band storage."""
        lam = self.lam0 * 10.0**rho
        band = self._gram_band + lam * self._penalty_band
        return factor_band(band, overwrite=True)

    def solve_projected(self, factor: np.ndarray, rhs: np.ndarray) -> np.ndarray:
        """:meth:`response` from a :meth:`factor` and a :meth:`project` (``rhs`` is kept)."""
        if self._pos is not None:
            permuted = np.empty_like(rhs)
            permuted[self._pos] = rhs
            rhs = permuted
        out = solve_factored(factor, rhs)
        return out if self._pos is None else out[self._pos]

    def release_points(self) -> None:
        """Drop what this system holds per point (the basis, the data): it can then still be
        factored and solved, for projections made on a finer grid, but not project or solve
        at a new weight."""
        self._basis = self._data = self._w2 = self._u = None

    def unbounded(self) -> "PenalisedSystem":
        """This system without the fit's residual ceiling, sharing its arrays (for smoothing
        at other weights on the same knot grid)."""
        other = copy.copy(self)
        other._ceiling = math.inf
        other._cache = dict(self._cache)
        return other

    def local_response(self, rho: float, values: np.ndarray, points: np.ndarray,
                       margin: float) -> tuple[UniformSpline, np.ndarray]:
        """The smoother's response to data ``values`` (len(points), c) that is zero at every
        point but ``points`` (indices, ascending), solved on the coefficients within ``margin``
        (parameter units) of those points only: the inverse of the banded normal matrix decays
        geometrically away from the data, by about e^-1 per smoothing length, so a margin of
        several smoothing lengths changes the response near the points by far less than its
        round-off. Returns the response as a spline valid on the points' span and its
        coefficients. Open (non-periodic) systems only."""
        if self._pos is not None:
            raise ValueError("local_response is for open systems")
        k = SPLINE_DEGREE
        h = self.knots[k + 1] - self.knots[k]
        n = self._n
        lo = max(int(np.floor((self._u[points[0]] - margin) / h)), 0)
        hi = min(int(np.ceil((self._u[points[-1]] + margin) / h)) + k + 1, n)
        lam = self.lam0 * 10.0**rho
        band = self._gram_band[:, lo:hi] + lam * self._penalty_band[:, lo:hi]
        rows = self._basis.take_rows(points)
        rhs = rows.transpose_times(self._w2[points, None] * values)[lo:hi]
        delta = solve_band(band, rhs, overwrite=True)
        return UniformSpline(self.knots[lo: hi + k + 1], delta, k), delta

    def weight_density(self) -> np.ndarray:
        """Data weight per coefficient (the diagonal of ``B^T W B``), for local smoothing widths."""
        diagonal = np.asarray(self._gram_band[self.bandwidth], dtype=float)
        return diagonal[self._pos] if self._pos is not None else diagonal.copy()


def _difference_stencil() -> np.ndarray:
    d = PENALTY_ORDER
    return np.array([(-1.0) ** (d - i) * math.comb(d, i) for i in range(d + 1)])


def difference_penalty(n: int, periodic: bool) -> np.ndarray:
    """``D^T D`` for ``PENALTY_ORDER``-th differences of ``n`` coefficients, as a cyclic band.

    Row ``r`` of ``D`` holds the stencil in columns ``r .. r + order`` (modulo ``n`` when
    periodic), so ``(D^T D)[i, i + d] = sum_a stencil[a] * stencil[a + d]`` over the rows
    ``r = i - a`` that exist.
    """
    stencil = _difference_stencil()
    order = PENALTY_ORDER
    band = np.zeros((SPLINE_DEGREE + 1, n))
    for d in range(order + 1):
        for a in range(order + 1 - d):
            if periodic:
                band[d] += stencil[a] * stencil[a + d]
            elif n > order:
                band[d, a: n - order + a] += stencil[a] * stencil[a + d]
    return band


def _apply_penalty(coef: np.ndarray, periodic: bool) -> np.ndarray:
    """``D^T D coef`` for coefficient arrays of shape (n, d)."""
    stencil = _difference_stencil()
    order = PENALTY_ORDER
    n = coef.shape[0]
    if periodic:
        diff = sum(stencil[a] * np.roll(coef, -a, axis=0) for a in range(order + 1))
        return sum(stencil[a] * np.roll(diff, a, axis=0) for a in range(order + 1))
    out = np.zeros_like(coef)
    if n <= order:
        return out
    diff = sum(stencil[a] * coef[a: n - order + a] for a in range(order + 1))
    for a in range(order + 1):
        out[a: n - order + a] += stencil[a] * diff
    return out

