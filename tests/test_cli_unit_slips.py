"""Values that look like another unit: each warned about, naming the unit it looks like and
the value in ours; a power in kW under the W key refused with the power as the cause.

Routes and limits here are invented for the tests. The thresholds are common practice (see
``curvespeed.limits``); the conversions are exact (1 km/h = 1/3.6 m/s, standard gravity
9.80665 m/s^2 by definition, 1 kW = 1000 W).
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def bend(folder: Path) -> Path:
    """A 100 m straight, a quarter circle of radius 60 m and another 100 m straight."""
    t = np.linspace(0.0, math.pi / 2, 40)
    x = np.concatenate((np.arange(-100.0, 0.0, 5.0), 60.0 * np.sin(t),
                        60.0 + np.zeros(20)))
    y = np.concatenate((np.zeros(20), 60.0 - 60.0 * np.cos(t), 60.0 + np.arange(5.0, 105.0, 5.0)))
    path = folder / "bend.csv"
    path.write_text("x_m,y_m\n" + "".join(f"{a:.3f},{b:.3f}\n" for a, b in zip(x, y)))
    return path


def warnings_of(result) -> list[str]:
    assert result.exit_code == 0, result.output
    assert "Traceback" not in result.output
    return [line for line in result.output.splitlines() if line.startswith("warning:")]


def one_warning(result, *fragments) -> str:
    found = [w for w in warnings_of(result) if all(f in w for f in fragments)]
    assert len(found) == 1, result.output
    return found[0]


@pytest.mark.parametrize("value, kmh, ours", [("80", "288 km/h", "22.22 m/s"),
                                              ("100", "360 km/h", "27.78 m/s")])
def test_top_speed_given_in_kmh_is_warned_with_its_value_in_mps(tmp_path, value, kmh, ours):
    out = tmp_path / "p.csv"
    result = run("plan", bend(tmp_path), "-o", out, "--max-speed", value)
    # a value from the command line is named by its option, as the user wrote it
    one_warning(result, "command-line", f"--max-speed {value} m/s is {kmh}",
                f"if the value is {value} km/h, that is {ours}")
    assert out.exists()        # a warning, not a refusal: the plan is written


def test_a_plausible_top_speed_is_not_warned(tmp_path):
    # 36 m/s = 130 km/h, a motorway speed: no unit slip
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "--max-speed", "36")
    assert not [w for w in warnings_of(result) if "km/h" in w], result.output


@pytest.mark.parametrize("source", ["option", "file"])
def test_zone_above_the_top_speed_is_warned_as_kmh(tmp_path, source):
    route = bend(tmp_path)
    if source == "option":
        args, named = ["--zone", "0:150:50"], "--zone"
    else:
        limits = tmp_path / "limits.toml"
        limits.write_text("[limits]\n[[zone]]\nstart_m = 0\nend_m = 150\nmax_speed_mps = 50\n")
        args, named = ["-l", limits], str(limits)
    result = run("plan", route, "-o", tmp_path / "p.csv", *args)
    one_warning(result, named, "speed zone 0..150 m: max speed 50 m/s (180 km/h) is above the "
                "top speed max_speed_mps = 30 m/s", "never binds",
                "if the value is 50 km/h, that is 13.89 m/s")


def test_zone_below_the_top_speed_is_not_warned(tmp_path):
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "--zone", "0:150:13.9")
    assert not [w for w in warnings_of(result) if "speed zone" in w], result.output


def test_check_warns_about_a_zone_in_kmh_too(tmp_path):
    result = CliRunner().invoke(cli, ["check", str(bend(tmp_path)), "--zone", "0:150:50"])
    assert result.exit_code in (0, 1), result.output
    assert any("if the value is 50 km/h, that is 13.89 m/s" in line
               for line in result.output.splitlines() if line.startswith("warning:"))


@pytest.mark.parametrize("option, key, ours", [
    ("--max-lateral-accel", "max_lateral_accel_mps2", "2.94 m/s^2"),   # 0.3 * 9.80665
    ("--max-decel", "max_decel_mps2", "2.94 m/s^2"),
])
def test_acceleration_given_in_g_is_warned_with_its_value_in_mps2(tmp_path, option, key, ours):
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", option, "0.3")
    warning = one_warning(result, f"{option} 0.3 m/s^2 is 0.0306 g",
                          f"if the value is 0.3 g, that is {ours}")
    assert key not in warning, warning          # the option the user gave, not the file key


def test_lateral_cap_in_g_from_the_limits_file_names_the_file(tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text("[limits]\nmax_lateral_accel_mps2 = 0.25\n")
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "-l", limits)
    # 0.25 g = 0.25 * 9.80665 = 2.45 m/s^2
    one_warning(result, str(limits), "max_lateral_accel_mps2 = 0.25 m/s^2 is 0.0255 g",
                "if the value is 0.25 g, that is 2.45 m/s^2")


def test_file_values_keep_their_key_and_options_their_name_in_one_run(tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text("[limits]\nmax_decel_mps2 = 0.3\n")
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "-l", limits,
                 "--max-speed", "90")
    # 90 m/s = 324 km/h; 90 km/h = 25.00 m/s; 0.3 m/s^2 = 0.0306 g (g = 9.80665 m/s^2)
    one_warning(result, "--max-speed 90 m/s is 324 km/h", "that is 25.00 m/s")
    one_warning(result, "max_decel_mps2 = 0.3 m/s^2 is 0.0306 g")
    assert not [w for w in warnings_of(result) if "max_speed_mps = 90" in w], result.output


def test_zone_above_a_top_speed_from_the_command_line_names_the_option(tmp_path):
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "--max-speed", "20",
                 "--zone", "0:150:50")
    one_warning(result, "--zone", "above the top speed --max-speed 20 m/s")


def test_usual_comfort_caps_are_not_warned(tmp_path):
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "--max-lateral-accel", "2",
                 "--max-decel", "2")
    assert not [w for w in warnings_of(result) if " g," in w], result.output


def level_climb_level(folder: Path, grade: float = 0.05) -> Path:
    """300 m level, 400 m climbing at ``grade``, 300 m level, points every 10 m. A constant
    ramp alone plans (a steady crawl); the changes of grade leave no jerk-limited profile at a
    crawl, which is where the solver's own message would blame the jerk bound."""
    x = np.arange(0.0, 1000.1, 10.0)
    z = np.clip(x - 300.0, 0.0, 400.0) * grade
    path = folder / "climb.csv"
    path.write_text("x_m,y_m,z_m\n" + "".join(f"{a:.1f},0.0,{b:.3f}\n" for a, b in zip(x, z)))
    return path


