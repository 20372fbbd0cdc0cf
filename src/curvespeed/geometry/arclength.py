"""Arc length of a fitted B-spline curve and its inverse (station <-> spline parameter)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import legendre

from .pspline import SPLINE_DEGREE, SplineFit
from .uniform_spline import basis_values

_GAUSS_NODES = 10                    # Gauss-Legendre nodes per arc-length piece
ARC_PIECE_M = 2.0                   # longest piece of parameter one Gauss-Legendre rule spans
_NEWTON_TOL = 1e-11                  # arc-length inversion: station error / half a piece
_NEWTON_MAX_ITER = 60


# ---------------------------------------------------------------------------------------------
# Arc length of the fitted curve and its inverse.

@dataclass(frozen=True)
class ArcLength:
    """Station as a function of the spline parameter, per piece of knot interval in Legendre form.

    On piece ``j`` (``u = start + h * (j + (1 + tau) / 2)``, ``tau`` in [-1, 1]) the speed
    ``|c'(u)|`` is interpolated at Gauss-Legendre nodes; ``integral`` holds the Legendre
    coefficients of its antiderivative from ``tau = -1``, so station is
    ``knot_station[j] + h/2 * integral_j(tau)``.
    """

    start: float
    h: float
    nodes: np.ndarray            # Gauss-Legendre nodes in [-1, 1]
    node_speed: np.ndarray       # (pieces, q) speed at the nodes
    speed: np.ndarray            # (pieces, q) Legendre coefficients of the speed
    integral: np.ndarray         # (pieces, q+1) Legendre coefficients of its antiderivative
    knot_station: np.ndarray     # (pieces + 1,) station at the ends of the pieces

    @property
    def length(self) -> float:
        return float(self.knot_station[-1])

    @classmethod
    def from_fit(cls, fit: SplineFit, piece_m: float | None = None) -> "ArcLength":
        """Tabulate station along ``fit``: each knot interval is cut into equal pieces no longer
        than ``piece_m`` (in the parameter, ~metres), each integrated by Gauss-Legendre."""
        k, n_int, knot_h = SPLINE_DEGREE, fit.n_intervals, fit.span / fit.n_intervals
        piece_m = ARC_PIECE_M if piece_m is None else piece_m
        sub = max(1, math.ceil(knot_h / piece_m - 1e-9))
        h = knot_h / sub
        q = _GAUSS_NODES
        nodes, weights = legendre.leggauss(q)
        deriv = fit.spline.derivative()
        # Knots are uniform, so on every knot interval the k derivative basis functions take
        # the same values at the same relative nodes: evaluate them once on interval 0.
        local = (np.arange(sub)[:, None] + 0.5 * (1.0 + nodes)) * h          # (sub, q)
        local = np.clip(local.ravel(), 0.0, knot_h)
        stencil = basis_values(k - 1, local / knot_h).T                     # (sub * q, k)
        # velocity[i, s, d] = sum_r stencil[s, r] c[r + i, d], summed from zero in r order, one
        # coordinate d at a time with the intervals along rows (numpy's passes over arrays of
        # a few entries took 25 ms on a 10 km route); |velocity|^2 adds the coordinates' squares
        # in order, as numpy's sum of so few terms does
        coef = deriv.c
        speed_sq = None
        for d in range(coef.shape[1]):
            column = np.ascontiguousarray(coef[:, d])
            velocity = np.zeros((sub * q, n_int))
            for r in range(k):
                velocity += stencil[:, r, None] * column[r: r + n_int][None, :]
            velocity *= velocity
            speed_sq = velocity if speed_sq is None else speed_sq + velocity
        node_speed = np.sqrt(speed_sq).T.reshape(n_int * sub, q)
        vander = legendre.legvander(nodes, q - 1)
        speed = (node_speed * weights) @ vander * (np.arange(q) + 0.5)
        integral = legendre.legint(speed, m=1, lbnd=-1, axis=1)
        knot_station = np.concatenate(([0.0], np.cumsum(0.5 * h * integral.sum(axis=1))))
        return cls(0.0, h, nodes, node_speed, speed, integral, knot_station)

    def station(self, u: np.ndarray) -> np.ndarray:
        """Station (m) of parameter values ``u``."""
        n_pieces = self.integral.shape[0]
        rel = (np.asarray(u, dtype=float) - self.start) / self.h
        j = np.clip(np.floor(rel).astype(int), 0, n_pieces - 1)
        tau = np.clip(2.0 * (rel - j) - 1.0, -1.0, 1.0)
        return self.knot_station[j] + 0.5 * self.h * legendre.legval(tau, self.integral[j].T,
                                                                     tensor=False)

    def parameter(self, s: np.ndarray) -> np.ndarray:
        """Parameter values at stations ``s`` (m): safeguarded Newton within each piece."""
        n_pieces = self.integral.shape[0]
        s = np.asarray(s, dtype=float)
        j = np.clip(np.searchsorted(self.knot_station, s, side="right") - 1, 0, n_pieces - 1)
        target = (s - self.knot_station[j]) / (0.5 * self.h)        # integral_j(tau) wanted
        whole = self.integral[j].sum(axis=1)                         # integral_j(1)
        tau = np.clip(2.0 * target / np.where(whole > 0, whole, 1.0) - 1.0, -1.0, 1.0)
        lo, hi = np.full(s.shape, -1.0), np.full(s.shape, 1.0)
        todo = np.arange(s.size)
        for _ in range(_NEWTON_MAX_ITER):
            if todo.size == 0:
                break
            cj = self.integral[j[todo]].T
            f = legendre.legval(tau[todo], cj, tensor=False) - target[todo]
            done = np.abs(f) <= _NEWTON_TOL
            below = f < 0
            lo[todo[below]] = tau[todo[below]]
            hi[todo[~below]] = tau[todo[~below]]
            slope = legendre.legval(tau[todo], self.speed[j[todo]].T, tensor=False)
            with np.errstate(divide="ignore", invalid="ignore"):
                step = tau[todo] - f / slope
            sub_lo, sub_hi = lo[todo], hi[todo]
            bad = ~((step > sub_lo) & (step < sub_hi)) | ~np.isfinite(step)
            step[bad] = 0.5 * (sub_lo[bad] + sub_hi[bad])
            tau[todo[~done]] = step[~done]
            todo = todo[~done]
        return self.start + self.h * (j + 0.5 * (1.0 + tau))
