"""``curvespeed plan`` on the command line: profiles, sidecars, limits files and bad input."""

from __future__ import annotations

import csv
import hashlib
import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.io.profile_csv import PROFILE_COLUMNS

ROUTES = Path(__file__).resolve().parent.parent / "routes"


def run(*args):
    return CliRunner().invoke(cli, ["plan", *map(str, args)])


def read_profile(path):
    with open(path) as fh:
        rows = list(csv.reader(fh))
    header, data = rows[0], rows[1:]
    cols = {name: [r[i] for r in data] for i, name in enumerate(header)}
    return header, cols


def straight_csv(path: Path, length=400.0):
    x = np.arange(0.0, length + 0.1, 5.0)
    path.write_text("x_m,y_m\n" + "\n".join(f"{v:.1f},0.0" for v in x) + "\n")
    return path


@pytest.mark.parametrize("name", ["mountain_road.csv", "test_loop.geojson", "shuttle_route.gpx"])
def test_bundled_route_with_default_limits(name, tmp_path):
    out = tmp_path / "profile.csv"
    result = run(ROUTES / name, "-o", out)
    assert result.exit_code == 0, result.output
    for word in ("time", "mean", "top", "curves where a lateral limit binds"):
        assert word in result.output
    header, cols = read_profile(out)
    assert tuple(header[:len(PROFILE_COLUMNS)]) == PROFILE_COLUMNS
    v = np.array(cols["speed_mps"], dtype=float)
    assert v.min() >= 0 and v.max() <= 30.0 + 1e-6
    meta = json.loads((tmp_path / "profile.meta.json").read_text())
    for key in ("limits", "solver", "version", "total_time_s", "solve_time_s", "peak_use",
                "binding_stretches", "time_gap_to_envelope"):
        assert key in meta
    assert meta["route"]["sha256"] == hashlib.sha256((ROUTES / name).read_bytes()).hexdigest()
    assert meta["solver"]["name"] == "convex"          # the defaults carry a jerk bound
    assert meta["total_time_s"] == pytest.approx(float(cols["time_s"][-1]), abs=1e-5)
    assert max(meta["peak_use"].values()) <= 1 + 1e-4
    if name == "test_loop.geojson":
        assert cols["speed_mps"][0] == cols["speed_mps"][-1]      # periodic lap


@pytest.mark.parametrize("receiver, cautioned", [("RTK", False), ("CONSUMER", True)])
def test_a_route_logged_by_a_noisy_receiver_is_said_to_be_one(receiver, cautioned, tmp_path):
    # Simulated logs of the invented test road at 10 Hz (tests/drive_logs.py): an RTK receiver
    # scatters by a centimetre, a consumer one by half a metre and drifts by metres, which one
    # drive cannot show; the plan's summary says so for the second (plan_cmd.NOISY_POSITIONS_M).
    import drive_logs

    log = drive_logs.simulate_drive(drive_logs.invented_road(), 10,
                                    getattr(drive_logs, receiver), seed=1)
    route = tmp_path / "log.csv"
    route.write_text("x_m,y_m\n" + "".join(f"{a:.4f},{b:.4f}\n" for a, b in zip(log.x_m, log.y_m)))
    result = run(route, "-o", tmp_path / "p.csv")
    assert result.exit_code == 0, result.output
    assert ("caution  the points scatter" in result.output) is cautioned
    assert ("check the route against a survey" in result.output) is cautioned


def test_stops_zones_and_start_speed_from_the_command_line(tmp_path):
    out = tmp_path / "p.csv"
    result = run(straight_csv(tmp_path / "s.csv"), "-o", out, "--stop", "200",
                 "--zone", "300:400:5", "--max-speed", "15")
    assert result.exit_code == 0, result.output
    _, cols = read_profile(out)
    s = np.array(cols["station_m"], dtype=float)
    v = np.array(cols["speed_mps"], dtype=float)
    assert v[np.argmin(abs(s - 200))] == 0.0
    assert v[s >= 300].max() <= 5.0 + 1e-6
    assert v.max() <= 15.0 + 1e-6


