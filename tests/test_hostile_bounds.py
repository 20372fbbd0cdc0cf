"""Numbers on the planning path far outside what any vehicle or road has: each is refused with
exit status 2 before anything is written, by a message naming the option, key or file, the
range and the reason (never a traceback from deep inside the planner).

Every route, limit and profile here is invented for the tests.
"""

from __future__ import annotations

import json
import re

import pytest

from hostile_helpers import assert_refused, assert_usage_error, bend_csv, run, snapshot, write


@pytest.fixture
def bend(tmp_path):
    return write(tmp_path, "r.csv", bend_csv())


# --- friction coefficients: 1e-20 reached a division by zero in the rest steps --------------

@pytest.mark.parametrize("args, named, fragments", [
    (["--friction", "1e-20"], "--friction 1e-20", ["outside 0.01..2", "0.1 on ice"]),
    (["--friction", "0.005", "--solver", "convex-reference"], "--friction 0.005",
     ["outside 0.01..2", "1 % grade"]),
    (["--friction-section", "0:100:1e-300"], "--friction-section 0:100:1e-300",
     ["friction_coefficient = 1e-300 is outside 0.01..2", "1 % grade"]),
    (["--friction-section", "0:100:0.5:1e-300"], "--friction-section 0:100:0.5:1e-300",
     ["lateral_friction_coefficient = 1e-300 is outside 0.01..2", "check the value"]),
])
def test_a_friction_coefficient_below_any_road_is_refused(tmp_path, bend, args, named,
                                                          fragments):
    out = tmp_path / "p.csv"
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, *args, "-o", out), tmp_path, before, named, fragments)


def test_a_friction_coefficient_below_any_road_in_a_limits_file_names_the_file(tmp_path, bend):
    limits = write(tmp_path, "l.toml", "[limits]\nlateral_friction_coefficient = 1e-200\n\n"
                   "[[friction]]\nstart_m = 0\nend_m = 50\nfriction_coefficient = 0.5\n")
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, "-l", limits, "-o", tmp_path / "p.csv"), tmp_path, before,
                   str(limits), ["lateral_friction_coefficient = 1e-200 is outside 0.01..2"])


def test_the_lowest_friction_accepted_plans(tmp_path, bend):
    result = run("plan", bend, "--friction", "0.01", "--friction-section", "0:50:0.01:0.01")
    assert result.exit_code == 0, result.output


# --- jerk bounds: 1e50 divided by zero, 1e160 overflowed ------------------------------------

@pytest.mark.parametrize("option, value, fragment", [
    ("--max-jerk", "1e50", "for no bound plan with --solver envelope"),
    ("--max-jerk", "1e160", "for no bound plan with --solver envelope"),
    ("--max-lateral-jerk", "1e160", "leave it unset for no bound"),
    ("--max-lateral-jerk", "1001", "leave it unset for no bound"),
])
def test_a_jerk_bound_that_bounds_nothing_is_refused(tmp_path, bend, option, value, fragment):
    before = snapshot(tmp_path)
    message = assert_refused(run("plan", bend, option, value, "-o", tmp_path / "p.csv"),
                             tmp_path, before, option, ["outside 0.01..1000", fragment])
    assert len(message) < 600, message


def test_the_highest_jerk_bounds_accepted_plan(tmp_path, bend):
    result = run("plan", bend, "--max-jerk", "1000", "--max-lateral-jerk", "1000",
                 "--stop", "60")
    assert result.exit_code == 0, result.output


def test_a_jerk_bound_above_the_range_in_a_limits_file_names_the_key(tmp_path, bend):
    limits = write(tmp_path, "l.toml", "[limits]\nmax_jerk_mps3 = 1e50\n")
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, "-l", limits, "-o", tmp_path / "p.csv"), tmp_path, before,
                   str(limits), ["max_jerk_mps3 = 1e+50 is outside 0.01..1000"])


# --- top speed: 1e-300 was blamed on two stops on neighbouring stations ---------------------

@pytest.mark.parametrize("value", ["1e-300", "0.05"])
def test_a_top_speed_below_a_crawl_is_refused_with_the_range(tmp_path, bend, value):
    before = snapshot(tmp_path)
    message = assert_refused(run("plan", bend, "--max-speed", value, "-o", tmp_path / "p.csv"),
                             tmp_path, before, "--max-speed", ["outside 0.1..1000",
                                                               "walking pace"])
    assert "stop" not in message, message


