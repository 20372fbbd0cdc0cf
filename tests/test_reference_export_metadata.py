"""The export's elevation, pitch, absolute times and local origin against outside references.

- Pitch on a constant grade: ``atan(grade)``, grade being rise over run (the definition of
  grade; station is the distance in plan), elevation linear in station.
- Absolute times: Python's ``datetime`` (ISO 8601 parsing and UTC arithmetic) as the reference
  for the CSV's ``time_utc`` column; GPX 1.1 ``time`` elements in the form the GPX 1.1 schema
  asks for (http://www.topografix.com/GPX/1/1/gpx.xsd, ``wptType/time``: type
  ``xsd:dateTime``, annotated "Date and time in are in Univeral Coordinated Time (UTC), not
  local time! Conforms to ISO 8601 specification for date/time representation. Fractional
  seconds are allowed for millisecond timing in tracklogs."), children of ``wpt``/``trkpt`` in
  the schema's sequence order (``ele`` before ``time`` before ``name``).
- Local origin: pyproj, which maps the sidecar's own projection string's origin ``(0, 0)`` to
  the latitude/longitude the sidecar and the export state, and the exported latitude/longitude
  back to the exported x/y.

Routes are the bundled invented ones and a straight invented ramp.
"""

from __future__ import annotations

import datetime as dt
import json
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.io.table_csv import read_table_csv

ROUTES = Path(__file__).resolve().parent.parent / "routes"
GPX_NS = {"g": "http://www.topografix.com/GPX/1/1"}
START = "2026-12-02T08:00:00+01:00"


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


def numeric_columns(path: Path) -> dict[str, np.ndarray]:
    """The numeric columns of a trajectory CSV (its text columns left out)."""
    import csv

    with open(path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    out = {}
    for name in rows[0]:
        try:
            out[name] = np.array([float(r[name]) for r in rows])
        except ValueError:
            continue
    return out


def planned(folder: Path, route: Path, *args) -> Path:
    profile = folder / f"{route.stem}_profile.csv"
    result = run("plan", route, "-o", profile, *args)
    assert result.exit_code == 0, result.output
    return profile


@pytest.mark.parametrize("grade", [0.04, -0.07])
def test_pitch_on_a_constant_grade_is_atan_of_the_grade(tmp_path, grade):
    route = tmp_path / "ramp.csv"
    route.write_text("x_m,y_m,z_m\n" + "".join(f"{x:.1f},0.0,{100.0 + grade * x:.4f}\n"
                                                for x in range(0, 1001, 5)))
    out = tmp_path / "t.csv"
    result = run("export", planned(tmp_path, route), "-o", out, "--dt", "0.1")
    assert result.exit_code == 0, result.output
    cols = read_table_csv(out).columns
    # grade is written to 1e-6 and pitch to 1e-7 rad: atan'(g) <= 1, so 1e-6 rad holds both
    np.testing.assert_allclose(cols["pitch_rad"], np.arctan(grade), atol=1e-6)
    # elevation linear in station (plan distance): z written to 0.1 mm at the nodes, and the
    # Hermite curve through them is exact on a line; 1e-4 m holds the rounding of both
    np.testing.assert_allclose(cols["elevation_m"], 100.0 + grade * cols["station_m"],
                               atol=1e-4)


def test_a_route_without_elevation_has_no_elevation_columns(tmp_path):
    out = tmp_path / "t.csv"
    result = run("export", planned(tmp_path, ROUTES / "test_loop.geojson"), "-o", out)
    assert result.exit_code == 0, result.output
    header = out.read_text().splitlines()[0].split(",")
    assert "elevation_m" not in header and "pitch_rad" not in header


def test_csv_absolute_times_round_trip_through_datetime(tmp_path):
    out = tmp_path / "t.csv"
    result = run("export", planned(tmp_path, ROUTES / "shuttle_route.gpx"), "-o", out,
                 "--start-time", START, "--dt", "0.07")
    assert result.exit_code == 0, result.output
    rows = out.read_text().splitlines()
    header = rows[0].split(",")
    t_col, utc_col = header.index("time_s"), header.index("time_utc")
    start = dt.datetime.fromisoformat(START)
    assert rows[1].split(",")[utc_col] == "2026-12-02T07:00:00.000000Z"   # 08:00 at +01:00
    for line in rows[1::97] + rows[-1:]:
        cells = line.split(",")
        when = dt.datetime.fromisoformat(cells[utc_col].replace("Z", "+00:00"))
        assert when.utcoffset() == dt.timedelta(0)
        # exactly the written time_s after the start, to the microsecond both are written to
        assert when - start == dt.timedelta(seconds=float(cells[t_col]))


def test_gpx_times_and_elevations_follow_the_gpx_1_1_schema(tmp_path):
    limits = tmp_path / "limits.toml"
    limits.write_text('[limits]\n[[stop]]\nstation_m = 290.0\nname = "Workshops"\n'
                      "dwell_s = 30\n")
    profile = tmp_path / "stops.csv"
    assert run("plan", ROUTES / "shuttle_route.gpx", "-l", limits, "-o", profile).exit_code == 0
    gpx, table = tmp_path / "t.gpx", tmp_path / "t.csv"
    for out, extra in ((gpx, ["--start-time", START]), (table, [])):
        result = run("export", profile, "-o", out, "--dt", "0.5", *extra)
        assert result.exit_code == 0, result.output
    root = ET.parse(gpx).getroot()
    assert root.tag == "{http://www.topografix.com/GPX/1/1}gpx" and root.get("version") == "1.1"
    # gpx children in the schema's sequence: metadata, wpt*, rte*, trk*
    order = [child.tag.split("}")[1] for child in root]
    assert order == ["metadata", "wpt", "trk"]
    points = root.findall("g:trk/g:trkseg/g:trkpt", GPX_NS)
    cols = numeric_columns(table)
    assert len(points) == cols["time_s"].size
    utc = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}Z$")   # xsd:dateTime, UTC
    start = dt.datetime.fromisoformat(START)
    for i in list(range(0, len(points), 53)) + [len(points) - 1]:
        p = points[i]
        assert [c.tag.split("}")[1] for c in p] == ["ele", "time"]       # wptType order
        text = p.find("g:time", GPX_NS).text
        assert utc.match(text), text
        when = dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
        # written to the millisecond: within half of one
        assert abs((when - start).total_seconds() - cols["time_s"][i]) <= 0.5e-3 + 1e-9
        assert float(p.find("g:ele", GPX_NS).text) == pytest.approx(cols["elevation_m"][i],
                                                                   abs=1e-9)
        assert float(p.get("lat")) == pytest.approx(cols["lat"][i], abs=1e-12)
    (stop,) = root.findall("g:wpt", GPX_NS)
    assert [c.tag.split("}")[1] for c in stop] == ["ele", "time", "name", "desc", "type"]
    assert stop.find("g:name", GPX_NS).text == "Workshops"
    assert "dwell 30 s" in stop.find("g:desc", GPX_NS).text


