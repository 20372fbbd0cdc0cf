"""``curvespeed check`` on the command line: exit codes, messages, files written or not.

The command object is invoked directly with click's test runner (the group registration lives in
``cli/main.py``). Routes written here are small invented alignments; the bundled routes are the
invented demo routes under ``routes/``.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.check_cmd import check
from curvespeed.cli.plan_cmd import plan
from curvespeed.errors import CurvespeedWarning
from curvespeed.geodesy import LocalProjection
from curvespeed.io.check_report import CURVE_COLUMNS

ROUTES = Path(__file__).resolve().parent.parent / "routes"

#: Suffixes a numeric JSON key may carry (SI, plus the two units the published methods use).
UNIT_SUFFIXES = ("_m", "_mps", "_mps2", "_mps3", "_1pm", "_s", "_deg", "_kmh", "_mph", "_w",
                 "_kg", "_m2", "_kgpm3", "_m2ps")
#: Dimensionless numeric keys (no unit to name): ratios, uses and counts.
DIMENSIONLESS = {"superelevation", "side_friction_demand", "friction_margin", "friction_use",
                 "comfort_use", "worst_use", "use", "e_max", "f_max", "rate",
                 "friction_coefficient", "lateral_friction_coefficient",
                 "rolling_resistance_coefficient", "number", "stations", "curves",
                 "failed_curves", "violations", "use_tolerance",
                 "use_estimate", "friction_use_estimate", "comfort_use_estimate",
                 "side_friction_demand_bound", "curves_failing_on_bound", "violations_on_estimate",
                 "points_read", "points_fitted", "standstills_merged", "fixes_in_standstills"}


def run(*args):
    result = CliRunner().invoke(check, [str(a) for a in args])
    return result


#: The invented bend: 200 m straight, 40 m clothoid, arc of R 100 m, 40 m clothoid, 200 m
#: straight, turning 90 degrees left in all (each clothoid turns L/(2R) = 0.2 rad).
RADIUS, TRANSITION, STRAIGHT = 100.0, 40.0, 200.0
ARC = 0.5 * math.pi * RADIUS - TRANSITION
LENGTH = 2 * STRAIGHT + 2 * TRANSITION + ARC


def bend_points(spacing=2.0):
    """Design station, x, y of the bend every ``spacing`` metres (heading integrated exactly
    enough: trapezoids on a 1 cm grid)."""
    ds = 0.01
    s = np.arange(0.0, LENGTH + ds / 2, ds)
    knots = np.cumsum([0.0, STRAIGHT, TRANSITION, ARC, TRANSITION, STRAIGHT])
    k = np.interp(s, knots, [0.0, 0.0, 1 / RADIUS, 1 / RADIUS, 0.0, 0.0])
    h = np.concatenate(([0.0], np.cumsum(0.5 * (k[1:] + k[:-1]) * ds)))
    mid = 0.5 * (h[1:] + h[:-1])
    x = np.concatenate(([0.0], np.cumsum(np.cos(mid) * ds)))
    y = np.concatenate(([0.0], np.cumsum(np.sin(mid) * ds)))
    idx = np.round(np.arange(0.0, LENGTH + 1e-9, spacing) / ds).astype(int)
    return s[idx], x[idx], y[idx]


def bend_route(tmp_path, name="bend.csv", noise_m=0.0) -> Path:
    """The invented bend as a metric route CSV, a point every 2 m (with seeded white noise of
    ``noise_m`` per coordinate if given)."""
    _, x, y = bend_points()
    if noise_m:
        rng = np.random.default_rng(1)
        x = x + rng.normal(0.0, noise_m, x.size)
        y = y + rng.normal(0.0, noise_m, y.size)
    lines = ["# invented test route: straight, clothoid, R 100 m arc, clothoid, straight", "x_m,y_m"]
    lines += [f"{a:.4f},{b:.4f}" for a, b in zip(x, y)]
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def outputs(tmp_path):
    return tmp_path / "report.json", tmp_path / "curves.csv"


# --- exit 0 / 1 -----------------------------------------------------------------------------------

def test_constant_speed_within_the_limits_exits_0(tmp_path):
    # 40 km/h on R 100 m: (11.1 m/s)^2 / 100 = 1.23 m/s^2 < 2.5 (default comfort limit)
    result = run(bend_route(tmp_path), "--speed-kmh", 40)
    assert result.exit_code == 0, result.output
    assert "PASS" in result.stdout
    assert result.stdout.strip().splitlines()[-1].startswith("PASS:")
    assert "v (m/s)" in result.stdout and "a_lat (m/s^2)" in result.stdout   # units in header


def test_constant_speed_above_the_lateral_limit_exits_1_and_names_the_curve(tmp_path):
    # 70 km/h on R 100 m: (19.4 m/s)^2 / 100 = 3.78 m/s^2 > 2.5
    json_file, csv_file = outputs(tmp_path)
    result = run(bend_route(tmp_path), "--speed-kmh", 70, "--json", json_file, "--csv", csv_file)
    assert result.exit_code == 1, result.output
    out = result.stdout
    assert out.strip().splitlines()[-1].startswith("FAIL: 1 of 1 curve(s) fail")
    assert "FAIL" in out and "comfort" in out

    report = json.loads(json_file.read_text(encoding="utf-8"))
    assert report["verdict"] == "fail"
    (curve,) = report["curves"]
    # By design the radius drops below 1000 m 4 m into the entry clothoid (at 204 m) and rises
    # above it 4 m before the end of the exit one. The route is refitted by a smoothing spline,
    # which rounds the kinks of curvature where the clothoids meet the straights: the curve must
    # start within the entry transition (200-240 m) widened by a quarter of its length for that
    # rounding, and end likewise in the exit transition.
    entry, exit_ = STRAIGHT, STRAIGHT + TRANSITION + ARC
    assert entry - TRANSITION / 4 <= curve["start_m"] <= entry + TRANSITION
    assert exit_ <= curve["end_m"] <= exit_ + TRANSITION * 1.25
    # the fit may overshoot the arc's curvature a little where the clothoid meets it: 5 %
    assert curve["min_radius_m"] == pytest.approx(RADIUS, rel=0.05)
    assert curve["direction"] == "left" and curve["passed"] is False
    assert curve["speed_mps"] == pytest.approx(70 / 3.6, rel=1e-12)
    assert any(v["kind"] == "comfort_ellipse" for v in report["violations"])
    stations = report["route"]["stations"]
    assert all(len(arr) == stations for arr in report["per_station"].values())
    _assert_keys_named_with_units(report)

    with csv_file.open(encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    expected = [name for name, _ in CURVE_COLUMNS if not name.startswith("meets_min_radius")]
    assert list(rows[0]) == expected
    assert len(rows) == 1 and rows[0]["result"] == "fail" and rows[0]["direction"] == "left"
    assert float(rows[0]["speed_mps"]) == pytest.approx(70 / 3.6, abs=1e-6)


def _assert_keys_named_with_units(node, path="") -> None:
    """Every numeric value's key carries a unit suffix or is dimensionless."""
    if isinstance(node, dict):
        for key, value in node.items():
            if isinstance(value, (int, float)) and not isinstance(value, bool) and \
                    not path.endswith(("/peak_use", "/peak_use_estimate")):   # uses: ratios
                assert key.endswith(UNIT_SUFFIXES) or key in DIMENSIONLESS, f"{path}/{key}"
            if isinstance(value, list) and value and isinstance(value[0], (int, float)):
                assert key.endswith(UNIT_SUFFIXES) or key.endswith(("_use", "_use_estimate")) \
                    or key in DIMENSIONLESS, f"{path}/{key}"
            _assert_keys_named_with_units(value, f"{path}/{key}")
    elif isinstance(node, list):
        for item in node:
            _assert_keys_named_with_units(item, path)


