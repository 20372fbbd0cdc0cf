"""The batches of one sequential-convex iteration's QP: independent blocks grouped into QPs of
about :data:`_BATCH_VARIABLES` variables (the same QPs for any number of threads), cut out of
the iteration's QP, solved by the chosen backend with its retries and hand-overs, on a thread
pool or in the caller's thread. :mod:`.convex` runs the iterations.
"""

from __future__ import annotations

import os

import numpy as np

from . import QPBackend, SolveStatus
from .banded_ipm import KERNEL_AVAILABLE, solve_qp_banded, solve_row_qp
from .clarabel_qp import solve_qp_clarabel
from .qp_rows import RowQP


def _submit_batches(qp, batches, blocks, row_block, free_idx, b_hat, b_env, gap_abs, options,
                    pool):
    """Cut each batch's QP out of the iteration's ``qp`` and hand it to ``pool`` (or solve it
    here without one); returns ``(batch, cols, glob, job)`` in batch order."""
    # each batch's rows, in their order, from one stable sort by batch (a search of every row
    # per batch grew with the square of the route's length); stable, so the same order
    # whatever the integer type: small integers sort by radix, in linear time
    batch_of = np.full(len(blocks), -1)
    for j, batch in enumerate(batches):
        batch_of[batch] = j
    row_batch = batch_of[row_block]
    if len(batches) == 1 and bool(np.all(row_batch == 0)):
        # every row in the one batch (a receding-horizon window): the stable sort's order is
        # the rows' own
        by_batch, cuts = np.arange(row_batch.size), np.array([0, row_batch.size])
    else:
        by_batch = np.argsort(row_batch.astype(np.int16) if len(batches) < 2 ** 15
                              else row_batch, kind="stable")
        cuts = np.searchsorted(row_batch[by_batch], np.arange(len(batches) + 1))
    threaded = pool is not None and len(batches) > 1
    jobs = []
    for j, batch in enumerate(batches):
        cols = np.concatenate([blocks[k] for k in batch])
        rows = by_batch[cuts[j]:cuts[j + 1]]
        # a batch of every variable in order and every row (a receding-horizon window) is the
        # QP itself, its rows in their order (one stable sort of a single batch): nothing to
        # cut out. (A loop's blocks need not come in order.)
        whole = (cols.size == qp.n and rows.size == qp.m
                 and bool(np.all(cols[1:] > cols[:-1])))
        sub = qp if whole else qp.take(cols, rows)
        glob = free_idx[cols]
        centre, scale = b_hat[glob], np.maximum(b_env[glob], 1.0)
        args = (sub, options.qp_tolerance, gap_abs, centre, scale, options.qp_backend,
                options.qp_start_near_centre)
        job = pool.submit(_solve_batch, *args) if threaded else _Done(_solve_batch(*args))
        jobs.append((batch, cols, glob, job))
    return jobs


class _Done:
    """A batch solved in the caller's thread, with the interface of a finished future."""

    def __init__(self, value):
        self.value = value

    def result(self):
        return self.value


#: Size of a batch of independent blocks solved in one QP (variables): the route's free stations
#: are cut into about this many per batch, whatever the number of threads, so each QP -- and
#: therefore the answer, to the byte -- is the same for any number of threads; the threads only
#: share the batches out. Small enough that a few cores get balanced work on a 10 km route
#: (about 7 batches), large enough that the fixed cost of a solver call stays small (measured: the same solve
#: times as the thread-dependent batching it replaces, within the machine's noise).
_BATCH_VARIABLES = 1_000


def _batches(block_ids, blocks):
    """Group block ids, in route order, into batches of about ``_BATCH_VARIABLES`` variables.

    The number of batches follows from the variables alone (never from the number of threads);
    cuts fall at the block boundaries nearest to equal shares.
    """
    ids = list(block_ids)
    if not ids:
        return []
    sizes = np.array([blocks[k].size for k in ids], dtype=float)
    total = float(sizes.sum())
    n = max(1, round(total / _BATCH_VARIABLES))
    ends = np.cumsum(sizes)
    cuts = sorted({int(np.argmin(np.abs(ends - total * j / n))) + 1 for j in range(1, n)})
    out, start = [], 0
    for c in cuts + [len(ids)]:
        if c > start:
            out.append(ids[start:c])
            start = c
    return out


def _solve_batch(qp, tolerance: float, gap_abs: float, centre, scale,
                 backend: QPBackend = QPBackend.CLARABEL, near_centre: bool = False):
    """Solve one batch's QP, retrying before an answer is accepted; returns (x, status,
    interior-point iterations, notes on retries and fallbacks). ``near_centre``: the banded
    method's start for a QP whose answer lies near ``centre`` (:class:`ConvexOptions`).

    With the banded backend an optimal answer is taken as it is; anything else (iteration
    limit, numerical trouble, an infeasibility certificate, no compiled kernel) goes to
    Clarabel, which decides, and the hand-over is noted. ``qp``: a :class:`.qp_rows.RowQP`,
    or ``(P, q, A, lo, up)`` with scipy.sparse ``P`` and ``A``."""
    notes = []
    its = 0
    if backend is QPBackend.BANDED:
        if isinstance(qp, RowQP):
            x, st, its = solve_row_qp(qp, tolerance, centre, scale, gap_abs=gap_abs,
                                      near_centre=near_centre)
        else:
            x, st, its = _solve_sparse_banded(qp, tolerance, centre, scale, gap_abs=gap_abs)
        if st is SolveStatus.OPTIMAL:
            return x, st, its, notes
        notes.append(f"the banded QP solver returned {st.value} after {its} iterations"
                     + ("" if KERNEL_AVAILABLE else " (its compiled kernel is "
                        "missing: reinstall with a C compiler)")
                     + "; solved with Clarabel")
    sub = qp.to_sparse() if isinstance(qp, RowQP) else qp
    x, st, more = solve_qp_clarabel(*sub, tolerance, centre, scale, refine=False,
                                    gap_abs=gap_abs)
    its += more
    if st is not SolveStatus.OPTIMAL:
        # the fast setting's answer is not trusted: solve again with Clarabel's defaults
        x, st, more = solve_qp_clarabel(*sub, tolerance, centre, scale)
        its += more
    if st is SolveStatus.OPTIMAL_INACCURATE:
        # retry once with looser tolerances before accepting an inaccurate answer
        x2, st2, more = solve_qp_clarabel(*sub, 100 * tolerance, centre, scale)
        its += more
        notes.append(f"a QP was inaccurate at tolerance {tolerance:g}; re-solved at "
                     f"{100 * tolerance:g} ({st2.value})")
        if st2 is SolveStatus.OPTIMAL:
            x, st = x2, st2
    return x, st, its, notes


def _solve_sparse_banded(sub, tolerance, centre, scale, gap_abs):
    return solve_qp_banded(*sub, tolerance, centre, scale, gap_abs=gap_abs)


def _worker_count(requested: int | None) -> int:
    """Threads for the QP batches: ``requested``, or the processor cores this process may use."""
    if requested is not None:
        return max(1, int(requested))
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:      # not on every platform
        return max(1, os.cpu_count() or 1)
