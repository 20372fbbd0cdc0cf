"""A primal-dual interior-point method for the convex solver's QPs, built on their band structure.

Each QP of the sequential-convex loop (:mod:`.convex_qp`) is ``min x'Px/2 + q'x`` subject to
``lo <= Ax <= up`` where every row of ``A`` touches at most three neighbouring stations (bounds:
one, acceleration chords: two, jerk and lateral-jerk rows: three) and ``P`` is tridiagonal, so
the normal matrix ``P + A'DA`` of an interior-point step is banded (bandwidth 2 in station
order). This module solves it with Mehrotra's predictor-corrector method: per iteration the
normal matrix is formed straight into banded storage in one pass over the rows, factored once
by a banded Cholesky factorisation and used for both the predictor and the corrector step. The
iterations run in a small compiled kernel (``_banded_ipm.c``, built by ``pip install``); this
module scales the problem, picks the starting point, checks the answer and maps the outcome to
:class:`~curvespeed.solvers.SolveStatus`.

Contract (the same as :func:`.clarabel_qp.solve_qp_clarabel`): ``(x, status, iterations)``.
``OPTIMAL`` only when the primal and dual residuals are within ``eps`` of the problem's scale and
the duality gap is within ``gap_abs`` (absolute) or ``eps`` (relative) -- the kernel's claim is
checked again here on the rows as given. ``INFEASIBLE`` when the iterates carry a primal
infeasibility certificate (``y = z_lo - z_up`` with ``A'y ~ 0`` and ``lo'z_lo - up'z_up > 0``,
checked again here); ``FAILED`` otherwise (iteration limit, numerical trouble, rows that are not
banded in any order found, or no compiled kernel). The convex solver hands every answer short of
``OPTIMAL`` to Clarabel, which decides; the banded backend never has the last word on a failure.
"""

from __future__ import annotations

import numpy as np

from . import SolveStatus, qp_rows
from .band_order import bandwidth, reorder
from .qp_rows import RowQP

try:
    from . import _banded_ipm as _kernel
except ImportError:             # the package installs without a C compiler; Clarabel then
    _kernel = None              # solves every QP (see convex.py)
try:
    from . import _ipm_frame as _frame      # the objective's scaling, P's band, the near
except ImportError:                         # start and the answer's check, compiled; the
    _frame = None                           # numpy code below then does the same work

#: Is the compiled kernel present? Without it every call returns FAILED.
KERNEL_AVAILABLE = _kernel is not None

#: Widest band the method takes (after reordering): the factorisation costs n kd^2, so beyond
#: this a general sparse solver is the better tool.
MAX_BANDWIDTH = 32

#: Interior-point iterations before giving up (Clarabel's default cap is 200; these QPs take
#: 15-30, measured on the benchmark roads).
MAX_ITERATIONS = 100

#: Starting slacks are the distances from the centre to each side plus this margin (the rows
#: being scaled to unit largest coefficient, and the variables to the envelope, it is 1 % of a
#: typical row's range).
_SLACK_FLOOR = 1e-2

#: A start near the centre (``near_centre``, :func:`_start_near`): each slack at least this, and
#: the multipliers this fraction of the usual ``mu0``. Chosen on the QPs of receding-horizon
#: windows (three bundled routes, one and several sequential-convex iterations per call, with
#: and without a lateral jerk bound): on average 0-20 % fewer iterations than the shifted start
#: on each set, more on none; 1e-4 and 1e-3 or a fraction of 0.03 gained less on some of them.
#: Where the centre is far from the answer it costs: on whole routes' first QPs (centred on the
#: envelope) 1.6-3 times the iterations, about as many on their later ones, so whole routes keep
#: the shifted start, and so does a window started from the route's plan.
_NEAR_SLACK_FLOOR = 3e-4
_NEAR_MU_FRACTION = 0.1


