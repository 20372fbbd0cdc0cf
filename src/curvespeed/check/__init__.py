"""Audit speeds along a route: friction, comfort, braking and road-design criteria.

:func:`check_speeds` is the one library call behind ``curvespeed check``. It takes speeds at the
geometry's stations (a recorded drive or a profile, one constant speed, or the speed zones of a
limits file) and reports, per station and per curve, how much of each limit they use.

What is checked
---------------
* **Per station**, the use of every limit of the shared discrete problem
  (:mod:`curvespeed.problem`), computed by the independent verifier
  (:func:`curvespeed.verify.verify_profile`): friction ellipse (grip), comfort ellipse, top
  speed and zones, power, jerk and lateral jerk where those limits are set. For a speed *trace*
  (:attr:`SpeedKind.TRACE`) the accelerations come from the trace itself, so the combined
  (friction-ellipse) demand includes its braking and driving. A *constant* speed or the *zone*
  speeds are speeds to hold: they are checked at zero acceleration (their steps are where a
  vehicle would have to change speed, which the brake-reach check below covers).
* **Brake reach**: the highest speed at each station from which braking within the limits
  (comfort deceleration, the friction ellipse, grade) can still bring the vehicle down to what
  every curve ahead allows. It is the backward pass of the forward-backward envelope
  (:mod:`curvespeed.solvers.envelope`) run over the curves' lateral ceiling alone (no top speed,
  no zones). Stations where the checked speed is above it, yet within the lateral limits there,
  form a *brake-reach* violation: the speed rises into a curve faster than the brakes can undo.
* **Per curve** (see :func:`find_curves` for how curves are found): station range, length,
  minimum radius, direction, superelevation, the speed checked at the tightest point, the
  lateral demand there in m/s^2 and as the side-friction factor
  ``f = (v^2/(gR) - e)/(1 + e v^2/(gR))``, the margins to the lateral friction coefficient and
  the lateral comfort limit, the highest speed the limits allow there (the node's ceiling from
  :meth:`~curvespeed.problem.SpeedProblem.lateral_ceiling_b`, including top speed and zones),
  the braking distance needed from the speed checked just before the curve down to that speed,
  the AASHTO minimum radius for a design speed, and the ball-bank advisory speed
  (:mod:`curvespeed.design`).

The curvature's uncertainty
---------------------------
A fitted route's curvature is an estimate with a standard deviation and a bound that covers the
true road (:mod:`curvespeed.geometry.curvature`). Uses, ceilings and brake reach are *judged* on
the bound, as :mod:`curvespeed.problem` plans on it (:func:`judge_speeds`: the worse of bound
and estimate at every station), and reported on the estimate as well. Each curve's smallest
radius, ball-bank advisory speed and AASHTO verdict are intervals around the estimate
(:mod:`.uncertainty`). A curve within every limit on the estimate that fails on the bound has
the verdict :attr:`CurveVerdict.FAILS_ON_BOUND` and counts as a failure: the bound covers the
true road. On exact geometry (no bound) every interval has zero width.

Layout: :mod:`.model` (report types), :mod:`.curves` (curves and stretches), :mod:`.speeds`
(the problem the speeds are judged in), :mod:`.uncertainty`, :mod:`.audit`
(:func:`check_speeds`).

Stops and start/end speeds of the constraints are planning targets and are not checked (a
recorded drive only samples them approximately); they are ignored with a warning. Under a jerk
bound a trace's own rest points (speed exactly zero: the ends of an open route, isolated
stations) are rest points of the problem, so a jerk-limited start or stop is judged by the same
model of a step next to rest the planner uses, a jerk ramp then constant acceleration
(:func:`rest_constraints`); at an open route's end where the trace is moving, only the jerk
within the end step is checked (what came before the first station is unknown).

Each violation is a stretch of stations over one limit; stretches of the same kind less than
``CurveSettings.join_gap_m`` apart are reported as one (their worst point and use are kept).

Tolerance: a use within :data:`USE_TOLERANCE` (0.1 %) of 1 counts as at the limit, not over it.
Speeds files print 1e-6 m/s, which over 1 m steps moves accelerations by up to ~1e-4 m/s^2 at
50 m/s; measured speeds are never better than 0.1 %.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

#: Public name -> the submodule that defines it, imported on first use (PEP 562): a plan's
#: summary finds its curves (:mod:`.curves`, :mod:`.settings`) without loading the audit's
#: modules and their report types.
_SOURCES = {
    **dict.fromkeys(("check_speeds",), "audit"),
    **dict.fromkeys(("find_curves",), "curves"),
    **dict.fromkeys(("BRAKE_REACH", "CHECKED_LIMITS", "CURVATURE_LIMITS", "MIN_RADIUS",
                     "USE_TOLERANCE", "CheckReport", "CurveCheck", "CurveVerdict", "SpeedKind",
                     "Violation"), "model"),
    **dict.fromkeys(("CURVE_RADIUS_M", "JOIN_GAP_M", "MIN_CURVE_LENGTH_M", "MIN_CURVE_TURN_DEG",
                     "CurveSettings"), "settings"),
    **dict.fromkeys(("Judgement", "brake_reach_b", "checked_constraints", "judge_speeds",
                     "rest_constraints", "zone_speeds_mps"), "speeds"),
    **dict.fromkeys(("CurvatureEnds", "RadiusInterval", "curvature_ends", "estimate_geometry",
                     "radius_interval"), "uncertainty"),
}

if TYPE_CHECKING:
    from .audit import check_speeds
    from .curves import find_curves
    from .model import (BRAKE_REACH, CHECKED_LIMITS, CURVATURE_LIMITS, MIN_RADIUS,
                        USE_TOLERANCE, CheckReport, CurveCheck, CurveVerdict, SpeedKind,
                        Violation)
    from .settings import (CURVE_RADIUS_M, JOIN_GAP_M, MIN_CURVE_LENGTH_M, MIN_CURVE_TURN_DEG,
                           CurveSettings)
    from .speeds import (Judgement, brake_reach_b, checked_constraints, judge_speeds,
                         rest_constraints, zone_speeds_mps)
    from .uncertainty import (CurvatureEnds, RadiusInterval, curvature_ends, estimate_geometry,
                              radius_interval)

__all__ = sorted(_SOURCES)


def __getattr__(name: str):
    if name not in _SOURCES:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{_SOURCES[name]}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_SOURCES))

