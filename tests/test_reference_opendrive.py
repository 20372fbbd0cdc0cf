"""OpenDRIVE roads against the standard's definitions and closed forms.

Sources named beside each check: ASAM OpenDRIVE 1.6 (the version the demo and these documents
declare; 1.4-1.8 define these records alike), its sections quoted from memory (see
../shared/REFERENCES.md); scipy's Fresnel integrals; circle geometry; the international mile.
Every road here is invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import fresnel

from curvespeed.errors import CurvespeedWarning
from curvespeed.geometry.design_curves import ParamPoly3Curve, Poly3Curve
from curvespeed.io.opendrive_path import read_opendrive

from opendrive_helpers import DEMO, document, geometry, lanes, road, write

#: Positions from Gauss-Legendre quadrature of an exact heading agree with closed forms to
#: round-off; 1e-8 m over a few hundred metres leaves room for ~1e3 ulps of summation.
POSITION_ATOL_M = 1e-8
#: Curvature and heading are closed forms evaluated in double precision: 1e-12 relative.
EXACT_RTOL = 1e-12


def _path(tmp_path, text, **kw):
    return read_opendrive(write(tmp_path, text), **kw)


def test_spiral_matches_fresnel_integrals(tmp_path):
    """ASAM OpenDRIVE 1.6 section 7.5 (spiral: curvature linear in s from curvStart to curvEnd).
    A clothoid from zero curvature with theta = s^2 / (2 A^2), A^2 = L / k1, is
    x = A sqrt(pi) C(s / (A sqrt(pi))), y = A sqrt(pi) S(...) (scipy.special.fresnel)."""
    length, k1, x0, y0, h0 = 80.0, 1 / 60, 12.0, -7.0, 0.4
    text = document(road(1, geometry(0.0, x0, y0, h0, length,
                                     f'<spiral curvStart="0" curvEnd="{k1!r}"/>'), length))
    geo = _path(tmp_path, text, lane=0, spacing_m=0.5).geometry
    s = geo.station_m
    np.testing.assert_allclose(s[-1], length, rtol=EXACT_RTOL)   # stations are the design s
    scale = math.sqrt(length / k1) * math.sqrt(math.pi)
    big_s, big_c = fresnel(s / scale)
    xl, yl = scale * big_c, scale * big_s
    x = x0 + math.cos(h0) * xl - math.sin(h0) * yl
    y = y0 + math.sin(h0) * xl + math.cos(h0) * yl
    np.testing.assert_allclose(geo.x_m, x, atol=POSITION_ATOL_M)
    np.testing.assert_allclose(geo.y_m, y, atol=POSITION_ATOL_M)
    np.testing.assert_allclose(geo.curvature_1pm, k1 * s / length, rtol=EXACT_RTOL, atol=1e-15)
    np.testing.assert_allclose(geo.heading_rad, h0 + k1 * s**2 / (2 * length), rtol=EXACT_RTOL)


def test_line_and_arc_closed_forms(tmp_path):
    """ASAM OpenDRIVE 1.6 sections 7.4 (line) and 7.6 (arc: constant curvature, here right)."""
    radius, x0, y0 = 40.0, 5.0, 3.0
    arc_len = radius * math.pi / 2
    text = document(road(1, geometry(0.0, x0, y0, 0.0, 30.0, "<line/>")
                         + geometry(30.0, x0 + 30.0, y0, 0.0, arc_len,
                                    f'<arc curvature="{-1 / radius!r}"/>'), 30.0 + arc_len))
    geo = _path(tmp_path, text, lane=0, spacing_m=0.25).geometry
    s = geo.station_m
    on_line = s < 30.0
    np.testing.assert_allclose(geo.x_m[on_line], x0 + s[on_line], atol=POSITION_ATOL_M)
    np.testing.assert_allclose(geo.y_m[on_line], y0, atol=POSITION_ATOL_M)
    a = (s[~on_line] - 30.0) / radius                  # angle turned on the arc
    cx, cy = x0 + 30.0, y0 - radius                    # centre, to the right
    np.testing.assert_allclose(geo.x_m[~on_line], cx + radius * np.sin(a), atol=POSITION_ATOL_M)
    np.testing.assert_allclose(geo.y_m[~on_line], cy + radius * np.cos(a), atol=POSITION_ATOL_M)
    np.testing.assert_allclose(geo.curvature_1pm[~on_line], -1 / radius, rtol=EXACT_RTOL)
    np.testing.assert_allclose(geo.heading_rad[~on_line], -a, atol=1e-12)


@pytest.mark.parametrize("arc_length", [True, False])
def test_param_poly3_matches_its_polynomial(arc_length):
    """ASAM OpenDRIVE 1.6 section 7.8 (paramPoly3: u(p), v(p) cubic; p in [0, length] for
    pRange arcLength, in [0, 1] for normalized), placed at (x, y) rotated by hdg. Position
    against the polynomials evaluated directly; heading against atan2(v', u'); curvature
    against the derivative of heading over arc length by central differences."""
    u = (0.0, 58.0, 3.0, -1.0)
    v = (0.0, 0.5, 9.0, -6.0)
    length, x0, y0, h0 = 60.0, 100.0, -20.0, 1.1
    p_end = length if arc_length else 1.0
    if arc_length:     # the same curve, parameter scaled to [0, length]
        u = tuple(c / length**i for i, c in enumerate(u))
        v = tuple(c / length**i for i, c in enumerate(v))
    curve = ParamPoly3Curve(x0, y0, h0, length, u, v, arc_length)
    ds = np.linspace(0.0, length, 601)
    got = curve.evaluate(ds)
    p = ds * p_end / length
    uu, vv = np.polynomial.polynomial.polyval(p, u), np.polynomial.polynomial.polyval(p, v)
    np.testing.assert_allclose(got.x_m, x0 + math.cos(h0) * uu - math.sin(h0) * vv, atol=1e-9)
    np.testing.assert_allclose(got.y_m, y0 + math.sin(h0) * uu + math.cos(h0) * vv, atol=1e-9)
    du = np.polynomial.polynomial.polyval(p, np.polynomial.polynomial.polyder(u))
    dv = np.polynomial.polynomial.polyval(p, np.polynomial.polynomial.polyder(v))
    np.testing.assert_allclose(got.heading_rad, h0 + np.arctan2(dv, du), atol=1e-12)
    # arc length along the fine grid; central differences of heading over it are second-order
    # accurate: error ~ h^2 kappa''' / 6 with h = 0.1 m, far below 1e-6 1/m for this curve
    speed = np.hypot(du, dv) * p_end / length
    sigma = np.concatenate(([0.0], np.cumsum(0.5 * (speed[1:] + speed[:-1]) * np.diff(ds))))
    dtheta = np.gradient(got.heading_rad, sigma)
    np.testing.assert_allclose(got.curvature_1pm[1:-1], dtheta[1:-1], atol=1e-6)
    true_len = quad(lambda q: np.hypot(np.polyval(np.polyder(u[::-1]), q),
                                       np.polyval(np.polyder(v[::-1]), q)), 0, p_end)[0]
    assert curve.true_length_m() == pytest.approx(true_len, rel=1e-12)


def test_poly3_points_lie_on_the_cubic_at_their_arc_length():
    """ASAM OpenDRIVE 1.6 section 7.7 (poly3: v = a + b u + c u^2 + d u^3 in the local frame,
    s along the curve): each point's local v equals the cubic at its u, and the arc length
    from u = 0 (scipy quad) equals the station asked for."""
    a, b, c, d = 0.2, 0.05, 0.004, -5e-5
    curve = Poly3Curve(0.0, 0.0, 0.0, 70.0, a, b, c, d)
    ds = np.array([0.0, 7.5, 33.3, 69.0])
    got = curve.evaluate(ds)
    u = got.x_m                                  # placed at the origin, heading 0: x is u
    np.testing.assert_allclose(got.y_m, a + b * u + c * u**2 + d * u**3, atol=1e-12)
    arc = [quad(lambda q: math.hypot(1.0, b + 2 * c * q + 3 * d * q * q), 0, ui,
                epsabs=1e-13)[0] for ui in u]
    np.testing.assert_allclose(arc, ds, atol=1e-9)
    np.testing.assert_allclose(got.speed, 1.0)


@pytest.mark.parametrize("lane,offset_m", [(-1, -1.75), (-2, -5.25), (1, 1.75), (2, 5.25)])
def test_lane_curvature_on_concentric_arcs(tmp_path, lane, offset_m):
    """ASAM OpenDRIVE 1.6 sections 9.3-9.5 (lane offset and widths along t, left positive): a
    lane centre at constant offset t from an arc of radius R is a concentric arc of radius
    R - t: curvature 1 / (R - t), length (R - t) times the angle. Left lanes are driven
    against the station (RHT), so their curvature is the opposite sign."""
    radius, angle = 60.0, 1.2
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, radius * angle,
                                     f'<arc curvature="{1 / radius!r}"/>'), radius * angle,
                         lane_xml=lanes(3.5, right=2, left=2)))
    geo = _path(tmp_path, text, lane=lane).geometry
    r_lane = radius - offset_m
    sign = 1.0 if lane < 0 else -1.0
    np.testing.assert_allclose(geo.curvature_1pm, sign / r_lane, rtol=1e-12)
    assert geo.length_m == pytest.approx(r_lane * angle, rel=1e-12)
    np.testing.assert_allclose(np.hypot(geo.x_m, geo.y_m - radius), r_lane, atol=1e-9)


def test_lane_offset_shifts_the_lane_centre(tmp_path):
    """ASAM OpenDRIVE 1.6 section 9.3 (laneOffset shifts the centre lane along t): a constant
    offset of 0.5 m moves lane -1 of an arc of R 60 m to radius 60 - (0.5 - 1.75)."""
    radius, angle = 60.0, 0.8
    offset = '<laneOffset s="0" a="0.5" b="0" c="0" d="0"/>'
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, radius * angle,
                                     f'<arc curvature="{1 / radius!r}"/>'), radius * angle,
                         lane_xml=lanes(3.5, lane_offset=offset)))
    geo = _path(tmp_path, text, lane=-1).geometry
    np.testing.assert_allclose(geo.curvature_1pm, 1 / (radius + 1.25), rtol=1e-12)


def _two_roads(contact: str) -> str:
    """Road 1 (a line then a left arc) and road 2 meeting it at its end; road 2 starts there
    (contact start) or ends there (contact end, so it is driven against its station)."""
    r, arc = 50.0, 50.0 * 0.6
    end_x, end_y, end_h = 40.0 + r * math.sin(0.6), r * (1 - math.cos(0.6)), 0.6
    road1 = road(1, geometry(0.0, 0.0, 0.0, 0.0, 40.0, "<line/>")
                 + geometry(40.0, 40.0, 0.0, 0.0, arc, f'<arc curvature="{1 / r!r}"/>'),
                 40.0 + arc, links=f'<successor elementType="road" elementId="2" '
                                   f'contactPoint="{contact}"/>')
    length2 = 35.0
    if contact == "start":
        g2 = geometry(0.0, end_x, end_y, end_h, length2, '<arc curvature="-0.01"/>')
        link2 = '<predecessor elementType="road" elementId="1" contactPoint="end"/>'
    else:   # a straight that ends where road 1 ends, pointing back toward it
        sx, sy = end_x + length2 * math.cos(end_h), end_y + length2 * math.sin(end_h)
        g2 = geometry(0.0, sx, sy, end_h + math.pi, length2, "<line/>")
        link2 = '<successor elementType="road" elementId="1" contactPoint="end"/>'
    return document(road1, road(2, g2, length2, links=link2))


@pytest.mark.parametrize("contact", ["start", "end"])
def test_chain_length_and_continuity_across_a_link(tmp_path, contact):
    """ASAM OpenDRIVE 1.6 section 8.2 (road linkage: predecessor/successor with contactPoint
    start or end). The chain's length is the sum of its lanes' lengths; position and heading
    run on across the link: consecutive nodes are one station step apart (a chord of the
    lane centre, shorter than the step by at most step^3 kappa^2 / 24) and heading changes by
    at most the largest |curvature| times the step."""
    text = _two_roads(contact)
    with pytest.warns(CurvespeedWarning, match="no lane link leads to road 2"):
        path = _path(tmp_path, text, roads=["1", "2"], lane=-1, spacing_m=0.5)
    geo = path.geometry
    one = _path(tmp_path, text, roads=["1"], lane=-1).geometry.length_m
    two = _path(tmp_path, text, roads=["2"], lane=-1 if contact == "start" else 1,
                ).geometry.length_m
    assert geo.length_m == pytest.approx(one + two, rel=1e-12)
    step = np.hypot(np.diff(geo.x_m), np.diff(geo.y_m))
    kmax = np.abs(geo.curvature_1pm).max()
    assert step.max() <= geo.spacing_m * (1 + 1e-9)
    assert step.min() >= geo.spacing_m * (1 - geo.spacing_m**2 * kmax**2 / 24) - 1e-9
    assert np.abs(np.diff(geo.heading_rad)).max() <= kmax * geo.spacing_m + 1e-9
    assert path.piece_index.max() == 1


def test_demo_chain_through_the_junction_is_continuous():
    """ASAM OpenDRIVE 1.6 section 10 (junction connections: incoming road, connecting road,
    laneLink): the demo's road 1 -> connector 10 -> road 2 and road 1 -> 11 -> 3 run on."""
    for roads in (["1", "10", "2"], ["1", "11", "3"]):
        geo = read_opendrive(DEMO, roads=roads).geometry
        step = np.hypot(np.diff(geo.x_m), np.diff(geo.y_m))
        kmax = np.abs(geo.curvature_1pm).max()
        assert step.max() <= geo.spacing_m * (1 + 1e-9)
        assert step.min() >= geo.spacing_m * (1 - geo.spacing_m**2 * kmax**2 / 24) - 1e-9
        assert np.abs(np.diff(geo.heading_rad)).max() <= kmax * geo.spacing_m + 1e-9
        assert np.abs(np.diff(geo.z_m)).max() <= np.abs(geo.grade).max() * geo.spacing_m + 1e-9


