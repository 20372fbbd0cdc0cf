"""A stop's own dwell and name, from the limits file through the sidecar into the export.

Checked against uniform-kinematics bookkeeping: the trajectory's total time is the planned
(moving) time plus the sum of the dwells, each stop's own where it has one and --dwell
elsewhere. The route is invented.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def straight(folder: Path) -> Path:
    path = folder / "straight.csv"
    path.write_text("x_m,y_m\n" + "".join(f"{x:.1f},0.0\n" for x in range(0, 1001, 5)))
    return path


@pytest.mark.parametrize("fmt", ["json", "csv"])
def test_each_stop_is_held_for_its_own_dwell(tmp_path, fmt):
    limits = tmp_path / "limits.toml"
    limits.write_text('[limits]\n[[stop]]\nx_m = 300\ny_m = 2\ndwell_s = 45\nname = "gate"\n'
                      "[[stop]]\nstation_m = 700\n")
    profile = tmp_path / "p.csv"
    result = run("plan", straight(tmp_path), "-l", limits, "-o", profile)
    assert result.exit_code == 0, result.output
    assert "'gate': snapped to station 300.0 m, 2.00 m from the route" in result.output
    stops = json.loads(profile.with_suffix(".meta.json").read_text())["constraints"]["stops"]
    assert [(s["name"], s["dwell_s"]) for s in stops] == [("", None), ("gate", 45.0)]

    out = tmp_path / f"t.{fmt}"
    result = run("export", profile, "-o", out, "--dwell", "10")
    assert result.exit_code == 0, result.output
    assert "except 1 with a dwell of its own" in result.output
    if fmt == "json":
        doc = json.loads(out.read_text())
        assert doc["stop_dwell_s"] == [45.0, 10.0]
        # total = moving time + 45 s + 10 s, to the writer's 1e-5 s rounding
        assert doc["total_time_s"] == pytest.approx(doc["planned_time_s"] + 55.0, abs=2e-5)
        assert doc["columns"]["time_s"][-1] == pytest.approx(doc["total_time_s"], abs=2e-5)
    else:
        held = [line for line in result.output.splitlines() if "total time" in line]
        planned = float(result.output.split("planned time ")[1].split(" s")[0])
        total = float(held[0].split("total time ")[1].split(" s")[0])
        # both printed to 0.01 s
        assert total == pytest.approx(planned + 55.0, abs=0.011)