@pytest.mark.parametrize("args, named", [(["--zone", "20:80:1e-300"], "--zone"),
                                         (["--zone-xy", "20:0:80:0:0.05"], "--zone-xy")])
def test_a_speed_zone_below_a_crawl_is_refused_with_the_range(tmp_path, bend, args, named):
    before = snapshot(tmp_path)
    message = assert_refused(run("plan", bend, *args, "-o", tmp_path / "p.csv"), tmp_path,
                             before, named, ["is below 0.1 m/s", "walking pace",
                                             "use a stop to come to rest"])
    assert "neighbouring stations" not in message, message


# --- start and end speeds: refused without naming the option, key or file ------------------

@pytest.mark.parametrize("option", ["--start-speed", "--end-speed"])
def test_a_negative_end_speed_option_is_named(tmp_path, bend, option):
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, option, "-1", "-o", tmp_path / "p.csv"), tmp_path, before,
                   f"{option} -1", ["must be zero or positive", "give it in m/s"])


@pytest.mark.parametrize("key", ["start_speed_mps", "end_speed_mps"])
def test_a_negative_end_speed_in_a_limits_file_names_the_file_and_key(tmp_path, bend, key):
    limits = write(tmp_path, "l.toml", f"[limits]\n\n[route]\n{key} = -1\n")
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, "-l", limits, "-o", tmp_path / "p.csv"), tmp_path, before,
                   str(limits), [f"[route] {key} = -1", "must be zero or positive",
                                 "give it in m/s"])


# --- dwell times: 1e300 s was planned, and replay crashed or ran for minutes ----------------

@pytest.mark.parametrize("dwell", ["1e300", "3601"])
def test_a_stop_held_longer_than_an_hour_in_a_limits_file_is_refused(tmp_path, bend, dwell):
    limits = write(tmp_path, "l.toml", f"[limits]\n\n[[stop]]\nstation_m = 60\ndwell_s = {dwell}\n")
    before = snapshot(tmp_path)
    message = assert_refused(run("plan", bend, "-l", limits, "-o", tmp_path / "p.csv"),
                             tmp_path, before, str(limits),
                             ["[stop #1] dwell_s", "is outside 0..3600 s", "parked"])
    assert len(message) < 400, message


def test_a_stop_held_an_hour_plans(tmp_path, bend):
    limits = write(tmp_path, "l.toml", "[limits]\n\n[[stop]]\nstation_m = 60\ndwell_s = 3600\n")
    assert run("plan", bend, "-l", limits).exit_code == 0


def planned(folder, bend):
    profile = folder / "p.csv"
    assert run("plan", bend, "--stop", "60", "-o", profile).exit_code == 0
    return profile


@pytest.mark.parametrize("dwell", ["1e300", "1e9", "1e5"])
def test_replay_refuses_a_dwell_longer_than_an_hour(tmp_path, bend, dwell):
    profile = planned(tmp_path, bend)
    before = snapshot(tmp_path)
    assert_refused(run("replay", profile, "-o", tmp_path / "run.csv", "--dwell", dwell,
                       hang_s=20), tmp_path, before, "--dwell",
                   ["is outside 0..3600 s", "replay the runs before and after it separately"])


def test_export_refuses_a_dwell_longer_than_an_hour(tmp_path, bend):
    profile = planned(tmp_path, bend)
    before = snapshot(tmp_path)
    result = run("export", profile, "-o", tmp_path / "t.csv", "--dwell", "1e300")
    assert_usage_error(result, tmp_path, before, ["'--dwell'", "1e+300 is above 3600",
                                                  "parked", "give at most 3600"])


def test_export_ignores_a_sidecar_holding_a_stop_past_an_hour(tmp_path, bend):
    # a sidecar written by hand (or before dwells were bounded) holding a stop for 1e300 s does
    # not fit the profile: one warning names it and the dwell, and export goes on without it
    # (before sidecars were checked, export refused, blaming the default --dt)
    profile = planned(tmp_path, bend)
    sidecar = tmp_path / "p.meta.json"
    doc = json.loads(sidecar.read_text())
    doc["constraints"]["stops"][0]["dwell_s"] = 1e300
    sidecar.write_text(json.dumps(doc))
    result = run("export", profile, "-o", tmp_path / "t.csv")
    assert result.exit_code == 0, result.output
    warning = [line for line in result.output.splitlines() if line.startswith("warning:")]
    assert len(warning) == 1 and "p.meta.json" in warning[0], result.output
    assert "dwell_s = 1e+300 is outside 0..3600 s" in warning[0]
    assert "the sidecar is ignored" in warning[0]
    assert (tmp_path / "t.csv").exists()


