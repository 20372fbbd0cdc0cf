"""Certificate tests with hostile files drawn at random, run through the command line.

Hypothesis writes a file for one of the readers (route CSV, GeoJSON, GPX, limits TOML, speeds
CSV, profile CSV, profile sidecar JSON) and runs the command that reads it. Whatever the file
holds, the outcome must be one of two, checked against a snapshot of the folder taken before:

* **read**: exit 0, no traceback, only the command's own outputs new, no temporary file;
* **refused**: exit 2, exactly one ``error:`` line that names the file given (or, for a
  request that is readable but cannot be met, the route), no traceback, and the folder exactly
  as it was: inputs byte for byte, no output, no temporary file.

The files come from four generators: random bytes; a valid file cut off at a random byte; a
valid file with one number replaced by a hostile spelling (digits of other scripts, integers
of hundreds or thousands of digits, huge exponents, ``nan``, underscores, hexadecimal); and
arrays or objects nested to a random depth. Hypothesis runs derandomized (``conftest.py``).
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from hostile_helpers import (LAT0, LON0, bend_csv, latlon_bend_csv, lines_of, no_traceback,
                             planned_files, replace_cell, run, snapshot, write)

CASES = settings(max_examples=60, deadline=None,
                 suppress_health_check=[HealthCheck.function_scoped_fixture])

LIMITS = ("[limits]\nfriction_coefficient = 0.7\nmax_speed_mps = 20.0\n\n[[zone]]\nstart_m = 20\n"
          "end_m = 60\nmax_speed_mps = 8.5\n\n[[stop]]\nstation_m = 120.0\n")


def geojson_route() -> str:
    rows = latlon_bend_csv().splitlines()[1:]
    coords = [[float(r.split(",")[1]), float(r.split(",")[0]), 12.5] for r in rows]
    return json.dumps({"type": "Feature", "properties": {"name": "invented"},
                       "geometry": {"type": "LineString", "coordinates": coords}})


def gpx_route() -> str:
    points = "".join(f'<trkpt lat="{LAT0 + i * 1e-4:.7f}" lon="{LON0 + (i * i) * 2e-7:.7f}">'
                     f"<ele>{10 + 0.1 * i:.1f}</ele></trkpt>" for i in range(40))
    return ('<?xml version="1.0" encoding="UTF-8"?>\n<gpx version="1.1" creator="tests" '
            'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>' + points
            + "</trkseg></trk></gpx>\n")


@pytest.fixture(scope="module")
def valid(tmp_path_factory):
    """A valid file of every kind, as bytes (the invented bend, planned once)."""
    folder = tmp_path_factory.mktemp("valid")
    _, profile, sidecar = planned_files(folder)
    return {"route.csv": bend_csv().encode(), "route.geojson": geojson_route().encode(),
            "route.gpx": gpx_route().encode(), "limits.toml": LIMITS.encode(),
            "speeds.csv": profile.read_bytes(), "profile.csv": profile.read_bytes(),
            "sidecar.json": sidecar.read_bytes()}


#: kind -> (file name, command, the outputs it may write); "{name}" stands for that file in
#: the folder, where the route r.csv and profile p.csv (with sidecar p.meta.json) are valid.
COMMANDS = {
    "route.csv": ("x.csv", ["route", "{x.csv}", "-o", "{out.csv}"], ["out.csv"]),
    "route.geojson": ("x.geojson", ["route", "{x.geojson}", "-o", "{out.csv}"], ["out.csv"]),
    "route.gpx": ("x.gpx", ["route", "{x.gpx}", "-o", "{out.csv}"], ["out.csv"]),
    "limits.toml": ("x.toml", ["plan", "{r.csv}", "-l", "{x.toml}", "-o", "{out.csv}",
                               "--solver", "envelope"], ["out.csv", "out.meta.json"]),
    "speeds.csv": ("x.csv", ["check", "{r.csv}", "--speeds", "{x.csv}", "--json",
                             "{out.json}"], ["out.json"]),
    "profile.csv": ("x.csv", ["export", "{x.csv}", "-o", "{out.csv}"], ["out.csv"]),
    "sidecar.json": ("p.meta.json", ["export", "{p.csv}", "-o", "{out.json}"], ["out.json"]),
}


def check_outcome(folder: Path, kind: str, content: bytes) -> int:
    """Write ``content`` as a file of ``kind``, run its command, check the outcome; the status."""
    name, args, outputs = COMMANDS[kind]
    path = write(folder, name, content)
    before = snapshot(folder)
    result = run(*[str(folder / a[1:-1]) if a.startswith("{") else a for a in args])
    event(f"{kind}: exit {result.exit_code}")
    no_traceback(result)
    # 1 only from check: the speeds were read and break a limit
    assert result.exit_code in ((0, 1, 2) if args[0] == "check" else (0, 2)), result.output
    after = snapshot(folder)
    assert not [k for k in after if k.endswith((".part", ".old"))], after
    if result.exit_code == 2:
        errors = lines_of(result, "error:")
        assert len(errors) == 1, result.output
        assert str(path) in errors[0] or str(folder / "r.csv") in errors[0], errors[0]
        assert after == before
        return 2
    changed = {k for k in set(before) | set(after) if before.get(k) != after.get(k)}
    assert changed <= set(outputs), changed
    return result.exit_code


def fresh(folder: Path, valid: dict) -> None:
    """Empty ``folder`` and put the always-present valid files back."""
    for entry in folder.iterdir():
        entry.unlink()
    write(folder, "r.csv", valid["route.csv"])
    write(folder, "p.csv", valid["profile.csv"])
    write(folder, "p.meta.json", valid["sidecar.json"])


KINDS = st.sampled_from(list(COMMANDS))


@CASES
@given(KINDS, st.binary(max_size=3000))
def test_random_bytes_are_read_or_refused_cleanly(tmp_path, valid, kind, data):
    fresh(tmp_path, valid)
    check_outcome(tmp_path, kind, data)


@CASES
@given(KINDS, st.floats(0.0, 1.0))
def test_a_valid_file_cut_off_anywhere_is_read_or_refused_cleanly(tmp_path, valid, kind, where):
    fresh(tmp_path, valid)
    data = valid[kind]
    check_outcome(tmp_path, kind, data[: int(where * len(data))])


#: Spellings of numbers a reader must refuse (or, for the plain ones, read), with the digits
#: of other scripts that Python's float() accepts.
FOREIGN_DIGITS = "\u0660\u0661\u0662\u0663\u06f4\u0967\u09e8\uff10\uff11\uff19\u1040\U0001d7ce"
hostile_numbers = st.one_of(
    st.integers(300, 6000).map(lambda n: "9" * n),                         # too many digits
    st.integers(300, 6000).map(lambda n: "-1" + "0" * n + ".5"),
    st.integers(-2000, 2000).map(lambda e: f"1.5e{e}"),                    # huge exponents
    st.text(FOREIGN_DIGITS, min_size=1, max_size=6),                       # foreign digits
    st.text(FOREIGN_DIGITS + "0123456789.", min_size=1, max_size=8),
    st.sampled_from(["nan", "NaN", "-inf", "Infinity", "1_000", "0x1f", "1e", ".", "-",
                     "+-1", "1.2.3", "", " ", "1,5", "\u00a0", "12\u200b3", "1e+", "∞"]),
)


def with_number(kind: str, valid: dict, token: str) -> bytes:
    """The valid file of ``kind`` with one number written as ``token``."""
    text = valid[kind].decode("utf-8")
    if kind == "route.csv":
        return text.replace("\n50.000,0.000\n", f"\n{token},0.000\n").encode()
    if kind in ("speeds.csv", "profile.csv"):
        return replace_cell(text, 12, "speed_mps", token).encode()
    if kind == "limits.toml":
        return text.replace("20.0", token, 1).encode()
    if kind == "route.gpx":
        return text.replace(f'lat="{LAT0 + 3e-4:.7f}"', f'lat="{token}"').encode()
    # JSON: the token as a bare number where JSON allows one, else as a string
    raw = token if token and all(c in "0123456789.eE+-" for c in token) else json.dumps(token)
    if kind == "route.geojson":
        doc = json.loads(text)
        doc["geometry"]["coordinates"][4][0] = 987.125
        return json.dumps(doc).replace("987.125", raw).encode()
    doc = json.loads(text)
    doc["limits"]["max_speed_mps"] = 987.125
    return json.dumps(doc).replace("987.125", raw).encode()


def plain_decimal(token: str) -> bool:
    """True if ``token`` is a plain ASCII decimal of finite value (what the docs accept)."""
    return bool(re.fullmatch(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?", token)) \
        and math.isfinite(float(token))


@CASES
@given(KINDS, hostile_numbers)
def test_hostile_numbers_are_read_or_refused_cleanly(tmp_path, valid, kind, token):
    fresh(tmp_path, valid)
    status = check_outcome(tmp_path, kind, with_number(kind, valid, token))
    if kind not in ("limits.toml", "sidecar.json") and not plain_decimal(token):
        # anything but a plain finite decimal is refused (TOML has its own number grammar,
        # and export reads the sidecar only for a name)
        assert status == 2, token


@CASES
@given(st.sampled_from(["route.geojson", "sidecar.json", "limits.toml"]),
       st.integers(1, 120_000), st.sampled_from(["[", "{\"a\": "]))
def test_nesting_to_any_depth_is_read_or_refused_cleanly(tmp_path, valid, kind, depth, opener):
    fresh(tmp_path, valid)
    if kind == "limits.toml":
        closer = "]" if opener == "[" else "}"
        opener = "[" if opener == "[" else "{a = "
        text = "[limits]\nmax_speed_mps = " + opener * depth + "1" + closer * depth + "\n"
    else:
        closer = "]" if opener == "[" else "}"
        text = opener * depth + "1" + closer * depth
    check_outcome(tmp_path, kind, text.encode())
