"""How long a recorded drive takes to become a route, and how much memory: one command.

    python benchmarks/recorded_drives.py                 # a log of 10^6 fixes (RTK, 100 Hz)
    python benchmarks/recorded_drives.py --fixes 100000  # a smaller one

The log is simulated (tests/drive_logs.py): an invented road of straights, clothoids and arcs,
repeated end to end until the drive is long enough, driven from rest to rest with a stop in
every repetition and logged at 100 Hz with RTK errors (1 cm white, 1 cm drifting over a minute;
common practice). It is written as a CSV of ``x_m,y_m`` (no time stamps: fixes are taken in
order) and read back by ``curvespeed route`` in its own process, three times; the table gives
the median wall time, the peak memory of the process (max resident set size) and the length
error against the exact road. Targets (issue "recorded drives"): under 60 s and 2 GB.
"""

from __future__ import annotations

import argparse
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from drive_logs import RTK, invented_road, simulate_drive  # noqa: E402

from curvespeed.geometry.elements import Alignment  # noqa: E402


def long_road(fixes: int, rate_hz: float) -> Alignment:
    """The invented road repeated until a drive of ``fixes`` fixes fits on it (about 20 m/s)."""
    one = invented_road(0.0, 0.0, 0.0)
    seconds = fixes / rate_hz
    copies = max(1, int(seconds * 25.0 / one.length_m) + 1)   # enough road at up to 25 m/s
    return Alignment(one.elements * copies, 0.0, 0.0, 0.0)


def write_log(fixes: int, rate_hz: float, path: Path) -> tuple[Alignment, int, float]:
    road = long_road(fixes, rate_hz)
    one = invented_road().length_m
    stops = [one * (k + 0.37) for k in range(int(road.length_m // one))]
    log = simulate_drive(road, rate_hz, RTK, seed=11, stops=stops, dwell_s=10.0)
    n = min(fixes, log.x_m.size)
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write("# simulated RTK log of an invented road (curvespeed benchmark)\nx_m,y_m\n")
        np.savetxt(fh, np.column_stack((log.x_m[:n], log.y_m[:n])), fmt="%.4f", delimiter=",")
    covered = float(log.true_station_m[n - 1] - log.true_station_m[0])
    return road, n, covered


def run_once(path: Path) -> tuple[float, float, str]:
    before = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    start = time.perf_counter()
    done = subprocess.run([str(Path(sys.executable).parent / "curvespeed"), "route", str(path)],
                          capture_output=True, text=True, check=False)
    wall = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
    if done.returncode != 0:
        raise SystemExit(f"curvespeed route failed:\n{done.stdout}\n{done.stderr}")
    return wall, max(peak, before) / 1024.0, done.stdout


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--fixes", type=int, default=1_000_000)
    parser.add_argument("--rate", type=float, default=100.0)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "log.csv"
        road, n, covered = write_log(args.fixes, args.rate, path)
        size = path.stat().st_size
        runs = [run_once(path) for _ in range(args.repeat)]
    walls = [r[0] for r in runs]
    out = runs[-1][2]
    length = float(next(line.split()[1] for line in out.splitlines()
                        if line.startswith("length")))
    print(f"fixes {n}, {size / 1e6:.1f} MB of CSV, drive covers "
          f"{covered / 1000:.1f} km of road")
    print("| fixes | median wall s | runs s | peak memory MB | length error |")
    print("|---:|---:|---|---:|---:|")
    print(f"| {n} | {statistics.median(walls):.1f} | {', '.join(f'{w:.1f}' for w in walls)} | "
          f"{runs[-1][1]:.0f} | {100 * (length / covered - 1):+.3f} % |")
    print(out)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
