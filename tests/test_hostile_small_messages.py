"""Small refusals that must stay short and right: an output whose extension names another
format than the option writes, an unknown key in a limits table, an unknown route extension,
and a CSV header of 200,000 columns (its message listed every one: 2 MB on one line). Each
exits 2, names the file or option and says what to do, and writes nothing. Inputs invented.
"""

from __future__ import annotations

import pytest

from hostile_helpers import (assert_refused, assert_usage_error, bend_csv, planned_files, run,
                             snapshot, write)


@pytest.mark.parametrize("command, option, name, fragment", [
    ("plan", "-o", "p.gpx", "names GPX, but this option writes the profile as CSV"),
    ("plan", "--report", "r.pdf", "names a PDF figure, but this option writes an HTML page"),
    ("route", "-o", "r.geojson", "names GeoJSON, but this option writes the resampled route"),
    ("check", "--json", "c.csv", "names a CSV table, but this option writes JSON"),
])
def test_an_output_named_for_another_format_is_refused(command, option, name, fragment,
                                                       tmp_path):
    route = write(tmp_path, "r.csv", bend_csv())
    extra = ["-o", tmp_path / "p.csv"] if option == "--report" else []
    before = snapshot(tmp_path)
    result = run(command, route, option, tmp_path / name, *extra)
    assert_usage_error(result, tmp_path, before, [fragment, "name the file"])


def test_a_report_named_pdf_is_refused(tmp_path):
    _, profile, _ = planned_files(tmp_path)
    check = tmp_path / "c.json"
    assert run("check", tmp_path / "r.csv", "--speeds", profile, "--json", check).exit_code \
        in (0, 1)
    before = snapshot(tmp_path)
    result = run("report", profile, check, "-o", tmp_path / "r.pdf")
    assert_usage_error(result, tmp_path, before, ["'-o' / '--output'", "r.pdf", "HTML page"])


@pytest.mark.parametrize("key, message", [
    ("foo", "[route] unknown key 'foo'. Accepted keys: start_speed_mps, end_speed_mps"),
    ("end_sped_mps", "did you mean 'end_speed_mps'? Accepted keys: start_speed_mps"),
])
def test_an_unknown_route_key_reads_as_sentences(key, message, tmp_path):
    route = write(tmp_path, "r.csv", bend_csv())
    limits = write(tmp_path, "l.toml", f"[limits]\n[route]\n{key} = 1\n")
    before = snapshot(tmp_path)
    result = run("plan", route, "-l", limits, "-o", tmp_path / "p.csv")
    assert_refused(result, tmp_path, before, limits, [message])


def test_the_unknown_extension_message_names_opendrive_too(tmp_path):
    route = write(tmp_path, "r.xyz", bend_csv())
    before = snapshot(tmp_path)
    result = run("route", route)
    assert_refused(result, tmp_path, before, route, [".csv, .geojson, .json, .gpx, or .xodr"])


@pytest.mark.parametrize("header, fragment", [
    ("a_m,b_m", "header (a_m, b_m, c0, c1, c2, c3, c4, c5, c6, c7, c8, c9 and 199990 more)"),
    ("x_m,y_m", "unknown column(s) 'c0', 'c1'"),
])
def test_a_header_of_200000_columns_gives_a_short_message(header, fragment, tmp_path):
    columns = ",".join(f"c{i}" for i in range(200_000))
    rows = "".join(f"{i}.0,0.0" + ",0" * 200_000 + "\n" for i in range(3))
    route = write(tmp_path, "r.csv", f"{header},{columns}\n{rows}")
    before = snapshot(tmp_path)
    result = run("route", route)
    message = assert_refused(result, tmp_path, before, route, [fragment, "more"])
    assert len(message) < 600


def test_a_speeds_header_of_200000_columns_gives_a_short_message(tmp_path):
    route = write(tmp_path, "r.csv", bend_csv())
    columns = ",".join(f"c{i}" for i in range(200_000))
    speeds = write(tmp_path, "s.csv", f"x_m,{columns}\n" + ("0" + ",0" * 200_000 + "\n") * 3)
    before = snapshot(tmp_path)
    result = run("check", route, "--speeds", speeds, "--json", tmp_path / "c.json")
    message = assert_refused(result, tmp_path, before, speeds,
                             ["missing column(s) station_m, speed_mps", "c10 and 199989 more"])
    assert len(message) < 600
