"""Catalogue of hostile and broken input, run through the command line.

Every case states what must happen:

* **refused**: exit status 2, exactly one ``error:`` line that names the file (and the line,
  point or station where it applies) and says what to do, no output file, and no temporary
  file left in the folder;
* **repaired or accepted**: exit status 0, a ``warning:`` line naming the file and the place,
  and a result checked against something independent of the repair (the same route written
  cleanly, a closed form, or pyproj's geodesic).

Nothing here is skipped or expected to fail. The behaviours and messages are listed for users in
``docs/input_rules.md``.

Every route, track, coordinate and limit here is invented for the tests; the geographic ones lie
in open ocean.
"""

from __future__ import annotations

import math
import re
import resource
from datetime import datetime, timedelta, timezone
from pathlib import Path

import numpy as np
import pytest
from pyproj import Geod

from curvespeed.io.table_csv import read_table_csv
from hostile_helpers import error_line, lines_of, run, snapshot, write

#: Open-ocean origin of the invented geographic routes (South Atlantic), degrees.
LAT0, LON0 = -35.0, -20.0
#: WGS84 geodesics (pyproj) as the outside reference for lengths of geographic routes.
GEOD = Geod(ellps="WGS84")
T0 = datetime(2026, 5, 1, 10, 0, 0, tzinfo=timezone.utc)


# ------------------------------------------------------------------------------------ helpers

def assert_refused(result, folder: Path, named, fragments, outputs=()) -> str:
    """Exit 2, one error line naming ``named`` with every fragment, nothing written."""
    message = error_line(result, named, fragments)
    for path in outputs:
        assert not Path(path).exists(), f"{path} was written"
    assert not list(Path(folder).glob(".*.part")), "a temporary file was left behind"
    return message


def assert_warned(result, named, fragments) -> str:
    """Exit 0 and a warning line naming ``named`` with every fragment."""
    assert result.exit_code == 0, result.output
    assert "Traceback" not in result.output
    found = [line for line in lines_of(result, "warning:")
             if str(named) in line and all(f in line for f in fragments)]
    assert found, result.output
    return found[0]


def csv_text(x, y, header="x_m,y_m", sep=",", decimal=".", z=None) -> str:
    rows = []
    for i in range(len(x)):
        cells = [f"{x[i]:.3f}", f"{y[i]:.3f}"] + ([f"{z[i]:.2f}"] if z is not None else [])
        rows.append(sep.join(c.replace(".", decimal) for c in cells))
    return header + "\n" + "\n".join(rows) + "\n"


def bend_xy(step=5.0):
    """Invented bend: 100 m straight, then a 60 m radius arc turning 90 degrees left."""
    s = np.arange(0.0, 100.0 + 0.5 * math.pi * 60.0 + 1e-9, step)
    theta = np.clip((s - 100.0) / 60.0, 0.0, None)
    x = np.where(s <= 100.0, s, 100.0 + 60.0 * np.sin(theta))
    y = np.where(s <= 100.0, 0.0, 60.0 * (1.0 - np.cos(theta)))
    return x, y


def straight_xy(length=200.0, step=10.0):
    x = np.arange(0.0, length + 1e-9, step)
    return x, np.zeros_like(x)


def trkpt(lat, lon, ele=None, t=None) -> str:
    inner = ""
    if ele is not None:
        inner += f"<ele>{ele:.1f}</ele>"
    if t is not None:
        inner += f"<time>{(T0 + timedelta(seconds=t)).strftime('%Y-%m-%dT%H:%M:%SZ')}</time>"
    return f'<trkpt lat="{lat:.8f}" lon="{lon:.8f}">{inner}</trkpt>'


def gpx_text(segments, head='<?xml version="1.0" encoding="UTF-8"?>\n', name="invented track"):
    body = "".join("<trkseg>" + "".join(seg) + "</trkseg>" for seg in segments)
    return (f'{head}<gpx version="1.1" creator="curvespeed tests" '
            f'xmlns="http://www.topografix.com/GPX/1/1"><trk><name>{name}</name>{body}</trk>'
            "</gpx>\n")


def meridian_points(n, dlat=1e-4, lat0=LAT0, start=0, ele=None, t0=0.0):
    """Track points due north along the meridian LON0 (a geodesic), one per second."""
    return [trkpt(lat0 + (start + i) * dlat, LON0, None if ele is None else ele + 0.1 * i,
                  t0 + i) for i in range(n)]


def geojson_line(coords, kind="LineString") -> str:
    import json

    return json.dumps({"type": "Feature", "properties": {"name": "invented"},
                       "geometry": {"type": kind, "coordinates": coords}})


def lonlat_bend(n=40):
    """The invented bend as [lon, lat] positions near (LAT0, LON0)."""
    x, y = bend_xy()
    lat = LAT0 + y[:n] / 111_000.0
    lon = LON0 + x[:n] / (111_000.0 * math.cos(math.radians(LAT0)))
    return [[round(a, 8), round(b, 8)] for a, b in zip(lon, lat)]


# ------------------------------------------------------------------------ refused: the table

ENTITY_BOMB = ('<?xml version="1.0"?>\n<!DOCTYPE gpx [\n<!ENTITY a0 "ha">\n'
               + "\n".join(f'<!ENTITY a{k} "{("&a%d;" % (k - 1)) * 10}">' for k in range(1, 10))
               + "\n]>\n")
