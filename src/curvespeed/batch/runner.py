"""Run a batch: stream the roads, one task each, on a Dask client or in this process.

The caller makes the client (the command line: a local cluster, or ``--scheduler``); this module
never creates one. Roads are read as they are needed: at most ``window`` tasks are in flight, so
a network of any size is never held in memory. Results are written as they arrive; a failed road
is a record, never the end of the batch. Dask runs a task again elsewhere when its worker is lost
(up to ``distributed.scheduler.allowed-failures`` times); a road whose task still cannot finish
is recorded as a failure with the reason.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field

from .store import BatchStore, LayerSpool, safe_id
from .task import BatchSettings, RouteRecord, failure, input_digest, run_route

#: Tasks in flight per worker thread: enough to keep every worker busy while results are
#: written, few enough that the inputs waiting in the scheduler stay small.
TASKS_PER_WORKER = 4


@dataclass
class BatchOutcome:
    """How a batch went.

    Attributes
    ----------
    total : int
        Roads read.
    computed, reused, failed : int
        Roads planned (or checked) now, taken from an earlier run, and not processed.
    violations : int
        Processed roads whose check found a violation (planned speeds when planning).
    elapsed_s : float
        Wall time, seconds.
    compute_s : float
        Sum of the computed tasks' own wall times, seconds.
    failures : list of dict
        route_id, source, error, message of each failed road.
    """

    total: int = 0
    computed: int = 0
    reused: int = 0
    failed: int = 0
    violations: int = 0
    elapsed_s: float = 0.0
    compute_s: float = 0.0
    failures: list = field(default_factory=list)


Progress = Callable[[BatchOutcome], None]


def run_batch(specs: Iterable, settings: BatchSettings, store: BatchStore, client=None,
              progress: Progress | None = None, resume: bool = True,
              window: int | None = None) -> BatchOutcome:
    """Plan or check every road of ``specs`` and write the outputs to ``store``.

    Parameters
    ----------
    specs : iterable of RouteSpec
        The roads, in input order (:func:`curvespeed.io.network.iter_specs`).
    settings : BatchSettings
        What every road is planned or checked with.
    store : BatchStore
        The output folder, opened.
    client : distributed.Client or None
        Where the tasks run; None runs them one after another in this process.
    progress : callable or None
        Called with the running :class:`BatchOutcome` after every road.
    resume : bool
        Reuse roads whose outputs match their inputs (False: compute every road again).
    window : int or None
        Tasks in flight at most (default :data:`TASKS_PER_WORKER` per worker thread).
    """
    with LayerSpool(store.outdir) as spool:
        return _run(specs, settings, store, spool, _Submitter(client, settings, window),
                    progress, resume)


def _run(specs, settings, store, spool, submit, progress, resume) -> BatchOutcome:
    outcome = BatchOutcome()
    start = time.perf_counter()
    summaries: dict[int, dict] = {}
    failures: dict[int, dict] = {}
    seen: dict[str, str] = {}

    def finish(order: int, record: RouteRecord, computed: bool) -> None:
        if computed:
            store.save(record)
            outcome.compute_s += record.compute_s
        if record.ok:
            outcome.computed += computed
            outcome.reused += not computed
            outcome.violations += record.passed is False
            summaries[order] = {"route_id": record.route_id, "source": record.source,
                                **record.summary}
            spool.add(order, record.layer)
        else:
            outcome.failed += 1
            failures[order] = {"route_id": record.route_id, "source": record.source,
                               "error": record.error_type, "message": record.message}
        outcome.elapsed_s = time.perf_counter() - start
        if progress is not None:
            progress(outcome)

    for spec in specs:
        outcome.total += 1
        spec = dataclasses.replace(spec, route_id=safe_id(spec.route_id))
        digest = input_digest(spec, settings)
        if spec.route_id in seen:
            finish(spec.order, failure(spec, digest, "InputError",
                                       f"route id '{spec.route_id}' is also the id of "
                                       f"{seen[spec.route_id]}; give every road its own id "
                                       "(--id-field)"), True)
            continue
        seen[spec.route_id] = spec.source
        if spec.problem:              # found unusable when read: recorded here, not sent out
            finish(spec.order, run_route(spec, settings, digest), True)
            continue
        reused = store.reusable(spec.route_id, digest) if resume else None
        if reused is not None:
            finish(spec.order, reused, False)
            continue
        for order, record in submit(spec, digest):
            finish(order, record, True)
    for order, record in submit.drain():
        finish(order, record, True)
    outcome.failures = [failures[k] for k in sorted(failures)]
    ordered = sorted(summaries)
    store.write_aggregates([summaries[k] for k in ordered], outcome.failures,
                           spool.pieces(ordered))
    outcome.elapsed_s = time.perf_counter() - start
    return outcome


class _Submitter:
    """Keeps at most ``window`` tasks in flight; yields ``(order, record)`` as tasks finish."""

    def __init__(self, client, settings: BatchSettings, window: int | None):
        self.client = client
        self.settings = settings
        if client is None:
            return
        from distributed import as_completed

        self.fixed = window
        self.window = window or TASKS_PER_WORKER
        self.submitted = 0
        self.pending = as_completed()
        self.specs: dict = {}

    def __call__(self, spec, digest: str):
        if self.client is None:
            yield spec.order, run_route(spec, self.settings, digest)
            return
        if not self.fixed and self.submitted % 64 == 0:      # workers may join or leave
            threads = sum(self.client.nthreads().values())
            self.window = TASKS_PER_WORKER * max(threads, 1)
        # the settings travel with each task (a few kB): nothing a lost worker could take along
        future = self.client.submit(run_route, spec, self.settings, digest, pure=False,
                                    key=f"road-{spec.order}-{digest[:12]}")
        self.submitted += 1
        self.specs[future.key] = (spec, digest)
        self.pending.add(future)
        while self.pending.count() >= self.window:
            yield self._next()

    def drain(self):
        if self.client is None:
            return
        while self.pending.count():
            yield self._next()

    def _next(self):
        future = next(self.pending)
        spec, digest = self.specs.pop(future.key)
        try:
            record = future.result()
        except Exception as exc:      # the task itself was lost (e.g. its workers kept dying)
            record = failure(spec, digest, type(exc).__name__,
                             f"the task could not finish on the cluster ({exc}); run the "
                             "batch again to retry this road")
        future.release()
        return spec.order, record
