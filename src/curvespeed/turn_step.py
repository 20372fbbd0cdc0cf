"""Kinematics of the step in which a launch's (or a stop's) acceleration turns.

A jerk-limited launch that turns below the acceleration cap (the double-S motion, Biagiotti &
Melchiorri 2008, section 3.4) ramps its acceleration at ``+J`` up to a peak and falls at ``-J``
after it. Where the peak lies inside a step, that step is neither constant acceleration nor
constant jerk: its acceleration is linear in time on either side of one instant, continuous,
and it starts from the acceleration the ramp's steps before it end with. The profile's
``accel_turn`` step (:mod:`curvespeed.io.profile_csv`) is driven so.

Launch orientation (the step's near node on the ramp's side): the step starts at ``a0`` (the
end of the step before it), rises at ``+j`` for ``x T`` and falls at ``-j`` for ``(1 - x) T``.
With ``D1 = v1 - v0 - a0 T`` and ``D2 = ds - v0 T - a0 T^2 / 2`` uniform-jerk kinematics give::

    D1 = j T^2 g(x),    g(x) = 2 x - x^2 - 1/2,
    D2 = j T^3 h(x),    h(x) = x^3 / 3 - x^2 + x - 1/6,

so ``x`` is a root in ``[0, 1]`` of the cubic ``D2 g(x) - T D1 h(x)`` (one exists: its values at
0 and 1 are opposite) with ``j >= 0``, and ``j`` follows. A stop's turn is the same motion
driven backwards (time reversed: speeds swapped, the acceleration's sign flipped), anchored on
the step after it, which its ramp to rest starts.

Closed forms and small root-finding only; no side effects.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import rest_step

#: How far a root of the shape's cubic may lie outside ``[0, 1]`` and the kinematics may miss
#: the step's speed change and distance (relative) and still count as an ``accel_turn`` step:
#: rounding of a file's 9-decimal stations, speeds and times.
TOLERANCE = 1e-6


@dataclass(frozen=True)
class TurnShapes:
    """The turn steps of a profile, in launch orientation: for each, whether it is a stop's
    (driven backwards), its start acceleration ``a0``, where it peaks (``x`` of its time) and
    its jerk ``j`` (m/s^3, at least 0); ``ok`` False where the step's speeds, distance and time
    fit no such motion."""

    backwards: np.ndarray
    a0: np.ndarray
    x: np.ndarray
    jerk: np.ndarray
    ok: np.ndarray


def _g(x):
    return 2.0 * x - x * x - 0.5


def _h(x):
    return x ** 3 / 3.0 - x * x + x - 1.0 / 6.0


def solve_shape(ds, v0, v1, duration, a0):
    """``(x, j, ok)`` of each turn step in launch orientation (module docstring): the peak's
    share of the step's time, the jerk, and whether the motion fits (a root in ``[0, 1]`` with
    ``j >= 0`` that reproduces the speed change and the distance to :data:`TOLERANCE`).
    Where several roots fit, the smallest jerk is taken."""
    ds, v0, v1, T, a0 = np.broadcast_arrays(*(np.asarray(q, dtype=float)
                                              for q in (ds, v0, v1, duration, a0)))
    x_out, j_out, ok = np.full(T.shape, 0.5), np.zeros(T.shape), np.zeros(T.shape, dtype=bool)
    for i in np.ndindex(T.shape):
        d1 = v1[i] - v0[i] - a0[i] * T[i]
        d2 = ds[i] - v0[i] * T[i] - 0.5 * a0[i] * T[i] ** 2
        scale_v, scale_d = max(abs(v1[i] - v0[i]), abs(v0[i]), 1e-12), ds[i]
        if abs(d1) <= TOLERANCE * scale_v and abs(d2) <= TOLERANCE * scale_d:
            ok[i] = True                                      # constant acceleration a0
            continue
        coef = (-T[i] * d1 / 3.0, T[i] * d1 - d2, 2.0 * d2 - T[i] * d1,
                T[i] * d1 / 6.0 - 0.5 * d2)
        best = None
        for root in np.roots(coef) if any(coef[:3]) else ():
            if abs(root.imag) > 1e-9 or not -TOLERANCE <= root.real <= 1.0 + TOLERANCE:
                continue
            x = min(max(float(root.real), 0.0), 1.0)
            g, h = _g(x), _h(x)
            j = (d1 * g + d2 / T[i] * h) / (T[i] ** 2 * (g * g + h * h))
            fits = (abs(d1 - j * T[i] ** 2 * g) <= TOLERANCE * scale_v
                    and abs(d2 - j * T[i] ** 3 * h) <= TOLERANCE * scale_d)
            if fits and j >= -TOLERANCE and (best is None or j < best[1]):
                best = (x, max(j, 0.0))
        if best is not None:
            x_out[i], j_out[i], ok[i] = best[0], best[1], True
    return x_out, j_out, ok


def timed_at_jerk(ds, v0, v1, a0, jerk, iterations: int = 60):
    """``(duration, x, ok)`` of turn steps in launch orientation driven at exactly ``jerk``:
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

    def end_of(t1):                                       # the end's time and speed
        d1, w1 = rise(t1)
        b1 = a0 + j * t1

        def short(t):
            s = t - t1
            return d1 + w1 * s + 0.5 * b1 * s * s - j * s ** 3 / 6.0 < ds
        # falling, the speed is zero again by s = (b1 + sqrt(b1^2 + 2 j w1)) / j at the latest
        s_max = (b1 + np.sqrt(np.maximum(b1 * b1 + 2.0 * j * w1, 0.0))) / j
        reach = ~short(t1 + s_max)
        t_end = rest_step.largest_true(short, t1.copy(), t1 + s_max, iterations)
        s = t_end - t1
        return t_end, np.where(reach, w1 + b1 * s - 0.5 * j * s * s, -np.inf)

    _, v_lo = end_of(np.zeros(ds.shape))
    ok = (v_lo <= v1 * (1.0 + TOLERANCE)) & (rise(t_all)[1] >= v1 * (1.0 - TOLERANCE))
    t1 = rest_step.largest_true(lambda t: end_of(t)[1] < v1, np.zeros(ds.shape), t_all,
                                iterations)
    t_end, _ = end_of(t1)
    return t_end, np.where(t_end > 0.0, t1 / np.where(t_end > 0.0, t_end, 1.0), 0.5), ok


