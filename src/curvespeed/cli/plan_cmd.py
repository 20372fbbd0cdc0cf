"""``curvespeed plan``: the fastest speed profile along a route within the limits."""

from __future__ import annotations

import click

from ..solvers import QPBackend, SolverKind
from ._common import (FINITE, check_extensions, echo, geometry_options, handle_errors,
                      radius_cell, register_drives)
from ._limits import constraint_options, limit_override_options, limits_and_geometry


@click.command()
@click.argument("route_file", type=click.Path())
@click.option("-l", "--limits", "limits_file", type=click.Path(), default=None,
              help="Limits file (TOML). Without it, built-in passenger-car comfort limits.")
@click.option("-o", "--output", type=click.Path(), default=None,
              help="Write the profile to this CSV file (and a .meta.json sidecar next to it).")
@click.option("--meta", "meta_file", type=click.Path(), default=None,
              help="Where to write the JSON sidecar (default: next to the profile).")
@click.option("--solver", type=click.Choice([k.value for k in SolverKind]), default=None,
              help="'convex' (default when a jerk bound, longitudinal or lateral, is set): "
                   "minimum time within the jerk bounds; 'envelope' (default otherwise): exact "
                   "forward-backward method, no jerk bound; 'convex-reference': the convex "
                   "program modelled in cvxpy (slow, for cross-checks).")
@click.option("--qp-backend", type=click.Choice([b.value for b in QPBackend]), default=None,
              help="Convex solver: what solves each QP. 'banded' (default): the banded "
                   "interior-point method, handing any QP it cannot solve to Clarabel (noted in "
                   "the sidecar); 'clarabel': Clarabel alone.")
@click.option("--comfort-weight", type=FINITE, default=0.0, show_default=True, metavar="W",
              help="Convex solver: weight on squared changes of acceleration, s/(m/s^2)^2; "
                   "0 is pure minimum time.")
@click.option("--plot", "plot_file", type=click.Path(), default=None,
              help="Also draw the overview figure (.png, .svg or .pdf) of the profile.")
@click.option("--report", "report_file", type=click.Path(), default=None,
              help="Also write a self-contained HTML report (plan view with numbered curves, "
                   "speed, utilisation, curve table, provenance); prints on A4.")
@click.option("--standing", type=click.Choice(["start", "finish"]), default=None,
              help="On a loop: plan a standing start (from rest up to the flying lap's start "
                   "speed) or a standing finish (from it down to rest) over one lap, the loop "
                   "opened at its start: the lap `export --launch-lap`/`--finish-lap` joins to "
                   "the flying lap.")
@click.option("--force", is_flag=True, help="Replace output files that exist.")
@geometry_options
@limit_override_options
@constraint_options
@handle_errors
def plan(route_file, limits_file, output, meta_file, solver, qp_backend, comfort_weight, plot_file,
         report_file, standing, force,
         spacing_m, position_noise_m, elevation_noise_m, use_elevation, closed, part,
         drives, all_tracks, roads, lane, zones, zones_xy, zones_latlon, stops, stops_xy,
         stops_latlon, superelevations, start_speed, end_speed, superelevations_xy,
         superelevations_latlon, friction_sections, friction_sections_xy,
         friction_sections_latlon, **overrides):
    """Plan the fastest speed profile along ROUTE_FILE within the limits.

    The profile is an engineering aid: speeds on public roads and advisory signs follow local
    codes and licensed engineering practice.
    """
    from ..io.atomic import OutputFiles
    from ._limits import (friction_lines, section_options, snapped_lines, stop_positions,
                          zone_positions)

    positions = (stop_positions(stops_xy, stops_latlon) + zone_positions(zones_xy, zones_latlon)
                 + section_options(friction_sections, friction_sections_xy,
                                   friction_sections_latlon, superelevations_xy,
                                   superelevations_latlon))
    if comfort_weight < 0:
        raise click.BadParameter("must be zero or positive", param_hint="--comfort-weight")
    if standing and (closed is False or start_speed is not None or end_speed is not None):
        raise click.UsageError("--standing plans a lap of a loop from or to rest itself: leave "
                               "out --open, --start-speed and --end-speed")
    outputs = OutputFiles(force)
    outputs.add_input(route_file, "the route file")
    register_drives(outputs, drives)
    outputs.add_input(limits_file, "the limits file (-l/--limits)")
    meta_path = _register_outputs(outputs, output, meta_file, plot_file, report_file)
    with outputs:               # every output checked here; written together at the end
        check_extensions((output, "-o", "the profile as CSV", (".csv",)),
                         (meta_file, "--meta", "the sidecar as JSON", (".json",)),
                         (report_file, "--report", "an HTML page", (".html", ".htm")))
        route_args = (spacing_m, position_noise_m, elevation_noise_m, use_elevation, closed,
                      part, drives, all_tracks, roads, lane)
        limits, constraints, origin, geo = limits_and_geometry(
            route_file, limits_file, overrides,
            (zones, stops, superelevations, start_speed, end_speed), route_args, positions)
        if standing and not geo.closed:
            raise click.UsageError(f"{route_file} is not a closed route: a standing start or "
                                   "finish is a lap of a loop (--closed treats the route as one)")
        for line in snapped_lines(constraints) + friction_lines(constraints, limits):
            echo(line)

        from ..planner import plan_profile

        kind, options = _solver_choice(solver, comfort_weight, qp_backend)
        # resolve_limits validated the limits and warned, naming the file or the command line
        profile = plan_profile(geo, limits, constraints, kind, options, warn_limits=False)
        if standing:
            constraints, geo, profile = _standing_lap(
                standing, profile, (route_file, limits_file, overrides),
                (zones, stops, superelevations), route_args, positions, (kind, options))
        echo(summarise(route_file, profile, limits, origin))
        if output:
            from ..io.meta_json import meta_json_text, profile_meta
            from ..io.profile_csv import profile_csv_text

            outputs.write_text(output, profile_csv_text(profile))
            outputs.write_text(meta_path, meta_json_text(
                profile_meta(profile, limits, constraints, route_file)))
        if plot_file or report_file:
            _figure_and_report(outputs, plot_file, report_file, route_file, limits_file, geo,
                               limits, constraints, profile)
    if output:
        echo(f"wrote {output} and {meta_path}")
    if plot_file:
        echo(f"drew {plot_file}")
    if report_file:
        echo(f"wrote the report {report_file}")


