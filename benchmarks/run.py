"""Benchmarks of the speed solvers: one command, one table.

    python benchmarks/run.py            # all cases (under a minute on 2 cores)
    python benchmarks/run.py --quick    # 10 km cases only

The batch benchmark (``benchmarks/batch.py``) runs last, on 40 invented roads (10 with
``--quick``); run it alone for other sizes.

Every case runs in its own Python process (so peak memory is that case's own) and repeats the
solve; the table shows medians. The routes are invented for the benchmark: a winding road whose
curves (radius 40-600 m, blended over 40 m) are drawn from a seeded random generator, with two
speed zones and one stop, at 1 m station spacing. Baseline: the same jerk-bounded program written
straightforwardly in cvxpy with exact cones and solved by Clarabel (one convex solve, i.e. one
iteration of the sequential scheme), run in the same benchmark.

Columns: stations, solver, iterations (outer / inner), median solve time, whole `curvespeed plan`
process time (imports, reading, spline fit, solve, writing) where measured, peak memory (max
resident set size of the case's process), the time gap to the jerk-free envelope, and the ratio of
the baseline's solve time to the case's. The QP backends' ratio is also measured with both
solving the same 10 km problem alternately in one process (``--solve-pair``), which a change of
the machine's pace between the separate cases cannot tilt.
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
        elif solver in ("convex", "convex-clarabel"):
            from curvespeed.solvers import QPBackend
            from curvespeed.solvers.convex import ConvexOptions, solve_convex
            backend = QPBackend.CLARABEL if solver == "convex-clarabel" else QPBackend.BANDED
            result = solve_convex(problem, ConvexOptions(qp_backend=backend))
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


def run_solve_pair(length_km: float, repeats: int) -> dict:
    """The whole jerk-bounded solve with both QP backends on the same problem in one process,
    alternating ``repeats`` times (after one untimed solve each): medians and their ratio. The
    separate ``--case`` processes run minutes apart, so their ratio also carries how the
    machine's pace changed in between."""
    from curvespeed.limits import Limits
    from curvespeed.problem import build_problem
    from curvespeed.solvers import QPBackend
    from curvespeed.solvers.convex import ConvexOptions, solve_convex

    length = length_km * 1000.0
    problem = build_problem(synthetic_geometry(length), Limits(max_jerk_mps3=2.0,
                                                               max_speed_mps=27.0),
                            constraints_for(length), jerk_model=True)
    options = {name: ConvexOptions(qp_backend=QPBackend(name)) for name in ("banded", "clarabel")}
    times = {name: [] for name in options}
    for name, opt in options.items():
        solve_convex(problem, opt)
    for _ in range(repeats):
        for name, opt in options.items():
            t0 = time.perf_counter()
            solve_convex(problem, opt)
            times[name].append(time.perf_counter() - t0)
    out = {name + "_s": statistics.median(ts) for name, ts in times.items()}
    out["ratio"] = out["clarabel_s"] / out["banded_s"]
    return out


def run_replan(variant: str, backend: str, calls: int, dt: float = 0.1) -> dict:
    """Replan a 300 m window ``calls`` times while the vehicle drives the bundled mountain road
    (invented), following each window exactly for ``dt`` seconds until the next call (as the
    README's example does). ``variant``: "converged" (the solver's own stopping test) or
    "one-qp" (one sequential-convex iteration per call from the previous window, max_iterations
    1); ``backend``: the QP backend ("banded" or "clarabel"). Times the calls, and inside them
    the QP backends' own calls, to split the time between the QP solver and the Python around
    it."""

    from curvespeed.geometry import build_geometry
    from curvespeed.io import read_route
    from curvespeed.limits import Limits
    from curvespeed.replan import Replanner
    from curvespeed.solvers import QPBackend, qp_batches
    from curvespeed.solvers.convex import ConvexOptions

    qp_time = [0.0]

    def timed(solve_qp):
        def call(*args, **kwargs):
            t0 = time.perf_counter()
            try:
                return solve_qp(*args, **kwargs)
            finally:
                qp_time[0] += time.perf_counter() - t0
        return call

    # the backends as the QP batches call them (solvers/qp_batches.py)
    qp_batches.solve_qp_clarabel = timed(qp_batches.solve_qp_clarabel)
    qp_batches.solve_row_qp = timed(qp_batches.solve_row_qp)
    geo = build_geometry(read_route(ROOT / "routes" / "mountain_road.csv"))
    options = ConvexOptions(threads=1, max_iterations=1 if variant == "one-qp" else 30,
                            qp_backend=QPBackend(backend))
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
        station, speed, accel = w.state_at(dt)
    return {"variant": variant, "backend": backend, "calls": calls,
            "stations": int(w.station_m.size),
            "median_s": statistics.median(times), "p99_s": float(np.percentile(times, 99)),
            "qp_median_s": statistics.median(qps), "iterations": statistics.mean(its),
            "inner": statistics.mean(inner), "setup_s": setup, "relaxed": relaxed,
            "driven_m": station - 600.0}


