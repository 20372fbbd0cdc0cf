"""Stops given by position, snapped to the route, against pyproj's geodesics (Karney's
algorithms on the WGS84 ellipsoid, pyproj.Geod) and plane closed forms.

The routes are invented: a straight geodesic and a circle near an arbitrary point, written as
GeoJSON (lon, lat) or metric CSV.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from pyproj import Geod

from curvespeed.cli.main import cli
from curvespeed.io.table_csv import read_table_csv

GEOD = Geod(ellps="WGS84")
LAT0, LON0 = 47.0, 8.0          # an arbitrary point; the route there is invented
AZIMUTH = 30.0                  # the route's direction, degrees from north


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def geodesic_route(folder: Path, length: float = 1000.0, step: float = 5.0) -> Path:
    """A straight geodesic from (LAT0, LON0) toward AZIMUTH, a point every ``step`` metres."""
    d = np.arange(0.0, length + step / 2, step)
    lon, lat, _ = GEOD.fwd(np.full(d.size, LON0), np.full(d.size, LAT0),
                           np.full(d.size, AZIMUTH), d)
    path = folder / "line.geojson"
    path.write_text(json.dumps({"type": "Feature", "properties": {"name": "invented"},
                                "geometry": {"type": "LineString",
                                             "coordinates": [[a, b] for a, b in zip(lon, lat)]}}))
    return path


def beside(along: float, off: float) -> tuple[float, float]:
    """(lat, lon) ``off`` metres to the right of the route at ``along`` metres along it."""
    lon, lat, back = GEOD.fwd(LON0, LAT0, AZIMUTH, along)
    # the route's forward azimuth there is the back azimuth turned round
    ahead = back + 180.0
    lon2, lat2, _ = GEOD.fwd(lon, lat, ahead + 90.0, off)
    return lat2, lon2


def sidecar_stops(out: Path) -> list[dict]:
    return json.loads(out.with_suffix(".meta.json").read_text())["constraints"]["stops"]


@pytest.mark.parametrize("along, off", [(400.0, 12.0), (731.3, 3.0), (150.0, 0.0)])
def test_latlon_stop_lands_where_the_geodesic_says(tmp_path, along, off):
    route = geodesic_route(tmp_path)
    lat, lon = beside(along, off)
    limits = tmp_path / "limits.toml"
    limits.write_text(f'[limits]\n[[stop]]\nlat = {lat!r}\nlon = {lon!r}\nname = "halt"\n'
                      "dwell_s = 25\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert result.exit_code == 0, result.output
    (stop,) = sidecar_stops(out)
    # Station: the geodesic distance from the start to the foot of the perpendicular. The
    # local projection stretches lengths by under 1e-4 (curvespeed.geodesy) and the fit of
    # points lying on a geodesic is exact to well under a centimetre: 1e-4 * 1000 m = 0.1 m.
    assert stop["station_m"] == pytest.approx(along, abs=0.1)
    # Distance: the geodesic distance from the given point to the route, ``off`` by
    # construction; the perpendicular foot found in the plane is within mm of the geodesic one
    # over a few metres (projection scale 1e-4 * 12 m, fit well under 1 cm): 1 cm.
    assert stop["snap_distance_m"] == pytest.approx(off, abs=0.01)
    assert stop["name"] == "halt" and stop["dwell_s"] == 25.0
    line = next(x for x in result.output.splitlines() if x.startswith("stop"))
    assert "'halt'" in line and f"{off:.2f} m from the route" in line
    # the plan is at rest there: the profile's speed is zero at the nearest station
    columns = read_table_csv(out).columns
    k = int(np.argmin(np.abs(columns["station_m"] - stop["station_m"])))
    assert columns["speed_mps"][k] == 0.0


def test_latlon_stop_from_the_command_line(tmp_path):
    route = geodesic_route(tmp_path)
    lat, lon = beside(500.0, 5.0)
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out, "--stop-latlon", f"{lat!r}:{lon!r}")
    assert result.exit_code == 0, result.output
    (stop,) = sidecar_stops(out)
    assert stop["station_m"] == pytest.approx(500.0, abs=0.1)     # as above
    assert stop["snap_distance_m"] == pytest.approx(5.0, abs=0.01)
    assert stop["origin"].startswith("--stop-latlon")


def test_a_point_far_from_the_route_is_refused_with_its_geodesic_distance(tmp_path):
    route = geodesic_route(tmp_path)
    lat, lon = beside(300.0, 40.0)
    limits = tmp_path / "limits.toml"
    limits.write_text(f"[limits]\n[[stop]]\nlat = {lat!r}\nlon = {lon!r}\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert result.exit_code == 2, result.output
    error = next(x for x in result.output.splitlines() if x.startswith("error:"))
    assert str(limits) in error and "[[stop]] #1" in error
    assert "40.0 m from the route" in error and "farther than the 25 m" in error
    assert "station 300.0 m" in error
    assert not out.exists() and not out.with_suffix(".meta.json").exists()


def circle_route(folder: Path, radius: float = 100.0) -> Path:
    t = np.linspace(0.0, 2 * math.pi, 629)[:-1]
    path = folder / "circle.csv"
    path.write_text("x_m,y_m\n" + "".join(f"{radius * math.cos(a):.4f},{radius * math.sin(a):.4f}\n"
                                          for a in t))
    return path


def test_xy_stops_on_a_circle_snap_along_the_radius(tmp_path):
    # Plane closed form: the nearest point of a circle of radius R centred at the origin to a
    # point at distance r from the centre lies on the same ray, |r - R| away; two such points
    # are R * (difference of their angles) apart along the circle.
    route = circle_route(tmp_path)
    points = [(math.radians(50.0), 108.0), (math.radians(140.0), 95.0)]
    args = []
    for angle, r in points:
        args += ["--stop-xy", f"{r * math.cos(angle):.4f}:{r * math.sin(angle):.4f}"]
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out, *args)
    assert result.exit_code == 0, result.output
    first, second = sidecar_stops(out)
    # the resampled polyline's chords (about 1 m) sit inside the circle by at most
    # s^2 / (8 R) = 1.3 mm, and the fit of points on the circle is exact to about 1 mm: 5 mm
    assert first["snap_distance_m"] == pytest.approx(8.0, abs=5e-3)
    assert second["snap_distance_m"] == pytest.approx(5.0, abs=5e-3)
    # Arc between them: R * 90 degrees = 157.08 m. The polyline through 1 m chords is shorter
    # than the arc by s^2 / (24 R^2) = 4e-6 of its length and the fit's length agrees with
    # 2 pi R to the displayed 0.1 m: 1 cm over 157 m.
    assert second["station_m"] - first["station_m"] == pytest.approx(100.0 * math.pi / 2,
                                                                       abs=0.01)


def test_latlon_zone_runs_between_the_stations_the_geodesic_gives(tmp_path):
    route = geodesic_route(tmp_path)
    (a_lat, a_lon), (b_lat, b_lon) = beside(200.0, 4.0), beside(500.0, -6.0)
    limits = tmp_path / "limits.toml"
    limits.write_text(f"[limits]\n[[zone]]\nstart_lat = {a_lat!r}\nstart_lon = {a_lon!r}\n"
                      f"end_lat = {b_lat!r}\nend_lon = {b_lon!r}\nmax_speed_mps = 5\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert result.exit_code == 0, result.output
    (zone,) = json.loads(out.with_suffix(".meta.json").read_text())["constraints"]["zones"]
    # each end as for stops: station to 0.1 m (projection scale 1e-4 over 1 km), the larger
    # geodesic distance (6 m) to 1 cm
    assert zone["start_m"] == pytest.approx(200.0, abs=0.1)
    assert zone["end_m"] == pytest.approx(500.0, abs=0.1)
    assert zone["snap_distance_m"] == pytest.approx(6.0, abs=0.01)
    assert "snapped to stations 200.0..500.0 m" in result.output
    columns = read_table_csv(out).columns
    inside = (columns["station_m"] >= zone["start_m"]) & (columns["station_m"] <= zone["end_m"])
    # the zone binds: the planned speed keeps to 5 m/s inside it (the verifier's 1e-4)
    assert columns["speed_mps"][inside].max() <= 5.0 * (1 + 1e-4)
