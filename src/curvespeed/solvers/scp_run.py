"""The state of one run of the sequential-convex loop (:func:`.convex._run_scp`): the iterate,
its independent blocks and which of them still iterate, each block's objective and line search,
and why a first QP is infeasible, in the user's terms."""

from __future__ import annotations

import math
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np

from ..diagnose import ceiling_out_of_reach, stop_out_of_reach
from ..errors import InfeasibleError, JerkBoundInfeasible, SolverError
from ..order_stats import distinct
from ..problem import SpeedProblem
from . import SolveStatus
from .qp_layout import QPLayout
from .qp_rows import blocks_of

if TYPE_CHECKING:
    from .convex import ConvexOptions


class ScpRun:
    """The state of one run of the sequential-convex loop: the iterate, its independent blocks,
    which of them still iterate, each one's time, the QP iterations, status and notes."""

    def __init__(self, b_hat, b_env, lay: QPLayout, ds: float, options: ConvexOptions):
        self.b_hat, self.b_env, self.lay, self.ds, self.options = b_hat, b_env, lay, ds, options
        self.status = SolveStatus.OPTIMAL
        self.qp_iterations = 0
        self.notes: list[str] = []
        # the blocks and what goes with them, from the first QP (find_blocks)
        self.blocks = self.free_idx = self.node_block = self.block_cost = None
        self.active = self.t_block = self.fresh = None
        self.t_total = steps_time(b_env, lay, ds, np.arange(lay.n_steps))  # the envelope's

    def find_blocks(self, qp, closed: bool) -> None:
        """The QP's independent blocks (the first iteration's; later ones share the pattern),
        each block's steps and objective."""
        lay = self.lay
        self.free_idx = np.flatnonzero(~lay.fixed)
        self.blocks = blocks_of(qp, closed)
        n_blocks = len(self.blocks)
        self.active = np.ones(n_blocks, dtype=bool)
        self.fresh = np.zeros(n_blocks, dtype=bool)
        self.t_block = np.full(n_blocks, math.inf)
        self.node_block = np.full(lay.nv, -1)
        for k, cols in enumerate(self.blocks):
            self.node_block[self.free_idx[cols]] = k
        touch = np.maximum(self.node_block[lay.step_from], self.node_block[lay.step_to])
        block_steps = [np.flatnonzero(touch == k) for k in range(n_blocks)]
        self.block_cost = [BlockObjective(lay, self.ds, block_steps[k], self.node_block == k,
                                           self.options.comfort_weight)
                           for k in range(n_blocks)]

    def take_answer(self, problem: SpeedProblem, iteration: int, batch, cols, glob,
                    answer) -> None:
        """One batch's QP answer: refuse a failed first iteration, keep the last iterate of a
        later failure, else each block's line search and stopping test."""
        x, st, its, retry_notes = answer
        self.qp_iterations += its
        self.notes += [f"iteration {iteration}: {n}" for n in retry_notes]
        failed = (st in (SolveStatus.FAILED, SolveStatus.INFEASIBLE) or x is None
                  or np.size(x) != cols.size or not np.all(np.isfinite(x)))
        if failed:
            if iteration == 1 and st is SolveStatus.INFEASIBLE:
                raise explain_infeasible(problem)
            if iteration == 1:
                raise SolverError(f"the convex solver's QP failed in the first iteration "
                                  f"({st.value}); --solver envelope gives the profile "
                                  "without the jerk bound")
            self.notes.append(f"iteration {iteration}: a QP returned {st.value}; kept those "
                              "stretches' last iterate")
            self.status = SolveStatus.OPTIMAL_INACCURATE
            self.active[batch] = False
            return
        if st is SolveStatus.OPTIMAL_INACCURATE:
            self.status = SolveStatus.OPTIMAL_INACCURATE
        cand = self.b_hat.copy()
        cand[glob] = np.clip(np.asarray(x, dtype=float), 0.0, self.b_env[glob])
        for k in batch:
            kg = self.free_idx[self.blocks[k]]
            if iteration == 1 or self.fresh[k]:
                b_new, t_new = cand[kg], self.block_cost[k](cand)
                self.fresh[k] = False
            else:
                b_new, t_new = self.block_cost[k].search(self.b_hat, cand, self.t_block[k], kg)
            # gain measured against the whole route's time, so a short stretch is not
            # iterated for a gain nobody would notice
            improvement = ((self.t_block[k] - t_new) / self.t_total
                           if math.isfinite(self.t_block[k]) else math.inf)
            if t_new <= self.t_block[k]:
                self.b_hat[kg] = b_new
                self.t_block[k] = t_new
            if improvement < self.options.rel_improvement:
                self.active[k] = False

    def restart(self, nodes) -> None:
        """The stretches with these stations take the next QP's answer as it stands (their
        iterate is outside rows just added, so no line search from it) and iterate on."""
        if self.blocks is None or np.size(nodes) == 0:
            return
        k = self.node_block[nodes]
        k = k[k >= 0]           # (np.unique would load numpy.ma, which a plan never needs)
        self.fresh[k] = self.active[k] = True
        self.t_block[k] = math.inf


def steps_time(b, lay, ds, steps):
    """Time of the given steps for squared speeds ``b``."""
    s = (np.sqrt(np.maximum(b[lay.step_from[steps]], 0.0))
         + np.sqrt(np.maximum(b[lay.step_to[steps]], 0.0)))
    with np.errstate(divide="ignore"):
        return float(np.sum(lay.time_coef[steps] * ds / s))


