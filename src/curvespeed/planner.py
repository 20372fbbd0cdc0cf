"""Plan a speed profile: discrete problem -> solver -> verifier -> :class:`Profile`.

This is the one library call behind ``curvespeed plan``.
"""

from __future__ import annotations

import warnings

import numpy as np

from .closed_form_moves import snap_to_closed_form
from .diagnose import standstill, underpowered
from .errors import CurvespeedWarning, InfeasibleError, JerkBoundInfeasible, SolverError
from .geometry import Geometry
from .jerk_model import linear_time_coef
from .limits import Limits, RouteConstraints, validate_limits
from .placement import place_positions
from .problem import build_problem
from .profile import Profile
from .solvers import SolverKind, solve
from .verify import DEFAULT_TOLERANCE, verify_profile


#: Verifier tolerance for the convex solvers: their QP rows are tightened by 1e-5 of each limit
#: and solved to 1e-7, so anything beyond 1e-4 of a limit is a real violation.
CONVEX_TOLERANCE = 1e-4


def _start_end_hint(geometry: Geometry, limits: Limits, constraints: RouteConstraints,
                    options) -> str:
    """The start or end speed that would plan (:mod:`curvespeed.end_speed_probe`), by the
    convex solver's first program with ``options``."""
    from dataclasses import replace

    from .end_speed_probe import speed_hint
    from .solvers.convex import ConvexOptions

    first = replace(options or ConvexOptions(), max_iterations=1)
    return speed_hint(geometry, limits, constraints,
                      lambda problem: solve(problem, SolverKind.CONVEX, first))


def default_solver(limits: Limits) -> SolverKind:
    """The convex solver when a jerk bound (longitudinal or lateral) is set, else the envelope."""
    bounded = limits.max_jerk_mps3 is not None or limits.max_lateral_jerk_mps3 is not None
    return SolverKind.CONVEX if bounded else SolverKind.ENVELOPE


def plan_profile(geometry: Geometry, limits: Limits,
                 constraints: RouteConstraints = RouteConstraints(),
                 solver: SolverKind | None = None, options=None,
                 tolerance: float | None = None, warn_limits: bool = True) -> Profile:
    """Fastest profile along ``geometry`` within ``limits`` and ``constraints``.

    ``solver`` defaults to :func:`default_solver`; ``options`` are the solver's own settings
    (e.g. :class:`~curvespeed.solvers.convex.ConvexOptions`). The envelope does not enforce a
    jerk bound: asked to, it warns and reports the jerk it reaches. ``limits`` are validated,
    with a :class:`~curvespeed.errors.CurvespeedWarning` where a comfort limit exceeds the grip
    or the top speed looks like km/h; ``warn_limits=False`` skips the warnings, for a caller
    that already gave them naming the limits' origin (the CLI).

    Raises :class:`~curvespeed.errors.InfeasibleError` when no profile exists (with the reason)
    and :class:`~curvespeed.errors.SolverError` when the verifier refuses the solver's answer.
    """
    validate_limits(limits, "limits", warn=warn_limits)
    constraints = place_positions(constraints, geometry)    # stops and zones by position
    solver = solver or default_solver(limits)
    jerk = solver.enforces_jerk and limits.max_jerk_mps3 is not None
    problem = build_problem(geometry, limits, constraints, jerk_model=jerk)
    try:
        result = solve(problem, solver, options)
    except InfeasibleError as exc:
        weak = underpowered(problem)       # the true cause, not the jerk bound the solver names
        if weak is not None:
            raise InfeasibleError(weak) from exc
        if isinstance(exc, JerkBoundInfeasible) and solver is SolverKind.CONVEX:
            hint = _start_end_hint(geometry, limits, constraints, options)
            if hint:
                raise InfeasibleError(f"{exc}{hint}") from exc
        raise
    stands = standstill(problem, result.b)
    if stands is not None:          # never write a profile that does not arrive
        raise InfeasibleError(stands)
    if tolerance is None:
        tolerance = DEFAULT_TOLERANCE if solver is SolverKind.ENVELOPE else CONVEX_TOLERANCE
    b, snapped = snap_to_closed_form(problem, result.b)
    check = verify_profile(problem, b, tolerance, check_jerk=solver.enforces_jerk)
    if limits.max_jerk_mps3 is not None and not jerk:
        warnings.warn(f"the envelope solver does not bound jerk: the profile reaches "
                      f"{check.extremes['jerk_mps3']:.2f} m/s^3 against max_jerk_mps3 = "
                      f"{limits.max_jerk_mps3:g}; use --solver convex to enforce it",
                      CurvespeedWarning, stacklevel=2)
    if limits.max_lateral_jerk_mps3 is not None and not solver.enforces_jerk:
        warnings.warn(f"the envelope solver does not bound lateral jerk: the profile reaches "
                      f"{check.extremes['lateral_jerk_mps3']:.2f} m/s^3 against "
                      f"max_lateral_jerk_mps3 = {limits.max_lateral_jerk_mps3:g}; use --solver "
                      "convex to enforce it", CurvespeedWarning, stacklevel=2)
    if not check.ok:
        weak = underpowered(problem)       # a crawl this slow is the cause, not a defect
        if weak is not None:
            raise InfeasibleError(weak)
        worst = "; ".join(v.describe() for v in check.violations)
        raise SolverError(f"the {result.solver} solver's profile breaks its limits: {worst}. "
                          "This is a defect; please report it with the route and limits")
    d = check.derived
    env_b = result.envelope_b if result.envelope_b is not None else result.b
    v_env = np.sqrt(np.maximum(env_b, 0.0))
    envelope_time = float(np.sum(2.0 * problem.ds / (v_env[:-1] + v_env[1:])))
    v = d["speed_mps"]
    model_rest = np.where(np.isnan(problem.rest_u), 0.0, problem.time_coef)
    model_linear = linear_time_coef(problem)
    rest_coef, linear, switch = _switch_steps(problem, v, model_rest, model_linear, snapped)
    # the steps retimed or rewritten there take their own time; every other step the model's
    with np.errstate(divide="ignore", invalid="ignore"):
        step_s = np.diff(problem.station_m) / (v[:-1] + v[1:])
    moved = (rest_coef + linear) - (model_rest + model_linear)
    time_s = d["time_s"] + np.concatenate(([0.0], np.cumsum(np.where(moved != 0.0,
                                                                      moved * step_s, 0.0))))
    return Profile(
        geometry=geometry,
        speed_mps=v,
        step_accel_mps2=d["step_accel_mps2"],
        rest_time_coef=rest_coef,
        accel_mps2=d["accel_mps2"],
        jerk_mps3=d["jerk_mps3"],
        lat_accel_mps2=geometry.curvature_1pm * v * v,
        time_s=time_s,
        limit_speed_mps=np.sqrt(result.ceiling_b),
        binding=check.binding,
        solve=result,
        usage=check.peak,
        extremes=check.extremes,
        envelope_time_s=envelope_time,
        linear_time_coef=linear,
        switch_step=switch,
    )


