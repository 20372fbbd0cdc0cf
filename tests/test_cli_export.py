"""Command-line tests of ``curvespeed export`` and ``curvespeed plot`` on small files.

Each test asserts the exit code, the message and the file written (or not written).
Profiles are planned on invented synthetic alignments; the geographic one is placed at an
arbitrary point in open ocean.
"""

from __future__ import annotations

import dataclasses
import json
import warnings
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.spatial import cKDTree

from curvespeed.cli.export_cmd import export
from curvespeed.cli.plot_cmd import plot
from curvespeed.errors import CurvespeedWarning
from curvespeed.export import TRAJECTORY_COLUMNS
from curvespeed.geodesy import LocalProjection
from curvespeed.io import read_route
from curvespeed.io.meta_json import profile_meta, write_meta_json
from curvespeed.io.profile_csv import write_profile_csv
from curvespeed.io.table_csv import read_table_csv
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop
from curvespeed.planner import plan_profile

from helpers import geometry_from_curvature

PROJECTION = LocalProjection(47.5, -32.25)   # arbitrary origin in open ocean
CONSTRAINTS = RouteConstraints(zones=(SpeedZone(30.0, 70.0, 7.0),), stops=(Stop(140.0),))


def planned(geographic: bool):
    s = np.arange(241.0)
    kappa = np.interp(s, [0, 50, 80, 120, 150, 170, 200, 240],
                      [0, 0, 1 / 30, 1 / 30, 0, 0, -1 / 45, -1 / 45])
    geo = geometry_from_curvature(kappa, name="Invented hook")
    if geographic:
        geo = dataclasses.replace(geo, projection=PROJECTION)
    return plan_profile(geo, Limits(), CONSTRAINTS)


def write_profile(folder, geographic: bool, with_meta: bool = True):
    profile = planned(geographic)
    path = folder / ("geo.csv" if geographic else "metric.csv")
    write_profile_csv(profile, path, force=True)
    if with_meta:
        write_meta_json(profile_meta(profile, Limits(), CONSTRAINTS, None),
                        folder / path.name.replace(".csv", ".meta.json"), force=True)
    return path, profile


@pytest.fixture
def metric(tmp_path):
    return write_profile(tmp_path, geographic=False)


@pytest.fixture
def geo(tmp_path):
    return write_profile(tmp_path, geographic=True)


def run(command, *args):
    return CliRunner().invoke(command, [str(a) for a in args])


# -- export ------------------------------------------------------------------------------------

def test_export_writes_csv_with_the_documented_columns(metric, tmp_path):
    path, profile = metric
    out = tmp_path / "trajectory.csv"
    result = run(export, path, "--dt", "0.05", "-o", out)
    assert result.exit_code == 0, result.output
    assert f"wrote  {out} (csv)" in result.output
    table = read_table_csv(out)
    assert list(table.columns) == list(TRAJECTORY_COLUMNS)
    assert table.columns["time_s"][-1] == pytest.approx(profile.total_time_s, abs=1e-5)


def test_export_geographic_csv_adds_lat_lon(geo, tmp_path):
    path, _ = geo
    out = tmp_path / "trajectory.csv"
    assert run(export, path, "-o", out).exit_code == 0
    assert list(read_table_csv(out).columns) == list(TRAJECTORY_COLUMNS) + ["lat", "lon"]


def test_export_is_deterministic(geo, tmp_path):
    path, _ = geo
    for fmt in ("csv", "json", "geojson"):
        a, b = tmp_path / f"a.{fmt}", tmp_path / f"b.{fmt}"
        assert run(export, path, "--dwell", "2", "-o", a).exit_code == 0
        assert run(export, path, "--dwell", "2", "-o", b).exit_code == 0
        assert a.read_bytes() == b.read_bytes()


def test_export_json_layout(metric, tmp_path):
    path, profile = metric
    out = tmp_path / "trajectory.json"
    result = run(export, path, "--dwell", "3", "-o", out)
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    assert doc["format"] == "curvespeed-trajectory" and doc["format_version"] == 1
    assert doc["route"]["name"] == "Invented hook"       # from the sidecar
    assert doc["sampling"] == {"mode": "time", "time_step_s": 0.05}
    assert doc["stop_stations_m"] == [140.0] and doc["dwell_s"] == 3.0
    assert list(doc["columns"]) == list(TRAJECTORY_COLUMNS)
    assert {len(v) for v in doc["columns"].values()} == {doc["samples"]}
    assert doc["total_time_s"] == pytest.approx(profile.total_time_s + 3.0, abs=1e-5)