def _register_outputs(outputs, output, meta_file, plot_file, report_file):
    """Name every file ``plan`` writes to ``outputs`` (checked before anything is computed);
    returns the sidecar's path (None without ``-o``)."""
    from ..io.meta_json import default_meta_path

    meta_path = None
    if output:
        outputs.add_output(output, "-o/--output")
        meta_path = meta_file or default_meta_path(output)
        outputs.add_output(meta_path, "--meta" if meta_file else
                           f"the sidecar (named after -o: {meta_path})")
    elif meta_file:
        raise click.UsageError("--meta needs -o/--output (the sidecar describes a written profile)")
    if plot_file:
        from ..plots import figure_format

        figure_format(plot_file)
        outputs.add_output(plot_file, "--plot")
    if report_file:
        outputs.add_output(report_file, "--report")
    return meta_path


def _solver_choice(solver, comfort_weight, qp_backend):
    """``(SolverKind or None, ConvexOptions or None)`` from the solver options."""
    kind = SolverKind(solver) if solver else None
    if not (comfort_weight or qp_backend):
        return kind, None
    from ..solvers.convex import ConvexOptions

    return kind, ConvexOptions(comfort_weight=comfort_weight,
                               **({"qp_backend": QPBackend(qp_backend)} if qp_backend else {}))


def _standing_lap(standing, flying, sources, constraint_args, route_args, positions, solver):
    """The loop opened at its start and planned from rest up to the flying lap's start speed
    (``standing == "start"``) or from it down to rest: (constraints, geometry, profile)."""
    import warnings

    from ..planner import plan_profile

    speed = float(flying.speed_mps[0])
    ends = (0.0, speed) if standing == "start" else (speed, 0.0)
    opened = route_args[:4] + (False,) + route_args[5:]
    with warnings.catch_warnings():     # the same limits, already warned about once
        warnings.simplefilter("ignore")
        limits, constraints, _, geo = limits_and_geometry(*sources, constraint_args + ends,
                                                          opened, positions)
    profile = plan_profile(geo, limits, constraints, *solver, warn_limits=False)
    what = "from rest up to" if standing == "start" else "down to rest from"
    echo(f"standing {standing}: the loop opened at its start, {what} {speed:.6f} m/s, the "
         "flying lap's start speed")
    return constraints, geo, profile


def _figure_and_report(outputs, plot_file, report_file, route_file, limits_file, geo, limits,
                       constraints, profile) -> None:
    """The overview figure and the HTML report: the profile checked along its route once."""
    from ..io.check_report import check_report_dict
    from ..io.meta_json import json_safe
    from ._report import check_of_plan

    checked = check_report_dict(check_of_plan(geo, limits, constraints, profile), route_file)
    if plot_file:
        from ..plots import figure_format, overview_bytes

        outputs.write_bytes(plot_file, overview_bytes(
            profile, figure_format(plot_file), limits=limits, constraints=constraints,
            check=checked))
    if report_file:
        # the report states what the plan was made with: its stops and end speeds too (check
        # itself judges zones and superelevation only)
        checked = dict(checked, constraints=json_safe(constraints.to_dict()))
        _write_report(outputs, report_file, route_file, limits_file, geo, profile, checked)


