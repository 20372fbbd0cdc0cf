"""Solvers for the discrete speed problem, behind one small interface.

Every solver takes a :class:`~curvespeed.problem.SpeedProblem` and returns a :class:`SolveResult`
holding squared speeds at the nodes. :data:`SOLVERS` is the registry the command line offers.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass, field

import numpy as np


class SolveStatus(enum.Enum):
    """Outcome of a solve, mapped from each backend's own codes in its adapter."""

    OPTIMAL = "optimal"
    OPTIMAL_INACCURATE = "optimal_inaccurate"
    INFEASIBLE = "infeasible"
    FAILED = "failed"


class SolverKind(enum.Enum):
    """Solvers the command line can select."""

    ENVELOPE = "envelope"


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
    """

    b: np.ndarray
    status: SolveStatus
    solver: str
    iterations: int
    solve_time_s: float
    ceiling_b: np.ndarray
    notes: tuple[str, ...] = field(default=())


def solve(problem, kind: SolverKind = SolverKind.ENVELOPE) -> SolveResult:
    """Solve ``problem`` with the solver ``kind``."""
    if kind is SolverKind.ENVELOPE:
        from .envelope import solve_envelope

        return solve_envelope(problem)
    raise ValueError(f"unknown solver {kind!r}")