EXTERNAL_ENTITY = ('<?xml version="1.0"?>\n'
                   '<!DOCTYPE gpx [<!ENTITY leak SYSTEM "file:///etc/hostname">]>\n')


def _null_island_track() -> str:
    points = meridian_points(20)
    points[10] = trkpt(0.0, 0.0)          # a receiver's glitch: one fix at 0 N 0 E
    return gpx_text([points])


def _swapped_rows() -> str:
    x, y = straight_xy(200.0, 5.0)
    lines = csv_text(x, y).splitlines()
    lines[11], lines[12] = lines[12], lines[11]        # file lines 12 and 13 exchanged
    return "\n".join(lines) + "\n"


def _out_and_back() -> str:
    x = np.concatenate((np.arange(0.0, 101.0, 10.0), np.arange(90.0, -1.0, -10.0)))
    y = np.concatenate((np.zeros(11), np.full(10, 0.5)))
    return csv_text(x, y)


def _profile_with_step_kind(line: int, kind: str) -> str:
    """A hand-made profile of a 10 m straight (1 m stations, rest to rest) whose step_kind on
    file ``line`` is ``kind``; every other step is marked as planned with a jerk bound."""
    v = [0.0, 1.0, 2.0, 2.0, 2.0, 2.0, 2.0, 2.0, 2.0, 1.0, 0.0]
    kinds = ["constant_jerk"] + ["constant_accel"] * 8 + ["constant_jerk", ""]
    kinds[line - 2] = kind                 # line 1 is the header
    return "station_m,x_m,y_m,heading_rad,curvature_1pm,speed_mps,step_kind\n" + "".join(
        f"{s}.0,{s}.0,0.0,0.0,0.0,{speed},{k}\n" for s, (speed, k) in enumerate(zip(v, kinds)))


BEND = csv_text(*bend_xy())
LIMITS_FILE = "limits.toml"

