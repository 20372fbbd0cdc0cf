"""Kinematics of a step inside which the jerk switches once.

A jerk-limited move (the double-S motion, Biagiotti & Melchiorri 2008, section 3.4) is pieces
of constant jerk ``+J``, ``0`` or ``-J``. Where a switch between two pieces lies inside a step,
that step is neither constant acceleration nor constant jerk: its acceleration is linear in
time on either side of one instant, continuous, and it starts from the acceleration the step
beside it has at their common node. The profile's switching step kinds
(:mod:`curvespeed.io.profile_csv`) are driven so; :data:`PATTERNS` lists them.

Rising orientation: a step is described from its slower node (where its speed is lower), so a
stop's steps read like a launch's. From that node the step starts at ``a0``, has jerk
``s1 j`` for ``x T`` and ``s2 j`` for ``(1 - x) T`` (``j >= 0``; the signs ``(s1, s2)`` are the
step's pattern). With ``D1 = v1 - v0 - a0 T`` and ``D2 = ds - v0 T - a0 T^2 / 2``, uniform-jerk
kinematics give::

    D1 = j T^2 g(x),   g(x) = s1 (x - x^2 / 2) + s2 (1 - x)^2 / 2,
    D2 = j T^3 h(x),   h(x) = s1 (x^3 / 6 - x^2 / 2 + x / 2) + s2 (1 - x)^3 / 6,

so ``x`` is a root in ``[0, 1]`` of the cubic ``D2 g(x) - T D1 h(x)`` and ``j`` follows. A step
whose speed falls is the same motion driven backwards (time reversed: speeds swapped, the
acceleration's sign flipped, the pieces' order reversed, each jerk's sign kept), anchored on
the step after it.

Closed forms and small root-finding only; no side effects.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import rest_step

#: How far a root of the shape's cubic may lie outside ``[0, 1]`` and the kinematics may miss
#: the step's speed change and distance (relative) and still count as a switching step:
#: rounding of a file's 9-decimal stations, speeds and times.
TOLERANCE = 1e-6
#: Below this (relative, as :data:`TOLERANCE`) a step's departure from constant acceleration
#: is taken as none before any switch is looked for: about the file's rounding. Between the
#: two a switch that fits is preferred: a hold that leaves its cap with 3 ms of ``-J`` at
#: 25 m/s (1e-7 of the speed) was read as constant and ended 2.3e-3 m/s^2 off the motion.
CONSTANT_TOLERANCE = 1e-9

#: The switching patterns, by code: the jerk's signs piece by piece, in rising orientation
#: (code 0: no switch). A launch turning below its cap rises then falls (``TURN``); one
#: reaching its cap rises then holds it (``RISE_HOLD``), holds then eases off (``HOLD_FALL``),
#: eases off to its top speed (``FALL_HOLD``), and where it holds its cap for less than a step,
#: rises, holds and falls in one (``RISE_HOLD_FALL``, switching twice: its end's acceleration,
#: the step's across its faster node, fixes it too).
TURN, RISE_HOLD, HOLD_FALL, FALL_HOLD, RISE_HOLD_FALL = 1, 2, 3, 4, 5
PATTERNS = {TURN: (1.0, -1.0), RISE_HOLD: (1.0, 0.0), HOLD_FALL: (0.0, -1.0),
            FALL_HOLD: (-1.0, 0.0), RISE_HOLD_FALL: (1.0, 0.0, -1.0)}


def pattern_code(*signs: float) -> int:
    """The code of the pattern whose jerks (in rising orientation) have the signs of
    ``signs``; 0 if none."""
    wanted = tuple(float(np.sign(s)) for s in signs)
    return next((code for code, pattern in PATTERNS.items() if pattern == wanted), 0)


def _signs(code):
    """The jerk signs ``(s1, s2, s3)`` of each step's pattern ``code`` (arrays; a pattern of
    two pieces repeats its second, its third lasting nothing)."""
    table = np.zeros((max(PATTERNS) + 1, 3))
    for c, pattern in PATTERNS.items():
        table[c] = (pattern + pattern[-1:])[:3]
    pick = table[np.asarray(code, dtype=int)]
    return pick[..., 0], pick[..., 1], pick[..., 2]


@dataclass(frozen=True)
class SwitchShapes:
    """The switching steps of a profile, in rising orientation: for each step its pattern code
    (0: not a switching step), whether it is driven backwards (its speed falls), its start
    acceleration ``a0``, where its jerk switches (``x`` and ``x2`` of its time; ``x2`` 1 for a
    pattern of two pieces) and its jerk ``j`` (m/s^3, at least 0); ``ok`` False where the
    step's speeds, distance and time fit no such motion."""

    code: np.ndarray
    backwards: np.ndarray
    a0: np.ndarray
    x: np.ndarray
    jerk: np.ndarray
    ok: np.ndarray
    x2: np.ndarray


