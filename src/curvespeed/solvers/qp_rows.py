"""The sequential-convex QP as row tables: assembled, reduced and cut into batches without
scipy.sparse.

Every row of the convex solver's QP touches at most three stations, so a block of rows is held
as a table: ``cols`` (rows x 3, station indices, -1 where a slot is unused), ``vals`` (the
coefficients) and ``present`` (which slots hold an entry). :func:`canonical` sorts each row's
slots by station and sums repeated stations; :func:`reduce_rows` eliminates the fixed stations
(their terms move to the row's sides), drops the rows left with no free station or with no
finite side, and returns the free stations' rows in compressed-row arrays (``indptr``,
``indices``, ``data``), which both the banded interior-point kernel and scipy take as they are.

The arithmetic is the scipy.sparse assembly's, term by term and in the same order (sums of a
row's terms in increasing station order starting from zero), so the reduced QP is the same to
the last bit; ``tests/qp_reference.py`` keeps that assembly and the tests compare the two.
"""

from __future__ import annotations

import numpy as np

try:
    from . import _qp_rows as _compiled
except ImportError:             # the package installs without a C compiler; the numpy
    _compiled = None            # functions below then do the same work

#: Slots per row: a row touches at most three neighbouring stations.
WIDTH = 3


def canonical(cols, *vals):
    """Sort each row's slots by station (unused slots last) and sum slots naming the same
    station into the first of them (in slot order, as scipy's ``sum_duplicates`` does).

    Returns ``(cols, present, *vals)``: ``present`` marks the slots that hold an entry."""
    cols = np.asarray(cols, dtype=np.int64)
    vals = [np.asarray(v, dtype=float) for v in vals]
    w = cols.shape[1]
    present = cols >= 0
    if w == 1:
        return (cols, present, *vals)
    key = np.where(present, cols, np.iinfo(np.int64).max)
    step = key[:, 1:] - key[:, :-1]
    if np.all(step > 0) or np.all((step > 0) | ~present[:, 1:]):
        return (cols, present, *vals)           # sorted already, no station twice
    bad = np.flatnonzero(np.any(step <= 0, axis=1))      # only these rows need work
    if bad.size <= _FEW_ROWS:
        return _canonical_rows(cols, key, vals, bad)
    order = np.argsort(key[bad], axis=1, kind="stable")
    cols = cols.copy()
    cols[bad] = np.take_along_axis(cols[bad], order, axis=1)
    vals = [v.copy() for v in vals]
    for v in vals:
        v[bad] = np.take_along_axis(v[bad], order, axis=1)
    present = cols >= 0
    # the slot each one is summed into: itself, or the first slot of its run of equal stations
    target = np.tile(np.arange(w), (bad.size, 1))
    for j in range(1, w):
        dup = present[bad, j] & (cols[bad, j] == cols[bad, j - 1])
        target[:, j] = np.where(dup, target[:, j - 1], j)
        sub = np.flatnonzero(dup)
        rows = bad[sub]
        for v in vals:
            v[rows, target[sub, j]] += v[rows, j]
            v[rows, j] = 0.0
        present[rows, j] = False
    return (cols, present, *vals)


#: Up to this many rows out of order (a receding-horizon window's jerk rows: the ends, where a
#: stencil repeats its node) are put in order one by one in Python, which costs less than the
#: dozens of numpy calls of the vectorised path; the same operations either way.
_FEW_ROWS = 16


def _canonical_rows(cols, key, vals, bad):
    """:func:`canonical` for the rows ``bad`` alone, one row at a time."""
    cols = cols.copy()
    vals = [v.copy() for v in vals]
    present = cols >= 0
    w = cols.shape[1]
    for i in bad.tolist():
        order = sorted(range(w), key=key[i].tolist().__getitem__)      # stable, as argsort's
        cols[i] = cols[i, order]
        for v in vals:
            v[i] = v[i, order]
        present[i] = cols[i] >= 0
        target = 0
        for j in range(1, w):
            if present[i, j] and cols[i, j] == cols[i, j - 1]:
                for v in vals:      # summed into the first slot of its run, in slot order
                    v[i, target] += v[i, j]
                    v[i, j] = 0.0
                present[i, j] = False
            else:
                target = j
    return (cols, present, *vals)


def pad(cols, vals, width: int = WIDTH):
    """Widen a table of ``cols`` / ``vals`` with unused slots up to ``width``."""
    m, w = cols.shape
    if w == width:
        return cols, vals
    return (np.hstack((cols, np.full((m, width - w), -1, dtype=np.int64))),
            np.hstack((vals, np.zeros((m, width - w)))))


