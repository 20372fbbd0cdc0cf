"""Broken and awkward OpenDRIVE files through ``curvespeed route``: each exits with status 2 and
one error line saying what, where (file, line, element or station) and what to do, and writes
nothing; awkward but readable files are read with a warning. The roads are invented."""

from __future__ import annotations

import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli

from opendrive_helpers import document, geometry, lanes, road, write

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