# id: (command, {file name: content}, arguments, file the error must name, fragments).
# In arguments "{name}" is replaced by the path of that file and "{out}" by an output path.
REFUSED = {
    "empty file": (
        "route", {"r.csv": ""}, ["{r.csv}", "-o", "{out}"], "r.csv",
        ["no header row and no data", "x_m,y_m[,z_m]"]),
    "header only": (
        "route", {"r.csv": "x_m,y_m\n"}, ["{r.csv}", "-o", "{out}"], "r.csv",
        ["no data rows after the header on line 1", "add one point per line"]),
    "UTF-16 text": (
        "route", {"r.csv": "x_m,y_m\n0,0\n".encode("utf-16")}, ["{r.csv}", "-o", "{out}"],
        "r.csv", ["UTF-16", "save it as UTF-8"]),
    "binary file": (
        "route", {"r.csv": b"x_m,y_m\n0,0\n\x00\x01\x02"}, ["{r.csv}", "-o", "{out}"], "r.csv",
        ["line 3", "NUL byte"]),
    "decimal comma in a comma-separated file": (
        "route", {"r.csv": 'x_m,y_m\n0,0\n"10,5",0\n20,0\n'}, ["{r.csv}", "-o", "{out}"],
        "r.csv", ["line 3", "'10,5'", "decimal comma?"]),
    "decimal points and commas mixed in a semicolon file": (
        "route", {"r.csv": "x_m;y_m\n0;0\n10,5;0\n1.020,5;0\n30;0\n"}, ["{r.csv}", "-o", "{out}"],
        "r.csv", ["line 4", "'1.020,5'", "decimal point", "without thousands separators"]),
    "latitude and longitude swapped": (
        "route", {"r.csv": "lat,lon\n" + "".join(f"{150.2 + i * 1e-4:.4f},{LAT0}\n"
                                                 for i in range(5))},
        ["{r.csv}", "-o", "{out}"], "r.csv",
        ["line 2", "latitude 150.2 is outside [-90, 90]", "are lat and lon swapped?"]),
    "NaN": (
        "route", {"r.csv": "x_m,y_m\n0,0\n10,0\nNaN,0\n30,0\n"}, ["{r.csv}", "-o", "{out}"],
        "r.csv", ["line 4", "'NaN'", "not a finite number", "fix or remove that line"]),
    "infinity": (
        "route", {"r.csv": "x_m,y_m\n0,0\n10,0\n20,-inf\n30,0\n"}, ["{r.csv}", "-o", "{out}"],
        "r.csv", ["line 4", "'-inf'", "not a finite number"]),
    "coordinate in the wrong units (beyond the Earth)": (
        "route", {"r.csv": "x_m,y_m\n0,0\n10,0\n2.5e9,0\n30,0\n"}, ["{r.csv}", "-o", "{out}"],
        "r.csv", ["line 4", "beyond any place on Earth", "check the units"]),
    "two points out of order": (
        "route", {"r.csv": _swapped_rows()}, ["{r.csv}", "-o", "{out}"], "r.csv",
        ["line 12", "doubles back", "line 12 and line 13 look swapped"]),
    "180-degree reversal": (
        "route", {"r.csv": _out_and_back()}, ["{r.csv}", "-o", "{out}"], "r.csv",
        ["line 12 (station 100.0 m)", "doubles back", "split the route there"]),
    "GPS fix jumping to 0 N 0 E": (
        "route", {"t.gpx": _null_island_track()}, ["{t.gpx}", "-o", "{out}"], "t.gpx",
        ["trkpt 11", "doubles back", "trkpt 11 looks like a stray point", "remove it"]),
    "GeoJSON MultiLineString whose parts do not meet": (
        "route", {"r.geojson": geojson_line([lonlat_bend()[:20], lonlat_bend()[25:]],
                                            "MultiLineString")},
        ["{r.geojson}", "-o", "{out}"], "r.geojson",
        ["has 2 parts", "part 2 starts", "join them into one LineString in driving order"]),
    "GeoJSON MultiLineString with a part running backwards": (
        "route", {"r.geojson": geojson_line([lonlat_bend()[:20], lonlat_bend()[19:][::-1]],
                                            "MultiLineString")},
        ["{r.geojson}", "-o", "{out}"], "r.geojson",
        ["part 2 starts", "part 1 or 2 seems to run the other way: reverse it"]),
    "GeoJSON Polygon": (
        "route", {"r.geojson": geojson_line([lonlat_bend() + [lonlat_bend()[0]]], "Polygon")},
        ["{r.geojson}", "-o", "{out}"], "r.geojson",
        ["no LineString found", "Polygon", "save the outline as a LineString"]),
    "GeoJSON positions as [latitude, longitude]": (
        "route", {"r.geojson": geojson_line([[b, a] for a, b in
                                             [(p[0] + 150.0, p[1]) for p in lonlat_bend()]])},
        ["{r.geojson}", "-o", "{out}"], "r.geojson",
        ["position 1", "looks like [latitude, longitude]", "[longitude, latitude]"]),
    "GeoJSON in projected metres": (
        "route", {"r.geojson": geojson_line([[500000.0 + 10 * i, 6150000.0] for i in range(5)])},
        ["{r.geojson}", "-o", "{out}"], "r.geojson",
        ["position 1", "projected metres", "reproject the file"]),
    "GPX entity-expansion bomb": (
        "route", {"b.gpx": gpx_text([meridian_points(5)], head=ENTITY_BOMB)},
        ["{b.gpx}", "-o", "{out}"], "b.gpx",
        ["refused", "declares XML entities", "remove the DOCTYPE block"]),
    "GPX external entity": (
        "route", {"x.gpx": gpx_text([meridian_points(5)], head=EXTERNAL_ENTITY)},
        ["{x.gpx}", "-o", "{out}"], "x.gpx",
        ["refused", "declares XML entities"]),
    "GPX cut off (empty file)": (
        "route", {"t.gpx": ""}, ["{t.gpx}", "-o", "{out}"], "t.gpx",
        ["line 1, column 1", "not well-formed XML", "export it again"]),
    "limits file with an unknown key": (
        "plan", {"r.csv": BEND, LIMITS_FILE: "[limits]\nmax_speeed_mps = 20\n"},
        ["{r.csv}", "-l", "{limits.toml}", "-o", "{out}"], LIMITS_FILE,
        ["[limits] unknown key 'max_speeed_mps'", "did you mean 'max_speed_mps'?"]),
    "limits file in the wrong units": (
        "plan", {"r.csv": BEND, LIMITS_FILE: "[limits]\nmax_speed_kmh = 50\n"},
        ["{r.csv}", "-l", "{limits.toml}", "-o", "{out}"], LIMITS_FILE,
        ["max_speed_kmh", "divide by 3.6 and use the _mps key"]),
    "limits file with a negative value": (
        "plan", {"r.csv": BEND, LIMITS_FILE: "[limits]\nmax_decel_mps2 = -2.5\n"},
        ["{r.csv}", "-l", "{limits.toml}", "-o", "{out}"], LIMITS_FILE,
        ["max_decel_mps2 must be positive", "-2.5"]),
    "limits file with a zone that is not a table": (
        "plan", {"r.csv": BEND, LIMITS_FILE: "zone = [5]\n[limits]\n"},
        ["{r.csv}", "-l", "{limits.toml}", "-o", "{out}"], LIMITS_FILE,
        ["'zone' entry #1", "not a table", "[[zone]]"]),
    "speed zone of zero speed": (
        "plan", {"r.csv": BEND, LIMITS_FILE: "[limits]\n[[zone]]\nstart_m = 10\nend_m = 50\n"
                                             "max_speed_mps = 0\n"},
        ["{r.csv}", "-l", "{limits.toml}", "-o", "{out}"], LIMITS_FILE,
        ["[[zone]] #1", "speed zone 10..50 m", "use a stop for zero"]),
    "stop beyond the end of the route": (
        "plan", {"r.csv": BEND, LIMITS_FILE: "[limits]\n[[stop]]\nstation_m = 900\n"},
        ["{r.csv}", "-l", "{limits.toml}", "-o", "{out}"], LIMITS_FILE,
        ["[[stop]] #1", "stop at station 900 m lies outside the route"]),
    "stop at an absurd station": (
        "plan", {"r.csv": BEND}, ["{r.csv}", "--stop", "1e300", "-o", "{out}"],
        None, ["--stop: stop at station 1e+300 m lies outside the route (0.."]),
    "start speed that cannot stop in time": (
        "plan", {"r.csv": BEND}, ["{r.csv}", "--start-speed", "25", "--stop", "30", "-o", "{out}"],
        None, ["--stop: the stop at station 30 m is 30.0 m from the start, too close to come "
               "to rest from the start speed 25.00 m/s", "Lower the start speed to"]),
    "two stops closer than three station steps": (
        "plan", {"r.csv": BEND}, ["{r.csv}", "--stop", "60", "--stop", "61", "-o", "{out}"],
        None, ["both at rest", "move the stops apart"]),
    "profile with a step kind curvespeed does not know": (
        "export", {"p.csv": _profile_with_step_kind(6, "cubic")}, ["{p.csv}", "-o", "{out}"],
        "p.csv", ["line 6:", "'step_kind' value 'cubic' is not a step kind",
                  "use constant_accel, jerk_ramp, linear_accel, accel_turn, accel_rise_hold, "
                  "accel_hold_fall, accel_fall_hold, accel_rise_hold_fall or constant_jerk",
                  "remove the column"]),
    "profile with a constant-jerk step away from rest": (
        "export", {"p.csv": _profile_with_step_kind(6, "constant_jerk")},
        ["{p.csv}", "-o", "{out}"], "p.csv",
        ["line 6:", "'constant_jerk' is allowed only on a step with exactly one end at rest",
         "speed_mps is 2 here and 2 on line 7", "use constant_accel there"]),
}


