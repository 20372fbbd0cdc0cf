"""Closed-loop replay benchmark: the bundled mountain road (invented), planned with the default
limits, replayed with the default vehicle.

    python benchmarks/replay_bench.py             # LQR and MPC, library and whole command
    python benchmarks/run.py --replay             # the same, from the main benchmark command

Target (issue #15): the whole `curvespeed replay` command on the mountain road with the LQR
tracker under 5 s. Rows: median of repeated runs, each case in its own process; the ratio
columns are same-run ratios (planned driving time over replay time: how much faster than real
time; MPC time over LQR time).
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
ROUTE = ROOT / "routes" / "mountain_road.csv"
EXE = Path(sys.executable).with_name("curvespeed")
TARGET_S = 5.0


def plan_route(folder: Path) -> Path:
    out = folder / "mountain_road.csv"
    subprocess.run([str(EXE), "plan", str(ROUTE), "-o",
                    str(out), "--force"], check=True, capture_output=True, cwd=ROOT)
    return out


def run_library(profile: str, tracker: str, repeats: int) -> dict:
    """Median wall time of :func:`curvespeed.dynamics.simulate.replay` (tables included)."""
    from curvespeed.dynamics.simulate import ReplaySettings, replay
    from curvespeed.dynamics.summary import summarise
    from curvespeed.dynamics.tracker_kind import TrackerKind
    from curvespeed.io.profile_csv import read_station_profile

    sp = read_station_profile(profile)
    settings = ReplaySettings(tracker=TrackerKind(tracker))
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        result = replay(sp, settings=settings)
        times.append(time.perf_counter() - start)
    summary = summarise(result)
    return {"tracker": tracker, "median_s": statistics.median(times), "repeats": repeats,
            "ticks": int(result["time_s"].size), "planned_s": result.planned_time_s,
            "max_error_m": summary.max_lateral_error_m, "stats": result.tracker_stats}


def run_command(profile: Path, folder: Path, repeats: int) -> float:
    """Median wall time of the whole `curvespeed replay` process (start-up, reading, tables,
    simulation, writing the run CSV)."""
    times = []
    for i in range(repeats):
        start = time.perf_counter()
        subprocess.run([str(EXE), "replay", str(profile),
                        "-o", str(folder / f"run{i}.csv"), "--force"], check=True,
                       capture_output=True, cwd=ROOT)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", nargs=3, metavar=("PROFILE", "TRACKER", "REPEATS"),
                        help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.case:
        print(json.dumps(run_library(args.case[0], args.case[1], int(args.case[2]))))
        return
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        profile = plan_route(folder)
        rows = []
        for tracker, repeats in (("lqr", 5), ("mpc", 1)):
            out = subprocess.run([sys.executable, __file__, "--case", str(profile), tracker,
                                  str(repeats)], check=True, capture_output=True, text=True,
                                 cwd=ROOT)
            rows.append(json.loads(out.stdout.strip().splitlines()[-1]))
            print(f"  done: replay {tracker}", file=sys.stderr)
        command_s = run_command(profile, folder, 5)
    lqr = rows[0]
    print(f"\nclosed-loop replay, bundled mountain road (planned {lqr['planned_s']:.1f} s, "
          f"{lqr['ticks']} tracker periods of 0.02 s, RK4 at 0.01 s); target: the whole "
          f"command with LQR under {TARGET_S:g} s")
    print(f"{'tracker':>8} {'runs':>5} {'library s':>10} {'x real time':>12} "
          f"{'/ LQR':>6} {'max error m':>12}")
    for r in rows:
        print(f"{r['tracker']:>8} {r['repeats']:>5} {r['median_s']:>10.2f} "
              f"{r['planned_s'] / r['median_s']:>12.0f} {r['median_s'] / lqr['median_s']:>6.1f} "
              f"{r['max_error_m']:>12.4f}")
    mpc = rows[1]["stats"]
    if mpc:
        print(f"MPC: {mpc['qp_solves']} QPs, {mpc['mean_qp_iterations']:.1f} OSQP iterations "
              f"each, {mpc['qp_fallbacks']} fallbacks")
    verdict = "meets" if command_s < TARGET_S else "MISSES"
    print(f"whole `curvespeed replay` command, LQR, median of 5: {command_s:.2f} s ({verdict} "
          f"the {TARGET_S:g} s target)")


if __name__ == "__main__":
    main()
