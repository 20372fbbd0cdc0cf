"""``curvespeed plot``: the overview figure of a profile (route and numbered curves, speed,
utilisation), and on request the g-g diagram as a figure of its own."""

from __future__ import annotations

from pathlib import Path

import click

from ._common import echo, handle_errors, read_profile_with_sidecar


@click.command()
@click.argument("profile_file", type=click.Path())
@click.option("-o", "--output", required=True, type=click.Path(),
              help="Figure to write: .png, .svg or .pdf.")
@click.option("--meta", "meta_file", type=click.Path(), default=None,
              help="The profile's JSON sidecar, for limits, zones and stops (default: "
                   "PROFILE.meta.json next to the profile, when it exists).")
@click.option("--gg", "gg_file", type=click.Path(), default=None,
              help="Also draw the g-g diagram (friction ellipse, comfort limits) as a figure of "
                   "its own: .png, .svg or .pdf.")
@click.option("--force", is_flag=True, help="Replace the figure if it exists.")
@handle_errors
def plot(profile_file, output, meta_file, gg_file, force):
    """Draw the profile PROFILE_FILE (from `curvespeed plan`) as one overview figure.

    The route in plan with its curves numbered as in the `check` table and their advisory
    speeds; the speed along the route with the ceiling, curve bands, braking and launch zones;
    grip and comfort use along the route. No display is needed.
    """
    from ..io.atomic import OutputFiles
    from ..io.meta_json import default_meta_path
    from ..plots import figure_format, gg_bytes, overview_bytes

    fmt = figure_format(output)
    gg_fmt = figure_format(gg_file) if gg_file else None
    outputs = OutputFiles(force)
    outputs.add_input(profile_file, "the profile")
    outputs.add_input(meta_file, "the sidecar (--meta)")
    outputs.add_input(default_meta_path(profile_file), "the profile's sidecar")
    outputs.add_output(output, "-o/--output")
    if gg_file:
        outputs.add_output(gg_file, "--gg")
    with outputs:               # the output checked here; written at the end
        sp, sidecar, _ = read_profile_with_sidecar(profile_file, meta_file, without=(
            "drawing without limits, zones and stops"))
        if sidecar is None:
            limits = constraints = None
        else:
            limits, constraints = sidecar.limits, sidecar.constraints
        outputs.write_bytes(output, overview_bytes(sp, fmt, limits=limits,
                                                   constraints=constraints))
        if gg_file:
            sections = constraints.friction if constraints is not None else ()
            outputs.write_bytes(gg_file, gg_bytes(sp, gg_fmt, limits=limits,
                                                  friction_sections=sections))
    using = f" with {sidecar.source}" if sidecar is not None else ""
    echo(f"wrote {output} ({Path(output).suffix.lower().lstrip('.')}) from "
         f"{profile_file}{using}")
    if gg_file:
        echo(f"wrote the g-g diagram {gg_file}")

