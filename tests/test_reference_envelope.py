"""Reference tests of the forward-backward envelope against textbook closed forms and AASHTO.

Each test names its outside source. Geometries are synthetic (exact curvature), so the only
discretisation is the station step ``ds``; tolerances say how they follow from it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.limits import Limits, RouteConstraints, Stop, Superelevation
from curvespeed.problem import build_problem
from curvespeed.solvers.envelope import solve_envelope

from helpers import CLOSED_FORM_RTOL, circle_geometry, geometry_from_curvature, \
    straight_curve_straight

G = 9.81  # the value the published formulas below use

# Several cases set a comfort cap above the grip on purpose, so that friction binds; the
# library warns about that, which is expected here.
pytestmark = pytest.mark.filterwarnings("ignore:.*grip mu\\*g.*:curvespeed.errors.CurvespeedWarning")


def plan_b(geometry, limits, constraints=RouteConstraints()):
    # the envelope's problem: no jerk bound (the convex solver's tests cover that)
    problem = build_problem(geometry, limits, constraints, jerk_model=False)
    return problem, solve_envelope(problem).b


# --- Constant-radius circle: v = min(v_max, sqrt(a_lat R), sqrt(mu g R)) -------------------
# Source: Newton's second law for a point mass on a circle, a_lat = v^2 / R.
@pytest.mark.parametrize("radius, a_lat, mu, v_max", [
    (100.0, 2.5, 0.8, 40.0),    # comfort binds: sqrt(250) = 15.81 m/s
    (100.0, 9.0, 0.3, 40.0),    # grip binds: sqrt(0.3 * 9.81 * 100) = 17.16 m/s
    (400.0, 3.0, 0.8, 20.0),    # top speed binds
    (25.0, 2.0, 0.9, 30.0),     # tight turn, comfort binds: sqrt(50)
])
def test_circle_speed_is_the_smallest_of_the_three_limits(radius, a_lat, mu, v_max):
    limits = Limits(friction_coefficient=mu, max_lateral_accel_mps2=a_lat, max_speed_mps=v_max,
                    gravity_mps2=G)
    _, b = plan_b(circle_geometry(radius), limits)
    expected = min(v_max, math.sqrt(a_lat * radius), math.sqrt(mu * G * radius))
    # exact per node: every node has the same curvature, the ceiling is solved to 2^-60
    np.testing.assert_allclose(np.sqrt(b), expected, rtol=CLOSED_FORM_RTOL)


# --- Superelevation: v^2/(gR) = (e + f)/(1 - e f) -------------------------------------------
# Source: point mass on a banked curve (AASHTO Green Book 2011, eq. 3-8, and any dynamics text).
@pytest.mark.parametrize("e, f, radius", [(0.06, 0.15, 150.0), (0.08, 0.14, 229.1),
                                          (-0.02, 0.20, 80.0)])
def test_superelevation_adds_lateral_capacity(e, f, radius):
    geo = circle_geometry(radius)
    limits = Limits(friction_coefficient=0.9, lateral_friction_coefficient=f,
                    max_lateral_accel_mps2=50.0, max_speed_mps=100.0, gravity_mps2=G)
    sup = RouteConstraints(superelevation=(Superelevation(0.0, geo.length_m, e),))
    _, b = plan_b(geo, limits, sup)
    expected = math.sqrt(G * radius * (e + f) / (1 - e * f))
    np.testing.assert_allclose(np.sqrt(b), expected, rtol=CLOSED_FORM_RTOL)


# AASHTO Green Book 2011, Table 3-7 (simplified formula R_min = V^2 / (127 (e + f)), values
# from memory, listed in REFERENCES.md): 80 km/h, e = 8 %, f = 0.14 -> R_min = 229.1 m;
# 100 km/h, e = 6 %, f = 0.12 -> 437.4 m; 120 km/h, e = 4 %, f = 0.09 -> 872.2 m.
# The simplified formula drops the (1 - e f) term, so the exact speed on R_min is higher by
# 1/sqrt(1 - e f) (0.4-0.6 %); undo that factor and compare within 0.5 %, the rounding the
# reference tables carry (127 stands for 3.6^2 g = 127.1 with g = 9.81).
@pytest.mark.parametrize("v_kmh, e, f, r_min", [(80, 0.08, 0.14, 229.1), (100, 0.06, 0.12, 437.4),
                                                (120, 0.04, 0.09, 872.2)])
def test_aashto_minimum_radius_gives_the_design_speed(v_kmh, e, f, r_min):
    geo = circle_geometry(r_min, ds=2.0)
    limits = Limits(friction_coefficient=0.9, lateral_friction_coefficient=f,
                    max_lateral_accel_mps2=50.0, max_speed_mps=100.0, gravity_mps2=G)
    _, b = plan_b(geo, limits, RouteConstraints(superelevation=(Superelevation(0, geo.length_m, e),)))
    v_simplified_kmh = math.sqrt(b[0] * (1 - e * f)) * 3.6
    assert v_simplified_kmh == pytest.approx(v_kmh, rel=5e-3)


# --- Stopping distance ----------------------------------------------------------------------
# Source: uniform deceleration, d = v^2 / (2 a); AASHTO stopping-sight-distance deceleration
# 3.4 m/s^2 (Green Book 2011, section 3.2.2): from 100 km/h the braking part is 113.5 m.
def stop_distance(geometry, limits, start_speed, stop_at):
    problem, b = plan_b(geometry, limits,
                        RouteConstraints(stops=(Stop(stop_at),), start_speed_mps=start_speed))
    v = np.sqrt(b)
    k_stop = int(round(stop_at / geometry.spacing_m))
    # braking starts at the last node before the stop where the speed is still the start speed
    braking = np.flatnonzero(v[:k_stop] >= start_speed * (1 - 1e-12))
    return geometry.station_m[k_stop] - geometry.station_m[braking[-1]], v


def test_stopping_distance_from_100_kmh_at_aashto_deceleration():
    v0 = 100 / 3.6
    geo = geometry_from_curvature(np.zeros(1001), ds=0.5)
    limits = Limits(max_decel_mps2=3.4, max_speed_mps=v0, friction_coefficient=0.9, gravity_mps2=G)
    dist, v = stop_distance(geo, limits, v0, stop_at=400.0)
    assert v0 ** 2 / (2 * 3.4) == pytest.approx(113.5, abs=0.05)
    # the braking onset is found on the grid: within one step of the exact distance
    assert dist == pytest.approx(v0 ** 2 / (2 * 3.4), abs=geo.spacing_m)
    # and the braking curve itself is exact at the nodes: v^2 = 2 a (s_stop - s)
    s = geo.station_m
    ramp = (s > 400 - 100) & (s <= 400)
    np.testing.assert_allclose(v[ramp] ** 2, 2 * 3.4 * (400 - s[ramp]), rtol=1e-9, atol=1e-9)


# Source: AASHTO braking distance on a grade, d = V^2 / (254 (a/g + G)) with V in km/h
# (Green Book 2011, eq. 3-3). Here braking is friction-limited (mu = a/g); the exact point-mass
# deceleration is g (mu cos(gamma) + sin(gamma)) with tan(gamma) = G. The published form takes
# sin ~ tan, cos ~ 1 and 254 for 2 * 3.6^2 * g = 254.3, together within 0.5 % for |G| <= 6 %.
@pytest.mark.parametrize("grade", [0.06, 0.03, -0.03, -0.06])
def test_braking_distance_on_a_grade(grade):
    v_kmh = 100.0
    v0 = v_kmh / 3.6
    a = 3.4
    geo = geometry_from_curvature(np.zeros(1201), ds=0.5, grade=grade)
    limits = Limits(friction_coefficient=a / G, max_decel_mps2=20.0, max_accel_mps2=20.0,
                    max_speed_mps=v0, gravity_mps2=G)
    dist, v = stop_distance(geo, limits, v0, stop_at=500.0)
    gamma = math.atan(grade)
    exact = v0 ** 2 / (2 * G * (a / G * math.cos(gamma) + math.sin(gamma)))
    assert dist == pytest.approx(exact, abs=geo.spacing_m)
    assert dist == pytest.approx(v_kmh ** 2 / (254 * (a / G + grade)), rel=5e-3, abs=geo.spacing_m)


# --- Curve approached from a long straight ----------------------------------------------------
# Source: uniform deceleration: v(s) = sqrt(v_c^2 + 2 a (s_c - s)) meets the cruise speed where
# braking starts. On the grid the step entering the curve node carries no deceleration (that
# node's lateral demand is at the comfort limit, leaving no room in the comfort ellipse), so the
# braking parabola ends one step before the curve: s_c -> s_c - ds.
def test_braking_for_a_curve_starts_where_the_parabola_meets_cruise_speed():
    ds, radius, a_dec, a_lat, v_cruise = 1.0, 100.0, 2.5, 2.5, 30.0
    geo = straight_curve_straight(1000.0, radius, 300.0, 500.0, ds=ds)
    limits = Limits(max_decel_mps2=a_dec, max_lateral_accel_mps2=a_lat, max_speed_mps=v_cruise,
                    friction_coefficient=0.9, gravity_mps2=G)
    _, b = plan_b(geo, limits)
    v = np.sqrt(b)
    s = geo.station_m
    v_curve = math.sqrt(a_lat * radius)
    s_curve = 1000.0
    parabola = np.sqrt(v_curve ** 2 + 2 * a_dec * np.clip(s_curve - ds - s, 0, None))
    approach = (s >= 400.0) & (s < s_curve)
    np.testing.assert_allclose(v[approach], np.minimum(v_cruise, parabola[approach]), rtol=1e-9)
    s_brake = s_curve - ds - (v_cruise ** 2 - v_curve ** 2) / (2 * a_dec)
    first_braking_step = np.flatnonzero(np.diff(v[:int(s_curve)]) < 0)[0]
    assert s[first_braking_step] == pytest.approx(s_brake, abs=ds)


# --- Power-limited acceleration: v^3 = v0^3 + 3 (P/m) s ---------------------------------------
# Source: constant tractive power, m v dv/ds = P / v (textbook vehicle dynamics). The step
# model (constant acceleration per step, power checked at both nodes) lags the continuous
# solution by at most one step, so compare within the speed change of one step.
def test_power_limited_acceleration_follows_the_cube_law():
    v0, p_per_m = 10.0, 10.0
    geo = geometry_from_curvature(np.zeros(2001), ds=0.5)
    limits = Limits(max_power_w=p_per_m * 1500.0, mass_kg=1500.0, max_accel_mps2=5.0,
                    friction_coefficient=0.9, max_speed_mps=60.0, gravity_mps2=G)
    problem = build_problem(geo, limits, RouteConstraints(start_speed_mps=v0, end_speed_mps=None),
                            jerk_model=False)
    b = solve_envelope(problem).b
    s = geo.station_m
    region = s <= 600.0   # before braking for the end of the route
    exact = np.cbrt(v0 ** 3 + 3 * p_per_m * s[region])
    dv_step = p_per_m / exact ** 2 * geo.spacing_m   # dv/ds * ds
    assert np.all(np.abs(np.sqrt(b[region]) - exact) <= dv_step + 1e-9)


# --- Friction ellipse and comfort ellipse never exceeded ---------------------------------------
# Certificate (no outside value): with a_long and a_lat the accelerations at every node, the
# comfort ellipse (a_long / a_long,max)^2 + (a_lat / a_lat,max)^2 <= 1 holds up to round-off.
def test_no_node_leaves_the_comfort_ellipse_on_a_winding_road():
    s = np.arange(0, 3000.0, 1.0)
    kappa = 0.02 * np.sin(2 * np.pi * s / 400.0) + 0.015 * np.sin(2 * np.pi * s / 170.0)
    geo = geometry_from_curvature(kappa, ds=1.0)
    limits = Limits(gravity_mps2=G)
    _, b = plan_b(geo, limits)
    a = np.diff(b) / 2.0
    lat = np.abs(kappa) * b
    for k_lat in (lat[:-1], lat[1:]):   # each step at both of its nodes
        cap = np.where(a >= 0, limits.max_accel_mps2, limits.max_decel_mps2)
        use = (a / cap) ** 2 + (k_lat / limits.max_lateral_accel_mps2) ** 2
        assert use.max() <= 1 + 1e-9
    # the ellipse is actually used: somewhere both components are substantial
    both = (np.abs(a[:-1]) > 0.3) & (lat[1:-1] > 1.0)
    assert both.any()


# --- Closed loop: periodic profile -------------------------------------------------------------
# Certificate: on a loop the speed at the seam is continuous and the profile equals the one
# found when the loop is started at another station (the start point is arbitrary).
def test_closed_loop_profile_is_periodic_and_start_independent():
    n = 2000
    s = np.arange(n + 1) * 1.0
    kappa = 0.012 * np.maximum(np.sin(2 * np.pi * s / n * 3), 0) + 0.004
    geo = geometry_from_curvature(kappa, ds=1.0, closed=True)
    limits = Limits(gravity_mps2=G)
    _, b = plan_b(geo, limits)
    assert b[0] == b[-1]
    shift = 777
    rolled = np.concatenate((kappa[shift:-1], kappa[:shift + 1]))
    _, b2 = plan_b(geometry_from_curvature(rolled, ds=1.0, closed=True), limits)
    np.testing.assert_allclose(np.concatenate((b[shift:-1], b[:shift + 1])), b2, rtol=1e-9,
                               atol=1e-9)
