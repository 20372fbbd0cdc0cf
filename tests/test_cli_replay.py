"""Command-line tests of ``curvespeed replay`` on a small invented profile (broken inputs:
test_hostile_replay.py).

Each test asserts the exit code, the message and the files written (or not written).
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.dynamics.simulate import REPLAY_COLUMNS
from curvespeed.dynamics.vehicle import DEFAULT_VEHICLE
from curvespeed.io.table_csv import read_table_csv
from curvespeed.io.vehicle_toml import VEHICLE_KEYS, read_vehicle

from helpers import geometry_from_curvature, hook_profile_csv


@pytest.fixture(scope="module")
def profile_file(tmp_path_factory):
    return hook_profile_csv(tmp_path_factory.mktemp("replay"))


def run(*args):
    return CliRunner().invoke(cli, ["replay", *[str(a) for a in args]])


def test_replay_writes_the_run_summary_and_figure(profile_file, tmp_path):
    out, fig, summary = tmp_path / "run.csv", tmp_path / "run.png", tmp_path / "run.json"
    result = run(profile_file, "-o", out, "--plot", fig, "--json", summary,
                 "--max-lateral-error", "0.3")
    assert result.exit_code == 0, result.output
    assert "reached the end of the profile" in result.output
    assert "PASS: lateral error within 0.3 m" in result.output
    table = read_table_csv(out)
    assert list(table.columns) == list(REPLAY_COLUMNS)
    assert np.max(np.abs(table.columns["lateral_error_m"])) < 0.3
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    doc = json.loads(summary.read_text())
    assert doc["format"] == "curvespeed-replay-summary"
    assert doc["tracker"] == "lqr"
    assert doc["summary"]["completed"] is True
    assert doc["vehicle"]["mass_kg"] == DEFAULT_VEHICLE.mass_kg
    # deterministic: the same command writes the same bytes
    again = tmp_path / "again.csv"
    assert run(profile_file, "-o", again).exit_code == 0
    assert again.read_bytes() == out.read_bytes()


def test_gate_exceeded_exits_1_and_still_writes(profile_file, tmp_path):
    out = tmp_path / "run.csv"
    result = run(profile_file, "-o", out, "--max-lateral-error", "0.000001")
    assert result.exit_code == 1, result.output
    assert "FAIL: lateral error" in result.output
    assert out.exists()


def test_mpc_tracker_from_the_command_line(profile_file, tmp_path):
    out = tmp_path / "run.csv"
    result = run(profile_file, "-o", out, "--tracker", "mpc", "--max-lateral-error", "0.3")
    assert result.exit_code == 0, result.output
    assert "mpc tracker" in result.output
    assert "QPs (OSQP)" in result.output


def test_vehicle_file_changes_the_vehicle(profile_file, tmp_path):
    vehicle = tmp_path / "slippery.toml"
    vehicle.write_text("[vehicle]\nfriction_coefficient = 0.3\nmass_kg = 1800\n")
    out, summary = tmp_path / "run.csv", tmp_path / "run.json"
    result = run(profile_file, "-v", vehicle, "-o", out, "--json", summary)
    assert result.exit_code in (0, 1), result.output
    doc = json.loads(summary.read_text())
    assert doc["vehicle"]["friction_coefficient"] == 0.3
    assert doc["vehicle"]["mass_kg"] == 1800.0
    assert doc["vehicle"]["steer_lag_s"] == DEFAULT_VEHICLE.steer_lag_s   # default kept


def test_every_vehicle_key_is_read(tmp_path):
    values = {"mass_kg": 1700.0, "yaw_inertia_kgm2": 2900.0, "front_axle_to_cg_m": 1.3,
              "rear_axle_to_cg_m": 1.5, "front_cornering_stiffness_npr": 150000.0,
              "rear_cornering_stiffness_npr": 170000.0, "friction_coefficient": 0.8,
              "max_steer_rad": 0.55, "max_steer_rate_radps": 0.7, "steer_lag_s": 0.15}
    text = "[vehicle]\n" + "".join(f"{k} = {v}\n" for k, v in values.items())
    path = tmp_path / "car.toml"
    path.write_text(text + 'tyre_curve = "saturated_linear"\n')
    vehicle = read_vehicle(path)
    for key, value in values.items():
        assert getattr(vehicle, key) == value
    assert vehicle.tyre_curve.value == "saturated_linear"
    assert set(VEHICLE_KEYS) == set(values) | {"tyre_curve"}


def test_help_lists_replay_and_loads_no_numerics():
    code = ("import sys; from curvespeed.cli.main import cli; "
            "heavy = [m for m in ('numpy', 'scipy', 'osqp') if m in sys.modules]; "
            "print(heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"
    result = CliRunner().invoke(cli, ["--help"])
    assert "replay" in result.output


def test_profile_above_grip_is_flagged_on_the_command_line(tmp_path):
    """The hook's 30 m curve at a constant 20 m/s, above sqrt(mu g R) = 16.3 m/s for the
    built-in car (mu 0.9): the tyres saturate and the command warns, naming the stations."""
    s = np.arange(241.0)
    kappa = np.interp(s, [0, 50, 80, 120, 150, 240], [0, 0, 1 / 30, 1 / 30, 0, 0])
    geo = geometry_from_curvature(kappa, name="Invented hook")
    path = tmp_path / "fast.csv"
    lines = ["station_m,x_m,y_m,heading_rad,curvature_1pm,speed_mps"]
    lines += [f"{a:.4f},{b:.4f},{c:.4f},{d:.7f},{e:.9f},20.0" for a, b, c, d, e in
              zip(geo.station_m, geo.x_m, geo.y_m, geo.heading_rad, geo.curvature_1pm)]
    path.write_text("\n".join(lines) + "\n")
    out, summary = tmp_path / "run.csv", tmp_path / "run.json"
    result = run(path, "-o", out, "--json", summary)
    # far above grip the vehicle runs wide and leaves the path: exit 1, outputs kept
    assert result.exit_code == 1, result.output
    assert "lost the path" in result.output
    assert "warning: the tyres reach their friction limit" in result.output
    doc = json.loads(summary.read_text())["summary"]
    assert doc["saturated"] is True
    assert max(doc["peak_front_tyre_use"], doc["peak_rear_tyre_use"]) >= 0.99
    # the first saturated stretch starts in or just before the curve (stations 50-150)
    assert 30.0 <= doc["saturated_spans_m"][0][0] <= 150.0


def test_replay_figure_structure(profile_file):
    from curvespeed.dynamics.simulate import replay
    from curvespeed.dynamics.summary import summarise
    from curvespeed.io.profile_csv import read_station_profile
    from curvespeed.replay_plots import plot_replay

    result = replay(read_station_profile(profile_file))
    fig = plot_replay(result, summarise(result), gate_m=0.3)
    axes = fig.get_axes()
    assert [ax.get_ylabel() for ax in axes] == [
        "lateral error (m)", "speed (m/s)", "road-wheel steering (rad)",
        "tyre use (1 = friction limit)"]
    line = axes[0].get_lines()[0]
    assert np.array_equal(line.get_ydata(), result["lateral_error_m"])
    assert "lqr tracker" in fig.get_suptitle()
