"""What the HTML report and the overview figure cost, next to the check they are drawn from.

    python benchmarks/report.py            # the 10 km benchmark road, 5 repeats
    python benchmarks/report.py --km 2     # a shorter road

On the invented winding road of ``run.py`` (1 m stations, its zones and stop), planned once with
the envelope solver: the median wall time of checking the plan along its route (what ``plan
--report`` and ``plan --plot`` add first), of building the report page from that check, and of
drawing the overview PNG from it; each with its ratio to the check's time in the same run, and
the report's size.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from benchmarks.run import constraints_for, synthetic_geometry  # noqa: E402


def median_time(func, repeats: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = func()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--km", type=float, default=10.0)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()

    from curvespeed.cli._report import check_of_plan
    from curvespeed.io.check_report import check_report_dict
    from curvespeed.limits import Limits
    from curvespeed.planner import plan_profile
    from curvespeed.plots import overview_bytes
    from curvespeed.report import report_data, report_html
    from curvespeed.solvers import SolverKind

    length = 1000.0 * args.km
    geo = synthetic_geometry(length)
    limits, constraints = Limits(max_speed_mps=27.0, max_jerk_mps3=None), constraints_for(length)
    profile = plan_profile(geo, limits, constraints, SolverKind.ENVELOPE)

    t_check, report = median_time(lambda: check_report_dict(
        check_of_plan(geo, limits, constraints, profile)), args.repeats)
    t_html, html = median_time(lambda: report_html(report_data(
        report, geo.x_m, geo.y_m, doing="planned", provenance=())), args.repeats)
    t_png, png = median_time(lambda: overview_bytes(profile, "png", limits, constraints,
                                                    check=report), args.repeats)
    print(f"{args.km:g} km road, {geo.n_nodes} stations, {len(report['curves'])} curves; "
          f"medians of {args.repeats}")
    print(f"{'step':<32} {'s':>8} {'/ check':>8}")
    for name, t in (("check of the plan", t_check), ("report page (HTML)", t_html),
                    ("overview figure (PNG)", t_png)):
        print(f"{name:<32} {t:8.3f} {t / t_check:8.2f}")
    print(f"report {len(html.encode()) / 1024:.0f} KiB, figure {len(png) / 1024:.0f} KiB")


if __name__ == "__main__":
    main()
