"""The compiled elimination of fixed stations (``solvers/_qp_rows.c``) is the numpy functions'
twin: ``reduce_tables`` gives the same compressed rows and sides to the last bit with and
without it, on the convex solver's own tables (bundled routes: bounds, chords, power tangents,
jerk and lateral-jerk rows, a closed loop) and on random tables with absent slots, repeated
fixed stations, infinite sides and rows left with no free station. The numpy functions stay in
``solvers/qp_rows.py`` as the reference (and are themselves checked against scipy.sparse in
``test_reference_qp_rows.py``)."""

from __future__ import annotations

import numpy as np
import pytest
from test_reference_qp_rows import CASES, _iterate, _problem

from curvespeed.limits import Limits
from curvespeed.solvers import banded_ipm, qp_rows

pytestmark = pytest.mark.skipif(qp_rows._compiled is None, reason="compiled kernel not built")


def _both(tables, fixed, values, monkeypatch):
    fast = qp_rows.reduce_tables(tables, fixed, values)
    with monkeypatch.context() as mp:
        mp.setattr(qp_rows, "_compiled", None)
        slow = qp_rows.reduce_tables(tables, fixed, values)
    return fast, slow


def _assert_same(fast, slow):
    names = ("indptr", "indices", "data", "lo", "up")
    for name, a, b in zip(names, fast, slow):
        assert a.dtype == b.dtype, name
        # bit for bit, the signs of zeros included
        assert a.shape == b.shape and np.array_equal(a.view(np.uint8), b.view(np.uint8)), name


@pytest.mark.parametrize("case", range(len(CASES)))
def test_compiled_reduction_matches_numpy_on_the_solvers_tables(case, monkeypatch):
    route, limits, comfort, stop = CASES[case]
    lay, b_hat, builder, _ = _iterate(_problem(route, limits, stop), comfort)
    tables = builder.rows(b_hat)
    fast, slow = _both(tables, lay.fixed, lay.fixed_value, monkeypatch)
    assert fast[0][-1] > 0          # rows were kept: the comparison is not of empty arrays
    _assert_same(fast, slow)


@pytest.mark.parametrize("seed", range(6))
def test_compiled_reduction_matches_numpy_on_random_tables(seed, monkeypatch):
    rng = np.random.default_rng(seed)
    nv = 40
    fixed = rng.random(nv) < 0.4
    values = np.where(fixed, rng.normal(size=nv), 0.0)
    tables = []
    for width in (1, 2, 3):
        m = 60
        cols = rng.integers(0, nv, size=(m, width))
        present = rng.random((m, width)) < 0.8
        cols = np.where(present, cols, -1)
        vals = np.where(present, rng.normal(size=(m, width)), 0.0)
        vals[rng.random((m, width)) < 0.05] = -0.0
        lo = np.where(rng.random(m) < 0.3, -np.inf, rng.normal(size=m))
        up = np.where(rng.random(m) < 0.3, np.inf, lo + rng.random(m))
        tables.append((cols, present, vals, lo, up))
    fast, slow = _both(tables, fixed, values, monkeypatch)
    # some rows dropped (no free station or no finite side) and some kept
    assert 0 < fast[0].size - 1 < 180
    _assert_same(fast, slow)


def test_compiled_reduction_refuses_a_station_out_of_range():
    cols = np.array([[0, 5]])
    with pytest.raises(ValueError, match="out of range"):
        qp_rows.reduce_tables([(cols, cols >= 0, np.ones((1, 2)), np.zeros(1), np.ones(1))],
                              np.zeros(3, dtype=bool), np.zeros(3))


def _same_bits(a, b, name):
    a, b = np.atleast_1d(np.asarray(a)), np.atleast_1d(np.asarray(b))
    assert a.dtype == b.dtype and a.shape == b.shape, name
    assert np.array_equal(a.view(np.uint8), b.view(np.uint8)), name


@pytest.mark.parametrize("case", range(len(CASES)))
@pytest.mark.parametrize("centred", [True, False])
def test_compiled_preparation_and_checks_match_numpy(case, centred, monkeypatch):
    """The banded method's preparation of a QP (centred and scaled variables, rows at unit
    largest coefficient, kinds, band), its starting point, and what its answer is judged by
    (A x, A'y, the variables' box):
    the same bits with the compiled passes and with numpy alone, on the solver's own QPs (the
    closed loop's band is reordered: there both take the numpy path)."""
    route, limits, comfort, stop = CASES[case]
    lay, b_hat, builder, _ = _iterate(_problem(route, limits, stop), comfort)
    qp, _ = builder.reduced(b_hat)
    free = ~lay.fixed
    centre, scale = (b_hat[free], np.maximum(builder.b_env[free], 1.0)) if centred else (None,
                                                                                         None)
    fast = banded_ipm._prepare_rows(qp, centre, scale)
    rng = np.random.default_rng(case)
    x, y = rng.normal(size=qp.n), rng.normal(size=qp.m)
    fast_products = banded_ipm._products(fast, x, y)
    fast_start, fast_box = banded_ipm._start(fast), banded_ipm._box_extent(fast)
    with monkeypatch.context() as mp:
        mp.setattr(qp_rows, "_compiled", None)
        slow = banded_ipm._prepare_rows(qp, centre, scale)
        slow_products = banded_ipm._products(slow, x, y)
        slow_start, slow_box = banded_ipm._start(slow), banded_ipm._box_extent(slow)
    for name, a, b in zip(("x", "sl", "su", "zl", "zu"), fast_start, slow_start):
        _same_bits(a, b, name)
    _same_bits(fast_box, slow_box, "box extent")
    assert fast.kd == slow.kd
    for name in ("indptr", "indices", "data", "lo", "up", "kind", "Pb", "q"):
        _same_bits(getattr(fast, name), getattr(slow, name), name)
    assert (fast.inverse is None) == (slow.inverse is None)
    for name, a, b in zip(("A x", "A'y"), fast_products, slow_products):
        _same_bits(a, b, name)
    assert np.any(fast.kind == 3) and np.any(fast.kind == 2)    # both kinds of rows seen