def test_envelope_solver_warns_that_jerk_is_not_bounded(tmp_path):
    result = run(straight_csv(tmp_path / "s.csv"), "--solver", "envelope")
    assert result.exit_code == 0, result.output
    assert "does not bound jerk" in result.output


def test_lateral_jerk_bound_on_a_bundled_route(tmp_path):
    out = tmp_path / "profile.csv"
    result = run(ROUTES / "shuttle_route.gpx", "--max-lateral-jerk", "0.5", "-o", out)
    assert result.exit_code == 0, result.output
    assert "lateral jerk 0.5 m/s^3" in result.output           # the limits line
    meta = json.loads((tmp_path / "profile.meta.json").read_text())
    assert meta["limits"]["max_lateral_jerk_mps3"] == 0.5
    # the verifier's use of the bound, recomputed from the written speeds: binding, not broken
    assert 0.99 <= meta["peak_use"]["lateral_jerk"] <= 1 + 1e-4
    assert meta["peaks"]["lateral_jerk_mps3"] <= 0.5 * (1 + 1e-4)
    _, cols = read_profile(out)
    assert "lateral_jerk" in cols["binding"]


def test_envelope_solver_warns_that_lateral_jerk_is_not_bounded(tmp_path):
    result = run(ROUTES / "shuttle_route.gpx", "--solver", "envelope", "--max-lateral-jerk", "0.5")
    assert result.exit_code == 0, result.output
    assert "does not bound lateral jerk" in result.output


LIMITS_ERRORS = {
    "unknown key": ("[limits]\nmax_lateral_accel = 2.0\n", ["unknown key", "max_lateral_accel_mps2"]),
    "wrong unit": ("[limits]\nmax_speed_kmh = 50\n", ["max_speed_kmh", "3.6"]),
    "missing table": ("max_speed_mps = 10\n", ["missing [limits]"]),
    "negative": ("[limits]\nmax_decel_mps2 = -2.5\n", ["max_decel_mps2", "positive"]),
    "zero": ("[limits]\nfriction_coefficient = 0\n", ["friction_coefficient", "positive"]),
    "not toml": ("[limits\n", ["not valid TOML"]),
    "text value": ("[limits]\nmax_speed_mps = \"fast\"\n", ["max_speed_mps", "number"]),
    "zone lacks a key": ("[limits]\n[[zone]]\nstart_m = 0\nend_m = 10\n", ["max_speed_mps"]),
}


@pytest.mark.parametrize("case", list(LIMITS_ERRORS))
def test_bad_limits_file_exits_2_and_writes_nothing(case, tmp_path):
    text, fragments = LIMITS_ERRORS[case]
    limits = tmp_path / "limits.toml"
    limits.write_text(text)
    out = tmp_path / "p.csv"
    result = run(straight_csv(tmp_path / "s.csv"), "-l", limits, "-o", out)
    assert result.exit_code == 2, result.output
    assert "limits.toml" in result.output
    for fragment in fragments:
        assert fragment in result.output, (case, result.output)
    assert not out.exists() and not (tmp_path / "p.meta.json").exists()


