"""The speed profile along the route and the quantities derived from it.

Derived quantities follow the discrete model of :mod:`curvespeed.problem` (b linear in station
within each step):

* ``time_s[k]``: sum of step times ``2 ds / (v[j] + v[j+1])`` up to node k (exact for uniform
  acceleration over each step);
* ``accel_mps2[k]``: mean of the accelerations of the steps meeting at node k (one step at the
  ends); the step values themselves are in :attr:`Profile.step_accel_mps2`;
* ``jerk_mps3[k]``: change of step acceleration across node k divided by the time between the two
  steps' mid-points;
* ``lat_accel_mps2[k]``: ``curvature * v^2`` (signed, left positive), the kinematic lateral
  acceleration in the horizontal plane.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .geometry import Geometry
from .problem import SpeedProblem
from .solvers import SolveResult


@dataclass(frozen=True)
class Profile:
    """Speeds at every station of a geometry, with what produced them.

    Attributes
    ----------
    geometry : Geometry
    speed_mps : ndarray
        Speed at each node, m/s.
    step_accel_mps2 : ndarray, shape (n,)
        Acceleration along the path of each step, m/s^2.
    accel_mps2, jerk_mps3, lat_accel_mps2, time_s : ndarray
        Per-node acceleration (m/s^2), jerk (m/s^3), lateral acceleration (m/s^2) and time (s),
        as defined in the module docstring.
    limit_speed_mps : ndarray
        The node-wise speed ceiling (lateral limits, top speed, zones, stops), m/s.
    binding : ndarray of str
        The limit that binds at each node ("lateral_comfort", "grip", "accel", "brake", ...).
    solve : SolveResult
        The solver's result (status, iterations, time).
    usage : dict
        Peak use of each limit (1.0 = at the limit) from the verifier.
    """

    geometry: Geometry
    speed_mps: np.ndarray
    step_accel_mps2: np.ndarray
    accel_mps2: np.ndarray
    jerk_mps3: np.ndarray
    lat_accel_mps2: np.ndarray
    time_s: np.ndarray
    limit_speed_mps: np.ndarray
    binding: np.ndarray
    solve: SolveResult
    usage: dict = field(default_factory=dict)

    @property
    def total_time_s(self) -> float:
        return float(self.time_s[-1])

    @property
    def station_m(self) -> np.ndarray:
        return self.geometry.station_m

    def binding_stretches(self) -> list[dict]:
        """Consecutive runs of the same binding limit: start/end station and the limit."""
        labels = self.binding
        s = self.geometry.station_m
        cuts = np.flatnonzero(labels[1:] != labels[:-1]) + 1
        starts = np.concatenate(([0], cuts))
        ends = np.concatenate((cuts, [labels.size])) - 1
        return [{"start_m": float(s[a]), "end_m": float(s[b]), "binding": str(labels[a])}
                for a, b in zip(starts, ends)]


def step_times(b: np.ndarray, ds: float) -> np.ndarray:
    """Time of each step for squared speeds ``b`` (b linear in station over each step), s."""
    v = np.sqrt(np.maximum(b, 0.0))
    vsum = v[:-1] + v[1:]
    with np.errstate(divide="ignore"):
        return np.where(vsum > 0.0, 2.0 * ds / vsum, np.inf)


def derive(problem: SpeedProblem, b: np.ndarray) -> dict[str, np.ndarray]:
    """Speed, accelerations, jerk and time from squared speeds (module docstring definitions)."""
    b = np.maximum(np.asarray(b, dtype=float), 0.0)
    v = np.sqrt(b)
    a_step = problem.step_accel(b)
    dt = step_times(b, problem.ds)
    t = np.concatenate(([0.0], np.cumsum(dt)))
    acc = np.empty_like(v)
    acc[1:-1] = 0.5 * (a_step[:-1] + a_step[1:])
    acc[0], acc[-1] = a_step[0], a_step[-1]
    jerk = np.zeros_like(v)
    mid_dt = 0.5 * (dt[:-1] + dt[1:])
    with np.errstate(invalid="ignore", divide="ignore"):
        jerk[1:-1] = np.where(np.isfinite(mid_dt), (a_step[1:] - a_step[:-1]) / mid_dt, 0.0)
    if problem.closed:
        # the seam node joins the last step to the first
        acc[0] = acc[-1] = 0.5 * (a_step[-1] + a_step[0])
        jerk[0] = jerk[-1] = (a_step[0] - a_step[-1]) / (0.5 * (dt[-1] + dt[0]))
    return {"speed_mps": v, "step_accel_mps2": a_step, "accel_mps2": acc, "jerk_mps3": jerk,
            "time_s": t}
