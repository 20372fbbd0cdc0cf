"""The check itself: :func:`check_speeds` (see the package docstring)."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..design import DesignCriterion, ball_bank_advisory, design_criterion, side_friction_demand
from ..errors import SpeedFileError
from ..geometry import Geometry
from ..limits import Limits, RouteConstraints
from ..problem import SpeedProblem, build_problem
from .curves import brake_targets, extent_m, find_curves, stretches, territories
from .model import (BRAKE_REACH, CAP_NAMES, CHECKED_LIMITS, MIN_RADIUS, USE_TOLERANCE,
                    CheckReport, CurveCheck, CurveSettings, SpeedKind, Violation)
from .speeds import brake_reach_b, checked_constraints, rest_constraints, station_use

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
    design = None if design_speed_kmh is None else design_criterion(design_speed_kmh, e_max)
    used = checked_constraints(constraints)
    if kind is SpeedKind.TRACE:
        # rest points of the trace, so a jerk-limited start, stop or end is judged as planned
        problem = build_problem(geometry, limits, rest_constraints(used, v, geometry))
    else:
        # held speeds: no rest, zero acceleration
        problem = build_problem(geometry, limits, used, jerk_model=False)
    b = v * v
    ceiling_b = problem.lateral_ceiling_b()
    use, accel = station_use(problem, b, kind)
    lat_ceiling_b, reach_b = brake_reach_b(geometry, limits, used)
    curve_nodes = find_curves(geometry, settings)

    territory, near = territories(curve_nodes, geometry)

    found: list[tuple[Violation, set]] = []
    for name, label in CHECKED_LIMITS.items():
        arr = use.get(name)
        if arr is None:
            continue
        for i0, i1 in stretches(arr > 1.0 + tolerance, territory, s, settings.join_gap_m):
            k = _worst_node(arr, i0, i1, v / np.sqrt(np.maximum(ceiling_b, 1e-300)))
            allowed = math.sqrt(problem.cap_b[k]) if name == "speed_cap" else \
                math.sqrt(ceiling_b[k])
            what = CAP_NAMES.get(str(problem.cap_source[k]), label) if name == "speed_cap" \
                else label
            message = _limit_message(name, what, s[i0], s[i1], s[k], float(arr[k]), v[k],
                                     allowed, accel[k])
            c = int(territory[i0])
            touched = {c} if c >= 0 and near[c, i0:i1 + 1].any() else set()
            found.append((Violation(name, float(s[i0]), float(s[i1]), float(s[k]), float(arr[k]),
                                    float(v[k]), allowed, message), touched))

    v_reach = np.sqrt(reach_b)
    v_lat = np.sqrt(lat_ceiling_b)
    with np.errstate(divide="ignore", invalid="ignore"):
        reach_use = np.where(v_reach > 0.0, v / v_reach, np.where(v > 0.0, np.inf, 1.0))
    too_fast = (reach_use > 1.0 + tolerance) & (v <= v_lat * (1.0 + tolerance))
    target = brake_targets(reach_b, lat_ceiling_b, geometry.closed)
    for i0, i1 in stretches(too_fast, target, s, settings.join_gap_m):
        k = i0 + int(np.argmax(np.where(too_fast[i0:i1 + 1], reach_use[i0:i1 + 1], 0.0)))
        j = int(target[i1])
        c = int(territory[j]) if j >= 0 else -1
        touched = {c} if c >= 0 and near[c, j] else set()
        where = (f"the curve at station {s[j]:.1f} m ({v_lat[j]:.2f} m/s allowed there)"
                 if j >= 0 else "the curves ahead")
        message = (f"stations {s[i0]:.1f}-{s[i1]:.1f} m: too fast to brake for {where}: "
                   f"{v[k]:.2f} m/s at {s[k]:.1f} m where braking within the limits allows at "
                   f"most {v_reach[k]:.2f} m/s ({100 * (reach_use[k] - 1):.1f} % over); "
                   "slow down earlier")
        found.append((Violation(BRAKE_REACH, float(s[i0]), float(s[i1]), float(s[k]),
                                float(reach_use[k]), float(v[k]), float(v_reach[k]), message),
                      touched))

    curves: list[CurveCheck] = []
    a_brake = min(limits.max_decel_mps2, limits.mu_long * limits.gravity_mps2)
    for c, nodes in enumerate(curve_nodes):
        kap = np.abs(geometry.curvature_1pm[nodes])
        j = int(nodes[int(np.argmax(kap))])
        radius = 1.0 / float(kap.max())
        if design is not None and not design.passes(radius):
            tight = nodes[kap > 1.0 / design.table_min_radius_m]
            ratio = design.table_min_radius_m / radius
            message = (f"stations {s[tight[0]]:.1f}-{s[tight[-1]]:.1f} m: radius {radius:.1f} m "
                       f"is below the minimum {design.table_min_radius_m:.0f} m for "
                       f"{design.design_speed_kmh:g} km/h (e_max {design.e_max:g}, f_max "
                       f"{design.f_max:.3f}; {design.source})")
            found.append((Violation(MIN_RADIUS, float(s[tight[0]]), float(s[tight[-1]]),
                                    float(s[j]), ratio, float(v[j]), math.nan, message), {c}))
        curves.append(_curve_check(c, nodes, j, radius, problem, geometry, v, b, use, ceiling_b,
                                   a_brake, design))

    found.sort(key=lambda item: (item[0].start_m, item[0].kind))
    violations = tuple(replace(viol, curves=tuple(sorted(t + 1 for t in touched)))
                       for viol, touched in found)
    finished = []
    for curve in curves:
        hits = [viol for viol in violations if curve.number in viol.curves]
        kinds = tuple(dict.fromkeys(viol.kind for viol in hits))
        worst = max([curve.worst_use] + [viol.use for viol in hits])
        finished.append(replace(curve, violations=kinds, worst_use=worst,
                                brake_ok=BRAKE_REACH not in kinds))
    return CheckReport(
        geometry=geometry, speed_kind=kind, speed_source=speed_source, speed_mps=v,
        accel_mps2=np.asarray(accel, dtype=float), limit_speed_mps=np.sqrt(ceiling_b),
        brake_reach_mps=v_reach, use=use, curves=tuple(finished), violations=violations,
        design=design, limits=limits, constraints=used, settings=settings, tolerance=tolerance)


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


def _curve_check(c: int, nodes: np.ndarray, j: int, radius: float, problem: SpeedProblem,
                 geometry: Geometry, v: np.ndarray, b: np.ndarray, use: dict,
                 ceiling_b: np.ndarray, a_brake: float,
                 design: DesignCriterion | None) -> CurveCheck:
    """Per-curve figures (violations and worst use are filled in by the caller)."""
    lim = problem.limits
    g = lim.gravity_mps2
    s = geometry.station_m
    closed = geometry.closed
    m = s.size - 1 if closed else s.size
    e = float(problem.sin_bank[j] / problem.cos_bank[j])
    a_lat = float(problem.felt_lateral(b[j], j))
    f = float(side_friction_demand(v[j], radius, e, g))
    limit_v = math.sqrt(ceiling_b[j])
    first = int(nodes[0])
    approach = (first - 1) % m if closed else max(first - 1, 0)
    available = float(s[j] - s[approach])
    if available < 0.0:
        available += geometry.length_m
    v_app = float(v[approach])
    needed = max(v_app * v_app - limit_v * limit_v, 0.0) / (2.0 * a_brake)
    peaks = [float(np.max(use[name][nodes])) for name in ("friction_ellipse", "comfort_ellipse",
                                                          "power", "jerk") if name in use]
    return CurveCheck(
        number=c + 1, start_m=float(s[first]), end_m=float(s[nodes[-1]]),
        length_m=extent_m(nodes, geometry),
        direction="left" if geometry.curvature_1pm[j] > 0 else "right",
        min_radius_m=radius, tightest_station_m=float(s[j]), superelevation=e,
        speed_mps=float(v[j]), lateral_accel_mps2=a_lat, side_friction_demand=f,
        friction_margin=lim.mu_lat - f, comfort_margin_mps2=lim.max_lateral_accel_mps2 - a_lat,
        friction_use=float(np.max(use["friction_ellipse"][nodes])),
        comfort_use=float(np.max(use["comfort_ellipse"][nodes])),
        limit_speed_mps=limit_v, approach_speed_mps=v_app,
        braking_distance_needed_m=needed, braking_distance_available_m=available,
        brake_ok=True, meets_min_radius=None if design is None else design.passes(radius),
        advisory=ball_bank_advisory(radius, e, g), violations=(), worst_use=max(peaks))
