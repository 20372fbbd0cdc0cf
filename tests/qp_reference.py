"""Reference assembly of the sequential-convex QP through scipy.sparse, kept for the tests.

This is the assembly the convex solver used before it built its QPs straight into row tables
(:mod:`curvespeed.solvers.qp_rows`): scipy.sparse blocks stacked, then the fixed variables
eliminated by column slicing (``reduce_qp``). The tests check that the row-table assembly gives
the same reduced QP, entry by entry, on the bundled routes.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import scipy.sparse as sp

from curvespeed.problem import SpeedProblem
from curvespeed.solvers.convex_qp import B_FLOOR, QPLayout, time_model
from curvespeed.solvers.corner_rows import SEGMENTS as CORNER_SEGMENTS

if TYPE_CHECKING:
    from curvespeed.solvers.convex import ConvexOptions


class ReferenceQPBuilder:
    """Assembles the QP of one iteration around the break points ``b_hat`` (see module doc)."""

    def __init__(self, problem: SpeedProblem, lay: QPLayout, b_env: np.ndarray,
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
        each node every crossed form of :meth:`SpeedProblem.node_lateral_rate_forms` with the
        node's own speed. ``|R . b| <= J_lat / sqrt(b_e)`` keeps the bound; ``J / sqrt(b)`` is
        convex, so its tangent at ``b_hat`` (``r = sqrt(b_hat)``) lies below it, which keeps
        each row inside the true bound for any ``b_hat > 0``. A fixed station's speed is known
        exactly (no row where it is at rest: there the bound cannot bind); a form that is zero
        (no curvature, or one that would repeat another) needs no row.
        """
        lay = self.lay
        J = self.p.limits.max_lateral_jerk_mps3 * (1.0 - self.opt.margin)
        root = np.where(lay.fixed, np.sqrt(np.maximum(lay.fixed_value, 0.0)),
                        np.sqrt(np.maximum(b_hat, B_FLOOR)))
        with np.errstate(divide="ignore"):
            slope = np.where(lay.fixed, 0.0, 0.5 * J / root ** 3)          # on b_e, moved left
            budget = np.where(lay.fixed, J / root, 1.5 * J / root)
        parts = []                      # (columns, coefficients, speed node) per set of rows
        sf, st = lay.step_from, lay.step_to
        for i in range(self.step_forms.shape[1]):
            for end in (sf, st):
                parts.append((np.stack((sf, st), axis=1), self.step_forms[:, i], end))
        cross = self.node_forms
        for i in range(cross.forms.shape[1]):
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
                        np.sqrt(np.maximum(b_hat, B_FLOOR)))
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
        # D b is the change from 0 at an open start; from an acceleration a0 +- tol the
        # vehicle has there (a receding-horizon window) the rows are +-(D b - a0) + G b <=
        # rhs + tol
        a0, tol = ((0.0, 0.0) if p.closed else
                   (p.accel_start_mps2, p.accel_start_tolerance_mps2))
        first = t.node == 0
        shift, slack = np.where(first, a0, 0.0), np.where(first, tol, 0.0)
        G = sp.coo_matrix((np.concatenate(slopes),
                           (np.tile(np.arange(m), 3), np.concatenate(cols))),
                          shape=(m, lay.nv)).tocsr()
        G.sum_duplicates()
        Dn = self.D[t.node]
        return (sp.vstack([Dn + G, -Dn + G], format="csr"),
                np.concatenate((rhs + shift + slack, rhs - shift + slack)))

    def _corner_rows(self, b_hat: np.ndarray):
        """Corner rows (:mod:`curvespeed.solvers.corner_rows`) as scipy.sparse blocks: for each
        side, corner step (first or second of a pair of plain steps) and chord ``(alpha, beta,
        gamma)``, ``sign (alpha a_c - a_n) - gamma H_c - H_n <= beta cap``, with ``a`` the
        steps' mean accelerations and ``H = J ds / (v + v')`` replaced by its tangent."""
        p, lay, ds = self.p, self.lay, self.ds
        lim = p.limits
        J = lim.max_jerk_mps3 * (1.0 - self.opt.margin)
        plain = (lay.time_coef == 2.0) & (lay.f_first == 1.0) & (lay.f_last == 1.0)
        ns, nv = lay.n_steps, lay.nv
        first = np.arange(ns) if p.closed and ns > 2 else np.arange(max(ns - 1, 0))
        second = (first + 1) % ns if p.closed else first + 1
        keep = plain[first] & plain[second]
        pair = (first[keep], second[keep])
        sf, st = lay.step_from, lay.step_to
        steps = np.arange(ns)
        h = 1.0 / (2.0 * ds)
        Ma = sp.csr_matrix((np.concatenate((np.full(ns, -h), np.full(ns, h))),
                            (np.concatenate((steps, steps)), np.concatenate((sf, st)))),
                           shape=(ns, nv))
        root = np.where(lay.fixed, np.sqrt(np.maximum(lay.fixed_value, 0.0)),
                        np.sqrt(np.maximum(b_hat, B_FLOOR)))
        base = np.where(lay.fixed, lay.fixed_value, b_hat)
        w_hat = root[sf] + root[st]
        w_hat = np.where(w_hat > 0.0, w_hat, 1.0)
        coef = J * ds / (w_hat * w_hat)
        s_from = np.where(lay.fixed[sf], 0.0, -coef / np.where(lay.fixed[sf], 1.0, 2.0 * root[sf]))
        s_to = np.where(lay.fixed[st], 0.0, -coef / np.where(lay.fixed[st], 1.0, 2.0 * root[st]))
        Hs = sp.csr_matrix((np.concatenate((s_from, s_to)),
                            (np.concatenate((steps, steps)), np.concatenate((sf, st)))),
                           shape=(ns, nv))
        Hc = J * ds / w_hat - s_from * base[sf] - s_to * base[st]
        # each node's caps over its speed range (comfort, or grip at the largest load and the
        # least or most resistance), a pair's the largest of its three nodes'
        e, zero, nodes = self.b_env[:nv], np.zeros(nv), np.arange(nv)
        load = np.maximum(p.normal_accel(zero, nodes), p.normal_accel(e, nodes))
        r0, r1 = p.resistance(zero, nodes), p.resistance(e, nodes)
        grip = p.mu_long[:nv] * load
        node_caps = (np.minimum(lim.max_accel_mps2, grip - np.minimum(r0, r1)),
                     np.minimum(lim.max_decel_mps2, grip + np.maximum(r0, r1)))
        trio = (sf[pair[0]], st[pair[0]], st[pair[1]])
        blocks, ups = [], []
        for sign, node_cap in zip((1.0, -1.0), node_caps):
            pair_cap = np.maximum(np.maximum(node_cap[trio[0]], node_cap[trio[1]]),
                                  node_cap[trio[2]])
            for c, n in ((0, 1), (1, 0)):
                ok = np.isfinite(pair_cap)
                first, second = pair[0][ok], pair[1][ok]
                both = (first, second)
                cap = pair_cap[ok] * (1.0 - self.opt.margin)
                for alpha, beta, gamma in CORNER_SEGMENTS:
                    blocks.append(sign * (alpha * Ma[both[c]] - Ma[both[n]]) - Hs[both[n]]
                                  - gamma * Hs[both[c]])
                    ups.append(beta * cap + Hc[both[n]] + gamma * Hc[both[c]])
        if not blocks:
            return sp.csr_matrix((0, nv)), np.zeros(0)
        return sp.vstack(blocks, format="csr"), np.concatenate(ups)

    def _end_reserve_rows(self):
        """``b_N + c a_end <= brake_b - d`` for every ``(c, d)`` of
        :attr:`SpeedProblem.end_reserve`, with ``a_end = f (b_N - b_N-1) / (2 ds)``, tightened
        by ``margin`` of ``brake_b``."""
        brake_b, rows = self.p.end_reserve
        nv = self.lay.nv
        h = self.lay.f_last[-1] / (2.0 * self.ds)
        vals = np.concatenate([(-c * h, 1.0 + c * h) for c, _ in rows])
        row_i = np.repeat(np.arange(len(rows)), 2)
        col_i = np.tile([nv - 2, nv - 1], len(rows))
        R = sp.csr_matrix((vals, (row_i, col_i)), shape=(len(rows), nv))
        return R, np.array([brake_b * (1.0 - self.opt.margin) - d for _, d in rows])

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
                    bq = np.maximum(q[end], B_FLOOR)
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
            C, up_c = self._corner_rows(b_hat)
            blocks.append(C)
            lows.append(np.full(C.shape[0], -np.inf))
            ups.append(up_c)

        if lim.max_lateral_jerk_mps3 is not None:
            L, up_l = self._lateral_jerk_rows(b_hat)
            blocks.append(L)
            lows.append(np.full(L.shape[0], -np.inf))
            ups.append(up_l)

        if p.end_reserve is not None and not p.closed:
            R, up_r = self._end_reserve_rows()
            blocks.append(R)
            lows.append(np.full(R.shape[0], -np.inf))
            ups.append(up_r)

        A = sp.vstack(blocks, format="csc")
        lo_all = np.concatenate(lows)
        up_all = np.concatenate(ups)

        # objective: second-order model of the time at b_hat (+ comfort term), scaled to O(1)
        total, grad, diag, hxy = time_model(b_hat, lay, ds)
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



def _accel_minus_slope(at_first_node: bool, fh, slope):
    """Coefficients on (b_from, b_to) of ``a - slope * b_end`` for a step whose acceleration at
    this end is ``a = fh (b_to - b_from)``, ``b_end`` being the step's first or last node."""
    if at_first_node:
        return -fh - slope, fh
    return -fh, fh - slope


def reduce_qp(P, q, A, lo, up, fixed, values):
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


