"""The envelope's compiled passes (``solvers/_envelope_passes.c``) are the Python loops' twin:
the same squared speeds to the last bit, on open and closed routes, with grade, drag and power,
and in the backward pass that ``check`` uses (``brake_reach``). The Python loops stay in
``solvers/envelope.py`` as the reference. Likewise the lateral ceiling's bisection
(``SpeedProblem.lateral_ceiling_b``), its numpy loop the reference."""

from __future__ import annotations

import numpy as np
import pytest
from helpers import circle_geometry
from test_certificate_convex import CASES

from curvespeed.friction import FrictionSection
from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed import problem as problem_module
from curvespeed.problem import build_problem
from curvespeed.solvers import envelope

pytestmark = pytest.mark.skipif(envelope._compiled is None, reason="compiled passes not built")

PROBLEMS = {name: (geo, lim, con) for name, (geo, lim, con) in CASES.items()}
PROBLEMS["circle with a stop"] = (circle_geometry(80.0), Limits(max_jerk_mps3=1.0),
                                  RouteConstraints(stops=(Stop(100.0),)))
# per-node friction (overlapping sections, one raising the grip, one with its own lateral
# coefficient; one across the seam of the loop) reaches the compiled passes as arrays
PROBLEMS["circle with friction sections"] = (
    circle_geometry(60.0), Limits(max_jerk_mps3=None, max_lateral_accel_mps2=9.0,
                                  max_decel_mps2=8.0, max_accel_mps2=8.0,
                                  friction_coefficient=0.8, lateral_friction_coefficient=0.9),
    RouteConstraints(stops=(Stop(200.0),), friction=(
        FrictionSection(20.0, 90.5, 0.3), FrictionSection(60.0, 150.0, 0.5, 0.25),
        FrictionSection(250.0, 300.0, 1.1), FrictionSection(360.0, 376.9, 0.4))))


@pytest.mark.parametrize("name", list(PROBLEMS))
def test_compiled_passes_match_python_bit_for_bit(name, monkeypatch):
    problem = build_problem(*PROBLEMS[name])
    ceiling = problem.lateral_ceiling_b()
    fast = envelope.solve_envelope(problem).b
    fast_reach = envelope.brake_reach(problem, ceiling)
    monkeypatch.setattr(envelope, "_compiled", None)
    slow = envelope.solve_envelope(problem).b
    slow_reach = envelope.brake_reach(problem, ceiling)
    assert np.array_equal(fast, slow)
    assert np.array_equal(fast_reach, slow_reach)


@pytest.mark.parametrize("name", list(PROBLEMS))
def test_compiled_lateral_ceiling_matches_python_bit_for_bit(name, monkeypatch):
    """SpeedProblem.lateral_ceiling_b's bisection compiled (``_envelope_passes.c``) against
    its numpy loop: the same squared speeds to the last bit (the cases have grade, drag,
    power, superelevation and friction sections, a loop and a stop)."""
    problem = build_problem(*PROBLEMS[name])
    fast = problem.lateral_ceiling_b()
    monkeypatch.setattr(problem_module, "_ceiling_kernel", lambda: None)
    slow = problem.lateral_ceiling_b()
    assert np.array_equal(fast.view(np.uint8), slow.view(np.uint8))
    assert np.any(fast < problem.cap_b)         # some node was bisected
