"""Certificate tests for build_geometry: properties that hold whatever the route.

Hypothesis draws random but plausible routes (seeded: derandomize=True), and each property is
checked against a fact that does not depend on the fitted answer:
- the node convention of curvespeed.geometry (uniform stations, seam rows on loops);
- a chord is never longer than the arc it spans (the straight line is shortest);
- Schur's comparison theorem: an arc of length ds whose curvature never exceeds K has a chord of
  at least 2 sin(K ds / 2) / K (A. Schur, 1921; do Carmo, Differential Geometry of Curves and
  Surfaces, section 5-7, from memory);
- the tangent at either end of an arc of length ds and curvature at most K deviates from the
  chord's direction by at most K ds (the tangent turns by at most K ds along the arc);
- Hopf's Umlaufsatz: a simple closed curve turns by +-2 pi;
- a length bound from the fit's own residual budget (see test_open_route_properties).
Errors and warnings for bad input are checked at the end.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from curvespeed.errors import CurvespeedWarning, RouteGeometryError
from curvespeed.geometry import build_geometry, residual_target
from curvespeed.route import make_route

PROFILE = settings(derandomize=True, max_examples=40, deadline=None)

#: Relative round-off allowed on station arithmetic (k * ds summed over up to ~1e4 nodes).
STATION_RTOL = 1e-12
#: The arc-length inversion converges to ~1e-11 of a knot interval (see geometry.py); the same
#: station evaluated through two different node grids agrees to ~1e-9 m on these routes' scale.
SAME_POINT_ATOL_M = 1e-7


@st.composite
def plausible_polylines(draw):
    """Open polylines a road could follow: steps 1-10 m changing smoothly, curvature bounded.

    Each turn is at most kappa_max times the mean of the two chords it joins (the turn a path of
    curvature kappa_max makes over that distance), and never more than 30 degrees.
    """
    n = draw(st.integers(min_value=5, max_value=50))
    rng = np.random.default_rng(draw(st.integers(min_value=0, max_value=2**32 - 1)))
    steps = np.clip(rng.uniform(1.0, 5.0) * np.exp(np.cumsum(rng.uniform(-0.4, 0.4, n - 1))),
                    1.0, 10.0)
    kappa_max = draw(st.sampled_from([0.005, 0.02, 0.1]))
    limit = np.minimum(kappa_max * 0.5 * (steps[1:] + steps[:-1]), math.radians(30.0))
    turns = rng.uniform(-1.0, 1.0, n - 2) * limit
    heading = rng.uniform(-math.pi, math.pi) + np.concatenate(([0.0], np.cumsum(turns)))
    x = np.concatenate(([0.0], np.cumsum(steps * np.cos(heading))))
    y = np.concatenate(([0.0], np.cumsum(steps * np.sin(heading))))
    noise = draw(st.sampled_from([0.01, 0.05, 0.2]))
    spacing = draw(st.sampled_from([0.5, 1.0, 2.5]))
    return x, y, noise, spacing


def check_node_convention(geo, spacing_requested):
    s = geo.station_m
    n = s.size - 1
    assert n >= 1
    for arr in (geo.x_m, geo.y_m, geo.heading_rad, geo.curvature_1pm):
        assert arr.shape == s.shape
        assert np.all(np.isfinite(arr))
    assert s[0] == 0.0 and s[-1] == geo.length_m
    assert np.all(np.diff(s) > 0)
    assert np.allclose(np.diff(s), geo.spacing_m, rtol=STATION_RTOL * n, atol=0.0)
    # The spacing divides the length and is the requested one shortened as little as possible.
    assert geo.spacing_m <= spacing_requested * (1 + 1e-12)
    assert n == math.ceil(geo.length_m / spacing_requested * (1 - 1e-12))


def _menger(x, y):
    """Curvature of the circle through each node and its two neighbours (ends: their neighbour's)."""
    ax, ay = x[1:-1] - x[:-2], y[1:-1] - y[:-2]
    bx, by = x[2:] - x[1:-1], y[2:] - y[1:-1]
    cross = ax * by - ay * bx
    k = 2 * cross / (np.hypot(ax, ay) * np.hypot(bx, by) * np.hypot(x[2:] - x[:-2], y[2:] - y[:-2]))
    return np.concatenate((k[:1], k, k[-1:]))


def check_chords(geo, fine):
    """Chords between nodes against their arcs, using a 4x finer resampling of the same fit."""
    ds = geo.spacing_m
    chord = np.hypot(np.diff(geo.x_m), np.diff(geo.y_m))
    assert np.all(chord <= ds * (1 + 1e-9))                      # chord <= arc
    # Curvature bound along each step: the largest of the fine nodes inside it, plus the largest
    # change between neighbouring fine nodes (what it can rise between two samples).
    # The path's own curvature, from the fine nodes' positions (curvature_1pm is the adaptive
    # estimate, which may be smoothed more than the positions): circle through three nodes.
    path_k = _menger(fine.x_m, fine.y_m)
    kf = np.abs(path_k)
    rise = np.max(np.abs(np.diff(path_k)))
    k_step = np.array([kf[4 * i: 4 * i + 5].max() for i in range(chord.size)]) + rise
    ok = k_step * ds < math.pi
    schur = np.where(k_step > 0, 2 * np.sin(0.5 * k_step * ds) / np.maximum(k_step, 1e-300), ds)
    assert np.all(chord[ok] >= schur[ok] * (1 - 1e-9))           # Schur's comparison theorem
    # Tangent against chord direction at both ends of each step.
    direction = np.arctan2(np.diff(geo.y_m), np.diff(geo.x_m))
    for end in (geo.heading_rad[:-1], geo.heading_rad[1:]):
        dev = np.abs(np.angle(np.exp(1j * (end - direction))))
        assert np.all(dev[ok] <= k_step[ok] * ds + 1e-9)


@PROFILE
@given(plausible_polylines())
def test_open_route_properties(case):
    x, y, noise, spacing = case
    route = make_route(x, y, source="random")
    with warnings.catch_warnings():
        warnings.simplefilter("error", CurvespeedWarning)     # plausible input: no warnings
        geo = build_geometry(route, spacing_m=spacing, closed=False)   # noise from the points
    assert not geo.closed
    check_node_convention(geo, spacing)

    # The same fit resampled 4x finer: every coarse node is a fine node (same station), so the
    # arc-length inversion must put it at the same place.
    fine = build_geometry(route, spacing_m=geo.spacing_m / 4 * (1 + 1e-9), closed=False)
    assert fine.n_nodes == 4 * (geo.n_nodes - 1) + 1
    assert fine.length_m == pytest.approx(geo.length_m, rel=1e-12)
    assert np.allclose(fine.x_m[::4], geo.x_m, atol=SAME_POINT_ATOL_M, rtol=0.0)
    assert np.allclose(fine.y_m[::4], geo.y_m, atol=SAME_POINT_ATOL_M, rtol=0.0)
    check_chords(geo, fine)

    # Length bound. The fit c(u) leaves residuals r_i = p_i - c(u_i) with sum |r_i|^2 at most
    # sigma^2 times the residual target, so sum |r_i| <= sigma sqrt(m * target) (Cauchy-Schwarz).
    # The path from the first point's foot to the last's passes c(u_1) .. c(u_m-2) in order and
    # |c(u_i+1) - c(u_i)| >= |p_i+1 - p_i| - |r_i| - |r_i+1| (triangle inequality), so its length
    # is at least the chord length minus 2 sum |r_i|. Above: a path through points whose chords
    # turn by at most 30 degrees is no longer than circular arcs through them, (theta/2) /
    # sin(theta/2) <= 1.012 times the chords, plus the same residual allowance; the spline's
    # freedom between unequal steps is allowed another 1 %.
    m = x.size
    chords = float(np.sum(np.hypot(np.diff(x), np.diff(y))))
    noise = geo.provenance["position_noise"]["used_m"]        # the noise the fit allowed
    allowance = 2 * noise * math.sqrt(m * residual_target(m))
    theta = math.radians(30.0)
    assert geo.length_m >= chords - allowance
    assert geo.length_m <= chords * (0.5 * theta / math.sin(0.5 * theta) + 0.01) + allowance


@st.composite
def star_shaped_loops(draw):
    """Simple closed curves r(theta) = R (1 + sum a_j cos(j theta + phi_j)), |sum a_j| < 0.3.

    Star-shaped about the origin, hence simple. Points at jittered angles, either direction.
    """
    rng = np.random.default_rng(draw(st.integers(min_value=0, max_value=2**32 - 1)))
    radius = draw(st.sampled_from([15.0, 60.0, 300.0]))
    harmonics = rng.uniform(-1.0, 1.0, 3) * np.array([0.15, 0.08, 0.04])
    phases = rng.uniform(0.0, 2 * math.pi, 3)
    step = draw(st.sampled_from([1.5, 4.0]))
    n = max(24, int(2 * math.pi * radius / step))
    theta = (np.arange(n) + rng.uniform(-0.3, 0.3, n)) * 2 * math.pi / n + rng.uniform(0, 6.3)
    r = radius * (1 + sum(a * np.cos((j + 2) * theta + p)
                          for j, (a, p) in enumerate(zip(harmonics, phases))))
    x, y = r * np.cos(theta), r * np.sin(theta)
    clockwise = draw(st.booleans())
    if clockwise:
        x, y = x[::-1], y[::-1]
    repeat_first = draw(st.booleans())
    if repeat_first:
        x, y = np.append(x, x[0]), np.append(y, y[0])
    z = 10 + 2 * np.sin(theta if not clockwise else theta[::-1])
    if repeat_first:
        z = np.append(z, z[0])
    noise = draw(st.sampled_from([0.01, 0.05]))
    return x, y, z, noise, clockwise


@PROFILE
@given(star_shaped_loops())
def test_closed_loop_properties(case):
    x, y, z, noise, clockwise = case
    route = make_route(x, y, z, source="loop")
    with warnings.catch_warnings():
        warnings.simplefilter("error", CurvespeedWarning)
        geo = build_geometry(route, spacing_m=1.0)              # noise from the points
    noise = geo.provenance["position_noise"]["used_m"]
    assert geo.closed                       # detected from the ends meeting
    check_node_convention(geo, 1.0)
    # Seam: node n is node 0 again, bit for bit, in everything but heading.
    for arr in (geo.x_m, geo.y_m, geo.curvature_1pm, geo.z_m, geo.grade):
        assert arr[-1] == arr[0]
    # Hopf's Umlaufsatz.
    assert geo.total_turning_rad() == pytest.approx(-2 * math.pi if clockwise else 2 * math.pi,
                                                    abs=1e-12)
    # Perimeter against the polygon of the points (as for open routes, with the closing chord).
    xs, ys = np.append(x, x[0]), np.append(y, y[0])
    chords = float(np.sum(np.hypot(np.diff(xs), np.diff(ys))))
    m = x.size
    assert geo.length_m >= chords - 2 * noise * math.sqrt(m * residual_target(m))


# ---------------------------------------------------------------------------------------------
# Bad input: clear errors, warnings where the result is usable.


def straight_route(n=40, step=2.0, **kwargs):
    s = np.arange(n) * step
    return make_route(s, 0.01 * np.sin(s), **kwargs)


@pytest.mark.parametrize("spacing", [0.0, -1.0, float("nan"), float("inf")])
def test_bad_spacing_is_rejected(spacing):
    with pytest.raises(RouteGeometryError, match=r"route\.csv: station spacing must be a positive"):
        build_geometry(straight_route(source="route.csv"), spacing_m=spacing)


def test_spacing_longer_than_route_is_rejected():
    with pytest.raises(RouteGeometryError, match=r"longer than the fitted route \(78\.\d+ m\); "
                                                 r"use a spacing of at most 78"):
        build_geometry(straight_route(), spacing_m=100.0)


@pytest.mark.parametrize("what, kwargs", [
    ("position noise", {"position_noise_m": 0.0}),
    ("elevation noise", {"elevation_noise_m": -0.1}),
    ("closure tolerance", {"closure_tolerance_m": 0.0}),
])
def test_bad_noise_or_tolerance_is_rejected(what, kwargs):
    with pytest.raises(RouteGeometryError, match=f"{what} must be a positive number of metres"):
        build_geometry(straight_route(), **kwargs)


def overlapping_loop():
    """A circle drawn a little more than once: the last point runs 1.9 m past the start, within
    the default closure tolerance (2 median spacings, 3 m here)."""
    theta = np.linspace(0.0, 2 * math.pi * 1.01, 130)
    return 30 * np.cos(theta), 30 * np.sin(theta)


def test_forced_closure_of_overlapping_ends_is_rejected():
    x, y = overlapping_loop()
    route = make_route(x, y, source="lap.gpx")
    with pytest.raises(RouteGeometryError, match=r"lap\.gpx: cannot close the loop: joining "
                                                 r"point 130 back to point 1 turns by"):
        build_geometry(route, closed=True)


def test_overlapping_ends_stay_open_with_a_warning():
    x, y = overlapping_loop()
    with pytest.warns(CurvespeedWarning, match="treated as open"):
        geo = build_geometry(make_route(x, y, source="lap.gpx"))
    assert not geo.closed


def test_forced_closure_of_a_wide_gap_warns():
    theta = np.linspace(0.0, 1.5 * math.pi, 120)            # three quarters of a circle
    with pytest.warns(CurvespeedWarning, match=r"closing the loop bridges a gap of 42\.4 m"):
        geo = build_geometry(make_route(30 * np.cos(theta), 30 * np.sin(theta)), closed=True)
    assert geo.closed and geo.x_m[-1] == geo.x_m[0]


def test_open_is_kept_when_asked():
    theta = np.linspace(0.0, 2 * math.pi, 120, endpoint=False)
    geo = build_geometry(make_route(30 * np.cos(theta), 30 * np.sin(theta)), closed=False)
    assert not geo.closed
    assert geo.x_m[-1] != geo.x_m[0]


def test_points_bunched_like_a_standing_trace_are_merged():
    # A straight approach, then 30 points circling a spot 0.5 m wide (a receiver left running
    # while standing, no time stamps), then on: the cluster becomes one point and the path
    # runs straight through it (it used to be refused as a cusp).
    ang = np.radians(80 + 130 * np.arange(30))
    x = np.concatenate((np.arange(0, 20, 2.0), 21 + 0.5 * np.cos(ang), np.arange(23, 43, 2.0)))
    y = np.concatenate((np.zeros(10), 0.5 * np.sin(ang), np.zeros(10)))
    geo = build_geometry(make_route(x, y, source="trace.csv"))
    assert geo.provenance["standstills_merged"] == 1
    assert geo.provenance["points_fitted"] < 30         # 20 road points and what is left of 30
    # straight from x = 0 to 41 m; the merged point sits within 0.1 m of the line
    assert geo.length_m == pytest.approx(41.0, abs=0.05)
    assert np.max(np.abs(geo.y_m)) < 0.1
