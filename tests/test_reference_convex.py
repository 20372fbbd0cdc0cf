"""Reference tests of the convex (jerk-bounded) solver against published closed forms.

Source for the double-S (jerk-limited, rest-to-rest) motion: L. Biagiotti and C. Melchiorri,
Trajectory Planning for Automatic Machines and Robots, Springer 2008, section 3.4. Stations are
synthetic straight lines, so the only approximation is the station step.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed.problem import build_problem
from curvespeed.profile import derive
from curvespeed.solvers.convex import solve_convex
from curvespeed.verify import verify_profile

from helpers import circle_geometry, geometry_from_curvature


def double_s_time(L, v, a, j):
    """Minimum time of a rest-to-rest double-S motion over distance L (book section 3.4)."""
    if v * j >= a * a:
        tj, ta = a / j, a / j + v / a
    else:
        tj = math.sqrt(v / j)
        ta = 2 * tj
    if L >= v * ta:                      # top speed and acceleration reached
        return L / v + ta
    if L >= 2 * a ** 3 / j ** 2:         # only the acceleration limit reached
        ta = a / (2 * j) + math.sqrt(a * a / (4 * j * j) + L / a)
        return 2 * ta
    return 4 * (L / (2 * j)) ** (1 / 3)  # neither reached


# Check values of the closed form itself, listed in REFERENCES.md (computed from the book's
# formulas): (L, v, a, j) -> T.
@pytest.mark.parametrize("L, v, a, j, expected", [
    (10, 5, 10, 30, 2.833333), (10, 10, 10, 30, 2.360921), (1, 10, 10, 30, 1.021746),
    (10, 2, 10, 30, 5.516398)])
def test_double_s_closed_form_matches_its_check_values(L, v, a, j, expected):
    assert double_s_time(L, v, a, j) == pytest.approx(expected, abs=1e-6)


def straight_problem(length, ds, limits, constraints=RouteConstraints(), staircase=False):
    """A straight of ``length`` m at ``ds`` m stations; ``staircase``: every move planned as
    steps of constant acceleration and launch ramps, none as its closed form (the model of a
    move whose closed form does not fit, curvespeed.closed_form_moves)."""
    geo = geometry_from_curvature(np.zeros(int(round(length / ds)) + 1), ds=ds)
    return build_problem(geo, limits, constraints, closed_form=not staircase)


def straight_limits(v, a, j):
    return Limits(max_speed_mps=v, max_accel_mps2=a, max_decel_mps2=a, max_jerk_mps3=j,
                  friction_coefficient=0.9)


def planned_time(problem) -> float:
    result = solve_convex(problem)
    check = verify_profile(problem, result.b, tolerance=1e-4)
    assert check.ok, check.violations
    return float(derive(problem, result.b)["time_s"][-1])


# Rest to rest on a straight against the closed form, in each regime, at the default station
# step (1 m) and at 0.5 m. Never faster than the closed form (the minimum over every
# jerk-limited motion) for moves of these lengths: the discrete model is built to be conservative
# (docs/method.md; without the corner rows, moves shorter than about 60 m whose acceleration
# falls from its cap at low speed came out up to 0.115 % faster at 12 m). Where the jerk
# ramp from rest to the acceleration limit (a^3 / (6 j^2) of distance) fits in the first station
# step, the step next to rest drives it exactly (curvespeed.rest_step); where it does not (0.56 m
# at 0.5 m, 16.7 m of ramp in the fourth case) the launch is planned as the closed form's ramp
# (curvespeed.launch_steps). Either way the steps at speed are the only approximation left:
# within 0.01 % (measured at most 0.0008 %; the 16.7 m ramp was +0.040 % before the ramp's
# nodes had its own time base, 0.15 % with a staircase of step accelerations over it).
@pytest.mark.parametrize("ds", [1.0, 0.5])
@pytest.mark.parametrize("L, v, a, j, regime", [
    (500.0, 20.0, 1.5, 2.0, "speed and acceleration limits reached"),
    (500.0, 20.0, 1.5, 1.0, "speed and acceleration limits reached"),
    (200.0, 40.0, 1.5, 2.0, "only the acceleration limit reached"),
    (200.0, 40.0, 3.0, 0.5, "neither limit reached"),
])
def test_rest_to_rest_time_matches_the_double_s_closed_form(L, v, a, j, regime, ds):
    total = planned_time(straight_problem(L, ds, straight_limits(v, a, j)))
    closed = double_s_time(L, v, a, j)
    assert total >= closed, regime
    assert total == pytest.approx(closed, rel=1e-4), regime


# The target band of the double-S moves at the default station step (1 m): within 0.1 % of the
# closed form (same source) and not below it by more than 1e-6 (the solver's accuracy). Here
# the jerk ramp to the acceleration limit is a little longer than the first step
# (a^3 / (6 j^2) = 1.125 m): the step next to rest ramps at the bound as far as it can and
# leaves the rest of the rise to the change of acceleration about its moving node
# (curvespeed.rest_step.continuing_shape). Measured +0.004 %, +0.003 % and +0.001 %; with the
# shape kept for a ramp that continues over several stations these were +0.19 %, +0.12 % and
# +0.03 %.
@pytest.mark.parametrize("L", [45.0, 100.0, 500.0])
def test_rest_to_rest_with_a_ramp_just_longer_than_a_step_is_within_the_band(L):
    v, a, j = 10.0, 3.0, 2.0
    assert 1.0 < a ** 3 / (6 * j * j) < 2.0
    total = planned_time(straight_problem(L, 1.0, straight_limits(v, a, j)))
    assert -1e-6 <= total / double_s_time(L, v, a, j) - 1.0 <= 1e-3


# Moves of 2-4 A^3 / J^2 (13.5-27 m at 3 m/s^2 and 2 m/s^3) reach the cap but turn soon;
# planned as if they held it, before the corner rows, they came out below the closed form
# (same source): -0.065 % at 16 m, -0.022 % at 20 m, -0.015 % at 25 m. Planned so again since
# (jerk_model.HELD_LENGTH_FACTOR): not below it (test_reference_rest_moves: within the band).
@pytest.mark.parametrize("L", [16.0, 20.0, 25.0])
def test_moves_that_reach_the_cap_and_turn_at_once_are_not_planned_below_the_closed_form(L):
    v, a, j = 25.0, 3.0, 2.0
    total = planned_time(straight_problem(L, 1.0, straight_limits(v, a, j)))
    assert total / double_s_time(L, v, a, j) - 1.0 >= -1e-6


# The same band where the launch's jerk ramp spans many stations (the move's peak acceleration
# from the same closed form; 8.3, 9.2 and 18 m of ramp here): the launch planned as that ramp
# (curvespeed.launch_steps). Measured +0.0030 %, +0.0034 % and +0.0002 % (+0.020 %, +0.030 %
# and +0.028 % before the ramp's nodes had its own time base; with a staircase of step
# accelerations over the ramp +0.136 %, +0.136 % and +0.102 %).
@pytest.mark.parametrize("L, v, a, j", [(100.0, 10.0, 3.0, 0.5), (200.0, 25.0, 3.0, 0.7),
                                        (500.0, 25.0, 3.0, 0.5)])
def test_rest_to_rest_whose_launch_spans_many_stations_is_within_the_band(L, v, a, j):
    total = planned_time(straight_problem(L, 1.0, straight_limits(v, a, j)))
    assert -1e-6 <= total / double_s_time(L, v, a, j) - 1.0 <= 1e-3


# Every move of 200 m and 500 m at the default spacing over the caps of the benchmark's sweep
# (benchmarks/exact_roads.py: top speed 10 and 25 m/s, 1, 1.5 and 3 m/s^2, 0.5-4 m/s^3; 48
# moves) is within the band of the closed form (same source). Measured 0.0001-0.039 %
# (0.000-0.089 % with a staircase over launch ramps shorter than 5 stations; docs/method.md).
@pytest.mark.parametrize("L", [200.0, 500.0])
def test_long_rest_to_rest_moves_are_within_the_band(L):
    import itertools

    for v, a, j in itertools.product((10.0, 25.0), (1.0, 1.5, 3.0), (0.5, 1.0, 2.0, 4.0)):
        total = planned_time(straight_problem(L, 1.0, straight_limits(v, a, j)))
        assert -1e-6 <= total / double_s_time(L, v, a, j) - 1.0 <= 1e-3, (v, a, j)


# Where the ramp ends half a station past a node, a staircase of step accelerations made the
# turn of the acceleration quicker than a ramp can: a move that turns at once (12 times the
# ramp: 54 m) came out 0.005 % below the closed form (same source) when planned as a ramp up to
# its last whole station only. Driven through its peak in the step where the ramp ends
# (curvespeed.launch_steps), it is +0.0071 %, and +0.0050 % at 5.5 stations of ramp (66 m).
@pytest.mark.parametrize("L", [54.0, 66.0])
def test_launches_that_turn_at_once_are_not_planned_below_the_closed_form(L):
    total = planned_time(straight_problem(L, 1.0, straight_limits(40.0, 8.0, 1.0)))
    assert 0.0 <= total / double_s_time(L, 40.0, 8.0, 1.0) - 1.0 <= 2e-3


def test_a_launch_spanning_many_stations_takes_the_time_of_the_jerk_ramp():
    # Uniform-jerk kinematics (same source): a ramp from rest at J reaches distance s at
    # t = (6 s / J)^(1/3) with v = (J / 2) t^2. The 200 m move at 3 m/s^2, 0.5 m/s^3 and 40
    # m/s ramps over its first L / 12 = 16.7 m (peak J (L / (2 J))^(1/3) = 2.92 m/s^2): with
    # the ramp's own speeds at the stations, the launch planned as that ramp (the first step a
    # ramp over the whole step, the next ones at the time of a step driven at the bound) reaches
    # every station of it at the ramp's time (round-off only). Steps of constant acceleration
    # between the same speeds take 0.008 s less by station 16.
    J, ds = 0.5, 1.0
    problem = straight_problem(200.0, ds, straight_limits(40.0, 3.0, J), staircase=True)
    assert problem.rest_u[0] == 1.0 and problem.rest_u[-1] == 1.0
    k = np.arange(17)
    b = np.full(problem.n_nodes, 1.0)
    b[k] = (0.5 * J * np.cbrt(6.0 * k * ds / J) ** 2) ** 2
    t = np.concatenate(([0.0], np.cumsum(problem.step_times(b)[:16])))
    assert np.max(np.abs(t - np.cbrt(6.0 * k * ds / J))) < 1e-12
    plain = np.cumsum(2.0 * ds / (np.sqrt(b[k[1:-1]]) + np.sqrt(b[k[2:]])))
    assert np.cbrt(6.0 * 16 * ds / J) - (plain[-1] + t[1]) > 0.007
    # the stop at the end is the same ramp backwards
    assert problem.time_coef[-17:-1][::-1] == pytest.approx(problem.time_coef[1:17], rel=1e-15)


def test_change_of_acceleration_after_a_ramp_over_the_whole_step_runs_on_into_the_next():
    # The moving station of a step that ramps over its whole length changes its acceleration
    # over the time from it to the next step's distance-weighted mean time, which for a step
    # of constant acceleration between speeds v and v' is 2 ds (v + 2 v') / (3 (v + v')^2)
    # (integrating t over distance; the step's b-linear acceleration is a jerk ramp's value at
    # that time). The terms of that time base are a lower bound on it, within 0.1 % at the
    # speed ratio of a ramp from rest (2^(2/3)) and 4.2 % anywhere (chords of a convex
    # function). A launch planned as its ramp scales them so that the ramp itself meets them:
    # there the next step is driven at the bound too, and its distance-weighted mean time
    # comes 0.94 % later (Gauss-Legendre on the ramp, curvespeed.launch_motion).
    from dataclasses import replace

    from curvespeed.jerk_model import jerk_time_terms
    from curvespeed.launch_motion import JerkPieces

    ds, J = 1.0, 0.5
    problem = straight_problem(200.0, ds, straight_limits(40.0, 3.0, J), staircase=True)
    raw = replace(problem, jerk_terms=jerk_time_terms(problem.n_nodes, False, problem.rest_u,
                                                      problem.accel_factor_start))
    rng = np.random.default_rng(3)
    b = np.full(problem.n_nodes, 4.0)
    for v, r in zip(rng.uniform(0.5, 3.0, 200), np.concatenate(([2 ** (2 / 3)],
                                                                  rng.uniform(0.0, 8.0, 199)))):
        b[1], b[2] = v * v, (r * v) ** 2
        exact = 2 * ds * (v + 2 * r * v) / (3 * (v + r * v) ** 2)
        tau = raw.node_jerk_time(b)[1]
        assert exact * (1 - 0.042) <= tau <= exact * (1 + 1e-12)
        if r == 2 ** (2 / 3):
            assert tau >= exact * (1 - 1e-3)
    # at the ramp's own speeds (v = J t^2 / 2, s = J t^3 / 6), the launch's base at station 1
    t = np.cbrt(6.0 * np.arange(4) * ds / J)
    b[:4] = (0.5 * J * t * t) ** 2
    mean_time = JerkPieces((0.0,), (J,)).mean_time(t[1], t[2], ds)
    assert problem.node_jerk_time(b)[1] == pytest.approx(mean_time - t[1], rel=1e-10)
    assert (mean_time - t[1]) / (2 * ds * (t[1] ** 2 + 2 * t[2] ** 2) / J / (
        3 * (t[1] ** 2 + t[2] ** 2) ** 2 / 2)) == pytest.approx(1.0094, abs=1e-4)


def test_step_next_to_rest_leaves_the_rest_of_the_rise_to_its_moving_node():
    # Uniform-jerk kinematics (same source): the step leaving rest ramps at exactly the bound J
    # to its end acceleration a1 = f b / (2 ds), and the change from a1 to the cap A, a ramp
    # at J symmetric about the moving node, takes (A - a1) / J: exactly twice the step's flat
    # part t2, whose time the change's first half uses (bisection to 2^-60: round-off only).
    # 3 m/s^2 at 2 m/s^3 does not fit in a 1 m step (at most (6 J^2 ds)^(1/3) = 2.88 m/s^2).
    from curvespeed import rest_step

    A, J, ds = 3.0, 2.0, 1.0
    problem = straight_problem(60.0, ds, straight_limits(10.0, A, J), staircase=True)
    u = problem.rest_u[0]
    b1 = problem.cap_b[1]
    assert problem.cap_source[1] == "jerk_launch"
    assert rest_step.ramp_jerk(u, b1, ds) == pytest.approx(J, rel=1e-12)
    a1 = rest_step.accel_factor(u) * b1 / (2 * ds)
    t2 = rest_step.flat_time_coef(u) * ds / math.sqrt(b1)
    assert (A - a1) / J == pytest.approx(2 * t2, rel=1e-9)
    assert problem.rest_u[-1] == u                  # the stop at the end: the same, backwards
    # a move too short for the acceleration to reach A (2 A^3 / J^2 = 13.5 m, same source) is
    # planned as the closed form's launch (peak J (L / (2 J))^(1/3), ramp L / 12 = 1 m): the
    # step leaving rest ramps all the way, the next one is driven linearly in time
    short = straight_problem(12.0, ds, straight_limits(10.0, A, J), staircase=True)
    assert short.rest_u[0] == 1.0 and short.time_coef[1] != 2.0


def test_which_moves_reach_the_acceleration_cap_follows_the_double_s_closed_form():
    # Same source: a rest-to-rest move reaches the acceleration cap A when it is at least
    # 2 A^3 / J^2 long (13.5 m for 3 m/s^2 at 2 m/s^3) and its top speed at least A^2 / J
    # (4.5 m/s); planned for from there on (jerk_model.HELD_LENGTH_FACTOR). A launch towards an
    # open end at speed counts twice its distance (the mirror of the launch would stop there);
    # on a loop the stretch runs from stop to stop around it.
    from curvespeed.jerk_model import accel_held, rest_nodes

    def held(problem):
        rest = rest_nodes(problem)
        leaving = rest[:-1]
        steps = np.flatnonzero(leaving | rest[1:])
        return accel_held(problem, rest, steps, leaving[steps], np.full(steps.size, 3.0))

    lim = straight_limits(10.0, 3.0, 2.0)
    assert held(straight_problem(14.0, 1.0, lim)).tolist() == [True, True]
    assert held(straight_problem(13.0, 1.0, lim)).tolist() == [False, False]
    assert not held(straight_problem(60.0, 1.0, straight_limits(4.4, 3.0, 2.0))).any()
    at_speed = RouteConstraints(end_speed_mps=5.0)
    assert held(straight_problem(7.0, 1.0, lim, at_speed)).tolist() == [True]
    assert held(straight_problem(6.0, 1.0, lim, at_speed)).tolist() == [False]
    loop = circle_geometry(1000.0 / (2 * math.pi))          # 1000 m around
    one = build_problem(loop, lim, RouteConstraints(stops=(Stop(100.0),)))
    assert held(one).tolist() == [True, True]
    two = build_problem(loop, lim, RouteConstraints(stops=(Stop(100.0), Stop(110.0))))
    # steps into 100, out of 100, into 110, out of 110: 10 m between the stops, 990 m around
    assert held(two).tolist() == [True, False, False, True]


def test_leaving_rest_costs_nothing_over_the_optimum_at_the_default_spacing():
    # From rest to the top speed and on at it (end speed = top speed), default limits: the
    # optimum takes L / v + T_a / 2 with T_a = a / j + v / a (same source: the acceleration
    # phase of the double-S covers v T_a / 2). A step of constant jerk over the whole first
    # metre cost 0.61 s here; with the ramp and constant acceleration inside the step, the
    # launch is exact: within 0.01 s (measured 1e-4 s, the steps at speed).
    lim = Limits()
    L, v = 400.0, 20.0
    problem = straight_problem(L, 1.0, lim.replace(max_speed_mps=v),
                               RouteConstraints(end_speed_mps=v))
    t_a = lim.max_accel_mps2 / lim.max_jerk_mps3 + v / lim.max_accel_mps2
    optimum = L / v + t_a / 2
    assert optimum <= planned_time(problem) <= optimum + 0.01


def test_step_leaving_rest_is_the_start_of_the_jerk_limited_launch():
    # Uniform-jerk kinematics (same source, the first two phases of the double-S): from rest at
    # jerk 2 m/s^3 to 1.5 m/s^2 takes 0.75 s and 0.140625 m, reaching 0.5625 m/s; constant
    # 1.5 m/s^2 over the rest of a 1 m step gives v^2 = 0.5625^2 + 2 * 1.5 * 0.859375 =
    # 2.89453125 m^2/s^2 after 0.75 + (sqrt(2.89453125) - 0.5625) / 1.5 = 1.5092215 s. The
    # problem's step next to rest must be exactly that motion (closed forms: round-off only).
    problem = straight_problem(10.0, 1.0, Limits(max_accel_mps2=1.5, max_jerk_mps3=2.0))
    b1 = 2.89453125
    assert problem.cap_b[1] == pytest.approx(b1, rel=1e-12)
    assert problem.cap_source[1] == "jerk_launch"
    b = np.full(problem.n_nodes, b1)
    b[0] = b[-1] = 0.0
    assert problem.step_times(b)[0] == pytest.approx(0.75 + (math.sqrt(b1) - 0.5625) / 1.5,
                                                     rel=1e-12)
    d = derive(problem, b)
    assert d["step_accel_first_mps2"][0] == 0.0
    assert d["step_accel_last_mps2"][0] == pytest.approx(1.5, rel=1e-12)
    assert d["step_jerk_mps3"][0] == pytest.approx(2.0, rel=1e-12)


# Jerk-limited stop from v0 (same source, a rest-to-rest motion read backwards): when
# v0 j >= a^2 the distance is v0^2 / (2 a) + v0 a / (2 j). Braking onset is found on the grid,
# so the distance is compared within one station step.
@pytest.mark.parametrize("v0, a, j", [(20.0, 2.0, 1.0), (15.0, 1.5, 1.5), (25.0, 2.5, 2.0)])
def test_jerk_limited_stopping_distance(v0, a, j):
    assert v0 * j >= a * a
    ds, stop_at = 0.5, 300.0
    limits = Limits(max_speed_mps=v0, max_accel_mps2=a, max_decel_mps2=a, max_jerk_mps3=j,
                    friction_coefficient=0.9)
    problem = straight_problem(400.0, ds, limits,
                               RouteConstraints(start_speed_mps=v0, stops=(Stop(stop_at),)))
    v = np.sqrt(solve_convex(problem).b)
    k_stop = int(round(stop_at / ds))
    cruising = np.flatnonzero(v[:k_stop] >= v0 * (1 - 1e-6))
    distance = stop_at - problem.station_m[cruising[-1]]
    assert distance == pytest.approx(v0 ** 2 / (2 * a) + v0 * a / (2 * j), abs=ds)


# Slowing from v0 at zero deceleration to v1 with deceleration up to a and jerk up to j (same
# source, uniform-jerk kinematics): integrated with a 1e-5 s step (the ramp, then the cap) as the
# independent reference for curvespeed.diagnose.braking_reach, which refusals quote; a change
# that ends on the ramp (4 m/s at 2.5 m/s^2 and 0.5 m/s^3 needs 6.25 m/s of ramp) and ones that
# reach the cap. Agreement to 1e-3 m (the integration's step).
@pytest.mark.parametrize("v0, v1, a, j", [(20.0, 10.0, 2.5, 2.0), (25.0, 5.0, 3.0, 1.0),
                                          (20.0, 16.0, 2.5, 0.5), (15.0, 0.0, 1.5, 4.0)])
def test_braking_reach_matches_integrated_uniform_jerk_braking(v0, v1, a, j):
    from curvespeed.diagnose import braking_reach

    dt, v, decel, s = 1e-5, v0, 0.0, 0.0
    while v > v1:
        decel = min(decel + j * dt, a)
        v_next = v - decel * dt
        s += 0.5 * (v + max(v_next, v1)) * dt * (min(1.0, (v - v1) / (v - v_next)))
        v = v_next
    assert float(braking_reach(v0, v1, a, j)) == pytest.approx(s, abs=1e-3)


# -- lateral jerk: spirals ---------------------------------------------------------------------
# Shortt's relation for transition spirals (1909), in AASHTO, A Policy on Geometric Design of
# Highways and Streets (2011), section 3.3.8, as L = V^3 / (R C), metric 0.0214 V^3 / (R C) with V
# in km/h (from memory; 0.0214 = 1 / 3.6^3): a clothoid of length L into a circle of radius R,
# driven at constant speed v, changes the lateral acceleration v^2 / R at the rate C = v^3 / (R L).

def spiral_route(R: float, L: float, ds: float = 1.0):
    """300 m straight, a clothoid of length L (curvature linear in station), 300 m of circle."""
    s = np.arange(0.0, 600.0 + L + ds / 2, ds)
    kappa = np.interp(s, [0.0, 300.0, 300.0 + L, 600.0 + L], [0.0, 0.0, 1.0 / R, 1.0 / R])
    return s, geometry_from_curvature(kappa, ds=ds)


@pytest.mark.parametrize("R, L, v", [(300.0, 60.0, 20.0), (150.0, 40.0, 12.0)])
def test_lateral_jerk_on_a_clothoid_at_constant_speed(R, L, v):
    # The per-step definition is exact here: every step inside the spiral has C = v^3 / (R L).
    s, geo = spiral_route(R, L)
    problem = build_problem(geo, Limits(max_jerk_mps3=None), RouteConstraints())
    rate = problem.step_lateral_jerk(np.full(s.size, v * v))
    inside = (s[:-1] >= 300.0) & (s[1:] <= 300.0 + L)
    np.testing.assert_allclose(rate[inside], v ** 3 / (R * L), rtol=1e-12)
    assert np.all(rate[(s[1:] <= 300.0) | (s[:-1] >= 300.0 + L)] == 0.0)


@pytest.mark.parametrize("R, L, a", [(300.0, 60.0, 0.8), (150.0, 40.0, -0.4)])
def test_lateral_jerk_accelerating_through_a_clothoid_is_its_value_at_the_faster_end(R, L, a):
    # Driven at constant acceleration a, d(kappa v^2)/dt = kappa' v^3 + 2 kappa v a (chain rule
    # with ds/dt = v; textbook kinematics). Entering the spiral (kappa and kappa' >= 0) it grows
    # with speed, so each step's lateral jerk is its value at the faster end: exact (curvature
    # linear along every step), and above the step's average (the change of kappa v^2 over its
    # time), which the bound used to be. Tolerance: round-off of the curvature differences.
    s, geo = spiral_route(R, L)
    problem = build_problem(geo, Limits(max_jerk_mps3=None), RouteConstraints())
    b = (15.0 if a > 0 else 30.0) ** 2 + 2.0 * a * s     # 12-42 m/s
    v, kappa = np.sqrt(b), geo.curvature_1pm
    inside = (s[:-1] >= 300.0) & (s[1:] <= 300.0 + L)
    rate = np.where(inside, 1.0 / (R * L), 0.0)
    k = np.arange(s.size - 1) + (1 if a > 0 else 0)   # the faster end of each step
    exact = rate * v[k] ** 3 + 2.0 * kappa[k] * v[k] * a
    got = problem.step_lateral_jerk(b)
    np.testing.assert_allclose(got[inside], exact[inside], rtol=1e-12)
    average = np.diff(kappa * b) / problem.step_times(b)
    assert np.all(np.abs(got[inside]) > np.abs(average[inside]))
    circle = s[:-1] >= 300.0 + L + 2.0                # two steps past the joint
    np.testing.assert_allclose(got[circle], exact[circle], rtol=1e-12)


@pytest.mark.parametrize("R, L, C", [(300.0, 60.0, 0.5), (400.0, 80.0, 0.3)])
def test_spiral_speed_under_a_lateral_jerk_bound_is_shortts(R, L, C):
    # With the rate of change of lateral acceleration bounded by C, no profile can be faster
    # than v = (C R L)^(1/3) inside the spiral once it has slowed to it (accelerating there only
    # adds lateral jerk), and holding that speed keeps the bound exactly, so the fastest
    # profile drives it. Top speed 15 % above it, lateral comfort not binding; the longitudinal
    # jerk is left free so the braking before the spiral can end at its entry. Near the entry
    # the profile may still be braking, which lowers the lateral jerk: from 10 m in, the speed
    # must match. Tolerance 1e-4: the rows are tightened by 1e-5 of C (speed 3e-6); measured
    # 1e-5.
    v_s = (C * R * L) ** (1 / 3)
    s, geo = spiral_route(R, L)
    cap = 1.15 * v_s
    assert math.sqrt(2.5 * R) > cap                 # the circle's comfort speed is higher
    limits = Limits(max_jerk_mps3=None, max_lateral_jerk_mps3=C, max_speed_mps=cap)
    problem = build_problem(geo, limits, RouteConstraints(start_speed_mps=cap,
                                                          end_speed_mps=cap))
    result = solve_convex(problem)
    assert verify_profile(problem, result.b, tolerance=1e-4).ok
    v = np.sqrt(result.b)
    inside = (s >= 310.0) & (s <= 300.0 + L)
    np.testing.assert_allclose(v[inside], v_s, rtol=1e-4)
    assert np.max(np.abs(problem.step_lateral_jerk(result.b))) <= C * (1 + 1e-4)
