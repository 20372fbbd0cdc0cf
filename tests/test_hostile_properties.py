"""Certificate tests with random input: readers, geometry, profile files and planned limits.

Hypothesis draws the cases (``derandomize=True``: the same cases on every run). Each property is
checked against something that does not depend on the code under test:

* readers: a random plausible polyline written as CSV, GeoJSON or GPX reads back with every
  point and every chord length (a distance between two points, which no projection centre or
  file format may change beyond the rounding of the written coordinates), and fits to a
  geometry with finite curvature; a file cut off at any byte gives a route or a curvespeed
  error, never another exception;
* profile files: a profile written and read back with the table reader gives every number to
  the precision it was printed with (re-printing the value read gives the same text);
* planned profiles: speeds, lateral acceleration, the comfort ellipse and the friction circle
  recomputed here from the profile's speeds and the geometry's curvature stay within the limits
  the profile was planned for, at every node, and the peaks the profile reports are the peaks
  of its own columns.

Every route and limit here is invented by the strategies below.
"""

from __future__ import annotations

import dataclasses
import json
import math
import warnings

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from curvespeed.errors import CurvespeedError, CurvespeedWarning
from curvespeed.geodesy import LocalProjection
from curvespeed.geometry import build_geometry
from curvespeed.io import read_route
from curvespeed.io._format import format_column
from curvespeed.io.profile_csv import profile_columns, write_profile_csv
from curvespeed.io.table_csv import read_table_csv
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop
from curvespeed.planner import CONVEX_TOLERANCE, plan_profile
from curvespeed.solvers import SolverKind
from helpers import geometry_from_curvature

CASES = settings(derandomize=True, max_examples=30, deadline=None,
                 suppress_health_check=[HealthCheck.function_scoped_fixture])
FEW = settings(derandomize=True, max_examples=25, deadline=None,
               suppress_health_check=[HealthCheck.function_scoped_fixture])

#: Open-ocean origin for the invented geographic polylines, degrees.
LAT0, LON0 = 12.5, -150.0
#: Coordinates are written with 9 decimals of a degree (1.1e-4 m of latitude) or 4 decimals of
#: a metre; a chord between two rounded points can change by at most the sum of the two
#: rounding errors (2 * 0.5 * 1.1e-4 * sqrt(2) m ~ 1.6e-4 m). Each file's own projection is
#: centred on its points, within ~1 km of them; transverse Mercator's scale there differs from
#: 1 by (1 km / 6371 km)^2 / 2 ~ 1.2e-8, i.e. 1.2e-7 m on a 10 m chord. 5e-4 m covers both.
CHORD_ATOL_M = 5e-4


# ------------------------------------------------------------------------------ strategies

@st.composite
def polylines(draw):
    """Plausible open road polylines: steps 1-10 m, turns at most 30 degrees."""
    n = draw(st.integers(min_value=3, max_value=60))
    rng = np.random.default_rng(draw(st.integers(min_value=0, max_value=2**32 - 1)))
    steps = rng.uniform(1.0, 10.0, n - 1)
    turns = rng.uniform(-1.0, 1.0, n - 2) * math.radians(draw(st.sampled_from([2.0, 10.0, 30.0])))
    heading = rng.uniform(-math.pi, math.pi) + np.concatenate(([0.0], np.cumsum(turns)))
    x = np.concatenate(([0.0], np.cumsum(steps * np.cos(heading))))
    y = np.concatenate(([0.0], np.cumsum(steps * np.sin(heading))))
    rise = steps * rng.uniform(-0.08, 0.08, n - 1)
    z = np.round(100.0 + np.concatenate(([0.0], np.cumsum(rise))), 2)     # written to 1 cm
    return x, y, z


def write_route(folder, kind: str, x, y, z) -> tuple:
    """Write the polyline in one format; return the path and the written (rounded) points."""
    if kind == "csv":
        xr, yr = np.round(x, 4), np.round(y, 4)
        rows = "".join(f"{a:.4f},{b:.4f},{c:.2f}\n" for a, b, c in zip(xr, yr, z))
        path = folder / "r.csv"
        path.write_text("x_m,y_m,z_m\n" + rows, encoding="utf-8")
        return path, xr, yr
    origin = LocalProjection(LAT0, LON0)
    lat, lon = origin.to_latlon(x, y)
    lat, lon = np.round(lat, 9), np.round(lon, 9)
    xr, yr = origin.to_metres(lat, lon)
    if kind == "geojson":
        coords = [[float(b), float(a), float(c)] for a, b, c in zip(lat, lon, z)]
        path = folder / "r.geojson"
        path.write_text(json.dumps({"type": "LineString", "coordinates": coords}),
                        encoding="utf-8")
    else:
        pts = "".join(f'<trkpt lat="{a:.9f}" lon="{b:.9f}"><ele>{c:.2f}</ele></trkpt>'
                      for a, b, c in zip(lat, lon, z))
        path = folder / "r.gpx"
        path.write_text('<?xml version="1.0"?>\n<gpx version="1.1" creator="tests" '
                        'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>'
                        f"{pts}</trkseg></trk></gpx>\n", encoding="utf-8")
    return path, xr, yr


