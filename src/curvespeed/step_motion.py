"""The motion inside each step of a station profile, as ``export`` drives it: distance, speed
and acceleration at a time into a step, or the time at a distance into it.

Each step is driven as its kind says (:mod:`curvespeed.export` describes them): at constant
acceleration; next to rest, a jerk ramp then constant acceleration (:mod:`curvespeed.rest_step`);
at constant jerk where a launch's or a stop's ramp spans it (``linear_accel``,
:func:`curvespeed.rest_step.linear_accel_step`); with one switch of its jerk inside it where a
move's acceleration turns, or reaches or leaves its cap (``accel_turn`` and the other kinds of
:mod:`curvespeed.jerk_switch`). Vectorised over steps ``k``; arrays in, arrays out.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from . import jerk_switch, rest_step

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
    linear, switch = _moving_kinds(sp, k)
    if linear.any() or switch.any():
        d, v, acc = d.copy(), v.copy(), np.broadcast_to(acc, d.shape).copy()
        d[linear], v[linear], acc[linear] = rest_step.linear_state_at_time(
            ds[linear], v0[linear], v1[linear], T[linear], tau[linear])
        if switch.any():
            d[switch], v[switch], acc[switch] = jerk_switch.driven_state_at_time(
                sp.switch_shapes, k[switch], ds[switch], v0[switch], v1[switch], T[switch],
                tau[switch])
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
    linear, switch = _moving_kinds(sp, k)
    if linear.any() or switch.any():
        tau, v, acc = tau.copy(), v.copy(), np.broadcast_to(acc, tau.shape).copy()
        args = ds[linear], v0[linear], v1[linear], T[linear]
        tau[linear] = rest_step.linear_time_at_distance(*args, d[linear])
        _, v[linear], acc[linear] = rest_step.linear_state_at_time(*args, tau[linear])
        if switch.any():
            tau[switch], v[switch], acc[switch] = jerk_switch.driven_time_at_distance(
                sp.switch_shapes, k[switch], ds[switch], v0[switch], v1[switch], T[switch],
                d[switch])
    return tau, v, np.asarray(acc, dtype=float)


def _moving_kinds(sp: StationProfile, k):
    """Which of steps ``k`` are driven at constant jerk (``linear_accel``) and which through
    with one switch of the jerk (:mod:`curvespeed.jerk_switch`; timed like the first, but only
    the second's motion is computed for them)."""
    switch = (np.zeros(np.shape(k), dtype=bool) if sp.switch_step is None
              else sp.switch_step[k] > 0)
    return sp.linear_step[k] & ~switch, switch


__all__ = ["state_at_distance", "state_at_time"]