def test_export_station_step(metric, tmp_path):
    path, _ = metric
    out = tmp_path / "by_station.csv"
    result = run(export, path, "--station-step", "2.5", "-o", out)
    assert result.exit_code == 0, result.output
    s = read_table_csv(out).columns["station_m"]
    assert s[0] == 0.0 and s[-1] == 240.0
    np.testing.assert_allclose(np.diff(s), 2.5, atol=1e-4)   # 140 m (the stop) is on the grid


def validate_rfc7946_linestring_feature(doc, n_props):
    """The parts of RFC 7946 a writer controls: Feature, LineString, [lon, lat] positions."""
    assert doc["type"] == "Feature"                          # RFC 7946 section 3.2
    assert "crs" not in doc                                  # removed by RFC 7946 (section 4)
    geometry = doc["geometry"]
    assert geometry["type"] == "LineString"                  # section 3.1.4
    coords = geometry["coordinates"]
    assert len(coords) >= 2                                  # "two or more positions"
    for position in coords:                                  # section 3.1.1
        assert len(position) == 2 and all(isinstance(c, float) for c in position)
        lon, lat = position
        assert -180.0 <= lon <= 180.0 and -90.0 <= lat <= 90.0
    assert isinstance(doc["properties"], dict)
    for name in ("time_s", "speed_mps", "curvature_1pm"):
        assert len(doc["properties"][name]) == len(coords) == n_props


@pytest.mark.parametrize("mode", [("--station-step", "1.5"), ("--dt", "0.05")])
def test_export_geojson_is_rfc7946_and_reads_back_within_1_cm(geo, tmp_path, mode):
    path, profile = geo
    out = tmp_path / "trajectory.geojson"
    result = run(export, path, *mode, "-o", out)
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    csv_out = tmp_path / "same.csv"
    assert run(export, path, *mode, "-o", csv_out).exit_code == 0
    table = read_table_csv(csv_out).columns
    validate_rfc7946_linestring_feature(doc, len(table["time_s"]))
    # longitude first: the route starts at the projection's origin, lon -32.25, lat 47.5
    assert doc["geometry"]["coordinates"][0] == pytest.approx([-32.25, 47.5], abs=1e-9)
    np.testing.assert_allclose(doc["properties"]["speed_mps"], table["speed_mps"])
    np.testing.assert_allclose(doc["properties"]["time_s"], table["time_s"])

    # Read back with curvespeed's own reader. Time sampling puts samples < 1 mm apart near rest,
    # which the reader drops with a warning; so compare as point sets (symmetric nearest-point
    # distance), in the profile's own metric frame.
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        route = read_route(out)
    assert all("repeated point" in str(w.message) for w in caught
               if issubclass(w.category, CurvespeedWarning))
    if mode[0] == "--station-step":
        assert not caught and route.n_points == len(table["time_s"])
    lat, lon = route.projection.to_latlon(route.x_m, route.y_m)
    x, y = PROJECTION.to_metres(lat, lon)
    back = np.column_stack((x, y))
    written = np.column_stack((table["x_m"], table["y_m"]))
    # 1 cm: the required bound; rounding to 1e-9 degree is ~0.1 mm, interpolation of lat/lon
    # between nodes < 0.1 mm (see curvespeed.export._interpolate_latlon)
    assert cKDTree(written).query(back)[0].max() < 0.01
    assert cKDTree(back).query(written)[0].max() < 0.01
    assert route.name == "Invented hook"


def test_geojson_of_a_metric_profile_is_refused(metric, tmp_path):
    path, _ = metric
    out = tmp_path / "trajectory.geojson"
    result = run(export, path, "-o", out)
    assert result.exit_code == 2
    assert "metric-only profile (no lat, lon columns)" in result.output
    assert not out.exists()


