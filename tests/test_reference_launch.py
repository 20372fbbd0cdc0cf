"""A launch from rest planned as its jerk ramp, against uniform-jerk kinematics and the double-S
closed form (Biagiotti & Melchiorri 2008, "Trajectory Planning for Automatic Machines and
Robots", section 3.4; its check values are in REFERENCES.md).

Uniform-jerk kinematics from rest: ``a = J t``, ``v = J t^2 / 2``, ``s = J t^3 / 6``; the
distance-weighted mean time of a stretch of it, ``int t v dt / ds``, is
``J (t1^4 - t0^4) / (8 ds)``.
"""

import math
import warnings

import numpy as np
import pytest

from curvespeed.errors import CurvespeedWarning
from curvespeed.launch_motion import JerkPieces, accel_phase, planned_launch
from curvespeed.problem import build_problem
from curvespeed.solvers.convex import solve_convex
from test_reference_convex import double_s_time, planned_time, straight_limits, straight_problem


def test_pieces_follow_uniform_jerk_kinematics():
    J = 0.7
    ramp = JerkPieces((0.0,), (J,))
    t = np.array([0.3, 1.0, 2.5])
    s, v, a = ramp.at_time(t)
    np.testing.assert_allclose(s, J * t ** 3 / 6, rtol=1e-15)
    np.testing.assert_allclose(v, J * t ** 2 / 2, rtol=1e-15)
    np.testing.assert_allclose(a, J * t, rtol=1e-15)
    np.testing.assert_allclose(ramp.time_at(J * t ** 3 / 6, 10.0), t, rtol=1e-14)
    t0, t1 = np.cbrt(6 * np.array([1.0, 2.0]) / J), np.cbrt(6 * np.array([2.0, 3.0]) / J)
    np.testing.assert_allclose(ramp.mean_time(t0, t1, 1.0), J * (t1 ** 4 - t0 ** 4) / 8,
                               rtol=1e-14)
    # a turn at the peak: -J after t_p, so a = J (2 t_p - t) and the speed's integral
    tent = JerkPieces((0.0, 2.0), (J, -J))
    _, v3, a3 = tent.at_time(3.0)
    assert a3 == pytest.approx(J * (2 * 2.0 - 3.0), rel=1e-15)
    assert v3 == pytest.approx(J * 2.0 ** 2 / 2 + J * 2.0 * 1.0 - J * 1.0 ** 2 / 2, rel=1e-15)


# (L, v, a, j): each regime of the closed form (top speed and cap reached; only the cap; neither)
# and its check values (REFERENCES.md)
@pytest.mark.parametrize("L, v, a, j", [(500.0, 20.0, 1.5, 2.0), (200.0, 40.0, 1.5, 2.0),
                                        (200.0, 40.0, 3.0, 0.5), (10.0, 5.0, 10.0, 30.0),
                                        (10.0, 10.0, 10.0, 30.0), (1.0, 10.0, 10.0, 30.0),
                                        (10.0, 2.0, 10.0, 30.0)])
def test_acceleration_phase_is_the_double_s_closed_forms(L, v, a, j):
    tj, ta = accel_phase(L, v, a, j)
    phase = JerkPieces((0.0, tj, ta - tj), (j, 0.0, -j))
    s_a, v_a, a_a = phase.at_time(ta)
    assert a_a == pytest.approx(0.0, abs=1e-12 * a)
    assert j * tj <= a * (1 + 1e-12) and v_a <= v * (1 + 1e-12)
    # symmetric move: the acceleration phase, a cruise at v_a, the phase backwards
    cruise = max(L - 2.0 * s_a, 0.0) / v_a
    assert 2 * ta + cruise == pytest.approx(double_s_time(L, v, a, j), rel=1e-12)


def test_a_launch_that_holds_the_cap_reaches_it_linearly_in_the_step_where_its_ramp_ends():
    # ramp to 3 m/s^2 at 1 m/s^3: 4.5 m; steps 1-3 inside it, step 4 (4-5 m) from the ramp's
    # acceleration at 4 m to the cap at 5 m, linearly in time (a jerk below the bound)
    J, A, ds = 1.0, 3.0, 1.0
    launch = planned_launch(A ** 3 / (6 * J * J), A, J, ds)
    assert launch.corner == 4 and launch.peak_share == 1.0
    t, v, a = launch.states(ds, 6)
    np.testing.assert_allclose(t[:5], np.cbrt(6 * np.arange(5) * ds / J), rtol=1e-14,
                               atol=1e-12)
    assert a[5] == pytest.approx(A, rel=1e-14)
    assert (a[5] - a[4]) / (t[5] - t[4]) < J
    s5, v5, _ = launch.motion.at_time(t[5])
    assert s5 == pytest.approx(5 * ds, rel=1e-14)
    assert v5 == pytest.approx(v[4] + (a[4] + A) / 2 * (t[5] - t[4]), rel=1e-14)


