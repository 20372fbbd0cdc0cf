"""Catalogue of hostile input files, reader by reader, run through the command line.

Every text input (route CSV, GeoJSON, GPX, limits TOML, speeds CSV, profile CSV, the profile's
JSON sidecar) goes through one bounded reader and one number parser. Each case asserts the
exit status, the one ``error:`` line naming the file (and the line, position or key), and that
the folder is exactly as it was (no output, no temporary file, inputs unchanged):

* **not a regular file**: a FIFO (never opened: it would block), ``/dev/zero`` and
  ``/dev/urandom`` (never read: they never end), a folder; a file larger than the size limit
  (a sparse file, so the test costs no disk);
* **numbers**: digits of other scripts (Arabic-Indic, full-width) that Python's ``float``
  would take, integers of 400 and 5,000 digits (too large for a float; beyond Python's
  4,300-digit integer parser), ``1e999``, speeds of 1e160 and 1e300 m/s, a latitude of 200;
* **structure**: JSON nested 100,000 deep, TOML arrays nested 3,000 deep, GeoJSON with empty
  coordinates or parts, a ``"geometries"`` that is not a list, an unknown XML encoding;
* **command-line numbers**: ``nan``, ``inf`` and foreign digits in options, and a stop just
  past the end of the route, whose message must show enough digits to see why.

Cases that are read (a Unicode line separator in a comment, a broken sidecar that ``export``
needs only for a name) assert exit 0, the warning, and that only the output was written.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pytest

from hostile_helpers import (LAT0, LON0, assert_done, assert_refused, assert_usage_error, bend_csv,
                             latlon_bend_csv, lines_of, planned_files, replace_cell, run,
                             snapshot, write)

LIMITS = "[limits]\nmax_speed_mps = 20.0\n"
FIFO = object()                   # a content marker: make a FIFO of that name
FOLDER = object()                 # ... a folder


def link(target: str):
    """A content marker: a symbolic link to ``target``."""
    return ("link", target)


def sparse(size: int):
    """A content marker: a sparse file of ``size`` bytes (no disk used)."""
    return ("sparse", size)


def materialise(folder: Path, files: dict) -> None:
    for name, content in files.items():
        path = folder / name
        if content is FIFO:
            os.mkfifo(path)
        elif content is FOLDER:
            path.mkdir()
        elif isinstance(content, tuple) and content[0] == "link":
            os.symlink(content[1], path)
        elif isinstance(content, tuple) and content[0] == "sparse":
            with open(path, "wb") as fh:
                fh.truncate(content[1])
        else:
            write(folder, name, content)


def expand(folder: Path, args) -> list[str]:
    return [str(folder / a[1:-1]) if a.startswith("{") and a.endswith("}") else a for a in args]


@pytest.fixture(scope="module")
def profiles(tmp_path_factory):
    """Texts of a planned metric and a planned geographic profile (and their sidecars)."""
    texts = {}
    for geographic in (False, True):
        folder = tmp_path_factory.mktemp("geo" if geographic else "metric")
        _, profile, sidecar = planned_files(folder, geographic)
        texts["geo" if geographic else "metric"] = profile.read_text()
        texts["meta"] = sidecar.read_text()
    return texts


# ----------------------------------------------------------------------------- file builders

def geojson(coords, kind="LineString") -> str:
    return json.dumps({"type": "Feature", "properties": {"name": "invented"},
                       "geometry": {"type": kind, "coordinates": coords}})


def lonlat(n=20):
    rows = latlon_bend_csv().splitlines()[1:n + 1]
    return [[float(r.split(",")[1]), float(r.split(",")[0])] for r in rows]


def with_raw_number(coords, index: int, raw: str) -> str:
    """GeoJSON text whose longitude at ``index`` is the literal token ``raw``."""
    marker = 12345.678
    coords = [list(c) for c in coords]
    coords[index][0] = marker
    return geojson(coords).replace(str(marker), raw)


def gpx(points=None, head='<?xml version="1.0" encoding="UTF-8"?>\n', lat=None, ele=None) -> str:
    """An invented track due north; ``lat`` or ``ele`` replace point 3's text."""
    pts = []
    for i in range(12):
        la = lat if (lat is not None and i == 2) else f"{LAT0 + i * 1e-4:.6f}"
        el = f"<ele>{ele}</ele>" if (ele is not None and i == 2) else "<ele>10.0</ele>"
        pts.append(f'<trkpt lat="{la}" lon="{LON0:.6f}">{el}</trkpt>')
    return (f'{head}<gpx version="1.1" creator="tests" xmlns="http://www.topografix.com/GPX/1/1">'
            f"<trk><trkseg>{''.join(pts)}</trkseg></trk></gpx>\n")


