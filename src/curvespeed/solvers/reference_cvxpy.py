"""Reference formulation of the convex speed program in cvxpy: slow, exact, independent.

This is the same discrete problem as :mod:`curvespeed.solvers.convex`, written a second way so
each checks the other:

* the comfort and friction ellipses are exact second-order cones (no chords);
* the objective is the exact total time ``sum c ds / (sqrt(b_k) + sqrt(b_k+1))`` (convex:
  ``inv_pos`` of a concave sum), which cvxpy turns into cones itself;
* the jerk bound and power limit, which are not convex, are linearised at the previous iterate
  in the conservative way the module docstring of :mod:`~curvespeed.solvers.convex` derives,
  but written out here from the definitions (``tau >= ds / w``, tangents of ``sqrt`` and of
  ``1/w``) rather than by calling that module.

It is used by the test suite and the benchmark, and can be selected with
``plan --solver convex-reference``. Import cost is high (cvxpy), so it is imported lazily.
"""

from __future__ import annotations

import math
import time
import warnings

import numpy as np

from ..errors import InfeasibleError, SolverError
from ..problem import SpeedProblem
from . import SolveResult, SolveStatus
from .envelope import solve_envelope

_B_FLOOR = 0.0025  # m^2/s^2, floor of linearisation points (tangents stay valid anywhere > 0)


def _index_sets(problem: SpeedProblem):
    n = problem.n_nodes
    nv = n - 1 if problem.closed else n
    k = np.arange(nv)
    if problem.closed:
        frm, to = k, (k + 1) % nv
    else:
        frm, to = k[:-1], k[1:]
    return nv, frm, to


def build_reference_model(problem: SpeedProblem, b_lin: np.ndarray, b_upper: np.ndarray,
                          comfort_weight: float = 0.0):
    """cvxpy problem for one iteration, jerk and power linearised at ``b_lin``.

    The objective is the total time, plus ``comfort_weight`` times the sum of squared changes of
    acceleration at the nodes. Returns ``(cvxpy.Problem, b_variable)``.
    """
    import cvxpy as cp

    lim = problem.limits
    g = lim.gravity_mps2
    ds = problem.ds
    nv, frm, to = _index_sets(problem)
    ns = frm.size
    b = cp.Variable(nv)
    cons = [b >= 0, b <= b_upper[:nv]]

    # fixed values: stops, and the ends of an open route
    fixed = {int(k) % nv: 0.0 for k in problem.stop_nodes}
    if not problem.closed:
        fixed[0] = problem.b_start
        fixed[nv - 1] = problem.b_end
    for k, val in fixed.items():
        cons.append(b[k] == val)

    kap = problem.kappa_abs[:nv]
    sb, cb = problem.sin_bank[:nv], problem.cos_bank[:nv]
    sg, cg = problem.sin_grade[:nv], problem.cos_grade[:nv]
    coef = problem.time_coef[:ns]
    f_first = problem.accel_factor_start[:ns]
    f_last = problem.accel_factor_end[:ns]
    mean_a = (b[to] - b[frm]) / (2 * ds)

    for nodes, fac in ((frm, f_first), (to, f_last)):
        a = cp.multiply(fac, mean_a)
        bj = b[nodes]
        lateral = cp.multiply(kap[nodes] * cb[nodes], bj) - g * sb[nodes]
        normal = g * cg[nodes] * cb[nodes] + cp.multiply(kap[nodes] * sb[nodes], bj)
        resist = (g * sg[nodes] + lim.rolling_resistance_coefficient * g * cg[nodes]
                  + lim.drag_per_b_1pm * bj)
        felt = cp.pos(lateral) / lim.max_lateral_accel_mps2
        # comfort ellipse, exact, on each side of zero acceleration
        cons.append(cp.norm(cp.vstack([cp.pos(a) / lim.max_accel_mps2, felt]), 2, axis=0) <= 1)
        cons.append(cp.norm(cp.vstack([cp.neg(a) / lim.max_decel_mps2, felt]), 2, axis=0) <= 1)
        # friction ellipse, exact
        cons.append(cp.norm(cp.vstack([cp.multiply(1.0 / problem.mu_long[nodes], a + resist),
                                       cp.multiply(1.0 / problem.mu_lat[nodes], lateral)]), 2,
                            axis=0) <= normal)
        # power, tangent of P/(m sqrt(b)) at the linearisation point (below the convex curve)
        if math.isfinite(lim.power_per_mass_wpkg):
            pm = lim.power_per_mass_wpkg
            for q in (b_lin[:nv], b_upper[:nv]):
                bq = np.maximum(q[nodes], _B_FLOOR)
                tangent = pm / np.sqrt(bq) - cp.multiply(0.5 * pm / bq ** 1.5, bj - bq)
                cons.append(a + resist <= tangent)

    if lim.max_jerk_mps3 is not None:
        cons += _jerk_constraints(problem, b, b_lin[:nv], nv, frm, to, mean_a, f_first, f_last)
        cons += _corner_constraints(problem, b, b_lin[:nv], b_upper, fixed, frm, to, mean_a)
    if lim.max_lateral_jerk_mps3 is not None:
        cons += _lateral_jerk_constraints(problem, b, b_lin[:nv], fixed, frm, to)

    objective = cp.sum(cp.multiply(coef * ds, cp.inv_pos(cp.sqrt(b[frm]) + cp.sqrt(b[to]))))
    if comfort_weight > 0:
        change, _, _ = _accel_change(problem, nv, frm, to, f_first, f_last)
        objective = objective + comfort_weight * cp.sum_squares(change @ b)
    return cp.Problem(cp.Minimize(objective), cons), b


