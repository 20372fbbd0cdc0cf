"""Route readers (CSV, GeoJSON, GPX), read_route dispatch, the geometry CSV writer and the
profile CSV reader.

Small files are written into ``tmp_path``; every coordinate and route here is invented for the
test. Error tests match fragments of the message: file name, place (line / position / point)
and what is wrong.
"""

from __future__ import annotations

import math
import time
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from curvespeed.errors import (CurvespeedWarning, OutputError, RouteFormatError,
                               RouteGeometryError)
from curvespeed.geodesy import LocalProjection
from curvespeed.geometry import Geometry
from curvespeed.io import ROUTE_EXTENSIONS, read_route
from curvespeed.io._format import format_column, format_columns
from curvespeed.io.geometry_csv import write_geometry_csv
from curvespeed.io.profile_csv import read_station_profile

GPX11 = "http://www.topografix.com/GPX/1/1"
GPX10 = "http://www.topografix.com/GPX/1/0"

# Round trip lat/lon -> local metres -> lat/lon. pyproj's transverse Mercator is accurate to
# about a nanometre this close to the centre; 1e-9 deg (~0.1 mm) is the precision the geometry
# writer prints, so anything looser would hide a wrong projection centre.
LATLON_ATOL_DEG = 1e-9


def write(tmp_path, name: str, content: str | bytes):
    p = tmp_path / name
    if isinstance(content, bytes):
        p.write_bytes(content)
    else:
        p.write_bytes(content.encode("utf-8"))
    return p


def read_error(path, fragments, error=RouteFormatError):
    """Read ``path`` expecting ``error`` whose message holds every fragment; return it."""
    with pytest.raises(error) as info:
        read_route(path)
    message = str(info.value)
    assert "\n" not in message, "errors are one line"
    for fragment in fragments:
        assert fragment in message, f"{fragment!r} not in {message!r}"
    return message


# --------------------------------------------------------------------------------------- CSV


def test_csv_metric_with_elevation(tmp_path):
    p = write(tmp_path, "track.csv", "x_m,y_m,z_m\n0,0,100\n10,0,100.5\n20,2.5,101\n30,6,101.25\n")
    r = read_route(p)
    np.testing.assert_array_equal(r.x_m, [0, 10, 20, 30])
    np.testing.assert_array_equal(r.y_m, [0, 0, 2.5, 6])
    np.testing.assert_array_equal(r.z_m, [100, 100.5, 101, 101.25])
    assert list(r.where) == ["line 2", "line 3", "line 4", "line 5"]
    assert r.projection is None and r.time_s is None
    assert r.source == str(p) and r.name == "track"


def test_csv_comments_blank_lines_spaces_case_bom_crlf(tmp_path):
    text = ("# invented test route\r\n"
            "\r\n"
            "  Y_M , x_m \r\n"        # column order free, case and spaces ignored
            "# a comment after the header\r\n"
            "0 , 0\r\n"
            "\r\n"
            "1.5e1,10\r\n"
            " 20 , 30 \r\n")
    p = write(tmp_path, "r.csv", b"\xef\xbb\xbf" + text.encode("utf-8"))
    r = read_route(p)
    np.testing.assert_array_equal(r.x_m, [0, 10, 30])
    np.testing.assert_array_equal(r.y_m, [0, 15, 20])
    assert r.z_m is None
    assert list(r.where) == ["line 5", "line 7", "line 8"]


def test_csv_geographic_projects_and_keeps_projection(tmp_path):
    lat = np.array([59.90, 59.901, 59.902, 59.9025])
    lon = np.array([10.70, 10.701, 10.703, 10.706])
    ele = [12.0, 13.5, 15.0, 15.5]
    rows = "".join(f"{a!r},{b!r},{e!r}\n" for a, b, e in zip(lat.tolist(), lon.tolist(), ele))
    r = read_route(write(tmp_path, "geo.csv", "lat,lon,ele_m\n" + rows))
    assert isinstance(r.projection, LocalProjection)
    np.testing.assert_array_equal(r.z_m, ele)
    back_lat, back_lon = r.projection.to_latlon(r.x_m, r.y_m)
    np.testing.assert_allclose(back_lat, lat, rtol=0, atol=LATLON_ATOL_DEG)
    np.testing.assert_allclose(back_lon, lon, rtol=0, atol=LATLON_ATOL_DEG)
    # x east, y north: the route runs north-east.
    assert r.x_m[-1] > r.x_m[0] and r.y_m[-1] > r.y_m[0]


def test_csv_repeated_point_dropped_with_warning(tmp_path):
    p = write(tmp_path, "rep.csv", "x_m,y_m\n0,0\n10,0\n10,0\n20,1\n")
    with pytest.warns(CurvespeedWarning, match="line 4"):
        r = read_route(p)
    assert r.n_points == 3