def _write_report(outputs, report_file, route_file, limits_file, geo, profile, checked) -> None:
    """The HTML report of the plan, with provenance."""
    from ._report import input_files, report_text

    solve = profile.solve
    solver = (f"{solve.solver}: {solve.status.value}, {solve.iterations} iteration(s)"
              + "".join(f"; {note}" for note in solve.notes))
    outputs.write_text(report_file, report_text(
        checked, geo.x_m, geo.y_m, doing="planned",
        files=input_files(("route file", route_file), ("limits file", limits_file)),
        solver=solver))


def summarise(route_file, profile, limits, origin: str, max_curves: int = 8) -> str:
    """Short human summary: length, time, speeds, and the curves that limit the profile."""
    from ..units import mps_to_kmh

    geo = profile.geometry
    v = profile.speed_mps
    mean = geo.length_m / profile.total_time_s
    lines = [
        f"route    {route_file}: {geo.length_m:.1f} m, {'closed loop' if geo.closed else 'open'},"
        f" {geo.n_nodes} stations",
        f"limits   {origin}: mu {limits.friction_coefficient:g}, lateral "
        f"{limits.max_lateral_accel_mps2:g}, accel {limits.max_accel_mps2:g}, decel "
        f"{limits.max_decel_mps2:g} m/s^2, top {limits.max_speed_mps:g} m/s"
        + ("" if limits.max_jerk_mps3 is None else f", jerk {limits.max_jerk_mps3:g} m/s^3")
        + ("" if limits.max_lateral_jerk_mps3 is None
           else f", lateral jerk {limits.max_lateral_jerk_mps3:g} m/s^3"),
        f"solver   {profile.solve.solver}: {profile.solve.status.value}, "
        f"{profile.solve.iterations} iteration(s), {profile.solve.solve_time_s:.3f} s",
        f"time     {profile.total_time_s:.1f} s; mean {mean:.2f} m/s ({mps_to_kmh(mean):.1f} km/h),"
        f" top {v.max():.2f} m/s ({mps_to_kmh(v.max()):.1f} km/h)"
        + ("" if not profile.time_gap_to_envelope else
           f"; {100 * profile.time_gap_to_envelope:.2f} % over the jerk-free envelope"),
        f"peaks    accel {profile.extremes['accel_mps2']:.2f}, decel "
        f"{profile.extremes['decel_mps2']:.2f} m/s^2; lateral {_lateral_peaks(profile, limits)};"
        f" jerk {profile.extremes['jerk_mps3']:.2f}, lateral jerk "
        f"{profile.extremes['lateral_jerk_mps3']:.2f} m/s^3",
    ]
    caution = noise_caution(geo)
    if caution:
        lines.append(caution)
    return "\n".join(lines + _curve_table(profile, max_curves))


def _curve_table(profile, max_curves: int) -> list[str]:
    """The slowest ``max_curves`` curves where a lateral limit binds, in station order: range,
    smallest radius (``estimate (low-high)`` where the fit leaves a range; the plan holds the
    low end), speed and what sets it."""
    import numpy as np

    from ..check import find_curves
    from ..check.radii import curvature_ends
    from ..units import mps_to_kmh

    geo = profile.geometry
    lateral = np.isin(profile.binding, ["lateral_comfort", "lateral_grip", "lateral_jerk"])
    ends = curvature_ends(geo)
    stretches = [_curve_row(profile, nodes, lateral[nodes], ends) for nodes in find_curves(geo)
                 if lateral[nodes].any()]
    if not stretches:
        return ["no curve limits the speed (top speed, zones and stops do)"]
    slowest = sorted(sorted(stretches, key=lambda r: r[:3])[:max_curves], key=lambda r: r[1])
    ranges = "" if ends.exact else "; radius: estimate (plausible range), planned at the low end"
    cells = [radius_cell(low_m=low, estimate_m=estimate, high_m=high, compact=True)
             for _, _, _, (low, estimate, high), _ in slowest]
    width = max(14, *(len(c) for c in cells))
    lines = [f"curves where a lateral limit binds ({len(stretches)}; the {len(slowest)} "
             f"slowest{ranges}):",
             f"   station range (m)  {'min radius (m)':>{width}}  speed (m/s)  speed (km/h)  "
             "limited by"]
    for (vk, a, b, _, what), cell in zip(slowest, cells):
        lines.append(f"   {a:8.1f} - {b:8.1f}  {cell:>{width}}  {vk:11.2f}  "
                     f"{mps_to_kmh(vk):12.1f}  {what}")
    return lines


