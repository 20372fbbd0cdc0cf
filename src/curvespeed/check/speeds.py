"""The speeds ``check`` judges and the problem it judges them in: constraints, rest points,
zone speeds, brake reach and the per-station use of every limit, on the curvature's bound and on
its estimate (:func:`judge_speeds`)."""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import CurvespeedWarning
from ..geometry import Geometry
from ..limits import Limits, RouteConstraints, Stop
from ..problem import SpeedProblem, build_problem
from ..profile import derive
from ..verify import verify_profile
from .model import NO_CAP_MPS, SpeedKind
from .uncertainty import estimate_geometry


def checked_constraints(constraints: RouteConstraints, warn: bool = True) -> RouteConstraints:
    """The constraints ``check`` applies: speed zones, superelevation and friction sections.

    Stops and start/end speeds are planning targets, not limits of the road; they are dropped
    (with a :class:`CurvespeedWarning` naming where they came from when ``warn``).
    """
    dropped = []
    if constraints.stops:
        origin = constraints.stops[0].origin or "the constraints"
        dropped.append(f"{len(constraints.stops)} stop(s) (first from {origin})")
    if constraints.start_speed_mps is not None or constraints.end_speed_mps is not None:
        dropped.append("the start/end speed")
    if dropped and warn:
        warnings.warn(f"check ignores {' and '.join(dropped)}: they are planning targets, not "
                      "limits a speed can exceed; remove them to silence this warning",
                      CurvespeedWarning, stacklevel=3)
    return RouteConstraints(zones=constraints.zones, superelevation=constraints.superelevation,
                            friction=constraints.friction)


def zone_speeds_mps(geometry: Geometry, limits: Limits,
                    constraints: RouteConstraints) -> np.ndarray:
    """Speeds checked without a speeds file: each station's zone speed, the top speed elsewhere.

    Every station of a step that touches a zone takes the zone's speed (the node convention of
    :func:`~curvespeed.problem.build_problem`), m/s.
    """
    problem = build_problem(geometry, limits, checked_constraints(constraints, warn=False),
                            jerk_model=False)
    return np.sqrt(problem.cap_b)


def brake_reach_b(geometry: Geometry, limits: Limits,
                  constraints: RouteConstraints) -> tuple[np.ndarray, np.ndarray]:
    """Curves-only ceiling and brake reach, as squared speeds (m^2/s^2) at every station.

    The ceiling is :meth:`~curvespeed.problem.SpeedProblem.lateral_ceiling_b` of the problem
    with the curves' lateral limits and superelevation only (no top speed, no zones). The reach
    is the envelope's backward pass over that ceiling with a free end: the highest squared speed
    at each station from which braking within the limits (comfort deceleration, friction
    ellipse, grade, resistances) meets every ceiling ahead. On a closed route the pass runs two
    laps backward so that curves just after the seam are seen from the end of the lap.
    """
    from ..solvers.envelope import brake_reach

    with warnings.catch_warnings():
        # the same limits were validated (and any warning shown) for the main problem
        warnings.simplefilter("ignore", CurvespeedWarning)
        problem = build_problem(geometry, limits.replace(max_speed_mps=NO_CAP_MPS),
                                RouteConstraints(superelevation=constraints.superelevation,
                                                 friction=constraints.friction),
                                jerk_model=False)
    ceiling = problem.lateral_ceiling_b()
    return ceiling, brake_reach(problem, ceiling)


def rest_constraints(used: RouteConstraints, speed_mps: np.ndarray,
                     geometry: Geometry) -> RouteConstraints:
    """``used`` plus the rest points of a speed trace, so a jerk bound is checked as planned.

    Under a jerk bound a vehicle leaves and reaches rest with a jerk ramp (see
    :mod:`curvespeed.problem`); a profile planned that way has exactly zero speed there. The
    trace's own rest points become the problem's: on an open route its first and last speeds are
    the start and end speeds, and every isolated station with speed exactly zero (at least three
    steps from the previous rest point) is a stop. A run of several zero speeds (standing still
    over more than a station) stays a plain constant-acceleration stretch.
    """
    v = np.asarray(speed_mps, dtype=float)
    n = v.size
    zero = v == 0.0
    closed = geometry.closed
    last = 0 if (not closed and zero[0]) else -10 ** 9
    end_rest = (not closed) and bool(zero[-1])
    stops = []
    first = 0 if closed else 1
    for k in np.flatnonzero(zero[first:n - 1]) + first:
        k = int(k)
        alone = (k == 0 or not zero[k - 1]) and not zero[k + 1]
        if alone and k - last >= 3 and not (end_rest and n - 1 - k < 3):
            stops.append(Stop(float(geometry.station_m[k]), origin="speeds at rest"))
            last = k
    return RouteConstraints(
        zones=used.zones, stops=tuple(stops), superelevation=used.superelevation,
        friction=used.friction,
        start_speed_mps=None if closed else float(v[0]),
        end_speed_mps=None if closed else float(v[-1]))


