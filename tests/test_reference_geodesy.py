"""Reference tests: the local projection used for geographic routes against pyproj's geodesics.

Reference: ``pyproj.Geod(ellps="WGS84")`` (GeographicLib geodesic algorithms, Karney 2013),
accurate to nanometres. Lengths are compared chord to chord (the polyline through the same
points on both sides), so only the projection is under test, not any curve fitting.
"""

from __future__ import annotations

import numpy as np
import pytest
from pyproj import Geod

from curvespeed.geodesy import LocalProjection
from curvespeed.io import read_route

GEOD = Geod(ellps="WGS84")

# Smallest radius of curvature on the WGS84 ellipsoid: the meridian radius at the equator,
# a (1 - e^2). Using it in the scale bound below makes the bound conservative everywhere.
WGS84_A_M = 6378137.0
WGS84_E2 = 6.69437999014e-3
R_MIN_M = WGS84_A_M * (1.0 - WGS84_E2)


def tmerc_scale_excess_bound(x_m: np.ndarray) -> float:
    """Upper bound on the transverse Mercator point scale minus 1 at east offsets ``x_m``.

    Point scale of the transverse Mercator with k0 = 1 grows as 1 + x^2 / (2 R^2) + O(x^4/R^4)
    away from the central meridian (Snyder, Map Projections - A Working Manual, USGS
    Professional Paper 1395, 1987, ch. 8, series for k; from memory). With R the smallest
    radius of curvature and a 1 % allowance for the fourth-order term (~1e-11 at 30 km) this
    bounds the length error of any chord in the frame.
    """
    x_max = float(np.max(np.abs(x_m)))
    return 1.01 * x_max**2 / (2.0 * R_MIN_M**2)


def invented_route(lat0, lon0, azimuth0, n, step_m, turn_deg_per_step):
    """An invented winding route: n points, step_m apart along geodesics, heading varying."""
    lat, lon = [lat0], [lon0]
    az = azimuth0
    for k in range(n - 1):
        az += turn_deg_per_step * np.sin(k / 40.0)
        lo, la, _ = GEOD.fwd(lon[-1], lat[-1], az, step_m)
        lat.append(la)
        lon.append(lo)
    return np.array(lat), np.array(lon)


def write_latlon_csv(path, lat, lon):
    rows = "".join(f"{a!r},{b!r}\n" for a, b in zip(lat.tolist(), lon.tolist()))
    path.write_text("# invented route for a projection test\nlat,lon\n" + rows, encoding="utf-8")


def test_long_route_at_high_latitude_matches_geodesic_length(tmp_path):
    # ~48 km at 68-69 N, winding north-east (invented).
    lat, lon = invented_route(68.2, 19.0, 40.0, n=481, step_m=100.0, turn_deg_per_step=1.5)
    path = tmp_path / "north.csv"
    write_latlon_csv(path, lat, lon)
    route = read_route(path)

    reference_m = GEOD.line_length(lon, lat)
    projected_m = float(route.chord_stations()[-1])
    assert 30e3 < reference_m < 60e3 and lat.min() > 65.0
    rel = (projected_m - reference_m) / reference_m
    # Required: within 0.1 % of the geodesic length.
    assert abs(rel) <= 1e-3
    # Tighter, from the projection itself: scale >= 1 everywhere (lengths never shrink) and
    # at most the point scale at the farthest east-west offset. 1e-9 allows for round-off
    # in summing 480 chords.
    bound = tmerc_scale_excess_bound(route.x_m)
    assert -1e-9 <= rel <= bound + 1e-9, (rel, bound)


def test_route_across_the_antimeridian(tmp_path):
    # Invented route near 66 S heading east across longitude 180.
    lat, lon = invented_route(-66.0, 179.8, 80.0, n=121, step_m=100.0, turn_deg_per_step=1.0)
    lon = (lon + 180.0) % 360.0 - 180.0  # written as -180..180, so it jumps from +180 to -180
    assert lon.max() > 179.0 and lon.min() < -179.0
    path = tmp_path / "dateline.csv"
    write_latlon_csv(path, lat, lon)
    route = read_route(path)
    reference_m = GEOD.line_length(lon, lat)
    projected_m = float(route.chord_stations()[-1])
    rel = (projected_m - reference_m) / reference_m
    assert -1e-9 <= rel <= tmerc_scale_excess_bound(route.x_m) + 1e-9, rel


def test_round_trip_latlon_metres_latlon():
    # A grid about 110 km x 80 km around 68 N, 20 E (wider than routes the tool is meant for).
    lat, lon = np.meshgrid(np.linspace(67.5, 68.5, 21), np.linspace(19.0, 21.0, 21))
    proj = LocalProjection.centred_on(lat.ravel(), lon.ravel())
    x, y = proj.to_metres(lat.ravel(), lon.ravel())
    back_lat, back_lon = proj.to_latlon(x, y)
    # 1e-9 deg is ~0.1 mm, the precision latitude/longitude are written with; pyproj's
    # transverse Mercator series round-trips to ~1e-12 deg this close to the centre.
    np.testing.assert_allclose(back_lat, lat.ravel(), rtol=0, atol=1e-9)
    np.testing.assert_allclose(back_lon, lon.ravel(), rtol=0, atol=1e-9)


