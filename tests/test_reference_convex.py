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


# -- lateral jerk: spirals ---------------------------------------------------------------------
# Shortt's relation for transition spirals (1909), in AASHTO, A Policy on Geometric Design of
# Highways and Streets (2011), section 3.3.8, as L = V^3 / (R C), metric 0.0214 V^3 / (R C) with V
# in km/h (from memory; 0.0214 = 1 / 3.6^3): a clothoid of length L into a circle of radius R,
# driven at constant speed v, changes the lateral acceleration v^2 / R at the rate C = v^3 / (R L).

def spiral_route(R: float, L: float, ds: float = 1.0):
    """300 m straight, a clothoid of length L (curvature linear in station), 300 m of circle."""
    s = np.arange(0.0, 600.0 + L + ds / 2, ds)
    kappa = np.interp(s, [0.0, 300.0, 300.0 + L, 600.0 + L], [0.0, 0.0, 1.0 / R, 1.0 / R])
    return s, geometry_from_curvature(kappa, ds=ds)


@pytest.mark.parametrize("R, L, v", [(300.0, 60.0, 20.0), (150.0, 40.0, 12.0)])
def test_lateral_jerk_on_a_clothoid_at_constant_speed(R, L, v):
    # The per-step definition is exact here: every step inside the spiral has C = v^3 / (R L).
    s, geo = spiral_route(R, L)
    problem = build_problem(geo, Limits(max_jerk_mps3=None), RouteConstraints())
    rate = problem.step_lateral_jerk(np.full(s.size, v * v))
    inside = (s[:-1] >= 300.0) & (s[1:] <= 300.0 + L)
    np.testing.assert_allclose(rate[inside], v ** 3 / (R * L), rtol=1e-12)
    assert np.all(rate[(s[1:] <= 300.0) | (s[:-1] >= 300.0 + L)] == 0.0)


@pytest.mark.parametrize("R, L, C", [(300.0, 60.0, 0.5), (400.0, 80.0, 0.3)])
def test_spiral_speed_under_a_lateral_jerk_bound_is_shortts(R, L, C):
    # With the rate of change of lateral acceleration bounded by C, no profile can be faster
    # than v = (C R L)^(1/3) inside the spiral once it has slowed to it (accelerating there only
    # adds lateral jerk), and holding that speed keeps the bound exactly, so the fastest
    # profile drives it. Top speed 15 % above it, lateral comfort not binding; the longitudinal
    # jerk is left free so the braking before the spiral can end at its entry. Near the entry
    # the profile may still be braking, which lowers the lateral jerk: from 10 m in, the speed
    # must match. Tolerance 1e-4: the rows are tightened by 1e-5 of C (speed 3e-6); measured
    # 1e-5.
    v_s = (C * R * L) ** (1 / 3)
    s, geo = spiral_route(R, L)
    cap = 1.15 * v_s
    assert math.sqrt(2.5 * R) > cap                 # the circle's comfort speed is higher
    limits = Limits(max_jerk_mps3=None, max_lateral_jerk_mps3=C, max_speed_mps=cap)
    problem = build_problem(geo, limits, RouteConstraints(start_speed_mps=cap,
                                                          end_speed_mps=cap))
    result = solve_convex(problem)
    assert verify_profile(problem, result.b, tolerance=1e-4).ok
    v = np.sqrt(result.b)
    inside = (s >= 310.0) & (s <= 300.0 + L)
    np.testing.assert_allclose(v[inside], v_s, rtol=1e-4)
    assert np.max(np.abs(problem.step_lateral_jerk(result.b))) <= C * (1 + 1e-4)