class RowQP:
    """A QP ``min x'Px/2 + q'x`` s.t. ``lo <= Ax <= up`` on ``n`` variables, ``A`` in compressed
    rows with sorted columns, ``P`` as its nonzero entries in row-major order (both
    triangles). ``block_starts``: :func:`interval_blocks` of it where its assembly found them
    already (None: found when asked, :func:`blocks_of`)."""

    __slots__ = ("n", "indptr", "indices", "data", "lo", "up", "prow", "pcol", "pval", "q",
                 "block_starts")

    def __init__(self, n, indptr, indices, data, lo, up, prow, pcol, pval, q,
                 block_starts=None):
        self.block_starts = block_starts
        self.n = int(n)
        self.indptr, self.indices, self.data = indptr, indices, data
        self.lo, self.up = lo, up
        self.prow, self.pcol, self.pval = prow, pcol, pval
        self.q = q

    @property
    def m(self) -> int:
        return self.indptr.size - 1

    def row_of_entry(self) -> np.ndarray:
        """The row of every stored entry of ``A``."""
        return np.repeat(np.arange(self.m), np.diff(self.indptr))

    def A_times(self, x):
        """``A x``, each row's terms summed in column order from zero (as scipy does)."""
        return np.bincount(self.row_of_entry(), self.data * x[self.indices], minlength=self.m)

    def At_times(self, y):
        """``A' y``, each column's terms summed in row order from zero."""
        return np.bincount(self.indices, self.data * np.repeat(y, np.diff(self.indptr)),
                           minlength=self.n)

    def P_times(self, x):
        """``P x``, each row's terms summed in column order from zero."""
        return np.bincount(self.prow, self.pval * x[self.pcol], minlength=self.n)

    def to_sparse(self):
        """``(P, q, A, lo, up)`` as scipy.sparse matrices (the Clarabel backend's input)."""
        import scipy.sparse as sp

        P = sp.csr_matrix((self.pval, (self.prow, self.pcol)), shape=(self.n, self.n))
        A = sp.csr_matrix((self.data, self.indices, self.indptr), shape=(self.m, self.n))
        return P, self.q, A, self.lo, self.up

    def take(self, cols, rows) -> RowQP:
        """The QP of variables ``cols`` (numbered in the order given: increasing within a block,
        but a loop's blocks may come out of station order) and rows ``rows`` (in the given
        order); the rows must involve no other variable. ``P``'s entries linking ``cols`` to
        other variables are left out (between independent blocks there are none). The rows are
        copied by the compiled twin where it is built (``_qp_rows.c``), by numpy otherwise."""
        local = np.full(self.n, -1, dtype=np.int64)
        local[cols] = np.arange(cols.size)
        keep = (local[self.prow] >= 0) & (local[self.pcol] >= 0)
        if _compiled is not None:       # the same copies, compiled
            rows = np.ascontiguousarray(rows, dtype=np.int64)
            # room for every entry (memory is only touched where written); cut to size after
            indptr, indices = np.empty(rows.size + 1, dtype=np.int64), np.empty_like(self.indices,
                                                                                   np.int64)
            data, lo, up = np.empty(self.indices.size), np.empty(rows.size), np.empty(rows.size)
            nnz = _compiled.take_rows(*(np.ascontiguousarray(a, dtype=np.int64)
                                        for a in (self.indptr, self.indices)),
                                      *(np.ascontiguousarray(a, dtype=float)
                                        for a in (self.data, self.lo, self.up)),
                                      rows, local, indptr, indices, data, lo, up)
            return RowQP(cols.size, indptr, indices[:nnz], data[:nnz], lo, up,
                         local[self.prow[keep]], local[self.pcol[keep]], self.pval[keep],
                         self.q[cols])
        counts = np.diff(self.indptr)[rows]
        indptr = np.zeros(rows.size + 1, dtype=np.int64)
        np.cumsum(counts, out=indptr[1:])
        pos = np.repeat(self.indptr[rows] - indptr[:-1], counts) + np.arange(indptr[-1])
        return RowQP(cols.size, indptr, local[self.indices[pos]], self.data[pos],
                     self.lo[rows], self.up[rows], local[self.prow[keep]],
                     local[self.pcol[keep]], self.pval[keep], self.q[cols])


