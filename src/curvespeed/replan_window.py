"""The route-wide tables of a :class:`~curvespeed.replan.Replanner` and the window problems
cut from them.

:class:`RouteTables` is built once per route: the whole route's discrete problem (with its
steps next to rest under a jerk bound), every station's speed ceiling, the braking envelope and
the end bound of a window ending at each station. :meth:`RouteTables.window` then slices a
window's :class:`~curvespeed.problem.SpeedProblem` out of them in O(window) array operations;
only a vehicle at rest where the route has no rest point (or moving where it has one) needs its
first step re-shaped (:func:`curvespeed.jerk_model.with_rest_steps`). The physics of the window
is stated in :mod:`curvespeed.replan`. Core numerics: no files, no printing.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .diagnose import braking_decel, cap_words, grip_words, undrivable_station
from .errors import InfeasibleError
from .geometry import Geometry
from .jerk_model import jerk_time_terms, rest_nodes, with_rest_steps
from .launch_steps import scaled_terms
from .limits import Limits, RouteConstraints, Stop, stop_node
from .problem import SpeedProblem, build_problem
from .solvers import SolveResult, SolveStatus
from .solvers.envelope import brake_reach, window_envelope

#: Relative slack on squared speed when judging a state against a ceiling: round-off of the
#: speed a caller copies from a plan (1e-9 of b is 5e-10 of the speed).
_B_SLACK = 1e-9


@dataclass(frozen=True)
class Window:
    """One window: its route node indices, discrete problem, ceilings and end bound."""

    idx: np.ndarray
    ds: float
    problem: SpeedProblem
    ceiling_b: np.ndarray
    end_bound_b: float


class RouteTables:
    """Everything route-wide a window needs, computed once (module docstring)."""

    def __init__(self, geometry: Geometry, limits: Limits, constraints: RouteConstraints):
        base = build_problem(geometry, limits, constraints, jerk_model=False)
        self.jerk = limits.max_jerk_mps3 is not None
        self.rest = rest_nodes(base)
        whole = with_rest_steps(base, self.rest) if self.jerk else base
        stuck = undrivable_station(whole)
        if stuck is not None:
            raise InfeasibleError(stuck)
        self.base, self.whole = base, whole
        self.closed = whole.closed
        self.n = whole.n_nodes
        self.nv = self.n - 1 if self.closed else self.n
        self.ds = whole.ds
        self.station_m = whole.station_m
        # lateral ceiling with the top speed only: a window's caps (zones, stops, launch caps,
        # its end bound) are applied to it per window, min(lateral, cap) being the ceiling
        top = np.full(self.n, limits.max_speed_mps ** 2)
        self.lateral_b = replace(base, cap_b=top).lateral_ceiling_b()
        ceiling = np.minimum(self.lateral_b, whole.cap_b)
        if not self.closed:
            ceiling[-1] = min(ceiling[-1], whole.b_end)
        self.brake_b = brake_reach(whole, ceiling)
        self.brake_fall = _steepest_fall(self.brake_b, self.ds, limits, self.closed)
        self.route_b = None         # the whole route's plan, set by the Replanner
        self.stop_at = {}
        for stop in constraints.stops:
            k = stop_node(stop.station_m, self.ds, self.n, self.closed)
            self.stop_at[k % self.nv] = stop
        self.is_stop = np.zeros(self.nv, dtype=bool)       # the same nodes, as a mask
        self.is_stop[list(self.stop_at)] = True
        self._moving_terms = {}     # the jerk's terms of a window with no step next to rest

    def set_route_plan(self, b: np.ndarray) -> None:
        """The whole route's squared speeds: a window with no better starting point linearises
        at them (the envelope is too far above a plan braking at its limits: there the
        conservative rows built at the envelope leave a state on the plan no way forward)."""
        self.route_b = np.asarray(b, dtype=float)

    # -- the vehicle's station ---------------------------------------------------------------
    def snap(self, s: float, v: float, a: float) -> tuple[int, float]:
        """The node at or just behind station ``s`` and the squared speed the vehicle had
        there at its acceleration (at least 0).

        Behind, not the nearest: carried forward at a constant acceleration the vehicle would
        arrive faster than it can while its acceleration ramps down (into a speed cap, say), a
        state no profile continues; carried back, it is where the vehicle was (its acceleration
        held over less than a step), which it did continue from.
        """
        k = int(math.floor(s / self.ds + 1e-9))
        k = min(k, self.nv - 1) if not self.closed else k
        b0 = max(v * v - 2.0 * a * (s - k * self.ds), 0.0)
        k0 = k % self.nv if self.closed else k
        if v > 0.0 and b0 == 0.0:
            b0 = min(v * v, 1e-12)      # still moving: not a rest node (rounding aside)
        return k0, b0

    # -- a window's problem ------------------------------------------------------------------
    def window(self, k0: int, b0: float, a0: float, horizon_m: float,
               a_tolerance: float = 0.0, check_start: bool = True) -> Window:
        """The window's problem from node ``k0`` at squared speed ``b0``, acceleration ``a0``
        (within ``a_tolerance``); ``check_start`` refuses a speed above the station's own
        ceiling (:meth:`_check_start`)."""
        steps = int(round(horizon_m / self.ds))
        if self.closed:
            steps = min(steps, self.nv)
            idx = (k0 + np.arange(steps + 1)) % self.nv
            at_end = False
        else:
            steps = min(steps, self.n - 1 - k0)
            idx = k0 + np.arange(steps + 1)
            at_end = idx[-1] == self.n - 1
        if check_start:
            self._check_start(k0, b0)
        w = self.whole
        rest = self.rest[idx].copy()
        rest[0] = b0 == 0.0
        reshape = self.jerk and rest[0] != self.rest[idx[0]]
        src = self.base if reshape else w
        st = idx[:-1]
        cap = src.cap_b[idx].copy()
        source = src.cap_source[idx].copy()
        cap[0], source[0] = max(cap[0], b0), "vehicle"
        end_b = float(w.b_end) if at_end else None
        end_bound = end_b if at_end else float(min(cap[-1], self.brake_b[idx[-1]]))
        if not at_end and end_bound < cap[-1]:
            cap[-1], source[-1] = end_bound, "window_end"
        reserve = None if at_end else self._end_reserve(end_bound, int(idx[-1]))
        stop_pos = (np.flatnonzero(self.is_stop[idx[1:] % self.nv]) + 1).tolist()
        stops = tuple(Stop(i * self.ds, self._stop_origin(idx[i]),
                           name=self.stop_at[idx[i] % self.nv].name) for i in stop_pos)
        nsteps = idx.size - 1
        rest_u = src.rest_u[st]
        # a moving window's terms depend on its length and end alone: made once for each
        key = (nsteps, reserve is None) if np.isnan(rest_u).all() else None
        terms = self._moving_terms.get(key)
        if terms is None:
            terms = jerk_time_terms(nsteps + 1, False, rest_u, src.accel_factor_start[st])
            if reserve is not None:     # a free end keeps its acceleration (the reserve row)
                terms = _without_node(terms, nsteps)
            if key is not None:
                self._moving_terms[key] = terms
        if src.jerk_node_scale is not None:     # a launch's nodes, as in the route
            terms = scaled_terms(terms, src.jerk_node_scale[idx % self.nv], keep_first=True)
        terms, head_start = self._start_ramp(terms, b0, a0)
        problem = replace(
            src, station_m=self.station_m[idx], closed=False,
            kappa_abs=w.kappa_abs[idx], kappa_signed=w.kappa_signed[idx],
            sin_bank=w.sin_bank[idx], cos_bank=w.cos_bank[idx],
            sin_grade=w.sin_grade[idx], cos_grade=w.cos_grade[idx],
            mu_long=w.mu_long[idx], mu_lat=w.mu_lat[idx], friction_index=w.friction_index[idx],
            cap_b=cap, cap_source=source, b_start=b0, b_end=end_b,
            stop_nodes=np.asarray(stop_pos, dtype=int), stops=stops,
            time_coef=src.time_coef[st], accel_factor_start=src.accel_factor_start[st],
            accel_factor_end=src.accel_factor_end[st], rest_u=src.rest_u[st],
            accel_start_mps2=float(a0),
            accel_start_tolerance_mps2=float(a_tolerance) + head_start,
            jerk_model=w.jerk_model, end_reserve=reserve,
            jerk_terms=terms, jerk_node_scale=None,      # the terms carry it already
            rate_spread=None if src.rate_spread is None else (
                src.rate_spread[0][st], src.rate_spread[1][st]),
            switch_step=None if src.switch_step is None else src.switch_step[st],
            closed_form_b=None)
        if reshape:
            problem = self._reshape(problem, rest)
        ceiling = np.minimum(self.lateral_b[idx], problem.cap_b)
        return Window(idx=idx, ds=self.ds, problem=problem, ceiling_b=ceiling,
                      end_bound_b=end_bound)

    def relaxed(self, window: Window, fraction: float) -> Window:
        """``window`` with its comfort limits raised by ``fraction`` (acceleration,
        deceleration, lateral acceleration, jerk, lateral jerk; not friction, power or caps).
        Its ceilings stay the route's, which only keeps it slower."""
        lim = window.problem.limits
        up = 1.0 + fraction
        raised = lim.replace(
            max_accel_mps2=lim.max_accel_mps2 * up, max_decel_mps2=lim.max_decel_mps2 * up,
            max_lateral_accel_mps2=lim.max_lateral_accel_mps2 * up,
            max_jerk_mps3=None if lim.max_jerk_mps3 is None else lim.max_jerk_mps3 * up,
            max_lateral_jerk_mps3=(None if lim.max_lateral_jerk_mps3 is None
                                   else lim.max_lateral_jerk_mps3 * up))
        return replace(window, problem=replace(window.problem, limits=raised))

    def _end_reserve(self, end_b: float, k: int):
        """The braking reserve of a free window end at node ``k``
        (:attr:`SpeedProblem.end_reserve`), or None without a jerk bound (braking may then
        start at once).

        The vehicle leaves the window at squared speed ``b <= end_b`` (at most the braking
        envelope there) and acceleration ``a``. Ramping at the jerk bound ``J`` to the
        deceleration cap ``D`` takes ``(a + D) / J`` seconds, over at most
        ``x = v (a + D) / J`` metres at speed ``v <= sqrt(end_b)``; over those metres the
        braking envelope falls by at most ``rho x`` (``rho``: its steepest mean fall from ``k``
        within the longest such ramp, :func:`_steepest_fall`, at most ``2 D`` per metre). With
        ``b + rho x <= end_b`` the vehicle stays under the envelope while it ramps and then
        brakes down to every ceiling beyond (lowering its deceleration only slows it more):
        ``b + c (a + D) <= end_b`` with ``c = rho sqrt(end_b) / J``. Accelerating (``a > 0``)
        it first gains ``a^2 / (2 J)`` of speed, ``b`` about ``v a^2 / J <= v a A / J`` with the
        acceleration cap ``A`` (to first order): a second row adds ``(v A / J) a``. Where the
        envelope is flat ahead (a curve's ceiling, the top speed) the first row is
        ``b <= end_b`` and the second only asks an accelerating end for its gain; where the
        envelope falls, the far end of the window is slower than the whole-route plan, never
        faster.
        """
        lim = self.whole.limits
        if lim.max_jerk_mps3 is None:
            return None
        v_top = math.sqrt(max(end_b, 0.0))
        c = self.brake_fall[k] * v_top / lim.max_jerk_mps3
        gain = v_top * lim.max_accel_mps2 / lim.max_jerk_mps3
        d = c * lim.max_decel_mps2
        return (end_b, ((c, d), (c + gain, d)))

    def _start_ramp(self, terms, b0: float, a0: float):
        """The first node's jerk term as inside a route, and the change of acceleration the
        vehicle has time for after it beyond that term.

        Inside a route a node's change of acceleration is a ramp centred on the node over the
        time between the two steps' mid-points (:mod:`curvespeed.problem`), so at the node the
        vehicle is half-way through it, at the mean acceleration (what a profile reports and a
        vehicle on it measures), and has half of that time left: half the time to the first
        step's mid-point, ``ds / (2 (v0 + v1))`` (the term, scale 1/2), plus half the time from
        the mid-point of the step before, ``ds / (2 (v_prev + v0))``, with ``v_prev`` the speed
        one step back at the vehicle's acceleration. The bound times the latter is a constant
        change of acceleration, added to the tolerance on ``a0``. At rest there is no ramp.
        """
        jerk = self.whole.limits.max_jerk_mps3
        first = terms.node == 0
        if jerk is None or b0 <= 0.0 or not first.any():
            return terms, 0.0
        v0 = math.sqrt(b0)
        v_prev = math.sqrt(max(b0 - 2.0 * a0 * self.ds, 0.0))
        scale = np.where(first, 0.5 * terms.scale, terms.scale)
        return replace(terms, scale=scale), jerk * self.ds / (2.0 * (v_prev + v0))

    def _reshape(self, problem: SpeedProblem, rest: np.ndarray) -> SpeedProblem:
        """Steps next to rest for a window whose first node's rest state differs from the
        route's (a vehicle standing where the route has no rest point, or moving at one)."""
        close = np.flatnonzero(np.diff(np.flatnonzero(rest)) < 3)
        if close.size:
            k = int(np.flatnonzero(rest)[close[0] + 1])
            raise InfeasibleError(
                f"{problem.source}: the vehicle stands {k * self.ds:g} m before the stop at "
                f"station {problem.station_m[k]:.1f} m, less than three station steps: it "
                "cannot set off and stop again within the jerk bound; count the stop as "
                "reached (replan from its station)")
        return with_rest_steps(problem, rest)

    def _stop_origin(self, k: int) -> str:
        stop = self.stop_at[k % self.nv]
        return stop.origin or f"the stop at station {stop.station_m:g} m"

    def _check_start(self, k0: int, b0: float) -> None:
        """Refuse a speed above what the vehicle's own station allows (lateral limits, top
        speed; a zone's cap and a stop are judged by braking for them, see :meth:`envelope`)."""
        lat = self.lateral_b[k0]
        if b0 > lat * (1.0 + _B_SLACK) + 1e-12:
            raise InfeasibleError(
                f"{self.whole.source}: the vehicle's speed {math.sqrt(b0):.2f} m/s at station "
                f"{self.station_m[k0]:.1f} m is above what the limits allow there "
                f"({math.sqrt(lat):.2f} m/s: lateral acceleration, grip or top speed); the "
                "planner does not plan beyond its limits: slow the vehicle down, or replan "
                "with the limits it is really driven at")

    # -- a window's envelope ------------------------------------------------------------------
    def envelope(self, window: Window) -> SolveResult:
        """Forward-backward envelope of the window (raises when the start is too fast)."""
        p = window.problem
        fwd, env = window_envelope(p, window.ceiling_b, p.b_start, p.b_end)
        if env[0] < p.b_start * (1.0 - _B_SLACK) - 1e-12:
            raise InfeasibleError(self._explain_too_fast(window, fwd, env))
        env[0] = p.b_start
        return SolveResult(b=env, status=SolveStatus.OPTIMAL, solver="envelope", iterations=1,
                           solve_time_s=0.0, ceiling_b=window.ceiling_b)

    def _explain_too_fast(self, window: Window, fwd, env) -> str:
        p = window.problem
        b0 = p.b_start
        ceil = window.ceiling_b
        below = np.flatnonzero((ceil[1:] < b0) & (env[1:] >= ceil[1:] * (1 - 1e-9)))
        k = int(below[0]) + 1 if below.size else ceil.size - 1
        cause = cap_words(p, k, ceil[k])
        v0, vk = math.sqrt(b0), math.sqrt(max(ceil[k], 0.0))
        dist = k * window.ds
        decel, slippery = braking_decel(p, k)
        need = (b0 - ceil[k]) / (2.0 * decel)
        grip = "" if slippery is None else f" ({grip_words(p, slippery, decel)})"
        return (f"{p.source}: the vehicle at station {p.station_m[0]:.1f} m is too fast: at "
                f"{v0:.2f} m/s it must be down to {vk:.2f} m/s at station "
                f"{p.station_m[k]:.1f} m ({cause}), {dist:.1f} m ahead, and braking at "
                f"{decel:.3g} m/s^2{grip} needs about {need:.1f} m; the planner does "
                "not plan beyond its limits: slow the vehicle down (its own safety functions), "
                "or replan with the limits it is really driven at")

    def explain_stuck(self, window: Window, exc: Exception) -> str:
        """Why the jerk-bounded window has no profile although the envelope has one."""
        p = window.problem
        lim = p.limits
        v0 = math.sqrt(p.b_start)
        bounds = " and ".join(
            f"{name} {value:g} m/s^3" for name, value in
            (("jerk", lim.max_jerk_mps3), ("lateral jerk", lim.max_lateral_jerk_mps3))
            if value is not None)
        return (f"{p.source}: from station {p.station_m[0]:.1f} m at {v0:.2f} m/s and "
                f"{p.accel_start_mps2:+.2f} m/s^2, no profile keeps the {bounds} and every "
                "other limit over the next "
                f"{(window.idx.size - 1) * window.ds:.0f} m: the acceleration cannot be changed "
                "fast enough for what lies ahead (a curve, zone or stop close by, or an "
                "acceleration already beyond the limits); the planner does not plan beyond its "
                f"limits (solver: {exc})")


