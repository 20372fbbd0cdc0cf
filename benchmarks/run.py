"""Benchmarks of the speed solvers: one command, one table.

    python benchmarks/run.py            # all cases (under a minute on 2 cores)
    python benchmarks/run.py --quick    # 10 km cases only

Every case runs in its own Python process (so peak memory is that case's own) and repeats the
solve; the table shows medians. The routes are invented for the benchmark: a winding road whose
curves (radius 40-600 m, blended over 40 m) are drawn from a seeded random generator, with two
speed zones and one stop, at 1 m station spacing. Baseline: the same jerk-bounded program written
straightforwardly in cvxpy with exact cones and solved by Clarabel (one convex solve, i.e. one
iteration of the sequential scheme), run in the same benchmark.

Columns: stations, solver, iterations (outer / inner), median solve time, whole `curvespeed plan`
process time (imports, reading, spline fit, solve, writing) where measured, peak memory (max
resident set size of the case's process), the time gap to the jerk-free envelope, and the ratio of
the baseline's solve time to the case's.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def winding_curvature(length_m: float, ds: float, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    s = np.arange(0.0, length_m + ds / 2, ds)
    kappa = np.zeros_like(s)
    pos = 200.0
    while pos < length_m - 300.0:
        radius = rng.uniform(40.0, 600.0) * rng.choice([-1.0, 1.0])
        arc = rng.uniform(50.0, 300.0)
        kappa[(s >= pos) & (s < pos + arc)] = 1.0 / radius
        pos += arc + rng.uniform(50.0, 500.0)
    width = int(40.0 / ds) | 1
    return np.convolve(kappa, np.ones(width) / width, mode="same")


def synthetic_geometry(length_m: float, ds: float = 1.0):
    from curvespeed.geometry import geometry_from_curvature

    return geometry_from_curvature(winding_curvature(length_m, ds), ds=ds, name="benchmark road")


def constraints_for(length_m: float):
    from curvespeed.limits import RouteConstraints, SpeedZone, Stop

    return RouteConstraints(
        zones=(SpeedZone(0.2 * length_m, 0.26 * length_m, 13.9),
               SpeedZone(0.7 * length_m, 0.8 * length_m, 16.7)),
        stops=(Stop(round(0.5 * length_m)),))


def run_case(solver: str, length_km: float, repeats: int) -> dict:
    """Solve one case ``repeats`` times in this process; return timings and results."""
    from curvespeed.limits import Limits
    from curvespeed.problem import build_problem
    from curvespeed.profile import derive

    length = length_km * 1000.0
    geo = synthetic_geometry(length)
    limits = Limits(max_jerk_mps3=2.0, max_speed_mps=27.0)
    jerk_model = solver != "envelope"
    problem = build_problem(geo, limits, constraints_for(length), jerk_model=jerk_model)
    times, result = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        if solver == "envelope":
            from curvespeed.solvers.envelope import solve_envelope
            result = solve_envelope(problem)
        elif solver == "convex":
            from curvespeed.solvers.convex import solve_convex
            result = solve_convex(problem)
        elif solver == "cvxpy-baseline":
            from curvespeed.solvers.reference_cvxpy import solve_reference
            result = solve_reference(problem, max_iterations=1)
        else:
            raise ValueError(solver)
        times.append(time.perf_counter() - t0)
    total = float(derive(problem, result.b)["time_s"][-1])
    env_b = result.envelope_b if result.envelope_b is not None else result.b
    v = np.sqrt(env_b)
    env_time = float(np.sum(2.0 * problem.ds / (v[:-1] + v[1:])))
    return {"stations": problem.n_nodes, "solver": solver, "iterations": result.iterations,
            "inner": result.inner_iterations, "solve_s": statistics.median(times),
            "runs": repeats, "gap": total / env_time - 1.0,
            "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}


def run_replan(variant: str, calls: int, dt: float = 0.1) -> dict:
    """Replan a 300 m window ``calls`` times while the vehicle drives the bundled mountain road
    (invented), following each window exactly for ``dt`` seconds until the next call (as the
    README's example does). ``variant``: "converged" (the solver's own stopping test) or
    "one-qp" (one sequential-convex iteration per call from the previous window, max_iterations
    1). Times the calls, and inside them the QP backend's own calls, to split the time between
    the QP solver and the Python around it."""

    from curvespeed.geometry import build_geometry
    from curvespeed.io import read_route
    from curvespeed.limits import Limits
    from curvespeed.replan import Replanner
    from curvespeed.solvers import convex
    from curvespeed.solvers.convex import ConvexOptions

    qp_time = [0.0]
    solve_qp = convex.solve_qp_clarabel

    def timed(*args, **kwargs):
        t0 = time.perf_counter()
        try:
            return solve_qp(*args, **kwargs)
        finally:
            qp_time[0] += time.perf_counter() - t0

    convex.solve_qp_clarabel = timed
    geo = build_geometry(read_route(ROOT / "routes" / "mountain_road.csv"))
    options = ConvexOptions(threads=1, max_iterations=1 if variant == "one-qp" else 30)
    t0 = time.perf_counter()
    replanner = Replanner(geo, Limits(), options=options)
    setup = time.perf_counter() - t0
    station, speed, accel = 600.0, 20.0, 0.0
    times, qps, its, inner, relaxed = [], [], [], [], 0
    for _ in range(calls):
        qp_time[0] = 0.0
        w = replanner.replan(station, speed, accel)
        times.append(w.solve_time_s)
        qps.append(qp_time[0])
        its.append(w.iterations)
        inner.append(w.qp_iterations)
        relaxed += w.relaxed > 0.0
        station = float(np.interp(dt, w.time_s, w.station_m))
        speed = float(np.interp(dt, w.time_s, w.speed_mps))
        accel = float(np.interp(dt, w.time_s, w.accel_mps2))
    return {"variant": variant, "calls": calls, "stations": int(w.station_m.size),
            "median_s": statistics.median(times), "p99_s": float(np.percentile(times, 99)),
            "qp_median_s": statistics.median(qps), "iterations": statistics.mean(its),
            "inner": statistics.mean(inner), "setup_s": setup, "relaxed": relaxed,
            "driven_m": station - 600.0}


def write_route_csv(length_km: float, path: Path) -> None:
    geo = synthetic_geometry(length_km * 1000.0, ds=5.0)
    with open(path, "w") as fh:
        fh.write("# invented benchmark road\nx_m,y_m\n")
        for x, y in zip(geo.x_m, geo.y_m):
            fh.write(f"{x:.3f},{y:.3f}\n")


def process_time(length_km: float, repeats: int) -> float:
    """Median wall time of the whole `curvespeed plan` command on a route file."""
    exe = Path(sys.executable).with_name("curvespeed")
    with tempfile.TemporaryDirectory() as tmp:
        route = Path(tmp) / "road.csv"
        write_route_csv(length_km, route)
        length = length_km * 1000.0
        args = [str(exe), "plan", str(route), "-o", str(Path(tmp) / "p.csv"), "--force",
                "--max-speed", "27", "--zone", f"{0.2 * length}:{0.26 * length}:13.9",
                "--zone", f"{0.7 * length}:{0.8 * length}:16.7", "--stop", str(round(length / 2))]
        times = []
        for _ in range(repeats):
            t0 = time.perf_counter()
            subprocess.run(args, check=True, capture_output=True)
            times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10 km cases only")
    parser.add_argument("--case", nargs=3, metavar=("SOLVER", "KM", "REPEATS"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--replan", nargs=2, metavar=("VARIANT", "CALLS"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.case:
        print(json.dumps(run_case(args.case[0], float(args.case[1]), int(args.case[2]))))
        return
    if args.replan:
        print(json.dumps(run_replan(args.replan[0], int(args.replan[1]))))
        return

    cases = [("envelope", 10, 5), ("convex", 10, 5), ("cvxpy-baseline", 10, 1)]
    if not args.quick:
        cases += [("envelope", 100, 3), ("convex", 100, 3)]
    rows = []
    for solver, km, reps in cases:
        out = subprocess.run([sys.executable, __file__, "--case", solver, str(km), str(reps)],
                             check=True, capture_output=True, text=True, cwd=ROOT)
        rows.append(json.loads(out.stdout.strip().splitlines()[-1]))
        print(f"  done: {solver} {km} km", file=sys.stderr)
    replans = []
    for variant in ("converged", "one-qp"):
        out = subprocess.run([sys.executable, __file__, "--replan", variant,
                              "100" if args.quick else "300"],
                             check=True, capture_output=True, text=True, cwd=ROOT)
        replans.append(json.loads(out.stdout.strip().splitlines()[-1]))
        print(f"  done: replan {variant}", file=sys.stderr)
    proc = process_time(10, 3)
    base = next(r["solve_s"] for r in rows if r["solver"] == "cvxpy-baseline")
    conv10 = next(r["solve_s"] for r in rows if r["solver"] == "convex" and r["stations"] < 20000)

    print(f"\nmachine: {os.cpu_count()} cores; python {sys.version.split()[0]}")
    print(f"{'stations':>9} {'solver':>15} {'iter':>9} {'solve s':>9} {'process s':>10} "
          f"{'peak MB':>8} {'gap %':>7} {'baseline/this':>14}")
    for r in rows:
        p = f"{proc:.2f}" if (r["solver"] == "convex" and r["stations"] < 20000) else "-"
        print(f"{r['stations']:>9} {r['solver']:>15} {r['iterations']:>4}/{r['inner']:<4} "
              f"{r['solve_s']:>9.3f} {p:>10} {r['peak_mb']:>8.0f} {100 * r['gap']:>7.3f} "
              f"{base / r['solve_s']:>14.1f}")
    print("\nreceding-horizon replanning, 300 m windows (301 stations) along the bundled "
          "mountain road, the vehicle following each window for 0.1 s; targets: median 5 ms, "
          "p99 15 ms")
    print(f"{'variant':>10} {'calls':>6} {'median ms':>10} {'p99 ms':>8} {'QP ms':>7} "
          f"{'other ms':>9} {'SCP it':>7} {'QP it':>6} {'relaxed':>8} {'setup s':>8}")
    for r in replans:
        print(f"{r['variant']:>10} {r['calls']:>6} {1e3 * r['median_s']:>10.1f} "
              f"{1e3 * r['p99_s']:>8.1f} {1e3 * r['qp_median_s']:>7.1f} "
              f"{1e3 * (r['median_s'] - r['qp_median_s']):>9.1f} {r['iterations']:>7.2f} "
              f"{r['inner']:>6.1f} {r['relaxed']:>8} {r['setup_s']:>8.2f}")
    big = [r for r in rows if r["solver"] == "convex" and r["stations"] > 20000]
    if big:
        print(f"\nconvex 100 km / 10 km solve-time ratio: {big[0]['solve_s'] / conv10:.1f}")


if __name__ == "__main__":
    main()
