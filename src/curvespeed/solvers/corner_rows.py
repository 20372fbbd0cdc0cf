"""Corner rows: the plan's acceleration leaves (or reaches) its cap no faster than a motion whose
jerk is bounded can.

The jerk rows bound the change between two steps' mean accelerations by ``J tau``, ``tau`` the
time between the steps' middles: exact for a motion that changes its acceleration at ``J``
throughout both steps. Next to a cap that is too generous. A step whose mean is at the cap
``A`` had its acceleration at ``A`` all through, so the next step's mean can be at most
``J T' / 2`` lower (``T'`` its time), not ``J (T + T') / 2``: the discrete plan could leave the
cap, or reach it, half a step sooner than any motion within the jerk bound, and so be faster
than the double-S closed form (24 of the 240 moves of ``benchmarks/exact_roads.py``, by up to
0.12 %).

The bound follows from the motion, not from the discretisation. Over a step of time ``T`` with
mean ``A - d`` (``d >= 0``) and ``a <= A``, ``|da/dt| <= J``, the acceleration at the step's end
is lowest when it holds ``A`` and then falls at ``J`` for the step's last ``t`` with
``J t^2 / (2 T) = d``; falling on at ``J`` through the next step, that step's mean is lower by

    drop <= g(d) + J T' / 2,     g(d) = sqrt(2 J T d) - d   (for d <= J T / 2),

and for ``d >= J T / 2`` the jerk row (``J (T + T') / 2``, which ``g`` reaches there) binds. The
same holds backwards in time (a step reaching the cap) and mirrored at ``-D``. ``g`` is
concave, so its chords lie below it: the rows use two, on ``d / (J T)`` in ``[0, 1/8]`` and
``[1/8, 1/2]``, as ``drop <= alpha' d + c J T + J T' / 2``. Written in the corner step's mean
``a_c`` and the neighbour's ``a_n`` (hi side, ``d = A - a_c``)::

    alpha a_c - a_n - gamma H_c - H_n <= beta A      (alpha, beta, gamma) in SEGMENTS

with ``H = J T / 2 = J ds / (v + v')``. ``H`` is convex in ``b``, so, as for the jerk rows'
time base, the tangents of ``sqrt`` (above it) and then of ``1 / x`` (below it) at ``b_hat``
give a linear lower bound of it: the rows are conservative for any ``b_hat > 0`` and exact at
``b_hat``. Measured with the cvxpy reference model on the double-S sweep, two chords leave the
8-12 m moves 0.01-0.09 % slower than the exact ``g`` would (a third chord bought < 0.01 % from
18 m on).

Only plain steps get the rows (constant acceleration, ``time_coef == 2``, unit acceleration
factors): a step next to rest or a launch's ramp step is driven with its own shape. The caps are
the comfort caps ``max_accel``, ``max_decel`` tightened by the rows' ``margin``; a corner at a
lower grip or power cap is not modelled (those caps move with speed).
"""

from __future__ import annotations

import numpy as np

from ..problem import SpeedProblem
from .qp_time import B_FLOOR

#: ``(alpha, beta, gamma)`` of each chord of ``g`` (module docstring): the chord on
#: ``d / (J T)`` in [0, 1/8] has slope 3 and passes through 0, the one on [1/8, 1/2] slope 1/3
#: and ``g = J T / 3`` at ``d = 0``. ``drop <= beta d + gamma J T / 2 + J T' / 2`` with
#: ``d = A - a_c`` is ``alpha a_c - a_n <= beta A + ...`` with ``alpha = 1 + beta``.
SEGMENTS = ((4.0, 3.0, 0.0), (4.0 / 3.0, 1.0 / 3.0, 2.0 / 3.0))