def solve_shape(ds, v0, v1, duration, a0, code=TURN):
    """``(x, j, ok)`` of each step in rising orientation (module docstring): the switch's share
    of the step's time, the jerk, and whether the motion fits (a root in ``[0, 1]`` with
    ``j >= 0`` that reproduces the speed change and the distance to :data:`TOLERANCE`).
    Where several roots fit, the smallest jerk is taken."""
    ds, v0, v1, T, a0, code = np.broadcast_arrays(*(np.asarray(q, dtype=float) for q in (
        ds, v0, v1, duration, a0, code)))
    s1, s2, _ = _signs(code)
    x_out, j_out, ok = np.full(T.shape, 0.5), np.zeros(T.shape), np.zeros(T.shape, dtype=bool)
    for i in np.ndindex(T.shape):
        d1 = v1[i] - v0[i] - a0[i] * T[i]
        d2 = ds[i] - v0[i] * T[i] - 0.5 * a0[i] * T[i] ** 2
        scale_v, scale_d = max(abs(v1[i] - v0[i]), abs(v0[i]), 1e-12), ds[i]
        if abs(d1) <= CONSTANT_TOLERANCE * scale_v and abs(d2) <= CONSTANT_TOLERANCE * scale_d:
            ok[i] = True                                      # constant acceleration a0
            continue
        p, q = s1[i], s2[i]
        g = np.array([q / 2.0, p - q, (q - p) / 2.0, 0.0])                 # ascending powers
        h = np.array([q / 6.0, (p - q) / 2.0, (q - p) / 2.0, (p - q) / 6.0])
        coef = (d2 * g - T[i] * d1 * h)[::-1]
        best = None
        for root in np.roots(np.trim_zeros(coef, "f")) if np.any(coef[:3]) else ():
            if abs(root.imag) > 1e-9 or not -TOLERANCE <= root.real <= 1.0 + TOLERANCE:
                continue
            x = min(max(float(root.real), 0.0), 1.0)
            gx, hx = np.polyval(g[::-1], x), np.polyval(h[::-1], x)
            norm = T[i] ** 2 * (gx * gx + hx * hx)
            if norm <= 1e-12 * T[i] ** 2:                      # the motion degenerates here
                continue
            j = (d1 * gx + d2 / T[i] * hx) / norm
            fits = (abs(d1 - j * T[i] ** 2 * gx) <= TOLERANCE * scale_v
                    and abs(d2 - j * T[i] ** 3 * hx) <= TOLERANCE * scale_d)
            if fits and j >= -TOLERANCE and (best is None or j < best[1]):
                best = (x, max(j, 0.0))
        if best is not None:
            x_out[i], j_out[i], ok[i] = best[0], best[1], True
        elif abs(d1) <= TOLERANCE * scale_v and abs(d2) <= TOLERANCE * scale_d:
            ok[i] = True                            # constant acceleration a0, to rounding
    return x_out, j_out, ok


