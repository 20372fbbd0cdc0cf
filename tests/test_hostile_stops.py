"""Stops by position and per-stop entries that cannot be used: refused with the file, the
entry and what to do; exit 2 and nothing written. Routes here are invented."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def straight(folder: Path) -> Path:
    path = folder / "straight.csv"
    path.write_text("x_m,y_m\n" + "".join(f"{x:.1f},0.0\n" for x in range(0, 501, 5)))
    return path


def assert_table_refused(tmp_path, table: str, entry: str, fragments) -> None:
    """plan with a limits file holding one [[table]] ``entry``: exit 2, one error naming the
    file and every fragment, nothing written."""
    limits = tmp_path / "limits.toml"
    limits.write_text(f"[limits]\n[[{table}]]\n" + entry)
    out = tmp_path / "p.csv"
    result = run("plan", straight(tmp_path), "-l", limits, "-o", out)
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1 and str(limits) in errors[0], result.output
    for fragment in fragments:
        assert fragment in errors[0], (fragment, errors[0])
    assert not out.exists() and not out.with_suffix(".meta.json").exists()


@pytest.mark.parametrize("entry, fragments", [
    ("name = 'a'\n", ["[[stop]] #1 needs exactly one place", "found: none"]),
    ("station_m = 10\nx_m = 3\ny_m = 4\n", ["needs exactly one place", "station_m, x_m, y_m"]),
    ("lat = 47.0\n", ["needs exactly one place", "lat and lon"]),
    ("station_m = 10\ndwell_s = -5\n", ["dwell_s = -5", "zero or a positive number"]),
    ("station_m = 10\nname = 3\n", ["name is", "quoted string"]),
    ("lat = 147.0\nlon = 8.0\n", ["not a position on Earth", "lat first"]),
    ("station_m = 10\nwait_s = 3\n", ["unknown key 'wait_s'", "dwell_s"]),
    ("lat = 47.0\nlon = 8.0\n", ["no geographic reference", "x_m/y_m"]),
    ("x_m = 250\ny_m = 30\n", ["30.0 m from the route", "station 250.0 m", "farther than the 25 m"]),
])
def test_bad_stop_entries_are_refused(tmp_path, entry, fragments):
    assert_table_refused(tmp_path, "stop", entry, fragments)


@pytest.mark.parametrize("option, text, fragment", [
    ("--stop-xy", "250", "write it as X_M:Y_M"),
    ("--stop-xy", "250:abc", "'abc'"),
    ("--stop-latlon", "147.0:8.0", "lat first"),
    ("--stop-xy", "250:-60", "60.0 m from the route"),
])
def test_bad_stop_positions_on_the_command_line_are_refused(tmp_path, option, text, fragment):
    out = tmp_path / "p.csv"
    result = run("plan", straight(tmp_path), "-o", out, option, text)
    assert result.exit_code == 2, result.output
    assert fragment in result.output and "Traceback" not in result.output
    assert not out.exists()


@pytest.mark.parametrize("entry, fragments", [
    ("start_x_m = 400\nstart_y_m = 0\nend_x_m = 100\nend_y_m = 0\nmax_speed_mps = 5\n",
     ["not after its start", "driving order"]),
    ("start_x_m = 100\nstart_y_m = 0\nend_x_m = 300\nend_y_m = 80\nmax_speed_mps = 5\n",
     ["speed zone end", "80.0 m from the route"]),
    ("start_m = 100\nend_x_m = 300\nend_y_m = 0\nmax_speed_mps = 5\n",
     ["[[zone]] #1 needs exactly one place"]),
    ("start_m = 100\nend_m = 300\n", ["lacks max_speed_mps"]),
])
def test_bad_zones_by_position_are_refused(tmp_path, entry, fragments):
    assert_table_refused(tmp_path, "zone", entry, fragments)


def test_zone_by_xy_on_the_command_line_for_plan_and_check(tmp_path):
    route = straight(tmp_path)
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out, "--zone-xy", "100:3:300:-3:4")
    assert result.exit_code == 0, result.output
    assert "snapped to stations 100.0..300.0 m, ends up to 3.00 m" in result.output
    checked = run("check", route, "--zone-xy", "100:3:300:-3:4")
    assert checked.exit_code in (0, 1), checked.output
    assert "snapped to stations 100.0..300.0 m" in checked.output
