"""The index layout of the sequential-convex QP: variables (the distinct nodes), steps, fixed
stations (stops, ends, anchors) and the jerk rows' stencils, built once per problem
(:class:`QPLayout`; :mod:`.convex_qp` assembles each iteration's rows on it)."""

from __future__ import annotations

from functools import cached_property

import numpy as np

from ..problem import SpeedProblem
from .qp_rows import canonical


class QPLayout:
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
        # fixed variables: stops, and the ends of an open route (a window's end may be free)
        fixed = np.zeros(nv, dtype=bool)
        value = np.zeros(nv)
        stops = problem.stop_nodes % nv if problem.closed else problem.stop_nodes
        fixed[stops] = True
        if not problem.closed:
            fixed[0] = True
            value[0] = problem.b_start
            if problem.b_end is not None:
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
        self._ds = problem.ds
        # the same rows as a table: by slot (prev, node, next), and canonical (:mod:`.qp_rows`)
        self.D_by_slot = self._delta_a_slots(problem.ds)

    def _delta_a_slots(self, ds: float):
        """The coefficients of :meth:`_delta_a`'s row of every node on (prev, node, next)."""
        h = 1.0 / (2.0 * ds)
        fa = np.where(self.j_has_next, self.f_first[self.step_after], 0.0) * h
        fb = np.where(self.j_has_prev, self.f_last[self.step_before], 0.0) * h
        return np.stack((fb, -fa - fb, fa), axis=1)

    @cached_property
    def D_table(self):
        """:meth:`_delta_a`'s rows as a canonical row table ``(cols, present, vals)`` (for the
        comfort term; built on first use)."""
        return canonical(np.stack((self.j_prev, np.arange(self.nv), self.j_next), axis=1),
                         self.D_by_slot)

    @cached_property
    def D(self):
        """Sparse rows of (acceleration after) - (acceleration before) at every node, in b (for
        the comfort term's objective and checks; built on first use)."""
        return self._delta_a(self._ds)

    def _delta_a(self, ds: float):
        """Sparse rows of (acceleration after) - (acceleration before) at every node, in b."""
        import scipy.sparse as sp       # only the comfort term's checks: not on a plan's path
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


__all__ = ["QPLayout"]