def solve_qp_banded(P, q, A, lo, up, eps, centre=None, scale=None, refine=True, gap_abs=None):
    """Solve min x'Px/2 + q'x s.t. lo <= Ax <= up by the banded Mehrotra method (module doc).

    Parameters and return value are those of :func:`.clarabel_qp.solve_qp_clarabel`: with
    ``centre`` and ``scale`` the QP is solved in ``y = (x - centre) / scale``; ``gap_abs`` (in
    the objective's units) ends the solve once the duality gap is below it; ``refine`` is
    accepted for the same call shape and has no effect (the banded factorisation is exact to
    round-off, and the answer is judged on its residuals either way).
    """
    n = P.shape[0]
    if _kernel is None or n == 0:
        return np.zeros(n), SolveStatus.FAILED, 0
    return solve_row_qp(_row_qp(P, q, A, lo, up), eps, centre, scale, gap_abs=gap_abs)


def solve_row_qp(qp: RowQP, eps, centre=None, scale=None, gap_abs=None,
                 near_centre: bool = False):
    """:func:`solve_qp_banded` on a QP already in compressed rows (:class:`.qp_rows.RowQP`,
    as the convex solver assembles it): no scipy.sparse on the way. ``near_centre``: start as
    for a QP whose answer lies near ``centre`` (:func:`_start_near`)."""
    n = qp.n
    if _kernel is None or n == 0:
        return np.zeros(n), SolveStatus.FAILED, 0
    b = _prepare_rows(qp, centre, scale, near_centre)
    if b is None:                       # not banded in station order nor after reordering
        return np.zeros(n), SolveStatus.FAILED, 0
    if b.start is not None:             # made with the scaling (compiled)
        x, sl, su, zl, zu = b.start
    else:
        x, sl, su, zl, zu = _start_near(b) if near_centre else _start(b)
    info = np.zeros(8)
    gap = float(eps if gap_abs is None else gap_abs)
    code = _kernel.solve(n, b.kd, b.indptr, b.indices, b.data, b.lo, b.up, b.kind, b.Pb,
                         b.q, x, sl, su, zl, zu, float(eps), gap, MAX_ITERATIONS, info)
    iterations = int(info[4])
    status = _judge(code, b, x, zl, zu, eps, gap, info)
    x = x[b.inverse] if b.inverse is not None else x
    if centre is not None:
        x = centre + scale * x
    return x, status, iterations


class _Banded:
    """The QP as the kernel takes it: scaled, rows at unit largest coefficient, P in band
    storage, columns possibly reordered (``inverse`` maps back); ``rows`` is every stored
    entry's row."""

    __slots__ = ("kd", "indptr", "indices", "data", "lo", "up", "kind", "Pb", "q", "rows",
                 "inverse", "start")

    def __init__(self):
        self.start = None           # the near start, where the compiled frame made it

    @property
    def A(self):
        """The scaled rows as a scipy.sparse matrix (for checks; the solve never needs it)."""
        import scipy.sparse as sp

        return sp.csr_matrix((self.data, self.indices, self.indptr),
                             shape=(self.lo.size, self.Pb.shape[1]))


def _row_qp(P, q, A, lo, up) -> RowQP:
    """The arrays of scipy.sparse ``P`` and ``A`` (``A``'s rows in canonical form)."""
    import scipy.sparse as sp

    A = sp.csr_matrix(A, dtype=float)
    if not A.has_canonical_format:      # sorted columns in each row, no duplicates
        A = A.copy()
        A.sum_duplicates()
    Pc = sp.csr_matrix(P, dtype=float)
    Pc.sum_duplicates()
    Pc = Pc.tocoo()
    return RowQP(Pc.shape[0], A.indptr.astype(np.int64), A.indices.astype(np.int64), A.data,
                 np.asarray(lo, dtype=float), np.asarray(up, dtype=float),
                 Pc.row.astype(np.int64), Pc.col.astype(np.int64), Pc.data,
                 np.asarray(q, dtype=float))


def _prepare(P, q, A, lo, up, centre, scale):
    """:func:`_prepare_rows` on scipy.sparse ``P`` and ``A``."""
    return _prepare_rows(_row_qp(P, q, A, lo, up), centre, scale)


