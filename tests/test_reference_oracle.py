"""Reference tests of the independent minimum-time model (benchmarks/oracle.py).

The model is the yardstick plans are judged against on exact roads, so it is checked here against
published closed forms, on moves short enough to solve in a fraction of a second each:

* jerk-limited rest-to-rest and cruise-then-stop motions: the double-S of L. Biagiotti and
  C. Melchiorri, Trajectory Planning for Automatic Machines and Robots, Springer 2008,
  section 3.4 (formulas and check values in REFERENCES.md);
* a circle: the speed at which the lateral acceleration v^2 / R meets the comfort cap or the
  friction limit (point-mass dynamics);
* a clothoid under a lateral jerk bound C: Shortt's relation, the constant speed
  v = (C R L)^(1/3) at which a spiral of length L into radius R is driven at lateral jerk C
  (AASHTO Green Book 2011 section 3.3.8, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from benchmarks.oracle import build_grid, solve_min_time
from curvespeed.geometry.elements import Alignment, arc, line, spiral
from curvespeed.limits import Limits

from test_reference_convex import double_s_time

#: Target agreement with the closed forms (relative). The model is exact kinematics with the
#: jerk held constant over each grid interval, so it can only be slower than the continuous
#: optimum: the instants where the optimal jerk switches fall between grid stations. With the
#: default grid (0.125 m, graded from 1 mm by 4 % per step next to the ends) the measured
#: excess is below 2e-5 on these moves; halving the growth and the spacing divides it by about
#: four (discretisation, not a modelling error).
REL_TARGET = 1e-4
#: How far below a closed form the model may come: the limits hold at the grid stations and
#: at the middle of every interval, which leaves no time to gain between them (the speed is
#: quadratic in time over an interval, so its mean is Simpson's rule of the three samples), so
#: only IPOPT's tolerance (1e-10 on the scaled time) remains.
REL_BELOW = 1e-8


def straight(length_m: float) -> Alignment:
    return Alignment((line(length_m),))


def motion_limits(v, a, j) -> Limits:
    """Speed, acceleration (both ways) and jerk caps; lateral limits idle on a straight."""
    return Limits(max_speed_mps=v, max_accel_mps2=a, max_decel_mps2=a, max_jerk_mps3=j,
                  friction_coefficient=2.0)


# Check values of REFERENCES.md (computed from the book's formulas), all three regimes, and a
# road-like move at the default comfort limits.
@pytest.mark.parametrize("L, v, a, j", [
    (10.0, 5.0, 10.0, 30.0), (10.0, 10.0, 10.0, 30.0), (1.0, 10.0, 10.0, 30.0),
    (10.0, 2.0, 10.0, 30.0), (60.0, 20.0, 1.5, 2.0)])
def test_rest_to_rest_time_matches_the_double_s_closed_form(L, v, a, j):
    best = solve_min_time(straight(L), motion_limits(v, a, j))
    expected = double_s_time(L, v, a, j)
    assert -REL_BELOW <= best.time_s / expected - 1.0 <= REL_TARGET
    # the motion keeps its bounds at every grid station (IPOPT may relax a bound by 1e-8 of it)
    assert np.all(best.speed_mps <= v * (1 + 1e-7))
    assert np.all(np.abs(best.accel_mps2) <= a * (1 + 1e-7))
    assert np.all(np.abs(best.jerk_mps3) <= j * (1 + 1e-7))


# Nonzero start speed, steady at the start (zero acceleration), to rest: the book's example with
# v0 = 1 m/s, from memory and re-derived from section 3.4's formulas for v0 != 0
# (T = T_a + T_v + T_d = 0.7333 + 1.1433 + 0.8333 = 2.7100 s).
def test_move_from_a_start_speed_matches_the_book_example():
    best = solve_min_time(straight(10.0), motion_limits(5.0, 10.0, 30.0), start_speed_mps=1.0)
    assert -REL_BELOW <= best.time_s / 2.7100 - 1.0 <= REL_TARGET


# Cruise at v0, then the jerk-limited stop (same source, a rest-to-rest motion read backwards):
# with v0 j >= a^2 the stop takes v0/a + a/j over v0^2/(2a) + v0 a/(2j); 20 m of cruising
# before it take 20 / v0. A 0.25 m grid (graded next to the ends as always) keeps the test
# quick: measured excess 1e-6 at 0.25 m and at 0.125 m alike.
@pytest.mark.parametrize("v0, a, j", [(20.0, 2.5, 2.0), (15.0, 1.5, 1.5)])
def test_cruise_then_jerk_limited_stop(v0, a, j):
    assert v0 * j >= a * a
    stop_m = v0 ** 2 / (2 * a) + v0 * a / (2 * j)
    best = solve_min_time(straight(stop_m + 20.0), motion_limits(v0, a, j), start_speed_mps=v0,
                          spacing_m=0.25)
    expected = 20.0 / v0 + v0 / a + a / j
    assert -REL_BELOW <= best.time_s / expected - 1.0 <= REL_TARGET


# A circle after a straight, entered without a spiral: in the middle of the arc the fastest
# speed is where the lateral acceleration v^2 / R meets the binding limit, the comfort cap
# A_lat or the grip mu g. Tolerance 1e-7: constant speed there, so only IPOPT's tolerance.
@pytest.mark.parametrize("mu, expected_lateral", [(0.7, 2.5), (0.2, 0.2 * 9.80665)])
def test_speed_on_a_circle_is_set_by_the_binding_lateral_limit(mu, expected_lateral):
    R = 50.0
    road = Alignment((line(80.0), arc(120.0, R), line(80.0)))
    best = solve_min_time(road, Limits(friction_coefficient=mu), spacing_m=0.5)
    middle = (best.station_m > 120.0) & (best.station_m < 160.0)
    np.testing.assert_allclose(best.speed_mps[middle], math.sqrt(expected_lateral * R),
                               rtol=1e-7)


# Shortt's relation: with the lateral jerk bounded by C the speed inside a clothoid cannot exceed
# (C R L)^(1/3), and the fastest motion approaches it (braking into the spiral undershoots a
# little and recovers; from 20 m in the gap is below 1e-4, measured 8e-6 at that point). The
# longitudinal jerk bound is set high (100 m/s^3, ramps of 25 ms) so that the recovery is not
# slowed by it. The upper bound holds at every station: tolerance 1e-7 for IPOPT.
def test_speed_through_a_clothoid_under_a_lateral_jerk_bound_is_shortts():
    R, L, C = 300.0, 60.0, 0.5
    v_s = (C * R * L) ** (1 / 3)
    road = Alignment((line(100.0), spiral(L, 0.0, 1.0 / R), arc(100.0, R)))
    limits = Limits(max_lateral_jerk_mps3=C, max_speed_mps=1.15 * v_s, max_jerk_mps3=100.0)
    assert math.sqrt(2.5 * R) > 1.15 * v_s          # the circle's comfort speed is higher
    best = solve_min_time(road, limits, start_speed_mps=1.15 * v_s, end_speed_mps=1.15 * v_s,
                          spacing_m=0.5)
    s, v = best.station_m, best.speed_mps
    spiral_nodes = (s >= 100.0) & (s <= 100.0 + L)
    assert np.all(v[spiral_nodes] <= v_s * (1 + 1e-7))
    np.testing.assert_allclose(v[(s >= 120.0) & (s <= 100.0 + L)], v_s, rtol=1e-4)


def test_grid_keeps_joints_and_stops_and_grades_next_to_them():
    road = Alignment((line(10.0), arc(5.3, 40.0), line(30.0)))
    s = build_grid(road, [0.0, 20.0, road.length_m], spacing_m=0.125, rest_spacing_m=1e-3,
                   rest_growth=1.04)
    assert s[0] == 0.0 and s[-1] == road.length_m
    assert np.all(np.isin([10.0, 15.3, 20.0], s))
    steps = np.diff(s)
    assert steps.max() <= 0.125 + 1e-12
    assert steps[0] == pytest.approx(1e-3)                      # graded from the start
    k = int(np.flatnonzero(s == 20.0)[0])
    assert steps[k] == pytest.approx(1e-3, rel=0.05)            # and from the stop
    assert np.all(steps[k + 1:k + 20] / steps[k:k + 19] == pytest.approx(1.04, rel=0.05))
