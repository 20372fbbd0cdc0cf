"""The MPC tracker's QP against the same problem written from its definition in cvxpy and
solved by Clarabel (an independent reference library): the first steering command agrees.

The cvxpy model is written from the MPC's documented formulation (curvespeed.dynamics.mpc
docstring) with each step's model discretised directly at its own speed (the tracker
interpolates a 0.5 m/s table; the test's speeds lie on the table, so both use the same
matrices), so the check covers the tracker's sparse bookkeeping: the constraint and cost
patterns, their permutation into OSQP's columns, the bounds and the warm-started updates.
"""

from __future__ import annotations

import cvxpy as cp
import numpy as np
import pytest
import scipy.linalg

from curvespeed.dynamics.lqr import (LqrWeights, actuated_model, discretise,
                                     steady_state_gains, weight_matrices)
from curvespeed.dynamics.mpc import MpcTracker
from curvespeed.dynamics.vehicle import DEFAULT_VEHICLE

DT = 0.04
N = 12


def reference_command(x0, speeds, curvature):
    v = DEFAULT_VEHICLE
    Q, R = weight_matrices(LqrWeights())
    x = cp.Variable((N + 1, 5))
    u = cp.Variable(N)
    cons, cost = [x[0] == x0], 0
    for k in range(N):
        Ad, Bd, Ed = discretise(*actuated_model(v, speeds[k]), DT)
        g_psi, g_delta = steady_state_gains(v, speeds[k])
        x_ss = np.array([0.0, 0.0, g_psi, 0.0, g_delta]) * curvature[k]
        cons.append(x[k + 1] == Ad @ x[k] + Bd * u[k] + Ed * speeds[k] * curvature[k])
        cons += [cp.abs(u[k]) <= v.max_steer_rad,
                 cp.abs(u[k] - x[k, 4]) <= v.max_steer_rate_radps * v.steer_lag_s]
        weight = Q
        if k == N - 1:
            weight = scipy.linalg.solve_discrete_are(Ad, Bd.reshape(5, 1), Q, R)
        cost += cp.quad_form(x[k + 1] - x_ss, weight) + R[0, 0] * cp.square(u[k] - g_delta
                                                                               * curvature[k])
    cp.Problem(cp.Minimize(cost), cons).solve(solver=cp.CLARABEL)
    return float(u.value[0])


@pytest.mark.parametrize("x0", [
    np.array([0.05, 0.0, -0.02, 0.0, 0.01]),     # small errors: no constraint active
    np.array([1.5, 0.3, 0.1, 0.0, 0.0]),         # 1.5 m off: the rate limit binds at first
])
def test_first_command_matches_the_reference_qp(x0):
    speeds = 12.0 + 0.5 * (np.arange(N) // 3)     # on the table: 12, 12, 12, 12.5, ...
    curvature = np.linspace(0.0, 1 / 40.0, N)      # entering a 40 m curve
    tracker = MpcTracker(DEFAULT_VEHICLE, DT, N, 30.0)
    for _ in range(2):                             # a second, warm-started solve as well
        command = tracker.steer(*x0[:4], x0[4], speeds[0], curvature[0],
                                lambda: (speeds, curvature))
    expected = reference_command(x0, speeds, curvature)
    # OSQP stops when its residuals are below 1e-5 (absolute plus relative to values of
    # 0.1-1): the commands may differ by a few 1e-5 rad (observed 1e-9 free, 1.3e-6 on the
    # bound); Clarabel's own tolerance is 1e-8
    assert command == pytest.approx(expected, abs=5e-5)
    if x0[0] > 1.0:
        band = DEFAULT_VEHICLE.max_steer_rate_radps * DEFAULT_VEHICLE.steer_lag_s
        assert abs(command - x0[4]) == pytest.approx(band, abs=1e-5)   # the bound is active
    assert tracker.fallbacks == 0
