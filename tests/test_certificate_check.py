"""Certificate tests of ``check``: what must hold whatever the numbers.

A drive that asks more than the limits is flagged over the stretch where it does so and
nowhere else; a drive planned within the limits is not flagged; a speed that cannot be braked
down before a curve is found; a GPS track is placed on the right stations with the right speeds.
Every route, drive and track here is synthetic and invented for the test. Geometries have exact
curvature (tests/helpers.py), so the only discretisation is the 1 m station step.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from datetime import datetime, timedelta, timezone

import numpy as np
import pytest

from curvespeed.check import (BRAKE_REACH, CurveSettings, SpeedKind, brake_reach_b,
                              check_speeds, find_curves, zone_speeds_mps)
from curvespeed.errors import CurvespeedWarning, SpeedFileError
from curvespeed.geodesy import LocalProjection
from curvespeed.geometry import Geometry
from curvespeed.io.profile_csv import write_profile_csv
from curvespeed.io.speed_trace import read_speed_trace
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop
from curvespeed.planner import CONVEX_TOLERANCE, plan_profile

from helpers import circle_geometry, geometry_from_curvature, straight_curve_straight

#: Station step of the synthetic geometries, metres. The verifier gives a node the use of the
#: worse of the two steps meeting there, so a stretch over a limit reaches one step beyond the
#: stations that are themselves over it: ranges are compared within one step.
DS = 1.0

LIMITS = Limits()  # passenger-car comfort: lateral 2.5 m/s^2, decel 2.5 m/s^2, mu 0.7


def bend() -> Geometry:
    """300 m straight, 150 m arc of R 100 m (stations 300..449), 300 m straight."""
    return straight_curve_straight(300.0, 100.0, 150.0, 300.0, ds=DS)


def write_speeds_csv(path, station, speed):
    lines = ["station_m,speed_mps"] + [f"{s:.4f},{v:.6f}" for s, v in zip(station, speed)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


# --- a recorded drive through a known curve -----------------------------------------------------

def test_drive_too_fast_in_the_curve_is_flagged_over_the_curve(tmp_path):
    geo = bend()
    # A smooth drive planned for 3.2 m/s^2 of lateral acceleration, checked against 2.5: it
    # takes the R 100 m arc at sqrt(3.2 * 100) = 17.9 m/s, 28 % over the comfort limit.
    drive = plan_profile(geo, Limits(max_lateral_accel_mps2=3.2))
    path = write_speeds_csv(tmp_path / "drive.csv", geo.station_m, drive.speed_mps)
    trace = read_speed_trace(path, geo)
    report = check_speeds(geo, LIMITS, RouteConstraints(), trace.speed_mps,
                          speed_source=str(path))

    assert not report.ok
    (comfort,) = [v for v in report.violations if v.kind == "comfort_ellipse"]
    # the arc runs 300..449 m; the stretch is that, within one step (see DS)
    assert comfort.start_m == pytest.approx(300.0, abs=DS)
    assert comfort.end_m == pytest.approx(449.0, abs=DS)
    # 3.2 / 2.5 = 1.28 (closed form a = v^2 / R). The drive comes from the convex planner,
    # whose rows sit up to CONVEX_TOLERANCE inside their limits (printing to 1e-6 m/s adds 1e-7)
    assert comfort.use == pytest.approx(3.2 / 2.5, rel=CONVEX_TOLERANCE)
    assert comfort.allowed_speed_mps == pytest.approx(math.sqrt(2.5 * 100.0), rel=1e-9)
    # nothing over the lateral or combined limits away from the arc
    s = report.station_m
    away = (s < 300.0 - DS) | (s > 449.0 + DS)
    assert np.all(report.use["comfort_ellipse"][away] <= 1.0 + report.tolerance)
    assert np.all(report.use["friction_ellipse"] <= 1.0 + report.tolerance)

    (curve,) = report.curves
    assert (curve.start_m, curve.end_m, curve.direction) == (300.0, 449.0, "left")
    assert not curve.passed and "comfort_ellipse" in curve.violations
    assert curve.min_radius_m == pytest.approx(100.0, rel=1e-12)
    # The tightest point is the arc's first station (the curvature steps there); the figures
    # there follow from the speed driven at it by the closed forms a = v^2/R and, with e = 0,
    # f = a/g (round-off only).
    assert curve.tightest_station_m == 300.0
    v = trace.speed_mps[300]
    assert curve.speed_mps == v
    assert curve.lateral_accel_mps2 == pytest.approx(v * v / 100.0, rel=1e-12)
    assert curve.comfort_margin_mps2 == pytest.approx(2.5 - v * v / 100.0, rel=1e-12)
    g = LIMITS.gravity_mps2
    assert curve.side_friction_demand == pytest.approx(v * v / (g * 100.0), rel=1e-12)
    assert curve.friction_margin == pytest.approx(0.7 - v * v / (g * 100.0), rel=1e-12)
    assert curve.comfort_use == pytest.approx(comfort.use, rel=1e-12)
    assert curve.limit_speed_mps == pytest.approx(math.sqrt(250.0), rel=1e-9)


def test_drive_planned_within_the_limits_is_not_flagged(tmp_path):
    geo = bend()
    profile = plan_profile(geo, LIMITS)
    path = tmp_path / "profile.csv"
    write_profile_csv(profile, path)            # our own profile CSV, read back by name
    trace = read_speed_trace(path, geo)
    # the profile is read back at its own stations: only the 1e-6 m/s printing changes it
    np.testing.assert_allclose(trace.speed_mps, profile.speed_mps, rtol=0, atol=1e-6)
    report = check_speeds(geo, LIMITS, RouteConstraints(), trace.speed_mps)
    assert report.ok, [v.message for v in report.violations]
    (curve,) = report.curves
    assert curve.passed and curve.brake_ok
    # the planned profile rides the comfort limit in the curve
    assert curve.comfort_use == pytest.approx(1.0, abs=report.tolerance)


def test_drive_planned_with_a_stop_under_the_jerk_bound_is_not_flagged(tmp_path):
    # Under the jerk bound the planner leaves and reaches rest with a jerk ramp; the check
    # takes the drive's own rest points (speed exactly 0) as rest, so it judges them the same.
    geo = bend()
    profile = plan_profile(geo, LIMITS, RouteConstraints(stops=(Stop(600.0),)))
    assert profile.speed_mps[600] == 0.0
    path = tmp_path / "stop.csv"
    write_profile_csv(profile, path)
    report = check_speeds(geo, LIMITS, RouteConstraints(),
                          read_speed_trace(path, geo).speed_mps)
    assert report.ok, [v.message for v in report.violations]
    assert "jerk" in report.use


def test_constant_speed_within_the_lateral_limit_passes_and_above_fails():
    geo = bend()
    ceiling = math.sqrt(2.5 * 100.0)   # v = sqrt(a_lat R)
    ok = check_speeds(geo, LIMITS, RouteConstraints(), np.full(geo.n_nodes, 0.99 * ceiling),
                      kind=SpeedKind.CONSTANT)
    assert ok.ok
    bad = check_speeds(geo, LIMITS, RouteConstraints(), np.full(geo.n_nodes, 1.05 * ceiling),
                       kind=SpeedKind.CONSTANT)
    kinds = {v.kind for v in bad.violations}
    assert "comfort_ellipse" in kinds and BRAKE_REACH in kinds
    (comfort,) = [v for v in bad.violations if v.kind == "comfort_ellipse"]
    assert comfort.use == pytest.approx(1.05 ** 2, rel=1e-9)        # a_lat grows with v^2
    # held speed: no acceleration anywhere
    assert np.all(bad.accel_mps2 == 0.0)


def test_held_speed_through_a_spiral_is_checked_against_a_lateral_jerk_bound():
    # A clothoid of length L into radius R held at constant speed v changes the lateral
    # acceleration at C = v^3 / (R L) (Shortt's relation, see test_reference_convex.py), so
    # with the bound C the held speed may be at most (C R L)^(1/3) along the spiral.
    R, L, C = 300.0, 60.0, 0.5
    s = np.arange(0.0, 660.5, 1.0)
    geo = geometry_from_curvature(np.interp(s, [0, 300, 360, 660], [0, 0, 1 / R, 1 / R]),
                                  ds=1.0)
    limits = LIMITS.replace(max_lateral_jerk_mps3=C)
    v_s = (C * R * L) ** (1 / 3)
    ok = check_speeds(geo, limits, RouteConstraints(), np.full(geo.n_nodes, 0.99 * v_s),
                      kind=SpeedKind.CONSTANT)
    assert ok.ok, [v.message for v in ok.violations]
    bad = check_speeds(geo, limits, RouteConstraints(), np.full(geo.n_nodes, 1.05 * v_s),
                       kind=SpeedKind.CONSTANT)
    (lat,) = [v for v in bad.violations if v.kind == "lateral_jerk"]
    assert lat.use == pytest.approx(1.05 ** 3, rel=1e-9)           # grows with v^3
    assert 300.0 <= lat.start_m and lat.end_m <= 361.0              # the spiral, not the circle
    assert f"the bound allows {v_s:.2f} m/s" in lat.message


# --- brake reach: speeds that rise into a curve faster than the brakes can undo -----------------

def test_zone_drop_too_close_to_a_curve_is_a_brake_reach_stretch():
    geo = bend()
    zones = RouteConstraints(zones=(SpeedZone(0.0, 280.0, 25.0), SpeedZone(280.0, 750.0, 15.0)))
    speeds = zone_speeds_mps(geo, LIMITS, zones)
    report = check_speeds(geo, LIMITS, zones, speeds, kind=SpeedKind.ZONES)
    (brake,) = [v for v in report.violations if v.kind == BRAKE_REACH]
    # Braking from 25 m/s to the curve's sqrt(250) m/s at 2.5 m/s^2 takes
    # (625 - 250) / (2 * 2.5) = 75 m (textbook v^2 / (2a)); the curve's first station allows
    # no braking on top of its full lateral demand, so braking must end one step before it,
    # at 299 m: the stretch starts 75 m earlier, at 224 m (equal there, over from 225 m), and
    # ends where the zone drops (last 25 m/s station 279 m).
    assert brake.start_m == pytest.approx(225.0, abs=DS)
    assert brake.end_m == 279.0
    assert brake.curves == (1,)
    assert report.curves[0].brake_ok is False
    # the zone speeds themselves are within the lateral limits everywhere
    assert {v.kind for v in report.violations} == {BRAKE_REACH}


def test_zone_drop_with_room_to_brake_is_not_flagged():
    geo = bend()
    zones = RouteConstraints(zones=(SpeedZone(0.0, 150.0, 25.0), SpeedZone(150.0, 750.0, 15.0)))
    report = check_speeds(geo, LIMITS, zones, zone_speeds_mps(geo, LIMITS, zones),
                          kind=SpeedKind.ZONES)
    assert report.ok, [v.message for v in report.violations]


def test_brake_reach_matches_the_closed_form_on_the_approach():
    # Level straight before a flat R 100 m arc, comfort decel 2.5 m/s^2 binding (mu g = 6.9):
    # b(s) = 250 + 2 * 2.5 * (299 - s) for s <= 299 (v^2 = v0^2 + 2 a d, exact in the model,
    # where b is linear in station at constant acceleration).
    geo = bend()
    _, reach = brake_reach_b(geo, LIMITS, RouteConstraints())
    s = geo.station_m
    approach = s <= 299.0
    # The curve's ceiling comes from a bisection over a bracket up to 1000^2 m^2/s^2 (the
    # curves-only problem has no top speed) that stops at 1e-12 of the bracket: 1e-6 m^2/s^2.
    np.testing.assert_allclose(reach[approach], 250.0 + 5.0 * (299.0 - s[approach]), rtol=0,
                               atol=1e-6)


def test_recorded_drive_braking_late_is_flagged_before_the_curve():
    geo = bend()
    s = geo.station_m
    # A drive holding 20 m/s until 20 m before the curve, then braking hard (b linear, so
    # constant deceleration (400 - 250) / (2 * 20) = 3.75 m/s^2) to the curve's sqrt(250) m/s.
    v = np.where(s < 280.0, 20.0, 15.0)
    hard = (s >= 280.0) & (s <= 300.0)
    v[hard] = np.sqrt(400.0 - 150.0 * (s[hard] - 280.0) / 20.0)
    v[s > 300.0] = math.sqrt(250.0)
    report = check_speeds(geo, LIMITS, RouteConstraints(), v)
    (brake,) = [x for x in report.violations if x.kind == BRAKE_REACH]
    # Braking from 20 m/s to sqrt(250) m/s at the 2.5 m/s^2 limit takes (400 - 250) / 5 = 30 m
    # (v^2 / (2a)) and must end one step before the curve (see the zone test): from 269 m
    # on, 20 m/s is too fast. The stretch ends where the drive's own braking catches up.
    assert brake.start_m == pytest.approx(270.0, abs=DS)
    assert brake.curves == (1,) and not report.curves[0].brake_ok
    # the hard braking itself is over the comfort deceleration: 3.75 / 2.5 = 1.5 on the
    # straight, and on the curve's first station, with the full lateral demand on top,
    # hypot(1.5, 1) (comfort ellipse)
    (comfort,) = [x for x in report.violations if x.kind == "comfort_ellipse"]
    assert comfort.start_m == pytest.approx(280.0, abs=DS)
    assert report.use["comfort_ellipse"][290] == pytest.approx(1.5, rel=1e-9)
    assert comfort.use == pytest.approx(math.hypot(1.5, 1.0), rel=1e-9)
    assert comfort.station_m == 300.0


# --- curves --------------------------------------------------------------------------------------

def test_curves_are_split_by_direction_joined_across_short_gaps_and_blips_dropped():
    k = np.zeros(1001)
    k[100:200] = 1 / 150.0          # left
    k[210:260] = 1 / 200.0          # left again after a 10 m dip: joined (gap <= 20 m)
    k[300:400] = -1 / 120.0         # right
    k[430:433] = 1 / 500.0          # 3 m blip: dropped (< 5 m)
    k[600:700] = 1 / 900.0          # 100 m of R 900 m: a curve (radius below 1000 m)
    k[800:900] = 1 / 1500.0         # R 1500 m: not a curve at the default threshold
    geo = geometry_from_curvature(k, ds=DS)
    curves = find_curves(geo)
    spans = [(geo.station_m[c[0]], geo.station_m[c[-1]]) for c in curves]
    assert spans == [(100.0, 259.0), (300.0, 399.0), (600.0, 699.0)]
    wide = find_curves(geo, CurveSettings(radius_m=2000.0))
    assert len(wide) == 4


def test_curve_across_the_seam_of_a_loop_is_one_curve():
    k = np.zeros(1001)
    k[:50] = 1 / 100.0
    k[950:] = 1 / 100.0
    geo = geometry_from_curvature(k, ds=DS, closed=True)
    (curve,) = find_curves(geo)
    assert geo.station_m[curve[0]] == 950.0 and geo.station_m[curve[-1]] == 49.0
    report = check_speeds(geo, LIMITS, RouteConstraints(), np.full(geo.n_nodes, 10.0),
                          kind=SpeedKind.CONSTANT)
    assert report.curves[0].end_m < report.curves[0].start_m
    assert report.curves[0].length_m == pytest.approx(99.0)


def test_stops_and_end_speeds_are_not_checked_but_said_so():
    geo = bend()
    rc = RouteConstraints(stops=(Stop(500.0, origin="test"),), end_speed_mps=0.0)
    with pytest.warns(CurvespeedWarning, match="check ignores 1 stop"):
        report = check_speeds(geo, LIMITS, rc, np.full(geo.n_nodes, 10.0),
                              kind=SpeedKind.CONSTANT)
    assert report.ok


def test_wrong_speeds_are_refused_with_the_station():
    geo = bend()
    v = np.full(geo.n_nodes, 10.0)
    v[42] = -1.0
    with pytest.raises(SpeedFileError, match="station 42.0 m"):
        check_speeds(geo, LIMITS, RouteConstraints(), v)
    with pytest.raises(SpeedFileError, match="speeds for"):
        check_speeds(geo, LIMITS, RouteConstraints(), v[:-1])


# --- speeds CSV -------------------------------------------------------------------------------

def test_csv_speeds_are_interpolated_in_squared_speed(tmp_path):
    geo = bend()
    # constant deceleration a: b linear in station, so 3 rows describe it exactly
    stations = np.array([0.0, 400.0, 750.0])
    b = 800.0 - 2.0 * 0.5 * stations
    path = write_speeds_csv(tmp_path / "v.csv", stations, np.sqrt(b))
    trace = read_speed_trace(path, geo)
    # speeds printed to 1e-6 m/s: b to ~6e-5 m^2/s^2 of >= 50, so rtol 1e-6
    np.testing.assert_allclose(trace.speed_mps ** 2, 800.0 - 1.0 * geo.station_m, rtol=1e-6)


def test_csv_shorter_than_the_route_is_an_error_naming_the_gap(tmp_path):
    geo = bend()
    path = write_speeds_csv(tmp_path / "short.csv", [0.0, 200.0, 400.0], [10.0, 10.0, 10.0])
    with pytest.raises(SpeedFileError) as info:
        read_speed_trace(path, geo)
    message = str(info.value)
    assert "short.csv" in message and "missing 400.0-750.0 m at the end" in message
    assert "line 4" in message


def test_csv_with_unsorted_stations_or_negative_speeds_names_the_line(tmp_path):
    geo = bend()
    path = write_speeds_csv(tmp_path / "u.csv", [0.0, 300.0, 200.0, 750.0], [5.0] * 4)
    with pytest.raises(SpeedFileError, match=r"u\.csv: line 4: station_m 200 is not after 300"):
        read_speed_trace(path, geo)
    path = write_speeds_csv(tmp_path / "n.csv", [0.0, 300.0, 750.0], [5.0, -2.0, 5.0])
    with pytest.raises(SpeedFileError,
                       match=r"n\.csv: line 3: speed_mps -2 is negative \(station 300\.0 m\)"):
        read_speed_trace(path, geo)


# --- GPX track with time stamps -------------------------------------------------------------------

T0 = datetime(2026, 5, 1, 10, 0, 0, tzinfo=timezone.utc)


def write_track_gpx(path, lat, lon, t_s):
    points = "\n".join(
        f'<trkpt lat="{la:.9f}" lon="{lo:.9f}"><time>'
        f'{(T0 + timedelta(seconds=float(t))).isoformat().replace("+00:00", "Z")}</time></trkpt>'
        for la, lo, t in zip(lat, lon, t_s))
    path.write_text('<?xml version="1.0" encoding="UTF-8"?>\n'
                    '<gpx version="1.1" creator="curvespeed test" '
                    'xmlns="http://www.topografix.com/GPX/1/1"><trk><name>invented test drive'
                    f'</name><trkseg>\n{points}\n</trkseg></trk></gpx>\n', encoding="utf-8")
    return path


def drive_along(geo: Geometry, speed_of_station, sample_s: float, start_m: float = 0.0,
                laps: float = 1.0):
    """Positions and times of a vehicle driving ``geo`` at ``speed_of_station(s)``.

    Station advances with dt = ds / v (trapezoid on a 0.05 m grid); positions on the geometry's
    own chords. Returns x, y, t at every ``sample_s`` seconds and the true station there.
    """
    length = geo.length_m
    grid = np.arange(start_m, start_m + laps * length + 1e-9, 0.05)
    v = speed_of_station(np.mod(grid, length) if geo.closed else grid)
    t = np.concatenate(([0.0], np.cumsum(np.diff(grid) * 0.5 * (1 / v[1:] + 1 / v[:-1]))))
    ts = np.append(np.arange(0.0, t[-1] - 0.5 * sample_s, sample_s), t[-1])
    station = np.interp(ts, t, grid)
    wrapped = np.mod(station, length) if geo.closed else station
    x = np.interp(wrapped, geo.station_m, geo.x_m)
    y = np.interp(wrapped, geo.station_m, geo.y_m)
    return x, y, ts, station


def geographic(geo: Geometry) -> Geometry:
    # An arbitrary origin in open ocean; the track's own projection (centred on the track)
    # differs from it, so the reader must go through latitude/longitude.
    return dataclasses.replace(geo, projection=LocalProjection(-41.5, -27.75))


def kinked_speed(s):
    """20 m/s to 200 m, then constant deceleration (b linear) to 15.5 m/s at 300 m."""
    b = 400.0 - (400.0 - 15.5 ** 2) * np.clip(s - 200.0, 0.0, 100.0) / 100.0
    return np.sqrt(b)


def test_gpx_track_is_mapped_to_the_right_stations_and_speeds(tmp_path):
    geo = geographic(bend())
    x, y, t, true_station = drive_along(geo, kinked_speed, 1.0)
    lat, lon = geo.projection.to_latlon(x, y)
    path = write_track_gpx(tmp_path / "drive.gpx", lat, lon, t)
    trace = read_speed_trace(path, geo, noise_m=0.05)
    # Stations: the points lie on the geometry's chords, so the only error is lat/lon printed to
    # 1e-9 deg (0.1 mm) and the projection round trip (nanometres): 1 mm.
    np.testing.assert_allclose(trace.station_m, true_station, rtol=0, atol=1e-3)
    # Speeds: a smoothing spline through 1 Hz samples follows the speed within 1 % where it is
    # smooth; it rounds the two kinks (the deceleration starting and ending at 200 and 300 m),
    # so stations within 3 samples (60 m) of them are left out of this comparison.
    s = geo.station_m
    smooth = (np.abs(s - 200.0) > 60.0) & (np.abs(s - 300.0) > 60.0) & (s > 5) & (s < 745)
    np.testing.assert_allclose(trace.speed_mps[smooth], kinked_speed(s[smooth]), rtol=0.01)


def test_gpx_track_with_gps_noise_gives_speeds_within_the_noise(tmp_path):
    geo = geographic(bend())
    x, y, t, _ = drive_along(geo, lambda s: np.full_like(s, 15.0), 1.0)
    rng = np.random.default_rng(20260501)
    sigma = 1.0
    x = x + rng.normal(0.0, sigma, x.size)
    y = y + rng.normal(0.0, sigma, y.size)
    lat, lon = geo.projection.to_latlon(x, y)
    path = write_track_gpx(tmp_path / "noisy.gpx", lat, lon, t)
    trace = read_speed_trace(path, geo, noise_m=sigma)
    error = trace.speed_mps - 15.0
    s = geo.station_m
    # Away from the ends (where the smoothing is one-sided, within 3 samples = 45 m): the slope
    # of a least-squares line through 5 samples with noise sigma has standard deviation
    # sigma * sqrt(12 / (5 * 24)) / dt = 0.32 sigma / dt; three of those, about sigma / dt,
    # bound the error of a smoother that averages at least that many samples.
    inner = (s > 45.0) & (s < geo.length_m - 45.0)
    assert np.max(np.abs(error[inner])) < sigma / 1.0
    # No bias: the mean speed is distance over time, whose error is the position error at the
    # two ends (sigma each) over the 50 s: 2 * sqrt(2) * sigma / T as a two-sigma bound.
    assert abs(np.mean(error)) < 2.0 * math.sqrt(2.0) * sigma / t[-1]
    report = check_speeds(geo, LIMITS, RouteConstraints(), trace.speed_mps)
    assert report.ok, [v.message for v in report.violations]   # 15 m/s < sqrt(250) = 15.8


def test_gpx_track_on_a_loop_starting_mid_lap(tmp_path):
    geo = geographic(circle_geometry(100.0))
    x, y, t, _ = drive_along(geo, lambda s: np.full_like(s, 12.0), 1.0, start_m=200.0,
                             laps=1.3)
    lat, lon = geo.projection.to_latlon(x, y)
    path = write_track_gpx(tmp_path / "laps.gpx", lat, lon, t)
    with pytest.warns(CurvespeedWarning, match=r"1\.[23][0-9] laps; checked the first lap"):
        trace = read_speed_trace(path, geo, noise_m=0.05)
    # constant speed: the spline is exact up to the 1 mm station error over 1 s
    np.testing.assert_allclose(trace.speed_mps, 12.0, rtol=1e-3)


def test_gpx_without_times_or_on_a_metric_route_is_refused(tmp_path):
    geo = geographic(bend())
    x, y, t, _ = drive_along(geo, lambda s: np.full_like(s, 15.0), 1.0)
    lat, lon = geo.projection.to_latlon(x, y)
    untimed = tmp_path / "untimed.gpx"
    pts = "".join(f'<trkpt lat="{a:.9f}" lon="{b:.9f}"/>' for a, b in zip(lat, lon))
    untimed.write_text(f'<gpx version="1.1" xmlns="http://www.topografix.com/GPX/1/1"><trk>'
                       f'<trkseg>{pts}</trkseg></trk></gpx>', encoding="utf-8")
    with pytest.raises(SpeedFileError, match=r"untimed\.gpx: the track points carry no <time>"):
        read_speed_trace(untimed, geo)
    timed = write_track_gpx(tmp_path / "timed.gpx", lat, lon, t)
    with pytest.raises(SpeedFileError, match="local metric frame"):
        read_speed_trace(timed, bend())


def test_gpx_track_that_stops_short_is_an_error_naming_the_missing_part(tmp_path):
    geo = geographic(bend())
    x, y, t, station = drive_along(geo, lambda s: np.full_like(s, 15.0), 1.0)
    keep = station < 500.0
    lat, lon = geo.projection.to_latlon(x[keep], y[keep])
    path = write_track_gpx(tmp_path / "short.gpx", lat, lon, t[keep])
    with pytest.raises(SpeedFileError, match=r"missing 49[0-9]\.[0-9]-750\.0 m at the end"):
        read_speed_trace(path, geo, noise_m=0.05)


def test_gpx_track_leaving_the_route_names_the_point(tmp_path):
    geo = geographic(bend())
    x, y, t, _ = drive_along(geo, lambda s: np.full_like(s, 15.0), 1.0)
    y = y.copy()
    y[20:26] += 60.0       # a detour of six points 60 m off the line
    lat, lon = geo.projection.to_latlon(x, y)
    path = write_track_gpx(tmp_path / "detour.gpx", lat, lon, t)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurvespeedWarning)
        with pytest.raises(SpeedFileError, match=r"detour\.gpx: trkpt 21: .* from the route"):
            read_speed_trace(path, geo)