def _prepare_rows(qp: RowQP, centre, scale, near: bool = False):
    """Scale, check the band, reorder if needed, scale the rows; on the arrays alone (scipy's
    products cost more than the solve on a small QP). The rows' passes are compiled
    (``_qp_rows.c``, :func:`_prepare_compiled`) unless the band needs reordering; the numpy
    code below is their reference and gives the same numbers. ``near``: the compiled frame
    also makes :func:`_start_near`'s point (``start``)."""
    if qp_rows._compiled is not None:
        b = _prepare_compiled(qp, centre, scale, near)
        if b is not None:
            return b
    prow, pcol, pval = qp.prow, qp.pcol, qp.pval
    data, q, lo, up = qp.data, qp.q, qp.lo, qp.up
    m = qp.m
    counts = np.diff(qp.indptr)         # the same after a reordering of the columns
    rows = np.repeat(np.arange(m), counts)
    if centre is not None:              # y = (x - centre) / scale, as solve_qp_clarabel does
        q = scale * (q + qp.P_times(centre))
        shift = np.bincount(rows, data * centre[qp.indices], minlength=m)     # A centre
        lo, up = lo - shift, up - shift
        pval = pval * scale[prow] * scale[pcol]
        data = data * scale[qp.indices]
    indptr, indices = qp.indptr, qp.indices
    inverse = None
    kd = bandwidth(prow, pcol, indptr, indices)
    if kd > MAX_BANDWIDTH:
        prow, pcol, pval, indptr, indices, data, q, inverse = reorder(qp, prow, pcol, pval,
                                                                     data, q)
        kd = bandwidth(prow, pcol, indptr, indices)
        if kd > MAX_BANDWIDTH:
            return None
    has = counts > 0
    norm = _row_max_abs(data, indptr, counts)
    norm[norm == 0.0] = 1.0
    b = _Banded()
    b.kd = kd
    b.indptr = indptr.astype(np.int64)
    b.indices = indices.astype(np.int64)
    b.data = data / norm[rows]
    b.rows = rows
    b.lo, b.up = lo / norm, up / norm
    finite_lo, finite_up = np.isfinite(b.lo), np.isfinite(b.up)
    kind = np.where(finite_lo & finite_up, 3, np.where(finite_lo, 1, np.where(finite_up, 2, 0)))
    kind[finite_lo & finite_up & (b.lo == b.up)] = 4
    kind[~has] = 0                      # an empty row: judged below, never iterated on
    b.kind = kind.astype(np.int8)
    b.Pb = _P_band(prow, pcol, pval, qp.n, kd)
    b.q = q
    b.inverse = inverse
    return b


def _P_band(prow, pcol, pval, n, kd):
    """``P``'s lower band (``Pb[d, j] = P[j + d, j]``): each entry summed into its slot from
    zero in order (no slot twice: P's entries are distinct), by bincount rather than the much
    slower np.add.at."""
    lower = prow >= pcol
    slot = (prow[lower] - pcol[lower]) * n + pcol[lower]
    return np.bincount(slot, pval[lower], minlength=(kd + 1) * n).reshape(kd + 1, n)


def _prepare_compiled(qp: RowQP, centre, scale, near: bool = False):
    """:func:`_prepare_rows` with the rows' passes compiled (centring, scaling, unit largest
    coefficient, kinds and bandwidth in one pass; with ``_ipm_frame.c`` the objective's
    scaling, P's band and, ``near``, :func:`_start_near`'s point too); None where the band is
    too wide in station order (the numpy path then reorders the columns)."""
    centred = centre is not None
    if not centred:
        centre = scale = np.zeros(qp.n)             # not read
    m, nnz = qp.m, qp.indices.size
    b = _Banded()
    b.indptr = np.ascontiguousarray(qp.indptr, dtype=np.int64)
    b.indices = np.ascontiguousarray(qp.indices, dtype=np.int64)
    b.data, b.lo, b.up = np.empty(nnz), np.empty(m), np.empty(m)
    b.kind = np.empty(m, dtype=np.int8)
    f64 = [np.ascontiguousarray(a, dtype=float) for a in (qp.data, qp.lo, qp.up, centre, scale)]
    kd_rows = qp_rows._compiled.scale_rows(b.indptr, b.indices, *f64, b.data, b.lo, b.up,
                                           b.kind, centred)
    if _frame is not None:
        return _frame_compiled(qp, b, f64[3], f64[4], centred, near, kd_rows)
    prow, pcol, pval, q = qp.prow, qp.pcol, qp.pval, qp.q
    if centred:                         # y = (x - centre) / scale, as solve_qp_clarabel does
        q = scale * (q + qp.P_times(centre))
        pval = pval * scale[prow] * scale[pcol]
    kd = max(int(np.max(np.abs(prow - pcol))) if prow.size else 0, kd_rows)
    if kd > MAX_BANDWIDTH:
        return None
    b.kd = kd
    b.rows = None                       # every entry's row: not needed by the compiled checks
    b.Pb = _P_band(prow, pcol, pval, qp.n, kd)
    b.q = q
    b.inverse = None
    return b


