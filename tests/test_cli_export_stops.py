"""Stop names and dwells from the limits file into the export, the report and the figure; the
start time's refusals.

The bundled invented shuttle route is planned with named stops ([[stop]] with name and
dwell_s, one name with a comma and a quote to test CSV quoting) and exported in every format.
Each test checks the exit code, the message and the file written (or not written).
"""

from __future__ import annotations

import csv
import json
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli

SHUTTLE = Path(__file__).resolve().parent.parent / "routes" / "shuttle_route.gpx"
CANTEEN = 'Canteen, "east" door'
LIMITS = ("[limits]\nmax_speed_mps = 8.0\n"
          '[[stop]]\nstation_m = 290.0\nname = "Workshops"\ndwell_s = 30\n'
          "[[stop]]\nstation_m = 900.0\nname = 'Canteen, \"east\" door'\ndwell_s = 20\n"
          "[[stop]]\nstation_m = 1300.0\n")


def run(*args):
    return CliRunner().invoke(cli, [str(a) for a in args])


@pytest.fixture(scope="module")
def shuttle(tmp_path_factory):
    folder = tmp_path_factory.mktemp("shuttle")
    limits = folder / "limits.toml"
    limits.write_text(LIMITS)
    profile = folder / "shuttle.csv"
    result = run("plan", SHUTTLE, "-l", limits, "-o", profile, "--report",
                 folder / "plan.html")
    assert result.exit_code == 0, result.output
    return profile


def rows_of(path: Path) -> list[dict]:
    with open(path, newline="") as fh:       # the csv module reads RFC 4180 quoting
        return list(csv.DictReader(fh))


def test_csv_names_the_stop_on_the_rows_standing_at_it(shuttle, tmp_path):
    out = tmp_path / "t.csv"
    result = run("export", shuttle, "-o", out, "--dwell", "5", "--dt", "0.05")
    assert result.exit_code == 0, result.output
    rows = rows_of(out)
    assert list(rows[0])[-1] == "stop_name"
    names = [r["stop_name"] for r in rows]
    assert set(names) == {"", "Workshops", CANTEEN}     # the third stop has no name
    for name, dwell in (("Workshops", 30.0), (CANTEEN, 20.0)):
        held = [r for r in rows if r["stop_name"] == name]
        assert {float(r["speed_mps"]) for r in held} == {0.0}
        assert len({r["station_m"] for r in held}) == 1          # standing still
        times = np.array([float(r["time_s"]) for r in held])
        # samples every 0.05 s from arrival to departure: the span is the dwell, to one step
        assert times[-1] - times[0] == pytest.approx(dwell, abs=0.05 + 1e-6)
        assert len(held) in (round(dwell / 0.05), round(dwell / 0.05) + 1)
    # every other row is moving, or at the unnamed stop, the start or the end
    assert "Canteen" in out.read_text() and '"Canteen, ""east"" door"' in out.read_text()


def test_station_sampling_names_the_stop_sample(shuttle, tmp_path):
    out = tmp_path / "t.csv"
    assert run("export", shuttle, "-o", out, "--station-step", "10").exit_code == 0
    held = [r for r in rows_of(out) if r["stop_name"]]
    assert [r["stop_name"] for r in held] == ["Workshops", CANTEEN]   # one sample each
    assert all(float(r["speed_mps"]) == 0.0 for r in held)


def test_json_and_geojson_carry_the_names_and_dwells(shuttle, tmp_path):
    out = tmp_path / "t.json"
    assert run("export", shuttle, "-o", out, "--dwell", "5").exit_code == 0
    doc = json.loads(out.read_text())
    assert doc["stop_names"] == ["Workshops", CANTEEN, ""]
    assert doc["stop_dwell_s"] == [30.0, 20.0, 5.0]
    assert len(doc["columns"]["stop_name"]) == doc["samples"]

    geo = tmp_path / "t.geojson"
    assert run("export", shuttle, "-o", geo, "--dwell", "5").exit_code == 0
    feature = json.loads(geo.read_text())
    assert feature["type"] == "Feature"                   # one Feature unless asked otherwise
    stops = feature["properties"]["stops"]
    assert [(s["name"], s["dwell_s"]) for s in stops] == [("Workshops", 30.0), (CANTEEN, 20.0),
                                                          ("", 5.0)]


