"""The envelope's compiled passes (``solvers/_envelope_passes.c``) are the Python loops' twin:
the same squared speeds to the last bit, on open and closed routes, with grade, drag and power,
and in the backward pass that ``check`` uses (``brake_reach``). The Python loops stay in
``solvers/envelope.py`` as the reference."""

from __future__ import annotations

import numpy as np
import pytest
from helpers import circle_geometry
from test_certificate_convex import CASES

from curvespeed.limits import Limits, RouteConstraints, Stop
from curvespeed.problem import build_problem
from curvespeed.solvers import envelope

pytestmark = pytest.mark.skipif(envelope._compiled is None, reason="compiled passes not built")

PROBLEMS = {name: (geo, lim, con) for name, (geo, lim, con) in CASES.items()}
PROBLEMS["circle with a stop"] = (circle_geometry(80.0), Limits(max_jerk_mps3=1.0),
                                  RouteConstraints(stops=(Stop(100.0),)))


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