def test_format_option_overrides_the_extension(geo, tmp_path):
    path, _ = geo
    out = tmp_path / "trajectory.txt"
    assert run(export, path, "--format", "geojson", "-o", out).exit_code == 0
    assert json.loads(out.read_text())["type"] == "Feature"


def test_unknown_output_extension_without_format(metric, tmp_path):
    path, _ = metric
    out = tmp_path / "trajectory.txt"
    result = run(export, path, "-o", out)
    assert result.exit_code == 2 and "give --format" in result.output
    assert not out.exists()


def test_existing_output_needs_force(metric, tmp_path):
    path, _ = metric
    out = tmp_path / "trajectory.csv"
    out.write_text("keep me\n")
    result = run(export, path, "-o", out)
    assert result.exit_code == 2 and "file exists; pass --force" in result.output
    assert out.read_text() == "keep me\n"
    assert run(export, path, "-o", out, "--force").exit_code == 0
    assert out.read_text().startswith("time_s,")


@pytest.mark.parametrize("args, message", [
    (("--dt", "0"), "--dt"),
    (("--dt", "-1"), "--dt"),
    (("--station-step", "0"), "--station-step"),
    (("--dwell", "-2"), "--dwell"),
    (("--dt", "0.1", "--station-step", "1"), "exclude each other"),
    (("--dt", "1e-9"), "samples every 1e-09 s, more than 5000000; choose a larger step"),
])
def test_bad_options_exit_2_without_output(metric, tmp_path, args, message):
    path, _ = metric
    out = tmp_path / "trajectory.csv"
    result = run(export, path, *args, "-o", out)
    assert result.exit_code == 2
    assert message in result.output
    assert not out.exists()


def edit_profile(path, tmp_path, line: int, column: str, value: str):
    """Copy the profile CSV with one cell (1-based file line, column name) replaced."""
    lines = path.read_text().splitlines()
    header = lines[0].split(",")
    cells = lines[line - 1].split(",")
    cells[header.index(column)] = value
    lines[line - 1] = ",".join(cells)
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(lines) + "\n")
    return bad


@pytest.mark.parametrize("line, column, value, message", [
    (12, "station_m", "5.0000", "line 12: station_m 5 is not after 9 on line 11; stations must"),
    (30, "speed_mps", "-1.0", "line 30: speed_mps -1 is negative (station 28.0 m); give speeds"),
    (2, "speed_mps", "0.0", None),   # start at rest: fine (a row with zero next to it is not)
    # (line 2's step is marked constant_jerk: a step with both ends at rest is refused as never
    # driven before its step_kind is judged)
    (3, "speed_mps", "0.0", "line 2 (station 0.0 m): speed is zero here and at the next"),
    (50, "x_m", "abc", "line 50: column 'x_m' value 'abc' is not a number"),
    (40, "step_kind", "cubic", "line 40: column 'step_kind' value 'cubic' is not a step kind; "
                               "use constant_accel, jerk_ramp, linear_accel, accel_turn, "
                               "accel_rise_hold, accel_hold_fall, accel_fall_hold, "
                               "accel_rise_hold_fall or constant_jerk"),
    (40, "step_kind", "", "line 40: column 'step_kind' value '' is not a step kind"),
    (40, "step_kind", "constant_jerk", "line 40: column 'step_kind' value 'constant_jerk' is "
                                       "allowed only on a step with exactly one end at rest"),
    (40, "step_kind", "jerk_ramp", "line 40: column 'step_kind' value 'jerk_ramp' is "
                                   "allowed only on a step with exactly one end at rest"),
    (242, "step_kind", "junk", "line 242: column 'step_kind' value 'junk' is not a step kind"),
    (242, "step_kind", "constant_jerk", None),   # no step after the last row: its kind is ignored
])
def test_bad_profile_rows_are_named(metric, tmp_path, line, column, value, message):
    path, _ = metric
    bad = edit_profile(path, tmp_path, line, column, value)
    out = tmp_path / "trajectory.csv"
    result = run(export, bad, "-o", out)
    if message is None:
        assert result.exit_code == 0, result.output
        return
    assert result.exit_code == 2
    assert result.output.startswith(f"error: {bad}: ")
    assert message in result.output
    assert len(result.output.strip().splitlines()) == 1
    assert not out.exists()


