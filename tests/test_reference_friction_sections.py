"""Friction by section against textbook closed forms, and friction sections and
superelevation given by position against pyproj's geodesics.

Each test names its outside source. Geometries are synthetic (exact curvature) or invented
(a straight geodesic near an arbitrary point), so the only discretisation is the station step;
tolerances say how they follow from it.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from helpers import CLOSED_FORM_RTOL, circle_geometry, geometry_from_curvature
from test_reference_placement import beside, geodesic_route, run

from curvespeed.friction import FrictionSection
from curvespeed.limits import Limits, RouteConstraints, Superelevation
from curvespeed.problem import build_problem
from curvespeed.solvers.envelope import solve_envelope
from curvespeed.verify import verify_profile

G = 9.81  # the value the published formulas below use

# Comfort caps above the grip on purpose, so that friction binds; the library warns about it.
pytestmark = pytest.mark.filterwarnings(
    "ignore:.*grip mu\\*g.*:curvespeed.errors.CurvespeedWarning")

#: Limits under which friction binds everywhere: comfort caps far above any grip here.
GRIP_BOUND = Limits(friction_coefficient=0.8, max_lateral_accel_mps2=50.0,
                    max_accel_mps2=30.0, max_decel_mps2=30.0, max_speed_mps=100.0,
                    max_jerk_mps3=None, gravity_mps2=G)


def envelope(geometry, limits, constraints):
    problem = build_problem(geometry, limits, constraints, jerk_model=False)
    return problem, solve_envelope(problem).b


def inside(problem, section: FrictionSection) -> np.ndarray:
    """Nodes whose steps on both sides lie in ``section`` (away from its boundary nodes)."""
    s = problem.station_m
    return (s >= section.start_m + problem.ds) & (s <= section.end_m - problem.ds)


# --- Steady cornering at each friction: v = sqrt(mu g R) -----------------------------------
# Source: point mass on a circle, a_lat = v^2 / R, side force at most mu N (textbook).
@pytest.mark.parametrize("radius", [60.0, 200.0])
def test_steady_cornering_speed_is_sqrt_mu_g_r_in_each_section(radius):
    geo = circle_geometry(radius)
    length = geo.length_m
    wet = FrictionSection(0.10 * length, 0.35 * length, 0.3)
    gravel = FrictionSection(0.55 * length, 0.75 * length, 0.5, 0.45)
    problem, b = envelope(geo, GRIP_BOUND, RouteConstraints(friction=(wet, gravel)))
    ceiling = problem.lateral_ceiling_b()
    dry = (problem.station_m < wet.start_m - 1.0) | (problem.station_m > gravel.end_m + 1.0)
    dry &= ~((problem.station_m > wet.end_m + 1.0) & (problem.station_m < gravel.start_m - 1.0))
    # the ceiling is solved by bisection to 2^-60 of its bracket: CLOSED_FORM_RTOL is ample
    np.testing.assert_allclose(ceiling[dry], 0.8 * G * radius, rtol=CLOSED_FORM_RTOL)
    np.testing.assert_allclose(ceiling[inside(problem, wet)], 0.3 * G * radius,
                               rtol=CLOSED_FORM_RTOL)
    # the section's own lateral coefficient sets its cornering speed
    np.testing.assert_allclose(ceiling[inside(problem, gravel)], 0.45 * G * radius,
                               rtol=CLOSED_FORM_RTOL)
    # the planned speed holds the wet section's limit all through it (braking before it and
    # speeding up after it happen on the drier road around it)
    np.testing.assert_allclose(np.sqrt(b[inside(problem, wet)]), math.sqrt(0.3 * G * radius),
                               rtol=CLOSED_FORM_RTOL)


def test_section_without_lateral_coefficient_keeps_the_ellipse_shape():
    # route friction 0.8 along, 0.9 across; a section of 0.4 scales both by 0.5: 0.45 across
    # (docs/limits.md), so the cornering limit there is sqrt(0.45 g R) (textbook, as above)
    radius = 100.0
    geo = circle_geometry(radius)
    limits = GRIP_BOUND.replace(lateral_friction_coefficient=0.9)
    section = FrictionSection(50.0, 400.0, 0.4)
    problem, _ = envelope(geo, limits, RouteConstraints(friction=(section,)))
    ceiling = problem.lateral_ceiling_b()
    np.testing.assert_allclose(ceiling[inside(problem, section)], 0.45 * G * radius,
                               rtol=CLOSED_FORM_RTOL)


# --- Superelevation with a section's side friction: v^2/(gR) = (e + f)/(1 - e f) -----------
# Source: AASHTO Green Book (2011), point-mass formula eq. 3-8 (a textbook closed form).
@pytest.mark.parametrize("e, f", [(0.06, 0.15), (0.08, 0.12), (-0.02, 0.20)])
def test_banked_curve_in_a_section_follows_the_point_mass_formula(e, f):
    radius = 150.0
    geo = circle_geometry(radius)
    section = FrictionSection(100.0, 600.0, 0.5, f)
    bank = Superelevation(0.0, geo.length_m, e)
    problem, b = envelope(geo, GRIP_BOUND, RouteConstraints(superelevation=(bank,),
                                                            friction=(section,)))
    expected = G * radius * (e + f) / (1.0 - e * f)
    np.testing.assert_allclose(b[inside(problem, section)], expected, rtol=CLOSED_FORM_RTOL)


# --- Braking distance v^2 / (2 mu g) across a section boundary ------------------------------
# Source: uniformly decelerated motion, d = v^2 / (2 a), with a = mu g on a level straight
# (textbook; REFERENCES.md "Braking from v at constant a").
def test_braking_into_a_wet_section_sums_the_distances_of_both_surfaces():
    ds, length, boundary = 1.0, 600.0, 450.0
    mu_dry, mu_wet, v0 = 0.8, 0.25, 40.0
    geo = geometry_from_curvature(np.zeros(int(length / ds) + 1), ds=ds)
    limits = GRIP_BOUND.replace(friction_coefficient=mu_dry, max_speed_mps=v0)
    wet = FrictionSection(boundary, length, mu_wet)
    problem, b = envelope(geo, limits, RouteConstraints(friction=(wet,), start_speed_mps=v0,
                                                        end_speed_mps=0.0))
    s = problem.station_m
    # The step ending on the boundary node is planned at the wet value (a node takes the lowest
    # friction of the steps touching it, docs/limits.md): the dry surface ends one step early.
    wet_from = boundary - ds
    braking = np.where(s >= wet_from, 2.0 * mu_wet * G * (length - s),
                       2.0 * G * (mu_wet * (length - wet_from) + mu_dry * (wet_from - s)))
    expected = np.minimum(braking, v0 * v0)
    # b is linear per step at constant deceleration, so the closed form holds node by node up
    # to the round-off of a few hundred additions
    np.testing.assert_allclose(b, expected, rtol=CLOSED_FORM_RTOL, atol=1e-9)
    # the dry braking really happens: the vehicle brakes over some 55 m before the boundary
    dry_braking = (b < v0 * v0 * (1 - 1e-9)) & (s < wet_from)
    assert 50.0 < dry_braking.sum() * ds < 60.0


# --- A wet section plans as the whole route at the wet value, away from its ends -------------
# Source: the envelope is the pointwise maximum of feasible profiles (Consolini et al.,
# REFERENCES.md): where it rests on the same ceilings it forgets what lies before and after.
def sinusoid(length_m: float = 3000.0, ds: float = 1.0):
    s = np.arange(int(length_m / ds) + 1) * ds
    return geometry_from_curvature(np.sin(2.0 * math.pi * s / 250.0) / 60.0, ds=ds)


def test_wet_section_matches_the_route_planned_whole_at_the_wet_value():
    geo = sinusoid()
    limits = Limits(friction_coefficient=0.8, max_lateral_accel_mps2=50.0, max_speed_mps=30.0,
                    max_jerk_mps3=None, gravity_mps2=G)
    wet = FrictionSection(1000.0, 2200.0, 0.3)
    _, b_section = envelope(geo, limits, RouteConstraints(friction=(wet,)))
    _, b_whole = envelope(geo, limits.replace(friction_coefficient=0.3), RouteConstraints())
    s = geo.station_m
    # Away from the ends by 300 m: longer than speeding up from rest to the top speed at the
    # 1.5 m/s^2 cap (30^2 / 3 = 300 m) or braking from it (180 m at 2.5 m/s^2), and every 125 m
    # the route has an apex where both profiles rest on the same ceiling.
    middle = (s >= wet.start_m + 300.0) & (s <= wet.end_m - 300.0)
    np.testing.assert_allclose(b_section[middle], b_whole[middle], rtol=CLOSED_FORM_RTOL)
    # ... and the section matters: outside it the dry road is driven faster
    assert b_section[s < 700.0].sum() > 1.5 * b_whole[s < 700.0].sum()


# --- The verifier refuses a profile fine when dry that exceeds a section's friction ----------
# Source: the friction ellipse's lateral axis, v^2/R <= mu g on a level curve (textbook).
def test_verifier_rejects_a_dry_profile_on_a_wet_section():
    geo = sinusoid()
    limits = Limits(friction_coefficient=0.8, max_lateral_accel_mps2=50.0, max_speed_mps=30.0,
                    max_jerk_mps3=None, gravity_mps2=G)
    dry_problem, b_dry = envelope(geo, limits, RouteConstraints())
    assert verify_profile(dry_problem, b_dry).ok
    wet = FrictionSection(1000.0, 1300.0, 0.3)
    wet_problem = build_problem(geo, limits, RouteConstraints(friction=(wet,)),
                                jerk_model=False)
    check = verify_profile(wet_problem, b_dry)
    grip = [v for v in check.violations if v.limit == "friction_ellipse"]
    assert grip and wet.start_m <= grip[0].station_m <= wet.end_m
    # The dry plan rides its whole friction ellipse (semi-axes mu g, level road) somewhere in
    # the section: measured against the wet ellipse, same shape scaled by 0.3/0.8, that tyre
    # force uses 0.8/0.3 of it. Round-off of the per-step closed forms: CLOSED_FORM_RTOL.
    assert grip[0].use == pytest.approx(0.8 / 0.3, rel=CLOSED_FORM_RTOL)
    assert check.use["friction_ellipse"][geo.station_m < 990.0].max() <= 1.0 + 1e-9


# --- Sections and superelevation by position, against pyproj.Geod ---------------------------
# Source: geodesic distances on the WGS84 ellipsoid (pyproj.Geod, Karney's algorithms).
def test_friction_and_superelevation_by_latlon_land_where_the_geodesic_says(tmp_path):
    route = geodesic_route(tmp_path)
    (a_lat, a_lon), (b_lat, b_lon) = beside(300.0, 6.0), beside(520.0, -9.5)
    (c_lat, c_lon), (d_lat, d_lon) = beside(600.0, 2.0), beside(700.0, 4.0)
    limits = tmp_path / "limits.toml"
    limits.write_text(
        "[limits]\n[[friction]]\n"
        f"start_lat = {a_lat!r}\nstart_lon = {a_lon!r}\nend_lat = {b_lat!r}\nend_lon = {b_lon!r}\n"
        "friction_coefficient = 0.35\n[[superelevation]]\n"
        f"start_lat = {c_lat!r}\nstart_lon = {c_lon!r}\nend_lat = {d_lat!r}\nend_lon = {d_lon!r}\n"
        "rate = 0.04\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert result.exit_code == 0, result.output
    got = json.loads(out.with_suffix(".meta.json").read_text())["constraints"]
    (section,), (bank,) = got["friction"], got["superelevation"]
    # Stations: geodesic distance along the route to the feet of the perpendiculars; the local
    # projection stretches lengths by under 1e-4 (curvespeed.geodesy): 1e-4 * 1000 m = 0.1 m.
    assert section["start_m"] == pytest.approx(300.0, abs=0.1)
    assert section["end_m"] == pytest.approx(520.0, abs=0.1)
    assert bank["start_m"] == pytest.approx(600.0, abs=0.1)
    assert bank["end_m"] == pytest.approx(700.0, abs=0.1)
    # Distance: the larger end's geodesic offset, by construction; plane foot vs geodesic foot
    # differ by the projection scale (1e-4 * 10 m) and the fit (well under 1 cm): 1 cm.
    assert section["snap_distance_m"] == pytest.approx(9.5, abs=0.01)
    assert bank["snap_distance_m"] == pytest.approx(4.0, abs=0.01)
    assert section["friction_coefficient"] == 0.35
    assert any(line.startswith("friction") and "9.50 m from the route" in line
               for line in result.output.splitlines())
