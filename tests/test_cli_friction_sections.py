"""Friction sections and superelevation by position on the command line and in the limits file:
what is planned and written, and bad input (exit 2, a message naming the cause, nothing
written). Routes are small invented straights and curves written in ``tmp_path``."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.io.table_csv import read_table_csv


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def hook_csv(path: Path) -> Path:
    """An invented route: 200 m straight along x, then a left arc of radius 80 m (90 degrees),
    then 200 m straight; points every 2 m."""
    x = list(np.arange(0.0, 200.0, 2.0))
    y = [0.0] * len(x)
    t = np.arange(0.0, np.pi / 2, 2.0 / 80.0)
    x += list(200.0 + 80.0 * np.sin(t))
    y += list(80.0 - 80.0 * np.cos(t))
    up = np.arange(0.0, 200.1, 2.0)
    x += [280.0] * up.size
    y += list(80.0 + up)
    path.write_text("x_m,y_m\n" + "\n".join(f"{a:.4f},{b:.4f}" for a, b in zip(x, y)) + "\n")
    return path


def limits_file(path: Path, body: str) -> Path:
    path.write_text("[limits]\nmax_jerk_mps3 = 2.0\n" + body)
    return path


def nothing_written(folder: Path, *names: str) -> bool:
    return not any((folder / n).exists() for n in names)


def test_friction_section_slows_the_curve_and_goes_into_the_sidecar(tmp_path):
    route = hook_csv(tmp_path / "hook.csv")
    dry, wet = tmp_path / "dry.csv", tmp_path / "wet.csv"
    assert run("plan", route, "-o", dry, "--max-lateral-accel", "6").exit_code == 0
    result = run("plan", route, "-o", wet, "--max-lateral-accel", "6",
                 "--friction-section", "150:400:0.25")
    assert result.exit_code == 0, result.output
    assert ("friction 150.0..400.0 m: mu 0.25 (lateral 0.25) instead of 0.7 (0.7); "
            "--friction-section 150:400:0.25") in result.output
    v_dry = read_table_csv(dry).columns["speed_mps"]
    v_wet = read_table_csv(wet).columns["speed_mps"]
    s = read_table_csv(wet).columns["station_m"]
    arc = (s > 210.0) & (s < 310.0)
    # point mass on the arc: sqrt(mu g R) = sqrt(0.25 * 9.80665 * 80) = 14.0 m/s (textbook);
    # the dry plan is held by the comfort cap 6 m/s^2 instead: sqrt(6 * 80) = 21.9 m/s. The
    # route is fitted from points, so its curvature bound lies a little above 1/80: 1 %.
    assert v_wet[arc].max() <= 14.0 * 1.01
    assert v_dry[arc].max() > 20.0
    meta = json.loads(wet.with_suffix(".meta.json").read_text())
    (section,) = meta["constraints"]["friction"]
    assert section["start_m"] == 150.0 and section["friction_coefficient"] == 0.25
    assert section["origin"] == "--friction-section 150:400:0.25"
    # the sidecar reads back the section it wrote (for plot, export and replay)
    from curvespeed.friction import FrictionSection
    from curvespeed.io.meta_json import read_profile_meta

    assert read_profile_meta(wet.with_suffix(".meta.json")).constraints.friction == (
        FrictionSection(150.0, 400.0, 0.25, None, origin="--friction-section 150:400:0.25"),)


def test_limits_file_friction_by_position_and_lateral_coefficient(tmp_path):
    route = hook_csv(tmp_path / "hook.csv")
    limits = limits_file(tmp_path / "l.toml", "[[friction]]\nstart_x_m = 150.0\nstart_y_m = 3.0\n"
                         "end_x_m = 284.0\nend_y_m = 200.0\nfriction_coefficient = 0.4\n"
                         "lateral_friction_coefficient = 0.3\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert result.exit_code == 0, result.output
    line = next(x for x in result.output.splitlines() if x.startswith("friction ") and "snapped"
                in x)
    # the start lies 3 m beside the straight at x = 150, the end 4 m beside the last straight
    assert "snapped to stations 150.0.." in line and "4.00 m from the route" in line
    assert "mu 0.4 (lateral 0.3)" in result.output


def test_check_takes_friction_sections(tmp_path):
    route = hook_csv(tmp_path / "hook.csv")
    report = tmp_path / "r.json"
    result = run("check", route, "--speed-kmh", "50", "--friction-section", "0:600:0.2",
                 "--json", report)
    # 50 km/h on R = 80 m asks f = v^2/(gR) = 0.246 > 0.2 (AASHTO point mass, e = 0): fails
    assert result.exit_code == 1, result.output
    curves = json.loads(report.read_text())["curves"]
    assert curves[0]["friction_margin"] == pytest.approx(0.2 - (50 / 3.6) ** 2 / (9.80665 * 80),
                                                         abs=0.01)  # fitted radius: ~1 %


def test_superelevation_by_position(tmp_path):
    route = hook_csv(tmp_path / "hook.csv")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out, "--superelevation-xy", "200:1:280:81:0.06")
    assert result.exit_code == 0, result.output
    (bank,) = json.loads(out.with_suffix(".meta.json").read_text())["constraints"][
        "superelevation"]
    assert bank["rate"] == 0.06 and bank["origin"].startswith("--superelevation-xy")
    assert bank["snap_distance_m"] == pytest.approx(1.0, abs=0.05)   # 1 m beside by construction


@pytest.mark.parametrize("args, message", [
    (["--friction-section", "100:200"], "'100:200' is not a friction section; write it as "
                                        "START_M:END_M:MU or START_M:END_M:MU:MU_LAT"),
    (["--friction-section", "100:200:wet"], "'100:200:wet': 'wet'"),
    (["--friction-section", "100:200:0"], "friction_coefficient = 0 is outside 0.01..2"),
    (["--friction-section", "100:200:7"], "friction_coefficient = 7 is outside 0.01..2"),
    (["--friction-section", "300:200:0.3"], "friction section 300..200 m: end must be after "
                                            "start"),
    (["--friction-section", "900:950:0.3"], "lies outside the route"),
    (["--friction-section-xy", "0:500:100:0:0.3"], "friction section start at 0 m, 500 m is "),
    (["--friction-section-xy", "280:150:100:0:0.3"], "its end snaps to station"),
    (["--friction-section-latlon", "47:8:47.001:8:0.3"], "no geographic reference"),
    (["--friction-section-latlon", "95:8:47:8:0.3"], "a position is not on Earth"),
    (["--superelevation-xy", "0:0:100:0"], "is not a superelevation range by position"),
])
def test_bad_friction_sections_on_the_command_line(tmp_path, args, message):
    route = hook_csv(tmp_path / "hook.csv")
    result = run("plan", route, "-o", tmp_path / "p.csv", *args)
    assert result.exit_code == 2, result.output
    assert message in " ".join(result.output.split()), result.output
    assert nothing_written(tmp_path, "p.csv", "p.meta.json")


@pytest.mark.parametrize("body, message", [
    ("[[friction]]\nstart_m = 0.0\nend_m = 100.0\n", "[[friction]] #1 lacks "
                                                      "friction_coefficient"),
    ("[[friction]]\nend_m = 100.0\nfriction_coefficient = 0.3\n", "[[friction]] #1 needs "
                                                                   "exactly one place"),
    ("[[friction]]\nstart_m = 0.0\nend_m = 100.0\nmu = 0.3\n", "unknown key 'mu'"),
    ("[[friction]]\nstart_m = 0.0\nend_m = 100.0\nfriction_coefficient = \"wet\"\n",
     "friction_coefficient"),
    ("[friction]\nstart_m = 0.0\n", "'friction' must be written as [[friction]] entries"),
    ("[[superelevation]]\nstart_x_m = 0.0\nstart_y_m = 0.0\nend_x_m = 100.0\n"
     "end_y_m = 0.0\n", "[[superelevation]] #1 lacks rate"),
])
def test_bad_friction_sections_in_the_limits_file(tmp_path, body, message):
    route = hook_csv(tmp_path / "hook.csv")
    limits = limits_file(tmp_path / "l.toml", body)
    result = run("plan", route, "-l", limits, "-o", tmp_path / "p.csv")
    assert result.exit_code == 2, result.output
    assert message in " ".join(result.output.split()), result.output
    assert str(limits) in result.output or "[[friction]]" not in body
    assert nothing_written(tmp_path, "p.csv", "p.meta.json")


def test_unreachable_stop_in_a_wet_section_exits_2_naming_the_cause(tmp_path):
    route = hook_csv(tmp_path / "hook.csv")
    result = run("plan", route, "-o", tmp_path / "p.csv", "--start-speed", "20", "--stop", "100",
                 "--friction-section", "30:150:0.1")
    assert result.exit_code == 2, result.output
    text = " ".join(result.output.split())
    assert "the stop at station 100 m" in text
    assert "friction 0.1 of the friction section 30..150 m (--friction-section 30:150:0.1)" in text
    assert nothing_written(tmp_path, "p.csv", "p.meta.json")


def test_plot_gg_from_a_sidecar_with_a_friction_section(tmp_path):
    route = hook_csv(tmp_path / "hook.csv")
    profile = tmp_path / "p.csv"
    assert run("plan", route, "-o", profile, "--friction-section", "150:400:0.25").exit_code == 0
    gg = tmp_path / "gg.svg"
    result = run("plot", profile, "-o", tmp_path / "o.png", "--gg", gg)
    assert result.exit_code == 0, result.output
    # the legend names the section's ellipse (structure, not pixels)
    assert "lowest section mu 0.25" in gg.read_text()