def reduce_rows(cols, present, vals, lo, up, fixed, values):
    """Eliminate the fixed stations from canonical row tables (module docstring).

    Returns ``(indptr, indices, data, lo, up, kept)``: the compressed rows over the free
    stations (numbered in station order), their sides with the fixed stations' terms moved
    over, and which input rows were kept."""
    safe = np.where(present, cols, 0)
    on_fixed = present & fixed[safe]
    on_free = present & ~on_fixed
    shift = np.zeros(cols.shape[0])
    any_free = on_free[:, 0].copy()
    for j in range(cols.shape[1]):          # in station order, from zero, as scipy sums
        shift = shift + np.where(on_fixed[:, j], vals[:, j] * values[safe[:, j]], 0.0)
        if j:
            any_free |= on_free[:, j]
    # slot by slot rather than numpy's reductions along a row of three (several times faster
    # on these narrow tables); the entries in row-major order as before
    kept = any_free & (np.isfinite(lo) | np.isfinite(up))
    on_free &= kept[:, None]
    counts = on_free[:, 0].astype(np.int64)
    for j in range(1, cols.shape[1]):
        counts += on_free[:, j]
    counts = counts[kept]
    indptr = np.zeros(counts.size + 1, dtype=np.int64)
    np.cumsum(counts, out=indptr[1:])
    free_number = np.cumsum(~fixed) - 1
    indices = free_number[cols[on_free]]
    data = vals[on_free]
    return (indptr, indices.astype(np.int64), data, lo[kept] - shift[kept],
            up[kept] - shift[kept], kept)


def reduce_tables(tables, fixed, values):
    """:func:`reduce_rows` on each canonical table ``(cols, present, vals, lo, up)`` (any
    number of slots) in turn, joined into one set of compressed rows in the tables' order:
    ``(indptr, indices, data, lo, up)``. With the compiled twin (``_qp_rows.c``) every table's
    rows are written straight into the joined arrays; the numbers are the same either way."""
    if _compiled is None:
        parts = [reduce_rows(*t, fixed, values)[:5] for t in tables]
        counts = np.concatenate([np.diff(p[0]) for p in parts])
        indptr = np.zeros(counts.size + 1, dtype=np.int64)
        np.cumsum(counts, out=indptr[1:])
        return (indptr, *(np.concatenate([p[i] for p in parts]) for i in range(1, 5)))
    m = sum(t[3].size for t in tables)
    entries = sum(t[0].size for t in tables)
    indptr = np.empty(m + 1, dtype=np.int64)
    indices = np.empty(entries, dtype=np.int64)
    data, lo, up = np.empty(entries), np.empty(m), np.empty(m)
    fixed = np.ascontiguousarray(fixed, dtype=bool)
    values = np.ascontiguousarray(values, dtype=float)
    free_number = np.cumsum(~fixed) - 1
    row, k = 0, 0
    for cols, present, vals, t_lo, t_up in tables:
        row, k = _compiled.reduce_into(
            np.ascontiguousarray(cols, dtype=np.int64),
            np.ascontiguousarray(present, dtype=bool), np.ascontiguousarray(vals, dtype=float),
            np.ascontiguousarray(t_lo, dtype=float), np.ascontiguousarray(t_up, dtype=float),
            fixed, values, free_number, indptr, indices, data, lo, up, row, k)
    return indptr[:row + 1], indices[:k], data[:k], lo[:row], up[:row]


def interval_blocks(qp: RowQP):
    """Independent blocks of a QP whose rows and ``P`` link only nearby variables: a block
    ends where no row's nonzero terms and no entry of ``P`` reach across. Returns the first
    variable of every block and one past the last (so ``starts[k]:starts[k + 1]``).

    It equals the connected components of the pattern of ``|A|'|A| + |P|`` when every row's
    nonzero terms lie on consecutive variables or skip only variables that ``P`` links to
    their neighbours -- so for the convex solver's open routes (a row touches at most three
    neighbouring stations; the time model links every two neighbouring free stations).
    """
    n = qp.n
    nz = qp.data != 0.0
    # each row's first and last variable with a nonzero term (n and -1 where none), by
    # reductions over each row's entries (integers: exact whichever way they are taken)
    first = np.full(qp.m, n, dtype=np.int64)
    last = np.full(qp.m, -1, dtype=np.int64)
    has = np.diff(qp.indptr) > 0
    if nz.all():
        # every entry nonzero (the convex solver's QPs): a row's columns being sorted, its
        # first and last entries are its first and last variable
        first[has] = qp.indices[qp.indptr[:-1][has]]
        last[has] = qp.indices[qp.indptr[1:][has] - 1]
    elif nz.any():
        starts = qp.indptr[:-1][has]
        first[has] = np.minimum.reduceat(np.where(nz, qp.indices, n), starts)
        last[has] = np.maximum.reduceat(np.where(nz, qp.indices, -1), starts)
    span = last > first
    pnz = (qp.pval != 0.0) & (qp.prow < qp.pcol)
    cover = (np.bincount(first[span], minlength=n + 1)
             - np.bincount(last[span], minlength=n + 1)
             + np.bincount(qp.prow[pnz], minlength=n + 1)
             - np.bincount(qp.pcol[pnz], minlength=n + 1))
    linked = np.cumsum(cover)[: max(n - 1, 0)] > 0       # variable c linked to c + 1
    cuts = np.flatnonzero(~linked) + 1
    return np.concatenate(([0], cuts, [n])).astype(np.int64)


