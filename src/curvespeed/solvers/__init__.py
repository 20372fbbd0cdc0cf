"""Solvers for the discrete speed problem, behind one small interface.

Every solver takes a :class:`~curvespeed.problem.SpeedProblem` and returns a :class:`SolveResult`
holding squared speeds at the nodes. :class:`SolverKind` lists those the command line offers.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

if TYPE_CHECKING:                  # annotations only: the command line imports SolverKind early
    import numpy as np


class SolveStatus(enum.Enum):
    """Outcome of a solve, mapped from each backend's own codes in its adapter."""

    OPTIMAL = "optimal"
    OPTIMAL_INACCURATE = "optimal_inaccurate"
    INFEASIBLE = "infeasible"
    FAILED = "failed"


class SolverKind(enum.Enum):
    """Solvers the command line can select.

    ``envelope``: exact forward-backward method, no jerk bound. ``convex``: the convex program
    with jerk bound (Clarabel on a sparse QP, sequential convex programming).
    ``convex-reference``: the same program modelled in cvxpy with exact cones (slow; for
    cross-checking).
    """

    ENVELOPE = "envelope"
    CONVEX = "convex"
    CONVEX_REFERENCE = "convex-reference"

    @property
    def enforces_jerk(self) -> bool:
        return self is not SolverKind.ENVELOPE


class QPBackend(enum.Enum):
    """Which method solves the convex solver's QPs.

    ``banded``: the banded Mehrotra predictor-corrector method of :mod:`.banded_ipm` (compiled;
    any answer short of optimal is handed to Clarabel). ``clarabel``: Clarabel alone.
    """

    BANDED = "banded"
    CLARABEL = "clarabel"


@dataclass(frozen=True)
class SolveResult:
    """What a solver returns.

    Attributes
    ----------
    b : ndarray
        Squared speed at every node, m^2/s^2.
    status : SolveStatus
    solver : str
        Name of the solver that produced ``b``.
    iterations : int
        Passes, laps or outer iterations, as the solver counts them.
    solve_time_s : float
        Wall time spent in the solver, seconds.
    ceiling_b : ndarray
        The node-wise squared-speed ceiling (lateral limits and caps), m^2/s^2.
    notes : tuple of str
        Messages about the solve (fallbacks, tolerances) for the sidecar.
    envelope_b : ndarray or None
        The envelope the solver started from (convex solver), m^2/s^2.
    inner_iterations : int
        Iterations of the inner QP solver, summed over outer iterations.
    """

    b: np.ndarray
    status: SolveStatus
    solver: str
    iterations: int
    solve_time_s: float
    ceiling_b: np.ndarray
    notes: tuple[str, ...] = field(default=())
    envelope_b: np.ndarray | None = None
    inner_iterations: int = 0


def solve(problem, kind: SolverKind = SolverKind.ENVELOPE, options=None) -> SolveResult:
    """Solve ``problem`` with the solver ``kind`` (``options``: the solver's own settings)."""
    if kind is SolverKind.ENVELOPE:
        from .envelope import solve_envelope

        return solve_envelope(problem)
    if kind is SolverKind.CONVEX:
        from .convex import ConvexOptions, solve_convex

        return solve_convex(problem, options or ConvexOptions())
    if kind is SolverKind.CONVEX_REFERENCE:
        from .reference_cvxpy import solve_reference

        weight = getattr(options, "comfort_weight", 0.0) if options is not None else 0.0
        return solve_reference(problem, comfort_weight=weight)
    raise ValueError(f"unknown solver {kind!r}")