def timed_at_jerk(ds, v0, v1, a0, jerk, iterations: int = 60):
    """``(duration, x, ok)`` of ``TURN`` steps in rising orientation driven at exactly ``jerk``:
    from ``a0`` at ``+jerk`` up to the turn, ``-jerk`` after it, over ``ds`` from ``v0`` to
    ``v1``. Rising longer reaches the step's end faster (the acceleration is higher at every
    later time), so the turn's time ``t1`` is found by bisection on the end speed, up to the
    time a rise over the whole step takes; for each ``t1`` the end's time by bisection on the
    distance. ``ok`` False where ``v1`` lies outside what turning anywhere in the step
    reaches."""
    ds, v0, v1, a0 = np.broadcast_arrays(*(np.asarray(q, dtype=float) for q in (ds, v0, v1, a0)))
    j = float(jerk)

    def rise(t):                                          # +j from (v0, a0) for t
        return v0 * t + 0.5 * a0 * t * t + j * t ** 3 / 6.0, v0 + a0 * t + 0.5 * j * t * t

    # time to cover the step rising all along, and a bracket for any turn's end
    hi = np.full(ds.shape, 1.0)
    while np.any(rise(hi)[0] < ds):
        hi = np.where(rise(hi)[0] < ds, 2.0 * hi, hi)
    t_all = rest_step.largest_true(lambda t: rise(t)[0] < ds, np.zeros(ds.shape), hi, iterations)
    turn = np.full(ds.shape, TURN)

    def end_of(t1):                                       # the end's time and speed
        d1, w1 = rise(t1)
        b1 = a0 + j * t1
        # falling, the speed is zero again by s = (b1 + sqrt(b1^2 + 2 j w1)) / j at the latest
        s_max = (b1 + np.sqrt(np.maximum(b1 * b1 + 2.0 * j * w1, 0.0))) / j
        T = t1 + s_max
        x = np.where(T > 0.0, t1 / np.where(T > 0.0, T, 1.0), 0.5)
        reach = state_at_time(v0, T, a0, x, j, T, turn)[0] >= ds
        t_end = rest_step.largest_true(
            lambda t: state_at_time(v0, T, a0, x, j, t, turn)[0] < ds, t1.copy(), T, iterations)
        return t_end, np.where(reach, state_at_time(v0, T, a0, x, j, t_end, turn)[1], -np.inf)

    _, v_lo = end_of(np.zeros(ds.shape))
    ok = (v_lo <= v1 * (1.0 + TOLERANCE)) & (rise(t_all)[1] >= v1 * (1.0 - TOLERANCE))
    t1 = rest_step.largest_true(lambda t: end_of(t)[1] < v1, np.zeros(ds.shape), t_all,
                                iterations)
    t_end, _ = end_of(t1)
    return t_end, np.where(t_end > 0.0, t1 / np.where(t_end > 0.0, t_end, 1.0), 0.5), ok


def state_at_time(v0, duration, a0, x, jerk, tau, code=TURN, x2=1.0):
    """Distance, speed and acceleration ``tau`` seconds into a switching step in rising
    orientation (``tau`` clipped to the step): its pieces end at ``x T``, ``x2 T`` and ``T``."""
    T = np.asarray(duration, dtype=float)
    t = np.clip(np.asarray(tau, dtype=float), 0.0, T)
    d, v, a = 0.0, np.asarray(v0, dtype=float), np.asarray(a0, dtype=float)
    j = np.asarray(jerk, dtype=float)
    bounds = (0.0 * T, np.asarray(x, dtype=float) * T, np.asarray(x2, dtype=float) * T, T)
    for start, end, sign in zip(bounds[:-1], bounds[1:], _signs(code)):
        h = np.clip(t - start, 0.0, np.maximum(end - start, 0.0))    # time in this piece
        jp = sign * j
        d = d + v * h + 0.5 * a * h * h + jp * h ** 3 / 6.0
        v = v + a * h + 0.5 * jp * h * h
        a = a + jp * h
    return d, v, a


def time_at_distance(ds, v0, duration, a0, x, jerk, d, code=TURN, x2=1.0,
                     iterations: int = 60):
    """Seconds into a switching step in rising orientation at which the distance ``d`` is
    reached: bisection on ``[0, T]`` (its speed is not negative, so the distance grows with
    time)."""
    T = np.asarray(duration, dtype=float)
    target = np.clip(np.asarray(d, dtype=float), 0.0, ds)
    shape = np.broadcast(T, target).shape
    return rest_step.largest_true(
        lambda t: state_at_time(v0, T, a0, x, jerk, t, code, x2)[0] < target,
        np.zeros(shape), np.broadcast_to(T, shape).copy(), iterations)