def _frame_compiled(qp: RowQP, b: _Banded, centre, scale, centred: bool, near: bool,
                    kd_rows: int):
    """The rest of :func:`_prepare_compiled` in one compiled call (``_ipm_frame.c``): ``q``
    centred and scaled, P scaled into its band, and with ``near`` :func:`_start_near`'s point;
    the same numbers as the numpy code."""
    n, m = qp.n, qp.m
    q, band = np.empty(n), np.empty((MAX_BANDWIDTH + 1) * n)
    start = (np.zeros(n), *(np.empty(m) for _ in range(4)))
    i64 = [np.ascontiguousarray(a, dtype=np.int64) for a in (qp.prow, qp.pcol)]
    kd = _frame.frame(*i64, np.ascontiguousarray(qp.pval, dtype=float),
                      np.ascontiguousarray(qp.q, dtype=float), centre, scale, b.kind, b.lo,
                      b.up, q, band, *start[1:], centred, near, kd_rows, MAX_BANDWIDTH,
                      _NEAR_SLACK_FLOOR, _NEAR_MU_FRACTION)
    if kd < 0:
        return None
    b.kd = kd
    b.rows = None
    b.Pb = band[: (kd + 1) * n].reshape(kd + 1, n)
    b.q = q
    b.inverse = None
    b.start = start if near else None
    return b


def _row_max_abs(data, indptr, counts):
    """Each row's largest ``|entry|`` (0 for an empty row). Rows of at most three entries (the
    convex solver's) slot by slot, several times faster than ``np.maximum.reduceat``."""
    a = np.abs(data)
    width = int(counts.max(initial=0))
    if width > 3:
        norm = np.zeros(counts.size)
        has = counts > 0
        norm[has] = np.maximum.reduceat(a, indptr[:-1][has])
        return norm
    norm = np.zeros(counts.size)
    start, last = indptr[:-1], a.size - 1
    for j in range(width):
        np.maximum(norm, np.where(counts > j, a[np.minimum(start + j, last)], 0.0), out=norm)
    return norm


def _band_times(Pb, x):
    """P x for symmetric P in lower band storage (``Pb[d, j] = P[j + d, j]``)."""
    out = Pb[0] * x
    for d in range(1, Pb.shape[0]):
        out[d:] += Pb[d, :-d] * x[:-d]
        out[:-d] += Pb[d, :-d] * x[d:]
    return out


def _start(qp: _Banded):
    """Starting point: x at the centre (the current iterate of the sequential-convex loop),
    slacks its distances to each finite side shifted to be positive (Mehrotra's heuristic),
    multipliers ``mu0 / slack`` so every pair starts on the central path, with ``mu0`` the size of
    the objective's gradient (so the duals can balance it from the first step: with
    ``mu0 = 1`` the benchmark QPs took 40-60 iterations instead of 18-23). Compiled in
    ``_qp_rows.c`` where it is built (the numpy code below its reference)."""
    n = qp.Pb.shape[1]
    x = np.zeros(n)
    kind = qp.kind
    if qp_rows._compiled is not None:
        mu0 = max(1.0, float(np.max(np.abs(qp.q), initial=0.0)))
        sl, su, zl, zu = (np.empty(kind.size) for _ in range(4))
        qp_rows._compiled.start_point(kind, qp.lo, qp.up, mu0, _SLACK_FLOOR, sl, su, zl, zu)
        return x, sl, su, zl, zu
    with np.errstate(invalid="ignore"):
        sl = np.where((kind == 1) | (kind == 3), -qp.lo, np.inf)
        su = np.where((kind == 2) | (kind == 3), qp.up, np.inf)
    low = min(float(np.min(sl, initial=np.inf)), float(np.min(su, initial=np.inf)))
    shift = max(-1.5 * low, 0.0) if np.isfinite(low) else 0.0
    sl = np.where(np.isfinite(sl), sl + shift + _SLACK_FLOOR, 1.0)
    su = np.where(np.isfinite(su), su + shift + _SLACK_FLOOR, 1.0)
    mu0 = max(1.0, float(np.max(np.abs(qp.q), initial=0.0)))
    zl = np.where((kind == 1) | (kind == 3), mu0 / sl, 0.0)
    zu = np.where((kind == 2) | (kind == 3), mu0 / su, 0.0)
    return x, sl, su, zl, zu


