"""The local cluster a batch starts when no scheduler is given (the command line's edge).

:func:`run_batch <curvespeed.batch.runner.run_batch>` takes a client and never makes one; the
command line (and the benchmark) call :func:`start_local_cluster` to get the same shape: one
single-thread worker process per core, the allocator settings of :data:`WORKER_ENVIRON` and
Dask's own bookkeeping slowed to :data:`SERVER_CLOCKS`.
"""

from __future__ import annotations

#: Environment of each worker process, on top of Dask's own (which sets the BLAS thread counts
#: to 1 and ``MALLOC_TRIM_THRESHOLD_`` to 64 KiB). A road's fit and plan allocate and free many
#: arrays of 0.1-10 MB; with glibc's defaults (or Dask's trim threshold) each one is mapped and
#: unmapped afresh, and the page faults cost about 0.1 s of system time per road of 1-5 km
#: (measured: 100 times fewer minor faults, and 0.7 s less system time over 8 roads, with these
#: settings). Freed memory up to 64 MiB per worker stays with the worker for the next road.
WORKER_ENVIRON = {"MALLOC_MMAP_THRESHOLD_": "33554432", "MALLOC_TRIM_THRESHOLD_": "67108864"}


#: Dask's statistical profiler samples every worker thread's stack every 10 ms (for its
#: dashboard, which a batch does not open); off, as one of the costs of a task over the same
#: road planned in process.
WORKER_PROFILER = False


#: How often each Dask server wakes for its own bookkeeping: the scheduler and the nannies (in
#: this process) and every worker measure their event loop's delay (``tick``, Dask's default
#: every 20 ms) and sample the machine's CPU, memory, disk and network counters
#: (``system-monitor``, every 500 ms), both for Dask's dashboard, which a batch does not open;
#: and each nanny and worker reads the worker's memory use (``memory.monitor-interval``, every
#: 100 ms) to pause or end a worker near its memory limit. At the defaults an idle cluster of
#: one worker took 36 ms of this process's CPU and 26 ms of the worker's per second; with these,
#: 7 and 4 ms (measured over 20 s idle): CPU the roads and the writing of their outputs get
#: back. A loop blocked longer than Dask's limit (3 s) is still reported, and a worker's memory
#: is still read twice a second (a road's memory grows over its whole plan, which takes longer).
SERVER_CLOCKS = {"distributed.admin.tick.interval": "500ms",
                 "distributed.admin.system-monitor.interval": "10s",
                 "distributed.worker.memory.monitor-interval": "500ms"}


def start_local_cluster(n_workers: int | None = None):
    """A ``LocalCluster`` of ``n_workers`` single-thread processes (default: one per core) and
    its ``Client``; the caller closes both."""
    import dask
    from distributed import Client, LocalCluster

    environ = {**dask.config.get("distributed.nanny.pre-spawn-environ", {}), **WORKER_ENVIRON}
    workers = {"distributed.worker.profile.enabled": WORKER_PROFILER, **SERVER_CLOCKS}
    with dask.config.set({"distributed.nanny.pre-spawn-environ": environ, **workers}):
        # the workers' settings also given to each nanny as its own: a worker the nanny starts
        # again (after it died) gets them too, not Dask's defaults
        cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                               dashboard_address=None, silence_logs=40,
                               config=workers)
    return cluster, Client(cluster)