def ring_links(qp: RowQP) -> np.ndarray:
    """On a closed loop's QP (variables in order around the loop, the last next to the first),
    whether variable ``c`` is linked to ``(c + 1) % n`` by a row's nonzero terms or by ``P``.

    Each row (and each pair of ``P``) covers the arc from its first to its last variable the
    short way round: the complement of the largest gap between its variables, counting the gap
    across the seam (``first + n - last``). A row whose largest gap lies inside is one that
    wraps across the seam. As :func:`interval_blocks` on an open route, this gives the
    connected components when rows skip only variables that ``P`` links to their neighbours.
    """
    n = qp.n
    row = np.repeat(np.arange(qp.m), np.diff(qp.indptr))
    keep = qp.data != 0.0
    pnz = (qp.pval != 0.0) & (qp.prow != qp.pcol)
    m = qp.m
    # P's pairs as two-entry rows after the QP's own
    group = np.concatenate((row[keep], m + np.repeat(np.flatnonzero(pnz), 2)))
    col = np.concatenate((qp.indices[keep],
                          np.column_stack((qp.prow[pnz], qp.pcol[pnz])).ravel()))
    order = np.lexsort((col, group))
    group, col = group[order], col[order]
    boundary = np.r_[True, group[1:] != group[:-1]]
    starts = np.flatnonzero(boundary)
    ends = np.r_[starts[1:], group.size] - 1
    gap = np.diff(col)
    gap[boundary[1:]] = -1                       # no gap counted between two rows
    several = ends > starts
    starts, ends = starts[several], ends[several]
    cover = np.zeros(n + 1, dtype=np.int64)
    if starts.size:
        inner = np.maximum.reduceat(np.r_[gap, -1], starts)
        seam = col[starts] + n - col[ends]
        wraps = inner > seam
        # a row inside: links first..last-1; one across the seam: after its largest gap to
        # the end, and from the start to before it
        plain = ~wraps
        np.add.at(cover, col[starts[plain]], 1)
        np.add.at(cover, col[ends[plain]], -1)
        if wraps.any():
            where = np.flatnonzero(wraps)
            big = np.array([starts[i] + int(np.argmax(gap[starts[i]:ends[i]]))
                            for i in where])           # the entry before the largest gap
            np.add.at(cover, col[big + 1], 1)
            cover[n] -= where.size
            cover[0] += where.size
            np.add.at(cover, col[big], -1)
    return np.cumsum(cover)[:n] > 0


def blocks_of(qp: RowQP, closed: bool):
    """The QP's independent blocks of variables (connected through its rows or ``P``), each
    an array of variable indices in increasing order, the blocks in order of their first
    variable. An open route's blocks are intervals (:func:`interval_blocks`); a closed loop's
    are arcs of the ring (:func:`ring_links`), the one across the seam (if any) first."""
    if not closed:
        starts = qp.block_starts if qp.block_starts is not None else interval_blocks(qp)
        return [np.arange(a, b) for a, b in zip(starts[:-1], starts[1:])]
    n = qp.n
    linked = ring_links(qp)
    cuts = np.flatnonzero(~linked)             # c not linked to c + 1: a block ends at c
    if cuts.size == 0:
        return [np.arange(n)]
    ends = cuts + 1
    firsts = np.r_[ends[-1] % n, ends[:-1]]
    blocks = []
    for a, b in zip(firsts, ends):
        blocks.append(np.arange(a, b) if a < b else np.r_[np.arange(0, b), np.arange(a, n)])
    return sorted(blocks, key=lambda x: int(x[0]))


def reduce_sparse(P, q, A, lo, up, fixed, values):
    """Eliminate fixed variables from the scipy.sparse form of the QP
    (:meth:`.convex_qp.QPBuilder.build`); drop rows left with no free variable. The solver
    itself eliminates them while it assembles (:meth:`.convex_qp.QPBuilder.reduced`)."""
    free = ~fixed
    P = P.tocsc()
    A = A.tocsc()
    xf = np.where(fixed, values, 0.0)
    Pff = P[free][:, free]
    qf = q[free] + P[free][:, fixed] @ values[fixed]
    Af = A[:, free].tocsr()
    shift = A[:, fixed] @ values[fixed]
    keep = np.diff(Af.indptr) > 0
    return {"P": Pff, "q": qf, "A": Af[keep], "lo": lo[keep] - shift[keep],
            "up": up[keep] - shift[keep], "free": free, "x_fixed": xf}