@pytest.mark.parametrize("text, fragments", [
    ("x_m,y_m\n0,0\n1,abc\n2,0\n",
     ["line 3", "column 'y_m' value 'abc' is not a number"]),
    ("x_m,y_m\n0,0\n1,\n2,0\n", ["line 3", "column 'y_m'", "is empty"]),
    ("x_m,y_m\n0,0\nnan,1\n2,0\n", ["line 3", "column 'x_m' value 'nan'", "not a finite"]),
    ("x_m,y_m\n0,0\n1,-inf\n2,0\n", ["line 3", "value '-inf'", "not a finite"]),
    ("x_m,y_m\n0,0\n1,1e999\n2,0\n", ["line 3", "value '1e999'", "not a finite"]),
    ("x_m,y_m\n0,0\n1,2,3\n", ["line 3", "3 value(s)", "2 column(s)"]),
    ("x_m,y_m,speed_mps\n0,0,1\n", ["line 1", "'speed_mps'", "x_m,y_m[,z_m]"]),
    ("lat,lon,z_m\n0,0,1\n", ["line 1", "'z_m' -> 'ele_m'", "lat,lon[,ele_m]"]),
    ("x,y\n0,0\n", ["line 1", "neither x_m,y_m nor lat,lon",
                    "x_m,y_m[,z_m] (metres) or lat,lon[,ele_m] (WGS84 degrees)"]),
    ("x_m,y_m,lat,lon\n0,0,0,0\n", ["both x_m,y_m and lat,lon"]),
    ("x_m,x_m,y_m\n0,0,0\n", ["'x_m' appears twice"]),
    ("x_m,y_m,\n0,0,\n", ["column 3", "no name"]),
    ("0,0\n1,1\n2,2\n", ["line 1", "looks like data, not a header"]),
    ("# only a comment\n\n", ["no header row"]),
    ("x_m,y_m\n", ["no data rows after the header on line 1"]),
    ("lat,lon\n60,10\n95,10\n", ["line 3", "latitude 95 is outside [-90, 90]",
                                 "are lat and lon swapped?"]),
    ("lat,lon\n60,10\n-91.5,45\n", ["line 3", "latitude -91.5 is outside",
                                     "are lat and lon swapped?"]),
    ("lat,lon\n60,10\n60,200\n", ["line 3", "longitude 200 is outside [-180, 180]"]),
    ("lat,lon\n6650000,500000\n", ["line 2", "projected metres"]),
])
def test_csv_errors(tmp_path, text, fragments):
    p = write(tmp_path, "bad.csv", text)
    read_error(p, [str(p)] + fragments)


def test_csv_latitude_out_of_range_without_swap_hint(tmp_path):
    # Swapping would not help (170 is not a latitude either): no misleading hint.
    p = write(tmp_path, "bad.csv", "lat,lon\n60,10\n95,170\n")
    message = read_error(p, ["line 3", "latitude 95"])
    assert "swapped" not in message


def test_semicolon_file_is_read_with_a_warning(tmp_path):
    # ';' files are read (see test_hostile_inputs.py for the full behaviour); two points are
    # still too few
    p = write(tmp_path, "semi.csv", "x_m;y_m\n0;0\n1;1\n")
    with pytest.warns(CurvespeedWarning, match="semicolon-separated"):
        read_error(p, [str(p), "at least 3"], error=RouteGeometryError)


def test_csv_too_few_points_is_a_geometry_error(tmp_path):
    p = write(tmp_path, "two.csv", "x_m,y_m\n0,0\n5,0\n")
    read_error(p, [str(p), "at least 3"], error=RouteGeometryError)


# ----------------------------------------------------------------- dispatch and text decoding


def test_extensions_are_case_insensitive(tmp_path):
    p = write(tmp_path, "UPPER.CSV", "x_m,y_m\n0,0\n10,0\n20,1\n")
    assert read_route(p).n_points == 3


def test_unknown_extension_lists_supported(tmp_path):
    p = write(tmp_path, "route.txt", "x_m,y_m\n0,0\n10,0\n20,1\n")
    message = read_error(p, [str(p), "'.txt'"])
    for ext in ROUTE_EXTENSIONS:
        assert ext in message
    read_error(write(tmp_path, "route", "x"), ["no extension"])


def test_missing_file_and_folder(tmp_path):
    read_error(tmp_path / "absent.gpx", ["absent.gpx", "no such file"])
    (tmp_path / "dir.csv").mkdir()
    read_error(tmp_path / "dir.csv", ["dir.csv", "folder"])


