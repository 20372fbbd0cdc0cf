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
concave, so its chords lie below it: the rows use three, on ``d / (J T)`` in ``[0, 1/32]``,
``[1/32, 1/8]`` and ``[1/8, 1/2]``, as ``drop <= beta d + gamma J T / 2 + J T' / 2``. In the
corner step's mean ``a_c`` and the neighbour's ``a_n`` (hi side, ``d = A - a_c``)::

    alpha a_c - a_n - gamma H_c - H_n <= beta A      (alpha, beta, gamma) in SEGMENTS

with ``H = J T / 2 = J ds / (v + v')``. ``H`` is convex in ``b``, so, as for the jerk rows'
time base, the tangents of ``sqrt`` (above it) and then of ``1 / x`` (below it) at ``b_hat``
give a linear lower bound of it: the rows are conservative for any ``b_hat > 0`` and exact at
``b_hat``. The chords lie below ``g``, so the rows ask a little more than the motion does: with
two chords (without the one on ``[0, 1/32]``) the sweep had 202 moves in its band and 12 m
moves up to +0.184 % over the closed form, with three 204 and +0.135 %; most of what is left
over 8-12 m is the constant-acceleration step's own (``docs/method.md``).

Only plain steps get the rows (constant acceleration, ``time_coef == 2``, unit acceleration
factors): a step next to rest or a launch's ramp step is driven with its own shape. ``A`` (and
``D``) must bound the acceleration all along the pair, or the rows would take away motions the
limits allow; the caps move with speed (grip with the normal load and the resistances, the
comfort ellipse with the lateral use), so each node's cap is bounded from above over its speed
range up to the jerk-free envelope (:func:`corner_caps`: the comfort cap, or the grip's at the
largest normal load and the least or most resistance) and a pair takes the largest of its three
nodes', tightened by the rows' ``margin``. On a straight that is the comfort cap, or ``mu g``
less or plus rolling resistance where grip is lower (friction 0.3: three moves of the sweep's
kind were planned below the closed form at 2.94 m/s^2 before, by up to 0.081 %, and none now).
Where the cap is the comfort ellipse's on a curve or the power limit's, the bound is the larger
cap and the rows only take part of the optimism away.
"""

from __future__ import annotations

import numpy as np

from ..problem import SpeedProblem
from .qp_time import B_FLOOR

try:
    from . import _window_qp as _compiled     # the window kernel's second call, corner_room
except ImportError:             # the package installs without a C compiler; numpy does the same
    _compiled = None

#: ``(alpha, beta, gamma)`` of each chord of ``g`` (module docstring), on ``d / (J T)`` in
#: [0, 1/32] (slope 7, through 0), [1/32, 1/8] (slope 5/3, ``g = J T / 6`` at ``d = 0``) and
#: [1/8, 1/2] (slope 1/3, ``J T / 3``). ``drop <= beta d + gamma J T / 2 + J T' / 2`` with
#: ``d = A - a_c`` is ``alpha a_c - a_n <= beta A + ...`` with ``alpha = 1 + beta``.
SEGMENTS = ((8.0, 7.0, 0.0), (8.0 / 3.0, 5.0 / 3.0, 1.0 / 3.0), (4.0 / 3.0, 1.0 / 3.0, 2.0 / 3.0))

#: The blocks of rows of a pair: ``(sign, corner)``, the side (+1 the drive cap, -1 the braking
#: cap) and which of the pair's two steps is at the corner (0 the first: the acceleration leaves
#: the cap; 1 the second: it reaches it).
BLOCKS = ((1.0, 0), (1.0, 1), (-1.0, 0), (-1.0, 1))


def corner_pairs(lay) -> np.ndarray:
    """``(k, k_next)`` of every pair of consecutive plain steps (module docstring), shape
    ``(m, 2)``: on a closed route the last step's next is the first."""
    plain = (lay.time_coef == 2.0) & (lay.f_first == 1.0) & (lay.f_last == 1.0)
    ns = lay.n_steps
    k = np.arange(ns if lay.closed and ns > 2 else max(ns - 1, 0))
    nxt = (k + 1) % ns if lay.closed else k + 1
    keep = plain[k] & plain[nxt]
    return np.stack((k[keep], nxt[keep]), axis=1)


def corner_caps(p: SpeedProblem, lay, b_env: np.ndarray):
    """Per node, upper bounds over its speed range ``[0, b_env]`` of the drive cap and of the
    braking cap's size, m/s^2: the comfort cap, or the grip's with the largest normal load and
    the least (drive) or most (braking) resistance, whichever is lower (the lateral use, the
    comfort ellipse and the power limit only lower a cap). The rows of a pair take the largest
    of its three nodes' (module docstring): a bound the motion cannot pass anywhere along it."""
    lim = p.limits
    nodes = np.arange(lay.nv)
    e = b_env[:lay.nv]
    zero = np.zeros(lay.nv)
    load = np.maximum(p.normal_accel(zero, nodes), p.normal_accel(e, nodes))
    r0, r1 = p.resistance(zero, nodes), p.resistance(e, nodes)
    grip = p.mu_long[nodes] * load
    return (np.minimum(lim.max_accel_mps2, grip - np.minimum(r0, r1)),
            np.minimum(lim.max_decel_mps2, grip + np.maximum(r0, r1)))


