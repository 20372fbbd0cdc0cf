"""One sequential-convex iteration's QP assembled in one compiled call (``_window_qp.c``), with
its independent blocks (:func:`.qp_rows.interval_blocks`, found in the same call), where
the QP takes the common shape of a receding-horizon window's: an open stretch with a jerk
bound, without a power limit, a lateral jerk bound or a comfort term.

The numbers are :meth:`.convex_qp.QPBuilder.reduced`'s to the last bit (its numpy code is the
reference, and the tests compare the two); the call only spares the few hundred numpy calls
that assembling a small QP row block by row block costs. Every other QP (whole routes too,
where the numpy passes over long arrays cost little per row) goes the numpy way.
"""

from __future__ import annotations

import numpy as np

from .corner_rows import SEGMENTS
from .qp_rows import RowQP
from .qp_time import B_FLOOR

try:
    from . import _window_qp as _compiled
except ImportError:             # the package installs without a C compiler; the numpy
    _compiled = None            # assembly then does the same work


def applies(builder) -> bool:
    """Whether :func:`reduced` takes this builder's QPs (module docstring)."""
    p, lay = builder.p, builder.lay
    return (_compiled is not None and not p.closed and lay.jerk and lay.nv >= 2
            and builder.opt.comfort_weight == 0 and not builder.has_power
            and p.limits.max_lateral_jerk_mps3 is None)


def reduced(builder, b_hat: np.ndarray):
    """:meth:`.convex_qp.QPBuilder.reduced` compiled: ``(RowQP, scale)``."""
    p, lay, opt = builder.p, builder.lay, builder.opt
    lim = p.limits
    nv = lay.nv
    t = p.jerk_terms
    nt = t.node.size
    brake_b, reserve = 0.0, np.zeros((0, 2))
    if p.end_reserve is not None:
        brake_b, pairs = p.end_reserve
        reserve = np.array(pairs, dtype=float).reshape(-1, 2)
    pairs, use = builder.corners
    corner_first = np.ascontiguousarray(pairs[:, 0], dtype=np.int64)
    corner_use = np.ascontiguousarray(use, dtype=bool)
    corner_hi, corner_lo = (np.ascontiguousarray(c, dtype=float) for c in builder.corner_caps)
    nc = corner_first.size
    # bounds, accel chords, jerk rows, the end reserve, corner rows (at most 4 blocks of
    # len(SEGMENTS) rows a pair of steps, three entries each)
    per_pair = 4 * len(SEGMENTS)
    rows = nv + 8 * (nv - 1) + 2 * nt + reserve.shape[0] + per_pair * nc
    entries = nv + 16 * (nv - 1) + 6 * nt + 2 * reserve.shape[0] + 3 * per_pair * nc
    indptr, indices = np.empty(rows + 1, dtype=np.int64), np.empty(entries, dtype=np.int64)
    data, lo, up = np.empty(entries), np.empty(rows), np.empty(rows)
    prow, pcol = np.empty(3 * nv, dtype=np.int64), np.empty(3 * nv, dtype=np.int64)
    pval, q, starts = np.empty(3 * nv), np.empty(nv), np.empty(nv + 1, dtype=np.int64)
    f64 = _contiguous_f64
    m, nnz, n_obj, scale, n_starts = _compiled.assemble(
        *(f64(getattr(p, name)) for name in _NODE_FIELDS),
        np.ascontiguousarray(lay.fixed, dtype=bool), f64(lay.fixed_value), f64(b_hat),
        f64(builder.b_env[:nv]), f64(lay.time_coef), f64(lay.f_first), f64(lay.f_last),
        f64(lay.D_by_slot),
        *(np.ascontiguousarray(a, dtype=np.int64) for a in (t.node, t.prev, t.next)),
        f64(t.weights), f64(t.scale), f64(reserve),
        indptr, indices, data, lo, up, prow, pcol, pval, q, starts, corner_first, corner_use,
        corner_hi, corner_lo,
        (lim.gravity_mps2, lim.max_lateral_accel_mps2, lim.max_accel_mps2,
         lim.max_decel_mps2, lim.drag_per_b_1pm, lim.rolling_resistance_coefficient,
         p.ds, opt.margin, opt.chord_tolerance_mps2, B_FLOOR, lim.max_jerk_mps3,
         p.accel_start_mps2, p.accel_start_tolerance_mps2, float(brake_b)))
    n = int((~lay.fixed).sum())
    qp = RowQP(n, indptr[:m + 1], indices[:nnz], data[:nnz], lo[:m], up[:m],
               prow[:n_obj], pcol[:n_obj], pval[:n_obj], q[:n],
               block_starts=starts[:n_starts])
    return qp, scale


#: The per-node arrays :meth:`curvespeed.problem.SpeedProblem.accel_bounds` reads, in the
#: order the kernel takes them.
_NODE_FIELDS = ("kappa_abs", "cos_bank", "sin_bank", "cos_grade", "sin_grade", "mu_long",
                "mu_lat")


def _contiguous_f64(a) -> np.ndarray:
    return np.ascontiguousarray(a, dtype=float)

