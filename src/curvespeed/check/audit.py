"""The check itself: :func:`check_speeds` (see the package docstring)."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..design import DesignCriterion, design_criterion, side_friction_demand
from ..errors import SpeedFileError
from ..geometry import Geometry
from ..limits import Limits, RouteConstraints
from .curves import brake_targets, extent_m, find_curves, stretches, territories
from .model import (BRAKE_REACH, CAP_NAMES, CHECKED_LIMITS, MIN_RADIUS, USE_TOLERANCE,
                    CheckReport, CurveCheck, CurveSettings, SpeedKind, Violation)
from .speeds import Judgement, checked_constraints, judge_speeds
from .uncertainty import CurvatureEnds, RadiusInterval, curvature_ends, radius_interval


def check_speeds(geometry: Geometry, limits: Limits, constraints: RouteConstraints, speed_mps, *,
                 kind: SpeedKind = SpeedKind.TRACE, speed_source: str = "speeds",
                 design_speed_kmh: float | None = None, e_max: float = 0.08,
                 settings: CurveSettings = CurveSettings(),
                 tolerance: float = USE_TOLERANCE) -> CheckReport:
    """Check speeds along ``geometry`` against ``limits``, zones and road-design criteria.

    Parameters
    ----------
    geometry : Geometry
        The resampled route.
    limits : Limits
        Vehicle and comfort limits.
    constraints : RouteConstraints
        Zones and superelevation are applied; stops and start/end speeds are ignored (warning).
    speed_mps : array_like, shape (n_nodes,)
        Speed to check at every station, m/s (finite, >= 0).
    kind : SpeedKind
        ``TRACE``: accelerations from the speeds themselves; ``CONSTANT`` / ``ZONES``: speeds
        to hold, checked at zero acceleration.
    speed_source : str
        Label of the speeds for reports and messages.
    design_speed_kmh : float, optional
        Design speed for the AASHTO minimum-radius check, km/h (20-120).
    e_max : float
        Maximum superelevation rate for that check, rise over run (0.08 = 8 %).
    settings : CurveSettings
        How curves are found.
    tolerance : float
        Use tolerance; a use above ``1 + tolerance`` is a violation.

    Returns
    -------
    CheckReport

    Raises
    ------
    SpeedFileError
        Wrong number of speeds, a negative or non-finite speed.
    LimitsError
        Invalid limits, constraints, design speed or ``e_max``.
    """
    s = geometry.station_m
    v = _checked_speeds(geometry, speed_mps, speed_source)
    design = None if design_speed_kmh is None else design_criterion(design_speed_kmh, e_max)
    from ..placement import place_positions

    # zones, friction sections and superelevation given by position, as plan places them
    used = checked_constraints(place_positions(constraints, geometry, stops=False))
    judged = judge_speeds(geometry, limits, used, v, kind)
    curve_nodes = find_curves(geometry, settings)
    places = _Places(s, *territories(curve_nodes, geometry), settings.join_gap_m, tolerance)
    found = _limit_violations(judged, v, places) + _brake_violations(judged, v, geometry, places)

    ends = curvature_ends(geometry)
    curves: list[CurveCheck] = []
    for c, nodes in enumerate(curve_nodes):
        radius = radius_interval(ends, nodes)
        j = int(nodes[int(np.argmax(ends.estimate[nodes]))])
        if design is not None and not design.passes(radius.low_m):
            found.append((_radius_violation(design, radius, nodes, j, ends, s, v), {c}))
        curves.append(_curve_check(c, nodes, j, radius, judged, geometry, v, design))

    found.sort(key=lambda item: (item[0].start_m, item[0].kind))
    violations = tuple(replace(viol, curves=tuple(sorted(t + 1 for t in touched)))
                       for viol, touched in found)
    finished = [_with_violations(curve, violations) for curve in curves]
    return CheckReport(
        geometry=geometry, speed_kind=kind, speed_source=speed_source, speed_mps=v,
        accel_mps2=judged.accel_mps2, limit_speed_mps=np.sqrt(judged.ceiling_b),
        brake_reach_mps=np.sqrt(judged.reach_b), use=judged.use,
        use_estimate=judged.use_estimate,
        limit_speed_estimate_mps=np.sqrt(judged.ceiling_estimate_b), curves=tuple(finished),
        violations=violations, design=design, limits=limits, constraints=used,
        settings=settings, tolerance=tolerance)


def _checked_speeds(geometry: Geometry, speed_mps, speed_source: str) -> np.ndarray:
    """The speeds as a flat array, one finite non-negative speed per station, else
    :class:`SpeedFileError` naming the first bad one."""
    s = geometry.station_m
    v = np.asarray(speed_mps, dtype=float).ravel()
    n = geometry.n_nodes
    if v.size != n:
        raise SpeedFileError(f"{speed_source}: {v.size} speeds for {n} stations; give one speed "
                             "per station of the route")
    bad = np.flatnonzero(~np.isfinite(v) | (v < 0.0))
    if bad.size:
        k = int(bad[0])
        raise SpeedFileError(f"{speed_source}: speed {float(v[k]):g} m/s at station {s[k]:.1f} m "
                             "is not a finite, non-negative number; fix the speeds")
    return v


def _with_violations(curve: CurveCheck, violations) -> CurveCheck:
    """``curve`` with the kinds of the violations touching it, those found on the estimate
    too, its worst use among them and whether its braking is reached in time."""
    hits = [viol for viol in violations if curve.number in viol.curves]
    kinds = tuple(dict.fromkeys(viol.kind for viol in hits))
    on_estimate = tuple(dict.fromkeys(viol.kind for viol in hits if viol.on_estimate))
    worst = max([curve.worst_use] + [viol.use for viol in hits])
    return replace(curve, violations=kinds, violations_on_estimate=on_estimate,
                   worst_use=worst, brake_ok=BRAKE_REACH not in kinds)


@dataclass(frozen=True)
class _Places:
    """Where violations are placed: stations, each one's nearest curve (``territory``), each
    curve's stations widened by a step (``near``), the join gap (m) and the use tolerance."""

    station_m: np.ndarray
    territory: np.ndarray
    near: np.ndarray
    join_gap_m: float
    tolerance: float

    def touched(self, c: int, i0: int, i1: int) -> set:
        """``{c}`` if curve ``c`` (-1: none) is near stations ``i0..i1``, else empty."""
        return {c} if c >= 0 and self.near[c, i0:i1 + 1].any() else set()


