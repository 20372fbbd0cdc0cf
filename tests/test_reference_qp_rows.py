"""The convex solver's QP assembled straight into row tables (solvers/qp_rows.py,
QPBuilder.reduced) against the scipy.sparse assembly it replaces (tests/qp_reference.py) and
against scipy's own sparse operations; its answers against the Clarabel backend.

Reference implementations: scipy.sparse (coo -> csr with duplicates summed, column slicing,
matrix-vector products), scipy.sparse.csgraph.connected_components, and Clarabel (registry
package) for the solves."""

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from qp_reference import ReferenceQPBuilder, reduce_qp
from scipy.sparse.csgraph import connected_components

from curvespeed.geometry import build_geometry
from curvespeed.io import read_route
from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed.planner import CONVEX_TOLERANCE
from curvespeed.problem import build_problem
from curvespeed.profile import derive
from curvespeed.solvers import QPBackend, SolveStatus
from curvespeed.solvers.banded_ipm import KERNEL_AVAILABLE, solve_row_qp
from curvespeed.solvers.clarabel_qp import solve_qp_clarabel
from curvespeed.solvers.convex import ConvexOptions, plateau_anchors, solve_convex
from curvespeed.solvers.convex_qp import QPBuilder, QPLayout
from curvespeed.solvers.envelope import solve_envelope
from curvespeed.solvers import qp_rows
from curvespeed.solvers.qp_rows import RowQP, canonical, interval_blocks, reduce_rows
from curvespeed.verify import verify_profile

ROUTES = Path(__file__).resolve().parents[1] / "routes"

CASES = [  # (route file, limits, comfort weight, stop station or None)
    ("mountain_road.csv", Limits(), 0.0, 1500.0),
    ("mountain_road.csv", Limits(max_lateral_jerk_mps3=0.6), 0.3, None),
    ("shuttle_route.gpx", Limits(max_power_w=60_000.0, mass_kg=1_000.0), 0.0, None),
    ("test_loop.geojson", Limits(max_lateral_jerk_mps3=0.6), 0.3, None),    # closed loop
]


def _problem(route, limits, stop):
    geo = build_geometry(read_route(ROUTES / route))
    stops = (Stop(stop),) if stop is not None else ()
    return build_problem(geo, limits, RouteConstraints(stops=stops))


def _iterate(problem, comfort):
    """Layout, builder pair and a break-point iterate strictly inside the envelope (so every
    kind of row, chord and tangent is exercised, not only those at the envelope)."""
    env = solve_envelope(problem)
    nv = problem.n_distinct
    anchors = plateau_anchors(problem, env.b, nv) if comfort == 0 else None
    lay = QPLayout(problem, jerk=True, anchors=anchors)
    b_env = env.b[:nv].copy()
    b_hat = np.where(lay.fixed, b_env, b_env * (0.6 + 0.4 * np.cos(np.arange(nv) / 29.0) ** 2))
    options = ConvexOptions(comfort_weight=comfort)
    return (lay, b_hat, QPBuilder(problem, lay, b_env, options),
            ReferenceQPBuilder(problem, lay, b_env, options))


@pytest.mark.parametrize("case", range(len(CASES)))
def test_reduced_qp_equals_the_scipy_sparse_assembly_bit_for_bit(case):
    """Same rows, columns, coefficients, sides, Hessian and linear term, exactly: the row
    tables sum every term in the order scipy.sparse does. The only rows the reference keeps and
    the row tables do not are those with no finite side, which no solver acts on (the kernel
    skips them, the Clarabel adapter drops them)."""
    route, limits, comfort, stop = CASES[case]
    lay, b_hat, new, ref = _iterate(_problem(route, limits, stop), comfort)
    P, q, A, lo, up, scale = ref.build(b_hat)
    red = reduce_qp(P, q, A, lo, up, lay.fixed, lay.fixed_value)
    qp, new_scale = new.reduced(b_hat)
    assert new_scale == scale
    acted_on = np.isfinite(red["lo"]) | np.isfinite(red["up"])
    A_ref = red["A"].tocsr()[acted_on]
    A_ref.sort_indices()
    assert np.array_equal(A_ref.indptr, qp.indptr)
    assert np.array_equal(A_ref.indices, qp.indices)
    assert np.array_equal(A_ref.data, qp.data)
    assert np.array_equal(red["lo"][acted_on], qp.lo)
    assert np.array_equal(red["up"][acted_on], qp.up)
    P_ref = red["P"].tocsr()
    P_ref.eliminate_zeros()
    P_ref.sort_indices()
    P_ref = P_ref.tocoo()
    assert np.array_equal(P_ref.row, qp.prow) and np.array_equal(P_ref.col, qp.pcol)
    assert np.array_equal(P_ref.data, qp.pval)
    assert np.array_equal(red["q"], qp.q)


