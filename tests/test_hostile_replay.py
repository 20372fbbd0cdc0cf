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
