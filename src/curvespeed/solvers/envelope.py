"""Forward-backward envelope: the exact time-optimal profile when jerk is unbounded.

The classic method (Velenis & Tsiotras 2008; Kapania, Subosits & Gerdes 2016) on the discrete
problem of :mod:`curvespeed.problem`:

1. the *ceiling*: the highest squared speed each node allows on its own (lateral comfort, lateral
   grip with superelevation and grade, top speed, zones, stops);
2. a *forward pass*: from the start, each next node takes the highest squared speed the step's
   acceleration allows at both of its nodes (comfort ellipse, friction ellipse, power);
3. a *backward pass* on the result: from the end, each earlier node takes the highest squared
   speed from which the step's deceleration is feasible at both nodes.

Each step solves its node constraints in closed form (a quadratic for each ellipse, a cubic for
power), so the whole solve is O(n). Closed routes are solved as periodic: the passes start at the
node with the lowest ceiling and go round until the lap joins itself.
"""

from __future__ import annotations

import math
import time

import numpy as np

from ..diagnose import (braking_decel, cap_words, check_start_end, grip_words,
                        stop_out_of_reach, undrivable_station)
from ..errors import InfeasibleError
from ..problem import SpeedProblem
from . import SolveResult, SolveStatus

try:
    from . import _envelope_passes as _compiled
except ImportError:             # built by pip install with a C compiler; the Python passes below
    _compiled = None            # are the same method (and the reference the tests compare with)

_INF = math.inf


class _Nodes:
    """Per-node constants as Python lists: scalar loops index lists much faster than arrays."""

    def __init__(self, p: SpeedProblem):
        lim = p.limits
        g = lim.gravity_mps2
        arrays = (p.kappa_abs * p.cos_bank,                         # felt lateral = lat1 b - lat0
                  g * p.sin_bank,
                  g * p.cos_grade * p.cos_bank,                     # normal = n0 + n1 b
                  p.kappa_abs * p.sin_bank,
                  g * p.sin_grade + lim.rolling_resistance_coefficient * g * p.cos_grade,
                  p.mu_long,                                        # friction ellipse
                  p.mu_lat)
        self.arrays = tuple(np.ascontiguousarray(a, dtype=float) for a in arrays)
        self.cd = lim.drag_per_b_1pm                               # resistance = r0 + cd b
        self.a_acc = lim.max_accel_mps2
        self.a_dec = lim.max_decel_mps2
        self.a_lat = lim.max_lateral_accel_mps2
        self.pm = lim.power_per_mass_wpkg
        self.h = 1.0 / (2.0 * p.ds)                                # a = h (b_next - b_prev)

    def __getattr__(self, name: str):
        """The per-node lists, made on first use (the compiled passes take the arrays)."""
        names = ("lat1", "lat0", "n0", "n1", "r0", "mux", "muy")
        if name not in names:
            raise AttributeError(name)
        for key, arr in zip(names, self.arrays):
            self.__dict__[key] = arr.tolist()
        return self.__dict__[name]

    def bounds(self, k: int, b: float) -> tuple[float, float]:
        """Acceleration interval at node k for squared speed b (scalar twin of accel_bounds)."""
        y = self.lat1[k] * b - self.lat0[k]
        r = y / self.a_lat if y > 0.0 else 0.0
        c = math.sqrt(1.0 - r * r) if r < 1.0 else 0.0
        nrm = self.n0[k] + self.n1[k] * b
        w2 = nrm * nrm - (y / self.muy[k]) ** 2
        w = self.mux[k] * math.sqrt(w2) if w2 > 0.0 else 0.0
        res = self.r0[k] + self.cd * b
        lo = max(-self.a_dec * c, -w - res)
        hi = min(self.a_acc * c, w - res)
        if self.pm != _INF and b > 0.0:
            hi = min(hi, self.pm / math.sqrt(b) - res)
        return lo, hi


def _upper_root(qa: float, qb: float, qc: float) -> float | None:
    """Larger root of qa x^2 + qb x + qc (qa > 0), or None if there is none."""
    disc = qb * qb - 4.0 * qa * qc
    if disc < 0.0:
        return None
    sq = math.sqrt(disc)
    # numerically stable pair of roots
    if qb >= 0.0:
        x1 = (-qb - sq) / (2.0 * qa)
        x2 = (2.0 * qc) / (-qb - sq) if sq + qb != 0.0 else x1
    else:
        x2 = (-qb + sq) / (2.0 * qa)
        x1 = (2.0 * qc) / (-qb + sq)
    return max(x1, x2)


