"""Reference tests of the trajectory export against uniform-acceleration kinematics.

Source for every closed form here: uniform-acceleration kinematics (any mechanics text):
``s(t) = v0 t + a t^2 / 2``, ``v(t) = v0 + a t``, ``v^2 = v0^2 + 2 a s``, and for a
rest-to-rest run with top speed V, acceleration a and deceleration d over a distance L that
reaches V: ``T = L / V + V / (2 a) + V / (2 d)``; and uniform-jerk kinematics from rest
(``s = J t^3 / 6``, ``v = J t^2 / 2``, ``a = J t``) for the steps next to rest that a jerk bound
makes constant-jerk.

The export evaluates these formulas per step, so the only error is floating-point round-off
summed over the steps: :data:`helpers.CLOSED_FORM_RTOL` (1e-9) bounds it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.export import make_station_profile, sample_by_station, sample_in_time
from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed.planner import plan_profile

from helpers import CLOSED_FORM_RTOL, geometry_from_curvature


def straight_profile(v0: float, a: float, length_m: float, ds: float = 1.0):
    """Station profile of a straight driven at constant acceleration ``a`` from speed ``v0``."""
    s = np.arange(int(round(length_m / ds)) + 1) * ds
    v = np.sqrt(v0 * v0 + 2.0 * a * s)
    zeros = np.zeros_like(s)
    return make_station_profile(s, s, zeros, zeros, zeros, v, name="straight")


@pytest.mark.parametrize("v0, a", [(4.0, 1.2), (0.0, 1.5), (20.0, -0.8)])
def test_constant_acceleration_in_time_matches_closed_form(v0, a):
    sp = straight_profile(v0, a, 200.0)
    tr = sample_in_time(sp, dt_s=0.05)
    v_end = math.sqrt(v0 * v0 + 2.0 * a * 200.0)
    t_end = (v_end - v0) / a
    t = tr.time_s
    # closed forms; scale of the absolute tolerance: the route length and the end speed
    np.testing.assert_allclose(tr.station_m, v0 * t + 0.5 * a * t * t, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * 200.0)
    np.testing.assert_allclose(tr.speed_mps, v0 + a * t, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * max(v0, v_end))
    np.testing.assert_allclose(tr.accel_mps2, a, rtol=CLOSED_FORM_RTOL)
    assert tr.time_s[-1] == pytest.approx(t_end, rel=CLOSED_FORM_RTOL)
    assert tr.station_m[-1] == 200.0


@pytest.mark.parametrize("v0, a", [(4.0, 1.2), (0.0, 1.5)])
def test_constant_acceleration_by_station_matches_closed_form(v0, a):
    sp = straight_profile(v0, a, 200.0)
    tr = sample_by_station(sp, station_step_m=0.3)
    s = tr.station_m
    # t(s) from v^2 = v0^2 + 2 a s and v = v0 + a t
    t = (np.sqrt(v0 * v0 + 2.0 * a * s) - v0) / a
    np.testing.assert_allclose(tr.time_s, t, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * t[-1])
    np.testing.assert_allclose(tr.speed_mps, np.sqrt(v0 * v0 + 2.0 * a * s),
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * tr.speed_mps[-1])


def test_planned_rest_to_rest_run_matches_trapezoid_closed_form():
    # 300 m, top speed 15 m/s, accel 1.5, decel 2.5: the accel phase ends at 225/3 = 75 m and
    # braking starts at 300 - 225/5 = 255 m, both on nodes (ds = 1 m), so the planned profile
    # is exactly the trapezoid and T = 300/15 + 15/3 + 15/5 = 28 s.
    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    limits = Limits(max_speed_mps=15.0, max_accel_mps2=1.5, max_decel_mps2=2.5,
                    max_jerk_mps3=None)   # no jerk bound: constant acceleration throughout
    profile = plan_profile(geo, limits)
    tr = sample_in_time(profile, dt_s=0.1)
    t = tr.time_s
    t1, t2, total = 10.0, 22.0, 28.0
    expected = np.where(t <= t1, 0.75 * t * t,
                        np.where(t <= t2, 75.0 + 15.0 * (t - t1),
                                 300.0 - 1.25 * (total - t) ** 2))
    assert tr.time_s[-1] == pytest.approx(total, rel=CLOSED_FORM_RTOL)
    np.testing.assert_allclose(tr.station_m, expected, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * 300.0)
    v_expected = np.where(t <= t1, 1.5 * t, np.where(t <= t2, 15.0, 2.5 * (total - t)))
    np.testing.assert_allclose(tr.speed_mps, v_expected, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * 15.0)


def test_stop_with_dwell_matches_closed_form():
    # Two rest-to-rest runs of 80 m (stop at 80 m): accelerate at 1.5 for 50 m, brake at 2.5 for
    # 30 m (peak v^2 = 150, reached on node 50), so each run takes sqrt(150) (1/1.5 + 1/2.5) s.
    geo = geometry_from_curvature(np.zeros(161), ds=1.0)
    limits = Limits(max_speed_mps=30.0, max_accel_mps2=1.5, max_decel_mps2=2.5,
                    max_jerk_mps3=None)   # no jerk bound: constant acceleration throughout
    profile = plan_profile(geo, limits, RouteConstraints(stops=(Stop(80.0),)))
    dwell = 7.5
    tr = sample_in_time(profile, dt_s=0.05, dwell_s=dwell)
    vp = math.sqrt(150.0)
    ta, td = vp / 1.5, vp / 2.5
    run = ta + td

    def one_run(t):
        return np.where(t <= ta, 0.75 * t * t, 80.0 - 1.25 * (run - t) ** 2)

    t = tr.time_s
    expected = np.where(t <= run, one_run(t),
                        np.where(t <= run + dwell, 80.0, 80.0 + one_run(t - run - dwell)))
    assert tr.time_s[-1] == pytest.approx(2 * run + dwell, rel=CLOSED_FORM_RTOL)
    np.testing.assert_allclose(tr.station_m, expected, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * 160.0)
    held = (t > run) & (t < run + dwell)
    assert np.all(tr.speed_mps[held] == 0.0) and np.all(tr.accel_mps2[held] == 0.0)


def test_constant_jerk_steps_next_to_rest_match_closed_form():
    # A profile planned with a jerk bound leaves and reaches rest at constant jerk: the step next
    # to rest takes 3 ds / v (uniform jerk from rest: s = J t^3 / 6 and v = J t^2 / 2 give
    # t = 3 s / v), which is how the export recognises it from time_s.
    ds, v1 = 2.0, 3.0
    T = 3.0 * ds / v1
    jerk = 6.0 * ds / T ** 3
    s = np.array([0.0, ds, 2 * ds, 3 * ds])
    v = np.array([0.0, v1, v1, 0.0])
    t = np.array([0.0, T, T + ds / v1, 2 * T + ds / v1])
    zeros = np.zeros(4)
    sp = make_station_profile(s, s, zeros, zeros, zeros, v, time_s=t)
    np.testing.assert_array_equal(sp.rest_time_coef, [3.0, 0.0, 3.0])
    tr = sample_in_time(sp, dt_s=0.01)
    tt = tr.time_s
    first = tt <= T
    np.testing.assert_allclose(tr.station_m[first], jerk * tt[first] ** 3 / 6.0,
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * ds)
    np.testing.assert_allclose(tr.speed_mps[first], jerk * tt[first] ** 2 / 2.0,
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * v1)
    # (at t = T itself the sample belongs to the constant-speed step it enters: a = 0 there)
    inside = tt < T
    np.testing.assert_allclose(tr.accel_mps2[inside], jerk * tt[inside], rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * v1)
    # arriving at rest is the mirror image: distance still to go J r^3 / 6, r the time left
    last = tt >= T + ds / v1
    r = tt[-1] - tt[last]
    np.testing.assert_allclose(3 * ds - tr.station_m[last], jerk * r ** 3 / 6.0,
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * ds)
    np.testing.assert_allclose(tr.accel_mps2[last], -jerk * r, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * v1)
    assert tt[-1] == pytest.approx(t[-1], rel=CLOSED_FORM_RTOL)
    # by station: t(s) = (6 s / J)^(1/3) on the first step
    by_s = sample_by_station(sp, 0.05)
    on_first = by_s.station_m <= ds
    np.testing.assert_allclose(by_s.time_s[on_first],
                               np.cbrt(6.0 * by_s.station_m[on_first] / jerk),
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * T)


def test_jerk_ramp_steps_next_to_rest_match_closed_form():
    # Uniform-jerk kinematics (Biagiotti & Melchiorri 2008, section 3.4, the first two phases of
    # the double-S): from rest at jerk J = 2 m/s^3 to A = 1.5 m/s^2 (0.75 s, 0.140625 m, 0.5625
    # m/s), then constant A to the end of a 1 m step: s = J t^3 / 6, then
    # s = 0.140625 + 0.5625 (t - 0.75) + A (t - 0.75)^2 / 2; reached at v1 = sqrt(2.89453125).
    # The profile states only stations, speeds and times (T = 1.5092215 s, as a planned
    # profile's time_s does); the export recovers the shape from them. Arriving at rest is the
    # same motion backwards.
    J, A, ds = 2.0, 1.5, 1.0
    v1 = math.sqrt(2.89453125)
    t1 = A / J
    T = t1 + (v1 - 0.5625) / A
    s = np.array([0.0, ds, 2 * ds, 3 * ds])
    v = np.array([0.0, v1, v1, 0.0])
    t = np.array([0.0, T, T + ds / v1, 2 * T + ds / v1])
    zeros = np.zeros(4)
    sp = make_station_profile(s, s, zeros, zeros, zeros, v, time_s=t)
    assert sp.rest_step.tolist() == [True, False, True]

    def launch(tt):
        late = np.maximum(tt - t1, 0.0)
        ramp = np.minimum(tt, t1)
        return (J * ramp ** 3 / 6 + 0.5 * J * ramp ** 2 * late + 0.5 * A * late ** 2,
                0.5 * J * ramp ** 2 + A * late, np.where(tt < t1, J * tt, A))

    tr = sample_in_time(sp, dt_s=0.01)
    tt = tr.time_s
    first = tt < T
    d, vv, aa = launch(tt[first])
    np.testing.assert_allclose(tr.station_m[first], d, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * ds)
    np.testing.assert_allclose(tr.speed_mps[first], vv, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * v1)
    np.testing.assert_allclose(tr.accel_mps2[first], aa, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * A)
    last = tt > T + ds / v1
    d, vv, aa = launch(tt[-1] - tt[last])
    np.testing.assert_allclose(3 * ds - tr.station_m[last], d, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * ds)
    np.testing.assert_allclose(tr.accel_mps2[last], -aa, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * A)
    # by station: the same motion, inverted
    by_s = sample_by_station(sp, 0.05)
    on_first = by_s.station_m < ds
    d, _, _ = launch(by_s.time_s[on_first])
    np.testing.assert_allclose(d, by_s.station_m[on_first], rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * ds)


def test_linear_accel_steps_match_closed_form():
    # Uniform-jerk kinematics from rest (same source as the module docstring's): a ramp at
    # J = 0.5 m/s^3 reaches station s at t = (6 s / J)^(1/3) with v = J t^2 / 2 and a = J t.
    # The profile states it at 1 m stations: the step leaving rest ramps over the whole step
    # (jerk_ramp, c = 3) and the next five are driven at constant jerk (linear_accel, their c
    # from the ramp's times); the export recovers each step's start acceleration and jerk from
    # its stations, speeds and time, and so drives the ramp itself.
    J, ds, n = 0.5, 1.0, 6
    s = np.arange(n + 1) * ds
    t = np.cbrt(6.0 * s / J)
    v = 0.5 * J * t * t
    coef = np.diff(t) * (v[:-1] + v[1:]) / ds
    zeros = np.zeros(n + 1)
    sp = make_station_profile(s, s, zeros, zeros, zeros, v, time_s=t,
                              rest_time_coef=np.concatenate(([3.0], np.zeros(n - 1))),
                              linear_time_coef=np.concatenate(([0.0], coef[1:])))
    assert coef[0] == pytest.approx(3.0, rel=1e-12) and np.all(coef[1:] > 2.0)
    assert sp.linear_step.tolist() == [False] + [True] * (n - 1)
    np.testing.assert_allclose(sp.node_time_s, t, rtol=CLOSED_FORM_RTOL)
    tr = sample_in_time(sp, dt_s=0.01)
    tt = tr.time_s
    np.testing.assert_allclose(tr.station_m, J * tt ** 3 / 6.0, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * ds)
    np.testing.assert_allclose(tr.speed_mps, J * tt ** 2 / 2.0, rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * v[-1])
    inside = tt < t[-1]                           # the last sample is the node: a = J t there too
    np.testing.assert_allclose(tr.accel_mps2[inside], J * tt[inside], rtol=CLOSED_FORM_RTOL,
                               atol=CLOSED_FORM_RTOL * J * t[-1])
    # by station: the same motion, inverted (bisection to 2^-60 of the step's time)
    by_s = sample_by_station(sp, 0.05)
    np.testing.assert_allclose(by_s.time_s, np.cbrt(6.0 * by_s.station_m / J),
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * t[-1])
    np.testing.assert_allclose(by_s.speed_mps, 0.5 * J * by_s.time_s ** 2,
                               rtol=CLOSED_FORM_RTOL, atol=CLOSED_FORM_RTOL * v[-1])


def test_first_and_last_samples_are_kept_for_any_interval():
    # A time or station step longer than the whole profile still gives its start and its end
    s = np.arange(4.0)
    zeros = np.zeros(4)
    sp = make_station_profile(s, s, zeros, zeros, zeros, [0.0, 1.0, 1.0, 0.0])
    for tr in (sample_in_time(sp, 1e11), sample_by_station(sp, 1e12)):
        assert tr.time_s.tolist() == [0.0, sp.moving_time_s]
        assert tr.station_m.tolist() == [0.0, 3.0]
        assert tr.speed_mps.tolist() == [0.0, 0.0]


def test_profile_without_times_has_constant_acceleration_everywhere():
    s = np.arange(4.0)
    zeros = np.zeros(4)
    sp = make_station_profile(s, s, zeros, zeros, zeros, [0.0, 1.0, 1.0, 0.0])
    assert not sp.rest_step.any()
    assert sp.moving_time_s == pytest.approx(2.0 + 1.0 + 2.0, rel=CLOSED_FORM_RTOL)
