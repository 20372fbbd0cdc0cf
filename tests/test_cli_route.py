"""``curvespeed route`` on the command line: summaries, the geometry file, and bad input.

Every bad-input case must exit with status 2, print one ``error:`` line naming the file (and the
line, point or station where it applies) and write no output file.
"""

from __future__ import annotations

import csv
import math
import re
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from curvespeed.cli.main import cli

ROUTES = Path(__file__).resolve().parent.parent / "routes"


def run(*args):
    return CliRunner().invoke(cli, ["route", *map(str, args)])


def circle_csv(path: Path, radius=50.0, n=120, header="x_m,y_m"):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    rows = [f"{radius * math.cos(a):.4f},{radius * math.sin(a):.4f}" for a in t]
    path.write_text(header + "\n" + "\n".join(rows) + "\n")
    return path


@pytest.mark.parametrize("name", ["mountain_road.csv", "test_loop.geojson", "shuttle_route.gpx"])
def test_bundled_routes_summarise_and_write_geometry(name, tmp_path):
    out = tmp_path / "geometry.csv"
    result = run(ROUTES / name, "-o", out)
    assert result.exit_code == 0, result.output
    for word in ("points read", "length", "min radius", "total turning"):
        assert word in result.output
    with open(out) as fh:
        header = next(csv.reader(fh))
    assert header[:5] == ["station_m", "x_m", "y_m", "heading_rad", "curvature_1pm"]
    if name == "mountain_road.csv":
        assert header[5:7] == ["z_m", "grade"]
    if name != "mountain_road.csv":
        assert header[-2:] == ["lat", "lon"]


def test_the_summary_gives_the_tightest_radius_of_the_bound_where_it_is_tighter(tmp_path):
    # The bundled mountain road is invented design data at 5 m points, fitted: its hairpin
    # reads R 14.9 m and the bound, which plans and checks hold, R 14.2 m there (the short arc
    # between clothoids that smoothing rounds off, tests/test_certificate_smooth_arcs.py). A
    # circle's points to 0.1 mm leave the bound within 2 % of the estimate: no line.
    result = run(ROUTES / "mountain_road.csv")
    assert result.exit_code == 0, result.output
    estimate = float(re.search(r"min radius\s+([\d.]+) m", result.output).group(1))
    match = re.search(r"bound radius\s+([\d.]+) m at station ([\d.]+) m", result.output)
    assert match, result.output
    assert 0.9 * estimate < float(match.group(1)) < estimate
    plain = run(circle_csv(tmp_path / "c.csv"))
    assert plain.exit_code == 0 and "bound radius" not in plain.output, plain.output


def test_closed_loop_is_reported_as_closed_with_full_turn(tmp_path):
    result = run(circle_csv(tmp_path / "c.csv"))
    assert result.exit_code == 0, result.output
    assert "closed loop" in result.output
    assert "total turning  360.0 degrees" in result.output


BAD_INPUTS = {
    # name: (file name, content, fragments the error must contain)
    "unknown header": ("a.csv", "east,north\n0,0\n1,0\n2,0\n", ["a.csv", "x_m,y_m"]),
    "missing header": ("b.csv", "0,0\n1,0\n2,1\n", ["b.csv", "header"]),
    "not a number": ("c.csv", "x_m,y_m\n0,0\n1,abc\n2,1\n", ["c.csv", "line 3", "abc"]),
    "nan": ("d.csv", "x_m,y_m\n0,0\n1,nan\n2,1\n", ["d.csv", "line 3"]),
    "two points": ("e.csv", "x_m,y_m\n0,0\n10,0\n", ["e.csv", "at least 3"]),
    "repeated only": ("f.csv", "x_m,y_m\n0,0\n0,0\n5,0\n5,0\n", ["f.csv", "at least 3"]),
    "latitude out of range": ("g.csv", "lat,lon\n95,10\n95.1,10\n95.2,10.1\n",
                              ["g.csv", "line 2", "latitude"]),
    "geojson without a line": ("h.geojson", '{"type": "Point", "coordinates": [1, 2]}',
                               ["h.geojson", "LineString"]),
    "empty gpx": ("i.gpx", '<?xml version="1.0"?><gpx version="1.1" '
                  'xmlns="http://www.topografix.com/GPX/1/1"></gpx>', ["i.gpx", "no"]),
    "reversal": ("j.csv", "x_m,y_m\n0,0\n10,0\n20,0\n12,0.1\n5,0.2\n",
                 ["j.csv", "station 20.0 m", "doubles back"]),
    "unknown extension": ("k.txt", "x_m,y_m\n0,0\n1,0\n2,0\n", ["k.txt", "extension"]),
}


