"""The alignment's compiled optimal partitioning (``geometry/_partition.c``) is the Python
loop's twin: the same boundaries, exactly, on invented curvature with steps, kinks and noise.
The Python loop stays in ``geometry/alignment.py`` as the reference."""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.geometry import alignment

try:
    from curvespeed.geometry import _partition as compiled
except ImportError:         # no C compiler at install
    compiled = None

pytestmark = pytest.mark.skipif(compiled is None, reason="compiled partitioning not built")


def _series(seed: int, n: int) -> np.ndarray:
    """Invented piecewise-linear curvature (steps and kinks) plus smoothed noise."""
    rng = np.random.default_rng(seed)
    x = np.arange(n, dtype=float)
    knots = np.sort(rng.choice(np.arange(20, n - 20), size=8, replace=False))
    values = rng.uniform(-0.02, 0.02, size=knots.size + 2)
    y = np.interp(x, np.concatenate(([0], knots, [n - 1])), values)
    y[knots[2]:] += 0.01                                   # a step
    noise = np.convolve(rng.standard_normal(n + 8), np.ones(9) / 9, mode="valid")[:n]
    return y + 2e-4 * noise


@pytest.mark.parametrize("seed, n, gap", [(0, 400, 3), (1, 2000, 6), (2, 5000, 2), (3, 60, 1)])
def test_compiled_partition_matches_python_exactly(seed, n, gap):
    y = _series(seed, n)
    deltas = 2e-4 * np.random.default_rng(seed + 100).standard_normal((n, 4))
    fits = alignment._LineFits(y, deltas)
    sigma, corr = 2e-4, max(1.0, gap / 2)
    fast = alignment._partition(fits, n, gap, sigma, corr)
    slow = alignment._partition_python(fits, n, gap, sigma, corr)
    assert fast == slow
    assert fast[0] == 0 and fast[-1] == n and len(fast) >= 3     # the steps were found


def test_compiled_partition_refuses_arrays_of_the_wrong_size():
    c = np.zeros(11)
    with pytest.raises(ValueError, match="wrong size"):
        compiled.partition(c, c, c, c, c, c[:5], 10, 1, 8 * math.log(10), 1.0, 6, 4000,
                           np.zeros(11, dtype=np.int64))