def test_missing_column_and_missing_file(tmp_path):
    bad = tmp_path / "speeds.csv"
    bad.write_text("station_m,speed_mps\n0,1\n1,2\n")
    out = tmp_path / "trajectory.csv"
    result = run(export, bad, "-o", out)
    assert result.exit_code == 2 and "missing column(s) x_m, y_m, heading_rad" in result.output
    result = run(export, tmp_path / "nothing.csv", "-o", out)
    assert result.exit_code == 2 and "no such file" in result.output
    assert not out.exists()


def test_edited_time_column_warns(metric, tmp_path):
    path, _ = metric
    bad = edit_profile(path, tmp_path, 100, "time_s", "999.0")
    out = tmp_path / "trajectory.csv"
    with pytest.warns(CurvespeedWarning, match=r"line 100 .*time_s differs by"):
        result = run(export, bad, "-o", out)
    assert result.exit_code == 0


# -- steps next to rest: the step_kind column ---------------------------------------------------

@pytest.fixture(scope="module")
def planned_with_stop(tmp_path_factory):
    """``curvespeed plan`` (default limits, which bound jerk) of an invented 200 m straight with
    a stop at 100 m; returns the folder and the profile CSV."""
    from curvespeed.cli.plan_cmd import plan

    folder = tmp_path_factory.mktemp("stop")
    route = folder / "straight.csv"
    route.write_text("x_m,y_m\n" + "".join(f"{x:.1f},0.0\n" for x in range(0, 201, 5)))
    profile = folder / "profile.csv"
    result = run(plan, route, "--stop", "100", "-o", profile)
    assert result.exit_code == 0, result.output
    return folder, profile


def without_column(path, column: str, out):
    """Copy the profile CSV without one column."""
    rows = [line.split(",") for line in path.read_text().splitlines()]
    j = rows[0].index(column)
    out.write_text("".join(",".join(r[:j] + r[j + 1:]) + "\n" for r in rows))
    return out


def test_plan_writes_the_kind_of_every_step(planned_with_stop):
    from curvespeed import rest_step
    from curvespeed.limits import DEFAULT_LIMITS as LIM

    _, profile = planned_with_stop
    table = read_table_csv(profile)
    names = list(table.columns)
    assert names[names.index("binding") + 1] == "step_kind"
    kinds = table.columns["step_kind"]
    s, v, t = (table.columns[c] for c in ("station_m", "speed_mps", "time_s"))
    rest = v <= 0.0
    assert rest[0] and rest[-1] and rest[np.argmin(abs(s - 100.0))] and rest.sum() == 3
    assert kinds[-1] == ""                                    # no step after the last station
    ramp = kinds[:-1] == "jerk_ramp"
    np.testing.assert_array_equal(ramp, rest[:-1] != rest[1:])    # the 4 steps next to rest
    # both 100 m moves are planned as their closed form (curvespeed.closed_form_moves): between
    # the ramps, steps at constant acceleration (holding a cap), at constant jerk, and where the
    # jerk switches inside a step, holding a cap then leaving it
    assert set(kinds[:-1][~ramp]) == {"constant_accel", "linear_accel", "accel_hold_fall"}
    # the written times agree with the kinds (curvespeed.problem, curvespeed.rest_step): on a
    # straight the step leaving rest ramps at the jerk bound to the acceleration cap, the step
    # arriving at rest from the deceleration cap, and takes c ds / v; 2 ds / (v[k] + v[k+1])
    # on a constant step. Tolerance: stations are written to 0.1 mm (1e-4 of a ~1 m step),
    # speeds and times to 1e-6; c differs from 2 by 0.57 and 0.78 here.
    leaving = ramp & rest[:-1]
    c_leave = rest_step.time_coef(rest_step.shape_for_accel(LIM.max_accel_mps2,
                                                            LIM.max_jerk_mps3, 1.0))
    c_arrive = rest_step.time_coef(rest_step.shape_for_accel(LIM.max_decel_mps2,
                                                             LIM.max_jerk_mps3, 1.0))
    coef = np.where(leaving, c_leave, np.where(ramp, c_arrive, 2.0))
    known = ramp | (kinds[:-1] == "constant_accel")
    np.testing.assert_allclose(np.diff(t)[known], (coef * np.diff(s) / (v[:-1] + v[1:]))[known],
                               rtol=2e-4, atol=2e-6)


