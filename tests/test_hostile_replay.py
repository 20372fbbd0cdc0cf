"""Bad input to ``curvespeed replay``: broken vehicle files and options, outputs that may not
be written. Each exits with status 2, says what, where and what to do, and writes nothing."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.errors import VehicleError
from curvespeed.io.vehicle_toml import read_vehicle

from helpers import hook_profile_csv


@pytest.fixture(scope="module")
def profile_file(tmp_path_factory):
    return hook_profile_csv(tmp_path_factory.mktemp("replay"))


def run(*args):
    return CliRunner().invoke(cli, ["replay", *[str(a) for a in args]])


@pytest.mark.parametrize("text, expected", [
    ("[vehicle]\nmass_kg = 1500\nsteer_lag_ms = 100\n",
     "line 3: [vehicle] steer_lag_ms: unknown key (looks like milliseconds"),
    ("[vehicle]\nmass_kg = -5\n", "line 2: [vehicle]: mass_kg = -5.0 is outside"),
    ("[vehicle]\n\nmax_steer_rad = \"wide\"\n", "line 3: [vehicle] max_steer_rad \"wide\" is "
     "not a finite number"),
    ("[vehicle]\ntyre_curve = \"magic\"\n", "tyre_curve = 'magic' is not a tyre curve"),
    ("[car]\nmass_kg = 1500\n", "unknown table or key 'car' at top level"),
    ("mass_kg = 1500\n", "unknown table or key 'mass_kg'"),
    ("[vehicle\n", "not valid TOML"),
    ("[vehicle]\nsteer_lag_s = 0.001\n", "below 0.02 s the 0.01 s integration step"),
    # friction as the planner's limits bound it (0 divided by zero, 1e-20 "lost the path")
    ("[vehicle]\nfriction_coefficient = 1e-20\n", "line 2: [vehicle]: friction_coefficient = "
     "1e-20 is outside 0.01..2 (tyre-road friction is about 0.7-0.9 on dry asphalt, 0.1 on ice"),
    ("[vehicle]\nfriction_coefficient = 0\n", "friction_coefficient = 0.0 is outside 0.01..2"),
])
def test_bad_vehicle_file_exits_2_and_writes_nothing(profile_file, tmp_path, text, expected):
    vehicle = tmp_path / "bad.toml"
    vehicle.write_text(text)
    out = tmp_path / "run.csv"
    result = run(profile_file, "-v", vehicle, "-o", out)
    assert result.exit_code == 2, result.output
    assert expected in result.output
    assert str(vehicle) in result.output
    assert not out.exists()
    with pytest.raises(VehicleError):
        read_vehicle(vehicle)


# Each value in range, together tyres too stiff for the 0.01 s Runge-Kutta step: a slip that
# dies out within milliseconds would grow at each step instead (1e7 N/rad on the built-in car:
# 1,190 and 1,590 per rad of load, the 0.01 s step reported saturated tyres at 1-4 m/s). The
# replay splits its step until it follows (21 steps of 0.48 ms here) and says so; a vehicle no
# step down to 0.01 / 32 s follows is refused naming its file, and nothing is written.
def test_stiff_tyres_are_replayed_with_a_finer_step_or_refused(profile_file, tmp_path):
    import json

    vehicle = tmp_path / "stiff.toml"
    vehicle.write_text("[vehicle]\nfront_cornering_stiffness_npr = 1e7\n"
                       "rear_cornering_stiffness_npr = 1e7\n")
    out, summary = tmp_path / "run.csv", tmp_path / "run.json"
    result = run(profile_file, "-v", vehicle, "-o", out, "--json", summary)
    assert result.exit_code == 0, result.output
    assert "integration    0.476 ms steps: the vehicle's tyres are stiff" in result.output
    facts = json.loads(summary.read_text())
    assert facts["integration_step_s"] == pytest.approx(0.01 / 21, rel=1e-12)
    # it keeps within 1.7 mm of the path (the built-in car within 6 mm): tracked, not chattering
    assert facts["summary"]["max_lateral_error_m"] < 0.01
    absurd = tmp_path / "absurd.toml"
    absurd.write_text("[vehicle]\nmass_kg = 1e6\nyaw_inertia_kgm2 = 0.01\n")
    out = tmp_path / "absurd.csv"
    result = run(profile_file, "-v", absurd, "-o", out)
    assert result.exit_code == 2
    assert f"{absurd}: even a 0.000313 s integration step cannot follow" in result.output
    assert not out.exists()


def test_bad_options_and_existing_output(profile_file, tmp_path):
    out = tmp_path / "run.csv"
    result = run(profile_file, "-o", out, "--max-lateral-error", "-1")
    assert result.exit_code == 2 and "give a positive distance" in result.output
    assert not out.exists()
    out.write_text("keep me")
    result = run(profile_file, "-o", out)
    assert result.exit_code == 2
    assert out.read_text() == "keep me"
    result = run(profile_file, "-o", profile_file, "--force")
    assert result.exit_code == 2                          # never overwrites its input
    result = run(tmp_path / "missing.csv", "-o", tmp_path / "x.csv")
    assert result.exit_code == 2 and "missing.csv" in result.output
    assert not (tmp_path / "x.csv").exists()


@pytest.mark.parametrize("changes, expected", [
    ({"friction_coefficient": 0.0}, "friction_coefficient = 0.0 is outside 0.01..2"),
    ({"friction_coefficient": 1e-20}, "friction_coefficient = 1e-20 is outside 0.01..2"),
    ({"gravity_mps2": 0.0}, "gravity_mps2 = 0.0 is outside 9.7..10"),
    ({"mass_kg": -1.0}, "mass_kg = -1.0 is outside 1..1e+06"),
    ({"tyre_curve": "saturated_linear"}, "tyre_curve = 'saturated_linear' is not a TyreCurve"),
    ({"front_axle_to_cg_m": 20.0, "rear_axle_to_cg_m": 20.0},
     "yaw inertia over m a b 0.00417 (road vehicles about 1)"),
])
def test_a_script_s_vehicle_is_checked_before_the_replay_starts(profile_file, changes, expected):
    # before, replay() took any Vehicle: friction or gravity 0 divided by zero, a negative mass
    # reached the Riccati solver, a tyre curve given as text was driven as the brush curve
    from curvespeed.dynamics.simulate import replay
    from curvespeed.dynamics.vehicle import Vehicle
    from curvespeed.io.profile_csv import read_station_profile

    with pytest.raises(VehicleError) as caught:
        replay(read_station_profile(profile_file), Vehicle(**changes))
    assert str(caught.value).startswith("vehicle: ") and expected in str(caught.value)


def test_the_lowest_friction_and_the_built_in_car_pass_the_checks(tmp_path):
    from curvespeed.dynamics.vehicle import DEFAULT_VEHICLE, lateral_step_problem

    vehicle = tmp_path / "ice.toml"
    vehicle.write_text("[vehicle]\nfriction_coefficient = 0.01\n")
    assert read_vehicle(vehicle).friction_coefficient == 0.01
    assert lateral_step_problem(DEFAULT_VEHICLE, 0.01) is None