def solve_rise_hold_fall(ds, v0, v1, duration, a0, a1, grid: int = 400,
                         iterations: int = 80):
    """``(x, x2, j, ok)`` of ``RISE_HOLD_FALL`` steps in rising orientation: from ``a0`` at
    ``+j`` for ``x T``, held to ``x2 T``, at ``-j`` to ``a1`` at ``T``. With ``H`` the rise's
    gain and ``c = a1 - a0``, the rise lasts ``H / j`` and the fall ``(H - c) / j``; the speed
    change fixes ``1 / j = 2 (H T - D1) / (H^2 + (H - c)^2)`` (``D1``, ``D2`` as in the module
    docstring), and ``H`` is a root of the distance's residual, searched on ``grid`` points from
    ``max(0, c)`` up to where the hold vanishes and refined by bisection; where several fit,
    the smallest jerk is taken."""
    ds, v0, v1, T, a0, a1 = np.broadcast_arrays(*(np.asarray(q, dtype=float) for q in (
        ds, v0, v1, duration, a0, a1)))
    x_out, x2_out = np.full(T.shape, 0.5), np.ones(T.shape)
    j_out, ok = np.zeros(T.shape), np.zeros(T.shape, dtype=bool)
    for i in np.ndindex(T.shape):
        Ti, c = T[i], a1[i] - a0[i]
        d1 = v1[i] - v0[i] - a0[i] * Ti
        d2 = ds[i] - v0[i] * Ti - 0.5 * a0[i] * Ti ** 2

        def parts(H):
            u = 2.0 * (H * Ti - d1) / (H * H + (H - c) ** 2)        # 1 / j
            p, q = H * u, (H - c) * u
            extra = (Ti * p * p / 2 - p ** 3 / 3 + p * ((Ti - p) ** 2 - q * q) / 2
                     + (p - q) * q * q / 2 + q ** 3 / 3) / u
            return u, p, q, extra - d2

        lo = max(0.0, c, d1 / Ti) * (1.0 + 1e-12) + 1e-15
        disc = 16.0 * d1 * d1 - 16.0 * Ti * c * d1 + 8.0 * Ti * Ti * c * c
        hi = (4.0 * d1 + np.sqrt(max(disc, 0.0))) / (4.0 * Ti)      # where the hold vanishes
        if not hi > lo:
            continue
        H = np.linspace(lo, hi, grid)
        _, _, _, f = parts(H)
        best = None
        for m in np.flatnonzero(np.sign(f[:-1]) * np.sign(f[1:]) <= 0.0):
            a, b = H[m], H[m + 1]
            fa = f[m]
            for _ in range(iterations):
                mid = 0.5 * (a + b)
                fm = parts(mid)[3]
                if np.sign(fm) == np.sign(fa):
                    a, fa = mid, fm
                else:
                    b = mid
            u, p, q, res = parts(0.5 * (a + b))
            if u <= 0.0 or p < -TOLERANCE * Ti or q < -TOLERANCE * Ti:
                continue
            if p + q > Ti * (1.0 + TOLERANCE) or abs(res) > TOLERANCE * ds[i]:
                continue
            if best is None or 1.0 / u < best[2]:
                best = (max(p, 0.0) / Ti, min(1.0 - max(q, 0.0) / Ti, 1.0), 1.0 / u)
        if best is not None:
            x_out[i], x2_out[i], j_out[i] = best
            x_out[i] = min(x_out[i], x2_out[i])
            ok[i] = True
    return x_out, x2_out, j_out, ok