def test_curve_failing_only_within_the_curvature_uncertainty_exits_1(tmp_path):
    # The bend with 5 cm of noise is a fitted route: its curve has a radius estimate and a
    # bound (docs/check.md). First read the speed the lateral limit allows at the tightest point
    # on the estimate (limit_speed_estimate_mps) and on the bound (limit_speed_mps) ...
    route = bend_route(tmp_path, noise_m=0.05)
    json_file, csv_file = outputs(tmp_path)
    assert run(route, "--speed-kmh", 40, "--json", json_file).exit_code == 0
    (curve,) = json.loads(json_file.read_text(encoding="utf-8"))["curves"]
    on_estimate, on_bound = curve["limit_speed_estimate_mps"], curve["limit_speed_mps"]
    assert curve["min_radius_low_m"] < curve["min_radius_m"] < curve["min_radius_high_m"]
    # ... the bound must be wider than the use tolerance (0.1 %) for the speed between them to
    # fail on the bound alone: a lateral use (v / v_limit)^2 > 1.001
    assert (on_estimate / on_bound) ** 2 > 1.002, (on_estimate, on_bound)
    # ... then hold exactly the estimate's limit speed: within every limit on the estimate,
    # over the comfort limit on the bound
    result = run(route, "--speed-kmh", repr(on_estimate * 3.6), "--json", json_file,
                 "--csv", csv_file, "--force")
    assert result.exit_code == 1, result.output
    out = result.stdout
    assert "FAIL*" in out and "passes on the curvature estimate, fails within its uncertainty" \
        in out
    assert "over only within the curvature's uncertainty" in out
    assert out.strip().splitlines()[-1].startswith(
        "FAIL: 1 of 1 curve(s) fail (1 only within the curvature's uncertainty)")
    report = json.loads(json_file.read_text(encoding="utf-8"))
    (curve,) = report["curves"]
    assert report["verdict"] == "fail" and report["summary"]["curves_failing_on_bound"] == 1
    assert curve["verdict"] == "fails_on_bound" and curve["passed"] is False
    assert curve["comfort_use"] > 1.001 >= curve["comfort_use_estimate"]
    assert curve["violations_on_estimate"] == []
    assert all(not v["on_estimate"] for v in report["violations"])
    with csv_file.open(encoding="utf-8", newline="") as fh:
        (row,) = list(csv.DictReader(fh))
    assert (row["result"], row["verdict"]) == ("fail", "fails_on_bound")