def test_local_scale_one_km_east_west_at_60_north():
    lat0, lon0 = 60.0, 15.0
    proj = LocalProjection(lat0, lon0)  # central meridian through the segment's middle
    # Half a kilometre each side along the parallel: dlon from the parallel's radius N cos(lat).
    n_m = WGS84_A_M / np.sqrt(1.0 - WGS84_E2 * np.sin(np.radians(lat0)) ** 2)
    half_dlon = np.degrees(500.0 / (n_m * np.cos(np.radians(lat0))))
    lons = np.array([lon0 - half_dlon, lon0 + half_dlon])
    lats = np.array([lat0, lat0])
    _, _, reference_m = GEOD.inv(lons[0], lats[0], lons[1], lats[1])
    assert reference_m == pytest.approx(1000.0, rel=1e-6)  # the segment is 1 km long
    x, y = proj.to_metres(lats, lons)
    chord_m = float(np.hypot(np.diff(x), np.diff(y))[0])
    # Expected excess: scale 1 + x^2/(2R^2) ~ 3e-9 at 500 m from the central meridian; the
    # chord-vs-geodesic difference over 1 km is ~1e-13. 1e-6 leaves a wide margin and is
    # 100 times tighter than the 1e-4 a local frame needs.
    assert chord_m == pytest.approx(reference_m, rel=1e-6)
    assert abs(y[1] - y[0]) < 1e-6  # symmetric about the meridian: the chord is east-west


def write_line(path, lat, lon):
    write_latlon_csv(path, np.asarray(lat, dtype=float), np.asarray(lon, dtype=float))
    return read_route(path)


def test_4450_km_along_the_equator_keeps_its_geodesic_length(tmp_path):
    # A transverse Mercator centred on this route stretched it by 2.1 % (scale
    # 1 + x^2 / (2 R^2) reaches 1.06 at 2,225 km from the central meridian). Along the
    # equator the oblique Mercator's central line is the equator itself, scale 1: the chord
    # sum must match the geodesic polyline to the 1e-4 a local frame is good for.
    lon = np.linspace(0.0, 40.0, 4001)
    lat = np.zeros_like(lon)
    route = write_line(tmp_path / "equator.csv", lat, lon)
    reference_m = GEOD.line_length(lon, lat)
    assert reference_m == pytest.approx(4.4528e6, rel=1e-3)
    assert abs(route.chord_stations()[-1] / reference_m - 1.0) <= 1e-4
    assert route.projection.azimuth_deg is not None           # the oblique projection


@pytest.mark.parametrize("lat0", [-70.0, -35.0, 0.0, 45.0, 80.0])
@pytest.mark.parametrize("azimuth", [0.0, 30.0, 60.0, 90.0, 120.0, 150.0])
def test_2000_km_geodesics_in_every_direction_keep_their_length(lat0, azimuth, tmp_path):
    # Invented 2,000 km geodesics (pyproj's Geod.fwd) through (lat0, 20 E), one point every
    # 10 km. Whatever their direction the projection keeps them within 1e-4 of the geodesic
    # polyline (measured: below 3e-7); the transverse Mercator alone was off by up to 1.2 %.
    lon, lat, _ = GEOD.fwd(np.full(201, 20.0), np.full(201, lat0), np.full(201, azimuth),
                           np.linspace(-1e6, 1e6, 201))
    route = write_line(tmp_path / "line.csv", lat, lon)
    assert abs(route.chord_stations()[-1] / GEOD.line_length(lon, lat) - 1.0) <= 1e-4


def test_oblique_projection_round_trips_and_keeps_north_up():
    # latitude/longitude -> metres -> latitude/longitude to 1e-9 degree (0.1 mm, the precision
    # they are written with); north is +y at the centre, as for the transverse Mercator
    proj = LocalProjection(60.0, 20.0, -60.0)
    lon, lat, _ = GEOD.fwd(np.full(51, 20.0), np.full(51, 60.0), np.full(51, 120.0),
                           np.linspace(-1e6, 1e6, 51))
    x, y = proj.to_metres(lat, lon)
    back_lat, back_lon = proj.to_latlon(x, y)
    np.testing.assert_allclose(back_lat, lat, rtol=0, atol=1e-9)
    np.testing.assert_allclose(back_lon, lon, rtol=0, atol=1e-9)
    x0, y0 = proj.to_metres(60.0, 20.0)
    xn, yn = proj.to_metres(60.001, 20.0)
    assert abs(x0) < 1e-6 and abs(y0) < 1e-6
    assert abs(xn - x0) < 1e-6 * (yn - y0)       # straight up to 1 micro-radian


def test_short_routes_keep_the_transverse_mercator():
    # a route within 80 km of its central meridian is projected as before (same bytes out)
    lat = np.linspace(68.0, 69.0, 50)
    lon = np.linspace(19.0, 20.5, 50)
    proj = LocalProjection.centred_on(lat, lon)
    assert proj.azimuth_deg is None and proj.to_dict()["kind"] == "transverse_mercator_wgs84"
