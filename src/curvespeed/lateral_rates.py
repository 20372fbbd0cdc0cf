"""How a lateral jerk bound enters the discrete problem: the rate of the lateral acceleration.

Part of the one definition of the discrete problem (:mod:`curvespeed.problem`, whose module
docstring states the model). The lateral jerk is ``d(kappa v^2)/dt = g v`` with
``g = d(kappa v^2)/ds = kappa' b + 2 kappa a`` the *station rate* of the lateral acceleration
(1/s^2). The curvature is known at the nodes and taken linear in station between them, so
``kappa'`` is constant along a step. ``g`` is linear in the squared speeds wherever ``b`` and
``a`` are, which is what keeps the bound convex after the same tangent step the jerk rows use:

* :func:`step_rate_forms`: along every step, ``g`` lies between two linear forms in the step's
  two squared speeds (its values at both ends on a constant-acceleration step; a box over a step
  next to rest driven with a jerk ramp);
* :func:`node_rate_forms`: at every node where two steps meet, ``g`` with the road of one step
  and the acceleration of the other, for both pairings (the acceleration changes at the node;
  where it switches a hair before or after the node, or over a short ramp around it, the road
  next to the node is driven with either step's acceleration or one between them).

:func:`step_lateral_jerk` and :func:`node_lateral_jerk` turn the forms into the lateral jerk the
bound applies to. Closed forms only; vectorised; no side effects.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class NodeRateForms:
    """The rates at nodes with one step's road and the other step's acceleration.

    At node ``node[i]`` (neighbours ``prev[i]`` and ``next[i]``), ``g`` with the road of the step
    before and the acceleration of the step after is ``forms[i, 0] @ b[[prev, node, next]]``;
    with the road after and the acceleration before, ``forms[i, 1] @ ...``. Node indices are
    over the distinct nodes (a closed route's last node is its first); the ends of an open route
    have a step on one side only and no form.
    """

    node: np.ndarray
    prev: np.ndarray
    next: np.ndarray
    forms: np.ndarray


def step_rate_forms(kappa, ds, accel_factor_start, accel_factor_end) -> np.ndarray:
    """Linear bounds on the station rate of the lateral acceleration along each step.

    Returns ``R``, shape ``(n_steps, 2, 2)``: along step ``k`` (from node ``k`` to ``k+1``,
    length ``ds``), ``g`` lies between ``R[k, 0] @ (b[k], b[k+1])`` and
    ``R[k, 1] @ (b[k], b[k+1])``, 1/s^2.

    * A constant-acceleration step (both acceleration factors nonzero): ``b`` and ``kappa`` are
      linear in station, so ``g`` is linear along the step; the forms are its values at the
      first and at the last node, ``(kappa_k+1 b_k + kappa_k b_k+1 - 2 kappa_k b_k) / ds`` and
      ``(2 kappa_k+1 b_k+1 - kappa_k b_k+1 - kappa_k+1 b_k) / ds`` (their mean is the change of
      ``kappa b`` over ``ds``).
    * A step next to rest driven with a jerk ramp (the factor at its rest node is 0, the other
      ``f``, :mod:`curvespeed.rest_step`): along it ``b`` lies in ``[0, b_m]`` (``b_m`` at the
      moving node) and the acceleration between 0 and ``+-f b_m / (2 ds)`` (``+`` leaving
      rest), so ``kappa' b`` and ``2 kappa a`` each lie between multiples of ``b_m``: the forms
      are the sums of their upper and of their lower bounds.

    ``ds`` may be one value or one per step.
    """
    kappa = np.asarray(kappa, dtype=float)
    k0, k1 = kappa[:-1], kappa[1:]
    ds = np.broadcast_to(np.asarray(ds, dtype=float), k0.shape)
    f_start = np.asarray(accel_factor_start, dtype=float)
    f_end = np.asarray(accel_factor_end, dtype=float)
    forms = np.empty((k0.size, 2, 2))
    forms[:, 0, 0], forms[:, 0, 1] = (k1 - 2.0 * k0) / ds, k0 / ds      # at the first node
    forms[:, 1, 0], forms[:, 1, 1] = -k1 / ds, (2.0 * k1 - k0) / ds     # at the last node
    leaving, arriving = f_start == 0.0, f_end == 0.0
    rest = np.flatnonzero(leaving | arriving)
    if rest.size:
        lv = leaving[rest]
        f = np.where(lv, f_end[rest], f_start[rest])
        sign = np.where(lv, 1.0, -1.0)          # the acceleration's sign along the step
        c0, c1, h = sign * k0[rest], sign * k1[rest], 1.0 / ds[rest]
        rate = (k1[rest] - k0[rest]) * h        # kappa', times b in [0, b_m]
        upper = np.maximum(rate, 0.0) + f * h * np.maximum(np.maximum(c0, c1), 0.0)
        lower = np.minimum(rate, 0.0) + f * h * np.minimum(np.minimum(c0, c1), 0.0)
        moving = np.where(lv, 1, 0)
        forms[rest] = 0.0
        forms[rest, 0, moving] = upper
        forms[rest, 1, moving] = lower
    return forms


def node_rate_forms(kappa, ds: float, closed: bool, accel_factor_start,
                    accel_factor_end) -> NodeRateForms:
    """The crossed rates at every node where two steps meet (:class:`NodeRateForms`).

    With the step before's curvature rate ``kappa'_-`` and acceleration at the node
    ``a_- = f_- (b_k - b_k-1) / (2 ds)``, and the step after's ``kappa'_+`` and
    ``a_+ = f_+ (b_k+1 - b_k) / (2 ds)`` (``f`` the steps' acceleration factors at the node:
    1, or the moving node's ``f`` of a step next to rest), the forms are
    ``kappa'_- b_k + 2 kappa_k a_+`` and ``kappa'_+ b_k + 2 kappa_k a_-``.
    """
    kappa = np.asarray(kappa, dtype=float)
    nv = kappa.size - 1 if closed else kappa.size
    k = np.arange(nv)
    if closed:
        node, prev, nxt = k, (k - 1) % nv, (k + 1) % nv
    else:
        node, prev, nxt = k[1:-1], k[:-2], k[2:]
    before, after = prev, node                  # the steps that meet at the node
    rate = np.diff(kappa) / ds
    kk = kappa[node]
    f_after = np.asarray(accel_factor_start, dtype=float)[after] * kk / ds
    f_before = np.asarray(accel_factor_end, dtype=float)[before] * kk / ds
    forms = np.zeros((node.size, 2, 3))
    forms[:, 0, 1], forms[:, 0, 2] = rate[before] - f_after, f_after
    forms[:, 1, 0], forms[:, 1, 1] = -f_before, rate[after] + f_before
    return NodeRateForms(node=node, prev=prev, next=nxt, forms=forms)


def _larger(rates: np.ndarray) -> np.ndarray:
    """Per row, the entry of ``rates`` (shape (m, 2)) with the larger magnitude."""
    pick = np.argmax(np.abs(rates), axis=1)
    return np.take_along_axis(rates, pick[:, None], axis=1)[:, 0]


def step_lateral_jerk(forms: np.ndarray, b) -> np.ndarray:
    """Bound on ``|d(kappa v^2)/dt|`` along each step, with the sign of the larger rate, m/s^3.

    ``forms`` from :func:`step_rate_forms`; ``b`` the squared speeds at the nodes. The rate
    lies between the two forms and the speed is at most the larger of the nodes' speeds.
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


__all__ = ["NodeRateForms", "node_lateral_jerk", "node_rate_forms", "step_lateral_jerk",
           "step_rate_forms"]