def test_export_follows_the_step_kinds(planned_with_stop, tmp_path):
    folder, profile = planned_with_stop
    out = tmp_path / "trajectory.csv"
    result = run(export, profile, "--dt", "0.05", "--dwell", "2", "-o", out)
    assert result.exit_code == 0, result.output
    cols = read_table_csv(out).columns
    # leaving rest with a jerk ramp: zero acceleration at the start, then rising
    assert cols["accel_mps2"][0] == 0.0 and cols["accel_mps2"][1] > 0.0
    # a jerk_ramp step's shape follows from its time: without time_s it is refused, naming the
    # first such step and what to do
    no_time = without_column(profile, "time_s", tmp_path / "no_time.csv")
    refused = run(export, no_time, "--dt", "0.05", "-o", tmp_path / "refused.csv")
    assert refused.exit_code == 2
    assert ("line 2: column 'step_kind' value 'jerk_ramp' needs the time_s column"
            in refused.output)
    assert not (tmp_path / "refused.csv").exists()
    # every step marked constant_accel: sampled that way, so it is a different trajectory that
    # starts with the step's full acceleration and is shorter by (c - 2) ds / v on each step
    # next to rest
    s, v, t, kinds = (read_table_csv(profile).columns[c]
                      for c in ("station_m", "speed_mps", "time_s", "step_kind"))
    flat = tmp_path / "flat.csv"
    flat.write_text(profile.read_text().replace("jerk_ramp", "constant_accel"))
    other = tmp_path / "other.csv"
    with pytest.warns(CurvespeedWarning, match="time_s differs"):     # its times disagree
        result = run(export, flat, "--dt", "0.05", "--dwell", "2", "-o", other)
    assert result.exit_code == 0, result.output
    flat_cols = read_table_csv(other).columns
    # a = v1^2 / (2 ds) from the file's own values; written to 1e-6 m/s^2
    assert flat_cols["accel_mps2"][0] == pytest.approx(v[1] ** 2 / (2 * (s[1] - s[0])),
                                                       abs=1e-6)
    ramp = kinds[:-1] == "jerk_ramp"
    saved = np.sum((np.diff(t) - 2.0 * np.diff(s) / (v[:-1] + v[1:]))[ramp])
    # both totals come from the same file's stations, speeds and times; each is written to 1e-6 s
    assert cols["time_s"][-1] - flat_cols["time_s"][-1] == pytest.approx(saved, abs=5e-6)


@pytest.fixture(scope="module")
def planned_slow_launch(tmp_path_factory):
    """``curvespeed plan`` of an invented 200 m straight from rest to rest at 0.5 m/s^3 and
    3 m/s^2: the launch's jerk ramp spans the first 16.7 m (the double-S closed form,
    Biagiotti & Melchiorri 2008, section 3.4: peak J (L / (2 J))^(1/3) = 2.92 m/s^2, ramp
    L / 12). Returns the folder and the profile CSV."""
    from curvespeed.cli.plan_cmd import plan

    folder = tmp_path_factory.mktemp("launch")
    route = folder / "straight.csv"
    route.write_text("x_m,y_m\n" + "".join(f"{x:.1f},0.0\n" for x in range(0, 201, 5)))
    profile = folder / "profile.csv"
    result = run(plan, route, "--max-jerk", "0.5", "--max-accel", "3", "--max-decel", "3",
                 "--max-speed", "40", "-o", profile)
    assert result.exit_code == 0, result.output
    return folder, profile


