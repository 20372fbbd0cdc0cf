"""Linear time-varying model predictive steering over a preview horizon, solved with OSQP.

Each solve predicts the actuated path-error model of :mod:`.lqr` (error states and the steering
angle, zero-order hold at the MPC's sample time ``dt``) over ``N`` steps, step ``k`` linearised
at the planned speed ``V_k`` with the path's curvature ``kappa_k`` at the station the plan
reaches then (the first step at the vehicle's own speed)::

    x_{k+1} = Ad(V_k) x_k + Bd(V_k) u_k + Ed(V_k) V_k kappa_k

and minimises ``sum_k (x_k - x_ss,k)' Q (x_k - x_ss,k) + R (u_k - u_ss,k)^2`` with the terminal
weight of the discrete Riccati solution at ``V_N`` (so the horizon's tail costs what the LQR
would), ``x_ss``/``u_ss`` the steady state of each step's circle (the feed-forward of
:mod:`.lqr`), subject to the steering angle limit ``|u_k| <= delta_max`` and the rate limit,
written as ``|u_k - delta_k| <= rate_max T`` (the lag's rate ``(u - delta)/T`` stays within the
actuator's limit). The model matrices are interpolated on a speed table made once (like the LQR
gains), the QP keeps one sparsity pattern, and OSQP is warm-started from the previous solve
(a linear time-varying MPC; e.g. Borrelli, Bemporad & Morari, Predictive Control for Linear and
Hybrid Systems, 2017; OSQP: Stellato et al., Math. Prog. Comp., 2020). Between solves the
command is held. A QP OSQP does not solve falls back to the LQR command of that instant (counted
in :attr:`MpcTracker.fallbacks`).
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.sparse

from .lqr import (MIN_DESIGN_SPEED_MPS, TABLE_STEP_MPS, LqrTracker, LqrWeights,
                  actuated_model, discretise, weight_matrices)
from .vehicle import Vehicle

#: OSQP's tolerances: a steering command to ~1e-5 rad is far below what the actuator resolves.
OSQP_SETTINGS = dict(eps_abs=1e-5, eps_rel=1e-5, max_iter=4000, polishing=False,
                     warm_starting=True, verbose=False)


class MpcTracker:
    """LTV MPC steering (module docstring).

    Parameters
    ----------
    vehicle : Vehicle
    dt_s : float
        The MPC's sample time, s.
    horizon : int
        Number of predicted steps ``N``.
    top_speed_mps : float
        Highest speed of the model table.
    weights : LqrWeights
        Stage weights (the same as the LQR's).
    every : int
        Solve every ``every`` calls (the simulation's tracker period divides ``dt_s``).
    """

    needs_preview = True

    def __init__(self, vehicle: Vehicle, dt_s: float, horizon: int, top_speed_mps: float,
                 weights: LqrWeights = LqrWeights(), every: int = 1):
        import osqp

        if horizon < 2:
            raise ValueError(f"the MPC horizon must be at least 2 steps, got {horizon}")
        self.vehicle, self.dt_s, self.horizon, self.every = vehicle, dt_s, int(horizon), every
        self.lqr = LqrTracker(vehicle, dt_s, top_speed_mps, weights)
        self.speeds = self.lqr.speeds
        self._tables(weights)
        Q, R = weight_matrices(weights)
        self.q_diag, self.r = np.diag(Q).copy(), float(R[0, 0])
        self.rate_band = vehicle.max_steer_rate_radps * vehicle.steer_lag_s
        self._pattern()
        self.solver = osqp.OSQP()
        n = self.horizon
        P0 = self._p_values(self.P_tab[0])
        A0 = self._a_values(np.repeat(self.Ad_tab[:1], n, 0), np.repeat(self.Bd_tab[:1], n, 0))
        P = scipy.sparse.csc_matrix((P0[self.p_perm], self.p_csc.indices, self.p_csc.indptr),
                                    shape=self.p_csc.shape)
        A = scipy.sparse.csc_matrix((A0[self.a_perm], self.a_csc.indices, self.a_csc.indptr),
                                    shape=self.a_csc.shape)
        size = 6 * n
        self.solver.setup(P, np.zeros(size), A, -np.ones(A.shape[0]), np.ones(A.shape[0]),
                          **OSQP_SETTINGS)
        self.calls = 0
        self.solves = 0
        self.fallbacks = 0
        self.iterations = 0
        self.held = 0.0

    def gains_at(self, speed_mps: float):
        return self.lqr.gains_at(speed_mps)

    def _tables(self, weights: LqrWeights) -> None:
        Ad, Bd, Ed, P = [], [], [], []
        Q, R = weight_matrices(weights)
        for v in self.speeds:
            a, b, e = discretise(*actuated_model(self.vehicle, v), self.dt_s)
            Ad.append(a)
            Bd.append(b)
            Ed.append(e)
            P.append(scipy.linalg.solve_discrete_are(a, b.reshape(5, 1), Q, R))
        self.Ad_tab, self.Bd_tab = np.array(Ad), np.array(Bd)
        self.Ed_tab, self.P_tab = np.array(Ed), np.array(P)
        self.ss_tab = self.lqr.table[:, 5:7]         # g_psi, g_delta per speed

    def _pattern(self) -> None:
        """Row/column pattern of the constraint matrix and of the cost's upper triangle, and
        the permutation from their fixed entry order to OSQP's compressed columns."""
        n = self.horizon
        rows, cols = [], []
        for k in range(n):                          # x_{k+1} - Ad x_k - Bd u_k = ...
            for j in range(5):
                rows.append(5 * k + j)
                cols.append(5 * k + j)
        for k in range(1, n):
            for j in range(5):
                for m in range(5):
                    rows.append(5 * k + j)
                    cols.append(5 * (k - 1) + m)
        for k in range(n):
            for j in range(5):
                rows.append(5 * k + j)
                cols.append(5 * n + k)
        for k in range(n):                          # angle limit on u_k
            rows.append(5 * n + k)
            cols.append(5 * n + k)
        for k in range(n):                          # rate limit: u_k - delta_k
            rows.append(6 * n + k)
            cols.append(5 * n + k)
        for k in range(1, n):
            rows.append(6 * n + k)
            cols.append(5 * (k - 1) + 4)
        self.a_csc, self.a_perm = _csc_pattern(rows, cols, (7 * n, 6 * n))
        prow, pcol = [], []
        for k in range(n - 1):                      # stage weights, diagonal
            for j in range(5):
                prow.append(5 * k + j)
                pcol.append(5 * k + j)
        for j in range(5):                          # terminal weight, upper triangle
            for m in range(j, 5):
                prow.append(5 * (n - 1) + j)
                pcol.append(5 * (n - 1) + m)
        for k in range(n):
            prow.append(5 * n + k)
            pcol.append(5 * n + k)
        self.p_csc, self.p_perm = _csc_pattern(prow, pcol, (6 * n, 6 * n))

    def _a_values(self, Ad, Bd):
        n = self.horizon
        return np.concatenate((np.ones(5 * n), -Ad[1:].reshape(-1), -Bd.reshape(-1),
                               np.ones(n), np.ones(n), -np.ones(n - 1)))

    def _p_values(self, P_end):
        n = self.horizon
        stage = np.tile(2.0 * self.q_diag, n - 1)
        upper = 2.0 * P_end[np.triu_indices(5)]
        return np.concatenate((stage, upper, np.full(n, 2.0 * self.r)))

    def _interpolate(self, V):
        u = np.clip((V - MIN_DESIGN_SPEED_MPS) / TABLE_STEP_MPS, 0.0, self.speeds.size - 1.0)
        i = np.minimum(u.astype(int), self.speeds.size - 2)
        f = u - i
        return i, f

    def steer(self, e, de, e_psi, de_psi, delta, speed_mps, curvature_1pm, preview=None):
        """Steering command (rad) for the measured error state; ``preview()`` gives the planned
        speeds and curvatures over the horizon."""
        self.calls += 1
        if (self.calls - 1) % self.every:
            return self.held
        v_plan, kappa = preview()
        V = np.maximum(np.asarray(v_plan, dtype=float), MIN_DESIGN_SPEED_MPS)
        V[0] = max(speed_mps, MIN_DESIGN_SPEED_MPS)
        i, f = self._interpolate(V)
        g1 = f[:, None]
        Ad = self.Ad_tab[i] * (1.0 - g1[:, :, None]) + self.Ad_tab[i + 1] * g1[:, :, None]
        Bd = self.Bd_tab[i] * (1.0 - g1) + self.Bd_tab[i + 1] * g1
        Ed = self.Ed_tab[i] * (1.0 - g1) + self.Ed_tab[i + 1] * g1
        ss = self.ss_tab[i] * (1.0 - g1) + self.ss_tab[i + 1] * g1
        P_end = self.P_tab[i[-1]] * (1.0 - f[-1]) + self.P_tab[i[-1] + 1] * f[-1]
        x0 = np.array([e, de, e_psi, de_psi, delta])
        self._update(Ad, Bd, Ed, ss, P_end, x0, V * kappa, kappa)
        result = self.solver.solve(raise_error=False)
        self.solves += 1
        self.iterations += int(result.info.iter)
        n = self.horizon
        if result.info.status in ("solved", "solved inaccurate") and result.x is not None \
                and np.isfinite(result.x[5 * n]):
            self.held = float(result.x[5 * n])
        else:
            self.fallbacks += 1
            self.held = self.lqr.steer(e, de, e_psi, de_psi, delta, speed_mps, curvature_1pm)
        return self.held

    def _update(self, Ad, Bd, Ed, ss, P_end, x0, w, kappa) -> None:
        n = self.horizon
        rhs = Ed * w[:, None]
        rhs[0] += Ad[0] @ x0
        x_ss = np.zeros((n, 5))
        x_ss[:, 2] = ss[:, 0] * kappa
        x_ss[:, 4] = ss[:, 1] * kappa
        u_ss = ss[:, 1] * kappa
        # x_{k+1} is weighted against the steady state of step k's circle
        q_x = -2.0 * self.q_diag * x_ss
        q_x[-1] = -2.0 * P_end @ x_ss[-1]
        q = np.concatenate((q_x.reshape(-1), -2.0 * self.r * u_ss))
        limit, band = self.vehicle.max_steer_rad, self.rate_band
        lo = np.concatenate((rhs.reshape(-1), np.full(n, -limit), np.full(n, -band)))
        hi = np.concatenate((rhs.reshape(-1), np.full(n, limit), np.full(n, band)))
        lo[6 * n] += x0[4]
        hi[6 * n] += x0[4]
        self.solver.update(q=q, l=lo, u=hi, Px=self._p_values(P_end)[self.p_perm],
                           Ax=self._a_values(Ad, Bd)[self.a_perm])


def _csc_pattern(rows, cols, shape):
    """A CSC matrix of the pattern and, for each of its stored entries, the index of the entry
    in the given (row, col) order."""
    order = np.arange(1, len(rows) + 1, dtype=float)
    coo = scipy.sparse.coo_matrix((order, (rows, cols)), shape=shape)
    csc = coo.tocsc()
    csc.sort_indices()
    return csc, csc.data.astype(int) - 1
