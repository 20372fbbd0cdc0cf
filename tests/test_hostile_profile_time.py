"""A profile whose speeds make its planned time implausible (1e-9 m/s between its ends, or one
crawling row): ``replay`` and ``export`` sample a profile in time and used to allocate
trillions of samples (MemoryError) or blame ``--dt``. Both now refuse it before sampling
(exit 2), naming the file and the slowest stretch, and write nothing. The route is invented.
"""

from __future__ import annotations

import pytest

from hostile_helpers import assert_done, assert_refused, planned_files, run, snapshot


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planned")
    _, profile, _ = planned_files(folder)
    return profile.read_text()


def _with_speeds(text: str, speed, rows) -> str:
    """The profile ``text`` with ``speed_mps`` set to ``speed`` on the data rows ``rows``
    (0-based, header excluded)."""
    lines = text.splitlines()
    column = lines[0].split(",").index("speed_mps")
    for i in rows:
        cells = lines[1 + i].split(",")
        cells[column] = speed
        lines[1 + i] = ",".join(cells)
    return "\n".join(lines) + "\n"


COMMANDS = [("replay", "run.csv"), ("export", "t.csv")]


@pytest.mark.parametrize("command, output", COMMANDS)
def test_a_profile_crawling_at_a_nanometre_per_second_is_refused(command, output, planned,
                                                                 tmp_path):
    n = len(planned.splitlines()) - 1
    profile = tmp_path / "p.csv"
    profile.write_text(_with_speeds(planned, "0.000000001", range(1, n - 1)))
    before = snapshot(tmp_path)
    result = run(command, profile, "-o", tmp_path / output)
    assert_refused(result, tmp_path, before, profile,
                   ["planned time", "not plausible", "slowest stretch", "line 2 (station 0.0 m)",
                    f"line {n + 1} ", "1e-09 m/s", "check the speed_mps column"])


@pytest.mark.parametrize("command, output", COMMANDS)
def test_one_crawling_row_is_named(command, output, planned, tmp_path):
    # 1e-4 m/s at three stations in a row: the two steps between them, about 1 m each, take
    # 1e4 s each
    profile = tmp_path / "p.csv"
    profile.write_text(_with_speeds(planned, "0.0001", [99, 100, 101]))
    before = snapshot(tmp_path)
    result = run(command, profile, "-o", tmp_path / output)
    assert_refused(result, tmp_path, before, profile,
                   ["slowest stretch, line 101 ", "to line 103 ", "0.0001 m/s"])


@pytest.mark.parametrize("command, output", COMMANDS)
def test_a_slow_but_plausible_row_is_sampled(command, output, planned, tmp_path):
    # 0.01 m/s at three stations in a row: the steps between them take about 100 s each,
    # well inside an hour
    profile = tmp_path / "p.csv"
    profile.write_text(_with_speeds(planned, "0.01", [99, 100, 101]))
    before = snapshot(tmp_path)
    result = run(command, profile, "-o", tmp_path / output)
    assert_done(result, tmp_path, before, written=[tmp_path / output])
