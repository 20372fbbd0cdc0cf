"""``curvespeed check``: audit speeds along a route against friction, comfort and design criteria.

Exit status: 0 every speed within every limit, 1 at least one violation, 2 bad input (nothing
written).
"""

from __future__ import annotations

import sys

import click

from ._common import (EXIT_OK, EXIT_VIOLATIONS, FINITE, echo, geometry_options, handle_errors,
                      radius_cell, register_drives)
from ._limits import (friction_lines, limit_override_options, limits_and_geometry,
                      section_options, snapped_lines, zone_options, zone_positions)


@click.command()
@click.argument("route_file", type=click.Path())
@click.option("-l", "--limits", "limits_file", type=click.Path(), default=None,
              help="Limits file (TOML). Without it, built-in passenger-car comfort limits.")
@click.option("--speeds", "speeds_file", type=click.Path(), default=None,
              help="Speeds to check: a CSV with station_m,speed_mps (e.g. a profile from "
                   "'plan') or a GPX track with time stamps.")
@click.option("--speed-kmh", type=FINITE, default=None, metavar="V",
              help="Check one constant speed everywhere, km/h.")
@click.option("--zones-only", is_flag=True,
              help="Check the speed zones of the limits (top speed outside them); the default "
                   "when neither --speeds nor --speed-kmh is given.")
@click.option("--design-speed-kmh", type=FINITE, default=None, metavar="V",
              help="Design speed for the AASHTO minimum-radius check, km/h (20-120).")
@click.option("--emax", "e_max", type=FINITE, default=0.08, show_default=True, metavar="E",
              help="Maximum superelevation rate for the minimum-radius check (0.08 = 8 %).")
@click.option("--trace-noise", "trace_noise_m", type=FINITE, default=None, metavar="M",
              help="GPS position noise of a GPX speeds track, metres; sets its smoothing "
                   "(default 2).")
@click.option("--curve-radius", "curve_radius_m", type=FINITE, default=None, metavar="M",
              help="Stations with a radius below this belong to a curve, metres (default 1000).")
@click.option("--json", "json_file", type=click.Path(), default=None,
              help="Write the full result (SI units) to this JSON file.")
@click.option("--csv", "csv_file", type=click.Path(), default=None,
              help="Write the per-curve table to this CSV file.")
@click.option("--report", "report_file", type=click.Path(), default=None,
              help="Write a self-contained HTML report (plan view with numbered curves, speed, "
                   "utilisation, curve table, provenance); prints on A4.")
@click.option("--force", is_flag=True, help="Replace output files that exist.")
@geometry_options
@limit_override_options
@zone_options
@handle_errors
def check(route_file, limits_file, speeds_file, speed_kmh, zones_only, design_speed_kmh, e_max,
          trace_noise_m, curve_radius_m, json_file, csv_file, report_file, force, spacing_m,
          position_noise_m, elevation_noise_m, use_elevation, closed, part,
          drives, all_tracks, roads, lane, zones, zones_xy, zones_latlon, superelevations,
          superelevations_xy, superelevations_latlon, friction_sections, friction_sections_xy,
          friction_sections_latlon, **overrides):
    """Check speeds along ROUTE_FILE against friction, comfort and road-design criteria.

    Exit status 0: all within limits; 1: at least one violation; 2: bad input. The numbers
    support engineering judgment: advisory speeds are set by the road authority under local
    codes and licensed practice.
    """
    import math

    from ..errors import LimitsError
    from ..io.atomic import OutputFiles
    from ..limits import MAX_SPEED_MPS
    from ..units import kmh_to_mps, mps_to_kmh

    chosen = [name for name, given in (("--speeds", speeds_file is not None),
                                       ("--speed-kmh", speed_kmh is not None),
                                       ("--zones-only", zones_only)) if given]
    if len(chosen) > 1:
        raise click.UsageError(f"give only one of --speeds, --speed-kmh, --zones-only (got "
                               f"{' and '.join(chosen)})")
    if speed_kmh is not None and not speed_kmh > 0.0:
        raise LimitsError(f"--speed-kmh {speed_kmh:g}: give a positive speed in km/h")
    if speed_kmh is not None and kmh_to_mps(speed_kmh) > MAX_SPEED_MPS:
        raise LimitsError(f"--speed-kmh {speed_kmh:g} is above {mps_to_kmh(MAX_SPEED_MPS):g} "
                          f"km/h ({MAX_SPEED_MPS:g} m/s), which no road vehicle reaches; check "
                          "the value and its units (km/h)")
    outputs = OutputFiles(force)
    outputs.add_input(route_file, "the route file")
    register_drives(outputs, drives)
    outputs.add_input(limits_file, "the limits file (-l/--limits)")
    outputs.add_input(speeds_file, "the speeds file (--speeds)")
    for path, option in ((json_file, "--json"), (csv_file, "--csv"), (report_file, "--report")):
        if path:
            outputs.add_output(path, option)
    if design_speed_kmh is not None:
        from ..design import design_criterion

        design_criterion(design_speed_kmh, e_max)     # refuse a bad design speed before reading
    if curve_radius_m is not None and not (math.isfinite(curve_radius_m) and curve_radius_m > 0):
        raise LimitsError(f"--curve-radius {curve_radius_m:g}: give a positive radius in metres")

    with outputs:               # every output checked here; written together at the end
        from ._common import check_extensions

        check_extensions((json_file, "--json", "JSON", (".json",)),
                         (csv_file, "--csv", "a CSV table", (".csv",)),
                         (report_file, "--report", "an HTML page", (".html", ".htm")))
        limits, constraints, origin, geo = limits_and_geometry(
            route_file, limits_file, overrides,
            (zones, (), superelevations, None, None),
            (spacing_m, position_noise_m, elevation_noise_m, use_elevation, closed,
             part, drives, all_tracks, roads, lane),
            zone_positions(zones_xy, zones_latlon)
            + section_options(friction_sections, friction_sections_xy, friction_sections_latlon,
                              superelevations_xy, superelevations_latlon), place_stops=False)
        for line in snapped_lines(constraints) + friction_lines(constraints, limits):
            echo(line)
        report = _check(geo, limits, constraints, origin, speeds_file, speed_kmh, trace_noise_m,
                        design_speed_kmh, e_max, curve_radius_m)
        if json_file:
            from ..io.check_report import check_json_text

            outputs.write_text(json_file, check_json_text(report, route_file))
        if csv_file:
            from ..io.check_report import curve_csv_text

            outputs.write_text(csv_file, curve_csv_text(report))
        if report_file:
            from ..io.check_report import check_report_dict
            from ._report import input_files, report_text

            outputs.write_text(report_file, report_text(
                check_report_dict(report, route_file), geo.x_m, geo.y_m, doing="checked",
                files=input_files(("route file", route_file), ("limits file", limits_file),
                                  ("speeds file", speeds_file)),
                solver="none: the speeds were given and checked, not planned"))
        body, verdict = render_report(route_file, report, origin)
        echo(body)
    if outputs.paths:
        echo(f"wrote {' and '.join(str(p) for p in outputs.paths)}")
    echo(verdict)
    sys.exit(EXIT_OK if report.ok else EXIT_VIOLATIONS)


