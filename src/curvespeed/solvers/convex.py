"""Convex program over squared speed with jerk bounds, solved by sequential convex programming.

The program (see ``docs/method.md`` for the full statement and sources) works on the discrete
problem of :mod:`curvespeed.problem` with the squared speeds ``b`` as variables:

* **bounds** ``0 <= b <= b_env``: the forward-backward envelope is the pointwise largest
  feasible profile, so every jerk-limited profile lies below it;
* **acceleration at both nodes of each step**: ``lo_k(b_k) <= a <= hi_k(b_k)``. Without power,
  ``hi_k`` is concave and ``lo_k`` convex in ``b_k``; each is replaced by its piecewise-linear
  interpolation on the break points ``0 < b_hat_k < b_env_k``. The interpolation of a concave
  function lies below it, so the linear rows are *inside* the true ellipses (conservative) and
  exact at the break points;
* **power** ``a <= P / (m sqrt(b)) - res(b)``: the right side is convex in ``b``, so its tangents
  at ``b_hat`` and ``b_env`` lie below it (conservative, exact at the tangent points);
* **jerk** at each node: ``|a_after - a_before| <= J * tau`` with ``tau`` the time between the
  mid-points of the two steps. By convexity of ``1/x``, ``tau >= ds / w`` with
  ``w = (v_prev + 2 v + v_next) / 4``; ``w`` is concave in ``b`` so its tangent at ``b_hat`` is an
  upper bound, and ``J ds / w`` is then replaced by its tangent (a lower bound, ``1/w`` being
  convex). Both steps keep the row conservative for any ``b_hat > 0``;
* **lateral jerk** (when bounded): the linear forms that bound the station rate of the lateral
  acceleration along each step and across each node (:meth:`SpeedProblem.lateral_rate_forms`,
  :meth:`SpeedProblem.node_lateral_rate_forms`) within ``J_lat / v`` of a node's speed,
  ``J_lat / sqrt(b)`` replaced by its tangent (below it, being convex; see
  :meth:`_QPBuilder._lateral_jerk_rows`);
* **objective**: total time ``sum 2 ds / (sqrt(b_k) + sqrt(b_k+1))`` (convex), replaced in each
  iteration by its exact second-order model at ``b_hat``, plus an optional comfort term
  ``w_c * sum (a_after - a_before)^2``.

Each iteration solves one sparse, banded QP with Clarabel (an interior-point method: the time
objective's curvature spans orders of magnitude between slow and fast stretches, which a
first-order method such as OSQP did not converge on within 20 000 iterations even with variables
and rows scaled; an interior-point method is indifferent to it), then a line search on the true
objective between the previous iterate and the QP's answer: the segment lies inside the
conservative feasible set, so every accepted iterate is feasible for the real limits and the
objective never increases. Break points and tangents move to the new iterate and the loop stops
when the objective (the time, plus any comfort term) improves by less than ``rel_improvement``
of the route's time.

Stops and stations held at a speed cap cut the route into independent stretches (blocks); they
are grouped into batches of about :data:`_BATCH_VARIABLES` stations (by their sizes alone, so
the answer is the same for any number of threads), one QP each, solved at once on the
processor's cores.
"""

from __future__ import annotations

import math
import os
import time
import warnings
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from ..diagnose import stop_out_of_reach
from ..errors import CurvespeedWarning, InfeasibleError, SolverError
from ..problem import SpeedProblem
from . import SolveResult, SolveStatus
from .envelope import solve_envelope

#: Floor on squared speed where a square root is linearised, m^2/s^2 ((0.05 m/s)^2).
_B_FLOOR = 0.0025


@dataclass(frozen=True)
class ConvexOptions:
    """Settings of the convex solver.

    Attributes
    ----------
    comfort_weight : float
        Weight of the squared change of acceleration across nodes, s/(m/s^2)^2; 0 is pure
        minimum time.
    max_iterations : int
        Cap on sequential-convex iterations.
    rel_improvement : float
        A stretch stops iterating when an iteration improves the route's time by less than this
        fraction of it.
    margin : float
        Fraction by which acceleration and jerk rows are tightened inside their limits so that a
        solver's tolerance never leaves the true limits.
    chord_tolerance_mps2 : float
        A node's acceleration limit is replaced by one chord over its whole range (instead of two)
        where that chord is within this of the limit at the current iterate, m/s^2. Chords are
        always inside the limit, so this only trades a little optimality for a smaller QP.
    qp_tolerance : float
        Feasibility and relative gap tolerance of each QP solve (Clarabel).
    qp_gap_fraction : float
        A QP solve also ends once its duality gap, in seconds, is below this fraction of the
        envelope's route time (a thousandth of ``rel_improvement``: finer than the stopping test
        can see, and it spares the interior-point method the last few iterations).
    threads : int or None
        Worker threads that solve independent batches of the QP at once (the batches, and so
        the answer, do not depend on it); None uses every
        processor core this process may run on.
    anchor_plateaus : bool
        Hold the middle of long stretches where the envelope sits at a speed cap (see
        :func:`plateau_anchors`), which shrinks the QP; if that makes it infeasible, the solve
        is repeated without. Only for pure minimum time (no comfort weight).
    """

    comfort_weight: float = 0.0
    max_iterations: int = 30
    rel_improvement: float = 1e-4
    margin: float = 1e-5
    chord_tolerance_mps2: float = 1e-3
    qp_tolerance: float = 1e-8
    qp_gap_fraction: float = 1e-7
    threads: int | None = None
    anchor_plateaus: bool = True