@pytest.mark.parametrize("case", list(BAD_INPUTS))
def test_bad_input_exits_2_with_a_clear_error_and_no_output(case, tmp_path):
    name, content, fragments = BAD_INPUTS[case]
    route = tmp_path / name
    route.write_text(content)
    out = tmp_path / "out.csv"
    result = run(route, "-o", out)
    assert result.exit_code == 2, result.output
    assert "error:" in result.output
    for fragment in fragments:
        assert fragment in result.output, (case, result.output)
    assert "Traceback" not in result.output
    assert not out.exists()


def test_missing_file_exits_2(tmp_path):
    result = run(tmp_path / "nowhere.csv")
    assert result.exit_code == 2
    assert "nowhere.csv" in result.output


def test_repeated_points_are_dropped_with_a_warning(tmp_path):
    path = circle_csv(tmp_path / "r.csv")
    lines = path.read_text().splitlines()
    lines.insert(5, lines[4])          # one repeated point
    path.write_text("\n".join(lines) + "\n")
    result = run(path)
    assert result.exit_code == 0, result.output
    assert "warning:" in result.output and "repeated" in result.output


def test_existing_output_is_not_overwritten_without_force(tmp_path):
    out = tmp_path / "g.csv"
    out.write_text("keep me\n")
    result = run(circle_csv(tmp_path / "c.csv"), "-o", out)
    assert result.exit_code == 2
    assert "--force" in result.output
    assert out.read_text() == "keep me\n"
    assert run(circle_csv(tmp_path / "c.csv"), "-o", out, "--force").exit_code == 0
    assert out.read_text().startswith("station_m,")