def test_export_drives_a_launch_ramp_at_its_jerk(planned_slow_launch, tmp_path):
    from curvespeed import rest_step
    from curvespeed.io.profile_csv import read_station_profile

    _, profile = planned_slow_launch
    cols = read_table_csv(profile).columns
    kinds = cols["step_kind"][:-1]
    # the move is planned as its closed form (curvespeed.closed_form_moves): the steps of the
    # ramp after the one leaving rest, wholly inside it to station 16, then the step in which
    # it ends (16.7 m) and the move turns, driven through its peak (accel_turn), then every
    # step at -J to the same turn backwards (183) and the ramp into the stop
    linear = np.flatnonzero(kinds == "linear_accel")
    assert kinds[0] == kinds[-1] == "jerk_ramp"
    assert linear.tolist() == list(range(1, 16)) + list(range(17, 183)) + list(range(184, 199))
    assert np.flatnonzero(kinds == "accel_turn").tolist() == [16, 183]
    # each is driven at constant jerk: read back from the file's stations, speeds and times
    # (9 decimals), the jerk of a step wholly inside the ramp is the bound the plan rode (the
    # plan's speeds are the ramp's, docs/method.md; measured within 4e-5 of it, the rounding
    # of the times: the jerk is 12 (T v - ds) / T^3, a difference of 3e-4 m at T = 0.2 s), and
    # the step in which the move turns rises at it to the peak and falls at it after
    sp = read_station_profile(profile)
    ds = np.diff(sp.station_m)[linear]
    v0, v1 = sp.speed_mps[linear], sp.speed_mps[linear + 1]
    T = sp.step_time_s[linear]
    a0, jerk = rest_step.linear_accel_step(ds, v0, v1, T)
    # the rounding of the times (each to 5e-10 s) moves 12 (c / 2 - 1) ds / T^3 by up to
    # 6 (v + v') 1e-9 / T^3: 2e-3 m/s^3 at the move's peak speed, 17 m/s
    assert np.all(np.abs(np.abs(jerk) - 0.5) <= 1e-4 + 6.0 * (v0 + v1) * 1e-9 / T ** 3)
    np.testing.assert_allclose(sp.switch_shapes.jerk[[16, 183]], 0.5, rtol=2e-4)
    # one step's end acceleration is the next one's start (the motion is a ramp, not a
    # staircase, whose steps differ by 0.06-0.3 m/s^2 here): measured within 1.1e-6 m/s^2
    launch = linear[:15]
    ends = a0[:15] + jerk[:15] * sp.step_time_s[launch]
    np.testing.assert_allclose(ends[:-1], a0[1:15], atol=1e-5)
    # the trajectory takes the planned time and is a ramp in the samples too
    out = tmp_path / "trajectory.csv"
    assert run(export, profile, "--dt", "0.01", "-o", out).exit_code == 0
    traj = read_table_csv(out).columns
    assert traj["time_s"][-1] == pytest.approx(cols["time_s"][-1], abs=1e-6)
    t, a = traj["time_s"], traj["accel_mps2"]
    step = np.searchsorted(sp.node_time_s, t, side="right") - 1
    same = (step[:-1] == step[1:]) & (step[:-1] >= 1) & (step[:-1] <= 15)
    rate = np.diff(a)[same] / np.diff(t)[same]
    assert same.sum() > 300                               # 3.5 s of ramp
    np.testing.assert_allclose(rate, 0.5, rtol=5e-3)        # within each step: the ramp
    # on through the turn: the ramp's acceleration continued across station 16 (no jump), up
    # at the bound to the peak and down at it after; the samples' rates within 5e-3 of it
    # (trajectory accelerations are written to 1e-6 m/s^2, 1e-4 m/s^3 over 0.01 s)
    turn = (step[:-1] >= 15) & (step[1:] <= 16) & (step[1:] >= 15)
    rate = np.diff(a)[turn] / np.diff(t)[turn]
    assert turn.sum() > 20 and np.all(np.abs(rate) <= 0.5 * (1 + 5e-3))   # 2 x 0.12 s
    assert rate.max() > 0.5 * (1 - 5e-3) and rate.min() < -0.5 * (1 - 5e-3)


def _export_refuses(bad, tmp_path, message: str) -> None:
    """``export`` of the edited profile ``bad`` exits 2 saying ``message`` and writes nothing."""
    result = run(export, bad, "-o", tmp_path / "t.csv")
    assert result.exit_code == 2 and message in result.output, result.output
    assert not (tmp_path / "t.csv").exists()


