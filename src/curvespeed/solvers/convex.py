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
* **corners** (with a jerk bound): the acceleration leaves or reaches its cap (comfort or grip)
  no faster than a jerk-limited motion can, by chords of the largest drop of the mean
  acceleration from a step below the cap (:mod:`.corner_rows`), on the pairs of steps near a cap
  (:class:`.corner_rows.CornerSelection`: the set grows from each iterate, and a stretch whose
  iterate is outside rows just added takes the next QP's answer without a line search);
* **lateral jerk** (when bounded): the linear forms that bound the station rate of the lateral
  acceleration along each step and across each node (:meth:`SpeedProblem.lateral_rate_forms`,
  :meth:`SpeedProblem.node_lateral_rate_forms`) within ``J_lat / v`` of a node's speed,
  ``J_lat / sqrt(b)`` replaced by its tangent (below it, being convex; see
  :meth:`.convex_qp.QPBuilder._lateral_jerk_rows`);
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
import time
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import CurvespeedWarning, InfeasibleError, SolverError
from ..problem import SpeedProblem
from . import QPBackend, SolveResult, SolveStatus
from .convex_qp import QPBuilder, QPLayout
from .corner_rows import CornerSelection
from .envelope import solve_envelope
from .scp_run import ScpRun
# the batches' solving (qp_batches); _solve_batch also named here for the tests that use it
from .qp_batches import _batches, _solve_batch, _submit_batches, _worker_count  # noqa: F401
from .qp_rows import reduce_sparse as _reduce  # noqa: F401  (the scipy.sparse form's, for checks)


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
        Feasibility and relative gap tolerance of each QP solve.
    qp_backend : QPBackend
        What solves each QP: the banded interior-point method (:mod:`.banded_ipm`), whose
        answers short of optimal go to Clarabel (and are noted), or Clarabel alone.
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
    qp_start_near_centre : bool
        Start the banded method as for QPs whose answer lies near the current iterate
        (:func:`.banded_ipm._start_near`): set by :class:`curvespeed.replan.Replanner` for its
        windows, which start from the previous window's answer; whole routes keep the default.
    """

    comfort_weight: float = 0.0
    max_iterations: int = 30
    rel_improvement: float = 1e-4
    margin: float = 1e-5
    chord_tolerance_mps2: float = 1e-3
    qp_tolerance: float = 1e-8
    qp_backend: QPBackend = QPBackend.BANDED
    qp_gap_fraction: float = 1e-7
    threads: int | None = None
    anchor_plateaus: bool = True
    qp_start_near_centre: bool = False


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


def solve_convex(problem: SpeedProblem, options: ConvexOptions = ConvexOptions(),
                 envelope: SolveResult | None = None,
                 warm_start: np.ndarray | None = None, cap_warning: bool = True) -> SolveResult:
    """Minimum-time profile with jerk bound (and every envelope limit); see module docstring.

    ``envelope``: the problem's forward-backward envelope when the caller has it already (a
    receding-horizon window computes its own from the whole route's, :mod:`curvespeed.replan`);
    by default it is solved here. ``warm_start``: squared speeds at every node to take the first
    break points and tangents at instead of the envelope (clipped into it; fixed stations keep
    their values). Either only saves work: every iterate stays inside the conservative rows.
    ``cap_warning=False``: no warning when the iterations stop at ``max_iterations`` (a caller
    that caps them on purpose, :mod:`curvespeed.replan`).
    """
    t_start = time.perf_counter()
    env = envelope if envelope is not None else solve_envelope(problem)
    jerk = problem.limits.max_jerk_mps3 is not None
    nv = problem.n_nodes - 1 if problem.closed else problem.n_nodes
    notes = []
    # Holding plateaus relies on the fastest profile reaching the cap; a comfort weight may
    # rather take the transitions more gently, so it is not held then.
    hold = jerk and options.anchor_plateaus and options.comfort_weight == 0
    anchors = plateau_anchors(problem, env.b, nv) if hold else None
    held_failed = False
    try:
        out = _run_scp(problem, env, options, anchors, warm_start)
    except (InfeasibleError, SolverError) as exc:
        if anchors is None or not anchors[0].any():
            raise
        notes.append(f"holding stretches at their speed cap failed ({exc}); solved without")
        held_failed = True
        out = _run_scp(problem, env, options, None, warm_start)
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
    if iterations >= options.max_iterations and cap_warning:
        warnings.warn(f"convex solver stopped at the iteration cap ({options.max_iterations}); "
                      "the profile is feasible but may be a little slower than optimal",
                      CurvespeedWarning, stacklevel=2)
    return SolveResult(b=b, status=status, solver="convex",
                       iterations=iterations, solve_time_s=elapsed, ceiling_b=env.ceiling_b,
                       notes=tuple(notes), envelope_b=env.b, inner_iterations=qp_iterations)


def _run_scp(problem: SpeedProblem, env: SolveResult, options: ConvexOptions, anchors,
             warm_start=None):
    """The sequential-convex loop (module docstring), run block by block.

    Stops and stations held at a speed cap cut the route into stretches that share no
    constraint row and no step: each is an independent QP with its own line search and its own
    stopping test, so easy stretches stop after one or two iterations and the work grows
    linearly with the route. Returns the last accepted iterate.
    """
    from concurrent.futures import ThreadPoolExecutor

    lay = QPLayout(problem, jerk=problem.limits.max_jerk_mps3 is not None, anchors=anchors)
    nv = lay.nv
    b_env = env.b[:nv].copy()
    builder = QPBuilder(problem, lay, b_env, options)
    b_hat = b_env.copy()
    if warm_start is not None:
        b_hat = np.where(lay.fixed, b_env, np.clip(warm_start[:nv], 0.0, b_env))
    run = ScpRun(b_hat, b_env, lay, problem.ds, options)
    # corner rows go to the blocks near their bound (corner_rows.CornerSelection); the
    # envelope and the first QP's answer from it are still far from the answer
    corners = (CornerSelection(problem, lay, builder.corner_caps, builder.corners[0])
               if lay.jerk else None)
    if corners is not None:
        corners.grow(b_hat, far=warm_start is None)
        builder.corners = corners.selected
    threads = _worker_count(options.threads)
    # one thread, or a single batch (a receding-horizon window): solved in this thread, with no
    # pool to start and no hand-over between threads (the answer is the same either way)
    pool = ThreadPoolExecutor(max_workers=threads) if threads > 1 else None
    iterations = 0
    broken = np.zeros(0, dtype=np.int64)
    try:
        for iterations in range(1, options.max_iterations + 1):
            qp, obj_scale = builder.reduced(run.b_hat)
            if qp.n == 0:
                break
            if run.blocks is None:
                run.find_blocks(qp, problem.closed)
            row_block = run.node_block[run.free_idx][qp.indices[qp.indptr[:-1]]]
            # Blocks are solved in batches: one QP per batch is block-diagonal, so each block's
            # part of its answer is that block's own optimum, while the fixed cost of a solver
            # call is paid once per batch rather than once per block. The batches follow from
            # the blocks' sizes alone, so every thread count solves the very same QPs; the worker
            # threads share them out (both QP backends release the interpreter lock while they
            # solve).
            gap_abs = options.qp_gap_fraction * run.t_total * obj_scale
            jobs = _submit_batches(qp, _batches(np.flatnonzero(run.active), run.blocks),
                                   run.blocks, row_block, run.free_idx, run.b_hat, b_env,
                                   gap_abs, options, pool)
            for batch, cols, glob, job in jobs:
                run.take_answer(problem, iterations, batch, cols, glob, job.result())
            if corners is not None:
                far = iterations == 1 and warm_start is None
                added, broken = corners.grow(run.b_hat, far)
                if added:
                    builder.corners = corners.selected
                    run.restart(broken)
            if not run.active.any():
                break
    finally:
        if pool is not None:
            pool.shutdown(wait=True)
    if broken.size:         # only at the iteration cap: a stretch restarted otherwise iterates on
        run.notes.append(f"stopped at the iteration cap with {broken.size // 3} pair(s) of steps "
                         "leaving or reaching the acceleration cap faster than the jerk bound "
                         "allows (their rows came in at the last iteration)")
    return run.b_hat, run.status, iterations, run.qp_iterations, run.notes
