"""Plan a speed profile: discrete problem -> solver -> verifier -> :class:`Profile`.

This is the one library call behind ``curvespeed plan``.
"""

from __future__ import annotations

import numpy as np

from .errors import SolverError
from .geometry import Geometry
from .limits import Limits, RouteConstraints
from .problem import build_problem
from .profile import Profile, derive
from .solvers import SolverKind, solve
from .verify import DEFAULT_TOLERANCE, verify_profile


def plan_profile(geometry: Geometry, limits: Limits, constraints: RouteConstraints = RouteConstraints(),
                 solver: SolverKind = SolverKind.ENVELOPE,
                 tolerance: float = DEFAULT_TOLERANCE) -> Profile:
    """Fastest profile along ``geometry`` within ``limits`` and ``constraints``.

    Raises :class:`~curvespeed.errors.InfeasibleError` when no profile exists (with the reason)
    and :class:`~curvespeed.errors.SolverError` when the verifier refuses the solver's answer.
    """
    problem = build_problem(geometry, limits, constraints)
    result = solve(problem, solver)
    check = verify_profile(problem, result.b, tolerance)
    if not check.ok:
        worst = "; ".join(v.describe() for v in check.violations)
        raise SolverError(f"the {result.solver} solver's profile breaks its limits: {worst}. "
                          "This is a defect; please report it with the route and limits")
    d = derive(problem, result.b)
    v = d["speed_mps"]
    return Profile(
        geometry=geometry,
        speed_mps=v,
        step_accel_mps2=d["step_accel_mps2"],
        accel_mps2=d["accel_mps2"],
        jerk_mps3=d["jerk_mps3"],
        lat_accel_mps2=geometry.curvature_1pm * v * v,
        time_s=d["time_s"],
        limit_speed_mps=np.sqrt(result.ceiling_b),
        binding=check.binding,
        solve=result,
        usage=check.peak,
    )