def _check(geo, limits, constraints, origin: str, speeds_file, speed_kmh, trace_noise_m,
           design_speed_kmh, e_max, curve_radius_m):
    """The speeds to check (from the file, the constant or the zones) checked along ``geo``."""
    from ..check import CurveSettings, SpeedKind, check_speeds, zone_speeds_mps
    from ..units import kmh_to_mps

    settings = CurveSettings() if curve_radius_m is None else CurveSettings(radius_m=curve_radius_m)
    if speeds_file is not None:
        from ..io.speed_trace import DEFAULT_TRACE_NOISE_M, read_speed_trace

        noise = DEFAULT_TRACE_NOISE_M if trace_noise_m is None else trace_noise_m
        trace = read_speed_trace(speeds_file, geo, noise_m=noise)
        speeds, kind, label = trace.speed_mps, SpeedKind.TRACE, str(speeds_file)
    elif speed_kmh is not None:
        v = kmh_to_mps(speed_kmh)
        speeds = [v] * geo.n_nodes
        kind, label = SpeedKind.CONSTANT, f"constant {speed_kmh:g} km/h ({v:.2f} m/s)"
    else:
        speeds = zone_speeds_mps(geo, limits, constraints)
        kind = SpeedKind.ZONES
        label = (f"speed zones of {origin} (top speed {limits.max_speed_mps:g} m/s elsewhere)"
                 if constraints.zones else
                 f"top speed {limits.max_speed_mps:g} m/s of {origin} (no speed zones given)")
    return check_speeds(geo, limits, constraints, speeds, kind=kind, speed_source=label,
                        design_speed_kmh=design_speed_kmh, e_max=e_max, settings=settings)


def _num(value, spec: str, width: int) -> str:
    text = "-" if value is None else format(value, spec)
    return text.rjust(width)


#: Marks a curve (or its minimum-radius verdict) that passes on the curvature estimate and fails
#: within its uncertainty.
ON_BOUND_MARK = "*"
ON_BOUND_LEGEND = (f"  {ON_BOUND_MARK} passes on the curvature estimate, fails within its "
                   "uncertainty (the bound covers the true road): counted as a failure")


