"""Options each command uses, and labels that say which quantity they show.

Routes here are invented for the tests. The banked-curve check uses the textbook decomposition
of the path's acceleration kappa v^2 in the road plane banked at theta (tan theta = e, the
superelevation rate): felt = kappa v^2 cos(theta) - g sin(theta), so at the felt cap a the
path's value is (a + g sin(theta)) / cos(theta) (any vehicle-dynamics text; common practice).
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


def bend(folder: Path, straight: float = 300.0, radius: float = 60.0) -> Path:
    """A straight, a quarter circle and another straight, points every 5 m."""
    t = np.linspace(0.0, math.pi / 2, 40)
    run_in = np.arange(-straight, 0.0, 5.0)
    run_out = np.arange(5.0, straight + 5.0, 5.0)
    x = np.concatenate((run_in, radius * np.sin(t), radius + 0.0 * run_out))
    y = np.concatenate((0.0 * run_in, radius - radius * np.cos(t), radius + run_out))
    path = folder / "bend.csv"
    path.write_text("x_m,y_m\n" + "".join(f"{a:.3f},{b:.3f}\n" for a, b in zip(x, y)))
    return path


def option_names(command: str) -> set[str]:
    result = run(command, "--help")
    assert result.exit_code == 0, result.output
    return set(re.findall(r"(--[a-z][a-z-]*)", result.output))


def test_check_help_lists_only_what_check_uses():
    names = option_names("check")
    assert not names & {"--stop", "--start-speed", "--end-speed"}, names
    assert {"--zone", "--superelevation", "--max-speed", "--speeds"} <= names


def test_plan_help_still_lists_stops_and_end_speeds():
    assert {"--stop", "--start-speed", "--end-speed", "--zone",
            "--superelevation"} <= option_names("plan")


def test_check_refuses_a_stop_as_an_unknown_option(tmp_path):
    result = run("check", bend(tmp_path), "--stop", "100")
    assert result.exit_code == 2, result.output
    assert "--stop" in result.output and "Traceback" not in result.output


def test_banked_curve_summary_names_both_lateral_quantities(tmp_path):
    # cap 4 m/s^2 on the felt value, 8 % superelevation everywhere: in the curve the felt cap
    # binds, and the path's kappa v^2 is above it by the banking.
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv", "--max-lateral-accel", "4",
                 "--superelevation", "0:1000:0.08")
    assert result.exit_code == 0, result.output
    line = next(line for line in result.output.splitlines() if line.startswith("peaks"))
    match = re.search(r"lateral kappa v\^2 ([\d.]+), felt in the road plane ([\d.]+) m/s\^2 "
                      r"\(the cap 4 bounds the felt value\)", line)
    assert match, line
    kinematic, felt = float(match.group(1)), float(match.group(2))
    # the cap binds in the curve: felt at 4.00 to the 2 printed decimals
    assert felt == pytest.approx(4.0, abs=0.005 + 1e-9)
    theta = math.atan(0.08)
    expected = (felt + 9.80665 * math.sin(theta)) / math.cos(theta)      # 4.797 m/s^2
    # both printed to 2 decimals: each rounded by up to 0.005, the relation's slope is ~1
    assert kinematic == pytest.approx(expected, abs=0.011)


def curve_rows(output: str) -> list[str]:
    lines = output.splitlines()
    start = next(i for i, line in enumerate(lines) if line.strip().startswith("station range"))
    return [line for line in lines[start + 1:] if re.match(r"\s+[\d.]+ -", line)]


def test_a_corner_driven_slower_into_a_stop_names_the_stop(tmp_path):
    route = bend(tmp_path)
    # without the stop the corner's speed is set by the lateral cap: sqrt(2.5 * 60) = 12.2 m/s
    plain = run("plan", route, "-o", tmp_path / "a.csv")
    assert plain.exit_code == 0, plain.output
    (row,) = curve_rows(plain.output)
    assert "lateral comfort" in row
    # a stop 20 m past the corner's end, closer than braking from 12.2 m/s takes (v^2 / 2a =
    # 30 m at 2.5 m/s^2, more with the jerk bound): the corner's end is driven slower, braking
    arc_end = 300.0 + 60.0 * math.pi / 2
    stop = round(arc_end + 20.0)
    result = run("plan", route, "-o", tmp_path / "b.csv", "--stop", stop)
    assert result.exit_code == 0, result.output
    rows = curve_rows(result.output)
    assert len(rows) == 1, result.output
    match = re.search(r"braking for the stop at ([\d.]+) m", rows[0])
    assert match, rows[0]
    # the stop sits on the nearest station: within one station step (about 1 m here)
    assert float(match.group(1)) == pytest.approx(stop, abs=1.0)
    # station range, radius (estimate, and its plausible range where the fit gives one), speed
    cells = rows[0].split()[4:]
    speed = float(cells[1] if cells[0].startswith("(") else cells[0])
    assert speed < math.sqrt(2.5 * 60.0) * 0.9, rows[0]
    assert "lateral" not in rows[0].split("  ")[-1]


def test_a_curve_row_gives_the_radius_range_and_the_speed_of_its_low_end(tmp_path):
    # The bend's points written to the millimetre: the fit gives a curvature bound, and the
    # summary's radius reads 'estimate (low-high)'. The plan holds the low end (the bound), so
    # a curve the lateral cap limits is driven at sqrt(2.5 m/s^2 * low) (point mass on a
    # circle; the printed radius and speed are rounded to 0.05 m and 0.005 m/s). Before, the
    # row gave the estimate alone, which on a consumer log read R 238 m for a curve driven at
    # 10.7 m/s: the bound's R 46 m, which the summary did not show.
    result = run("plan", bend(tmp_path), "-o", tmp_path / "p.csv")
    assert result.exit_code == 0, result.output
    (row,) = curve_rows(result.output)
    match = re.search(r"([\d.]+) \(([\d.]+)-([\d.]+|unbounded)\)\s+([\d.]+)", row)
    assert match, row
    estimate, low = float(match.group(1)), float(match.group(2))
    high = math.inf if match.group(3) == "unbounded" else float(match.group(3))
    assert low <= estimate <= high and estimate == pytest.approx(60.0, rel=0.02), row
    assert "lateral comfort" in row
    speed = float(match.group(4))
    assert speed == pytest.approx(math.sqrt(2.5 * low), abs=0.005 + math.sqrt(2.5 / low) * 0.05)
    assert "planned at the low end" in result.output