@pytest.mark.parametrize("curvature,roll,lane,expected_sign", [
    (1 / 80, -0.06, -1, +1),    # left curve, road falls to the left (inside): banked
    (-1 / 80, 0.06, -1, +1),    # right curve, falls to the right (inside): banked
    (1 / 80, 0.06, -1, -1),     # left curve, falls to the right (outside): adverse
    # driven in reverse, the left curve is a right curve and the road's left is the travel's
    # right: both signs flip, so a bank toward the centre of the curve stays one
    (1 / 80, -0.06, 1, +1),
    (1 / 80, 0.06, 1, -1),
])
def test_superelevation_sign_on_left_and_right_curves(tmp_path, curvature, roll, lane,
                                                      expected_sign):
    """ASAM OpenDRIVE 1.6 section 8.4.2 (superelevation: roll angle about the reference line,
    positive where the road falls to its right; from memory). curvespeed's superelevation is
    the cross-slope toward the curve's inside, tan(roll) in size."""
    length = 60.0
    profile = (f'<lateralProfile><superelevation s="0" a="{roll!r}" b="0" c="0" d="0"/>'
               "</lateralProfile>")
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, length,
                                     f'<arc curvature="{curvature!r}"/>'), length,
                         profile=profile))
    path = _path(tmp_path, text, lane=lane)
    (sup,) = path.superelevation
    assert sup.rate == pytest.approx(expected_sign * math.tan(abs(roll)), abs=1e-6)
    assert sup.start_m < 0.5 and sup.end_m > path.geometry.length_m - 0.5


