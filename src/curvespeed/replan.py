"""Receding-horizon replanning: the profile of the next stretch from the vehicle's own state.

A simulator or a vehicle in the loop calls :meth:`Replanner.replan` with where the vehicle is,
how fast it goes and how it accelerates; the answer is the fastest profile over the next
``horizon_m`` metres (a *window*) within the same limits as a whole-route plan. Everything
route-wide is computed once, in the constructor: the discrete problem of the whole route
(:func:`curvespeed.problem.build_problem`), the speed ceiling of every station and the
route's braking envelope. A window only slices them and solves its own small problem with the
same solver entry point as a whole-route plan (:func:`curvespeed.solvers.convex.solve_convex`,
which hands its QPs to the configured backend).

How a window is posed (:mod:`curvespeed.replan_window` builds it):

* **Start.** The window starts at the station at or just behind the vehicle, with the squared
  speed the vehicle had there at its acceleration (``v^2 - 2 a (s - s_k)``, exact for uniform
  acceleration over less than a station step); its ``time_s`` is 0 where the vehicle is. The
  jerk at that station is the change from the vehicle's acceleration to the first step's
  (:attr:`curvespeed.problem.SpeedProblem.accel_start_mps2`), so a window never asks for a
  jump in acceleration. As at a station inside a route, the change is a ramp centred on the
  station, which a vehicle there is half-way through (it reports the mean acceleration), so
  half of the ramp's time is left (:meth:`.RouteTables._start_ramp`); the acceleration is taken
  within ``accel_tolerance_mps2`` of the one given (its accuracy). A stop at the vehicle's own
  station counts as reached when the vehicle stands there and as passed when it moves; a
  vehicle standing elsewhere sets off with the jerk ramp of a step next to rest.
* **End.** Unless the window reaches the end of an open route (whose end speed it keeps), its
  last speed and acceleration are free but must leave room to brake for what lies beyond: at
  most the route's braking envelope there (the backward pass of the forward-backward method
  over the whole route's ceilings, :func:`curvespeed.solvers.envelope.brake_reach`), less what
  the envelope falls by while a jerk-limited braking builds up from the window's last
  acceleration
  (:attr:`curvespeed.problem.SpeedProblem.end_reserve`, derived in
  :meth:`.RouteTables._end_reserve`): a window never commits to a speed the route beyond it
  cannot absorb. The lateral jerk bound, where set, holds inside the window but is not part
  of this reserve.
* **Inside.** Speed zones, stops, superelevation, grade, every limit and the jerk bounds hold as
  in a whole-route plan, and the window's answer is checked by the verifier
  (:func:`curvespeed.verify.verify_profile`) before it is returned.
* **Loops.** On a closed route the window runs on across the seam (stations start again at 0);
  on an open route it is cut at the route's end.

States the limits cannot continue (faster than a curve, a zone or a stop ahead allows even
with full braking, or an acceleration the jerk bound cannot take back in time) raise
:class:`~curvespeed.errors.InfeasibleError` naming the station and the cause: the planner does
not plan beyond its limits, so slowing down harder is for the vehicle's own safety functions.
A state they miss by a little (a vehicle a little faster than a plan that rides its braking or
lateral limit, which no tracking avoids) is continued with the comfort limits raised by at
most ``relax_limits`` (:attr:`WindowProfile.relaxed` says by how much; never friction, power,
the top speed, zones or stops).

Starting point: the sequential-convex iterations build conservative rows around their current
point, and where the vehicle rides a limit the first point must be near the answer or the
first QP has none. A window starts from the previous window's answer moved to its stations
(a warm start of the sequential-convex iterations; each QP itself starts cold, the banded
method's slacks pushed into the interior row by row around that point, which lies near the
QP's answer: ``ConvexOptions.qp_start_near_centre``), else from the whole route's plan (made
once, in the constructor), else from its envelope (a vehicle far off the plan). A fresh
Replanner, or :meth:`Replanner.reset`, keeps runs independent. With
``options=ConvexOptions(max_iterations=1)`` each call solves one QP from the previous window's
answer (the sequential-convex iterations are spread over successive calls, each window
feasible and verified; the iteration cap's warning is not given for windows): about a third of
the time per call, at a profile that converges over calls at the same state.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from . import jerk_switch, rest_step
from .errors import InfeasibleError, ReplanError, SolverError
from .geometry import Geometry
from .jerk_model import is_linear_step
from .limits import Limits, RouteConstraints, validate_limits
from .problem import SpeedProblem
from .solvers import SolveResult, SolveStatus

__all__ = ["Replanner", "WindowProfile"]


@dataclass(frozen=True)
class WindowProfile:
    """The profile of one window, from the vehicle's station onward.

    Attributes
    ----------
    station_m : ndarray
        Route station of each node, metres (on a loop they start again at 0 after the seam).
    distance_m : ndarray
        Distance along the window from its first node, metres (increasing).
    speed_mps : ndarray
        Planned speed at each node, m/s.
    accel_mps2 : ndarray
        Acceleration at each node, m/s^2 (mean of the steps meeting there, as in a
        :class:`~curvespeed.profile.Profile`; the first step's at the first node).
    time_s : ndarray
        Time along the window, s, 0 where the vehicle is (the first node lies up to a station
        step behind it, at a slightly negative time).
    start_station_m : float
        The vehicle's station as given (the first node is the station at or behind it), m.
    end_speed_bound_mps : float
        The most the window's last node may have (the braking bound, or the route's end speed).
    status : SolveStatus
        The solver's outcome (optimal, or optimal to a looser tolerance).
    solver : str
        The solver that produced it ("convex", or "envelope" without a jerk bound).
    iterations, qp_iterations : int
        Sequential-convex iterations and interior-point iterations summed over them.
    solve_time_s : float
        Wall time of :meth:`Replanner.replan`, s.
    warm_started : bool
        Whether the previous window's answer was the starting point.
    relaxed : float
        0 when the window keeps every limit; otherwise the fraction by which its comfort
        limits were raised to continue the vehicle's state (:class:`Replanner`,
        ``relax_limits``). The window keeps the raised limits (its :attr:`problem` has them).
    problem : SpeedProblem
        The window's discrete problem (for checks: :func:`curvespeed.verify.verify_profile`).
    """

    station_m: np.ndarray
    distance_m: np.ndarray
    speed_mps: np.ndarray
    accel_mps2: np.ndarray
    time_s: np.ndarray
    start_station_m: float
    end_speed_bound_mps: float
    status: SolveStatus
    solver: str
    iterations: int
    qp_iterations: int
    solve_time_s: float
    warm_started: bool
    relaxed: float
    problem: SpeedProblem

    def state_at(self, time_s: float) -> tuple[float, float, float]:
        """``(station_m, speed_mps, accel_mps2)`` of a vehicle that drives this window exactly,
        ``time_s`` after the window's time 0 (where the vehicle was), as the window is driven:
        constant acceleration along each step, a jerk ramp on a step next to rest
        (:mod:`curvespeed.rest_step`), constant jerk on a step a launch's ramp spans; clamped
        to the window's ends.

        A simulator that follows a window perfectly passes this state to the next
        :meth:`Replanner.replan`: it is the plan's own motion, so the next window continues it
        within the limits. Interpolating the node arrays linearly in time instead puts the
        vehicle a few millimetres off its own speed (station is quadratic in time): enough to
        start a window above a lateral limit the plan rides exactly.
        """
        t = self.time_s
        j = int(np.clip(np.searchsorted(t, time_s, side="right") - 1, 0, t.size - 2))
        tau = min(max(float(time_s) - t[j], 0.0), t[j + 1] - t[j])
        d, v, a = _step_state(self.problem, self.speed_mps, self.distance_m, t, j, tau)
        return float(self.station_m[j] + d), v, a


def _step(problem, speed, distance, j: int):
    """Step ``j`` as it is driven: ``(kind, u, v0, v1, ds)``, kind "leaving" or "arriving"
    for a jerk-ramped step next to rest (shape ``u``, :mod:`curvespeed.rest_step`), "linear"
    for a step a launch's jerk ramp spans (constant jerk,
    :func:`curvespeed.rest_step.linear_accel_step`), the step's
    :class:`~curvespeed.jerk_switch.SwitchShapes` where the jerk switches inside it, else
    "constant" (constant acceleration)."""
    v0, v1 = float(speed[j]), float(speed[j + 1])
    ds = float(distance[j + 1] - distance[j])
    u = float(problem.rest_u[j]) if j < problem.rest_u.size else math.nan
    linear = j < problem.time_coef.size and bool(is_linear_step(problem.time_coef[j], u))
    kind = ("linear" if linear else "constant" if math.isnan(u) or (v0 != 0.0 and v1 != 0.0)
            else "leaving" if v0 == 0.0 else "arriving")
    if linear and problem.switch_step is not None and problem.switch_step[j]:
        # anchored on the step across its slower node in the window; where the window starts
        # inside that one, or its speeds fit no such motion, driven at constant jerk
        shape = jerk_switch.step_shape(distance, speed, problem.rest_u, problem.time_coef,
                                       problem.switch_step, j)
        kind = "linear" if shape is None else shape
    return kind, u, v0, v1, ds


def _step_state(problem, speed, distance, time, j: int, tau: float):
    """Distance from node ``j``, speed and acceleration ``tau`` seconds into step ``j``."""
    kind, u, v0, v1, ds = _step(problem, speed, distance, j)
    if kind == "leaving":
        d, v, a = rest_step.leaving_state_at_time(u, v1, ds, tau)
        return float(d), float(v), float(a)
    if kind == "arriving":                                      # leaving, driven backwards
        d, v, a = rest_step.leaving_state_at_time(u, v0, ds, (time[j + 1] - time[j]) - tau)
        return ds - float(d), float(v), -float(a)
    if kind == "linear":
        d, v, a = rest_step.linear_state_at_time(ds, v0, v1, time[j + 1] - time[j], tau)
        return float(d), float(v), float(a)
    if not isinstance(kind, str):                               # the jerk switches inside
        d, v, a = jerk_switch.driven_state_at_time(kind, np.array([j]), ds, v0, v1,
                                                   time[j + 1] - time[j], tau)
        return float(d[0]), float(v[0]), float(a[0])
    a = (v1 * v1 - v0 * v0) / (2.0 * ds)
    return v0 * tau + 0.5 * a * tau * tau, v0 + a * tau, a


def _time_into_step(problem, speed, distance, time, j: int, d: float) -> float:
    """Seconds into step ``j`` at which the distance ``d`` from node ``j`` is reached."""
    kind, u, v0, v1, ds = _step(problem, speed, distance, j)
    d = min(max(d, 0.0), ds)
    if kind == "leaving":
        return float(rest_step.leaving_time_at_distance(u, v1, ds, d))
    if kind == "arriving":
        return float(time[j + 1] - time[j]
                     - rest_step.leaving_time_at_distance(u, v0, ds, ds - d))
    if kind == "linear":
        return float(rest_step.linear_time_at_distance(ds, v0, v1, time[j + 1] - time[j], d))
    if not isinstance(kind, str):                               # the jerk switches inside
        return float(jerk_switch.driven_time_at_distance(kind, np.array([j]), ds, v0, v1,
                                                         time[j + 1] - time[j], d)[0][0])
    a = (v1 * v1 - v0 * v0) / (2.0 * ds)
    root = math.sqrt(max(v0 * v0 + 2.0 * a * d, 0.0))
    return 2.0 * d / (v0 + root) if v0 + root > 0.0 else 0.0


class Replanner:
    """Receding-horizon planner along one route (module docstring).

    Parameters
    ----------
    geometry : Geometry
        The route (:func:`curvespeed.geometry.build_geometry`).
    limits : Limits
        Vehicle limits; validated here, with a warning where they look implausible.
    constraints : RouteConstraints
        Zones, stops, superelevation, friction sections, end speeds (the start speed is the
        vehicle's, per call). Those given by position are placed on the route as
        :func:`curvespeed.planner.plan_profile` places them (:attr:`constraints` holds them
        placed).
    horizon_m : float
        Length of each window, metres (cut at the end of an open route, at most one lap).
    options : ConvexOptions, optional
        Settings of the convex solver (default: its defaults, on one thread: a window is one
        QP); ``qp_start_near_centre`` is set for the windows that start from the previous
        one's answer. A comfort weight counts the first node's change of acceleration from
        steady, not from the vehicle's (the jerk bound itself starts from the vehicle's).
    relax_limits : float
        A state the limits cannot continue by a little (a vehicle a few centimetres per second
        faster than a plan that rides its braking or lateral limit, which no real tracking
        avoids) is continued with the comfort limits -- acceleration, deceleration, lateral
        acceleration, jerk and lateral jerk, never friction, power, the top speed, zones or
        stops -- raised by the smallest of 0.1 %, 1 % and this fraction that allows it;
        :attr:`WindowProfile.relaxed` reports it. 0 raises
        :class:`~curvespeed.errors.InfeasibleError` instead.
    accel_tolerance_mps2 : float
        Accuracy of the acceleration passed to :meth:`replan`, m/s^2: the first node's jerk is
        counted from the nearest value within it. A little above 0 lets a state that rides the
        jerk bound exactly (as a whole-route plan does into a speed cap) be continued within the
        QP's tightened rows; set it to the accuracy of a measured acceleration.
    warn_limits : bool
        False skips the limits' warnings, for a caller that gave them already.

    Raises
    ------
    ReplanError
        A horizon that is not a finite number of at least two station steps, or a tolerance or
        relaxation out of its range.
    LimitsError, InfeasibleError
        As :func:`curvespeed.planner.plan_profile` would for the same route and limits.
    """

    def __init__(self, geometry: Geometry, limits: Limits,
                 constraints: RouteConstraints = RouteConstraints(), horizon_m: float = 300.0,
                 options=None, relax_limits: float = 0.05, accel_tolerance_mps2: float = 0.01,
                 warn_limits: bool = True):
        from .replan_window import RouteTables
        from .solvers.convex import ConvexOptions

        validate_limits(limits, "limits", warn=warn_limits)
        ds = float(geometry.spacing_m)
        if not _is_number(horizon_m) or not 2.0 * ds <= horizon_m < math.inf:
            raise ReplanError(f"horizon_m must be a finite number of at least two station steps "
                              f"({2.0 * ds:g} m on this route), got {horizon_m!r}")
        if not _is_number(accel_tolerance_mps2) or not 0.0 <= accel_tolerance_mps2 < math.inf:
            raise ReplanError(f"accel_tolerance_mps2 must be a finite number, zero or more, got "
                              f"{accel_tolerance_mps2!r}")
        self.accel_tolerance_mps2 = float(accel_tolerance_mps2)
        if not _is_number(relax_limits) or not 0.0 <= relax_limits <= 0.5:
            raise ReplanError(f"relax_limits must be a fraction from 0 to 0.5, got "
                              f"{relax_limits!r}")
        self.relax_limits = float(relax_limits)
        from .placement import place_positions

        # stops, zones, friction sections and superelevation given by position, as plan places
        # them (the snapping distances are kept on the placed constraints)
        constraints = place_positions(constraints, geometry)
        self.geometry = geometry
        self.limits = limits
        self.constraints = constraints
        self.horizon_m = float(horizon_m)
        self.options = options if options is not None else ConvexOptions(threads=1)
        self._tables = RouteTables(geometry, limits, constraints)
        self._jerk = (limits.max_jerk_mps3 is not None
                      or limits.max_lateral_jerk_mps3 is not None)
        if self._jerk:
            self._tables.set_route_plan(self._route_plan())
        self._previous = None       # (first node index, squared speeds) of the last window

    def _route_plan(self) -> np.ndarray:
        """The whole route's jerk-bounded plan (squared speeds), once: each window's starting
        point where the previous window does not reach."""
        from dataclasses import replace

        from .solvers.convex import solve_convex

        whole = self._tables.whole
        # on every core, iterated to the end whatever the windows' own cap
        settings = replace(self.options, threads=None,
                           max_iterations=max(self.options.max_iterations, 30))
        return solve_convex(whole, settings).b

    def reset(self) -> None:
        """Forget the previous window (the next call starts cold, as after a jump)."""
        self._previous = None

    def replan(self, station_m: float, speed_mps: float, accel_mps2: float = 0.0
               ) -> WindowProfile:
        """The window's profile from the vehicle's state (module docstring).

        Parameters
        ----------
        station_m : float
            The vehicle's route station, metres (on a loop any station, taken modulo the lap).
        speed_mps : float
            Its speed, m/s (zero or positive).
        accel_mps2 : float
            Its acceleration along the path, m/s^2.

        Raises
        ------
        ReplanError
            A state that is not finite, a negative speed, a station off an open route or at its
            very end.
        InfeasibleError
            A state the limits cannot continue (module docstring), with the cause.
        SolverError
            The solver failed, or the verifier refused its answer (a defect: please report it).
        """
        t0 = time.perf_counter()
        s, v, a = self._check_state(station_m, speed_mps, accel_mps2)
        k0, b0 = self._tables.snap(s, v, a)
        args = (k0, b0, a, self.horizon_m, self.accel_tolerance_mps2)
        steps = [x for x in _RELAX_STEPS if x < self.relax_limits] + [self.relax_limits]
        failure = None
        for relaxed in [0.0] + (steps if self.relax_limits > 0.0 else []):
            try:
                # a speed above its own station's ceiling is refused within the limits; with
                # them raised the window's own rows judge it
                window = self._tables.window(*args, check_start=relaxed == 0.0)
                b, result, warmed, window = self._plan_window(window, relaxed)
                break
            except (InfeasibleError, SolverError) as exc:     # a QP that did not solve too
                failure = failure or exc
        else:
            raise failure
        derived = self._check(window, b)
        self._previous = (k0, b)
        return self._profile(window, b, derived, result, s, warmed, relaxed,
                             time.perf_counter() - t0)

    def _plan_window(self, window, relaxed: float):
        """The window's squared speeds within its limits, the comfort limits raised by the
        fraction ``relaxed`` (module docstring)."""
        if relaxed > 0.0:
            window = self._tables.relaxed(window, relaxed)
        env = self._tables.envelope(window)
        if not self._jerk:
            return env.b, env, False, window
        b, result, warmed = self._solve(window, env)
        return b, result, warmed, window

    def _check_state(self, station_m, speed_mps, accel_mps2):
        values = {"station_m": station_m, "speed_mps": speed_mps, "accel_mps2": accel_mps2}
        for name, value in values.items():
            if not _is_number(value) or not math.isfinite(value):
                raise ReplanError(f"replan: {name} must be a finite number, got {value!r}; "
                                  "pass the vehicle's state in SI units")
        s, v, a = float(station_m), float(speed_mps), float(accel_mps2)
        if v < 0.0:
            raise ReplanError(f"replan: speed_mps must be zero or positive, got {v:g} m/s; the "
                              "planner moves forward along the route's stations only")
        geo = self.geometry
        if geo.closed:
            return s % geo.length_m, v, a
        from .limits import END_TOLERANCE_M

        last = geo.length_m - 2.0 * geo.spacing_m
        if not -END_TOLERANCE_M <= s <= geo.length_m + END_TOLERANCE_M:
            raise ReplanError(f"replan: station {s:g} m lies outside the route "
                              f"(0..{geo.length_m:.2f} m, open); check the vehicle's "
                              "station against the route")
        if s > last + 0.5 * geo.spacing_m:
            raise ReplanError(f"replan: station {s:g} m is within two station steps of the "
                              f"route's end ({geo.length_m:.2f} m): there is nothing left to "
                              "plan; stop replanning at the end of the route")
        return min(max(s, 0.0), geo.length_m), v, a

    def _solve(self, window, env: SolveResult):
        """The window's jerk-bounded profile. The first QP's rows are conservative around the
        point they are built at, which must be near the answer where the vehicle rides a limit
        (braking into a bend on the plan): from the previous window's answer, else the whole
        route's plan, else the window's envelope (a vehicle far off the plan)."""
        from dataclasses import replace

        from .solvers.convex import solve_convex

        failure = None
        # QPs centred on the previous window's answer lie near their own answers: the banded
        # method starts there (ConvexOptions.qp_start_near_centre); from the route's plan or
        # the envelope (a vehicle off the plan) the centre may be far, and it spreads out
        near = replace(self.options, qp_start_near_centre=True)
        for warm, warmed in self._starting_points(window):
            try:
                # a cap of one or a few iterations per window is a choice (module docstring)
                result = solve_convex(window.problem, near if warmed else self.options,
                                      envelope=env, warm_start=warm, cap_warning=False)
                return result.b, result, warmed
            except (InfeasibleError, SolverError) as exc:
                failure = failure or exc
        kind = InfeasibleError if isinstance(failure, InfeasibleError) else SolverError
        raise kind(self._tables.explain_stuck(window, failure)) from None

    def _starting_points(self, window):
        """(squared speeds, or None for the envelope; whether from the previous window)."""
        route = self._tables.route_b[window.idx]
        if self._previous is not None:
            k_prev, b_prev = self._previous
            shift = int(window.idx[0]) - k_prev
            if self.geometry.closed:
                shift %= self._tables.nv
            if 0 <= shift < b_prev.size:
                warm = route.copy()
                kept = min(b_prev.size - shift, warm.size)
                warm[:kept] = b_prev[shift:shift + kept]
                yield warm, True
        yield route, False
        yield None, False

    def _check(self, window, b) -> dict:
        """Verify the window's profile (raises if it breaks a limit); returns the quantities
        the verifier derived from it (:func:`curvespeed.profile.derive`)."""
        from .planner import CONVEX_TOLERANCE
        from .verify import DEFAULT_TOLERANCE, verify_profile, window_verdict

        tolerance = CONVEX_TOLERANCE if self._jerk else DEFAULT_TOLERANCE
        # the common window judged in one compiled pass (the same verdict and numbers); a
        # refusal is judged again below, which words it
        fast = window_verdict(window.problem, b, tolerance) if self._jerk else None
        if fast is not None and fast[0]:
            return fast[1]
        # the window's binding limits and its lateral jerk (unless bounded) are never read:
        # neither named nor measured
        check = verify_profile(window.problem, b, tolerance, check_jerk=self._jerk,
                               labels=False, measure_lateral_jerk=False)
        if not check.ok:
            worst = "; ".join(v.describe() for v in check.violations)
            raise SolverError(f"replan: the window's profile breaks its limits: {worst}. This "
                              "is a defect; please report it with the route, the limits and "
                              "the vehicle's state")
        return check.derived

    def _profile(self, window, b, d: dict, result: SolveResult, s: float, warm: bool,
                 relaxed: float, elapsed: float) -> WindowProfile:
        """The window's profile from its squared speeds ``b`` and what the verifier derived
        from them, ``d``."""
        n = window.idx.size
        distance = np.arange(n) * window.ds
        # time 0 where the vehicle is: up to a station step after node 0
        ahead = s - self._tables.station_m[window.idx[0]]
        if self.geometry.closed:
            ahead = (ahead + 0.5 * self.geometry.length_m) % self.geometry.length_m \
                - 0.5 * self.geometry.length_m
        v = d["speed_mps"]
        # time 0 where the vehicle is: the time the window's own motion reaches it
        t_vehicle = float(d["time_s"][0] + _time_into_step(window.problem, v, distance,
                                                            d["time_s"], 0, max(ahead, 0.0)))
        return WindowProfile(
            station_m=self._tables.station_m[window.idx], distance_m=distance,
            speed_mps=v, accel_mps2=d["accel_mps2"], time_s=d["time_s"] - t_vehicle,
            start_station_m=s, end_speed_bound_mps=math.sqrt(window.end_bound_b),
            status=result.status, solver=result.solver, iterations=result.iterations,
            qp_iterations=result.inner_iterations, solve_time_s=elapsed, warm_started=warm,
            relaxed=relaxed, problem=window.problem)


#: Fractions by which the comfort limits are raised, in turn, for a state the limits cannot
#: continue (up to ``Replanner.relax_limits``).
_RELAX_STEPS = (0.001, 0.01)


def _is_number(value) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
