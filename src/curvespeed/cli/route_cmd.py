"""``curvespeed route``: read a route, resample it, summarise it, optionally write the geometry."""

from __future__ import annotations

import math

import click

from ._common import describe_fit, geometry_options, handle_errors, load_geometry


@click.command()
@click.argument("route_file", type=click.Path(dir_okay=False))
@geometry_options
@click.option("-o", "--output", type=click.Path(dir_okay=False), default=None,
              help="Write the resampled geometry to this CSV file.")
@click.option("--force", is_flag=True, help="Replace the output file if it exists.")
@handle_errors
def route(route_file, spacing_m, position_noise_m, elevation_noise_m, use_elevation, closed,
          part, output, force):
    """Read ROUTE_FILE (CSV, GeoJSON or GPX), resample it and print a summary."""
    from ..io.atomic import check_writable

    if output:
        check_writable(output, force)
    rt, geo = load_geometry(route_file, spacing_m, position_noise_m, elevation_noise_m, closed,
                           use_elevation, part)
    from ..geometry import summarise_geometry

    summary = summarise_geometry(geo)
    radius = ("none (straight)" if math.isinf(summary["min_radius_m"]) else
              f"{summary['min_radius_m']:.1f} m at station {summary['min_radius_station_m']:.1f} m")
    lines = [
        f"route          {route_file} ({geo.name})",
        f"points read    {rt.n_points}" + (" (latitude/longitude, projected to a local "
                                           "transverse Mercator)" if rt.is_geographic else ""),
        f"length         {summary['length_m']:.1f} m "
        f"({'closed loop' if summary['closed'] else 'open'})",
        f"stations       {summary['n_nodes']} at {summary['spacing_m']:.4g} m spacing",
        f"min radius     {radius}",
        f"total turning  {summary['total_turning_deg']:.1f} degrees",
    ]
    lines.extend(describe_fit(geo.provenance))
    if summary["min_elevation_m"] is not None:
        lines.append(f"elevation      {summary['min_elevation_m']:.1f} .. "
                     f"{summary['max_elevation_m']:.1f} m, grade {100 * summary['min_grade']:.1f}"
                     f" .. {100 * summary['max_grade']:.1f} %")
    click.echo("\n".join(lines))
    if output:
        from ..io.geometry_csv import write_geometry_csv

        write_geometry_csv(geo, output, force=force)
        click.echo(f"wrote          {output}")
