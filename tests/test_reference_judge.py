"""Reference tests of the judge of profiles on the exact road (benchmarks/judge.py).

Profiles with a known motion are built directly on exact alignments (no planner involved) and
the judge's uses are compared with textbook values: lateral acceleration v^2 / R on a circle
(point mass), the jump v^2 / R where an arc meets a straight without a spiral, Shortt's lateral
jerk v^3 / (R L) on a clothoid at constant speed (AASHTO Green Book 2011 section 3.3.8, from
memory), and uniform-acceleration kinematics (time (v1 - v0) / a). The invented roads of the
benchmark are checked against their own description.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from benchmarks._elements import curvature_steps
from benchmarks.exact_roads import exact_roads, write_points
from benchmarks.judge import judge_profile, project_onto
from curvespeed.export import make_station_profile
from curvespeed.geometry.elements import Alignment, arc, line, spiral
from curvespeed.limits import Limits

#: Round-off of a few operations per sample, and the projection's Newton steps (1e-12 m).
RTOL = 1e-9


def profile_on(road: Alignment, station_m, speed_mps, offset_m: float = 0.0):
    """A profile whose rows are at ``station_m`` of ``road``, moved ``offset_m`` to the left."""
    s = np.asarray(station_m, dtype=float)
    x, y = road.position(s)
    h = road.heading(s)
    return make_station_profile(s, x - offset_m * np.sin(h), y + offset_m * np.cos(h), h,
                                road.curvature(s), speed_mps)


LIMITS = Limits(max_jerk_mps3=2.0)


def test_constant_speed_through_an_arc_without_spirals():
    R, v = 80.0, 12.0
    road = Alignment((line(50.0), arc(60.3, R), line(50.0)))
    s = np.linspace(0.0, road.length_m, 161)
    got = judge_profile(profile_on(road, s, np.full(s.size, v)), road, LIMITS)
    lateral = v * v / R
    assert got.use["lateral"] == pytest.approx(lateral / LIMITS.max_lateral_accel_mps2, rel=RTOL)
    assert got.use["comfort_ellipse"] == pytest.approx(got.use["lateral"], rel=RTOL)   # a = 0
    assert got.use["friction_ellipse"] == pytest.approx(
        lateral / (LIMITS.friction_coefficient * LIMITS.gravity_mps2), rel=RTOL)
    assert got.use["top_speed"] == pytest.approx(v / LIMITS.max_speed_mps, rel=RTOL)
    assert got.use["jerk"] == 0.0
    assert got.lateral_step_mps2 == pytest.approx(lateral, rel=RTOL)    # at both arc ends
    assert got.lateral_jerk_mps3 == pytest.approx(0.0, abs=1e-12)      # away from the steps
    assert got.driven_time_s == pytest.approx(road.length_m / v, rel=RTOL)


def test_lateral_jerk_on_a_clothoid_at_constant_speed_is_shortts():
    R, L, v = 150.0, 40.0, 14.0
    road = Alignment((line(30.0), spiral(L, 0.0, 1.0 / R), arc(30.0, R)))
    s = np.linspace(0.0, road.length_m, 101)
    got = judge_profile(profile_on(road, s, np.full(s.size, v)), road,
                        LIMITS.replace(max_lateral_jerk_mps3=1.0))
    assert got.lateral_jerk_mps3 == pytest.approx(v ** 3 / (R * L), rel=RTOL)
    assert got.use["lateral_jerk"] == pytest.approx(v ** 3 / (R * L), rel=RTOL)
    assert got.lateral_step_mps2 == 0.0


def test_uniform_acceleration_on_a_straight_rows_off_the_road():
    # rows 5 mm beside the road, labelled with stations shifted by 0.3 m: the judge finds the
    # exact stations by projection, so the motion is the same as on the road itself
    road = Alignment((line(200.0),))
    v0, a = 5.0, 1.2
    s = np.linspace(0.0, 200.0, 201)
    v = np.sqrt(v0 * v0 + 2.0 * a * s)
    sp = profile_on(road, s, v, offset_m=0.005)
    shifted = make_station_profile(s + 0.3, sp.x_m, sp.y_m, sp.heading_rad, sp.curvature_1pm, v)
    got = judge_profile(shifted, road, LIMITS)
    assert got.max_offset_m == pytest.approx(0.005, rel=1e-6)
    assert got.driven_time_s == pytest.approx((v[-1] - v0) / a, rel=RTOL)
    assert got.use["comfort_ellipse"] == pytest.approx(a / LIMITS.max_accel_mps2, rel=RTOL)
    # steady after the end: the acceleration a is given back over half the last step, the
    # shortest (fastest) one, which is the largest jerk of the motion
    last_step_s = 2.0 / (v[-2] + v[-1])
    assert got.use["jerk"] == pytest.approx(a / (0.5 * last_step_s) / LIMITS.max_jerk_mps3,
                                            rel=RTOL)


def test_projection_recovers_stations_on_curves():
    road = exact_roads()[4].alignment
    s = np.linspace(0.0, road.length_m, 997)
    x, y = road.position(s)
    got, offset = project_onto(road, x, y)
    np.testing.assert_allclose(got, s, atol=1e-9)
    np.testing.assert_allclose(offset, 0.0, atol=1e-9)


def test_invented_roads_are_as_described(tmp_path):
    roads = {case.name: case for case in exact_roads()}
    winding = roads["winding"].alignment
    arcs = [e for e in winding.elements if e.start_1pm == e.end_1pm != 0.0]
    steps = curvature_steps(winding) != 0.0
    assert winding.length_m == pytest.approx(2000.0, abs=1e-9)
    assert len(arcs) == 10 and steps.sum() == 4          # two arcs without spirals, both ends
    stop = roads["winding-stop"].stops[0]
    assert winding.curvature(stop) == 0.0 and abs(stop - 1000.0) < 100.0
    assert roads["wet"].limits.friction_coefficient == 0.3
    for name in ("s-curve-lateral-jerk", "s-curve-from-rest"):
        road = roads[name].alignment
        assert np.all(curvature_steps(road) == 0.0)      # clothoids everywhere: no step
        assert np.any([e.start_1pm * e.end_1pm < 0.0 for e in road.elements])  # reverse curve
    path = write_points(roads["s-curve-from-rest"].alignment, tmp_path / "road.csv")
    rows = np.loadtxt(path, delimiter=",", skiprows=1)
    length = roads["s-curve-from-rest"].alignment.length_m
    assert rows.shape == (round(length) + 1, 2) and length == round(length)
    chords = np.hypot(*np.diff(rows, axis=0).T)
    # 1 m of arc: chords a little shorter on curves; coordinates rounded to 0.1 mm move a chord
    # by up to sqrt(2) 1e-4 m
    assert np.all((chords > 1.0 - 1e-3) & (chords <= 1.0 + 1.5e-4))
    assert math.isclose(chords.sum(), length, rel_tol=1e-4)


def test_the_change_at_a_stops_moving_node_is_read_as_the_planner_bounds_it():
    # docs/method.md: at the moving node of a step next to rest the change of acceleration is a
    # ramp symmetric about the node over the smaller of twice the step's constant part and the
    # neighbouring step's time. The S-curve from rest planned on its exact geometry at 3 m/s^2
    # and 1.2 m/s^3 ends in such a step with a constant part of 0.22 s after a 0.45 s step: read
    # from the middle of the neighbour to the middle of the constant part (0.33 s), as before,
    # the judge found 1.33 of the jerk bound there, where the planner's ramp (0.44 s) is at it.
    from benchmarks.exact_roads import plan_on_exact_geometry
    from benchmarks.judge import on_exact_stations, profile_jerk
    from curvespeed import rest_step

    case = next(c for c in exact_roads() if c.name == "s-curve-from-rest")
    limits = case.limits.replace(max_accel_mps2=3.0, max_decel_mps2=3.0, max_jerk_mps3=1.2)
    case = dataclasses.replace(case, limits=limits)
    profile = plan_on_exact_geometry(case)
    sp, _ = on_exact_stations(profile, case.alignment)
    k = sp.step_time_s.size - 1                             # the step arriving at rest
    u = float(rest_step.shape_from_time_coef(sp.rest_time_coef[k]))
    flat = sp.step_time_s[k] - float(rest_step.ramp_time(u, sp.speed_mps[k], 1.0))
    assert sp.rest_step[k] and flat < sp.step_time_s[k - 1] / 2     # the case at issue
    jerk, _ = profile_jerk(sp)
    assert np.max(np.abs(jerk)) <= 1.2 * (1.0 + 1e-6)
    assert judge_profile(profile, case.alignment, limits).use["jerk"] <= 1.0 + 1e-6