def test_binary_and_non_utf8_files(tmp_path):
    binary = bytes([0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A, 0, 0, 0, 0x0D])
    read_error(write(tmp_path, "image.gpx", binary), ["image.gpx", "not a text file"])
    utf16 = "x_m,y_m\n0,0\n".encode("utf-16")
    read_error(write(tmp_path, "wide.csv", utf16), ["wide.csv", "UTF-16", "UTF-8"])
    latin1 = "x_m,y_m\n# caf\xe9\n0,0\n".encode("latin-1")
    read_error(write(tmp_path, "old.csv", latin1), ["old.csv", "line 2", "not valid UTF-8"])


# ----------------------------------------------------------------------------------- GeoJSON

# An invented line near 45 N, 7 E, about 100 m between positions, turning gently.
LINE = [[7.0000, 45.0000], [7.0010, 45.0003], [7.0020, 45.0008], [7.0028, 45.0015]]


def geojson_line(coords=LINE):
    return {"type": "LineString", "coordinates": coords}


def dump(obj) -> str:
    import json
    return json.dumps(obj, indent=1)


def check_line(r, coords=LINE):
    lon = np.array([c[0] for c in coords])
    lat = np.array([c[1] for c in coords])
    back_lat, back_lon = r.projection.to_latlon(r.x_m, r.y_m)
    np.testing.assert_allclose(back_lat, lat, rtol=0, atol=LATLON_ATOL_DEG)
    np.testing.assert_allclose(back_lon, lon, rtol=0, atol=LATLON_ATOL_DEG)
    assert list(r.where) == [f"position {i + 1}" for i in range(len(coords))]


def test_geojson_bare_linestring(tmp_path):
    r = read_route(write(tmp_path, "line.geojson", dump(geojson_line())))
    check_line(r)
    assert r.z_m is None and r.name == "line"


def test_geojson_feature_with_name_and_elevation(tmp_path):
    coords = [c + [200.0 + i] for i, c in enumerate(LINE)]
    feature = {"type": "Feature", "properties": {"name": "Test loop A"},
               "geometry": geojson_line(coords)}
    r = read_route(write(tmp_path, "f.json", dump(feature)))  # .json selects GeoJSON too
    check_line(r, coords)
    np.testing.assert_array_equal(r.z_m, [200, 201, 202, 203])
    assert r.name == "Test loop A"


def test_geojson_collection_uses_first_line_and_warns(tmp_path):
    other = [[c[0] + 0.01, c[1]] for c in LINE]
    fc = {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "a stop"},
         "geometry": {"type": "Point", "coordinates": [7.0, 45.0]}},
        {"type": "Feature", "properties": {"name": "first"}, "geometry": geojson_line()},
        {"type": "Feature", "properties": {}, "geometry": geojson_line(other)},
        {"type": "Feature", "properties": {}, "geometry": geojson_line(other)},
    ]}
    with pytest.warns(CurvespeedWarning, match="ignored 2 other line"):
        r = read_route(write(tmp_path, "fc.geojson", dump(fc)))
    check_line(r)
    assert r.name == "first"


def test_geojson_single_part_multilinestring(tmp_path):
    multi = {"type": "MultiLineString", "coordinates": [LINE]}
    check_line(read_route(write(tmp_path, "m.geojson", dump(multi))))


def test_geojson_partial_elevation_dropped_with_warning(tmp_path):
    coords = [LINE[0] + [10.0], LINE[1], LINE[2] + [12.0], LINE[3]]
    with pytest.warns(CurvespeedWarning, match="only 2 of 4 positions have an elevation"):
        r = read_route(write(tmp_path, "p.geojson", dump(geojson_line(coords))))
    assert r.z_m is None


@pytest.mark.parametrize("text, fragments", [
    ('{"type": "LineString",\n "coordinates": [[7, 45],\n [7.001, 45.0003]\n', ["line 4",
                                                                                "not valid JSON"]),
    (dump({"type": "MultiLineString", "coordinates": [LINE, LINE]}),
     ["2 parts", "join them"]),
    (dump({"type": "Polygon", "coordinates": [LINE + [LINE[0]]]}),
     ["no LineString found", "Polygon"]),
    (dump({"type": "Feature", "properties": {}, "geometry": None}), ["no LineString found"]),
    (dump({"type": "FeatureCollection", "features": [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [7, 45]}}]}),
     ["no LineString found", "Point"]),
    (dump([1, 2]), ["not a GeoJSON object"]),
    (dump(geojson_line([LINE[0], [45.0010, 100.0003], LINE[2]])),
     ["position 2", "latitude 100.0003 is outside", "[longitude, latitude]"]),
    (dump(geojson_line([[500000.0, 6650000.0], [500100.0, 6650000.0], [500200.0, 6650010.0]])),
     ["position 1", "projected metres", "reproject"]),
    (dump(geojson_line([LINE[0], [7.001, "45.0003"], LINE[2]])),
     ["position 2", "latitude \"45.0003\" is not a finite number"]),
    ('{"type": "LineString", "coordinates": [[7, 45], [NaN, 45.001], [7.002, 45.002]]}',
     ["position 2", "longitude NaN is not a finite number"]),
    (dump(geojson_line([LINE[0], [7.001], LINE[2]])), ["position 2", "[longitude, latitude]"]),
])
def test_geojson_errors(tmp_path, text, fragments):
    p = write(tmp_path, "bad.geojson", text)
    read_error(p, [str(p)] + fragments)