def _limit_violations(judged: Judgement, v: np.ndarray,
                      places: _Places) -> list[tuple[Violation, set]]:
    """Stretches over each limit of :data:`CHECKED_LIMITS`, judged; each says whether it holds
    on the curvature estimate too."""
    s, tol = places.station_m, places.tolerance
    problem, ceiling_b, accel = judged.problem, judged.ceiling_b, judged.accel_mps2
    found = []
    for name, label in CHECKED_LIMITS.items():
        arr = judged.use.get(name)
        if arr is None:
            continue
        for i0, i1 in stretches(arr > 1.0 + tol, places.territory, s, places.join_gap_m):
            k = _worst_node(arr, i0, i1, v / np.sqrt(np.maximum(ceiling_b, 1e-300)))
            allowed = math.sqrt(problem.cap_b[k]) if name == "speed_cap" else \
                math.sqrt(ceiling_b[k])
            what = CAP_NAMES.get(str(problem.cap_source[k]), label) if name == "speed_cap" \
                else label
            message = _limit_message(name, what, s[i0], s[i1], s[k], float(arr[k]), v[k],
                                     allowed, accel[k])
            use_e = float(np.max(judged.use_estimate[name][i0:i1 + 1]))
            on_estimate = use_e > 1.0 + tol
            found.append((Violation(name, float(s[i0]), float(s[i1]), float(s[k]), float(arr[k]),
                                    float(v[k]), allowed, message + _on_bound_note(use_e, tol),
                                    use_estimate=use_e, on_estimate=on_estimate),
                          places.touched(int(places.territory[i0]), i0, i1)))
    return found


