"""Friction sections: properties that must hold whatever the route.

* without sections every node plans with the route's coefficients exactly;
* a node takes the lowest friction of the steps touching it; overlapping sections: the lowest
  wins; a section without its own lateral coefficient keeps the ellipse shape, scaled;
* every solver (envelope, convex) respects a section and passes the verifier; ``check`` judges a
  curve spanning sections at the lowest friction;
* the Replanner places stops and sections given by position as ``plan`` does;
* infeasibility caused by a section says so: the section, the stop, the friction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from helpers import circle_geometry, geometry_from_curvature, straight_curve_straight

from curvespeed.errors import InfeasibleError, LimitsError
from curvespeed.friction import FrictionPosition, FrictionSection, node_friction
from curvespeed.limits import Limits, RouteConstraints, Stop, StopPosition, Superelevation
from curvespeed.placement import place_positions
from curvespeed.planner import plan_profile
from curvespeed.problem import build_problem
from curvespeed.solvers import SolverKind

pytestmark = pytest.mark.filterwarnings(
    "ignore:.*grip mu\\*g.*:curvespeed.errors.CurvespeedWarning")

ROUTE = Limits(friction_coefficient=0.8, lateral_friction_coefficient=0.9)


def test_without_sections_the_nodes_hold_the_route_scalars_exactly():
    geo = straight_curve_straight(100.0, 80.0, 60.0, 100.0)
    problem = build_problem(geo, ROUTE, RouteConstraints())
    assert np.all(problem.mu_long == ROUTE.mu_long)     # the same float, not a product
    assert np.all(problem.mu_lat == ROUTE.mu_lat)
    assert np.all(problem.friction_index == -1)


def test_a_node_takes_the_lowest_friction_of_the_steps_touching_it():
    # ds = 2 m; a section from 5 to 9 m overlaps the steps 4-6 and 8-10 only in part
    mu, lat, index = node_friction(ROUTE, (FrictionSection(5.0, 9.0, 0.4),), 2.0, 8, False)
    assert mu.tolist() == [0.8, 0.8, 0.4, 0.4, 0.4, 0.4, 0.8, 0.8]
    assert lat == pytest.approx([0.9, 0.9, 0.45, 0.45, 0.45, 0.45, 0.9, 0.9], rel=1e-15)
    assert index.tolist() == [-1, -1, 0, 0, 0, 0, -1, -1]
    # a section on node stations touches exactly its own steps
    mu, _, _ = node_friction(ROUTE, (FrictionSection(4.0, 8.0, 0.4),), 2.0, 8, False)
    assert mu.tolist() == [0.8, 0.8, 0.4, 0.4, 0.4, 0.8, 0.8, 0.8]


def test_overlaps_the_lowest_wins_and_grip_is_raised_only_over_whole_steps():
    sections = (FrictionSection(0.0, 10.0, 0.5, 0.7), FrictionSection(6.0, 14.0, 0.3, 0.8))
    mu, lat, index = node_friction(ROUTE, sections, 2.0, 10, False)
    # along: 0.5 up to the overlap, 0.3 from it (node 3 touches step 6-8 of both), the route's
    # 0.8 from node 8 (step 16-18 is dry)
    assert mu.tolist() == [0.5, 0.5, 0.5, 0.3, 0.3, 0.3, 0.3, 0.3, 0.8, 0.8]
    # across, each section's own coefficient, the lowest where they overlap
    assert lat.tolist() == [0.7, 0.7, 0.7, 0.7, 0.7, 0.7, 0.8, 0.8, 0.9, 0.9]
    assert index.tolist() == [0, 0, 0, 1, 1, 1, 1, 1, -1, -1]
    # a high-grip section from 15 to 21 m covers the steps 16-18 and 18-20 whole, 14-16 and
    # 20-22 in part (those keep the route's 0.8): only node 9, between two whole steps, plans
    # with 1.2 (across: the route's 0.9 scaled by 1.2/0.8)
    mu, lat, index = node_friction(ROUTE, (FrictionSection(15.0, 21.0, 1.2),), 2.0, 12, False)
    assert mu.tolist() == [0.8] * 9 + [1.2, 0.8, 0.8]
    assert lat[9] == pytest.approx(1.35, rel=1e-15) and index[9] == 0
    assert index[8] == -1 and index[10] == -1


def test_a_loop_seam_takes_the_lower_side():
    mu, _, index = node_friction(ROUTE, (FrictionSection(18.0, 20.0, 0.2),), 2.0, 11, True)
    assert mu[0] == mu[-1] == 0.2 and index[0] == index[-1] == 0


@pytest.mark.parametrize("solver", [SolverKind.ENVELOPE, SolverKind.CONVEX])
def test_every_solver_respects_a_wet_section_and_passes_the_verifier(solver):
    geo = circle_geometry(60.0)
    jerk = 2.0 if solver is SolverKind.CONVEX else None     # the envelope bounds no jerk
    limits = Limits(max_lateral_accel_mps2=8.0, max_jerk_mps3=jerk)
    wet = FrictionSection(100.0, 250.0, 0.25)
    profile = plan_profile(geo, limits, RouteConstraints(friction=(wet,)), solver)
    s = geo.station_m
    in_wet = (s >= wet.start_m) & (s <= wet.end_m)
    limit = math.sqrt(0.25 * limits.gravity_mps2 * 60.0)   # point mass on a circle
    # the verifier ran inside plan_profile (tolerance 1e-4 of a limit for the convex solver,
    # so speeds are within 0.5e-4 of the limit)
    assert profile.speed_mps[in_wet].max() <= limit * (1.0 + 1e-4)
    assert profile.speed_mps[~in_wet].max() > 1.3 * limit  # the dry part is faster
    assert "lateral_grip" in set(profile.binding[in_wet])


def test_check_judges_a_curve_spanning_sections_at_the_lowest_friction():
    from curvespeed.check import check_speeds

    geo = straight_curve_straight(200.0, 100.0, 120.0, 200.0)
    limits = Limits(friction_coefficient=0.8)
    half = FrictionSection(260.0, 400.0, 0.3, 0.25)
    v = np.full(geo.n_nodes, 12.0)
    report = check_speeds(geo, limits, RouteConstraints(friction=(half,)), v)
    (curve,) = report.curves
    # side friction demand at 12 m/s on R = 100 m, level: v^2/(gR) (AASHTO point mass, e = 0)
    f = 144.0 / (limits.gravity_mps2 * 100.0)
    assert curve.side_friction_demand == pytest.approx(f, rel=1e-9)
    assert curve.friction_margin == pytest.approx(0.25 - f, rel=1e-9)
    dry = check_speeds(geo, limits, RouteConstraints(), v).curves[0]
    assert dry.friction_margin == pytest.approx(0.8 - f, rel=1e-9)


def test_replanner_places_positions_as_plan_does():
    from curvespeed.replan import Replanner

    geo = straight_curve_straight(150.0, 90.0, 80.0, 250.0)
    k_stop, k0, k1 = 420, 180, 260
    given = RouteConstraints(
        stop_positions=(StopPosition(x_m=float(geo.x_m[k_stop]) + 0.7,
                                     y_m=float(geo.y_m[k_stop]) - 3.0, name="gate"),),
        friction_positions=(FrictionPosition((float(geo.x_m[k0]), float(geo.y_m[k0]) + 2.0),
                                             (float(geo.x_m[k1]), float(geo.y_m[k1])), 0.3),))
    limits = Limits(max_jerk_mps3=2.0)
    replanner = Replanner(geo, limits, given, horizon_m=120.0)
    placed = place_positions(given, geo)
    assert replanner.constraints == placed
    assert replanner.constraints.stops[0].name == "gate"
    # 2 m off the arc where it heads about 0.33 rad from the x axis: the foot of the
    # perpendicular moves by about 2 sin(0.33) = 0.65 m along the route
    assert replanner.constraints.friction[0].start_m == pytest.approx(k0, abs=1.0)
    window = replanner.replan(float(k0 - 60), 10.0)
    whole = plan_profile(geo, limits, given)
    # the window plans with the section: never faster than the whole route's plan's envelope
    # allows inside it, and the whole plan (placed the same way) stops at the stop
    assert whole.speed_mps[int(round(placed.stops[0].station_m))] == 0.0
    s = window.station_m
    wet = (s >= k0) & (s <= k1)
    assert wet.any()
    lim_v = math.sqrt(0.3 * limits.gravity_mps2 * 90.0)
    assert window.speed_mps[wet].max() <= lim_v * (1.0 + 1e-4)


def test_a_stop_in_a_slippery_section_out_of_reach_names_section_stop_and_friction():
    geo = geometry_from_curvature(np.zeros(401), ds=1.0)
    section = FrictionSection(40.0, 200.0, 0.1, origin="limits.toml [[friction]] #1")
    stop = Stop(100.0, origin="limits.toml [[stop]] #1", name="gate")
    constraints = RouteConstraints(stops=(stop,), start_speed_mps=20.0, friction=(section,))
    for solver in (SolverKind.ENVELOPE, SolverKind.CONVEX):
        with pytest.raises(InfeasibleError) as err:
            plan_profile(geo, Limits(), constraints, solver)
        text = str(err.value)
        assert "the stop 'gate' at station 100 m" in text
        assert "friction 0.1 of the friction section 40..200 m (limits.toml [[friction]] #1)" \
            in text
        assert "jerk bound" not in text
    # without the section the same stop is within reach: the section is the cause
    plan_profile(geo, Limits(max_jerk_mps3=None),
                 RouteConstraints(stops=(stop,), start_speed_mps=20.0), SolverKind.ENVELOPE)


def test_a_cross_slope_too_steep_for_a_section_names_it():
    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    constraints = RouteConstraints(
        superelevation=(Superelevation(0.0, 300.0, 0.08, origin="--superelevation 0:300:0.08"),),
        friction=(FrictionSection(100.0, 200.0, 0.05, origin="--friction-section 100:200:0.05"),))
    with pytest.raises(LimitsError, match=r"superelevation 0\.08 \(--superelevation 0:300:0\.08"
                       r"\) at station 100\.0 m exceeds the lateral friction coefficient 0\.05 "
                       r"of the friction section 100\.\.200 m"):
        build_problem(geo, Limits(), constraints)


@pytest.mark.parametrize("section, message", [
    (FrictionSection(50.0, 40.0, 0.3), "end must be after start"),
    (FrictionSection(0.0, 40.0, 0.0), "outside 0.01..2"),
    (FrictionSection(0.0, 40.0, 0.3, 2.5), "lateral_friction_coefficient = 2.5"),
    (FrictionSection(400.0, 500.0, 0.3), "lies outside the route"),
])
def test_bad_sections_are_refused(section, message):
    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    with pytest.raises(LimitsError, match=message.replace(".", r"\.")):
        build_problem(geo, Limits(), RouteConstraints(friction=(section,)))


def test_gg_diagram_draws_the_lowest_sections_ellipse():
    from curvespeed.plots import plot_gg

    geo = circle_geometry(60.0)
    limits = Limits(max_jerk_mps3=None, lateral_friction_coefficient=0.9)
    sections = (FrictionSection(100.0, 200.0, 0.35), FrictionSection(250.0, 300.0, 0.5))
    profile = plan_profile(geo, limits, RouteConstraints(friction=sections))
    artists = plot_gg(profile, limits, friction_sections=sections)
    x, y = artists.section_friction.get_data()
    g = limits.gravity_mps2
    # semi-axes: the lowest section's mu g along, its scaled lateral mu (0.9 * 0.35 / 0.7) g
    # across; the polyline samples the ellipse, so its extremes are the axes to round-off
    assert np.max(np.abs(y)) == pytest.approx(0.35 * g, rel=1e-6)
    assert np.max(np.abs(x)) == pytest.approx(0.45 * g, rel=1e-6)
    assert "lowest section mu 0.35" in artists.section_friction.get_label()
    assert plot_gg(profile, limits).section_friction is None


def test_a_section_running_past_the_end_is_warned_about_and_applies_on_the_route():
    from curvespeed.errors import CurvespeedWarning

    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    with pytest.warns(CurvespeedWarning, match=r"runs past the route .* over 100\.\.300\.0 m"):
        problem = build_problem(geo, Limits(), RouteConstraints(
            friction=(FrictionSection(100.0, 500.0, 0.3),)))
    assert np.all(problem.mu_long[100:] == 0.3) and np.all(problem.mu_long[:99] == 0.7)


def test_a_section_over_the_whole_route_plans_as_the_routes_own_friction():
    from curvespeed.solvers.convex import solve_convex

    geo = straight_curve_straight(60.0, 40.0, 50.0, 60.0)
    limits = Limits(max_lateral_accel_mps2=6.0, max_jerk_mps3=2.0)
    whole = build_problem(geo, limits.replace(friction_coefficient=0.3), RouteConstraints())
    section = build_problem(geo, limits, RouteConstraints(
        friction=(FrictionSection(0.0, geo.length_m, 0.3),)))
    # the same per-node coefficients (0.7 * 0.3 / 0.7 across is 0.3 to round-off), so the same
    # arithmetic in every solver: the same squared speeds to round-off
    np.testing.assert_allclose(section.mu_lat, whole.mu_lat, rtol=1e-15)
    np.testing.assert_allclose(solve_convex(section).b, solve_convex(whole).b, rtol=1e-12)
    from curvespeed.solvers.envelope import solve_envelope

    np.testing.assert_allclose(solve_envelope(section).b, solve_envelope(whole).b, rtol=1e-12)


def test_cvxpy_reference_respects_a_section_as_the_convex_solver_does():
    from curvespeed.profile import derive
    from curvespeed.solvers.convex import solve_convex
    from curvespeed.solvers.reference_cvxpy import solve_reference
    from curvespeed.verify import verify_profile

    geo = straight_curve_straight(60.0, 40.0, 50.0, 60.0)
    limits = Limits(max_lateral_accel_mps2=6.0, max_jerk_mps3=2.0)
    wet = FrictionSection(50.0, 120.0, 0.3)
    problem = build_problem(geo, limits, RouteConstraints(friction=(wet,)))
    fast, ref = solve_convex(problem), solve_reference(problem)
    t_fast, t_ref = (derive(problem, b)["time_s"][-1] for b in (fast.b, ref.b))
    # as in test_certificate_convex: both stop on a gain threshold and the fast path uses chords
    # of the ellipses, 3e-4 of the time (measured 2.1e-4 here, the same as with the route's
    # friction 0.3 as a scalar)
    assert t_fast == pytest.approx(t_ref, rel=3e-4)
    assert verify_profile(problem, ref.b, tolerance=1e-4).ok
    s = geo.station_m
    arc = (s >= 60.0) & (s <= 110.0)
    limit = math.sqrt(0.3 * limits.gravity_mps2 * 40.0)     # point mass on the arc
    for b in (fast.b, ref.b):       # both ride the wet limit on the arc, 1e-4 of the use
        assert np.sqrt(b[arc]).max() == pytest.approx(limit, rel=1e-4)


def test_a_start_speed_above_a_wet_curves_limit_names_the_section():
    geo = geometry_from_curvature(np.full(201, 1.0 / 50.0))
    wet = FrictionSection(0.0, 100.0, 0.2, origin="--friction-section 0:100:0.2")
    with pytest.raises(InfeasibleError, match=r"start speed 15\.00 m/s exceeds .*\(9\.90 m/s, set "
                       r"by a curve, R 50 m on friction 0\.2 across the path of the "
                       r"friction section 0\.\.100 m \(--friction-section 0:100:0\.2\)"):
        # sqrt(0.2 g 50) = 9.90 m/s on the arc (point mass on a circle)
        plan_profile(geo, Limits(max_lateral_accel_mps2=6.0, max_jerk_mps3=None),
                     RouteConstraints(friction=(wet,), start_speed_mps=15.0))


def test_a_replanned_vehicle_too_fast_for_a_wet_curve_is_told_the_section():
    from curvespeed.replan import Replanner

    geo = straight_curve_straight(200.0, 40.0, 80.0, 200.0)
    wet = FrictionSection(100.0, 300.0, 0.15, origin="limits.toml [[friction]] #1")
    replanner = Replanner(geo, Limits(max_lateral_accel_mps2=6.0), RouteConstraints(
        friction=(wet,)), horizon_m=150.0)
    with pytest.raises(InfeasibleError) as err:
        replanner.replan(150.0, 20.0)
    text = str(err.value)
    assert "too fast" in text and "a curve" in text
    assert "friction 0.15 of the friction section 100..300 m (limits.toml [[friction]] #1)" \
        in text


def test_check_gives_a_curve_spanning_sections_its_lowest_limit_speed():
    from curvespeed.check import check_speeds

    # a curve of radius 100 m, then 110 m; the wider part is wet: sqrt(mu g R) there is
    # sqrt(0.2 g 110) = 14.7 m/s, below the dry tightest part's comfort limit sqrt(2.5 * 100)
    kappa = np.concatenate((np.zeros(100), np.full(60, 0.01), np.full(60, 1 / 110.0),
                            np.zeros(101)))
    geo = geometry_from_curvature(kappa)
    limits = Limits(max_jerk_mps3=None)
    wet = FrictionSection(160.0, 220.0, 0.2)
    report = check_speeds(geo, limits, RouteConstraints(friction=(wet,)),
                          np.full(geo.n_nodes, 10.0))
    (curve,) = report.curves
    assert curve.tightest_station_m < 160.0
    expected = math.sqrt(0.2 * limits.gravity_mps2 * 110.0)   # point mass on a circle
    # the ceiling is bisected to 2^-60 of its bracket; the curvature is exact here
    assert curve.limit_speed_mps == pytest.approx(expected, rel=1e-9)
    dry = check_speeds(geo, limits, RouteConstraints(), np.full(geo.n_nodes, 10.0)).curves[0]
    assert dry.limit_speed_mps == pytest.approx(math.sqrt(2.5 * 100.0), rel=1e-9)


def _surface_at(points, sections, route: float) -> np.ndarray:
    """The friction of the road at each point: the lowest of the sections containing it, the
    route's where none does (the reading the planner must never exceed)."""
    out = np.full(points.size, np.inf)
    for sec in sections:
        inside = (points >= sec.start_m) & (points <= sec.end_m)
        out = np.where(inside, np.minimum(out, sec.friction_coefficient), out)
    return np.where(np.isinf(out), route, out)


