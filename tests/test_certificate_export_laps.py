"""Laps joined into one profile (curvespeed.export_laps): properties that hold whatever the laps.

On an invented circular loop (radius 50 m) driven at 10 m/s, with a launch lap from rest at a
constant 1 m/s^2 (v^2 = 2 a s, uniform-acceleration kinematics) and a finish lap braking to
rest the same way: the run's node times are the laps' node times end to end, its stations grow
by one loop length a lap, its heading stays continuous across the joins, and laps that do not
join are refused naming what does not fit.
"""

from __future__ import annotations

import numpy as np
import pytest

from curvespeed.errors import SpeedFileError
from curvespeed.export import make_station_profile, sample_in_time
from curvespeed.export_laps import (check_lap_profiles, join_laps, lap_sequence, with_laps)

R, V, A = 50.0, 10.0, 1.0


def lap(speed, shift_m: float = 0.0, name: str = "lap"):
    s = np.linspace(0.0, 2 * np.pi * R, 201)
    heading = s / R
    x, y = R * np.sin(heading) + shift_m, R * (1.0 - np.cos(heading))
    return make_station_profile(s, x, y, heading, np.full(s.size, 1.0 / R), speed(s),
                                source=name)


FLYING = lap(lambda s: np.full(s.size, V), name="flying")
LAUNCH = lap(lambda s: np.minimum(np.sqrt(2 * A * s), V), name="launch")
FINISH = lap(lambda s: np.minimum(np.sqrt(2 * A * (s[-1] - s)), V), name="finish")


def test_run_times_are_the_laps_times_end_to_end():
    run = join_laps(lap_sequence(FLYING, 4, LAUNCH, FINISH))
    times = [LAUNCH.moving_time_s, FLYING.moving_time_s, FLYING.moving_time_s,
             FINISH.moving_time_s]
    # the same step times summed in another grouping: equal to round-off (1e-12 s on 100 s)
    assert run.profile.moving_time_s == pytest.approx(sum(times), abs=1e-9)
    np.testing.assert_allclose(run.profile.node_time_s[run.lap_nodes],
                               np.concatenate(([0.0], np.cumsum(times))), atol=1e-9)
    np.testing.assert_allclose(run.lap_stations_m, 2 * np.pi * R * np.arange(5), atol=1e-9)
    assert run.kinds == ("launch", "flying", "flying", "finish")


def test_heading_is_continuous_and_keeps_turning_across_joins():
    run = join_laps(lap_sequence(FLYING, 3))
    h = run.profile.heading_rad
    step = 2 * np.pi / 200
    np.testing.assert_allclose(np.diff(h), step, atol=1e-12)   # one step's turn, joins too
    assert h[-1] - h[0] == pytest.approx(3 * 2 * np.pi, abs=1e-9)


def test_samples_know_their_lap_and_the_speed_never_jumps():
    run = join_laps(lap_sequence(FLYING, 3, LAUNCH, FINISH))
    traj = with_laps(sample_in_time(run.profile, 0.1), run)
    assert traj.lap[0] == 1 and traj.lap[-1] == 3 and np.all(np.diff(traj.lap) >= 0)
    # |dv| between samples <= a dt: the launch and finish accelerate at 1 m/s^2, the flying
    # lap at 0; 1e-9 for round-off
    assert np.all(np.abs(np.diff(traj.speed_mps)) <= A * np.diff(traj.time_s) + 1e-9)
    np.testing.assert_allclose(traj.lap_times_s, run.profile.node_time_s[run.lap_nodes],
                               atol=1e-9)


@pytest.mark.parametrize("launch, finish, words", [
    (FLYING, None, "not from rest"),
    (None, FLYING, "not at rest"),
    (lap(lambda s: np.minimum(np.sqrt(2 * A * s), 8.0), name="slow"), None, "speed jumps"),
    (None, lap(lambda s: np.minimum(np.sqrt(2 * A * (s[-1] - s)), V), shift_m=1.0,
               name="moved"), "m apart"),
])
def test_laps_that_do_not_join_are_refused(launch, finish, words):
    with pytest.raises(SpeedFileError, match=words):
        check_lap_profiles(FLYING, launch, finish)


def test_an_open_profile_is_not_a_flying_lap():
    open_route = make_station_profile(np.arange(10.0), np.arange(10.0), np.zeros(10),
                                      np.zeros(10), np.zeros(10), np.full(10, 5.0), source="o")
    with pytest.raises(SpeedFileError, match="apart"):
        check_lap_profiles(open_route)


def test_one_lap_cannot_be_launch_and_finish():
    with pytest.raises(ValueError, match="one lap"):
        lap_sequence(FLYING, 1, LAUNCH, FINISH)


def test_a_launch_lap_turning_in_a_step_keeps_its_turn_in_the_run():
    # A launch lap planned from rest at 0.5 m/s^3 under 8 m/s on a loop of R 50 m (invented)
    # peaks below its 3 m/s^2 cap at sqrt(v J) = 2 m/s^2, J t^3 / 6 = 5.3 m from rest (double-S
    # closed form, Biagiotti & Melchiorri 2008, section 3.4): step 5 is driven through that
    # turn (accel_turn). Joined to a flying lap, the run drives it so too: its acceleration
    # rises to the turn and falls after it, as in the lap alone.
    import dataclasses

    from curvespeed.export import as_station_profile
    from curvespeed.geometry.model import geometry_from_curvature
    from curvespeed.limits import Limits, RouteConstraints
    from curvespeed.planner import plan_profile

    n = int(round(2 * np.pi * R))
    loop = geometry_from_curvature(np.full(n + 1, 1 / R), ds=2 * np.pi * R / n, closed=True)
    limits = Limits(max_jerk_mps3=0.5, max_accel_mps2=3.0, max_decel_mps2=3.0, max_speed_mps=8.0)
    flying = as_station_profile(plan_profile(loop, limits))
    launch = as_station_profile(plan_profile(
        dataclasses.replace(loop, closed=False), limits,
        RouteConstraints(start_speed_mps=0.0, end_speed_mps=float(flying.speed_mps[0]))))
    assert np.flatnonzero(launch.switch_step).tolist() == [5]
    run = join_laps(lap_sequence(flying, 2, launch, None)).profile
    assert np.flatnonzero(run.switch_step).tolist() == [5]
    # the same samples (every 0.01 s from the start) up to the launch lap's last, to round-off
    ours = sample_in_time(run, 0.01).accel_mps2
    alone = sample_in_time(launch, 0.01).accel_mps2
    np.testing.assert_allclose(ours[: alone.size - 1], alone[:-1], atol=1e-12)