def test_an_accel_turn_step_continues_a_ramp_and_fits_its_row(planned_slow_launch, tmp_path):
    _, profile = planned_slow_launch
    # line k + 2 holds step k: a step that rises, holds and falls ends with the acceleration
    # of the step across its faster node, which must not switch (step 16 turns)
    _export_refuses(edit_profile(profile, tmp_path, 17, "step_kind", "accel_rise_hold_fall"),
                    tmp_path, "line 17: column 'step_kind' value 'accel_rise_hold_fall' needs")
    # a plain step at rest is not a step kind next to rest's
    _export_refuses(edit_profile(profile, tmp_path, 2, "step_kind", "linear_accel"), tmp_path,
                    "line 2: column 'step_kind' value 'linear_accel' is allowed only on a step "
                    "with neither end at rest")
    # the turn's row with its time edited 5 % longer: no motion from the ramp's end through
    # one turn at any jerk covers the step so
    cols = read_table_csv(profile).columns
    slow = cols["time_s"][17] + 0.05 * (cols["time_s"][17] - cols["time_s"][16])
    _export_refuses(edit_profile(profile, tmp_path, 19, "time_s", f"{slow:.9f}"), tmp_path,
                    "line 18: column 'step_kind' value 'accel_turn'")


def test_linear_accel_steps_must_be_away_from_rest_and_timed(planned_slow_launch, tmp_path):
    _, profile = planned_slow_launch
    _export_refuses(edit_profile(profile, tmp_path, 2, "step_kind", "linear_accel"), tmp_path,
                    "line 2: column 'step_kind' value 'linear_accel' is allowed only on a step "
                    "with neither end at rest")
    _export_refuses(without_column(profile, "time_s", tmp_path / "no_time.csv"), tmp_path,
                    "needs the time_s column")


def test_profile_without_step_kind_exports_as_before(planned_with_stop, tmp_path):
    # files written before the column existed (or by hand): the steps next to rest are
    # recognised from time_s, as before, and give the same trajectory as the column does on
    # them; every other step is driven at constant acceleration (this profile's moves are
    # their closed form, whose constant-jerk and switching steps such a file cannot say)
    _, profile = planned_with_stop
    out = tmp_path / "trajectory.csv"
    assert run(export, profile, "--station-step", "0.5", "-o", out).exit_code == 0
    old = without_column(profile, "step_kind", tmp_path / "old.csv")
    same = tmp_path / "same.csv"
    result = run(export, old, "--station-step", "0.5", "-o", same)
    assert result.exit_code == 0, result.output
    with_kinds, without = read_table_csv(out).columns, read_table_csv(same).columns
    first = with_kinds["station_m"] <= 1.0                       # the step leaving rest
    for name in ("time_s", "speed_mps", "accel_mps2"):
        np.testing.assert_array_equal(without[name][first], with_kinds[name][first])
    ramp = np.flatnonzero(read_table_csv(profile).columns["step_kind"] == "linear_accel")[0]
    later = with_kinds["station_m"] > ramp + 1.0                 # past a constant-jerk step
    assert np.any(without["accel_mps2"][later] != with_kinds["accel_mps2"][later])
    # without either column nothing marks a step as driven with a jerk ramp: constant
    # acceleration everywhere, so the start has the first step's full acceleration
    bare = without_column(old, "time_s", tmp_path / "bare.csv")
    flat = tmp_path / "flat.csv"
    assert run(export, bare, "--station-step", "0.5", "-o", flat).exit_code == 0
    assert read_table_csv(same).columns["accel_mps2"][0] == 0.0
    assert read_table_csv(flat).columns["accel_mps2"][0] > 0.0


# -- plot --------------------------------------------------------------------------------------

@pytest.mark.parametrize("suffix", [".png", ".svg", ".pdf"])
def test_plot_writes_the_figure_with_the_sidecar(metric, tmp_path, suffix):
    path, _ = metric
    out = tmp_path / f"figure{suffix}"
    result = run(plot, path, "-o", out)
    assert result.exit_code == 0, result.output
    assert out.stat().st_size > 10_000
    assert "metric.meta.json" in result.output and "no sidecar" not in result.output


def test_plot_draws_the_gg_diagram_as_a_figure_of_its_own(metric, tmp_path):
    path, _ = metric
    out, gg = tmp_path / "figure.png", tmp_path / "gg.svg"
    result = run(plot, path, "-o", out, "--gg", gg)
    assert result.exit_code == 0, result.output
    assert out.read_bytes().startswith(b"\x89PNG") and gg.read_bytes().startswith(b"<?xml")
    assert "g-g diagram" in result.output
    out.unlink()
    # an existing g-g figure without --force: refused, and the overview not written either
    result = run(plot, path, "-o", out, "--gg", gg)
    assert result.exit_code == 2 and "gg.svg: file exists" in result.output
    assert not out.exists()
    assert run(plot, path, "-o", out, "--gg", tmp_path / "gg.jpg").exit_code == 2


