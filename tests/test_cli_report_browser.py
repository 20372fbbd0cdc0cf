"""The HTML report opened in a real headless browser (chromium): DOM, network, console, print.

The reports are made by the command line (``plan --report``, ``check --report`` and ``report``)
on the bundled shuttle route (an invented demo route, see ``routes/README.md``) and opened from
disk. The tests assert on the rendered page: one table row and one numbered disc per curve of
the check JSON, in its numbering; no request but the file itself, no console message or script
error; a screenshot that is not blank; the table sorts; printing gives ISO 216 A4 pages.
chromium missing is a failure (see ``browser.py``), never a skip.
"""

from __future__ import annotations

import hashlib
import io
import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from browser import launch, open_page, start
from curvespeed.cli.check_cmd import check
from curvespeed.cli.plan_cmd import plan
from curvespeed.cli.report_cmd import report

ROUTES = Path(__file__).resolve().parent.parent / "routes"
ROUTE = ROUTES / "shuttle_route.gpx"
LOOP = ROUTES / "test_loop.geojson"          # a closed loop (invented)


def invoke(command, *args, code=0):
    result = CliRunner().invoke(command, [str(a) for a in args])
    assert result.exit_code == code, result.output
    return result


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """Profile, check JSON and the reports: plan, check of the plan, report, failing checks."""
    d = tmp_path_factory.mktemp("reports")
    invoke(plan, ROUTE, "-o", d / "profile.csv", "--report", d / "plan.html")
    invoke(check, ROUTE, "--speeds", d / "profile.csv", "--json", d / "check.json",
           "--report", d / "check.html")
    invoke(report, d / "profile.csv", d / "check.json", "-o", d / "report.html")
    # 80 km/h held everywhere is too fast for the shuttle route's bends: a failing check
    invoke(check, ROUTE, "--speed-kmh", 80, "--json", d / "fail.json", "--report",
           d / "fail.html", code=1)
    invoke(check, LOOP, "--speed-kmh", 60, "--json", d / "loop.json", "--report",
           d / "loop.html", code=1)
    return d


@pytest.fixture(scope="module")
def browser():
    playwright = start()
    chromium = launch(playwright)
    yield chromium
    chromium.close()
    playwright.stop()


def table_numbers(page) -> list[int]:
    return [int(n) for n in page.eval_on_selector_all(
        "#curves tbody tr", "rows => rows.map(r => r.cells[0].textContent)")]


@pytest.mark.parametrize("name, result", [("plan.html", "check.json"),
                                          ("check.html", "check.json"),
                                          ("report.html", "check.json"),
                                          ("fail.html", "fail.json"),
                                          ("loop.html", "loop.json")])
def test_one_row_and_one_numbered_disc_per_curve_of_the_check(made, browser, name, result):
    curves = json.loads((made / result).read_text(encoding="utf-8"))["curves"]
    assert curves, "the shuttle route has curves; a report without any tests nothing"
    visit = open_page(browser, made / name)
    page = visit.page
    assert page.locator("#curves tbody tr").count() == len(curves)
    assert table_numbers(page) == [c["number"] for c in curves]
    labels = page.eval_on_selector_all("#plan-view .curve-label",
                                       "gs => gs.map(g => g.getAttribute('data-curve'))")
    assert [int(n) for n in labels] == [c["number"] for c in curves]
    # the advisory speed beside each disc is the check's, in km/h
    advisories = page.eval_on_selector_all("#plan-view .curve-label .advisory",
                                           "ts => ts.map(t => t.textContent)")
    assert advisories == [f"{c['advisory_speed_kmh']} km/h" if c["advisory_speed_kmh"]
                          is not None else "" for c in curves]
    bands = page.eval_on_selector_all("#speed-chart .curve-band",
                                      "rs => rs.map(r => r.getAttribute('data-curve'))")
    assert sorted(set(int(n) for n in bands)) == [c["number"] for c in curves]
    page.context.close()


@pytest.mark.parametrize("name", ["plan.html", "check.html", "report.html", "fail.html"])
def test_no_request_no_console_message_no_script_error(made, browser, name):
    visit = open_page(browser, made / name)
    visit.page.click("#curves thead th:nth-child(5) button")      # run the script once too
    assert visit.outside_requests() == []
    assert visit.console_errors() == []
    assert visit.errors == []
    visit.page.context.close()
    # nor any address in the file for a browser to follow (the SVG namespace is a name only)
    text = (made / name).read_text(encoding="utf-8").replace(
        'xmlns="http://www.w3.org/2000/svg"', "")
    assert not re.search(r"(https?:)?//[a-z0-9.-]+\.[a-z]{2,}", text, re.IGNORECASE)
    assert not re.search(r"<(link|img|iframe|object|embed)\b|\bsrc=|@import|url\((?!#)", text)