def _pair_caps(caps, n0, n1, n2):
    """Each pair's caps: the largest of its three nodes', drive then braking."""
    return [np.maximum(np.maximum(c[n0], c[n1]), c[n2]) for c in caps]


def corner_rows(p: SpeedProblem, lay, b_hat: np.ndarray, margin: float, caps, pairs: np.ndarray,
                use: np.ndarray | None = None, every_step: bool = False):
    """The corner rows of ``pairs`` (rows of :func:`corner_pairs`) around ``b_hat`` as
    ``(cols, vals, up)``: three slots a row, the nodes of the pair's two steps in order, under
    the nodes' ``caps`` (:func:`corner_caps`).

    Rows come by block (side hi or lo, then the corner step: the pair's first step, then its
    second; :data:`BLOCKS`), segment, pair; ``use[i, block]`` says whether pair ``i`` has that
    block's rows (default: all). Unless ``every_step``, no rows on pairs whose nodes are all
    fixed (the elimination would drop them)."""
    lim = p.limits
    empty = np.zeros((0, 3), dtype=np.int64), np.zeros((0, 3)), np.zeros(0)
    if use is None:
        use = np.ones((pairs.shape[0], len(BLOCKS)), dtype=bool)
    n0, n1 = lay.step_from[pairs[:, 0]], lay.step_to[pairs[:, 0]]
    n2 = lay.step_to[pairs[:, 1]]
    if not every_step:
        free = ~(lay.fixed[n0] & lay.fixed[n1] & lay.fixed[n2])
        n0, n1, n2, use = n0[free], n1[free], n2[free], use[free]
    if lim.max_jerk_mps3 is None or n0.size == 0:
        return empty
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
    pair_cap = dict(zip((1.0, -1.0), _pair_caps(caps, n0, n1, n2)))
    out_cols, vals, ups = [], [], []
    for block, (sign, c) in enumerate(BLOCKS):
        n = 1 - c
        k = np.flatnonzero(use[:, block] & np.isfinite(pair_cap[sign]))
        if k.size == 0:
            continue
        cap = pair_cap[sign][k] * (1.0 - margin)
        (sc, cc), (sn, cn) = halves[c], halves[n]
        sc, cc, sn, cn = sc[k], cc[k], sn[k], cn[k]
        for alpha, beta, gamma in SEGMENTS:
            out_cols.append(cols[k])
            vals.append(sign * (alpha * mean_a[c][k] - mean_a[n][k]) - sn - gamma * sc)
            ups.append(beta * cap + cn + gamma * cc)
    if not vals:
        return empty
    return np.concatenate(out_cols), np.concatenate(vals), np.concatenate(ups)


def corner_room(p: SpeedProblem, lay, b: np.ndarray, caps, pairs: np.ndarray):
    """:func:`corner_room_numpy`, in one compiled call on an open stretch (``_window_qp.c``:
    the same numbers to the last bit; a stretch's few hundred pairs cost more in numpy calls
    than in arithmetic)."""
    if _compiled is None or lay.closed or pairs.shape[0] == 0:
        return corner_room_numpy(p, lay, b, caps, pairs)
    room = np.empty((pairs.shape[0], len(BLOCKS)))
    scale = np.empty(pairs.shape[0])
    f64 = np.ascontiguousarray
    _compiled.corner_room(
        f64(b[:lay.nv], dtype=float), f64(pairs[:, 0], dtype=np.int64),
        f64(caps[0], dtype=float), f64(caps[1], dtype=float), room, scale,
        (p.limits.max_jerk_mps3, p.ds))
    return room, scale


