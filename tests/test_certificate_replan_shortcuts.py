"""The shortcuts a receding-horizon window takes give the same answers as the general code.

A window skips work it does not need: the verifier measures no lateral jerk where none is bound,
the jerk's time base of a moving vehicle's window is written out directly, and the QP's
independent blocks are read off its rows' sorted columns. Each shortcut is checked here against
the general code it stands in for, on the bundled mountain road (invented, routes/README.md) and
on small hand-made cases; the general code itself is checked against published references and
scipy elsewhere (test_reference_qp_rows.py, test_reference_convex.py).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.sparse.csgraph import connected_components

from curvespeed.geometry import build_geometry
from curvespeed.io import read_route
from curvespeed.jerk_model import _terms_general, _terms_open_moving, jerk_time_terms
from curvespeed.limits import Limits
from curvespeed.planner import CONVEX_TOLERANCE
from curvespeed.replan import Replanner
from curvespeed.solvers.convex import ConvexOptions
from curvespeed.solvers.qp_rows import RowQP, interval_blocks
from curvespeed.verify import verify_profile

ROUTES = Path(__file__).resolve().parents[1] / "routes"

LATERAL_JERK_KEYS = ("step_lat_jerk_mps3", "node_lat_jerk_mps3")


@pytest.fixture(scope="module")
def windows():
    """Windows of a vehicle driving the mountain road, without and with a lateral jerk bound."""
    geo = build_geometry(read_route(ROUTES / "mountain_road.csv"))
    out = {}
    for name, limits in (("plain", Limits()), ("lateral", Limits(max_lateral_jerk_mps3=0.8))):
        rp = Replanner(geo, limits, options=ConvexOptions(threads=1, max_iterations=1))
        s, v, a = 600.0, 20.0, 0.0
        got = []
        for _ in range(6):
            w = rp.replan(s, v, a)
            got.append(w)
            s, v, a = w.state_at(0.5)
        out[name] = got
    return out


def _same_check(full, quick):
    assert quick.violations == full.violations
    assert set(quick.use) == set(full.use)
    assert all(np.array_equal(quick.use[k], full.use[k]) for k in full.use)
    for k, arr in full.derived.items():
        if k not in LATERAL_JERK_KEYS:
            assert np.array_equal(quick.derived[k], arr), k


@pytest.mark.parametrize("name", ["plain", "lateral"])
def test_verifier_without_lateral_jerk_measurement_gives_the_same_verdict(windows, name):
    """The window's own check (lateral jerk measured only where bound) against the full check:
    the same uses, violations and derived quantities, on the windows as planned and on the
    same speeds raised by 3 % (which break the lateral and braking limits)."""
    for w in windows[name]:
        for b in (w.speed_mps ** 2, (1.03 * w.speed_mps) ** 2):
            full = verify_profile(w.problem, b, CONVEX_TOLERANCE)
            quick = verify_profile(w.problem, b, CONVEX_TOLERANCE, labels=False,
                                   measure_lateral_jerk=False)
            _same_check(full, quick)
            if name == "plain":         # not bound: not measured
                assert np.isnan(quick.extremes["lateral_jerk_mps3"])
                assert not set(LATERAL_JERK_KEYS) & set(quick.derived)
            else:                       # bound: measured and checked as before
                assert quick.extremes["lateral_jerk_mps3"] == full.extremes["lateral_jerk_mps3"]
                assert "lateral_jerk" in quick.use
    raised = [verify_profile(w.problem, (1.03 * w.speed_mps) ** 2, CONVEX_TOLERANCE,
                             measure_lateral_jerk=False) for w in windows[name]]
    assert all(not c.ok for c in raised)        # the check still refuses a broken profile


def test_lateral_jerk_bound_is_checked_when_not_otherwise_measured(windows):
    """A window planned without a lateral jerk bound, checked against a bound it breaks: the
    quick check refuses it, naming the lateral jerk, as the full check does."""
    w = windows["plain"][0]
    b = w.speed_mps ** 2
    peak = verify_profile(w.problem, b).extremes["lateral_jerk_mps3"]
    assert peak > 0.0
    strict = w.problem.limits.replace(max_lateral_jerk_mps3=0.5 * peak)
    from dataclasses import replace

    problem = replace(w.problem, limits=strict)
    full = verify_profile(problem, b, CONVEX_TOLERANCE)
    quick = verify_profile(problem, b, CONVEX_TOLERANCE, labels=False,
                           measure_lateral_jerk=False)
    _same_check(full, quick)
    assert "lateral_jerk" in {v.limit for v in quick.violations}


@pytest.mark.parametrize("nv", [2, 3, 4, 17, 301])
def test_jerk_terms_of_a_moving_window_equal_the_general_case(nv):
    """An open stretch with no step next to rest: the written-out terms equal the general
    construction entry by entry, in the same order and type."""
    general = _terms_general(nv, False, np.full(nv - 1, np.nan), np.ones(nv - 1))
    direct = _terms_open_moving(nv)
    called = jerk_time_terms(nv, False, np.full(nv - 1, np.nan), np.ones(nv - 1))
    for field in ("node", "prev", "next", "weights", "scale"):
        g = getattr(general, field)
        for other in (direct, called):
            got = getattr(other, field)
            assert got.dtype == g.dtype and np.array_equal(got, g), field


def test_jerk_terms_with_a_step_next_to_rest_take_the_general_case():
    """A step leaving rest (shape u on the first step) keeps its own terms: the same as the
    general construction, and different from a moving stretch's."""
    nv = 12
    rest_u = np.full(nv - 1, np.nan)
    rest_u[0] = 0.5
    f_start = np.ones(nv - 1)
    f_start[0] = 0.0
    called = jerk_time_terms(nv, False, rest_u, f_start)
    general = _terms_general(nv, False, rest_u, f_start)
    assert all(np.array_equal(getattr(called, f), getattr(general, f))
               for f in ("node", "prev", "next", "weights", "scale"))
    assert not np.array_equal(called.weights, _terms_open_moving(nv).weights)