# --------------------------------------------------------------------------------------- GPX

# Invented points near 61 N, 25 E; about 55 m to 110 m apart.
PTS = [(61.0000, 25.0000), (61.0005, 25.0010), (61.0010, 25.0020), (61.0013, 25.0032),
       (61.0015, 25.0045)]


def gpx(body: str, ns: str | None = GPX11, head: str = '<?xml version="1.0" encoding="UTF-8"?>\n'):
    xmlns = f' xmlns="{ns}"' if ns else ""
    return f'{head}<gpx version="1.1" creator="curvespeed tests"{xmlns}>\n{body}\n</gpx>\n'


def pt(tag, i, ele=True, t=True, times=None):
    lat, lon = PTS[i]
    inner = ""
    if ele:
        inner += f"<ele>{100 + 2 * i}</ele>"
    if t:
        inner += f"<time>{(times or {}).get(i, f'2026-05-01T10:00:{10 * i:02d}Z')}</time>"
    return f'<{tag} lat="{lat}" lon="{lon}">{inner}</{tag}>'


def segment(n: int) -> str:
    """A GPX 1.1 track segment with the first ``n`` invented points, elevation and time."""
    return "<trkseg>" + "".join(pt("trkpt", i) for i in range(n)) + "</trkseg>"


def check_points(r, idx):
    lat = np.array([PTS[i][0] for i in idx])
    lon = np.array([PTS[i][1] for i in idx])
    back_lat, back_lon = r.projection.to_latlon(r.x_m, r.y_m)
    np.testing.assert_allclose(back_lat, lat, rtol=0, atol=LATLON_ATOL_DEG)
    np.testing.assert_allclose(back_lon, lon, rtol=0, atol=LATLON_ATOL_DEG)


def test_gpx11_track_segments_joined_with_ele_and_time(tmp_path):
    times = {1: "2026-05-01T12:00:05.5+02:00",   # offset and fractional seconds: 5.5 s
             3: "2026-05-01T10:00:31"}            # no zone: UTC, as GPX specifies
    seg1 = "".join(pt("trkpt", i, times=times) for i in (0, 1))
    seg2 = "".join(pt("trkpt", i, times=times) for i in (2, 3, 4))
    body = f"<trk><name>Test track</name><trkseg>{seg1}</trkseg><trkseg>{seg2}</trkseg></trk>"
    r = read_route(write(tmp_path, "t.gpx", gpx(body)))
    check_points(r, range(5))
    assert list(r.where) == [f"trkpt {i}" for i in range(1, 6)]
    np.testing.assert_array_equal(r.z_m, [100, 102, 104, 106, 108])
    np.testing.assert_array_equal(r.time_s, [0.0, 5.5, 20.0, 31.0, 40.0])
    assert r.name == "Test track"


def test_gpx10_route_points_and_metadata_name(tmp_path):
    body = ("<name>File name</name><rte>"
            + "".join(pt("rtept", i, t=False) for i in range(4)) + "</rte>")
    r = read_route(write(tmp_path, "r.GPX", gpx(body, ns=GPX10)))
    check_points(r, range(4))
    assert list(r.where) == ["rtept 1", "rtept 2", "rtept 3", "rtept 4"]
    assert r.time_s is None
    assert r.name == "File name"


@pytest.mark.parametrize("ns", [GPX11, None])
def test_gpx_namespaces_and_metadata_name(tmp_path, ns):
    body = ("<metadata><name>Meta name</name></metadata><trk><trkseg>"
            + "".join(pt("trkpt", i, ele=False, t=False) for i in range(3)) + "</trkseg></trk>")
    r = read_route(write(tmp_path, "n.gpx", gpx(body, ns=ns)))
    check_points(r, range(3))
    assert r.z_m is None and r.time_s is None
    assert r.name == "Meta name"