def test_plot_without_sidecar_says_so(tmp_path):
    path, _ = write_profile(tmp_path, geographic=True, with_meta=False)
    out = tmp_path / "figure.png"
    result = run(plot, path, "-o", out)
    assert result.exit_code == 0
    assert "note: no sidecar" in result.output and "without limits, zones and stops" \
        in result.output
    assert out.exists()


def test_plot_with_explicit_meta(tmp_path):
    path, profile = write_profile(tmp_path, geographic=False, with_meta=False)
    meta = tmp_path / "elsewhere.json"
    write_meta_json(profile_meta(profile, Limits(), CONSTRAINTS, None), meta)
    out = tmp_path / "figure.png"
    result = run(plot, path, "--meta", meta, "-o", out)
    assert result.exit_code == 0 and "elsewhere.json" in result.output


@pytest.mark.parametrize("content, message", [
    (None, "no such file"),
    ("{not json", "not valid JSON"),
    ('{"route": {}}', 'no "limits" object'),
    ('{"limits": {"max_accel_mps2": "fast"}}', "limits.max_accel_mps2 must be a finite number"),
])
def test_plot_refuses_a_bad_meta(metric, tmp_path, content, message):
    path, _ = metric
    meta = tmp_path / "given.meta.json"
    if content is not None:
        meta.write_text(content)
    out = tmp_path / "figure.png"
    result = run(plot, path, "--meta", meta, "-o", out)
    assert result.exit_code == 2 and message in result.output
    assert not out.exists()


def test_plot_refuses_unknown_format_and_existing_file(metric, tmp_path):
    path, _ = metric
    result = run(plot, path, "-o", tmp_path / "figure.jpg")
    assert result.exit_code == 2 and "use .png, .svg, .pdf" in result.output
    assert not (tmp_path / "figure.jpg").exists()
    out = tmp_path / "figure.png"
    out.write_bytes(b"old")
    result = run(plot, path, "-o", out)
    assert result.exit_code == 2 and "file exists" in result.output
    assert out.read_bytes() == b"old"
    assert run(plot, path, "-o", out, "--force").exit_code == 0
    assert out.read_bytes().startswith(b"\x89PNG")


# -- every bundled route -----------------------------------------------------------------------

ROUTES = Path(__file__).resolve().parent.parent / "routes"


@pytest.mark.parametrize("route, geographic", [("mountain_road.csv", False),
                                               ("test_loop.geojson", True),
                                               ("shuttle_route.gpx", True)])
def test_export_and_plot_work_on_every_bundled_route(tmp_path, route, geographic):
    from curvespeed.cli.plan_cmd import plan

    profile = tmp_path / "profile.csv"
    result = run(plan, ROUTES / route, "-o", profile)
    assert result.exit_code == 0, result.output
    planned_time = json.loads((tmp_path / "profile.meta.json").read_text())["total_time_s"]

    out = tmp_path / "trajectory.csv"
    result = run(export, profile, "--dt", "0.05", "--dwell", "2", "-o", out)
    assert result.exit_code == 0, result.output
    cols = read_table_csv(out).columns
    # the profile file's rounding (stations 0.1 mm, speeds 1e-6 m/s) is the only difference
    # from the planned time: it telescopes along the route except next to rest, where 0.05 mm
    # at ~1 m/s moves a step's time by ~1e-4 s; 1e-5 of the route time bounds it
    assert cols["time_s"][-1] == pytest.approx(planned_time, rel=1e-5)
    assert ("lat" in cols) == geographic

    fmt = "geojson" if geographic else "json"
    result = run(export, profile, "--station-step", "1", "-o", tmp_path / f"t.{fmt}")
    assert result.exit_code == 0, result.output
    result = run(plot, profile, "-o", tmp_path / "overview.png")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "overview.png").read_bytes().startswith(b"\x89PNG")