def _materialise(tmp_path: Path, files: dict, args: list):
    paths = {name: write(tmp_path, name, content) for name, content in files.items()}
    out = tmp_path / "out.csv"
    resolved = []
    for a in args:
        if a == "{out}":
            resolved.append(out)
        elif a.startswith("{") and a.endswith("}"):
            resolved.append(paths[a[1:-1]])
        else:
            resolved.append(a)
    return paths, out, resolved


@pytest.mark.parametrize("case", list(REFUSED))
def test_refused_with_a_clear_error_and_nothing_written(case, tmp_path):
    command, files, args, named, fragments = REFUSED[case]
    paths, out, resolved = _materialise(tmp_path, files, args)
    before = snapshot(tmp_path)
    result = run(command, *resolved)
    assert_refused(result, tmp_path, None if named is None else paths[named], fragments)
    assert snapshot(tmp_path) == before           # inputs unchanged, no output, no temporary


def test_infeasible_start_speed_names_the_route_file(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    result = run("plan", route, "--start-speed", "25", "--stop", "30")
    assert_refused(result, tmp_path, route, ["start speed"])


def test_stops_too_close_names_their_origin(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    result = run("plan", route, "--stop", "60", "--stop", "61")
    message = assert_refused(result, tmp_path, route, ["both at rest"])
    assert "--stop" in message


def test_absurdly_fine_spacing_is_refused(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    out = tmp_path / "g.csv"
    result = run("route", route, "--spacing", "1e-9", "-o", out)
    assert_refused(result, tmp_path, route, ["spacing"], outputs=[out])


# ------------------------------------------------------- output files: refused, atomic, forced
# (the catalogue of hostile outputs, write failures and signals: test_hostile_outputs.py)

def test_existing_output_is_kept_without_force_and_replaced_with_it(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    out = tmp_path / "g.csv"
    out.write_text("someone's file\n")
    result = run("route", route, "-o", out)
    assert result.exit_code == 2
    message = lines_of(result, "error:")[0]
    assert str(out) in message and "file exists" in message and "--force" in message
    assert out.read_text() == "someone's file\n"
    assert run("route", route, "-o", out, "--force").exit_code == 0
    assert out.read_text().startswith("station_m,")


def test_bad_input_after_the_output_check_leaves_no_file(tmp_path):
    route = write(tmp_path, "r.csv", "x_m,y_m\n0,0\n10,0\nnan,0\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out)
    assert_refused(result, tmp_path, route, ["line 4"], outputs=[out, tmp_path / "p.meta.json"])


# -------------------------------------------------------- accepted: a warning and a right answer

def _geometry_bytes(tmp_path, name, content, *extra):
    route = write(tmp_path, name, content)
    out = tmp_path / (Path(name).stem + "_geometry.csv")
    result = run("route", route, "-o", out, *extra)
    return result, route, out


def test_byte_order_mark_is_read_silently(tmp_path):
    plain, _, out_plain = _geometry_bytes(tmp_path, "plain.csv", BEND)
    bom, _, out_bom = _geometry_bytes(tmp_path, "bom.csv", b"\xef\xbb\xbf" + BEND.encode())
    assert plain.exit_code == 0 and bom.exit_code == 0, bom.output
    assert not lines_of(bom, "warning:")
    assert out_bom.read_bytes() == out_plain.read_bytes()


@pytest.mark.parametrize("sep, decimal, marks", [
    (";", ".", "semicolon-separated values with decimal points"),
    (";", ",", "semicolon-separated values with decimal commas"),
    ("\t", ",", "tab-separated values with decimal commas"),
])
def test_spreadsheet_separators_are_read_with_a_warning(sep, decimal, marks, tmp_path):
    x, y = bend_xy()
    z = 100.0 + 0.02 * np.arange(x.size)
    _, _, reference = _geometry_bytes(tmp_path, "comma.csv", csv_text(x, y, "x_m,y_m,z_m", z=z))
    text = csv_text(x, y, sep.join(["x_m", "y_m", "z_m"]), sep=sep, decimal=decimal, z=z)
    result, route, out = _geometry_bytes(tmp_path, "europe.csv", text)
    assert_warned(result, route, ["line 1", marks, "save the file comma-separated"])
    # the same numbers, so the same geometry, byte for byte
    assert out.read_bytes() == reference.read_bytes()


def test_degrees_in_metric_columns_are_flagged(tmp_path):
    # latitude/longitude written under x_m,y_m: 1e-5 degree steps read as 1e-5 m steps
    rows = "".join(f"{LON0 + 1e-5 * i:.7f},{LAT0 + 1e-5 * i:.7f}\n" for i in range(30))
    route = write(tmp_path, "deg.csv", "x_m,y_m\n" + rows)
    out = tmp_path / "g.csv"
    result = run("route", route, "-o", out)
    warning = [w for w in lines_of(result, "warning:") if "look like degrees" in w]
    assert warning and str(route) in warning[0] and "line 2 to line 31" in warning[0]
    assert "rename the columns lat and lon" in warning[0]
    # read as metres, as the header says, the points are 0.01 mm apart: too few remain
    assert_refused(result, tmp_path, route, ["only 1 distinct point", "29 of 30 were repeats"],
                   outputs=[out])


def test_repeated_points_are_dropped_with_a_warning(tmp_path):
    x, y = bend_xy()
    _, _, reference = _geometry_bytes(tmp_path, "clean.csv", csv_text(x, y))
    xr, yr = np.insert(x, [4, 9, 9], x[[4, 9, 9]]), np.insert(y, [4, 9, 9], y[[4, 9, 9]])
    result, route, out = _geometry_bytes(tmp_path, "rep.csv", csv_text(xr, yr))
    assert_warned(result, route, ["dropped 3 repeated point(s)", "first at line 7"])
    assert out.read_bytes() == reference.read_bytes()


SPIKE_OFFSET_M = 5.0


def _spike_csv() -> str:
    x, y = straight_xy(200.0, 10.0)
    y[10] = SPIKE_OFFSET_M                   # x = 100 m, file line 12
    return csv_text(x, y)


def _min_radius(geometry_csv: Path) -> tuple[float, float]:
    table = read_table_csv(geometry_csv)
    k = np.abs(table.columns["curvature_1pm"])
    i = int(np.argmax(k))
    return 1.0 / k[i], float(table.columns["station_m"][i])


def test_spike_is_reported_and_smoothed_when_the_noise_says_so(tmp_path):
    # A 5 m spike among points 10 m apart on a straight: the fit warns, naming the point. With
    # a stated GPS-like noise of 3 m (which the points' own scatter, the spike included, bears
    # out) the fit treats it as noise and the path stays straight.
    route = write(tmp_path, "spike.csv", _spike_csv())
    smooth = run("route", route, "--position-noise", "3", "-o", tmp_path / "smooth.csv")
    assert_warned(smooth, route, ["line 12 (station 101.2 m)", "sticks out 5.0 m",
                                  "If it is an outlier remove it"])
    radius, _ = _min_radius(tmp_path / "smooth.csv")
    # 5 m is under 2 sigma of a 3 m noise: smoothed to a radius of kilometres, not metres
    assert radius > 1000.0


def test_three_point_route_plans(tmp_path):
    route = write(tmp_path, "three.csv", "x_m,y_m\n0,0\n50,5\n100,0\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-o", out)
    assert result.exit_code == 0, result.output
    table = read_table_csv(out)
    s, v = table.columns["station_m"], table.columns["speed_mps"]
    # at least the chord sum of the polyline: 2 * hypot(50, 5) (a curve through the points
    # is never shorter than the polyline through them)
    assert s[-1] >= 2 * math.hypot(50.0, 5.0) - 1e-3
    assert v[0] == 0.0 and v[-1] == 0.0 and v.max() > 0.0


def test_three_point_route_gives_no_loop_warning(tmp_path):
    route = write(tmp_path, "three.csv", "x_m,y_m\n0,0\n50,5\n100,0\n")
    result = run("route", route)
    assert result.exit_code == 0 and not lines_of(result, "warning:"), result.output


def _circle_csv(n: int, radius: float, missing: float) -> str:
    t = np.linspace(0.0, 2 * math.pi - missing, n)
    return csv_text(radius * np.cos(t), radius * np.sin(t))


def test_loop_whose_ends_nearly_meet_is_flagged(tmp_path):
    # 120 points, 2.6 m apart on a 50 m circle, ending 8.5 m short of the start: more than
    # the 2-spacing closure tolerance, so it is read as open
    route = write(tmp_path, "loop.csv", _circle_csv(120, 50.0, 0.17))
    result = run("route", route)
    assert_warned(result, route, ["--closed"])


def test_loop_whose_end_runs_past_the_start_is_open_with_a_warning(tmp_path):
    # 2 pi + 0.1 rad: the last points overlap the first ones
    route = write(tmp_path, "over.csv", _circle_csv(126, 50.0, -0.1))
    result = run("route", route)
    assert_warned(result, route, ["the last points run past the start", "treated as open",
                                  "remove the overlapping points"])
    assert "(open)" in result.output


def test_a_million_points_are_read_and_fitted(tmp_path):
    # An invented arc of radius 50 km, 200 km long, one point every 0.2 m (1e6 points, 22 MB).
    # Reading takes a few seconds; the fit at 10 m spacing about as long. No timing is asserted.
    radius, step, n = 50_000.0, 0.2, 1_000_000
    theta = np.arange(n) * step / radius
    x, y = radius * np.sin(theta), radius * (1.0 - np.cos(theta))
    text = "x_m,y_m\n" + "\n".join(f"{a:.3f},{b:.3f}" for a, b in zip(x.tolist(), y.tolist()))
    route = write(tmp_path, "long.csv", text + "\n")
    out = tmp_path / "g.csv"
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    # a hang is what is guarded against, not speed: about 40 s of work on a quiet 2-core
    # machine, so allow for a loaded one
    result = run("route", route, "--spacing", "10", "-o", out, hang_s=300)
    grown_mb = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before) / 1024.0
    assert result.exit_code == 0, result.output
    assert "points read    1000000" in result.output
    table = read_table_csv(out)
    arc = radius * theta[-1]
    # Closed form: arc length R * theta. The chords (0.2 m) fall short of the arc by
    # step^3 / (24 R^2) each, 1.6e-13 m in all; the coordinates are rounded to 1 mm, noise
    # across the path that changes the length only at second order. 0.01 m of 200 km leaves
    # room for the fit's own error and nothing more.
    assert table.columns["station_m"][-1] == pytest.approx(arc, abs=0.01)
    # curvature 1/R everywhere: the rounding noise (0.3 mm rms) over 10 m stations gives
    # curvature noise of order 1e-7 1/m, 0.5 % of 1/R = 2e-5 1/m
    np.testing.assert_allclose(table.columns["curvature_1pm"], 1.0 / radius, rtol=0.005)
    # memory: ru_maxrss is kilobytes on Linux; the arrays of 1e6 points take tens of MB, the
    # text and its lines a few hundred; 2 GB would mean copies per point
    assert grown_mb < 2048.0


def _standstill_track():
    """Invented: drive 14 s north, stand 30 s (fixes jitter by ~0.5 m), drive on 15 s."""
    rng = np.random.default_rng(20260501)
    dlat = 1e-4                                   # 11.1 m per second, one fix a second
    points, lats = [], []
    for i in range(15):
        lats.append(LAT0 + i * dlat)
        points.append(trkpt(lats[-1], LON0, t=i))
    stand = LAT0 + 15 * dlat
    jitter = rng.normal(0.0, 0.5, (30, 2)) / np.array([111_000.0, 91_000.0])
    for j in range(30):
        points.append(trkpt(stand + jitter[j, 0], LON0 + jitter[j, 1], t=15 + j))
    for i in range(15):
        lats.append(stand + (i + 1) * dlat)
        points.append(trkpt(lats[-1], LON0, t=45 + i))
    return gpx_text([points]), lats[0], lats[-1]


def test_gps_track_standing_still_is_merged_and_reported(tmp_path):
    text, lat_first, lat_last = _standstill_track()
    route = write(tmp_path, "still.gpx", text)
    out = tmp_path / "g.csv"
    result = run("route", route, "-o", out)
    assert result.exit_code == 0 and "Traceback" not in result.output, result.output
    assert "points read    60" in result.output
    # the summary says what was merged (the fixes slower than 0.5 m/s around the stop)
    assert re.search(r"1 standstill\(s\) merged \(\d+ fixes\)", result.output), result.output
    # pyproj: the drive runs due north along a meridian (a geodesic) from the first to the last
    # fix. The merged point (the mean of the fixes with 0.5 m scatter) lies ~0.1 m off that
    # line, lengthening the path by ~offset^2 / 11 m, about 1 mm; the straight fit may trim the
    # ends by up to a few centimetres. 0.1 m covers both.
    _, _, expected = GEOD.inv(LON0, lat_first, LON0, lat_last)
    length = read_table_csv(out).columns["station_m"][-1]
    assert length == pytest.approx(expected, abs=0.1)


def test_gpx_segments_that_meet_are_joined_silently(tmp_path):
    one = gpx_text([meridian_points(40, ele=10.0)])
    two = gpx_text([meridian_points(20, ele=10.0),
                    [p for p in meridian_points(40, ele=10.0)[20:]]])
    a = run("route", write(tmp_path, "one.gpx", one), "-o", tmp_path / "one_g.csv")
    b = run("route", write(tmp_path, "two.gpx", two), "-o", tmp_path / "two_g.csv")
    assert a.exit_code == 0 and b.exit_code == 0 and not lines_of(b, "warning:"), b.output
    assert (tmp_path / "two_g.csv").read_bytes() == (tmp_path / "one_g.csv").read_bytes()


def test_gpx_gap_between_segments_is_bridged_with_a_warning(tmp_path):
    # segment 2 starts 81 fixes (899 m) further north: the receiver lost its fix
    segs = [meridian_points(20), meridian_points(20, start=100, t0=100.0)]
    route = write(tmp_path, "gap.gpx", gpx_text(segs))
    out = tmp_path / "g.csv"
    result = run("route", route, "-o", out)
    assert_warned(result, route, ["trkpt 21 lies 899 m", "81 times the median step",
                                  "81 s later", "where track segment 2 starts",
                                  "runs straight across the gap"])
    # all points lie on one meridian, a geodesic: the route is that geodesic, gap included.
    # The projection's scale error this close to its centre is ~1e-8; 1 mm of 1.3 km.
    _, _, expected = GEOD.inv(LON0, LAT0, LON0, LAT0 + 119 * 1e-4)
    assert read_table_csv(out).columns["station_m"][-1] == pytest.approx(expected, abs=1e-3)


def test_gpx_elevation_on_some_points_only_is_dropped_with_a_warning(tmp_path):
    points = meridian_points(30, ele=10.0)
    points[7] = trkpt(LAT0 + 7 * 1e-4, LON0, t=7)          # this fix has no <ele>
    route = write(tmp_path, "ele.gpx", gpx_text([points]))
    out = tmp_path / "g.csv"
    result = run("route", route, "-o", out)
    assert_warned(result, route, ["only 29 of 30 points have elevation",
                                  "first missing at trkpt 8", "ignored it for the whole route"])
    assert "z_m" not in read_table_csv(out).columns


def test_geojson_multilinestring_whose_parts_meet_is_joined(tmp_path):
    line = lonlat_bend()
    _, _, reference = _geometry_bytes(tmp_path, "single.geojson", geojson_line(line))
    multi = geojson_line([line[:15], line[14:]], "MultiLineString")   # shared point 15
    result, route, out = _geometry_bytes(tmp_path, "multi.geojson", multi)
    assert_warned(result, route, ["the feature", "joined the 2 parts", "driving order"])
    assert out.read_bytes() == reference.read_bytes()


def test_comfort_above_friction_plans_within_grip(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    limits = write(tmp_path, LIMITS_FILE, "[limits]\nfriction_coefficient = 0.2\n"
                                          "max_lateral_accel_mps2 = 3.0\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert_warned(result, limits, ["max_lateral_accel_mps2 = 3", "exceeds the lateral grip",
                                   "friction is the binding limit"])
    # friction circle (textbook): lateral acceleration at most mu g = 0.2 * 9.80665 m/s^2;
    # 1e-4 relative is the convex solver's verified tolerance (planner.CONVEX_TOLERANCE)
    lat = np.abs(read_table_csv(out).columns["lat_accel_mps2"])
    assert lat.max() <= 0.2 * 9.80665 * (1 + 1e-4)


def test_comfort_above_friction_is_warned_once(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    limits = write(tmp_path, LIMITS_FILE, "[limits]\nfriction_coefficient = 0.2\n"
                                          "max_lateral_accel_mps2 = 3.0\n")
    result = run("plan", route, "-l", limits)
    grip = [w for w in lines_of(result, "warning:") if "exceeds the lateral grip" in w]
    assert len(grip) == 1 and str(limits) in grip[0], result.output


def test_comfort_above_friction_is_warned_to_library_callers_too():
    from curvespeed.errors import CurvespeedWarning
    from curvespeed.limits import Limits
    from curvespeed.planner import plan_profile

    from helpers import geometry_from_curvature

    geo = geometry_from_curvature(np.full(201, 1 / 80.0), ds=1.0)
    limits = Limits(friction_coefficient=0.2, max_lateral_accel_mps2=3.0, max_accel_mps2=1.0,
                    max_decel_mps2=1.5, max_jerk_mps3=None)     # only the lateral cap is above grip
    with pytest.warns(CurvespeedWarning, match="exceeds the lateral grip"):
        plan_profile(geo, limits)


def test_top_speed_that_looks_like_kmh_is_warned(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    limits = write(tmp_path, LIMITS_FILE, "[limits]\nmax_speed_mps = 120\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert_warned(result, limits, ["max_speed_mps = 120 m/s is 432 km/h", "divide it by 3.6"])
    assert out.exists()


def test_zone_running_past_the_route_end_is_clipped_with_a_warning(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    limits = write(tmp_path, LIMITS_FILE, "[limits]\n[[zone]]\nstart_m = 80\nend_m = 5000\n"
                                          "max_speed_mps = 6\n")
    out = tmp_path / "p.csv"
    result = run("plan", route, "-l", limits, "-o", out)
    assert_warned(result, limits, ["[[zone]] #1", "speed zone 80..5000 m runs past the route",
                                   "applies over 80..190.0 m only"])
    table = read_table_csv(out)
    s, v = table.columns["station_m"], table.columns["speed_mps"]
    assert v[s >= 80.0].max() <= 6.0 * (1 + 1e-4)       # the convex solver's verified tolerance


def test_check_says_a_zone_past_the_route_end_once(tmp_path):
    # check judges the speeds on the curvature's bound and on its estimate: two problems from
    # the same limits, one warning about them
    route = write(tmp_path, "r.csv", BEND)
    limits = write(tmp_path, LIMITS_FILE, "[limits]\n[[zone]]\nstart_m = 80\nend_m = 5000\n"
                                          "max_speed_mps = 6\n")
    result = run("check", route, "-l", limits)
    assert result.exit_code in (0, 1), result.output
    said = [w for w in lines_of(result, "warning:") if "runs past the route" in w]
    assert len(said) == 1, result.output


# ---------------------------------------------------------------------------- speeds files

def _planned(tmp_path):
    route = write(tmp_path, "r.csv", BEND)
    profile = tmp_path / "p.csv"
    assert run("plan", route, "-o", profile).exit_code == 0
    return route, profile


def test_speeds_file_shorter_than_the_route_is_refused(tmp_path):
    route, profile = _planned(tmp_path)
    lines = profile.read_text().splitlines()
    short = write(tmp_path, "short.csv", "\n".join(lines[:100]) + "\n")
    report = tmp_path / "report.json"
    result = run("check", route, "--speeds", short, "--json", report)
    assert_refused(result, tmp_path, short, ["the speeds cover stations 0.0-", "missing",
                                             "Give speeds for the whole route"],
                   outputs=[report])


def test_speeds_file_cut_off_mid_line_is_refused(tmp_path):
    route, profile = _planned(tmp_path)
    text = profile.read_text()
    cut = write(tmp_path, "cut.csv", text[: len(text) // 2 + 7])
    last_line = cut.read_text().count("\n") + 1
    result = run("check", route, "--speeds", cut)
    assert_refused(result, tmp_path, cut, [f"line {last_line}:", "the file looks cut short"])


@pytest.mark.parametrize("command, output", [("export", "trajectory.csv"), ("plot", "p.png")])
def test_profile_cut_off_mid_line_is_refused_by_export_and_plot(command, output, tmp_path):
    _, profile = _planned(tmp_path)
    text = profile.read_text()
    cut = write(tmp_path, "cut.csv", text[: len(text) // 3 + 5])
    last_line = cut.read_text().count("\n") + 1
    out = tmp_path / output
    result = run(command, cut, "-o", out)
    assert_refused(result, tmp_path, cut, [f"line {last_line}:", "the file looks cut short"],
                   outputs=[out])


def test_profile_cut_inside_its_last_column_is_refused_as_cut_short(tmp_path):
    # Cut three characters before the end of a row whose step is a constant acceleration: as
    # many cells as the header names, but the step kind is cut off mid-word.
    _, profile = _planned(tmp_path)
    lines = profile.read_text().splitlines(keepends=True)
    k = next(i for i, line in enumerate(lines) if i > 20 and line.rstrip().endswith(
        ",constant_accel"))
    cut = write(tmp_path, "cut.csv", "".join(lines[:k]) + lines[k].rstrip()[:-3])
    out = tmp_path / "trajectory.csv"
    result = run("export", cut, "-o", out)
    assert_refused(result, tmp_path, cut, [f"line {k + 1}:", "'constant_ac'",
                                           "the file looks cut short"], outputs=[out])


def test_speeds_file_from_a_european_spreadsheet_checks_the_same(tmp_path):
    route, profile = _planned(tmp_path)
    comma = run("check", route, "--speeds", profile)
    table = read_table_csv(profile)
    s, v = table.columns["station_m"], table.columns["speed_mps"]
    text = "station_m;speed_mps\n" + "".join(f"{a:.4f};{b:.6f}\n".replace(".", ",")
                                             for a, b in zip(s, v))
    europe = write(tmp_path, "europe.csv", text)
    result = run("check", route, "--speeds", europe)
    assert result.exit_code == comma.exit_code == 0, result.output
    assert_warned(result, europe, ["semicolon-separated values with decimal commas"])
    assert lines_of(result, "PASS") == lines_of(comma, "PASS")


# ------------------------------------------------------------------------------- determinism

def test_same_inputs_give_byte_identical_profiles_and_geometry(tmp_path):
    text, _, _ = _standstill_track()
    route = write(tmp_path, "t.gpx", text)
    bend = write(tmp_path, "bend.csv", BEND)
    outputs = []
    for k in range(2):
        p, g = tmp_path / f"p{k}.csv", tmp_path / f"g{k}.csv"
        assert run("plan", bend, "-o", p, "--stop", "120").exit_code == 0
        assert run("route", route, "-o", g).exit_code == 0
        outputs.append((p.read_bytes(), g.read_bytes()))
    assert outputs[0] == outputs[1]


def test_three_points_spanning_the_earth_cost_what_the_spacing_asks():
    # A 3-point file spanning 30,000 km, planned at 100 m stations: 3e5 stations, which is the
    # work asked for; the route stage holds a few kilobytes per station (it once tabulated arc
    # length every 2 m whatever the spacing: 10 GB, then MemoryError). At the default 1 m the
    # same file (here 4,900 km) would need 4.9e6 stations, beyond the 2e6 allowed: refused,
    # naming the spacing that would do. Coordinates are metres in a projected frame (invented).
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        far = write(folder, "far.csv", "x_m,y_m\n0,0\n15000000,10\n30000000,0\n")
        before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        result = run("route", far, "--spacing", "100")
        grown_mb = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before) / 1024.0
        assert result.exit_code == 0, result.output
        assert "30000000.0 m (open)" in result.output
        assert grown_mb < 2000.0
        wide = write(folder, "wide.csv", "x_m,y_m\n0,0\n2450000,10\n4900000,0\n")
        assert_refused(run("route", wide), folder, wide,
                       ["4900.0 km at 1 m spacing would need 4.9e+06 stations (at most 2e+06)",
                        "use --spacing 2.45 or more"])