@pytest.mark.parametrize("value,unit,mps", [
    ("12.5", "m/s", 12.5),
    ("50", "km/h", 50 / 3.6),               # 1 km/h = 1/3.6 m/s (SI)
    ("30", "mph", 30 * 0.44704),            # international mile 1609.344 m: 1 mph = 0.44704 m/s
    ("20", None, 20.0),                     # no unit: SI, ASAM OpenDRIVE 1.6 section 2.3.2
])
def test_speed_record_units(tmp_path, value, unit, mps):
    """ASAM OpenDRIVE 1.6 section 8.3 (road type speed record, max and unit m/s, km/h, mph)."""
    unit_attr = f' unit="{unit}"' if unit else ""
    extra = f'<type s="0" type="rural"><speed max="{value}"{unit_attr}/></type>'
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 100.0, "<line/>"), 100.0,
                         extra=extra))
    (zone,) = _path(tmp_path, text).zones
    assert zone.max_speed_mps == pytest.approx(mps, rel=1e-15)
    assert (zone.start_m, zone.end_m) == (0.0, pytest.approx(100.0, rel=1e-12))


def test_lane_speed_record_overrides_the_road_type(tmp_path):
    """ASAM OpenDRIVE 1.6 section 9.5 (lane speed record from sOffset, within its section)."""
    extra = '<type s="0" type="town"><speed max="50" unit="km/h"/></type>'
    lane_speed = '<speed sOffset="40" max="5" unit="m/s"/>'
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 100.0, "<line/>"), 100.0,
                         extra=extra, lane_xml=lanes(extra_right=lane_speed)))
    zones = sorted(_path(tmp_path, text, lane=-1).zones, key=lambda z: z.start_m)
    assert [(z.start_m, z.max_speed_mps) for z in zones] == [
        (0.0, pytest.approx(50 / 3.6)), (pytest.approx(40.0), 5.0)]
    assert zones[0].end_m == pytest.approx(40.0)