@pytest.mark.parametrize("solver", ["convex", "envelope"])
def test_power_in_kw_is_refused_naming_the_power_not_the_jerk_bound(tmp_path, solver):
    route = level_climb_level(tmp_path)
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out, "--max-power", "110", "--mass", "1500",
                 "--solver", solver)
    assert result.exit_code == 2, result.output
    assert not out.exists()
    one = [w for w in result.output.splitlines() if w.startswith("warning:")
           and "--max-power 110 W for --mass 1500" in w]
    assert one and "if the power is 110 kW, that is 110000 W" in one[0], result.output
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1, result.output
    error = errors[0]
    assert "jerk" not in error and "defect" not in error, error
    assert "a power of 110 W (max_power_w, --max-power)" in error and "give 110000 W" in error, \
        error
    # Steady climb: P/(m v) = g sin(theta) (no rolling resistance, no drag at a crawl), so
    # v = (110 / 1500) / (9.80665 sin(atan(grade))): 0.150 m/s on the 5 % ramp. The fitted
    # grade overshoots the ramp's 5 % at its kinks (a smoothing fit of a corner), by up to one
    # percentage point here; the speed must follow the grade the message names, to its
    # 3 significant figures (rel 5e-3).
    match = re.search(r"climbs the \+([\d.]+) % grade at station [\d.]+ m at ([\d.]+) m/s",
                      error)
    assert match, error
    grade = float(match.group(1)) / 100.0
    assert 0.05 <= grade <= 0.06, error
    v = (110.0 / 1500.0) / (9.80665 * math.sin(math.atan(grade)))
    assert float(match.group(2)) == pytest.approx(v, rel=5e-3)


def test_the_same_power_in_watts_plans(tmp_path):
    out = tmp_path / "p.csv"
    result = run("plan", level_climb_level(tmp_path), "-o", out, "--max-power", "110000",
                 "--mass", "1500")
    assert result.exit_code == 0, result.output
    assert out.exists()
    assert not [w for w in warnings_of(result) if "max_power_w" in w], result.output