def test_a_launch_that_turns_is_the_double_s_motion_through_its_peak():
    # 200 m under 40 m/s, 3 m/s^2, 0.5 m/s^3: the closed form peaks at J (L / (2 J))^(1/3)
    # = 2.92 m/s^2, L / 12 = 16.7 m from rest, and turns at -J
    J, ds, L = 0.5, 1.0, 200.0
    launch = planned_launch(L / 12, 3.0, J, ds)
    assert launch.corner == 16
    t_peak = (L / (2 * J)) ** (1 / 3)
    t, _, a = launch.states(ds, 18)
    assert launch.motion.at_time(t_peak)[2] == pytest.approx(J * t_peak, rel=1e-14)
    assert a[17] == pytest.approx(J * t_peak - J * (t[17] - t_peak), rel=1e-12)
    assert launch.peak_share == pytest.approx((t_peak - t[16]) / (t[17] - t[16]), rel=1e-12)


def _launch_speeds(problem, n):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurvespeedWarning)
        return np.sqrt(solve_convex(problem).b[:n])


# Planned rest to rest on a straight as steps of constant acceleration and the launch's ramp
# (the model of a move whose closed form does not fit the route, curvespeed.closed_form_moves),
# the launch's speeds at the stations of its ramp are the closed form's motion's (the double-S
# move's own, found by integrating its jerk), to the solver's accuracy: in a move that turns
# (480 m, peak at 40 m) also at the far node of the step in which the ramp ends; in one that
# holds the cap (200 m, ramp to 4.5 m) that step goes on to the cap linearly in time, 0.12 %
# slower than the closed form at its far node (5 m). The moves' times: +0.018 % and +0.0003 %
# over the closed form.
@pytest.mark.parametrize("L, v, a, j, stations, whole, within", [
    (200.0, 25.0, 3.0, 1.0, 6, 5, 3e-4), (480.0, 40.0, 8.0, 0.5, 42, 42, 2e-5)])
def test_the_planned_launch_is_the_closed_forms(L, v, a, j, stations, whole, within):
    tj, ta = accel_phase(L, v, a, j)
    motion = JerkPieces((0.0, tj, ta - tj), (j, 0.0, -j))
    exact = motion.at_time(motion.time_at(np.arange(stations), ta))[1]
    planned = _launch_speeds(straight_problem(L, 1.0, straight_limits(v, a, j), staircase=True),
                             stations)
    np.testing.assert_allclose(planned[:whole], exact[:whole], rtol=2e-6, atol=1e-9)
    if whole < stations:
        corner = planned_launch(a ** 3 / (6 * j * j), a, j, 1.0).states(1.0, stations)[1]
        assert planned[whole:] == pytest.approx(corner[whole:], rel=2e-6)
        assert planned[whole:] == pytest.approx(exact[whole:] * (1 - 0.0012), rel=1e-4)
    total = planned_time(straight_problem(L, 1.0, straight_limits(v, a, j), staircase=True))
    assert 0.0 <= total / double_s_time(L, v, a, j) - 1.0 <= within


def test_a_ramp_ending_across_a_node_changes_the_problem_continuously():
    # The ramp to A at J is A^3 / (6 J^2) long: 2 m at A = (12 J^2)^(1/3). Just below, its last
    # step is 1-2 m, ending at the cap; just above, 2-3 m, starting 1e-6 below it. The steps'
    # time coefficients and their accelerations at their far nodes agree to the change of A,
    # and so do the plans (each a convex program of its own).
    J = 0.5
    A = (12 * J * J) ** (1 / 3)
    below, above = (straight_problem(300.0, 1.0, straight_limits(30.0, A * (1 + d), J))
                    for d in (-1e-7, 1e-7))
    np.testing.assert_allclose(below.time_coef, above.time_coef, atol=1e-5)
    np.testing.assert_allclose(below.accel_factor_end, above.accel_factor_end, atol=1e-5)
    assert planned_time(below) == pytest.approx(planned_time(above), rel=1e-6)


