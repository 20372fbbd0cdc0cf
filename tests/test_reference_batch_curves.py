"""The curves layer of a batch run against closed forms and a reference geodesic library.

Road (invented): a straight of 200 m, a circular arc of radius 200 m turning 90 degrees, and a
straight of 200 m, given as exact points every 1 m in WGS84 (placed with the package's local
projection around an invented origin at sea). Checks:

* the layer holds one curve, left-hand, whose smallest radius is the arc's (closed form: a
  circle's curvature is 1/R);
* the curve's LineString, measured on the WGS84 ellipsoid by pyproj's ``Geod.line_length``
  (reference library: Karney's geodesics), is as long as the curve's station span;
* its first and last positions are the exact road's points at the start and end stations.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from benchmarks._network import write_geojson
from curvespeed.batch import BatchSettings, BatchStore, run_batch
from curvespeed.geodesy import LocalProjection
from curvespeed.io.network import FieldMap, iter_specs
from curvespeed.limits import DEFAULT_LIMITS

RADIUS_M = 200.0
STRAIGHT_M = 200.0
ORIGIN = LocalProjection(-30.0, -20.0)


def exact_point(s: float) -> tuple[float, float]:
    """The exact road's point at arc length ``s``, local metres."""
    if s <= STRAIGHT_M:
        return s, 0.0
    arc = 0.5 * math.pi * RADIUS_M
    if s <= STRAIGHT_M + arc:
        a = (s - STRAIGHT_M) / RADIUS_M
        return STRAIGHT_M + RADIUS_M * math.sin(a), RADIUS_M * (1.0 - math.cos(a))
    return STRAIGHT_M + RADIUS_M, RADIUS_M + (s - STRAIGHT_M - arc)


@pytest.fixture(scope="module")
def curves(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("arc")
    total = 2 * STRAIGHT_M + 0.5 * math.pi * RADIUS_M
    x, y = np.array([exact_point(s) for s in np.arange(0.0, total, 1.0)]).T
    lat, lon = ORIGIN.to_latlon(x, y)
    net = write_geojson(tmp / "arc.geojson", [{
        "type": "Feature", "properties": {"road_id": "ARC"},
        "geometry": {"type": "LineString", "coordinates": np.column_stack([lon, lat]).tolist()}}])
    store = BatchStore(tmp / "out", "check")
    store.open()
    run_batch(iter_specs([net], FieldMap(id_field="road_id")),
              BatchSettings("check", DEFAULT_LIMITS), store)
    return json.loads((store.outdir / "curves.geojson").read_text())["features"]


def test_one_left_curve_with_the_arcs_radius(curves):
    (curve,) = curves
    props = curve["properties"]
    assert props["route_id"] == "ARC" and props["curve"] == 1
    assert props["direction"] == "left"
    # Well inside the arc the fit's curvature on exact 1 m points matches 1/R to about 0.1 %
    # (the circles of test_reference_geometry); 0.5 % leaves room for the arc's ends, where the
    # fit smooths the jump of curvature from 0 to 1/R.
    assert props["min_radius_m"] == pytest.approx(RADIUS_M, rel=5e-3)
    assert props["start_m"] <= props["apex_m"] <= props["end_m"]


def test_the_curve_line_is_as_long_as_its_stations_on_the_ellipsoid(curves):
    from pyproj import Geod

    (curve,) = curves
    lon, lat = np.array(curve["geometry"]["coordinates"]).T
    length = Geod(ellps="WGS84").line_length(lon, lat)
    span = curve["properties"]["end_m"] - curve["properties"]["start_m"]
    # The local projection stretches lengths by at most 1e-4 within 90 km of its centre
    # (curvespeed.geodesy.SCALE_TOLERANCE; the road is 600 m from it), and the positions are
    # written to 1e-9 degree (0.1 mm): 1e-4 of the span plus 1 mm.
    assert length == pytest.approx(span, rel=1e-4, abs=1e-3)


def test_the_curve_line_starts_and_ends_on_the_exact_road(curves):
    (curve,) = curves
    lon, lat = np.array(curve["geometry"]["coordinates"]).T
    x, y = ORIGIN.to_metres(lat[[0, -1]], lon[[0, -1]])
    for k, station in ((0, curve["properties"]["start_m"]), (1, curve["properties"]["end_m"])):
        ex, ey = exact_point(station)
        # the fitted path's stations follow the exact arc length to a few millimetres on exact
        # points (3 mm at both ends when this was written: the fit's length and its offset from
        # the exact path where the curvature jumps); 1 cm bounds that with room for round-off
        assert math.hypot(x[k] - ex, y[k] - ey) < 0.01
