"""The banded order of a QP whose rows wrap around a closed loop, against scipy's reverse
Cuthill-McKee (scipy.sparse.csgraph, the reference library), and the compiled search against its
numpy reference."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import reverse_cuthill_mckee
from test_reference_banded_ipm import random_banded_qp, route_qp

from curvespeed.solvers import band_order, qp_rows
from curvespeed.solvers.banded_ipm import _row_qp


def _adjacency(rng, n: int, m: int):
    a, b = rng.integers(0, n, m), rng.integers(0, n, m)
    a, b = np.concatenate((a, b)), np.concatenate((b, a))
    neighbours = b[np.argsort(a, kind="stable")]
    start = np.concatenate(([0], np.cumsum(np.bincount(a, minlength=n))))
    return start.astype(np.int64), neighbours.astype(np.int64)


@pytest.mark.skipif(qp_rows._compiled is None, reason="the compiled kernel is not built")
@pytest.mark.parametrize("seed", range(4))
def test_compiled_search_equals_the_numpy_search(seed):
    # graphs of 1-80 columns, from none to many edges: single and many parts, loops, repeats
    rng = np.random.default_rng(seed)
    for _ in range(100):
        n = int(rng.integers(1, 80))
        start, neighbours = _adjacency(rng, n, int(rng.integers(0, 3 * n)))
        expected = band_order.far_order_numpy(n, start, neighbours)
        order = np.empty(n, dtype=np.int64)
        qp_rows._compiled.search_order(start, neighbours, order)
        np.testing.assert_array_equal(order, expected)
        np.testing.assert_array_equal(np.sort(order), np.arange(n))


def _bandwidth_in(qp, perm) -> int:
    inverse = np.empty(qp.n, dtype=np.intp)
    inverse[perm] = np.arange(qp.n)
    out = band_order.permuted(qp, qp.prow, qp.pcol, qp.pval, qp.data, qp.q, inverse)
    return band_order.bandwidth(out[0], out[1], out[3], out[4])


def _rcm(qp):
    A = sp.csr_matrix((qp.data, qp.indices, qp.indptr), shape=(qp.m, qp.n))
    P = sp.csr_matrix((qp.pval, (qp.prow, qp.pcol)), shape=(qp.n, qp.n))
    return reverse_cuthill_mckee((abs(A).T @ abs(A) + abs(P)).tocsr(), symmetric_mode=True)


@pytest.mark.parametrize("seed", range(6))
def test_wrapped_rows_get_a_band_as_narrow_as_reverse_cuthill_mckee_gives(seed):
    # rows of up to kd+1 neighbouring columns that wrap from the last columns to the first: in
    # column order the band is the whole QP; both orders make it 2 kd (measured equal)
    rng = np.random.default_rng(seed)
    P, q, A, lo, up = random_banded_qp(rng, int(rng.integers(20, 200)),
                                       kd=int(rng.integers(1, 4)), wrap=True)
    qp = _row_qp(P, q, A, lo, up)
    ours = band_order.level_order(qp, qp.prow, qp.pcol)
    assert _bandwidth_in(qp, np.arange(qp.n)) > 2 * 3
    assert _bandwidth_in(qp, ours) <= _bandwidth_in(qp, _rcm(qp))


def test_the_bundled_loops_qp_is_ordered_as_narrow_as_reverse_cuthill_mckee_orders_it():
    # the convex solver's QP of the bundled loop: its free stations, split by the fixed ones,
    # wrap from the loop's end to its start (band 133 in column order); both orders give 2
    P, q, A, lo, up, _, _ = route_qp("test_loop.geojson", None)
    qp = _row_qp(P, q, A, lo, up)
    ours = band_order.level_order(qp, qp.prow, qp.pcol)
    np.testing.assert_array_equal(np.sort(ours), np.arange(qp.n))
    assert _bandwidth_in(qp, ours) <= _bandwidth_in(qp, _rcm(qp))
    assert _bandwidth_in(qp, np.arange(qp.n)) > 32       # MAX_BANDWIDTH: reordering needed


def test_permuted_keeps_every_entry_and_the_answer_maps_back():
    rng = np.random.default_rng(3)
    P, q, A, lo, up = random_banded_qp(rng, 40, kd=2, wrap=True)
    qp = _row_qp(P, q, A, lo, up)
    perm = rng.permutation(qp.n)
    inverse = np.empty(qp.n, dtype=np.intp)
    inverse[perm] = np.arange(qp.n)
    prow, pcol, pval, indptr, indices, data, q2, back = band_order.permuted(
        qp, qp.prow, qp.pcol, qp.pval, qp.data, qp.q, inverse)
    x = rng.normal(size=qp.n)
    y = x[perm]                                   # the same point in the new column order
    A_new = sp.csr_matrix((data, indices, indptr), shape=(qp.m, qp.n))
    A_old = sp.csr_matrix((qp.data, qp.indices, qp.indptr), shape=(qp.m, qp.n))
    np.testing.assert_allclose(A_new @ y, A_old @ x, rtol=1e-14, atol=1e-14)
    P_new = sp.csr_matrix((pval, (prow, pcol)), shape=(qp.n, qp.n))
    P_old = sp.csr_matrix((qp.pval, (qp.prow, qp.pcol)), shape=(qp.n, qp.n))
    assert y @ (P_new @ y) == pytest.approx(x @ (P_old @ x), rel=1e-13)
    assert q2 @ y == pytest.approx(qp.q @ x, rel=1e-13)
    np.testing.assert_array_equal(y[back], x)
    for i in range(qp.m):                         # each row's entries in column order
        assert np.all(np.diff(indices[indptr[i]:indptr[i + 1]]) > 0)
