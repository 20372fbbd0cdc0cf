"""The discrete speed problem that every solver solves and the verifier checks.

Unknowns are the squared speeds ``b[k] = v[k]**2`` at the geometry's nodes ``k = 0..n``. Between
consecutive nodes ``b`` is linear in station, so each step ``k -> k+1`` has the constant
acceleration ``a[k] = (b[k+1] - b[k]) / (2 ds)`` (exact for uniform acceleration) and takes the time
``2 ds / (v[k] + v[k+1])``.

The constraint set is defined once, here:

* **node caps** -- ``b[k] <= cap[k]`` from the top speed, speed zones (every node of a step that
  touches the zone) and stops (``cap = 0``);
* **node-step coupling** -- each step's acceleration must be feasible at *both* of its nodes, with
  that node's lateral demand: ``lo_k(b[k]) <= a <= hi_k(b[k])`` for ``a = a[k-1]`` and ``a[k]``.

``[lo_k(b), hi_k(b)]`` is the acceleration interval node ``k`` allows at squared speed ``b``:

* comfort ellipse: ``(a / A)^2 + (y / A_lat)^2 <= 1`` with ``A`` the accel or decel cap by the sign
  of ``a`` and ``y = max(kappa b cos(theta) - g sin(theta), 0)`` the lateral acceleration felt in
  the road plane (``theta = atan(e)``, superelevation ``e`` toward the curve's inside);
* friction ellipse at the tyres: ``(T / mu)^2 + (y_t / mu_lat)^2 <= N^2`` where
  ``T = a + g sin(gamma) + c_d b + c_rr g cos(gamma)`` is the tyre force along the path per unit
  mass (grade ``gamma``, drag, rolling resistance), ``y_t = kappa b cos(theta) - g sin(theta)`` the
  tyre force across it, and ``N = g cos(gamma) cos(theta) + kappa b sin(theta)`` the normal load;
  with no longitudinal force this is the textbook ``v^2/(gR) = (e + f)/(1 - e f)``;
* power: ``T v <= P / m``.

**Steps next to a rest node** (a stop, or a start or end at rest) when a jerk bound applies:
a vehicle leaving rest with bounded jerk starts with zero acceleration, so over that step it
is driven at constant jerk up to some acceleration and then at that acceleration up to the moving
node (arriving at rest: the same backwards). For a fixed shape ``u`` of that motion the step is
still linear in ``b`` (:mod:`curvespeed.rest_step`): it takes ``c ds / v``, its acceleration is 0
at the rest node and ``f * b_moving / (2 ds)`` at the moving node, and the ramp's jerk caps the
moving node. Each such step gets the shape that ramps at the jerk bound to the acceleration its
moving node allows (the start of the time-optimal launch; where that ramp is longer than the
step, :func:`curvespeed.jerk_model.with_rest_steps` says how much of it the step takes);
:attr:`SpeedProblem.rest_u`,
:attr:`~SpeedProblem.time_coef`, :attr:`~SpeedProblem.accel_factor_start` and
:attr:`~SpeedProblem.accel_factor_end` carry this per step; every other step has constant
acceleration (factors 1, time ``2 ds / (v + v')``), except where a launch's (or a stop's) jerk
ramp goes on past the step next to rest: its further steps, up to the one in which it ends, are
driven with the acceleration linear in time (the profile's ``linear_accel`` steps), each taking
that motion's time, a fixed factor over ``2 ds / (v + v')``, with its acceleration at its far
node from rest the motion's there, a fixed factor over its mean
(:func:`curvespeed.launch_steps.launch_steps`).

**Jerk** at a node is its change of acceleration over a time base
(:meth:`SpeedProblem.node_jerk_time`, from :attr:`SpeedProblem.jerk_terms`):

* between two constant-acceleration steps, ``4 ds / (v_prev + 2 v + v_next)``: the time between
  the steps' mid-points, ``ds / (v_prev + v) + ds / (v + v_next)``, less its Jensen gap. The
  mid-point time itself lets a staircase of step accelerations copy a jerk ramp's mean in every
  step while covering ``J T^3 / 12`` more distance per step than the ramp (acceleration
  front-loaded within each step): at low speed that made rest-to-rest moves slightly faster than
  the exact jerk-limited optimum. The Jensen form is shorter by
  ``ds (x - y)^2 / (x y (x + y))`` (``x = v_prev + v``, ``y = v + v_next``), which grows where
  speed changes fastest relative to itself, near rest;
* at the moving node of a step next to rest, ``min(2 t2, T_next)``: the change of acceleration is
  a ramp symmetric about the node, fitting in the step's flat part ``t2`` before it and in half of
  the next step ``T_next`` after it (that half of the next step is the next node's share). A
  symmetric ramp leaves the speed after it unchanged, so the profile is the step-wise constant
  form of a motion whose jerk really stays within the bound. Where the step ramps over its whole
  length (a launch planned as its ramp) the ramp runs on through the node: the time to the next
  step's distance-weighted mean time, ``2 ds (v + 2 v') / (3 (v + v')^2)`` for a step of
  constant acceleration, bounded from below by linear forms;
* at the nodes of a launch planned as its ramp, the launch's own time between where the two
  steps' accelerations are taken (:func:`curvespeed.launch_steps.launch_steps`; the terms above
  scaled to it at the launch's speeds, :attr:`SpeedProblem.jerk_node_scale`);
* at an open end the vehicle is steady outside the route: half the end step's time,
  ``ds / (v + v_next)`` (``t2`` at the moving node of a step next to rest).

**Lateral jerk** (when bounded) is ``|d(kappa v^2)/dt| = |g| v`` with
``g = d(kappa v^2)/ds = kappa' b + 2 kappa a`` the station rate of the lateral acceleration
(:mod:`curvespeed.lateral_rates`). The curvature is known at the nodes. Its rate changes at the
road's element joints, which fall anywhere between stations, so along a step the rate is taken
between the lowest and highest chord rate of the step and its two neighbours, averaging to the
step's own; where that is the lowest or the highest, the rate is the chord's all along the step
(curvature linear between the nodes, as on a clothoid, arc or straight and wherever the joints
fall on nodes). That holds for elements at least two steps long, wherever their joints fall.
The bound holds

* *along every step, as driven*: on a constant-acceleration step ``b`` is linear in station,
  so ``g`` is linear wherever the rate is constant and its extremes are at the nodes or where
  the rate changes; with the rate and the curvature at their extremes, linear forms in the
  step's ``b`` bound it there. On a step next to rest driven with a jerk ramp, ``b`` lies in
  ``[0, b_m]`` and the acceleration between 0 and its flat value ``f b_m / (2 ds)``, so ``g``
  lies between two multiples of ``b_m``. The speed is at most the larger of the step's node
  speeds (it is monotone along the step), so ``max |form| * max(v, v') <= J_lat``
  (:meth:`SpeedProblem.step_lateral_jerk`) bounds the lateral jerk everywhere along it. Where
  the curvature is linear between the nodes it is exact at constant speed (``|kappa'| v^3`` on
  a clothoid, Shortt's spiral rate) and wherever the largest rate meets the larger speed;
* *at every node where two steps meet, across the change of acceleration*: with the road of
  either step (its rate at either end of that step's range) and the acceleration of the other,
  ``|kappa'_- b + 2 kappa a_+| v`` and ``|kappa'_+ b + 2 kappa a_-| v``
  (:meth:`SpeedProblem.node_lateral_jerk`). A vehicle cannot switch its acceleration exactly
  at a station (the jerk bound spreads the change around the node), and where the curvature
  rate changes at the node the road next to it is driven with either step's acceleration or
  one between them (``g`` is linear in ``a``).

Stations are treated as path length (the slope's cos(gamma) < 0.5 % at 10 % grade is neglected).
Every function here is vectorised over nodes and has no side effects.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from . import lateral_rates, rest_step
from .friction import node_friction
from .geometry import Geometry
from .jerk_model import JerkTimeTerms, jerk_time_terms, rest_nodes, with_rest_steps
from .limits import Limits, RouteConstraints, validate_limits
from .problem_inputs import bank_and_grade, end_speeds_b, rate_spread, speed_caps
from .route_checks import validate_constraints

#: Cap on squared speed used where no other cap applies (never reached: max speed is finite).
_UNBOUNDED = 1e12


@dataclass(frozen=True)
class SpeedProblem:
    """Arrays and scalars of the discrete problem (see module docstring).

    Attributes
    ----------
    station_m : ndarray, shape (n+1,)
        Node stations, metres.
    ds : float
        Step length, metres.
    closed : bool
        Periodic problem: node n is node 0.
    kappa_abs : ndarray
        |curvature| at nodes, 1/m.
    kappa_signed : ndarray
        Signed curvature at nodes (left positive), 1/m; only for reporting lateral quantities.
    sin_bank, cos_bank : ndarray
        Sine and cosine of the bank angle atan(e), e toward the curve's inside.
    sin_grade, cos_grade : ndarray
        Sine and cosine of the grade angle (+ uphill in the direction of travel).
    cap_b : ndarray
        Upper bound on squared speed from top speed, zones and stops, m^2/s^2.
    cap_source : ndarray of str
        What sets ``cap_b`` at each node ("max_speed", "zone", "stop").
    b_start, b_end : float or None
        Fixed squared speed at the first / last node (None: periodic when closed; an open
        problem with ``b_end`` None ends free, as a receding-horizon window does, its end
        bounded by :attr:`cap_b`).
    stop_nodes : ndarray of int
        Nodes where the vehicle must be at rest.
    limits : Limits
        The vehicle limits.
    source : str
        The route file (or label), for messages.
    jerk_model : bool
        True when the jerk bound is part of the problem (steps next to rest ramp the jerk).
    time_coef : ndarray, shape (n,)
        Step time is ``time_coef * ds / (v[k] + v[k+1])``: 2, between 2 and 3 for a step next
        to rest (:func:`curvespeed.rest_step.time_coef`), near 2 on the further steps of a
        launch's jerk ramp (:func:`curvespeed.launch_steps.launch_steps`).
    accel_factor_start, accel_factor_end : ndarray, shape (n,)
        Acceleration of a step at its first / last node over ``(b[k+1] - b[k]) / (2 ds)``: 1,
        or 0 at the rest node and ``f`` at the moving node of a step next to rest, or the
        launch's at the far node from rest of a further step of its ramp.
    rest_u : ndarray, shape (n,)
        Shape ``u`` of each step next to rest (:mod:`curvespeed.rest_step`); NaN elsewhere.
    jerk_terms : JerkTimeTerms
        The time base of the jerk at each node (:meth:`node_jerk_time`).
    jerk_node_scale : ndarray, shape (distinct nodes,), or None
        The factor :attr:`jerk_terms` carry on each node's terms over
        :func:`curvespeed.jerk_model.jerk_time_terms`'s: the time base of the nodes of a launch
        planned as its ramp (:func:`curvespeed.launch_steps.launch_steps`), so that a
        receding-horizon window's terms carry it too. None: none (all 1).
    switch_step : ndarray of int, shape (n,), or None
        The steps inside which the jerk switches once, by pattern
        (:data:`curvespeed.jerk_switch.PATTERNS`; 0 elsewhere): where a launch planned as its
        ramp (or a stop) turns, its peak inside the step, and the steps of a move planned as
        its closed form (:mod:`curvespeed.closed_form_moves`); timed as that motion and driven
        so (the profile's switching step kinds). None: none.
    closed_form_b : ndarray, shape (n+1,), or None
        At the nodes of the moves planned as their closed form
        (:mod:`curvespeed.closed_form_moves`), the motion's squared speed (their caps); NaN at
        every other node. None: no such move.
    mu_long, mu_lat : ndarray, shape (n+1,)
        Tyre-road friction along and across the path at each node: the route's
        (``Limits.mu_long``, ``Limits.mu_lat``) or a friction section's
        (:func:`curvespeed.friction.node_friction`).
    friction_index : ndarray of int, shape (n+1,)
        Index into :attr:`friction_sections` of the section setting each node's friction, -1
        where the route's own friction does (for messages).
    friction_sections : tuple of FrictionSection
        The friction sections as the user gave them, for messages.
    stops : tuple of Stop
        The stops as the user gave them (station and origin), for messages.
    accel_start_mps2 : float
        Acceleration of an open problem's vehicle just before its first node, m/s^2: 0 (steady
        before the route) for a whole route; a receding-horizon window starts from the
        vehicle's measured acceleration (:mod:`curvespeed.replan`). The jerk at the first node
        is the change from it to the first step's acceleration.
    accel_start_tolerance_mps2 : float
        How far the acceleration before the first node may lie from ``accel_start_mps2``,
        m/s^2 (the accuracy of a measured one): the first node's jerk is the change from the
        nearest value within it (0 for a whole route).
    end_reserve : tuple or None
        ``(brake_b, rows)`` for an open problem with a free end (a window): its last node's
        squared speed and acceleration (the last step's there) must leave room to brake for
        what lies beyond, ``b[-1] + c * a_end <= brake_b - d`` for every ``(c, d)`` in
        ``rows`` (:mod:`curvespeed.replan_window` derives them). None: no such rows.
    rate_spread : tuple of two ndarrays, shape (n,), or None
        Per step, the lowest and highest curvature rate the road may have there beyond the
        chord rates next to it, 1/m^2: where the curvature is an estimate that may have spread
        a change of rate (:func:`curvespeed.lateral_rates.spread_rate_range`), when the lateral
        jerk is bounded. None: the chord rates alone (exact curvature, or no such bound).
    """

    station_m: np.ndarray
    ds: float
    closed: bool
    kappa_abs: np.ndarray
    kappa_signed: np.ndarray
    sin_bank: np.ndarray
    cos_bank: np.ndarray
    sin_grade: np.ndarray
    cos_grade: np.ndarray
    cap_b: np.ndarray
    cap_source: np.ndarray
    b_start: float | None
    b_end: float | None
    stop_nodes: np.ndarray
    limits: Limits
    source: str
    jerk_model: bool
    time_coef: np.ndarray
    accel_factor_start: np.ndarray
    accel_factor_end: np.ndarray
    rest_u: np.ndarray
    jerk_terms: JerkTimeTerms
    mu_long: np.ndarray
    mu_lat: np.ndarray
    friction_index: np.ndarray
    friction_sections: tuple = ()
    stops: tuple = ()
    accel_start_mps2: float = 0.0
    accel_start_tolerance_mps2: float = 0.0
    end_reserve: tuple | None = None
    rate_spread: tuple | None = None
    jerk_node_scale: np.ndarray | None = None
    switch_step: np.ndarray | None = None
    closed_form_b: np.ndarray | None = None

    @property
    def n_nodes(self) -> int:
        return int(self.station_m.size)

    # -- per-node physics (vectorised; b may be a scalar or an array matching the nodes) --------
    def felt_lateral(self, b, nodes=slice(None)):
        """Lateral acceleration in the road plane (tyre side force per mass), m/s^2."""
        g = self.limits.gravity_mps2
        return self.kappa_abs[nodes] * b * self.cos_bank[nodes] - g * self.sin_bank[nodes]

    def normal_accel(self, b, nodes=slice(None)):
        """Normal load per unit mass, m/s^2."""
        g = self.limits.gravity_mps2
        return (g * self.cos_grade[nodes] * self.cos_bank[nodes]
                + self.kappa_abs[nodes] * b * self.sin_bank[nodes])

    def resistance(self, b, nodes=slice(None)):
        """Deceleration from grade, drag and rolling resistance, m/s^2 (tyres must supply it)."""
        lim = self.limits
        g = lim.gravity_mps2
        return (g * self.sin_grade[nodes] + lim.drag_per_b_1pm * b
                + lim.rolling_resistance_coefficient * g * self.cos_grade[nodes])

    def accel_bounds(self, b, nodes=slice(None), include_power: bool = True
                     ) -> tuple[np.ndarray, np.ndarray]:
        """Acceleration interval ``[lo, hi]`` each node allows at squared speed ``b``, m/s^2.

        Where the lateral demand alone exceeds a limit the interval is empty (lo > hi).
        Without the power limit (``include_power=False``) ``hi`` is concave and ``lo`` convex in
        ``b`` (square roots of concave quadratics), which the convex solver relies on.
        """
        lim = self.limits
        b = np.maximum(b, 0.0)
        y = self.felt_lateral(b, nodes)
        r = np.maximum(y, 0.0) / lim.max_lateral_accel_mps2
        c = np.sqrt(np.maximum(1.0 - r * r, 0.0))
        c = np.where(r > 1.0, -1.0, c)  # empty comfort interval
        n = self.normal_accel(b, nodes)
        w2 = n * n - (y / self.mu_lat[nodes]) ** 2
        w = self.mu_long[nodes] * np.sqrt(np.maximum(w2, 0.0))
        w = np.where(w2 < 0.0, -1.0, w)
        res = self.resistance(b, nodes)
        lo = np.maximum(-lim.max_decel_mps2 * c, -w - res)
        hi = np.minimum(lim.max_accel_mps2 * c, w - res)
        if include_power and math.isfinite(lim.power_per_mass_wpkg):
            with np.errstate(divide="ignore"):
                hi = np.minimum(hi, lim.power_per_mass_wpkg / np.sqrt(b) - res)
        return lo, hi

    def end_reserve_use(self, b) -> float:
        """Use of the end's braking reserve (:attr:`end_reserve`; 1.0 = at it, 0 without it):
        the largest ``(b[-1] + c a_end + d) / brake_b``."""
        if self.end_reserve is None:
            return 0.0
        brake_b, rows = self.end_reserve
        a_end = self.accel_factor_end[-1] * (b[-1] - b[-2]) / (2.0 * self.ds)
        need = max(b[-1] + c * a_end + d for c, d in rows)
        return float(need / brake_b) if brake_b > 0.0 else (math.inf if need > 0.0 else 0.0)

    def step_accel(self, b) -> np.ndarray:
        """Mean acceleration of each step over its length, (b[k+1] - b[k]) / (2 ds), m/s^2."""
        return np.diff(b) / (2.0 * self.ds)

    def step_times(self, b) -> np.ndarray:
        """Time of each step, s (infinite for a step with both ends at rest)."""
        v = np.sqrt(np.maximum(b, 0.0))
        vsum = v[:-1] + v[1:]
        with np.errstate(divide="ignore"):
            return np.where(vsum > 0.0, self.time_coef * self.ds / np.where(vsum > 0, vsum, 1.0),
                            np.inf)

    def lateral_rate_forms(self) -> np.ndarray:
        """The linear forms in ``(b[k], b[k+1])`` that bound the station rate of the lateral
        acceleration along each step (:func:`curvespeed.lateral_rates.step_rate_forms`)."""
        return lateral_rates.step_rate_forms(self.kappa_signed, self.ds, self.closed,
                                             self.accel_factor_start, self.accel_factor_end,
                                             self.rate_spread)

    def node_lateral_rate_forms(self) -> lateral_rates.NodeRateForms:
        """The rates at each node with the road of one step and the acceleration of the other
        (:func:`curvespeed.lateral_rates.node_rate_forms`)."""
        return lateral_rates.node_rate_forms(self.kappa_signed, self.ds, self.closed,
                                             self.accel_factor_start, self.accel_factor_end,
                                             self.rate_spread)

    def step_lateral_jerk(self, b) -> np.ndarray:
        """Largest lateral jerk ``d(kappa v^2)/dt`` along each step as driven (a bound), m/s^3.

        The largest rate form's magnitude times the larger node speed, with that form's sign
        (module docstring); 0 for a step never driven. On a clothoid (curvature linear in
        station) at constant speed it is exactly ``v^3 dkappa/ds``, the quantity highway
        spirals are designed for.
        """
        return lateral_rates.step_lateral_jerk(self.lateral_rate_forms(), b)

    def node_lateral_jerk(self, b) -> np.ndarray:
        """Lateral jerk at each node with one step's road and the other step's acceleration,
        the larger of the two, signed, m/s^3 (module docstring; 0 at the ends of an open route
        and at rest)."""
        return lateral_rates.node_lateral_jerk(self.node_lateral_rate_forms(), b, self.closed)

    @property
    def n_distinct(self) -> int:
        """Distinct nodes: a closed route's last node is its first."""
        return self.n_nodes - 1 if self.closed else self.n_nodes

    def step_ramp_jerk(self, b) -> np.ndarray:
        """Jerk of the ramp inside each step next to rest, m/s^3 (0 for the other steps)."""
        b = np.maximum(np.asarray(b, dtype=float), 0.0)
        moving = np.where(self.accel_factor_start == 0.0, b[1:], b[:-1])
        rest = ~np.isnan(self.rest_u)
        u = np.where(rest, self.rest_u, 0.5)
        return np.where(rest, rest_step.ramp_jerk(u, moving, self.ds), 0.0)

    def node_jerk_time(self, b) -> np.ndarray:
        """Time base of the jerk at each node, s (module docstring; :attr:`jerk_terms`).

        Infinite at a node with no term (at rest), 0 where the change of acceleration must be
        zero. On a closed route the last node repeats the first.
        """
        b = np.maximum(np.asarray(b, dtype=float), 0.0)
        t = self.jerk_terms
        root = np.sqrt(b[: self.n_distinct])
        w = (t.weights[:, 0] * root[t.prev] + t.weights[:, 1] * root[t.node]
             + t.weights[:, 2] * root[t.next])
        with np.errstate(divide="ignore", invalid="ignore"):
            term = np.where(t.scale == 0.0, 0.0,
                            np.where(w > 0.0, t.scale * self.ds / np.where(w > 0.0, w, 1.0),
                                     np.inf))
        tau = np.full(self.n_distinct, np.inf)
        np.minimum.at(tau, t.node, term)
        return np.append(tau, tau[0]) if self.closed else tau

    def lateral_ceiling_b(self, iterations: int = 60) -> np.ndarray:
        """Largest squared speed at each node whose acceleration interval is not empty.

        Found by bisection on all nodes at once (the interval shrinks monotonically with speed),
        then capped by :attr:`cap_b`. Relative accuracy 2**-60 of the bracket.
        """
        lo_b = np.zeros_like(self.cap_b)
        hi_b = np.minimum(self.cap_b, _UNBOUNDED).astype(float)
        lo_a, hi_a = self.accel_bounds(hi_b)
        ok = lo_a <= hi_a
        # Only the nodes whose cap is out of reach are bisected (on a road mostly straight,
        # a small share): the same arithmetic per node as bisecting all of them at once, and
        # the same stopping test (the capped nodes' part of it does not change, so it is
        # evaluated once).
        todo = np.flatnonzero(~ok)
        capped_done = bool(np.all((hi_b - lo_b <= 1e-12 * np.maximum(hi_b, 1.0))[ok]))
        lo_t, hi_t = lo_b[todo], hi_b[todo]
        # those nodes' arrays gathered once, not in each of the 60 steps (the same values)
        fields = {name: getattr(self, name)[todo] for name in _BOUNDS_FIELDS}
        kernel = _ceiling_kernel()
        if kernel is not None and todo.size:    # the loop below, compiled (the same numbers)
            lim = self.limits
            kernel.ceiling_bisect(
                *(np.ascontiguousarray(fields[name], dtype=float) for name in _BOUNDS_FIELDS),
                (lim.gravity_mps2, lim.max_lateral_accel_mps2, lim.max_accel_mps2,
                 lim.max_decel_mps2, lim.drag_per_b_1pm, lim.rolling_resistance_coefficient,
                 lim.power_per_mass_wpkg), math.isfinite(lim.power_per_mass_wpkg),
                lo_t, hi_t, iterations, capped_done)
            iterations = 0
        sub = replace(self, **fields) if iterations else None
        for _ in range(iterations):
            if todo.size == 0:
                break
            mid = 0.5 * (lo_t + hi_t)
            la, ha = sub.accel_bounds(mid)
            good = la <= ha
            lo_t = np.where(good, mid, lo_t)
            hi_t = np.where(~good, mid, hi_t)
            if capped_done and (hi_t - lo_t <= 1e-12 * np.maximum(hi_t, 1.0)).all():
                break
        lo_b[todo] = lo_t
        hi_b[todo] = hi_t
        return np.where(ok, hi_b, lo_b)


#: The per-node arrays :meth:`SpeedProblem.accel_bounds` reads (in the order the compiled
#: bisection takes them).
_BOUNDS_FIELDS = ("kappa_abs", "cos_bank", "sin_bank", "cos_grade", "sin_grade", "mu_long",
                  "mu_lat")


def _ceiling_kernel():
    """The compiled twin of :meth:`SpeedProblem.lateral_ceiling_b`'s bisection
    (``solvers/_envelope_passes.c``), or None where it was not built."""
    try:
        from .solvers import _envelope_passes
    except ImportError:
        return None
    return _envelope_passes


def build_problem(geometry: Geometry, limits: Limits, constraints: RouteConstraints,
                  jerk_model: bool | None = None, closed_form: bool = True) -> SpeedProblem:
    """Assemble the discrete problem for ``geometry`` (see module docstring).

    ``jerk_model`` (default: whether ``limits`` has a jerk bound) says whether the jerk bound is
    part of the problem; a solver that does not enforce jerk (the envelope) builds it without.
    ``closed_form=False`` plans every move between rests as steps of constant acceleration
    and the launches' ramps, none as its closed form (:mod:`curvespeed.closed_form_moves`):
    the model as it stands wherever a move's closed form does not fit, for comparing the two.
    """
    validate_limits(limits, warn=False)   # the caller validated and warned, naming the origin
    validate_constraints(constraints, geometry.length_m, geometry.closed)
    n = geometry.station_m.size
    kappa = np.asarray(geometry.curvature_1pm, dtype=float)
    # Lateral acceleration and grip use the curvature bound, which covers the true road where
    # the fit's smoothing spreads a change of curvature or noise blurs it (curvespeed.geometry);
    # lateral jerk follows the estimate itself (kappa_signed).
    kappa_abs = np.asarray(geometry.planning_curvature_1pm, dtype=float)
    cap, source, stop_nodes = speed_caps(geometry, limits, constraints)
    mu_long, mu_lat, friction_index = node_friction(limits, constraints.friction,
                                                    float(geometry.spacing_m), n, geometry.closed)
    theta, gamma = bank_and_grade(geometry, mu_lat, friction_index, constraints)
    b_start, b_end = end_speeds_b(geometry, constraints)
    if jerk_model is None:
        jerk_model = limits.max_jerk_mps3 is not None
    steps = n - 1
    problem = SpeedProblem(
        station_m=geometry.station_m, ds=float(geometry.spacing_m), closed=geometry.closed,
        kappa_abs=kappa_abs, kappa_signed=kappa,
        sin_bank=np.sin(theta), cos_bank=np.cos(theta),
        sin_grade=np.sin(gamma), cos_grade=np.cos(gamma),
        cap_b=cap, cap_source=source, b_start=b_start, b_end=b_end,
        stop_nodes=np.array(sorted(set(stop_nodes)), dtype=int), limits=limits,
        source=geometry.source, stops=tuple(constraints.stops), jerk_model=bool(jerk_model),
        time_coef=np.full(steps, 2.0),
        accel_factor_start=np.ones(steps), accel_factor_end=np.ones(steps),
        rest_u=np.full(steps, np.nan),
        jerk_terms=jerk_time_terms(n, geometry.closed, np.full(steps, np.nan), np.ones(steps)),
        mu_long=mu_long, mu_lat=mu_lat, friction_index=friction_index,
        friction_sections=tuple(constraints.friction), rate_spread=rate_spread(geometry, limits))
    if jerk_model:
        problem = with_rest_steps(problem, rest_nodes(problem), closed_form=closed_form)
    return problem