def test_stop_points_make_a_feature_collection_with_one_point_per_stop(shuttle, tmp_path):
    geo = tmp_path / "t.geojson"
    result = run("export", shuttle, "-o", geo, "--stop-points", "--start-time",
                 "2026-12-02T08:00:00Z")
    assert result.exit_code == 0, result.output
    doc = json.loads(geo.read_text())
    assert doc["type"] == "FeatureCollection"             # RFC 7946 section 3.3
    line, *points = doc["features"]
    assert line["geometry"]["type"] == "LineString"
    assert [p["geometry"]["type"] for p in points] == ["Point"] * 3
    assert [p["properties"]["name"] for p in points] == ["Workshops", CANTEEN, ""]
    coords = np.array(line["geometry"]["coordinates"])
    arrival = np.array(line["properties"]["time_s"])
    for p in points:
        # the Point is the trajectory's position on arrival at the stop
        i = int(np.flatnonzero(np.isclose(arrival, p["properties"]["arrival_time_s"],
                                          atol=1e-9))[0])
        assert p["geometry"]["coordinates"] == pytest.approx(coords[i].tolist(), abs=1e-12)
        assert p["properties"]["arrival_time_utc"].startswith("2026-12-02T08:")


def test_gpx_stops_are_named_waypoints(shuttle, tmp_path):
    out = tmp_path / "t.gpx"
    assert run("export", shuttle, "-o", out).exit_code == 0
    ns = {"g": "http://www.topografix.com/GPX/1/1"}
    names = [w.find("g:name", ns).text for w in ET.parse(out).getroot().findall("g:wpt", ns)]
    assert names == ["Workshops", CANTEEN, "stop 3"]


def test_stop_points_only_for_geojson(shuttle, tmp_path):
    out = tmp_path / "t.csv"
    result = run("export", shuttle, "-o", out, "--stop-points")
    assert result.exit_code == 2 and not out.exists(), result.output
    assert "--stop-points" in result.output and "GeoJSON" in result.output


def test_the_reports_and_the_figure_name_the_stops(shuttle, tmp_path):
    html = (shuttle.parent / "plan.html").read_text()
    assert "Workshops" in html and "dwell 30 s" in html
    assert "Canteen, &quot;east&quot; door" in html or "Canteen, &#34;east&#34; door" in html
    assert html.count('class="stop"') == 6             # speed chart and plan view, 3 stops

    check = tmp_path / "check.json"
    result = run("check", SHUTTLE, "--speeds", shuttle, "--json", check, "--max-speed", "8")
    assert result.exit_code in (0, 1), result.output
    report = tmp_path / "r.html"
    result = run("report", shuttle, check, "-o", report)
    assert result.exit_code == 0, result.output
    text = report.read_text()
    assert "Workshops" in text and "dwell 20 s" in text   # from the profile's sidecar


def test_overview_figure_marks_each_stop_with_its_name_and_dwell(shuttle):
    from curvespeed.io.meta_json import read_profile_meta
    from curvespeed.io.profile_csv import read_station_profile
    from curvespeed.plots import plot_overview

    meta = read_profile_meta(shuttle.with_suffix(".meta.json"))
    overview = plot_overview(read_station_profile(shuttle), meta.limits, meta.constraints)
    speed = overview.artists["speed"]
    texts = [text.get_text() for _, text in speed.stops]
    assert texts == ["Workshops (30 s)", f"{CANTEEN} (20 s)", "stop"]
    lines = [line.get_xdata()[0] for line, _ in speed.stops]
    np.testing.assert_allclose(lines, sorted(s.station_m for s in meta.constraints.stops))
    plan_labels = [label.get_text() for _, label in overview.artists["plan"].stops]
    assert plan_labels == ["Workshops", CANTEEN, "stop"]


# -- the start time ---------------------------------------------------------------------------