def route_qp(length_km: float, stations: int | None = None):
    """The first sequential-convex QP of the benchmark road as one QP (not cut into batches),
    as the solver assembles it (:class:`curvespeed.solvers.qp_rows.RowQP`), with its centre and
    scale; ``stations``: only the rows within the first that many free stations (a window of
    the route, as a receding-horizon planner would solve)."""
    from curvespeed.limits import Limits
    from curvespeed.problem import build_problem
    from curvespeed.solvers.convex import ConvexOptions, plateau_anchors
    from curvespeed.solvers.convex_qp import QPBuilder, QPLayout
    from curvespeed.solvers.envelope import solve_envelope

    length = length_km * 1000.0
    problem = build_problem(synthetic_geometry(length), Limits(max_jerk_mps3=2.0,
                                                               max_speed_mps=27.0),
                            constraints_for(length))
    env = solve_envelope(problem)
    nv = problem.n_nodes
    lay = QPLayout(problem, jerk=True, anchors=plateau_anchors(problem, env.b, nv))
    b_env = env.b[:nv].copy()
    qp, obj_scale = QPBuilder(problem, lay, b_env, ConvexOptions()).reduced(b_env)
    free = np.flatnonzero(~lay.fixed)
    n_free = free.size
    if stations is not None:
        start = free.size // 3               # a window away from the start, past the first zone
        cols = np.arange(start, start + stations)
        inside = np.isin(qp.indices, cols)
        all_inside = np.bincount(qp.row_of_entry(), ~inside, minlength=qp.m) == 0
        qp = qp.take(cols, np.flatnonzero(all_inside))
        free = free[cols]
    gap_abs = ConvexOptions().qp_gap_fraction * float(
        np.sum(2.0 * problem.ds / (np.sqrt(env.b[:-1]) + np.sqrt(env.b[1:])))) * obj_scale
    if stations is not None:            # the window's share of the route's gap tolerance
        gap_abs *= stations / n_free
    return qp, b_env[free], np.maximum(b_env[free], 1.0), gap_abs


def run_qp_case(length_km: float, stations: int | None, repeats: int) -> dict:
    """Solve one captured QP with both backends, alternating, ``repeats`` times each: the
    banded method from the solver's row arrays, Clarabel from scipy.sparse matrices made from
    them (the conversion timed with it, as the solver pays it)."""
    from curvespeed.solvers.banded_ipm import solve_row_qp
    from curvespeed.solvers.clarabel_qp import solve_qp_clarabel

    qp, centre, scale, gap_abs = route_qp(length_km, stations)
    out = {"n": qp.n, "m": qp.m, "stations": stations, "gap_abs": gap_abs}

    def banded():
        return solve_row_qp(qp, 1e-8, centre, scale, gap_abs=gap_abs)

    def clarabel():
        return solve_qp_clarabel(*qp.to_sparse(), 1e-8, centre, scale, gap_abs=gap_abs,
                                 refine=False)

    times = {"banded": [], "clarabel": []}
    for _ in range(repeats):
        for name, fn in (("banded", banded), ("clarabel", clarabel)):
            t0 = time.perf_counter()
            x, st, its = fn()
            times[name].append(time.perf_counter() - t0)
            out[name + "_its"], out[name + "_status"] = its, st.value
            # the objective in the scaled variables both solvers work in
            y = (x - centre) / scale
            Py = scale * qp.P_times(scale * y)
            out[name + "_obj"] = float(0.5 * y @ Py + (scale * (qp.q + qp.P_times(centre))) @ y)
    for name in times:
        out[name + "_s"] = statistics.median(times[name])
    return out


def write_route_csv(length_km: float, path: Path) -> None:
    geo = synthetic_geometry(length_km * 1000.0, ds=5.0)
    with open(path, "w") as fh:
        fh.write("# invented benchmark road\nx_m,y_m\n")
        for x, y in zip(geo.x_m, geo.y_m):
            fh.write(f"{x:.3f},{y:.3f}\n")