def test_json_report_records_the_fit_and_the_curvature_per_station(tmp_path):
    json_file, _ = outputs(tmp_path)
    assert run(bend_route(tmp_path), "--speed-kmh", 40, "--json", json_file).exit_code == 0
    report = json.loads(json_file.read_text(encoding="utf-8"))
    # the route command's provenance: the noise stated (auto), estimated and used
    noise = report["fit"]["position_noise"]
    assert noise["stated_m"] is None and noise["used_m"] == noise["estimated_m"] > 0.0
    assert report["route"]["curvature"] == "estimated"
    per_station = report["per_station"]
    kappa = np.abs(per_station["curvature_1pm"])
    assert np.all(np.asarray(per_station["curvature_bound_1pm"]) >= kappa)
    assert np.all(np.asarray(per_station["curvature_sd_1pm"]) >= 0.0)
    assert np.all(np.asarray(per_station["comfort_ellipse_use"])
                  >= np.asarray(per_station["comfort_ellipse_use_estimate"]))


def test_design_speed_flags_a_curve_below_the_minimum_radius(tmp_path):
    # Green Book 2011 (from memory): 80 km/h, e_max 8 %, f_max 0.14 -> R_min 229 m; R 100 m fails.
    json_file, _ = outputs(tmp_path)
    result = run(bend_route(tmp_path), "--speed-kmh", 40, "--design-speed-kmh", 80,
                 "--json", json_file)
    assert result.exit_code == 1, result.output
    assert "SHORT" in result.stdout and "below the minimum 229 m" in result.stdout
    report = json.loads(json_file.read_text(encoding="utf-8"))
    assert report["design"]["table_min_radius_m"] == 229.0
    assert report["curves"][0]["meets_min_radius"] is False


