"""The steps of a launch (or stop) planned as its jerk ramp: their time, their acceleration at
their far node, and the jerk's time base at their nodes.

Part of the one definition of the discrete problem (:mod:`curvespeed.problem`):
:func:`curvespeed.jerk_model.with_rest_steps` calls :func:`launch_steps` for each launch whose
jerk ramp from rest spans more than the step next to rest, and carries what it returns into the
problem (``time_coef``, ``accel_factor_start`` / ``accel_factor_end``, ``jerk_node_scale``).
The motion those steps are driven with is :func:`curvespeed.launch_motion.planned_launch`'s.
Nothing here reads or writes files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np

from . import rest_step
from .errors import InfeasibleError
from .launch_motion import JerkPieces, PlannedLaunch, accel_phase, planned_launch, turns_below

if TYPE_CHECKING:
    from .jerk_model import JerkTimeTerms
    from .problem import SpeedProblem


@dataclass(frozen=True)
class LaunchSteps:
    """What planning launches (and stops) as their ramps changes in a problem
    (:func:`launch_steps`): a factor on each step's time coefficient (1 elsewhere); the
    acceleration factor at the far node from rest of each step of a ramp (a launch's step's
    last node, a stop's step's first node; NaN elsewhere); and the time base of each node of a
    ramp with the speeds of the motion there (node -> (base, speeds of the node's previous, own
    and next node)); which steps are the step in which a move turns, its peak inside it
    (:mod:`curvespeed.jerk_switch` drives it), and the squared speed the motion has at the far
    node of each (node -> b), which caps it."""

    time_factor: np.ndarray
    f_start: np.ndarray
    f_end: np.ndarray
    bases: dict
    turn: np.ndarray
    turn_caps: dict


def launch_steps(problem: SpeedProblem, steps: np.ndarray, leaving: np.ndarray,
                 ramp_m: np.ndarray, accel: np.ndarray) -> LaunchSteps:
    """The steps after the step next to rest (step ``steps[i]``, leaving rest or arriving) of
    each launch's (or stop's) jerk ramp, ``ramp_m[i]`` long to at most ``accel[i]``, driven as
    :func:`curvespeed.launch_motion.planned_launch` plans them: the acceleration linear in time,
    at the bound up to the step in which the ramp ends, and in that step linear to the cap (a
    move that holds it) or the double-S motion through its peak (a move that turns).

    * Each such step takes the motion's time, a factor (over 1 where the acceleration rises, the
      speed being convex in time) on the constant-acceleration step's ``2 ds / (v + v')`` between
      the motion's own speeds at its ends.
    * A step's acceleration at its near node is its mean ``(v'^2 - v^2) / (2 ds)``, which is the
      motion's at the step's distance-weighted mean time (the acceleration being linear in time
      over it); at its far node it is the motion's there (on the ramp; the cap where the step
      goes on to it), or for the step in which the move turns, at a time between its mean time
      and its far node as far as the ramp's end lies between its near and far node: a factor
      on its mean at the motion's speeds. So the acceleration bounds at the far node hold the
      acceleration a step rising through it ends with, and a ramp's end moving across a node
      changes the problem continuously.
    * A node's time base is the motion's time between the points at which the steps on either
      side take their accelerations (:func:`scale_for_bases` sizes the node's terms to it).
    * The step in which a move turns, its peak inside it, is driven as the motion through the
      peak (the profile's ``accel_turn`` step, :mod:`curvespeed.jerk_switch`): from the
      acceleration the ramp's step before it ends with, at ``+J`` to the peak and ``-J`` after
      it. Driven at constant jerk instead (``linear_accel``), it ended above the motion (its
      jerk averages the two), and the change to the next step's acceleration read up to 1.84 of
      the bound on the 1,728 moves of ``benchmarks/exact_roads.py --wide``. Its far node is
      capped at the motion's speed there (``turn_caps``; the cap source ``jerk_launch``, like the
      ramp's own cap on the step next to rest): the node's jerk rows let the plan pass it by
      0.06 % (18 m at 0.5 m/s^3), and the motion through the turn that joins those speeds in
      the step's time turned at 1.033 of the bound.
    * Only the steps up to the first whose far node allows less than the motion's acceleration
      there (at the motion's speed; a curve, say) are planned so: past it the plan is held down
      by that limit, not driven along the ramp. Where two ramps overlap the larger time factor
      counts.
    """
    ds = problem.ds
    n_steps, nv = problem.n_nodes - 1, problem.n_nodes - (1 if problem.closed else 0)
    factor = np.full(n_steps, np.nan)
    f_start, f_end = np.full(n_steps, np.nan), np.full(n_steps, np.nan)
    turn = np.zeros(n_steps, dtype=bool)
    turn_caps: dict = {}
    bases: dict = {}
    for k, out, length, cap in zip(steps, leaving, ramp_m, accel):
        launch = _launch_within(problem, int(k), bool(out), float(length), float(cap))
        last = launch.corner                                  # the step the ramp ends in
        t, v, _ = launch.states(ds, last + 3)
        mean = launch.motion.mean_time(t[:-1], t[1:], ds)     # each step's, from rest
        ref = t[1:].copy()                                    # where its far node's is taken
        ref[last] = mean[last] + launch.peak_share * (t[last + 1] - mean[last])
        ref[last + 1:] = mean[last + 1:]
        a_ref = launch.motion.at_time(ref)[2]
        i = np.arange(1, last + 1)                            # the steps, from rest
        at = k + i if out else k - i
        far = at + 1 if out else at
        if not problem.closed:
            inside = (at >= 0) & (at < n_steps)
            i, at, far = i[inside], at[inside], far[inside]
        lo, hi = problem.accel_bounds(v[i + 1] ** 2, nodes=far % nv)
        short = np.flatnonzero(a_ref[i] > (hi if out else -lo) * (1.0 + 1e-12))
        n_ok = int(short[0]) if short.size else i.size
        i, at = i[:n_ok], at[:n_ok] % n_steps
        fac = np.diff(t)[i] * (v[i] + v[i + 1]) / (2.0 * ds)
        factor[at] = np.where(np.isnan(factor[at]), fac, np.maximum(factor[at], fac))
        if 0.0 < launch.peak_share < 1.0 and np.any(i == last):
            turn[at[i == last]] = True
            node = (k + last + 1) if out else (k - last)
            turn_caps[int(node % nv)] = float(v[last + 1] ** 2)
        (f_end if out else f_start)[at] = a_ref[i] * 2.0 * ds / (v[i + 1] ** 2 - v[i] ** 2)
        for j in range(1, n_ok + 2):                          # the nodes, from rest
            node = (k + j) if out else (k + 1 - j)
            if problem.closed or 0 <= node < problem.n_nodes:
                speeds = v[j - 1: j + 2] if out else v[j - 1: j + 2][::-1]
                before = t[1] if j == 1 else ref[j - 1]      # the step next to rest: its end
                bases[int(node % nv)] = (mean[j] - before, speeds)
    return LaunchSteps(np.where(np.isnan(factor), 1.0, factor), f_start, f_end, bases, turn,
                       turn_caps)


def closed_form_launches(problem: SpeedProblem, steps: np.ndarray, leaving: np.ndarray,
                         span_m: np.ndarray, v_top: np.ndarray, accel: np.ndarray,
                         candidate: np.ndarray, envelope=None
                         ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Which of the ``candidate`` launches (or stops) next to ``steps`` are planned as the
    double-S closed form's (:func:`curvespeed.jerk_model.with_rest_steps` says why), each one's
    jerk ramp length, m, and the acceleration it goes on to, m/s^2. The move of each is
    ``span_m`` long under ``v_top`` and may reach ``accel``
    (:func:`curvespeed.launch_motion.accel_phase`); it is planned so where its ramp goes past
    the step next to rest, it either turns below ``accel`` or still holds it where the planned
    ramp's last step ends (:func:`holds_past_corner`), and the route lets its acceleration
    phase run its course (:func:`phase_fits`). A move that reaches ``accel`` but leaves it
    sooner is planned for the highest lower acceleration that it would hold so long
    (:func:`_held_cap`). ``envelope``: :func:`lazy_envelope` of ``problem``, where the caller
    has one."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    accel = np.array(accel, dtype=float)
    phase = np.array([accel_phase(*args, jerk) for args in zip(span_m, v_top, accel)],
                     dtype=float).reshape(-1, 2)
    tj, ta = phase[:, 0], phase[:, 1]
    ramp_m = jerk * tj ** 3 / 6.0
    ok = np.asarray(candidate, dtype=bool) & (ramp_m >= ds * (1.0 - 1e-9))
    for i in np.flatnonzero(ok):
        if turns_below(jerk * tj[i], accel[i]):
            continue
        ok[i] = holds_past_corner(ramp_m[i], ta[i] - tj[i], accel[i], jerk, ds)
        if not ok[i]:
            lower = _held_cap(float(span_m[i]), float(v_top[i]), float(accel[i]), jerk, ds)
            if lower is not None:
                accel[i] = lower
                tj[i], ta[i] = accel_phase(span_m[i], v_top[i], lower, jerk)
                ramp_m[i], ok[i] = jerk * tj[i] ** 3 / 6.0, True
    if ok.any():
        env = (envelope or lazy_envelope(problem))()
        paths = envelope_paths(problem, steps[ok], leaving[ok], env)
        ok[ok] = [phase_fits(p, a, b, jerk, ds) for p, a, b in zip(paths, tj[ok], ta[ok])]
    return ok, ramp_m, accel


@lru_cache(maxsize=256)                 # a move's launch and stop ask the same
def _held_cap(span_m: float, v_top: float, accel: float, jerk: float, ds: float,
              iterations: int = 8) -> float | None:
    """The highest acceleration below ``accel`` whose launch, ramping past the step next to
    rest, the move of ``span_m`` under ``v_top`` still holds where the planned ramp's last step
    ends (:func:`holds_past_corner`; a lower cap is held longer); None if even the lowest whose
    ramp goes past that step is not. Bisection from there, to 2^-8 of the bracket (under
    4e-3 m/s^2 at 1 m stations and caps up to 3 m/s^2; each halving costs about a millisecond.
    Measured on the 1,728 moves of :data:`curvespeed.jerk_model.HELD_LENGTH_FACTOR`, 8 and 12
    halvings give plans within 0.0015 % of each other's time).

    A move that reaches ``accel`` and soon leaves it was planned before with the step next to
    rest keeping a flat part and the ramp's rise left to the nodes after it: measured at 38-42 m
    under 3 m/s^2 and 1.2 m/s^3, +0.19 to +0.20 % over the closed form at 1 m stations; planned
    for the lower cap, +0.014 to +0.040 %; planned as turning at ``accel`` it came out below the
    closed form (-0.025 % at 40 m)."""

    def holds(a: float) -> bool:
        tj, ta = accel_phase(span_m, v_top, a, jerk)
        ramp = jerk * tj ** 3 / 6.0
        return (not turns_below(jerk * tj, a) and ramp >= ds
                and holds_past_corner(ramp, ta - tj, a, jerk, ds))

    lo, hi = rest_step.max_ramp_accel(jerk, ds) * (1.0 + 1e-9), accel   # ramp past the step
    if lo >= hi or not holds(lo):
        return None
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if holds(mid) else (lo, mid)
    return lo


def holds_past_corner(ramp_m: float, held_until_s: float, accel: float, jerk: float,
                      ds: float) -> bool:
    """Whether a move whose acceleration is at ``accel`` until ``held_until_s`` (the closed
    form's ``Ta - Tj``) still holds it when the launch planned to go on to it
    (:func:`curvespeed.launch_motion.planned_launch`) reaches the far node of the step in which
    its ramp ends."""
    launch = planned_launch(ramp_m, accel, jerk, ds)
    t, _, _ = launch.states(ds, launch.corner + 2)
    return bool(t[-1] <= held_until_s)


def jerk_free_envelope(problem: SpeedProblem) -> np.ndarray | None:
    """The forward-backward envelope's speed at every node without a jerk bound, m/s (a free
    end, a receding-horizon window's, taken at rest: a move must fit before it); None where the
    envelope does not exist (the solver says why, later). No move is faster anywhere."""
    from .solvers.envelope import solve_envelope

    end = problem.b_end if problem.closed or problem.b_end is not None else 0.0
    try:
        return np.sqrt(np.maximum(
            solve_envelope(replace(problem, jerk_model=False, b_end=end)).b, 0.0))
    except InfeasibleError:
        return None


def lazy_envelope(problem: SpeedProblem):
    """:func:`jerk_free_envelope` of ``problem`` as a function that solves it on its first
    call only (the launches and the closed-form moves both need it, often neither)."""
    found: list = []

    def envelope():
        if not found:
            found.append(jerk_free_envelope(problem))
        return found[0]
    return envelope


def envelope_paths(problem: SpeedProblem, steps: np.ndarray, leaving: np.ndarray,
                   env: np.ndarray | None) -> list:
    """For each step next to rest, the forward-backward envelope's speeds ``env`` (no jerk
    bound, :func:`jerk_free_envelope`) along the route from its rest node away from rest, m/s,
    up to where the envelope first falls again: no move from rest is faster there, whatever
    caps lie further on (a curve soon after a stop, say). None for each where the envelope
    does not exist."""
    if env is None:
        return [None] * steps.size
    n, nv = problem.n_nodes, problem.n_nodes - (1 if problem.closed else 0)
    paths = []
    for k, away in zip(steps, leaving):
        node = int(k) if away else int(k) + 1             # the step's rest node
        if problem.closed:
            path = (node + (np.arange(nv + 1) if away else -np.arange(nv + 1))) % nv
        else:
            path = np.arange(node, n) if away else np.arange(node, -1, -1)
        speed = env[path]
        falls = np.flatnonzero(np.diff(speed) < -1e-9 * speed[1:])      # beyond rounding
        paths.append(speed[: (falls[0] + 1) if falls.size else speed.size])
    return paths


def phase_fits(path_speed, tj: float, ta: float, jerk: float, ds: float) -> bool:
    """Whether the closed form's acceleration phase (jerk ``+J`` for ``tj``, none up to
    ``ta - tj``, ``-J`` up to ``ta``) stays within the envelope's speeds ``path_speed`` (one per
    node from rest, :func:`envelope_paths`) until it ends: only then can a plan follow the
    closed form's launch."""
    if path_speed is None:
        return False
    phase = JerkPieces((0.0, tj, ta - tj), (jerk, 0.0, -jerk))
    s_end = float(phase.at_time(ta)[0])
    nodes = int(min(math.ceil(s_end / ds) + 1, path_speed.size))
    if nodes * ds < s_end and nodes == path_speed.size:
        return False                                   # the envelope falls before the end
    t = phase.time_at(np.arange(nodes) * ds, ta)
    return bool(np.all(phase.at_time(t)[1] <= path_speed[:nodes] * (1.0 + 1e-9)))


def _launch_within(problem: SpeedProblem, k: int, out: bool, ramp_m: float,
                   accel: float) -> PlannedLaunch:
    """:func:`curvespeed.launch_motion.planned_launch` for the launch (or stop) next to step
    ``k``, going on to a cap no higher than the far node of its last step allows at the speed
    the motion reaches there (``accel`` is what the moving node of the step next to rest allows;
    a curve, or the comfort ellipse's lateral part, may allow less further on). A lower cap
    there lowers the speed there, which lowers no acceleration bound."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    n_steps, nv = problem.n_nodes - 1, problem.n_nodes - (1 if problem.closed else 0)
    launch = planned_launch(ramp_m, accel, jerk, ds)
    far = k + launch.corner + 1 if out else k - launch.corner
    if launch.peak_share < 1.0 or not (problem.closed or 0 <= far <= n_steps):
        return launch
    _, v, _ = launch.states(ds, launch.corner + 2)
    lo, hi = problem.accel_bounds(np.array([v[-1] ** 2]), nodes=np.array([far % nv]))
    there = float(hi[0] if out else -lo[0])
    if there >= accel:
        return launch
    return planned_launch(ramp_m, there * (1.0 - 1e-12), jerk, ds)


def scale_for_bases(problem: SpeedProblem, terms: JerkTimeTerms, bases: dict) -> np.ndarray:
    """A factor on every distinct node's jerk terms (1 where ``bases`` has no entry) that makes
    the smallest of a node's terms, at the speeds ``bases`` gives for it, the time base it gives
    (0: the acceleration may not change there)."""
    nv = problem.n_nodes - (1 if problem.closed else 0)
    scale = np.ones(nv)
    if not bases:
        return scale
    nodes = np.fromiter(bases, dtype=int, count=len(bases))
    tau = np.array([max(base[0], 0.0) for base in bases.values()])
    speeds = np.array([np.asarray(base[1], dtype=float) for base in bases.values()])
    where = np.full(nv, -1)
    where[nodes] = np.arange(nodes.size)
    mine = np.flatnonzero(where[terms.node] >= 0)          # the terms of those nodes
    at = where[terms.node[mine]]
    w = np.einsum("ij,ij->i", terms.weights[mine], speeds[at])
    live = (terms.scale[mine] > 0.0) & (w > 0.0)
    low = np.full(nodes.size, np.inf)
    with np.errstate(divide="ignore", invalid="ignore"):
        np.minimum.at(low, at[live], terms.scale[mine][live] * problem.ds / w[live])
    has = np.isfinite(low)
    scale[nodes[has]] = tau[has] / low[has]
    return scale


def scaled_terms(terms: JerkTimeTerms, node_scale: np.ndarray | None,
                 keep_first: bool = False) -> JerkTimeTerms:
    """``terms`` with each node's terms scaled by ``node_scale`` (None: unchanged);
    ``keep_first`` leaves node 0's as they are (a receding-horizon window's first node is the
    vehicle's, whose terms are its own)."""
    if node_scale is None:
        return terms
    factor = np.asarray(node_scale, dtype=float)[terms.node]
    if keep_first:
        factor = np.where(terms.node == 0, 1.0, factor)
    return replace(terms, scale=terms.scale * factor)
