"""Lateral path-error model and the LQR tracker with curvature feed-forward.

Path-error dynamics of the single-track model at speed ``V`` with linear tyres (the textbook
error model, e.g. Rajamani, Vehicle Dynamics and Control, 2012, section 3.2, from memory;
written here with per-axle cornering stiffnesses ``C_f``, ``C_r``): states ``e`` (lateral offset
of the centre of gravity from the path, left +), ``de/dt``, ``e_psi`` (heading minus the path's
heading) and ``de_psi/dt``; input the road-wheel angle ``delta``; disturbance the path's yaw
rate ``V kappa``::

    d/dt [e, de, e_psi, de_psi] = A [e, de, e_psi, de_psi] + B delta + E V kappa

    A = [[0, 1, 0, 0],
         [0, -(C_f + C_r)/(m V), (C_f + C_r)/m, (b C_r - a C_f)/(m V)],
         [0, 0, 0, 1],
         [0, (b C_r - a C_f)/(I V), (a C_f - b C_r)/I, -(a^2 C_f + b^2 C_r)/(I V)]]
    B = [0, C_f/m, 0, a C_f/I]
    E = [0, (b C_r - a C_f)/(m V) - V, 0, -(a^2 C_f + b^2 C_r)/(I V)]

The tracker runs at a fixed sample time with its output held (zero-order hold). Its design
model adds the steering actuator's lag as a fifth state (``d delta/dt = (u - delta)/T``), is
discretised exactly (matrix exponential) and its gain ``K`` comes from the discrete algebraic
Riccati equation (:func:`scipy.linalg.solve_discrete_are`), one per speed on a table, linearly
interpolated in between (gain scheduling).

Feed-forward: on a circle of curvature ``kappa`` the model's steady state with ``e = 0`` has
``e_psi = g_psi(V) kappa`` and ``delta = g_delta(V) kappa``, from rows 2 and 4 of the model. The
command is ``u = g_delta kappa - K (x - x_ss)``, so a circle is followed with no lateral offset
and, for this model, ``g_delta = L + K_us V^2`` (the steady-state cornering relation
``delta = L/R + K_us a_y``) and ``g_psi = -b + a m V^2 / (C_r L)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from .vehicle import Vehicle

#: Lowest speed of the error model (m/s): it divides by V; below, the gains of this speed are
#: used (the vehicle is then close to kinematic anyway).
MIN_DESIGN_SPEED_MPS = 1.0
#: Spacing of the gain table, m/s.
TABLE_STEP_MPS = 0.5


@dataclass(frozen=True)
class LqrWeights:
    """Weights of the LQR cost ``sum x' Q x + u' R u`` (Q diagonal; the actuator state is not
    weighted). Defaults follow Bryson's rule for about 0.1 m of offset, 0.05 rad of heading
    error and 0.1 rad of steering, with small weights on the rates."""

    lateral_error: float = 100.0
    lateral_error_rate: float = 1.0
    heading_error: float = 400.0
    heading_error_rate: float = 1.0
    steer: float = 100.0


def weight_matrices(weights: LqrWeights):
    """``(Q, R)`` of the cost: Q diagonal over the five states (the steering angle unweighted),
    R 1x1."""
    Q = np.diag([weights.lateral_error, weights.lateral_error_rate, weights.heading_error,
                 weights.heading_error_rate, 0.0])
    return Q, np.array([[weights.steer]])


def error_model(vehicle: Vehicle, speed_mps: float):
    """``(A, B, E)`` of the path-error model at ``speed_mps`` (module docstring)."""
    m, inertia = vehicle.mass_kg, vehicle.yaw_inertia_kgm2
    a, b = vehicle.front_axle_to_cg_m, vehicle.rear_axle_to_cg_m
    cf, cr = vehicle.front_cornering_stiffness_npr, vehicle.rear_cornering_stiffness_npr
    v = float(speed_mps)
    moment = b * cr - a * cf
    turning = a * a * cf + b * b * cr
    A = np.array([[0.0, 1.0, 0.0, 0.0],
                  [0.0, -(cf + cr) / (m * v), (cf + cr) / m, moment / (m * v)],
                  [0.0, 0.0, 0.0, 1.0],
                  [0.0, moment / (inertia * v), -moment / inertia, -turning / (inertia * v)]])
    B = np.array([0.0, cf / m, 0.0, a * cf / inertia])
    E = np.array([0.0, moment / (m * v) - v, 0.0, -turning / (inertia * v)])
    return A, B, E


def actuated_model(vehicle: Vehicle, speed_mps: float):
    """The error model with the steering lag as fifth state: ``(A5, B5, E5)``."""
    A, B, E = error_model(vehicle, speed_mps)
    lag = vehicle.steer_lag_s
    A5 = np.zeros((5, 5))
    A5[:4, :4] = A
    A5[:4, 4] = B
    A5[4, 4] = -1.0 / lag
    B5 = np.zeros(5)
    B5[4] = 1.0 / lag
    E5 = np.concatenate((E, [0.0]))
    return A5, B5, E5


def discretise(A, B, E, dt_s: float):
    """Exact zero-order-hold discretisation of ``dx/dt = A x + B u + E w``: ``(Ad, Bd, Ed)``."""
    n = A.shape[0]
    block = np.zeros((n + 2, n + 2))
    block[:n, :n] = A
    block[:n, n] = B
    block[:n, n + 1] = E
    phi = scipy.linalg.expm(block * dt_s)
    return phi[:n, :n], phi[:n, n], phi[:n, n + 1]


def steady_state_gains(vehicle: Vehicle, speed_mps: float) -> tuple[float, float]:
    """``(g_psi, g_delta)``: heading error and steering angle per unit curvature on a circle
    followed with zero lateral offset, at ``speed_mps`` (module docstring)."""
    A, B, E = error_model(vehicle, speed_mps)
    M = np.array([[A[1, 2], B[1]], [A[3, 2], B[3]]])
    rhs = -speed_mps * np.array([E[1], E[3]])
    g_psi, g_delta = np.linalg.solve(M, rhs)
    return float(g_psi), float(g_delta)


def design_gain(vehicle: Vehicle, speed_mps: float, dt_s: float,
                weights: LqrWeights = LqrWeights()):
    """LQR gain ``K`` (shape (5,)) of the discretised actuated model, and its ``Ad``, ``Bd``."""
    A5, B5, E5 = actuated_model(vehicle, speed_mps)
    Ad, Bd, _ = discretise(A5, B5, E5, dt_s)
    Q, R = weight_matrices(weights)
    Bc = Bd.reshape(5, 1)
    P = scipy.linalg.solve_discrete_are(Ad, Bc, Q, R)
    K = np.linalg.solve(R + Bc.T @ P @ Bc, Bc.T @ P @ Ad).ravel()
    return K, Ad, Bd


class LqrTracker:
    """Scheduled LQR steering with curvature feed-forward (module docstring).

    Parameters
    ----------
    vehicle : Vehicle
    dt_s : float
        The tracker's sample time, s.
    top_speed_mps : float
        Highest speed of the gain table (above it the top row's gains are used).
    weights : LqrWeights
    """

    needs_preview = False

    def __init__(self, vehicle: Vehicle, dt_s: float, top_speed_mps: float,
                 weights: LqrWeights = LqrWeights()):
        top = max(float(top_speed_mps), MIN_DESIGN_SPEED_MPS + TABLE_STEP_MPS)
        n = int(math.ceil((top - MIN_DESIGN_SPEED_MPS) / TABLE_STEP_MPS)) + 1
        self.speeds = MIN_DESIGN_SPEED_MPS + TABLE_STEP_MPS * np.arange(n)
        rows = []
        for v in self.speeds:
            K, _, _ = design_gain(vehicle, v, dt_s, weights)
            g_psi, g_delta = steady_state_gains(vehicle, v)
            rows.append(tuple(K.tolist()) + (g_psi, g_delta))
        self.table = np.array(rows)
        self._rows = [tuple(r) for r in rows]

    def gains_at(self, speed_mps: float):
        """``(k1..k5, g_psi, g_delta)`` at ``speed_mps``, linearly interpolated on the table."""
        u = (speed_mps - MIN_DESIGN_SPEED_MPS) / TABLE_STEP_MPS
        if u <= 0.0:
            return self._rows[0]
        i = int(u)
        if i >= len(self._rows) - 1:
            return self._rows[-1]
        f = u - i
        lo, hi = self._rows[i], self._rows[i + 1]
        return tuple(p + f * (q - p) for p, q in zip(lo, hi))

    def steer(self, e, de, e_psi, de_psi, delta, speed_mps, curvature_1pm, preview=None):
        """Steering command (rad, before the angle limit) for the measured error state."""
        k1, k2, k3, k4, k5, g_psi, g_delta = self.gains_at(speed_mps)
        delta_ss = g_delta * curvature_1pm
        return delta_ss - (k1 * e + k2 * de + k3 * (e_psi - g_psi * curvature_1pm)
                           + k4 * de_psi + k5 * (delta - delta_ss))
