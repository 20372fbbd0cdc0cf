"""A profile CSV whose positions disagree with its stations (every x_m, y_m zeroed, one row's
position moved) used to be accepted: replay ended after 1.6 s of a 52 s plan, export and plot
drew a point. The reader now refuses it (exit 2), naming the file and line, and writes nothing;
fresh profiles of every bundled (invented) route at spacings of 0.25 to 2 m still pass.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from curvespeed.io.profile_csv import read_station_profile
from curvespeed.io.profile_positions import arc_chord_m, position_rounding_m
from hostile_helpers import assert_refused, planned_files, replace_cell, run, snapshot

ROUTES = Path(__file__).resolve().parent.parent / "routes"
COMMANDS = [("replay", "run.csv"), ("export", "t.csv"), ("plot", "f.png")]


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planned")
    _, profile, _ = planned_files(folder)
    return profile.read_text()


def _edited(text: str, edit) -> str:
    lines = text.splitlines()
    header = lines[0].split(",")
    for i in range(1, len(lines)):
        cells = lines[i].split(",")
        edit(i + 1, cells, header)
        lines[i] = ",".join(cells)
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("command, output", COMMANDS)
def test_a_profile_with_every_position_zero_is_refused(command, output, planned, tmp_path):
    def zero(line, cells, header):
        cells[header.index("x_m")] = cells[header.index("y_m")] = "0"

    profile = tmp_path / "p.csv"
    profile.write_text(_edited(planned, zero))
    before = snapshot(tmp_path)
    result = run(command, profile, "-o", tmp_path / output)
    assert_refused(result, tmp_path, before, profile,
                   ["line 3 (station 1.0 m)", "is 0.0000 m from that of line 2",
                    "far shorter than the station step", "plan the profile again"])


@pytest.mark.parametrize("shift_m, fragment", [(0.5, "longer than the station step"),
                                               (-0.9, "far shorter than the station step")])
def test_one_moved_position_is_named(shift_m, fragment, planned, tmp_path):
    # along x on the bend's straight (its first 100 m run along +x), so the step before the
    # moved row grows or shrinks by the shift
    line = 41
    x = float(planned.splitlines()[line - 1].split(",")[1])
    profile = tmp_path / "p.csv"
    profile.write_text(replace_cell(planned, line, "x_m", f"{x + shift_m:.4f}"))
    before = snapshot(tmp_path)
    result = run("export", profile, "-o", tmp_path / "t.csv")
    assert_refused(result, tmp_path, before, profile, [f"line {line} ", fragment])


def test_the_positions_rounding_is_read_from_the_file():
    assert position_rounding_m(np.array([1.2345, 0.0]), np.array([2.5, -7.1])) == 0.5e-4
    assert position_rounding_m(np.array([1.0, 0.0]), np.array([2.0, 3.0])) == 0.5
    assert position_rounding_m(np.array([1.25]), np.array([2.0])) == 0.5e-2


def test_an_arc_chord_is_the_circle_s():
    # a quarter circle of radius 10 m: 15.708 m of arc, 14.142 m of chord
    chord = arc_chord_m(np.array([0.1, 0.0]), np.array([0.5 * math.pi * 10.0, 3.0]))
    np.testing.assert_allclose(chord, [10.0 * math.sqrt(2.0), 3.0], rtol=1e-12)


@pytest.mark.parametrize("route", ["mountain_road.csv", "proving_ground.xodr",
                                   "shuttle_route.gpx", "test_loop.geojson"])
@pytest.mark.parametrize("spacing", ["0.25", "0.5", "1", "2"])
def test_fresh_profiles_of_the_bundled_routes_pass(route, spacing, tmp_path):
    profile = tmp_path / "p.csv"
    result = run("plan", ROUTES / route, "--spacing", spacing, "-o", profile)
    assert result.exit_code == 0, result.output
    sp = read_station_profile(profile)
    assert np.max(np.abs(sp.curvature_1pm)) > 0.0          # curves to judge chords on
