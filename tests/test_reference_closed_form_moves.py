"""Rest-to-rest moves planned as their closed form (curvespeed.closed_form_moves), against the
double-S closed form of Biagiotti & Melchiorri 2008, "Trajectory Planning for Automatic
Machines and Robots", section 3.4 (REFERENCES.md; ``double_s_time`` writes its time out) and
uniform-jerk kinematics.

With different caps accelerating and braking (``A1``, ``A2``) the time-optimal move is each
cap's acceleration phase (the same book's ``Tj = A / J``, ``Ta = Tj + v / A`` where the move
reaches ``A``, else ``Tj = sqrt(v / J)``, ``Ta = 2 Tj``) to one peak speed ``v``, covering
``v Ta / 2`` each (the speed is point-symmetric in a phase), and a cruise at the top speed if
there is room: written out below, not taken from the package.
"""

import itertools
import math

import numpy as np
import pytest

from curvespeed import jerk_switch
from curvespeed.closed_form_moves import move_pieces
from curvespeed.geometry.elements import Alignment, line
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop
from curvespeed.planner import plan_profile
from test_reference_convex import double_s_time, straight_limits

#: The rest-to-rest target (benchmarks/exact_roads.py DOUBLE_S_BAND): within 0.1 % of the
#: closed form, and below it by no more than the solver backends' agreement on route time.
BAND = (-1e-6, 1e-3)


def phase(v, A, J):
    """Duration of the acceleration phase to peak speed ``v`` within ``A`` and ``J``."""
    if v * J >= A * A:
        return A / J + v / A
    return 2.0 * math.sqrt(v / J)


def asymmetric_time(L, V, A1, A2, J):
    """The time-optimal rest-to-rest move with caps ``A1`` / ``A2`` (module docstring): peak
    speed by bisection on the two phases' distances."""
    def length(v):
        return 0.5 * v * (phase(v, A1, J) + phase(v, A2, J))

    if length(V) <= L:
        return phase(V, A1, J) + phase(V, A2, J) + (L - length(V)) / V
    lo, hi = 0.0, V
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if length(mid) < L else (lo, mid)
    v = 0.5 * (lo + hi)
    return phase(v, A1, J) + phase(v, A2, J)


GRID = list(itertools.product((8.0, 12.0, 25.0, 200.0), (10.0, 25.0), (1.0, 1.5, 3.0),
                              (0.5, 1.0, 2.0, 4.0)))


@pytest.mark.parametrize("L, v, a, j", GRID)
def test_the_pieces_are_the_closed_form(L, v, a, j):
    durations, jerks, total, _ = move_pieces(L, v, a, a, j)
    assert total == pytest.approx(double_s_time(L, v, a, j), rel=1e-12)
    assert sum(durations) == pytest.approx(total, rel=1e-14)
    assert set(np.abs(jerks)) <= {0.0, j}
    assert all(d > 0 for d in durations)
    # driven from rest, the pieces end at rest with no acceleration, L from the start
    s, v_end, a_end = 0.0, 0.0, 0.0
    for h, jp in zip(durations, jerks):
        s, v_end, a_end = (s + v_end * h + a_end * h * h / 2 + jp * h ** 3 / 6,
                           v_end + a_end * h + jp * h * h / 2, a_end + jp * h)
    assert s == pytest.approx(L, rel=1e-10)
    assert abs(v_end) < 1e-9 * v and abs(a_end) < 1e-9 * a


@pytest.mark.parametrize("L, V, A1, A2, J", [
    (30.0, 10.0, 1.5, 2.5, 1.0), (200.0, 12.0, 1.0, 3.0, 2.0), (9.0, 10.0, 3.0, 1.2, 0.8)])
def test_different_caps_give_each_phase_its_own(L, V, A1, A2, J):
    _, _, total, _ = move_pieces(L, V, A1, A2, J)
    assert total == pytest.approx(asymmetric_time(L, V, A1, A2, J), rel=1e-10)
    limits = Limits(max_speed_mps=V, max_accel_mps2=A1, max_decel_mps2=A2, max_jerk_mps3=J,
                    friction_coefficient=0.9)
    profile = plan_profile(Alignment((line(L),)).to_geometry(1.0), limits)
    rel = profile.time_s[-1] / total - 1.0
    assert BAND[0] <= rel <= BAND[1]


