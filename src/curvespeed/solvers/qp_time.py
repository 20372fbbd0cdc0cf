"""The time objective's second-order model around the current iterate, for the QP of one
sequential-convex iteration (:mod:`.convex_qp` assembles the rest): the total time of the
steps, its gradient and its Hessian, and that Hessian laid out as entries where it is
tridiagonal (an open route without a comfort term).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from .qp_layout import QPLayout

#: Floor on squared speed where a square root is linearised, m^2/s^2 ((0.05 m/s)^2).
B_FLOOR = 0.0025


def time_model(b_hat: np.ndarray, lay: QPLayout, ds: float, steps=None):
    """Total time, gradient and (upper-triangular) Hessian of the time at ``b_hat``: the time
    of ``steps`` (default every step), each step's terms summed into its nodes' gradient and
    diagonal, and each step's off-diagonal entry."""
    free = ~lay.fixed
    sf, st = lay.step_from, lay.step_to
    time_coef = lay.time_coef
    if steps is not None:
        sf, st, time_coef = sf[steps], st[steps], time_coef[steps]
    fx, fy = free[sf], free[st]
    # square roots, floored where the variable is free (a free node is never meant to be at rest)
    root_floor = math.sqrt(B_FLOOR)
    sx = np.sqrt(np.maximum(b_hat[sf], 0.0))
    sy = np.sqrt(np.maximum(b_hat[st], 0.0))
    sxf = np.where(fx, np.maximum(sx, root_floor), sx)
    syf = np.where(fy, np.maximum(sy, root_floor), sy)
    S = sxf + syf
    half_c = 0.5 * time_coef                # step time is c ds / S
    total = float(np.sum(2.0 * half_c * ds / S))
    sxf = np.maximum(sxf, root_floor)       # only used where the variable is free
    syf = np.maximum(syf, root_floor)
    cds = half_c * ds
    gx = np.where(fx, -cds / (S * S * sxf), 0.0)
    gy = np.where(fy, -cds / (S * S * syf), 0.0)
    # cubes as products: numpy's float power goes through a vectorised pow whose last bit
    # differs from the C library's, and the compiled assembly (_window_qp.c) must agree
    S3 = S * S * S
    hxx = np.where(fx, cds * (1.0 / (S3 * sxf ** 2) + 0.5 / (S * S * (sxf * sxf * sxf))), 0.0)
    hyy = np.where(fy, cds * (1.0 / (S3 * syf ** 2) + 0.5 / (S * S * (syf * syf * syf))), 0.0)
    hxy = np.where(fx & fy, cds / (S3 * sxf * syf), 0.0)
    nv = lay.nv
    grad = np.zeros(nv)
    np.add.at(grad, sf, gx)
    np.add.at(grad, st, gy)
    diag = np.zeros(nv)
    np.add.at(diag, sf, hxx)
    np.add.at(diag, st, hyy)
    return total, grad, diag, hxy


def tridiagonal_hessian(free, diag, steps, hxy, n_steps):
    """The time model's Hessian on an open route without a comfort term, as
    :meth:`.convex_qp.QPBuilder.objective` returns it: node ``k``'s row has ``(k, k - 1)`` from step
    ``k - 1``, ``(k, k)`` and ``(k, k + 1)`` from step ``k``, each key once, so the entries
    come straight in row-major order, without the general path's sort (each the one term of its
    sum, which the general path adds to zero: the same number for every nonzero term).
    Entries off the free nodes or equal to zero are left out, as there."""
    nv = free.size
    off = np.zeros(n_steps)
    off[steps] = hxy
    k = np.arange(nv)
    cols = np.stack((k - 1, k, k + 1), axis=1)
    vals = np.zeros((nv, 3))
    vals[1:, 0] = off[: nv - 1]
    vals[:, 1] = diag
    vals[:-1, 2] = off[: nv - 1]
    inside = (cols >= 0) & (cols < nv)
    keep = inside & free[:, None] & free[np.clip(cols, 0, nv - 1)] & (vals != 0.0)
    return np.repeat(k, keep.sum(axis=1)), cols[keep], vals[keep]
