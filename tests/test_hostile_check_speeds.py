"""``check --speeds`` holds the speeds it reads to the rules the other commands hold the same
files to: a profile's ``step_kind`` column as ``export`` reads it, and a GPX track's speeds to
the plausibility bound of a CSV's. Each refusal exits 2, names the file and place, and writes
nothing. Routes and tracks are invented.
"""

from __future__ import annotations

import pytest

from hostile_helpers import assert_refused, planned_files, replace_cell, run, snapshot


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planned")
    route, profile, _ = planned_files(folder)
    return route.read_text(), profile.read_text()


def _files(planned, folder):
    route = folder / "r.csv"
    route.write_text(planned[0])
    return route


@pytest.mark.parametrize("command", ["check", "export"])
@pytest.mark.parametrize("value, fragment", [
    ("warp", "value 'warp' is not a step kind"),
    ("jerk_ramp", "value 'jerk_ramp' is allowed only on a step with exactly one end at rest"),
])
def test_a_step_kind_export_refuses_is_refused_by_check_too(command, value, fragment, planned,
                                                            tmp_path):
    route = _files(planned, tmp_path)
    speeds = tmp_path / "s.csv"
    speeds.write_text(replace_cell(planned[1], 51, "step_kind", value))
    out = tmp_path / ("c.json" if command == "check" else "t.csv")
    before = snapshot(tmp_path)
    if command == "check":
        result = run("check", route, "--speeds", speeds, "--json", out)
    else:
        result = run("export", speeds, "-o", out)
    assert_refused(result, tmp_path, before, speeds, ["line 51", fragment])