class BlockObjective:
    """The program's objective restricted to one block: its steps' time plus, with a comfort
    weight, the squared acceleration changes at every node whose row involves the block's
    stations (a row never involves two blocks: the comfort term links them in the QP's pattern,
    so such blocks are merged)."""

    def __init__(self, lay: QPLayout, ds: float, steps, in_block, comfort_weight: float):
        self.lay, self.ds, self.steps, self.w = lay, ds, steps, comfort_weight
        self.D = None
        if comfort_weight > 0:
            D = lay.D.tocsr()
            touches = (abs(D) @ in_block.astype(float)) > 0
            self.D = D[touches]

    @cached_property
    def nodes(self):
        """The steps' own nodes, in order: the time alone reads only these, so the line search
        runs on them (made on first use: a window solved by one QP never searches)."""
        lay, steps = self.lay, self.steps
        return distinct(np.concatenate((lay.step_from[steps], lay.step_to[steps])))

    @cached_property
    def _local(self):
        lay, steps = self.lay, self.steps
        return StepsTime(np.searchsorted(self.nodes, lay.step_from[steps]),
                          np.searchsorted(self.nodes, lay.step_to[steps]),
                          lay.time_coef[steps] * self.ds)

    def __call__(self, b) -> float:
        value = steps_time(b, self.lay, self.ds, self.steps)
        if self.D is not None:
            value += self.w * float(np.sum((self.D @ b) ** 2))
        return value

    def search(self, b0, b1, f0: float, nodes):
        """:func:`line_search` from ``b0`` to ``b1`` (``f0`` the value at ``b0``): the point's
        squared speeds at ``nodes`` (the block's free stations) and its value. Without a comfort
        term on the steps' own nodes alone (the same numbers, a tenth of the work on a long
        route's block)."""
        if self.D is not None:
            b, value = line_search(b0, b1, f0, self)
            return b[nodes], value
        own = self.nodes
        b, value = line_search(b0[own], b1[own], f0, self._local)
        return b[np.searchsorted(own, nodes)], value


class StepsTime:
    """:func:`steps_time` of some steps on the squared speeds of their own nodes alone: their
    first and last nodes' positions there and ``time_coef * ds``."""

    def __init__(self, first, last, coef_ds):
        self.first, self.last, self.coef_ds = first, last, coef_ds

    def __call__(self, b) -> float:
        s = (np.sqrt(np.maximum(b[self.first], 0.0)) + np.sqrt(np.maximum(b[self.last], 0.0)))
        with np.errstate(divide="ignore"):
            return float(np.sum(self.coef_ds / s))


def line_search(b0, b1, f0, objective, iterations: int = 30):
    """Minimise ``objective`` on the segment b0 -> b1 (convex in the step length) by golden
    section, ``iterations`` shrinks of the bracket (to 0.618^30, about 6e-7 of the segment),
    each point kept for the next shrink so that each takes one new value; ``f0`` is its value
    at ``b0``. Returns the point and its value."""
    d = b1 - b0
    f1 = objective(b1)
    if f1 <= f0:
        return b1, f1
    phi = (math.sqrt(5) - 1) / 2
    lo_a, hi_a = 0.0, 1.0
    a1, a2 = hi_a - phi, lo_a + phi
    f_a1, f_a2 = objective(b0 + a1 * d), objective(b0 + a2 * d)
    for i in range(iterations):
        last = i == iterations - 1
        if f_a1 <= f_a2:
            hi_a, a2, f_a2 = a2, a1, f_a1
            if not last:
                a1 = hi_a - phi * (hi_a - lo_a)
                f_a1 = objective(b0 + a1 * d)
        else:
            lo_a, a1, f_a1 = a1, a2, f_a2
            if not last:
                a2 = lo_a + phi * (hi_a - lo_a)
                f_a2 = objective(b0 + a2 * d)
    alpha = 0.5 * (lo_a + hi_a)
    b = b0 + alpha * d
    return b, objective(b)


def explain_infeasible(problem: SpeedProblem) -> InfeasibleError:
    """Say why no jerk-limited profile exists, naming the first constraint that cannot be met.

    The envelope (no jerk bound) was found before, so every station is drivable and every
    constraint reachable without the jerk bound; what is left is a stop too close to the start
    for a jerk-limited stop (named as the user gave it), or the jerk bounds themselves. Where no
    closed form names the cause, a :class:`~curvespeed.errors.JerkBoundInfeasible` (the planner
    then looks for the start or end speed that plans, :mod:`curvespeed.end_speed_probe`).
    """
    lim = problem.limits
    at_stop = stop_out_of_reach(problem, jerk=True)
    if at_stop is not None:
        return InfeasibleError(at_stop)
    too_fast = ceiling_out_of_reach(problem)
    if too_fast is not None:
        return InfeasibleError(too_fast)
    if lim.max_lateral_jerk_mps3 is not None:
        return JerkBoundInfeasible(
            f"{problem.source}: no speed profile satisfies the jerk bounds together with the "
            "other limits and constraints (stops, zones, start and end speed); a fixed "
            "start or end speed where the curvature changes quickly asks more lateral jerk "
            f"than max_lateral_jerk_mps3 = {lim.max_lateral_jerk_mps3:g} allows. Relax "
            "max_lateral_jerk_mps3 or max_jerk_mps3, lower the start or end speed, or "
            "check the curvature near the ends and the stops")
    return JerkBoundInfeasible(
        f"{problem.source}: no speed profile satisfies the jerk bound together with the "
        "other limits and constraints (stops, zones, start and end speed); relax "
        "max_jerk_mps3 or the constraints near the start and the stops")