class _Layout:
    """Index structure of the QP: variables, steps, jerk stencils. Built once per problem."""

    def __init__(self, problem: SpeedProblem, jerk: bool, anchors=None):
        n_nodes = problem.n_nodes
        self.closed = problem.closed
        self.nv = n_nodes - 1 if problem.closed else n_nodes      # distinct nodes
        nv = self.nv
        if problem.closed:
            self.step_from = np.arange(nv)
            self.step_to = (np.arange(nv) + 1) % nv
        else:
            self.step_from = np.arange(nv - 1)
            self.step_to = np.arange(1, nv)
        self.n_steps = self.step_from.size
        # fixed variables: stops, and the ends of an open route
        fixed = np.zeros(nv, dtype=bool)
        value = np.zeros(nv)
        stops = problem.stop_nodes % nv if problem.closed else problem.stop_nodes
        fixed[stops] = True
        if not problem.closed:
            fixed[0] = True
            value[0] = problem.b_start
            fixed[-1] = True
            value[-1] = problem.b_end
        if anchors is not None:
            mask, values = anchors
            value = np.where(mask & ~fixed, values, value)
            fixed = fixed | mask
        self.fixed = fixed
        self.fixed_value = value
        # per-step model (see curvespeed.problem): time coefficient and end-node factors
        self.time_coef = problem.time_coef[: self.n_steps]
        self.f_first = problem.accel_factor_start[: self.n_steps]
        self.f_last = problem.accel_factor_end[: self.n_steps]
        # node stencils: node k with the step before (from prev) and the step after (to next)
        k = np.arange(nv)
        if problem.closed:
            self.j_prev, self.j_next = (k - 1) % nv, (k + 1) % nv
            self.j_has_prev = self.j_has_next = np.ones(nv, dtype=bool)
            self.step_before, self.step_after = (k - 1) % nv, k
        else:
            self.j_prev, self.j_next = np.maximum(k - 1, 0), np.minimum(k + 1, nv - 1)
            self.j_has_prev, self.j_has_next = k > 0, k < nv - 1
            self.step_before = np.maximum(k - 1, 0)
            self.step_after = np.minimum(k, self.n_steps - 1)
        self.jerk = jerk
        self.D = self._delta_a(problem.ds)

    def _delta_a(self, ds: float):
        """Sparse rows of (acceleration after) - (acceleration before) at every node, in b."""
        h = 1.0 / (2.0 * ds)
        k = np.arange(self.nv)
        hp, hn = self.j_has_prev, self.j_has_next
        fa = np.where(hn, self.f_first[self.step_after], 0.0) * h    # a_after = fa (b_next - b_k)
        fb = np.where(hp, self.f_last[self.step_before], 0.0) * h    # a_before = fb (b_k - b_prev)
        m = sp.coo_matrix((np.concatenate((fa, -fa, -fb, fb)),
                           (np.concatenate((k, k, k, k)),
                            np.concatenate((self.j_next, k, k, self.j_prev)))),
                          shape=(self.nv, self.nv)).tocsr()
        m.sum_duplicates()
        return m


def _time_model(b_hat: np.ndarray, lay: _Layout, ds: float):
    """Total time, gradient and (upper-triangular) Hessian of the time at ``b_hat``."""
    free = ~lay.fixed
    fx, fy = free[lay.step_from], free[lay.step_to]
    # square roots, floored where the variable is free (a free node is never meant to be at rest)
    root_floor = math.sqrt(_B_FLOOR)
    sx = np.sqrt(np.maximum(b_hat[lay.step_from], 0.0))
    sy = np.sqrt(np.maximum(b_hat[lay.step_to], 0.0))
    sxf = np.where(fx, np.maximum(sx, root_floor), sx)
    syf = np.where(fy, np.maximum(sy, root_floor), sy)
    S = sxf + syf
    half_c = 0.5 * lay.time_coef            # step time is c ds / S
    total = float(np.sum(2.0 * half_c * ds / S))
    sxf = np.maximum(sxf, root_floor)       # only used where the variable is free
    syf = np.maximum(syf, root_floor)
    cds = half_c * ds
    gx = np.where(fx, -cds / (S * S * sxf), 0.0)
    gy = np.where(fy, -cds / (S * S * syf), 0.0)
    hxx = np.where(fx, cds * (1.0 / (S ** 3 * sxf ** 2) + 0.5 / (S * S * sxf ** 3)), 0.0)
    hyy = np.where(fy, cds * (1.0 / (S ** 3 * syf ** 2) + 0.5 / (S * S * syf ** 3)), 0.0)
    hxy = np.where(fx & fy, cds / (S ** 3 * sxf * syf), 0.0)
    nv = lay.nv
    grad = np.zeros(nv)
    np.add.at(grad, lay.step_from, gx)
    np.add.at(grad, lay.step_to, gy)
    diag = np.zeros(nv)
    np.add.at(diag, lay.step_from, hxx)
    np.add.at(diag, lay.step_to, hyy)
    return total, grad, diag, hxy