def test_gpx_partial_ele_and_time_dropped_with_warnings(tmp_path):
    pts = [pt("trkpt", 0), pt("trkpt", 1, ele=False), pt("trkpt", 2, t=False), pt("trkpt", 3)]
    body = "<trk><trkseg>" + "".join(pts) + "</trkseg></trk>"
    with pytest.warns(CurvespeedWarning) as record:
        r = read_route(write(tmp_path, "p.gpx", gpx(body)))
    messages = " | ".join(str(w.message) for w in record)
    assert "only 3 of 4 points have elevation" in messages and "trkpt 2" in messages
    assert "only 3 of 4 points have time" in messages and "trkpt 3" in messages
    assert r.z_m is None and r.time_s is None


def test_gpx_first_track_used_others_ignored(tmp_path):
    trk1 = f"<trk><name>one</name>{segment(3)}</trk>"
    trk2 = f"<trk><name>two</name>{segment(5)}</trk>"
    rte = "<rte>" + "".join(pt("rtept", i) for i in range(4)) + "</rte>"
    with pytest.warns(CurvespeedWarning, match="ignored 1 other track"):
        r = read_route(write(tmp_path, "many.gpx", gpx(trk1 + trk2 + rte)))
    assert r.n_points == 3 and r.name == "one"


@pytest.mark.parametrize("body, fragments", [
    ("", ["no track or route points"]),
    ('<wpt lat="61" lon="25"/><trk><trkseg></trkseg></trk>', ["1 waypoint(s)"]),
    ("<trk><trkseg>" + pt("trkpt", 0) + '<trkpt lat="61.0005"><ele>1</ele></trkpt>'
     + pt("trkpt", 2) + "</trkseg></trk>", ["trkpt 2", "missing the 'lon' attribute"]),
    ("<trk><trkseg>" + pt("trkpt", 0) + '<trkpt lat="north" lon="25.001"/>'
     + pt("trkpt", 2) + "</trkseg></trk>", ["trkpt 2", "lat value 'north' is not a number"]),
    ("<trk><trkseg>" + pt("trkpt", 0) + '<trkpt lat="125.001" lon="61.0005"/>'
     + pt("trkpt", 2) + "</trkseg></trk>", ["trkpt 2", "latitude 125.001", "swapped"]),
    ("<rte>" + pt("rtept", 0) + pt("rtept", 1) + '<rtept lat="61.001" lon="25.002">'
     "<ele>high</ele></rtept></rte>", ["rtept 3", "ele value 'high' is not a number"]),
    ("<trk><trkseg>" + pt("trkpt", 0) + pt("trkpt", 1, times={1: "yesterday"})
     + pt("trkpt", 2) + "</trkseg></trk>", ["trkpt 2", "time 'yesterday'", "ISO 8601"]),
    ("<trk><trkseg>" + pt("trkpt", 0) + pt("trkpt", 1, times={1: "2026-05-01"})
     + pt("trkpt", 2) + "</trkseg></trk>", ["trkpt 2", "time '2026-05-01'"]),
])
def test_gpx_errors(tmp_path, body, fragments):
    p = write(tmp_path, "bad.gpx", gpx(body))
    read_error(p, [str(p)] + fragments)


def test_gpx_malformed_xml_names_line(tmp_path):
    text = gpx("<trk><trkseg>\n" + pt("trkpt", 0) + "\n<trkpt lat='61'>\n</trkseg></trk>")
    p = write(tmp_path, "broken.gpx", text)
    read_error(p, [str(p), "line 6", "not well-formed XML", "mismatched tag"])


def test_gpx_wrong_root_and_unknown_namespace(tmp_path):
    p = write(tmp_path, "kml.gpx", '<?xml version="1.0"?><kml><Document/></kml>')
    read_error(p, [str(p), "root element is <kml>, not <gpx>"])
    body = f"<trk>{segment(3)}</trk>"
    p = write(tmp_path, "ns.gpx", gpx(body, ns="http://example.invalid/GPX/9"))
    read_error(p, [str(p), "unknown GPX namespace", GPX11])


def test_gpx_entity_expansion_bomb_refused_quickly(tmp_path):
    # The classic nested-entity bomb: ten levels of ten references expand to 10**9 strings.
    levels = ['<!ENTITY lol0 "lol">'] + [
        f'<!ENTITY lol{k} "{("&lol%d;" % (k - 1)) * 10}">' for k in range(1, 10)]
    head = ('<?xml version="1.0"?>\n<!DOCTYPE gpx [\n' + "\n".join(levels) + "\n]>\n")
    body = f"<trk><name>&lol9;</name>{segment(3)}</trk>"
    p = write(tmp_path, "bomb.gpx", gpx(body, head=head))
    start = time.perf_counter()
    read_error(p, [str(p), "refused", "declares XML entities"])
    # Refusal happens at the first declaration, before any expansion: far below a second
    # even on a slow machine (expanding the bomb would take minutes and gigabytes).
    assert time.perf_counter() - start < 1.0


