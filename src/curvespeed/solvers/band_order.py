"""A banded order for a QP whose rows join distant columns (a closed loop's, which wrap from
one end of the loop to the other), for the banded interior-point method (:mod:`.banded_ipm`).

The columns are put in breadth-first order from a far column of each connected part, the
Cuthill-McKee order without its sorting by degree: a ring whose neighbours lie within ``w``
columns becomes a band about ``2 w`` wide, a path one ``w`` wide, as narrow as scipy's reverse
Cuthill-McKee makes them (tests/test_reference_band_order.py), with no scipy on a loop's plan
(its import is about 0.3 s). The search is compiled (``search_order`` in ``_qp_rows.c``) with
:func:`far_order_numpy` as its reference. A QP still too wide in this order is not banded: the
banded method reports it failed and the convex solver hands it to Clarabel, as it does any QP
the method cannot take.
"""

from __future__ import annotations

import numpy as np

from . import qp_rows
from .qp_rows import RowQP


def bandwidth(prow, pcol, indptr, indices) -> int:
    """Half-bandwidth of ``P`` (coordinates) and of the rows (compressed, each row's columns in
    order): the largest distance between two columns an entry or a row couples."""
    kp = int(np.max(np.abs(prow - pcol))) if prow.size else 0
    has = np.diff(indptr) > 0
    if not has.any():
        return kp
    first = indices[indptr[:-1][has]]
    last = indices[indptr[1:][has] - 1]
    return max(kp, int(np.max(last - first)))


def reorder(qp: RowQP, prow, pcol, pval, data, q):
    """The QP with its columns in :func:`level_order` (module docstring): ``(prow, pcol, pval,
    indptr, indices, data, q, inverse)``, ``inverse`` each old column's new place."""
    inverse = np.empty(qp.n, dtype=np.intp)
    inverse[level_order(qp, prow, pcol)] = np.arange(qp.n)
    return permuted(qp, prow, pcol, pval, data, q, inverse)


def level_order(qp: RowQP, prow, pcol) -> np.ndarray:
    """The columns in breadth-first order (``perm[k]`` goes to place ``k``) over the graph
    joining the columns each row or ``P`` entry couples (:func:`far_order_numpy`, compiled)."""
    n = qp.n
    rows = np.repeat(np.arange(qp.m), np.diff(qp.indptr))
    nxt = np.flatnonzero(rows[1:] == rows[:-1])       # an entry and the next in its row
    a = np.concatenate((qp.indices[nxt], prow))
    b = np.concatenate((qp.indices[nxt + 1], pcol))
    a, b = np.concatenate((a, b)), np.concatenate((b, a))
    neighbours = b[np.argsort(a, kind="stable")]
    start = np.concatenate(([0], np.cumsum(np.bincount(a, minlength=n))))
    if qp_rows._compiled is None or n == 0:
        return far_order_numpy(n, start, neighbours)
    order = np.empty(n, dtype=np.int64)
    qp_rows._compiled.search_order(np.ascontiguousarray(start, dtype=np.int64),
                                   np.ascontiguousarray(neighbours, dtype=np.int64), order)
    return order


def far_order_numpy(n: int, start, neighbours) -> np.ndarray:
    """Part by part of the graph (the lowest column not yet placed starts each), its columns
    in breadth-first order from the column a first search from that lowest one reaches last:
    a far end of the part (the end of a path, on a ring any column), from which the levels
    are narrow. The reference of the compiled ``search_order`` (``_qp_rows.c``)."""
    placed = np.zeros(n, dtype=bool)
    parts = []
    while not placed.all():
        lowest = int(np.flatnonzero(~placed)[0])
        part = _search(_search(lowest, n, start, neighbours)[-1], n, start, neighbours)
        placed[part] = True
        parts.append(part)
    return np.concatenate(parts) if parts else np.empty(0, dtype=np.intp)


def _search(root: int, n: int, start, neighbours) -> np.ndarray:
    """The columns reached from ``root``, level by level, each level's new columns in the order
    they were first reached (each level's columns in order, each one's neighbours in order)."""
    seen = np.zeros(n, dtype=bool)
    out, level = [], np.array([root])
    seen[root] = True
    while level.size:
        out.append(level)
        deg = start[level + 1] - start[level]
        total = int(deg.sum())
        at = np.repeat(start[level] - np.concatenate(([0], np.cumsum(deg)[:-1])), deg)
        reached = neighbours[at + np.arange(total)]
        reached = reached[~seen[reached]]
        first = np.unique(reached, return_index=True)[1]     # each once, as first reached
        level = reached[np.sort(first)]
        seen[level] = True
    return np.concatenate(out)


def permuted(qp: RowQP, prow, pcol, pval, data, q, inverse):
    """The QP's columns moved to places ``inverse`` (each row's entries kept in column order):
    ``(prow, pcol, pval, indptr, indices, data, q, inverse)``."""
    rows = np.repeat(np.arange(qp.m), np.diff(qp.indptr))
    cols = inverse[qp.indices]
    order = np.lexsort((cols, rows))
    q_new = np.empty_like(q)
    q_new[inverse] = q
    return (inverse[prow], inverse[pcol], pval, qp.indptr, cols[order], data[order], q_new,
            inverse)
