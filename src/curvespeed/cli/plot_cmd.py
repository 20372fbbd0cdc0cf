"""``curvespeed plot``: one overview figure of a profile (speed, limits, g-g, plan view)."""

from __future__ import annotations

from pathlib import Path

import click

from ._common import handle_errors


@click.command()
@click.argument("profile_file", type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False),
              help="Figure to write: .png, .svg or .pdf.")
@click.option("--meta", "meta_file", type=click.Path(dir_okay=False), default=None,
              help="The profile's JSON sidecar, for limits, zones and stops (default: "
                   "PROFILE.meta.json next to the profile, when it exists).")
@click.option("--force", is_flag=True, help="Replace the figure if it exists.")
@handle_errors
def plot(profile_file, output, meta_file, force):
    """Draw the profile PROFILE_FILE (from `curvespeed plan`) as one overview figure.

    Speed with its ceiling, zones and stops; curvature; acceleration and jerk with their limits;
    a g-g diagram with the friction ellipse and comfort limits; the route in plan coloured by
    speed. No display is needed.
    """
    from ..io.atomic import check_writable
    from ..io.meta_json import default_meta_path, read_profile_meta
    from ..io.profile_csv import read_station_profile
    from ..plots import figure_format, save_overview

    figure_format(output)
    check_writable(output, force)
    sidecar = None
    if meta_file is not None:
        sidecar = read_profile_meta(meta_file)
    elif default_meta_path(profile_file).is_file():
        sidecar = read_profile_meta(default_meta_path(profile_file))
    name = sidecar.route_name if sidecar is not None else None
    sp = read_station_profile(profile_file, name=name)
    if sidecar is None:
        click.echo(f"note: no sidecar {default_meta_path(profile_file)} found; drawing without "
                   "limits, zones and stops (give --meta FILE to add them)", err=True)
        limits = constraints = None
    else:
        limits, constraints = sidecar.limits, sidecar.constraints
    save_overview(sp, output, limits=limits, constraints=constraints, force=force)
    using = f" with {sidecar.source}" if sidecar is not None else ""
    click.echo(f"wrote {output} ({Path(output).suffix.lower().lstrip('.')}) from "
               f"{profile_file}{using}")
