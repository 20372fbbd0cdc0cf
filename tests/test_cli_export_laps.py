"""``curvespeed export`` on a loop: several laps, a standing start and a standing finish.

The bundled invented loop (routes/test_loop.geojson) is planned three ways through the command
line: closed (the flying lap), opened at its start from rest to the flying lap's start speed
(the launch lap) and from that speed to rest (the finish lap). The run's times are checked
against the closed form of a run of laps: each lap's time is the sum of its steps' times,
so a run of N laps with a standing start takes launch + (N - 1) x flying lap, with a standing
finish launch + (N - 2) x flying + finish, the planned times read from the profiles' own
``time_s`` columns (the planner's times, written to 1e-6 s). Each command's exit code, message
and files are checked; bad combinations exit 2 with nothing written.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.io.table_csv import read_table_csv

LOOP = Path(__file__).resolve().parent.parent / "routes" / "test_loop.geojson"
MOUNTAIN = Path(__file__).resolve().parent.parent / "routes" / "mountain_road.csv"

#: Tolerance on a run's total time against the closed form from the profiles' ``time_s``, s.
#: The export recomputes every step's time from the written stations (0.1 mm) and speeds
#: (1e-6 m/s); a half unit of the speed's last digit changes a 1 m step at 30 m/s by about
#: 1e-9 s and one near rest (1.7 m/s) by 3e-7 s, over 3,762 steps a lap: a few 1e-5 s at
#: worst for three laps, while a lap counted twice or left out is 159 s.
RUN_TIME_S = 1e-4


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def last_time(profile: Path) -> float:
    return float(read_table_csv(profile).columns["time_s"][-1])


@pytest.fixture(scope="module")
def laps(tmp_path_factory):
    """The flying, launch and finish laps of the bundled loop, planned by the command line."""
    folder = tmp_path_factory.mktemp("laps")
    flying = folder / "flying.csv"
    result = run("plan", LOOP, "-o", flying)
    assert result.exit_code == 0, result.output
    # the flying lap's start speed, as written (the launch lap ends there, the finish starts)
    v0 = flying.read_text().splitlines()[1].split(",")[6]
    launch, finish = folder / "launch.csv", folder / "finish.csv"
    result = run("plan", LOOP, "--open", "--start-speed", "0", "--end-speed", v0, "-o", launch)
    assert result.exit_code == 0, result.output
    result = run("plan", LOOP, "--open", "--start-speed", v0, "--end-speed", "0", "-o", finish)
    assert result.exit_code == 0, result.output
    return {"flying": flying, "launch": launch, "finish": finish, "v0": float(v0),
            "folder": folder}


def exported(laps, tmp_path, *args, name="run.json"):
    out = tmp_path / name
    result = run("export", laps["flying"], "-o", out, *args)
    assert result.exit_code == 0, result.output
    return out, result


def test_standing_start_and_laps_total_is_launch_plus_flying_laps(laps, tmp_path):
    out, result = exported(laps, tmp_path, "--laps", "3", "--launch-lap", laps["launch"])
    doc = json.loads(out.read_text())
    t_launch, t_lap = last_time(laps["launch"]), last_time(laps["flying"])
    # closed form: launch + (N - 1) x flying lap
    assert doc["total_time_s"] == pytest.approx(t_launch + 2 * t_lap, abs=RUN_TIME_S)
    assert doc["columns"]["time_s"][-1] == pytest.approx(t_launch + 2 * t_lap, abs=RUN_TIME_S)
    # each lap starts where and when the one before ends
    length = float(read_table_csv(laps["flying"]).columns["station_m"][-1])
    np.testing.assert_allclose(doc["laps"]["start_station_m"], length * np.arange(4),
                               atol=2e-4)   # three lengths of 0.1 mm each, summed
    np.testing.assert_allclose(doc["laps"]["start_time_s"],
                               [0.0, t_launch, t_launch + t_lap, t_launch + 2 * t_lap],
                               atol=RUN_TIME_S)
    assert doc["laps"]["count"] == 3
    assert "laps   3: launch" in result.output and "flying" in result.output


def test_each_lap_covers_its_own_station_range(laps, tmp_path):
    out, _ = exported(laps, tmp_path, "--laps", "3", "--launch-lap", laps["launch"],
                      name="run.csv")
    cols = read_table_csv(out).columns
    length = float(read_table_csv(laps["flying"]).columns["station_m"][-1])
    lap, s = cols["lap"], cols["station_m"]
    assert set(np.unique(lap)) == {1, 2, 3}
    assert np.all(np.diff(lap) >= 0)                     # laps in order, never back
    for j in (1, 2, 3):
        mine = s[lap == j]
        # written stations are to 0.1 mm; three lap lengths of them add up to 0.3 mm
        assert mine.min() >= (j - 1) * length - 3e-4
        assert mine.max() <= j * length + 3e-4
        # the lap really goes round: it spans its length but for at most one time step at
        # each end (30 m/s top speed x 0.05 s)
        assert mine.max() - mine.min() > length - 2 * 30.0 * 0.05 - 1e-3


def test_time_and_speed_are_continuous_across_the_joins(laps, tmp_path):
    out, _ = exported(laps, tmp_path, "--laps", "3", "--launch-lap", laps["launch"],
                      "--finish-lap", laps["finish"], name="run.csv")
    cols = read_table_csv(out).columns
    t, v, a = cols["time_s"], cols["speed_mps"], cols["accel_mps2"]
    dt = np.diff(t)
    # one time base: every step 0.05 s (written to 1e-6 s) but the last, which is shorter
    np.testing.assert_allclose(dt[:-1], 0.05, atol=2e-6)
    assert 0.0 < dt[-1] <= 0.05 + 1e-6
    # no speed jump anywhere, joins included: between samples the speed changes by at most
    # the largest acceleration times the step (built-in limits: 1.5 up, 2.5 m/s^2 down),
    # plus 1e-6 m/s for the written digits
    assert np.all(np.abs(np.diff(v)) <= np.abs(a).max() * dt + 2e-6)
    # and at the joins themselves the speed is the flying lap's start speed
    joins = np.flatnonzero(np.diff(cols["lap"]) > 0) + 1
    assert joins.size == 2
    for j in joins:
        assert abs(v[j] - laps["v0"]) <= 2.5 * 0.05 + 2e-6
    assert v[0] == 0.0 and v[-1] == 0.0                  # standing start and finish


def test_standing_finish_total_is_launch_flying_and_finish(laps, tmp_path):
    out, result = exported(laps, tmp_path, "--laps", "3", "--launch-lap", laps["launch"],
                           "--finish-lap", laps["finish"])
    doc = json.loads(out.read_text())
    expected = last_time(laps["launch"]) + last_time(laps["flying"]) + last_time(laps["finish"])
    assert doc["total_time_s"] == pytest.approx(expected, abs=RUN_TIME_S)
    assert doc["columns"]["speed_mps"][-1] == 0.0
    assert "finish" in result.output



@pytest.mark.parametrize("kind", ["start", "finish"])
def test_plan_standing_makes_the_lap_export_joins(laps, tmp_path, kind):
    # `plan --standing start|finish` plans the loop opened at its start from rest up to the
    # flying lap's start speed (or from it down to rest) in one command. It must be the lap
    # the two-command recipe makes (--open and the end speeds as written): the end speed it
    # uses is the flying lap's unrounded one, at most half a unit of the written 1e-6 m/s away,
    # so speeds agree to 1e-6 m/s and times to 1e-4 s (RUN_TIME_S, above); and export must
    # join it to the flying lap.
    lap = tmp_path / f"{kind}.csv"
    result = run("plan", LOOP, "--standing", kind, "-o", lap)
    assert result.exit_code == 0, result.output
    assert f"standing {kind}: the loop opened at its start" in result.output
    mine = read_table_csv(lap).columns
    recipe = read_table_csv(laps["launch" if kind == "start" else "finish"]).columns
    np.testing.assert_allclose(mine["speed_mps"], recipe["speed_mps"], atol=1e-6)
    assert mine["time_s"][-1] == pytest.approx(recipe["time_s"][-1], abs=RUN_TIME_S)
    ends = (mine["speed_mps"][0], mine["speed_mps"][-1])
    assert ends == ((0.0, pytest.approx(laps["v0"], abs=1e-6)) if kind == "start"
                    else (pytest.approx(laps["v0"], abs=1e-6), 0.0))
    option = "--launch-lap" if kind == "start" else "--finish-lap"
    out, _ = exported(laps, tmp_path, "--laps", "2", option, lap)
    expected = last_time(lap) + last_time(laps["flying"])
    assert json.loads(out.read_text())["total_time_s"] == pytest.approx(expected, abs=RUN_TIME_S)


@pytest.mark.parametrize("args, message", [
    (("--open",), "leave out --open"),
    (("--start-speed", "3"), "leave out --open, --start-speed"),
])
def test_plan_standing_refuses_what_it_sets_itself(tmp_path, args, message):
    out = tmp_path / "lap.csv"
    result = run("plan", LOOP, "--standing", "start", *args, "-o", out)
    assert result.exit_code == 2 and message in result.output
    assert not out.exists()


def test_plan_standing_needs_a_loop(tmp_path):
    out = tmp_path / "lap.csv"
    result = run("plan", MOUNTAIN, "--standing", "finish", "-o", out)
    assert result.exit_code == 2 and "is not a closed route" in result.output
    assert not out.exists()

def test_flying_laps_alone_repeat_the_lap_time(laps, tmp_path):
    out, _ = exported(laps, tmp_path, "--laps", "4", "--station-step", "5")
    doc = json.loads(out.read_text())
    assert doc["total_time_s"] == pytest.approx(4 * last_time(laps["flying"]), abs=RUN_TIME_S)
    s = np.array(doc["columns"]["station_m"])
    assert np.all(np.diff(s) > 0)                         # stations keep growing
    assert doc["sampling"] == {"mode": "station", "station_step_m": 5.0}


def test_gpx_run_has_one_track_segment_per_lap(laps, tmp_path):
    import xml.etree.ElementTree as ET

    out, _ = exported(laps, tmp_path, "--laps", "2", "--launch-lap", laps["launch"], "--dt",
                      "1", name="run.gpx")
    ns = {"g": "http://www.topografix.com/GPX/1/1"}
    root = ET.parse(out).getroot()
    segments = root.findall("g:trk/g:trkseg", ns)
    assert len(segments) == 2
    csv_out, _ = exported(laps, tmp_path, "--laps", "2", "--launch-lap", laps["launch"], "--dt",
                          "1", name="run.csv")
    lap = read_table_csv(csv_out).columns["lap"]
    assert [len(seg) for seg in segments] == [int(np.sum(lap == 1)), int(np.sum(lap == 2))]


# -- refused, exit 2, nothing written ----------------------------------------------------------

def refused(laps, tmp_path, *args, profile=None, name="run.csv"):
    out = tmp_path / name
    result = run("export", profile or laps["flying"], "-o", out, *args)
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    assert not out.exists()
    assert not list(tmp_path.glob(".*tmp*"))           # nothing half-written
    return result.output


def test_laps_of_an_open_route_are_refused(tmp_path):
    profile = tmp_path / "mountain.csv"
    assert run("plan", MOUNTAIN, "-o", profile).exit_code == 0
    out = tmp_path / "run.csv"
    result = run("export", profile, "-o", out, "--laps", "2")
    assert result.exit_code == 2 and not out.exists(), result.output
    assert "open route" in result.output and "--closed" in result.output


def test_launch_lap_ending_at_another_speed_names_the_speed_to_plan(laps, tmp_path):
    wrong = tmp_path / "slow_launch.csv"
    assert run("plan", LOOP, "--open", "--start-speed", "0", "--end-speed", "20", "-o",
               wrong).exit_code == 0
    message = refused(laps, tmp_path, "--laps", "2", "--launch-lap", wrong)
    assert "speed jumps from 20.000000" in message
    assert f"--end-speed {laps['v0']:.6f}" in message


def test_a_flying_lap_given_as_launch_lap_is_not_a_standing_start(laps, tmp_path):
    message = refused(laps, tmp_path, "--laps", "2", "--launch-lap", laps["flying"])
    assert "not from rest" in message and "--start-speed 0" in message


def test_a_lap_of_another_route_does_not_join(laps, tmp_path):
    other = tmp_path / "mountain.csv"
    assert run("plan", MOUNTAIN, "-o", other).exit_code == 0
    message = refused(laps, tmp_path, "--laps", "2", "--finish-lap", other)
    assert "m apart" in message and "same loop" in message


def test_one_lap_cannot_start_and_end_at_rest(laps, tmp_path):
    message = refused(laps, tmp_path, "--laps", "1", "--launch-lap", laps["launch"],
                      "--finish-lap", laps["finish"])
    assert "--laps" in message and "one lap" in message


@pytest.mark.parametrize("value", ["0", "-2", "two", "1.5"])
def test_laps_must_be_a_whole_number_from_one(laps, tmp_path, value):
    message = refused(laps, tmp_path, "--laps", value)
    assert "--laps" in message


def test_a_missing_launch_lap_file_is_named(laps, tmp_path):
    message = refused(laps, tmp_path, "--laps", "2", "--launch-lap", tmp_path / "none.csv")
    assert "none.csv" in message and "no such file" in message


def test_a_stop_on_the_loop_is_held_on_every_lap_with_its_name(tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text('[limits]\n[[stop]]\nstation_m = 2000.0\nname = "pit"\ndwell_s = 12\n')
    flying, launch = tmp_path / "lap.csv", tmp_path / "launch.csv"
    assert run("plan", LOOP, "-l", limits, "-o", flying).exit_code == 0
    v0 = flying.read_text().splitlines()[1].split(",")[6]
    result = run("plan", LOOP, "-l", limits, "--open", "--start-speed", "0", "--end-speed", v0,
                 "-o", launch)
    assert result.exit_code == 0, result.output
    out = tmp_path / "run.json"
    result = run("export", flying, "-o", out, "--laps", "3", "--launch-lap", launch)
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    length = float(read_table_csv(flying).columns["station_m"][-1])
    stop = doc["stop_stations_m"][0]
    # the same stop on each lap, one loop length apart (stations to 0.1 mm, summed per lap)
    np.testing.assert_allclose(doc["stop_stations_m"], stop + length * np.arange(3), atol=3e-4)
    assert doc["stop_names"] == ["pit"] * 3 and doc["stop_dwell_s"] == [12.0] * 3
    # closed form: the laps' moving times plus one 12 s dwell per lap
    expected = last_time(launch) + 2 * last_time(flying) + 3 * 12.0
    assert doc["total_time_s"] == pytest.approx(expected, abs=RUN_TIME_S)
    names = np.array(doc["columns"]["stop_name"])
    laps_at_stop = np.unique(np.array(doc["columns"]["lap"])[names == "pit"])
    assert laps_at_stop.tolist() == [1, 2, 3]


def test_a_run_too_long_to_hold_is_refused_before_any_work(laps, tmp_path):
    # 1000 laps of the loop's 3,763 stations would be 3.8 million stations (limit 2 million)
    message = refused(laps, tmp_path, "--laps", "1000")
    assert "--laps" in message and "fewer laps" in message
