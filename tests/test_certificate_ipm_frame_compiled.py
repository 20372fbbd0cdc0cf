"""The banded method's compiled frame (``solvers/_ipm_frame.c``) against the numpy code it
stands in for (banded_ipm.py with ``_frame`` unset), on the QPs the solver itself makes while a
vehicle drives the bundled routes (invented, routes/README.md: stops, zones, a loop whose
rows need reordering, with and without a lateral jerk bound) and the whole routes' QPs:

* the objective centred and scaled, P's band and the start near the centre: equal bit for bit
  (the same operations in the same order);
* the quantities the answer is judged on: the maxima (of |A'y|, the rows' violation and the
  dual residual) equal bit for bit; the sums and inner products within twice the classic
  bound of a computed inner product or sum of n terms in any order, gamma_n sum |terms| with
  gamma_n = n u / (1 - n u) and u the unit round-off (Higham, Accuracy and Stability of
  Numerical Algorithms, 2nd ed., secs. 3.1 and 4.2; from memory): the compiled sums run in
  index order, numpy's pairwise and its dot products in BLAS, each within that bound of the
  exact value; and the same verdict on every answer.
"""

from __future__ import annotations

import numpy as np
import pytest

from curvespeed.replan import Replanner
from curvespeed.solvers import banded_ipm, convex, qp_batches
from curvespeed.solvers.convex import ConvexOptions

import test_certificate_replan as replan_cases

pytestmark = pytest.mark.skipif(banded_ipm._frame is None or banded_ipm._kernel is None,
                                reason="the compiled frame or kernel was not built")

UNIT_ROUNDOFF = np.finfo(float).eps / 2


def _solver_qps(case, lateral_jerk, monkeypatch):
    """Every (QP, centre, scale, near) the solver hands the banded method during a drive."""
    seen = []
    plain = qp_batches.solve_row_qp

    def record(qp, eps, centre=None, scale=None, gap_abs=None, near_centre=False):
        seen.append((qp, centre, scale, near_centre))
        return plain(qp, eps, centre, scale, gap_abs=gap_abs, near_centre=near_centre)

    monkeypatch.setattr(qp_batches, "solve_row_qp", record)
    monkeypatch.setattr(convex, "_worker_count", lambda requested: 1)
    geo, limits, constraints = replan_cases.CASES[case][0]()
    if lateral_jerk:
        limits = limits.replace(max_lateral_jerk_mps3=1.0)
    replanner = Replanner(geo, limits, constraints,
                          options=ConvexOptions(threads=1, max_iterations=1))
    replan_cases.drive(replanner, geo, constraints, 40)
    monkeypatch.undo()
    return seen


def _prepare_numpy(qp, centre, scale, near, monkeypatch):
    with monkeypatch.context() as mp:
        mp.setattr(banded_ipm, "_frame", None)
        b = banded_ipm._prepare_rows(qp, centre, scale, near)
        if b is not None:
            b.start = banded_ipm._start_near(b) if near else None
    return b


@pytest.mark.parametrize("lateral_jerk", [False, True], ids=["jerk", "lateral-jerk"])
@pytest.mark.parametrize("case", sorted(replan_cases.CASES))
def test_compiled_frame_equals_numpy(case, lateral_jerk, monkeypatch):
    qps = _solver_qps(case, lateral_jerk, monkeypatch)
    assert any(near for *_, near in qps) and not all(near for *_, near in qps)
    for qp, centre, scale, near in qps:
        for centred in (True, False):
            c, s = (centre, scale) if centred else (None, None)
            fast = banded_ipm._prepare_rows(qp, c, s, near)
            slow = _prepare_numpy(qp, c, s, near, monkeypatch)
            if slow is None:        # a loop's rows across the seam: reordered by numpy alone
                assert fast is None or fast.inverse is not None
                continue
            if fast.inverse is not None:
                continue
            assert fast.kd == slow.kd
            for name in ("q", "Pb", "data", "lo", "up", "kind"):
                assert getattr(fast, name).tobytes() == getattr(slow, name).tobytes(), name
            if near:
                for a, b in zip(fast.start, slow.start):
                    assert a.tobytes() == b.tobytes()
            else:
                assert fast.start is None


def _sum_bound(terms) -> float:
    """Two computed sums of ``terms`` (or inner products with these products) differ by at
    most twice gamma_n sum |terms| (module docstring)."""
    terms = np.asarray(terms, dtype=float)
    nu = max(terms.size, 1) * UNIT_ROUNDOFF
    return 2.0 * nu / (1.0 - nu) * float(np.sum(np.abs(terms)))


@pytest.mark.parametrize("case", sorted(replan_cases.CASES))
def test_compiled_judgement_equals_numpy(case, monkeypatch):
    qps = _solver_qps(case, False, monkeypatch)
    judged = 0
    for qp, centre, scale, near in qps[::3]:
        b = banded_ipm._prepare_rows(qp, centre, scale, near)
        if b is None or b.inverse is not None:
            continue
        x, sl, su, zl, zu = b.start if near else banded_ipm._start(b)
        info = np.zeros(8)
        code = banded_ipm._kernel.solve(qp.n, b.kd, b.indptr, b.indices, b.data, b.lo, b.up,
                                        b.kind, b.Pb, b.q, x, sl, su, zl, zu, 1e-8, 1e-6,
                                        banded_ipm.MAX_ITERATIONS, info)
        fast = banded_ipm._frame.judge_sums(b.indptr, b.indices, b.data, b.lo, b.up, b.kind,
                                            b.Pb, b.q, x, zl, zu)
        slow = banded_ipm._judge_sums(b, x, zl, zu)
        assert fast[0] == slow[0] is True
        for i in (2, 3, 4):             # maxima of the same elementwise values
            assert fast[i] == slow[i]
        y = np.where(b.kind == 4, zl, np.where(b.kind == 0, 0.0, zl - zu))
        with np.errstate(invalid="ignore"):
            lo_part = np.where((b.kind == 1) | (b.kind >= 3), b.lo * zl, 0.0)
            up_part = np.where((b.kind == 2) | (b.kind == 3), b.up * zu, 0.0)
        Px = banded_ipm._band_times(b.Pb, x)
        dual = Px + b.q - banded_ipm._products(b, x, y)[1]
        bounds = (_sum_bound(np.concatenate((lo_part, -up_part))), _sum_bound(np.abs(dual)),
                  _sum_bound(x * Px), _sum_bound(b.q * x))
        for i, bound in zip((1, 5, 6, 7), bounds):
            assert abs(fast[i] - slow[i]) <= bound
        verdicts = []
        for frame in (banded_ipm._frame, None):
            with monkeypatch.context() as mp:
                mp.setattr(banded_ipm, "_frame", frame)
                verdicts.append(banded_ipm._judge(code, b, x, zl, zu, 1e-8, 1e-6, info))
        assert verdicts[0] is verdicts[1]
        judged += 1
    assert judged >= 10


def test_compiled_judgement_of_an_answer_that_is_not_finite(monkeypatch):
    qp, centre, scale, near = _solver_qps("mountain", False, monkeypatch)[-1]
    b = banded_ipm._prepare_rows(qp, centre, scale, near)
    x, _, _, zl, zu = b.start
    x[3] = np.nan
    assert banded_ipm._frame.judge_sums(b.indptr, b.indices, b.data, b.lo, b.up, b.kind, b.Pb,
                                        b.q, x, zl, zu)[0] == 0
    assert banded_ipm._judge(0, b, x, zl, zu, 1e-8, 1e-6, np.ones(8)) is \
        banded_ipm.SolveStatus.FAILED
