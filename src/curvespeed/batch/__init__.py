"""Whole road networks: one task per road on a Dask cluster (or in this process), resumable.

Orchestration only; the physics is the single-route library's. The pieces:

* :mod:`~curvespeed.batch.task`: :class:`BatchSettings`, the task :func:`run_route` (a pure
  function: the same bytes serial or distributed) and its :class:`RouteRecord`;
* :mod:`~curvespeed.batch.work`: what the task does with a road (``plan`` or ``check``, through
  the same library calls as the single-route commands) and the road's curves;
* :mod:`~curvespeed.batch.store`: the output folder, per-road manifests (resume by content hash),
  the summary, failures and curves layers;
* :mod:`~curvespeed.batch.runner`: :func:`run_batch`, which streams the roads through a client it
  is given (it never makes one).

The roads themselves are read by :mod:`curvespeed.io.network`.
"""

from .runner import BatchOutcome, run_batch
from .store import BatchStore
from .task import BatchSettings, RouteRecord, run_route

__all__ = ["BatchOutcome", "BatchSettings", "BatchStore", "RouteRecord", "run_batch",
           "run_route"]