def _accel_change(problem, nv, frm, to, f_first, f_last):
    """Sparse ``Dm`` with ``Dm @ b`` the change of acceleration at each node (after minus before;
    outside an open route the acceleration counts as zero), the nodes at rest on both sides,
    and the steps before and after each node."""
    import scipy.sparse as sp

    ds = problem.ds
    ns = frm.size
    h = 1.0 / (2.0 * ds)
    k = np.arange(nv)
    if problem.closed:
        before, after = (k - 1) % nv, k
        has_b = has_a = np.ones(nv, dtype=bool)
    else:
        before, after = np.maximum(k - 1, 0), np.minimum(k, ns - 1)
        has_b, has_a = k > 0, k < nv - 1
    fb = np.where(has_b, f_last[before], 0.0)
    fa = np.where(has_a, f_first[after], 0.0)
    rows = np.concatenate((k, k, k, k))
    cols = np.concatenate((to[after], frm[after], to[before], frm[before]))
    vals = np.concatenate((fa * h, -fa * h, -fb * h, fb * h))
    Dm = sp.csr_matrix((vals, (rows, cols)), shape=(nv, nv))
    at_rest = (fb == 0) & (fa == 0)
    return Dm, at_rest, (before, after, has_b, has_a)


def _known_roots(fixed, b_lin):
    """The stations of fixed speed (``fixed``: station -> squared speed), their values, and the
    square roots the tangents are taken at: exact where the speed is fixed, else of ``b_lin``
    (floored at ``_B_FLOOR``)."""
    known = np.zeros(b_lin.size, dtype=bool)
    value = np.zeros(b_lin.size)
    for k, val in fixed.items():
        known[k], value[k] = True, val
    return known, value, np.where(known, np.sqrt(value), np.sqrt(np.maximum(b_lin, _B_FLOOR)))


def _lateral_jerk_constraints(problem, b, b_lin, fixed, frm, to):
    """|d(kappa v^2)/dt| <= J_lat along every step and across every node (curvespeed.problem).

    The lateral jerk is a station rate of the lateral acceleration, linear in ``b``, times the
    speed: along a step the rate's magnitude is at most the largest of some forms in the step's
    squared speeds (:meth:`SpeedProblem.lateral_rate_forms`) and the speed at most one of its
    nodes'; at a
    node the crossed forms (:meth:`SpeedProblem.node_lateral_rate_forms`) go with the node's
    speed. So ``|form| <= J_lat / v`` at those nodes. ``J_lat / sqrt(b)`` is convex, so its
    tangent at ``b_lin`` is below it: the constraints are linear and conservative. Stations with
    a fixed speed use it exactly (none at rest, where the bound cannot bind); forms that are
    zero (no curvature) are left out.
    """
    import cvxpy as cp

    J = problem.limits.max_lateral_jerk_mps3
    known, value, r = _known_roots(fixed, b_lin)
    step_forms = problem.lateral_rate_forms()[:frm.size]
    cross = problem.node_lateral_rate_forms()
    sets = [((frm, to), step_forms[:, i], speed) for i in range(step_forms.shape[1])
            for speed in (frm, to)]
    sets += [((cross.prev, cross.node, cross.next), cross.forms[:, i], cross.node)
             for i in range(cross.forms.shape[1])]
    cons = []
    for cols, coef, speed in sets:
        rows = np.flatnonzero(np.any(coef != 0.0, axis=1)
                              & (~known[speed] | (value[speed] > 0.0)))
        if rows.size == 0:
            continue
        nd, rn = speed[rows], r[speed[rows]]
        # J / sqrt(b) >= J / r - J (b - b_lin) / (2 r^3): the tangent at a free station
        slope = np.where(known[nd], 0.0, J / (2.0 * rn ** 3))
        allowed = J / rn - cp.multiply(slope, b[nd] - np.where(known[nd], 0.0, b_lin[nd]))
        rate = sum(cp.multiply(coef[rows, j], b[c[rows]]) for j, c in enumerate(cols))
        cons += [rate <= allowed, -rate <= allowed]
    return cons


