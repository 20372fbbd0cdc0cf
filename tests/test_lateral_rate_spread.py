"""A lateral jerk bound planned on an *estimated* curvature holds on the road.

The lateral jerk ``kappa' v^3 + 2 kappa v a`` follows the curvature's station rate. A clothoid's
curvature is linear in station (its rate constant; the textbook definition of the transition
curve), so a road of straights, arcs and clothoids has a rate that jumps at every joint. A
smoothed estimate spreads each jump over the smoothing's width: just past a joint its rate reads
low. :func:`curvespeed.lateral_rates.spread_rate_range` widens each step's range of rates by
the chord rates within that width, and the crossed forms at a node take the rates at both ends
of each step's range. Checked here against the exact rates of a clothoid joint, and end to end:
a simulated RTK log of an invented S-curve (tests/drive_logs.py), planned under a lateral jerk
bound and judged on the exact road (benchmarks/judge.py).
"""

from __future__ import annotations

import numpy as np
import pytest

from curvespeed.lateral_rates import node_lateral_jerk, node_rate_forms, rate_range, \
    spread_rate_range

#: An invented arc (curvature 0.01 1/m) whose clothoid starts at JOINT_M and unwinds at RATE.
JOINT_M, KAPPA, RATE = 50.3, 0.01, -2e-4


def exact_kappa(s):
    return np.where(s < JOINT_M, KAPPA, KAPPA + RATE * (s - JOINT_M))


def exact_rate(s):
    return np.where(s < JOINT_M, 0.0, RATE)


def smoothed(stations, half_width_m, sub=0.01):
    """The exact curvature averaged over +-half_width_m around each station: a smoothing that
    spreads a change over that width (a moving average, evaluated on a 1 cm grid)."""
    offsets = np.arange(-half_width_m, half_width_m + sub / 2, sub)
    return exact_kappa(stations[:, None] + offsets[None, :]).mean(axis=1)


def test_spread_range_covers_the_rates_the_smoothing_hid():
    ds, width = 1.0, 6.0
    s = np.arange(0.0, 121.0, ds)
    estimate = smoothed(s, width)
    inside = np.linspace(0.0, ds, 41)[None, :] + s[:-1, None]    # 41 points along every step
    truth_lo, truth_hi = exact_rate(inside).min(axis=1), exact_rate(inside).max(axis=1)
    lo, hi, _ = rate_range(estimate, ds, False)
    # the chord rates of a step and its neighbours alone miss the clothoid's rate next to the
    # joint (the estimate's rate reaches it only a smoothing width past the joint)
    assert np.any(truth_lo < lo - 1e-12)
    wide_lo, wide_hi = spread_rate_range(estimate, ds, False, np.full(s.size, width))
    # 1e-12 1/m^2: round-off of a 1 cm moving average (the rates are 2e-4)
    assert np.all(wide_lo <= truth_lo + 1e-12) and np.all(wide_hi >= truth_hi - 1e-12)
    # a rate margin widens every step's range by the larger of its nodes' margins
    margin = np.zeros(s.size)
    margin[30] = 1e-5
    m_lo, m_hi = spread_rate_range(estimate, ds, False, np.zeros(s.size), margin)
    chords = np.diff(estimate) / ds
    widened = np.where(np.isin(np.arange(s.size - 1), [29, 30]), 1e-5, 0.0)
    assert np.allclose(chords - m_lo, widened, rtol=0, atol=1e-18)
    assert np.allclose(m_hi - chords, chords - m_lo, rtol=0, atol=1e-18)
    # and where nothing was spread (an exact curvature), the range is the chord rates' own
    zero_lo, zero_hi = spread_rate_range(estimate, ds, False, np.zeros(s.size))
    assert np.array_equal(zero_lo, np.diff(estimate) / ds)
    assert np.array_equal(zero_hi, np.diff(estimate) / ds)


def test_spread_range_wraps_on_a_loop():
    ds = 1.0
    kappa = np.zeros(21)
    kappa[[3, 4]] = 0.002          # a bump near the seam of a 20-step loop
    kappa[-1] = kappa[0]
    lo, hi = spread_rate_range(kappa, ds, True, np.full(kappa.size, 4.0))
    rate = np.diff(kappa) / ds
    # the last steps reach across the seam to the bump's rates (steps 2 to 4)
    assert hi[-2] == pytest.approx(rate.max()) and lo[-1] == pytest.approx(rate.min())


@pytest.mark.parametrize("late_m", [0.0, 0.27, 0.6])
def test_node_forms_cover_a_joint_anywhere_in_the_step_after(late_m):
    # Nodes every metre; the road's clothoid starts at node 40 exactly, but the curvature the
    # planner has puts the joint `late_m` later (an estimate that placed it late). Just after
    # node 40 the road already has the clothoid's rate, driven with the acceleration of the
    # step before (a vehicle cannot switch it exactly at the node): the node's bound must
    # cover |kappa' v^3 + 2 kappa v a_before| with the road's rate.
    ds = 1.0
    s = np.arange(0.0, 81.0, ds)
    joint = 40.0
    planned = np.where(s < joint + late_m, KAPPA, KAPPA + RATE * (s - joint - late_m))
    b = np.full(s.size, 180.0)
    b[:41] -= 2.0 * 0.5 * ds * (40 - np.arange(41))     # braking at 0.5 m/s^2 up to node 40
    ones = np.ones(s.size - 1)
    cross = node_rate_forms(planned, ds, False, ones, ones)
    bound = np.abs(node_lateral_jerk(cross, b, False))
    v, a_before = np.sqrt(b[40]), (b[40] - b[39]) / (2 * ds)
    driven = abs(RATE * v ** 3 + 2.0 * KAPPA * v * a_before)
    assert bound[40] >= driven * (1 - 1e-12)


