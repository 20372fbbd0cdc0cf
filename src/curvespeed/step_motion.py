"""The motion inside each step of a station profile, as ``export`` drives it: distance, speed
and acceleration at a time into a step, or the time at a distance into it.

Each step is driven as its kind says (:mod:`curvespeed.export` describes them): at constant
acceleration; next to rest, a jerk ramp then constant acceleration (:mod:`curvespeed.rest_step`);
at constant jerk where a launch's or a stop's ramp spans it (``linear_accel``,
:func:`curvespeed.rest_step.linear_accel_step`); through one turn of its acceleration where such
a move turns (``accel_turn``, :mod:`curvespeed.turn_step`). Vectorised over steps ``k``; arrays
in, arrays out.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from . import rest_step, turn_step

if TYPE_CHECKING:
    from .station_profile import StationProfile


def _rest_steps_at(sp: StationProfile, k):
    """For steps ``k``: driven with a jerk ramp next to rest, leaving rest, arriving at rest
    (driven as leaving, backwards), their shape ``u`` and the speed at their moving end."""
    v0, v1 = sp.speed_mps[k], sp.speed_mps[k + 1]
    ramp = sp.rest_step[k]
    leaving = ramp & (v0 <= 0.0)
    arriving = ramp & (v1 <= 0.0)
    u = rest_step.shape_from_time_coef(np.where(ramp, sp.rest_time_coef[k], 2.0))
    return ramp, leaving, arriving, u, np.where(leaving, v1, v0)


def state_at_time(sp: StationProfile, k, tau):
    """Distance into step ``k``, speed and acceleration ``tau`` seconds after leaving node k."""
    ds = np.diff(sp.station_m)[k]
    v0, v1 = sp.speed_mps[k], sp.speed_mps[k + 1]
    T = sp.step_time_s[k]
    a = sp.step_accel_mps2[k]
    # constant acceleration
    d = v0 * tau + 0.5 * a * tau * tau
    v = v0 + a * tau
    acc = a
    ramp, leaving, arriving, u, v_moving = _rest_steps_at(sp, k)
    back = np.where(arriving, T - tau, tau)
    d_r, v_r, a_r = rest_step.leaving_state_at_time(u, v_moving, ds, back)
    d = np.where(leaving, d_r, np.where(arriving, ds - d_r, d))
    v = np.where(ramp, v_r, v)
    acc = np.where(leaving, a_r, np.where(arriving, -a_r, acc))
    linear = sp.linear_step[k]
    if linear.any():
        d_l, v_l, a_l = rest_step.linear_state_at_time(ds[linear], v0[linear], v1[linear],
                                                       T[linear], tau[linear])
        d, v, acc = d.copy(), v.copy(), np.broadcast_to(acc, d.shape).copy()
        d[linear], v[linear], acc[linear] = d_l, v_l, a_l
        turn = _turns_at(sp, k)
        if turn is not None:
            shape, on = turn
            d[on], v[on], acc[on] = turn_step.driven_state_at_time(
                shape, k[on], ds[on], v0[on], v1[on], T[on], tau[on])
    at_end = tau >= T
    d = np.clip(np.where(at_end, ds, d), 0.0, ds)
    v = np.where(at_end, v1, np.maximum(v, 0.0))
    return d, v, np.asarray(acc, dtype=float)


def state_at_distance(sp: StationProfile, k, d):
    """Time since leaving node k, speed and acceleration at distance ``d`` into step ``k``."""
    ds = np.diff(sp.station_m)[k]
    v0, v1 = sp.speed_mps[k], sp.speed_mps[k + 1]
    T = sp.step_time_s[k]
    a = sp.step_accel_mps2[k]
    # constant acceleration: v^2 = v0^2 + 2 a d and the cancellation-free root for tau
    v = np.sqrt(np.maximum(v0 * v0 + 2.0 * a * d, 0.0))
    v = np.where(d >= ds, v1, v)
    with np.errstate(divide="ignore", invalid="ignore"):
        tau = np.where(d > 0.0, 2.0 * d / (v0 + v), 0.0)
    acc = a
    ramp, leaving, arriving, u, v_moving = _rest_steps_at(sp, k)
    from_rest = np.where(arriving, ds - d, d)
    t_r = rest_step.leaving_time_at_distance(u, v_moving, ds, from_rest)
    _, v_r, a_r = rest_step.leaving_state_at_time(u, v_moving, ds, t_r)
    tau = np.where(leaving, t_r, np.where(arriving, T - t_r, tau))
    v = np.where(ramp, v_r, v)
    acc = np.where(leaving, a_r, np.where(arriving, -a_r, acc))
    linear = sp.linear_step[k]
    if linear.any():
        args = ds[linear], v0[linear], v1[linear], T[linear]
        t_l = rest_step.linear_time_at_distance(*args, d[linear])
        _, v_l, a_l = rest_step.linear_state_at_time(*args, t_l)
        tau, v, acc = tau.copy(), v.copy(), np.broadcast_to(acc, tau.shape).copy()
        tau[linear], v[linear], acc[linear] = t_l, v_l, a_l
        turn = _turns_at(sp, k)
        if turn is not None:
            shape, on = turn
            tau[on], v[on], acc[on] = turn_step.driven_time_at_distance(
                shape, k[on], ds[on], v0[on], v1[on], T[on], d[on])
    return tau, v, np.asarray(acc, dtype=float)


def _turns_at(sp: StationProfile, k):
    """``(shapes, mask)`` of the turn steps among steps ``k`` (:mod:`curvespeed.turn_step`),
    or None where there are none."""
    if sp.turn_step is None or not sp.turn_step[k].any():
        return None
    return sp.turn_shapes, sp.turn_step[k]


__all__ = ["state_at_distance", "state_at_time"]