def state_at_time(ds, v0, v1, duration, a0, x, jerk, tau):
    """Distance, speed and acceleration ``tau`` seconds into a turn step in launch orientation
    (``tau`` clipped to the step)."""
    T = np.asarray(duration, dtype=float)
    t = np.clip(np.asarray(tau, dtype=float), 0.0, T)
    v0, a0, j = (np.asarray(q, dtype=float) for q in (v0, a0, jerk))
    t1 = np.asarray(x, dtype=float) * T
    up = np.minimum(t, t1)                                    # time rising so far
    d = v0 * up + 0.5 * a0 * up ** 2 + j * up ** 3 / 6.0
    v = v0 + a0 * up + 0.5 * j * up ** 2
    a = a0 + j * up
    s = np.maximum(t - t1, 0.0)                               # time falling so far
    return d + v * s + 0.5 * a * s ** 2 - j * s ** 3 / 6.0, v + a * s - 0.5 * j * s ** 2, a - j * s


def time_at_distance(ds, v0, v1, duration, a0, x, jerk, d, iterations: int = 60):
    """Seconds into a turn step in launch orientation at which the distance ``d`` is reached:
    bisection on ``[0, T]`` (its speed is not negative, so the distance grows with time)."""
    T = np.asarray(duration, dtype=float)
    target = np.clip(np.asarray(d, dtype=float), 0.0, ds)
    shape = np.broadcast(T, target).shape
    return rest_step.largest_true(
        lambda t: state_at_time(ds, v0, v1, T, a0, x, jerk, t)[0] < target,
        np.zeros(shape), np.broadcast_to(T, shape).copy(), iterations)


def shapes(station_m, speed_mps, rest_time_coef, linear_time_coef, turn) -> TurnShapes:
    """The shape of every step flagged ``turn`` (bool per step) of a profile whose steps are
    timed ``c ds / (v + v')`` by ``linear_time_coef`` (a turn step is timed so too) and next to
    rest by ``rest_time_coef`` (``c ds / v``): anchored on the step before it where that one
    is a ramp's (``linear_accel``, or ``jerk_ramp`` leaving rest), else on the step after it
    where that one is a stop's ramp (``linear_accel``, or ``jerk_ramp`` arriving at rest),
    driven backwards; ``ok`` False where it has no such neighbour or no shape fits."""
    s, v = np.asarray(station_m, dtype=float), np.asarray(speed_mps, dtype=float)
    ds, n = np.diff(s), v.size - 1
    rest_c, lin_c = np.asarray(rest_time_coef, float), np.asarray(linear_time_coef, float)
    turn = np.asarray(turn, dtype=bool)
    k = np.flatnonzero(turn)
    ramp_end, ramp_start = _ramp_accels(ds, v, rest_c, np.where(turn, 0.0, lin_c))
    before = np.where(k >= 1, ramp_end[np.maximum(k - 1, 0)], np.nan)
    after = np.where(k + 1 < n, ramp_start[np.minimum(k + 1, n - 1)], np.nan)
    backwards = np.isnan(before) & ~np.isnan(after)
    T = lin_c[k] * ds[k] / (v[k] + v[k + 1])
    v0, v1 = np.where(backwards, v[k + 1], v[k]), np.where(backwards, v[k], v[k + 1])
    a0 = np.where(backwards, -after, before)
    x, j, ok = solve_shape(ds[k], v0, v1, T, np.nan_to_num(a0))
    ok &= ~np.isnan(a0)
    out = [np.zeros(n, dtype=bool), np.zeros(n), np.full(n, 0.5), np.zeros(n),
           np.ones(n, dtype=bool)]
    for arr, vals in zip(out, (backwards, np.nan_to_num(a0), x, j, ok)):
        arr[k] = vals
    return TurnShapes(*out)