def _switch_steps(problem, speed, rest_coef, linear, snapped):
    """The steps inside which the jerk switches (:attr:`SpeedProblem.switch_step`) as they are
    written: ``(rest_time_coef, linear_time_coef, switch_step)`` (None if none).

    * In a move written as its closed form (``snapped`` nodes,
      :func:`curvespeed.closed_form_moves.snap_to_closed_form`), each is the motion's own.
    * In a move planned so whose solver's speeds did not agree with the motion's, none is
      kept: a turn next to rest is written as a ramp-and-hold step of the same time, every
      other as a constant-jerk step (both fit any speeds).
    * A launch's or a stop's turn (:func:`curvespeed.launch_steps.launch_steps`) is driven
      from the acceleration the ramp's step next to it ends with, at exactly the jerk bound up
      to the turn and down after it (:func:`curvespeed.jerk_switch.timed_at_jerk`), its time
      set to that motion's. The model times the step as the double-S motion does between the
      motion's own speeds, and the planned speeds follow that motion to about 1e-6; but the
      motion through the turn is a third-order function of them (its jerk ``D2 / T^3``, with
      ``D2`` the step's distance less what its start's speed and acceleration cover): fitted
      to the model's time it turned at up to 1.005 of the bound on the speeds of a 200 m move.
      At the bound itself it takes a time of its own (the 1,728 moves of
      ``benchmarks/exact_roads.py --wide`` changed by at most 0.021 % with it and the cap on
      the step's far node). A step whose speeds no such motion joins (a plan held off the
      ramp's motion there: a curve, say) stays a constant-jerk step."""
    code = problem.switch_step
    if code is None:
        return rest_coef, linear, None
    from . import jerk_switch

    code, linear, rest_coef = code.copy(), linear.copy(), rest_coef.copy()
    in_move = (~np.isnan(problem.closed_form_b[:-1]) & ~np.isnan(problem.closed_form_b[1:])
               if problem.closed_form_b is not None else np.zeros(code.size, dtype=bool))
    kept = snapped[:-1] & snapped[1:]
    loose = in_move & ~kept & (code > 0)
    at_rest = (speed[:-1] <= 0.0) | (speed[1:] <= 0.0)
    rest_coef[loose & at_rest] = np.clip(linear[loose & at_rest], 2.0, 3.0)
    linear[loose & at_rest] = 0.0
    code[loose] = 0
    turn = (code == jerk_switch.TURN) & ~kept & (linear > 0.0)
    if turn.any():
        shapes = jerk_switch.shapes(problem.station_m, speed, rest_coef, linear,
                                    np.where(turn, code, 0))
        k = np.flatnonzero(turn & shapes.ok)
        back = shapes.backwards[k]
        T, _, ok = jerk_switch.timed_at_jerk(problem.ds, np.where(back, speed[k + 1], speed[k]),
                                             np.where(back, speed[k], speed[k + 1]),
                                             shapes.a0[k], problem.limits.max_jerk_mps3)
        code[turn] = 0
        code[k[ok]] = jerk_switch.TURN
        linear[k[ok]] = T[ok] * (speed[k[ok]] + speed[k[ok] + 1]) / problem.ds
    return rest_coef, linear, code if code.any() else None
