"""Reference tests of the banded interior-point QP solver (``solvers/banded_ipm.py``).

References: Clarabel (an independent interior-point solver, already the project's QP backend)
on QPs captured from the convex solver's own QP assembly for every bundled route and on small
random banded QPs; scipy's ``lsq_linear`` (bounded least squares) and textbook closed forms on
tiny cases.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import lsq_linear

from curvespeed.geometry import build_geometry
from curvespeed.io import read_route
from curvespeed.limits import Limits, RouteConstraints
from curvespeed.problem import build_problem
from curvespeed.solvers import SolveStatus
from curvespeed.solvers.banded_ipm import KERNEL_AVAILABLE, solve_qp_banded
from curvespeed.solvers.clarabel_qp import solve_qp_clarabel
from curvespeed.solvers.convex import ConvexOptions, _reduce, plateau_anchors
from curvespeed.solvers.convex_qp import QPBuilder, QPLayout
from curvespeed.solvers.envelope import solve_envelope

ROUTES = Path(__file__).resolve().parent.parent / "routes"

#: Objective agreement with Clarabel, relative. Both stop at a relative duality gap of 1e-8
#: (Clarabel is given 1e-9 here, so it is the sharper of the two): the objectives can differ
#: by about that gap, 1e-8 of the objective; 1e-6 leaves two decades for the conditioning of
#: the route QPs (squared speeds up to 900 m^2/s^2 next to stations at rest).
OBJ_RTOL = 1e-6

pytestmark = pytest.mark.skipif(not KERNEL_AVAILABLE, reason="compiled kernel not built "
                                "(pip install -e . needs a C compiler)")


def objective(P, q, x):
    return 0.5 * float(x @ (P @ x)) + float(q @ x)


def test_kernel_is_built():
    """The suite runs after `pip install -e .`, which builds the kernel; a missing kernel would
    turn every test below into a skip, so say it loudly here."""
    assert KERNEL_AVAILABLE


def route_qp(name: str, lateral_jerk: float | None = None):
    """The first sequential-convex QP of a bundled route (default limits), reduced as the convex
    solver reduces it, with its centre and scale."""
    geo = build_geometry(read_route(ROUTES / name))
    limits = Limits(max_lateral_jerk_mps3=lateral_jerk)
    problem = build_problem(geo, limits, RouteConstraints())
    env = solve_envelope(problem)
    nv = problem.n_nodes - 1 if problem.closed else problem.n_nodes
    anchors = plateau_anchors(problem, env.b, nv)
    lay = QPLayout(problem, jerk=True, anchors=anchors)
    b_env = env.b[:nv].copy()
    P, q, A, lo, up, _ = QPBuilder(problem, lay, b_env, ConvexOptions()).build(b_env)
    qp = _reduce(P, q, A, lo, up, lay.fixed, lay.fixed_value)
    free = np.flatnonzero(qp["free"])
    centre = b_env[free]
    return qp["P"].tocsr(), qp["q"], qp["A"].tocsr(), qp["lo"], qp["up"], centre, \
        np.maximum(b_env[free], 1.0)


@pytest.mark.parametrize("name, lateral_jerk", [("mountain_road.csv", None),
                                                ("mountain_road.csv", 0.5),
                                                ("test_loop.geojson", None),
                                                ("shuttle_route.gpx", 0.5)])
def test_route_qps_agree_with_clarabel(name, lateral_jerk):
    """Clarabel as the reference on the QPs the convex solver builds (the closed loop's rows
    wrap from its last station to its first, so that one also takes the reordering path)."""
    P, q, A, lo, up, centre, scale = route_qp(name, lateral_jerk)
    x_ref, st_ref, _ = solve_qp_clarabel(P, q, A, lo, up, 1e-9, centre, scale)
    assert st_ref is SolveStatus.OPTIMAL
    # The banded method's gap, absolute, is the same 1e-8 of the objective. Its test for a
    # degenerate optimum (a dual residual stalled above tolerance, banded_ipm._judge) certifies
    # f(x) - f(x*) <= that gap; given 1e-8 in the objective's own units (4e-15 of it here) it
    # could never pass. The mountain road's QP under the lateral jerk bound, once kinks spread
    # their rates as far as the points place them, ends that way: relative gap 2e-9, dual
    # residual 2.6e-8 of its scale (the double-precision normal equations' limit), objective
    # 2e-11 from Clarabel's.
    x, st, its = solve_qp_banded(P, q, A, lo, up, 1e-8, centre, scale,
                                 gap_abs=1e-8 * abs(objective(P, q, x_ref)))
    assert st is SolveStatus.OPTIMAL
    assert 0 < its < 100
    f, f_ref = objective(P, q, x), objective(P, q, x_ref)
    assert abs(f - f_ref) <= OBJ_RTOL * abs(f_ref)
    # the rows hold to the solver's feasibility tolerance: 1e-8 of the rows' scale (the
    # envelope's squared speeds, up to ~1e3 m^2/s^2, times coefficients up to ~1), so 1e-4
    r = A @ x
    assert np.all(r >= lo - 1e-4) and np.all(r <= up + 1e-4)


NEQ = 3


def random_banded_qp(rng, n: int, kd: int, wrap: bool = False):
    """A feasible QP: P = B'B + diag (banded), box bounds and rows of up to kd+1 neighbouring
    columns around a random interior point, with one-sided, two-sided and equality rows
    (``wrap``: rows also join the last columns to the first, as on a closed loop)."""
    B = sp.diags([rng.normal(size=n), rng.normal(size=n - 1)], [0, 1], shape=(n, n))
    P = (B.T @ B + sp.diags(rng.uniform(0.0, 1.0, n) * (rng.uniform(size=n) < 0.7))).tocsr()
    q = rng.normal(size=n) * 3.0
    x0 = rng.uniform(-0.5, 0.5, n)
    rows, cols, vals = [], [], []
    m = 0
    for start in range(n if wrap else n - kd):
        for _ in range(2):
            width = rng.integers(1, kd + 2)
            for k in range(width):
                rows.append(m)
                cols.append((start + k) % n)
                vals.append(rng.normal())
            m += 1
    R = sp.csr_matrix((vals, (rows, cols)), shape=(m, n))
    A = sp.vstack([sp.identity(n, format="csr"), R], format="csr")
    r0 = A @ x0
    lo = r0 - rng.uniform(0.0, 1.0, A.shape[0])
    up = r0 + rng.uniform(0.0, 1.0, A.shape[0])
    lo[:n], up[:n] = -1.0, 1.0
    kind = rng.integers(0, 5, A.shape[0])
    lo[n:][kind[n:] == 0] = -np.inf
    up[n:][kind[n:] == 1] = np.inf
    both_free = kind[n:] == 2
    lo[n:][both_free], up[n:][both_free] = -np.inf, np.inf
    eq = np.flatnonzero(kind[n:] == 3)[:NEQ] + n
    lo[eq] = up[eq] = r0[eq]
    return P, q, A, lo, up


@pytest.mark.parametrize("seed", range(8))
def test_random_banded_qps_agree_with_clarabel(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(20, 200))
    P, q, A, lo, up = random_banded_qp(rng, n, kd=int(rng.integers(1, 4)), wrap=seed % 3 == 0)
    x_ref, st_ref, _ = solve_qp_clarabel(P, q, A, lo, up, 1e-9)
    assert st_ref is SolveStatus.OPTIMAL
    x, st, _ = solve_qp_banded(P, q, A, lo, up, 1e-8)
    assert st is SolveStatus.OPTIMAL
    f, f_ref = objective(P, q, x), objective(P, q, x_ref)
    # unit-scale data: the gap tolerance 1e-8 is absolute as well as relative here
    assert abs(f - f_ref) <= OBJ_RTOL * max(1.0, abs(f_ref))


def test_box_qp_closed_form():
    """Separable QP in a box: x_i = clip(-q_i / p_i, lo_i, up_i) (the projection of the
    unconstrained minimiser, exact for a diagonal P). Tolerance: the method stops at a relative
    gap of 1e-10, which puts an active bound's slack and a free variable's gradient within
    about 1e-10 of zero on this unit-scale problem; 1e-7 leaves room for the conditioning."""
    p = np.array([1.0, 2.0, 0.5, 4.0, 1.0])
    q = np.array([-3.0, 1.0, 0.2, -1.0, 0.0])
    lo = np.array([-1.0, -0.25, -1.0, 0.0, -np.inf])
    up = np.array([1.0, 1.0, 1.0, 0.1, 2.0])
    x, st, _ = solve_qp_banded(sp.diags(p).tocsr(), q, sp.identity(5, format="csr"), lo, up,
                               1e-10)
    assert st is SolveStatus.OPTIMAL
    np.testing.assert_allclose(x, np.clip(-q / p, lo, up), rtol=0, atol=1e-7)


def test_equality_row_closed_form():
    """min |x|^2 / 2 s.t. a'x = b: x = a b / |a|^2 (minimum-norm solution), with wide bounds
    so that only the equality row binds. Asked for 1e-9: an equality row's regularised
    multiplier (see ``_banded_ipm.c``) carries the dual residual down to about 1e-9 of the
    problem's scale and no further (at 1e-10 it stops at the iteration limit and reports
    FAILED). Tolerance on x as in the box case."""
    a = np.array([1.0, -2.0, 0.5])
    A = sp.vstack([sp.csr_matrix(a), sp.identity(3)], format="csr")
    lo = np.array([1.5, -10.0, -10.0, -10.0])
    up = np.array([1.5, 10.0, 10.0, 10.0])
    x, st, _ = solve_qp_banded(sp.identity(3, format="csr"), np.zeros(3), A, lo, up, 1e-9)
    assert st is SolveStatus.OPTIMAL
    np.testing.assert_allclose(x, a * 1.5 / (a @ a), rtol=0, atol=1e-7)


def test_bounded_least_squares_agrees_with_scipy():
    """min |Cx - d|^2 / 2 within bounds is the QP P = C'C, q = -C'd; C bidiagonal keeps P
    tridiagonal. Reference: scipy.optimize.lsq_linear (its 'bvls' method is exact for this
    size). Tolerance: both solutions are unique (C has full rank), each solver stops at about
    1e-10 of the problem's unit scale; 1e-6 allows for the conditioning of C'C."""
    rng = np.random.default_rng(7)
    n = 40
    C = sp.diags([rng.uniform(1.0, 2.0, n), rng.normal(size=n - 1)], [0, 1]).tocsr()
    d = rng.normal(size=n) * 2.0
    lo, up = -0.5 * np.ones(n), 0.8 * np.ones(n)
    ref = lsq_linear(C.toarray(), d, bounds=(lo, up), method="bvls", tol=1e-12)
    P = (C.T @ C).tocsr()
    x, st, _ = solve_qp_banded(P, -(C.T @ d), sp.identity(n, format="csr"), lo, up, 1e-10)
    assert st is SolveStatus.OPTIMAL
    np.testing.assert_allclose(x, ref.x, rtol=0, atol=1e-6)


def test_infeasible_qp_is_reported():
    """0 <= x1, x2 <= 1 with x1 + x2 >= 3 has no point: the solver must say so, never return a
    point as optimal (a Farkas certificate y = (1, -1, -1) on the rows exists)."""
    A = sp.csr_matrix(np.array([[1.0, 1.0], [1.0, 0.0], [0.0, 1.0]]))
    lo = np.array([3.0, 0.0, 0.0])
    up = np.array([np.inf, 1.0, 1.0])
    x, st, _ = solve_qp_banded(sp.identity(2, format="csr"), np.zeros(2), A, lo, up, 1e-8)
    assert st is SolveStatus.INFEASIBLE
    _, st_ref, _ = solve_qp_clarabel(sp.identity(2, format="csr"), np.zeros(2), A, lo, up, 1e-8)
    assert st_ref is SolveStatus.INFEASIBLE


def _band_to_sparse(Pb):
    """The symmetric matrix whose lower band the kernel holds (Pb[d, j] = P[j + d, j])."""
    kd, n = Pb.shape[0] - 1, Pb.shape[1]
    lower = sp.diags([Pb[d, :n - d] for d in range(kd + 1)], [-d for d in range(kd + 1)],
                     shape=(n, n))
    return (lower + sp.triu(lower.T, k=1)).tocsr()


@pytest.mark.parametrize("seed", range(6))
def test_suboptimality_bound_holds_on_early_iterates(seed):
    """The bound the solver stops on when its dual residual stalls (banded_ipm._judge):
    f(x) - f(x*) <= gap + |P x + q - A'z|_1 * (how far the variables' box reaches), for a
    primal-feasible x and multipliers z >= 0 (the Lagrangian's convexity, derived in _judge).
    Checked on the kernel's own scaled problem at every early iterate that is primal feasible,
    against Clarabel's optimum of that same problem."""
    from curvespeed.solvers import banded_ipm as B

    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(30, 120))
    P, q, A, lo, up = random_banded_qp(rng, n, kd=2)
    qp = B._prepare(P, q, A, lo, up, None, None)
    Ps = _band_to_sparse(qp.Pb)
    x_ref, st_ref, _ = solve_qp_clarabel(Ps, qp.q, qp.A, qp.lo, qp.up, 1e-10)
    assert st_ref is SolveStatus.OPTIMAL
    f_ref = objective(Ps, qp.q, x_ref)
    extent = B._box_extent(qp)
    assert extent == pytest.approx(1.0)          # every variable in [-1, 1]
    checked = 0
    for iterations in range(1, 30):
        x, sl, su, zl, zu = B._start(qp)
        info = np.zeros(8)
        B._kernel.solve(n, qp.kd, qp.indptr, qp.indices, qp.data, qp.lo, qp.up, qp.kind, qp.Pb,
                        qp.q, x, sl, su, zl, zu, 1e-12, 1e-30, iterations, info)
        r = qp.A @ x
        # primal feasible within the round-off of the rows (unit-scale data)
        if np.any(r < qp.lo - 1e-9) or np.any(r > qp.up + 1e-9):
            continue
        y = np.where(qp.kind == 4, zl, np.where(qp.kind == 0, 0.0, zl - zu))
        dual = Ps @ x + qp.q - qp.A.T @ y
        with np.errstate(invalid="ignore"):
            lo_part = np.where((qp.kind == 1) | (qp.kind >= 3), qp.lo * zl, 0.0)
            up_part = np.where((qp.kind == 2) | (qp.kind == 3), qp.up * zu, 0.0)
        xPx = float(x @ (Ps @ x))
        gap = abs(0.5 * xPx + float(qp.q @ x) - (-0.5 * xPx + lo_part.sum() - up_part.sum()))
        bound = gap + float(np.abs(dual).sum()) * extent
        # Clarabel's optimum is itself within 1e-10 (relative) of the true one
        assert objective(Ps, qp.q, x) - f_ref <= bound + 1e-8 * max(1.0, abs(f_ref))
        checked += 1
    assert checked >= 5