def test_planned_profile_checks_clean(tmp_path):
    route = bend_route(tmp_path)
    profile = tmp_path / "profile.csv"
    planned = CliRunner().invoke(plan, [str(route), "-o", str(profile)])
    assert planned.exit_code == 0, planned.output
    result = run(route, "--speeds", profile)
    assert result.exit_code == 0, result.output
    assert "PASS" in result.stdout


def test_zones_of_the_limits_file_are_the_default_speeds(tmp_path):
    route = bend_route(tmp_path)
    limits = tmp_path / "limits.toml"
    # 25 m/s on the first 100 m, 15 m/s after. Braking from 25 m/s to the arc's sqrt(250) m/s
    # at 2.5 m/s^2 takes (625 - 250) / 5 = 75 m (v^2 / (2a)) and the 25 m/s stretch ends 100 m
    # before the arc; 15 m/s is within the arc's limit. A zone drop on a straight is no violation.
    limits.write_text("[limits]\n\n[[zone]]\nstart_m = 0.0\nend_m = 100.0\nmax_speed_mps = 25.0\n"
                      "\n[[zone]]\nstart_m = 100.0\nend_m = 2000.0\nmax_speed_mps = 15.0\n",
                      encoding="utf-8")
    # the second zone runs on past the route's end (596 m): said, and applied up to the end
    with pytest.warns(CurvespeedWarning, match="runs past the route"):
        implicit = run(route, "-l", limits)
        explicit = run(route, "-l", limits, "--zones-only")
    assert implicit.exit_code == explicit.exit_code == 0, implicit.output
    assert "speed zones of" in implicit.stdout
    # the same zones moved so the 25 m/s stretch ends 10 m before the arc: too late to brake
    late = tmp_path / "late.toml"
    late.write_text(limits.read_text(encoding="utf-8").replace("100.0", "190.0"),
                    encoding="utf-8")
    with pytest.warns(CurvespeedWarning, match="runs past the route"):
        result = run(route, "-l", late)
    assert result.exit_code == 1, result.output
    assert "too fast to brake for the curve" in result.stdout and "LATE" in result.stdout


# --- exit 2: bad input, nothing written -----------------------------------------------------------

def assert_bad_input(result, fragments, written=()):
    assert result.exit_code == 2, result.output
    message = result.stderr if result.stderr else result.output
    for fragment in fragments:
        assert fragment in message, message
    for path in written:
        assert not Path(path).exists(), f"{path} written on error"


def test_two_speed_sources_are_refused(tmp_path):
    json_file, csv_file = outputs(tmp_path)
    result = run(bend_route(tmp_path), "--speed-kmh", 50, "--zones-only", "--json", json_file,
                 "--csv", csv_file)
    assert_bad_input(result, ["only one of --speeds, --speed-kmh, --zones-only"],
                     [json_file, csv_file])


def test_speeds_file_shorter_than_the_route_is_refused(tmp_path):
    json_file, csv_file = outputs(tmp_path)
    speeds = tmp_path / "short.csv"
    speeds.write_text("station_m,speed_mps\n0,10\n150,10\n300,10\n", encoding="utf-8")
    result = run(bend_route(tmp_path), "--speeds", speeds, "--json", json_file, "--csv", csv_file)
    assert_bad_input(result, ["error:", "short.csv", "missing 300.0-", "at the end"],
                     [json_file, csv_file])


def test_unsorted_speeds_name_the_line(tmp_path):
    json_file, _ = outputs(tmp_path)
    speeds = tmp_path / "unsorted.csv"
    speeds.write_text("station_m,speed_mps\n0,10\n300,10\n200,10\n600,10\n", encoding="utf-8")
    result = run(bend_route(tmp_path), "--speeds", speeds, "--json", json_file)
    assert_bad_input(result, ["unsorted.csv: line 4: station_m 200 is not after 300"], [json_file])


