"""How a lateral jerk bound enters the discrete problem: the rate of the lateral acceleration.

Part of the one definition of the discrete problem (:mod:`curvespeed.problem`, whose module
docstring states the model). The lateral jerk is ``d(kappa v^2)/dt = g v`` with
``g = d(kappa v^2)/ds = kappa' b + 2 kappa a`` the *station rate* of the lateral acceleration
(1/s^2). ``g`` is linear in the squared speeds wherever ``b``, ``a`` and the curvature are,
which is what keeps the bound convex after the same tangent step the jerk rows use:

* :func:`step_rate_forms`: along every step, ``|g|`` is at most the largest magnitude of a few
  linear forms in the step's two squared speeds, and the speed at most the larger of its nodes'
  speeds (:func:`step_lateral_jerk`);
* :func:`node_rate_forms`: at every node where two steps meet, ``g`` with the road of one step
  (its rate at either end of the step's range) and the acceleration of the other, for both
  pairings. The acceleration changes at the node;
  a vehicle cannot switch it exactly there (the jerk bound spreads the change around the node),
  and a road whose curvature rate changes at the node is driven next to it with either step's
  acceleration or one between them (``g`` is linear in ``a``).

**The curvature between nodes.** The curvature is known at the nodes only. A road's curvature
rate changes at its element joints (straight, clothoid, arc), which fall anywhere between
stations, and the lateral jerk, unlike every other limit, follows that rate. So along a step
the curvature rate is taken to lie between the lowest and highest chord rate
``(kappa_j+1 - kappa_j) / ds`` of the step and its two neighbours (at an open end: the step and
its one neighbour), and to average to the step's own chord rate: where that equals the lowest or
the highest (to rounding), the rate is that one all along the step (curvature linear between the
nodes). This
holds for an alignment of elements at least two station steps long wherever their joints fall:
a joint inside a step joins the element that covers the step before to the one that covers the
step after. With the rate in ``[r_lo, r_hi]`` and averaging to ``r``, the curvature departs from
the line between the nodes' values by at most ``delta = (r_hi - r) (r - r_lo) ds / (r_hi - r_lo)``
(at most a quarter of ``(r_hi - r_lo) ds``).

**An estimated curvature.** A curvature estimated from surveyed or logged points is smoothed:
a joint of the road's rate shows spread over the smoothing's width, so the rate just past a
clothoid's start reads low (measured on simulated RTK logs of an S-curve: lateral jerk 1.3-1.6
times the bound on the exact road with the chord ranges alone). Where the geometry says how far
its estimate may spread a change (:attr:`curvespeed.geometry.Geometry.curvature_spread_m`), each
step's range also takes the chord rates within that distance (:func:`spread_rate_range`).

Closed forms only; vectorised; no side effects.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .order_stats import distinct


@dataclass(frozen=True)
class NodeRateForms:
    """The rates at nodes with one step's road and the other step's acceleration.

    At node ``node[i]`` (neighbours ``prev[i]`` and ``next[i]``), ``g`` is at most the largest
    magnitude of ``forms[i, j] @ b[[prev, node, next]]`` over ``j``: the road of the step
    before (its lowest and its highest rate) with the acceleration of the step after, and the
    road after with the acceleration before (forms that would repeat another are zero). Node
    indices are over the distinct nodes (a closed route's last node is its first); the ends of
    an open route have a step on one side only and no form.
    """

    node: np.ndarray
    prev: np.ndarray
    next: np.ndarray
    forms: np.ndarray


#: Rates gathered at once by :func:`spread_rate_range` (2 MB of them): enough that the numpy
#: calls per chunk cost nothing beside the work, small enough that memory does not grow with the
#: route.
_NEIGHBOURHOOD_CHUNK = 1 << 18


def spread_rate_range(kappa, ds: float, closed: bool, spread_m,
                      margin=None) -> tuple[np.ndarray, np.ndarray]:
    """Each step's range of curvature rates when the curvature is an *estimate* that may have
    moved a change of rate by up to ``spread_m`` (one value per node, metres;
    :attr:`curvespeed.geometry.Geometry.curvature_spread_m`): the lowest and highest chord rate
    of the steps within that distance of the step and one step more, ``(r_lo, r_hi)`` in
    1/m^2.

    A smoothing that spreads a change over a distance reaches the rate a road has just past a
    joint (a clothoid ending on an arc) only that far past it, and holds a rate it shows that far
    beyond where the road does: the rates within that distance cover the road's, as the largest
    curvature within it covers the road's curvature (:mod:`curvespeed.geometry.curvature`). A
    chord rate averages the estimate's rate over its own step as well, hence the one step more.
    ``margin`` (one value per node, 1/m^2; :attr:`curvespeed.geometry.Geometry.
    curvature_rate_margin_1pm2`) widens each step's range by the larger of its nodes' values:
    how far a rate the estimate holds may be off.
    """
    kappa = np.asarray(kappa, dtype=float)
    rate = np.diff(kappa) / ds
    n = rate.size
    spread = np.asarray(spread_m, dtype=float)
    wide = np.maximum(spread[:-1], spread[1:])
    reach = np.where(wide > 0.0, np.ceil(wide / ds - 1e-9) + 1, 0).astype(np.intp)
    lo, hi = rate.copy(), rate.copy()
    for m in distinct(reach[reach > 0]):          # a few distinct widths: one pass each
        shifts = np.arange(-m, m + 1)
        # the steps' neighbourhoods a chunk at a time: all at once held n (2 m + 1) rates
        # (86 MB on a 176 km route whose spreads reach 30 m)
        every = np.flatnonzero(reach == m)
        per_chunk = max(1, _NEIGHBOURHOOD_CHUNK // shifts.size)
        for start in range(0, every.size, per_chunk):
            steps = every[start:start + per_chunk]
            if closed:
                near = rate[(steps[:, None] + shifts[None, :]) % n]
            else:
                near = rate[np.clip(steps[:, None] + shifts[None, :], 0, n - 1)]
            lo[steps], hi[steps] = near.min(axis=1), near.max(axis=1)
    if margin is not None:
        margin = np.asarray(margin, dtype=float)
        off = np.maximum(margin[:-1], margin[1:])
        lo, hi = lo - off, hi + off
    return lo, hi


def rate_range(kappa, ds, closed: bool, wider=None, rate_tol=0.0
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The range of the curvature rate along each step and how far the curvature may depart
    from the line between the nodes' values (module docstring): ``(r_lo, r_hi, delta)``.

    ``kappa`` has one value per node (a closed route's last node repeats the first); ``ds`` is
    one value or one per step. ``wider``, when given, is a range ``(r_lo, r_hi)`` per step the
    rate may also take (:func:`spread_rate_range`). Rates closer than ``rate_tol`` (1/m^2, one
    value or one per step) count as equal: the rounding of curvatures read from a file.
    Rates in 1/m^2, ``delta`` in 1/m.
    """
    kappa = np.asarray(kappa, dtype=float)
    rate = np.diff(kappa) / ds
    if closed:
        before, after = np.roll(rate, 1), np.roll(rate, -1)
    else:
        before = np.concatenate((rate[:1], rate[:-1]))
        after = np.concatenate((rate[1:], rate[-1:]))
    lo = np.minimum(np.minimum(before, rate), after)
    hi = np.maximum(np.maximum(before, rate), after)
    if wider is not None:
        lo, hi = np.minimum(lo, wider[0]), np.maximum(hi, wider[1])
    # else the rate is the chord's all along; rates equal but for rounding (1e-9 of the
    # largest, where the nodes' curvatures carry 1e-16) count as equal
    tol = np.maximum(1e-9 * np.maximum(np.abs(lo), np.abs(hi)), rate_tol)
    inside = (lo < rate - tol) & (rate + tol < hi)
    lo, hi = np.where(inside, lo, rate), np.where(inside, hi, rate)
    with np.errstate(invalid="ignore", divide="ignore"):
        delta = np.where(inside, (hi - rate) * (rate - lo) / np.where(inside, hi - lo, 1.0), 0.0)
    return lo, hi, delta * ds


def step_rate_forms(kappa, ds, closed: bool, accel_factor_start,
                    accel_factor_end, wider=None, rate_tol=0.0) -> np.ndarray:
    """Linear forms that bound the station rate of the lateral acceleration along each step.

    Returns ``R``, shape ``(n_steps, 8, 2)``: along step ``k`` (from node ``k`` to ``k+1``,
    length ``ds``) ``|g| <= max_i |R[k, i] @ (b[k], b[k+1])|``, 1/s^2; forms that would repeat
    another are zero. With the curvature rate in ``[r_lo, r_hi]`` and the curvature within
    ``delta`` of the line between the nodes' values (:func:`rate_range`):

    * A constant-acceleration step (both acceleration factors nonzero): wherever the rate is
      constant, ``b`` and the curvature are linear in station, so ``g`` is linear and lies
      between its values where the rate changes or the step ends. At a node that is
      ``r b_j + 2 kappa_j a``; at a change of rate inside the step, a mean of those over the two
      nodes with the curvature off by at most ``delta``. ``g`` is linear in ``r`` and in the
      curvature, so the forms ``r b_j + 2 (kappa_j +- delta) a`` for ``r`` in ``r_lo, r_hi`` and
      ``j`` the first or the last node cover every case (``a = (b[k+1] - b[k]) / (2 ds)``).
      Curvature linear between the nodes leaves two: ``g`` at the two nodes.
    * A step next to rest driven with a jerk ramp (the factor at its rest node is 0, the other
      ``f``, :mod:`curvespeed.rest_step`): along it ``b`` lies in ``[0, b_m]`` (``b_m`` at the
      moving node) and the acceleration between 0 and ``+-f b_m / (2 ds)`` (``+`` leaving rest),
      so ``kappa' b`` and ``2 kappa a`` each lie between multiples of ``b_m``: two forms, the
      sums of their upper and of their lower bounds.

    ``ds`` may be one value or one per step; ``wider`` widens the rates and ``rate_tol`` is
    the rounding of the rates (:func:`rate_range`).
    """
    kappa = np.asarray(kappa, dtype=float)
    k0, k1 = kappa[:-1], kappa[1:]
    ds = np.broadcast_to(np.asarray(ds, dtype=float), k0.shape)
    r_lo, r_hi, delta = rate_range(kappa, ds, closed, wider, rate_tol)
    h = 1.0 / ds                                # 2 a = h (b[k+1] - b[k])
    forms = np.zeros((k0.size, 8, 2))
    i = 0
    for r, new_r in ((r_lo, True), (r_hi, r_hi != r_lo)):
        for dk, new_k in ((delta, True), (-delta, delta != 0.0)):
            keep = new_r & new_k
            for kj, node in ((k0, 0), (k1, 1)):
                c = (kj + dk) * h               # on b[k+1], and minus on b[k]
                forms[:, i, 0] = np.where(keep, (r if node == 0 else 0.0) - c, 0.0)
                forms[:, i, 1] = np.where(keep, (r if node == 1 else 0.0) + c, 0.0)
                i += 1
    f_start = np.asarray(accel_factor_start, dtype=float)
    f_end = np.asarray(accel_factor_end, dtype=float)
    leaving, arriving = f_start == 0.0, f_end == 0.0
    rest = np.flatnonzero(leaving | arriving)
    if rest.size:
        lv = leaving[rest]
        f = np.where(lv, f_end[rest], f_start[rest])
        sign = np.where(lv, 1.0, -1.0)          # the acceleration's sign along the step
        c0 = sign * (np.minimum(k0[rest], k1[rest]) - delta[rest])
        c1 = sign * (np.maximum(k0[rest], k1[rest]) + delta[rest])
        fh = f * h[rest]
        upper = np.maximum(r_hi[rest], 0.0) + fh * np.maximum(np.maximum(c0, c1), 0.0)
        lower = np.minimum(r_lo[rest], 0.0) + fh * np.minimum(np.minimum(c0, c1), 0.0)
        moving = np.where(lv, 1, 0)
        forms[rest] = 0.0
        forms[rest, 0, moving] = upper
        forms[rest, 1, moving] = lower
    return forms


def node_rate_forms(kappa, ds: float, closed: bool, accel_factor_start,
                    accel_factor_end, wider=None) -> NodeRateForms:
    """The crossed rates at every node where two steps meet (:class:`NodeRateForms`).

    With the step before's curvature rate ``kappa'_-`` and acceleration at the node
    ``a_- = f_- (b_k - b_k-1) / (2 ds)``, and the step after's ``kappa'_+`` and
    ``a_+ = f_+ (b_k+1 - b_k) / (2 ds)`` (``f`` the steps' acceleration factors at the node:
    1, or the moving node's ``f`` of a step next to rest), the forms are
    ``kappa'_- b_k + 2 kappa_k a_+`` and ``kappa'_+ b_k + 2 kappa_k a_-``, each rate at both
    ends of its step's range (:func:`rate_range`, widened by ``wider``): right next to the node
    the road may already have the rate of a joint the step holds anywhere along it (the steps'
    own forms assume the same), not only the step's chord rate.
    """
    kappa = np.asarray(kappa, dtype=float)
    nv = kappa.size - 1 if closed else kappa.size
    k = np.arange(nv)
    if closed:
        node, prev, nxt = k, (k - 1) % nv, (k + 1) % nv
    else:
        node, prev, nxt = k[1:-1], k[:-2], k[2:]
    before, after = prev, node                  # the steps that meet at the node
    lo, hi, _ = rate_range(kappa, ds, closed, wider)
    kk = kappa[node]
    f_after = np.asarray(accel_factor_start, dtype=float)[after] * kk / ds
    f_before = np.asarray(accel_factor_end, dtype=float)[before] * kk / ds
    forms = np.zeros((node.size, 4, 3))
    for j, rates in enumerate(((lo[before], hi[before]), (lo[after], hi[after]))):
        for i, r in enumerate(rates):
            keep = 1.0 if i == 0 else (rates[1] != rates[0]).astype(float)
            if j == 0:      # the road before, the acceleration after
                forms[:, 2 * j + i, 1] = keep * (r - f_after)
                forms[:, 2 * j + i, 2] = keep * f_after
            else:           # the road after, the acceleration before
                forms[:, 2 * j + i, 0] = keep * -f_before
                forms[:, 2 * j + i, 1] = keep * (r + f_before)
    return NodeRateForms(node=node, prev=prev, next=nxt, forms=forms)


def _larger(rates: np.ndarray) -> np.ndarray:
    """Per row, the entry of ``rates`` (shape (m, k)) with the largest magnitude."""
    pick = np.argmax(np.abs(rates), axis=1)
    return np.take_along_axis(rates, pick[:, None], axis=1)[:, 0]


def step_lateral_jerk(forms: np.ndarray, b) -> np.ndarray:
    """Bound on ``|d(kappa v^2)/dt|`` along each step, with the sign of the largest form, m/s^3.

    ``forms`` from :func:`step_rate_forms`; ``b`` the squared speeds at the nodes. The rate's
    magnitude is at most the largest form's, and the speed at most the larger of the nodes'.
    """
    b = np.maximum(np.asarray(b, dtype=float), 0.0)
    rates = forms[:, :, 0] * b[:-1, None] + forms[:, :, 1] * b[1:, None]
    return _larger(rates) * np.sqrt(np.maximum(b[:-1], b[1:]))


def node_lateral_jerk(cross: NodeRateForms, b, closed: bool) -> np.ndarray:
    """Lateral jerk at each node with the crossed rates (:func:`node_rate_forms`), the larger
    of the two, signed, m/s^3; 0 where a node has no form. ``b`` has one value per node; on a
    closed route the last node repeats the first."""
    b = np.maximum(np.asarray(b, dtype=float), 0.0)
    cols = np.stack((b[cross.prev], b[cross.node], b[cross.next]), axis=1)
    rates = np.einsum("mij,mj->mi", cross.forms, cols)
    out = np.zeros(b.size)
    out[cross.node] = _larger(rates) * np.sqrt(b[cross.node])
    if closed:
        out[-1] = out[0]
    return out


__all__ = ["NodeRateForms", "node_lateral_jerk", "node_rate_forms", "rate_range",
           "spread_rate_range", "step_lateral_jerk", "step_rate_forms"]