def _brake_violations(judged: Judgement, v: np.ndarray, geometry: Geometry,
                      places: _Places) -> list[tuple[Violation, set]]:
    """Stretches too fast to brake for a curve ahead (within the lateral limits themselves).

    Judged on the bound's reach and lateral ceiling, joined by the stations too fast on the
    estimate's own: where the bound spreads a curve ahead of the estimate, a station over the
    bound's lateral ceiling (a lateral violation) may be within the estimate's yet too fast to
    brake for its curve, and that failure on the estimate must be reported as such.
    """
    s, tol = places.station_m, places.tolerance
    v_reach = np.sqrt(judged.reach_b)
    v_lat = np.sqrt(judged.lateral_ceiling_b)
    reach_use = _speed_ratio(v, v_reach)
    reach_use_e = _speed_ratio(v, np.sqrt(judged.reach_estimate_b))
    within_e = v <= np.sqrt(judged.lateral_ceiling_estimate_b) * (1.0 + tol)
    too_fast = ((reach_use > 1.0 + tol) & (v <= v_lat * (1.0 + tol))) | \
        ((reach_use_e > 1.0 + tol) & within_e)
    target = brake_targets(judged.reach_b, judged.lateral_ceiling_b, geometry.closed)
    found = []
    for i0, i1 in stretches(too_fast, target, s, places.join_gap_m):
        k = i0 + int(np.argmax(np.where(too_fast[i0:i1 + 1], reach_use[i0:i1 + 1], 0.0)))
        j = int(target[i1])
        c = int(places.territory[j]) if j >= 0 else -1
        where = (f"the curve at station {s[j]:.1f} m ({v_lat[j]:.2f} m/s allowed there)"
                 if j >= 0 else "the curves ahead")
        message = (f"stations {s[i0]:.1f}-{s[i1]:.1f} m: too fast to brake for {where}: "
                   f"{v[k]:.2f} m/s at {s[k]:.1f} m where braking within the limits allows at "
                   f"most {v_reach[k]:.2f} m/s ({100 * (reach_use[k] - 1):.1f} % over); "
                   "slow down earlier")
        use_e = float(np.max(np.where(within_e, reach_use_e, 0.0)[i0:i1 + 1]))
        found.append((Violation(BRAKE_REACH, float(s[i0]), float(s[i1]), float(s[k]),
                                float(reach_use[k]), float(v[k]), float(v_reach[k]),
                                message + _on_bound_note(use_e, tol), use_estimate=use_e,
                                on_estimate=use_e > 1.0 + tol),
                      places.touched(c, j, j)))
    return found


def _speed_ratio(v: np.ndarray, allowed: np.ndarray) -> np.ndarray:
    """``v / allowed``; infinite where nothing is allowed but the speed is not zero."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(allowed > 0.0, v / allowed, np.where(v > 0.0, np.inf, 1.0))


def _on_bound_note(use_estimate: float, tolerance: float) -> str:
    """What a message adds when the limit is exceeded only within the curvature's uncertainty."""
    if use_estimate > 1.0 + tolerance:
        return ""
    return (f"; {100 * use_estimate:.1f} % on the curvature estimate: over only within the "
            "curvature's uncertainty (its bound covers the true road)")


def _radius_violation(design: DesignCriterion, radius: RadiusInterval, nodes: np.ndarray, j: int,
                      ends: CurvatureEnds, s: np.ndarray, v: np.ndarray) -> Violation:
    """The AASHTO minimum radius not met at the curve's smallest plausible radius."""
    table = design.table_min_radius_m
    tight = nodes[ends.high[nodes] > 1.0 / table]
    on_estimate = not design.passes(radius.estimate_m)
    criterion = (f"the minimum {table:.0f} m for {design.design_speed_kmh:g} km/h (e_max "
                 f"{design.e_max:g}, f_max {design.f_max:.3f}; {design.source})")
    head = f"stations {s[tight[0]]:.1f}-{s[tight[-1]]:.1f} m: radius {radius.estimate_m:.1f} m"
    if on_estimate:
        message = f"{head} is below {criterion}"
    else:
        message = (f"{head} meets {criterion}, but the smallest radius within the curvature's "
                   f"uncertainty, {radius.low_m:.1f} m, does not (its bound covers the true road)")
    return Violation(MIN_RADIUS, float(s[tight[0]]), float(s[tight[-1]]), float(s[j]),
                     table / radius.low_m, float(v[j]), math.nan, message,
                     use_estimate=table / radius.estimate_m, on_estimate=on_estimate)


def _worst_node(use: np.ndarray, first: int, last: int, tie_break: np.ndarray) -> int:
    """Node of largest use in ``first..last``; among equal uses, the largest ``tie_break``.

    The verifier gives a node the use of the worse of its two steps, so the station before a
    curve shares the curve's first use; the tie-break (speed over ceiling) names the station
    that is actually too fast.
    """
    seg = use[first:last + 1]
    ties = np.flatnonzero(seg >= seg.max() * (1.0 - 1e-9))
    return first + int(ties[np.argmax(tie_break[first:last + 1][ties])])