def test_gpx_speeds_on_a_metric_route_are_refused(tmp_path):
    track = tmp_path / "drive.gpx"
    points = "".join(f'<trkpt lat="{-41.5 + 1e-5 * i:.7f}" lon="-27.75"><time>'
                     f'2026-05-01T10:00:{i:02d}Z</time></trkpt>' for i in range(10))
    track.write_text(f'<gpx version="1.1" xmlns="http://www.topografix.com/GPX/1/1"><trk>'
                     f'<trkseg>{points}</trkseg></trk></gpx>', encoding="utf-8")
    result = run(bend_route(tmp_path), "--speeds", track)
    assert_bad_input(result, ["drive.gpx", "local metric frame"])


@pytest.mark.parametrize("args, fragments", [
    (["--speed-kmh", 50, "--design-speed-kmh", 200], ["outside the AASHTO side-friction table"]),
    (["--speed-kmh", 50, "--design-speed-kmh", 80, "--emax", 0.3], ["e_max"]),
    (["--speed-kmh", -5], ["--speed-kmh -5"]),
    (["--speeds", "nowhere.csv"], ["nowhere.csv: no such file"]),
    (["--speeds", "speeds.txt"], ["speeds.txt: speeds are read from .csv"]),
    (["--speed-kmh", 50, "--curve-radius", 0], ["--curve-radius 0"]),
])
def test_bad_options_exit_2_and_write_nothing(tmp_path, args, fragments):
    json_file, csv_file = outputs(tmp_path)
    result = run(bend_route(tmp_path), *args, "--json", json_file, "--csv", csv_file)
    assert_bad_input(result, fragments, [json_file, csv_file])


def test_missing_route_exits_2(tmp_path):
    json_file, _ = outputs(tmp_path)
    result = run(tmp_path / "nothing.csv", "--speed-kmh", 30, "--json", json_file)
    assert_bad_input(result, ["nothing.csv: no such file"], [json_file])


def test_existing_output_is_kept_without_force(tmp_path):
    json_file, csv_file = outputs(tmp_path)
    json_file.write_text("keep me", encoding="utf-8")
    result = run(bend_route(tmp_path), "--speed-kmh", 40, "--json", json_file, "--csv", csv_file)
    assert_bad_input(result, ["file exists; pass --force"], [csv_file])
    assert json_file.read_text(encoding="utf-8") == "keep me"
    forced = run(bend_route(tmp_path, name="again.csv"), "--speed-kmh", 40, "--json", json_file,
                 "--csv", csv_file, "--force")
    assert forced.exit_code == 0, forced.output
    assert json.loads(json_file.read_text(encoding="utf-8"))["verdict"] == "pass"


def test_same_file_for_json_and_csv_is_refused(tmp_path):
    same = tmp_path / "out.txt"
    result = run(bend_route(tmp_path), "--speed-kmh", 40, "--json", same, "--csv", same)
    assert_bad_input(result, ["--json and --csv name the same file"], [same])


def test_output_is_deterministic(tmp_path):
    route = bend_route(tmp_path)
    texts = []
    for k in range(2):
        json_file, csv_file = tmp_path / f"r{k}.json", tmp_path / f"c{k}.csv"
        result = run(route, "--speed-kmh", 70, "--json", json_file, "--csv", csv_file)
        assert result.exit_code == 1
        texts.append((json_file.read_bytes(), csv_file.read_bytes()))
    # the route file name is in the JSON; both runs used the same one
    assert texts[0] == texts[1]


#: Arbitrary origin in open ocean where the geographic test routes are placed.
ORIGIN_LAT, ORIGIN_LON = -41.5, -27.75


