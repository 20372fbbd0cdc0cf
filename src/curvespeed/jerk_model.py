"""How the jerk bound enters the discrete problem: steps next to rest and the jerk's time base.

Part of the one definition of the discrete problem (:mod:`curvespeed.problem`, whose module
docstring states the model): which nodes are at rest, the shape each step next to rest gets
(:mod:`curvespeed.rest_step` has its kinematics) and the cap its jerk ramp puts on the moving
node, a launch (or stop) whose jerk ramp spans many stations planned as that ramp, and the terms
of the time base over which a node's change of acceleration counts.
:func:`curvespeed.problem.build_problem` calls it; nothing here reads or writes files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from . import jerk_switch, rest_step
from .errors import LimitsError
from .launch_motion import JerkPieces, accel_phase
from .closed_form_moves import closed_form_moves
from .launch_steps import (closed_form_launches, launch_steps, lazy_envelope, scale_for_bases,
                           scaled_terms)
from .limits import stop_node

if TYPE_CHECKING:
    from .problem import SpeedProblem


@dataclass(frozen=True)
class JerkTimeTerms:
    """The time base of the jerk at each node, as terms (see the module docstring).

    Term ``i`` bounds node ``node[i]``: ``tau >= scale[i] * ds / w_i`` with
    ``w_i = weights[i] . sqrt(b[[prev[i], node[i], next[i]]])``, a concave function of ``b``;
    a node's time base is the smallest of its terms (``scale`` 0: the change must be zero). Node
    indices are over the distinct nodes (a closed route's last node is its first). A node with no
    term (at rest between two steps next to rest) has no change of acceleration.
    """

    node: np.ndarray
    prev: np.ndarray
    next: np.ndarray
    weights: np.ndarray
    scale: np.ndarray


def rest_nodes(problem: SpeedProblem) -> np.ndarray:
    """Nodes where the vehicle is at rest (stops, ends at rest); refuses two closer than three
    station steps, which leaves no room for the ramps."""
    n, ds, s = problem.n_nodes, problem.ds, problem.station_m
    rest = np.zeros(n, dtype=bool)
    rest[problem.stop_nodes] = True
    if problem.closed:
        rest[-1] = rest[0] = rest[0] or rest[-1]
    else:
        rest[0] = problem.b_start == 0.0
        rest[-1] = problem.b_end == 0.0
    idx = np.flatnonzero(rest)
    close = np.flatnonzero(np.diff(idx) < 3)
    if close.size:
        k0, k1 = idx[close[0]], idx[close[0] + 1]
        origins = sorted({st.origin or "a stop" for st in problem.stops
                          if stop_node(st.station_m, ds, n, problem.closed) in (k0, k1)})
        named = f" (from {', '.join(origins)})" if origins else ""
        raise LimitsError(f"{problem.source}: stations {s[k0]:.1f} and {s[k1]:.1f} m are "
                          f"both at rest{named} and less than three station steps apart "
                          f"({3 * ds:g} m); move the stops apart or merge them")
    return rest


#: How long a move must be, in units of ``A^3 / J^2``, for a step next to rest to plan for its
#: acceleration reaching the cap ``A`` (:func:`accel_held`): the double-S closed form's own
#: threshold (Biagiotti & Melchiorri 2008, section 3.4). At 4, where such a move holds ``A`` for
#: about half its ramp time, the launch of shorter moves lagged; 2 put moves below the closed
#: form until the corner rows (:mod:`curvespeed.solvers.corner_rows`) bounded the fall from the
#: cap. Measured with the corner rows on 1,728 moves (10-80 m every 2 m; top speed 6, 10,
#: 25 m/s; caps 1.2-3 m/s^2, 0.8-3 m/s^3; 1 m stations): with 4, 1,513 within 0.1 % of the
#: closed form; with 2, 1,552 (with the two shapes below, 1,659); none below it either way.
HELD_LENGTH_FACTOR = 2.0


def with_rest_steps(problem: SpeedProblem, rest: np.ndarray,
                    closed_form: bool = True) -> SpeedProblem:
    """``problem`` with the steps next to ``rest`` nodes ramped (module docstring), and the
    moves between them whose closed form fits planned as it (``closed_form``,
    :mod:`curvespeed.closed_form_moves`).

    Each step ramps at the jerk bound to what its moving node allows where that ramp fits in
    the step (:func:`curvespeed.rest_step.shape_for_accel`). Where it does not, the step keeps
    the flat part a ramp going on over several stations needs
    (:data:`curvespeed.rest_step.U_CONTINUING`), or, where the move reaches the node's
    acceleration and holds it (:func:`accel_held`), ramps as far as it can and leaves the rest
    of the rise to the change about the node (:func:`curvespeed.rest_step.continuing_shape`).

    A launch (or stop) keeping the flat part of a continuing ramp is planned as its ramp
    instead (the double-S closed form's, :func:`curvespeed.launch_motion.accel_phase`): the
    step ramps over its whole length (``u = 1``) and the next ones are driven as
    :mod:`curvespeed.launch_steps` says, up to the step in which the ramp ends. That needs the
    route to let the closed form's acceleration phase run its course, and the move either to
    turn below the cap, or to still hold the cap when that step ends
    (:func:`curvespeed.launch_steps.closed_form_launches`).
    A move that reaches the cap and soon leaves it is planned as the ramp to the highest lower
    cap it would hold that long; where there is none, it keeps the staircase. (Measured before
    the corner rows, on 14-25 m moves at 3 m/s^2 and 2 m/s^3 at 1 m stations: with the
    staircase +0.10 to +0.33 % over the closed form; planned as ramp-and-hold at the cap +0.3 to
    +1.5 %, as ramp-and-turn at the cap down to 0.19 % below it, and still 0.025 % below with
    the corner rows.)

    A step next to rest whose ramp to the cap fits in it with less flat part than
    :data:`~curvespeed.rest_step.U_CONTINUING` leaves ramps to the cap all the same where the
    move holds the cap long enough (:func:`_held_through_node`).
    """
    leaving, arriving = rest[:-1], rest[1:]
    steps = np.flatnonzero(leaving | arriving)
    moving = np.where(leaving[steps], steps + 1, steps)
    accel = rest_step_accel(problem, moving, leaving[steps])
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    u = np.full(problem.n_nodes - 1, np.nan)
    u[steps] = rest_step.shape_for_accel(accel, jerk, ds)
    whole = _held_through_node(problem, rest, steps, leaving[steps], accel)
    u[steps[whole]] = rest_step.shape_for_accel(accel[whole], jerk, ds, whole_ramp=True)
    time_coef = problem.time_coef.copy()
    shaped = None
    envelope = lazy_envelope(problem)       # solved once, where launches or moves need it
    beyond = np.flatnonzero(accel >= rest_step.max_ramp_accel(jerk, ds))
    if beyond.size:     # the ramp goes on past the moving node
        shaped = _continuing_ramps(problem, rest, steps[beyond], leaving[steps[beyond]],
                                   moving[beyond], u, envelope)
        if shaped is not None:
            time_coef *= shaped.time_factor
    f = rest_step.accel_factor(u[steps])
    time_coef[steps] = rest_step.time_coef(u[steps])
    f_start, f_end = problem.accel_factor_start.copy(), problem.accel_factor_end.copy()
    f_start[steps] = np.where(leaving[steps], 0.0, f)
    f_end[steps] = np.where(leaving[steps], f, 0.0)
    if shaped is not None:      # a ramp's steps: their acceleration at their far node from rest
        f_start = np.where(np.isnan(shaped.f_start), f_start, shaped.f_start)
        f_end = np.where(np.isnan(shaped.f_end), f_end, shaped.f_end)
    # the ramp's own jerk caps the moving node
    cap, source = problem.cap_b.copy(), problem.cap_source.copy()
    b_ramp = rest_step.jerk_cap_b(u[steps], jerk, ds)
    tighter = cap[moving] > b_ramp
    cap[moving[tighter]] = b_ramp[tighter]
    source[moving[tighter]] = "jerk_launch"
    for node, b_turn in ({} if shaped is None else shaped.turn_caps).items():
        if cap[node] > b_turn:      # the motion through a turn caps the step's far node
            cap[node], source[node] = b_turn, "jerk_launch"
    if problem.closed and cap[-1] != cap[0]:      # the last node is the first
        k = 0 if cap[0] < cap[-1] else -1
        cap[0] = cap[-1] = cap[k]
        source[0] = source[-1] = source[k]
    switch = None if shaped is None or not shaped.turn.any() else np.where(
        shaped.turn, jerk_switch.TURN, 0)
    problem = replace(problem, time_coef=time_coef, accel_factor_start=f_start,
                      accel_factor_end=f_end, rest_u=u, switch_step=switch)
    # (on the caps before the ramps': a move that turns in its step next to rest passes the
    # ramp-and-hold shape's cap there)
    moves = closed_form_moves(problem, rest, lambda moving, out: rest_step_allowed_accel(
        problem, moving, out), envelope) if closed_form else None
    return _with_moves(problem, moves, cap, source, {} if shaped is None else shaped.bases)


def _with_moves(problem: SpeedProblem, moves, cap: np.ndarray, source: np.ndarray,
                bases: dict) -> SpeedProblem:
    """``problem`` (its steps next to rest and launches set) with the moves planned as their
    closed form (:func:`curvespeed.closed_form_moves.closed_form_moves`; None: none) in it,
    the caps ``cap`` (``source``) and the jerk's time bases: ``bases`` (the launches',
    :func:`curvespeed.launch_steps.launch_steps`) and the moves'. A move's node's terms are
    widened where the motion changes its acceleration over more than they allow, never
    narrowed: its caps bind, so wider rows admit no faster plan, and a base of exactly the
    motion's change (0 where it holds its acceleration) left the rows of a 200 m move so tight
    that the QP solvers failed."""
    time_coef, f_start, f_end = (problem.time_coef.copy(), problem.accel_factor_start.copy(),
                                 problem.accel_factor_end.copy())
    u, switch = problem.rest_u.copy(), problem.switch_step
    move_bases = {}
    if moves is not None:       # moves planned as their closed form: the motion's own steps
        s = moves.steps
        time_coef[s], f_start[s], f_end[s], u[s] = (moves.time_coef[s], moves.f_start[s],
                                                    moves.f_end[s], moves.rest_u[s])
        switch = np.zeros(problem.n_nodes - 1, dtype=int) if switch is None else switch.copy()
        switch[s] = moves.switch[s]
        on = ~np.isnan(moves.b)
        cap[on] = moves.b[on]
        source[on & (moves.b > 0.0)] = "jerk_launch"
        move_bases = moves.bases
        bases = {node: base for node, base in bases.items() if node not in move_bases}
    terms = jerk_time_terms(problem.n_nodes, problem.closed, u, f_start)
    node_scale = scale_for_bases(problem, terms, bases) if bases else None
    if move_bases:
        wide = np.maximum(scale_for_bases(problem, terms, move_bases), 1.0)
        mine = np.zeros(wide.size, dtype=bool)
        mine[list(move_bases)] = True
        node_scale = np.where(mine, wide, 1.0 if node_scale is None else node_scale)
    return replace(problem, time_coef=time_coef, accel_factor_start=f_start,
                   accel_factor_end=f_end, rest_u=u, cap_b=cap, cap_source=source,
                   jerk_terms=scaled_terms(terms, node_scale), jerk_node_scale=node_scale,
                   switch_step=None if switch is None or not switch.any() else switch,
                   closed_form_b=None if moves is None else moves.b)


def _continuing_ramps(problem: SpeedProblem, rest: np.ndarray, k: np.ndarray, out: np.ndarray,
                      moving: np.ndarray, u: np.ndarray, envelope):
    """The shapes of the steps next to rest ``k`` (leaving rest where ``out``; moving nodes
    ``moving``) whose ramp goes on past their moving node, set in ``u`` (:func:`with_rest_steps`
    says which), and the further steps of those planned as their ramp
    (:class:`curvespeed.launch_steps.LaunchSteps`; None if none is)."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    allowed = rest_step_allowed_accel(problem, moving, out)
    span_m, v_top = rest_stretches(problem, rest, k, out)
    held = _held(span_m, v_top, allowed, jerk)
    u[k] = np.where(held, rest_step.continuing_shape(allowed, jerk, ds), u[k])
    launch, ramp_m, to_accel = closed_form_launches(problem, k, out, span_m, v_top, allowed,
                                                    u[k] <= rest_step.U_CONTINUING, envelope)
    if not launch.any():
        return None
    u[k[launch]] = 1.0
    return launch_steps(problem, k[launch], out[launch], ramp_m[launch], to_accel[launch])


def _held_through_node(problem: SpeedProblem, rest: np.ndarray, steps: np.ndarray,
                       leaving: np.ndarray, accel: np.ndarray) -> np.ndarray:
    """Which steps next to rest ramp to ``accel`` within the step and belong to a move that
    holds it (:func:`accel_held`) at least until half the next step is driven at it: the
    double-S closed form's acceleration phase (:func:`curvespeed.launch_motion.accel_phase`)
    leaves ``accel`` no earlier. Those get the shape that reaches ``accel`` at the moving node
    whatever flat part it leaves (:func:`curvespeed.rest_step.shape_for_accel`): with almost
    none the node's change of acceleration must be almost nil (its time base is the smaller of
    twice the flat part and the next step's time), so the next step must hold ``accel``, as the
    move does. Measured on the 1,728 moves of :data:`HELD_LENGTH_FACTOR` at 1.5 m/s^2 and
    0.8 m/s^3 (the ramp 0.88 of a step): with the smaller flat part +0.13 to +0.29 % over the
    closed form from 16 to 80 m, with this shape +0.002 to +0.075 %; where the move holds
    ``accel`` for less (12 m) it came out +0.71 % instead of +0.48 %."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    # no acceleration to ramp to (a grade the tyres cannot climb from rest): nothing to hold;
    # the undrivable grade is reported once the problem is solved
    out = (accel > 0.0) & (accel < rest_step.max_ramp_accel(jerk, ds))
    if not out.any():
        return out
    idx = np.flatnonzero(out)
    span_m, v_top = rest_stretches(problem, rest, steps[idx], leaving[idx])
    out[idx] = _held(span_m, v_top, accel[idx], jerk)
    for i, span, top in zip(idx, span_m, v_top):
        if out[i]:
            a = float(accel[i])
            tj, ta = accel_phase(float(span), float(top), a, jerk)
            launch = JerkPieces((0.0, tj), (jerk, 0.0))      # ramp to a, then hold it
            t_node, t_next = launch.time_at(np.array([ds, 2.0 * ds]),
                                            tj + 2.0 * math.sqrt(ds / a))
            out[i] = ta - tj >= 0.5 * (t_node + t_next)
    return out


def rest_step_accel(problem: SpeedProblem, moving: np.ndarray, leaving: np.ndarray,
                    iterations: int = 60) -> np.ndarray:
    """Acceleration (leaving rest) or deceleration (arriving) each step next to rest can reach
    at its moving node, m/s^2, ramping at the jerk bound from rest within the step.

    The largest ``a`` up to :func:`curvespeed.rest_step.max_ramp_accel` that the moving node
    allows at the speed such a ramp reaches, ``b = 2 a ds - a^4 / (12 J^2)``; found by bisection
    on all steps at once (that speed grows with ``a``, and what the node allows does not grow
    faster, so the feasible accelerations form an interval from 0). 0 where the node allows no
    acceleration at all.
    """
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    top = rest_step.max_ramp_accel(jerk, ds)

    def reachable(a):
        b = 2.0 * a * ds - a ** 4 / (12.0 * jerk * jerk)
        lo, hi = problem.accel_bounds(b, nodes=moving)
        return np.where(leaving, a <= hi, -a >= lo)

    hi_a = np.full(moving.size, top)
    return np.where(reachable(hi_a), top,
                    rest_step.largest_true(reachable, np.zeros(moving.size), hi_a, iterations))


def rest_step_allowed_accel(problem: SpeedProblem, moving: np.ndarray,
                            leaving: np.ndarray) -> np.ndarray:
    """Acceleration (leaving rest) or deceleration (arriving) the moving node of each step next
    to rest allows, m/s^2, at the speed a ramp at the jerk bound over the whole step reaches
    there (where the ramp to that acceleration does not fit in the step, the speed is about
    that)."""
    jerk, ds = problem.limits.max_jerk_mps3, problem.ds
    b = np.full(moving.size, float(rest_step.jerk_cap_b(1.0, jerk, ds)))
    lo, hi = problem.accel_bounds(b, nodes=moving)
    return np.maximum(np.where(leaving, hi, -lo), 0.0)


def rest_stretches(problem: SpeedProblem, rest: np.ndarray, steps: np.ndarray,
                   leaving: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The move each step next to rest belongs to: its length, m, and its top speed, m/s.

    The move runs from the step's rest node to the next (leaving) or previous (arriving) one,
    around a loop if need be; towards an open end that is not at rest it counts twice the
    distance (the mirror of the launch would stop there). Its top speed is the highest speed
    cap on it. Curves and other limits only lower what a move of that length and top speed
    reaches.
    """
    n = problem.n_nodes
    idx = np.flatnonzero(rest[:-1] if problem.closed else rest)
    nv = n - 1 if problem.closed else n
    span, v_top = np.zeros(steps.size), np.zeros(steps.size)
    for i, (k, out) in enumerate(zip(steps, leaving)):
        node = k if out else k + 1                       # the step's rest node
        if problem.closed:
            others = (idx - node) % nv if out else (node - idx) % nv
            span[i] = int(np.min(np.where(others > 0, others, nv)))
            first = node if out else node - int(span[i])
            caps = problem.cap_b[(first + np.arange(int(span[i]) + 1)) % nv]
        else:
            ahead = idx[idx > node] if out else idx[idx < node]
            far = (ahead[0] if out else ahead[-1]) if ahead.size else (n - 1 if out else 0)
            span[i] = abs(far - node) * (1 if ahead.size else 2)
            caps = problem.cap_b[min(node, far):max(node, far) + 1]
        v_top[i] = math.sqrt(float(caps.max()))
    return span * problem.ds, v_top


def _held(span_m, v_top, accel, jerk):
    """:func:`accel_held` from the moves' lengths and top speeds."""
    return (span_m >= HELD_LENGTH_FACTOR * accel ** 3 / jerk ** 2) & (v_top * jerk >= accel ** 2)


def accel_held(problem: SpeedProblem, rest: np.ndarray, steps: np.ndarray,
               leaving: np.ndarray, accel: np.ndarray) -> np.ndarray:
    """Whether the move from (or to) the rest node of each step next to rest is long enough,
    and its speed caps high enough, for a jerk-limited launch (or stop) to reach ``accel``.

    The double-S closed form (Biagiotti & Melchiorri 2008, section 3.4) reaches its acceleration
    limit ``A`` when the move is at least ``2 A^3 / J^2`` long and its top speed at least
    ``A^2 / J``; held here asks the same of the move :func:`rest_stretches` measures (a length
    of :data:`HELD_LENGTH_FACTOR` ``A^3 / J^2``). Where this is false the acceleration turns
    before it gets to ``A``.
    """
    span_m, v_top = rest_stretches(problem, rest, steps, leaving)
    return _held(span_m, v_top, np.asarray(accel, dtype=float), problem.limits.max_jerk_mps3)


def linear_time_coef(problem: SpeedProblem) -> np.ndarray:
    """The ``c`` of each step away from rest planned as driven at constant jerk (a launch's or a
    stop's ramp, :func:`curvespeed.launch_steps.launch_steps`): its time
    ``c ds / (v[k] + v[k+1])``; 0 on every other step (constant acceleration, or next to
    rest)."""
    tc = problem.time_coef
    return np.where(is_linear_step(tc, problem.rest_u), tc, 0.0)


def is_linear_step(time_coef, rest_u):
    """Whether a step with this time coefficient and rest shape (``SpeedProblem.time_coef``,
    ``rest_u``; arrays or one step's values) is planned as driven at constant jerk: not next to
    rest, and timed other than ``2 ds / (v + v')``."""
    return np.isnan(rest_u) & (time_coef != 2.0)


def jerk_time_terms(n_nodes: int, closed: bool, rest_u: np.ndarray,
                     f_start: np.ndarray) -> JerkTimeTerms:
    """The jerk's time base at every distinct node as terms (module docstring)."""
    nv = n_nodes - 1 if closed else n_nodes
    if not closed and nv >= 2 and np.all(np.isnan(rest_u)):
        return _terms_open_moving(nv)
    return _terms_general(nv, closed, rest_u, f_start)


def _mean_time_chords() -> tuple[tuple[float, float], ...]:
    """Linear forms ``c_node v + c_other v'`` whose largest bounds ``w`` from above, where
    ``ds / w = 2 ds (v + 2 v') / (3 (v + v')^2)`` is the time between a station (speed ``v``)
    and the distance-weighted mean time of the neighbouring step (speeds ``v``, ``v'``) when
    that step's acceleration is constant: the time over which a ramp through the station
    changes the acceleration from its value there to the step's (which is the ramp's value at
    that mean time). ``w = v h(v' / v)`` with ``h(r) = 3 (1 + r)^2 / (2 (1 + 2 r))`` convex:
    its chords over ``0, 1, 1.5, 1.7, 2, 4`` (the next step of a ramp from rest is at
    ``r = 2^(2/3)``) and beyond 4 the line of its limiting slope 3/4 lie above it, so the
    smallest term ``ds / w`` is at most that time (at most 0.1 % less at ``r = 2^(2/3)``)."""
    def h(r):
        return 3.0 * (1.0 + r) ** 2 / (2.0 * (1.0 + 2.0 * r))

    points = (0.0, 1.0, 1.5, 1.7, 2.0, 4.0)
    chords = []
    for r0, r1 in zip(points[:-1], points[1:]):
        slope = (h(r1) - h(r0)) / (r1 - r0)
        chords.append((h(r0) - slope * r0, slope))
    chords.append((h(4.0) - 0.75 * 4.0, 0.75))
    return tuple(chords)


_MEAN_TIME_CHORDS = _mean_time_chords()


def _terms_general(nv: int, closed: bool, rest_u: np.ndarray,
                   f_start: np.ndarray) -> JerkTimeTerms:
    """:func:`jerk_time_terms` over ``nv`` distinct nodes, whatever rests where."""
    k = np.arange(nv)
    if closed:
        before, after, prev, nxt = (k - 1) % nv, k, (k - 1) % nv, (k + 1) % nv
        has_b = has_a = np.ones(nv, dtype=bool)
    else:
        before, after = np.maximum(k - 1, 0), np.minimum(k, nv - 2)
        prev, nxt = np.maximum(k - 1, 0), np.minimum(k + 1, nv - 1)
        has_b, has_a = k > 0, k < nv - 1
    at_rest = ~np.isnan(rest_u)
    const_b, const_a = has_b & ~at_rest[before], has_a & ~at_rest[after]
    # the moving node of a step leaving rest (before it) or arriving at rest (after it)
    moving_b = has_b & at_rest[before] & (f_start[before] == 0.0)
    moving_a = has_a & at_rest[after] & (f_start[after] != 0.0)
    c2 = rest_step.flat_time_coef(np.where(at_rest, rest_u, 0.0))
    parts = [(const_b & const_a, (0.25, 0.5, 0.25), 1.0),
             (const_a & ~has_b, (0.0, 1.0, 1.0), 1.0),
             (const_b & ~has_a, (1.0, 1.0, 0.0), 1.0),
             (moving_b & const_a, (0.0, 1.0, 1.0), 2.0),
             (moving_a & const_b, (1.0, 1.0, 0.0), 2.0)]
    nodes, weights, scales = [], [], []
    for mask, w, scale in parts:
        nodes.append(k[mask])
        weights.append(np.tile(w, (int(mask.sum()), 1)))
        scales.append(np.full(int(mask.sum()), scale))
    for mask, step, other in ((moving_b, before, has_a), (moving_a, after, has_b)):
        # a step that ramps over its whole length: the ramp runs on through the node
        ramp = mask & other & (c2[step] == 0.0)
        plain = mask & ~ramp
        flat = c2[step[plain]]             # the flat part lasts c2 ds / v
        nodes.append(k[plain])
        weights.append(np.column_stack((np.zeros(flat.size),
                                        np.where(flat > 0.0, 1.0 / np.where(flat > 0, flat, 1),
                                                 1.0), np.zeros(flat.size))))
        scales.append(np.where(flat > 0.0, np.where(other[plain], 2.0, 1.0), 0.0))
        for c_node, c_other in _MEAN_TIME_CHORDS if ramp.any() else ():
            nodes.append(k[ramp])
            w = (0.0, c_node, c_other) if step is before else (c_other, c_node, 0.0)
            weights.append(np.tile(w, (int(ramp.sum()), 1)))
            scales.append(np.ones(int(ramp.sum())))
    node = np.concatenate(nodes).astype(int)
    return JerkTimeTerms(node=node, prev=prev[node], next=nxt[node],
                         weights=np.concatenate(weights).reshape(-1, 3),
                         scale=np.concatenate(scales))


def _terms_open_moving(nv: int) -> JerkTimeTerms:
    """:func:`jerk_time_terms` of an open stretch of ``nv`` nodes with no step next to rest
    (every receding-horizon window of a moving vehicle away from stops): the same terms in the
    same order -- the inner nodes' ``(1/4, 1/2, 1/4)``, then the first node's ``(0, 1, 1)`` and
    the last's ``(1, 1, 0)``, each of scale 1 -- without the general case's masks."""
    node = np.concatenate((np.arange(1, nv - 1), [0, nv - 1])).astype(int)
    weights = np.empty((nv, 3))
    weights[: nv - 2] = (0.25, 0.5, 0.25)
    weights[nv - 2] = (0.0, 1.0, 1.0)
    weights[nv - 1] = (1.0, 1.0, 0.0)
    return JerkTimeTerms(node=node, prev=np.maximum(node - 1, 0),
                         next=np.minimum(node + 1, nv - 1), weights=weights,
                         scale=np.ones(nv))