def _limit_message(name: str, label: str, start: float, end: float, at: float, use: float,
                   v: float, allowed: float, accel: float) -> str:
    over = f"{100 * (use - 1):.1f} % over"
    head = f"stations {start:.1f}-{end:.1f} m: {label}"
    if name == "speed_cap":
        return f"{head}: {v:.2f} m/s at {at:.1f} m above the {allowed:.2f} m/s allowed ({over})"
    if name == "lateral_jerk" and accel == 0.0:
        # at a held speed the lateral jerk v^3 dkappa/ds grows as v^3
        return (f"{head} at {100 * use:.1f} % ({over}) at {at:.1f} m: {v:.2f} m/s held where "
                f"the curvature changes; the bound allows {v / use ** (1 / 3):.2f} m/s there")
    if v > allowed * (1.0 + 1e-9):
        return (f"{head} at {100 * use:.1f} % ({over}) at {at:.1f} m: {v:.2f} m/s where the "
                f"limits allow {allowed:.2f} m/s")
    return (f"{head} at {100 * use:.1f} % ({over}) at {at:.1f} m: {v:.2f} m/s with acceleration "
            f"{accel:+.2f} m/s^2")


def _curve_check(c: int, nodes: np.ndarray, j: int, radius: RadiusInterval, judged: Judgement,
                 geometry: Geometry, v: np.ndarray, design: DesignCriterion | None) -> CurveCheck:
    """Per-curve figures (violations and worst use are filled in by the caller)."""
    problem, problem_e = judged.problem, judged.problem_estimate
    lim = problem.limits
    g = lim.gravity_mps2
    s = geometry.station_m
    closed = geometry.closed
    m = s.size - 1 if closed else s.size
    b = v[j] * v[j]
    e = float(problem.sin_bank[j] / problem.cos_bank[j])
    a_lat = float(problem_e.felt_lateral(b, j))
    f = float(side_friction_demand(v[j], radius.estimate_m, e, g))
    # the limit at the tightest point; on a curve spanning friction sections, the lowest limit
    # over the curve (a wetter part of slightly larger radius may allow less)
    at = nodes if np.ptp(problem.mu_lat[nodes]) > 0.0 else j
    limit_v = math.sqrt(float(np.min(judged.ceiling_b[at])))
    first = int(nodes[0])
    approach = (first - 1) % m if closed else max(first - 1, 0)
    available = float(s[j] - s[approach])
    if available < 0.0:
        available += geometry.length_m
    v_app = float(v[approach])
    # the lowest friction on the way in and over the curve (a curve spanning friction sections
    # is judged at the lowest of them)
    way_in = (np.arange(approach, approach + (j - approach) % m + 1) % m if closed
              else np.arange(approach, j + 1))
    a_brake = min(lim.max_decel_mps2, float(np.min(problem.mu_long[way_in])) * g)
    mu_lat_curve = float(np.min(problem.mu_lat[nodes]))
    needed = max(v_app * v_app - limit_v * limit_v, 0.0) / (2.0 * a_brake)
    use, use_e = judged.use, judged.use_estimate
    peaks = [float(np.max(use[name][nodes])) for name in ("friction_ellipse", "comfort_ellipse",
                                                          "power", "jerk") if name in use]
    low, estimate, high = radius.advisories(e, g)
    meets_low, meets, meets_high = radius.meets(design)
    return CurveCheck(
        number=c + 1, start_m=float(s[first]), end_m=float(s[nodes[-1]]),
        length_m=extent_m(nodes, geometry),
        direction="left" if geometry.curvature_1pm[j] > 0 else "right",
        min_radius_m=radius.estimate_m, min_radius_low_m=radius.low_m,
        min_radius_high_m=radius.high_m, tightest_station_m=float(s[j]), superelevation=e,
        speed_mps=float(v[j]), lateral_accel_mps2=a_lat,
        lateral_accel_bound_mps2=float(problem.felt_lateral(b, j)), side_friction_demand=f,
        side_friction_demand_bound=float(side_friction_demand(
            v[j], 1.0 / float(problem.kappa_abs[j]), e, g)),
        friction_margin=mu_lat_curve - f, comfort_margin_mps2=lim.max_lateral_accel_mps2 - a_lat,
        friction_use=float(np.max(use["friction_ellipse"][nodes])),
        comfort_use=float(np.max(use["comfort_ellipse"][nodes])),
        friction_use_estimate=float(np.max(use_e["friction_ellipse"][nodes])),
        comfort_use_estimate=float(np.max(use_e["comfort_ellipse"][nodes])),
        limit_speed_mps=limit_v,
        limit_speed_estimate_mps=math.sqrt(float(np.min(judged.ceiling_estimate_b[at]))),
        approach_speed_mps=v_app, braking_distance_needed_m=needed,
        braking_distance_available_m=available, brake_ok=True, meets_min_radius=meets,
        meets_min_radius_low=meets_low, meets_min_radius_high=meets_high, advisory=estimate,
        advisory_low=low, advisory_high=high, violations=(), violations_on_estimate=(),
        worst_use=max(peaks))