def test_command_line_starts_without_the_numerical_libraries():
    # `curvespeed --help` must stay instant: numpy, scipy and the solvers load only when a
    # command runs
    import subprocess
    import sys

    code = ("import sys, curvespeed.cli.main\n"
            "heavy = sorted(m for m in ('numpy', 'scipy', 'clarabel', 'cvxpy', 'pyproj', "
            "'matplotlib') if m in sys.modules)\n"
            "assert not heavy, heavy\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_a_command_loads_no_other_command():
    # each subcommand's module is imported when its command is asked for, so a run of `plan`
    # reads none of the others (nor what they import at their top); --help still lists all
    import subprocess
    import sys

    code = ("import sys\n"
            "from click.testing import CliRunner\n"
            "from curvespeed.cli.main import cli\n"
            "result = CliRunner().invoke(cli, ['plan', '--help'])\n"
            "assert result.exit_code == 0 and 'ROUTE_FILE' in result.output, result.output\n"
            "others = sorted(m for m in sys.modules if m.startswith('curvespeed.cli.')\n"
            "                and m.endswith('_cmd') and m != 'curvespeed.cli.plan_cmd')\n"
            "assert not others, others\n"
            "listed = CliRunner().invoke(cli, ['--help']).output\n"
            "assert all(c in listed for c in ('batch', 'check', 'export', 'plan', 'plot', "
            "'replay', 'report', 'route')), listed\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_plan_loads_no_scipy_module(tmp_path):
    # the fits evaluate their uniform-knot splines, find their smoothing weight and the noise
    # bound's quantile themselves (importing scipy.interpolate, which imports scipy.optimize,
    # and scipy.special was 0.2-0.3 s of every plan's start-up), keep their design matrices as
    # rows and factor their banded normal equations in their own kernel: any scipy import
    # (scipy.sparse, scipy.linalg) loads scipy's array layer, another 0.3 s. An open route with
    # elevation, a stop and a zone planned, and a loop planned (its QP, which wraps around the
    # loop, put in banded order by the solver's own fold order, not scipy's reverse
    # Cuthill-McKee). Nor numpy's masked arrays (about 20 ms), which numpy's median,
    # percentile and unique load on first use: curvespeed.order_stats stands in for them.
    import subprocess
    import sys

    code = ("import sys\n"
            "from click.testing import CliRunner\n"
            "from curvespeed.cli.main import cli\n"
            f"open_route = ['plan', {str(ROUTES / 'mountain_road.csv')!r}, '-o', "
            f"{str(tmp_path / 'p.csv')!r}, '--stop', '3000', '--zone', '1000:1500:10']\n"
            f"loop = ['plan', {str(ROUTES / 'test_loop.geojson')!r}, '-o', "
            f"{str(tmp_path / 'q.csv')!r}]\n"
            "for args in (open_route, loop):\n"
            "    result = CliRunner().invoke(cli, args)\n"
            "    assert result.exit_code == 0, result.output\n"
            "loaded = sorted(m for m in sys.modules if m == 'scipy' or m.startswith('scipy.'))\n"
            "assert not loaded, loaded\n"
            "assert 'numpy.ma' not in sys.modules\n")
    subprocess.run([sys.executable, "-c", code], check=True)
    assert (tmp_path / "p.csv").read_text().startswith("station_m,")
    assert (tmp_path / "q.csv").read_text().startswith("station_m,")


def test_plan_loads_not_the_audit(tmp_path):
    # a plan's summary finds its curves (check.curves, check.settings) but judges nothing: the
    # audit's modules and report types (a dozen dataclasses, about 20 ms of every plan's
    # start-up) stay unloaded; the check package's names still resolve on first use
    import subprocess
    import sys

    code = ("import sys\n"
            "from click.testing import CliRunner\n"
            "from curvespeed.cli.main import cli\n"
            f"args = ['plan', {str(ROUTES / 'mountain_road.csv')!r}, '-o', "
            f"{str(tmp_path / 'p.csv')!r}, '--stop', '3000']\n"
            "result = CliRunner().invoke(cli, args)\n"
            "assert result.exit_code == 0, result.output\n"
            "assert 'curves where a lateral limit binds' in result.output, result.output\n"
            "heavy = ('curvespeed.check.audit', 'curvespeed.check.model', "
            "'curvespeed.check.speeds', 'curvespeed.check.uncertainty', 'curvespeed.design')\n"
            "loaded = [m for m in heavy if m in sys.modules]\n"
            "assert not loaded, loaded\n"
            "import curvespeed.check as check\n"
            "from curvespeed.check.audit import check_speeds\n"
            "assert check.check_speeds is check_speeds\n")
    subprocess.run([sys.executable, "-c", code], check=True)


def test_several_drives_are_fused_from_files_or_tracks(tmp_path):
    # Two simulated drives of an invented road by a consumer receiver at 10 Hz: as two files
    # (--drive) or as two tracks of one GPX file (--all-tracks), fused into one route; the
    # summary says so and gives the spread between the drives. Without --all-tracks only the
    # first track is read, with a warning that suggests it.
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from drive_logs import CONSUMER, invented_road, simulate_drive, write_gpx

    road = invented_road()
    logs = [simulate_drive(road, 10, CONSUMER, seed=40 + i, stops=(1200.0,)) for i in range(2)]
    both = tmp_path / "both.gpx"
    write_gpx(logs, both)
    one, two = tmp_path / "one.gpx", tmp_path / "two.gpx"
    write_gpx(logs[:1], one)
    write_gpx(logs[1:], two)
    for args in ([one, "--drive", two], [both, "--all-tracks"]):
        result = run(*args)
        assert result.exit_code == 0, result.output
        assert "drives         2 fused; they lie" in result.output
        length = float(next(line.split()[1] for line in result.output.splitlines()
                            if line.startswith("length")))
        assert length == pytest.approx(road.length_m, rel=0.02)
    result = run(both)
    assert result.exit_code == 0 and "--all-tracks fuses them" in result.output
    # a drive file is an input: no output may replace it
    result = run(one, "--drive", two, "-o", two, "--force")
    assert result.exit_code == 2 and "error:" in result.output
    assert two.read_text(encoding="utf-8").startswith("<?xml")


def test_drives_run_the_way_of_the_first_one(tmp_path):
    # A track and the same track driven the other way, a little longer (it starts 200 m
    # beyond the first one's end): as --drive or as two tracks of one file (--all-tracks), the
    # fused route starts where the first drive starts, not at the far end of the longer one,
    # and the drive turned round is named.
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from drive_logs import RTK, invented_road, simulate_drive, write_gpx

    road = invented_road()
    log = simulate_drive(road, 10, RTK, seed=61)
    early = log.true_station_m < road.length_m - 200.0
    first = type(log)(log.time_s[early], log.x_m[early], log.y_m[early], None,
                      log.true_station_m[early], road)
    back = type(log)(log.time_s, log.x_m[::-1], log.y_m[::-1], None,
                     log.true_station_m[::-1], road)
    one, two, both = tmp_path / "one.gpx", tmp_path / "two.gpx", tmp_path / "both.gpx"
    write_gpx([first], one)
    write_gpx([back], two)
    write_gpx([first, back], both)
    alone = tmp_path / "alone.csv"
    assert run(one, "-o", alone).exit_code == 0
    with open(alone) as fh:
        expected = next(csv.DictReader(fh))
    for args, other in (([one, "--drive", two], "two.gpx: drive 2 of 2"),
                        ([both, "--all-tracks"], "both.gpx: drive 2 of 2")):
        out = tmp_path / "fused.csv"
        result = run(*args, "-o", out, "--force")
        assert result.exit_code == 0, result.output
        assert f"{other} is driven the other way from drive 1" in result.output
        with open(out) as fh:
            start = next(csv.DictReader(fh))
        assert abs(float(start["lat"]) - float(expected["lat"])) < 2e-5        # about 2 m
        assert abs(float(start["lon"]) - float(expected["lon"])) < 3e-5
        assert abs(float(start["heading_rad"]) - float(expected["heading_rad"])) < 0.05


@pytest.mark.parametrize("lon_end, kind", [(2.0, "oblique Mercator whose central line passes"),
                                           (0.5, "transverse Mercator on the central meridian")])
def test_the_summary_names_the_projection_used(tmp_path, lon_end, kind):
    # invented lines along the equator: 222 km reach 111 km east and west of their middle,
    # beyond the transverse Mercator's 80 km, and get the oblique Mercator along the equator;
    # 56 km keep the transverse Mercator (before, both were said to be transverse)
    from curvespeed.io import read_route

    lon = np.linspace(0.0, lon_end, 201)
    route = tmp_path / "equator.csv"
    route.write_text("lat,lon\n" + "".join(f"0.0,{b:.8f}\n" for b in lon))
    result = run(route, "--spacing", "50")
    assert result.exit_code == 0, result.output
    used = read_route(route).projection
    assert f"(latitude/longitude, projected to a local {used.description})" in result.output
    assert kind in result.output
    assert ("transverse" in result.output) == (used.azimuth_deg is None)
    if used.azimuth_deg is not None:
        # the great circle through points on the equator is the equator: due east or west,
        # to the round-off of its least-squares fit (1e-9 degree is far above it)
        assert abs(used.azimuth_deg) == pytest.approx(90.0, abs=1e-9)
        assert f"azimuth {used.azimuth_deg:.3f} deg" in result.output


def test_a_straight_route_is_summarised_as_straight(tmp_path):
    # an invented line 222 km along the equator: its fitted curvature is round-off, and the
    # summary printed a smallest radius of 9e32 m and a bound's of 1e12 m; a 500 m line in
    # metres, a bound's radius of 3,500 km. Radii over 100 km (0.0094 m/s^2 at 110 km/h) are
    # straight for a speed plan.
    lon = np.linspace(0.0, 2.0, 201)
    equator = tmp_path / "equator.csv"
    equator.write_text("lat,lon\n" + "".join(f"0.0,{b:.8f}\n" for b in lon))
    line = tmp_path / "line.csv"
    line.write_text("x_m,y_m\n" + "".join(f"{x:.1f},0.0\n" for x in range(0, 501, 5)))
    for route, spacing in ((equator, "50"), (line, "1")):
        result = run(route, "--spacing", spacing)
        assert result.exit_code == 0, result.output
        assert "min radius     none (straight: no radius under 100 km)" in result.output
        assert "bound radius" not in result.output