@pytest.mark.parametrize("seed", range(4))
def test_compiled_preparation_matches_numpy_on_random_rows(seed, monkeypatch):
    """Random banded rows of 0-3 entries with equalities, one-sided and free rows, zero
    coefficients and rows of zeros (unit norm kept), centred and scaled; the starting point
    and the variables' box on them."""
    rng = np.random.default_rng(100 + seed)
    n, m = 30, 90
    counts = rng.integers(0, 4, size=m)
    indptr = np.concatenate(([0], np.cumsum(counts))).astype(np.int64)
    first = rng.integers(0, n - 3, size=m)
    indices = np.concatenate([f + np.sort(rng.choice(3, c, replace=False))
                              for f, c in zip(first, counts)]).astype(np.int64)
    data = rng.normal(size=indices.size)
    data[rng.random(data.size) < 0.1] = 0.0
    lo = np.where(rng.random(m) < 0.3, -np.inf, rng.normal(size=m))
    up = np.where(rng.random(m) < 0.3, np.inf, lo + rng.random(m))
    eq = rng.random(m) < 0.15
    up[eq] = lo[eq]                     # equalities (lo == up)
    diag = np.arange(n)
    qp = qp_rows.RowQP(n, indptr, indices, data, lo, up, diag, diag, rng.random(n) + 0.5,
                       rng.normal(size=n))
    centre, scale = rng.normal(size=n), rng.random(n) + 0.5
    fast = banded_ipm._prepare_rows(qp, centre, scale)
    with monkeypatch.context() as mp:
        mp.setattr(qp_rows, "_compiled", None)
        slow = banded_ipm._prepare_rows(qp, centre, scale)
    assert fast.kd == slow.kd and np.any(fast.kind == 4) and np.any(fast.kind == 0)
    for name in ("indptr", "indices", "data", "lo", "up", "kind", "Pb", "q"):
        _same_bits(getattr(fast, name), getattr(slow, name), name)
    # the starting point and the variables' box (rows of one entry, both signs, equalities)
    fast_start, fast_box = banded_ipm._start(fast), banded_ipm._box_extent(fast)
    with monkeypatch.context() as mp:
        mp.setattr(qp_rows, "_compiled", None)
        slow_start, slow_box = banded_ipm._start(slow), banded_ipm._box_extent(slow)
    for name, a, b in zip(("x", "sl", "su", "zl", "zu"), fast_start, slow_start):
        _same_bits(a, b, name)
    _same_bits(fast_box, slow_box, "box extent")


TAKE_CASES = [CASES[0], ("test_loop.geojson", Limits(), 0.0, 100.0)]   # open; a loop


@pytest.mark.parametrize("case", range(len(TAKE_CASES)))
def test_compiled_take_matches_numpy(case, monkeypatch):
    """A batch cut from the solver's QP (RowQP.take): the same arrays with the compiled copies
    and with numpy, for blocks in order and (as a loop's may be) out of order."""
    route, limits, comfort, stop = TAKE_CASES[case]
    lay, b_hat, builder, _ = _iterate(_problem(route, limits, stop), comfort)
    qp, _ = builder.reduced(b_hat)
    blocks = qp_rows.blocks_of(qp, lay.closed)
    assert len(blocks) >= 2
    for chosen in (blocks[:2], blocks[1::-1]):
        cols = np.concatenate(chosen)
        inside = np.isin(np.arange(qp.n), cols)
        first = qp.indices[qp.indptr[:-1]]
        rows = np.flatnonzero(inside[first])[::-1]        # any order is kept as given
        fast = qp.take(cols, rows)
        with monkeypatch.context() as mp:
            mp.setattr(qp_rows, "_compiled", None)
            slow = qp.take(cols, rows)
        assert fast.n == slow.n == cols.size and fast.m == rows.size
        for name in RowQP_FIELDS:
            _same_bits(getattr(fast, name), getattr(slow, name), name)


RowQP_FIELDS = ("indptr", "indices", "data", "lo", "up", "prow", "pcol", "pval", "q")
