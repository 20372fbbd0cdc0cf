"""``curvespeed route``: read a route, resample it, summarise it, optionally write the geometry."""

from __future__ import annotations

import click

from ._common import (describe_fit, echo, geometry_options, handle_errors, load_geometry,
                      register_drives)


@click.command()
@click.argument("route_file", type=click.Path())
@geometry_options
@click.option("-o", "--output", type=click.Path(), default=None,
              help="Write the resampled geometry to this CSV file.")
@click.option("--force", is_flag=True, help="Replace the output file if it exists.")
@handle_errors
def route(route_file, spacing_m, position_noise_m, elevation_noise_m, use_elevation, closed,
          part, drives, all_tracks, roads, lane, output, force):
    """Read ROUTE_FILE (CSV, GeoJSON, GPX or OpenDRIVE), resample it and print a summary."""
    from ..io.atomic import OutputFiles

    outputs = OutputFiles(force)
    outputs.add_input(route_file, "the route file")
    register_drives(outputs, drives)
    if output:
        outputs.add_output(output, "-o/--output")
    with outputs:               # the output checked here; written at the end
        if output:              # after the check that it names no input (a .gpx drive)
            from ._common import check_extension

            check_extension(output, "-o", "the resampled route as CSV", (".csv",))
        rt, geo = load_geometry(route_file, spacing_m, position_noise_m, elevation_noise_m,
                                use_elevation, closed, part, drives, all_tracks, roads,
                                lane)
        echo(_summary(route_file, rt, geo))
        if output:
            from ..io.geometry_csv import geometry_csv_text

            outputs.write_text(output, geometry_csv_text(geo))
    if output:
        echo(f"wrote          {output}")


#: Radii above this are reported as straight, m: at 110 km/h a 100 km radius asks 0.0094 m/s^2
#: of lateral acceleration, nothing a speed plan notices; a straight line's fitted curvature is
#: round-off (a line along the equator read 9e32 m).
STRAIGHT_RADIUS_M = 1e5


def _bound_line(geo, min_radius_m: float) -> list[str]:
    """The tightest radius of the curvature bound, where it is tighter than the estimate's
    smallest radius by more than 2 %: what plans and checks hold, and where."""
    bound = geo.curvature_bound_1pm
    if bound is None or not bound.size or float(bound.max()) <= 0.0:
        return []
    k = int(bound.argmax())
    radius = 1.0 / float(bound[k])
    if radius >= 0.98 * min_radius_m or radius > STRAIGHT_RADIUS_M:
        return []
    return [f"bound radius   {radius:.1f} m at station {geo.station_m[k]:.1f} m (the tightest "
            "the points do not rule out; plans and checks hold it)"]


def _summary(route_file, rt, geo) -> str:
    """Length, stations, tightest radius, turning and elevation of the resampled route."""
    from ..geometry import summarise_geometry

    summary = summarise_geometry(geo)
    radius = (f"none (straight: no radius under {STRAIGHT_RADIUS_M / 1000:g} km)"
              if summary["min_radius_m"] > STRAIGHT_RADIUS_M else
              f"{summary['min_radius_m']:.1f} m at station {summary['min_radius_station_m']:.1f} m")
    lines = [f"route          {route_file} ({geo.name})"]
    if hasattr(rt, "n_points"):
        lines.append(f"points read    {rt.n_points}" + (
            f" (latitude/longitude, projected to a local {rt.projection.description})"
            if rt.is_geographic else ""))
    else:
        lines.extend(_road_lines(rt))
    lines += [
        f"length         {summary['length_m']:.1f} m "
        f"({'closed loop' if summary['closed'] else 'open'})",
        f"stations       {summary['n_nodes']} at {summary['spacing_m']:.4g} m spacing",
        f"min radius     {radius}",
        *_bound_line(geo, summary["min_radius_m"]),
        f"total turning  {summary['total_turning_deg']:.1f} degrees",
    ]
    lines.extend(describe_fit(geo.provenance) if "points_read" in geo.provenance else [])
    if summary["min_elevation_m"] is not None:
        lines.append(f"elevation      {summary['min_elevation_m']:.1f} .. "
                     f"{summary['max_elevation_m']:.1f} m, grade {100 * summary['min_grade']:.1f}"
                     f" .. {100 * summary['max_grade']:.1f} %")
    return "\n".join(lines)


def _road_lines(path) -> list[str]:
    """What an OpenDRIVE path is made of and what the road data add to it."""
    geo = path.geometry
    labels = [p for k, p in enumerate(geo.provenance["pieces"])
              if k == 0 or p != geo.provenance["pieces"][k - 1]]
    lines = [f"path           {' -> '.join(labels)} (exact design geometry, "
             "stations along the lane centre)"]
    if geo.projection is not None:
        lines.append(f"geoReference   {geo.projection.proj_string}")
    banked = sum(e.end_m - e.start_m for e in path.superelevation)
    caps = sorted({round(z.max_speed_mps, 3) for z in path.zones})
    lines.append(f"road data      {len(path.zones)} speed zone(s)"
                 + (f" ({', '.join(f'{v:g}' for v in caps)} m/s)" if caps else "")
                 + f"; superelevation over {min(banked, geo.length_m):.1f} m")
    return lines
