"""An empty file name (``-o ''``, as an unset shell variable gives) is refused by every command
and option alike: a usage error naming the option (exit 2), nothing read, nothing written.
``plan``, ``route`` and ``check`` used to take it for "no such option" and exit 0 having
written nothing. The route is invented.
"""

from __future__ import annotations

import pytest

from hostile_helpers import assert_usage_error, planned_files, run, snapshot


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planned")
    route, profile, meta = planned_files(folder)
    return route.read_text(), profile.read_text(), meta.read_text()


CASES = [
    (["plan", "{route}", "-o", ""], "'-o' / '--output'"),
    (["plan", "{route}", "-o", "{folder}/p2.csv", "--plot", ""], "'--plot'"),
    (["plan", "{route}", "-o", "{folder}/p2.csv", "--report", ""], "'--report'"),
    (["plan", "{route}", "-o", "{folder}/p2.csv", "--meta", ""], "'--meta'"),
    (["route", "{route}", "-o", ""], "'-o' / '--output'"),
    (["check", "{route}", "--json", ""], "'--json'"),
    (["check", "{route}", "--csv", ""], "'--csv'"),
    (["check", "{route}", "--speeds", "", "--json", "{folder}/c.json"], "'--speeds'"),
    (["export", "{profile}", "-o", ""], "'-o' / '--output'"),
    (["plot", "{profile}", "-o", ""], "'-o' / '--output'"),
    (["plot", "{profile}", "-o", "{folder}/f.png", "--gg", ""], "'--gg'"),
    (["replay", "{profile}", "-o", ""], "'-o' / '--output'"),
    (["replay", "{profile}", "-o", "{folder}/run.csv", "--json", ""], "'--json'"),
    (["replay", "", "-o", "{folder}/run.csv"], "'PROFILE_FILE'"),
]


@pytest.mark.parametrize("args, option", CASES, ids=[" ".join(c[0]) for c in CASES])
def test_an_empty_file_name_is_refused_naming_the_option(args, option, planned, tmp_path):
    files = {"route": tmp_path / "r.csv", "profile": tmp_path / "p.csv"}
    files["route"].write_text(planned[0])
    files["profile"].write_text(planned[1])
    (tmp_path / "p.meta.json").write_text(planned[2])
    before = snapshot(tmp_path)
    result = run(*[a.format(folder=tmp_path, **files) for a in args])
    assert_usage_error(result, tmp_path, before, [option, "an empty name is no file"])
