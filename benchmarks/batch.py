"""Batch benchmark: roads per second on 1 and 2 workers, overhead per road, memory per worker.

    python benchmarks/batch.py                 # 1,000 invented roads of 1-5 km (long on 2 cores)
    python benchmarks/batch.py --routes 40     # the same kind of roads, fewer of them

Roads (invented, :mod:`benchmarks._network`): winding roads of 1-5 km with a point every 5 m,
each with its own posted speed and friction coefficient, planned with the default limits (a jerk
bound: the convex solver) at 1 m stations, the curves layer judged on the planned speeds.

* **in-process:** :func:`curvespeed.batch.run_route` called on every road one after another in
  this process (after one warm-up road): the task as a worker runs it (the plan, then the
  outputs' bytes, their hashes, the manifest and the curves' features, which the task makes so
  that the main process only writes them), with no cluster and no files written. Its median is
  the per-road baseline.
* **1 worker, 2 workers:** ``run_batch`` on a ``LocalCluster`` of that many single-thread worker
  processes, writing every output (profiles, sidecars, manifests, summary, curves layers). Each
  worker imports the numerics before the clock starts; the cluster's start is shown apart.
* **scaling efficiency:** roads/s on 2 workers over twice roads/s on 1 worker (target >= 85 %).
* **overhead per road:** ``wall time / roads`` on one worker minus the in-process mean, over
  the in-process mean (target <= 10 %); and the same in CPU time, counting the worker's and
  this process's (scheduler, client, writing the outputs) CPU seconds, which a machine shared
  with other jobs disturbs less than wall time. ``task s`` is the task's own wall time in the
  worker; ``of it main`` the CPU this process spent per road.
* **peak MB per worker:** the largest resident set size of any worker process.

The machine is shared: rerun when other jobs were busy (the in-process row shows how noisy it was).
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


def _specs(path):
    from curvespeed.io.network import FieldMap, iter_specs

    fields = FieldMap(id_field="road_id", speed_field="speed_kmh", friction_field="friction")
    return iter_specs([path], fields)


def _settings():
    from curvespeed.batch import BatchSettings
    from curvespeed.limits import DEFAULT_LIMITS

    return BatchSettings("plan", DEFAULT_LIMITS)


def in_process(path) -> tuple[list[float], list[float]]:
    """Wall and CPU seconds of each road but the first (which also pays the imports)."""
    from curvespeed.batch import run_route
    from curvespeed.batch.task import input_digest

    settings = _settings()
    wall, cpu = [], []
    for i, spec in enumerate(_specs(path)):
        digest = input_digest(spec, settings)
        t0, c0 = time.perf_counter(), time.process_time()
        record = run_route(spec, settings, digest)
        if i:
            wall.append(time.perf_counter() - t0)
            cpu.append(time.process_time() - c0)
        assert record.ok, record.message
    return wall, cpu


def _warm_up(spec, settings):
    """One road on every worker before the clock starts: imports and first-call set-up, as the
    in-process baseline leaves out its first road."""
    from curvespeed.batch import run_route

    return run_route(spec, settings, "warm-up").ok


def _peak_mb():
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _cpu_s():
    import resource

    use = resource.getrusage(resource.RUSAGE_SELF)
    return use.ru_utime + use.ru_stime


def on_cluster(path, workers: int, outdir: Path) -> dict:
    from curvespeed.batch import BatchStore, run_batch
    from curvespeed.batch.cluster import start_local_cluster

    t0 = time.perf_counter()
    cluster, client = start_local_cluster(workers)      # the command line's local cluster
    assert all(client.run(_warm_up, next(iter(_specs(path))), _settings()).values())
    start_s = time.perf_counter() - t0
    try:
        store = BatchStore(outdir, "plan")
        store.open()
        worker0, main0 = sum(client.run(_cpu_s).values()), time.process_time()
        outcome = run_batch(_specs(path), _settings(), store, client)
        main_cpu = time.process_time() - main0
        worker_cpu = sum(client.run(_cpu_s).values()) - worker0
        peak = max(client.run(_peak_mb).values())
    finally:
        client.close()
        cluster.close()
    assert outcome.failed == 0, outcome.failures
    return {"workers": workers, "roads": outcome.total, "wall_s": outcome.elapsed_s,
            "rate": outcome.total / outcome.elapsed_s, "start_s": start_s, "peak_mb": peak,
            "task_s": outcome.compute_s / outcome.total,
            "cpu_per_road_s": (worker_cpu + main_cpu) / outcome.total,
            "main_cpu_per_road_s": main_cpu / outcome.total}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--routes", type=int, default=1000, help="roads in the network")
    args = parser.parse_args()
    from benchmarks._network import feature, invented_roads, write_geojson

    with tempfile.TemporaryDirectory() as tmp:
        roads = invented_roads(args.routes, 1.0, 5.0)
        km = sum(float(_length_km(r)) for r in roads)
        net = write_geojson(Path(tmp) / "network.geojson", [feature(r) for r in roads])
        print(f"  {args.routes} invented roads, {km:.0f} km", file=sys.stderr)
        base, base_cpu = in_process(net)
        print("  done: in-process", file=sys.stderr)
        rows = []
        for workers in (1, 2):
            rows.append(on_cluster(net, workers, Path(tmp) / f"out{workers}"))
            print(f"  done: {workers} worker(s)", file=sys.stderr)
    mean, mean_cpu = statistics.fmean(base), statistics.fmean(base_cpu)
    one, two = rows
    print(f"\nmachine: {os.cpu_count()} cores; python {sys.version.split()[0]}; "
          f"{args.routes} roads, {km:.0f} km")
    print(f"in-process, per road: median {statistics.median(base):.3f} s, mean {mean:.3f} s "
          f"(min {min(base):.3f}, max {max(base):.3f}); CPU mean {mean_cpu:.3f} s")
    print(f"{'workers':>8} {'roads/s':>8} {'wall s':>8} {'task s':>7} {'CPU s/road':>11} "
          f"{'of it main':>11} {'start s':>8} {'peak MB/worker':>15}")
    for r in rows:
        print(f"{r['workers']:>8} {r['rate']:>8.2f} {r['wall_s']:>8.1f} {r['task_s']:>7.3f} "
              f"{r['cpu_per_road_s']:>11.3f} {r['main_cpu_per_road_s']:>11.3f} "
              f"{r['start_s']:>8.1f} {r['peak_mb']:>15.0f}")
    efficiency = two["rate"] / (2 * one["rate"])
    overhead = (one["wall_s"] / one["roads"] - mean) / mean
    print(f"scaling efficiency 1 -> 2 workers: {100 * efficiency:.0f} % (target >= 85 %)")
    cpu_overhead = (one["cpu_per_road_s"] - mean_cpu) / mean_cpu
    print(f"batch overhead per road on 1 worker: {100 * overhead:+.1f} % of the in-process "
          f"road's wall time, {100 * cpu_overhead:+.1f} % of its CPU time, counting every "
          "process of the batch (target <= 10 %)")


def _length_km(road) -> float:
    import numpy as np

    from curvespeed.geodesy import LocalProjection

    lon, lat = road["lonlat"][:, 0], road["lonlat"][:, 1]
    x, y = LocalProjection(float(lat[0]), float(lon[0])).to_metres(lat, lon)
    return float(np.hypot(np.diff(x), np.diff(y)).sum()) / 1000.0


if __name__ == "__main__":
    main()
