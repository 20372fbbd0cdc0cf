"""OpenDRIVE route stage: reading a road network and building the exact lane-centre geometry.

    python benchmarks/opendrive.py            # 10 km road, 5 repeats
    python benchmarks/opendrive.py --quick    # 2 km road, 3 repeats

The road is invented: a 10 km (or 2 km) chain of straights, clothoids, arcs (radius 60-400 m,
from a seeded generator) and a normalized paramPoly3 lane change every kilometre, two lanes each
way, a lane section every 500 m, elevation and superelevation records; written once into a
temporary folder. Medians of in-process calls to ``read_opendrive`` (lane -1, 1 m stations, and
the reference line itself) and of the whole ``curvespeed route`` command, with the same road
written as CSV points every 5 m and fitted (``curvespeed route`` on the CSV) as the same-run
baseline: the ratio says what the exact path costs against the fit it replaces.
"""

from __future__ import annotations

import argparse
import math
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from opendrive_helpers import document, geometry, lanes, road  # noqa: E402

from curvespeed.geometry.design_curves import ElementCurve, ParamPoly3Curve  # noqa: E402
from curvespeed.io.opendrive_path import read_opendrive  # noqa: E402


def invented_road(length_m: float, seed: int = 7) -> str:
    rng = np.random.default_rng(seed)
    x = y = h = s = 0.0
    parts = []
    sign = 1.0
    while s < length_m:
        radius = float(rng.uniform(60.0, 400.0))
        k = sign / radius
        sign = -sign
        elements = [("line", 80.0, 0.0, 0.0), ("spiral", 40.0, 0.0, k),
                    ("arc", float(rng.uniform(30.0, 120.0)), k, k), ("spiral", 40.0, k, 0.0)]
        if int(s // 1000) != int((s + 400) // 1000):
            elements.append(("param", 60.0, 0.0, 0.0))
        for kind, length, k0, k1 in elements:
            if kind == "param":
                u, v = (0.0, 60.0, 0.0, 0.0), (0.0, 0.0, 3.0, -2.0)
                curve = ParamPoly3Curve(x, y, h, 60.0, u, v, False)
                length = curve.true_length_m()
                curve = ParamPoly3Curve(x, y, h, length, u, v, False)
                inner = ("<paramPoly3 aU=\"0\" bU=\"60\" cU=\"0\" dU=\"0\" aV=\"0\" bV=\"0\" "
                         "cV=\"3\" dV=\"-2\" pRange=\"normalized\"/>")
            else:
                curve = ElementCurve(x, y, h, length, k0, k1)
                inner = {"line": "<line/>", "arc": f'<arc curvature="{k0!r}"/>',
                         "spiral": f'<spiral curvStart="{k0!r}" curvEnd="{k1!r}"/>'}[kind]
            parts.append(geometry(s, x, y, h, length, inner))
            end = curve.evaluate(np.array([length]))
            x, y, h = float(end.x_m[0]), float(end.y_m[0]), float(end.heading_rad[0])
            s += length
    profile = ('<elevationProfile><elevation s="0" a="100" b="0.01" c="0" d="0"/>'
               "</elevationProfile><lateralProfile>"
               + "".join(f'<superelevation s="{q!r}" a="{0.03 * (-1) ** i!r}" b="0" c="0" d="0"/>'
                         for i, q in enumerate(np.arange(0.0, s, 250.0).tolist()))
               + "</lateralProfile>")
    lane_xml = lanes(3.5, right=2, left=2)
    one = lane_xml[len("<lanes>"):-len("</lanes>")]
    sections = "".join(one.replace('<laneSection s="0">', f'<laneSection s="{q!r}">')
                       for q in np.arange(0.0, s, 500.0).tolist())
    return document(road(1, "".join(parts), s, profile=profile,
                         lane_xml=f"<lanes>{sections}</lanes>"))


def median_time(func, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="2 km road, 3 repeats")
    args = parser.parse_args()
    length, repeats = (2000.0, 3) if args.quick else (10000.0, 5)
    exe = str(Path(sys.executable).with_name("curvespeed"))
    with tempfile.TemporaryDirectory() as tmp:
        xodr = Path(tmp) / "road.xodr"
        xodr.write_text(invented_road(length), encoding="utf-8")
        lane = median_time(lambda: read_opendrive(xodr, lane=-1), repeats)
        ref = median_time(lambda: read_opendrive(xodr, lane=0), repeats)
        geo = read_opendrive(xodr, lane=0).geometry
        csv = Path(tmp) / "road.csv"
        step = max(1, round(5.0 / geo.spacing_m))
        csv.write_text("x_m,y_m\n" + "".join(f"{a:.3f},{b:.3f}\n" for a, b in
                                             zip(geo.x_m[::step], geo.y_m[::step])))
        proc_xodr = median_time(lambda: subprocess.run([exe, "route", str(xodr)], check=True,
                                                       capture_output=True), repeats)
        proc_csv = median_time(lambda: subprocess.run([exe, "route", str(csv)], check=True,
                                                      capture_output=True), repeats)
    km = geo.length_m / 1000
    print(f"invented road {km:.1f} km, {geo.n_nodes} stations, medians of {repeats}")
    print(f"read_opendrive lane -1      {lane:8.3f} s")
    print(f"read_opendrive lane 0       {ref:8.3f} s")
    print(f"curvespeed route (.xodr)    {proc_xodr:8.3f} s")
    print(f"curvespeed route (CSV, fit) {proc_csv:8.3f} s   (baseline)")
    print(f"fit / exact process time    {proc_csv / proc_xodr:8.2f}")
    assert math.isfinite(lane)


if __name__ == "__main__":
    main()