def station_use(problem: SpeedProblem, b: np.ndarray,
                kind: SpeedKind) -> tuple[dict, np.ndarray]:
    """Per-station use of every limit (verifier) and the acceleration it was evaluated with."""
    if kind is SpeedKind.TRACE:
        use = dict(verify_profile(problem, b).use)
        d = derive(problem, b)
        if "jerk" in use and not problem.closed:
            # The acceleration before the first and after the last station of a trace is
            # unknown (the derivation takes it as zero): at an end not at rest only the jerk
            # inside the end step counts.
            jerk = use["jerk"].copy()
            scale = problem.limits.max_jerk_mps3
            for node, step in ((0, 0), (-1, -1)):
                if b[node] > 0.0:
                    jerk[node] = abs(d["step_jerk_mps3"][step]) / scale
            use["jerk"] = jerk
        return use, d["accel_mps2"]
    # Held speeds: zero acceleration everywhere. Each distinct speed is verified as a constant
    # profile and its stations take their uses from that run (zones give a handful of values).
    values, inverse = np.unique(b, return_inverse=True)
    use: dict[str, np.ndarray] = {}
    for i, value in enumerate(values):
        at = inverse == i
        for name, arr in verify_profile(problem, np.full(b.size, value)).use.items():
            use.setdefault(name, np.zeros(b.size))[at] = arr[at]
    return use, np.zeros(b.size)



@dataclass(frozen=True)
class Judgement:
    """Per-station figures of the checked speeds on the curvature's bound and on its estimate.

    The judged figures take, station by station, the worse of the two: the larger use and the
    lower ceilings and reach. A larger curvature asks for more grip and comfort, so these are the
    bound's, except where superelevation more than balances the curve (a larger curvature then
    eases the tyres' side force). On exact geometry the two coincide.

    Attributes
    ----------
    problem, problem_estimate : SpeedProblem
        The discrete problem on the bound (what ``plan`` solves) and on the estimate.
    use, use_estimate : dict of str -> ndarray
        Use of every limit, judged and on the estimate.
    accel_mps2 : ndarray
        Acceleration the uses were evaluated with, m/s^2.
    ceiling_b, ceiling_estimate_b : ndarray
        Speed ceiling (lateral limits, top speed, zones) as squared speed, m^2/s^2.
    lateral_ceiling_b, reach_b : ndarray
        The curves-only ceiling and the brake reach (:func:`brake_reach_b`), judged, m^2/s^2.
    lateral_ceiling_estimate_b, reach_estimate_b : ndarray
        The same on the estimate, m^2/s^2.
    """

    problem: SpeedProblem
    problem_estimate: SpeedProblem
    use: dict
    use_estimate: dict
    accel_mps2: np.ndarray
    ceiling_b: np.ndarray
    ceiling_estimate_b: np.ndarray
    lateral_ceiling_b: np.ndarray
    reach_b: np.ndarray
    lateral_ceiling_estimate_b: np.ndarray
    reach_estimate_b: np.ndarray


def judge_speeds(geometry: Geometry, limits: Limits, used: RouteConstraints, v: np.ndarray,
                 kind: SpeedKind) -> Judgement:
    """Judge speeds ``v`` (m/s, one per station) on ``geometry``'s curvature bound and estimate.

    ``used`` are the constraints ``check`` applies (:func:`checked_constraints`). A trace's own
    rest points join them, so a jerk-limited start, stop or end is judged as planned; held
    speeds are judged without rest and at zero acceleration.
    """
    on_bound = _judge_on(geometry, limits, used, v, kind)
    estimate = estimate_geometry(geometry)
    if estimate is geometry:
        on_estimate = on_bound
    else:
        with warnings.catch_warnings():
            # the same route length, limits and constraints: any warning about them (a zone
            # past the end, say) was shown once for the bound's problem
            warnings.simplefilter("ignore", CurvespeedWarning)
            on_estimate = _judge_on(estimate, limits, used, v, kind)
    problem, use_b, accel, lateral_b, reach_b = on_bound
    problem_e, use_e, _, lateral_e, reach_e = on_estimate
    ceiling_b, ceiling_e = problem.lateral_ceiling_b(), problem_e.lateral_ceiling_b()
    use = {name: np.maximum(arr, use_e[name]) for name, arr in use_b.items()}
    return Judgement(problem=problem, problem_estimate=problem_e, use=use, use_estimate=use_e,
                     accel_mps2=np.asarray(accel, dtype=float),
                     ceiling_b=np.minimum(ceiling_b, ceiling_e), ceiling_estimate_b=ceiling_e,
                     lateral_ceiling_b=np.minimum(lateral_b, lateral_e),
                     reach_b=np.minimum(reach_b, reach_e), lateral_ceiling_estimate_b=lateral_e,
                     reach_estimate_b=reach_e)


def _judge_on(geometry: Geometry, limits: Limits, used: RouteConstraints, v: np.ndarray,
              kind: SpeedKind):
    """Problem, uses, acceleration, curves-only ceiling and brake reach on one geometry."""
    if kind is SpeedKind.TRACE:
        problem = build_problem(geometry, limits, rest_constraints(used, v, geometry))
    else:
        problem = build_problem(geometry, limits, used, jerk_model=False)
    use, accel = station_use(problem, v * v, kind)
    lateral_b, reach_b = brake_reach_b(geometry, limits, used)
    return problem, use, accel, lateral_b, reach_b
