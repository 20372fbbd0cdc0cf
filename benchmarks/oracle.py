"""An independent minimum-time speed profile along an exact alignment (casadi + IPOPT).

The yardstick for ``curvespeed plan``: written from the physics of a point mass on the road,
not from :mod:`curvespeed.problem`, and solved by a general-purpose nonlinear optimiser, so a
planned profile can be compared with the true optimum of the same limits on the exact road.

Model
-----
A point mass moves along the alignment's station ``s``. Its state is speed ``v`` and
acceleration ``a`` along the path; the control is the jerk ``j``, bounded in **time**:
``|j| <= J``. The route is cut into intervals at fixed stations (the grid below); over interval
``i`` the jerk is a constant ``j_i`` held for a free duration ``h_i``, so the motion inside it is
exact uniform-jerk kinematics::

    ds_i        = v_i h_i + a_i h_i^2 / 2 + j_i h_i^3 / 6
    v_{i+1}     = v_i + a_i h_i + j_i h_i^2 / 2
    a_{i+1}     = a_i + j_i h_i

and the total time is ``sum h_i``. Nothing divides by the speed, so standstill is no
singularity: leaving rest (``v = a = 0``) the first interval is simply ``ds = j h^3 / 6``.
Stations where the vehicle is at rest (a stop, a start or end at rest) have ``v = a = 0``; the
vehicle is steady before the start and after the end, so ``a = 0`` there as well (a jerk bound
does not let the acceleration jump).

At every grid station, with the exact curvature ``kappa`` of the alignment (both one-sided
values where it steps) and the lateral acceleration ``y = kappa v^2``, and again at the middle
(in time) of every interval:

* comfort ellipse ``(a / A)^2 + (y / A_lat)^2 <= 1``, ``A`` the acceleration or the
  deceleration cap by the sign of ``a``;
* friction ellipse ``(a / mu)^2 + (y / mu_lat)^2 <= g^2`` (flat road, no drag: the cases
  here have neither grade, superelevation, drag nor a power limit, and the model refuses them);
* top speed ``v <= v_max``;
* optional lateral jerk ``|d(kappa v^2)/dt| = |kappa' v^3 + 2 kappa v a| <= J_lat`` with the
  exact curvature rate ``kappa'`` of the interval, at both its ends. Where the curvature steps
  the lateral acceleration would jump at any speed above zero, so the model refuses a lateral
  jerk bound on an alignment with curvature steps.

Why the middle too: limits held only at grid stations let an optimiser gain time between them,
by alternating the acceleration so that the speed bulges above the cap inside every interval
(a double-S move at 30 m/s^3 came out 8e-6 of its time below the closed form before the middle
was added). Over one interval the speed is quadratic in time, so its mean is Simpson's rule of
the three samples: with the top speed held at both ends and the middle, no interval covers
more distance than it would at the top speed.

Grid
----
Both ends, every element joint and every stop are grid stations; between them the step is at
most ``spacing_m`` (0.125 m by default). At 0.125 m and road speeds an interval lasts a few
milliseconds, far shorter than any jerk phase (``A / J``, about a second), so the instants where
the optimal jerk switches fall within a small fraction of a phase of a grid station. Leaving or
reaching rest, though, the vehicle covers only ``J t^3 / 6`` (0.14 m in the first 0.75 s at
2 m/s^3), and at a fixed start or end speed the acceleration must also start from zero; so next
to both ends and every stop the steps grow geometrically from ``rest_spacing_m`` (1 mm) by
``rest_growth`` (4 % per step) until they reach ``spacing_m`` (about 3 m from the station). Each
interval there lasts a nearly fixed fraction (about 1.3 %) of the time since leaving rest,
instead of one interval spanning the whole first jerk phase. On the double-S closed form the
time comes out 1e-6 to 2e-5 too long at these settings, and the excess falls about fourfold
when the growth and the spacing are halved (tests/test_reference_oracle.py); on the benchmark
roads halving both changes the optimum by less than 1e-6 of it.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from benchmarks._elements import curvature_in, curvature_steps, element_table
from curvespeed.geometry.elements import Alignment
from curvespeed.limits import Limits

#: Default station step, metres (see the module docstring).
SPACING_M = 0.125
#: First step next to a rest station, metres, and the growth factor of the steps after it.
REST_SPACING_M = 1e-3
REST_GROWTH = 1.04


@dataclass(frozen=True)
class OracleResult:
    """The minimum-time profile the optimiser found.

    Attributes
    ----------
    time_s : float
        Total time, s.
    station_m : ndarray
        Grid stations, metres.
    speed_mps, accel_mps2 : ndarray
        Speed (m/s) and acceleration (m/s^2) at the grid stations.
    jerk_mps3, step_time_s : ndarray
        Jerk (m/s^3) and duration (s) of each interval.
    status : str
        IPOPT's return status.
    iterations : int
        IPOPT iterations.
    solve_s : float
        Wall time of building and solving the model, s.
    """

    time_s: float
    station_m: np.ndarray
    speed_mps: np.ndarray
    accel_mps2: np.ndarray
    jerk_mps3: np.ndarray
    step_time_s: np.ndarray
    status: str
    iterations: int
    solve_s: float

    @property
    def success(self) -> bool:
        return self.status in ("Solve_Succeeded", "Solved_To_Acceptable_Level")


# -- grid --------------------------------------------------------------------------------------

def _graded_steps(length: float, rest_start: bool, rest_end: bool, spacing: float,
                  rest_spacing: float, growth: float) -> np.ndarray:
    """Steps covering ``length``: at most ``spacing``, growing geometrically from a graded end
    (``rest_start``, ``rest_end``)."""
    ramp = []
    if rest_start or rest_end:
        step = rest_spacing
        while step < spacing:
            ramp.append(step)
            step *= growth
    ramp = np.array(ramp)
    left = ramp if rest_start else np.empty(0)
    right = ramp[::-1] if rest_end else np.empty(0)
    graded = left.sum() + right.sum()
    if graded >= length:
        # short segment: both ramps (or one) squeezed to fit
        steps = np.concatenate((left, right))
        return steps * (length / steps.sum())
    middle = length - graded
    n = max(1, math.ceil(middle / spacing - 1e-9))
    return np.concatenate((left, np.full(n, middle / n), right))


def build_grid(alignment: Alignment, graded_stations, spacing_m: float = SPACING_M,
               rest_spacing_m: float = REST_SPACING_M,
               rest_growth: float = REST_GROWTH) -> np.ndarray:
    """Grid stations (module docstring): both ends, element joints and ``graded_stations``
    (metres), next to which the steps grow from ``rest_spacing_m`` by ``rest_growth``."""
    rest = np.unique(np.asarray(list(graded_stations), dtype=float))
    fixed = np.unique(np.concatenate(([0.0, alignment.length_m], alignment.breakpoints_m, rest)))
    out = [np.array([0.0])]
    for p, q in zip(fixed[:-1], fixed[1:]):
        steps = _graded_steps(q - p, bool(np.any(np.isclose(rest, p))),
                              bool(np.any(np.isclose(rest, q))), spacing_m, rest_spacing_m,
                              rest_growth)
        nodes = p + np.cumsum(steps)
        nodes[-1] = q
        out.append(nodes)
    return np.concatenate(out)


def interval_curvature(alignment: Alignment, station_m: np.ndarray):
    """Exact curvature at both ends of each grid interval and its rate, from the element the
    interval lies in (grid intervals never straddle a joint).

    Returns ``(kappa_start, kappa_end, rate)``, 1/m, 1/m and 1/m^2, one value per interval.
    """
    starts = element_table(alignment)[0]
    a, b = station_m[:-1], station_m[1:]
    i = np.clip(np.searchsorted(starts, 0.5 * (a + b), side="right") - 1, 0, starts.size - 2)
    k_start, rate = curvature_in(alignment, a, i)
    return k_start, curvature_in(alignment, b, i)[0], rate


def _check_model(limits: Limits, alignment: Alignment) -> None:
    unsupported = [name for name, on in (
        ("a power limit", limits.max_power_w is not None),
        ("aerodynamic drag", bool(limits.drag_area_m2)),
        ("rolling resistance", bool(limits.rolling_resistance_coefficient))) if on]
    if unsupported:
        raise ValueError(f"the independent model has no {', '.join(unsupported)}; "
                         "leave them out of the case")
    if limits.max_jerk_mps3 is None:
        raise ValueError("the independent model needs a longitudinal jerk bound")
    if limits.max_lateral_jerk_mps3 is not None:
        if np.any(np.abs(curvature_steps(alignment)) > 1e-12):
            raise ValueError("a lateral jerk bound cannot hold at any speed above zero where "
                             "the curvature steps; give the alignment transition spirals")


def _initial_guess(station_m, kappa_abs, limits: Limits, fixed_v: dict):
    """A rough start for the optimiser, from the physics alone: 90 % of the lateral limit
    speed, reached and left at half the acceleration caps (forward, then backward pass);
    ``fixed_v`` maps station indices to fixed speeds. The optimiser makes it consistent."""
    g = limits.gravity_mps2
    lat = min(limits.max_lateral_accel_mps2, limits.mu_lat * g)
    with np.errstate(divide="ignore"):
        cap = np.minimum(limits.max_speed_mps, 0.9 * np.sqrt(lat / kappa_abs))
    for k, value in fixed_v.items():
        cap[k] = value
    ds = np.diff(station_m)
    v = cap.copy()
    for k in range(ds.size):
        v[k + 1] = min(v[k + 1], math.sqrt(v[k] ** 2 + limits.max_accel_mps2 * ds[k]))
    for k in range(ds.size - 1, -1, -1):
        v[k] = min(v[k], math.sqrt(v[k + 1] ** 2 + limits.max_decel_mps2 * ds[k]))
    h = 2.0 * ds / (v[:-1] + v[1:])
    a_step = (v[1:] ** 2 - v[:-1] ** 2) / (2.0 * ds)
    a = np.concatenate(([0.0], 0.5 * (a_step[:-1] + a_step[1:]), [0.0]))
    j = np.clip(np.diff(a) / h, -limits.max_jerk_mps3, limits.max_jerk_mps3)
    return v, a, h, j


def _interval_function(limits: Limits):
    """casadi Function of one interval: its kinematics residuals and the limits it must keep.

    Inputs: the interval's start state and control ``(v, a, h, j)``, its end state ``(v', a')``
    and its data ``(ds, |kappa| at the start station (both sides), kappa at the middle,
    kappa at the start and at the end within the interval, kappa rate)``. Outputs, in order:
    three kinematic residuals (zero), comfort and friction use at the start station and at the
    middle of the interval (<= 1), the speed at the middle (<= top speed) and, with a lateral
    jerk bound, the lateral jerk at both ends (within +-bound).
    """
    import casadi as ca

    w = ca.SX.sym("w", 4)          # v, a, h, j
    nxt = ca.SX.sym("next", 2)     # v', a'
    p = ca.SX.sym("p", 6)          # ds, |kappa| at start station, kappa mid, start, end, rate
    v, a, h, j = w[0], w[1], w[2], w[3]
    ds, k_node, k_mid, k_start, k_end, rate = (p[i] for i in range(6))
    v_mid = v + a * h / 2 + j * h ** 2 / 8
    out = [(v * h + a * h ** 2 / 2 + j * h ** 3 / 6 - ds) / ds,
           nxt[0] - v - a * h - j * h ** 2 / 2,
           nxt[1] - a - j * h,
           *_uses(limits, v, a, k_node), *_uses(limits, v_mid, a + j * h / 2, k_mid), v_mid]
    if limits.max_lateral_jerk_mps3 is not None:
        out += [rate * v ** 3 + 2 * k_start * v * a,
                rate * nxt[0] ** 3 + 2 * k_end * nxt[0] * nxt[1]]
    return ca.Function("interval", [w, nxt, p], [ca.vertcat(*out)])


def _uses(limits: Limits, speed, accel, kappa_abs) -> list:
    """Comfort-ellipse and friction-ellipse use (<= 1 within the limit), casadi expressions."""
    import casadi as ca

    y = kappa_abs * speed ** 2
    comfort = ((ca.fmax(accel, 0) / limits.max_accel_mps2) ** 2
               + (ca.fmin(accel, 0) / limits.max_decel_mps2) ** 2
               + (y / limits.max_lateral_accel_mps2) ** 2)
    friction = (((accel / limits.mu_long) ** 2 + (y / limits.mu_lat) ** 2)
                / limits.gravity_mps2 ** 2)
    return [comfort, friction]


def _row_bounds(limits: Limits) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper bounds of the outputs of :func:`_interval_function`."""
    lo = [0.0, 0.0, 0.0, -np.inf, -np.inf, -np.inf, -np.inf, 0.0]
    hi = [0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0, limits.max_speed_mps]
    if limits.max_lateral_jerk_mps3 is not None:
        lo += [-limits.max_lateral_jerk_mps3] * 2
        hi += [limits.max_lateral_jerk_mps3] * 2
    return np.array(lo), np.array(hi)