@pytest.mark.parametrize("dt, many", [("1e-300", "e+30"), ("1e-320", "over 1.8e+308")])
def test_export_names_the_step_given_with_the_time_it_samples(tmp_path, bend, dt, many):
    profile = planned(tmp_path, bend)
    before = snapshot(tmp_path)
    result = run("export", profile, "-o", tmp_path / "t.csv", "--dt", dt)
    line = assert_usage_error(result, tmp_path, before, ["'--dt'", f"{many}", "samples every",
                                                         "held at stops 0 s",
                                                         "choose a larger step"])
    assert len(line) < 300, line


# --- speeds to check: 1e300 km/h was judged, with nan and inf cells and "brake ok" ----------

@pytest.mark.parametrize("value", ["1e300", "3601"])
def test_check_refuses_a_constant_speed_no_road_vehicle_reaches(tmp_path, bend, value):
    before = snapshot(tmp_path)
    assert_refused(run("check", bend, "--speed-kmh", value, "--csv", tmp_path / "c.csv"),
                   tmp_path, before, f"--speed-kmh {float(value):g}",
                   ["is above 3600 km/h (1000 m/s)", "check the value and its units"])


def test_check_takes_the_fastest_plausible_constant_speed(tmp_path, bend):
    # 3600 km/h is far too fast for the bend (exit 1), but a speed a check can judge
    result = run("check", bend, "--speed-kmh", "3600")
    assert result.exit_code == 1, result.output
    assert not re.search(r"\b(nan|inf)\b", result.output), result.output


def test_a_road_speed_field_no_vehicle_reaches_is_that_road_s_problem(tmp_path):
    from curvespeed.io.network import FieldMap, iter_specs

    line = [[-20.0 + 5e-5 * k, -35.0] for k in range(50)]
    roads = [{"type": "Feature", "properties": {"road_id": f"r{i}", "speed_kmh": speed},
              "geometry": {"type": "LineString", "coordinates": line}}
             for i, speed in enumerate([50.0, 5000.0, 1e300])]
    net = write(tmp_path, "net.geojson", json.dumps({"type": "FeatureCollection",
                                                     "features": roads}))
    specs = list(iter_specs([net], FieldMap(id_field="road_id", speed_field="speed_kmh")))
    assert specs[0].problem is None and specs[0].speed_mps == pytest.approx(50.0 / 3.6)
    for spec, shown in zip(specs[1:], ["5000 km/h is 1388.89 m/s", "1e+300 km/h is 2.77778e+299"]):
        assert spec.speed_mps is None
        assert spec.problem.startswith(f"field 'speed_kmh' (the speed): {shown}"), spec.problem
        assert "above 1000 m/s (3600 km/h)" in spec.problem
        assert "check the value and --speed-unit" in spec.problem


# --- numbers of hundreds of digits in messages ----------------------------------------------

@pytest.mark.parametrize("args, named, fragment", [
    (["--stop-xy", "1e300:0"], "--stop-xy 1e300:0: stop at x 1e+300 m, y 0.00 m",
     "a coordinate beyond 1e+08 m is farther than any place on Earth"),
    (["--zone-xy", "0:0:1e300:0:5"], "--zone-xy 0:0:1e300:0:5",
     "a coordinate beyond 1e+08 m is farther than any place on Earth"),
])
def test_a_position_beyond_the_earth_is_refused_in_a_short_message(tmp_path, bend, args, named,
                                                                    fragment):
    before = snapshot(tmp_path)
    result = run("plan", bend, *args, "-o", tmp_path / "p.csv")
    message = assert_refused(result, tmp_path, before, named, [fragment, "check the units"])
    assert len(message) < 300, message


@pytest.mark.parametrize("noise, side", [("1e300", "more"), ("1e-300", "less")])
def test_a_position_noise_far_off_is_warned_about_in_a_short_line(tmp_path, bend, noise, side):
    result = run("plan", bend, "--position-noise", noise)
    assert result.exit_code == 0, result.output
    warned = [line for line in result.output.splitlines()
              if line.startswith("warning:") and "noise stated" in line]
    assert len(warned) == 1, result.output
    # the factor in three significant digits with its exponent, not in hundreds of digits
    assert re.search(rf"is \d(\.\d+)?e\+\d+ times {side} than the points show", warned[0]), \
        warned[0]
    assert len(warned[0]) < 300, warned[0]
