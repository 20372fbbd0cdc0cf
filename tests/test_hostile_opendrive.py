"""Broken and awkward OpenDRIVE files through ``curvespeed route``: each exits with status 2 and
one error line saying what, where (file, line, element or station) and what to do, and writes
nothing; awkward but readable files are read with a warning. The roads are invented."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli

from opendrive_helpers import DEMO, document, geometry, lanes, road, write

LINE = geometry(0.0, 0.0, 0.0, 0.0, 50.0, "<line/>")


def refused(tmp_path, text, *needles, args=(), data: bytes | None = None):
    path = tmp_path / "bad.xodr"
    if data is not None:
        path.write_bytes(data)
    else:
        write(tmp_path, text, "bad.xodr")
    out = tmp_path / "geometry.csv"
    result = CliRunner().invoke(cli, ["route", str(path), "-o", str(out), *args])
    assert result.exit_code == 2, result.output
    assert result.output.lower().count("error:") == 1, result.output
    assert str(path) in result.output
    for needle in needles:
        assert needle in result.output, result.output
    assert not out.exists()


@pytest.mark.parametrize("text,needles", [
    (document(road(1, geometry(0.0, 0.0, 0.0, 0.0, -5.0, "<line/>"), 5.0)),
     ("line 4, <geometry>", "must be positive")),
    (document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, '<arc curvature="nan"/>'), 50.0)),
     ("line 4, <arc>", "curvature value 'nan'", "not a finite number")),
    (document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, "<arc/>"), 50.0)),
     ("line 4, <arc>", "missing the 'curvature' attribute")),
    (document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0, "<line/><line/>"), 50.0)),
     ("exactly one plan element",)),
    (document(road(1, geometry(10.0, 0.0, 0.0, 0.0, 50.0, "<line/>")
                   + geometry(5.0, 50.0, 0.0, 0.0, 50.0, "<line/>"), 100.0)),
     ("does not come after the previous one",)),
    (document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 50.0,
                               '<paramPoly3 aU="0" bU="50" cU="0" dU="0" aV="0" bV="0" cV="0" '
                               'dV="0" pRange="degrees"/>'), 50.0)),
     ("pRange 'degrees'",)),
    (document(road(1, LINE, 50.0), road(1, LINE, 50.0)),
     ("road id '1' appears twice", "line 4")),
    (document(road(1, "", 50.0)), ("has no <planView><geometry>",)),
    (document(road(1, LINE, 50.0, lane_xml="")), ("road 1 has no <lanes>",)),
    (document(road(1, LINE, 50.0, extra='<type s="0" type="town"><speed max="30" '
                                        'unit="knots"/></type>')),
     ("speed unit 'knots'",)),
    (document(road(1, LINE, 50.0, extra='<type s="0" type="town"><speed max="-30" '
                                        'unit="km/h"/></type>')),
     ("must be positive",)),
    (document(road(1, LINE, 50.0, lane_xml=lanes().replace('<width sOffset="0" a="3.5" b="0" '
                                                           'c="0" d="0"/>', "", 1))),
     ("lane 1 has no <width>",)),
    ("<OpenDRIVE>\n<header revMajor='1' revMinor='6'/>\n</OpenDRIVE>\n",
     ("no <road> elements",)),
    ("", ("not well-formed XML",)),
])
def test_broken_documents_are_refused(tmp_path, text, needles):
    refused(tmp_path, text, *needles)


def test_binary_and_utf16_files_are_refused(tmp_path):
    refused(tmp_path, None, data=b"\x00\x01\x02OpenDRIVE\xff" * 10)
    refused(tmp_path, None, data=document(road(1, LINE, 50.0)).encode("utf-16"))


def test_lane_folding_over_its_centre_of_curvature(tmp_path):
    """Lane 2 (centre 5.25 m left) on an arc of R 4 m would lie beyond the centre."""
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 6.0, '<arc curvature="0.25"/>'), 6.0,
                         lane_xml=lanes(3.5, left=2)))
    refused(tmp_path, text, "road 1 lane 2", "beyond its centre of curvature",
            args=("--lane", "2"))


def test_cubic_with_a_vanishing_tangent(tmp_path):
    """u(p) = v(p) = 0 has no tangent anywhere: no heading, no curvature."""
    text = document(road(1, geometry(0.0, 0.0, 0.0, 0.0, 10.0,
                                     '<paramPoly3 aU="0" bU="0" cU="0" dU="0" aV="0" bV="0" '
                                     'cV="0" dV="0" pRange="normalized"/>'), 10.0))
    refused(tmp_path, text, "no finite position, height or curvature")


def test_bad_spacing_and_empty_road_list(tmp_path):
    text = document(road(1, LINE, 50.0))
    refused(tmp_path, text, "positive number of metres", args=("--spacing", "0"))
    path = write(tmp_path, text)
    result = CliRunner().invoke(cli, ["route", str(path), "--road", "1,,2"])
    assert result.exit_code == 2 and "empty road id" in result.output


def test_awkward_but_readable_files_warn(tmp_path):
    """A length that disagrees with the plan, an unknown version and a cross-section shape are
    read, each with a warning naming its line."""
    shape = ('<lateralProfile><shape s="0" t="-3" a="0" b="0.01" c="0" d="0"/>'
             "</lateralProfile>")
    text = document(road(1, LINE, 52.0, profile=shape)).replace('revMinor="6"', 'revMinor="9"')
    path = write(tmp_path, text)
    result = CliRunner().invoke(cli, ["route", str(path)])
    assert result.exit_code == 0, result.output
    for needle in ("OpenDRIVE version 1.9", "declared length 52.000 m", "<shape>"):
        assert needle in result.output


def test_header_offset_with_a_geo_reference_warns(tmp_path):
    """The header offset (OpenDRIVE 1.6) is not applied; with a geoReference that would shift
    latitude and longitude, so it is said."""
    header = ("<geoReference><![CDATA[+proj=tmerc +lat_0=10 +lon_0=-30 +ellps=WGS84 "
              '+units=m]]></geoReference><offset x="10" y="0" z="0" hdg="0"/>')
    path = write(tmp_path, document(road(1, LINE, 50.0), header=header))
    result = CliRunner().invoke(cli, ["route", str(path)])
    assert result.exit_code == 0, result.output
    assert "line 3, <offset>: the header's offset is not applied" in result.output


# -- values beyond any road: the rules every route reader applies --------------------------------

#: The first plan record of the demo's road 1 (line 12: a straight of 80 m from the origin) and
#: the first elevation record of road 1 (line 24), as written by routes/make_demo_network.py.
DEMO_FIRST_LINE = ('<geometry s="0.00000000000000000e+00" x="0.00000000000000000e+00" y="0.'
                   '00000000000000000e+00" hdg="0.00000000000000000e+00" length="8.0000000000'
                   '0000000e+01"><line/>')
DEMO_FIRST_ELEVATION = ('<elevation s="0.00000000000000000e+00" a="2.00000000000000000e+01" '
                        'b="1.00000000000000002e-02"')


def demo_with(old: str, new: str) -> str:
    text = DEMO.read_text(encoding="utf-8")
    assert text.count(old) >= 1, old
    return text.replace(old, new, 1)


def test_a_length_no_road_has_is_refused_before_it_is_tabulated(tmp_path):
    """length="1e12" would be cut into 5e10 pieces of 20 m (373 GiB) before anything else."""
    huge = DEMO_FIRST_LINE.replace('length="8.00000000000000000e+01"', 'length="1e12"')
    refused(tmp_path, demo_with(DEMO_FIRST_LINE, huge), "line 12, <geometry>", "road 1",
            "geometry length 1e+12 m", "longer than the equator")
    refused(tmp_path, document(road(1, LINE, 5e9)), "line 4, <road>", "length 5e+09 m",
            "longer than the equator")


@pytest.mark.parametrize("name", ["x", "y"])
def test_a_plan_record_beyond_any_place_on_earth_is_refused(tmp_path, name):
    old = f'{name}="0.00000000000000000e+00"'
    far = DEMO_FIRST_LINE.replace(old, f'{name}="1e200"', 1)
    refused(tmp_path, demo_with(DEMO_FIRST_LINE, far), "line 12, <geometry>",
            f"{name} = 1e+200 m is beyond any place on Earth")


def test_a_plan_record_reaching_beyond_any_place_on_earth_is_refused(tmp_path):
    """Each record starts in range, but the cubic of the second reaches 1e16 m sideways."""
    cubic = '<poly3 a="0" b="0" c="0" d="1e10"/>'
    text = document(road(1, LINE + geometry(50.0, 50.0, 0.0, 0.0, 100.0, cubic), 150.0))
    refused(tmp_path, text, "road 1 lane -1", "beyond any place on Earth", "plan records")


def test_a_jump_between_plan_records_is_refused_naming_both(tmp_path):
    """The demo's first record moved 5 km east: its end lies 5 km from the second's start."""
    moved = DEMO_FIRST_LINE.replace('x="0.00000000000000000e+00"', 'x="5000"', 1)
    refused(tmp_path, demo_with(DEMO_FIRST_LINE, moved), "line 13, <geometry>",
            "(line 12, <geometry>)", "starts 5000.000 m from where", "the plan jumps")


def test_a_small_gap_between_plan_records_is_read_with_a_warning(tmp_path):
    second = geometry(50.0, 50.3, 0.0, 0.0, 50.0, "<line/>")
    path = write(tmp_path, document(road(1, LINE + second, 100.0)))
    result = CliRunner().invoke(cli, ["route", str(path)])
    assert result.exit_code == 0, result.output
    assert "warning:" in result.output and "starts 0.300 m from where" in result.output
    rounded = geometry(50.0, 50.004, 0.0, 0.0, 50.0, "<line/>")      # within the rounding
    path = write(tmp_path, document(road(1, LINE + rounded, 100.0)))
    result = CliRunner().invoke(cli, ["route", str(path)])
    assert result.exit_code == 0 and "warning" not in result.output, result.output


def test_an_elevation_beyond_any_place_on_earth_is_refused(tmp_path):
    high = '<elevation s="0.00000000000000000e+00" a="2e6" b="1e3"'
    refused(tmp_path, demo_with(DEMO_FIRST_ELEVATION, high), "road 1 lane -1",
            "at road station 0.00 m", "the elevation is 2e+06 m", "<elevationProfile>")
    rising = '<elevation s="0.00000000000000000e+00" a="0" b="500"'    # 1e5 m at s = 200 m
    refused(tmp_path, demo_with(DEMO_FIRST_ELEVATION, rising), "at road station 200.",
            "more than 100000 m")


def test_grades_beyond_what_roads_have_are_warned_about(tmp_path):
    steep = '<elevation s="0.00000000000000000e+00" a="20" b="1.0"'       # 100 % to s = 250 m
    path = write(tmp_path, demo_with(DEMO_FIRST_ELEVATION, steep))
    result = CliRunner().invoke(cli, ["route", str(path)])
    assert result.exit_code == 0, result.output
    assert "warning:" in result.output and "grades of up to +100 %" in result.output
    assert "<elevationProfile>" in result.output
    out = tmp_path / "profile.csv"
    result = CliRunner().invoke(cli, ["plan", str(path), "-o", str(out)])
    assert result.exit_code == 2, result.output                 # was a ZeroDivisionError
    assert "steeper than the tyres can climb" in result.output
    assert not out.exists()


# -- lane widths no lane has: they moved the path sideways without a word ------------------------

#: The demo's shoulder, lane -2 of road 1's first section (line 38), 1 m wide.
DEMO_SHOULDER = ('<lane id="-2" type="shoulder" level="false"><width sOffset="0.00000000000000000'
                 'e+00" a="1.00000000000000000e+00"')


@pytest.mark.parametrize("a, needles", [
    ("1e6", ("its width is 1e+06 m at s = 0 m", "wider than 100 m", "check the units")),
    ("-3.5", ("its width is -3.5 m at s = 0 m", "a width is zero or more")),
])
def test_a_lane_width_no_lane_has_names_its_line(tmp_path, a, needles):
    wide = DEMO_SHOULDER.replace('a="1.00000000000000000e+00"', f'a="{a}"')
    refused(tmp_path, demo_with(DEMO_SHOULDER, wide), "line 38, <width>", "road 1 lane -2",
            *needles)


def width_record(a, b, c, d, s_offset=0) -> str:
    return f'<width sOffset="{s_offset!r}" a="{a!r}" b="{b!r}" c="{c!r}" d="{d!r}"/>'


def with_lane_1_widths(records: str) -> str:
    """A 50 m straight whose left lane 1 has the width ``records``."""
    block = lanes()
    assert block.count(width_record(3.5, 0, 0, 0)) == 2          # lanes 1 and -1
    return document(road(1, LINE, 50.0, lane_xml=block.replace(width_record(3.5, 0, 0, 0),
                                                               records, 1)))


def test_a_width_cubic_dipping_below_zero_between_its_ends_is_refused(tmp_path):
    # w(t) = 1 + 0.001 t (t - 25) (t - 50): 1 m at both ends of the 50 m road, lowest where
    # w'(t) = 0, at t = 25 + 25/sqrt(3) (the quadratic formula on 3t^2 - 150t + 1250)
    t = 25.0 + 25.0 / 3.0 ** 0.5
    lowest = 1.0 + 0.001 * t * (t - 25.0) * (t - 50.0)
    refused(tmp_path, with_lane_1_widths(width_record(1.0, 1.25, -0.075, 0.001)),
            "line 4, <width>", "road 1 lane 1", f"its width is {lowest:.6g} m at s = {t:g} m",
            "must stay at or above zero up to the next record")
    # w(t) = 1 - 0.2 t + 0.004 t^2: 1 m at both ends, -1.5 m at t = 25 (vertex of the parabola)
    refused(tmp_path, with_lane_1_widths(width_record(1.0, -0.2, 0.004, 0.0)),
            "its width is -1.5 m at s = 25 m")


def test_a_width_is_judged_only_up_to_the_next_record_and_round_off_is_read(tmp_path):
    # 3.5 - 0.1 t reaches zero at 35 m, but the next record takes over at 30 m (0.5 m left);
    # a lane opening from zero may start a hair below it (-5e-5 m at 50 m: coefficients' round-off)
    records = width_record(3.5, -0.1, 0, 0) + width_record(3.5, 0, 0, 0, s_offset=30.0)
    for text in (with_lane_1_widths(records), with_lane_1_widths(width_record(0, -1e-6, 0, 0))):
        path = write(tmp_path, text)
        result = CliRunner().invoke(cli, ["route", str(path)])
        assert result.exit_code == 0 and "warning" not in result.output, result.output


# -- a lane offset no road has: it moved every lane sideways without a word ---------------------

@pytest.mark.parametrize("record, needles", [
    ('<laneOffset s="0" a="1e6" b="0" c="0" d="0"/>', ("its lane offset is 1e+06 m at s = 0 m",)),
    # o(t) = -0.01 t^2 on the 50 m road: -25 m at 50 m, within 100 m; -0.05 t^2 reaches -125 m
    ('<laneOffset s="0" a="0" b="0" c="-0.05" d="0"/>', ("its lane offset is -125 m at s = 50 m",)),
])
def test_a_lane_offset_no_road_has_names_its_line(tmp_path, record, needles):
    refused(tmp_path, document(road(1, LINE, 50.0, lane_xml=lanes(lane_offset=record))),
            "line 4, <laneOffset>", "road 1", "more than 100 m from the reference line",
            *needles)
    fine = record.replace('c="-0.05"', 'c="-0.01"').replace('a="1e6"', 'a="2.5"')
    path = write(tmp_path, document(road(1, LINE, 50.0, lane_xml=lanes(lane_offset=fine))))
    result = CliRunner().invoke(cli, ["route", str(path)])
    assert result.exit_code == 0, result.output