def _largest_cubic_root(p: float, q: float) -> float:
    """Largest real root of u^3 + p u + q = 0 (Cardano / trigonometric form)."""
    disc = (q / 2.0) ** 2 + (p / 3.0) ** 3
    if disc >= 0.0:
        sq = math.sqrt(disc)
        return math.copysign(abs(-q / 2.0 + sq) ** (1.0 / 3.0), -q / 2.0 + sq) + \
            math.copysign(abs(-q / 2.0 - sq) ** (1.0 / 3.0), -q / 2.0 - sq)
    m = 2.0 * math.sqrt(-p / 3.0)
    arg = max(-1.0, min(1.0, 3.0 * q / (p * m)))
    return m * math.cos(math.acos(arg) / 3.0)


def _reach_forward(nd: _Nodes, j: int, b_prev: float) -> float:
    """Largest b at node j such that a = h (b - b_prev) is within node j's accel bound."""
    h = nd.h
    best = _INF
    # comfort ellipse, acceleration side
    lat1, lat0 = nd.lat1[j], nd.lat0[j]
    b_free = b_prev + nd.a_acc / h
    if lat1 * b_free - lat0 > 0.0:
        u = h / nd.a_acc
        w = lat1 / nd.a_lat
        w0 = -lat0 / nd.a_lat
        root = _upper_root(u * u + w * w, 2.0 * (w * w0 - u * u * b_prev),
                           u * u * b_prev * b_prev + w0 * w0 - 1.0)
        if root is not None and root >= b_prev:
            best = root
    else:
        best = b_free
    # friction ellipse: T = t1 b + t0, lateral = lat1 b - lat0, normal = n0 + n1 b
    t1 = h + nd.cd
    t0 = nd.r0[j] - h * b_prev
    mx2 = nd.mux[j] * nd.mux[j]
    my2 = nd.muy[j] * nd.muy[j]
    n0, n1 = nd.n0[j], nd.n1[j]
    root = _upper_root(t1 * t1 / mx2 + lat1 * lat1 / my2 - n1 * n1,
                       2.0 * (t1 * t0 / mx2 - lat1 * lat0 / my2 - n1 * n0),
                       t0 * t0 / mx2 + lat0 * lat0 / my2 - n0 * n0)
    if root is not None and t1 * root + t0 >= 0.0 and root < best:
        best = root
    # power: (t1 u^2 + t0) u <= P/m with u = v
    if nd.pm != _INF:
        u = _largest_cubic_root(t0 / t1, -nd.pm / t1)
        if u * u < best:
            best = u * u
    return best


def _reach_backward(nd: _Nodes, i: int, b_next: float) -> float:
    """Largest b at node i such that a = h (b_next - b) is within node i's decel bound."""
    h = nd.h
    best = _INF
    lat1, lat0 = nd.lat1[i], nd.lat0[i]
    b_free = b_next + nd.a_dec / h
    if lat1 * b_free - lat0 > 0.0:
        u = h / nd.a_dec
        w = lat1 / nd.a_lat
        w0 = -lat0 / nd.a_lat
        root = _upper_root(u * u + w * w, 2.0 * (w * w0 - u * u * b_next),
                           u * u * b_next * b_next + w0 * w0 - 1.0)
        if root is not None and root >= b_next:
            best = root
    else:
        best = b_free
    t1 = nd.cd - h
    t0 = nd.r0[i] + h * b_next
    mx2 = nd.mux[i] * nd.mux[i]
    my2 = nd.muy[i] * nd.muy[i]
    n0, n1 = nd.n0[i], nd.n1[i]
    root = _upper_root(t1 * t1 / mx2 + lat1 * lat1 / my2 - n1 * n1,
                       2.0 * (t1 * t0 / mx2 - lat1 * lat0 / my2 - n1 * n0),
                       t0 * t0 / mx2 + lat0 * lat0 / my2 - n0 * n0)
    if root is not None and t1 * root + t0 <= 0.0 and root < best:
        best = root
    return best


def _compiled_pass(direction: int, nd: _Nodes, ceiling, b_end: float, order) -> np.ndarray:
    """One pass in the compiled twin (``_envelope_passes.c``) of the Python passes below."""
    out = np.empty(len(order))
    _compiled.run_pass(direction, *nd.arrays, (nd.cd, nd.a_acc, nd.a_dec, nd.a_lat, nd.pm,
                                               nd.h),
                       np.ascontiguousarray(ceiling, dtype=float), float(b_end),
                       np.ascontiguousarray(order, dtype=np.int64), out)
    return out


def _as_list(values) -> list:
    return values if isinstance(values, list) else np.asarray(values).tolist()


