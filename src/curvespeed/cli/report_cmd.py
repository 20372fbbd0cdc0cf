"""``curvespeed report``: the HTML report of an existing profile and its check JSON."""

from __future__ import annotations

import click

from ._common import check_extensions, echo, handle_errors, read_profile_with_sidecar

#: A profile and a check describe the same route when their lengths agree within this share or
#: this many metres, whichever is larger: both come from one route file, so they differ only
#: if one of them was made with other geometry options (spacing, noise, part).
SAME_LENGTH_SHARE = 0.005
SAME_LENGTH_M = 1.0


@click.command()
@click.argument("profile_file", type=click.Path())
@click.argument("check_file", type=click.Path())
@click.option("-o", "--output", required=True, type=click.Path(),
              help="The HTML report to write.")
@click.option("--meta", "meta_file", type=click.Path(), default=None,
              help="The profile's JSON sidecar, for the solver and the route file's hash "
                   "(default: PROFILE.meta.json next to the profile, when it exists).")
@click.option("--force", is_flag=True, help="Replace the report if it exists.")
@handle_errors
def report(profile_file, check_file, output, meta_file, force):
    """Write the HTML report of PROFILE_FILE (from `plan`) and CHECK_FILE (`check --json`).

    The check gives the curves (numbered as in its table), speeds, uses and limits; the profile
    gives the route in plan. One self-contained file: no network, prints on A4.
    """
    import numpy as np

    from ..errors import SpeedFileError
    from ..io.atomic import OutputFiles
    from ..io.check_report import read_check_json
    from ..io.meta_json import default_meta_path
    from ._report import input_files, report_text

    outputs = OutputFiles(force)
    outputs.add_input(profile_file, "the profile")
    outputs.add_input(check_file, "the check result")
    outputs.add_input(meta_file, "the sidecar (--meta)")
    outputs.add_input(default_meta_path(profile_file), "the profile's sidecar")
    outputs.add_output(output, "-o/--output")
    with outputs:
        check_extensions((output, "-o", "an HTML page", (".html", ".htm")))
        check = read_check_json(check_file)
        sp, sidecar, sidecar_path = read_profile_with_sidecar(profile_file, meta_file)
        s = np.asarray(check["per_station"]["station_m"], dtype=float)
        gap = abs(sp.length_m - s[-1])
        if gap > max(SAME_LENGTH_M, SAME_LENGTH_SHARE * s[-1]):
            raise SpeedFileError(
                f"{profile_file} ({sp.length_m:.1f} m) and {check_file} ({s[-1]:.1f} m) describe "
                "routes of different lengths; check the profile on its own route (curvespeed "
                f"check ROUTE --speeds {profile_file} --json ...) with the same route options")
        x = np.interp(s, sp.station_m, sp.x_m)
        y = np.interp(s, sp.station_m, sp.y_m)
        files = input_files(("profile", profile_file), ("check result", check_file))
        notes = []
        if sidecar is not None:
            files.insert(0, ("route file (from the sidecar)", sidecar.route_file or "not recorded",
                             sidecar.route_sha256))
            files.append(("sidecar", str(sidecar_path), input_files(("", sidecar_path))[0][2]))
            solver = sidecar.solver or "not recorded in the sidecar"
        else:
            solver = "not known (no sidecar next to the profile)"
            notes.append(f"No sidecar {sidecar_path}: the solver and the route file's hash are "
                         "not known.")
        if sidecar is not None and sidecar.constraints.stops:
            # the plan's stops, with their names and dwells, from the sidecar (check judges
            # the speeds given and has no stops of its own)
            from ..io.meta_json import json_safe

            stops = json_safe(sidecar.constraints.to_dict())["stops"]
            check = dict(check, constraints=dict(check.get("constraints") or {}, stops=stops))
        outputs.write_text(output, report_text(check, x, y, doing="planned", files=files,
                                               solver=solver, notes=notes))
    echo(f"wrote the report {output} from {profile_file} and {check_file}")