def test_a_launch_turning_in_a_step_may_be_driven_below_twice_its_constant_acceleration_time():
    # 12 m at 0.5 m/s^3 peaks exactly at 1 m (L / 12): the step after it falls at -J, its speed
    # concave in time, so it takes less than 2 ds / (v + v'); that is within the range of a
    # constant-jerk step whose speed stays within its ends' (in Bernstein form the middle
    # coefficient (3 / c - 1) (v + v') at most max(v, v'): c >= 3 (v + v') / (v + v' + max))
    problem = straight_problem(12.0, 1.0, straight_limits(10.0, 3.0, 0.5), staircase=True)
    b = solve_convex(problem).b
    c = problem.time_coef[1]
    v = np.sqrt(b[1:3])
    assert 3 * v.sum() / (v.sum() + v.max()) < c < 2.0
    assert math.isclose(float(problem.time_coef[-2]), c, rel_tol=1e-12)     # the stop's mirror


def test_a_window_from_rest_carries_the_launch_time_bases_of_the_route():
    # a receding-horizon window leaving rest has the route's jerk time base at every node of
    # the launch it plans (the same terms, scaled alike)
    from helpers import geometry_from_curvature

    from curvespeed.limits import Limits, RouteConstraints
    from curvespeed.replan import Replanner

    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    limits = Limits(max_jerk_mps3=0.5, max_accel_mps2=3.0, max_decel_mps2=3.0,
                    max_speed_mps=30.0)
    route = build_problem(geo, limits, RouteConstraints())
    window = Replanner(geo, limits, RouteConstraints()).replan(0.0, 0.0, 0.0)
    b = np.linspace(0.0, 40.0, route.n_nodes) ** 1.3
    n = 20
    np.testing.assert_allclose(window.problem.node_jerk_time(b[:window.problem.n_nodes])[1:n],
                               route.node_jerk_time(b)[1:n], rtol=1e-12)
    assert np.any(route.jerk_node_scale[1:n] != 1.0)


def test_a_launch_the_route_does_not_let_complete_keeps_the_staircase():
    # At 0.3 m/s^3 the closed form's acceleration phase towards 25 m/s takes 24 s and some
    # 200 m (same source). A 20 m radius 40 m from the stop caps the speed at about 7 m/s
    # (sqrt(2.5 m/s^2 * 20 m)): the jerk-free envelope already falls there, so no plan can
    # follow that launch; it is not planned as it (the step leaving rest keeps the continuing
    # ramp's shape, the next steps constant acceleration). On the straight it is.
    from helpers import geometry_from_curvature

    from curvespeed import rest_step
    from curvespeed.limits import Limits, RouteConstraints

    limits = Limits(max_jerk_mps3=0.3, max_speed_mps=25.0)
    kappa = np.zeros(401)
    kappa[40:80] = 1.0 / 20.0
    curve = build_problem(geometry_from_curvature(kappa, ds=1.0), limits, RouteConstraints())
    straight = build_problem(geometry_from_curvature(np.zeros(401), ds=1.0), limits,
                             RouteConstraints(), closed_form=False)
    assert straight.rest_u[0] == 1.0 and straight.time_coef[1] != 2.0
    # (planned as its closed form, curvespeed.closed_form_moves, where the route lets it too)
    assert curve.closed_form_b is None
    assert curve.rest_u[0] == pytest.approx(rest_step.U_CONTINUING, rel=1e-12)
    assert np.all(curve.time_coef[1:30] == 2.0) and curve.jerk_node_scale is None


def test_a_launch_into_a_curve_goes_to_the_cap_its_last_step_allows():
    # On a 40 m radius (10 m/s under the 2.5 m/s^2 lateral cap, the top speed here) the comfort
    # ellipse allows 3 m/s^2 * sqrt(1 - (v^2 / (R 2.5))^2) along the path: 2.999 m/s^2 at the
    # step next to rest's moving node (1.65 m/s), 2.92 at 5 m where the ramp (3 m/s^2 at
    # 1 m/s^3: 4.5 m) ends. That step still goes on linearly in time, to what its far node
    # allows at the speed the launch reaches there, rather than being cut off the launch.
    from helpers import geometry_from_curvature

    from curvespeed.limits import Limits, RouteConstraints
    from curvespeed.planner import plan_profile

    limits = Limits(max_jerk_mps3=1.0, max_accel_mps2=3.0, max_decel_mps2=3.0,
                    max_speed_mps=10.0)
    geo = geometry_from_curvature(np.full(301, 1.0 / 40.0), ds=1.0)
    problem = build_problem(geo, limits, RouteConstraints())
    assert problem.rest_u[0] == 1.0 and problem.time_coef[4] != 2.0
    b = plan_profile(geo, limits).speed_mps ** 2
    end_accel = problem.accel_factor_end[4] * (b[5] - b[4]) / 2.0
    _, hi = problem.accel_bounds(b[5:6], nodes=np.array([5]))
    assert hi[0] < 2.95 and end_accel <= hi[0] * (1 + 1e-9)