@pytest.mark.parametrize("case", range(len(CASES)))
def test_whole_qp_of_build_matches_the_reference(case):
    """QPBuilder.build (the scipy.sparse form kept for checks and benchmarks) gives the
    reference's QP: the same matrices up to rows with no finite side."""
    route, limits, comfort, stop = CASES[case]
    lay, b_hat, new, ref = _iterate(_problem(route, limits, stop), comfort)
    P1, q1, A1, lo1, up1, s1 = ref.build(b_hat)
    P2, q2, A2, lo2, up2, s2 = new.build(b_hat)
    acted_on = np.isfinite(lo1) | np.isfinite(up1)
    assert s1 == s2
    assert np.array_equal(q1, q2)
    assert abs(P1 - P2).max() == 0.0
    assert abs(A1.tocsr()[acted_on] - A2.tocsr()).max() == 0.0
    assert np.array_equal(lo1[acted_on], lo2) and np.array_equal(up1[acted_on], up2)


def test_canonical_matches_scipy_sum_duplicates():
    """Sorting slots and summing repeated stations, against coo -> csr on random tables with
    repeats, unused slots and unsorted rows."""
    rng = np.random.default_rng(7)
    m, n = 400, 12
    cols = rng.integers(-1, n, size=(m, 3))
    vals = rng.normal(size=(m, 3))
    c, present, v = canonical(cols, vals)
    rows = np.repeat(np.arange(m), 3)
    used = cols.ravel() >= 0
    ref = sp.coo_matrix((vals.ravel()[used], (rows[used], cols.ravel()[used])),
                        shape=(m, n)).tocsr()
    ref.sum_duplicates()
    counts = present.sum(axis=1)
    got = sp.csr_matrix((v[present], c[present], np.concatenate(([0], np.cumsum(counts)))),
                        shape=(m, n))
    assert np.array_equal(ref.indptr, got.indptr)
    assert np.array_equal(ref.indices, got.indices)
    # two repeats sum the same in either order; three in a row only here, within round-off of
    # a sum of three unit normals (1e-15)
    assert np.allclose(ref.data, got.data, rtol=0, atol=1e-15)


@pytest.mark.parametrize("seed", range(3))
def test_canonical_few_rows_path_equals_the_vectorised_path(seed, monkeypatch):
    """A table with a few rows out of order (as a window's jerk rows have at its ends) goes
    row by row; the same bits as the vectorised path, and the same entries as scipy's
    coo -> csr (all repeats of two here, so the sums agree exactly)."""
    rng = np.random.default_rng(seed)
    m, n = 300, 310
    cols = np.arange(m)[:, None] + np.arange(3)[None, :]
    bad = rng.choice(m, size=12, replace=False)
    cols[bad] = rng.permutation(3)[None, :] + cols[bad, :1]      # unsorted
    cols[bad[:6], 1] = cols[bad[:6], 0]                           # one station twice
    cols[bad[6:9], 2] = -1                                        # an unused slot
    vals = rng.normal(size=(m, 3))
    few = canonical(cols, vals, 2.0 * vals)
    monkeypatch.setattr(qp_rows, "_FEW_ROWS", -1)
    many = canonical(cols, vals, 2.0 * vals)
    for a, b in zip(few, many):
        assert a.dtype == b.dtype and np.array_equal(a.view(np.uint8), b.view(np.uint8))
    c, present, v, _ = few
    used = cols.ravel() >= 0
    ref = sp.coo_matrix((vals.ravel()[used], (np.repeat(np.arange(m), 3)[used],
                                              cols.ravel()[used])), shape=(m, n)).tocsr()
    ref.sum_duplicates()
    assert np.array_equal(ref.indices, c[present]) and np.array_equal(ref.data, v[present])


