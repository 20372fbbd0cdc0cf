"""The HTML report on the command line without a browser: refusals, nothing written, escaping.

(The rendered page is tested in chromium in ``test_cli_report_browser.py``.) Routes are small
invented ones; the bundled routes are the invented demo routes under ``routes/``.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.check_cmd import check
from curvespeed.cli.plan_cmd import plan
from curvespeed.cli.report_cmd import report
from curvespeed.report import ReportData, report_html

ROUTES = Path(__file__).resolve().parent.parent / "routes"


def invoke(command, *args):
    return CliRunner().invoke(command, [str(a) for a in args])


def arc_route(tmp_path: Path, name: str = "arc.csv", radius: float = 80.0) -> Path:
    """An invented road: 150 m straight, a quarter circle of ``radius``, 150 m straight."""
    t = np.linspace(0.0, 0.5 * np.pi, 60)
    x = np.concatenate((np.arange(-150.0, 0.0, 5.0), radius * np.sin(t),
                        radius + np.zeros(30)))
    y = np.concatenate((np.zeros(30), radius * (1 - np.cos(t)), radius + 5.0 * np.arange(1, 31)))
    path = tmp_path / name
    path.write_text("# invented test road\nx_m,y_m\n"
                    + "".join(f"{a:.4f},{b:.4f}\n" for a, b in zip(x, y)), encoding="utf-8")
    return path


@pytest.fixture
def planned(tmp_path):
    route = arc_route(tmp_path)
    assert invoke(plan, route, "-o", tmp_path / "p.csv").exit_code == 0
    result = invoke(check, route, "--speeds", tmp_path / "p.csv", "--json", tmp_path / "c.json")
    assert result.exit_code == 0, result.output
    return tmp_path


def test_report_from_a_profile_and_its_check(planned):
    result = invoke(report, planned / "p.csv", planned / "c.json", "-o", planned / "r.html")
    assert result.exit_code == 0, result.output
    text = (planned / "r.html").read_text(encoding="utf-8")
    assert text.startswith("<!DOCTYPE html>") and '<table id="curves">' in text
    n = len(json.loads((planned / "c.json").read_text(encoding="utf-8"))["curves"])
    assert n == 1                                  # the one quarter circle
    assert text.count('<tr data-curve="') == n


@pytest.mark.parametrize("content, fragment", [
    ("not json", "not valid JSON"),
    ('{"curves": []}', 'no "per_station" object'),
    ('{"per_station": {"station_m": [0, 1], "speed_mps": [1], "accel_mps2": [0, 0], '
     '"limit_speed_mps": [1, 1]}, "curves": []}', "per_station.speed_mps has 1 values"),
    ('{"per_station": {"station_m": [0, "a"], "speed_mps": [1, 1], "accel_mps2": [0, 0], '
     '"limit_speed_mps": [1, 1]}, "curves": []}', "per_station.station_m[1]"),
    ('{"per_station": {"station_m": [0, 1], "speed_mps": [1, 1], "accel_mps2": [0, 0], '
     '"limit_speed_mps": [1, 1]}, "curves": [{"number": 1}]}', "curves[0] has no start_m"),
])
def test_a_broken_check_json_is_refused_and_nothing_written(planned, content, fragment):
    bad = planned / "bad.json"
    bad.write_text(content, encoding="utf-8")
    result = invoke(report, planned / "p.csv", bad, "-o", planned / "r.html")
    assert result.exit_code == 2
    assert fragment in result.stderr and str(bad) in result.stderr
    assert "check --json" in result.stderr                   # what to do
    assert not (planned / "r.html").exists()


def test_a_check_of_another_route_is_refused(planned):
    other = arc_route(planned, "other.csv", radius=300.0)
    assert invoke(check, other, "--speed-kmh", 30, "--json", planned / "o.json").exit_code == 0
    result = invoke(report, planned / "p.csv", planned / "o.json", "-o", planned / "r.html")
    assert result.exit_code == 2
    assert "different lengths" in result.stderr and "--speeds" in result.stderr
    assert not (planned / "r.html").exists()


def test_plan_report_that_exists_is_refused_and_nothing_is_written(tmp_path):
    route = arc_route(tmp_path)
    (tmp_path / "r.html").write_text("kept\n", encoding="utf-8")
    result = invoke(plan, route, "-o", tmp_path / "p.csv", "--report", tmp_path / "r.html")
    assert result.exit_code == 2
    assert "r.html: file exists" in result.stderr and "--force" in result.stderr
    assert not (tmp_path / "p.csv").exists()
    assert (tmp_path / "r.html").read_text(encoding="utf-8") == "kept\n"
    result = invoke(plan, route, "-o", tmp_path / "p.csv", "--report", tmp_path / "r.html",
                    "--force")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "r.html").read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


def test_check_report_is_written_with_a_failing_verdict(tmp_path):
    route = arc_route(tmp_path)
    # 60 km/h on R 80 m: (16.7 m/s)^2 / 80 = 3.5 m/s^2 > 2.5 (the default comfort limit)
    result = invoke(check, route, "--speed-kmh", 60, "--report", tmp_path / "r.html")
    assert result.exit_code == 1
    text = (tmp_path / "r.html").read_text(encoding="utf-8")
    assert 'class="verdict fail"' in text and 'class="fail">FAIL</td>' in text


def test_the_same_inputs_and_date_give_the_same_bytes(planned, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")       # 2026-01-01 00:00:00 UTC
    texts = []
    for name in ("a.html", "b.html"):
        assert invoke(report, planned / "p.csv", planned / "c.json", "-o",
                      planned / name).exit_code == 0
        texts.append((planned / name).read_text(encoding="utf-8"))
    assert texts[0] == texts[1]
    assert "2026-01-01 00:00:00 UTC" in texts[0]


def test_text_from_the_inputs_is_escaped():
    s = np.linspace(0.0, 100.0, 11)
    data = ReportData(
        title="<script>alert(1)</script>", what="a & b", station_m=s, x_m=s, y_m=0 * s,
        speed_mps=np.full(11, 5.0), accel_mps2=np.zeros(11), limit_speed_mps=np.full(11, 9.0),
        grip_use=None, comfort_use=None, curves=(), verdict="pass", violations=("<b>x</b>",),
        limits=(), provenance=(("route file", '"><img src=x>'),), length_m=100.0, closed=False)
    text = report_html(data)
    assert "<script>alert" not in text and "&lt;script&gt;alert(1)" in text
    assert "<b>x</b>" not in text and "<img" not in text
    assert "utilisation not known" in text


def test_the_overview_figure_numbers_and_judges_curves_as_check_does(planned):
    """``plot`` checks a profile CSV on its own columns; ``check`` on the route file itself."""
    from curvespeed.io.meta_json import read_profile_meta
    from curvespeed.io.profile_csv import read_station_profile
    from curvespeed.plots_overview import overview_data

    sidecar = read_profile_meta(planned / "p.meta.json")
    data = overview_data(read_station_profile(planned / "p.csv"), sidecar.limits,
                         sidecar.constraints)
    doc = json.loads((planned / "c.json").read_text(encoding="utf-8"))
    assert [c.number for c in data.curves] == [c["number"] for c in doc["curves"]]
    assert [c.advisory_kmh for c in data.curves] == [c["advisory_speed_kmh"]
                                                     for c in doc["curves"]]
    # The profile CSV prints speeds to 1e-6 m/s and curvature (and its bound) to 1e-9 1/m; the
    # uses built on them differ from the route's own by ~1e-6 (measured 2.3e-6 on the bundled
    # mountain road); 1e-4 is that with a wide margin, far below any use that matters (1e-3).
    np.testing.assert_allclose(data.grip_use, doc["per_station"]["friction_ellipse_use"],
                               atol=1e-4)
    np.testing.assert_allclose(data.comfort_use, doc["per_station"]["comfort_ellipse_use"],
                               atol=1e-4)


def test_plan_report_states_the_limits_zones_stops_and_sections_it_was_planned_with(tmp_path):
    route = arc_route(tmp_path)
    result = invoke(plan, route, "--report", tmp_path / "r.html", "--stop", 100,
                    "--zone", "0:50:5", "--max-speed", 15,
                    "--friction-section", "60:90:0.3")
    assert result.exit_code == 0, result.output
    text = (tmp_path / "r.html").read_text(encoding="utf-8")
    limits = text[text.index('<table class="kv" id="limits">'):]
    limits = limits[:limits.index("</table>")]
    for row in ("<th scope=\"row\">top speed</th><td class=\"\">15 m/s (54 km/h)</td>",
                "<th scope=\"row\">speed zones</th><td class=\"\">0–50 m: 5 m/s</td>",
                "<th scope=\"row\">stops</th><td class=\"\">100 m</td>",
                "<th scope=\"row\">friction sections</th><td class=\"\">60–90 m: mu 0.3</td>"):
        assert row in limits


@pytest.mark.parametrize("target", ["c.json", "p.csv", "p.meta.json"])
def test_report_never_writes_over_an_input(planned, target):
    before = (planned / target).read_bytes()
    result = invoke(report, planned / "p.csv", planned / "c.json", "-o", planned / target,
                    "--force")
    assert result.exit_code == 2
    assert target in result.stderr
    assert (planned / target).read_bytes() == before
