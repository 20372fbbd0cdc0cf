"""Sorted distinct values, medians and percentiles, without numpy's masked-array module.

numpy's ``unique`` (without indices), ``median`` and ``percentile`` check their input for masked
arrays and so import ``numpy.ma`` on first use: about 20 ms of every ``plan`` process's start-up
(measured with ``python -X importtime``), for a module the plan never uses. These three give
numpy's values to the bit on the plain arrays curvespeed passes them (floats and integers; a NaN
gives NaN, as in numpy; ``distinct`` is for NaN-free input). ``tests/test_reference_order_stats.py`` compares
them with numpy itself.
"""

from __future__ import annotations

import math

import numpy as np


def distinct(a) -> np.ndarray:
    """The sorted distinct values of ``a`` (flattened): ``np.unique(a)`` for NaN-free input."""
    s = np.sort(np.ravel(np.asarray(a)))
    if s.size < 2:
        return s
    keep = np.empty(s.size, dtype=bool)
    keep[0] = True
    np.not_equal(s[1:], s[:-1], out=keep[1:])
    return s[keep]


def median(a) -> float:
    """The median of ``a`` (flattened), as ``np.median(a)`` computes it, to the bit: the middle
    order statistic, or the mean of the two middle ones; NaN for an empty ``a`` (numpy's value,
    without its warning)."""
    x = np.ravel(np.asarray(a, dtype=float))
    n = x.size
    if n == 0 or np.isnan(x).any():
        return math.nan
    half = n // 2
    if n % 2:
        return float(np.partition(x, half)[half])
    part = np.partition(x, (half - 1, half))
    return (float(part[half - 1]) + float(part[half])) / 2.0


def percentile(a, q: float) -> float:
    """The ``q``-th percentile (0-100) of the finite values ``a`` by linear interpolation
    between the order statistics, as ``np.percentile(a, q)`` computes it (its default method,
    Hyndman & Fan's definition 7), to the bit.

    Raises ``ValueError`` for an empty ``a`` or ``q`` outside [0, 100].
    """
    x = np.ravel(np.asarray(a, dtype=float))
    if x.size == 0:
        raise ValueError("percentile of no values")
    if not 0.0 <= q <= 100.0:
        raise ValueError(f"percentile must lie in [0, 100] (got {q!r})")
    if np.isnan(x).any():
        return math.nan
    n, f = x.size, float(q) / 100.0
    virtual = (n - 1) * f                   # numpy's index into the order statistics
    if virtual >= n - 1:
        return float(np.max(x))
    lower = math.floor(virtual)
    t = virtual - lower
    part = np.partition(x, (lower, lower + 1))
    lo, hi = float(part[lower]), float(part[lower + 1])
    diff = hi - lo
    # numpy's lerp: from the nearer end, so t = 1 gives the upper value exactly
    return hi - diff * (1.0 - t) if t >= 0.5 else lo + diff * t


__all__ = ["distinct", "median", "percentile"]
