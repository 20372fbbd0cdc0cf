"""The local cluster a batch starts when no scheduler is given (the command line's edge).

:func:`run_batch <curvespeed.batch.runner.run_batch>` takes a client and never makes one; the
command line (and the benchmark) call :func:`start_local_cluster` to get the same shape: one
single-thread worker process per core, and the allocator settings of :data:`WORKER_ENVIRON`.
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


def start_local_cluster(n_workers: int | None = None):
    """A ``LocalCluster`` of ``n_workers`` single-thread processes (default: one per core) and
    its ``Client``; the caller closes both."""
    import dask
    from distributed import Client, LocalCluster

    environ = {**dask.config.get("distributed.nanny.pre-spawn-environ", {}), **WORKER_ENVIRON}
    with dask.config.set({"distributed.nanny.pre-spawn-environ": environ,
                          "distributed.worker.profile.enabled": WORKER_PROFILER}):
        cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True,
                               dashboard_address=None, silence_logs=40)
    return cluster, Client(cluster)