def _forward_pass(nd: _Nodes, ceiling: list, b0: float, order: list,
                  compiled: bool = True) -> list:
    """Forward pass over node indices ``order`` from squared speed ``b0``.

    ``ceiling`` is indexed by position in ``order`` (lists or arrays). ``compiled=False`` runs
    this Python loop even where the compiled twin is built (the tests compare the two); it
    returns a list, the compiled twin an array.
    """
    if compiled and _compiled is not None:
        return _compiled_pass(1, nd, ceiling, b0, order)
    ceiling, order = _as_list(ceiling), _as_list(order)
    out = [0.0] * len(order)
    b = out[0] = b0
    for m in range(1, len(order)):
        i, j = order[m - 1], order[m]
        _, hi = nd.bounds(i, b)
        nxt = min(ceiling[m], b + hi / nd.h)
        reach = _reach_forward(nd, j, b)
        if reach < nxt:
            nxt = reach
        b = out[m] = nxt if nxt > 0.0 else 0.0
    return out


def _backward_pass(nd: _Nodes, ceiling: list, b_last: float, order: list,
                   compiled: bool = True) -> list:
    """Backward pass over ``order`` (driving order) ending at squared speed ``b_last``.

    ``ceiling`` is indexed by position in ``order``; ``compiled`` as for :func:`_forward_pass`.
    """
    if compiled and _compiled is not None:
        return _compiled_pass(-1, nd, ceiling, b_last, order)
    ceiling, order = _as_list(ceiling), _as_list(order)
    cnt = len(order)
    out = [0.0] * cnt
    b = out[-1] = b_last
    for m in range(cnt - 2, -1, -1):
        i, j = order[m], order[m + 1]
        lo, _ = nd.bounds(j, b)
        prv = min(ceiling[m], b - lo / nd.h)
        reach = _reach_backward(nd, i, b)
        if reach < prv:
            prv = reach
        b = out[m] = prv if prv > 0.0 else 0.0
    return out


def solve_envelope(problem: SpeedProblem) -> SolveResult:
    """Time-optimal squared-speed profile without jerk bound (see module docstring)."""
    t0 = time.perf_counter()
    stuck = undrivable_station(problem)
    if stuck is not None:
        raise InfeasibleError(stuck)
    ceiling_arr = problem.lateral_ceiling_b()
    check_start_end(problem, ceiling_arr)
    nd = _Nodes(problem)
    n = problem.n_nodes
    if not problem.closed:
        order = np.arange(n)
        fwd = _forward_pass(nd, ceiling_arr, problem.b_start, order)
        if fwd[-1] < problem.b_end * (1 - 1e-9) - 1e-12:
            raise InfeasibleError(_end_out_of_reach(problem, np.asarray(fwd), ceiling_arr))
        b = _backward_pass(nd, fwd, min(problem.b_end, fwd[-1]), order)
        if b[0] < problem.b_start * (1 - 1e-9) - 1e-12:
            _raise_cannot_slow(problem, np.asarray(b), fwd)
        b[0] = problem.b_start
        b_arr = np.asarray(b)
        laps = 1
    else:
        b_arr, laps = _solve_periodic(problem, nd, ceiling_arr)
    elapsed = time.perf_counter() - t0
    return SolveResult(b=b_arr, status=SolveStatus.OPTIMAL, solver="envelope",
                       iterations=laps, solve_time_s=elapsed, ceiling_b=ceiling_arr)


def brake_reach(problem: SpeedProblem, ceiling_b: np.ndarray) -> np.ndarray:
    """Highest squared speed at each node from which braking within the limits meets every
    ceiling ahead: the backward pass over ``ceiling_b`` with a free end.

    On a closed route the pass runs two laps backward, so the ceilings just after the seam are
    seen from the end of the lap.
    """
    nodes = _Nodes(problem)
    ceiling = np.asarray(ceiling_b, dtype=float)
    n = problem.n_nodes
    if not problem.closed:
        return np.asarray(_backward_pass(nodes, ceiling, float(ceiling[-1]), np.arange(n)))
    m = n - 1
    order = np.concatenate((np.arange(m), np.arange(m), [0]))
    out = np.asarray(_backward_pass(nodes, ceiling[order], float(ceiling[0]), order))
    return np.append(out[:m], out[0])


