"""Reference tests for build_geometry: closed forms of plane curves checked against the fit.

Sources named beside each check:
- Euler spiral (clothoid) through the Fresnel integrals, evaluated by scipy.special.fresnel and
  cross-checked by scipy.integrate.quad; check values from ../shared/REFERENCES.md.
- Circle: curvature 1/R, circumference 2 pi R (textbook).
- Theorem of turning tangents (Hopf's Umlaufsatz): a simple closed plane curve turns by +-2 pi.
- Straight line and parabolic vertical curve: grade is the derivative of elevation (calculus).
- Designed alignment (straight, clothoid, circular arc, clothoid, straight, as road designers lay
  one out, common practice) built from the same Fresnel closed form, its coordinates rounded to
  1 cm; tolerances from the three-point (circumcircle) curvature of points h apart (textbook).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import fresnel

from curvespeed.errors import CurvespeedWarning
from curvespeed.geometry import build_geometry, residual_target, summarise_geometry
from curvespeed.route import make_route


def ls_polynomial_sd(t_fit, t_eval, degree, derivative, sigma):
    """Standard deviation of a derivative of a least-squares polynomial fit at ``t_eval``.

    Covariance of the coefficients is sigma^2 (X^T X)^-1 (Gauss-Markov; any regression text);
    the derivative at t is a fixed linear combination of them.
    """
    centre = 0.5 * (np.max(t_fit) + np.min(t_fit))
    half = 0.5 * (np.max(t_fit) - np.min(t_fit))
    x_fit = np.polynomial.polynomial.polyvander((np.asarray(t_fit) - centre) / half, degree)
    cov = sigma**2 * np.linalg.inv(x_fit.T @ x_fit)
    x_eval = (np.asarray(t_eval) - centre) / half
    rows = np.zeros((x_eval.size, degree + 1))
    for p in range(derivative, degree + 1):
        rows[:, p] = math.perm(p, derivative) * x_eval ** (p - derivative)
    rows /= half**derivative
    return np.sqrt(np.einsum("ij,jk,ik->i", rows, cov, rows))


def allowed_offset(sigma, m):
    """RMS distance between the fit and the points that the stated noise allows (the fit's
    residual target, see residual_target), metres: the mean offset of the fitted curve from
    the points cannot exceed it."""
    return sigma * math.sqrt(residual_target(m) / m)

# ---------------------------------------------------------------------------------------------
# Test curves (invented for these tests).


def clothoid_xy(s, a_m):
    """Euler spiral with clothoid parameter A: curvature s / A^2, heading s^2 / (2 A^2).

    With k = A sqrt(pi): S, C = fresnel(s / k) (scipy returns S first), x = k C, y = k S.
    """
    k = a_m * math.sqrt(math.pi)
    s_int, c_int = fresnel(np.asarray(s, dtype=float) / k)
    return k * c_int, k * s_int


def ellipse_points(a_m, b_m, n, clockwise=False, phase=0.0):
    t = phase + np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    if clockwise:
        t = -t
    return a_m * np.cos(t), b_m * np.sin(t)


def rounded_rectangle_points(width_m, height_m, radius_m, step_m):
    """Points every ``step_m`` of arc length around a rectangle with rounded corners (CCW)."""
    straight_x, straight_y = width_m - 2 * radius_m, height_m - 2 * radius_m
    corners = [(width_m / 2 - radius_m, height_m / 2 - radius_m),
               (-(width_m / 2 - radius_m), height_m / 2 - radius_m),
               (-(width_m / 2 - radius_m), -(height_m / 2 - radius_m)),
               (width_m / 2 - radius_m, -(height_m / 2 - radius_m))]
    # Legs in driving order, starting on the right-hand side going up.
    legs = [("line", (width_m / 2, -straight_y / 2), (0.0, 1.0), straight_y), ("arc", 0),
            ("line", (straight_x / 2, height_m / 2), (-1.0, 0.0), straight_x), ("arc", 1),
            ("line", (-width_m / 2, straight_y / 2), (0.0, -1.0), straight_y), ("arc", 2),
            ("line", (-straight_x / 2, -height_m / 2), (1.0, 0.0), straight_x), ("arc", 3)]
    arc_len = 0.5 * math.pi * radius_m
    total = 2 * straight_x + 2 * straight_y + 4 * arc_len
    pts = []
    for s in np.arange(0.0, total - 0.5 * step_m, step_m):
        rest = s
        for leg in legs:
            if leg[0] == "line":
                (x0, y0), (dx, dy), length = leg[1], leg[2], leg[3]
                if rest <= length:
                    pts.append((x0 + dx * rest, y0 + dy * rest))
                    break
                rest -= length
            else:
                if rest <= arc_len:
                    cx, cy = corners[leg[1]]
                    ang = leg[1] * 0.5 * math.pi + rest / radius_m
                    pts.append((cx + radius_m * math.cos(ang), cy + radius_m * math.sin(ang)))
                    break
                rest -= arc_len
    pts = np.array(pts)
    return pts[:, 0], pts[:, 1], total


# ---------------------------------------------------------------------------------------------
# Euler spiral


@pytest.mark.parametrize("s_m, x_ref, y_ref", [(100.0, 97.5287688200, 16.3714047376),
                                               (50.0, 49.9219314937, 2.0810093402)])
def test_clothoid_generator_matches_check_values(s_m, x_ref, y_ref):
    # Check values from ../shared/REFERENCES.md (Euler spiral, A = 100 m), given to 1e-10 m;
    # scipy's Fresnel integrals are accurate to ~1e-15 relative, so 1e-9 m covers the rounding.
    x, y = clothoid_xy(s_m, 100.0)
    assert x == pytest.approx(x_ref, abs=1e-9)
    assert y == pytest.approx(y_ref, abs=1e-9)
    # Independent check by quadrature of (cos, sin) of heading s^2/(2A^2) (scipy.integrate.quad,
    # default tolerances ~1.5e-8 relative).
    xq = quad(lambda t: math.cos(t * t / (2 * 100.0**2)), 0.0, s_m)[0]
    yq = quad(lambda t: math.sin(t * t / (2 * 100.0**2)), 0.0, s_m)[0]
    assert x == pytest.approx(xq, rel=1e-8)
    assert y == pytest.approx(yq, rel=1e-8)
    # Heading s^2 / (2 A^2): 0.5 rad at s = 100 m (REFERENCES.md), 0.125 rad at 50 m. From the
    # generator by central differences with step 1 mm: truncation error ~ (1e-3)^2 * kappa / 6,
    # far below the 1e-9 rad allowed.
    step = 1e-3
    xa, ya = clothoid_xy(s_m - step, 100.0)
    xb, yb = clothoid_xy(s_m + step, 100.0)
    assert math.atan2(yb - ya, xb - xa) == pytest.approx(s_m**2 / (2 * 100.0**2), abs=1e-9)


A_M = 100.0
CLOTHOID_END_M = 250.0
NOISE_M = 0.03
#: Curvature tolerance away from the ends, 1/m. The smoothing here spreads over l ~ 25 m
#: (set by the 3 cm noise); a least-squares cubic or parabola over l = 25 m holding n ~ 14
#: points with noise sigma has curvature standard deviation 2 sigma sqrt(180 / n) / l^2
#: ~ 3.4e-4 1/m at its centre (variance of the quadratic coefficient over a uniform design).
#: 1e-3 is ~3 standard deviations for the largest of the ~10 independent windows; the
#: clothoid's curvature is linear in station, which the fourth-difference penalty does not bias.
CLOTHOID_KAPPA_ATOL = 1e-3
#: Nodes closer than this to either end are judged separately: there the data are one-sided.
CLOTHOID_END_ZONE_M = 25.0
#: At the ends the window holds data on one side only: about half the points over half the
#: lever, which raises the standard deviation by 4 sqrt(2) ~ 5.7 to ~2e-3 1/m; 6e-3 is 3 of them.
CLOTHOID_END_KAPPA_ATOL = 6e-3


def noisy_clothoid(seed):
    rng = np.random.default_rng(seed)
    s = np.concatenate(([0.0], np.cumsum(rng.uniform(0.5, 3.0, 200))))
    s = s[s <= CLOTHOID_END_M]
    x, y = clothoid_xy(s, A_M)
    return (s, x + rng.normal(0.0, NOISE_M, s.size), y + rng.normal(0.0, NOISE_M, s.size))


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_clothoid_curvature_recovered(seed):
    s, x, y = noisy_clothoid(seed)
    geo = build_geometry(make_route(x, y, source="clothoid"), spacing_m=1.0,
                         position_noise_m=NOISE_M)
    assert not geo.closed
    # Station of each node on the true spiral: the fit starts at the foot of the first point
    # (true station 0), so node stations are true stations up to the noise of that foot.
    kappa_true = geo.station_m / A_M**2
    err = geo.curvature_1pm - kappa_true
    inner = ((geo.station_m > CLOTHOID_END_ZONE_M)
             & (geo.station_m < geo.length_m - CLOTHOID_END_ZONE_M))
    assert np.max(np.abs(err[inner])) <= CLOTHOID_KAPPA_ATOL
    # Standard deviation of a single window (see CLOTHOID_KAPPA_ATOL) bounds the RMS error.
    assert math.sqrt(np.mean(err[inner] ** 2)) <= 3.4e-4
    assert np.max(np.abs(err)) <= CLOTHOID_END_KAPPA_ATOL
    # Length between the feet of the first and last points: each end's foot moves along the
    # tangent with that point's noise (sigma), so the difference of two has sigma*sqrt(2);
    # 0.15 m is 3.5 of those.
    assert geo.length_m == pytest.approx(s[-1] - s[0], abs=0.15)
    # Heading s^2/(2A^2) (REFERENCES.md) away from the ends. Locally the smoothing acts like a
    # least-squares cubic (its null space); over l ~ 25 m holding n ~ 14 points the slope at
    # the centre of such a cubic has standard deviation sigma (2/l) sqrt((3 + 7 * 9/4) / n)
    # ~ 2.8e-3 rad (Legendre coefficients of a least-squares fit have variance
    # (2j+1) sigma^2 / n); 3 of those, plus the node stations' offset from the true ones
    # (the first point's foot, up to ~3 sigma sqrt(2)) times the largest curvature 0.025 1/m:
    # 8.5e-3 + 3.2e-3 rad.
    heading_true = geo.station_m**2 / (2 * A_M**2)
    assert np.max(np.abs(geo.heading_rad - heading_true)[inner]) <= 8.5e-3 + 3.2e-3


# ---------------------------------------------------------------------------------------------
# Circle


@pytest.mark.parametrize("radius_m", [20.0, 100.0, 1000.0])
@pytest.mark.parametrize("repeat_first", [False, True])
def test_circle_curvature_and_length(radius_m, repeat_first):
    step = 2.0
    n = int(round(2 * math.pi * radius_m / step))
    x, y = ellipse_points(radius_m, radius_m, n, phase=0.3)
    if repeat_first:
        x, y = np.append(x, x[0]), np.append(y, y[0])
    sigma = 1e-3
    geo = build_geometry(make_route(x, y, source="circle"), spacing_m=1.0,
                         position_noise_m=sigma)
    assert geo.closed
    # Tolerance, relative: (a) the fit may sit up to the allowed RMS offset from the points, so
    # its mean radius can differ from R by at most that much (mean radial offset <= RMS of the
    # residuals); (b) a quintic spline through samples h apart reproduces a second derivative
    # to O((h/R)^4) (approximation order h^(k+1-j) of degree-k splines for the j-th derivative,
    # de Boor, A Practical Guide to Splines, from memory).
    rtol = allowed_offset(sigma, x.size) / radius_m + (step / radius_m) ** 4
    kappa = geo.curvature_1pm
    assert np.mean(kappa) == pytest.approx(1.0 / radius_m, rel=rtol)
    assert geo.length_m == pytest.approx(2 * math.pi * radius_m, rel=rtol)
    # Pointwise: as above plus round-off in the smoothest modes of the banded solve, whose
    # condition grows with the smoothing weight (up to lam/lam0 = 1e12 is searched, so in
    # principle 1e-16 * 1e12); 1e-6 of 1/R (1 mm of radius per km) is allowed, ~100 times the
    # ripple seen at R = 1 km and far below anything a speed limit notices.
    assert np.allclose(kappa, 1.0 / radius_m, rtol=rtol + 1e-6, atol=0.0)
    assert geo.total_turning_rad() == pytest.approx(2 * math.pi, abs=1e-12)
    summary = summarise_geometry(geo)
    assert summary["closed"] is True
    assert summary["min_radius_m"] == pytest.approx(radius_m, rel=rtol + 1e-6)
    assert summary["total_turning_deg"] == pytest.approx(360.0, abs=1e-9)


# ---------------------------------------------------------------------------------------------
# Theorem of turning tangents


def _simple_closed_curves():
    cases = []
    for cw in (False, True):
        x, y = ellipse_points(50.0, 50.0, 160, clockwise=cw)
        cases.append((f"circle-{'cw' if cw else 'ccw'}", x, y))
        x, y = ellipse_points(60.0, 25.0, 200, clockwise=cw, phase=0.7)
        cases.append((f"ellipse-{'cw' if cw else 'ccw'}", x, y))
        x, y, _ = rounded_rectangle_points(100.0, 50.0, 10.0, 2.0)
        if cw:
            x, y = x[::-1], y[::-1]
        cases.append((f"rounded-rectangle-{'cw' if cw else 'ccw'}", x, y))
    return cases


@pytest.mark.parametrize("name, x, y", _simple_closed_curves(),
                         ids=[c[0] for c in _simple_closed_curves()])
def test_simple_closed_curves_turn_by_two_pi(name, x, y):
    # Hopf's Umlaufsatz: total turning of a simple closed curve is +2 pi (counter-clockwise) or
    # -2 pi (clockwise).
    geo = build_geometry(make_route(x, y, source=name), spacing_m=0.5)
    assert geo.closed
    expected = -2 * math.pi if name.endswith("-cw") else 2 * math.pi
    assert geo.total_turning_rad() == pytest.approx(expected, abs=1e-12)
    # The same from the curvature estimate alone: the integral over a lap (trapezoid rule, which
    # on a smooth periodic integrand converges faster than any power of the spacing: Trefethen
    # and Weideman, SIAM Review 56(3), 2014, from memory). The estimate is smoothed station by
    # station more than the path (curvespeed.geometry.curvature), so it integrates to the turn
    # within its own stated uncertainty: the sum of its standard deviations over the lap.
    integral = float(np.sum(geo.curvature_1pm[:-1]) * geo.spacing_m)
    uncertainty = float(np.sum(geo.curvature_sd_1pm[:-1]) * geo.spacing_m)
    assert integral == pytest.approx(expected, abs=max(uncertainty, 1e-6))


def test_rounded_rectangle_length_and_straights():
    # Straights of 80 m and 30 m joined by quarter circles of radius 10 m: length
    # 2 (80 + 30) + 2 pi 10 (textbook). A fit lying on average delta inside the points is close
    # to the parallel curve at distance delta, whose length is L - 2 pi delta (Steiner's formula
    # for parallel curves of a convex curve); delta is at most the allowed RMS offset.
    sigma = 0.01
    x, y, total = rounded_rectangle_points(100.0, 50.0, 10.0, 2.0)
    geo = build_geometry(make_route(x, y, source="rounded"), spacing_m=0.5,
                         position_noise_m=sigma)
    assert geo.length_m == pytest.approx(total, abs=2 * math.pi * allowed_offset(sigma, x.size))
    # Heading on the middle of each straight is exactly a multiple of 90 degrees from the first
    # (the route starts on a straight heading +y). The straights are >= 30 m long and the fit
    # may tilt one by about twice the allowed offset over its length: 2 * 0.0116 / 30 ~ 8e-4
    # rad; the spline's ripple from the neighbouring curvature steps is far smaller at the middle.
    arc = 0.5 * math.pi * 10.0
    middles = [15.0, 30.0 + arc + 40.0, 110.0 + 2 * arc + 15.0, 140.0 + 3 * arc + 40.0]
    for quarter, s_mid in enumerate(middles):
        k = int(np.argmin(np.abs(geo.station_m - s_mid)))
        assert geo.heading_rad[k] == pytest.approx(0.5 * math.pi * (quarter + 1), abs=8e-4)


# ---------------------------------------------------------------------------------------------
# Closed route seam


def test_closed_route_seam_is_not_special():
    # A noisy ellipse whose first point is at an arbitrary place: the seam (node n == node 0)
    # must look like any other step. Periodic spline continuity: curvature and heading rate are
    # continuous everywhere, so the change across the seam is no larger than elsewhere.
    rng = np.random.default_rng(7)
    x, y = ellipse_points(80.0, 40.0, 400, phase=1.1)
    x, y = x + rng.normal(0.0, 0.02, x.size), y + rng.normal(0.0, 0.02, y.size)
    geo = build_geometry(make_route(x, y, source="ellipse"), spacing_m=1.0,
                         position_noise_m=0.02)
    assert geo.closed
    kappa = geo.curvature_1pm
    # Steps between consecutive nodes, the last one being node n-1 -> node n (== node 0).
    kappa_steps = np.abs(np.diff(kappa))
    seam_kappa_step = kappa_steps[-1]
    after_seam_step = kappa_steps[0]
    assert max(seam_kappa_step, after_seam_step) <= np.max(kappa_steps[1:-1])
    rate = np.diff(geo.heading_rad) / geo.spacing_m
    rate_steps = np.abs(np.diff(np.append(rate, rate[0])))   # wraps once around the seam
    assert rate_steps[-1] <= np.max(rate_steps[:-1])
    assert rate_steps[-2] <= np.max(rate_steps[:-2])
    # Bit-identical seam rows.
    assert geo.x_m[-1] == geo.x_m[0] and geo.y_m[-1] == geo.y_m[0]
    assert geo.curvature_1pm[-1] == geo.curvature_1pm[0]


# ---------------------------------------------------------------------------------------------
# Straight line and grade


def straight_points(seed, length_m=500.0, heading_rad=0.4):
    rng = np.random.default_rng(seed)
    s = np.concatenate(([0.0], np.cumsum(rng.uniform(0.5, 3.0, 400))))
    s = s[s <= length_m]
    x = s * math.cos(heading_rad) + rng.normal(0.0, NOISE_M, s.size)
    y = s * math.sin(heading_rad) + rng.normal(0.0, NOISE_M, s.size)
    return rng, s, x, y


# A straight line (and a parabolic elevation) lies in the null space of the smoothing penalty
# (cubics), and with these seeds its best cubic leaves less residual than the noise allows, so
# the fit is the least-squares cubic over the whole route. Its scatter follows from the
# least-squares covariance (ls_polynomial_sd); the tolerances are 4 standard deviations at
# each node (errors at neighbouring nodes are strongly correlated, so the maximum over the
# route is not much larger than at one node).
SD_FACTOR = 4.0


def test_straight_line_has_no_curvature():
    rng, s, x, y = straight_points(11)
    geo = build_geometry(make_route(x, y, source="line"), position_noise_m=NOISE_M)
    # Across-track noise sigma enters the cubic; curvature is its second derivative (the
    # parameter is arc length to within the noise), heading offset its first.
    kappa_sd = ls_polynomial_sd(s, geo.station_m, 3, 2, NOISE_M)
    assert np.all(np.abs(geo.curvature_1pm) <= SD_FACTOR * kappa_sd)
    heading_sd = ls_polynomial_sd(s, geo.station_m, 3, 1, NOISE_M)
    assert np.all(np.abs(geo.heading_rad - 0.4) <= SD_FACTOR * heading_sd)
    # A real bend of any road radius (say 10 km) would be far outside: 1e-4 1/m.
    assert np.max(SD_FACTOR * kappa_sd) < 1e-5
    assert summarise_geometry(geo)["min_radius_m"] > 1e5


def test_constant_grade_recovered():
    rng, s, x, y = straight_points(12)
    grade, sigma_z = 0.045, 0.05
    z = 100.0 + grade * s + rng.normal(0.0, sigma_z, s.size)
    geo = build_geometry(make_route(x, y, z, source="grade"), position_noise_m=NOISE_M,
                         elevation_noise_m=sigma_z)
    # Grade is dz/ds (calculus); elevation is fitted against station by a cubic here.
    grade_sd = ls_polynomial_sd(s, geo.station_m, 3, 1, sigma_z)
    assert np.all(np.abs(geo.grade - grade) <= SD_FACTOR * grade_sd)
    z_sd = ls_polynomial_sd(s, geo.station_m, 3, 0, sigma_z)
    # Node stations differ from the points' true stations by the noise of the start (~sigma),
    # which shifts z by grade * sigma ~ 1.4 mm; added to the tolerance.
    assert np.all(np.abs(geo.z_m - (100.0 + grade * geo.station_m))
                  <= SD_FACTOR * z_sd + grade * 3 * NOISE_M)
    summary = summarise_geometry(geo)
    assert summary["min_grade"] == pytest.approx(grade, abs=SD_FACTOR * np.max(grade_sd))
    assert summary["max_grade"] == pytest.approx(grade, abs=SD_FACTOR * np.max(grade_sd))


def test_parabolic_vertical_curve_grade_recovered():
    # A crest vertical curve as road designers lay it out (common practice): grade changes
    # linearly from +4 % to -3 % over 300 m, z = z0 + g1 s + (g2 - g1) s^2 / (2 L).
    rng, s, x, y = straight_points(13, length_m=300.0)
    g1, g2, length = 0.04, -0.03, 300.0
    sigma_z = 0.02
    z = 50.0 + g1 * s + (g2 - g1) * s**2 / (2 * length) + rng.normal(0.0, sigma_z, s.size)
    geo = build_geometry(make_route(x, y, z, source="crest"), position_noise_m=NOISE_M,
                         elevation_noise_m=sigma_z)
    expected = g1 + (g2 - g1) * geo.station_m / length
    grade_sd = ls_polynomial_sd(s, geo.station_m, 3, 1, sigma_z)
    # Station shift of the start (~sigma, see above) times the rate of grade (7 % per 300 m).
    shift = 3 * NOISE_M * abs(g2 - g1) / length
    assert np.all(np.abs(geo.grade - expected) <= SD_FACTOR * grade_sd + shift)


def test_elevation_on_a_loop_is_periodic():
    # Circle of radius 80 m with z = 5 sin(theta): grade dz/ds = 5 cos(theta) / R (calculus).
    rng = np.random.default_rng(5)
    radius = 80.0
    theta = 0.3 + np.linspace(0.0, 2 * np.pi, 300, endpoint=False)
    sigma_z = 0.05
    x = radius * np.cos(theta) + rng.normal(0.0, 0.02, theta.size)
    y = radius * np.sin(theta) + rng.normal(0.0, 0.02, theta.size)
    z = 5.0 * np.sin(theta) + rng.normal(0.0, sigma_z, theta.size)
    geo = build_geometry(make_route(x, y, z, source="loop"), position_noise_m=0.02,
                         elevation_noise_m=sigma_z)
    assert geo.closed
    theta_nodes = np.arctan2(geo.y_m, geo.x_m)
    # Elevation within 3 sigma_z of the closed form (smoothing only lowers the noise);
    # grade: the noise of a slope over a smoothing window of ~40 m with ~24 points is
    # sigma_z sqrt(12/n)/l ~ 1e-3, 3e-3 is 3 of those.
    assert np.allclose(geo.z_m, 5.0 * np.sin(theta_nodes), atol=3 * sigma_z, rtol=0.0)
    assert np.allclose(geo.grade, 5.0 * np.cos(theta_nodes) / radius, atol=3e-3, rtol=0.0)
    assert geo.z_m[-1] == geo.z_m[0] and geo.grade[-1] == geo.grade[0]


# ---------------------------------------------------------------------------------------------
# Designed alignment: straight - clothoid - arc - clothoid - straight, coordinates rounded


def designed_curve(radius_m, spiral_m, deflection_deg, straight_m):
    """A curve as road designers lay one out (common practice), invented for these tests.

    Straight, clothoid from curvature 0 to 1/R over ``spiral_m`` (A^2 = R * spiral_m, from the
    Fresnel closed form above), circular arc of radius R, the mirror-image clothoid, straight;
    turning left by ``deflection_deg``. Each clothoid turns the heading by spiral_m / (2 R), so
    the arc is R * deflection - spiral_m long. The second half is the first half reflected in
    the line through the arc's midpoint and its centre, traversed backwards.

    Returns the design length, the arc length, and functions giving position (x, y) and design
    curvature at design stations.
    """
    deflection = math.radians(deflection_deg)
    arc_m = radius_m * deflection - spiral_m
    assert arc_m > 0
    total_m = 2.0 * (straight_m + spiral_m) + arc_m
    a_m = math.sqrt(radius_m * spiral_m)
    x1, y1 = clothoid_xy(spiral_m, a_m)
    x1 += straight_m
    heading1 = spiral_m / (2.0 * radius_m)
    cx, cy = x1 - radius_m * math.sin(heading1), y1 + radius_m * math.cos(heading1)
    # From the centre to the arc's midpoint, where the heading is deflection / 2.
    nx, ny = math.sin(0.5 * deflection), -math.cos(0.5 * deflection)
    mx, my = cx + radius_m * nx, cy + radius_m * ny

    def first_half(s):
        x, y = s.copy(), np.zeros_like(s)
        on_spiral = (s > straight_m) & (s <= straight_m + spiral_m)
        x[on_spiral], y[on_spiral] = clothoid_xy(s[on_spiral] - straight_m, a_m)
        x[on_spiral] += straight_m
        on_arc = s > straight_m + spiral_m
        heading = heading1 + (s[on_arc] - straight_m - spiral_m) / radius_m
        x[on_arc] = cx + radius_m * np.sin(heading)
        y[on_arc] = cy - radius_m * np.cos(heading)
        return x, y

    def position(s):
        s = np.asarray(s, dtype=float)
        x, y = first_half(np.minimum(s, total_m - s))
        along = (x - mx) * nx + (y - my) * ny
        second = s > 0.5 * total_m
        return (np.where(second, mx + 2.0 * along * nx - (x - mx), x),
                np.where(second, my + 2.0 * along * ny - (y - my), y))

    def curvature(s):
        joins = [0.0, straight_m, straight_m + spiral_m, straight_m + spiral_m + arc_m,
                 straight_m + 2.0 * spiral_m + arc_m, total_m]
        return np.interp(s, joins, [0.0, 0.0, 1.0 / radius_m, 1.0 / radius_m, 0.0, 0.0])

    return total_m, arc_m, position, curvature


def three_point_curvature(x, y):
    """Signed curvature of the circle through each three consecutive points (Menger curvature,
    4 * area / product of the sides; textbook)."""
    ax, ay, bx, by = x[1:-1] - x[:-2], y[1:-1] - y[:-2], x[2:] - x[:-2], y[2:] - y[:-2]
    cross = ax * by - ay * bx
    sides = np.hypot(ax, ay) * np.hypot(bx - ax, by - ay) * np.hypot(bx, by)
    return 2.0 * cross / sides


#: (radius, clothoid length, deflection, point spacing): tight arcs R 10-50 m, 2.5-5 m apart.
DESIGNED_CURVES = [(10.0, 10.0, 180.0, 2.5),     # hairpin
                   (12.0, 8.0, 120.0, 2.5),
                   (20.0, 15.0, 150.0, 5.0),
                   (40.0, 25.0, 90.0, 5.0),
                   (50.0, 30.0, 100.0, 5.0)]
DESIGNED_STRAIGHT_M = 80.0
#: Coordinates are written to whole centimetres (as the demo routes are).
ROUNDING_M = 0.01
#: Arbitrary placement, so that no straight runs along a coordinate axis.
PLACEMENT_ROTATION_RAD = 0.3
PLACEMENT_ORIGIN_M = (3512.0, -1290.0)


def designed_points(radius_m, spiral_m, deflection_deg, spacing_m):
    total_m, arc_m, position, curvature = designed_curve(radius_m, spiral_m, deflection_deg,
                                                         DESIGNED_STRAIGHT_M)
    n = round(total_m / spacing_m)
    s = total_m * np.arange(n + 1) / n              # equal steps of design station, ~spacing_m
    x, y = position(s)
    return s, x, y, total_m, arc_m, curvature


@pytest.mark.parametrize("radius_m, spiral_m, deflection_deg, spacing_m", DESIGNED_CURVES)
def test_designed_curve_generator(radius_m, spiral_m, deflection_deg, spacing_m):
    # The construction itself, before rounding: three points on the arc lie on a circle of
    # radius R (including triples across the mirrored midpoint), and the last straight leaves
    # at the first straight's heading plus the deflection. Round-off only: 1e-9.
    s, x, y, total_m, arc_m, _ = designed_points(radius_m, spiral_m, deflection_deg, spacing_m)
    start = DESIGNED_STRAIGHT_M + spiral_m
    on_arc = (s >= start) & (s <= start + arc_m)
    triples = on_arc[:-2] & on_arc[1:-1] & on_arc[2:]
    assert np.count_nonzero(triples) >= 3
    assert np.allclose(three_point_curvature(x, y)[triples], 1.0 / radius_m, rtol=1e-9, atol=0)
    exit_heading = math.atan2(y[-1] - y[-2], x[-1] - x[-2])
    turn = math.remainder(exit_heading - math.radians(deflection_deg), 2 * math.pi)
    assert turn == pytest.approx(0.0, abs=1e-9)
    assert np.max(np.abs(np.diff(s) - spacing_m)) < 0.5       # points every 2.5-5 m


@pytest.mark.parametrize("noise_m", [None, 0.05, 0.01])
@pytest.mark.parametrize("radius_m, spiral_m, deflection_deg, spacing_m", DESIGNED_CURVES)
def test_designed_curve_curvature_recovered(radius_m, spiral_m, deflection_deg, spacing_m,
                                            noise_m):
    s, x, y, total_m, arc_m, curvature = designed_points(radius_m, spiral_m, deflection_deg,
                                                         spacing_m)
    c, sn = math.cos(PLACEMENT_ROTATION_RAD), math.sin(PLACEMENT_ROTATION_RAD)
    xr = np.round(PLACEMENT_ORIGIN_M[0] + c * x - sn * y, 2)
    yr = np.round(PLACEMENT_ORIGIN_M[1] + sn * x + c * y, 2)
    # Noise left to the points, or stated as more than the points carry (5 cm was once the
    # default): the fit must not turn that allowance into curvature that is not there. A
    # statement the points contradict by more than 2x is reported (asserted in
    # test_noise_statement_the_points_contradict_is_reported); here only the result counts.
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", ".*the position noise stated", CurvespeedWarning)
        geo = build_geometry(make_route(xr, yr, source="designed"), spacing_m=0.5,
                             position_noise_m=noise_m)
    # Node stations against design stations: the fit starts at the foot of the first point
    # (design station 0) and its length differs from the design length by the points' mm-level
    # departures, so scaling aligns them to well under a centimetre.
    s_design = geo.station_m * total_m / geo.length_m
    err = np.abs(geo.curvature_1pm - curvature(s_design))

    # Tolerances from the data's resolution (textbook three-point argument). Rounding to 1 cm
    # moves a point across the path by at most eps = 5 mm * sqrt(2). Three consecutive points
    # h apart on a circle give its curvature exactly (their circumcircle); moving each across
    # the path by at most eps changes that curvature by at most 4 eps / h^2 (the second
    # difference of the offsets over h^2). The fit rests on at least three points, so it is
    # allowed no more than that.
    eps_m = 0.5 * ROUNDING_M * math.sqrt(2.0)
    three_point = 4.0 * eps_m / spacing_m**2
    # Near a join the points cannot show where between two of them a clothoid's curvature ramp
    # starts or ends: moving the ramp by up to h/2 changes the curvature there by its slope,
    # 1/(R * clothoid length), times h/2.
    join = spacing_m / (2.0 * radius_m * spiral_m)

    # On the arc, two spacings or more from its ends (the three-point circles of the node and
    # its neighbours then use arc points only): within the three-point bound of 1/R.
    start = DESIGNED_STRAIGHT_M + spiral_m
    inner = (s_design >= start + 2 * spacing_m) & (s_design <= start + arc_m - 2 * spacing_m)
    assert np.count_nonzero(inner) >= 10
    assert np.max(err[inner]) <= three_point
    # Everywhere else (straights, clothoids, joins, the route's ends): the join term added.
    assert np.max(err) <= three_point + join
    # Minimum radius: not tighter than the join and rounding allow near the joins, and, since
    # the middle of the arc is within the three-point bound, no wider than that bound allows.
    r_min = summarise_geometry(geo)["min_radius_m"]
    assert 1.0 / (1.0 / radius_m + three_point + join) <= r_min
    assert r_min <= 1.0 / (1.0 / radius_m - three_point)


def test_noise_statement_the_points_contradict_is_reported():
    # Points on an exact circle (R 50 m, every 2 m, rounded to 1 mm): their scatter is about
    # 1 mm. Stated 5 cm (50x too much) or 0.01 mm (far too little), the fit says so, naming
    # both values, and uses the estimate; stated within 2x of it, the statement is used.
    theta = np.arange(0, 2 * math.pi, 2.0 / 50.0)
    x, y = np.round(50 * np.cos(theta), 3), np.round(50 * np.sin(theta), 3)
    route = make_route(x, y, source="circle.csv")
    for stated in (0.05, 1e-5):
        with pytest.warns(CurvespeedWarning, match=rf"circle.csv: the position noise stated, "
                                                   rf"{stated:g} m, is .* times (more|less) than "
                                                   r"the points show \(.* m, estimated"):
            geo = build_geometry(route, position_noise_m=stated)
        used = geo.provenance["position_noise"]
        assert used["used_m"] == used["estimated_m"] and used["origin"] == "estimated"
    estimate = build_geometry(route).provenance["position_noise"]["estimated_m"]
    with warnings.catch_warnings():
        warnings.simplefilter("error", CurvespeedWarning)
        geo = build_geometry(route, position_noise_m=1.5 * estimate)
    assert geo.provenance["position_noise"]["origin"] == "stated"


@pytest.mark.parametrize("nu", [1, 2])
def test_derivative_basis_matches_scipy_bspline(nu):
    """The derivative basis (design rows) the noise replicates are evaluated with equals
    scipy's own B-spline derivative (``scipy.interpolate.BSpline(..., extrapolate=False)(u, nu)``) on the
    penalised spline's uniform extended knots (degree 5), at the span's ends and between, up
    to round-off: both evaluate the same piecewise quintic."""
    from scipy.interpolate import BSpline

    from curvespeed.geometry.pspline import SPLINE_DEGREE, derivative_basis, penalised_system

    rng = np.random.default_rng(nu)
    k, n_int, span = SPLINE_DEGREE, 40, 97.3
    u_pts = np.linspace(0.0, span, 200)
    knots = penalised_system(u_pts, np.column_stack((u_pts, u_pts)), np.ones(200), span,
                             False, n_int).knots
    coef = rng.standard_normal((n_int + k, 5))
    u = np.concatenate(([0.0, span], rng.uniform(0.0, span, 300)))
    expected = BSpline(knots, coef, k, extrapolate=False)(u, nu=nu)
    got = derivative_basis(span, n_int, u, nu).times(coef)
    assert np.allclose(got, expected, rtol=0.0, atol=1e-12 * np.abs(expected).max())


@pytest.mark.parametrize("periodic", [False, True])
def test_projection_onto_a_nested_grid_matches_its_own(periodic):
    """``B^T W v`` on a grid of half the intervals, derived from the finer grid's by the
    two-scale relation of uniform B-splines (weights C(6, i) / 2^5 for degree 5; de Boor, A
    Practical Guide to Splines, knot insertion), equals the coarse grid's own projection over
    the points. Points at the span's ends and uneven spacing included; round-off only (1e-13
    of the largest entry), checked over three halvings."""
    from curvespeed.geometry.pspline import halve_projection, penalised_system

    rng = np.random.default_rng(7)
    span, m = 53.7, 900
    u = np.sort(rng.uniform(0.0, span, m))
    u[0] = 0.0
    if not periodic:
        u[-1] = span
    values = np.column_stack((np.cos(u / 9.0), np.sin(u / 7.0)))
    weight = rng.uniform(0.5, 2.0, m)
    noise = rng.standard_normal((m, 6))
    rhs = penalised_system(u, values, weight, span, periodic, 64).project(noise)
    for n_int in (32, 16, 8):
        rhs = halve_projection(rhs, periodic)
        own = penalised_system(u, values, weight, span, periodic, n_int).project(noise)
        assert rhs.shape == own.shape
        assert np.max(np.abs(rhs - own)) <= 1e-13 * np.max(np.abs(own))


@pytest.mark.parametrize("bandwidth, columns", [(5, 16), (11, 3), (0, 4), (5, 1)])
def test_compiled_band_solve_matches_lapack(bandwidth, columns):
    """The smoothing scales' compiled banded solve (``geometry/_band_solve.c``, rows of many
    right-hand sides at once) against LAPACK's ``dpbtrs`` through
    ``scipy.linalg.cho_solve_banded``, on a random symmetric positive definite band. The two
    take the same operations in another order: 1e-12 relative (the matrix's condition number
    is about 10)."""
    from scipy.linalg import cho_solve_banded, cholesky_banded

    compiled = pytest.importorskip("curvespeed.geometry._band_solve")
    rng = np.random.default_rng(bandwidth + columns)
    n = 400
    band = rng.uniform(-1.0, 1.0, (bandwidth + 1, n))
    band[-1] = 2.0 * bandwidth + 2.0 + rng.uniform(0.0, 1.0, n)   # diagonally dominant
    factor = cholesky_banded(band)
    rhs = rng.standard_normal((n, columns))
    expected = cho_solve_banded((factor, False), rhs)
    got = rhs.copy()
    compiled.solve(np.ascontiguousarray(factor.T), got, n, bandwidth, columns)
    assert np.max(np.abs(got - expected)) <= 1e-12 * np.max(np.abs(expected))
    with pytest.raises(ValueError, match="wrong size"):
        compiled.solve(np.ascontiguousarray(factor.T), got[:-1], n, bandwidth, columns)


@pytest.mark.parametrize("periodic", [False, True])
def test_compiled_replicate_curvature_matches_numpy(periodic):
    """The noise replicates' curvature changes by the compiled kernel
    (``geometry/_replicate_curvature.c``) against the numpy path, its reference (derivative
    bases checked against scipy's BSpline above; curvature (x'y'' - y'x'') / |r'|^3,
    textbook), on a circle of radius 40 m fitted at 0.5 m with 5 cm replicates, open and as a
    loop. The kernel takes the numpy path's operations in its order (built without fused
    multiply-adds; sqrt is correctly rounded), so the two agree to the last bit, and so does the
    running sum of their squares it adds; the changes themselves reach 3e-3 to 2e-2 1/m."""
    from types import SimpleNamespace

    from curvespeed.geometry import scales
    from curvespeed.geometry.pspline import SPLINE_DEGREE, penalised_system

    pytest.importorskip("curvespeed.geometry._replicate_curvature")
    radius, m = 40.0, 500
    span = 2.0 * math.pi * radius if periodic else 0.9 * 2.0 * math.pi * radius
    u = np.linspace(0.0, span, m, endpoint=not periodic)
    xy = radius * np.column_stack((np.cos(u / radius), np.sin(u / radius)))
    weight = np.full(m, 20.0)                           # 5 cm
    n_int = 64
    system = penalised_system(u, xy, weight, span, periodic, n_int)
    fit = SimpleNamespace(periodic=periodic, span=span)
    u_nodes = np.linspace(0.0, span, 700, endpoint=not periodic)
    noise = scales.noise_chunk(5, 0, weight, None, None)
    delta = system.solve_projected(system.factor(0.0), system.project(noise))
    got, ref = (scales.Scale.build(system, 0.0, n_int, fit, u_nodes) for _ in range(2))
    got.deltas, ref.deltas = [], []
    got.add_replicates(delta, u_nodes, compiled=True)
    ref.add_replicates(delta, u_nodes, compiled=False)
    assert delta.shape == (n_int + (0 if periodic else SPLINE_DEGREE), 2 * scales.CHUNK)
    assert got.deltas[0].shape == (u_nodes.size, scales.CHUNK)
    assert np.max(np.abs(ref.deltas[0])) > 1e-5      # the replicates do move the curvature
    assert np.array_equal(got.deltas[0], ref.deltas[0])
    assert np.array_equal(got.sum_sq, ref.sum_sq)
    kernel = scales._replicate_curvature
    first, v1, v2 = got._bases(u_nodes, slice(0, None), True)
    with pytest.raises(ValueError, match="wrong size or type"):
        kernel.changes(first.astype(float), v1, v2, delta, got.d1, got.d2, got.kappa,
                       np.empty((u_nodes.size, scales.CHUNK)), None, u_nodes.size,
                       SPLINE_DEGREE + 1, delta.shape[0], scales.CHUNK)
    # the running sum of squared changes the kernel adds (numpy's pairwise order for a row of
    # 8) is numpy's own sum, to the last bit, on a second chunk too; without it, the changes
    # alone for another number of replicates
    rows = delta[np.arange(n_int + SPLINE_DEGREE) % n_int] if periodic else delta
    rows = np.ascontiguousarray(rows)
    sums = ref.sum_sq.copy()
    out = np.empty((u_nodes.size, scales.CHUNK))
    kernel.changes(first, v1, v2, rows, got.d1, got.d2, got.kappa, out, sums, u_nodes.size,
                   SPLINE_DEGREE + 1, rows.shape[0], scales.CHUNK)
    assert np.array_equal(sums, ref.sum_sq + np.sum(ref.deltas[0] ** 2, axis=1))
    half = np.ascontiguousarray(rows[:, [0, 1, 2, 8, 9, 10]])
    three = np.empty((u_nodes.size, 3))
    kernel.changes(first, v1, v2, half, got.d1, got.d2, got.kappa, three, None, u_nodes.size,
                   SPLINE_DEGREE + 1, rows.shape[0], 3)
    assert np.array_equal(three, ref.deltas[0][:, :3])
    with pytest.raises(ValueError, match="sums need 8 replicates"):
        kernel.changes(first, v1, v2, half, got.d1, got.d2, got.kappa, three, sums,
                       u_nodes.size, SPLINE_DEGREE + 1, rows.shape[0], 3)


def test_compiled_scale_ramp_matches_python():
    """The chosen scale's ramp by its compiled twin (``geometry/_scale_ramp.c``) against the
    Python loop, its reference, to the last bit: random levels on even and uneven stations,
    ramps of a fraction of a station to many, plateaus, a single station and two; and the
    ramp's defining properties (below the level, changes by at most the step, and the largest
    such: it meets the level where nothing below pulls it down)."""
    from curvespeed.geometry import curvature

    assert curvature._scale_ramp is not None, "the scale ramp kernel was not built"
    rng = np.random.default_rng(8)
    for n, ramp_m in ((1, 10.0), (2, 0.5), (500, 3.0), (5000, 40.0), (5000, 0.3)):
        level = rng.integers(0, 9, n)
        level[n // 3: n // 2] = 4                       # a plateau
        for station in (np.arange(n, dtype=float), np.cumsum(rng.uniform(0.2, 3.0, n))):
            got = curvature._ramp(level, station, ramp_m)
            ref = curvature._ramp(level, station, ramp_m, compiled=False)
            assert got.dtype == np.float64 and np.array_equal(got, ref)
            assert np.all(got <= level)
            if n > 1:
                allowed = np.diff(station) / ramp_m
                assert np.all(np.abs(np.diff(got)) <= allowed * (1 + 1e-12) + 1e-12)
            assert got[np.argmin(level)] == level.min()


def test_noise_replicates_walk_drawn_in_blocks_is_one_random_walk():
    """The drifting part of the noise replicates is drawn and summed a block of rows at a time
    (memory); it must be the random walk of one draw of its steps: white noise of sigma
    1 / weight plus the cumulative sum of steps of variance drift_rate * dt (the definition in
    ``noise_chunk``), to round-off of the running sum (1e-12 of the largest value), across
    several blocks."""
    from curvespeed.geometry import scales

    rng = np.random.default_rng(1)
    m = 3 * scales._WALK_BLOCK + 17
    weight = rng.uniform(50.0, 150.0, m)
    time = np.cumsum(rng.uniform(0.005, 0.02, m))
    got = scales.noise_chunk(3, 1, weight, time, 1e-4)
    ref = np.random.default_rng([3, 1])
    white = ref.standard_normal((m, 2 * scales.CHUNK)) / weight[:, None]
    steps = ref.standard_normal((m - 1, 2 * scales.CHUNK)) * np.sqrt(1e-4 * np.diff(time))[:, None]
    expected = white + np.vstack((np.zeros((1, 2 * scales.CHUNK)), np.cumsum(steps, axis=0)))
    assert np.max(np.abs(got - expected)) <= 1e-12 * np.max(np.abs(expected))