def shapes(station_m, speed_mps, rest_time_coef, linear_time_coef, code) -> SwitchShapes:
    """The shape of every step with a pattern ``code`` (0: none) of a profile whose steps are
    timed ``c ds / (v + v')`` by ``linear_time_coef`` (a switching step is timed so too) and
    next to rest by ``rest_time_coef`` (``c ds / v``). Each is driven from its slower node
    (backwards where its speed falls) and starts with the acceleration there of the step on
    the other side of that node (0 where that node is at rest); where that step switches too,
    once that step's own shape is known (a chain leads back towards rest, as a launch's steps
    do). A ``RISE_HOLD_FALL`` step ends with the acceleration the step across its faster node
    has there, which must not switch. ``ok`` False where it has no such step or no shape
    fits."""
    s, v = np.asarray(station_m, dtype=float), np.asarray(speed_mps, dtype=float)
    ds, n = np.diff(s), v.size - 1
    rest_c, lin_c = np.asarray(rest_time_coef, float), np.asarray(linear_time_coef, float)
    code = np.where(np.asarray(code, dtype=int) > 0, np.asarray(code, dtype=int), 0)
    starts, ends = _step_accels(ds, v, rest_c, np.where(code > 0, 0.0, lin_c))
    with np.errstate(divide="ignore", invalid="ignore"):
        duration = lin_c * ds / (v[:-1] + v[1:])
    backwards = v[1:] < v[:-1]
    slower = np.where(backwards, np.arange(n) + 1, np.arange(n))
    other = np.where(backwards, np.arange(n) + 1, np.arange(n) - 1)   # across the slower node
    out = SwitchShapes(code, np.where(code > 0, backwards, False), np.zeros(n),
                       np.full(n, 0.5), np.zeros(n), np.ones(n, dtype=bool), np.ones(n))
    pending = code > 0
    known = ~pending                                      # steps whose accelerations are known
    far = np.where(backwards, np.arange(n) - 1, np.arange(n) + 1)     # across the faster node
    far_in = (far >= 0) & (far < n)
    f = np.clip(far, 0, n - 1)
    three = code == RISE_HOLD_FALL
    while pending.any():
        inside = (other >= 0) & (other < n)
        o = np.clip(other, 0, n - 1)
        ready = pending & ((v[slower] <= 0.0) | (inside & known[o]))
        ready &= ~three | (far_in & (code[f] == 0))
        if not ready.any():
            break
        k = np.flatnonzero(ready)
        a_node = np.where(backwards[k], starts[o[k]], ends[o[k]])
        a0 = np.where(v[slower[k]] <= 0.0, 0.0, np.where(backwards[k], -a_node, a_node))
        v0 = np.where(backwards[k], v[k + 1], v[k])
        v1 = np.where(backwards[k], v[k], v[k + 1])
        x, j, ok = np.full(k.size, 0.5), np.zeros(k.size), np.zeros(k.size, dtype=bool)
        t2 = np.flatnonzero(~three[k])
        x[t2], j[t2], ok[t2] = solve_shape(ds[k[t2]], v0[t2], v1[t2], duration[k[t2]], a0[t2],
                                           code[k[t2]])
        x2 = np.ones(k.size)
        t3 = np.flatnonzero(three[k])
        if t3.size:
            kk = k[t3]
            a1 = np.where(backwards[kk], -ends[f[kk]], starts[f[kk]])
            x[t3], x2[t3], j[t3], ok[t3] = solve_rise_hold_fall(
                ds[kk], v0[t3], v1[t3], duration[kk], a0[t3], a1)
        ok &= np.isfinite(a0) & (duration[k] > 0.0)
        out.a0[k], out.x[k], out.x2[k], out.jerk[k], out.ok[k] = a0, x, x2, j, ok
        _, values = accel_points(out, k, duration[k])
        starts[k], ends[k] = values[:, 0], values[:, -1]
        pending[k], known[k] = False, ok
    out.ok[pending] = False                               # nothing to continue from
    return out


def step_shape(station_m, speed_mps, rest_u, time_coef, code, j: int):
    """:func:`shapes` of step ``j`` alone, for a problem's steps (``rest_u`` NaN away from
    rest, ``time_coef`` its steps' time coefficients, ``code`` their patterns), or None where
    it has none."""
    code = np.asarray(code, dtype=int)
    one = np.zeros(code.size, dtype=int)
    one[j] = code[j]
    tc = np.asarray(time_coef, dtype=float)
    rest = np.where(np.isnan(rest_u), 0.0, tc)
    linear = np.where(np.isnan(rest_u) & (tc != 2.0), tc, 0.0)
    shape = shapes(station_m, speed_mps, rest, linear, one)
    return shape if shape.ok[j] else None


