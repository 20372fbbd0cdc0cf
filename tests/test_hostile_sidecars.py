"""A profile's sidecar (PROFILE.meta.json) whose limits or constraints do not fit the profile:
a stop far past the route's end or before its start, a negative dwell, a negative top speed, a
friction section with a negative coefficient, a zone running backwards or off the route, a
superelevation of 5000 %.

Every command that reads a sidecar found next to the profile (export, plot, replay) warns once,
naming the sidecar and what is wrong, and goes on without it; a sidecar named with --meta is an
error (exit 2, nothing written). The route and sidecars are invented.
"""

from __future__ import annotations

import json

import pytest

from hostile_helpers import (assert_done, assert_refused, lines_of, planned_files, run,
                             snapshot)


def _stop(**changes) -> dict:
    stop = {"station_m": 50.0, "origin": "invented.toml", "dwell_s": None, "name": "",
            "snap_distance_m": None}
    return {"stops": [dict(stop, **changes)]}


#: case -> (what to change in the sidecar: "limits" or "constraints" entries, and a fragment
#: of the warning saying what is wrong)
BROKEN = {
    "stop far past the end": ({"constraints": _stop(station_m=1e9)},
                              "stop at station 1e+09 m lies outside the route"),
    "stop past the end": ({"constraints": _stop(station_m=5000.0)},
                          "stop at station 5000 m lies outside the route"),
    "stop before the start": ({"constraints": _stop(station_m=-100.0)},
                              "stop at station -100 m lies outside the route"),
    "negative dwell": ({"constraints": _stop(dwell_s=-5.0)},
                       "dwell_s = -5 is outside 0..3600 s: a dwell is how long the vehicle stands there"),
    "negative top speed": ({"limits": {"max_speed_mps": -5.0}},
                           "max_speed_mps must be positive, got -5"),
    "negative friction": ({"constraints": {"friction": [
        {"start_m": 10.0, "end_m": 80.0, "friction_coefficient": -1.0, "origin": ""}]}},
        "friction_coefficient = -1 is outside"),
    "zone backwards": ({"constraints": {"zones": [
        {"start_m": 90.0, "end_m": 20.0, "max_speed_mps": 5.0, "origin": ""}]}},
        "speed zone 90..20 m: end must be after start"),
    "zone off the route": ({"constraints": {"zones": [
        {"start_m": 3000.0, "end_m": 4000.0, "max_speed_mps": 5.0, "origin": ""}]}},
        "speed zone 3000..4000 m lies outside the route"),
    "superelevation 5000 %": ({"constraints": {"superelevation": [
        {"start_m": 10.0, "end_m": 80.0, "rate": 50.0, "origin": ""}]}},
        "superelevation rate 50 at 10..80 m is outside +-0.2"),
}


def _break(meta, changes: dict) -> None:
    doc = json.loads(meta.read_text())
    for key, entries in changes.items():
        doc[key].update(entries)
    meta.write_text(json.dumps(doc))


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planned")
    _, profile, meta = planned_files(folder)
    return profile.read_text(), meta.read_text()


def _copy(planned, folder):
    profile, meta = folder / "p.csv", folder / "p.meta.json"
    profile.write_text(planned[0])
    meta.write_text(planned[1])
    return profile, meta


@pytest.mark.parametrize("case", list(BROKEN))
@pytest.mark.parametrize("command, output", [("export", "t.csv"), ("plot", "f.png"),
                                             ("replay", "run.csv")])
def test_a_sidecar_next_to_the_profile_that_does_not_fit_it_is_warned_about_and_ignored(
        case, command, output, planned, tmp_path):
    profile, meta = _copy(planned, tmp_path)
    changes, wrong = BROKEN[case]
    _break(meta, changes)
    before = snapshot(tmp_path)
    result = run(command, profile, "-o", tmp_path / output)
    assert_done(result, tmp_path, before, written=[tmp_path / output], warned=wrong)
    warnings = lines_of(result, "warning:")
    assert len(warnings) == 1, result.output
    assert str(meta) in warnings[0] and "the sidecar is ignored" in warnings[0]


@pytest.mark.parametrize("case", list(BROKEN))
def test_a_sidecar_named_with_meta_that_does_not_fit_the_profile_is_refused(
        case, planned, tmp_path):
    profile, meta = _copy(planned, tmp_path)
    named = tmp_path / "named.meta.json"
    named.write_text(meta.read_text())
    changes, wrong = BROKEN[case]
    _break(named, changes)
    before = snapshot(tmp_path)
    result = run("plot", profile, "--meta", named, "-o", tmp_path / "f.png")
    assert_refused(result, tmp_path, before, named,
                   [wrong, "does not fit the profile", "write the sidecar again"])


@pytest.mark.parametrize("station_m", [0.0, 100.0, 189.99])
def test_a_sidecar_stop_on_the_route_is_no_reason_to_warn(station_m, planned, tmp_path):
    # the other side of the check: the bend's profile runs 0..189.999 m
    profile, meta = _copy(planned, tmp_path)
    _break(meta, {"constraints": _stop(station_m=station_m, dwell_s=12.0)})
    result = run("export", profile, "-o", tmp_path / "t.csv")
    assert result.exit_code == 0, result.output
    assert not lines_of(result, "warning:"), result.output