def corner_pairs(lay) -> np.ndarray:
    """``(k, k_next)`` of every pair of consecutive plain steps (module docstring), shape
    ``(m, 2)``: on a closed route the last step's next is the first."""
    plain = (lay.time_coef == 2.0) & (lay.f_first == 1.0) & (lay.f_last == 1.0)
    ns = lay.n_steps
    k = np.arange(ns if lay.closed and ns > 2 else max(ns - 1, 0))
    nxt = (k + 1) % ns if lay.closed else k + 1
    keep = plain[k] & plain[nxt]
    return np.stack((k[keep], nxt[keep]), axis=1)


def corner_rows(p: SpeedProblem, lay, b_hat: np.ndarray, margin: float, pairs: np.ndarray,
                every_step: bool = False):
    """The corner rows of ``pairs`` (rows of :func:`corner_pairs`) around ``b_hat`` as
    ``(cols, vals, up)``: three slots a row, the nodes of the pair's two steps in order. Rows
    come by side (hi, lo), orientation (the first step at the corner, then the second),
    segment, pair. Unless ``every_step``, no rows on pairs whose nodes are all fixed (the
    elimination would drop them)."""
    lim = p.limits
    caps = [(1.0, lim.max_accel_mps2), (-1.0, lim.max_decel_mps2)]
    caps = [(sign, cap * (1.0 - margin)) for sign, cap in caps if np.isfinite(cap)]
    n0, n1 = lay.step_from[pairs[:, 0]], lay.step_to[pairs[:, 0]]
    n2 = lay.step_to[pairs[:, 1]]
    if not every_step:
        free = ~(lay.fixed[n0] & lay.fixed[n1] & lay.fixed[n2])
        n0, n1, n2 = n0[free], n1[free], n2[free]
    if lim.max_jerk_mps3 is None or not caps or n0.size == 0:
        return np.zeros((0, 3), dtype=np.int64), np.zeros((0, 3)), np.zeros(0)
    J = lim.max_jerk_mps3 * (1.0 - margin)
    ds = p.ds
    h = 1.0 / (2.0 * ds)
    root = np.where(lay.fixed, np.sqrt(np.maximum(lay.fixed_value, 0.0)),
                    np.sqrt(np.maximum(b_hat, B_FLOOR)))
    base = np.where(lay.fixed, lay.fixed_value, b_hat)
    zero = np.zeros(n0.size)
    # each step's H = C + s_from b_from + s_to b_to (module docstring), on slots (0, 1, 2)
    halves = []
    for fr, to, slots in ((n0, n1, (0, 1)), (n1, n2, (1, 2))):
        w_hat = root[fr] + root[to]
        w_hat = np.where(w_hat > 0.0, w_hat, 1.0)
        coef = J * ds / (w_hat * w_hat)
        s = [np.where(lay.fixed[c], 0.0, -coef / np.where(lay.fixed[c], 1.0, 2.0 * root[c]))
             for c in (fr, to)]
        const = J * ds / w_hat - s[0] * base[fr] - s[1] * base[to]
        slope = [zero, zero, zero]
        slope[slots[0]], slope[slots[1]] = s
        halves.append((np.stack(slope, axis=1), const))
    mean_a = [np.stack((-h + zero, h + zero, zero), axis=1),
              np.stack((zero, -h + zero, h + zero), axis=1)]
    cols = np.stack((n0, n1, n2), axis=1)
    vals, ups = [], []
    for sign, cap in caps:
        for c, n in ((0, 1), (1, 0)):
            (sc, cc), (sn, cn) = halves[c], halves[n]
            for alpha, beta, gamma in SEGMENTS:
                vals.append(sign * (alpha * mean_a[c] - mean_a[n]) - sn - gamma * sc)
                ups.append(beta * cap + cn + gamma * cc)
    m = len(vals)
    return np.tile(cols, (m, 1)), np.concatenate(vals), np.concatenate(ups)