class _QPBuilder:
    """Assembles the QP of one iteration around the break points ``b_hat`` (see module doc)."""

    def __init__(self, problem: SpeedProblem, lay: _Layout, b_env: np.ndarray,
                 options: ConvexOptions):
        self.p = problem
        self.lay = lay
        self.b_env = b_env
        self.opt = options
        self.ds = problem.ds
        self.has_power = math.isfinite(problem.limits.power_per_mass_wpkg)
        self.D = lay.D
        self.step_forms = problem.lateral_rate_forms()[: lay.n_steps]
        self.node_forms = problem.node_lateral_rate_forms()

    def _node_bounds(self, b, nodes, include_power=False):
        return self.p.accel_bounds(b, nodes=nodes, include_power=include_power)

    def _lateral_jerk_rows(self, b_hat: np.ndarray):
        """Rows ``+-R . b + J_lat b_e / (2 r_e^3) <= 3 J_lat / (2 r_e)`` for every rate form.

        The lateral jerk is a rate form ``R . b`` (linear in ``b``) times a node's speed
        ``sqrt(b_e)``: along each step every form of :meth:`SpeedProblem.lateral_rate_forms`
        with the speed of either node (the larger bounds the speed along the step), and at
        each node both crossed forms of :meth:`SpeedProblem.node_lateral_rate_forms` with the
        node's own speed. ``|R . b| <= J_lat / sqrt(b_e)`` keeps the bound; ``J / sqrt(b)`` is
        convex, so its tangent at ``b_hat`` (``r = sqrt(b_hat)``) lies below it, which keeps
        each row inside the true bound for any ``b_hat > 0``. A fixed station's speed is known
        exactly (no row where it is at rest: there the bound cannot bind); a form that is zero
        (no curvature, or one that would repeat another) needs no row.
        """
        lay = self.lay
        J = self.p.limits.max_lateral_jerk_mps3 * (1.0 - self.opt.margin)
        root = np.where(lay.fixed, np.sqrt(np.maximum(lay.fixed_value, 0.0)),
                        np.sqrt(np.maximum(b_hat, _B_FLOOR)))
        with np.errstate(divide="ignore"):
            slope = np.where(lay.fixed, 0.0, 0.5 * J / root ** 3)          # on b_e, moved left
            budget = np.where(lay.fixed, J / root, 1.5 * J / root)
        parts = []                      # (columns, coefficients, speed node) per set of rows
        sf, st = lay.step_from, lay.step_to
        for i in range(self.step_forms.shape[1]):
            for end in (sf, st):
                parts.append((np.stack((sf, st), axis=1), self.step_forms[:, i], end))
        cross = self.node_forms
        for i in (0, 1):
            parts.append((np.stack((cross.prev, cross.node, cross.next), axis=1),
                          cross.forms[:, i], cross.node))
        rows, cols, vals, rhs = [], [], [], []
        n_rows = 0
        for c, coef, end in parts:
            k = np.flatnonzero(np.any(coef != 0.0, axis=1) & np.isfinite(budget[end]))
            c, coef, end = c[k], coef[k], end[k]
            on_end = np.where(c == end[:, None], slope[end][:, None], 0.0)
            for sign in (1.0, -1.0):
                r = np.arange(n_rows, n_rows + k.size)
                rows.append(np.repeat(r, c.shape[1]))
                cols.append(c.ravel())
                vals.append((sign * coef + on_end).ravel())
                rhs.append(budget[end])
                n_rows += k.size
        L = sp.coo_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                          shape=(n_rows, lay.nv)).tocsr()
        L.sum_duplicates()
        return L, np.concatenate(rhs)

    def _jerk_rows(self, b_hat: np.ndarray):
        """Rows ``+-D[node] b <= scale J ds (2 / w_hat - w_up(b) / w_hat^2)`` for every term of
        the jerk's time base (:attr:`SpeedProblem.jerk_terms`).

        A term bounds the time base by ``scale ds / w`` with ``w`` a weighted sum of square
        roots, concave in ``b``: its tangent ``w_up`` at ``b_hat`` bounds it from above, so
        ``1 / w >= 1 / w_up``, and the tangent of the convex ``1 / x`` at ``w_hat`` bounds that
        from below. Both keep the row inside the true bound for any ``b_hat > 0``; a fixed
        station's speed is known exactly. A term of scale 0 asks for no change at all.
        """
        p, lay = self.p, self.lay
        t = p.jerk_terms
        J = p.limits.max_jerk_mps3 * (1.0 - self.opt.margin)
        root = np.where(lay.fixed, np.sqrt(np.maximum(lay.fixed_value, 0.0)),
                        np.sqrt(np.maximum(b_hat, _B_FLOOR)))
        base = np.where(lay.fixed, lay.fixed_value, b_hat)
        cols = (t.prev, t.node, t.next)
        w_hat = sum(t.weights[:, i] * root[c] for i, c in enumerate(cols))
        w_hat = np.where(w_hat > 0.0, w_hat, 1.0)
        coef = t.scale * J * self.ds / (w_hat * w_hat)
        slopes = []
        for i, c in enumerate(cols):
            exact = lay.fixed[c] | (t.weights[:, i] == 0.0)
            slopes.append(np.where(exact, 0.0, coef * t.weights[:, i]
                                   / np.where(exact, 1.0, 2.0 * root[c])))
        rhs = t.scale * J * self.ds / w_hat + sum(g * base[c] for g, c in zip(slopes, cols))
        m = t.node.size
        G = sp.coo_matrix((np.concatenate(slopes),
                           (np.tile(np.arange(m), 3), np.concatenate(cols))),
                          shape=(m, lay.nv)).tocsr()
        G.sum_duplicates()
        Dn = self.D[t.node]
        return sp.vstack([Dn + G, -Dn + G], format="csr"), np.concatenate((rhs, rhs))

    def build(self, b_hat: np.ndarray):
        p, lay, ds = self.p, self.lay, self.ds
        nv = lay.nv
        e = self.b_env[:nv]
        free = ~lay.fixed
        h = 1.0 / (2.0 * ds)
        margin = self.opt.margin
        lim = p.limits
        # break points: 0 < m < e, with m the current iterate kept within [2 %, 99.5 %] of the
        # envelope. Near a lateral limit the limit bends sharply just below the envelope: with
        # the cap at 98 % a closed test loop with a comfort weight stopped 3e-4 slower than the
        # exact-cone model, at 99.5 % 7e-5; at 99.9 % the chord below the iterate is so long
        # that SCP creeps (mountain road 4 iterations for what 2 do). A third break point
        # gained no more and made the 100 km QPs 30 % slower.
        m = np.clip(b_hat, 0.02 * e, 0.995 * e)
        m = np.where(e - b_hat < 1e-9 * np.maximum(e, 1.0), 0.5 * e, m)
        nodes = np.arange(nv)
        pts = [np.zeros(nv), m, e]
        lo_pts, hi_pts = zip(*(self._node_bounds(q, nodes) for q in pts))

        rows_i, cols_i, vals_i, lower, upper = [], [], [], [], []
        row0 = 0

        def add_rows(c1, v1, c2, v2, lo, up):
            nonlocal row0
            cnt = c1.size
            r = np.arange(row0, row0 + cnt)
            rows_i.extend([r, r])
            cols_i.extend([c1, c2])
            vals_i.extend([v1, v2])
            lower.append(lo)
            upper.append(up)
            row0 += cnt

        # acceleration rows: each step at each of its nodes, each side, each segment
        sf, st = lay.step_from, lay.step_to
        # A concave hi (convex lo) is replaced by its chords on [0, m] and [m, e]; where the
        # single chord on [0, e] is within chord_tolerance of it at m (straights, gentle curves)
        # that one row is enough. Rows identical at both ends of a step are kept once.
        rows_seen = {}
        for end, fac in ((sf, lay.f_first), (st, lay.f_last)):
            for side in ("hi", "lo"):
                f = hi_pts if side == "hi" else lo_pts
                f0, fm, fe = f[0][end], f[1][end], f[2][end]
                p0, pm_, pe = pts[0][end], pts[1][end], pts[2][end]
                # tightened by `margin` of the bound itself, not of the cap: a cap far above
                # what grip allows (max_accel 1e6) must not tighten the grip rows by 10 m/s^2
                a_tol = margin * np.maximum(np.maximum(np.abs(f0), np.abs(fm)), np.abs(fe))
                wide = pe - p0 > 1e-12
                whole = np.where(wide, (fe - f0) / np.where(wide, pe - p0, 1.0), 0.0)
                dev = np.abs(fm - (f0 + whole * (pm_ - p0)))
                single = dev <= self.opt.chord_tolerance_mps2
                for seg, (p1, p2, f1, f2) in enumerate(((p0, pm_, f0, fm), (pm_, pe, fm, fe))):
                    width = p2 - p1
                    ok = width > 1e-12
                    slope = np.where(ok, (f2 - f1) / np.where(ok, width, 1.0), 0.0)
                    rhs = f1 - slope * p1
                    if seg == 0:
                        slope = np.where(single, whole, slope)
                        rhs = np.where(single, f0 - whole * p0, rhs)
                        ok = ok | single
                    else:
                        ok = ok & ~single
                    c_from, c_to = _accel_minus_slope(end is sf, fac * h, slope)
                    key = (side, seg)
                    if key in rows_seen:    # same row already at the other end of the step
                        pc_from, pc_to, prhs = rows_seen[key]
                        same = (pc_from == c_from) & (pc_to == c_to) & (prhs == rhs)
                        ok = ok & ~same
                    else:
                        rows_seen[key] = (c_from, c_to, rhs)
                    if side == "hi":
                        up = np.where(ok, rhs - a_tol, np.inf)
                        add_rows(sf, c_from, st, c_to, np.full(sf.size, -np.inf), up)
                    else:
                        lo = np.where(ok, rhs + a_tol, -np.inf)
                        add_rows(sf, c_from, st, c_to, lo, np.full(sf.size, np.inf))

        # power: tangents of P/(m sqrt(b)) - res(b) at m and e (drive side only)
        if self.has_power:
            pm = lim.power_per_mass_wpkg
            for end, fac in ((sf, lay.f_first), (st, lay.f_last)):
                for q in (m, e):
                    bq = np.maximum(q[end], _B_FLOOR)
                    res0 = p.resistance(0.0, nodes=end)
                    res1 = p.resistance(1.0, nodes=end) - res0      # d res / d b
                    f0 = pm / np.sqrt(bq)
                    slope = -0.5 * pm / bq ** 1.5 - res1
                    bound = f0 - res0 - res1 * bq                   # the limit at bq
                    rhs = bound - slope * bq - margin * np.abs(bound)
                    c_from, c_to = _accel_minus_slope(end is sf, fac * h, slope)
                    add_rows(sf, c_from, st, c_to, np.full(sf.size, -np.inf), rhs)

        A_acc = sp.coo_matrix((np.concatenate(vals_i), (np.concatenate(rows_i),
                                                         np.concatenate(cols_i))),
                              shape=(row0, nv)).tocsr()
        blocks = [sp.identity(nv, format="csr"), A_acc]
        lb = np.where(lay.fixed, lay.fixed_value, 0.0)
        ub = np.where(lay.fixed, lay.fixed_value, e)
        lows = [lb, np.concatenate(lower)]
        ups = [ub, np.concatenate(upper)]

        # jerk rows: |D b| <= R(b), R linear (tangent, see module docstring)
        if lay.jerk:
            J, up_j = self._jerk_rows(b_hat)
            blocks.append(J)
            lows.append(np.full(J.shape[0], -np.inf))
            ups.append(up_j)

        if lim.max_lateral_jerk_mps3 is not None:
            L, up_l = self._lateral_jerk_rows(b_hat)
            blocks.append(L)
            lows.append(np.full(L.shape[0], -np.inf))
            ups.append(up_l)

        A = sp.vstack(blocks, format="csc")
        lo_all = np.concatenate(lows)
        up_all = np.concatenate(ups)

        # objective: second-order model of the time at b_hat (+ comfort term), scaled to O(1)
        total, grad, diag, hxy = _time_model(b_hat, lay, ds)
        H = sp.coo_matrix((np.concatenate((diag, hxy)),
                           (np.concatenate((np.arange(nv), sf)),
                            np.concatenate((np.arange(nv), st)))), shape=(nv, nv))
        H = (H + H.T - sp.diags(diag)).tocsc()     # symmetric
        if self.opt.comfort_weight > 0:
            H = H + 2.0 * self.opt.comfort_weight * (self.D.T @ self.D)
            grad = grad + 2.0 * self.opt.comfort_weight * (self.D.T @ (self.D @ b_hat))
        # pinned variables: decouple them (their value is fixed by the bounds)
        pin = sp.diags(lay.fixed.astype(float))
        keep = sp.diags((~lay.fixed).astype(float))
        H = (keep @ H @ keep + pin).tocsc()
        q = grad - H @ b_hat
        q = np.where(lay.fixed, -lay.fixed_value, q)
        # scale so that a typical (median) gradient is 1: the gap tolerance then means the same
        # for fast and slow stretches alike (the largest gradients, near rest, are 1e4 larger)
        scale = 1.0 / max(float(np.median(np.abs(grad[free]))) if free.any() else 1.0, 1e-12)
        return H * scale, q * scale, A, lo_all, up_all, scale