def _jerk_constraints(problem, b, b_lin, nv, frm, to, mean_a, f_first, f_last):
    """|a_after - a_before| <= J tau at every node, tau the node's time base.

    Written from the definition (:attr:`SpeedProblem.jerk_terms`): each term says
    ``tau >= scale ds / w`` with ``w`` a weighted sum of ``sqrt(b)`` at up to three nodes.
    ``w`` is bounded above by the tangents of ``sqrt`` at ``b_lin`` (concave; exact at a node of
    fixed speed), and ``1 / w`` below by the tangent of ``1 / x`` at the linearisation point
    (convex). ``Dm @ b`` is the change of acceleration at each node.
    """
    import cvxpy as cp
    import scipy.sparse as sp

    J = problem.limits.max_jerk_mps3
    ds = problem.ds
    terms = problem.jerk_terms
    Dm, _, _ = _accel_change(problem, nv, frm, to, f_first, f_last)
    fixed = np.zeros(nv, dtype=bool)
    fixed[np.asarray(problem.stop_nodes, dtype=int) % nv] = True
    value = np.zeros(nv)
    if not problem.closed:
        fixed[[0, nv - 1]] = True
        value[0], value[nv - 1] = problem.b_start, problem.b_end
    roots = np.where(fixed, np.sqrt(value), np.sqrt(np.maximum(b_lin, _B_FLOOR)))
    cols = (terms.prev, terms.node, terms.next)
    w_hat = sum(terms.weights[:, i] * roots[c] for i, c in enumerate(cols))
    # tangent of sqrt at b_lin: sqrt(b) <= r + (b - b_lin) / (2 r), at free nodes only
    slopes = []
    for i, c in enumerate(cols):
        exact = fixed[c] | (terms.weights[:, i] == 0.0)
        slopes.append(np.where(exact, 0.0, terms.weights[:, i] / np.where(exact, 1.0,
                                                                           2.0 * roots[c])))
    m = terms.node.size
    Wm = sp.csr_matrix((np.concatenate(slopes), (np.tile(np.arange(m), 3), np.concatenate(cols))),
                       shape=(m, nv))
    w_upper_0 = w_hat - Wm @ b_lin
    cons = []
    zero = terms.scale == 0.0
    if zero.any():
        cons.append(Dm[terms.node[zero]] @ b == 0)
    idx = np.flatnonzero(~zero)
    wh = w_hat[idx]
    w_upper = w_upper_0[idx] + Wm[idx] @ b
    # 1/w >= 2/w_hat - w/w_hat^2 (tangent of the convex 1/w), and w <= w_upper
    budget = cp.multiply(terms.scale[idx] * J * ds,
                         2.0 / wh - cp.multiply(1.0 / (wh * wh), w_upper))
    change = Dm[terms.node[idx]] @ b
    cons += [change <= budget, -change <= budget]
    return cons


