"""The command line when no profile exists, or the limits are not a vehicle's: the real cause.

Every case: exit status 2, one ``error:`` line that names the file or the origin of the value,
the station where it applies, why and what to do; no profile written. And the converse: raising
a limit never makes a plan infeasible, and export always keeps its first and last sample.

Routes and limits here are invented for the tests.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.io.table_csv import read_table_csv


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def route_with_elevation(folder: Path, z, step: float = 5.0, name: str = "r.csv") -> Path:
    x = np.arange(len(z)) * step
    path = folder / name
    path.write_text("x_m,y_m,z_m\n" + "".join(f"{a:.1f},0.0,{b:.3f}\n" for a, b in zip(x, z)))
    return path


def assert_refused(result, out: Path, *fragments) -> str:
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output and "defect" not in result.output
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1, result.output
    for fragment in fragments:
        assert fragment in errors[0], (fragment, errors[0])
    assert not out.exists() and not out.with_suffix(".meta.json").exists()
    return errors[0]


def grade_at(message: str) -> tuple[float, float]:
    """The grade (%) and the station (m) the message names first."""
    match = re.search(r"a grade of ([+-]\d+) % at station ([\d.]+) m", message)
    assert match, message
    return float(match.group(1)), float(match.group(2))


@pytest.mark.parametrize("solver", ["convex", "envelope"])
def test_an_elevation_spike_is_named_as_a_grade_at_its_station(tmp_path, solver):
    # A 1 km straight at 5 m points whose point at 500 m reads 500 m too high: the fitted grade
    # there is thousands of percent, beyond what friction 0.7 lets the tyres climb or hold
    # (tan(slope) <= 0.7, 70 %), so no profile exists with or without the jerk bound.
    z = np.zeros(201)
    z[100] = 500.0
    route = route_with_elevation(tmp_path, z)
    out = tmp_path / "p.csv"
    message = assert_refused(run("plan", route, "--solver", solver, "-o", out), out,
                             str(route), "steeper than the tyres can climb or hold",
                             "check the elevations")
    grade, station = grade_at(message)
    assert abs(grade) > 70.0 and 400.0 < station < 600.0


def test_a_stop_beside_a_grade_the_tyres_cannot_climb_names_the_grade(tmp_path):
    # A 1 km road climbing 3 % with friction 0.02: no acceleration at all leaves the stop at
    # 300 m under the jerk bound (the rest step's closed form divided by that zero), and the
    # grade is what no vehicle passes.
    route = route_with_elevation(tmp_path, 0.03 * np.arange(201) * 5.0)
    out = tmp_path / "p.csv"
    message = assert_refused(run("plan", route, "--friction", "0.02", "--stop", "300", "-o",
                                 out), out, str(route), "steeper than the tyres can climb")
    assert grade_at(message)[0] == 3.0


def test_receiver_elevation_noise_is_smoothed_to_plausible_grades(tmp_path):
    # Elevations of a flat 1 km road read with 5 m of noise (a consumer receiver's vertical
    # error, common practice) every 2 m. With the noise estimated from the heights the grade
    # stays small and the road is planned (it once came out at hundreds of percent and no
    # profile existed); the summary's fit line says which elevation noise was used.
    rng = np.random.default_rng(7)
    route = route_with_elevation(tmp_path, rng.normal(0.0, 5.0, 501), step=2.0)
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out)
    assert result.exit_code == 0, result.output
    table = read_table_csv(out)
    assert np.max(np.abs(table.columns["grade"])) < 0.05
    # Stated as 0.1 m (what surveyed heights carry), the statement is contradicted by the
    # heights and reported; the estimate is used, so the grades stay plausible.
    result = run("plan", route, "-o", tmp_path / "q.csv", "--elevation-noise", "0.1")
    assert result.exit_code == 0, result.output
    assert "the elevation noise stated, 0.1 m, is" in result.output


def test_a_stop_too_close_for_the_start_speed_names_the_stop_as_given(tmp_path):
    # From 20 m/s at the default 2.5 m/s^2 and 2 m/s^3 a jerk-limited stop takes
    # 20^2 / 5 + 20 * 2.5 / 4 = 92.5 m (double-S by symmetry, Biagiotti & Melchiorri 2008,
    # section 3.4); stops at 85 m and 60.2 m are too close, the first even for the envelope.
    route = route_with_elevation(tmp_path, np.zeros(81))
    out = tmp_path / "p.csv"
    assert_refused(run("plan", route, "--start-speed", "20", "--stop", "85", "-o", out), out,
                   "--stop: the stop at station 85 m is 85.0 m from the start",
                   "start speed 20.00 m/s", "takes 92.5 m", "Lower the start speed to")
    limits = tmp_path / "limits.toml"
    limits.write_text("[limits]\n\n[[stop]]\nstation_m = 60.2\n")
    assert_refused(run("plan", route, "--start-speed", "20", "-l", limits, "-o", out), out,
                   f"{limits} [[stop]] #1: the stop at station 60.2 m", "takes 92.5 m")


# values given on the command line are named by their option, as the user wrote them
@pytest.mark.parametrize("args, fragments", [
    (["--drag-area", "1e300", "--mass", "1500"],
     ["--drag-area 1e+300 is outside 0..20", "trucks and buses"]),
    (["--max-accel", "1e-9"], ["--max-accel 1e-09 is below 0.01"]),
    (["--mass", "1e-300", "--drag-area", "0.7"], ["--mass 1e-300 is outside 1..1e+07"]),
])
def test_limits_no_vehicle_has_are_refused_with_the_range_and_why(tmp_path, args, fragments):
    route = route_with_elevation(tmp_path, np.zeros(81))
    out = tmp_path / "p.csv"
    assert_refused(run("plan", route, *args, "-o", out), out, "command-line", *fragments,
                   "check the value and its units")


def test_air_density_from_a_limits_file_is_refused_naming_the_file(tmp_path):
    route = route_with_elevation(tmp_path, np.zeros(81))
    limits = tmp_path / "limits.toml"
    limits.write_text("[limits]\nmass_kg = 1500\ndrag_area_m2 = 0.7\n"
                      "air_density_kgpm3 = 1e300\n")
    out = tmp_path / "p.csv"
    assert_refused(run("plan", route, "-l", limits, "-o", out), out, str(limits),
                   "air_density_kgpm3 = 1e+300 is outside 0.3..2", "1.225 kg/m^3")


def test_a_power_in_kilowatts_under_the_watt_key_is_warned_about(tmp_path):
    # 110 W for 1500 kg is 0.07 W/kg (a passenger car has 30-150 W/kg, common practice): it
    # still climbs a 6 % grade, at P / (m g sin) = 0.12 m/s, and the plan says so, with a warning
    # that names the likely slip.
    route = route_with_elevation(tmp_path, 0.06 * np.arange(201) * 5.0)
    out = tmp_path / "p.csv"
    result = run("plan", route, "--max-power", "110", "--mass", "1500", "-o", out)
    assert result.exit_code == 0, result.output
    assert "if the power is 110 kW, that is 110000 W" in result.output
    v = read_table_csv(out).columns["speed_mps"]
    climb = 110.0 / (1500.0 * 9.80665 * np.sin(np.arctan(0.06)))
    assert v.max() <= climb * (1 + 1e-3)


def test_raising_the_acceleration_cap_never_makes_a_plan_infeasible_or_slower(tmp_path):
    # A cap far above what grip allows (1e6 m/s^2) leaves friction as the binding limit
    # (mu g = 6.86 m/s^2): the plan exists and is at least as fast as with the default cap.
    route = route_with_elevation(tmp_path, np.zeros(81))
    times = []
    for cap in ("1.5", "1e6"):
        out = tmp_path / f"p{cap}.csv"
        result = run("plan", route, "--max-accel", cap, "-o", out)
        assert result.exit_code == 0, result.output
        cols = read_table_csv(out).columns
        times.append(cols["time_s"][-1])
        assert cols["accel_mps2"].max() <= 0.7 * 9.80665 * (1 + 1e-4)
    assert times[1] <= times[0]


@pytest.mark.parametrize("option, value", [("--dt", "1e11"), ("--station-step", "1e12")])
def test_export_keeps_the_first_and_last_sample_for_any_interval(tmp_path, option, value):
    route = route_with_elevation(tmp_path, np.zeros(81))
    profile = tmp_path / "p.csv"
    assert run("plan", route, "-o", profile).exit_code == 0
    out = tmp_path / "t.csv"
    result = run("export", profile, option, value, "-o", out)
    assert result.exit_code == 0, result.output
    cols = read_table_csv(out).columns
    planned = read_table_csv(profile).columns
    assert cols["station_m"].tolist() == [0.0, 400.0]
    assert cols["time_s"][0] == 0.0
    assert cols["time_s"][-1] == pytest.approx(planned["time_s"][-1], abs=2e-6)


def test_a_stop_at_the_end_as_typed_is_accepted_and_one_past_it_shows_the_true_length(tmp_path):
    # A 400 m straight measures 399.9999999999997 m (round-off of the arc-length sum): a stop
    # typed at 400 is at its end. A route 399.96 m long is written 399.96, not rounded up to a
    # length that would contain the stop refused.
    route = route_with_elevation(tmp_path, np.zeros(81))
    out = tmp_path / "p.csv"
    result = run("plan", route, "--stop", "200", "--stop", "400", "-o", out)
    assert result.exit_code == 0, result.output
    assert read_table_csv(out).columns["speed_mps"][-1] == 0.0
    short = tmp_path / "short.csv"
    short.write_text("x_m,y_m\n0.0,0.0\n200.0,0.0\n399.96,0.0\n")
    out = tmp_path / "q.csv"
    assert_refused(run("plan", short, "--stop", "400", "-o", out), out,
                   "--stop: stop at station 400 m lies outside the route (0..399.96 m)")


def test_stops_on_neighbouring_stations_never_give_a_profile_of_infinite_time(tmp_path):
    # Without a jerk bound stops may be close, but two on neighbouring stations leave a step
    # that is never driven: the plan is refused naming both, rather than written with
    # time_s = inf.
    route = route_with_elevation(tmp_path, np.zeros(81))
    out = tmp_path / "p.csv"
    assert_refused(run("plan", route, "--solver", "envelope", "--stop", "100", "--stop", "101",
                       "-o", out), out,
                   "at rest at 100 m (--stop) and 101 m (--stop), on neighbouring stations",
                   "move them at least two station steps apart")