def test_reduce_rows_matches_column_slicing():
    """Eliminating fixed stations: the free columns and the fixed terms moved to the sides, as
    scipy's column slicing and product give them."""
    rng = np.random.default_rng(3)
    m, n = 300, 40
    first = rng.integers(0, n - 2, size=m)
    cols = first[:, None] + np.arange(3)
    cols[rng.random((m, 3)) < 0.2] = -1
    vals = rng.normal(size=(m, 3))
    c, present, v = canonical(cols, vals)
    fixed = rng.random(n) < 0.3
    values = rng.normal(size=n)
    lo, up = rng.normal(size=m) - 2.0, rng.normal(size=m) + 2.0
    indptr, indices, data, lo_r, up_r, kept = reduce_rows(c, present, v, lo, up, fixed, values)
    A = sp.csr_matrix((v[present], c[present],
                       np.concatenate(([0], np.cumsum(present.sum(axis=1))))), shape=(m, n))
    free = ~fixed
    Af = A.tocsc()[:, free].tocsr()
    shift = A.tocsc()[:, fixed] @ values[fixed]
    keep = np.diff(Af.indptr) > 0
    assert np.array_equal(keep, kept)
    assert np.array_equal(Af[keep].indptr, indptr)
    assert np.array_equal(Af[keep].indices, indices)
    assert np.array_equal(Af[keep].data, data)
    assert np.array_equal(lo[keep] - shift[keep], lo_r)
    assert np.array_equal(up[keep] - shift[keep], up_r)


@pytest.mark.parametrize("case", [0, 1, 2])
def test_interval_blocks_are_the_connected_components(case):
    """On open routes the blocks found by spans equal scipy's connected components of
    |A|'|A| + |P| (what the solver computed before)."""
    route, limits, comfort, stop = CASES[case]
    _, b_hat, new, _ = _iterate(_problem(route, limits, stop), comfort)
    qp, _ = new.reduced(b_hat)
    P, _, A, _, _ = qp.to_sparse()
    n_blocks, label = connected_components((abs(A).T @ abs(A)) + abs(P), directed=False)
    starts = interval_blocks(qp)
    assert starts.size - 1 == n_blocks
    ours = np.repeat(np.arange(n_blocks), np.diff(starts))
    assert np.array_equal(ours, label)


LOOP_CASES = [("test_loop.geojson", Limits(), 0.0, None),
              ("test_loop.geojson", Limits(), 0.0, 100.0),
              ("test_loop.geojson", Limits(max_lateral_jerk_mps3=0.6), 1.0, 200.0),
              ("test_loop.geojson", Limits(max_lateral_jerk_mps3=0.6), 0.0, None)]


@pytest.mark.parametrize("case", range(len(LOOP_CASES)))
def test_ring_blocks_of_a_loop_are_the_connected_components(case):
    """On a closed loop (rows across the seam, stops cutting the ring, a lateral jerk bound's
    three-station rows, a comfort term) the blocks found as arcs of the ring equal scipy's
    connected components of |A|'|A| + |P|, block for block and index for index."""
    from curvespeed.solvers.qp_rows import blocks_of

    route, limits, comfort, stop = LOOP_CASES[case]
    _, b_hat, new, _ = _iterate(_problem(route, limits, stop), comfort)
    qp, _ = new.reduced(b_hat)
    P, _, A, _, _ = qp.to_sparse()
    n_blocks, label = connected_components((abs(A).T @ abs(A)) + abs(P), directed=False)
    ours = blocks_of(qp, True)
    assert len(ours) == n_blocks
    for k, block in enumerate(ours):
        assert np.array_equal(block, np.flatnonzero(label == k))