def test_rtk_log_planned_under_a_lateral_jerk_bound_holds_on_the_exact_road():
    from benchmarks.exact_roads import exact_roads, extended
    from benchmarks.judge import judge_profile
    from curvespeed.geometry import build_geometry
    from curvespeed.planner import plan_profile
    from curvespeed.route import make_route
    from drive_logs import RTK, simulate_drive

    case = {c.name: c for c in exact_roads()}["s-curve-lateral-jerk"]
    log = simulate_drive(case.alignment, 10.0, RTK, seed=6, dwell_s=5.0)
    geometry = build_geometry(make_route(log.x_m, log.y_m, source="simulated RTK log"))
    profile = plan_profile(geometry, case.limits, case.constraints(), warn_limits=False)
    # the log's route may end a few centimetres beyond the road: judged on it lengthened
    judged = judge_profile(profile, extended(case.alignment, 20.0), case.limits)
    # 1 %: the judge's own reading of a 1 m plan at 0.125 m (test_certificate_exact_roads);
    # measured 0.984 (0.90-0.99 over seeds 5-8 at 1 and 10 Hz; the chord rates alone gave 1.3-1.6,
    # and the spread without the lines' rate margin up to 1.037, where a line's rate read 3.6 %
    # low)
    assert judged.use["lateral_jerk"] <= 1.01, judged.where_m["lateral_jerk"]
    for limit in ("lateral", "comfort_ellipse", "jerk"):
        assert judged.use[limit] <= 1.01, (limit, judged.where_m[limit])


def test_seam_between_a_line_and_the_adaptive_estimate_is_joined_on_the_adaptive_side():
    from curvespeed.geometry.curvature import _join_seams

    station = np.arange(60.0)
    line = 1e-4 * station                                   # a clothoid's line, stations 0-19
    kappa = np.where(station < 20, line, 2.5e-3)            # the arc's adaptive estimate after
    source = np.where(station < 20, 1, 0)
    width = np.full(60, 10.0)
    joined = _join_seams(kappa, source, station, width, np.full(60, 0.01))
    np.testing.assert_array_equal(joined[:20], kappa[:20])  # the line keeps its values
    assert joined[20] == pytest.approx(kappa[19])           # the adaptive side meets it
    # and eases back to its own estimate linearly over its spread width (10 m)
    expected = 2.5e-3 + (kappa[19] - 2.5e-3) * np.clip(1 - (station[20:] - 20) / 10, 0, 1)
    np.testing.assert_allclose(joined[20:], expected, rtol=0, atol=1e-15)
    # no step changes by more than the jump shared out over the spread, plus the line's rate
    assert np.max(np.abs(np.diff(joined))) <= 1e-4 + abs(kappa[19] - 2.5e-3) / 10 + 1e-15
    # and the adaptive side stays within its bound where the line's value lies beyond it (a
    # line run past its joint: 3.0e-3 at the seam against the arc's 2.5e-3 and bound 2.6e-3)
    past = np.where(station < 20, 3.0e-3 / 19 * station, 2.5e-3)
    joined = _join_seams(past, source, station, width, np.full(60, 2.6e-3))
    assert np.max(joined[20:]) == 2.6e-3 and joined[19] == past[19]


def test_rtk_log_plan_is_not_held_back_by_a_seam_of_the_estimate():
    # The RTK log of the lateral-jerk S-curve (10 Hz, seed 5): a clothoid's line run 3 m past
    # its joint met the arc's adaptive estimate with a jump of 4.3e-4 1/m in one step; read as
    # a rate of -4.6e-4 1/m^2 and spread over the arc, it held the plan to 10.4 m/s where the
    # exact road allows 15.3, 10.7 % slower per metre than the optimum. Joined on the adaptive
    # side: 2.8 % slower than the plan on the exact geometry (36.16 s), the rest being the rates
    # of the joints the fit cannot place, taken at their widest; 4.5 % since each kink spreads
    # the rates as far as the points place it and a line's rate margin counts a kink its misfit
    # shows (3.7 % just before). 5 % holds that with room for the solver's and the noise
    # replicates' round-off, and fails the seam's 10 %.
    from benchmarks.exact_roads import exact_roads, extended
    from benchmarks.judge import judge_profile
    from curvespeed.geometry import build_geometry
    from curvespeed.planner import plan_profile
    from curvespeed.route import make_route
    from drive_logs import RTK, simulate_drive

    case = {c.name: c for c in exact_roads()}["s-curve-lateral-jerk"]
    log = simulate_drive(case.alignment, 10.0, RTK, seed=5, dwell_s=5.0)
    geometry = build_geometry(make_route(log.x_m, log.y_m, source="simulated RTK log"))
    # the joined estimate stays within the bound the plan is made on (check reads both)
    assert np.all(np.abs(geometry.curvature_1pm) <= geometry.curvature_bound_1pm)
    profile = plan_profile(geometry, case.limits, case.constraints(), warn_limits=False)
    exact = plan_profile(case.alignment.to_geometry(1.0, name=case.name), case.limits,
                         case.constraints(), warn_limits=False)
    assert profile.time_s[-1] <= 1.05 * exact.time_s[-1]
    judged = judge_profile(profile, extended(case.alignment, 20.0), case.limits)
    assert judged.use["lateral_jerk"] <= 1.01, judged.where_m["lateral_jerk"]