#: Position noise (per coordinate, metres) from which a route is treated as logged by a
#: receiver that is not survey grade: RTK scatters by centimetres, a consumer receiver by
#: decimetres to metres (common practice).
NOISY_POSITIONS_M = 0.2


def noise_caution(geo) -> str | None:
    """A caution line for a route whose points scatter like a consumer receiver's, else None.

    Such a receiver also drifts by metres, which the points cannot show: measured on simulated
    logs of invented design roads (``benchmarks/log_sweep.py``, 1-20 Hz, six draws, 95 plans),
    plans from them used up to 1.14 of the jerk bound on the exact road (the fitted path's
    length per metre off by 1-6 % locally, most at a start from a standstill whose fixes
    wandered), 1.06 of the comfort ellipse there, and 1.26 of a lateral jerk bound through a
    clothoid shorter than the smoothing could resolve; most plans kept the lateral limits
    within 1.01."""
    noise = ((geo.provenance or {}).get("position_noise") or {}).get("used_m")
    if noise is None or noise < NOISY_POSITIONS_M:
        return None
    return (f"caution  the points scatter {noise:.2f} m: a receiver this noisy also drifts by "
            "metres, which the points cannot show, and the road can then curve and stretch a "
            "few percent more than its fitted path (simulated logs: up to 14 % over the jerk "
            "bound, 6 % over the comfort ellipse leaving a standstill, 26 % over a lateral "
            "jerk bound); check the route against a survey before relying on these speeds")


def _lateral_peaks(profile, limits) -> str:
    """The lateral peaks, each said with its quantity: the path's ``kappa v^2`` and the
    acceleration felt in the road plane (``kappa v^2 cos(bank) - g sin(bank)``, what the
    lateral cap bounds); they differ on banked curves."""
    kinematic = profile.extremes["lateral_accel_mps2"]
    felt = profile.usage["lateral_comfort"] * limits.max_lateral_accel_mps2
    return (f"kappa v^2 {kinematic:.2f}, felt in the road plane {felt:.2f} m/s^2 (the cap "
            f"{limits.max_lateral_accel_mps2:g} bounds the felt value)")


def _curve_row(profile, nodes, lateral, ends) -> tuple:
    """``(speed, first station, last station, radius, limited by)`` of one curve: its slowest
    speed, its smallest radius (``(low end, estimate, high end)`` from the curvature ``ends``,
    :func:`curvespeed.check.radii.smallest_radii`: the plan holds the low end) and what sets
    the speed. Where the curve is driven slower than its lateral limit allows (braking into a
    stop, starting from one, a zone), that cause is named, not the lateral limit."""
    import numpy as np

    from ..check.radii import smallest_radii

    v, s, binding = profile.speed_mps, profile.geometry.station_m, profile.binding
    radius = smallest_radii(ends, nodes)
    bound = nodes[lateral]
    k = int(bound[np.argmin(v[bound])])
    slowest = int(nodes[np.argmin(v[nodes])])
    cause = _stop_cause(v, s, slowest)
    if cause is None and binding[slowest] == "zone" and v[slowest] < v[k] * (1.0 - 1e-3):
        cause = "speed zone"
    if cause is None:
        return v[k], s[nodes[0]], s[nodes[-1]], radius, str(binding[k]).replace("_", " ")
    return v[slowest], s[nodes[0]], s[nodes[-1]], radius, cause


def _stop_cause(v, s, k: int) -> str | None:
    """The standstill node ``k`` is at, brakes toward or starts from (speed falling, or
    rising, all the way to it), said; None when there is none. A lateral limit may bind on the
    way (braking in a curve changes the lateral acceleration), but the stop sets the speed."""
    import numpy as np

    if v[k] <= 0.0:
        return f"stop at {s[k]:.1f} m"
    rest = np.flatnonzero(v <= 0.0)
    ahead, behind = rest[rest > k], rest[rest < k]
    if ahead.size and np.all(np.diff(v[k:ahead[0] + 1]) <= 0.0):
        return f"braking for the stop at {s[ahead[0]]:.1f} m"
    if behind.size and np.all(np.diff(v[behind[-1]:k + 1]) >= 0.0):
        return f"starting from the stop at {s[behind[-1]]:.1f} m"
    return None
