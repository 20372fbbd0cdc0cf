"""curvespeed.order_stats against numpy itself (the reference): the same values to the bit.

numpy's ``median``, ``percentile`` (its default linear method) and ``unique`` are the reference;
order_stats only avoids their import of numpy.ma, so any difference, even in the last bit, is a
defect: every comparison below is exact.
"""

import numpy as np
import pytest

from curvespeed.order_stats import distinct, median, percentile


def samples():
    rng = np.random.default_rng(20261203)
    for n in (1, 2, 3, 4, 5, 10, 11, 100, 1001):
        yield rng.normal(size=n)                                  # distinct values
        yield rng.integers(0, 4, size=n).astype(float)            # many ties
        yield np.exp(rng.normal(scale=8.0, size=n))               # wide range of magnitudes
    yield np.array([1e300, -1e300, 3.0, 3.0])                     # extreme values


@pytest.mark.parametrize("q", [0.0, 1.0, 25.0, 50.0, 75.0, 90.0, 95.0, 99.0, 100.0, 33.3])
def test_percentile_is_numpys_to_the_bit(q):
    for x in samples():
        assert percentile(x, q) == np.percentile(x, q)


def test_median_is_numpys_to_the_bit():
    for x in samples():
        assert median(x) == np.median(x)
    assert median([3, 1, 2, 10]) == np.median([3, 1, 2, 10])         # integers, even count


def test_nan_gives_nan_as_in_numpy():
    x = np.array([1.0, np.nan, 2.0])
    assert np.isnan(median(x)) and np.isnan(np.median(x))
    assert np.isnan(percentile(x, 90)) and np.isnan(np.percentile(x, 90))
    assert np.isnan(median([]))


def test_percentile_refuses_what_has_no_percentile():
    with pytest.raises(ValueError, match="no values"):
        percentile([], 50)
    with pytest.raises(ValueError, match=r"\[0, 100\]"):
        percentile([1.0], 101)


def test_distinct_is_numpys_unique():
    rng = np.random.default_rng(7)
    for x in (rng.integers(0, 9, size=200), rng.integers(-3, 3, size=(4, 5)),
              np.round(rng.normal(size=50), 1), np.array([], dtype=np.intp), np.array([5])):
        got, want = distinct(x), np.unique(x)
        assert got.dtype == want.dtype and np.array_equal(got, want)
