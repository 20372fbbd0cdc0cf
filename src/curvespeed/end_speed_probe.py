"""The fastest start (or end) speed from which the planner finds a profile, for a refusal.

Where no jerk-limited profile exists and no closed form names the cause
(:class:`~curvespeed.errors.JerkBoundInfeasible`), a given start or end speed is the usual
culprit: the closed forms of :mod:`curvespeed.diagnose` take braking on the level from zero
deceleration, while on a curve the friction ellipse shares the grip with the lateral load and
the lateral jerk bound adds its own rows, so the discrete problem can be the tighter one. This
module asks the planner itself: it bisects on the start speed (then the end speed), keeping the
rest of the problem as given, for the fastest speed whose first convex program is feasible.

That is the planner's own test: the convex solver refuses exactly when its first program, whose
rows are inner (conservative) approximations about the jerk-free envelope, is infeasible, and
every later iterate stays inside those rows. Each probe is one such program; the bisection stops
at 0.01 m/s, so a refusal costs about a dozen of them.
"""

from __future__ import annotations

import dataclasses
import math
import warnings

import numpy as np

from .errors import CurvespeedError, InfeasibleError
from .geometry import Geometry
from .limits import Limits, RouteConstraints
from .problem import build_problem
from .rest_step import largest_true

#: Resolution of the speed quoted, m/s.
RESOLUTION_MPS = 0.01
#: The slowest speed probed, m/s (or half the given speed, if less): a start or end nearer to
#: rest than this is not what a user who gave a speed there would take.
SLOWEST_MPS = 1.0


def fastest_end_speed(geometry: Geometry, limits: Limits, constraints: RouteConstraints,
                      which: str, given_mps: float, solve_first) -> float | None:
    """The fastest ``which`` ("start" or "end") speed below ``given_mps``, to
    :data:`RESOLUTION_MPS` and rounded down, from which the planner finds a profile with every
    other input as given; None if the slowest probed speed fails too (the speed there is not
    the cause) or a probe fails otherwise than infeasible.

    ``solve_first(problem)`` solves the problem's first convex program and raises
    :class:`~curvespeed.errors.InfeasibleError` when it is infeasible.
    """
    def plans(v: float) -> bool:
        changed = dataclasses.replace(constraints, **{f"{which}_speed_mps": v})
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                solve_first(build_problem(geometry, limits, changed, jerk_model=True))
        except InfeasibleError:
            return False
        return True

    lo, hi = min(SLOWEST_MPS, 0.5 * given_mps), given_mps
    halvings = max(1, math.ceil(math.log2((hi - lo) / RESOLUTION_MPS)))
    try:
        if not plans(lo):
            return None
        lo = float(largest_true(lambda v: plans(float(v)), np.float64(lo), np.float64(hi),
                                halvings))
    except CurvespeedError:         # a probe failed for another reason: quote nothing
        return None
    quoted = math.floor(lo / RESOLUTION_MPS) * RESOLUTION_MPS
    return quoted if quoted >= RESOLUTION_MPS else None


def speed_hint(geometry: Geometry, limits: Limits, constraints: RouteConstraints,
               solve_first) -> str:
    """What to say after a :class:`~curvespeed.errors.JerkBoundInfeasible` refusal: the
    fastest given start speed that plans, else the fastest given end speed; "" when neither
    (an open route's speeds at rest are not probed, nor are a closed route's)."""
    if geometry.closed:
        return ""
    for which in ("start", "end"):
        given = getattr(constraints, f"{which}_speed_mps")
        if given is None or given <= 0.0:
            continue
        v = fastest_end_speed(geometry, limits, constraints, which, given, solve_first)
        if v is not None:
            how = "from a start speed" if which == "start" else "ending at a speed"
            return (f"; with every other input as given, the planner finds a profile {how} of "
                    f"up to {v:.2f} m/s ({given:.2f} m/s was asked): lower the {which} speed "
                    "to that")
    return ""