def _chain_qp(n: int, zero_at=(), breaks=()):
    """A QP on ``n`` variables whose rows link neighbours (two entries) except across
    ``breaks`` (a row there touches one variable); entries listed in ``zero_at`` are stored
    zeros. P diagonal."""
    indptr, indices, data = [0], [], []
    for j in range(n - 1):
        cols = [j] if j in breaks else [j, j + 1]
        indices += cols
        data += [1.0] * len(cols)
        indptr.append(len(indices))
    data = np.array(data)
    data[list(zero_at)] = 0.0
    m = len(indptr) - 1
    return RowQP(n, np.array(indptr, dtype=np.int64), np.array(indices, dtype=np.int64), data,
                 np.zeros(m), np.ones(m), np.arange(n), np.arange(n), np.ones(n), np.zeros(n))


@pytest.mark.parametrize("zero_at", [(), (1,), (5, 6, 9)])
def test_interval_blocks_read_off_sorted_rows_equal_connected_components(zero_at):
    """With every entry nonzero the blocks come from each row's first and last column; with
    stored zeros from the rows' reductions. Either way they equal scipy's connected components
    of |A|'|A| + |P|, a stored zero linking nothing."""
    qp = _chain_qp(12, zero_at=zero_at, breaks=(3, 8))
    P, _, A, _, _ = qp.to_sparse()
    A = A.copy()                # the matrix shares the QP's arrays
    A.eliminate_zeros()
    n_blocks, label = connected_components((abs(A).T @ abs(A)) + abs(P), directed=False)
    starts = interval_blocks(qp)
    assert starts.size - 1 == n_blocks
    assert np.array_equal(np.repeat(np.arange(n_blocks), np.diff(starts)), label)