def _corner_constraints(problem, b, b_lin, b_upper, fixed, frm, to, mean_a):
    """The acceleration leaves or reaches its cap no faster than the jerk bound allows
    (:mod:`curvespeed.solvers.corner_rows` derives it): for two consecutive constant-
    acceleration steps, the corner step ``c`` and its neighbour ``n``,
    ``sign (alpha a_c - a_n) <= beta cap + gamma J T_c / 2 + J T_n / 2`` for each chord, ``cap``
    the largest the pair's nodes can have over their speed range up to ``b_upper``.

    ``J T / 2 = J ds / (v + v')``: ``v + v'`` is bounded above by the tangents of ``sqrt`` at
    ``b_lin`` (exact at a fixed station) and ``1 / x`` below by its tangent, as for the jerk
    rows."""
    import cvxpy as cp

    from .corner_rows import SEGMENTS

    lim = problem.limits
    J = lim.max_jerk_mps3
    ds = problem.ds
    ns = frm.size
    plain = ((problem.time_coef[:ns] == 2.0) & (problem.accel_factor_start[:ns] == 1.0)
             & (problem.accel_factor_end[:ns] == 1.0))
    first = np.arange(ns) if problem.closed and ns > 2 else np.arange(max(ns - 1, 0))
    second = (first + 1) % ns if problem.closed else first + 1
    keep = plain[first] & plain[second]
    pair = (first[keep], second[keep])
    if pair[0].size == 0:
        return []
    known, _, r = _known_roots(fixed, b_lin)
    w_hat = r[frm] + r[to]
    w_hat = np.where(w_hat > 0.0, w_hat, 1.0)

    w_up = []
    for nodes in (frm, to):
        free = ~known[nodes]
        slope = np.where(free, 0.5 / np.where(free, r[nodes], 1.0), 0.0)
        w_up.append(r[nodes] + cp.multiply(slope, b[nodes] - np.where(free, b_lin[nodes], 0.0)))
    w_up = w_up[0] + w_up[1]
    half = J * ds * (2.0 / w_hat - cp.multiply(1.0 / (w_hat * w_hat), w_up))
    # the largest cap a node can have over its speed range (the comfort cap, or the grip's at
    # the largest normal load and the least or most resistance), a pair's the largest of its
    # three nodes'
    nv = b_lin.size
    e, zero, nodes = b_upper[:nv], np.zeros(nv), np.arange(nv)
    load = np.maximum(problem.normal_accel(zero, nodes), problem.normal_accel(e, nodes))
    r0, r1 = problem.resistance(zero, nodes), problem.resistance(e, nodes)
    grip = problem.mu_long[:nv] * load
    trio = (frm[pair[0]], to[pair[0]], to[pair[1]])
    cons = []
    for sign, node_cap in ((1.0, np.minimum(lim.max_accel_mps2, grip - np.minimum(r0, r1))),
                           (-1.0, np.minimum(lim.max_decel_mps2, grip + np.maximum(r0, r1)))):
        cap = np.max([node_cap[t] for t in trio], axis=0)
        ok = np.isfinite(cap)
        first, second = pair[0][ok], pair[1][ok]
        for c, n in ((first, second), (second, first)):
            for alpha, beta, gamma in SEGMENTS:
                lhs = sign * (alpha * mean_a[c] - mean_a[n])
                cons.append(lhs <= beta * cap[ok] + gamma * half[c] + half[n])
    return cons


def solve_reference(problem: SpeedProblem, max_iterations: int = 30,
                    rel_improvement: float = 1e-5, solver: str = "CLARABEL",
                    comfort_weight: float = 0.0) -> SolveResult:
    """Sequential convex programming on the exact cvxpy model, from the envelope."""
    import cvxpy as cp

    t0 = time.perf_counter()
    env = solve_envelope(problem)
    nv, frm, to = _index_sets(problem)
    b_lin = env.b.copy()
    best_time = math.inf
    status = SolveStatus.OPTIMAL
    best = env.b.copy()
    it = 0
    for it in range(1, max_iterations + 1):
        prob, b = build_reference_model(problem, b_lin, env.b, comfort_weight)
        try:
            with warnings.catch_warnings():
                # cvxpy warns about inaccurate solutions; the status below records it instead
                warnings.simplefilter("ignore", UserWarning)
                prob.solve(solver=solver)
        except cp.error.SolverError as exc:
            raise SolverError(f"cvxpy reference: {exc}") from None
        if prob.status in ("infeasible", "infeasible_inaccurate"):
            raise InfeasibleError("the reference model is infeasible")
        if prob.status == "optimal_inaccurate":
            status = SolveStatus.OPTIMAL_INACCURATE
        if b.value is None:
            raise SolverError(f"cvxpy reference: status {prob.status}")
        cand = np.clip(b.value, 0.0, env.b[:nv])
        t_cand = float(prob.value)
        full = np.empty(problem.n_nodes)
        full[:nv] = cand
        if problem.closed:
            full[-1] = full[0]
        improved = (best_time - t_cand) / t_cand if math.isfinite(best_time) else math.inf
        if t_cand < best_time:
            best, best_time = full, t_cand
        b_lin = full
        if improved < rel_improvement:
            break
    return SolveResult(b=best, status=status, solver="convex-reference",
                       iterations=it, solve_time_s=time.perf_counter() - t0,
                       ceiling_b=env.ceiling_b, envelope_b=env.b)
