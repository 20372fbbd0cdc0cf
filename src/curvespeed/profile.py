"""The speed profile along the route and the quantities derived from it.

Derived quantities follow the discrete model of :mod:`curvespeed.problem` (b linear in station
within each step):

* ``time_s[k]``: sum of step times ``2 ds / (v[j] + v[j+1])`` up to node k (exact for uniform
  acceleration over each step), ``c ds / v`` on a step next to rest driven with a jerk ramp
  (:attr:`Profile.rest_time_coef`), ``c ds / (v[j] + v[j+1])`` on a step a launch's jerk ramp
  spans (:attr:`Profile.linear_time_coef`);
* ``accel_mps2[k]``: mean of the accelerations of the steps meeting at node k (one step at the
  ends); the step values themselves are in :attr:`Profile.step_accel_mps2`;
* ``jerk_mps3[k]``: change of step acceleration across node k divided by the node's time base
  (:meth:`SpeedProblem.node_jerk_time <curvespeed.problem.SpeedProblem.node_jerk_time>`: about
  the time between the two steps' mid-points, see :mod:`curvespeed.problem`);
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
    rest_time_coef : ndarray, shape (n,)
        For each step next to rest planned with a jerk bound (exactly one end at rest), the
        ``c`` of its time ``c ds / v``, between 2 and 3: a jerk ramp at the rest end and
        constant acceleration up to the moving end (:mod:`curvespeed.rest_step`); 0 for every
        other step, which has constant acceleration.
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
    extremes : dict
        Peak magnitudes in SI units (acceleration, deceleration, lateral acceleration, jerk,
        lateral jerk) from the verifier.
    envelope_time_s : float or None
        Time of the forward-backward envelope on the same route and limits: the lower bound on
        the time of any profile within them, s.
    linear_time_coef : ndarray, shape (n,) or None
        For each step away from rest that a launch's (or a stop's) jerk ramp spans, planned as
        driven at constant jerk, the ``c`` of its time ``c ds / (v[k] + v[k+1])``, near 2
        (:func:`curvespeed.launch_steps.launch_steps`); 0 for every other step.
        None: no such step.
    switch_step : ndarray of int, shape (n,), or None
        The steps inside which the jerk switches once, by pattern
        (:data:`curvespeed.jerk_switch.PATTERNS`, 0 elsewhere; timed by ``linear_time_coef``):
        where a move's acceleration turns inside a step, or reaches or leaves its cap or its top
        speed. None: no such step.
    """

    geometry: Geometry
    speed_mps: np.ndarray
    step_accel_mps2: np.ndarray
    rest_time_coef: np.ndarray
    accel_mps2: np.ndarray
    jerk_mps3: np.ndarray
    lat_accel_mps2: np.ndarray
    time_s: np.ndarray
    limit_speed_mps: np.ndarray
    binding: np.ndarray
    solve: SolveResult
    usage: dict = field(default_factory=dict)
    extremes: dict = field(default_factory=dict)
    envelope_time_s: float | None = None
    linear_time_coef: np.ndarray | None = None
    switch_step: np.ndarray | None = None

    @property
    def time_gap_to_envelope(self) -> float | None:
        """How much longer than the jerk-free envelope the profile takes, as a fraction."""
        if self.envelope_time_s is None:
            return None
        return self.total_time_s / self.envelope_time_s - 1.0

    @property
    def rest_step(self) -> np.ndarray:
        """Steps next to rest driven with a jerk ramp (``rest_time_coef > 0``)."""
        return self.rest_time_coef > 0.0

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


#: A change of acceleration at a node no larger than this, m/s^2, is no change: the two steps'
#: accelerations come from different squared speeds (and, next to rest, a shape factor), so
#: where they should be equal they differ by round-off. That matters where the node's time base
#: is nil: a step next to rest whose ramp fills it exactly (``u = 1``, no flat part) must leave
#: the acceleration unchanged at its moving node, and the solvers' answers differed there by
#: up to 2.3e-13 m/s^2 (0.5 m stations, 3 m/s^2 and 3 m/s^3), which over a time base of
#: 2e-16 s read as jerks up to 5,600 m/s^3 (1,853 times the bound). The twin in
#: ``solvers/_window_check.c``.
ACCEL_ROUND_OFF_MPS2 = 1e-9