def corner_room_numpy(p: SpeedProblem, lay, b: np.ndarray, caps, pairs: np.ndarray):
    """For each pair (rows of :func:`corner_pairs`) and block (:data:`BLOCKS`), at the squared
    speeds ``b`` and the true limits: the least room of the block's rows, ``beta d + gamma H_c +
    H_n - drop`` with the exact ``H = J ds / (v + v')`` (negative: the plan leaves or reaches a
    cap faster than the jerk bound allows; ``inf`` where the pair's cap is not finite), shape
    ``(pairs, 4)``; and the smaller ``H`` of the pair's two steps, the scale on which the rows
    bind (module docstring). In m/s^2."""
    lim = p.limits
    first, second = pairs[:, 0], pairs[:, 1]
    v = np.sqrt(np.maximum(b, 0.0))
    a = (b[lay.step_to] - b[lay.step_from]) * (0.5 / p.ds)
    half = (lim.max_jerk_mps3 * p.ds) / np.maximum(v[lay.step_from] + v[lay.step_to], 1e-12)
    a1, a2, h1, h2 = a[first], a[second], half[first], half[second]
    n0, n1 = lay.step_from[first], lay.step_to[first]
    pair_cap = dict(zip((1.0, -1.0), _pair_caps(caps, n0, n1, lay.step_to[second])))
    room = np.full((first.size, len(BLOCKS)), np.inf)
    for block, (sign, c) in enumerate(BLOCKS):
        cap = pair_cap[sign]
        # each row as drop <= beta d + gamma H_c + H_n, d the corner step's room below the cap
        # (alpha = 1 + beta in SEGMENTS)
        a_c, a_n, h_c, h_n = (a1, a2, h1, h2) if c == 0 else (a2, a1, h2, h1)
        d, drop = cap - sign * a_c, sign * (a_c - a_n)
        for _, beta, gamma in SEGMENTS:
            room[:, block] = np.minimum(room[:, block], beta * d + gamma * h_c + h_n - drop)
        # a pair without a finite cap on this side has no rows
        room[:, block] = np.where(np.isfinite(cap), room[:, block], np.inf)
    return room, np.minimum(h1, h2)


#: A block of a pair's rows comes in once its room is below this share of the pair's smaller
#: ``J T / 2`` (:class:`CornerSelection`): a pair held at the cap has a room of ``J T' / 2`` and
#: needs none.
NEAR_SHARE = 0.5
#: The share at the jerk-free envelope and after the first QP from it, where the answer is still
#: far and its corner may fall on either step of a pair: both blocks of a side within it come
#: in. With the near share there too the 10 km benchmark road took 3-4 iterations instead of 2
#: (stretches restarted for corners their first answer passed too fast); with all four blocks
#: of a pair it took 10 % longer than with the side's two (measured, alternating).
FAR_SHARE = 2.0
#: Room below this (m/s^2) counts as a corner the plan passes too fast, not as rounding.
BROKEN_ROOM = -1e-6


class CornerSelection:
    """The pairs of steps that get corner rows in one sequential-convex run.

    Most pairs never come near a cap (on the bundled mountain road 47 % of the final plan's
    pairs are within ``J T / 2`` of one, nearly all of them held at it, where no row binds), and
    the rows of every pair made a receding-horizon window's QP 1.4-2.4 times slower (three
    alternating runs). So a pair gets only the blocks (:data:`BLOCKS`) whose room at an iterate
    is below :data:`NEAR_SHARE` of its scale (:func:`corner_room`; :data:`FAR_SHARE` and both
    blocks of a side from the envelope), and the set only grows. A block taken in whose room is
    already negative was passed too fast by the iterate: :meth:`grow` names its pair's
    stations, and the loop takes the next QP's answer for that stretch as it stands rather than
    searching the line from an iterate outside the new rows."""

    def __init__(self, problem: SpeedProblem, lay, caps, pairs: np.ndarray):
        self.p, self.lay, self.caps, self.pairs = problem, lay, caps, pairs
        self.on = np.zeros((pairs.shape[0], len(BLOCKS)), dtype=bool)

    @property
    def selected(self):
        """``(pairs, use)`` for :func:`corner_rows`: the pairs with a block of rows, and
        which."""
        k = np.flatnonzero(self.on.any(axis=1))
        return self.pairs[k], self.on[k]

    def grow(self, b: np.ndarray, far: bool = False):
        """Take in the blocks of rows near their bound at ``b``: room below :data:`NEAR_SHARE`
        of their pair's scale, or, where ``b`` is still ``far`` from the answer (the jerk-free
        envelope and the first QP's answer from it), below :data:`FAR_SHARE` and both blocks of
        the side. Returns whether any came in, and the stations of the pairs ``b`` passes too
        fast."""
        none = (False, np.zeros(0, dtype=np.int64))
        if self.pairs.shape[0] == 0:
            return none
        room, scale = corner_room(self.p, self.lay, b, self.caps, self.pairs)
        near = room < (FAR_SHARE if far else NEAR_SHARE) * scale[:, None]
        if far:
            # which of the pair's steps ends up at the corner is not known yet: both blocks of
            # a side (BLOCKS: hi first, lo second, two each)
            side = near.reshape(-1, 2, 2).any(axis=2, keepdims=True)
            near = np.repeat(side, 2, axis=2).reshape(near.shape)
        new = near & ~self.on
        if not new.any():           # most calls once the set has formed: nothing more to do
            return none
        self.on |= near
        broken = self.pairs[np.any(new & (room < BROKEN_ROOM), axis=1)]
        lay = self.lay
        nodes = np.concatenate((lay.step_from[broken[:, 0]], lay.step_to[broken[:, 0]],
                                lay.step_to[broken[:, 1]]))
        return True, nodes


__all__ = ["BLOCKS", "BROKEN_ROOM", "FAR_SHARE", "NEAR_SHARE", "SEGMENTS", "CornerSelection",
           "corner_caps", "corner_pairs", "corner_room", "corner_room_numpy", "corner_rows"]