def render_report(route_file, report, origin: str) -> tuple[str, str]:
    """The terminal report (header, curve table worst first, violations) and the verdict line."""
    geo = report.geometry
    lim = report.limits
    lines = [
        f"route    {route_file}: {geo.length_m:.1f} m, {'closed loop' if geo.closed else 'open'},"
        f" {geo.n_nodes} stations",
        f"limits   {origin}: mu {lim.friction_coefficient:g} (lateral {lim.mu_lat:g}), lateral "
        f"{lim.max_lateral_accel_mps2:g}, accel {lim.max_accel_mps2:g}, decel "
        f"{lim.max_decel_mps2:g} m/s^2, top {lim.max_speed_mps:g} m/s",
        f"speeds   {report.speed_source}",
    ]
    if report.design is not None:
        d = report.design
        lines.append(f"design   {d.design_speed_kmh:g} km/h, e_max {d.e_max:g}, f_max "
                     f"{d.f_max:.3f}: R_min {d.min_radius_m:.1f} m (table "
                     f"{d.table_min_radius_m:.0f} m; {d.source})")
    curves = sorted(report.curves, key=lambda c: (c.passed, -c.worst_use, c.start_m))
    if curves:
        lines.append(f"curves   {len(curves)} (radius below {report.settings.radius_m:g} m), "
                     "worst first. R and advisory speeds: estimate (smallest-largest "
                     "plausible); uses: on the curvature's bound (on the estimate)")
        lines.extend(_curve_table(curves, report.design is not None))
        if report.curves_failing_on_bound():
            lines.append(ON_BOUND_LEGEND)
    else:
        lines.append(f"curves   none (no stretch with a radius below "
                     f"{report.settings.radius_m:g} m)")
    failed = [c for c in curves if not c.passed]
    for c in failed:
        # the worst stretch of each kind (all of them are in the JSON report)
        by_kind: dict[str, list] = {}
        for v in report.violations:
            if c.number in v.curves:
                by_kind.setdefault(v.kind, []).append(v)
        for found in by_kind.values():
            worst = max(found, key=lambda v: v.use)
            more = f" (+{len(found) - 1} more stretch(es))" if len(found) > 1 else ""
            lines.append(f"  curve {c.number}: {worst.message}{more}")
    others = report.other_violations()
    if others:
        lines.append(f"other violations ({len(others)}, away from curves):")
        lines.extend(f"  {v.message}" for v in others)
    return "\n".join(lines), _verdict(report, failed, others)


def _curve_table(curves, design: bool) -> list[str]:
    """Header and one row per curve of the terminal table."""
    from ..check import CurveVerdict

    def radius(c) -> str:
        return radius_cell(low_m=c.min_radius_low_m, estimate_m=c.min_radius_m,
                           high_m=c.min_radius_high_m)

    def advisory(c, unit: str) -> str:
        ends = [getattr(a, unit) for a in (c.advisory, c.advisory_low, c.advisory_high)]
        est, low, high = ("-" if x is None else str(x) for x in ends)
        return f"{est} ({low}-{high})"

    def use(judged: float, estimate: float) -> str:
        return f"{100 * judged:.1f} ({100 * estimate:.1f})"

    def min_radius(c) -> str:
        if c.meets_min_radius_low:
            return "ok"
        return "SHORT" if not c.meets_min_radius else "SHORT" + ON_BOUND_MARK

    results = {CurveVerdict.PASS: "PASS", CurveVerdict.FAIL: "FAIL",
               CurveVerdict.FAILS_ON_BOUND: "FAIL" + ON_BOUND_MARK}
    header = (f"{'#':>3}  {'station range (m)':>19}  {'R (m)':>23}  {'dir':>5}  {'e':>6}  "
              f"{'v (m/s)':>7}  {'v lim (m/s)':>11}  {'a_lat (m/s^2)':>13}  {'f':>6}  "
              f"{'grip use (%)':>14}  {'comfort use (%)':>15}  {'brake':>5}")
    if design:
        header += f"  {'R_min':>6}"
    header += f"  {'adv (mph)':>12}  {'adv (km/h)':>15}  result"
    rows = [header]
    for c in curves:
        row = (f"{c.number:>3}  {c.start_m:8.1f} - {c.end_m:8.1f}  {radius(c):>23}  "
               f"{c.direction:>5}  {c.superelevation:6.3f}  {c.speed_mps:7.2f}  "
               f"{c.limit_speed_mps:11.2f}  {c.lateral_accel_mps2:13.2f}  "
               f"{c.side_friction_demand:6.3f}  "
               f"{use(c.friction_use, c.friction_use_estimate):>14}  "
               f"{use(c.comfort_use, c.comfort_use_estimate):>15}  "
               f"{'ok' if c.brake_ok else 'LATE':>5}")
        if design:
            row += f"  {min_radius(c):>6}"
        row += (f"  {advisory(c, 'mph'):>12}  {advisory(c, 'kmh'):>15}  "
                f"{results[c.verdict]}")
        rows.append(row)
    return rows


def _verdict(report, failed, others) -> str:
    n = len(report.curves)
    if report.ok:
        peak = report.use
        grip = 100 * float(peak["friction_ellipse"].max())
        comfort = 100 * float(peak["comfort_ellipse"].max())
        return (f"PASS: all {report.geometry.n_nodes} stations and {n} curve(s) within the "
                f"limits (peak grip use {grip:.1f} %, comfort use {comfort:.1f} %)")
    worst = report.worst_violation()
    parts = []
    if failed:
        on_bound = len(report.curves_failing_on_bound())
        only = f" ({on_bound} only within the curvature's uncertainty)" if on_bound else ""
        parts.append(f"{len(failed)} of {n} curve(s) fail{only}")
    if others:
        parts.append(f"{len(others)} other violation(s)")
    return (f"FAIL: {' and '.join(parts)}; worst: {worst.kind.replace('_', ' ')} at station "
            f"{worst.station_m:.1f} m ({100 * (worst.use - 1):.1f} % over)")