def chords(x, y):
    return np.hypot(np.diff(x), np.diff(y))


# ----------------------------------------------------------------------- readers and geometry

@CASES
@given(polylines(), st.sampled_from(["csv", "geojson", "gpx"]))
def test_random_polylines_read_back_and_fit_with_finite_curvature(tmp_path, line, kind):
    x, y, z = line
    path, xr, yr = write_route(tmp_path, kind, x, y, z)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        route = read_route(path)
        geometry = build_geometry(route, spacing_m=1.0, position_noise_m=0.05)
    assert all(issubclass(w.category, CurvespeedWarning) for w in caught), \
        [str(w.message) for w in caught]
    assert route.n_points == x.size
    np.testing.assert_allclose(chords(route.x_m, route.y_m), chords(xr, yr), rtol=0,
                               atol=CHORD_ATOL_M)
    np.testing.assert_allclose(route.z_m, np.round(z, 2), rtol=0, atol=1e-9)
    for values in (geometry.curvature_1pm, geometry.heading_rad, geometry.x_m, geometry.y_m,
                   geometry.grade):
        assert np.all(np.isfinite(values))
    # a curve through the points is never shorter than the polyline's end-to-end distance
    assert geometry.length_m >= math.hypot(xr[-1] - xr[0], yr[-1] - yr[0]) - 0.1


@CASES
@given(polylines(), st.sampled_from(["csv", "geojson", "gpx"]), st.floats(0.0, 1.0))
def test_a_file_cut_off_anywhere_reads_or_is_refused(tmp_path, line, kind, where):
    x, y, z = line
    path, _, _ = write_route(tmp_path, kind, x, y, z)
    data = path.read_bytes()
    path.write_bytes(data[: int(where * len(data))])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurvespeedWarning)
        try:
            route = read_route(path)
        except CurvespeedError as exc:
            message = str(exc)
            assert message.startswith(str(path)) and "\n" not in message
            return
    # what was read is a prefix of the route: every point read is one that was written
    assert 3 <= route.n_points <= x.size


# ------------------------------------------------------------------------ profile round trip

@st.composite
def small_geometries(draw):
    """Short invented routes from curvature: arcs of 25-400 m radius between straights."""
    ds = draw(st.sampled_from([0.5, 1.0, 2.0]))
    pieces = draw(st.lists(st.tuples(st.sampled_from([0.0, 1 / 25, 1 / 80, 1 / 400]),
                                     st.sampled_from([-1.0, 1.0]), st.integers(10, 60)),
                           min_size=1, max_size=4))
    kappa = np.concatenate([np.full(m, sign * k) for k, sign, m in pieces] + [[0.0]])
    grade = draw(st.sampled_from([None, 0.03, -0.05]))
    geo = geometry_from_curvature(kappa, ds=ds, grade=grade, name="invented")
    if draw(st.booleans()):
        geo = dataclasses.replace(geo, projection=LocalProjection(LAT0, LON0))
    return geo


@CASES
@given(small_geometries())
def test_profile_written_then_read_is_lossless_to_the_printed_precision(tmp_path, geo):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurvespeedWarning)
        profile = plan_profile(geo, Limits(max_jerk_mps3=None), solver=SolverKind.ENVELOPE)
    path = tmp_path / "p.csv"
    write_profile_csv(profile, path, force=True)
    table = read_table_csv(path)
    columns = profile_columns(profile)
    assert list(table.columns) == list(columns)
    for name, (values, spec) in columns.items():
        read = table.columns[name]
        if spec == "s":
            assert list(read) == [str(v) for v in values]
            continue
        decimals = int(spec.strip(".f"))
        # within half a unit of the last printed digit, plus the spacing of doubles at the
        # largest magnitude in the column (the value read is the double nearest the text)
        atol = 0.5 * 10.0 ** -decimals + 4 * np.spacing(max(np.abs(values).max(), 1.0))
        np.testing.assert_allclose(read, np.asarray(values, dtype=float), rtol=0, atol=atol)
        # printing what was read gives back the same text: nothing lost, nothing invented
        text = [line.split(",")[list(columns).index(name)]
                for line in path.read_text().splitlines()[1:]]
        assert format_column(read, spec) == text


# ------------------------------------------------------------- planned profiles keep limits

