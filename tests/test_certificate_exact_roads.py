"""Plans made on points of an exact design road hold on the exact road.

The roads are the invented design alignments of benchmarks/exact_roads.py (straights, clothoids
and circular arcs, two of the winding road's arcs entered without a clothoid). Each is written as
exact points every metre, read and fitted like any route, planned with the default solver, and
the profile is driven on the *exact* road by the independent judge (benchmarks/judge.py, which
samples the motion every 0.125 m against the alignment's own curvature). Every limit must hold
within 1 %: the curvature bound the planner uses covers the road where the fit's smoothing would
have hidden a change of curvature, and the range of curvature rates the lateral jerk bound
uses covers the joints a fitted estimate may misplace. (The time against the independent
optimum is in the benchmark's table.)
"""

from __future__ import annotations

import pytest

from benchmarks.exact_roads import exact_roads, write_points
from benchmarks.judge import judge_profile
from curvespeed.geometry import build_geometry
from curvespeed.io import read_route
from curvespeed.planner import plan_profile

#: Uses of a limit up to this are within the verifier's and the judge's own tolerances (the
#: judge reads a 1 m plan's accelerations at 0.125 m: 0.3 % of jerk from station jitter).
WITHIN = 1.01
CASES = {case.name: case for case in exact_roads()}


@pytest.mark.parametrize("name", ["winding-stop", "wet", "s-curve-from-rest",
                                  "s-curve-lateral-jerk"])
def test_plan_on_fitted_points_holds_on_the_exact_road(name, tmp_path):
    case = CASES[name]
    points = write_points(case.alignment, tmp_path / f"{name}.csv")
    geometry = build_geometry(read_route(points))
    # the wet case raises comfort above the grip on purpose: no warning about it
    profile = plan_profile(geometry, case.limits, case.constraints(), warn_limits=False)
    judgement = judge_profile(profile, case.alignment, case.limits)
    # the lateral jerk where it is bounded (measured 1.0002 on the S-curve; 1.076 when the
    # crossings at a station took the chord rates alone)
    for limit in ("lateral", "comfort_ellipse", "friction_ellipse", "top_speed", "jerk",
                  "lateral_jerk"):
        if limit in judgement.use:
            assert judgement.use[limit] <= WITHIN, (limit, judgement.use[limit],
                                                    judgement.where_m[limit])


def test_plan_on_a_sparse_rtk_log_holds_on_the_exact_road():
    # The winding road driven from rest to rest and logged by an RTK receiver at 2 Hz (points
    # about 7 m apart; tests/drive_logs.py), planned as a user would, and judged on the exact
    # road (lengthened by straights at both ends, where a log's route may begin or end). At the
    # last bend's clothoid into its R 90 m arc the alignment read a jump of curvature 19 m
    # early, and the candidate roads for that jump, joined to a line fitted across the rest of
    # the clothoid and the arc, bounded the arc 0.8 % short where the plan brakes at the
    # comfort ellipse: 1.016 of it on the road. The lines' own misfit level, added to the
    # candidates' bound, covers it (measured 1.000).
    from benchmarks.exact_roads import LOG_MARGIN_M, extended
    from drive_logs import RTK, log_route, simulate_drive

    case = CASES["winding"]
    log = simulate_drive(case.alignment, 2.0, RTK, seed=5, stops=case.stops, dwell_s=5.0)
    profile = plan_profile(build_geometry(log_route(log)), case.limits, case.constraints())
    judgement = judge_profile(profile, extended(case.alignment, LOG_MARGIN_M), case.limits)
    worst, use = judgement.worst
    assert use <= WITHIN, (worst, use, judgement.where_m[worst])


@pytest.mark.parametrize("rate_hz, seed, measured", [(20.0, 1, 1.084), (2.0, 5, 1.046)])
def test_rtk_logs_of_the_s_curve_entered_at_speed_hold_its_lateral_jerk_bound(rate_hz, seed,
                                                                              measured):
    # The S-curve under a lateral jerk bound of 0.5 m/s^3, driven through at speed (20 m/s at
    # both ends, as its plan is asked) and logged by an RTK receiver (tests/drive_logs.py).
    # At 20 Hz the lines put the reverse clothoid's end on the R 100 m arc 1.75 m early; read
    # as exact, the plan accelerated before the real joint (lateral jerk `measured` times the
    # bound on the road). Each kink now spreads the rates as far as the points place it
    # (gamma times the standard deviation of where its lines cross: 4.5 m there). At 2 Hz one
    # line read the arc and the clothoid out of it together, at 1.53e-4 1/m^2 against the
    # clothoid's 2.0e-4; a line's rate margin now counts the kink its misfit level shows.
    from benchmarks.exact_roads import LOG_MARGIN_M, extended
    from drive_logs import RTK, log_route, simulate_drive

    case = CASES["s-curve-lateral-jerk"]
    log = simulate_drive(case.alignment, rate_hz, RTK, seed=seed, dwell_s=5.0,
                         end_speeds=(case.start_speed_mps, case.end_speed_mps))
    profile = plan_profile(build_geometry(log_route(log)), case.limits, case.constraints())
    judgement = judge_profile(profile, extended(case.alignment, LOG_MARGIN_M), case.limits)
    assert judgement.use["lateral_jerk"] <= WITHIN, (measured, judgement.use["lateral_jerk"],
                                                     judgement.where_m["lateral_jerk"])
    worst, use = judgement.worst
    assert use <= WITHIN, (worst, use, judgement.where_m[worst])


def test_rtk_log_whose_line_hides_the_start_of_a_clothoid_holds_the_comfort_ellipse():
    # The winding road with its stop, driven from rest to rest and logged by an RTK receiver
    # at 20 Hz, its fixes without time stamps as a CSV file gives them (seed 5 of
    # benchmarks/log_sweep.py). The lines put the start of the R 60 m
    # bend's clothoid 10 m early, so one line read 10 m of straight and the clothoid together:
    # low in curvature by 2 % at the clothoid's end, where the plan brakes onto the arc at the
    # comfort ellipse. The line's misfit level showed that departure, but near an element's
    # ends the bound took the fine scale's misfit, blurred low across the break: 1.013 of the
    # comfort ellipse on the road. The level now holds to the element's ends (1.000).
    from benchmarks.exact_roads import LOG_MARGIN_M, extended
    from curvespeed.errors import CurvespeedWarning
    from curvespeed.route import make_route
    from drive_logs import RTK, simulate_drive

    case = CASES["winding-stop"]
    log = simulate_drive(case.alignment, 20.0, RTK, seed=5, stops=case.stops, dwell_s=5.0)
    with pytest.warns(CurvespeedWarning, match="repeated point"):
        # RTK fixes at 20 Hz while standing still: some within 1 mm, dropped with a warning
        route = make_route(log.x_m, log.y_m, source="simulated RTK log")
    profile = plan_profile(build_geometry(route), case.limits, case.constraints())
    judgement = judge_profile(profile, extended(case.alignment, LOG_MARGIN_M), case.limits)
    worst, use = judgement.worst
    assert use <= WITHIN, (worst, use, judgement.where_m[worst])