def _start_near(qp: _Banded):
    """Starting point for a QP whose answer lies near its centre (a receding-horizon window's,
    centred on the previous window's answer moved to its stations): x at the centre, each
    slack its distance to its side pushed into the interior on its own (at least
    :data:`_NEAR_SLACK_FLOOR`; the shifted start moves every slack by the worst one's shortfall,
    which puts most rows far from where the answer has them), multipliers ``mu0 / slack`` with
    ``mu0`` a tenth of :func:`_start`'s (the centre being near the answer, less
    complementarity has to be taken out). Still a cold, strictly interior start: no multiplier
    is carried over from another QP."""
    kind = qp.kind
    lower, upper = (kind == 1) | (kind == 3), (kind == 2) | (kind == 3)
    with np.errstate(invalid="ignore"):
        sl = np.where(lower, np.maximum(-qp.lo, _NEAR_SLACK_FLOOR), 1.0)
        su = np.where(upper, np.maximum(qp.up, _NEAR_SLACK_FLOOR), 1.0)
    mu0 = _NEAR_MU_FRACTION * max(1.0, float(np.max(np.abs(qp.q), initial=0.0)))
    zl = np.where(lower, mu0 / sl, 0.0)
    zu = np.where(upper, mu0 / su, 0.0)
    return np.zeros(qp.Pb.shape[1]), sl, su, zl, zu


def _judge(code: int, qp: _Banded, x, zl, zu, eps: float, gap_abs: float, info) -> SolveStatus:
    """Map the kernel's outcome to ours, checking its claim (residuals, duality gap) here."""
    sums = _judge_sums(qp, x, zl, zu) if _frame is None else _frame.judge_sums(
        qp.indptr, qp.indices, qp.data, qp.lo, qp.up, qp.kind, qp.Pb, qp.q, x, zl, zu)
    finite, margin, aty_max, viol_max, dual_max, dual_sum, xPx, qx = sums
    if not finite:
        return SolveStatus.FAILED
    if code == 3:
        # certificate: lo'z_lo - up'z_up > 0 with A'y ~ 0 (row scaling leaves the ratio as is)
        if margin > 0 and aty_max <= 1e-8 * margin:
            return SolveStatus.INFEASIBLE
        return SolveStatus.FAILED
    if code != 0:
        return SolveStatus.FAILED
    primal_obj = 0.5 * xPx + qx
    dual_obj = -0.5 * xPx + margin
    gap = abs(primal_obj - dual_obj)
    # the kernel's scales (info[6], info[7]) are max(1, |b| + |x| + |s|) and
    # max(1, |q| + |Px| + |A'z|): the same tests Clarabel applies to its residuals
    if viol_max > eps * info[6]:
        return SolveStatus.FAILED
    if (dual_max <= eps * info[7]
            and (gap <= gap_abs or gap <= eps * max(1.0, min(abs(primal_obj), abs(dual_obj))))):
        return SolveStatus.OPTIMAL
    # A dual residual stalled above its tolerance on a degenerate optimum, with the answer as
    # good as asked. With L(x, z) = f(x) - zl'(Ax - lo) + zu'(Ax - up) and r = grad_x L (the
    # residual `dual`): f(x*) >= L(x*, z) >= L(x, z) + r'(x* - x) for any feasible x* (z >= 0;
    # L convex in x), and f(x) - L(x, z) = (primal_obj - dual_obj) - r'x, so
    # f(x) - f(x*) <= gap + |r|_1 |x*|_inf, and x* lies in the variables' box.
    if gap + dual_sum * _box_extent(qp) <= gap_abs:
        return SolveStatus.OPTIMAL
    return SolveStatus.FAILED