# Stations to the millimetre: the planner reads stations within 1e-9 of a step of a node as
# on it (round-off of stations computed from positions), far below a millimetre.
@settings(derandomize=True, max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 38000), st.integers(100, 20000), st.floats(0.05, 1.5)),
                min_size=1, max_size=4),
       st.floats(0.5, 3.0), st.booleans())
def test_no_node_plans_with_more_grip_than_its_steps_have_anywhere(raw, ds, closed):
    n = int(40.0 // ds) + 1
    sections = tuple(FrictionSection(a / 1000.0, (a + w) / 1000.0, mu) for a, w, mu in raw)
    mu, _, index = node_friction(ROUTE, sections, ds, n, closed)
    # sample the inside of each step densely (39 points), and each node itself
    t = np.linspace(0.0, 1.0, 41)[1:-1]
    step_low = np.array([_surface_at((k + t) * ds, sections, ROUTE.mu_long).min()
                         for k in range(n - 1)])
    before = np.concatenate(([step_low[-1] if closed else np.inf], step_low))
    after = np.concatenate((step_low, [step_low[0] if closed else np.inf]))
    at_node = _surface_at(np.arange(n) * ds, sections, ROUTE.mu_long)
    if closed:                  # the last node is the first
        at_node[0] = at_node[-1] = min(at_node[0], at_node[-1])
    # conservative: never above the lowest friction anywhere on the steps touching the node
    assert np.all(mu <= np.minimum(np.minimum(before, after), at_node))
    # and no lower than the lowest coefficient among the route and the sections there
    assert np.all(mu >= min([ROUTE.mu_long] + [s.friction_coefficient for s in sections]))
    # the index names a section with exactly the node's coefficient, or the route's
    named = np.array([sections[i].friction_coefficient if i >= 0 else ROUTE.mu_long
                      for i in index])
    assert np.all(named == mu)