def test_elevation_gives_height_and_grade(tmp_path):
    """ASAM OpenDRIVE 1.6 section 8.4.1 (elevation: a + b ds + c ds^2 + d ds^3): on the
    reference line height is the cubic and grade its derivative."""
    a, b, c, d = 100.0, 0.03, -2e-4, 1e-7
    profile = (f'<elevationProfile><elevation s="0" a="{a}" b="{b}" c="{c}" d="{d}"/>'
               "</elevationProfile>")
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 200.0, "<line/>"), 200.0,
                         profile=profile))
    geo = _path(tmp_path, text, lane=0).geometry
    s = geo.station_m
    np.testing.assert_allclose(geo.z_m, a + b * s + c * s**2 + d * s**3, rtol=1e-13)
    np.testing.assert_allclose(geo.grade, b + 2 * c * s + 3 * d * s**2, rtol=1e-10, atol=1e-15)


def test_geo_reference_gives_latitude_and_longitude():
    """A transverse Mercator maps its origin (x_0, y_0) = (0, 0) to (lat_0, lon_0) (Snyder
    1987, from memory); the demo's geoReference puts lat_0 -47.5, lon_0 -135.25 there, and its
    road 1 starts at plan (0, 0)."""
    geo = read_opendrive(DEMO, lane=0).geometry
    lat, lon = geo.latlon()
    assert lat[0] == pytest.approx(-47.5, abs=1e-9)
    assert lon[0] == pytest.approx(-135.25, abs=1e-9)


