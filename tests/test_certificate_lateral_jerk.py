"""Certificate tests of the lateral jerk bound: it holds for the motion as driven.

The lateral jerk of a point mass at station ``s(t)`` is ``d(kappa(s) v^2)/dt =
kappa'(s) v^3 + 2 kappa(s) v a`` (chain rule, ``ds/dt = v``). Roads here are design alignments:
curvature piecewise linear in station (straights, arcs, clothoids), its joints anywhere between
stations, every element at least two station steps long. The planner sees the curvature at the
stations only. Whatever the speeds, the lateral jerk of the motion export drives (constant
acceleration per step; a jerk ramp then constant acceleration next to rest) must stay within
what the problem's definition reports, sampled densely along every step and on both sides of
every joint; and a plan on such a road, judged on the exact road, must keep the bound and not be
faster than the independent minimum-time model (benchmarks/oracle.py, checked against closed
forms in test_reference_oracle.py).
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curvespeed import rest_step
from curvespeed.limits import DEFAULT_LIMITS, Limits, RouteConstraints, Stop
from curvespeed.problem import build_problem
from curvespeed.verify import verify_profile

from helpers import geometry_from_curvature

#: The bound is a closed form of the same quantities: only round-off separates it from the
#: largest sampled value where it is attained (a few operations on O(1) numbers).
RTOL = 1e-9
ATOL = 1e-12      # m/s^3, where both are zero (straights)
#: Samples per step, besides the joints inside it (seen from both sides).
SAMPLES = 65

CASES = settings(derandomize=True, max_examples=40, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow])


@st.composite
def design_roads(draw):
    """(joint stations, curvature at the joints, number of 1 m steps): curvature linear between
    joints (flat after the last), joints anywhere, elements at least two steps long.

    A joint within a micrometre of a station is put on it: the model counts curvature rates
    equal to 1e-9 as equal (the stations' curvatures carry round-off), so a joint 1e-15 m
    before a station would show the next element's rate over that sliver of road only.
    """
    n_steps = draw(st.integers(6, 40))
    gaps = draw(st.lists(st.floats(2.00001, 9.0), min_size=1, max_size=20))
    joints = np.concatenate(([0.0], np.cumsum(gaps)))
    joints = np.where(np.abs(joints - np.round(joints)) < 1e-6, np.round(joints), joints)
    joints = joints[joints <= n_steps - 2.0]      # the last element reaches the end, >= 2 m
    values = np.array(draw(st.lists(st.floats(-0.05, 0.05), min_size=joints.size,
                                    max_size=joints.size)))
    return joints, values, n_steps


def road_at(joints, values, s, side):
    """Exact curvature (1/m) and its station rate (1/m^2) at ``s``; ``side`` (-1 or +1, one
    or one per station) says from which side a joint is seen."""
    slopes = np.append(np.diff(values) / np.diff(joints), 0.0)
    piece = np.where(np.asarray(side) < 0, np.searchsorted(joints, s, side="left"),
                     np.searchsorted(joints, s, side="right")) - 1
    return np.interp(s, joints, values), slopes[np.clip(piece, 0, joints.size - 1)]


def problem_on(road, speeds, limits=Limits(max_jerk_mps3=None, max_lateral_jerk_mps3=0.5),
               constraints=RouteConstraints()):
    """The problem on ``road`` as the planner sees it (curvature at the 1 m stations) and the
    squared speeds there."""
    joints, values, n = road
    kappa = road_at(joints, values, np.arange(n + 1.0), +1)[0]
    problem = build_problem(geometry_from_curvature(kappa, ds=1.0), limits, constraints)
    return problem, np.square(speeds[: n + 1])


def samples_along(joints, n_steps):
    """Step index, distance into the step and side of every sample (module docstring)."""
    k, d, side = [], [], []
    for step in range(n_steps):
        inner = joints[(joints > step) & (joints < step + 1)] - step
        for x in np.concatenate((np.linspace(0.0, 1.0, SAMPLES), inner, inner)):
            k.append(step), d.append(x)
        side += [+1] * (SAMPLES - 1) + [-1] + [-1] * inner.size + [+1] * inner.size
    return np.array(k), np.array(d), np.array(side)


@CASES
@given(design_roads(), st.lists(st.floats(1.0, 30.0), min_size=41, max_size=41))
def test_lateral_jerk_as_driven_stays_within_each_steps_bound(road, speeds):
    joints, values, n = road
    problem, b = problem_on(road, speeds)
    bound = np.abs(problem.step_lateral_jerk(b))
    # constant acceleration over each step: v^2 linear in station
    k, d, side = samples_along(joints, n)
    a = (b[k + 1] - b[k]) / 2.0
    v = np.sqrt(b[k] + 2.0 * a * d)
    kappa, rate = road_at(joints, values, k + d, side)
    driven = np.abs(rate * v ** 3 + 2.0 * kappa * v * a)
    within = driven <= bound[k] * (1 + RTOL) + ATOL
    assert within.all(), (k[~within], d[~within], driven[~within], bound[k][~within])


@CASES
@given(design_roads(), st.lists(st.floats(1.0, 30.0), min_size=41, max_size=41))
def test_the_bound_holds_at_a_node_with_either_steps_acceleration(road, speeds):
    # Where the acceleration changes at a node, the road on each side of it meets either
    # step's acceleration (a vehicle cannot switch it exactly there): the node's use, as the
    # verifier reports it, covers all four pairings.
    joints, values, n = road
    problem, b = problem_on(road, speeds)
    use = verify_profile(problem, b).use["lateral_jerk"] * problem.limits.max_lateral_jerk_mps3
    a = np.diff(b) / 2.0
    nodes = np.arange(1, n)
    v = np.sqrt(b[nodes])
    for side in (-1, +1):
        kappa, rate = road_at(joints, values, nodes.astype(float), side)
        for accel in (a[nodes - 1], a[nodes]):
            driven = np.abs(rate * v ** 3 + 2.0 * kappa * v * accel)
            assert np.all(driven <= use[nodes] * (1 + RTOL) + ATOL)


@CASES
@given(design_roads(), st.lists(st.floats(1.0, 30.0), min_size=41, max_size=41),
       st.floats(0.5, 3.0))
def test_steps_next_to_rest_keep_the_bound_through_their_jerk_ramp(road, speeds, jerk):
    # Under a jerk bound a step next to rest is driven as a ramp from zero acceleration, then
    # constant acceleration (curvespeed.rest_step); arriving at rest is the same backwards. A
    # move planned as its closed form may turn inside that step instead
    # (curvespeed.closed_form_moves), but only on a straight road under a lateral jerk bound.
    joints, values, n = road
    stop = n // 2
    problem, b = problem_on(road, speeds, Limits(max_jerk_mps3=jerk, max_lateral_jerk_mps3=0.5),
                            RouteConstraints(stops=(Stop(float(stop)),)))
    b[[0, stop, n]] = 0.0
    bound = np.abs(problem.step_lateral_jerk(b))
    steps = np.flatnonzero(~np.isnan(problem.rest_u))
    switching = np.setdiff1d([0, stop - 1, stop, n - 1], steps)
    assert steps.size + switching.size == 4
    for k in switching:
        move = np.arange(0, stop + 1) if k < stop else np.arange(stop, n + 1)
        assert problem.switch_step[k] > 0 and np.all(problem.kappa_abs[move] == 0.0)
    for k in steps:
        leaving = problem.accel_factor_start[k] == 0.0
        v_moving = np.sqrt(b[k + 1] if leaving else b[k])
        total = rest_step.time_coef(problem.rest_u[k]) / v_moving
        d, v, a = rest_step.leaving_state_at_time(problem.rest_u[k], v_moving, 1.0,
                                                  np.linspace(0.0, total, 4 * SAMPLES))
        s = k + d if leaving else k + 1 - d
        for side in (-1, +1):
            kappa, rate = road_at(joints, values, s, side)
            forward = a if leaving else -a
            driven = np.abs(rate * v ** 3 + 2.0 * kappa * v * forward)
            assert np.all(driven <= bound[k] * (1 + RTOL) + ATOL)


def test_plan_on_an_s_curve_with_joints_between_stations_keeps_the_bound_on_the_road():
    # An invented reverse curve with clothoids whose joints all fall between the 1 m stations,
    # entered and left at 20 m/s under a 0.5 m/s^3 lateral jerk bound. Judged on the exact
    # road (benchmarks/judge.py: the motion as export drives it, every 0.125 m and at every
    # joint): the rows are tightened by 1e-5 and the QPs solved to 1e-8, so the bound holds to
    # CONVEX_TOL (measured 0.99999). Time: the profile's time must not come below the
    # independent optimum by more than its own accuracy (3e-5) plus the station
    # discretisation's optimism elsewhere (the double-S move's, 2e-4 at 1 m): the target
    # -0.1 % (measured +0.15 %; the average-rate model it replaces was -0.40 % here, with the
    # lateral jerk at 1.083 of the bound).
    from benchmarks.exact_roads import s_curve
    from benchmarks.judge import judge_profile
    from benchmarks.oracle import solve_min_time
    from curvespeed.planner import plan_profile

    road = s_curve(120.0, 30.3, 100.0, 20.6, 40.4, 70.3, 40.2, 80.5, 150.0)
    assert np.all(road.breakpoints_m % 1.0 > 0.0)
    limits = DEFAULT_LIMITS.replace(max_lateral_jerk_mps3=0.5)
    profile = plan_profile(road.to_geometry(1.0), limits,
                           RouteConstraints(start_speed_mps=20.0, end_speed_mps=20.0))
    judged = judge_profile(profile, road, limits)
    assert 0.99 <= judged.use["lateral_jerk"] <= 1 + 1e-4
    best = solve_min_time(road, limits, (), 20.0, 20.0)
    assert -1e-3 <= profile.total_time_s / best.time_s - 1.0 <= 1e-2