def window_envelope(problem: SpeedProblem, ceiling_b: np.ndarray, b_start: float,
                    b_end: float | None) -> tuple[np.ndarray, np.ndarray]:
    """Forward and forward-backward passes over an open stretch under ``ceiling_b``.

    The forward pass starts at ``b_start``; the backward pass ends at ``b_end`` (or, when it is
    None, wherever the forward pass arrives: the end is then bounded by its ceiling alone). Returns
    ``(forward, envelope)``; ``envelope[0] < b_start`` says that ``b_start`` cannot be braked
    down in time for some ceiling ahead (the caller explains it), and ``forward[-1] < b_end``
    that the fixed end speed cannot be reached. For receding-horizon windows
    (:mod:`curvespeed.replan`), which take their ceilings from the whole route's once.
    """
    nodes = _Nodes(problem)
    order = np.arange(problem.n_nodes)
    fwd = np.asarray(_forward_pass(nodes, np.asarray(ceiling_b, dtype=float), float(b_start),
                                   order))
    last = float(fwd[-1]) if b_end is None else min(float(b_end), float(fwd[-1]))
    return fwd, np.asarray(_backward_pass(nodes, fwd, last, order))


def _solve_periodic(problem: SpeedProblem, nd: _Nodes, ceiling_arr: np.ndarray,
                    max_laps: int = 50):
    """Periodic passes on a closed route; node n-1 is node 0 again."""
    m = problem.n_nodes - 1                       # distinct nodes
    start = int(np.argmin(ceiling_arr[:m]))
    order = (start + np.arange(m + 1)) % m             # driving order, ends where it starts
    ceil_rot = ceiling_arr[order]
    b0 = ceil_rot[0]
    laps = 0
    for laps in range(1, max_laps + 1):
        fwd = _forward_pass(nd, ceil_rot, b0, order)
        if fwd[-1] >= b0 * (1 - 1e-12):
            break
        b0 = fwd[-1]
    fwd[0] = fwd[-1] = min(fwd[0], fwd[-1])
    b_end = fwd[-1]
    for _ in range(max_laps):
        bwd = _backward_pass(nd, fwd, b_end, order)
        if bwd[0] >= b_end * (1 - 1e-12):
            break
        b_end = bwd[0]
        laps += 1
    bwd[0] = bwd[-1] = min(bwd[0], bwd[-1])
    out = np.empty(m + 1)
    out[np.asarray(order[:-1])] = bwd[:-1]
    out[m] = out[0]
    return out, laps


def _end_out_of_reach(problem: SpeedProblem, fwd: np.ndarray, ceiling: np.ndarray) -> str:
    """Explain an end speed the forward pass cannot reach: from where it accelerates as hard as
    the limits allow (the last station where it rides a ceiling, and what sets that ceiling, or
    the start) over the rest of the route."""
    touch = np.flatnonzero(fwd[1:-1] >= ceiling[1:-1] * (1 - 1e-9)) + 1
    if touch.size:
        k = int(touch[-1])
        origin = (f"from {math.sqrt(max(fwd[k], 0.0)):.2f} m/s at station "
                  f"{problem.station_m[k]:.1f} m ({cap_words(problem, k, ceiling[k])})")
    else:
        k = 0
        origin = f"from the start speed {math.sqrt(max(fwd[0], 0.0)):.2f} m/s"
    return (f"{problem.source}: end speed {math.sqrt(problem.b_end):.2f} m/s cannot be reached: "
            f"accelerating as hard as the limits allow {origin}, the vehicle arrives at station "
            f"{problem.station_m[-1]:.1f} m at {math.sqrt(fwd[-1]):.2f} m/s, "
            f"{problem.station_m[-1] - problem.station_m[k]:.1f} m later; lower the end speed")


def _raise_cannot_slow(problem: SpeedProblem, b: np.ndarray, fwd: list) -> None:
    """Explain a start speed that cannot be braked down in time."""
    at_stop = stop_out_of_reach(problem, jerk=problem.jerk_model)
    if at_stop is not None:
        raise InfeasibleError(at_stop)
    ceiling = problem.lateral_ceiling_b()
    # the first node whose ceiling the backward pass rests on after the start
    tight = np.flatnonzero(np.isclose(b[1:], np.asarray(fwd[1:]), rtol=1e-9, atol=1e-12)
                           & (b[1:] < problem.b_start))
    k = int(tight[0]) + 1 if tight.size else 1
    what = cap_words(problem, k, ceiling[k])
    v0 = math.sqrt(problem.b_start)
    vk = math.sqrt(max(b[k], 0.0))
    decel, slippery = braking_decel(problem, k)
    need = (v0 * v0 - vk * vk) / (2.0 * decel)
    grip = "" if slippery is None else f" ({grip_words(problem, slippery, decel)})"
    raise InfeasibleError(
        f"{problem.source}: start speed {v0:.2f} m/s is too high: the vehicle must be down to {vk:.2f} m/s at "
        f"station {problem.station_m[k]:.1f} m ({what}) and braking at "
        f"{decel:.3g} m/s^2{grip} needs about {need:.1f} m, only "
        f"{problem.station_m[k] - problem.station_m[0]:.1f} m are available; lower the start "
        "speed or move the constraint")