def test_gpx_external_entity_refused(tmp_path):
    head = ('<?xml version="1.0"?>\n'
            '<!DOCTYPE gpx [<!ENTITY x SYSTEM "file:///etc/passwd">]>\n')
    body = f"<trk><name>&x;</name>{segment(3)}</trk>"
    p = write(tmp_path, "xxe.gpx", gpx(body, head=head))
    start = time.perf_counter()
    message = read_error(p, [str(p), "refused", "declares XML entities"])
    assert time.perf_counter() - start < 1.0
    assert "root:" not in message  # nothing from the referenced file leaks into the message


def test_gpx_declared_encoding_is_honoured(tmp_path):
    body = f"<trk><name>Caf\xe9 loop</name>{segment(3)}</trk>"
    data = gpx(body, head='<?xml version="1.0" encoding="ISO-8859-1"?>\n').encode("latin-1")
    r = read_route(write(tmp_path, "latin.gpx", data))
    assert r.name == "Caf\xe9 loop"


# ------------------------------------------------------------ property test: CSV round trip

# Written with 6 decimals, so each coordinate read back is within half a unit in the last
# printed digit (0.5e-6 m) of the generated value; 1e-9 m more covers binary representation of
# values up to ~1e5 m (spacing of doubles there is ~1.5e-11 m).
CSV_DECIMALS = 6
CSV_ATOL_M = 0.5 * 10.0 ** -CSV_DECIMALS + 1e-9


@st.composite
def polylines(draw):
    n = draw(st.integers(min_value=3, max_value=40))
    x0 = draw(st.floats(-5e4, 5e4))
    y0 = draw(st.floats(-5e4, 5e4))
    h0 = draw(st.floats(-math.pi, math.pi))
    # Turns well inside the reversal threshold of make_route (150 deg), steps well above its
    # 1 mm repeated-point distance, so every generated point is a valid, distinct route point.
    turns = draw(st.lists(st.floats(-2.0, 2.0), min_size=n - 1, max_size=n - 1))
    steps = draw(st.lists(st.floats(0.5, 200.0), min_size=n - 1, max_size=n - 1))
    heading = h0 + np.concatenate(([0.0], np.cumsum(turns[1:])))
    x = x0 + np.concatenate(([0.0], np.cumsum(np.array(steps) * np.cos(heading))))
    y = y0 + np.concatenate(([0.0], np.cumsum(np.array(steps) * np.sin(heading))))
    return x, y


@settings(max_examples=60, deadline=None)
@given(polylines())
def test_csv_round_trip_property(tmp_path_factory, line):
    x, y = line
    path = tmp_path_factory.mktemp("prop") / "poly.csv"
    spec = f".{CSV_DECIMALS}f"
    path.write_text("# generated\n" + format_columns({"x_m": (x, spec), "y_m": (y, spec)}),
                    encoding="utf-8")
    with warnings.catch_warnings():
        # random polylines often have sharp kinks, which the reader rightly warns about; the
        # property here is only the round trip of the numbers
        warnings.simplefilter("ignore", CurvespeedWarning)
        r = read_route(path)
    assert r.n_points == x.size
    np.testing.assert_allclose(r.x_m, x, rtol=0, atol=CSV_ATOL_M)
    np.testing.assert_allclose(r.y_m, y, rtol=0, atol=CSV_ATOL_M)
    assert r.where[0] == "line 3" and r.where[-1] == f"line {x.size + 2}"


# ------------------------------------------------------------------------ geometry CSV writer


def make_geometry(with_z: bool, geographic: bool) -> Geometry:
    """A hand-made quarter circle of radius 50 m (not from build_geometry), 5 nodes."""
    s = np.linspace(0.0, 50.0 * math.pi / 2, 5)
    h = s / 50.0
    x, y = 50.0 * np.sin(h), 50.0 * (1 - np.cos(h))
    k = np.full_like(s, 1 / 50.0)
    k[0] = -1e-17  # round-off noise of either sign must print as zero
    z = 100.0 + 0.02 * s if with_z else None
    grade = np.full_like(s, 0.02) if with_z else None
    proj = LocalProjection(61.0, 25.0) if geographic else None
    return Geometry(s, x, y, h, k, z, grade, False, float(s[1]), proj, "mem", "quarter")


