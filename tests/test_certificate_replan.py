"""Receding-horizon replanning (curvespeed.replan): properties every window must have.

* with nothing changed (the vehicle exactly on the whole-route plan) a window agrees with that
  plan near the vehicle, on the bundled routes (invented, routes/README.md), at many stations;
* every window passes the verifier (curvespeed.verify) and stays under the whole route's speed
  ceiling; a stop inside it is reached at zero speed; a loop wraps across its seam;
* a window's end leaves room to brake for what lies beyond (uniform-jerk kinematics);
* a state too fast for a bend ahead gets a braking window, or a clear error when even full
  braking is too late; bad arguments get clear errors.
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pytest

from curvespeed.errors import InfeasibleError, ReplanError
from curvespeed.geometry import build_geometry
from curvespeed.io import read_route
from curvespeed.limits import Limits, RouteConstraints, SpeedZone, Stop
from curvespeed.planner import CONVEX_TOLERANCE, plan_profile
from curvespeed.replan import Replanner
from curvespeed.solvers.convex import ConvexOptions
from curvespeed.verify import verify_profile

from helpers import CLOSED_FORM_RTOL, straight_curve_straight

ROUTES = Path(__file__).resolve().parents[1] / "routes"

#: Both the whole-route plan and the windows iterate until a step gains less than 1e-6 of their
#: time (the solver's default is 1e-4: on a whole route that stops the plan up to about 0.1 m/s
#: from the optimum where it leaves a zone, well above what a window's own optimum differs by).
TIGHT = ConvexOptions(rel_improvement=1e-6)

#: How far a window may differ from the whole-route plan over its first 100 m, m/s. Both solve
#: the same discrete program there; what is left is each one's stopping test (1e-6 of its time:
#: 0.4 ms of a 400 s route, or about 0.01 m/s held over 20 m at 10 m/s, dt = L dv / v^2) and the
#: window's end, which must leave room to brake beyond it and so may slow the far end, 200 m
#: and more ahead, never the first 100 m where the vehicle is. Measured: at most 0.007 m/s on
#: the mountain road, 0.03 on the shuttle route and the loop; 0.05 is about 0.3 % of their
#: speeds there.
NEAR_TOLERANCE_MPS = 0.05
NEAR_M = 100.0

#: Relative slack on squared speed against a ceiling: the QP's rows are tightened by 1e-5 of
#: each limit (curvespeed.planner.CONVEX_TOLERANCE is 1e-4 of a limit's use).
CEILING_RTOL = 1e-6


def _shuttle():
    geo = build_geometry(read_route(ROUTES / "shuttle_route.gpx"))
    limits = Limits(max_speed_mps=8.0, max_lateral_accel_mps2=1.5)
    constraints = RouteConstraints(stops=(Stop(290.0), Stop(900.0), Stop(1300.0)),
                                   zones=(SpeedZone(0.0, 120.0, 4.0),))
    return geo, limits, constraints


def _loop():
    geo = build_geometry(read_route(ROUTES / "test_loop.geojson"))
    return geo, Limits(), RouteConstraints(zones=(SpeedZone(100.0, 300.0, 12.0),))


def _mountain():
    return build_geometry(read_route(ROUTES / "mountain_road.csv")), Limits(), RouteConstraints()


CASES = {"shuttle": (_shuttle, 97), "loop": (_loop, 113), "mountain": (_mountain, 211)}


def drive(replanner: Replanner, geo, constraints, calls: int) -> list:
    """The windows a vehicle gets that follows each exactly for 1 s, from station 5 m
    (standing where the route has stops, else at 8 m/s), for ``calls`` calls or until it is
    within 350 m of an open route's end (warnings of the windows' own kept quiet)."""
    state = (5.0, 0.0, 0.0) if constraints.stops else (5.0, 8.0, 0.0)
    out = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _ in range(calls):
            out.append(replanner.replan(*state))
            state = out[-1].state_at(1.0)
            if not geo.closed and state[0] > geo.length_m - 350.0:
                break
    return out


@pytest.fixture(scope="module", params=sorted(CASES))
def route_case(request):
    """(name, geometry, limits, whole-route profile, replanner, windows): a window from the
    plan's own state at every ``every``-th station, each planned cold (the warm start is tested
    on its own), as ``(node, WindowProfile)``."""
    make, every = CASES[request.param]
    geo, limits, constraints = make()
    profile = plan_profile(geo, limits, constraints, options=TIGHT)
    replanner = Replanner(geo, limits, constraints, options=TIGHT)
    last = geo.n_nodes - 1 if geo.closed else geo.n_nodes - 3
    windows = []
    for k in range(0, last, every):
        replanner.reset()
        windows.append((k, replanner.replan(geo.station_m[k], profile.speed_mps[k],
                                            profile.accel_mps2[k])))
    return request.param, geo, limits, profile, replanner, windows


def _plan_nodes(geo, k: int, n: int) -> np.ndarray:
    nv = geo.n_nodes - 1 if geo.closed else geo.n_nodes
    return (k + np.arange(n)) % nv


def test_window_agrees_with_whole_route_plan_near_the_vehicle(route_case):
    name, geo, limits, profile, replanner, windows = route_case
    worst = []
    for k, w in windows:
        idx = _plan_nodes(geo, k, w.speed_mps.size)
        near = w.distance_m <= NEAR_M + 1e-9
        dv = np.abs(w.speed_mps[near] - profile.speed_mps[idx[near]])
        worst.append((float(dv.max()), float(geo.station_m[k])))
        assert w.relaxed == 0.0, f"{name} at {geo.station_m[k]:.1f} m: on the plan, yet relaxed"
        np.testing.assert_allclose(w.station_m, geo.station_m[idx], atol=1e-9)
    assert len(worst) >= 8
    assert max(worst)[0] <= NEAR_TOLERANCE_MPS, f"{name}: worst (dv m/s, station m) {max(worst)}"


def test_every_window_passes_the_verifier_and_the_route_ceiling(route_case):
    name, geo, limits, profile, replanner, windows = route_case
    for k, w in windows:
        b = w.speed_mps ** 2
        check = verify_profile(w.problem, b, CONVEX_TOLERANCE)
        assert check.ok, f"{name} at {geo.station_m[k]:.1f} m: {check.violations}"
        # the Replanner's own check names no binding limits; its verdict and uses are the same
        quick = verify_profile(w.problem, b, CONVEX_TOLERANCE, labels=False)
        assert quick.binding is None and quick.violations == check.violations
        assert all(np.array_equal(quick.use[n], check.use[n]) for n in check.use)
        # independently of the window's own problem: under the whole route's ceiling (lateral
        # limits, grip, top speed, zones, stops) at every one of its stations
        idx = _plan_nodes(geo, k, w.speed_mps.size)
        ceiling = profile.limit_speed_mps[idx] ** 2
        assert np.all(b[1:] <= ceiling[1:] * (1 + CEILING_RTOL) + 1e-9)
        # the window takes up the vehicle's acceleration a0 without a jump: at a node inside a
        # route the change of acceleration is a ramp centred on it, between the mid-points of
        # the steps (curvespeed.problem), so a vehicle there is half-way through it, at the
        # mean acceleration, with half of that time left (a0 within the tolerance)
        if b[0] > 0.0:
            ds, a0 = w.problem.ds, profile.accel_mps2[k]
            a_first = w.problem.accel_factor_start[0] * (b[1] - b[0]) / (2.0 * ds)
            v0, v1 = math.sqrt(b[0]), math.sqrt(b[1])
            v_prev = math.sqrt(max(b[0] - 2.0 * a0 * ds, 0.0))
            half = 0.5 * (ds / (v_prev + v0) + ds / (v0 + v1))
            excess = max(abs(a_first - a0) - replanner.accel_tolerance_mps2, 0.0)
            assert excess <= limits.max_jerk_mps3 * half * (1 + CONVEX_TOLERANCE)


def test_stop_inside_the_window_is_reached_at_zero_speed():
    geo, limits, constraints = _shuttle()
    replanner = Replanner(geo, limits, constraints)
    profile = plan_profile(geo, limits, constraints)
    for start in (150.0, 200.0, 280.0):
        k = int(round(start / geo.spacing_m))
        w = replanner.replan(geo.station_m[k], profile.speed_mps[k], profile.accel_mps2[k])
        at_stop = int(np.argmin(np.abs(w.station_m - 290.0)))
        assert abs(w.station_m[at_stop] - 290.0) <= geo.spacing_m / 2
        assert w.speed_mps[at_stop] == 0.0
        # it moves everywhere else: before the stop to reach it, after it to leave
        others = np.delete(w.speed_mps, at_stop)[1:]
        assert np.all(others > 0.0)


def test_vehicle_standing_at_a_stop_or_elsewhere_sets_off_from_rest():
    geo, limits, constraints = _shuttle()
    replanner = Replanner(geo, limits, constraints)
    for station in (290.0, 500.0):          # at a stop, and where the route has no rest point
        w = replanner.replan(station, 0.0, 0.0)
        assert w.speed_mps[0] == 0.0 and w.speed_mps[1] > 0.0
        assert not math.isnan(w.problem.rest_u[0])      # the first step ramps from rest
        assert verify_profile(w.problem, w.speed_mps ** 2, CONVEX_TOLERANCE).ok


def test_loop_window_runs_on_across_the_seam():
    geo, limits, constraints = _loop()
    replanner = Replanner(geo, limits, constraints)
    w = replanner.replan(geo.length_m - 100.0, 20.0, 0.0)
    assert np.all(np.diff(w.distance_m) > 0.0)
    seam = int(np.argmax(np.diff(w.station_m) < 0.0)) + 1
    assert w.station_m[seam - 1] > geo.length_m - geo.spacing_m - 1e-6
    assert w.station_m[seam] == pytest.approx(0.0, abs=1e-9)
    assert w.distance_m[-1] == pytest.approx(300.0, abs=geo.spacing_m)
    # a station past the lap is the same station of the next lap
    again = replanner.replan(geo.length_m - 100.0 + geo.length_m, 20.0, 0.0)
    np.testing.assert_array_equal(again.station_m, w.station_m)


def test_warm_start_gives_the_cold_answer():
    geo, limits, constraints = _loop()
    profile = plan_profile(geo, limits, constraints, options=TIGHT)
    replanner = Replanner(geo, limits, constraints, options=TIGHT)
    cold = Replanner(geo, limits, constraints, options=TIGHT)
    for k in range(400, 430, 3):        # onto the straight after a curve, accelerating
        s, v, a = geo.station_m[k], profile.speed_mps[k], profile.accel_mps2[k]
        warm = replanner.replan(s, v, a)
        cold.reset()
        fresh = cold.replan(s, v, a)
        assert warm.warm_started == (k > 400) and not fresh.warm_started
        # the same program; each answer is within its stopping test of the optimum (see
        # NEAR_TOLERANCE_MPS), over the whole window this time
        np.testing.assert_allclose(warm.speed_mps, fresh.speed_mps, atol=NEAR_TOLERANCE_MPS)


# -- a vehicle too fast for the bend ahead -------------------------------------------------------
#: Invented: a 350 m straight into a 50 m radius bend; with the default limits the bend allows
#: sqrt(2.5 m/s^2 * 50 m) = 11.18 m/s (lateral comfort), the straight the 30 m/s top speed.
BEND_AT_M = 350.0


def _bend():
    return straight_curve_straight(BEND_AT_M, 50.0, 150.0, 200.0)


@pytest.fixture(scope="module")
def bend_replanner():
    return Replanner(_bend(), Limits())


def _stopping_distance(v: float, a: float, v_end: float, decel: float, jerk: float) -> float:
    """Distance to slow from speed ``v`` at acceleration ``a`` down to ``v_end``: a ramp at
    the jerk bound to ``-decel``, then constant deceleration (uniform-jerk kinematics:
    v(t) = v + a t - j t^2 / 2, x(t) = v t + a t^2 / 2 - j t^3 / 6)."""
    t = (a + decel) / jerk
    v1 = v + a * t - jerk * t * t / 2.0
    x1 = v * t + a * t * t / 2.0 - jerk * t ** 3 / 6.0
    if v1 <= v_end:     # already slow enough within the ramp: stop at the crossing
        roots = np.roots([-jerk / 2.0, a, v - v_end])
        t_cross = min(r.real for r in roots if abs(r.imag) < 1e-12 and r.real >= 0.0)
        return v * t_cross + a * t_cross ** 2 / 2.0 - jerk * t_cross ** 3 / 6.0
    return x1 + (v1 * v1 - v_end * v_end) / (2.0 * decel)


def test_too_fast_for_the_bend_gives_a_braking_window(bend_replanner):
    limits = bend_replanner.limits
    w = bend_replanner.replan(100.0, 25.0, 0.0)          # 250 m before the bend, 25 m/s
    v_bend = math.sqrt(limits.max_lateral_accel_mps2 * 50.0)
    in_bend = w.station_m >= BEND_AT_M
    assert in_bend.any()
    assert np.all(w.speed_mps[in_bend] <= v_bend * (1 + CEILING_RTOL))
    assert w.accel_mps2.min() < -1.0            # it brakes
    assert w.relaxed == 0.0
    assert verify_profile(w.problem, w.speed_mps ** 2, CONVEX_TOLERANCE).ok


def test_window_end_leaves_room_to_brake_for_the_bend_beyond():
    """Windows that end short of the bend must end slow enough to brake for it."""
    limits = Limits()
    replanner = Replanner(_bend(), limits, horizon_m=200.0)
    v_bend = math.sqrt(limits.max_lateral_accel_mps2 * 50.0)
    for start in (20.0, 60.0, 100.0, 140.0):
        replanner.reset()
        w = replanner.replan(start, 25.0, 0.0)
        gap = BEND_AT_M - w.station_m[-1]
        assert gap > 0.0
        a_end = w.problem.accel_factor_end[-1] * (w.speed_mps[-1] ** 2 - w.speed_mps[-2] ** 2) \
            / (2.0 * w.problem.ds)
        need = _stopping_distance(w.speed_mps[-1], a_end, v_bend, limits.max_decel_mps2,
                                  limits.max_jerk_mps3)
        # one station step: the bend's ceiling holds from its first node on
        assert need <= gap + w.problem.ds, (start, need, gap)


def test_too_late_to_brake_is_a_clear_error(bend_replanner):
    replanner = bend_replanner
    with pytest.raises(InfeasibleError, match=r"too fast.*11\.18 m/s at station 350\.0 m"
                                              r" \(a curve"):
        replanner.replan(330.0, 25.0, 0.0)       # 20 m before the bend at 25 m/s
    with pytest.raises(InfeasibleError, match="above what the limits allow there"):
        replanner.replan(400.0, 20.0, 0.0)       # in the bend, too fast for it
    # braking without the jerk bound would make it (100 m), with it from +1.5 m/s^2 not:
    # the acceleration cannot be changed fast enough
    strict = Replanner(_bend(), Limits(), relax_limits=0.0)
    with pytest.raises(InfeasibleError, match=r"station 240\.0 m .*jerk"):
        strict.replan(240.0, 25.0, 1.5)


# -- arguments ------------------------------------------------------------------------------------
@pytest.mark.parametrize("state, match", [
    ((-5.0, 10.0, 0.0), "outside the route"),
    ((1e9, 10.0, 0.0), "outside the route"),
    ((float("nan"), 10.0, 0.0), "station_m must be a finite number"),
    ((100.0, float("inf"), 0.0), "speed_mps must be a finite number"),
    ((100.0, 10.0, float("nan")), "accel_mps2 must be a finite number"),
    ((100.0, -1.0, 0.0), "speed_mps must be zero or positive"),
    (("100", 10.0, 0.0), "station_m must be a finite number"),
    ((True, 10.0, 0.0), "station_m must be a finite number"),
    ((699.5, 10.0, 0.0), "within two station steps of the route's end"),
])
def test_bad_state_is_a_clear_error(state, match, bend_replanner):
    with pytest.raises(ReplanError, match=match):
        bend_replanner.replan(*state)


@pytest.mark.parametrize("kwargs, match", [
    ({"horizon_m": 0.0}, "horizon_m must be a finite number of at least two station steps"),
    ({"horizon_m": float("nan")}, "horizon_m"),
    ({"horizon_m": float("inf")}, "horizon_m"),
    ({"horizon_m": "300"}, "horizon_m"),
    ({"relax_limits": -0.1}, "relax_limits must be a fraction"),
    ({"accel_tolerance_mps2": float("inf")}, "accel_tolerance_mps2"),
])
def test_bad_settings_are_a_clear_error(kwargs, match):
    with pytest.raises(ReplanError, match=match):
        Replanner(_bend(), Limits(), **kwargs)


def test_window_ending_just_before_a_stop_keeps_to_the_plan():
    """A window that ends on the last metres into a stop (where the braking envelope falls to
    rest) needs no more than the plan's own braking: it is planned within the limits and
    agrees with the whole-route plan where the vehicle is."""
    geo, limits, constraints = _shuttle()
    profile = plan_profile(geo, limits, constraints, options=TIGHT)
    replanner = Replanner(geo, limits, constraints, horizon_m=100.0, options=TIGHT)
    for end in (276.0, 281.0, 285.0, 288.0, 289.0):
        k = int(math.floor((end - 100.0) / geo.spacing_m))
        replanner.reset()
        w = replanner.replan(geo.station_m[k], profile.speed_mps[k], profile.accel_mps2[k])
        assert w.relaxed == 0.0 and w.station_m[-1] < 290.0 - geo.spacing_m / 2
        near = w.distance_m <= 50.0
        idx = _plan_nodes(geo, k, w.speed_mps.size)
        np.testing.assert_allclose(w.speed_mps[near], profile.speed_mps[idx[near]],
                                   atol=NEAR_TOLERANCE_MPS)


def test_without_a_jerk_bound_windows_are_the_whole_route_envelope():
    """With no jerk bound a window is the forward-backward envelope from the vehicle's speed
    under the route's ceilings and braking envelope, so from a state on the whole-route
    envelope it is that envelope itself (closed form per step: round-off only)."""
    geo, _, constraints = _loop()
    limits = Limits(max_jerk_mps3=None)
    profile = plan_profile(geo, limits, constraints)
    replanner = Replanner(geo, limits, constraints)
    for k in range(0, geo.n_nodes - 1, 397):
        w = replanner.replan(geo.station_m[k], profile.speed_mps[k], profile.accel_mps2[k])
        assert w.solver == "envelope"
        idx = _plan_nodes(geo, k, w.speed_mps.size)
        np.testing.assert_allclose(w.speed_mps, profile.speed_mps[idx], rtol=CLOSED_FORM_RTOL,
                                   atol=1e-9)


def test_one_qp_per_call_converges_over_calls_without_warnings(recwarn):
    """One sequential-convex iteration per call (ConvexOptions(max_iterations=1)): each window
    passes the verifier, and calls repeated at the same state move it to the converged window
    (each call's QP starts from the last answer). The state is 3 m/s below the plan, so the
    whole route's plan is a poor first point (measured: 0.09 m/s off after one call, 0.009
    after two, converged to 1e-3 after three)."""
    geo, limits, constraints = _loop()
    profile = plan_profile(geo, limits, constraints, options=TIGHT)
    k = 2300
    state = geo.station_m[k], profile.speed_mps[k] - 3.0, 0.0
    converged = Replanner(geo, limits, constraints, options=TIGHT).replan(*state)
    stepping = Replanner(geo, limits, constraints, options=ConvexOptions(threads=1,
                                                                         max_iterations=1))
    gaps = []
    for _ in range(5):
        w = stepping.replan(*state)
        assert w.iterations == 1
        assert verify_profile(w.problem, w.speed_mps ** 2, CONVEX_TOLERANCE).ok
        gaps.append(float(np.max(np.abs(w.speed_mps - converged.speed_mps))))
    assert gaps[0] > 0.02               # the first call is visibly off (else nothing is shown)
    assert gaps[-1] <= 0.01 * gaps[0] + 1e-6            # and the calls close the gap
    assert not [m for m in recwarn if "iteration cap" in str(m.message)]


def test_state_at_drives_each_step_as_the_window_is_driven():
    """``WindowProfile.state_at`` against uniform-acceleration kinematics (constant acceleration
    per step, ``v^2 = v0^2 + 2 a d``, ``d = v0 t + a t^2 / 2``) and the step leaving rest's jerk
    ramp (curvespeed.rest_step): at every node time it gives the node's station and speed; in
    between, speed is the integral of the acceleration it gives and station that of the speed
    (checked by finite differences at 1 ms, whose error is a t^2 / 24 ~ 1e-7 m here)."""
    geo, limits, constraints = _shuttle()
    w = Replanner(geo, limits, constraints).replan(0.0, 0.0, 0.0)       # leaving a stop
    assert np.isnan(w.problem.rest_u[1:]).any() and not np.isnan(w.problem.rest_u[0])
    for j in range(0, w.time_s.size, 7):
        s, v, _ = w.state_at(float(w.time_s[j]))
        assert s == pytest.approx(w.station_m[j], abs=1e-9)
        assert v == pytest.approx(w.speed_mps[j], abs=1e-9)
    h = 1e-3
    for t in np.linspace(0.05, float(w.time_s[-1]) - 0.05, 97):
        s0, v0, a0 = w.state_at(t - h)
        s1, v1, a1 = w.state_at(t)
        s2, v2, a2 = w.state_at(t + h)
        if a0 == a1 == a2:                      # the same step (or the same ramp value)
            assert (v2 - v0) / (2 * h) == pytest.approx(a1, abs=1e-6)
        assert (s2 - s0) / (2 * h) == pytest.approx(v1, abs=2e-3)


def test_state_at_drives_a_launch_ramp_at_constant_jerk():
    """A window leaving rest at 0.5 m/s^3 and 3 m/s^2 plans the launch as its jerk ramp (steps
    timed as driven at constant jerk, curvespeed.rest_step.linear_accel_step): ``state_at``
    drives those steps so. At each node time it gives the node's station and speed; inside
    such a step the acceleration it gives rises at the step's own jerk, within 1 % of the
    bound (the window's speeds are not the exact ramp's), and the speed is its integral
    (finite differences at 1 ms: exact for a quadratic speed, to round-off)."""
    from helpers import geometry_from_curvature

    geo = geometry_from_curvature(np.zeros(301), ds=1.0)
    limits = Limits(max_jerk_mps3=0.5, max_accel_mps2=3.0, max_decel_mps2=3.0,
                    max_speed_mps=30.0)
    w = Replanner(geo, limits, RouteConstraints()).replan(0.0, 0.0, 0.0)
    p = w.problem
    linear = np.flatnonzero(np.isnan(p.rest_u) & (p.time_coef > 2.0))
    assert linear[0] == 1 and linear.size >= 10
    for j in range(0, 20):
        s, v, _ = w.state_at(float(w.time_s[j]))
        assert s == pytest.approx(w.station_m[j], abs=1e-9)
        assert v == pytest.approx(w.speed_mps[j], abs=1e-9)
    h = 1e-3
    for k in linear[:10]:
        t = 0.5 * (w.time_s[k] + w.time_s[k + 1])
        (_, v0, a0), (_, v1, a1), (_, v2, a2) = (w.state_at(t + d) for d in (-h, 0.0, h))
        assert (a2 - a0) / (2 * h) == pytest.approx(0.5, rel=1e-2)
        assert (v2 - v0) / (2 * h) == pytest.approx(a1, rel=1e-9)


def test_state_at_drives_the_step_where_a_launch_turns_through_its_turn():
    """A window leaving rest on a 40 m route that ends at rest, at 0.5 m/s^3 and 3 m/s^2: the
    move turns below the cap 40 / 12 = 3.3 m from rest (double-S closed form, Biagiotti &
    Melchiorri 2008, section 3.4), inside step 3. ``state_at`` drives that step as the turn
    (curvespeed.jerk_switch): the acceleration goes on from the ramp's across station 3 and rises
    at the bound up to the turn, then falls at it (finite differences at 1 ms away from the
    turn and the step's ends, within 1e-3 of the bound: the window's speeds are the ramp's to
    about 1e-6, and the turn's jerk is their third-order function)."""
    from helpers import geometry_from_curvature

    geo = geometry_from_curvature(np.zeros(41), ds=1.0)
    limits = Limits(max_jerk_mps3=0.5, max_accel_mps2=3.0, max_decel_mps2=3.0,
                    max_speed_mps=30.0)
    w = Replanner(geo, limits, RouteConstraints()).replan(0.0, 0.0, 0.0)
    assert np.flatnonzero(w.problem.switch_step).tolist() == [3, 36]
    t0, t1 = float(w.time_s[3]), float(w.time_s[4])
    h = 1e-3
    times = np.linspace(t0 - 0.02, t1 - 2 * h, 60)
    a = np.array([w.state_at(t)[2] for t in times])
    rate = np.array([(w.state_at(t + h)[2] - w.state_at(t - h)[2]) / (2 * h) for t in times])
    turn = times[int(np.argmax(a))]                 # the peak: the rates change sign there
    away = np.abs(times - turn) > 2 * h
    np.testing.assert_allclose(np.abs(rate[away]), 0.5, rtol=1e-3)
    assert np.all(rate[away & (times < turn)] > 0) and np.all(rate[away & (times > turn)] < 0)
    assert t0 < turn < t1


def test_a_vehicle_following_each_window_exactly_never_needs_the_limits_raised():
    """Followed exactly (the next state from ``state_at``), a window's motion is continued by
    the next window within every limit: over 300 calls 0.1 s apart along the mountain road,
    through arcs ridden at the lateral limit, no window is relaxed. (Interpolating the node
    arrays linearly in time instead started windows up to 1e-4 m/s above the lateral limit and
    relaxed 58 of these 300.)"""
    geo, limits, constraints = _mountain()
    replanner = Replanner(geo, limits, constraints, options=ConvexOptions(threads=1))
    state = (600.0, 20.0, 0.0)
    for _ in range(300):
        w = replanner.replan(*state)
        assert w.relaxed == 0.0, state
        state = w.state_at(0.1)
    assert state[0] > 1200.0