@pytest.mark.parametrize("value, why", [
    ("2026-12-02T08:00:00", "no UTC offset"),
    ("2026-12-02", "no UTC offset"),
    ("tomorrow at eight", "is not an ISO 8601 date and time"),
    ("2026-13-02T08:00:00Z", "is not an ISO 8601 date and time"),
    ("", "is not an ISO 8601 date and time"),
])
def test_a_start_time_without_offset_or_not_iso_is_refused(shuttle, tmp_path, value, why):
    out = tmp_path / "t.csv"
    result = run("export", shuttle, "-o", out, "--start-time", value)
    assert result.exit_code == 2, result.output
    assert not out.exists()
    assert "--start-time" in result.output and why in result.output
    assert "2026-12-02T08:00:00+01:00" in result.output          # an example to follow
    assert "Traceback" not in result.output


@pytest.mark.parametrize("value, suffix, why", [
    ("9999-12-31T23:59:59+00:00", "csv", "give an earlier start time"),
    ("9999-12-31T23:59:00Z", "gpx", "give an earlier start time"),
    ("0001-01-01T00:00:00+23:00", "geojson", "give a later start time"),
])
def test_a_start_time_whose_run_leaves_the_calendar_is_refused(shuttle, tmp_path, value,
                                                               suffix, why):
    out = tmp_path / f"t.{suffix}"
    result = run("export", shuttle, "-o", out, "--start-time", value)
    assert result.exit_code == 2, result.output
    assert not out.exists() and not list(tmp_path.iterdir())
    assert "Traceback" not in result.output and "OverflowError" not in result.output
    assert "--start-time" in result.output and why in result.output
    assert str(shuttle) in result.output                # whose trajectory it is


def test_a_start_time_whose_run_ends_just_inside_the_calendar_is_written(shuttle, tmp_path):
    out = tmp_path / "t.csv"
    result = run("export", shuttle, "-o", out, "--start-time", "9999-12-31T00:00:00Z")
    assert result.exit_code == 0, result.output
    with out.open() as handle:
        last = list(csv.DictReader(handle))[-1]
    assert last["time_utc"].startswith("9999-12-31T")


# -- names holding characters XML 1.0 forbids ---------------------------------------------------

@pytest.fixture(scope="module")
def control_named(tmp_path_factory):
    """The shuttle planned with a stop named with a SOH, a NUL and a unit separator."""
    folder = tmp_path_factory.mktemp("control")
    limits = folder / "ctl.toml"
    limits.write_text('[limits]\nmax_speed_mps = 8.0\n'
                      '[[stop]]\nstation_m = 500.0\nname = "Gate\\u0001B\\u0000C\\u001fD"\n'
                      'dwell_s = 5\n')
    profile = folder / "ctl.csv"
    result = run("plan", SHUTTLE, "-l", limits, "-o", profile)
    assert result.exit_code == 0, result.output
    return profile


FORBIDDEN = [chr(c) for c in range(0x20) if chr(c) not in "\t\n\r"]


@pytest.mark.parametrize("suffix", ["gpx", "geojson", "csv", "json"])
def test_a_name_with_control_characters_is_written_readable(control_named, tmp_path, suffix):
    out = tmp_path / f"t.{suffix}"
    extra = ["--stop-points"] if suffix == "geojson" else []
    result = run("export", control_named, "-o", out, *extra)
    assert result.exit_code == 0, result.output
    text = out.read_text(encoding="utf-8")
    assert not [ch for ch in FORBIDDEN if ch in text]
    # the name is kept, each forbidden character replaced by U+FFFD where it was (JSON could
    # have escaped them as \u0001, but then a reader would get them back)
    if suffix == "gpx":
        names = [e.text for e in ET.parse(out).iter() if e.tag.endswith("}name")]
        assert "Gate\ufffdB\ufffdC\ufffdD" in names
    elif suffix == "csv":
        with out.open(newline="", encoding="utf-8") as handle:
            rows = list(csv.DictReader(handle))
        assert "Gate\ufffdB\ufffdC\ufffdD" in {row["stop_name"] for row in rows}
    else:
        doc = json.loads(text)
        found = json.dumps(doc, ensure_ascii=False)
        assert "Gate\ufffdB\ufffdC\ufffdD" in found
        assert not [ch for ch in FORBIDDEN if ch in found]