def test_a_road_that_returns_to_its_start_is_a_loop(tmp_path):
    """A road of two half-circle arcs (R 50 m) linked to itself: the lane centre 1.75 m
    outside is a circle of R 51.75 m (ASAM OpenDRIVE 1.6 section 9.5 widths along t), closed:
    its length is 2 pi (R - t) and its last node is its first (the node convention of
    curvespeed's Geometry)."""
    r = 50.0
    half = math.pi * r
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, half, f'<arc curvature="{1 / r!r}"/>')
                         + geometry(half, 0.0, 2 * r, math.pi, half,
                                    f'<arc curvature="{1 / r!r}"/>'), 2 * half,
                         links='<successor elementType="road" elementId="1" '
                               'contactPoint="start"/>'))
    geo = _path(tmp_path, text, lane=-1).geometry
    assert geo.closed
    assert geo.length_m == pytest.approx(2 * math.pi * (r + 1.75), rel=1e-12)
    assert (geo.x_m[-1], geo.y_m[-1]) == (geo.x_m[0], geo.y_m[0])
    assert geo.total_turning_rad() == pytest.approx(2 * math.pi, rel=1e-12)
    open_geo = _path(tmp_path, text, lane=-1, closed=False).geometry
    assert not open_geo.closed


def test_user_stations_follow_the_lane_not_the_reference_line(tmp_path):
    """On an arc of R 60 m, lane -1 (t = -1.75 m) is longer than the reference line by the
    factor (R - t) / R (circle geometry): a speed record from s = 30 m on the road starts at
    station 30 (R - t) / R on the lane."""
    radius, angle = 60.0, 1.0
    extra = ('<type s="0" type="rural"><speed max="20" unit="m/s"/></type>'
             '<type s="30" type="town"><speed max="10" unit="m/s"/></type>')
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, radius * angle,
                                     f'<arc curvature="{1 / radius!r}"/>'), radius * angle,
                         extra=extra))
    zones = sorted(_path(tmp_path, text, lane=-1).zones, key=lambda z: z.start_m)
    factor = (radius + 1.75) / radius
    assert zones[0].end_m == pytest.approx(30.0 * factor, rel=1e-12)
    assert zones[1].start_m == pytest.approx(30.0 * factor, rel=1e-12)
    assert zones[1].end_m == pytest.approx(radius * angle * factor, rel=1e-12)


