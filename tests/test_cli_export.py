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
    (("--dt", "1e-9"), "samples (more than"),
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
    (12, "station_m", "5.0000", "line 12 (station 5.0 m): station does not increase"),
    (30, "speed_mps", "-1.0", "line 30 (station 28.0 m): speed -1 m/s is negative"),
    (2, "speed_mps", "0.0", None),   # start at rest: fine (a row with zero next to it is not)
    (3, "speed_mps", "0.0", "line 2 (station 0.0 m): speed is zero here and at the next"),
    (50, "x_m", "abc", "line 50: column 'x_m' value 'abc' is not a number"),
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


# -- plot --------------------------------------------------------------------------------------

@pytest.mark.parametrize("suffix", [".png", ".svg", ".pdf"])
def test_plot_writes_the_figure_with_the_sidecar(metric, tmp_path, suffix):
    path, _ = metric
    out = tmp_path / f"figure{suffix}"
    result = run(plot, path, "-o", out)
    assert result.exit_code == 0, result.output
    assert out.stat().st_size > 10_000
    assert "metric.meta.json" in result.output and "no sidecar" not in result.output


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
