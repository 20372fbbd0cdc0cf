"""OpenDRIVE road files through ``route``, ``plan`` and ``check``: summaries, files written, and
bad input (exit status 2, one ``error:`` line naming the file and, where it applies, the line and
element, nothing written). The roads are invented (the demo proving ground and small documents).
"""

from __future__ import annotations

import csv
import json

import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli
from curvespeed.limits import RouteConstraints, SpeedZone, Superelevation, overlay_constraints

from opendrive_helpers import DEMO, ROUTES, document, geometry, lanes, road, write


def run(*args):
    return CliRunner().invoke(cli, [*map(str, args)])


def test_route_summarises_the_demo_chain_and_writes_latlon(tmp_path):
    out = tmp_path / "geometry.csv"
    result = run("route", DEMO, "--road", "1,10,2", "-o", out)
    assert result.exit_code == 0, result.output
    assert "road 1 lane -1 -> road 10 lane -1 -> road 2 lane -1" in result.output
    assert "superelevation over" in result.output and "geoReference" in result.output
    with open(out) as fh:
        rows = list(csv.DictReader(fh))
    assert {"lat", "lon", "z_m", "grade"} <= set(rows[0])
    # road 2 is a 180-degree turn and road 1 turns by -16.4 degrees net (design: +2.0 rad
    # left, -80/35 rad right): the chain turns by pi + 2.0 - 80/35 radians
    assert float(rows[-1]["heading_rad"]) - float(rows[0]["heading_rad"]) == pytest.approx(
        3.141592653589793 + 2.0 - 80 / 35, abs=1e-6)


def test_plan_writes_profile_with_the_roads_speed_records(tmp_path):
    out = tmp_path / "profile.csv"
    result = run("plan", DEMO, "--road", "1,11,3", "-o", out)
    assert result.exit_code == 0, result.output
    meta = json.loads((tmp_path / "profile.meta.json").read_text())
    speeds = sorted({round(z["max_speed_mps"], 6) for z in meta["constraints"]["zones"]})
    assert speeds == [8.0, round(25 * 0.44704, 6), round(60 / 3.6, 6)]   # m/s, mph, km/h
    with open(out) as fh:
        rows = list(csv.DictReader(fh))
    # the lane speed record caps the last 60 m of road 3 at 8 m/s (last 50 stations: inside)
    assert max(float(r["speed_mps"]) for r in rows[-50:]) <= 8.0 + 1e-6


def test_plan_user_zone_replaces_the_road_record_on_its_range(tmp_path):
    out = tmp_path / "profile.csv"
    result = run("plan", DEMO, "--road", "2", "--zone", "0:100:6", "-o", out)
    assert result.exit_code == 0, result.output
    zones = json.loads((tmp_path / "profile.meta.json").read_text())["constraints"]["zones"]
    road_zones = [z for z in zones if z["origin"] != "--zone"]
    assert min(z["start_m"] for z in road_zones) == pytest.approx(100.0)
    with open(out) as fh:
        rows = [r for r in csv.DictReader(fh) if float(r["station_m"]) <= 100.0]
    assert max(float(r["speed_mps"]) for r in rows) <= 6.0 + 1e-6


def test_overlay_cuts_road_data_where_the_user_gives_their_own():
    road = RouteConstraints(zones=(SpeedZone(0.0, 300.0, 20.0, "road"),),
                            superelevation=(Superelevation(50.0, 150.0, 0.06, "road"),))
    user = RouteConstraints(zones=(SpeedZone(100.0, 200.0, 25.0, "--zone"),),
                            superelevation=(Superelevation(0.0, 100.0, 0.02, "user"),))
    got = overlay_constraints(road, user)
    assert [(z.start_m, z.end_m, z.max_speed_mps) for z in got.zones] == [
        (0.0, 100.0, 20.0), (200.0, 300.0, 20.0), (100.0, 200.0, 25.0)]
    assert [(e.start_m, e.end_m, e.rate) for e in got.superelevation] == [
        (100.0, 150.0, 0.06), (0.0, 100.0, 0.02)]


def test_check_audits_the_road_speed_records(tmp_path):
    result = run("check", DEMO, "--road", "2", "--json", tmp_path / "report.json")
    assert result.exit_code in (0, 1), result.output
    assert "speed zones" in result.output
    report = json.loads((tmp_path / "report.json").read_text())
    assert report["curves"], "the banked 180-degree turn is a curve"


# -- bad input ----------------------------------------------------------------------------------

def _bad(tmp_path, args, *needles, out_name="geometry.csv"):
    out = tmp_path / out_name
    result = run("route", *args, "-o", out)
    assert result.exit_code == 2, result.output
    assert result.output.lower().count("error:") == 1     # usage errors: click's "Error:"
    for needle in needles:
        assert needle in result.output, result.output
    assert not out.exists()
    return result


def test_unknown_road_id(tmp_path):
    _bad(tmp_path, [DEMO, "--road", "1,99"], "there is no road '99'", "--road")


def test_lane_absent(tmp_path):
    _bad(tmp_path, [DEMO, "--road", "1", "--lane", "-3"], "lane -3 is absent",
         "lane section at line")


def test_lane_on_the_wrong_side_for_the_direction(tmp_path):
    _bad(tmp_path, [DEMO, "--road", "1,10,2", "--lane", "1"], "lane 1", "carries traffic")


def test_roads_not_linked(tmp_path):
    _bad(tmp_path, [DEMO, "--road", "2,3"], "road 2", "road 3", "are not linked")


def test_unsupported_plan_element_names_its_line(tmp_path):
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, "<clothoidSpline/>"), 50.0))
    path = write(tmp_path, text)
    _bad(tmp_path, [path], "line 4, <clothoidSpline>", "not one curvespeed evaluates")


def test_lane_border_records_are_refused_with_their_line(tmp_path):
    border = '<border sOffset="0" a="3" b="0" c="0" d="0"/>'
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, "<line/>"), 50.0,
                         lane_xml=lanes(extra_right=border)))
    _bad(tmp_path, [write(tmp_path, text)], "<border>", "line 4", "<width>")


def test_bad_number_names_attribute_and_line(tmp_path):
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, '<arc curvature="0,02"/>'),
                         50.0))
    _bad(tmp_path, [write(tmp_path, text)], "line 4, <arc>", "curvature value '0,02'")


def test_malformed_xml_and_entities(tmp_path):
    broken = write(tmp_path, "<OpenDRIVE>\n<road>\n</OpenDRIVE>\n", "broken.xodr")
    _bad(tmp_path, [broken], "line 3", "not well-formed XML")
    bomb = write(tmp_path, '<?xml version="1.0"?>\n<!DOCTYPE r [<!ENTITY a "aaaa">]>\n'
                           "<OpenDRIVE>&a;</OpenDRIVE>\n", "bomb.xodr")
    _bad(tmp_path, [bomb], "refused", "export the OpenDRIVE file again")


def test_not_an_opendrive_document(tmp_path):
    other = write(tmp_path, "<gpx></gpx>\n", "other.xodr")
    _bad(tmp_path, [other], "root element is <gpx>, not <OpenDRIVE>")


def test_road_and_lane_options_need_an_opendrive_file(tmp_path):
    _bad(tmp_path, [ROUTES / "mountain_road.csv", "--road", "1"], "apply to .xodr files only")


def test_fit_options_do_not_apply_to_design_data(tmp_path):
    _bad(tmp_path, [DEMO, "--drive", ROUTES / "mountain_road.csv"], "OpenDRIVE file states")
