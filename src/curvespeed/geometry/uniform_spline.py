"""Splines on uniform knots, as the penalised spline (:mod:`.pspline`) lays them out.

On uniform knots every knot interval carries the same ``k + 1`` polynomial pieces of the
B-splines that are nonzero on it, so a spline is evaluated from one small table of power-basis
coefficients (:func:`basis_polynomials`, exact from the cardinal B-spline's closed form) by
Horner's rule in the interval's local coordinate: a few passes over the points, and no general
B-spline library to load (importing scipy.interpolate, which imports scipy.optimize, was 0.2 to
0.3 s of every plan's start-up).
The test suite checks every function here against ``scipy.interpolate.BSpline``.
"""

from __future__ import annotations

import functools
import math

import numpy as np


@functools.cache
def basis_polynomials(k: int) -> np.ndarray:
    """Power-basis coefficients of the ``k + 1`` uniform B-splines of degree ``k`` on one knot
    interval: entry ``[p, r]`` multiplies ``tau**p`` (``tau`` in [0, 1]) in the B-spline ``r``
    of those nonzero there (``r = 0`` the one that ends on the interval).

    The cardinal B-spline ``N(x) = sum_i (-1)^i C(k+1, i) (x - i)_+^k / k!`` on [0, k+1]
    (Schoenberg's closed form, from memory; any spline text): B-spline ``r`` at ``tau`` is
    ``N(tau + k - r)``, whose terms ``i <= k - r`` are the nonzero ones there, expanded in
    ``tau`` by the binomial theorem, in exact arithmetic: integers over the common denominator
    ``k!``, each entry then rounded once (Python's int division is correctly rounded; the
    fractions module, a few ms of every plan's start-up, is not needed)."""
    table = [[0] * (k + 1) for _ in range(k + 1)]
    for r in range(k + 1):
        for i in range(k - r + 1):
            shift = k - r - i                       # (tau + shift)^k
            scale = (-1) ** i * math.comb(k + 1, i)           # over k!
            for p in range(k + 1):
                table[p][r] += scale * math.comb(k, p) * shift ** (k - p)
    return np.array([[v / math.factorial(k) for v in row] for row in table])


def derivative_table(k: int, nu: int, h: float) -> np.ndarray:
    """Power-basis coefficients of the ``nu``-th derivatives (``nu <= k``) of the ``k + 1``
    B-splines nonzero on a knot interval of length ``h``: row ``q`` multiplies ``tau**q``."""
    poly = basis_polynomials(k)
    # d^nu / dtau^nu of tau^p is p! / (p - nu)! tau^(p - nu); d tau / du = 1 / h
    return np.array([poly[p] * (math.perm(p, nu) / h**nu) for p in range(nu, k + 1)])


def basis_values(k: int, tau: np.ndarray, nu: int = 0, h: float = 1.0) -> np.ndarray:
    """The ``nu``-th derivatives of the ``k + 1`` B-splines nonzero on a knot interval of
    length ``h``, at local coordinates ``tau`` (0 to 1 across it): shape ``(k + 1, tau.size)``,
    row ``r`` as in :func:`basis_polynomials`. By Horner's rule on
    :func:`derivative_table`, in passes over the points."""
    tau = np.asarray(tau, dtype=float).ravel()
    if nu > k:
        return np.zeros((k + 1, tau.size))
    coef = derivative_table(k, nu, h)
    vals = np.repeat(coef[-1][:, None], tau.size, axis=1)
    for c in coef[-2::-1]:
        vals *= tau
        vals += c[:, None]
    return vals


def locate(rel: np.ndarray, n_int: int) -> tuple[np.ndarray, np.ndarray]:
    """The knot interval (0 to ``n_int - 1``, int64) of positions ``rel`` given in knot
    intervals from the first, and the local coordinate ``tau`` within it (0 to 1 inside)."""
    first = np.clip(np.floor(rel), 0, n_int - 1)
    return first.astype(np.int64), rel - first


class UniformSpline:
    """A spline of degree ``k`` with coefficients ``c`` (n, ...) on the uniform knots ``t``
    (n + k + 1 of them), zero-based like ``scipy.interpolate.BSpline(t, c, k,
    extrapolate=False)``: valid on ``[t[k], t[n]]``, NaN outside it."""

    def __init__(self, t: np.ndarray, c: np.ndarray, k: int):
        self.t = np.asarray(t, dtype=float)
        self.c = np.asarray(c, dtype=float)
        self.k = int(k)
        n = self.c.shape[0]
        if self.t.size != n + self.k + 1 or n <= self.k:
            raise ValueError(f"{self.t.size} knots do not fit {n} coefficients of degree {k}")
        self._start, self._end = float(self.t[self.k]), float(self.t[n])
        self._h = (self._end - self._start) / (n - self.k)

    def __call__(self, x, nu: int = 0) -> np.ndarray:
        """The ``nu``-th derivative at ``x`` (shape ``x.shape + c.shape[1:]``)."""
        x = np.asarray(x, dtype=float)
        flat = x.ravel()
        n_int = self.c.shape[0] - self.k
        first, tau = locate((flat - self._start) / self._h, n_int)
        vals = basis_values(self.k, tau, nu, self._h)
        # a column of coefficients at a time: gathers and products on contiguous 1-D arrays
        columns = self.c.reshape(self.c.shape[0], -1).T
        out = np.empty((columns.shape[0], flat.size))
        rows = [first + r for r in range(self.k + 1)]
        for column, total in zip(columns, out):
            np.multiply(vals[0], column[rows[0]], out=total)
            for r in range(1, self.k + 1):
                total += vals[r] * column[rows[r]]
        out[:, (flat < self._start) | (flat > self._end) | np.isnan(flat)] = np.nan
        return np.ascontiguousarray(out.T).reshape(x.shape + self.c.shape[1:])

    def derivative(self, nu: int = 1) -> "UniformSpline":
        """The spline of the ``nu``-th derivative (degree ``k - nu``, knots trimmed at both
        ends): coefficients ``k (c[i+1] - c[i]) / (t[i+k+1] - t[i+1])`` per differentiation
        (de Boor, A Practical Guide to Splines, from memory)."""
        spline = self
        for _ in range(nu):
            t, c, k = spline.t, spline.c, spline.k
            span = (t[k + 1: k + c.shape[0]] - t[1: c.shape[0]]).reshape(
                (-1,) + (1,) * (c.ndim - 1))
            spline = UniformSpline(t[1:-1], k * (c[1:] - c[:-1]) / span, k - 1)
        return spline


def design_rows(k: int, t: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Dense design matrix (x.size, n) of the degree-``k`` B-splines on the uniform knots
    ``t`` at ``x`` within ``[t[k], t[n]]`` (like ``BSpline.design_matrix(x, t, k)``)."""
    n = t.size - k - 1
    x = np.asarray(x, dtype=float).ravel()
    h = (float(t[n]) - float(t[k])) / (n - k)
    first, tau = locate((x - float(t[k])) / h, n - k)
    vals = basis_values(k, tau)
    out = np.zeros((x.size, n))
    rows = np.arange(x.size)
    for r in range(k + 1):
        out[rows, first + r] = vals[r]
    return out