@pytest.mark.skipif(not KERNEL_AVAILABLE, reason="compiled kernel not built")
@pytest.mark.parametrize("case", range(len(CASES)))
def test_row_qp_solve_agrees_with_clarabel(case):
    """One whole reduced QP solved from its arrays by the banded kernel and by Clarabel from
    the same arrays as scipy matrices: both optimal, objectives within the tolerance both were
    given. Each stops once its duality gap is below ``gap`` (absolute) or 1e-8 of the objective
    (relative), so each objective lies within the larger of the two above the optimum, and the
    two within that of each other (plus 1e-9 for round-off)."""
    route, limits, comfort, stop = CASES[case]
    _, b_hat, new, _ = _iterate(_problem(route, limits, stop), comfort)
    qp, _ = new.reduced(b_hat)
    free = np.flatnonzero(~new.lay.fixed)
    centre, scale = b_hat[free], np.maximum(new.b_env[free], 1.0)
    gap = 1e-7 * max(1.0, float(np.abs(qp.q).sum()))
    x1, st1, _ = solve_row_qp(qp, 1e-8, centre, scale, gap_abs=gap)
    x2, st2, _ = solve_qp_clarabel(*qp.to_sparse(), 1e-8, centre, scale, gap_abs=gap)
    assert st1 is SolveStatus.OPTIMAL and st2 is SolveStatus.OPTIMAL

    def f(x):
        return 0.5 * x @ qp.P_times(x) + qp.q @ x

    tol = max(gap, 1e-8 * max(1.0, abs(f(x2))))
    assert abs(f(x1) - f(x2)) <= tol + 1e-9
    r = qp.A_times(x1)
    # feasible within the solver's tolerance of the rows' scale (1e-8 relative, 1e-6 slack
    # for rows with coefficients up to ~1e2 on b up to ~1e3 m^2/s^2)
    assert np.all(r >= qp.lo - 1e-6 * np.maximum(1.0, np.abs(qp.lo)))
    assert np.all(r <= qp.up + 1e-6 * np.maximum(1.0, np.abs(qp.up)))


def test_row_qp_take_matches_scipy_slicing():
    """A batch cut out of a reduced QP: scipy's row and column slicing give the same."""
    route, limits, comfort, stop = CASES[0]
    _, b_hat, new, _ = _iterate(_problem(route, limits, stop), comfort)
    qp, _ = new.reduced(b_hat)
    starts = interval_blocks(qp)
    cols = np.arange(starts[1], starts[-2]) if starts.size > 3 else np.arange(qp.n)
    inside = np.isin(qp.indices, cols)
    row_all_inside = np.bincount(qp.row_of_entry(), ~inside, minlength=qp.m) == 0
    rows = np.flatnonzero(row_all_inside)
    sub = qp.take(cols, rows)
    P, q, A, lo, up = qp.to_sparse()
    P2, q2, A2, lo2, up2 = sub.to_sparse()
    assert abs(P[cols][:, cols] - P2).max() == 0.0
    assert abs(A[rows][:, cols] - A2).max() == 0.0
    assert np.array_equal(q[cols], q2) and np.array_equal(lo[rows], lo2)
    assert np.array_equal(up[rows], up2)
    assert isinstance(sub, RowQP)


@pytest.mark.parametrize("route", ["mountain_road.csv", "test_loop.geojson"])
def test_profiles_of_both_backends_agree(route):
    """The whole solver with the banded backend (row-table QPs) and with Clarabel: route times
    within 1e-6 of each other (the issue's bound; measured 4e-8 at most on the bundled
    routes), and both pass the verifier at the tolerance the convex solver is checked at."""
    problem = _problem(route, Limits(max_lateral_jerk_mps3=0.6), None)
    times = []
    for backend in (QPBackend.BANDED, QPBackend.CLARABEL):
        r = solve_convex(problem, ConvexOptions(qp_backend=backend))
        assert verify_profile(problem, r.b, tolerance=CONVEX_TOLERANCE).ok
        times.append(float(derive(problem, r.b)["time_s"][-1]))
    assert abs(times[0] - times[1]) <= 1e-6 * times[1]
