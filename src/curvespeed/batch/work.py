"""What a batch task does with one road: the same library calls as ``plan`` and ``check``.

Each function returns ``(files, summary, curves, passed)``: the output files' text by name, the
road's summary row, its curves for the curves layer and whether every limit holds.
"""

from __future__ import annotations

import numpy as np

from ..limits import validate_limits


def road_limits(spec, settings):
    """The settings' limits with the road's friction attribute (and, when planning, its speed as
    the top speed) in place; validated, naming the road."""
    limits = settings.limits
    changes = {}
    if spec.friction is not None:
        changes["friction_coefficient"] = spec.friction
    if spec.speed_mps is not None and settings.command == "plan":
        changes["max_speed_mps"] = spec.speed_mps
    if changes:
        limits = limits.replace(**changes)
        validate_limits(limits, f"{settings.origin} with the attributes of {spec.source}",
                        warn=False)
    return limits


def road_geometry(spec, settings):
    """The road's geometry and the constraints it is planned or checked with: the settings'
    own, over an OpenDRIVE road's speed records and superelevation (as ``plan ROAD.xodr``)."""
    if spec.road is not None:
        from ..io.opendrive_path import read_opendrive
        from ..limits import RouteConstraints, overlay_constraints

        g = settings.geometry
        path = read_opendrive(spec.path, [spec.road], None, g.get("spacing_m", 1.0),
                              g.get("closed"), g.get("use_elevation", True))
        road = RouteConstraints(zones=path.zones, superelevation=path.superelevation)
        return path.geometry, overlay_constraints(road, settings.constraints)
    from ..geometry import build_geometry

    return build_geometry(spec.to_route(), **settings.geometry), settings.constraints


def plan_road(spec, settings, digest: str):
    """Plan the road as ``curvespeed plan`` does; judge the planned speeds for the curves layer."""
    from ..check import SpeedKind, check_speeds
    from ..io.meta_json import meta_json_text, profile_meta
    from ..io.profile_csv import profile_csv_text
    from ..planner import default_solver, plan_profile
    from ..solvers import QPBackend, SolverKind

    limits = road_limits(spec, settings)
    geo, constraints = road_geometry(spec, settings)
    kind = SolverKind(settings.solver) if settings.solver else default_solver(limits)
    options = None
    if kind is SolverKind.CONVEX:
        from ..solvers.convex import ConvexOptions

        # one thread per task: the workers are the parallelism (the answer does not depend on
        # the thread count; DEVELOPERS.md, Solvers)
        extra = {"qp_backend": QPBackend(settings.qp_backend)} if settings.qp_backend else {}
        options = ConvexOptions(comfort_weight=settings.comfort_weight, threads=1, **extra)
    profile = plan_profile(geo, limits, constraints, kind, options, warn_limits=False)
    meta = profile_meta(profile, limits, constraints, spec.path)
    meta["route"]["file"] = spec.source
    meta["batch"] = {"route_id": spec.route_id, "input_sha256": digest}
    files = {f"{spec.route_id}.csv": profile_csv_text(profile),
             f"{spec.route_id}.meta.json": meta_json_text(meta)}
    report = check_speeds(geo, limits, constraints, profile.speed_mps,
                          kind=SpeedKind.TRACE, speed_source="the planned profile",
                          settings=_curve_settings(settings))
    v = profile.speed_mps
    summary = {**_geometry_row(spec, geo), "time_s": profile.total_time_s,
               "mean_speed_mps": geo.length_m / profile.total_time_s,
               "max_speed_mps": float(v.max()), "solver": profile.solve.solver,
               **_report_row(report)}
    return files, summary, road_curves(spec, report), report.ok


def check_road(spec, settings, digest: str):
    """Check the road's speed (its attribute, held everywhere) or its zones, as ``check`` does."""
    from ..check import SpeedKind, check_speeds, zone_speeds_mps
    from ..io.check_report import check_json_text, curve_csv_text
    from ..units import mps_to_kmh

    limits = road_limits(spec, settings)
    geo, constraints = road_geometry(spec, settings)
    if spec.speed_mps is not None:
        v = spec.speed_mps
        speeds, kind = [v] * geo.n_nodes, SpeedKind.CONSTANT
        label = f"constant {mps_to_kmh(v):g} km/h ({v:.2f} m/s) from the road's speed field"
    else:
        speeds, kind = zone_speeds_mps(geo, limits, constraints), SpeedKind.ZONES
        label = f"top speed {limits.max_speed_mps:g} m/s of {settings.origin}"
    report = check_speeds(geo, limits, constraints, speeds, kind=kind,
                          speed_source=label, design_speed_kmh=settings.design_speed_kmh,
                          e_max=settings.e_max, settings=_curve_settings(settings))
    files = {f"{spec.route_id}.json": check_json_text(report, spec.source),
             f"{spec.route_id}.csv": curve_csv_text(report)}
    summary = {**_geometry_row(spec, geo), "checked_speed_mps": spec.speed_mps,
               **_report_row(report)}
    return files, summary, road_curves(spec, report), report.ok


def _curve_settings(settings):
    from ..check import CurveSettings

    if settings.curve_radius_m is None:
        return CurveSettings()
    return CurveSettings(radius_m=settings.curve_radius_m)


def _geometry_row(spec, geo) -> dict:
    return {"length_m": geo.length_m, "stations": geo.n_nodes, "closed": geo.closed}


def _report_row(report) -> dict:
    failing = [c for c in report.curves if not c.passed]
    worst = max((c.worst_use for c in report.curves), default=None)
    return {"curves": len(report.curves), "curves_failing": len(failing),
            "worst_curve_use": worst, "violations": len(report.violations),
            "result": "pass" if report.ok else "fail"}


def road_curves(spec, report) -> list[dict]:
    """One entry per curve: its attributes and positions (WGS84 longitude, latitude)."""
    geo = report.geometry
    out = []
    for c in report.curves:
        nodes = _curve_nodes(geo, c.start_m, c.end_m)
        lonlat = None
        if geo.projection is not None:
            lat, lon = geo.projection.to_latlon(geo.x_m[nodes], geo.y_m[nodes])
            lonlat = np.column_stack([lon, lat]).tolist()
        out.append({"route_id": spec.route_id, "curve": c.number, "start_m": c.start_m,
                    "apex_m": c.tightest_station_m, "end_m": c.end_m,
                    "direction": c.direction, "min_radius_m": c.min_radius_m,
                    "min_radius_low_m": c.min_radius_low_m, "speed_mps": c.speed_mps,
                    "limit_speed_mps": c.limit_speed_mps,
                    "advisory_speed_kmh": _advisory(c.advisory, "kmh"),
                    "advisory_speed_mph": _advisory(c.advisory, "mph"),
                    "worst_use": c.worst_use, "verdict": c.verdict.value, "lonlat": lonlat})
    return out


def _advisory(advisory, unit: str):
    value = getattr(advisory, unit)
    return None if value is None else float(value)


def _curve_nodes(geo, start_m: float, end_m: float) -> np.ndarray:
    """Node indices from ``start_m`` to ``end_m`` (across the seam of a loop when end < start)."""
    first = int(round(start_m / geo.spacing_m))
    last = int(round(end_m / geo.spacing_m))
    if last >= first:
        return np.arange(first, last + 1)
    n = geo.n_nodes - 1                    # node n is node 0 again on a loop
    return np.concatenate([np.arange(first, n), np.arange(0, last + 1)])
