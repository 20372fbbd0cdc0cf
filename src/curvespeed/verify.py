"""Independent check of a finished profile against every limit of the discrete problem.

The verifier never trusts a solver's status: it recomputes step accelerations, lateral demand,
friction-ellipse and comfort-ellipse use, power and jerk from the final speeds alone, using the
constraint definitions of :mod:`curvespeed.problem`, and reports the peak use of each limit
(1.0 = exactly at the limit). A profile whose use exceeds 1 + ``tolerance`` anywhere is refused.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .problem import SpeedProblem
from .profile import derive

try:
    from .solvers import _window_check
except ImportError:             # no C compiler at install: verify_profile judges every window
    _window_check = None

#: Relative tolerance on limit use below which a profile is accepted as within its limits.
DEFAULT_TOLERANCE = 1e-6
#: A node counts as bound by a limit when its use is within this of 1.
BINDING_TOLERANCE = 1e-3


@dataclass(frozen=True)
class Violation:
    """One limit exceeded: where, which limit, how much (use > 1)."""

    station_m: float
    limit: str
    use: float

    def describe(self) -> str:
        return f"{self.limit} at station {self.station_m:.1f} m ({100 * self.use:.2f} % of limit)"


@dataclass(frozen=True)
class Verification:
    """Per-node use of each limit, peaks, and violations.

    Attributes
    ----------
    use : dict of str -> ndarray
        Use of each limit at each node (max over the steps meeting there), dimensionless.
    peak : dict of str -> float
        Maximum of each ``use`` array.
    violations : list of Violation
        First violation of each limit beyond the tolerance (empty when the profile is valid).
    binding : ndarray of str, or None
        The limit that binds at each node, or "none" (None when not asked for:
        ``verify_profile(..., labels=False)``).
    extremes : dict of str -> float
        Peak magnitudes in SI units: ``accel_mps2``, ``decel_mps2``, ``lateral_accel_mps2``,
        ``jerk_mps3``, ``lateral_jerk_mps3``.
    derived : dict of str -> ndarray
        The speeds, accelerations, jerk and times the check was made on
        (:func:`curvespeed.profile.derive`), for callers that need them too.
    """

    use: dict
    peak: dict
    violations: list
    binding: np.ndarray
    extremes: dict
    derived: dict

    @property
    def ok(self) -> bool:
        return not self.violations


def _node_max(step_values: np.ndarray, closed: bool) -> np.ndarray:
    """Per node, the max of the values of the (one or two) steps meeting there."""
    out = np.empty(step_values.size + 1)
    out[0] = step_values[0]
    out[-1] = step_values[-1]
    out[1:-1] = np.maximum(step_values[:-1], step_values[1:])
    if closed:
        out[0] = out[-1] = max(step_values[0], step_values[-1])
    return out


def verify_profile(problem: SpeedProblem, b: np.ndarray,
                   tolerance: float = DEFAULT_TOLERANCE, check_jerk: bool = True,
                   labels: bool = True, measure_lateral_jerk: bool = True) -> Verification:
    """Check squared speeds ``b`` against every limit of ``problem``.

    ``check_jerk=False`` leaves the jerk bounds (longitudinal and lateral) out, for solvers that
    do not enforce them; the jerks are still measured in :attr:`Verification.extremes`.
    ``labels=False`` names no binding limits (:attr:`Verification.binding` is None), for
    callers that only need the verdict and the derived quantities (a receding-horizon window).
    ``measure_lateral_jerk=False`` measures the lateral jerk only where it is checked (a
    lateral jerk bound set and ``check_jerk``); otherwise its extreme is NaN and the derived
    quantities leave it out.
    """
    lim = problem.limits
    b = np.maximum(np.asarray(b, dtype=float), 0.0)
    lat_checked = lim.max_lateral_jerk_mps3 is not None and check_jerk
    d = derive(problem, b, lateral_jerk=measure_lateral_jerk or lat_checked)
    v = d["speed_mps"]
    a = d["step_accel_mps2"]

    y = problem.felt_lateral(b)
    lat_use = np.maximum(y, 0.0) / lim.max_lateral_accel_mps2
    normal = problem.normal_accel(b)
    res = problem.resistance(b)

    def per_step_at(k, a_here):
        """Uses of the comfort ellipse, grip and power for each step at one of its nodes."""
        cap_a = np.where(a_here >= 0.0, lim.max_accel_mps2, lim.max_decel_mps2)
        comfort = np.hypot(a_here / cap_a, lat_use[k])
        tyre_long = a_here + res[k]
        grip = np.hypot(tyre_long / problem.mu_long[k], y[k] / problem.mu_lat[k]) / normal[k]
        if math.isfinite(lim.power_per_mass_wpkg):
            power = np.maximum(tyre_long, 0.0) * v[k] / lim.power_per_mass_wpkg
        else:
            power = np.zeros_like(a_here)
        return comfort, grip, power

    idx = np.arange(a.size)
    c0, g0, p0 = per_step_at(idx, d["step_accel_first_mps2"])
    c1, g1, p1 = per_step_at(idx + 1, d["step_accel_last_mps2"])
    comfort_use = _node_max(np.maximum(c0, c1), problem.closed)
    grip_use = _node_max(np.maximum(g0, g1), problem.closed)
    power_use = _node_max(np.maximum(p0, p1), problem.closed)
    with np.errstate(divide="ignore", invalid="ignore"):
        cap_use = np.where(problem.cap_b > 0.0, np.sqrt(b / problem.cap_b),
                           np.where(b > 0.0, np.inf, 1.0))
    use = {"speed_cap": cap_use, "lateral_comfort": lat_use, "comfort_ellipse": comfort_use,
           "friction_ellipse": grip_use}
    if math.isfinite(lim.power_per_mass_wpkg):
        use["power"] = power_use
    if lim.max_jerk_mps3 is not None and check_jerk:
        step_jerk = _node_max(np.abs(d["step_jerk_mps3"]), problem.closed)
        use["jerk"] = np.maximum(np.abs(d["jerk_mps3"]), step_jerk) / lim.max_jerk_mps3
    lat_jerk = np.full(b.size, np.nan)
    if "step_lat_jerk_mps3" in d:
        lat_jerk = np.maximum(_node_max(np.abs(d["step_lat_jerk_mps3"]), problem.closed),
                              np.abs(d["node_lat_jerk_mps3"]))
    if lat_checked:
        use["lateral_jerk"] = lat_jerk / lim.max_lateral_jerk_mps3

    if problem.end_reserve is not None:
        reserve = np.zeros(b.size)
        reserve[-1] = problem.end_reserve_use(b)
        use["end_reserve"] = reserve
    violations = []
    for name, arr in use.items():
        bad = np.flatnonzero(arr > 1.0 + tolerance)
        if bad.size:
            k = int(bad[np.argmax(arr[bad])])
            violations.append(Violation(float(problem.station_m[k]), name, float(arr[k])))
    for which, b_fixed, k in (("start speed", problem.b_start, 0), ("end speed", problem.b_end, -1)):
        if b_fixed is not None and abs(math.sqrt(b[k]) - math.sqrt(b_fixed)) > 1e-6 + tolerance * math.sqrt(b_fixed):
            violations.append(Violation(float(problem.station_m[k]), which,
                                        math.sqrt(b[k]) / max(math.sqrt(b_fixed), 1e-12)))
    if problem.closed and abs(v[0] - v[-1]) > 1e-9 + tolerance * v[0]:
        violations.append(Violation(0.0, "periodic seam", float(v[-1] / max(v[0], 1e-12))))

    peak = {name: float(np.max(arr)) for name, arr in use.items()}
    grip_lat_share = np.abs(y) / (problem.mu_lat * normal)
    a_ends = np.concatenate((d["step_accel_first_mps2"], d["step_accel_last_mps2"]))
    extremes = {"accel_mps2": float(max(a_ends.max(), 0.0)),
                "decel_mps2": float(max(-a_ends.min(), 0.0)),
                "lateral_accel_mps2": float(np.max(problem.kappa_abs * b)),
                "jerk_mps3": float(np.max(np.abs(d["jerk_mps3"]))),
                "lateral_jerk_mps3": float(np.max(lat_jerk))}
    return Verification(use=use, peak=peak, violations=violations,
                        binding=(_binding_labels(problem, a, use, lat_use, grip_lat_share)
                                 if labels else None),
                        extremes=extremes, derived=d)


def _binding_labels(problem, a, use, lat_use, grip_lat_share) -> np.ndarray:
    """Name the limit that binds at each node; later rules take precedence over earlier ones.

    Names: "power"; "lateral_grip", "grip_accel", "grip_brake" (friction ellipse);
    "lateral_comfort", "accel", "brake" (comfort ellipse); "lateral_jerk"; "max_speed", "zone",
    "stop" (caps);
    "none" where nothing is within :data:`BINDING_TOLERANCE` of its limit.
    """
    near = 1.0 - BINDING_TOLERANCE
    labels = np.full(a.size + 1, "none", dtype=object)
    a_out = np.concatenate((a, [a[-1]]))
    a_in = np.concatenate(([a[0]], a))
    direction = np.where(np.minimum(a_out, a_in) < 0.0, "brake", "accel")
    if "power" in use:
        labels = np.where(use["power"] >= near, "power", labels)
    labels = np.where(use["friction_ellipse"] >= near,
                      np.where(grip_lat_share >= near, "lateral_grip",
                               np.char.add("grip_", direction.astype(str))), labels)
    labels = np.where(use["comfort_ellipse"] >= near,
                      np.where(lat_use >= near, "lateral_comfort", direction), labels)
    if "lateral_jerk" in use:
        labels = np.where(use["lateral_jerk"] >= near, "lateral_jerk", labels)
    labels = np.where(use["speed_cap"] >= near, problem.cap_source, labels)
    return labels.astype(object)


#: The limits whose largest use :func:`window_verdict` reports, in its order.
WINDOW_USES = ("speed_cap", "lateral_comfort", "comfort_ellipse", "friction_ellipse", "jerk",
               "end_reserve")


def window_verdict(problem: SpeedProblem, b: np.ndarray, tolerance: float):
    """:func:`verify_profile`'s verdict on a receding-horizon window (``check_jerk=True``,
    ``labels=False``, ``measure_lateral_jerk=False``) in one compiled pass
    (``solvers/_window_check.c``): ``(ok, derived, peaks)`` with the speeds, accelerations and
    times of :func:`curvespeed.profile.derive` and the largest use of each of
    :data:`WINDOW_USES`, the numpy code's numbers to the last bit. None where it does not
    apply: no compiled pass, a loop, a power limit, a lateral jerk bound, no jerk bound, or a
    step next to rest (:func:`verify_profile` judges those; it also words every refusal)."""
    lim = problem.limits
    if (_window_check is None or problem.closed or lim.max_jerk_mps3 is None
            or lim.max_lateral_jerk_mps3 is not None or math.isfinite(lim.power_per_mass_wpkg)
            or problem.n_nodes < 2 or not np.isnan(problem.rest_u).all()):
        return None
    n = problem.n_nodes
    t = problem.jerk_terms
    reserve = np.zeros((0, 2))
    brake_b = math.nan
    if problem.end_reserve is not None:
        brake_b, pairs = problem.end_reserve
        reserve = np.array(pairs, dtype=float).reshape(-1, 2)
    speed, accel, time_s, peaks = np.empty(n), np.empty(n), np.empty(n), np.empty(6)
    f64 = [np.ascontiguousarray(a, dtype=float) for a in (
        b, problem.kappa_abs, problem.cos_bank, problem.sin_bank, problem.cos_grade,
        problem.sin_grade, problem.mu_long, problem.mu_lat, problem.cap_b,
        problem.accel_factor_start, problem.accel_factor_end, problem.time_coef)]
    ok = _window_check.check(
        *f64, *(np.ascontiguousarray(a, dtype=np.int64) for a in (t.node, t.prev, t.next)),
        np.ascontiguousarray(t.weights, dtype=float), np.ascontiguousarray(t.scale, dtype=float),
        reserve, speed, accel, time_s, peaks,
        (problem.ds, lim.gravity_mps2, lim.max_lateral_accel_mps2, lim.max_accel_mps2,
         lim.max_decel_mps2, lim.drag_per_b_1pm, lim.rolling_resistance_coefficient,
         lim.max_jerk_mps3, problem.accel_start_mps2, problem.accel_start_tolerance_mps2,
         tolerance, math.nan if problem.b_start is None else problem.b_start,
         math.nan if problem.b_end is None else problem.b_end, float(brake_b)))
    return ok, {"speed_mps": speed, "accel_mps2": accel, "time_s": time_s}, peaks