def _window_qps(monkeypatch, route: str, limits: Limits, station: float, speed: float):
    """The QPs of a few receding-horizon windows as the Replanner hands them to the banded
    method (recorded on the way): ``(qp, eps, centre, scale, gap_abs)``."""
    from curvespeed.replan import Replanner
    from curvespeed.solvers import qp_batches

    seen = []
    solve = qp_batches.solve_row_qp

    def record(qp, eps, centre, scale, gap_abs=None, near_centre=False):
        seen.append((qp, eps, centre, scale, gap_abs))
        return solve(qp, eps, centre, scale, gap_abs=gap_abs, near_centre=near_centre)

    monkeypatch.setattr(qp_batches, "solve_row_qp", record)
    geo = build_geometry(read_route(ROUTES / route))
    rp = Replanner(geo, limits, options=ConvexOptions(threads=1, max_iterations=1))
    seen.clear()                # not the whole route's plan
    s, v, a = station, speed, 0.0
    for _ in range(4):
        w = rp.replan(s, v, a)
        s, v, a = w.state_at(0.5)
    return list(seen)


@pytest.mark.parametrize("route, limits, station, speed", [
    ("mountain_road.csv", Limits(), 600.0, 20.0),
    ("mountain_road.csv", Limits(max_lateral_jerk_mps3=0.8), 600.0, 10.0),
    ("shuttle_route.gpx", Limits(max_speed_mps=8.0, max_lateral_accel_mps2=1.5), 150.0, 3.0)])
