"""``curvespeed route``: read a route, resample it, summarise it, optionally write the geometry."""

from __future__ import annotations

import math

import click

from ._common import geometry_options, handle_errors, load_geometry


@click.command()
@click.argument("route_file", type=click.Path(dir_okay=False))
@geometry_options
@click.option("-o", "--output", type=click.Path(dir_okay=False), default=None,
              help="Write the resampled geometry to this CSV file.")
@click.option("--force", is_flag=True, help="Replace the output file if it exists.")
@handle_errors
def route(route_file, spacing_m, position_noise_m, elevation_noise_m, closed, output, force):
    """Read ROUTE_FILE (CSV, GeoJSON or GPX), resample it and print a summary."""
    from ..io.atomic import check_writable

    if output:
        check_writable(output, force)
    rt, geo = load_geometry(route_file, spacing_m, position_noise_m, elevation_noise_m, closed)
    k = int(abs(geo.curvature_1pm).argmax())
    kmax = abs(float(geo.curvature_1pm[k]))
    radius = f"{1.0 / kmax:.1f} m at station {geo.station_m[k]:.1f} m" if kmax > 0 else "none"
    lines = [
        f"route          {route_file} ({geo.name})",
        f"points read    {rt.n_points}" + (" (latitude/longitude, projected to a local "
                                           "transverse Mercator)" if rt.is_geographic else ""),
        f"length         {geo.length_m:.1f} m ({'closed loop' if geo.closed else 'open'})",
        f"stations       {geo.n_nodes} at {geo.spacing_m:.4g} m spacing",
        f"min radius     {radius}",
        f"total turning  {math.degrees(geo.total_turning_rad()):.1f} degrees",
    ]
    if geo.z_m is not None:
        lines.append(f"elevation      {geo.z_m.min():.1f} .. {geo.z_m.max():.1f} m, grade "
                     f"{100 * geo.grade.min():.1f} .. {100 * geo.grade.max():.1f} %")
    click.echo("\n".join(lines))
    if output:
        from ..io.geometry_csv import write_geometry_csv

        write_geometry_csv(geo, output, force=force)
        click.echo(f"wrote          {output}")
