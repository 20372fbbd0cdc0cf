"""Start and end speeds the route cannot take: the refusal names what sets the limit there, and
where that is the curvature bound planning uses rather than the road as read, says so and why.

A recorded drive's curvature is least certain at its ends (the smoothing has points on one side
only, and a start from rest leaves a cluster of scattered fixes), so its bound may be far above
the estimate there: a refusal that only said "a curve" sent the user looking for a bend on what
is a straight. Routes here are invented straights and arcs given directly as curvature.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from curvespeed.errors import InfeasibleError
from curvespeed.limits import Limits, RouteConstraints
from curvespeed.planner import plan_profile

from helpers import geometry_from_curvature

#: A 300 m straight whose estimate reads a gentle R 2000 m, with a bound of R 40 m over its
#: first and last 10 m (as a log's blurred ends give) and R 1000 m elsewhere.
N = 301


def blurred_ends(first: int = 0):
    """The straight; the R 40 m bound from node ``first`` to 10 and over the last 10 m."""
    geo = geometry_from_curvature(np.full(N, 1.0 / 2000.0), ds=1.0)
    bound = np.full(N, 1.0 / 1000.0)
    bound[first:10] = bound[-10:] = 1.0 / 40.0
    return dataclasses.replace(geo, curvature_bound_1pm=bound,
                               curvature_sd_1pm=np.full(N, 1e-4))


@pytest.mark.parametrize("which", ["start", "end"])
def test_a_speed_the_bound_at_an_end_refuses_names_the_bound_and_the_estimate(which):
    # 20 m/s into R 40 m needs 10 m/s^2 of lateral acceleration; the default cap allows far less
    speeds = {f"{which}_speed_mps": 20.0}
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(blurred_ends(), Limits(), RouteConstraints(**speeds))
    message = str(caught.value)
    for fragment in (f"{which} speed 20.00 m/s", "a curve, R 40 m by the curvature bound",
                     "the estimate reads R 2000 m", "do not pin the curvature down"):
        assert fragment in message, (fragment, message)


def test_a_start_speed_that_cannot_brake_for_the_bound_names_it_too():
    # the bound from 5 m on: the start itself allows 20 m/s, the braking before 5 m does not
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(blurred_ends(first=5), Limits(), RouteConstraints(start_speed_mps=20.0))
    message = str(caught.value)
    for fragment in ("start speed 20.00 m/s is too high", "at station 5.0 m",
                     "a curve, R 40 m by the curvature bound", "the estimate reads R 2000 m"):
        assert fragment in message, (fragment, message)


def test_a_curve_read_as_it_is_planned_is_named_by_its_radius_only():
    # where the bound is the estimate (exact geometry) the refusal names the curve's radius
    # and nothing about a bound
    geo = geometry_from_curvature(np.concatenate((np.full(10, 1.0 / 40.0), np.zeros(N - 10))),
                                  ds=1.0)
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(geo, Limits(), RouteConstraints(start_speed_mps=20.0))
    message = str(caught.value)
    assert "a curve, R 40 m" in message and "bound" not in message, message


def test_a_start_speed_the_jerk_bound_cannot_brake_in_time_names_the_limit_and_a_speed_that_can():
    # 20 m/s at the start, a 10 m/s zone from 70 m: braking at 2.5 m/s^2 alone needs 60 m, so
    # only the jerk bound (2 m/s^3, braking from zero deceleration) makes it too short: 72.3 m
    # (curvespeed.diagnose.braking_reach, checked against integration in
    # tests/test_reference_dynamics.py). The message was "no speed profile satisfies the jerk
    # bound ..."; it now names the zone, both distances and the fastest start speed that brakes
    # in time, and a plan from just under that speed exists.
    import re

    from curvespeed.limits import SpeedZone

    geo = geometry_from_curvature(np.zeros(N), ds=1.0)
    limits = Limits(max_decel_mps2=2.5, max_jerk_mps3=2.0)
    zone = (SpeedZone(70.0, 200.0, 10.0),)
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(geo, limits, RouteConstraints(start_speed_mps=20.0, zones=zone))
    message = str(caught.value)
    for fragment in ("start speed 20.00 m/s is too high", "10.00 m/s at station 70.0 m",
                     "(a speed zone)", "jerk up to 2 m/s^3", "at least 72.3 m",
                     "only 70.0 m are available"):
        assert fragment in message, (fragment, message)
    fastest = float(re.search(r"Lower the start speed to ([\d.]+) m/s", message).group(1))
    # the closed form's fastest start (19.73 m/s) holds in the discrete plan to 0.02 m/s
    plan_profile(geo, limits, RouteConstraints(start_speed_mps=fastest - 0.02, zones=zone))


def test_an_end_speed_out_of_reach_names_where_the_last_acceleration_starts():
    # The bound reads R 40 m over 10 m that end 40 m before the route's end: the vehicle rides
    # that ceiling there and accelerates from it over the last 40 m, which cannot make 20 m/s.
    # The message said only "the fastest arrival at station 300.0 m is ..."; it now names the
    # station the acceleration starts from, what holds the vehicle there, and the distance.
    geo = geometry_from_curvature(np.full(N, 1.0 / 2000.0), ds=1.0)
    bound = np.full(N, 1.0 / 1000.0)
    bound[251:261] = 1.0 / 40.0
    geo = dataclasses.replace(geo, curvature_bound_1pm=bound, curvature_sd_1pm=np.full(N, 1e-4))
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(geo, Limits(), RouteConstraints(end_speed_mps=20.0))
    message = str(caught.value)
    for fragment in ("end speed 20.00 m/s cannot be reached", "at station 260.0 m",
                     "a curve, R 40 m by the curvature bound", "40.0 m later"):
        assert fragment in message, (fragment, message)


def _quoted(message: str, which: str) -> float:
    import re

    how = "from a start speed" if which == "start" else "ending at a speed"
    return float(re.search(rf"{how} of up to ([\d.]+) m/s", message).group(1))


def test_a_start_speed_no_closed_form_blames_gets_the_fastest_start_that_plans():
    # A straight, a 60 m spiral and a R 60 m arc on a wet road (mu 0.3): from 21 m/s the
    # closed form (braking on the level from zero deceleration) reaches the arc's ceiling in
    # time, but braking in the spiral shares the grip with the lateral load, so no jerk-limited
    # profile exists. The message named nothing the user could change; it now quotes the
    # fastest start speed the planner takes (bisection on the solver's own first program, to
    # 0.01 m/s, rounded down): that speed plans, 0.02 m/s more is refused.
    k = np.zeros(N)
    k[20:80] = np.linspace(0.0, 1.0 / 60.0, 60)
    k[80:] = 1.0 / 60.0
    geo = geometry_from_curvature(k, ds=1.0)
    limits = Limits(friction_coefficient=0.3, max_decel_mps2=3.5, max_lateral_accel_mps2=3.5)
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(geo, limits, RouteConstraints(start_speed_mps=21.0), warn_limits=False)
    message = str(caught.value)
    assert "no speed profile satisfies the jerk bound" in message, message
    fastest = _quoted(message, "start")
    assert 15.0 < fastest < 21.0, message
    plan_profile(geo, limits, RouteConstraints(start_speed_mps=fastest), warn_limits=False)
    with pytest.raises(InfeasibleError):
        plan_profile(geo, limits, RouteConstraints(start_speed_mps=fastest + 0.02),
                     warn_limits=False)


def test_an_end_speed_the_lateral_jerk_bound_refuses_gets_the_fastest_end_that_plans():
    # The route ends in a 60 m spiral to R 150 m, entered at the end speed under a lateral jerk
    # bound of 0.5 m/s^3. At constant speed a spiral's lateral jerk is kappa' v^3 (the usual
    # spiral relation, common practice), so no end speed above (0.5 / kappa')^(1/3) = 16.51 m/s
    # can plan; the planner's own answer must lie below that, plan, and be the fastest to
    # 0.01 m/s (0.02 m/s more is refused).
    k = np.zeros(N)
    k[240:] = np.linspace(0.0, 1.0 / 150.0, 61)
    geo = geometry_from_curvature(k, ds=1.0)
    limits = Limits(max_lateral_jerk_mps3=0.5)
    with pytest.raises(InfeasibleError) as caught:
        plan_profile(geo, limits, RouteConstraints(start_speed_mps=15.0, end_speed_mps=18.0))
    message = str(caught.value)
    assert "lower the end speed to that" in message, message
    fastest = _quoted(message, "end")
    assert 15.0 < fastest <= (0.5 / ((1.0 / 150.0) / 60.0)) ** (1.0 / 3.0), message
    plan_profile(geo, limits, RouteConstraints(start_speed_mps=15.0, end_speed_mps=fastest))
    with pytest.raises(InfeasibleError):
        plan_profile(geo, limits,
                     RouteConstraints(start_speed_mps=15.0, end_speed_mps=fastest + 0.02))


def test_the_command_refuses_with_the_start_speed_that_plans_and_writes_nothing(tmp_path):
    # The same case through `curvespeed plan`, on exact points of an invented road (a 20 m
    # straight, a 60 m clothoid into a R 60 m arc) read and fitted like any route: exit 2, the
    # message quotes the fastest start speed, no profile is written, and the command plans
    # from the quoted speed.
    import re

    from click.testing import CliRunner

    from benchmarks.exact_roads import write_points
    from curvespeed.cli.main import cli
    from curvespeed.geometry.elements import Alignment, arc, line, spiral

    road = Alignment((line(20.0), spiral(60.0, 0.0, 1.0 / 60.0), arc(220.0, 60.0)),
                     0.0, 0.0, 0.0)
    points = write_points(road, tmp_path / "wet_clothoid.csv")
    out = tmp_path / "profile.csv"
    wet = ["--friction", "0.3", "--max-decel", "3.5", "--max-lateral-accel", "3.5"]
    refused = CliRunner().invoke(cli, ["plan", str(points), "-o", str(out), *wet,
                                       "--start-speed", "21"])
    assert refused.exit_code == 2, refused.output
    assert "no speed profile satisfies the jerk bound" in refused.output
    assert not out.exists() and not out.with_suffix(".meta.json").exists()
    fastest = re.search(r"from a start speed of up to ([\d.]+) m/s", refused.output).group(1)
    planned = CliRunner().invoke(cli, ["plan", str(points), "-o", str(out), *wet,
                                       "--start-speed", fastest])
    assert planned.exit_code == 0, planned.output
    assert out.exists()