# The moves the staircase of constant-acceleration steps could not bring within the band
# (8 m: every one, +0.12..+0.35 %; 12 m: 8 of 24, up to +0.12 %; measured before this module)
# and longer ones, every regime of the closed form: planned at 1 m stations they are within
# the band, and the exact motion the profile's step kinds describe reads within the jerk bound
# (benchmarks/judge.py, on the motion the profile's speeds and times give each step: measured at
# most 4e-8 over the bound, the rounding of a switch's jerk solved from its step's ends).
@pytest.mark.parametrize("L, v, a, j", [g for g in GRID if g[1] == 10.0])
def test_planned_moves_are_their_closed_form(L, v, a, j):
    from benchmarks.judge import judge_profile

    limits = straight_limits(v, a, j)
    alignment = Alignment((line(L),))
    profile = plan_profile(alignment.to_geometry(1.0), limits)
    rel = profile.time_s[-1] / double_s_time(L, v, a, j) - 1.0
    assert BAND[0] <= rel <= BAND[1]
    assert judge_profile(profile, alignment, limits).use["jerk"] <= 1.0 + 1e-6


def test_a_cap_held_for_less_than_a_step_rises_holds_and_falls_in_it():
    # 8 m at 1.5 m/s^2 and 1 m/s^3: the move holds the cap for 0.18 s, inside the step next
    # to rest (node 1 at 1.82 s; the ramp ends at 1.5 s, the hold at 1.68 s)
    from curvespeed.export import as_station_profile

    profile = plan_profile(Alignment((line(8.0),)).to_geometry(1.0),
                           straight_limits(10.0, 1.5, 1.0))
    assert profile.switch_step[[0, 7]].tolist() == [jerk_switch.RISE_HOLD_FALL] * 2
    shapes = as_station_profile(profile).switch_shapes
    assert shapes.ok[[0, 7]].all()
    np.testing.assert_allclose(shapes.jerk[[0, 7]], 1.0, rtol=1e-9)
    T = np.diff(profile.time_s)[0]
    # the book's Ta = Tj / 2 + sqrt(Tj^2 / 4 + L / A) for a move reaching A but not V (half
    # of the 8 m), the hold ending at Ta - Tj
    tj = 1.5 / 1.0
    ta = tj / 2 + math.sqrt(tj * tj / 4 + 8.0 / 1.5)
    assert shapes.x[0] * T == pytest.approx(tj, rel=1e-9)
    assert shapes.x2[0] * T == pytest.approx(ta - tj, rel=1e-9)
    assert profile.time_s[-1] == pytest.approx(double_s_time(8.0, 10.0, 1.5, 1.0), rel=1e-9)


def test_a_move_whose_closed_form_does_not_fit_keeps_the_staircase():
    # a zone at 2 m/s in the middle of a 40 m move that would reach 4.9 m/s: the closed form
    # runs faster than the road allows there, so the move is planned as before, within it
    from curvespeed.placement import place_positions
    from curvespeed.problem import build_problem

    limits = straight_limits(10.0, 1.5, 1.0)
    geometry = Alignment((line(40.0),)).to_geometry(1.0)
    zone = place_positions(RouteConstraints(zones=(SpeedZone(18.0, 22.0, 2.0),)), geometry)
    assert build_problem(geometry, limits, zone).closed_form_b is None
    assert build_problem(geometry, limits, RouteConstraints()).closed_form_b is not None
    profile = plan_profile(geometry, limits, zone)
    assert np.all(profile.speed_mps[18:23] <= 2.0 + 1e-6)


def test_a_loop_with_one_stop_is_one_move_around_its_seam():
    # An invented stadium loop (two 100 m straights, two 30 m radii), one stop mid-straight at
    # 50 m, 6 m/s: the curves allow 13.4 m/s (2.5 m/s^2 lateral), and the move accelerates and
    # brakes on the straights (4 s at 1.5 m/s^2), cruising through the curves; the move from
    # the stop round to it again is the closed form over the loop's length, across the seam
    # (the route's first node) as anywhere else
    from helpers import geometry_from_curvature

    R, n_arc = 30.0, 94
    kappa = np.concatenate((np.zeros(100), np.full(n_arc, 1 / R), np.zeros(100),
                            np.full(n_arc, 1 / R)))
    loop = geometry_from_curvature(np.append(kappa, kappa[0]), ds=1.0, closed=True)
    limits = straight_limits(6.0, 1.5, 1.0)
    profile = plan_profile(loop, limits, RouteConstraints(stops=(Stop(50.0),)))
    closed_form = double_s_time(loop.length_m, 6.0, 1.5, 1.0)
    assert profile.time_s[-1] == pytest.approx(closed_form, rel=1e-12)
    assert profile.speed_mps[0] == profile.speed_mps[-1] == pytest.approx(6.0, rel=1e-12)