def latlon_bend_route(tmp_path, mirror=False, name="bend_latlon.csv") -> Path:
    """The invented bend as a lat,lon route CSV (turning right instead of left if ``mirror``)."""
    _, x, y = bend_points()
    lat, lon = LocalProjection(ORIGIN_LAT, ORIGIN_LON).to_latlon(x, -y if mirror else y)
    route = tmp_path / name
    route.write_text("# invented test route\nlat,lon\n" + "".join(
        f"{a:.9f},{b:.9f}\n" for a, b in zip(lat, lon)), encoding="utf-8")
    return route


def bend_drive_track(tmp_path, east_m=0.0, detour_m=0.0) -> Path:
    """A GPX drive along the lat,lon bend at 12 m/s, one point a second, from 20 m before its
    start to 20 m after its end (the first leg runs along +x from the origin, the last along
    +y); moved ``east_m`` east, and ``detour_m`` off the road sideways between stations 250 and
    350 m."""
    station, x, y = bend_points()
    driven = np.arange(-20.0, LENGTH + 20.0, 12.0)
    tx = np.where(driven < 0.0, driven, np.interp(driven, station, x)) + east_m
    ty = np.interp(driven, station, y) + np.maximum(driven - station[-1], 0.0)
    tx = tx + np.where((driven > 250.0) & (driven < 350.0), detour_m, 0.0)
    tlat, tlon = LocalProjection(ORIGIN_LAT, ORIGIN_LON).to_latlon(tx, ty)
    points = "".join(f'<trkpt lat="{a:.9f}" lon="{b:.9f}"><time>2026-05-01T10:{i // 60:02d}:'
                     f'{i % 60:02d}Z</time></trkpt>' for i, (a, b) in enumerate(zip(tlat, tlon)))
    track = tmp_path / "drive.gpx"
    track.write_text(f'<gpx version="1.1" xmlns="http://www.topografix.com/GPX/1/1"><trk>'
                     f'<trkseg>{points}</trkseg></trk></gpx>', encoding="utf-8")
    return track


def test_gpx_track_on_a_geographic_route(tmp_path):
    route = latlon_bend_route(tmp_path)
    track = bend_drive_track(tmp_path)
    json_file, _ = outputs(tmp_path)
    result = run(route, "--speeds", track, "--trace-noise", 0.05, "--json", json_file)
    # 12 m/s on R 100 m: 1.44 m/s^2 < 2.5
    assert result.exit_code == 0, result.output
    speeds = json.loads(json_file.read_text(encoding="utf-8"))["per_station"]["speed_mps"]
    # Constant speed along the design stations; the route is refitted (its stations differ from
    # the design's by the chords' shortening on the curve, under 0.1 %) and the points print to
    # 1e-9 deg: 1 %.
    np.testing.assert_allclose(speeds, 12.0, rtol=0.01)


# --- speeds of another route: exit 2 ----------------------------------------------------------

def mirrored_bend_route(tmp_path, geographic) -> Path:
    """The bend turning right instead of left: the same length, other places."""
    if geographic:
        return latlon_bend_route(tmp_path, mirror=True, name="mirrored.csv")
    _, x, y = bend_points()
    path = tmp_path / "mirrored.csv"
    path.write_text("# invented test route\nx_m,y_m\n" + "".join(
        f"{a:.4f},{-b:.4f}\n" for a, b in zip(x, y)), encoding="utf-8")
    return path


@pytest.mark.parametrize("geographic", [False, True])
def test_profile_of_another_route_of_the_same_length_is_refused(tmp_path, geographic):
    # The bend and its mirror image share the first 200 m straight, then part: in the entry
    # clothoid each lies s^3 / (6 R L) off the straight's line (s from 200 m; R L = 4000 m^2),
    # so they are s^3 / 12000 apart, 5 m (the tolerance: the routes' noise is far below 0.5 m)
    # at s = 39.15 m. The first station past that is 240 m (1 m stations); the fitted
    # stations run within a few centimetres of the design's.
    route = latlon_bend_route(tmp_path) if geographic else bend_route(tmp_path)
    profile = tmp_path / "profile.csv"
    assert CliRunner().invoke(plan, [str(route), "-o", str(profile)]).exit_code == 0
    json_file, csv_file = outputs(tmp_path)
    result = run(mirrored_bend_route(tmp_path, geographic), "--speeds", profile,
                 "--json", json_file, "--csv", csv_file)
    columns = "lat,lon" if geographic else "x_m,y_m"
    assert_bad_input(result, ["profile.csv: line ", f"the profile's position ({columns}) lies",
                              "more than the 5.0 m allowed",
                              "planned on another route or with other settings",
                              "plan it again on this route"], [json_file, csv_file])
    at = float(result.stderr.split("at station ")[1].split(" m")[0])
    assert at == pytest.approx(240.0, abs=1.0), result.stderr
    # the same profile on its own route checks clean
    assert run(route, "--speeds", profile).exit_code == 0