def nested_json(depth: int) -> str:
    return "[" * depth + "]" * depth


ARABIC_12 = "\u0661\u0662"            # Arabic-Indic digits one, two
FULLWIDTH_12 = "\uff11\uff12"         # full-width digits one, two
DIGITS_400 = "1" + "0" * 399
DIGITS_5000 = "1" + "0" * 4999
BIG = 128 * 1024 * 1024 + 1           # one byte over the size limit (io._common.MAX_INPUT_BYTES)


def route_csv_with(cell: str) -> str:
    return bend_csv().replace("\n50.000,0.000\n", f"\n{cell},0.000\n")


# id -> (arguments, files, the file the message names, fragments). "{p}" is the metric
# profile, "{g}" the geographic one, "{meta}" its sidecar text; see _files().
REFUSED = {
    # -- not a regular file, or too large: every reader
    "route CSV is a FIFO": (["route", "{r.csv}"], {"r.csv": FIFO}, "r.csv",
                            ["is a FIFO (named pipe), not a regular file",
                             "save the data to a file"]),
    "route GeoJSON is a FIFO": (["route", "{r.geojson}"], {"r.geojson": FIFO}, "r.geojson",
                                ["is a FIFO"]),
    "route GPX is a FIFO": (["route", "{r.gpx}"], {"r.gpx": FIFO}, "r.gpx", ["is a FIFO"]),
    "route is /dev/zero": (["route", "{z.csv}"], {"z.csv": link("/dev/zero")}, "z.csv",
                           ["is a character device, not a regular file",
                            "may never end or block forever"]),
    "route is /dev/urandom": (["plan", "{u.gpx}"], {"u.gpx": link("/dev/urandom")}, "u.gpx",
                              ["is a character device"]),
    "route is a folder": (["route", "{d.csv}"], {"d.csv": FOLDER}, "d.csv",
                          ["is a folder, not a file"]),
    "route is too large": (["route", "{big.csv}"], {"big.csv": sparse(BIG)}, "big.csv",
                           ["is 134,217,729 bytes, more than the 134,217,728 bytes (128 MiB) "
                            "curvespeed reads", "thin the points or split the file"]),
    "limits file is a FIFO": (["plan", "{r.csv}", "-l", "{l.toml}"],
                              {"r.csv": bend_csv(), "l.toml": FIFO}, "l.toml", ["is a FIFO"]),
    "limits file is /dev/zero": (["check", "{r.csv}", "-l", "{l.toml}"],
                                 {"r.csv": bend_csv(), "l.toml": link("/dev/zero")}, "l.toml",
                                 ["is a character device"]),
    "limits file is too large": (["plan", "{r.csv}", "-l", "{l.toml}"],
                                 {"r.csv": bend_csv(), "l.toml": sparse(BIG)}, "l.toml",
                                 ["more than the 134,217,728 bytes"]),
    "speeds file is a FIFO": (["check", "{r.csv}", "--speeds", "{s.csv}"],
                              {"r.csv": bend_csv(), "s.csv": FIFO}, "s.csv", ["is a FIFO"]),
    "speeds file is /dev/urandom": (["check", "{r.csv}", "--speeds", "{s.csv}"],
                                    {"r.csv": bend_csv(), "s.csv": link("/dev/urandom")},
                                    "s.csv", ["is a character device"]),
    "speeds GPX track is a FIFO": (["check", "{r.csv}", "--speeds", "{s.gpx}"],
                                   {"r.csv": latlon_bend_csv(), "s.gpx": FIFO}, "s.gpx",
                                   ["is a FIFO"]),
    "profile for export is a FIFO": (["export", "{q.csv}", "-o", "{t.csv}"], {"q.csv": FIFO},
                                     "q.csv", ["is a FIFO"]),
    "profile for export is /dev/zero": (["export", "{q.csv}", "-o", "{t.csv}"],
                                        {"q.csv": link("/dev/zero")}, "q.csv",
                                        ["is a character device"]),
    "profile for plot is a FIFO": (["plot", "{q.csv}", "-o", "{f.png}"], {"q.csv": FIFO},
                                   "q.csv", ["is a FIFO"]),
    "profile is too large": (["export", "{q.csv}", "-o", "{t.csv}"], {"q.csv": sparse(BIG)},
                             "q.csv", ["more than the 134,217,728 bytes"]),
    "sidecar given to plot is a FIFO": (["plot", "{p.csv}", "--meta", "{m.json}", "-o",
                                         "{f.png}"], {"p.csv": "{p}", "m.json": FIFO},
                                        "m.json", ["is a FIFO"]),
    "sidecar given to plot is /dev/zero": (["plot", "{p.csv}", "--meta", "{m.json}", "-o",
                                            "{f.png}"],
                                           {"p.csv": "{p}", "m.json": link("/dev/zero")},
                                           "m.json", ["is a character device"]),
    # -- numbers in route files
    "route CSV with Arabic-Indic digits": (
        ["route", "{r.csv}"], {"r.csv": route_csv_with(ARABIC_12)}, "r.csv",
        ["line 12", "has digits other than ASCII 0-9", "write the number with the digits 0-9"]),
    "route CSV with full-width digits": (
        ["route", "{r.csv}"], {"r.csv": route_csv_with(FULLWIDTH_12)}, "r.csv",
        ["line 12", "digits other than ASCII 0-9"]),
    "route CSV with a 400-digit number": (
        ["route", "{r.csv}"], {"r.csv": route_csv_with(DIGITS_400)}, "r.csv",
        ["line 12", "value '10000000000000000000...' (400 characters) is not a finite "
                    "number (too large)"]),
    "route CSV with a 5,000-digit number": (
        ["plan", "{r.csv}"], {"r.csv": route_csv_with(DIGITS_5000)}, "r.csv",
        ["line 12", "(5000 characters) is not a finite number (too large)"]),
    "route CSV with 1e999": (["route", "{r.csv}"], {"r.csv": route_csv_with("1e999")}, "r.csv",
                             ["line 12", "'1e999' is not a finite number (too large)"]),
    "route CSV with underscores in a number": (
        ["route", "{r.csv}"], {"r.csv": route_csv_with("5_0")}, "r.csv",
        ["line 12", "'5_0' is not a number"]),
    "route CSV with a hexadecimal number": (
        ["route", "{r.csv}"], {"r.csv": route_csv_with("0x32")}, "r.csv", ["line 12"]),
    "GeoJSON with a 400-digit integer": (
        ["route", "{r.geojson}"], {"r.geojson": with_raw_number(lonlat(), 3, DIGITS_400)},
        "r.geojson", ["position 4", "longitude is not a finite number (too large)"]),
    "GeoJSON with a 5,000-digit integer": (
        ["plan", "{r.geojson}"], {"r.geojson": with_raw_number(lonlat(), 0, DIGITS_5000)},
        "r.geojson", ["position 1", "longitude is not a finite number (too large)"]),
    "GeoJSON with 1e999": (
        ["route", "{r.geojson}"], {"r.geojson": with_raw_number(lonlat(), 5, "-1e999")},
        "r.geojson", ["position 6", "too large"]),
    "GeoJSON with NaN": (
        ["route", "{r.geojson}"], {"r.geojson": with_raw_number(lonlat(), 2, "NaN")},
        "r.geojson", ["position 3", "longitude NaN is not a finite number"]),
    "GeoJSON with a number as a string of Arabic-Indic digits": (
        ["route", "{r.geojson}"], {"r.geojson": with_raw_number(lonlat(), 2, f'"{ARABIC_12}"')},
        "r.geojson", ["position 3", f'longitude "{ARABIC_12}" is not a finite number']),
    "GPX latitude in Arabic-Indic digits": (
        ["route", "{t.gpx}"], {"t.gpx": gpx(lat=ARABIC_12)}, "t.gpx",
        ["trkpt 3", "lat value", "digits other than ASCII 0-9"]),
    "GPX elevation in full-width digits": (
        ["route", "{t.gpx}"], {"t.gpx": gpx(ele=FULLWIDTH_12)}, "t.gpx",
        ["trkpt 3", "ele value", "digits other than ASCII 0-9"]),
    "GPX latitude of 5,000 digits": (
        ["route", "{t.gpx}"], {"t.gpx": gpx(lat=DIGITS_5000)}, "t.gpx",
        ["trkpt 3", "lat value '10000000000000000000...' (5000 characters) is not a finite "
                    "number"]),
    # -- structure of route files
    "GeoJSON with empty coordinates": (
        ["route", "{r.geojson}"], {"r.geojson": geojson([])}, "r.geojson",
        ["\"coordinates\" is empty: the line has no positions"]),
    "GeoJSON MultiLineString with an empty part": (
        ["route", "{r.geojson}"], {"r.geojson": geojson([lonlat(), []], "MultiLineString")},
        "r.geojson", ["part 2 of the MultiLineString has no positions"]),
    "GeoJSON \"geometries\": 5": (
        ["route", "{r.geojson}"], {"r.geojson": '{"type": "GeometryCollection", '
                                                '"geometries": 5}'},
        "r.geojson", ["GeometryCollection has no \"geometries\" list (found 5)"]),
    "GeoJSON \"features\": 5": (
        ["route", "{r.geojson}"], {"r.geojson": '{"type": "FeatureCollection", "features": 5}'},
        "r.geojson", ["FeatureCollection has no \"features\" list"]),
    "GeoJSON nested 100,000 deep": (
        ["route", "{r.geojson}"], {"r.geojson": nested_json(100_000)}, "r.geojson",
        ["nest more than 64 levels deep"]),
    "GeoJSON nested 3,000 deep": (
        ["route", "{r.json}"], {"r.json": nested_json(3_000)}, "r.json",
        ["nest more than 64 levels deep"]),
    "GeoJSON GeometryCollections nested 500 deep": (
        ["route", "{r.geojson}"],
        {"r.geojson": '{"type": "GeometryCollection", "geometries": [' * 500 + "]}" * 500},
        "r.geojson", ["nest more than 64 levels deep"]),
    "GPX with an unknown encoding": (
        ["route", "{t.gpx}"],
        {"t.gpx": gpx(head='<?xml version="1.0" encoding="bogus-enc"?>\n')}, "t.gpx",
        ["line 1", "names the text encoding 'bogus-enc'", "save the file as UTF-8"]),
    # -- limits files
    "limits with a 400-digit integer": (
        ["plan", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": f"[limits]\nmax_speed_mps = {DIGITS_400}\n"}, "l.toml",
        ["[limits] max_speed_mps has 400 digits: not a finite number (too large)"]),
    "limits with a 5,000-digit integer": (
        ["plan", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": f"[limits]\nmax_speed_mps = {DIGITS_5000}\n"},
        "l.toml", ["line 2", "a number with thousands of digits cannot be a limit"]),
    "limits with 1e999": (
        ["check", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": "[limits]\nmax_accel_mps2 = 1e999\n"}, "l.toml",
        ["max_accel_mps2 is not a finite number (too large)"]),
    "limits with nan": (
        ["plan", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": "[limits]\nmass_kg = nan\n"}, "l.toml",
        ["mass_kg NaN is not a finite number"]),
    "limits with arrays nested 3,000 deep": (
        ["plan", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": "[limits]\nmax_speed_mps = " + nested_json(3000)},
        "l.toml", ["nest too deeply to read"]),
    "limits with arrays nested 100 deep": (
        ["plan", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": "[limits]\nmax_speed_mps = " + nested_json(100)},
        "l.toml", ["nest more than 64 levels deep"]),
    "limits with a stop in Arabic-Indic digits as a string": (
        ["plan", "{r.csv}", "-l", "{l.toml}"],
        {"r.csv": bend_csv(), "l.toml": f'[limits]\n[[stop]]\nstation_m = "{ARABIC_12}"\n'},
        "l.toml", [f'[stop #1] station_m "{ARABIC_12}" is not a finite number']),
    # -- speeds files and profiles
    "speeds of 1e160 m/s": (
        ["check", "{r.csv}", "--speeds", "{s.csv}"],
        {"r.csv": bend_csv(), "s.csv": ("{p}", 21, "speed_mps", "1e160")}, "s.csv",
        ["line 21", "column 'speed_mps' value 1e+160 is outside -1000..1000",
         "no road vehicle is that fast"]),
    "speeds in Arabic-Indic digits": (
        ["check", "{r.csv}", "--speeds", "{s.csv}"],
        {"r.csv": bend_csv(), "s.csv": ("{p}", 30, "speed_mps", ARABIC_12)}, "s.csv",
        ["line 30", "digits other than ASCII 0-9"]),
    "speed station of 5,000 digits": (
        ["check", "{r.csv}", "--speeds", "{s.csv}"],
        {"r.csv": bend_csv(), "s.csv": ("{p}", 40, "station_m", DIGITS_5000)}, "s.csv",
        ["line 40", "(5000 characters) is not a finite number (too large)"]),
    "profile speed of 1e300 for export": (
        ["export", "{q.csv}", "-o", "{t.csv}"], {"q.csv": ("{p}", 50, "speed_mps", "1e300")},
        "q.csv", ["line 50", "value 1e+300 is outside -1000..1000"]),
    "profile speed of 1e300 for plot": (
        ["plot", "{q.csv}", "-o", "{f.png}"], {"q.csv": ("{p}", 50, "speed_mps", "1e300")},
        "q.csv", ["line 50", "speed_mps"]),
    "profile latitude of 200 for a GeoJSON export": (
        ["export", "{q.csv}", "-o", "{t.geojson}"], {"q.csv": ("{g}", 10, "lat", "200")},
        "q.csv", ["line 10", "column 'lat' value 200 is outside -90..90"]),
    "profile longitude of -500": (
        ["export", "{q.csv}", "-o", "{t.json}"], {"q.csv": ("{g}", 10, "lon", "-500")},
        "q.csv", ["line 10", "column 'lon' value -500 is outside -180..180"]),
    "profile curvature of 1e300": (
        ["export", "{q.csv}", "-o", "{t.csv}"], {"q.csv": ("{p}", 70, "curvature_1pm", "1e300")},
        "q.csv", ["line 70", "a radius below 1 mm"]),
    "profile x of 1e300": (
        ["plot", "{q.csv}", "-o", "{f.svg}"], {"q.csv": ("{p}", 70, "x_m", "1e300")},
        "q.csv", ["line 70", "farther than any place on Earth"]),
    "profile time of 1e300": (
        ["export", "{q.csv}", "-o", "{t.csv}"], {"q.csv": ("{p}", 8, "time_s", "1e300")},
        "q.csv", ["line 8", "far beyond any value a profile holds"]),
    "profile in full-width digits": (
        ["export", "{q.csv}", "-o", "{t.csv}"], {"q.csv": ("{p}", 9, "station_m", FULLWIDTH_12)},
        "q.csv", ["line 9", "digits other than ASCII 0-9"]),
    # -- sidecars the user names (plot --meta): they must be readable
    "plot --meta nested 100,000 deep": (
        ["plot", "{p.csv}", "--meta", "{m.json}", "-o", "{f.png}"],
        {"p.csv": "{p}", "m.json": nested_json(100_000)}, "m.json", ["nest more than 64"]),
    "plot --meta with a 400-digit integer": (
        ["plot", "{p.csv}", "--meta", "{m.json}", "-o", "{f.png}"],
        {"p.csv": "{p}", "m.json": '{"limits": {"max_speed_mps": ' + DIGITS_400 + "}}"},
        "m.json", ["limits.max_speed_mps must be a finite number, got a number too large"]),
    "plot --meta with a 5,000-digit integer": (
        ["plot", "{p.csv}", "--meta", "{m.json}", "-o", "{f.png}"],
        {"p.csv": "{p}", "m.json": '{"limits": {"mass_kg": ' + DIGITS_5000 + "}}"},
        "m.json", ["limits.mass_kg must be a finite number"]),
    # -- command-line numbers
    "--comfort-weight nan": (["plan", "{r.csv}", "--comfort-weight", "nan"],
                             {"r.csv": bend_csv()}, None, ["'nan' is not a finite number"]),
    "--comfort-weight inf": (["plan", "{r.csv}", "--comfort-weight", "inf"],
                             {"r.csv": bend_csv()}, None, ["'inf' is not a finite number"]),
    "--max-speed -inf": (["plan", "{r.csv}", "--max-speed", "-inf"], {"r.csv": bend_csv()},
                         None, ["'-inf' is not a finite number"]),
    "--max-speed in full-width digits": (["plan", "{r.csv}", "--max-speed", FULLWIDTH_12],
                                         {"r.csv": bend_csv()}, None,
                                         ["digits other than ASCII 0-9"]),
    "--spacing nan": (["route", "{r.csv}", "--spacing", "nan"], {"r.csv": bend_csv()}, None,
                      ["'nan' is not a finite number"]),
    "--position-noise 1e999": (["route", "{r.csv}", "--position-noise", "1e999"],
                               {"r.csv": bend_csv()}, None,
                               ["'1e999' is not a finite number (too large)"]),
    "--stop nan": (["plan", "{r.csv}", "--stop", "nan"], {"r.csv": bend_csv()}, None,
                   ["'nan' is not a finite number"]),
    "--stop in Arabic-Indic digits": (["plan", "{r.csv}", "--stop", ARABIC_12],
                                      {"r.csv": bend_csv()}, None, ["digits other than ASCII"]),
    "--zone with nan": (["plan", "{r.csv}", "--zone", "0:nan:5"], {"r.csv": bend_csv()}, None,
                        ["'0:nan:5': 'nan' is not a finite number"]),
    "--zone in Arabic-Indic digits": (["check", "{r.csv}", "--zone", f"0:{ARABIC_12}:5"],
                                      {"r.csv": bend_csv()}, None, ["digits other than ASCII"]),
    "--superelevation with inf": (["plan", "{r.csv}", "--superelevation", "0:10:inf"],
                                  {"r.csv": bend_csv()}, None, ["'inf' is not a finite number"]),
    "--speed-kmh nan": (["check", "{r.csv}", "--speed-kmh", "nan"], {"r.csv": bend_csv()}, None,
                        ["'nan' is not a finite number"]),
    "--design-speed-kmh inf": (["check", "{r.csv}", "--speed-kmh", "30", "--design-speed-kmh",
                                "inf"], {"r.csv": bend_csv()}, None, ["not a finite number"]),
    "export --dt nan": (["export", "{p.csv}", "-o", "{t.csv}", "--dt", "nan"], {"p.csv": "{p}"},
                        None, ["'nan' is not a finite number"]),
    "export --dwell inf": (["export", "{p.csv}", "-o", "{t.csv}", "--dwell", "inf"],
                           {"p.csv": "{p}"}, None, ["'inf' is not a finite number"]),
    "export --station-step -1": (["export", "{p.csv}", "-o", "{t.csv}", "--station-step", "-1"],
                                 {"p.csv": "{p}"}, None, ["-1 is not a positive number"]),
}


def _files(folder: Path, files: dict, profiles: dict) -> None:
    resolved = {}
    for name, content in files.items():
        if isinstance(content, str) and content in ("{p}", "{g}"):
            content = profiles["metric" if content == "{p}" else "geo"]
        elif isinstance(content, tuple) and content[0] in ("{p}", "{g}"):
            base, line, column, value = content
            content = replace_cell(profiles["metric" if base == "{p}" else "geo"], line, column,
                                   value)
        resolved[name] = content
    materialise(folder, resolved)


@pytest.mark.parametrize("case", list(REFUSED))
def test_refused_with_file_and_place_and_nothing_changed(case, tmp_path, profiles):
    args, files, named, fragments = REFUSED[case]
    _files(tmp_path, files, profiles)
    before = snapshot(tmp_path)
    result = run(*expand(tmp_path, args))
    if named is None:               # a command-line value: click's usage error names the option
        assert_usage_error(result, tmp_path, before, [f"'{args[-2]}'", *fragments])
    else:
        assert_refused(result, tmp_path, before, named, fragments)


# --------------------------------------------------------------------------- read, with care

@pytest.mark.parametrize("separator", ["\u2028", "\u2029", "\u0085"])
def test_unicode_line_separator_in_a_profile_comment_is_part_of_the_comment(
        separator, tmp_path, profiles):
    # the route reader splits lines only at \n, \r\n and \r; the profile reader now does too
    text = profiles["metric"]
    lines = text.splitlines()
    lines.insert(1, f"# planned for a test{separator}station_m,speed_mps,not data")
    q = write(tmp_path, "q.csv", "\n".join(lines) + "\n")
    reference = write(tmp_path, "ref.csv", text)
    before = snapshot(tmp_path)
    result = run("export", q, "-o", tmp_path / "t.csv")
    assert_done(result, tmp_path, before, written=[tmp_path / "t.csv"])
    assert run("export", reference, "-o", tmp_path / "u.csv").exit_code == 0
    assert (tmp_path / "t.csv").read_bytes() == (tmp_path / "u.csv").read_bytes()


@pytest.mark.parametrize("sidecar, warned", [
    (nested_json(100_000), "nest more than 64 levels deep"),
    ('{"limits": {"max_speed_mps": ' + DIGITS_400 + "}}", "a number too large to be finite"),
    ('{"limits": {"mass_kg": ' + DIGITS_5000 + "}}", "a number too large to be finite"),
    (FIFO, "is a FIFO"),
])
@pytest.mark.parametrize("command, output", [("export", "t.csv"), ("plot", "f.png")])
def test_a_broken_sidecar_next_to_the_profile_is_warned_about_and_left_out(
        command, output, sidecar, warned, tmp_path, profiles):
    # export needs the sidecar only for the route's name, plot only for the limit lines: a
    # broken one found next to the profile is reported and the command goes on without it
    materialise(tmp_path, {"p.csv": profiles["metric"], "p.meta.json": sidecar})
    before = snapshot(tmp_path)
    result = run(command, tmp_path / "p.csv", "-o", tmp_path / output)
    assert_done(result, tmp_path, before, written=[tmp_path / output], warned=warned)
    assert [w for w in lines_of(result, "warning:") if "p.meta.json" in w]


def test_stop_just_past_the_end_shows_why_it_is_outside(tmp_path):
    # A straight route of 99,999.96 m: printed to 0.1 m its end reads 100000.0, which would
    # make "--stop 100000 lies outside the route (0..100000.0 m)" look wrong.
    x = np.linspace(0.0, 99_999.96, 101)
    route = write(tmp_path, "long.csv", "x_m,y_m\n" + "".join(f"{a:.2f},0\n" for a in x))
    before = snapshot(tmp_path)
    result = run("plan", route, "--spacing", "100", "--stop", "100000")
    message = assert_refused(result, tmp_path, before, "--stop",
                             ["stop at station 100000 m lies outside the route (0..99999.96 m)"])
    assert "100000.0 m)" not in message


def test_zone_starting_just_past_the_end_shows_why_it_is_outside(tmp_path):
    x = np.linspace(0.0, 999.96, 101)
    route = write(tmp_path, "r.csv", "x_m,y_m\n" + "".join(f"{a:.2f},0\n" for a in x))
    before = snapshot(tmp_path)
    result = run("check", route, "--spacing", "10", "--zone", "1000:1200:5")
    assert_refused(result, tmp_path, before, "--zone",
                   ["speed zone 1000..1200 m lies outside the route (0..999.96 m)"])


def test_speeds_of_1e160_are_refused_without_numpy_warnings(tmp_path, profiles):
    # the speed check used to square 1e160 (overflow), print numpy's RuntimeWarning and say
    # "speed np.float64(inf)" without a line; the reader now stops at the line
    route = write(tmp_path, "r.csv", bend_csv())
    speeds = write(tmp_path, "s.csv", replace_cell(profiles["metric"], 21, "speed_mps", "1e160"))
    before = snapshot(tmp_path)
    result = run("check", route, "--speeds", speeds, "--json", tmp_path / "c.json")
    assert_refused(result, tmp_path, before, speeds, ["line 21", "1e+160"])
    assert "Warning" not in result.output and "inf" not in result.output


# ------------------------------------------------------------ geographic routes, far and wide
# (lengths of long routes against pyproj's geodesics: tests/test_reference_geodesy.py)

def test_a_route_too_wide_for_one_projection_is_warned_about(tmp_path):
    # An invented L: 1000 km east along 10 N, then 1000 km north. No great circle passes
    # within 90 km of all of it, so lengths are off by more than 1e-4 somewhere: warned, with
    # the route's reach and the scale error named.
    lon1 = np.linspace(0.0, 9.1, 92)
    lat2 = np.linspace(10.0, 19.0, 91)[1:]
    lat = np.concatenate([np.full(lon1.size, 10.0), lat2])
    lon = np.concatenate([lon1, np.full(lat2.size, 9.1)])
    route = write(tmp_path, "wide.csv", "lat,lon\n" + "".join(f"{a:.7f},{b:.7f}\n"
                                                             for a, b in zip(lat, lon)))
    result = run("route", route, "--spacing", "1000")
    warning = [w for w in lines_of(result, "warning:") if "too far for one local map" in w]
    assert warning and str(route) in warning[0], result.output
    assert "km from its centre" in warning[0] and "% off in parts of it" in warning[0]


@pytest.mark.parametrize("fmt", ["geojson", "gpx", "csv"])
def test_a_route_reaching_a_quarter_of_the_way_round_the_earth_is_refused(tmp_path, fmt):
    # Along the equator from 90 W to 90 E in steps of 0.5 degree: it lies on one great circle,
    # but its ends are 90 degrees of arc from its middle, where the transverse Mercator's scale
    # is infinite and the oblique Mercator folds back. It was warned about as "up to inf % off"
    # and then refused at "position 1: x is not a finite number" although position 1 is fine.
    lon = np.arange(-90.0, 90.25, 0.5)
    if fmt == "geojson":
        text = json.dumps({"type": "LineString", "coordinates": [[a, 0.0] for a in lon]})
    elif fmt == "gpx":
        text = ('<?xml version="1.0"?><gpx version="1.1" creator="test" '
                'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>'
                + "".join(f'<trkpt lat="0" lon="{a}"/>' for a in lon) + "</trkseg></trk></gpx>")
    else:
        text = "lat,lon\n" + "".join(f"0,{a}\n" for a in lon)
    route = write(tmp_path, f"equator.{fmt}", text)
    before = snapshot(tmp_path)
    result = run("route", route, "--spacing", "1000", "-o", tmp_path / "g.csv")
    message = assert_refused(result, tmp_path, before, route,
                             ["reaches 10019 km (90 degrees of arc) from its centre",
                              "a quarter of the way round the Earth", "Split the route"])
    assert "not a finite number" not in message and "warning" not in result.output


def test_a_long_route_on_one_great_circle_is_read_without_a_word(tmp_path):
    # 75 degrees either side of its middle along the equator: the oblique Mercator along the
    # equator keeps lengths to round-off there, so nothing is refused or warned about.
    lon = np.arange(-75.0, 75.25, 0.5)
    text = json.dumps({"type": "LineString", "coordinates": [[a, 0.0] for a in lon]})
    route = write(tmp_path, "equator.geojson", text)
    result = run("route", route, "--spacing", "1000")
    assert result.exit_code == 0, result.output
    assert "warning" not in result.output and "error" not in result.output