def process_time(length_km: float, repeats: int, backend: str = "banded") -> float:
    """Median wall time of the whole `curvespeed plan` command on a route file, as a user's
    later runs take it: Python's bytecode cache on (an environment that sets
    PYTHONDONTWRITEBYTECODE would otherwise recompile every imported module in every run,
    0.2-0.3 s here) and one untimed run first to fill it."""
    exe = Path(sys.executable).with_name("curvespeed")
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    with tempfile.TemporaryDirectory() as tmp:
        route = Path(tmp) / "road.csv"
        write_route_csv(length_km, route)
        length = length_km * 1000.0
        args = [str(exe), "plan", str(route), "-o", str(Path(tmp) / "p.csv"), "--force",
                "--max-speed", "27", "--zone", f"{0.2 * length}:{0.26 * length}:13.9",
                "--zone", f"{0.7 * length}:{0.8 * length}:16.7", "--stop", str(round(length / 2)),
                "--qp-backend", backend]
        subprocess.run(args, check=True, capture_output=True, env=env)
        times = []
        for _ in range(repeats):
            t0 = time.perf_counter()
            subprocess.run(args, check=True, capture_output=True, env=env)
            times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10 km cases only")
    parser.add_argument("--case", nargs=3, metavar=("SOLVER", "KM", "REPEATS"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--replan", nargs=3, metavar=("VARIANT", "BACKEND", "CALLS"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--qp-case", nargs=3, metavar=("KM", "STATIONS", "REPEATS"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--solve-pair", nargs=2, metavar=("KM", "REPEATS"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--replay", action="store_true",
                        help="only the closed-loop replay benchmark (benchmarks/replay_bench.py)")
    args = parser.parse_args()
    if args.replay:
        subprocess.run([sys.executable, str(Path(__file__).with_name("replay_bench.py"))],
                       check=True, cwd=ROOT)
        return
    if args.case:
        print(json.dumps(run_case(args.case[0], float(args.case[1]), int(args.case[2]))))
        return
    if args.replan:
        print(json.dumps(run_replan(args.replan[0], args.replan[1], int(args.replan[2]))))
        return
    if args.solve_pair:
        print(json.dumps(run_solve_pair(float(args.solve_pair[0]), int(args.solve_pair[1]))))
        return
    if args.qp_case:
        stations = int(args.qp_case[1]) or None
        print(json.dumps(run_qp_case(float(args.qp_case[0]), stations, int(args.qp_case[2]))))
        return

    cases = [("envelope", 10, 5), ("convex", 10, 5), ("convex-clarabel", 10, 5),
             ("cvxpy-baseline", 10, 1)]
    if not args.quick:
        cases += [("envelope", 100, 3), ("convex", 100, 3), ("convex-clarabel", 100, 3)]
    qp_cases = [(10, 0, 7), (10, 300, 51)]
    rows = []
    for solver, km, reps in cases:
        out = subprocess.run([sys.executable, __file__, "--case", solver, str(km), str(reps)],
                             check=True, capture_output=True, text=True, cwd=ROOT)
        rows.append(json.loads(out.stdout.strip().splitlines()[-1]))
        print(f"  done: {solver} {km} km", file=sys.stderr)
    qp_rows = []
    for km, stations, reps in qp_cases:
        out = subprocess.run([sys.executable, __file__, "--qp-case", str(km), str(stations),
                              str(reps)], check=True, capture_output=True, text=True, cwd=ROOT)
        qp_rows.append(json.loads(out.stdout.strip().splitlines()[-1]))
        print(f"  done: QP {km} km {stations or 'whole route'}", file=sys.stderr)
    out = subprocess.run([sys.executable, __file__, "--solve-pair", "10", "9"], check=True,
                         capture_output=True, text=True, cwd=ROOT)
    pair = json.loads(out.stdout.strip().splitlines()[-1])
    print("  done: both backends alternating, 10 km", file=sys.stderr)
    replans = []
    for variant in ("converged", "one-qp"):
        for backend in ("banded", "clarabel"):
            out = subprocess.run([sys.executable, __file__, "--replan", variant, backend,
                                  "100" if args.quick else "300"],
                                 check=True, capture_output=True, text=True, cwd=ROOT)
            replans.append(json.loads(out.stdout.strip().splitlines()[-1]))
            print(f"  done: replan {variant} {backend}", file=sys.stderr)
    proc = process_time(10, 3)
    proc_clarabel = process_time(10, 3, "clarabel")
    base = next(r["solve_s"] for r in rows if r["solver"] == "cvxpy-baseline")
    conv10 = next(r["solve_s"] for r in rows if r["solver"] == "convex" and r["stations"] < 20000)

    print(f"\nmachine: {os.cpu_count()} cores; python {sys.version.split()[0]}")
    print(f"{'stations':>9} {'solver':>15} {'iter':>9} {'solve s':>9} {'process s':>10} "
          f"{'peak MB':>8} {'gap %':>7} {'baseline/this':>14}")
    for r in rows:
        p = "-"
        if r["stations"] < 20000 and r["solver"] in ("convex", "convex-clarabel"):
            p = f"{proc if r['solver'] == 'convex' else proc_clarabel:.2f}"
        print(f"{r['stations']:>9} {r['solver']:>15} {r['iterations']:>4}/{r['inner']:<4} "
              f"{r['solve_s']:>9.3f} {p:>10} {r['peak_mb']:>8.0f} {100 * r['gap']:>7.3f} "
              f"{base / r['solve_s']:>14.1f}")
    print("\nreceding-horizon replanning, 300 m windows (301 stations) along the bundled "
          "mountain road, the vehicle following each window for 0.1 s; targets: median 5 ms, "
          "p99 15 ms")
    print(f"{'variant':>10} {'backend':>9} {'calls':>6} {'median ms':>10} {'p99 ms':>8} "
          f"{'QP ms':>7} {'other ms':>9} {'SCP it':>7} {'QP it':>6} {'relaxed':>8} "
          f"{'setup s':>8}")
    for r in replans:
        print(f"{r['variant']:>10} {r['backend']:>9} {r['calls']:>6} {1e3 * r['median_s']:>10.1f} "
              f"{1e3 * r['p99_s']:>8.1f} {1e3 * r['qp_median_s']:>7.1f} "
              f"{1e3 * (r['median_s'] - r['qp_median_s']):>9.1f} {r['iterations']:>7.2f} "
              f"{r['inner']:>6.1f} {r['relaxed']:>8} {r['setup_s']:>8.2f}")
    big = [r for r in rows if r["solver"] == "convex" and r["stations"] > 20000]
    if big:
        print(f"\nconvex 100 km / 10 km solve-time ratio: {big[0]['solve_s'] / conv10:.1f}")
    print("\nQP backends, whole jerk-bounded solve (same run): Clarabel time / banded time")
    for km in sorted({r["stations"] for r in rows if r["solver"] == "convex"}):
        b = next(r for r in rows if r["solver"] == "convex" and r["stations"] == km)
        c = next(r for r in rows if r["solver"] == "convex-clarabel" and r["stations"] == km)
        print(f"{km:>9} stations: banded {b['solve_s']:.3f} s ({b['inner']} QP iterations), "
              f"Clarabel {c['solve_s']:.3f} s ({c['inner']}), ratio {c['solve_s'] / b['solve_s']:.1f}")
    print(f"    10001 stations, both backends alternating in one process (medians of 9): banded "
          f"{pair['banded_s']:.3f} s, Clarabel {pair['clarabel_s']:.3f} s, ratio "
          f"{pair['ratio']:.1f} (target >= 4)")
    print("\nOne QP (the first iteration's, 10 km road), both backends alternating, medians:")
    print(f"{'QP':>12} {'n':>6} {'rows':>7} {'banded ms':>10} {'its':>4} {'Clarabel ms':>12} "
          f"{'its':>4} {'ratio':>6} {'|objective diff| / gap tol.':>28}")
    for r in qp_rows:
        name = f"{r['stations']} st." if r["stations"] else "whole route"
        # both stop once the duality gap is below gap_abs, so their objectives may differ by
        # about that much; a ratio well below 1 is agreement to the tolerance asked for
        diff = abs(r["banded_obj"] - r["clarabel_obj"]) / r["gap_abs"]
        print(f"{name:>12} {r['n']:>6} {r['m']:>7} {1e3 * r['banded_s']:>10.2f} "
              f"{r['banded_its']:>4} {1e3 * r['clarabel_s']:>12.2f} {r['clarabel_its']:>4} "
              f"{r['clarabel_s'] / r['banded_s']:>6.1f} {diff:>28.2f}")
    sys.stdout.flush()
    subprocess.run([sys.executable, str(Path(__file__).with_name("replay_bench.py"))],
                   check=True, cwd=ROOT)
    batch_routes = 10 if args.quick else 40
    print(f"\nbatch (benchmarks/batch.py --routes {batch_routes}; 1,000 roads: run it alone):")
    out = subprocess.run([sys.executable, str(ROOT / "benchmarks" / "batch.py"), "--routes",
                          str(batch_routes)], check=True, capture_output=True, text=True,
                         cwd=ROOT)
    print(out.stdout.strip())


if __name__ == "__main__":
    main()