def test_roads_that_do_not_meet_are_reported(tmp_path):
    """Road 2 is linked to road 1's end but starts 0.5 m to the side of it: the path would
    jump, and the warning says by how much (ASAM OpenDRIVE 1.6 section 8.2 expects linked
    roads to meet)."""
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, "<line/>"), 50.0,
                         links='<successor elementType="road" elementId="2" '
                               'contactPoint="start"/>'),
                    road(2, geometry(0.0, 50.0, 0.5, 0.0, 30.0, "<line/>"), 30.0,
                         links='<predecessor elementType="road" elementId="1" '
                               'contactPoint="end"/>'))
    with pytest.warns(CurvespeedWarning, match=r"ends 0\.500 m in plan .* the path jumps"):
        _path(tmp_path, text, roads=["1", "2"], lane=0)


def test_demo_elements_end_where_the_next_begins():
    """Each demo element's start point was integrated by scipy's adaptive quadrature in the
    generator (routes/make_demo_network.py); curvespeed's own evaluation of the element before
    it (Gauss-Legendre, closed-form headings, arc-length inversion for poly3) must end there.
    Tolerance 1e-7 m: both integrals are converged far below it (quad asked for 1e-12
    absolute), and the file rounds to 17 significant digits."""
    from curvespeed.io.opendrive import parse_opendrive

    network = parse_opendrive(DEMO.read_bytes(), str(DEMO))
    checked = 0
    for rd in network.roads.values():
        ref = rd.reference
        for k in range(1, len(ref.curves)):
            end = ref.curves[k - 1].evaluate(np.array([ref.curves[k - 1].length_m]))
            start = ref.curves[k].evaluate(np.array([0.0]))
            assert abs(end.x_m[0] - start.x_m[0]) < 1e-7 and abs(end.y_m[0] - start.y_m[0]) < 1e-7
            assert abs(end.heading_rad[0] - start.heading_rad[0]) < 1e-9
            checked += 1
    assert checked >= 12


def test_demo_file_is_what_its_generator_writes():
    """routes/proving_ground.xodr is reproducible from its generator, byte for byte."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_demo_network",
                                                  DEMO.parent / "make_demo_network.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert module.build() == DEMO.read_text(encoding="utf-8")
