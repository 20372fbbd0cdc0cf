"""Certificate tests of the convex solver: properties that must hold whatever the answer.

No outside value here: limits respected at every station (recomputed from the speeds), the
envelope is a lower bound on time, the fast path agrees with the independent cvxpy model,
refining the grid changes little, and infeasible requests are explained.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import geometry_from_curvature

from curvespeed.errors import InfeasibleError
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop, Superelevation
from curvespeed.problem import build_problem
from curvespeed.profile import derive
from curvespeed.solvers.convex import ConvexOptions, _batches, solve_convex
from curvespeed.solvers.envelope import solve_envelope
from curvespeed.solvers.reference_cvxpy import solve_reference
from curvespeed.verify import verify_profile

CONVEX_TOL = 1e-4   # QP rows are tightened by 1e-5 of each limit and solved to 1e-9


def winding(length=600.0, ds=1.0, closed=False, grade=None):
    s = np.arange(0.0, length + ds / 2, ds)
    kappa = (0.015 * np.sin(2 * np.pi * s / 600.0) ** 3 + 0.006 * np.sin(2 * np.pi * s / 230.0))
    if closed:
        n = int(round(length / ds))
        s = np.arange(n + 1) * (length / n)
        kappa = 0.012 * np.maximum(np.sin(2 * np.pi * s / length * 2), 0) + 2 * np.pi / length
    return geometry_from_curvature(kappa, ds=s[1] - s[0], closed=closed, grade=grade)


CASES = {
    "open road, stop and zone": (
        winding(),
        Limits(max_jerk_mps3=2.0, max_speed_mps=22.0),
        RouteConstraints(zones=(SpeedZone(150.0, 250.0, 10.0),), stops=(Stop(400.0),))),
    "closed loop with superelevation": (
        winding(800.0, closed=True),
        Limits(max_jerk_mps3=1.5, max_speed_mps=30.0, friction_coefficient=0.5),
        RouteConstraints(superelevation=(Superelevation(100.0, 400.0, 0.05),))),
    # two stops cut the loop into two stretches, one across the seam: numbered in route order
    # its stations come before and after the other's, and both fit one batch (a QP of 800
    # stations), so the batch's variables are not in station order
    "closed loop cut by two stops": (
        winding(800.0, closed=True),
        Limits(max_jerk_mps3=2.0, max_speed_mps=25.0),
        RouteConstraints(stops=(Stop(200.0), Stop(560.0)))),
    "grade, drag and power": (
        winding(600.0, grade=0.05),
        Limits(max_jerk_mps3=2.0, max_speed_mps=30.0, max_power_w=60e3, mass_kg=1500.0,
               drag_area_m2=0.7, rolling_resistance_coefficient=0.012),
        RouteConstraints(start_speed_mps=10.0, end_speed_mps=5.0)),
}


@pytest.fixture(scope="module", params=list(CASES))
def solved(request):
    geo, limits, constraints = CASES[request.param]
    problem = build_problem(geo, limits, constraints)
    return request.param, problem, solve_convex(problem)


def test_every_station_within_every_limit(solved):
    name, problem, result = solved
    check = verify_profile(problem, result.b, tolerance=CONVEX_TOL)
    assert check.ok, (name, check.violations)
    # recompute the comfort ellipse and jerk here from the speeds, without the verifier
    lim = problem.limits
    b = result.b
    d = derive(problem, b)
    lat = np.maximum(problem.kappa_abs * b * problem.cos_bank
                     - lim.gravity_mps2 * problem.sin_bank, 0.0) / lim.max_lateral_accel_mps2
    for a_end, nodes in ((d["step_accel_first_mps2"], slice(0, -1)),
                         (d["step_accel_last_mps2"], slice(1, None))):
        cap = np.where(a_end >= 0, lim.max_accel_mps2, lim.max_decel_mps2)
        assert np.max((a_end / cap) ** 2 + lat[nodes] ** 2) <= (1 + CONVEX_TOL) ** 2, name
    assert np.max(np.abs(d["jerk_mps3"])) <= lim.max_jerk_mps3 * (1 + CONVEX_TOL), name
    # the jerk is actually used: the bound shapes the profile
    assert np.max(np.abs(d["jerk_mps3"])) >= 0.99 * lim.max_jerk_mps3, name


def test_envelope_is_a_lower_bound_on_time(solved):
    name, problem, result = solved
    t_convex = derive(problem, result.b)["time_s"][-1]
    env_problem = build_problem_without_jerk(problem)
    t_env = derive(env_problem, solve_envelope(env_problem).b)["time_s"][-1]
    assert t_convex >= t_env * (1 - 1e-9), name
    assert np.all(result.b <= result.envelope_b * (1 + 1e-9) + 1e-9), name


def build_problem_without_jerk(problem):
    from dataclasses import replace

    steps = problem.n_nodes - 1
    return replace(problem, jerk_model=False, time_coef=np.full(steps, 2.0),
                   accel_factor_start=np.ones(steps), accel_factor_end=np.ones(steps))


def test_fast_path_agrees_with_the_cvxpy_reference_model(solved):
    # Same discrete problem, written twice: the fast path uses chords of the ellipses (inside
    # them) and a QP model of the time; the reference uses exact cones and the exact time.
    # Chords are exact at the break points, so both should meet within the SCP stopping rule.
    name, problem, result = solved
    ref = solve_reference(problem)
    t_fast = derive(problem, result.b)["time_s"][-1]
    t_ref = derive(problem, ref.b)["time_s"][-1]
    # Both stop iterating on a gain threshold (fast path 1e-4 of the route's time, reference
    # 1e-5), so they may stop a few thresholds apart: 3e-4. Measured at most 3.5e-5.
    assert t_fast == pytest.approx(t_ref, rel=3e-4), name
    assert verify_profile(problem, ref.b, tolerance=CONVEX_TOL).ok, name
    # Near the optimum the time hardly changes with small shifts of speed, so speeds agree less
    # tightly than times: measured at most 0.05 m/s.
    v_fast, v_ref = np.sqrt(result.b), np.sqrt(ref.b)
    assert np.max(np.abs(v_fast - v_ref)) <= 0.1, name


def comfort_objective(problem, b, weight):
    """Time plus weight * sum of squared changes of acceleration at the nodes (zero outside an
    open route), from the speeds alone."""
    d = derive(problem, b)
    first, last = d["step_accel_first_mps2"], d["step_accel_last_mps2"]
    if problem.closed:
        after, before = first, np.roll(last, 1)
    else:
        after, before = np.append(first, 0.0), np.insert(last, 0, 0.0)
    return d["time_s"][-1] + weight * np.sum((after - before) ** 2)


@pytest.mark.parametrize("name", list(CASES))
def test_comfort_weighted_program_agrees_with_the_cvxpy_reference(name):
    # With a comfort weight the optimum leaves the limits (jerk is no longer binding), so this
    # checks the objective's model and the line search rather than the rows. Same stopping
    # thresholds as above: 3e-4; measured at most 6.5e-5 (closed loop), 0.03 m/s.
    geo, limits, constraints = CASES[name]
    problem = build_problem(geo, limits, constraints)
    fast = solve_convex(problem, ConvexOptions(comfort_weight=5.0))
    ref = solve_reference(problem, comfort_weight=5.0)
    f_fast = comfort_objective(problem, fast.b, 5.0)
    f_ref = comfort_objective(problem, ref.b, 5.0)
    assert f_fast == pytest.approx(f_ref, rel=3e-4)
    assert np.max(np.abs(np.sqrt(fast.b) - np.sqrt(ref.b))) <= 0.1
    assert verify_profile(problem, fast.b, tolerance=CONVEX_TOL).ok


@pytest.mark.parametrize("closed, bound", [(False, 0.4), (True, 0.25)])
def test_lateral_jerk_bound_is_kept_and_agrees_with_the_cvxpy_reference(closed, bound):
    # The lateral jerk rows are linearised conservatively (tangent of the convex J / sqrt(b)),
    # so the bound must hold along every step and across every node of the answer, bind
    # somewhere, and both models (written separately) must meet within the stopping thresholds,
    # as for the other limits (measured: time 4e-5, speed 0.015 m/s).
    geo = winding(800.0, closed=True) if closed else winding()
    limits = Limits(max_jerk_mps3=2.0, max_lateral_jerk_mps3=bound, max_speed_mps=25.0)
    problem = build_problem(geo, limits, RouteConstraints())
    fast = solve_convex(problem)
    check = verify_profile(problem, fast.b, tolerance=CONVEX_TOL)
    assert check.ok, check.violations
    assert 0.99 <= check.peak["lateral_jerk"] <= 1 + CONVEX_TOL
    ref = solve_reference(problem)
    t_fast = derive(problem, fast.b)["time_s"][-1]
    t_ref = derive(problem, ref.b)["time_s"][-1]
    assert t_fast == pytest.approx(t_ref, rel=3e-4)
    assert np.max(np.abs(np.sqrt(fast.b) - np.sqrt(ref.b))) <= 0.1


def test_stretches_held_at_the_cap_stay_clear_of_where_lateral_jerk_slows_the_vehicle():
    # 1500 m at the top speed, then a spiral the top speed cannot take under the lateral jerk
    # bound: the envelope (which knows nothing of lateral jerk) holds the top speed up to the
    # spiral, so stations may be held only where braking for the spiral cannot reach. Held
    # too close, the QP would be infeasible and solved again without holding.
    s = np.arange(0.0, 1860.5, 1.0)
    kappa = np.interp(s, [0, 1500, 1560, 1860], [0, 0, 1 / 300, 1 / 300])
    problem = build_problem(geometry_from_curvature(kappa, ds=1.0),
                            Limits(max_lateral_jerk_mps3=0.5, max_speed_mps=27.0),
                            RouteConstraints(start_speed_mps=27.0))
    result = solve_convex(problem)
    assert not any("failed" in n for n in result.notes), result.notes
    assert any("held at their speed cap" in n for n in result.notes), result.notes
    assert verify_profile(problem, result.b, tolerance=CONVEX_TOL).ok


def test_infeasible_lateral_jerk_at_a_fixed_start_speed_is_explained():
    # 11 m/s on a 50 m radius (2.4 m/s^2) whose curvature ends 3 m after the start: the lateral
    # acceleration cannot fall to zero that fast at 0.3 m/s^3 from that speed
    kappa = np.zeros(201)
    kappa[:3] = 1 / 50.0
    problem = build_problem(geometry_from_curvature(kappa, ds=1.0),
                            Limits(max_lateral_jerk_mps3=0.3),
                            RouteConstraints(start_speed_mps=11.0))
    with pytest.raises(InfeasibleError, match="max_lateral_jerk_mps3 = 0.3 allows"):
        solve_convex(problem)


def test_the_number_of_threads_does_not_change_the_profile_by_a_byte(tmp_path, monkeypatch):
    # Stops and a zone cut this route into independent stretches, solved as several QPs. How
    # the stretches are grouped into QPs follows from their sizes alone, so one thread and two
    # solve the very same QPs (only in another order): the profile CSVs are byte-identical, as
    # DEVELOPERS.md promises for the same inputs.
    from curvespeed.io.profile_csv import write_profile_csv
    from curvespeed.planner import plan_profile

    s = np.arange(0.0, 3000.5, 1.0)
    geo = geometry_from_curvature(0.01 * np.sin(2 * np.pi * s / 500.0)
                                  + 0.004 * np.sin(2 * np.pi * s / 250.0), ds=1.0)
    limits = Limits(max_jerk_mps3=2.0, max_speed_mps=25.0)
    constraints = RouteConstraints(stops=(Stop(1000.0), Stop(2000.0)),
                                   zones=(SpeedZone(400.0, 600.0, 10.0),))
    from curvespeed.solvers import convex

    counts = []

    def counted(*args):
        out = _batches(*args)
        counts.append(len(out))
        return out

    monkeypatch.setattr(convex, "_batches", counted)
    written = []
    for threads in (1, 2):
        profile = plan_profile(geo, limits, constraints,
                               options=ConvexOptions(threads=threads))
        path = write_profile_csv(profile, tmp_path / f"threads{threads}.csv")
        written.append(path.read_bytes())
    assert max(counts) >= 2                     # really several QPs at once
    assert written[0] == written[1]


def test_qp_adapter_reports_clarabel_outcomes_in_our_terms():
    import scipy.sparse as sp

    from curvespeed.solvers import SolveStatus
    from curvespeed.solvers.clarabel_qp import solve_qp_clarabel

    P = sp.identity(2, format="csc")
    q = np.array([-1.0, -1.0])
    A = sp.csr_matrix(np.array([[1.0, 1.0], [1.0, 0.0], [0.0, 1.0]]))
    up = np.array([1.0, np.inf, np.inf])
    # x1 + x2 <= 1 with x1, x2 >= 0: minimum of |x - (1, 1)|^2 at (0.5, 0.5)
    x, status, _ = solve_qp_clarabel(P, q, A, np.array([-np.inf, 0.0, 0.0]), up, 1e-8)
    assert status is SolveStatus.OPTIMAL and np.allclose(x, 0.5, atol=1e-6)
    # x1 + x2 <= 1 with x1 >= 2, x2 >= 0: no point satisfies all three
    _, status, _ = solve_qp_clarabel(P, q, A, np.array([-np.inf, 2.0, 0.0]), up, 1e-8)
    assert status is SolveStatus.INFEASIBLE


def test_batches_keep_route_order_and_have_about_the_same_size():
    blocks = [np.arange(n) for n in (300, 50, 400, 250, 100, 500, 200)]
    batches = _batches(range(len(blocks)), blocks)
    assert [k for b in batches for k in b] == list(range(len(blocks)))
    # 1800 variables: two batches of about 1000, cut at the block boundary nearest to half
    assert [sum(blocks[k].size for k in b) for b in batches] == [1000, 800]
    assert len(_batches(range(2), blocks)) == 1         # 350 variables: one QP
    assert _batches([], blocks) == []


def test_without_jerk_bound_the_program_returns_the_envelope():
    # The envelope is the pointwise-largest feasible profile, hence time-optimal; chords are
    # exact at the envelope, so the program must find it (within 0.1 % in time).
    geo, limits, constraints = CASES["open road, stop and zone"]
    limits = limits.replace(max_jerk_mps3=None)
    problem = build_problem(geo, limits, constraints)
    result = solve_convex(problem)
    env = solve_envelope(problem)
    t_c = derive(problem, result.b)["time_s"][-1]
    t_e = derive(problem, env.b)["time_s"][-1]
    assert t_c == pytest.approx(t_e, rel=1e-3)
    assert t_c >= t_e * (1 - 1e-9)


def _times_at(ds_values, closed, constraints=RouteConstraints()):
    def kappa(s):
        return 0.01 * np.sin(2 * np.pi * s / 500.0) + 0.004 * np.sin(2 * np.pi * s / 250.0)

    times = []
    for ds in ds_values:
        s = np.arange(0.0, 2000.0 + ds / 2, ds)
        geo = geometry_from_curvature(kappa(s), ds=ds, closed=closed)
        problem = build_problem(geo, Limits(max_jerk_mps3=2.0, max_speed_mps=25.0), constraints)
        times.append(derive(problem, solve_convex(problem).b)["time_s"][-1])
    return times


def test_station_step_changes_total_time_little():
    # The same smooth route at 1 m and 0.25 m: total times within 0.2 %, on a loop and on an
    # open route entered and left at speed.
    t_loop = _times_at((1.0, 0.25), closed=True)
    assert t_loop[0] == pytest.approx(t_loop[1], rel=2e-3)
    t_open = _times_at((1.0, 0.25), closed=False,
                       constraints=RouteConstraints(start_speed_mps=15.0, end_speed_mps=15.0))
    assert t_open[0] == pytest.approx(t_open[1], rel=2e-3)


def test_starting_and_ending_at_rest_converges_like_the_rest_of_the_route():
    # Starting and ending at rest, the jerk ramp (here a / j = 0.75 s, 0.14 m) lies inside the
    # first 1 m step, which the step next to rest drives exactly (ramp, then constant
    # acceleration), so leaving and reaching rest add nothing that depends on the station step:
    # the route converges as the one entered and left at speed above, within 0.2 % (measured
    # 0.05 %, from the curves; a step of constant jerk over the whole first metre used to cost
    # about 0.4 s at each end).
    t = _times_at((1.0, 0.25), closed=False)
    assert t[0] == pytest.approx(t[1], rel=2e-3)


def test_comfort_weight_trades_time_for_smoothness():
    geo, limits, constraints = CASES["open road, stop and zone"]
    problem = build_problem(geo, limits, constraints)
    plain = solve_convex(problem)
    smooth = solve_convex(problem, ConvexOptions(comfort_weight=50.0))
    d0, d1 = derive(problem, plain.b), derive(problem, smooth.b)
    assert d1["time_s"][-1] >= d0["time_s"][-1]
    assert np.sum(d1["jerk_mps3"] ** 2) < np.sum(d0["jerk_mps3"] ** 2)


def test_a_stop_too_close_for_the_start_speed_is_explained():
    # From 20 m/s at 2 m/s^2 braking needs 100 m; with jerk 1 m/s^3 it needs
    # 20^2 / (2 * 2) + 20 * 2 / (2 * 1) = 120 m (jerk-limited stop, see the reference tests).
    # A stop at 110 m is within the envelope's reach but not the jerk-limited one's. The message
    # names the stop as the user gave it (station and origin), not a station of the grid, and
    # the fastest start speed that stops there: v^2 / 4 + v = 110, v = 2 (sqrt(111) - 1).
    geo = geometry_from_curvature(np.zeros(401), ds=1.0)
    limits = Limits(max_jerk_mps3=1.0, max_speed_mps=25.0, max_decel_mps2=2.0)
    problem = build_problem(geo, limits, RouteConstraints(start_speed_mps=20.0,
                                                          stops=(Stop(110.0, "--stop"),)))
    fastest = 2.0 * (math.sqrt(111.0) - 1.0)
    with pytest.raises(InfeasibleError,
                       match=rf"--stop: the stop at station 110 m is 110\.0 m from the start, "
                             rf"too close .* start speed 20\.00 m/s: .* takes 120\.0 m .* "
                             rf"Lower the start speed to {fastest:.2f} m/s or less, move the "
                             rf"stop to 120\.0 m or more"):
        solve_convex(problem)


def test_a_stop_the_envelope_cannot_reach_is_named_as_given():
    # From 20 m/s even without the jerk bound a stop needs 100 m at 2 m/s^2: a stop at 60.4 m
    # (on the 1 m grid: station 60) is refused by the envelope, which runs first, naming the
    # stop as given in the limits file, not the station before it where braking must end.
    geo = geometry_from_curvature(np.zeros(401), ds=1.0)
    limits = Limits(max_jerk_mps3=1.0, max_speed_mps=25.0, max_decel_mps2=2.0)
    stop = Stop(60.4, "limits.toml [[stop]] #1")
    problem = build_problem(geo, limits, RouteConstraints(start_speed_mps=20.0, stops=(stop,)))
    with pytest.raises(InfeasibleError, match=r"limits\.toml \[\[stop\]\] #1: the stop at "
                                              r"station 60\.4 m is 60\.0 m from the start"):
        solve_convex(problem)


def test_the_convex_solver_is_the_default_for_either_jerk_bound():
    from curvespeed.planner import default_solver
    from curvespeed.solvers import SolverKind

    assert default_solver(Limits()) is SolverKind.CONVEX                   # 2 m/s^3 default
    assert default_solver(Limits(max_jerk_mps3=None)) is SolverKind.ENVELOPE
    assert default_solver(Limits(max_jerk_mps3=None, max_lateral_jerk_mps3=0.5)) \
        is SolverKind.CONVEX