def test_local_origin_is_where_pyproj_puts_the_frames_origin(tmp_path):
    from pyproj import Transformer

    profile = planned(tmp_path, ROUTES / "test_loop.geojson")
    meta = json.loads(profile.with_suffix(".meta.json").read_text())
    origin = meta["route"]["local_origin"]
    to_latlon = Transformer.from_crs(meta["route"]["projection"]["proj"], "EPSG:4326",
                                     always_xy=True)
    lon0, lat0 = to_latlon.transform(0.0, 0.0)
    # the same transform both ways; 1e-9 degree is 0.1 mm
    assert origin["lat_deg"] == pytest.approx(lat0, abs=1e-9)
    assert origin["lon_deg"] == pytest.approx(lon0, abs=1e-9)

    out = tmp_path / "t.json"
    result = run("export", profile, "-o", out, "--dt", "1")
    assert result.exit_code == 0, result.output
    doc = json.loads(out.read_text())
    assert doc["local_origin"]["lat_deg"] == pytest.approx(lat0, abs=1e-9)   # written to 1e-9
    assert doc["local_origin"]["lon_deg"] == pytest.approx(lon0, abs=1e-9)
    # the exported lat/lon projected by pyproj land on the exported x/y (the frame whose
    # origin that is): within 1 mm, the samples' positions being written to 0.1 mm and their
    # lat/lon interpolated between nodes to 0.1 mm (curvespeed.export_shape)
    cols = doc["columns"]
    to_metres = Transformer.from_crs("EPSG:4326", meta["route"]["projection"]["proj"],
                                     always_xy=True)
    x, y = to_metres.transform(np.array(cols["lon"]), np.array(cols["lat"]))
    np.testing.assert_allclose(x, cols["x_m"], atol=1e-3)
    np.testing.assert_allclose(y, cols["y_m"], atol=1e-3)
    geo = tmp_path / "t.geojson"
    assert run("export", profile, "-o", geo, "--dt", "5").exit_code == 0
    assert json.loads(geo.read_text())["properties"]["local_origin"] == doc["local_origin"]


def test_a_route_in_metres_has_no_local_origin(tmp_path):
    profile = planned(tmp_path, ROUTES / "mountain_road.csv")
    meta = json.loads(profile.with_suffix(".meta.json").read_text())
    assert meta["route"]["local_origin"] == "none"
    out = tmp_path / "t.json"
    assert run("export", profile, "-o", out, "--dt", "1").exit_code == 0
    doc = json.loads(out.read_text())
    assert doc["local_origin"] == "none"
    # the mountain road has elevation: its trajectory carries elevation and pitch
    assert {"elevation_m", "pitch_rad"} <= set(doc["columns"])
    # and no latitude/longitude, which GPX needs: refused, nothing written
    gpx = tmp_path / "t.gpx"
    result = run("export", profile, "-o", gpx)
    assert result.exit_code == 2 and not gpx.exists(), result.output
    assert "metric-only" in result.output and "GPX 1.1" in result.output