def step_shape(station_m, speed_mps, rest_u, time_coef, linear_time_coef, j: int):
    """:func:`shapes` of step ``j`` alone, for a problem's steps (``rest_u`` NaN away from
    rest, ``time_coef`` its steps' time coefficients), or None where it has none."""
    turn = np.zeros(np.asarray(time_coef).size, dtype=bool)
    turn[j] = True
    rest = np.where(np.isnan(rest_u), 0.0, time_coef)
    shape = shapes(station_m, speed_mps, rest, linear_time_coef, turn)
    return shape if shape.ok[j] else None


def _ramp_accels(ds, v, rest_c, lin_c):
    """Per step, the acceleration it ends with where it is a launch's ramp step (a
    ``linear_accel`` step, or a ``jerk_ramp`` step leaving rest) and the one it starts with
    where it is a stop's (``linear_accel``, or ``jerk_ramp`` arriving); NaN elsewhere."""
    end, start = np.full(ds.size, np.nan), np.full(ds.size, np.nan)
    lin = lin_c > 0.0
    if lin.any():
        T = lin_c[lin] * ds[lin] / (v[:-1][lin] + v[1:][lin])
        a0, j = rest_step.linear_accel_step(ds[lin], v[:-1][lin], v[1:][lin], T)
        end[lin], start[lin] = a0 + j * T, a0
    ramp = rest_c > 0.0
    leaving, arriving = ramp & (v[:-1] <= 0.0), ramp & (v[1:] <= 0.0)
    f = rest_step.accel_factor(rest_step.shape_from_time_coef(np.where(ramp, rest_c, 2.0)))
    end[leaving] = (f * v[1:] ** 2 / (2.0 * ds))[leaving]
    start[arriving] = -(f * v[:-1] ** 2 / (2.0 * ds))[arriving]
    return end, start


def driven_state_at_time(shape: TurnShapes, k, ds, v0, v1, duration, tau):
    """Distance, speed and acceleration ``tau`` seconds into turn steps ``k`` (of
    :func:`shapes`) as driven: forward, or a stop's backwards."""
    back = shape.backwards[k]
    T = np.asarray(duration, dtype=float)
    d, v, a = state_at_time(ds, np.where(back, v1, v0), np.where(back, v0, v1), T,
                            shape.a0[k], shape.x[k], shape.jerk[k], np.where(back, T - tau, tau))
    return np.where(back, ds - d, d), v, np.where(back, -a, a)


def driven_time_at_distance(shape: TurnShapes, k, ds, v0, v1, duration, d):
    """Seconds into turn steps ``k`` (of :func:`shapes`) at which the distance ``d`` from
    their first node is reached, as driven, with the speed and acceleration there."""
    back = shape.backwards[k]
    T = np.asarray(duration, dtype=float)
    t = time_at_distance(ds, np.where(back, v1, v0), np.where(back, v0, v1), T, shape.a0[k],
                         shape.x[k], shape.jerk[k], np.where(back, ds - d, d))
    tau = np.where(back, T - t, t)
    _, v, a = driven_state_at_time(shape, k, ds, v0, v1, T, tau)
    return tau, v, a


def accel_points(shape: TurnShapes, k, duration):
    """For turn steps ``k`` (of :func:`shapes`) lasting ``duration``: the times into the step of
    its start, peak and end, and the acceleration at each (forward in time), as two arrays of
    shape ``(len(k), 3)``."""
    T = np.asarray(duration, dtype=float)
    a0, x, j = shape.a0[k], shape.x[k], shape.jerk[k]
    times = np.stack((np.zeros_like(T), x * T, T), axis=-1)
    values = np.stack((a0, a0 + j * x * T, a0 + j * x * T - j * (1.0 - x) * T), axis=-1)
    back = shape.backwards[k]
    times = np.where(back[:, None], T[:, None] - times[:, ::-1], times)
    values = np.where(back[:, None], -values[:, ::-1], values)
    return times, values


__all__ = ["TOLERANCE", "TurnShapes", "accel_points", "driven_state_at_time",
           "driven_time_at_distance", "shapes", "solve_shape", "state_at_time", "step_shape",
           "time_at_distance", "timed_at_jerk"]