def derive(problem: SpeedProblem, b: np.ndarray, lateral_jerk: bool = True
           ) -> dict[str, np.ndarray]:
    """Speed, accelerations, jerk and time from squared speeds (module docstring definitions).

    Each step has an acceleration at its first and at its last node (equal for a
    constant-acceleration step; 0 at the rest end and ``f`` times the mean at the moving end
    for a step next to rest under a jerk bound, see :mod:`curvespeed.problem`). A node's
    acceleration is the mean of the values the steps meeting there give it; its jerk is their
    difference over the node's time base (:meth:`SpeedProblem.node_jerk_time
    <curvespeed.problem.SpeedProblem.node_jerk_time>`). On an open route the vehicle is taken to
    be steady (zero acceleration) before the start and after the end, so the first and last
    nodes carry the jerk of taking up and giving back the acceleration (a receding-horizon window
    starts from the vehicle's acceleration instead, :attr:`SpeedProblem.accel_start_mps2`, and
    may end free). On a closed route the
    seam joins the last step to the first. ``step_jerk_mps3`` is the jerk inside each step (the
    ramp of a step next to rest; 0 for the constant-acceleration steps). ``step_lat_jerk_mps3``
    bounds the lateral jerk along each step as driven, ``node_lat_jerk_mps3`` is the lateral
    jerk at each node with one step's road and the other's acceleration (both defined in
    :mod:`curvespeed.problem`). ``lateral_jerk=False`` leaves those two out (a caller that
    needs no lateral jerk spares their cost).
    """
    b = np.maximum(np.asarray(b, dtype=float), 0.0)
    v = np.sqrt(b)
    a_step = problem.step_accel(b)
    a_first = a_step * problem.accel_factor_start     # at the step's first node
    a_last = a_step * problem.accel_factor_end        # at the step's last node
    dt = problem.step_times(b)
    t = np.concatenate(([0.0], np.cumsum(dt)))
    if problem.closed:
        a_before = np.concatenate(([a_last[-1]], a_last))
        a_after = np.concatenate((a_first, [a_first[0]]))
    else:
        a0, tol = problem.accel_start_mps2, problem.accel_start_tolerance_mps2
        a_start = min(max(a_first[0], a0 - tol), a0 + tol)
        a_before = np.concatenate(([a_start], a_last))
        # a free window end keeps its acceleration beyond (its braking reserve bounds it)
        a_out = a_last[-1] if problem.end_reserve is not None else 0.0
        a_after = np.concatenate((a_first, [a_out]))
    acc = 0.5 * (a_before + a_after)
    if not problem.closed:
        acc[0], acc[-1] = a_after[0], a_before[-1]
    tau = problem.node_jerk_time(b)
    with np.errstate(invalid="ignore", divide="ignore"):
        change = a_after - a_before
        jerk = np.where(np.abs(change) <= ACCEL_ROUND_OFF_MPS2, 0.0,
                        np.where(np.isfinite(tau) & (tau > 0), change / tau, np.inf))
    out = {"speed_mps": v, "step_accel_mps2": a_step, "accel_mps2": acc, "jerk_mps3": jerk,
           "time_s": t, "step_jerk_mps3": problem.step_ramp_jerk(b),
           "step_accel_first_mps2": a_first, "step_accel_last_mps2": a_last}
    if lateral_jerk:
        # lateral jerk d(kappa v^2)/dt along each step and across each node (curvespeed.problem)
        out["step_lat_jerk_mps3"] = problem.step_lateral_jerk(b)
        out["node_lat_jerk_mps3"] = problem.node_lateral_jerk(b)
    return out