def _judge_sums(qp: _Banded, x, zl, zu):
    """What :func:`_judge` decides on: ``(finite, margin, max |A'y|, max violation,
    max |dual|, sum |dual|, x'Px, q'x)``, with ``y = z_lo - z_up`` (``z_lo`` on an equality
    row, 0 on an empty one) and ``margin = lo'z_lo - up'z_up``. Compiled in ``_ipm_frame.c``
    where it is built (the same quantities, its sums in index order)."""
    if not np.all(np.isfinite(x)):
        return (False,) + (np.nan,) * 7
    y = np.where(qp.kind == 4, zl, np.where(qp.kind == 0, 0.0, zl - zu))
    r, Aty = _products(qp, x, y)
    with np.errstate(invalid="ignore"):             # an infinite side times its zero multiplier
        lo_part = np.where((qp.kind == 1) | (qp.kind >= 3), qp.lo * zl, 0.0)
        up_part = np.where((qp.kind == 2) | (qp.kind == 3), qp.up * zu, 0.0)
    margin = float(np.sum(lo_part) - np.sum(up_part))
    # an empty row's sides are checked too (0 must lie between them). With x finite, r is
    # finite and each difference finite or -inf (an absent side), which the maximum from 0
    # ignores
    viol = np.maximum(qp.lo - r, r - qp.up)
    Px = _band_times(qp.Pb, x)
    dual = Px + qp.q - Aty
    return (True, margin, float(np.max(np.abs(Aty), initial=0.0)),
            float(np.max(viol, initial=0.0)), float(np.max(np.abs(dual), initial=0.0)),
            float(np.sum(np.abs(dual))), float(x @ Px), float(qp.q @ x))


def _products(qp: _Banded, x, y):
    """``A x`` and ``A'y`` on the scaled rows, each sum from zero in the order of the entries
    (compiled in ``_qp_rows.c``; numpy's bincount the reference)."""
    if qp_rows._compiled is not None:
        ax, aty = np.empty(qp.lo.size), np.empty(x.size)
        qp_rows._compiled.row_products(qp.indptr, qp.indices, qp.data,
                                       np.ascontiguousarray(x, dtype=float),
                                       np.ascontiguousarray(y, dtype=float), ax, aty)
        return ax, aty
    rows = qp.rows if qp.rows is not None else np.repeat(np.arange(qp.lo.size),
                                                         np.diff(qp.indptr))
    return (np.bincount(rows, qp.data * x[qp.indices], minlength=qp.lo.size),
            np.bincount(qp.indices, qp.data * y[rows], minlength=x.size))


def _box_extent(qp: _Banded) -> float:
    """How far from 0 any point of the variables' box reaches (each variable's box: the
    intersection of its rows with one entry); infinite when a variable has no finite box. In
    the scaled, possibly reordered problem the kernel solves, as the kernel computes it
    (compiled in ``_qp_rows.c`` where it is built, the numpy code below its reference)."""
    if qp_rows._compiled is not None:
        return qp_rows._compiled.box_extent(qp.indptr, qp.indices, qp.data, qp.lo, qp.up,
                                            qp.kind, qp.Pb.shape[1])
    rows = np.flatnonzero(np.diff(qp.indptr) == 1)
    k = qp.indptr[rows]
    rows, k = rows[qp.data[k] != 0.0], k[qp.data[k] != 0.0]
    a, kind = qp.data[k], qp.kind[rows]
    has_lo, has_up = (kind == 1) | (kind >= 3), (kind == 2) | (kind == 3) | (kind == 4)
    with np.errstate(invalid="ignore", divide="ignore"):
        from_lo = qp.lo[rows] / a
        from_up = np.where(kind == 4, qp.lo[rows], qp.up[rows]) / a
    # lo <= a x <= up: x >= lo / a and x <= up / a, the sides swapped where a < 0
    low = np.where(a > 0, np.where(has_lo, from_lo, -np.inf), np.where(has_up, from_up, -np.inf))
    high = np.where(a > 0, np.where(has_up, from_up, np.inf), np.where(has_lo, from_lo, np.inf))
    n = qp.Pb.shape[1]
    box_lo, box_hi = np.full(n, -np.inf), np.full(n, np.inf)
    np.maximum.at(box_lo, qp.indices[k], low)
    np.minimum.at(box_hi, qp.indices[k], high)
    return float(np.max(np.maximum(np.abs(box_lo), np.abs(box_hi)), initial=0.0))
