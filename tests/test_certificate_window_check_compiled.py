"""The compiled verdict on a window (curvespeed.verify.window_verdict, ``solvers/_window_check.c``)
against the verifier it stands in for (verify_profile with check_jerk=True, labels=False,
measure_lateral_jerk=False), on the windows of vehicles driving the bundled loop and mountain
road (invented, routes/README.md) with two jerk bounds: the planned profiles, and the same
profiles moved off them (random relative noise of 1e-3, all speeds raised 0.05 %), which the
verifier refuses for one limit or another. The verdict, the derived speeds, accelerations and
times, and each limit's largest use are the numpy code's to the last bit (the same operations
in the same order): no tolerance. Windows it does not take (steps next to rest, a power limit,
a lateral jerk bound, a loop's own problem) go to verify_profile, which also words every
refusal.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from curvespeed.planner import CONVEX_TOLERANCE
from curvespeed.replan import Replanner
from curvespeed.solvers.convex import ConvexOptions
from curvespeed.verify import WINDOW_USES, _window_check, verify_profile, window_verdict

import test_certificate_replan as replan_cases

pytestmark = pytest.mark.skipif(_window_check is None,
                                reason="the compiled window check was not built")


def _windows(case, jerk):
    geo, limits, constraints = replan_cases.CASES[case][0]()
    replanner = Replanner(geo, limits.replace(max_jerk_mps3=jerk), constraints,
                          options=ConvexOptions(threads=1, max_iterations=1))
    return replan_cases.drive(replanner, geo, constraints, 50)


def _assert_same_verdict(problem, b):
    fast = window_verdict(problem, b, CONVEX_TOLERANCE)
    assert fast is not None
    ok, derived, peaks = fast
    check = verify_profile(problem, b, CONVEX_TOLERANCE, check_jerk=True, labels=False,
                           measure_lateral_jerk=False)
    assert ok == check.ok
    for name in ("speed_mps", "accel_mps2", "time_s"):
        assert derived[name].tobytes() == check.derived[name].tobytes(), name
    for name, peak in zip(WINDOW_USES, peaks):
        assert np.float64(peak).tobytes() == np.float64(check.peak.get(name, 0.0)).tobytes(), name
    return ok


@pytest.mark.parametrize("jerk", [0.6, 1.5])
@pytest.mark.parametrize("case", ["loop", "mountain"])
def test_compiled_verdict_equals_the_verifier(case, jerk):
    rng = np.random.default_rng(11)
    verdicts = []
    for w in _windows(case, jerk):
        b = w.speed_mps ** 2
        verdicts.append(_assert_same_verdict(w.problem, b))
        noisy = b * (1 + 1e-3 * rng.standard_normal(b.size))
        verdicts.append(_assert_same_verdict(w.problem, noisy))
        verdicts.append(_assert_same_verdict(w.problem, b * 1.0005))
    assert any(verdicts) and not all(verdicts)      # both verdicts were reached


def test_the_compiled_verdict_takes_only_the_common_window():
    w = _windows("mountain", 1.5)[-1]
    p = w.problem
    assert window_verdict(p, w.speed_mps ** 2, CONVEX_TOLERANCE) is not None
    rest = p.rest_u.copy()
    rest[3] = 0.5
    others = [replace(p, limits=p.limits.replace(max_lateral_jerk_mps3=1.0)),
              replace(p, limits=p.limits.replace(max_power_w=80e3, mass_kg=1500.0)),
              replace(p, limits=p.limits.replace(max_jerk_mps3=None)),
              replace(p, closed=True), replace(p, rest_u=rest)]
    for other in others:
        assert window_verdict(other, w.speed_mps ** 2, CONVEX_TOLERANCE) is None
    stops = _windows("shuttle", 1.5)
    assert any(window_verdict(s.problem, s.speed_mps ** 2, CONVEX_TOLERANCE) is None
               for s in stops)