def _step_accels(ds, v, rest_c, lin_c):
    """Per step, the acceleration it starts and ends with, as driven by its kind: constant
    (its mean), linear in time (a ``linear_accel`` step) or a ramp next to rest (``jerk_ramp``:
    0 at its rest end)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = (v[1:] ** 2 - v[:-1] ** 2) / (2.0 * ds)
    start, end = mean.copy(), mean.copy()
    lin = lin_c > 0.0
    if lin.any():
        T = lin_c[lin] * ds[lin] / (v[:-1][lin] + v[1:][lin])
        a0, j = rest_step.linear_accel_step(ds[lin], v[:-1][lin], v[1:][lin], T)
        start[lin], end[lin] = a0, a0 + j * T
    ramp = rest_c > 0.0
    leaving, arriving = ramp & (v[:-1] <= 0.0), ramp & (v[1:] <= 0.0)
    f = rest_step.accel_factor(rest_step.shape_from_time_coef(np.where(ramp, rest_c, 2.0)))
    start[leaving], end[leaving] = 0.0, (f * v[1:] ** 2 / (2.0 * ds))[leaving]
    start[arriving], end[arriving] = -(f * v[:-1] ** 2 / (2.0 * ds))[arriving], 0.0
    return start, end


def driven_state_at_time(shape: SwitchShapes, k, ds, v0, v1, duration, tau):
    """Distance, speed and acceleration ``tau`` seconds into switching steps ``k`` (of
    :func:`shapes`) as driven: forward, or backwards where the speed falls."""
    back = shape.backwards[k]
    T = np.asarray(duration, dtype=float)
    d, v, a = state_at_time(np.where(back, v1, v0), T, shape.a0[k], shape.x[k], shape.jerk[k],
                            np.where(back, T - tau, tau), shape.code[k], shape.x2[k])
    return np.where(back, ds - d, d), v, np.where(back, -a, a)


def driven_time_at_distance(shape: SwitchShapes, k, ds, v0, v1, duration, d):
    """Seconds into switching steps ``k`` (of :func:`shapes`) at which the distance ``d`` from
    their first node is reached, as driven, with the speed and acceleration there."""
    back = shape.backwards[k]
    T = np.asarray(duration, dtype=float)
    t = time_at_distance(ds, np.where(back, v1, v0), T, shape.a0[k], shape.x[k],
                         shape.jerk[k], np.where(back, ds - d, d), shape.code[k], shape.x2[k])
    tau = np.where(back, T - t, t)
    _, v, a = driven_state_at_time(shape, k, ds, v0, v1, T, tau)
    return tau, v, a


def accel_points(shape: SwitchShapes, k, duration):
    """For switching steps ``k`` (of :func:`shapes`) lasting ``duration``: the times into the
    step of its start, its switches and its end, and the acceleration at each (forward in
    time), as two arrays of shape ``(len(k), 4)`` (a pattern of two pieces has its end
    twice)."""
    T = np.asarray(duration, dtype=float)
    a0, x, x2, j = shape.a0[k], shape.x[k], shape.x2[k], shape.jerk[k]
    s1, s2, s3 = _signs(shape.code[k])
    times = np.stack((np.zeros_like(T), x * T, x2 * T, T), axis=-1)
    a_1 = a0 + s1 * j * x * T
    a_2 = a_1 + s2 * j * (x2 - x) * T
    values = np.stack((a0, a_1, a_2, a_2 + s3 * j * (1.0 - x2) * T), axis=-1)
    back = shape.backwards[k]
    times = np.where(back[:, None], T[:, None] - times[:, ::-1], times)
    values = np.where(back[:, None], -values[:, ::-1], values)
    return times, values


__all__ = ["CONSTANT_TOLERANCE", "FALL_HOLD", "HOLD_FALL", "PATTERNS", "RISE_HOLD",
           "RISE_HOLD_FALL", "TOLERANCE", "TURN", "SwitchShapes", "accel_points",
           "driven_state_at_time", "driven_time_at_distance", "pattern_code", "shapes",
           "solve_rise_hold_fall", "solve_shape", "state_at_time", "step_shape",
           "time_at_distance", "timed_at_jerk"]