def test_a_move_the_solver_leaves_off_its_closed_form_is_written_without_switches(
        monkeypatch, tmp_path):
    # Where the solver's speeds do not agree with the motion's (here: the agreement check made
    # to fail), the move's switching steps would be solved from speeds they were not planned
    # for: they are written as constant-jerk steps, a turn next to rest as a ramp and hold,
    # which fit any speeds; the profile reads back and exports as written.
    from curvespeed import planner
    from curvespeed.cli.export_cmd import export
    from curvespeed.io.profile_csv import read_station_profile, write_profile_csv
    from click.testing import CliRunner

    monkeypatch.setattr(planner, "snap_to_closed_form",
                        lambda problem, b: (b, np.zeros(b.size, dtype=bool)))
    L, v, a, j = 8.0, 10.0, 3.0, 0.5       # turns inside its steps next to rest
    profile = plan_profile(Alignment((line(L),)).to_geometry(1.0), straight_limits(v, a, j))
    assert profile.switch_step is None
    assert profile.rest_time_coef[0] > 0.0 and profile.rest_time_coef[-1] > 0.0
    # the model's times of the steps, at speeds the solver left 1e-5 below the motion's
    assert 0.0 <= profile.time_s[-1] / double_s_time(L, v, a, j) - 1.0 <= 1e-4
    path = tmp_path / "p.csv"
    write_profile_csv(profile, path)
    read_station_profile(path)
    result = CliRunner().invoke(export, [str(path), "-o", str(tmp_path / "t.csv")])
    assert result.exit_code == 0, result.output


def test_a_straight_from_points_plans_its_moves_as_their_closed_form(tmp_path):
    # An invented 60 m straight given as points every 2 m, a stop at 20 m, the default limits
    # (1.5 m/s^2 accelerating, 2.5 braking, 2 m/s^3): the fit's curvature bound, never quite 0,
    # lowers the comfort ellipse's longitudinal part by some 2e-8 of the caps at speed; the
    # moves are still their closed form (the caps taken that much lower), through the CLI
    from click.testing import CliRunner

    from curvespeed.cli.plan_cmd import plan
    from curvespeed.io.profile_csv import read_station_profile
    from curvespeed.io.table_csv import read_table_csv

    route = tmp_path / "straight.csv"
    route.write_text("x_m,y_m\n" + "".join(f"{x},0\n" for x in range(0, 61, 2)))
    out = tmp_path / "profile.csv"
    result = CliRunner().invoke(plan, [str(route), "--stop", "20", "-o", str(out)])
    assert result.exit_code == 0, result.output
    kinds = read_table_csv(out).columns["step_kind"]
    assert "accel_hold_fall" in set(kinds)
    sp = read_station_profile(out)
    closed = (asymmetric_time(20.0, 30.0, 1.5, 2.5, 2.0)
              + asymmetric_time(sp.length_m - 20.0, 30.0, 1.5, 2.5, 2.0))
    assert BAND[0] <= sp.time_s[-1] / closed - 1.0 <= BAND[1]


# Found by planning 600 random short moves (3-120 m; 0.5, 1 and 2 m stations; caps 0.5-4
# m/s^2 each way, 0.3-8 m/s^3): a move whose step through the top speed holds its cap, then
# falls, next to the stop's step that rises, holds and falls, was written with steps that each
# needed the other's acceleration to be read, and the planner refused its own profile. Such a
# move keeps the staircase now; every move of those 600 plans, none below the closed form, and
# the judge reads none over 1.005 of the jerk bound.
@pytest.mark.parametrize("L, ds, V, A1, A2, J", [
    (5.0, 1.0, 38.56, 0.7717, 2.4533, 6.376), (1.5, 0.5, 25.52, 2.2133, 1.3234, 6.1795)])
def test_a_move_whose_steps_could_not_be_read_keeps_the_staircase(L, ds, V, A1, A2, J):
    from curvespeed.export import as_station_profile

    limits = Limits(max_speed_mps=V, max_accel_mps2=A1, max_decel_mps2=A2, max_jerk_mps3=J,
                    friction_coefficient=1.0, max_lateral_accel_mps2=3.0)
    profile = plan_profile(Alignment((line(L),)).to_geometry(ds), limits, warn_limits=False)
    as_station_profile(profile)                          # reads as written
    assert profile.time_s[-1] >= asymmetric_time(L, V, A1, A2, J) * (1.0 - 1e-6)