def test_profile_of_a_route_of_another_length_is_refused(tmp_path):
    route = bend_route(tmp_path)
    profile = tmp_path / "profile.csv"
    assert CliRunner().invoke(plan, [str(route), "-o", str(profile)]).exit_code == 0
    # the same bend without its last 60 m of straight: every position on it matches, but the
    # profile runs on 60 m past its end (a profile cut short is refused by the coverage check,
    # tests/test_hostile_inputs.py)
    _, x, y = bend_points()
    shorter = tmp_path / "shorter.csv"
    shorter.write_text("x_m,y_m\n" + "".join(f"{a:.4f},{b:.4f}\n"
                                              for a, b in zip(x[:-30], y[:-30])),
                       encoding="utf-8")
    json_file, _ = outputs(tmp_path)
    result = run(shorter, "--speeds", profile, "--json", json_file)
    assert_bad_input(result, ["profile.csv: line ", "its last station lies 60.0 m beyond the "
                              "route's end (more than the 5.0 m allowed)", "plan it again"],
                     [json_file])


def test_two_column_speeds_carry_no_positions_and_are_taken_as_given(tmp_path):
    # station_m,speed_mps only: nothing to compare with the route (docs/check.md says so)
    speeds = tmp_path / "drive.csv"
    # the route's last point is at 596 m (a point every 2 m)
    speeds.write_text("station_m,speed_mps\n0,10\n596,10\n", encoding="utf-8")
    assert run(bend_route(tmp_path), "--speeds", speeds).exit_code == 0


@pytest.fixture(scope="module")
def bundled_profiles(tmp_path_factory):
    """Each bundled route planned once with the default settings."""
    folder = tmp_path_factory.mktemp("bundled")
    profiles = {}
    for name in ("mountain_road.csv", "test_loop.geojson", "shuttle_route.gpx"):
        profiles[name] = folder / f"{Path(name).stem}.profile.csv"
        result = CliRunner().invoke(plan, [str(ROUTES / name), "-o", str(profiles[name])])
        assert result.exit_code == 0, result.output
    return profiles


@pytest.mark.parametrize("name", ["mountain_road.csv", "test_loop.geojson", "shuttle_route.gpx"])
def test_bundled_profile_checks_on_its_own_route(bundled_profiles, name):
    result = run(ROUTES / name, "--speeds", bundled_profiles[name])
    assert result.exit_code == 0, result.output
    assert result.stdout.strip().splitlines()[-1].startswith("PASS:")


def test_a_plan_riding_a_low_jerk_bound_checks_clean_from_its_own_file(tmp_path):
    # check derives the jerk from the file's speeds, differentiating twice over steps of a few
    # hundredths of a second: with speeds at 6 decimals the rounding alone read as 0.1-0.3 % over
    # a 0.5 m/s^3 bound along most of the bundled mountain road (27 violations). The plan itself
    # keeps the bound (its verifier judged the unrounded speeds); its file must say so too.
    profile, limits = tmp_path / "p.csv", tmp_path / "limits.toml"
    limits.write_text("[limits]\nmax_jerk_mps3 = 0.5\n")
    planned = CliRunner().invoke(plan, [str(ROUTES / "mountain_road.csv"), "-l", str(limits),
                                        "-o", str(profile)])
    assert planned.exit_code == 0, planned.output
    result = run(ROUTES / "mountain_road.csv", "--speeds", profile, "-l", limits)
    assert result.exit_code == 0, result.output
    assert result.stdout.strip().splitlines()[-1].startswith("PASS:")


