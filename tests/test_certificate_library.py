"""The library face (``import curvespeed as cs``): the names scripts use are the library's own
functions, the package import stays light for the command line, and the README's library
example runs as written."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import curvespeed as cs

ROOT = Path(__file__).resolve().parents[1]


def test_face_names_are_the_library_functions():
    from curvespeed.geometry import build_geometry
    from curvespeed.io import read_route
    from curvespeed.io.limits_toml import read_limits
    from curvespeed.io.opendrive_path import read_opendrive
    from curvespeed.planner import plan_profile
    from curvespeed.replan import Replanner

    assert cs.read_route is read_route
    assert cs.build_geometry is build_geometry
    assert cs.read_limits is read_limits
    assert cs.read_opendrive is read_opendrive
    assert cs.plan_profile is plan_profile
    assert cs.Replanner is Replanner
    for name in cs.__all__:
        assert getattr(cs, name) is not None
        assert name in dir(cs)


def test_unknown_name_is_an_attribute_error():
    try:
        cs.plan  # noqa: B018
    except AttributeError as exc:
        assert "no attribute 'plan'" in str(exc)
    else:
        raise AssertionError("cs.plan should not exist")


def test_package_import_loads_no_numerics():
    """The command line imports the package first; the face must not pull numpy, scipy or the
    solvers in until a name is used (speed is measured in benchmarks/, this checks the cause)."""
    code = ("import sys, curvespeed; heavy = [m for m in ('numpy', 'scipy', 'clarabel', "
            "'curvespeed.replan', 'curvespeed.planner') if m in sys.modules]; print(heavy)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_readme_library_example_runs_as_written():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    found = re.search(r"<!-- library-example -->\n```python\n(.*?)```", text, re.S)
    assert found, "README.md lost its library example (after <!-- library-example -->)"
    out = subprocess.run([sys.executable, "-c", found.group(1)], cwd=ROOT, capture_output=True,
                         text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert lines[0].startswith("whole route: ") and lines[1].startswith("after 10 s: station ")
    # it moved: 20 windows of 0.5 s from rest, into the 4 m/s zone at the start
    station = float(re.search(r"station ([0-9.]+) m", lines[1]).group(1))
    speed = float(re.search(r"at ([0-9.]+) m/s", lines[1]).group(1))
    assert station > 10.0 and 0.0 < speed <= 4.0 + 1e-6
