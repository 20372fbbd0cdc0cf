"""Rest-to-rest moves that reach the acceleration cap, against the double-S closed form.

The closed form (Biagiotti & Melchiorri 2008, "Trajectory Planning for Automatic Machines and
Robots", section 3.4; ``double_s_time`` in ``test_reference_convex``) is the minimum time over
every motion with the speed, acceleration and jerk caps. The target band at the default station
step (1 m) is 0..+0.1 % over it, with 1e-6 below allowed for the solver's accuracy. These
moves are the ones whose launch depends on how long the move holds the cap: the step next to
rest, the cap a launch spanning several stations goes on to, and which moves plan for the cap
at all (:mod:`curvespeed.jerk_model`, :mod:`curvespeed.launch_steps`). Each figure quoted
"before" was measured on the code before these shapes (commit b6a2d14), "now" on this one.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from test_reference_convex import double_s_time, planned_time, straight_limits, straight_problem

from curvespeed.profile import derive
from curvespeed.solvers.convex import solve_convex
from curvespeed.verify import verify_profile

BAND = (-1e-6, 1e-3)


def _excess(L: float, v: float, a: float, j: float) -> float:
    """Planned time at 1 m stations over the closed form's, less one."""
    return planned_time(straight_problem(L, 1.0, straight_limits(v, a, j))) / double_s_time(
        L, v, a, j) - 1.0


# At 1.5 m/s^2 and 0.8 m/s^3 the ramp to the cap covers 0.88 m, most of the first step. The step
# next to rest kept a flat part sized for a ramp that goes on past its node, so it reached less
# than the cap and the rest of the rise came after the node: before, +0.33 % (16 m), +0.24 %
# (30 m), +0.18 % (60 m), +0.16 % (80 m). A move that holds the cap past half the next step now
# ramps to the cap within the step (almost no flat part left): +0.075, +0.017, +0.004, +0.002 %.
@pytest.mark.parametrize("L", [16.0, 30.0, 60.0, 80.0])
def test_a_ramp_that_nearly_fills_the_step_next_to_rest_reaches_the_cap_in_it(L):
    assert BAND[0] <= _excess(L, 10.0, 1.5, 0.8) <= BAND[1]


# At 3 m/s^2 and 1.2 m/s^3 the ramp covers 3.1 m; from 37.5 m on (2 A^3 / J^2) the move reaches
# the cap, holding it only briefly. Planned for the cap it would hold it longer than the move
# does, so the launch was not planned as its ramp: before, +0.20 % (38 m), +0.19 % (40, 42 m).
# Now planned as the ramp to the highest lower cap the move holds long enough: +0.024, +0.014,
# +0.040 %.
@pytest.mark.parametrize("L", [38.0, 40.0, 42.0])
def test_a_launch_that_holds_the_cap_briefly_is_planned_for_a_lower_cap_it_holds(L):
    assert BAND[0] <= _excess(L, 10.0, 3.0, 1.2) <= BAND[1]


# At 3 m/s^2 and 2 m/s^3, moves of 13.5-27 m (2-4 A^3 / J^2) reach the cap; they were planned
# as not reaching it (the corner rows had not yet stopped such plans from coming out below the
# closed form): before, +0.34 % (16 m), +0.18 % (20 m), +0.16 % (24 m); now +0.094, +0.057,
# +0.041 %.
@pytest.mark.parametrize("L", [16.0, 20.0, 24.0])
def test_moves_that_reach_the_cap_plan_for_it_from_the_closed_forms_own_length(L):
    assert BAND[0] <= _excess(L, 10.0, 3.0, 2.0) <= BAND[1]


def test_every_move_from_16_m_on_is_within_the_band():
    # A grid over the regimes (lengths 16-80 m, caps 1.2-3 m/s^2 and 0.8-3 m/s^3, top speed
    # 10 m/s), 144 moves. Before, 14 of them above the band; now the largest is +0.093 % (16 m
    # at 3 m/s^2 and 2 m/s^3). Shorter moves are above it by the constant-acceleration steps'
    # own time (docs/method.md).
    moves = itertools.product(np.arange(16.0, 81.0, 8.0), (1.2, 1.5, 2.2, 3.0),
                              (0.8, 1.2, 2.0, 3.0))
    out = [(L, a, j, r) for L, a, j in moves
           if not BAND[0] <= (r := _excess(L, 10.0, a, j)) <= BAND[1]]
    assert out == []


@pytest.mark.parametrize("L, v", [(12.0, 6.0), (16.0, 6.0), (24.0, 6.0), (20.0, 25.0)])
def test_a_ramp_that_fills_the_step_exactly_leaves_no_jerk_at_its_node(L, v):
    # 0.5 m stations at 3 m/s^2 and 3 m/s^3: the ramp to the cap, A^3 / (6 J^2) = 0.5 m, fills
    # the step next to rest exactly, leaving no flat part, so the acceleration must not change
    # at its moving node. The two steps' accelerations there differ by round-off (up to
    # 2.3e-13 m/s^2), which over the node's nil time base read as jerks up to 1,853 times the
    # bound, and the profile failed its own check (before: these four, 134, 1,853, 343 and 131
    # times; 89 of 1,728 moves at 0.5 m). Checked here with the verifier's default tolerance,
    # and the jerk column within the bound.
    a, j = 3.0, 3.0
    problem = straight_problem(L, 0.5, straight_limits(v, a, j))
    b = solve_convex(problem).b
    check = verify_profile(problem, b)
    assert check.ok, check.violations
    derived = derive(problem, b)
    assert np.max(np.abs(derived["jerk_mps3"])) <= j * (1.0 + 1e-4)
    assert derived["time_s"][-1] / double_s_time(L, v, a, j) - 1.0 >= BAND[0]
