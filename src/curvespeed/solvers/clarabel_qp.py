"""Adapter to the Clarabel interior-point solver: one QP in our terms (``lo <= A x <= up``),
its answer, and Clarabel's status mapped to ours."""

from __future__ import annotations

import numpy as np

from . import SolveStatus


def clarabel_status(code) -> SolveStatus:
    """Our status for Clarabel's: solved, almost solved (inaccurate), primal infeasible (also
    "almost", reported as infeasible: the caller explains it); anything else -- dual
    infeasible, which a QP with every variable boxed cannot truly be, iteration or time limits,
    numerical errors -- is a failure."""
    import clarabel

    s = clarabel.SolverStatus
    return {s.Solved: SolveStatus.OPTIMAL,
            s.AlmostSolved: SolveStatus.OPTIMAL_INACCURATE,
            s.PrimalInfeasible: SolveStatus.INFEASIBLE,
            s.AlmostPrimalInfeasible: SolveStatus.INFEASIBLE}.get(code, SolveStatus.FAILED)


def solve_qp_clarabel(P, q, A, lo, up, eps, centre=None, scale=None, refine=True,
                       gap_abs=None):
    """Solve min x'Px/2 + q'x s.t. lo <= Ax <= up with Clarabel; map its status to ours.

    With ``centre`` and ``scale`` the QP is solved in ``y = (x - centre) / scale``: a step from
    the current iterate in units of each station's envelope. The answer is the same; the
    interior-point method needs about a quarter fewer iterations on it.

    ``refine=False`` skips iterative refinement of each Newton step. On these banded QPs that
    halves the time per interior-point iteration, with the same iteration count and answers
    within 1e-7 m^2/s^2 (measured on the 10 km benchmark); the status is still judged on the
    true residuals, so a caller retries with refinement whenever it is not "solved".
    ``gap_abs`` (in the objective's units) ends the solve once the duality gap is below it, even
    if the relative gap ``eps`` is not reached yet; the default is ``eps``.
    """
    import clarabel
    import scipy.sparse as sp           # with the Clarabel backend only

    if centre is not None:
        D = sp.diags(scale)
        q = scale * (q + P @ centre)
        shift = A @ centre
        lo, up = lo - shift, up - shift
        P = (D @ P @ D).tocsc()
        A = (A @ D).tocsr()
    eq = np.isfinite(lo) & np.isfinite(up) & (lo == up)
    hi_rows = np.isfinite(up) & ~eq
    lo_rows = np.isfinite(lo) & ~eq
    A = A.tocsr()
    Aall = sp.vstack([A[eq], A[hi_rows], -A[lo_rows]], format="csc")
    ball = np.concatenate([up[eq], up[hi_rows], -lo[lo_rows]])
    cones = [clarabel.ZeroConeT(int(eq.sum())),
             clarabel.NonnegativeConeT(int(hi_rows.sum() + lo_rows.sum()))]
    settings = clarabel.DefaultSettings()
    settings.verbose = False
    settings.tol_gap_abs = eps if gap_abs is None else gap_abs
    settings.tol_gap_rel = eps
    settings.tol_feas = eps
    settings.iterative_refinement_enable = refine
    solver = clarabel.DefaultSolver(sp.triu(P, format="csc"), q, Aall, ball, cones, settings)
    sol = solver.solve()
    status = clarabel_status(sol.status)
    x = np.asarray(sol.x)
    if centre is not None and x.size == scale.size:
        x = centre + scale * x
    return x, status, int(sol.iterations)
