"""Rest-to-rest moves planned as the jerk-limited closed form itself.

Between two nodes at rest on a road that lets it run its course, the fastest motion within a
top speed ``V``, caps ``A1`` (accelerating) and ``A2`` (braking) and the jerk bound ``J`` is the
double-S motion (Biagiotti & Melchiorri 2008, section 3.4; with ``A1 != A2`` its launch and
stop are each that motion's acceleration phase, to one peak speed): pieces of constant jerk
``+J``, ``0``, ``-J``. The staircase of constant-acceleration steps follows it only within
``J T^3 / 12`` of distance per step, and the steps where its jerk switches not at all: at 1 m
stations, moves of 8-12 m came out up to 0.35 % slower than it.

Such a move is planned here as that motion, step by step (:func:`closed_form_moves`): each step
takes the motion's own time (a factor on ``2 ds / (v + v')`` at the motion's speeds); a step of
one piece is driven at constant acceleration (jerk 0) or at constant jerk (``linear_accel``), a
step inside which the jerk switches once as that switch
(:mod:`curvespeed.jerk_switch`; a step next to rest ramps from rest and holds, or turns), each
step's acceleration at the node away from the move's peak speed is the motion's there (at the
other it is its mean), each node's time base is the one over which the motion changes between
the two (``|change| / J``) and every node is capped at the motion's speed, so no plan is
faster than it. A move is planned so only where the motion is known to be feasible: every
node's speed within the forward-backward envelope's (no jerk bound; curves, zones, grade and
power lower it), every step's acceleration within the bounds of both its nodes, no lateral jerk
bound on a curving move, and no step whose switches make a pattern
:data:`curvespeed.jerk_switch.PATTERNS` lacks. Every other move keeps the staircase
(:mod:`curvespeed.jerk_model`).

:func:`curvespeed.jerk_model.with_rest_steps` carries what this returns into the problem; the
planner writes such a move with the motion's own speeds where its solver's agree with them to
its tolerance (:func:`snap_to_closed_form`). Nothing here reads or writes files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np

from . import jerk_switch, rest_step
from .launch_motion import JerkPieces, accel_phase

if TYPE_CHECKING:
    from .problem import SpeedProblem

#: A switch of the jerk this close to a node (relative to the step's time) counts as on it.
_AT_NODE = 1e-9


@dataclass(frozen=True)
class MoveSteps:
    """What planning moves as their closed form sets in a problem (NaN / 0 / absent where no
    such move): per step, its time coefficient, its acceleration factors at its first and
    last node, its shape next to rest (``rest_u``; NaN for a step that turns inside) and its
    switching pattern; per node (over the problem's nodes), the motion's squared speed; per
    node of such a move, the time base of its change of acceleration with the motion's speeds
    of its previous, own and next node (:func:`curvespeed.launch_steps.scale_for_bases`)."""

    time_coef: np.ndarray
    f_start: np.ndarray
    f_end: np.ndarray
    rest_u: np.ndarray
    switch: np.ndarray
    b: np.ndarray
    bases: dict

    @property
    def steps(self) -> np.ndarray:
        """The steps of the moves planned so."""
        return np.flatnonzero(~np.isnan(self.time_coef))


def phase(v_peak: float, accel: float, jerk: float) -> tuple[float, float]:
    """The jerk ramp's and the hold's durations of an acceleration phase from rest to
    ``v_peak`` (acceleration 0 there) within ``accel`` and ``jerk``: the closed form's phase of
    a move long enough to reach ``v_peak`` (:func:`curvespeed.launch_motion.accel_phase`)."""
    tj, ta = accel_phase(math.inf, v_peak, accel, jerk)
    return tj, ta - 2.0 * tj


def _phase_length(v_peak: float, accel: float, jerk: float) -> float:
    tj, th = phase(v_peak, accel, jerk)
    return 0.5 * v_peak * (2.0 * tj + th)         # the speed is point-symmetric in the phase


def move_pieces(length_m: float, v_top: float, accel: float, decel: float,
                jerk: float) -> tuple[tuple, tuple, float, float]:
    """The time-optimal rest-to-rest move of ``length_m`` within ``v_top``, ``accel``,
    ``decel`` and ``jerk``: ``(durations, jerks, total time, time of its split)``, its pieces
    in order (none empty) and the time between its launch and its stop (its peak speed's, or
    the middle of its cruise)."""
    def both(v):
        return _phase_length(v, accel, jerk) + _phase_length(v, decel, jerk)

    if both(v_top) <= length_m:
        v_peak, cruise = v_top, (length_m - both(v_top)) / v_top
    else:
        lo, hi = 0.0, v_top
        for _ in range(200):                     # to the last bit
            mid = 0.5 * (lo + hi)
            if mid in (lo, hi):
                break
            lo, hi = (mid, hi) if both(mid) < length_m else (lo, mid)
        v_peak, cruise = 0.5 * (lo + hi), 0.0
    tj1, th1 = phase(v_peak, accel, jerk)
    tj2, th2 = phase(v_peak, decel, jerk)
    raw = [(tj1, jerk), (th1, 0.0), (tj1, -jerk), (cruise, 0.0), (tj2, -jerk), (th2, 0.0),
           (tj2, jerk)]
    total = sum(d for d, _ in raw)
    pieces: list[list[float]] = []
    for d, j in raw:
        if d <= 1e-12 * total:
            continue
        if pieces and pieces[-1][1] == j:
            pieces[-1][0] += d
        else:
            pieces.append([d, j])
    split = 2.0 * tj1 + th1 + 0.5 * cruise
    return tuple(d for d, _ in pieces), tuple(j for _, j in pieces), total, split


def _motion(durations, jerks) -> JerkPieces:
    starts = np.concatenate(([0.0], np.cumsum(durations)[:-1]))
    return JerkPieces(tuple(float(t) for t in starts), tuple(float(j) for j in jerks))


@dataclass(frozen=True)
class _Motion:
    """A move's closed form at its nodes: time, speed and acceleration per node, the pieces'
    start times and jerks, and the split time."""

    t: np.ndarray
    v: np.ndarray
    a: np.ndarray
    starts: np.ndarray
    jerks: np.ndarray
    split: float


@lru_cache(maxsize=256)             # a route's stops are often evenly spaced: the same moves
def move_at_nodes(n_steps: int, ds: float, v_top: float, accel: float, decel: float,
                  jerk: float) -> _Motion:
    """The closed form (:func:`move_pieces`) of a move of ``n_steps`` steps of ``ds`` at its
    nodes: each node before the split timed on the motion from its start, each after it on the
    motion driven back from its end (so both ends keep full precision). Its arrays are
    read-only (the result is shared by every move alike)."""
    length = n_steps * ds
    durations, jerks, total, split = move_pieces(length, v_top, accel, decel, jerk)
    forward = _motion(durations, jerks)
    backward = _motion(durations[::-1], jerks[::-1])
    s = np.arange(n_steps + 1) * ds
    s_split = float(forward.at_time(split)[0])
    early = s <= s_split
    t = np.empty(s.size)
    t[early] = forward.time_at(s[early], total)
    t[~early] = total - backward.time_at(length - s[~early], total)
    t[0], t[-1] = 0.0, total
    _, v_f, a_f = forward.at_time(t)
    _, v_b, a_b = backward.at_time(total - t)
    v = np.where(early, v_f, v_b)
    a = np.where(early, a_f, -a_b)
    v[0] = v[-1] = a[0] = a[-1] = 0.0
    starts = np.concatenate(([0.0], np.cumsum(durations)[:-1]))
    arrays = (t, v, a, starts, np.asarray(jerks, dtype=float))
    for array in arrays:
        array.flags.writeable = False
    return _Motion(*arrays, split)


def classify_steps(m: _Motion) -> tuple[np.ndarray, np.ndarray] | None:
    """Per step of the move, its switching pattern (0: one piece; a step next to rest that
    ramps and holds has 0 too, its shape being the step's own, :mod:`curvespeed.rest_step`)
    and whether it is one piece without jerk (constant acceleration); None where a step has
    a pattern of switches :data:`curvespeed.jerk_switch.PATTERNS` lacks, or a step next to rest
    does not start from rest as its ramp (``+J``)."""
    n = m.t.size - 1
    tol = _AT_NODE * np.diff(m.t)
    first = np.searchsorted(m.starts, m.t[:-1] + tol, side="right") - 1
    last = np.searchsorted(m.starts, m.t[1:] - tol, side="left") - 1
    if np.any(last - first > 2):
        return None
    rising = m.v[1:] >= m.v[:-1]
    code = np.zeros(n, dtype=int)
    for k in np.flatnonzero(last > first):
        pieces = m.jerks[first[k]: last[k] + 1]
        code[k] = jerk_switch.pattern_code(*(pieces if rising[k] else pieces[::-1]))
        if code[k] == 0:
            return None
    lead = np.where(rising, m.jerks[first], m.jerks[last])       # in rising orientation
    if lead[0] <= 0.0 or lead[-1] <= 0.0:               # from rest: the ramp first
        return None
    for k in (0, n - 1):                                 # ramp-and-hold is a rest step's shape
        if code[k] == jerk_switch.RISE_HOLD:
            code[k] = 0
        elif code[k] not in (0, jerk_switch.TURN, jerk_switch.RISE_HOLD_FALL):
            return None
    return code, (first == last) & (m.jerks[first] == 0.0)


#: How far below what the moving nodes next to rest allow a move's caps may be taken so that
#: its closed form keeps within every node's bounds: a route's curvature bound, never quite 0
#: on a fitted straight, lowers the comfort ellipse's longitudinal part by 2e-8 of the cap
#: at the move's speed (a 60 m straight logged every 2 m).
CAP_SLACK = 1e-3


def _within_bounds(problem: SpeedProblem, nodes: np.ndarray, n_steps: int, v_top: float,
                   accel: float, decel: float, rounds: int = 3) -> _Motion | None:
    """The move's closed form (:func:`move_at_nodes`) with its caps lowered to the least that
    its accelerating (braking) nodes allow at its speeds, where that is within
    :data:`CAP_SLACK` of ``accel`` (``decel``): a lower cap lowers the speeds, which raises no
    bound, so a few rounds settle it. None where the bounds ask more (a curve or a grade
    along the move: the staircase then does better than a uniformly lower cap)."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    a1, a2 = accel, decel
    for _ in range(rounds):
        m = move_at_nodes(n_steps, ds, v_top, a1, a2, jerk)
        lo, hi = problem.accel_bounds(m.v ** 2, nodes=nodes)
        up, down = m.a > 0.0, m.a < 0.0
        need1 = min(a1, float(np.min(hi[up]))) if up.any() else a1
        need2 = min(a2, float(np.min(-lo[down]))) if down.any() else a2
        if need1 >= a1 and need2 >= a2:
            return m
        if need1 < accel * (1.0 - CAP_SLACK) or need2 < decel * (1.0 - CAP_SLACK):
            return None
        a1, a2 = need1, need2
    return m


def _fits(problem: SpeedProblem, nodes: np.ndarray, m: _Motion, env_v: np.ndarray) -> bool:
    """Whether the move's closed form is within the envelope's speed at each node and within
    each node's acceleration bounds on both its steps, and no lateral jerk bound applies on a
    curving move."""
    if np.any(m.v > env_v * (1.0 + 1e-9) + 1e-12):
        return False
    if (problem.limits.max_lateral_jerk_mps3 is not None
            and np.any(problem.kappa_abs[nodes] > 0.0)):
        return False
    lo, hi = problem.accel_bounds(m.v ** 2, nodes=nodes)
    # per step, the acceleration's extremes: its nodes', or at a switch inside it
    a_hi = np.maximum(m.a[:-1], m.a[1:])
    a_lo = np.minimum(m.a[:-1], m.a[1:])
    step = np.searchsorted(m.t, m.starts, side="right") - 1
    inside = (step >= 0) & (step < m.t.size - 1)
    for k, t0 in zip(step[inside], m.starts[inside]):
        a_k = m.a[k] + _accel_change(m, m.t[k], t0)
        a_hi[k], a_lo[k] = max(a_hi[k], a_k), min(a_lo[k], a_k)
    tol = 1e-9
    return bool(np.all(a_hi <= np.minimum(hi[:-1], hi[1:]) * (1.0 + tol) + tol)
                and np.all(a_lo >= np.maximum(lo[:-1], lo[1:]) * (1.0 + tol) - tol))


def _accel_change(m: _Motion, t0: float, t1: float) -> float:
    """The change of acceleration from ``t0`` to ``t1`` along the motion's pieces."""
    ends = np.append(m.starts[1:], np.inf)
    overlap = np.clip(np.minimum(ends, t1) - np.maximum(m.starts, t0), 0.0, None)
    return float(overlap @ m.jerks)


def _readable(m: _Motion, code: np.ndarray, plain: np.ndarray, ds: float, jerk: float) -> bool:
    """Whether the move's switching steps, written as their kinds with the motion's own speeds
    and times, read back as the motion (:func:`curvespeed.jerk_switch.shapes`): each finds a
    step to continue, starts and ends with the motion's accelerations to 1e-4 (the verifier's
    tolerance) and keeps within ``jerk`` to 1e-3. A switch near a step's end is
    ill-conditioned: the jerk of a 14 ms sliver of ``-J`` at 25 m/s reads 7e-4 high from the
    same accelerations, its switch placed a little early; one within 1e-7 of the step's time
    of a node reads as constant acceleration, which it is to that. A step through the move's top speed that holds its
    cap, then falls, next to a stop's step that rises, holds and falls would each need the
    other's acceleration first (a 5 m move at 0.77 and 2.45 m/s^2, 6.4 m/s^3)."""
    if not code.any():
        return True
    n = code.size
    c = np.diff(m.t) * (m.v[:-1] + m.v[1:]) / ds
    lin_c = np.where(plain, 0.0, c)
    rest_c = np.zeros(n)
    for k in (0, n - 1):
        if code[k] == 0:
            rest_c[k], lin_c[k] = c[k], 0.0
    shape = jerk_switch.shapes(np.arange(n + 1) * ds, m.v, rest_c, lin_c, code)
    k = np.flatnonzero(code > 0)
    if not np.all(shape.ok[k]):
        return False
    _, values = jerk_switch.accel_points(shape, k, np.diff(m.t)[k])
    tol = 1e-4 * max(float(np.max(np.abs(m.a))), jerk * float(np.max(np.diff(m.t)[k])))
    return bool(np.all(np.abs(values[:, 0] - m.a[k]) <= tol)
                and np.all(np.abs(values[:, -1] - m.a[k + 1]) <= tol)
                and np.all(shape.jerk[k] <= jerk * (1.0 + 1e-3)))


def closed_form_moves(problem: SpeedProblem, rest: np.ndarray, allowed,
                      envelope) -> MoveSteps | None:
    """The moves between consecutive ``rest`` nodes planned as their closed form (module
    docstring); ``allowed(moving, leaving)`` gives the caps a launch (``leaving``) or a stop
    may reach from the moving nodes of their steps next to rest
    (:func:`curvespeed.jerk_model.rest_step_allowed_accel`), ``envelope()`` the jerk-free
    envelope's speeds (:func:`curvespeed.launch_steps.lazy_envelope`). None if none is."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    n_steps, nv = problem.n_nodes - 1, problem.n_nodes - (1 if problem.closed else 0)
    idx = np.flatnonzero(rest[:nv])
    pairs = list(zip(idx[:-1], idx[1:]))
    if problem.closed and idx.size:
        pairs.append((idx[-1], idx[0] + nv))
    if not pairs:
        return None
    env_v = envelope()
    if env_v is None:
        return None
    out = MoveSteps(np.full(n_steps, np.nan), np.full(n_steps, np.nan),
                    np.full(n_steps, np.nan), np.full(n_steps, np.nan),
                    np.zeros(n_steps, dtype=int), np.full(problem.n_nodes, np.nan), {})
    r0s, r1s = np.array([p[0] for p in pairs]), np.array([p[1] for p in pairs])
    caps = allowed(np.concatenate(((r0s + 1) % nv, (r1s - 1) % nv)),
                   np.concatenate((np.ones(r0s.size, bool), np.zeros(r1s.size, bool))))
    for (r0, r1), a1, a2 in zip(pairs, caps[: r0s.size], caps[r0s.size:]):
        nodes = np.arange(r0, r1 + 1) % nv
        steps = np.arange(r0, r1) % n_steps
        v_top = math.sqrt(float(np.max(problem.cap_b[nodes[1:-1]])))
        if a1 <= 0.0 or a2 <= 0.0 or not math.isfinite(v_top):
            continue
        m = _within_bounds(problem, nodes, int(r1 - r0), v_top, float(a1), float(a2))
        if m is None or not _fits(problem, nodes, m, env_v[nodes]):
            continue
        kinds = classify_steps(m)
        if kinds is None or not _readable(m, *kinds, ds, jerk):
            continue
        _set_move(out, problem, nodes, steps, m, *kinds)
    return out if out.steps.size else None


def _set_move(out: MoveSteps, problem: SpeedProblem, nodes, steps, m: _Motion,
              code: np.ndarray, plain: np.ndarray) -> None:
    """Write one move's steps and nodes into ``out`` (:class:`MoveSteps`); a ``plain`` step
    (constant acceleration) is timed ``2 ds / (v + v')`` exactly."""
    ds, jerk = problem.ds, problem.limits.max_jerk_mps3
    v, a, t = m.v, m.a, m.t
    n = steps.size
    T = np.diff(t)
    out.time_coef[steps] = np.where(plain, 2.0, T * (v[:-1] + v[1:]) / ds)
    mean = (v[1:] ** 2 - v[:-1] ** 2) / (2.0 * ds)
    live = np.abs(mean) > 1e-12
    safe = np.where(live, mean, 1.0)
    launch, stop = t[1:] <= m.split * (1.0 + 1e-12), t[:-1] >= m.split * (1.0 - 1e-12)
    f_start = np.where(stop & live, a[:-1] / safe, 1.0)
    f_end = np.where(launch & live, a[1:] / safe, 1.0)
    f_start[0], f_end[-1] = 0.0, 0.0                    # at rest
    f_end[0] = a[1] / mean[0]
    f_start[-1] = a[-2] / mean[-1]
    out.f_start[steps], out.f_end[steps] = f_start, f_end
    # next to rest: ramp then hold (its shape u from the acceleration it holds, and its time
    # the shape's: the motion's to rounding), or a turn
    for k, moving in ((0, 1), (n - 1, n - 1)):
        if code[k]:
            out.rest_u[steps[k]] = np.nan
        else:
            f = 2.0 * ds * abs(a[moving]) / v[moving] ** 2
            u = min(math.sqrt(max(3.0 * (f - 1.0), 0.0)), 1.0)
            out.rest_u[steps[k]] = u
            out.time_coef[steps[k]] = float(rest_step.time_coef(u))
    out.switch[steps] = code
    out.b[nodes] = v ** 2
    if problem.closed:                                   # the last node is the first
        out.b[-1] = out.b[0]
    a_before, a_after = f_end[:-1] * mean[:-1], f_start[1:] * mean[1:]
    tau = np.abs(a_after - a_before) / jerk
    for i in range(1, n):
        out.bases[int(nodes[i])] = (float(tau[i - 1]), v[i - 1: i + 2].copy())


def snap_to_closed_form(problem: SpeedProblem, b: np.ndarray,
                        tolerance: float = 1e-4) -> tuple[np.ndarray, np.ndarray]:
    """``(b, snapped)``: the solver's squared speeds with every move planned as its closed form
    (:attr:`SpeedProblem.closed_form_b`) set to the motion's own where all its nodes agree with
    them to ``tolerance`` of the move's largest (the solver's rows are tightened by 1e-5 of
    each limit, so it stops just short of the caps); ``snapped`` per node. The verifier
    checks what is written."""
    cf = problem.closed_form_b
    snapped = np.zeros(b.size, dtype=bool)
    if cf is None:
        return b, snapped
    b = np.asarray(b, dtype=float).copy()
    nv = b.size - (1 if problem.closed else 0)
    on = ~np.isnan(cf[:nv])
    # the moves: runs of nodes with a closed form, from rest to rest (around a loop's seam)
    edges = np.flatnonzero(on & (b[:nv] <= 0.0))
    pairs = list(zip(edges[:-1], edges[1:]))
    if problem.closed and edges.size:
        pairs.append((edges[-1], edges[0] + nv))
    for r0, r1 in pairs:
        span = np.arange(r0, r1 + 1) % nv
        if not np.all(on[span]):
            continue
        scale = float(np.max(cf[span]))
        if np.all(np.abs(b[span] - cf[span]) <= tolerance * scale):
            b[span], snapped[span] = cf[span], True
    if problem.closed:
        b[-1], snapped[-1] = b[0], snapped[0]
    return b, snapped


__all__ = ["MoveSteps", "classify_steps", "closed_form_moves", "move_at_nodes", "move_pieces",
           "phase", "snap_to_closed_form"]