def _without_node(terms, node: int):
    """The jerk's time-base terms without those of ``node``: no jerk row there."""
    keep = terms.node != node
    return replace(terms, node=terms.node[keep], prev=terms.prev[keep], next=terms.next[keep],
                   weights=terms.weights[keep], scale=terms.scale[keep])


def _steepest_fall(brake_b: np.ndarray, ds: float, limits: Limits, closed: bool) -> np.ndarray:
    """At each node, the steepest mean fall of the braking envelope from it to a node ahead
    within the longest jerk ramp from the acceleration cap to the deceleration cap at the
    node's envelope speed, (m^2/s^2) per metre, at least 0. The envelope's backward steps
    brake at most at the deceleration cap, so it is at most ``2 D``."""
    n = brake_b.size
    out = np.zeros(n)
    if limits.max_jerk_mps3 is None:
        return out
    nv = n - 1 if closed else n
    ramp = (limits.max_accel_mps2 + limits.max_decel_mps2) / limits.max_jerk_mps3
    reach = np.ceil(np.sqrt(brake_b) * ramp / ds).astype(int)
    k = np.arange(n)
    for j in range(1, int(reach.max()) + 1):
        ahead = brake_b[(k + j) % nv] if closed else brake_b[np.minimum(k + j, n - 1)]
        out = np.where(j <= reach, np.maximum(out, (brake_b - ahead) / (j * ds)), out)
    return out