@pytest.mark.parametrize("route, planned_on, columns", [
    # a metric profile (x_m,y_m) on a geographic route; a geographic one (lat,lon) on another
    ("test_loop.geojson", "mountain_road.csv", "x_m,y_m"),
    ("shuttle_route.gpx", "test_loop.geojson", "lat,lon"),
])
def test_bundled_profile_on_another_bundled_route_is_refused(tmp_path, bundled_profiles, route,
                                                             planned_on, columns):
    json_file, csv_file = outputs(tmp_path)
    result = run(ROUTES / route, "--speeds", bundled_profiles[planned_on], "--json", json_file,
                 "--csv", csv_file)
    # the routes lie far apart (the invented places differ): the first station already does
    assert_bad_input(result, [Path(planned_on).stem + ".profile.csv: line 2: at station 0.0 m",
                              f"the profile's position ({columns}) lies",
                              "plan it again on this route"], [json_file, csv_file])


@pytest.mark.parametrize("east_m, detour_m, fragments", [
    # a drive of a road 1 km east: no point within 25 m of the route
    (1000.0, 0.0, ["drive.gpx: no track point lies within 25 m of the route",
                   "check that the track belongs to this route"]),
    # a drive that leaves the road 40 m sideways between stations 250 and 350 m
    (0.0, 40.0, ["drive.gpx: trkpt ", "from the route", "(more than 25 m): the track leaves "
                 "the route here"]),
])
def test_gpx_track_away_from_the_route_is_refused(tmp_path, east_m, detour_m, fragments):
    json_file, csv_file = outputs(tmp_path)
    result = run(latlon_bend_route(tmp_path), "--speeds",
                 bend_drive_track(tmp_path, east_m, detour_m), "--trace-noise", 0.05,
                 "--json", json_file, "--csv", csv_file)
    assert_bad_input(result, fragments, [json_file, csv_file])


# --- the bundled demo routes ---------------------------------------------------------------------

def test_bundled_mountain_road_at_a_hairpin_speed_passes():
    # 20 km/h (5.56 m/s) in the tightest hairpin, R 15 m: 30.9 / 15 = 2.06 m/s^2 < 2.5.
    result = run(ROUTES / "mountain_road.csv", "--speed-kmh", 20)
    assert result.exit_code == 0, result.output
    assert "PASS" in result.stdout


def test_bundled_mountain_road_at_its_top_speed_fails_in_the_hairpins(tmp_path):
    json_file, _ = outputs(tmp_path)
    result = run(ROUTES / "mountain_road.csv", "--json", json_file)   # zones-only: top speed
    assert result.exit_code == 1, result.output
    report = json.loads(json_file.read_text(encoding="utf-8"))
    radii = sorted(c["min_radius_m"] for c in report["curves"] if not c["passed"])
    # the five hairpins (R 15-22 m) are among the failing curves
    assert len(radii) >= 5 and radii[0] == pytest.approx(15.0, rel=0.1)


def test_bundled_loop_with_its_reverse_curves_fails_at_60_kmh():
    # the handling section's R 50 m: (16.7 m/s)^2 / 50 = 5.6 m/s^2 > 2.5
    result = run(ROUTES / "test_loop.geojson", "--speed-kmh", 60)
    assert result.exit_code == 1, result.output
    assert "FAIL" in result.stdout


def test_bundled_shuttle_route_at_walking_pace_passes():
    # 10 km/h (2.78 m/s) in the R 8 m corner: 7.7 / 8 = 0.96 m/s^2 < 2.5
    result = run(ROUTES / "shuttle_route.gpx", "--speed-kmh", 10)
    assert result.exit_code == 0, result.output