def test_window_qps_from_the_near_start_agree_with_clarabel(monkeypatch, route, limits,
                                                            station, speed):
    """Windows' QPs solved from the start near their centre (the Replanner's) and from the
    shifted start: both optimal, each objective within OBJ_RTOL of Clarabel's (given 1e-9) or
    within the gap the solve was given (these objectives are near 0: the centre is near the
    answer, so the absolute gap decides), and the rows held."""
    from curvespeed.solvers.banded_ipm import solve_row_qp

    qps = _window_qps(monkeypatch, route, limits, station, speed)
    assert len(qps) >= 4
    for qp, eps, centre, scale, gap_abs in qps:
        P, q, A, lo, up = qp.to_sparse()
        x_ref, st_ref, _ = solve_qp_clarabel(P, q, A, lo, up, 1e-9, centre, scale,
                                             gap_abs=1e-3 * gap_abs)
        assert st_ref is SolveStatus.OPTIMAL
        f_ref = objective(P, q, x_ref)
        for near in (True, False):
            x, st, its = solve_row_qp(qp, eps, centre, scale, gap_abs=gap_abs, near_centre=near)
            assert st is SolveStatus.OPTIMAL and 0 < its < 100
            f = objective(P, q, x)
            assert abs(f - f_ref) <= max(OBJ_RTOL * abs(f_ref), 2.0 * gap_abs)
            r = A @ x       # feasibility as in test_route_qps_agree_with_clarabel
            assert np.all(r >= lo - 1e-4) and np.all(r <= up + 1e-4)


@pytest.mark.parametrize("seed", range(8))
def test_random_banded_qps_from_the_near_start_agree_with_clarabel(seed):
    """The near start is a cold interior start like the shifted one, so it must solve any
    QP, not only those whose answer lies near the centre: the random QPs above, from x = 0."""
    from curvespeed.solvers.banded_ipm import _row_qp, solve_row_qp

    rng = np.random.default_rng(seed)
    n = int(rng.integers(20, 200))
    P, q, A, lo, up = random_banded_qp(rng, n, kd=int(rng.integers(1, 4)), wrap=seed % 3 == 0)
    x_ref, st_ref, _ = solve_qp_clarabel(P, q, A, lo, up, 1e-9)
    assert st_ref is SolveStatus.OPTIMAL
    x, st, _ = solve_row_qp(_row_qp(P, q, A, lo, up), 1e-8, near_centre=True)
    assert st is SolveStatus.OPTIMAL
    f, f_ref = objective(P, q, x), objective(P, q, x_ref)
    assert abs(f - f_ref) <= OBJ_RTOL * max(1.0, abs(f_ref))