def solve_min_time(alignment: Alignment, limits: Limits, stops=(), start_speed_mps: float = 0.0,
                   end_speed_mps: float = 0.0, spacing_m: float = SPACING_M,
                   rest_spacing_m: float = REST_SPACING_M, rest_growth: float = REST_GROWTH,
                   tol: float = 1e-10, max_iter: int = 3000) -> OracleResult:
    """Minimum time along ``alignment`` within ``limits`` (module docstring for the model).

    ``stops`` are stations (metres) where the vehicle must be at rest; the start and end speeds
    are fixed (0: at rest). Raises ``ValueError`` for a case the model does not cover and
    ``RuntimeError`` when IPOPT does not converge.
    """
    import casadi as ca

    _check_model(limits, alignment)
    t0 = time.perf_counter()
    length = alignment.length_m
    # graded at both ends and at stops: the speed is fixed there and the acceleration zero
    s = build_grid(alignment, [0.0, length, *map(float, stops)], spacing_m, rest_spacing_m,
                   rest_growth)
    n = s.size - 1
    k_start, k_end, rate = interval_curvature(alignment, s)
    kabs = np.zeros(n + 1)
    kabs[:-1] = np.abs(k_start)
    kabs[1:] = np.maximum(kabs[1:], np.abs(k_end))
    data = np.vstack((np.diff(s), kabs[:-1], np.abs(0.5 * (k_start + k_end)), k_start, k_end,
                      rate))

    # unknowns interleaved per interval (v, a, h, j), then the last station's (v, a)
    x = ca.MX.sym("x", 4 * n + 2)
    w = ca.reshape(x[: 4 * n], 4, n)
    nxt = ca.horzcat(w[0:2, 1:], x[4 * n:])
    rows = _interval_function(limits).map(n, "serial")(w, nxt, ca.DM(data))
    lo, hi = _row_bounds(limits)

    fixed = {0: float(start_speed_mps), n: float(end_speed_mps)}
    for stop in stops:
        fixed[int(np.argmin(np.abs(s - stop)))] = 0.0
    lbx, ubx, x0 = _variable_bounds(limits, n, fixed, _initial_guess(s, kabs, limits, fixed))
    last = ca.vertcat(*_uses(limits, x[4 * n], x[4 * n + 1], kabs[n]))  # the last station
    nlp = {"x": x, "f": ca.sum1(w[2, :].T) / float(np.sum(x0[2:4 * n:4])),
           "g": ca.vertcat(ca.vec(rows), last)}
    opts = {"print_time": False, "ipopt.print_level": 0, "ipopt.sb": "yes",
            "ipopt.tol": tol, "ipopt.max_iter": max_iter}
    solver = ca.nlpsol("oracle", "ipopt", nlp, opts)
    sol = solver(x0=x0, lbx=lbx, ubx=ubx, lbg=np.append(np.tile(lo, n), [-np.inf, -np.inf]),
                 ubg=np.append(np.tile(hi, n), [1.0, 1.0]))
    stats = solver.stats()
    z = np.asarray(sol["x"]).ravel()
    w_opt = np.concatenate((z[: 4 * n], z[4 * n:], [0.0, 0.0])).reshape(n + 1, 4)
    result = OracleResult(time_s=float(w_opt[:-1, 2].sum()), station_m=s,
                          speed_mps=w_opt[:, 0], accel_mps2=w_opt[:, 1],
                          jerk_mps3=w_opt[:-1, 3], step_time_s=w_opt[:-1, 2],
                          status=str(stats["return_status"]), iterations=int(stats["iter_count"]),
                          solve_s=time.perf_counter() - t0)
    if not result.success:
        raise RuntimeError(f"IPOPT did not converge: {result.status} after {result.iterations} "
                           "iterations")
    return result


def _variable_bounds(limits: Limits, n: int, fixed: dict, guess):
    """Bounds and start point of the interleaved unknowns (see :func:`solve_min_time`).

    ``fixed`` maps a station index to its fixed speed; the acceleration there is zero (at rest,
    or steady before the start and after the end)."""
    ub = np.tile([limits.max_speed_mps, limits.max_accel_mps2, np.inf, limits.max_jerk_mps3],
                 n + 1)
    lb = np.tile([0.0, -limits.max_decel_mps2, 1e-9, -limits.max_jerk_mps3], n + 1)
    for k, speed in fixed.items():
        lb[4 * k] = ub[4 * k] = speed
        lb[4 * k + 1] = ub[4 * k + 1] = 0.0
    v, a, h, j = guess
    x0 = np.column_stack((v, a, np.append(h, 0.0), np.append(j, 0.0))).ravel()
    return lb[:-2], ub[:-2], x0[:-2]