def corner_room(p: SpeedProblem, lay, b: np.ndarray, pairs: np.ndarray):
    """For each pair (rows of :func:`corner_pairs`), at the squared speeds ``b`` and the true
    limits: the least room of its rows, ``beta cap + gamma H_c + H_n - sign (alpha a_c -
    a_n)`` with the exact ``H = J ds / (v + v')`` (negative: the plan leaves or reaches a cap
    faster than the jerk bound allows), and the smaller ``H`` of its two steps, the scale on
    which the rows bind (module docstring). Both in m/s^2."""
    lim = p.limits
    first, second = pairs[:, 0], pairs[:, 1]
    v = np.sqrt(np.maximum(b, 0.0))
    a = (b[lay.step_to] - b[lay.step_from]) * (0.5 / p.ds)
    half = (lim.max_jerk_mps3 * p.ds) / np.maximum(v[lay.step_from] + v[lay.step_to], 1e-12)
    a1, a2, h1, h2 = a[first], a[second], half[first], half[second]
    room = np.full(first.size, np.inf)
    for sign, cap in ((1.0, lim.max_accel_mps2), (-1.0, lim.max_decel_mps2)):
        if not np.isfinite(cap):
            continue
        # each row as drop <= beta d + gamma H_c + H_n, d the corner step's room below the cap
        # (alpha = 1 + beta in SEGMENTS)
        d1, d2 = cap - sign * a1, cap - sign * a2
        for d, drop, h_c, h_n in ((d1, sign * (a1 - a2), h1, h2), (d2, sign * (a2 - a1), h2, h1)):
            for _, beta, gamma in SEGMENTS:
                room = np.minimum(room, beta * d + gamma * h_c + h_n - drop)
    return room, np.minimum(half[first], half[second])


#: A pair gets its rows once its room is below this share of its steps' smaller ``J T / 2``
#: (:class:`CornerSelection`): a pair held at the cap has a room of ``J T' / 2`` and needs none.
NEAR_SHARE = 0.5
#: Room below this (m/s^2) counts as a corner the plan passes too fast, not as rounding.
BROKEN_ROOM = -1e-6


class CornerSelection:
    """The pairs of steps that get corner rows in one sequential-convex run.

    Most pairs never come near a cap (on the bundled mountain road 47 % of the final plan's
    pairs are within ``J T / 2`` of one, nearly all of them held at it, where no row binds), and
    the rows of every pair made a receding-horizon window's QP 1.9 times slower. So the rows
    go to the pairs whose room at an iterate is below :data:`NEAR_SHARE` of their scale
    (:func:`corner_room`), and the set only grows. A pair taken in whose room is already
    negative was passed too fast by the iterate: :meth:`grow` names its stations, and the loop
    takes the next QP's answer for that stretch as it stands rather than searching the line
    from an iterate outside the new rows."""

    def __init__(self, problem: SpeedProblem, lay, pairs: np.ndarray):
        self.p, self.lay, self.pairs = problem, lay, pairs
        self.on = np.zeros(pairs.shape[0], dtype=bool)

    @property
    def selected(self) -> np.ndarray:
        return self.pairs[self.on]

    def grow(self, b: np.ndarray):
        """Take in the pairs near a cap at ``b``. Returns whether any came in, and the
        stations of those ``b`` passes too fast."""
        if self.pairs.shape[0] == 0:
            return False, np.zeros(0, dtype=np.int64)
        room, scale = corner_room(self.p, self.lay, b, self.pairs)
        near = room < NEAR_SHARE * scale
        new = near & ~self.on
        self.on |= near
        broken = self.pairs[new & (room < BROKEN_ROOM)]
        lay = self.lay
        nodes = np.concatenate((lay.step_from[broken[:, 0]], lay.step_to[broken[:, 0]],
                                lay.step_to[broken[:, 1]]))
        return bool(new.any()), nodes


__all__ = ["BROKEN_ROOM", "NEAR_SHARE", "SEGMENTS", "CornerSelection", "corner_pairs",
           "corner_room", "corner_rows"]