@pytest.mark.parametrize("with_z, geographic, header", [
    (False, False, "station_m,x_m,y_m,heading_rad,curvature_1pm"),
    (True, False, "station_m,x_m,y_m,heading_rad,curvature_1pm,z_m,grade"),
    (True, True, "station_m,x_m,y_m,heading_rad,curvature_1pm,z_m,grade,lat,lon"),
    (False, True, "station_m,x_m,y_m,heading_rad,curvature_1pm,lat,lon"),
])
def test_geometry_csv_columns_and_values(tmp_path, with_z, geographic, header):
    g = make_geometry(with_z, geographic)
    out = write_geometry_csv(g, tmp_path / "g.csv")
    lines = out.read_text(encoding="utf-8").split("\n")
    assert lines[0] == header and lines[-1] == ""  # one header, newline-terminated
    assert len(lines) == g.n_nodes + 2
    row0 = lines[1].split(",")
    assert row0[4] == "0.000000000"  # -1e-17 written without a minus sign
    data = np.loadtxt(out, delimiter=",", skiprows=1, ndmin=2)
    # Each column read back within half a unit of its last printed decimal.
    for col, (values, decimals) in enumerate([(g.station_m, 4), (g.x_m, 4), (g.y_m, 4),
                                              (g.heading_rad, 7), (g.curvature_1pm, 9)]):
        np.testing.assert_allclose(data[:, col], values, rtol=0, atol=0.5 * 10.0 ** -decimals)
    if geographic:
        lat, lon = g.latlon()
        np.testing.assert_allclose(data[:, -2], lat, rtol=0, atol=0.5e-9)
        np.testing.assert_allclose(data[:, -1], lon, rtol=0, atol=0.5e-9)
    if with_z:
        np.testing.assert_allclose(data[:, 5], g.z_m, rtol=0, atol=0.5e-4)
        np.testing.assert_allclose(data[:, 6], g.grade, rtol=0, atol=0.5e-6)


def test_geometry_csv_deterministic_and_refuses_overwrite(tmp_path):
    g = make_geometry(True, True)
    a = write_geometry_csv(g, tmp_path / "a.csv")
    b = write_geometry_csv(g, tmp_path / "b.csv")
    assert a.read_bytes() == b.read_bytes()
    before = a.read_bytes()
    with pytest.raises(OutputError, match="exists"):
        write_geometry_csv(make_geometry(False, False), a)
    assert a.read_bytes() == before
    write_geometry_csv(make_geometry(False, False), a, force=True)
    first_line = a.read_text(encoding="utf-8").split("\n")[0]
    assert first_line == "station_m,x_m,y_m,heading_rad,curvature_1pm"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "b.csv"]  # no temp files


# ------------------------------------------------------------------------- profile CSV reader

def rest_to_rest_profile(tmp_path, kinds: list[str] | None):
    """A hand-made profile of a 6 m straight at 1 m stations, from rest to rest, whose time_s
    is that of constant acceleration on every step (2 ds / (v[k] + v[k+1]))."""
    v = np.array([0.0, 1.0, 2.0, 2.0, 2.0, 1.0, 0.0])
    t = np.concatenate(([0.0], np.cumsum(2.0 / (v[:-1] + v[1:]))))
    head = "station_m,x_m,y_m,heading_rad,curvature_1pm,speed_mps,time_s"
    rows = [f"{k}.0,{k}.0,0.0,0.0,0.0,{v[k]},{t[k]:.6f}" for k in range(v.size)]
    if kinds is not None:
        head += ",step_kind"
        rows = [f"{row},{kind}" for row, kind in zip(rows, kinds)]
    return write(tmp_path, "p.csv", "\n".join([head] + rows) + "\n")


def test_profile_step_kind_column_is_used_over_time_s(tmp_path):
    # step_kind marks the two steps next to rest as constant jerk although time_s holds their
    # constant-acceleration times: the column decides, and the reader warns of the disagreement
    # (3 ds / v against 2 ds / v: 1 s more on each of the two 1 m steps at 1 m/s)
    kinds = ["constant_jerk"] + ["constant_accel"] * 4 + ["constant_jerk", ""]
    with pytest.warns(CurvespeedWarning, match=r"line 8 \(station 6\.0 m\): time_s differs by "
                                               r"2\.000 s"):
        sp = read_station_profile(rest_to_rest_profile(tmp_path, kinds))
    np.testing.assert_array_equal(sp.rest_time_coef, [3.0, 0, 0, 0, 0, 3.0])
    assert sp.step_time_s[0] == sp.step_time_s[-1] == 3.0
    # the same file without the column: recognised from time_s, which says constant acceleration
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        sp = read_station_profile(rest_to_rest_profile(tmp_path, None))
    assert not sp.rest_step.any() and sp.step_time_s[0] == 2.0


def test_format_helpers():
    assert format_column([-0.00004, 0.00005, -1.23456, 2], ".4f") == [
        "0.0000", "0.0001", "-1.2346", "2.0000"]
    assert format_column([-0.0, -1e-30], ".3e") == ["0.000e+00", "-1.000e-30"]
    with pytest.raises(ValueError, match="different lengths"):
        format_columns({"a": ([1, 2], ".1f"), "b": ([1], ".1f")})
    with pytest.raises(ValueError, match="comma"):
        format_columns({"a,b": ([1], ".1f")})