def test_comfort_above_friction_warns_naming_the_binding_limit(tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text("[limits]\nfriction_coefficient = 0.2\nmax_lateral_accel_mps2 = 3.0\n")
    result = run(straight_csv(tmp_path / "s.csv"), "-l", limits)
    assert result.exit_code == 0, result.output
    assert "warning:" in result.output
    assert "max_lateral_accel_mps2" in result.output and "friction is the binding" in result.output


def test_limits_file_with_zones_stops_and_superelevation(tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text("[limits]\nmax_speed_mps = 12.0\n[route]\nend_speed_mps = 3.0\n"
                      "[[zone]]\nstart_m = 50\nend_m = 100\nmax_speed_mps = 6\n"
                      "[[stop]]\nstation_m = 250\n"
                      "[[superelevation]]\nstart_m = 0\nend_m = 400\nrate = 0.04\n")
    out = tmp_path / "p.csv"
    result = run(straight_csv(tmp_path / "s.csv"), "-l", limits, "-o", out)
    assert result.exit_code == 0, result.output
    _, cols = read_profile(out)
    v = np.array(cols["speed_mps"], dtype=float)
    assert v[-1] == pytest.approx(3.0, abs=1e-6)
    meta = json.loads((tmp_path / "p.meta.json").read_text())
    assert meta["constraints"]["stops"][0]["station_m"] == 250


@pytest.mark.parametrize("args, fragment", [
    (["--zone", "10:abc:5"], "START_M:END_M:MAX_SPEED_MPS"),
    (["--zone", "100:50:5"], "end must be after start"),
    (["--stop", "9999"], "outside the route"),
    (["--start-speed", "40", "--stop", "30"], "start speed"),
    (["--max-lateral-accel", "-1"], "positive"),
    (["--max-lateral-jerk", "0"], "max_lateral_jerk_mps3 must be positive"),
])
def test_bad_constraints_exit_2(args, fragment, tmp_path):
    out = tmp_path / "p.csv"
    result = run(straight_csv(tmp_path / "s.csv"), "-o", out, *args)
    assert result.exit_code == 2, result.output
    assert fragment in result.output
    assert not out.exists()


def test_limits_file_saved_as_utf16_is_refused_with_what_to_do(tmp_path):
    # the same text checks as route files: a spreadsheet or editor may save UTF-16
    limits = tmp_path / "limits.toml"
    limits.write_bytes("[limits]\nmax_speed_mps = 10\n".encode("utf-16"))
    out = tmp_path / "p.csv"
    result = run(straight_csv(tmp_path / "s.csv"), "-l", limits, "-o", out)
    assert result.exit_code == 2, result.output
    assert "limits.toml: is UTF-16 text; save it as UTF-8" in result.output
    assert not out.exists()


def test_existing_profile_needs_force(tmp_path):
    route = straight_csv(tmp_path / "s.csv")
    out = tmp_path / "p.csv"
    assert run(route, "-o", out).exit_code == 0
    again = run(route, "-o", out)
    assert again.exit_code == 2 and "--force" in again.output
    assert run(route, "-o", out, "--force").exit_code == 0


def test_same_inputs_give_byte_identical_profiles(tmp_path):
    route = straight_csv(tmp_path / "s.csv")
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    assert run(route, "-o", a, "--stop", "150").exit_code == 0
    assert run(route, "-o", b, "--stop", "150").exit_code == 0
    assert a.read_bytes() == b.read_bytes()


@pytest.mark.parametrize("preset, expected", [(None, 1), ("2", 2)])
def test_command_runs_one_blas_thread_unless_told(preset, expected):
    # the command line's entry sets OPENBLAS_NUM_THREADS=1 before numpy is imported (its
    # matrix products are small; threads only cost on a shared machine), and leaves a value
    # the user set alone; threadpoolctl reads the thread count the loaded OpenBLAS uses
    import os
    import subprocess
    import sys

    env = {k: v for k, v in os.environ.items() if k != "OPENBLAS_NUM_THREADS"}
    if preset is not None:
        env["OPENBLAS_NUM_THREADS"] = preset
    code = ("import sys\n"
            "from curvespeed.cli.main import main\n"
            "assert 'numpy' not in sys.modules\n"
            "sys.argv = ['curvespeed', '--version']\n"
            "try:\n    main()\nexcept SystemExit as exc:\n    assert exc.code in (0, None)\n"
            "import numpy, threadpoolctl\n"
            "print(sorted({p['num_threads'] for p in threadpoolctl.threadpool_info()\n"
            "              if p['internal_api'] == 'openblas'}))\n")
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip().splitlines()[-1] == f"[{expected}]"
