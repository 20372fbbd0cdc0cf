"""Reference tests of the convex (jerk-bounded) solver against published closed forms.

Source for the double-S (jerk-limited, rest-to-rest) motion: L. Biagiotti and C. Melchiorri,
Trajectory Planning for Automatic Machines and Robots, Springer 2008, section 3.4. Stations are
synthetic straight lines, so the only approximation is the station step.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed.problem import build_problem
from curvespeed.profile import derive
from curvespeed.solvers.convex import solve_convex
from curvespeed.verify import verify_profile

from helpers import geometry_from_curvature


def double_s_time(L, v, a, j):
    """Minimum time of a rest-to-rest double-S motion over distance L (book section 3.4)."""
    if v * j >= a * a:
        tj, ta = a / j, a / j + v / a
    else:
        tj = math.sqrt(v / j)
        ta = 2 * tj
    if L >= v * ta:                      # top speed and acceleration reached
        return L / v + ta
    if L >= 2 * a ** 3 / j ** 2:         # only the acceleration limit reached
        ta = a / (2 * j) + math.sqrt(a * a / (4 * j * j) + L / a)
        return 2 * ta
    return 4 * (L / (2 * j)) ** (1 / 3)  # neither reached


# Check values of the closed form itself, listed in REFERENCES.md (computed from the book's
# formulas): (L, v, a, j) -> T.
@pytest.mark.parametrize("L, v, a, j, expected", [
    (10, 5, 10, 30, 2.833333), (10, 10, 10, 30, 2.360921), (1, 10, 10, 30, 1.021746),
    (10, 2, 10, 30, 5.516398)])
def test_double_s_closed_form_matches_its_check_values(L, v, a, j, expected):
    assert double_s_time(L, v, a, j) == pytest.approx(expected, abs=1e-6)


def straight_problem(length, ds, limits, constraints=RouteConstraints()):
    geo = geometry_from_curvature(np.zeros(int(round(length / ds)) + 1), ds=ds)
    return build_problem(geo, limits, constraints)


# Rest to rest on a straight, within 1 % of the closed form in each regime. The station step
# must resolve the jerk phases (a / j seconds, a few metres at low speed): at 0.5 m the
# measured difference is below 0.1 %; at 1 m it grows to about 2 % in the short regimes, where
# the whole jerk ramp fits into the first steps.
@pytest.mark.parametrize("L, v, a, j, regime", [
    (500.0, 20.0, 1.5, 1.0, "speed and acceleration limits reached"),
    (200.0, 40.0, 1.5, 1.0, "only the acceleration limit reached"),
    (200.0, 40.0, 3.0, 0.5, "neither limit reached"),
])
def test_rest_to_rest_time_matches_the_double_s_closed_form(L, v, a, j, regime):
    limits = Limits(max_speed_mps=v, max_accel_mps2=a, max_decel_mps2=a, max_jerk_mps3=j,
                    friction_coefficient=0.9)
    problem = straight_problem(L, 0.5, limits)
    result = solve_convex(problem)
    check = verify_profile(problem, result.b, tolerance=1e-4)
    assert check.ok, check.violations
    total = derive(problem, result.b)["time_s"][-1]
    assert total == pytest.approx(double_s_time(L, v, a, j), rel=0.01), regime


# Jerk-limited stop from v0 (same source, a rest-to-rest motion read backwards): when
# v0 j >= a^2 the distance is v0^2 / (2 a) + v0 a / (2 j). Braking onset is found on the grid,
# so the distance is compared within one station step.
@pytest.mark.parametrize("v0, a, j", [(20.0, 2.0, 1.0), (15.0, 1.5, 1.5), (25.0, 2.5, 2.0)])
def test_jerk_limited_stopping_distance(v0, a, j):
    assert v0 * j >= a * a
    ds, stop_at = 0.5, 300.0
    limits = Limits(max_speed_mps=v0, max_accel_mps2=a, max_decel_mps2=a, max_jerk_mps3=j,
                    friction_coefficient=0.9)
    problem = straight_problem(400.0, ds, limits,
                               RouteConstraints(start_speed_mps=v0, stops=(Stop(stop_at),)))
    v = np.sqrt(solve_convex(problem).b)
    k_stop = int(round(stop_at / ds))
    cruising = np.flatnonzero(v[:k_stop] >= v0 * (1 - 1e-6))
    distance = stop_at - problem.station_m[cruising[-1]]
    assert distance == pytest.approx(v0 ** 2 / (2 * a) + v0 * a / (2 * j), abs=ds)
