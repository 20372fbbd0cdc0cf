"""``curvespeed export``: a time- or station-sampled reference trajectory from a profile CSV."""

from __future__ import annotations

import click

from ..io.trajectory_format import FORMAT_BY_SUFFIX, TrajectoryFormat, format_from_suffix
from ._common import FiniteFloat, echo, handle_errors, route_name

#: Default time step, s (20 samples per second).
DEFAULT_DT_S = 0.05
#: Refuse to write more samples than this (a too-small --dt or --station-step, most likely).
MAX_SAMPLES = 5_000_000


class _Positive(FiniteFloat):
    """A finite number above zero (``min_zero=True``: zero allowed)."""

    def __init__(self, min_zero: bool = False):
        self.min_zero = min_zero

    def convert(self, value, param, ctx):
        number = super().convert(value, param, ctx)
        if number < 0.0 or (number == 0.0 and not self.min_zero):
            self.fail(f"{value} is not {'zero or ' if self.min_zero else ''}a positive number",
                      param, ctx)
        return number


_POSITIVE = _Positive()


@click.command()
@click.argument("profile_file", type=click.Path())
@click.option("-o", "--output", required=True, type=click.Path(),
              help="Trajectory file to write.")
@click.option("--format", "fmt", type=click.Choice([f.value for f in TrajectoryFormat]),
              default=None,
              help="Output format (default: from the output's extension: "
                   f"{', '.join(FORMAT_BY_SUFFIX)}).")
@click.option("--dt", "dt_s", type=_POSITIVE, default=None, metavar="S",
              help=f"Time step between samples, seconds [default: {DEFAULT_DT_S}].")
@click.option("--station-step", "station_step_m", type=_POSITIVE, default=None, metavar="M",
              help="Sample every M metres of station instead of every --dt seconds.")
@click.option("--dwell", "dwell_s", type=_Positive(min_zero=True), default=0.0,
              show_default=True, metavar="S",
              help="Seconds held at each stop (a station inside the route where the planned "
                   "speed is zero) before leaving it.")
@click.option("--force", is_flag=True, help="Replace the output file if it exists.")
@handle_errors
def export(profile_file, output, fmt, dt_s, station_step_m, dwell_s, force):
    """Turn the station profile PROFILE_FILE (from `curvespeed plan`) into a reference trajectory.

    Samples every --dt seconds (the last sample is the end of the route at the planned time plus
    dwells) or every --station-step metres. GeoJSON needs a geographic profile (lat, lon columns).
    The trajectory is an engineering aid: speeds on public roads follow local codes and licensed
    engineering practice.
    """
    import numpy as np

    from ..errors import SpeedFileError
    from ..io.atomic import OutputFiles
    from ..io.meta_json import default_meta_path
    from ..io.profile_csv import read_station_profile

    if dt_s is not None and station_step_m is not None:
        raise click.UsageError("--dt and --station-step exclude each other; give one of them")
    if fmt is None:
        kind = format_from_suffix(output)
        if kind is None:
            raise click.BadParameter(
                f"cannot tell the format from '{output}'; give --format "
                f"({', '.join(f.value for f in TrajectoryFormat)}) or an output ending in "
                f"{', '.join(FORMAT_BY_SUFFIX)}", param_hint="'-o' / '--output'")
    else:
        kind = TrajectoryFormat(fmt)
    outputs = OutputFiles(force)
    outputs.add_input(profile_file, "the profile")
    outputs.add_input(default_meta_path(profile_file), "the profile's sidecar")
    outputs.add_output(output, "-o/--output")

    with outputs:               # the output checked here; written at the end
        sp = read_station_profile(profile_file, name=route_name(profile_file))
        if kind is TrajectoryFormat.GEOJSON and not sp.is_geographic:
            raise SpeedFileError(
                f"{profile_file}: metric-only profile (no lat, lon columns), but GeoJSON "
                "(RFC 7946) needs WGS84 longitude/latitude; export as csv or json, or plan the "
                "route from a geographic file (lat,lon CSV, GeoJSON or GPX)")
        own = _own_dwells(profile_file, sp)
        trajectory, every = _sample(sp, dt_s, station_step_m, dwell_s, own)
        from ..io.trajectory import trajectory_text

        outputs.write_text(output, trajectory_text(trajectory, kind))
    stops = trajectory.stop_stations_m.size
    held = ""
    if stops:
        held = (f"; {stops} stop(s), held {dwell_s:g} s each" if dwell_s > 0
                else f"; {stops} stop(s), left at once (--dwell 0)")
        if own is not None and not np.all(np.isnan(own)):
            held += (f", except {int(np.sum(~np.isnan(own)))} with a dwell of its own from the "
                     f"sidecar ({float(np.sum(trajectory.stop_dwell_s)):g} s held in all)")
    echo(f"read   {profile_file}: {sp.length_m:.1f} m, {sp.n_nodes} stations, planned time "
         f"{trajectory.planned_time_s:.2f} s{held}")
    echo(f"wrote  {output} ({kind.value}): {trajectory.n_samples} samples {every}, "
         f"total time {trajectory.total_time_s:.2f} s")


def _own_dwells(profile_file, sp):
    """Each stop's own dwell (``dwell_s`` of its [[stop]], kept in the profile's sidecar), in
    station order, NaN for none; None without a readable sidecar or stops with dwells."""
    import numpy as np

    from ..errors import CurvespeedError
    from ..io.meta_json import default_meta_path, read_profile_meta

    meta = default_meta_path(profile_file)
    if not meta.exists() or not sp.stop_nodes.size:
        return None
    try:
        stops = read_profile_meta(meta).constraints.stops
    except CurvespeedError:          # said once already, by route_name: no stop's own dwell
        return None
    own = np.full(sp.stop_nodes.size, np.nan)
    at = sp.station_m[sp.stop_nodes]
    for stop in stops:
        if stop.dwell_s is None:
            continue
        j = int(np.argmin(np.abs(at - stop.station_m)))
        own[j] = stop.dwell_s
    return None if np.all(np.isnan(own)) else own


def _sample(sp, dt_s, station_step_m, dwell_s, own=None):
    """The trajectory (time or station sampled) and how it was sampled, in words."""
    from ..export import (count_station_samples, count_time_samples, sample_by_station,
                          sample_in_time)

    if station_step_m is not None:
        count = count_station_samples(sp, station_step_m)
        option, value = "--station-step", station_step_m
    else:
        dt_s = DEFAULT_DT_S if dt_s is None else dt_s
        count = count_time_samples(sp, dt_s, dwell_s, own)
        option, value = "--dt", dt_s
    if count > MAX_SAMPLES:
        raise click.BadParameter(f"{value:g} would give {count} samples (more than "
                                 f"{MAX_SAMPLES}); choose a larger step", param_hint=f"'{option}'")
    if station_step_m is not None:
        return (sample_by_station(sp, station_step_m, dwell_s, own),
                f"every {station_step_m:g} m of station")
    return sample_in_time(sp, dt_s, dwell_s, own), f"every {dt_s:g} s"

