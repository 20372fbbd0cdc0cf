"""``check --speeds`` holds the speeds it reads to the rules the other commands hold the same
files to: a profile's ``step_kind`` column as ``export`` reads it, and a GPX track's speeds to
the plausibility bound of a CSV's. Each refusal exits 2, names the file and place, and writes
nothing. Routes and tracks are invented.
"""

from __future__ import annotations

import pytest

from hostile_helpers import assert_refused, planned_files, replace_cell, run, snapshot


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planned")
    route, profile, _ = planned_files(folder)
    return route.read_text(), profile.read_text()


def _files(planned, folder):
    route = folder / "r.csv"
    route.write_text(planned[0])
    return route


@pytest.mark.parametrize("command", ["check", "export"])
@pytest.mark.parametrize("value, fragment", [
    ("warp", "value 'warp' is not a step kind"),
    ("jerk_ramp", "value 'jerk_ramp' is allowed only on a step with exactly one end at rest"),
])
def test_a_step_kind_export_refuses_is_refused_by_check_too(command, value, fragment, planned,
                                                            tmp_path):
    route = _files(planned, tmp_path)
    speeds = tmp_path / "s.csv"
    speeds.write_text(replace_cell(planned[1], 51, "step_kind", value))
    out = tmp_path / ("c.json" if command == "check" else "t.csv")
    before = snapshot(tmp_path)
    if command == "check":
        result = run("check", route, "--speeds", speeds, "--json", out)
    else:
        result = run("export", speeds, "-o", out)
    assert_refused(result, tmp_path, before, speeds, ["line 51", fragment])


def _track_gpx(step_s: float) -> str:
    """The invented bend (hostile_helpers) as a GPX track, a fix every 5 m ``step_s`` apart."""
    import datetime as dt
    import math

    from hostile_helpers import LAT0, LON0, bend_csv

    start = dt.datetime(2026, 3, 1, 9, 0, tzinfo=dt.timezone.utc)
    points = []
    for i, row in enumerate(bend_csv().splitlines()[1:]):
        x, y = map(float, row.split(","))
        lat = LAT0 + y / 111_000.0
        lon = LON0 + x / (111_000.0 * math.cos(math.radians(LAT0)))
        when = (start + dt.timedelta(seconds=i * step_s)).isoformat(timespec="milliseconds")
        points.append(f'<trkpt lat="{lat:.8f}" lon="{lon:.8f}"><time>{when[:-6]}Z</time>'
                      "</trkpt>")
    return ('<?xml version="1.0" encoding="UTF-8"?>\n<gpx version="1.1" creator="test" '
            'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>\n'
            + "\n".join(points) + "\n</trkseg></trk></gpx>\n")


@pytest.fixture(scope="module")
def geographic_route(tmp_path_factory):
    from hostile_helpers import latlon_bend_csv

    return latlon_bend_csv()


def test_a_gpx_track_implying_5000_mps_is_refused_as_a_csv_would_be(geographic_route,
                                                                     tmp_path):
    # fixes 5 m apart, time stamps 1 ms apart: 5000 m/s (seconds written as milliseconds)
    route = tmp_path / "r.csv"
    route.write_text(geographic_route)
    track = tmp_path / "t.gpx"
    track.write_text(_track_gpx(0.001))
    before = snapshot(tmp_path)
    result = run("check", route, "--speeds", track, "--json", tmp_path / "c.json")
    assert_refused(result, tmp_path, before, track,
                   ["trkpt", "derived from its time stamps", "above 1000 m/s",
                    "0.001 s after", "check the track's time stamps"])


def test_a_gpx_track_at_road_speed_is_checked(geographic_route, tmp_path):
    route = tmp_path / "r.csv"
    route.write_text(geographic_route)
    track = tmp_path / "t.gpx"
    track.write_text(_track_gpx(0.5))                      # 10 m/s
    result = run("check", route, "--speeds", track, "--json", tmp_path / "c.json")
    assert result.exit_code in (0, 1), result.output       # judged, not refused
    assert (tmp_path / "c.json").exists()