def test_fixed_point_columns_are_written_as_python_formats_each_value():
    # The whole-column fast path for fixed-point specifications must give exactly the text of
    # Python's own correctly rounded format() value by value (the reference), negative zero
    # dropped: halfway cases, values that round to zero from either side, -0.0, huge values,
    # non-finite values and random magnitudes from 1e-12 to 1e5.
    rng = np.random.default_rng(7)
    values = np.concatenate([
        rng.normal(size=2000) * 10.0 ** rng.integers(-12, 6, 2000),
        [0.0, -0.0, -4e-5, -4.9999e-5, -5e-5, -5.0001e-5, 5e-5, 0.125, -0.125, 2.5, -2.5,
         1e300, -1e300, np.nan, np.inf, -np.inf]])
    for spec in (".0f", ".1f", ".4f", ".6f", ".7f", ".9f"):
        expected = []
        for v in values.tolist():
            cell = format(v, spec)
            expected.append(cell[1:] if cell.startswith("-") and set(cell[1:]) <= {"0", "."}
                            else cell)
        assert format_column(values, spec) == expected, spec


@pytest.mark.parametrize("compiled", [True, False])
def test_csv_text_is_python_formats_cell_by_cell(monkeypatch, compiled):
    # format_columns prints the fixed-point float columns of a block of rows in the compiled
    # kernel or, without it, in one `%` (and replaces the values that would print as a negative
    # zero by 0.0 first); either way its text must be
    # exactly the cell-by-cell reference: Python's own correctly rounded format() of each value,
    # negative zero dropped, text cells as they are, quoted text as RFC 4180 quotes it, rows
    # joined by commas and newlines. Several row blocks (the block made 7 rows), an integer
    # column, an exponent format and negative text included.
    from curvespeed.io import _format

    monkeypatch.setattr(_format, "_ROW_BLOCK", 7)
    if not compiled:
        monkeypatch.setattr(_format, "_csv_rows", None)
    else:
        assert _format._csv_rows is not None, "the CSV rows kernel was not built"
    rng = np.random.default_rng(11)
    n = 40
    values = rng.normal(size=n) * 10.0 ** rng.integers(-9, 4, n)
    values[:6] = [-0.0, -4e-7, -5e-5, np.nan, -np.inf, 1e300]
    columns = {
        "a_m": (values, ".4f"), "b_1pm": (-values * 1e-3, ".9f"), "c": (np.arange(n), ".2f"),
        "d": (values, ".3e"), "kind": (np.array(["x", "-0.0", "y z"] * 13 + ["w"]), "s"),
        "name": (["plain", 'a "b", c'] * 20, _format.QUOTED)}
    expected_rows = [",".join(columns)]
    for i in range(n):
        row = []
        for name, (col, spec) in columns.items():
            if spec == _format.QUOTED:
                text = col[i]
                row.append('"' + text.replace('"', '""') + '"' if "," in text else text)
                continue
            cell = format(np.asarray(col)[i].item(), spec)
            mantissa = cell[1:].split("e")[0]
            row.append(cell[1:] if cell.startswith("-") and set(mantissa) <= {"0", "."}
                       else cell)
        expected_rows.append(",".join(row))
    assert format_columns(columns) == "\n".join(expected_rows) + "\n"
    assert format_columns({"a": (np.zeros(0), ".1f")}) == "a\n"
    with pytest.raises(ValueError, match="'y,z' contains a comma"):
        format_columns({"a": (np.zeros(2), ".1f"), "k": (np.array(["x", "y,z"]), "s")})


def test_json_nesting_is_judged_from_the_brackets_before_parsing():
    # 64 levels are read; 65 are refused before json.loads recurses (deeper documents made
    # the parser's own RecursionError and, now and then, an unraisable-exception traceback);
    # brackets inside strings, escaped quotes included, do not count.
    from curvespeed.io._common import MAX_NESTING, _nests_too_deep, load_json
    from curvespeed.errors import RouteFormatError

    deep = "[" * MAX_NESTING + "1" + "]" * MAX_NESTING
    assert not _nests_too_deep(deep)
    assert load_json(deep, "t.json") is not None
    deeper = "[" * (MAX_NESTING + 1) + "1" + "]" * (MAX_NESTING + 1)
    assert _nests_too_deep(deeper)
    with pytest.raises(RouteFormatError, match="nest more than 64 levels"):
        load_json("{\"a\": " * 100000 + "1" + "}" * 100000, "t.json")
    in_strings = '{"name": "' + "[" * 200 + '\\" {{{", "b": [1, 2]}'
    assert not _nests_too_deep(in_strings)
    assert load_json(in_strings, "t.json")["b"] == [1.0, 2.0]