def test_screenshot_is_not_blank(made, browser):
    from PIL import Image

    visit = open_page(browser, made / "plan.html")
    shot = visit.page.screenshot(full_page=True)
    visit.page.context.close()
    import numpy as np

    image = np.asarray(Image.open(io.BytesIO(shot)).convert("RGB"))
    ink = float((image.min(axis=2) < 200).mean())
    colours = len(np.unique(image.reshape(-1, 3), axis=0))
    # A blank page has no ink and one colour. The report draws a plan view, two charts and a
    # table: measured on this route ~4.8 % of the page is ink (text and lines on white), in
    # ~3800 colours (anti-aliasing); 1.5 % and 50 colours are well below that and far above
    # an empty or unstyled page.
    assert ink > 0.015
    assert colours > 50
    assert image.shape[0] > 1500           # the whole report, not one screen of it


def test_the_verdicts_of_a_failing_check(made, browser):
    doc = json.loads((made / "fail.json").read_text(encoding="utf-8"))
    failing = [c["number"] for c in doc["curves"] if not c["passed"]]
    assert failing
    visit = open_page(browser, made / "fail.html")
    page = visit.page
    assert page.inner_text("#verdict") == "FAIL"
    rows = page.eval_on_selector_all(
        "#curves tbody tr", "rs => rs.map(r => [r.cells[0].textContent, "
        "r.cells[r.cells.length - 1].className])")
    assert [int(n) for n, cls in rows if cls != "pass"] == failing
    dashed = page.eval_on_selector_all("#plan-view .plan-curve[stroke-dasharray]",
                                       "ps => ps.map(p => p.getAttribute('data-curve'))")
    assert [int(n) for n in dashed] == failing
    assert page.locator("#violations li").count() == len(doc["violations"])
    page.context.close()


def test_clicking_a_header_sorts_the_table(made, browser):
    doc = json.loads((made / "check.json").read_text(encoding="utf-8"))
    by_radius = [c["number"] for c in sorted(doc["curves"], key=lambda c: c["min_radius_m"])]
    visit = open_page(browser, made / "check.html")
    page = visit.page
    header = page.locator("#curves thead th", has_text="radius")
    header.locator("button").click()
    assert header.get_attribute("aria-sort") == "ascending"
    assert table_numbers(page) == by_radius
    header.locator("button").click()
    assert table_numbers(page) == by_radius[::-1]
    page.context.close()


def test_provenance_and_cautions(made, browser):
    visit = open_page(browser, made / "plan.html")
    page = visit.page
    rows = dict(page.eval_on_selector_all(
        "#provenance tr", "rs => rs.map(r => [r.cells[0].textContent, r.cells[1].textContent])"))
    digest = hashlib.sha256(ROUTE.read_bytes()).hexdigest()
    assert rows["route file: sha256"] == digest
    assert rows["solver"].split(":")[0] in ("convex", "envelope")
    assert "optimal" in rows["solver"]
    assert rows["tool"].startswith("curvespeed ")
    assert re.fullmatch(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d UTC", rows["generated (UTC)"])
    fit = json.loads((made / "check.json").read_text(encoding="utf-8"))["fit"]
    used = fit["position_noise"]["used_m"]
    assert rows["position noise"].startswith(("stated ", "not stated"))
    assert f"used {used:.4g} m" in rows["position noise"]
    assert "friction coefficient" in dict(page.eval_on_selector_all(
        "#limits tr", "rs => rs.map(r => [r.cells[0].textContent, r.cells[1].textContent])"))
    cautions = page.inner_text("#cautions")
    assert "engineering judgment" in cautions and "local codes" in cautions
    page.context.close()
    report_rows = dict(open_page(browser, made / "report.html").page.eval_on_selector_all(
        "#provenance tr", "rs => rs.map(r => [r.cells[0].textContent, r.cells[1].textContent])"))
    assert report_rows["route file (from the sidecar): sha256"] == digest
    assert report_rows["check result: sha256"] == hashlib.sha256(
        (made / "check.json").read_bytes()).hexdigest()


def test_prints_on_a4_pages(made, browser):
    visit = open_page(browser, made / "plan.html")
    pdf = visit.page.pdf(prefer_css_page_size=True, print_background=True)
    visit.page.context.close()
    boxes = re.findall(rb"/MediaBox\s*\[\s*0 0 ([\d.]+) ([\d.]+)\s*\]", pdf)
    assert len(boxes) >= 2                 # the curve table starts a page of its own
    # ISO 216: A4 is 210 mm x 297 mm, 595.28 pt x 841.89 pt (1 pt = 25.4/72 mm); a printer
    # driver rounds to whole points at most, so 1 pt is the tolerance.
    for width, height in boxes:
        assert float(width) == pytest.approx(210 / 25.4 * 72, abs=1.0)
        assert float(height) == pytest.approx(297 / 25.4 * 72, abs=1.0)
