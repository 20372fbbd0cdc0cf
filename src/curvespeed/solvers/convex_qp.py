"""The QP of one sequential-convex iteration: the second-order time model and the rows
(acceleration chords, power tangents, jerk and lateral-jerk rows), on the index layout of
:mod:`.qp_layout`.

The program is stated in :mod:`curvespeed.solvers.convex` (module docstring) and in
``docs/method.md``; this module only assembles it around the current iterate.
"""

from __future__ import annotations

import dataclasses
import math
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np

from ..order_stats import median
from ..problem import SpeedProblem
from . import window_qp
from .corner_rows import corner_caps, corner_pairs, corner_rows
from .qp_layout import QPLayout
from .qp_rows import RowQP, canonical, pad, reduce_tables
from .qp_time import B_FLOOR, time_model, tridiagonal_hessian

if TYPE_CHECKING:
    from .convex import ConvexOptions


class QPBuilder:
    """Assembles the QP of one iteration around the break points ``b_hat`` (see module doc)."""

    def __init__(self, problem: SpeedProblem, lay: QPLayout, b_env: np.ndarray,
                 options: ConvexOptions):
        self.p = problem
        self.lay = lay
        self.b_env = b_env
        self.opt = options
        self.ds = problem.ds
        self.has_power = math.isfinite(problem.limits.power_per_mass_wpkg)
        self._spans = {}
        #: the pairs of steps that get corner rows and which of their blocks, ``(pairs, use)``
        #: (:func:`.corner_rows.corner_rows`): every block of every pair of plain steps, unless
        #: the sequential-convex loop narrows them to those near a cap
        pairs = corner_pairs(lay)
        self.corners = (pairs, np.ones((pairs.shape[0], 4), dtype=bool))

    @cached_property
    def corner_caps(self):
        """Each node's caps for the corner rows (:func:`.corner_rows.corner_caps`)."""
        return corner_caps(self.p, self.lay, self.b_env)

    @cached_property
    def step_forms(self):
        """The lateral jerk's rate forms along each step (only with a lateral jerk bound)."""
        return self.p.lateral_rate_forms()[: self.lay.n_steps]

    @cached_property
    def node_forms(self):
        """The lateral jerk's rate forms across each node (only with a lateral jerk bound)."""
        return self.p.node_lateral_rate_forms()

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

        Returns a row table ``(cols, vals, up)`` (three slots a row; :mod:`.qp_rows`).
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
        cols, vals, rhs = [], [], []
        for c, coef, end in parts:
            k = np.flatnonzero(np.any(coef != 0.0, axis=1) & np.isfinite(budget[end]))
            c, coef, end = c[k], coef[k], end[k]
            on_end = np.where(c == end[:, None], slope[end][:, None], 0.0)
            for sign in (1.0, -1.0):
                cc, vv = pad(c, sign * coef + on_end)
                cols.append(cc)
                vals.append(vv)
                rhs.append(budget[end])
        return np.concatenate(cols), np.concatenate(vals), np.concatenate(rhs)

    def _jerk_terms(self, every_step: bool):
        """The jerk's time-base terms that get rows: every term, or only those with a free
        station (a row on fixed stations alone is dropped by the elimination)."""
        t = self.p.jerk_terms
        if every_step:
            return t
        if "jerk" not in self._spans:
            fixed = self.lay.fixed
            k = np.flatnonzero(~(fixed[t.prev] & fixed[t.node] & fixed[t.next]))
            self._spans["jerk"] = dataclasses.replace(
                t, node=t.node[k], prev=t.prev[k], next=t.next[k], weights=t.weights[k],
                scale=t.scale[k])
        return self._spans["jerk"]

    def _jerk_rows(self, b_hat: np.ndarray, every_step: bool = False):
        """Rows ``+-D[node] b <= scale J ds (2 / w_hat - w_up(b) / w_hat^2)`` for every term of
        the jerk's time base (:attr:`SpeedProblem.jerk_terms`; unless ``every_step``, only
        those with a free station, :meth:`_jerk_terms`).

        A term bounds the time base by ``scale ds / w`` with ``w`` a weighted sum of square
        roots, concave in ``b``: its tangent ``w_up`` at ``b_hat`` bounds it from above, so
        ``1 / w >= 1 / w_up``, and the tangent of the convex ``1 / x`` at ``w_hat`` bounds that
        from below. Both keep the row inside the true bound for any ``b_hat > 0``; a fixed
        station's speed is known exactly. A term of scale 0 asks for no change at all.

        Returns a canonical row table ``(cols, present, vals, up)``: ``D`` and the tangent's
        terms are each summed over repeated stations first and then added, and a term that
        comes to exactly zero is no entry (as a sum of scipy.sparse matrices has it).
        """
        p, lay = self.p, self.lay
        t = self._jerk_terms(every_step)
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
        # D b is the change from 0 at an open start; from an acceleration a0 +- tol the
        # vehicle has there (a receding-horizon window) the rows are +-(D b - a0) + G b <=
        # rhs + tol
        a0, tol = ((0.0, 0.0) if p.closed else
                   (p.accel_start_mps2, p.accel_start_tolerance_mps2))
        first = t.node == 0
        shift, slack = np.where(first, a0, 0.0), np.where(first, tol, 0.0)
        # D's row of the node has its slots on (prev, node, next), as the terms do
        d_rows = lay.D_by_slot[t.node]
        c, present, dv, gv = canonical(np.stack(cols, axis=1), d_rows, np.stack(slopes, axis=1))
        plus, minus = dv + gv, -dv + gv
        return (np.concatenate((c, c)),
                np.concatenate((present & (plus != 0.0), present & (minus != 0.0))),
                np.concatenate((plus, minus)),
                np.concatenate((rhs + shift + slack, rhs - shift + slack)))

    def _end_reserve_rows(self):
        """``b_N + c a_end <= brake_b - d`` for every ``(c, d)`` of
        :attr:`SpeedProblem.end_reserve`, with ``a_end = f (b_N - b_N-1) / (2 ds)``, tightened
        by ``margin`` of ``brake_b``. A row table ``(cols, vals, up)``."""
        brake_b, rows = self.p.end_reserve
        nv = self.lay.nv
        h = self.lay.f_last[-1] / (2.0 * self.ds)
        vals = np.array([(-c * h, 1.0 + c * h) for c, _ in rows]).reshape(-1, 2)
        cols = np.array([[nv - 2, nv - 1]] * len(rows), dtype=np.int64).reshape(-1, 2)
        up = np.array([brake_b * (1.0 - self.opt.margin) - d for _, d in rows])
        return cols, vals, up

    def _span(self, every_step: bool):
        """The steps that get acceleration rows, the nodes they touch, each step's first and
        last node's position among those nodes, and those nodes' acceleration intervals at rest
        and on the envelope (the chords' outer break points, the same in every iteration).
        Either every step, or only those with a free node: a row on a step whose nodes are
        both fixed has no free station, and the elimination drops it."""
        if every_step not in self._spans:
            lay = self.lay
            steps = np.arange(lay.n_steps)
            if not every_step:
                steps = steps[~(lay.fixed[lay.step_from] & lay.fixed[lay.step_to])]
            sf, st = lay.step_from[steps], lay.step_to[steps]
            touched = np.zeros(lay.nv, dtype=bool)
            touched[sf] = touched[st] = True
            nodes = np.flatnonzero(touched)         # in order, each once
            position = np.cumsum(touched) - 1       # a touched node's place among them
            self._spans[every_step] = (steps, nodes, position[sf], position[st],
                                       self._node_bounds(np.zeros(nodes.size), nodes),
                                       self._node_bounds(self.b_env[nodes], nodes))
        return self._spans[every_step]

    def _accel_rows(self, b_hat: np.ndarray, every_step: bool = False):
        """Acceleration chords (and power tangents) at both nodes of each step: a row table
        ``(cols, vals, lo, up)``, two slots a row (the step's nodes). A chord that is not
        needed (one chord enough, or the same row at the step's other end) is no row, nor,
        unless ``every_step``, is one on a step whose nodes are both fixed (:meth:`_span`).

        A chord belongs to a node, so each is worked out once per node (:meth:`_chords`) and
        gathered to the steps at either end: the same numbers as working it out per step, every
        operation being elementwise. Rows come ends first, then sides, segments and steps."""
        lay, ds = self.lay, self.ds
        steps, nodes, first, last, (lo_0, hi_0), (lo_e, hi_e) = self._span(every_step)
        e = self.b_env[nodes]
        b_hat = b_hat[nodes]
        h = 1.0 / (2.0 * ds)
        # break points: 0 < m < e, with m the current iterate kept within [2 %, 99.5 %] of the
        # envelope. Near a lateral limit the limit bends sharply just below the envelope: with
        # the cap at 98 % a closed test loop with a comfort weight stopped 3e-4 slower than the
        # exact-cone model, at 99.5 % 7e-5; at 99.9 % the chord below the iterate is so long
        # that SCP creeps (mountain road 4 iterations for what 2 do). A third break point
        # gained no more and made the 100 km QPs 30 % slower.
        m = np.clip(b_hat, 0.02 * e, 0.995 * e)
        m = np.where(e - b_hat < 1e-9 * np.maximum(e, 1.0), 0.5 * e, m)
        lo_m, hi_m = self._node_bounds(m, nodes)
        chords = {"hi": self._chords(hi_0, hi_m, hi_e, m, e),
                  "lo": self._chords(lo_0, lo_m, lo_e, m, e)}
        parts = []                  # (steps, c_from, c_to, lo, up) of each block of rows
        seen = {}
        for end, fac in ((first, lay.f_first[steps]), (last, lay.f_last[steps])):
            fh = fac * h
            for side in ("hi", "lo"):
                segs, a_tol = chords[side]
                for seg, (slope, rhs, ok) in enumerate(segs):
                    slope, rhs, ok = slope[end], rhs[end], ok[end]
                    c_from, c_to = _accel_minus_slope(end is first, fh, slope)
                    key = (side, seg)
                    if key in seen:     # same row already at the other end of the step
                        pc_from, pc_to, prhs = seen[key]
                        ok = ok & ~((pc_from == c_from) & (pc_to == c_to) & (prhs == rhs))
                    else:
                        seen[key] = (c_from, c_to, rhs)
                    k = np.flatnonzero(ok)
                    tol = a_tol[end[k]]
                    if side == "hi":
                        parts.append((k, c_from[k], c_to[k], None, rhs[k] - tol))
                    else:
                        parts.append((k, c_from[k], c_to[k], rhs[k] + tol, None))
        if self.has_power:
            parts += self._power_rows(m, e, h, steps, first, last, nodes)
        return _join_rows(parts, lay.step_from[steps], lay.step_to[steps])

    def _chords(self, f0, fm, fe, m, e):
        """One side's chords at every node: a concave hi (convex lo) is replaced by its chords
        on ``[0, m]`` and ``[m, e]``; where the single chord on ``[0, e]`` is within
        ``chord_tolerance`` of it at ``m`` (straights, gentle curves) that one row is enough.
        Returns each segment's ``(slope, rhs, ok)`` and the node's tolerance ``a_tol``."""
        p0 = np.zeros(m.size)
        # tightened by `margin` of the bound itself, not of the cap: a cap far above what grip
        # allows (max_accel 1e6) must not tighten the grip rows by 10 m/s^2
        a_tol = self.opt.margin * np.maximum(np.maximum(np.abs(f0), np.abs(fm)), np.abs(fe))
        wide = e - p0 > 1e-12
        whole = np.where(wide, (fe - f0) / np.where(wide, e - p0, 1.0), 0.0)
        dev = np.abs(fm - (f0 + whole * (m - p0)))
        single = dev <= self.opt.chord_tolerance_mps2
        segs = []
        for seg, (p1, p2, f1, f2) in enumerate(((p0, m, f0, fm), (m, e, fm, fe))):
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
            segs.append((slope, rhs, ok))
        return segs, a_tol

    def _power_rows(self, m, e, h, steps, first, last, nodes):
        """Tangents of ``P/(m sqrt(b)) - res(b)`` at ``m`` and ``e`` at both nodes of the
        given steps (drive side only), as blocks of :meth:`_accel_rows` (``m``, ``e`` on
        ``nodes``, where ``first`` and ``last`` point)."""
        p, lay, margin = self.p, self.lay, self.opt.margin
        pm = p.limits.power_per_mass_wpkg
        parts = []
        for end, fac in ((first, lay.f_first[steps]), (last, lay.f_last[steps])):
            for q in (m, e):
                bq = np.maximum(q[end], B_FLOOR)
                res0 = p.resistance(0.0, nodes=nodes[end])
                res1 = p.resistance(1.0, nodes=nodes[end]) - res0      # d res / d b
                f0 = pm / np.sqrt(bq)
                slope = -0.5 * pm / bq ** 1.5 - res1
                bound = f0 - res0 - res1 * bq                   # the limit at bq
                rhs = bound - slope * bq - margin * np.abs(bound)
                c_from, c_to = _accel_minus_slope(end is first, fac * h, slope)
                k = np.flatnonzero(np.isfinite(rhs))
                parts.append((k, c_from[k], c_to[k], None, rhs[k]))
        return parts

    def rows(self, b_hat: np.ndarray, every_step: bool = False):
        """Every row of the iteration's QP around ``b_hat`` as canonical row tables over the
        distinct nodes (:mod:`.qp_rows`), each ``(cols, present, vals, lo, up)``, in the order
        bounds, acceleration (and power), jerk, corners (:mod:`.corner_rows`), lateral jerk,
        end reserve. Without
        ``every_step`` no acceleration or jerk rows on fixed stations alone (the elimination
        would drop them)."""
        lay = self.lay
        nv = lay.nv
        e = self.b_env[:nv]
        tables = [(np.arange(nv)[:, None], np.ones((nv, 1), dtype=bool), np.ones((nv, 1)),
                   np.where(lay.fixed, lay.fixed_value, 0.0),
                   np.where(lay.fixed, lay.fixed_value, e))]
        c, v, lo, up = self._accel_rows(b_hat, every_step)
        tables.append(canonical(c, v) + (lo, up))
        if lay.jerk:
            c, present, v, up = self._jerk_rows(b_hat, every_step)
            tables.append((c, present, v, np.full(up.size, -np.inf), up))
            c, v, up = corner_rows(self.p, lay, b_hat, self.opt.margin, self.corner_caps,
                                   *self.corners, every_step=every_step)
            c, present, v = canonical(c, v)
            # an entry that comes to exactly zero is none (as scipy.sparse sums have it)
            tables.append((c, present & (v != 0.0), v, np.full(up.size, -np.inf), up))
        extra = []
        if self.p.limits.max_lateral_jerk_mps3 is not None:
            extra.append(self._lateral_jerk_rows(b_hat))
        if self.p.end_reserve is not None and not self.p.closed:
            extra.append(self._end_reserve_rows())
        for c, v, up in extra:
            tables.append(canonical(c, v) + (np.full(up.size, -np.inf), up))
        return tables

    def objective(self, b_hat: np.ndarray):
        """Second-order model of the time at ``b_hat`` (plus the comfort term), scaled so a
        typical (median) gradient is 1, over the distinct nodes with the fixed ones decoupled.

        Returns ``(prow, pcol, pval, q, scale)``: the Hessian's nonzero entries between free
        nodes in row-major order (both triangles), the linear term (``-value`` at fixed
        nodes) and the scale. Sums run in the order scipy.sparse runs them. Only the steps with
        a free node enter (:meth:`_span`): the others' terms fall on fixed nodes alone, which
        the QP decouples."""
        lay = self.lay
        nv = lay.nv
        free = ~lay.fixed
        steps = self._span(False)[0]
        total, grad, diag, hxy = time_model(b_hat, lay, self.ds, steps)
        sf, st = lay.step_from[steps], lay.step_to[steps]
        rows = [np.arange(nv), sf, st]
        cols = [np.arange(nv), st, sf]
        vals = [diag, hxy, hxy]
        w = self.opt.comfort_weight
        if w > 0:
            # 2 w D'D, each entry summed over D's rows in order; D b row by row
            dc, dp, dv = lay.D_table
            ii, jj = np.meshgrid(np.arange(dc.shape[1]), np.arange(dc.shape[1]), indexing="ij")
            both = dp[:, ii] & dp[:, jj]
            dtd_r, dtd_c = dc[:, ii][both], dc[:, jj][both]
            dtd_v = (dv[:, ii] * dv[:, jj])[both]
            key, inv = np.unique(dtd_r * nv + dtd_c, return_inverse=True)
            rows.append(key // nv)
            cols.append(key % nv)
            vals.append(2.0 * w * np.bincount(inv, dtd_v))
            Db = np.bincount(np.repeat(np.arange(nv), dp.sum(axis=1)),
                             dv[dp] * b_hat[dc[dp]], minlength=nv)
            DtDb = np.bincount(dc[dp], dv[dp] * np.repeat(Db, dp.sum(axis=1)), minlength=nv)
            grad = grad + 2.0 * w * DtDb
        if w > 0 or lay.closed:
            r, c, v = np.concatenate(rows), np.concatenate(cols), np.concatenate(vals)
            keep = free[r] & free[c] & (v != 0.0)
            key, inv = np.unique(r[keep] * nv + c[keep], return_inverse=True)
            pval = np.bincount(inv, v[keep]) if key.size else np.zeros(0)
            prow, pcol = key // nv, key % nv
        else:
            prow, pcol, pval = tridiagonal_hessian(free, diag, steps, hxy, lay.n_steps)
        # the Hessian times b_hat, on free rows, each row's terms in column order from zero
        hb = np.bincount(prow, pval * b_hat[pcol], minlength=nv)
        q = np.where(lay.fixed, -lay.fixed_value, grad - hb)
        scale = 1.0 / max(median(np.abs(grad[free])) if free.any() else 1.0, 1e-12)
        return prow, pcol, pval * scale, q * scale, scale

    def reduced(self, b_hat: np.ndarray):
        """The iteration's QP over the free nodes alone, as a :class:`.qp_rows.RowQP` (fixed
        nodes eliminated, rows left with no free node or no finite side dropped); also the
        objective's scale. A window's QP is assembled in one compiled call
        (:mod:`.window_qp`: the same numbers); :meth:`reduced_numpy` is its reference."""
        if window_qp.applies(self):
            return window_qp.reduced(self, b_hat)
        return self.reduced_numpy(b_hat)

    def reduced_numpy(self, b_hat: np.ndarray):
        """:meth:`reduced` by the numpy passes (every QP the compiled call does not take)."""
        lay = self.lay
        indptr, indices, data, lo, up = reduce_tables(self.rows(b_hat), lay.fixed,
                                                      lay.fixed_value)
        prow, pcol, pval, q, scale = self.objective(b_hat)
        number = np.cumsum(~lay.fixed) - 1
        qp = RowQP(int((~lay.fixed).sum()), indptr, indices, data, lo, up, number[prow],
                   number[pcol], pval, q[~lay.fixed])
        return qp, scale

    def build(self, b_hat: np.ndarray):
        """The whole QP over the distinct nodes as scipy.sparse matrices ``(P, q, A, lo, up,
        scale)``, fixed nodes pinned by their bounds (for checks and benchmarks; the solver
        itself takes :meth:`reduced`)."""
        import scipy.sparse as sp

        nv = self.lay.nv
        blocks, lows, ups = [], [], []
        for cols, present, vals, lo, up in self.rows(b_hat, every_step=True):
            indptr = np.concatenate(([0], np.cumsum(present.sum(axis=1))))
            blocks.append(sp.csr_matrix((vals[present], cols[present], indptr),
                                        shape=(lo.size, nv)))
            lows.append(lo)
            ups.append(up)
        A = sp.vstack(blocks, format="csc")
        lo, up = np.concatenate(lows), np.concatenate(ups)
        prow, pcol, pval, q, scale = self.objective(b_hat)
        fixed = np.flatnonzero(self.lay.fixed)
        P = sp.csc_matrix((np.concatenate((pval, np.full(fixed.size, scale))),
                           (np.concatenate((prow, fixed)), np.concatenate((pcol, fixed)))),
                          shape=(nv, nv))
        return P, q, A, lo, up, scale


def _accel_minus_slope(at_first_node: bool, fh, slope):
    """Coefficients on (b_from, b_to) of ``a - slope * b_end`` for a step whose acceleration at
    this end is ``a = fh (b_to - b_from)``, ``b_end`` being the step's first or last node."""
    if at_first_node:
        return -fh - slope, fh
    return -fh, fh - slope


def _join_rows(parts, step_from, step_to):
    """The blocks ``(steps, c_from, c_to, lo, up)`` of :meth:`QPBuilder._accel_rows` (``None``
    for an infinite side) joined into one row table ``(cols, vals, lo, up)`` in their order."""
    steps = np.concatenate([k for k, *_ in parts])
    cols = np.empty((steps.size, 2), dtype=np.int64)
    cols[:, 0] = step_from[steps]
    cols[:, 1] = step_to[steps]
    vals = np.empty((steps.size, 2))
    vals[:, 0] = np.concatenate([c for _, c, _, _, _ in parts])
    vals[:, 1] = np.concatenate([c for _, _, c, _, _ in parts])
    lo = np.concatenate([np.full(k.size, -np.inf) if v is None else v
                         for k, _, _, v, _ in parts])
    up = np.concatenate([np.full(k.size, np.inf) if v is None else v
                         for k, _, _, _, v in parts])
    return cols, vals, lo, up