@st.composite
def planning_cases(draw):
    geo = draw(small_geometries())
    geo = dataclasses.replace(geo, z_m=None, grade=None)       # flat: textbook limits apply
    limits = Limits(
        friction_coefficient=draw(st.sampled_from([0.3, 0.5, 0.8])),
        max_lateral_accel_mps2=draw(st.sampled_from([1.5, 2.5, 3.5])),
        max_accel_mps2=draw(st.sampled_from([1.0, 2.0])),
        max_decel_mps2=draw(st.sampled_from([1.5, 3.0])),
        max_speed_mps=draw(st.sampled_from([8.0, 15.0, 30.0])),
        max_jerk_mps3=draw(st.sampled_from([None, 1.0, 2.5])))
    length = geo.length_m
    stops, zones = (), ()
    if draw(st.booleans()):
        k = draw(st.integers(int(0.3 * (geo.n_nodes - 1)), int(0.7 * (geo.n_nodes - 1))))
        stops = (Stop(float(geo.station_m[k]), origin="test"),)
    if draw(st.booleans()):
        a = draw(st.floats(0.0, 0.6)) * length
        zones = (SpeedZone(a, a + 0.3 * length, draw(st.sampled_from([3.0, 6.0])),
                           origin="test"),)
    return geo, limits, RouteConstraints(zones=zones, stops=stops)


@FEW
@given(planning_cases(), st.sampled_from([0.3, 1.0]))
def test_lateral_jerk_bound_is_kept_on_random_routes(case, bound):
    # Curvature here jumps between arcs and straights, the hardest case for the bound: the
    # step across a jump must be slow enough that kappa v^2 changes within bound * step time.
    geo, limits, constraints = case
    limits = limits.replace(max_lateral_jerk_mps3=bound)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurvespeedWarning)
        p = plan_profile(geo, limits, constraints)
    v, s = p.speed_mps, geo.station_m
    step_time = np.where(p.rest_step, p.rest_time_coef, 2.0) * np.diff(s) / (v[:-1] + v[1:])
    rate = np.diff(geo.curvature_1pm * v * v) / step_time
    assert np.abs(rate).max() <= bound * (1 + CONVEX_TOLERANCE)
    assert p.usage["lateral_jerk"] <= 1 + CONVEX_TOLERANCE


@FEW
@given(planning_cases())
def test_planned_profile_keeps_every_limit_it_reports(case):
    geo, limits, constraints = case
    solver = SolverKind.ENVELOPE if limits.max_jerk_mps3 is None else SolverKind.CONVEX
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CurvespeedWarning)
        p = plan_profile(geo, limits, constraints, solver=solver)
    # The convex solver's answers are verified to 1e-4 of each limit (planner.CONVEX_TOLERANCE);
    # the envelope's to 1e-6 (verify.DEFAULT_TOLERANCE). Use the looser for both.
    tol = CONVEX_TOLERANCE
    v, kappa, g = p.speed_mps, geo.curvature_1pm, limits.gravity_mps2
    b = v * v
    assert np.all(v >= 0.0)
    assert v.max() <= limits.max_speed_mps * (1 + tol)
    # lateral acceleration v^2 / R (point mass on a circle, textbook), under both the comfort
    # cap and, on this flat unbanked route, the friction circle mu g
    lateral = np.abs(kappa) * b
    assert lateral.max() <= limits.max_lateral_accel_mps2 * (1 + tol)
    assert lateral.max() <= limits.mu_lat * g * (1 + tol)
    # uniform acceleration over each step: v'^2 = v^2 + 2 a ds; for steps not next to rest
    # (those follow the jerk-limited start, see problem.py) the comfort ellipse
    # (a/A)^2 + (a_lat/A_lat)^2 <= 1 and the friction circle a^2 + a_lat^2 <= (mu g)^2 hold
    # at both ends of the step
    a = np.diff(b) / (2.0 * geo.spacing_m)
    moving = (v[:-1] > 0) & (v[1:] > 0)
    cap = np.where(a >= 0.0, limits.max_accel_mps2, limits.max_decel_mps2)
    for end in (lateral[:-1], lateral[1:]):
        comfort = np.hypot(a / cap, end / limits.max_lateral_accel_mps2)
        grip = np.hypot(a, end) / (limits.mu_long * g)
        assert np.all(comfort[moving] <= 1 + tol) and np.all(grip[moving] <= 1 + tol)
    for stop in constraints.stops:
        assert v[int(round(stop.station_m / geo.spacing_m))] == 0.0
    for zone in constraints.zones:
        inside = (geo.station_m >= zone.start_m) & (geo.station_m <= zone.end_m)
        assert np.all(v[inside] <= zone.max_speed_mps * (1 + tol))
    if limits.max_jerk_mps3 is not None:
        assert np.abs(p.jerk_mps3).max() <= limits.max_jerk_mps3 * (1 + tol)
    # what the profile reports about itself
    assert max(p.usage.values()) <= 1 + tol
    # (v * v and the b it came from differ by round-off only)
    assert math.isclose(p.extremes["lateral_accel_mps2"], np.abs(p.lat_accel_mps2).max(),
                        rel_tol=1e-12, abs_tol=1e-12)
    assert np.all(v <= p.limit_speed_mps * (1 + tol) + 1e-9)
