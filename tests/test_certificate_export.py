"""Certificate tests of the trajectory export: properties that hold whatever the profile.

Round trip through the files: plan -> profile CSV -> read back -> export -> trajectory CSV ->
read back; then re-integrate time from the written positions and speeds, and check monotonic
stations, yaw rate = speed * curvature, held stops and station-step sampling.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from curvespeed import rest_step
from curvespeed.errors import SpeedFileError
from curvespeed.export import (SamplingMode, StationProfile, make_station_profile,
                               sample_by_station, sample_in_time)
from curvespeed.io.profile_csv import read_station_profile, write_profile_csv
from curvespeed.io.table_csv import read_table_csv
from curvespeed.io.trajectory import write_trajectory_csv
from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed.planner import plan_profile

from helpers import CLOSED_FORM_RTOL, geometry_from_curvature

#: Half a unit in the last written decimal of each column (io.trajectory number formats).
HALF_1E6 = 0.5e-6      # times, speeds, accelerations
HALF_1E7 = 0.5e-7      # yaw rate
HALF_1E9 = 0.5e-9      # curvature

STOPS_M = (120.0, 260.0)


def winding_geometry(ds: float = 1.0):
    """Invented test alignment: straight, left curve R 40 m and right curve R 60 m with
    clothoid transitions, straight; 400 m."""
    knots_s = [0, 60, 90, 150, 180, 200, 230, 290, 320, 400]
    knots_k = [0, 0, 1 / 40, 1 / 40, 0, 0, -1 / 60, -1 / 60, 0, 0]
    s = np.arange(int(round(400 / ds)) + 1) * ds
    return geometry_from_curvature(np.interp(s, knots_s, knots_k), ds=ds, name="winding")


@pytest.fixture(scope="module")
def planned():
    geo = winding_geometry()
    stops = RouteConstraints(stops=tuple(Stop(s) for s in STOPS_M))
    return plan_profile(geo, Limits(), stops)


@pytest.fixture(scope="module")
def profile_csv(planned, tmp_path_factory):
    path = tmp_path_factory.mktemp("profile") / "winding.csv"
    write_profile_csv(planned, path)
    return path


def exported(profile_csv, tmp_path, dwell_s: float, dt_s: float = 0.05):
    sp = read_station_profile(profile_csv)
    tr = sample_in_time(sp, dt_s, dwell_s)
    out = write_trajectory_csv(tr, tmp_path / "trajectory.csv")
    return sp, tr, read_table_csv(out).columns


def interval_times(d, v0, v1, a0, a1):
    """Time to cover ``d`` between two samples from their speeds and accelerations.

    Solves ``d = h (v0 + v1) / 2 + h^2 (a0 - a1) / 12`` for ``h``: the trapezoid rule with its
    end correction (Euler-Maclaurin), exact when speed is a polynomial of degree <= 3 in time
    over the interval, so for both constant-acceleration and constant-jerk motion. Intervals at
    rest (both speeds zero) take no moving time.
    """
    c1 = 0.5 * (v0 + v1)
    c2 = (a0 - a1) / 12.0
    root = np.sqrt(np.maximum(c1 * c1 + 4.0 * c2 * d, 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(c1 + root > 0.0, 2.0 * d / (c1 + root), 0.0)
    return np.where((v0 > 0.0) | (v1 > 0.0), h, 0.0)


def reintegrated_moving_time(tr) -> float:
    """Moving time re-integrated from a trajectory's positions, speeds and accelerations.

    Intervals between two moving samples: :func:`interval_times`. An interval with one end at
    rest (leaving or reaching a stop, the start, the end) is power-law motion from rest,
    ``s ~ t^p`` (p = 2 at constant acceleration, 3 at constant jerk): then ``v = p s / t`` and
    ``a = (p - 1) v / t``, so ``p = q / (q - 1)`` with ``q = v^2 / (s |a|)`` and ``t = p s / v``,
    all from the moving end (the sample at rest carries the hold's zero acceleration).
    """
    d = np.hypot(np.diff(tr.x_m), np.diff(tr.y_m))
    v, a = tr.speed_mps, tr.accel_mps2
    v0, v1, a0, a1 = v[:-1], v[1:], a[:-1], a[1:]
    h = interval_times(d, v0, v1, a0, a1)
    one_rest = (v0 == 0.0) != (v1 == 0.0)
    vm = np.where(v0 > 0.0, v0, v1)[one_rest]
    am = np.abs(np.where(v0 > 0.0, a0, a1))[one_rest]
    q = vm * vm / (d[one_rest] * am)
    h[one_rest] = q / (q - 1.0) * d[one_rest] / vm
    return float(np.sum(h))


# Re-integration uses the trajectory's own float64 values: the file's 0.1 mm positions cannot
# resolve the time of the last few millimetres before a stop (0.05 mm at 5 mm/s is 10 ms); the
# file's agreement with those values is checked separately below. At an interior stop the dwell
# is positive here: with dwell 0 the instant of rest falls inside a sample interval whose two
# ends both move, and nothing in the samples says when inside it the vehicle stood still (the
# stop-free route covers dwell 0).
@pytest.mark.parametrize("max_jerk, stops_m, dwell_s", [
    (None, (), 0.0), (None, STOPS_M, 4.0), (2.0, (), 0.0), (2.0, STOPS_M, 4.0),
])
def test_round_trip_time_matches_the_profile(max_jerk, stops_m, dwell_s):
    geo = winding_geometry()
    planned = plan_profile(geo, Limits(max_jerk_mps3=max_jerk),
                           RouteConstraints(stops=tuple(Stop(s) for s in stops_m)))
    tr = sample_in_time(planned, 0.05, dwell_s)
    moving = reintegrated_moving_time(tr)
    # Required: within 0.1 %. Expected error: the rule is exact inside a step; an interval
    # straddling a node where the acceleration jumps by da errs by about da dt^2 / 8 in distance
    # (<= 4 * 0.05^2 / 8 = 1.3 mm at a 1.5 -> -2.5 m/s^2 switch), and chords miss the arc by
    # dp^3 kappa^2 / 24 (< 1e-5 m here). A few dozen such intervals over ~400 m give well under
    # 1e-4 relative: asserted.
    assert moving == pytest.approx(planned.total_time_s, rel=1e-4)
    assert tr.time_s[-1] == pytest.approx(planned.total_time_s + len(stops_m) * dwell_s,
                                          rel=CLOSED_FORM_RTOL)
    assert np.all(np.diff(tr.station_m) >= 0.0)


# A launch whose jerk ramp spans many stations (0.5 m/s^3) is planned as that ramp: its steps
# are driven at constant jerk (curvespeed.rest_step.linear_accel_step). Such a step ends above
# its mean acceleration, so it must not end past a limit: with the cap at 2 m/s^2 (ramp to
# 5.3 m) the trajectory stays within it. A low-friction stretch from 6 m on (mu 0.15: at most
# 1.47 m/s^2, where the ramp would be at 2.1 m/s^2) keeps the launch from its closed form's
# course (the jerk-free envelope lies below it), so the launch keeps the staircase; the
# trajectory stays within that limit too. Round trip as above (interval_times is exact for
# constant-jerk motion).
@pytest.mark.parametrize("accel, friction", [(2.0, None), (3.0, 0.15)])
def test_launch_ramp_is_driven_within_the_limits(accel, friction):
    from curvespeed.friction import FrictionSection

    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    sections = () if friction is None else (FrictionSection(6.0, 40.0, friction),)
    planned = plan_profile(geo, Limits(max_jerk_mps3=0.5, max_accel_mps2=accel,
                                       max_decel_mps2=accel, max_speed_mps=30.0),
                           RouteConstraints(friction=sections))
    as_ramp = planned.linear_time_coef is not None and np.any(planned.linear_time_coef > 2.0)
    assert as_ramp == (friction is None)
    tr = sample_in_time(planned, 0.01)
    cap = np.full(tr.n_samples, accel)
    if friction is not None:
        on = (tr.station_m >= 6.0) & (tr.station_m <= 40.0)
        cap[on] = friction * 9.80665
    assert np.all(tr.accel_mps2 <= cap * (1.0 + 1e-6))
    assert np.all(-tr.accel_mps2 <= accel * (1.0 + 1e-6))
    assert reintegrated_moving_time(tr) == pytest.approx(planned.total_time_s, rel=1e-6)


def test_written_trajectory_holds_the_exported_values(profile_csv, tmp_path):
    sp, tr, cols = exported(profile_csv, tmp_path, dwell_s=2.0)
    for name, half in (("time_s", HALF_1E6), ("station_m", 0.5e-4), ("x_m", 0.5e-4),
                       ("y_m", 0.5e-4), ("speed_mps", HALF_1E6), ("accel_mps2", HALF_1E6),
                       ("curvature_1pm", HALF_1E9), ("yaw_rate_radps", HALF_1E7)):
        # each cell is the value rounded to its format: within half a unit (plus float slack)
        np.testing.assert_allclose(cols[name], getattr(tr, name), rtol=0, atol=half * 1.001)


def test_node_times_are_the_profiles_own_times(planned, profile_csv):
    # no drift: node times recomputed from the written stations and speeds reproduce the
    # profile's time_s; the file rounds stations to 0.1 mm and speeds to 1e-6 m/s, which moves
    # a 1 m step's time by < 1e-4 of itself and telescopes over the route: 1e-5 relative.
    sp = read_station_profile(profile_csv)
    np.testing.assert_allclose(sp.node_time_s, planned.time_s, rtol=1e-5, atol=1e-5)


# A fitted route's spacing is the requested one shortened to divide its length (here that of a
# wet-road stop planned from a simulated RTK log), so its stations are not round numbers. The
# time coefficient c of a jerk_ramp or linear_accel step is read back as T (v + v') / ds, and
# the shape of a ramp to rest follows from c; near c = 3 (a ramp nearly filling its step) c is
# flat in the shape. Stations rounded to 0.1 mm moved c by up to 3e-4 and that stop's constant
# part by 13 %. Written with 9 decimals (and speeds and times with 9), c comes back within about
# 1e-8; asserted to 1e-6, and the ramp's constant acceleration and length to 1e-5 of their own.
@pytest.mark.parametrize("jerk, decel", [(2.0, 3.5), (0.5, 2.0)])
def test_step_shapes_read_back_from_the_profile_file(jerk, decel, tmp_path):
    ds = 0.999988801100186
    geo = geometry_from_curvature(np.zeros(181), ds=ds)
    planned = plan_profile(geo, Limits(max_jerk_mps3=jerk, max_accel_mps2=2.0,
                                       max_decel_mps2=decel, max_speed_mps=25.0),
                           RouteConstraints(stops=(Stop(60.0 * ds),)))
    sp = read_station_profile(write_profile_csv(planned, tmp_path / "p.csv"))
    ramp = planned.rest_time_coef > 0.0
    assert ramp.sum() == 4 and np.array_equal(sp.rest_step, ramp)
    np.testing.assert_allclose(sp.rest_time_coef, planned.rest_time_coef, rtol=0, atol=1e-6)
    if jerk == 0.5:                 # the launches' ramps span several stations
        linear = planned.linear_time_coef > 0.0
        assert linear.any() and np.array_equal(sp.linear_step, linear)
        np.testing.assert_allclose(sp.linear_time_coef, planned.linear_time_coef, rtol=0,
                                   atol=1e-6)
    u_plan = rest_step.shape_from_time_coef(planned.rest_time_coef[ramp])
    u_read = rest_step.shape_from_time_coef(sp.rest_time_coef[ramp])
    v = planned.speed_mps
    moving = np.where(v[:-1] > 0.0, v[:-1], v[1:])[ramp]
    for u in (u_plan, u_read):
        assert np.all(u > 0.0)
    flat = [rest_step.accel_factor(u) * moving ** 2 / (2.0 * ds) for u in (u_plan, u_read)]
    np.testing.assert_allclose(flat[1], flat[0], rtol=1e-5)
    np.testing.assert_allclose(rest_step.ramp_time(u_read, moving, ds),
                               rest_step.ramp_time(u_plan, moving, ds), rtol=1e-5)


# A launch that goes on into constant-jerk steps starts with a step that ramps over its whole
# length (c = 3 exactly). Read back as T (v + v') / ds from 9-decimal values, c lands up to a
# few 1e-9 below 3 about half the time, and near 3 the shape is ill-conditioned (1 - u grows as
# sqrt(3 - c)): a constant part of 3e-5 of the step appeared, over which the jerk read at the
# moving node was 0.9 of the bound where the plan's ramp runs on through it. Within the file's
# rounding of 3 the reader takes 3. (Invented rolling road, non-round spacing, a stop.)
def test_a_whole_ramp_reads_back_as_one(tmp_path):
    ds, n = 0.999988801100186, 2000
    geo = geometry_from_curvature(np.zeros(n), ds=ds,
                                  grade=0.06 * np.sin(np.arange(n) * ds / 250.0))
    planned = plan_profile(geo, Limits(max_jerk_mps3=0.5),
                           RouteConstraints(stops=(Stop(900.0),)))
    sp = read_station_profile(write_profile_csv(planned, tmp_path / "p.csv"))
    whole = planned.rest_time_coef == 3.0
    assert whole.sum() == 4                 # the steps next to rest: start, stop (both), end
    assert np.all(sp.rest_time_coef[whole] == 3.0)
    np.testing.assert_array_equal(rest_step.shape_from_time_coef(sp.rest_time_coef[whole]), 1.0)


# Lateral jerk per step read back from a profile file (what plot draws) follows the plan's:
# the file's curvature is rounded to 1e-9 1/m, and chord rates within that rounding of each
# other count as equal (station_profile.CURVATURE_ROUNDING_1PM). Before, a step beside a change
# of the curvature's rate took its neighbour's rate: 0.10 -> 0.50 m/s^3 at one step, 43 steps
# over the 0.5 m/s^3 bound. What is left is the rounding itself: a chord rate off by up to
# 1e-9 / ds 1/m^2, times v^3 (asserted with 1 % on top, plus the speeds' 1e-9 rounding).
def test_lateral_jerk_read_back_follows_the_plan(tmp_path):
    ds, n = 0.5, 3000
    s = np.arange(n) * ds
    rng = np.random.default_rng(5)                  # invented road: random bends, straights
    knots = np.arange(0.0, s[-1] + 200.0, 150.0)
    values = rng.uniform(-1 / 30, 1 / 30, knots.size)
    values[rng.random(knots.size) < 0.4] = 0.0
    geo = geometry_from_curvature(np.interp(s, knots, values), ds=ds)
    planned = plan_profile(geo, Limits(max_jerk_mps3=1.0, max_lateral_jerk_mps3=0.5),
                           RouteConstraints(stops=(Stop(700.0),)))
    plan = StationProfile.from_profile(planned).step_lateral_jerk_mps3
    read = read_station_profile(write_profile_csv(planned, tmp_path / "p.csv")
                                ).step_lateral_jerk_mps3
    v = planned.speed_mps
    allowed = 1.01 * 1e-9 / ds * np.maximum(v[:-1], v[1:]) ** 3 + 1e-8
    assert np.all(np.abs(read - plan) <= allowed)


# Elevation is written to 9 decimals: on a constant grade the exported pitch is atan(grade)
# to the file's rounding (a 5e-10 m error over a 0.25 m step: 4e-9 rad; asserted to 1e-7).
# At 0.1 mm it was off by up to 3e-4 rad here, 6 % of this 0.5 % grade.
def test_pitch_read_back_on_a_constant_grade(tmp_path):
    geo = geometry_from_curvature(np.zeros(801), ds=0.25, grade=0.005)
    planned = plan_profile(geo, Limits())
    tr = sample_in_time(read_station_profile(write_profile_csv(planned, tmp_path / "p.csv")),
                        0.05)
    np.testing.assert_allclose(tr.pitch_rad, math.atan(0.005), rtol=0, atol=1e-7)


def test_samples_are_uniform_in_time_and_end_at_the_route_end(planned, profile_csv, tmp_path):
    dt = 0.05
    sp, tr, cols = exported(profile_csv, tmp_path, dwell_s=2.0, dt_s=dt)
    steps = np.diff(cols["time_s"])
    # every interval dt (written with 6 decimals, so within 1e-6), the last one at most dt
    np.testing.assert_allclose(steps[:-1], dt, atol=2 * HALF_1E6)
    assert 0.0 < steps[-1] <= dt + 2 * HALF_1E6
    assert cols["station_m"][-1] == pytest.approx(planned.geometry.length_m, abs=0.5e-4)
    assert cols["speed_mps"][-1] == 0.0


def test_stations_never_decrease(profile_csv, tmp_path):
    _, _, cols = exported(profile_csv, tmp_path, dwell_s=3.0)
    assert np.all(np.diff(cols["station_m"]) >= 0.0)
    assert np.all(np.diff(cols["time_s"]) > 0.0)


def test_yaw_rate_and_lateral_acceleration_follow_speed_and_curvature(profile_csv, tmp_path):
    _, _, cols = exported(profile_csv, tmp_path, dwell_s=1.0)
    v, k = cols["speed_mps"], cols["curvature_1pm"]
    # each written value is rounded to half a unit of its last decimal; the product's rounding
    # error is bounded by |k| dv + v dk + the rounding of the result
    np.testing.assert_array_less(np.abs(cols["yaw_rate_radps"] - v * k),
                                 np.abs(k) * HALF_1E6 + v * HALF_1E9 + HALF_1E7 + 1e-15)
    np.testing.assert_array_less(np.abs(cols["lat_accel_mps2"] - v * v * k),
                                 2 * v * np.abs(k) * HALF_1E6 + v * v * HALF_1E9 + HALF_1E6
                                 + 1e-15)


def test_stops_are_held_for_the_dwell(planned, profile_csv, tmp_path):
    dwell, dt = 4.0, 0.05
    sp, tr, cols = exported(profile_csv, tmp_path, dwell_s=dwell, dt_s=dt)
    t, s, v = cols["time_s"], cols["station_m"], cols["speed_mps"]
    for i, stop in enumerate(STOPS_M):
        k = int(round(stop / planned.geometry.spacing_m))
        arrive = planned.time_s[k] + i * dwell       # earlier stops' dwells come first
        inside = (t > arrive + HALF_1E6) & (t < arrive + dwell - HALF_1E6)
        # held: every sample strictly inside the dwell is at the stop, at rest
        assert inside.sum() >= math.floor(dwell / dt) - 1
        np.testing.assert_allclose(s[inside], stop, atol=0.5e-4)
        assert np.all(v[inside] == 0.0)
        # and left afterwards: the first sample after the dwell has moved on
        # (leaving rest at constant jerk, the first samples move by less than the 0.1 mm the
        # file resolves, so look a few samples on for the station)
        after = np.flatnonzero(t > arrive + dwell + HALF_1E6)[0]
        assert v[after] > 0.0 and s[after + 5] > stop


def test_station_step_mode(planned, profile_csv):
    sp = read_station_profile(profile_csv)
    step, dwell = 0.25, 3.0
    tr = sample_by_station(sp, step, dwell)
    assert tr.mode is SamplingMode.STATION
    s, t, v = tr.station_m, tr.time_s, tr.speed_mps
    assert np.all(np.diff(s) > 0.0) and np.all(np.diff(t) > 0.0)
    assert s[-1] == sp.station_m[-1] and s[0] == sp.station_m[0]
    # the grid, plus the stops (already on it here)
    np.testing.assert_allclose(np.diff(s), step, rtol=CLOSED_FORM_RTOL)
    for stop in STOPS_M:
        assert v[np.flatnonzero(np.isclose(s, stop, atol=1e-9))] == pytest.approx(0.0)
    assert t[-1] == pytest.approx(sp.moving_time_s + len(STOPS_M) * dwell,
                                  rel=CLOSED_FORM_RTOL)
    # within one profile step the motion has constant acceleration, or constant jerk in the
    # ramp of a step next to rest, so the time between two samples follows exactly from their
    # speeds and accelerations (interval_times) -- not across the end of a ramp, where the two
    # motions meet, and not from a stop's sample: that carries the arrival time, and the dwell
    # follows it
    node = np.floor(s / sp.station_m[1] + 1e-9)
    same = (node[:-1] == node[1:]) & (v[:-1] > 0)
    for k in np.flatnonzero(sp.rest_step):
        leaving = sp.speed_mps[k] == 0.0
        v_moving = sp.speed_mps[k + 1] if leaving else sp.speed_mps[k]
        ds = sp.station_m[k + 1] - sp.station_m[k]
        u = rest_step.shape_from_time_coef(sp.rest_time_coef[k])
        t_ramp = rest_step.ramp_time(u, v_moving, ds)
        d_ramp, _, _ = rest_step.leaving_state_at_time(u, v_moving, ds, t_ramp)
        end = sp.station_m[k] + d_ramp if leaving else sp.station_m[k + 1] - d_ramp
        same &= ~((s[:-1] < end) & (s[1:] > end))
    a = tr.accel_mps2
    predicted = interval_times(np.diff(s), v[:-1], v[1:], a[:-1], a[1:])
    np.testing.assert_allclose(np.diff(t)[same], predicted[same], rtol=1e-9)


def test_trajectory_from_profile_and_from_its_csv_agree(planned, profile_csv):
    # the CSV rounds speeds to 1e-6 m/s and stations to 0.1 mm: positions then agree to the
    # distance covered in the time error (~1e-5 s * 15 m/s) plus the rounding, well inside 1 mm
    direct = sample_in_time(planned, 0.1, 2.0)
    via_csv = sample_in_time(read_station_profile(profile_csv), 0.1, 2.0)
    assert direct.n_samples == via_csv.n_samples
    np.testing.assert_allclose(via_csv.station_m, direct.station_m, atol=1e-3)
    np.testing.assert_allclose(via_csv.x_m, direct.x_m, atol=1e-3)
    np.testing.assert_allclose(via_csv.y_m, direct.y_m, atol=1e-3)


def test_positions_follow_the_curve_between_nodes():
    # On a circle of radius R sampled every ds, the cubic Hermite position between nodes stays
    # on the circle to O(ds^4 / R^3); the chord would sag by ds^2 / (8 R) = 3.1 mm here.
    radius, ds = 40.0, 1.0
    n = 200
    theta = np.arange(n + 1) * ds / radius
    x, y = radius * np.sin(theta), radius * (1.0 - np.cos(theta))
    sp = make_station_profile(np.arange(n + 1) * ds, x, y, theta, np.full(n + 1, 1 / radius),
                              np.full(n + 1, 5.0))
    tr = sample_by_station(sp, 0.1)
    r = np.hypot(tr.x_m, tr.y_m - radius)
    # 1e-5 m: the Hermite error bound ds^4 / (384 R^3) * (a small constant) is ~1e-10 m here
    np.testing.assert_allclose(r, radius, atol=1e-5)
    np.testing.assert_allclose(tr.heading_rad, tr.station_m / radius, rtol=CLOSED_FORM_RTOL)


def test_zero_speed_at_two_consecutive_stations_is_refused():
    s = np.arange(5.0)
    z = np.zeros(5)
    with pytest.raises(SpeedFileError, match=r"node 2 \(station 2.0 m\).*never covers"):
        make_station_profile(s, s, z, z, z, [0.0, 1.0, 0.0, 0.0, 1.0], source="p.csv")


@settings(max_examples=60, deadline=None)
@given(speeds=st.lists(st.floats(0.05, 40.0), min_size=2, max_size=40),
       stop_every=st.integers(2, 9), dt=st.floats(0.01, 2.0), dwell=st.floats(0.0, 5.0),
       ds=st.floats(0.1, 5.0))
def test_time_sampling_invariants(speeds, stop_every, dt, dwell, ds):
    v = np.array(speeds)
    v[::stop_every] = 0.0          # stops (and possibly the ends) at every stop_every-th node
    v[1::stop_every] = np.maximum(v[1::stop_every], 0.05)
    s = np.arange(v.size) * ds
    z = np.zeros(v.size)
    sp: StationProfile = make_station_profile(s, s, z, z, z, v)
    tr = sample_in_time(sp, dt, dwell)
    total = sp.moving_time_s + dwell * sp.stop_nodes.size
    assert tr.time_s[0] == 0.0
    # a sum and a cumulative sum of the same step times differ by round-off only
    assert tr.time_s[-1] == pytest.approx(total, rel=CLOSED_FORM_RTOL)
    assert tr.station_m[-1] == s[-1]
    assert np.all(np.diff(tr.time_s) > 0.0) and np.all(np.diff(tr.time_s) <= dt * (1 + 1e-9))
    assert np.all(np.diff(tr.station_m) >= 0.0)
    assert np.all(tr.speed_mps >= 0.0) and np.all(np.isfinite(tr.speed_mps))
    # speeds stay between the speeds of the step's two nodes (b is linear, so v is monotonic)
    assert tr.speed_mps.max() <= v.max() * (1 + 1e-12)
