"""Numbers on the planning path far outside what any vehicle or road has: each is refused with
exit status 2 before anything is written, by a message naming the option, key or file, the
range and the reason (never a traceback from deep inside the planner).

Every route, limit and profile here is invented for the tests.
"""

from __future__ import annotations

import pytest

from hostile_helpers import assert_refused, bend_csv, run, snapshot, write


@pytest.fixture
def bend(tmp_path):
    return write(tmp_path, "r.csv", bend_csv())


# --- friction coefficients: 1e-20 reached a division by zero in the rest steps --------------

@pytest.mark.parametrize("args, named, fragments", [
    (["--friction", "1e-20"], "--friction 1e-20", ["outside 0.01..2", "0.1 on ice"]),
    (["--friction", "0.005", "--solver", "convex-reference"], "--friction 0.005",
     ["outside 0.01..2", "1 % grade"]),
    (["--friction-section", "0:100:1e-300"], "--friction-section 0:100:1e-300",
     ["friction_coefficient = 1e-300 is outside 0.01..2", "1 % grade"]),
    (["--friction-section", "0:100:0.5:1e-300"], "--friction-section 0:100:0.5:1e-300",
     ["lateral_friction_coefficient = 1e-300 is outside 0.01..2", "check the value"]),
])
def test_a_friction_coefficient_below_any_road_is_refused(tmp_path, bend, args, named,
                                                          fragments):
    out = tmp_path / "p.csv"
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, *args, "-o", out), tmp_path, before, named, fragments)


def test_a_friction_coefficient_below_any_road_in_a_limits_file_names_the_file(tmp_path, bend):
    limits = write(tmp_path, "l.toml", "[limits]\nlateral_friction_coefficient = 1e-200\n\n"
                   "[[friction]]\nstart_m = 0\nend_m = 50\nfriction_coefficient = 0.5\n")
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, "-l", limits, "-o", tmp_path / "p.csv"), tmp_path, before,
                   str(limits), ["lateral_friction_coefficient = 1e-200 is outside 0.01..2"])


def test_the_lowest_friction_accepted_plans(tmp_path, bend):
    result = run("plan", bend, "--friction", "0.01", "--friction-section", "0:50:0.01:0.01")
    assert result.exit_code == 0, result.output


# --- jerk bounds: 1e50 divided by zero, 1e160 overflowed ------------------------------------

@pytest.mark.parametrize("option, value, fragment", [
    ("--max-jerk", "1e50", "for no bound plan with --solver envelope"),
    ("--max-jerk", "1e160", "for no bound plan with --solver envelope"),
    ("--max-lateral-jerk", "1e160", "leave it unset for no bound"),
    ("--max-lateral-jerk", "1001", "leave it unset for no bound"),
])
def test_a_jerk_bound_that_bounds_nothing_is_refused(tmp_path, bend, option, value, fragment):
    before = snapshot(tmp_path)
    message = assert_refused(run("plan", bend, option, value, "-o", tmp_path / "p.csv"),
                             tmp_path, before, option, ["outside 0.01..1000", fragment])
    assert len(message) < 600, message


def test_the_highest_jerk_bounds_accepted_plan(tmp_path, bend):
    result = run("plan", bend, "--max-jerk", "1000", "--max-lateral-jerk", "1000",
                 "--stop", "60")
    assert result.exit_code == 0, result.output


def test_a_jerk_bound_above_the_range_in_a_limits_file_names_the_key(tmp_path, bend):
    limits = write(tmp_path, "l.toml", "[limits]\nmax_jerk_mps3 = 1e50\n")
    before = snapshot(tmp_path)
    assert_refused(run("plan", bend, "-l", limits, "-o", tmp_path / "p.csv"), tmp_path, before,
                   str(limits), ["max_jerk_mps3 = 1e+50 is outside 0.01..1000"])


# --- top speed: 1e-300 was blamed on two stops on neighbouring stations ---------------------

@pytest.mark.parametrize("value", ["1e-300", "0.05"])
def test_a_top_speed_below_a_crawl_is_refused_with_the_range(tmp_path, bend, value):
    before = snapshot(tmp_path)
    message = assert_refused(run("plan", bend, "--max-speed", value, "-o", tmp_path / "p.csv"),
                             tmp_path, before, "--max-speed", ["outside 0.1..1000",
                                                               "walking pace"])
    assert "stop" not in message, message