def _clarabel_status(code) -> SolveStatus:
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


def _accel_minus_slope(at_first_node: bool, fh, slope):
    """Coefficients on (b_from, b_to) of ``a - slope * b_end`` for a step whose acceleration at
    this end is ``a = fh (b_to - b_from)``, ``b_end`` being the step's first or last node."""
    if at_first_node:
        return -fh - slope, fh
    return -fh, fh - slope


def _solve_qp_clarabel(P, q, A, lo, up, eps, centre=None, scale=None, refine=True,
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
    status = _clarabel_status(sol.status)
    x = np.asarray(sol.x)
    if centre is not None and x.size == scale.size:
        x = centre + scale * x
    return x, status, int(sol.iterations)


def plateau_anchors(problem: SpeedProblem, b_env: np.ndarray, nv: int):
    """Stations in the middle of long stretches where the envelope holds a speed cap.

    Where the envelope holds the top speed or a zone's cap with zero acceleration for long
    enough, a jerk-limited profile reaches the cap too: leaving or joining the stretch takes at
    most ``v (a_accel + a_decel) / j`` of distance on either side. Stations farther than that
    (plus five steps) from the stretch's ends are fixed at the cap, which removes them from the
    QP. (Plateaus along constant-radius curves are not held: there the envelope leaves no
    acceleration to spare, and holding them made some QPs infeasible, for a small gain.)

    A lateral jerk bound is not part of the envelope: where the curvature changes so fast that
    the cap speed would use more than half of the bound, the vehicle may have to slow down well
    below the cap, so no station is held within a full stop and restart of such a step (braking
    from the highest cap to rest and speeding up again, plus the jerk ramps).
    Returns ``(mask, values)`` over the ``nv`` distinct nodes.
    """
    lim = problem.limits
    b = b_env[:nv]
    at_cap = b >= problem.cap_b[:nv] * (1 - 1e-9)
    flat_step = (np.abs(np.diff(b)) <= 1e-9 * np.maximum(b[1:], 1.0)) & at_cap[1:] & at_cap[:-1]
    if lim.max_lateral_jerk_mps3 is not None:
        lat_jerk = np.abs(problem.step_lateral_jerk(b_env))[: nv - 1]
        hard = lat_jerk > 0.5 * lim.max_lateral_jerk_mps3
        if hard.any():
            b_top = float(b.max())
            slow_down = (b_top / (2.0 * min(lim.max_accel_mps2, lim.max_decel_mps2))
                         + math.sqrt(b_top) * (lim.max_accel_mps2 + lim.max_decel_mps2)
                         / lim.max_jerk_mps3)
            reach_steps = int(math.ceil(slow_down / problem.ds)) + 5
            # steps within reach_steps of a hard step (a running count over a sliding window)
            count = np.concatenate(([0], np.cumsum(hard)))
            lo = np.clip(np.arange(hard.size) - reach_steps, 0, hard.size)
            hi = np.clip(np.arange(hard.size) + reach_steps + 1, 0, hard.size)
            flat_step &= (count[hi] - count[lo]) == 0
    both = np.zeros(nv, dtype=bool)
    both[1:-1] = flat_step[:-1] & flat_step[1:]
    reach = np.sqrt(b) * (lim.max_accel_mps2 + lim.max_decel_mps2) / lim.max_jerk_mps3
    margin = np.ceil(reach / problem.ds).astype(int) + 5
    mask = np.zeros(nv, dtype=bool)
    edges = np.flatnonzero(np.diff(np.concatenate(([0], both.astype(int), [0]))))
    for a, e in zip(edges[::2], edges[1::2]):
        m = int(margin[a])
        if e - a > 2 * m:
            mask[a + m:e - m] = True
    return mask, b.copy()


def solve_convex(problem: SpeedProblem, options: ConvexOptions = ConvexOptions()) -> SolveResult:
    """Minimum-time profile with jerk bound (and every envelope limit); see module docstring."""
    t_start = time.perf_counter()
    env = solve_envelope(problem)
    jerk = problem.limits.max_jerk_mps3 is not None
    nv = problem.n_nodes - 1 if problem.closed else problem.n_nodes
    notes = []
    # Holding plateaus relies on the fastest profile reaching the cap; a comfort weight may
    # rather take the transitions more gently, so it is not held then.
    hold = jerk and options.anchor_plateaus and options.comfort_weight == 0
    anchors = plateau_anchors(problem, env.b, nv) if hold else None
    held_failed = False
    try:
        out = _run_scp(problem, env, options, anchors)
    except (InfeasibleError, SolverError) as exc:
        if anchors is None or not anchors[0].any():
            raise
        notes.append(f"holding stretches at their speed cap failed ({exc}); solved without")
        held_failed = True
        out = _run_scp(problem, env, options, None)
    b_hat, status, iterations, qp_iterations, more_notes = out
    notes += more_notes
    if anchors is not None and anchors[0].any() and not held_failed:
        notes.append(f"{int(anchors[0].sum())} of {nv} stations held at their speed cap "
                     "(middle of long stretches at the cap)")

    b = np.empty(problem.n_nodes)
    b[:nv] = b_hat
    if problem.closed:
        b[-1] = b[0]
    if not jerk and not math.isfinite(problem.limits.power_per_mass_wpkg):
        notes.append("no jerk bound and no power limit: the program's optimum is the envelope")
    elapsed = time.perf_counter() - t_start
    if status is SolveStatus.OPTIMAL_INACCURATE:
        warnings.warn("convex solver: some QPs were solved only to a looser tolerance ("
                      + "; ".join(n for n in notes if "QP" in n) + "); the profile is checked "
                      "against every limit before it is used, but may be a little slower than "
                      "optimal", CurvespeedWarning, stacklevel=2)
    if iterations >= options.max_iterations:
        warnings.warn(f"convex solver stopped at the iteration cap ({options.max_iterations}); "
                      "the profile is feasible but may be a little slower than optimal",
                      CurvespeedWarning, stacklevel=2)
    return SolveResult(b=b, status=status, solver="convex",
                       iterations=iterations, solve_time_s=elapsed, ceiling_b=env.ceiling_b,
                       notes=tuple(notes), envelope_b=env.b, inner_iterations=qp_iterations)


def _run_scp(problem: SpeedProblem, env: SolveResult, options: ConvexOptions, anchors):
    """The sequential-convex loop (module docstring), run block by block.

    Stops and stations held at a speed cap cut the route into stretches that share no
    constraint row and no step: each is an independent QP with its own line search and its own
    stopping test, so easy stretches stop after one or two iterations and the work grows
    linearly with the route. Returns the last accepted iterate.
    """
    from concurrent.futures import ThreadPoolExecutor

    from scipy.sparse.csgraph import connected_components

    lay = _Layout(problem, jerk=problem.limits.max_jerk_mps3 is not None, anchors=anchors)
    nv = lay.nv
    ds = problem.ds
    b_env = env.b[:nv].copy()
    builder = _QPBuilder(problem, lay, b_env, options)
    notes = []
    b_hat = b_env.copy()
    status = SolveStatus.OPTIMAL
    qp_iterations = 0
    iterations = 0
    blocks = None
    t_total = _steps_time(b_env, lay, ds, np.arange(lay.n_steps))   # the envelope's time
    threads = _worker_count(options.threads)
    pool = ThreadPoolExecutor(max_workers=threads)
    try:
        for iterations in range(1, options.max_iterations + 1):
            *qp_parts, obj_scale = builder.build(b_hat)
            qp = _reduce(*qp_parts, lay.fixed, lay.fixed_value)
            qp["scale"] = obj_scale
            free_idx = np.flatnonzero(qp["free"])
            if free_idx.size == 0:
                break
            A = qp["A"].tocsr()
            P = qp["P"].tocsr()
            if blocks is None:
                pattern = (abs(A).T @ abs(A)) + abs(P)
                n_blocks, label = connected_components(pattern, directed=False)
                blocks = [np.flatnonzero(label == k) for k in range(n_blocks)]
                active = np.ones(n_blocks, dtype=bool)
                t_block = np.full(n_blocks, math.inf)
                node_block = np.full(nv, -1)
                node_block[free_idx] = label
                touch = np.maximum(node_block[lay.step_from], node_block[lay.step_to])
                block_steps = [np.flatnonzero(touch == k) for k in range(n_blocks)]
                block_cost = [_BlockObjective(lay, ds, block_steps[k], node_block == k,
                                              options.comfort_weight)
                              for k in range(n_blocks)]
            row_block = node_block[free_idx][A.indices[A.indptr[:-1]]]
            # Blocks are solved in batches: one QP per batch is block-diagonal, so each block's
            # part of its answer is that block's own optimum, while the fixed cost of a solver
            # call is paid once per batch rather than once per block. The batches follow from
            # the blocks' sizes alone, so every thread count solves the very same QPs; the worker
            # threads share them out (Clarabel releases the interpreter lock while it solves).
            gap_abs = options.qp_gap_fraction * t_total * qp["scale"]
            jobs = []
            for batch in _batches(np.flatnonzero(active), blocks):
                cols = np.concatenate([blocks[k] for k in batch])
                rows = np.flatnonzero(np.isin(row_block, batch))
                sub = (P[cols][:, cols], qp["q"][cols], A[rows][:, cols], qp["lo"][rows],
                       qp["up"][rows])
                glob = free_idx[cols]
                centre, scale = b_hat[glob], np.maximum(b_env[glob], 1.0)
                job = pool.submit(_solve_batch, sub, options.qp_tolerance, gap_abs, centre,
                                  scale)
                jobs.append((batch, cols, glob, job))
            for batch, cols, glob, job in jobs:
                x, st, its, retry_notes = job.result()
                qp_iterations += its
                notes += [f"iteration {iterations}: {n}" for n in retry_notes]
                failed = (st in (SolveStatus.FAILED, SolveStatus.INFEASIBLE) or x is None
                          or np.size(x) != cols.size or not np.all(np.isfinite(x)))
                if failed:
                    if iterations == 1 and st is SolveStatus.INFEASIBLE:
                        raise InfeasibleError(_explain_infeasible(problem))
                    if iterations == 1:
                        raise SolverError(f"the convex solver's QP failed in the first iteration "
                                          f"({st.value}); --solver envelope gives the profile "
                                          "without the jerk bound")
                    notes.append(f"iteration {iterations}: a QP returned {st.value}; kept those "
                                 "stretches' last iterate")
                    status = SolveStatus.OPTIMAL_INACCURATE
                    active[batch] = False
                    continue
                if st is SolveStatus.OPTIMAL_INACCURATE:
                    status = SolveStatus.OPTIMAL_INACCURATE
                cand = b_hat.copy()
                cand[glob] = np.clip(np.asarray(x, dtype=float), 0.0, b_env[glob])
                for k in batch:
                    kg = free_idx[blocks[k]]
                    if iterations == 1:
                        b_new, t_new = cand, block_cost[k](cand)
                    else:
                        b_new, t_new = _line_search(b_hat, cand, t_block[k], block_cost[k])
                    # gain measured against the whole route's time, so a short stretch is not
                    # iterated for a gain nobody would notice
                    improvement = ((t_block[k] - t_new) / t_total if math.isfinite(t_block[k])
                                   else math.inf)
                    if t_new <= t_block[k]:
                        b_hat[kg] = b_new[kg]
                        t_block[k] = t_new
                    if improvement < options.rel_improvement:
                        active[k] = False
            if not active.any():
                break
    finally:
        pool.shutdown(wait=True)
    return b_hat, status, iterations, qp_iterations, notes


#: Size of a batch of independent blocks solved in one QP (variables): the route's free stations
#: are cut into about this many per batch, whatever the number of threads, so each QP -- and
#: therefore the answer, to the byte -- is the same for any number of threads; the threads only
#: share the batches out. Small enough that a few cores get balanced work on a 10 km route (about 7 batches),
#: large enough that the fixed cost of a solver call stays small (measured: the same solve
#: times as the thread-dependent batching it replaces, within the machine's noise).
_BATCH_VARIABLES = 1_000


def _batches(block_ids, blocks):
    """Group block ids, in route order, into batches of about ``_BATCH_VARIABLES`` variables.

    The number of batches follows from the variables alone (never from the number of threads);
    cuts fall at the block boundaries nearest to equal shares.
    """
    ids = list(block_ids)
    if not ids:
        return []
    sizes = np.array([blocks[k].size for k in ids], dtype=float)
    total = float(sizes.sum())
    n = max(1, round(total / _BATCH_VARIABLES))
    ends = np.cumsum(sizes)
    cuts = sorted({int(np.argmin(np.abs(ends - total * j / n))) + 1 for j in range(1, n)})
    out, start = [], 0
    for c in cuts + [len(ids)]:
        if c > start:
            out.append(ids[start:c])
            start = c
    return out


def _solve_batch(sub, tolerance: float, gap_abs: float, centre, scale):
    """Solve one batch's QP, retrying before an answer is accepted; returns (x, status,
    interior-point iterations, notes on retries)."""
    notes = []
    x, st, its = _solve_qp_clarabel(*sub, tolerance, centre, scale, refine=False,
                                    gap_abs=gap_abs)
    if st is not SolveStatus.OPTIMAL:
        # the fast setting's answer is not trusted: solve again with Clarabel's defaults
        x, st, more = _solve_qp_clarabel(*sub, tolerance, centre, scale)
        its += more
    if st is SolveStatus.OPTIMAL_INACCURATE:
        # retry once with looser tolerances before accepting an inaccurate answer
        x2, st2, more = _solve_qp_clarabel(*sub, 100 * tolerance, centre, scale)
        its += more
        notes.append(f"a QP was inaccurate at tolerance {tolerance:g}; re-solved at "
                     f"{100 * tolerance:g} ({st2.value})")
        if st2 is SolveStatus.OPTIMAL:
            x, st = x2, st2
    return x, st, its, notes


def _worker_count(requested: int | None) -> int:
    """Threads for the QP batches: ``requested``, or the processor cores this process may use."""
    if requested is not None:
        return max(1, int(requested))
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:      # not on every platform
        return max(1, os.cpu_count() or 1)


def _steps_time(b, lay, ds, steps):
    """Time of the given steps for squared speeds ``b``."""
    s = (np.sqrt(np.maximum(b[lay.step_from[steps]], 0.0))
         + np.sqrt(np.maximum(b[lay.step_to[steps]], 0.0)))
    with np.errstate(divide="ignore"):
        return float(np.sum(lay.time_coef[steps] * ds / s))


def _reduce(P, q, A, lo, up, fixed, values):
    """Eliminate fixed variables from the QP; drop rows left with no free variable."""
    free = ~fixed
    P = P.tocsc()
    A = A.tocsc()
    xf = np.where(fixed, values, 0.0)
    Pff = P[free][:, free]
    qf = q[free] + P[free][:, fixed] @ values[fixed]
    Af = A[:, free].tocsr()
    shift = A[:, fixed] @ values[fixed]
    keep = np.diff(Af.indptr) > 0
    return {"P": Pff, "q": qf, "A": Af[keep], "lo": lo[keep] - shift[keep],
            "up": up[keep] - shift[keep], "free": free, "x_fixed": xf}


class _BlockObjective:
    """The program's objective restricted to one block: its steps' time plus, with a comfort
    weight, the squared acceleration changes at every node whose row involves the block's
    stations (a row never involves two blocks: the comfort term links them in the QP's pattern,
    so such blocks are merged)."""

    def __init__(self, lay: _Layout, ds: float, steps, in_block, comfort_weight: float):
        self.lay, self.ds, self.steps, self.w = lay, ds, steps, comfort_weight
        self.D = None
        if comfort_weight > 0:
            D = lay.D.tocsr()
            touches = (abs(D) @ in_block.astype(float)) > 0
            self.D = D[touches]

    def __call__(self, b) -> float:
        value = _steps_time(b, self.lay, self.ds, self.steps)
        if self.D is not None:
            value += self.w * float(np.sum((self.D @ b) ** 2))
        return value


def _line_search(b0, b1, f0, objective, iterations: int = 30):
    """Minimise ``objective`` on the segment b0 -> b1 (convex in the step length) by golden
    section; ``f0`` is its value at ``b0``. Returns the point and its value."""
    d = b1 - b0
    f1 = objective(b1)
    if f1 <= f0:
        return b1, f1
    lo_a, hi_a = 0.0, 1.0
    phi = (math.sqrt(5) - 1) / 2
    for _ in range(iterations):
        a1 = hi_a - phi * (hi_a - lo_a)
        a2 = lo_a + phi * (hi_a - lo_a)
        if objective(b0 + a1 * d) <= objective(b0 + a2 * d):
            hi_a = a2
        else:
            lo_a = a1
    alpha = 0.5 * (lo_a + hi_a)
    b = b0 + alpha * d
    return b, objective(b)


def _explain_infeasible(problem: SpeedProblem) -> str:
    """Say why no jerk-limited profile exists, naming the first constraint that cannot be met.

    The envelope (no jerk bound) was found before, so every station is drivable and every
    constraint reachable without the jerk bound; what is left is a stop too close to the start
    for a jerk-limited stop (named as the user gave it), or the jerk bounds themselves.
    """
    lim = problem.limits
    at_stop = stop_out_of_reach(problem, jerk=True)
    if at_stop is not None:
        return at_stop
    if lim.max_lateral_jerk_mps3 is not None:
        return (f"{problem.source}: no speed profile satisfies the jerk bounds together with the "
                "other limits and constraints (stops, zones, start and end speed); a fixed "
                "start or end speed where the curvature changes quickly asks more lateral jerk "
                f"than max_lateral_jerk_mps3 = {lim.max_lateral_jerk_mps3:g} allows. Relax "
                "max_lateral_jerk_mps3 or max_jerk_mps3, lower the start or end speed, or "
                "check the curvature near the ends and the stops")
    return (f"{problem.source}: no speed profile satisfies the jerk bound together with the "
            "other limits and constraints (stops, zones, start and end speed); relax "
            "max_jerk_mps3 or the constraints near the start and the stops")
