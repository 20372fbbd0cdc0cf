"""``curvespeed export``: a time- or station-sampled reference trajectory from a profile CSV."""

from __future__ import annotations

import math
import sys

import click

from ..io.trajectory_format import FORMAT_BY_SUFFIX, TrajectoryFormat, format_from_suffix
from ..limits import DWELL_WHY, MAX_DWELL_S
from ._common import FiniteFloat, echo, handle_errors

#: Default time step, s (20 samples per second).
DEFAULT_DT_S = 0.05


class _Positive(FiniteFloat):
    """A finite number above zero (``min_zero=True``: zero allowed), up to ``highest`` (refused
    above it with the reason ``why``)."""

    def __init__(self, min_zero: bool = False, highest: float = math.inf, why: str = ""):
        self.min_zero, self.highest, self.why = min_zero, highest, why

    def convert(self, value, param, ctx):
        number = super().convert(value, param, ctx)
        if number < 0.0 or (number == 0.0 and not self.min_zero):
            self.fail(f"{value} is not {'zero or ' if self.min_zero else ''}a positive number",
                      param, ctx)
        if number > self.highest:
            self.fail(f"{number:g} is above {self.highest:g}: {self.why}; give at most "
                      f"{self.highest:g}", param, ctx)
        return number


_POSITIVE = _Positive()


class _StartTime(click.ParamType):
    """An ISO 8601 date and time with a UTC offset (:func:`~curvespeed.io.trajectory_time.
    parse_start_time`)."""

    name = "ISO8601"

    def convert(self, value, param, ctx):
        if not isinstance(value, str):
            return value
        from ..io.trajectory_time import parse_start_time

        try:
            return parse_start_time(value)
        except ValueError as exc:
            self.fail(str(exc), param, ctx)


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
@click.option("--dwell", "dwell_s", type=_Positive(min_zero=True, highest=MAX_DWELL_S,
                                                  why=DWELL_WHY), default=0.0,
              show_default=True, metavar="S",
              help="Seconds held at each stop (a station inside the route where the planned "
                   "speed is zero) before leaving it.")
@click.option("--laps", type=click.IntRange(min=1), default=1, show_default=True, metavar="N",
              help="Drive a closed route's profile N times in a row (a flying lap each time, "
                   "unless --launch-lap or --finish-lap replace the first or last).")
@click.option("--launch-lap", "launch_file", type=click.Path(), default=None, metavar="PROFILE",
              help="Standing start: the first lap is this profile, planned on the same loop "
                   "opened at its start from rest to the flying lap's start speed (curvespeed "
                   "plan ROUTE --open --start-speed 0 --end-speed V).")
@click.option("--finish-lap", "finish_file", type=click.Path(), default=None, metavar="PROFILE",
              help="Standing finish: the last lap is this profile, planned on the same loop "
                   "opened at its start from the flying lap's start speed to rest (curvespeed "
                   "plan ROUTE --open --start-speed V --end-speed 0).")
@click.option("--start-time", type=_StartTime(), default=None, metavar="ISO8601",
              help="Absolute time of the first sample, ISO 8601 with a UTC offset, e.g. "
                   "2026-12-02T08:00:00+01:00: adds UTC times (CSV and JSON column time_utc, "
                   "GeoJSON properties, GPX time elements).")
@click.option("--stop-points", is_flag=True,
              help="GeoJSON: write a FeatureCollection, the trajectory followed by one Point "
                   "per stop (name, dwell, arrival time).")
@click.option("--force", is_flag=True, help="Replace the output file if it exists.")
@handle_errors
def export(profile_file, output, fmt, dt_s, station_step_m, dwell_s, laps, launch_file,
           finish_file, start_time, stop_points, force):
    """Turn the station profile PROFILE_FILE (from `curvespeed plan`) into a reference trajectory.

    Samples every --dt seconds (the last sample is the end of the route at the planned time plus
    dwells) or every --station-step metres. GeoJSON and GPX need a geographic profile (lat, lon
    columns). On a closed route, --laps, --launch-lap and --finish-lap make a run of laps in one
    time base. The trajectory is an engineering aid: speeds on public roads follow local codes
    and licensed engineering practice.
    """
    import dataclasses

    from ..errors import SpeedFileError
    from ..io.atomic import OutputFiles
    from ..io.meta_json import default_meta_path

    if dt_s is not None and station_step_m is not None:
        raise click.UsageError("--dt and --station-step exclude each other; give one of them")
    kind = _format(fmt, output)
    if stop_points and kind is not TrajectoryFormat.GEOJSON:
        raise click.UsageError(f"--stop-points is for GeoJSON output, not {kind.value}; drop it "
                               "or write a .geojson file")
    outputs = OutputFiles(force)
    outputs.add_input(profile_file, "the profile")
    outputs.add_input(default_meta_path(profile_file), "the profile's sidecar")
    for path, what in ((launch_file, "--launch-lap"), (finish_file, "--finish-lap")):
        if path is not None:
            outputs.add_input(path, f"the {what} profile")
            outputs.add_input(default_meta_path(path), f"the {what} profile's sidecar")
    outputs.add_output(output, "-o/--output")

    with outputs:               # the output checked here; written at the end
        sp, sidecar = _read(profile_file)
        if kind in (TrajectoryFormat.GEOJSON, TrajectoryFormat.GPX) and not sp.is_geographic:
            raise SpeedFileError(
                f"{profile_file}: metric-only profile (no lat, lon columns), but "
                f"{'GeoJSON (RFC 7946)' if kind is TrajectoryFormat.GEOJSON else 'GPX 1.1'} "
                "needs WGS84 longitude/latitude; export as csv or json, or plan the route from "
                "a geographic file (lat,lon CSV, GeoJSON or GPX)")
        own, names = _stop_info(sidecar, sp)
        run = None
        if laps > 1 or launch_file or finish_file:
            run, own, names = _run_of_laps(profile_file, sp, sidecar, laps, launch_file,
                                           finish_file, (own, names))
        source = run.profile if run is not None else sp
        _check_planned_time(source)
        trajectory, every = _sample(source, dt_s, station_step_m, dwell_s, own, names)
        if run is not None:
            from ..export_laps import with_laps

            trajectory = with_laps(trajectory, run)
        if start_time is not None:
            _check_start_time(start_time, trajectory.total_time_s, profile_file)
        trajectory = dataclasses.replace(
            trajectory, start_time=start_time,
            local_origin=sidecar.local_origin if sidecar is not None else None)
        from ..io.trajectory import trajectory_text

        outputs.write_text(output, trajectory_text(trajectory, kind, stop_points))
    for line in _summary(profile_file, sp, trajectory, run, dwell_s, own):
        echo(line)
    echo(f"wrote  {output} ({kind.value}): {trajectory.n_samples} samples {every}, "
         f"total time {trajectory.total_time_s:.2f} s")


def _check_planned_time(profile) -> None:
    """Refuse a profile whose planned time is implausible before sampling it."""
    from ..station_profile import as_station_profile, check_planned_time

    check_planned_time(as_station_profile(profile))


def _check_start_time(start_time, total_time_s, profile_file) -> None:
    """Refuse a --start-time whose trajectory leaves the calendar (years 1 to 9999)."""
    from ..io.trajectory_time import time_range_problem

    problem = time_range_problem(start_time, total_time_s)
    if problem is not None:
        raise click.BadParameter(
            f"{start_time.isoformat()} (trajectory of {profile_file}) {problem}",
            param_hint="'--start-time'")


def _format(fmt, output) -> TrajectoryFormat:
    """The output format: given, or from the output's extension."""
    if fmt is not None:
        return TrajectoryFormat(fmt)
    kind = format_from_suffix(output)
    if kind is None:
        raise click.BadParameter(
            f"cannot tell the format from '{output}'; give --format "
            f"({', '.join(f.value for f in TrajectoryFormat)}) or an output ending in "
            f"{', '.join(FORMAT_BY_SUFFIX)}", param_hint="'-o' / '--output'")
    return kind


def _read(profile_file):
    """A profile and its sidecar (None without a readable one that fits the profile: a broken
    sidecar is warned about and the route name then comes from the file name)."""
    from ._common import read_profile_and_sidecar

    return read_profile_and_sidecar(
        profile_file, "the route name is taken from the file name and stops get no own dwell "
        "or name")


def _stop_info(sidecar, sp):
    """Each stop's own dwell (``dwell_s`` of its [[stop]]: NaN for none; None when no stop has
    one) and name (None when no stop has one), in station order, from the profile's sidecar."""
    import numpy as np

    if sidecar is None or not sp.stop_nodes.size:
        return None, None
    own = np.full(sp.stop_nodes.size, np.nan)
    names = [""] * sp.stop_nodes.size
    at = sp.station_m[sp.stop_nodes]
    for stop in sidecar.constraints.stops:
        j = int(np.argmin(np.abs(at - stop.station_m)))
        if stop.dwell_s is not None:
            own[j] = stop.dwell_s
        if stop.name:
            names[j] = stop.name
    return (None if np.all(np.isnan(own)) else own), (names if any(names) else None)


def _run_of_laps(profile_file, sp, sidecar, laps, launch_file, finish_file, flying_stops):
    """The laps joined (:mod:`curvespeed.export_laps`), with each stop's own dwell and name."""
    import numpy as np

    from ..errors import SpeedFileError
    from ..export_laps import check_lap_profiles, join_laps, lap_sequence, per_stop

    if sidecar is not None and sidecar.closed is False:
        raise SpeedFileError(
            f"{profile_file}: the profile of an open route (its sidecar says closed: false), "
            "but laps follow a closed route's flying lap; plan the loop closed (curvespeed plan "
            "ROUTE --closed -o LAP.csv) and export that profile with --laps")
    laps_read = {"flying": (sp, flying_stops)}
    for kind, path in (("launch", launch_file), ("finish", finish_file)):
        if path is not None:
            other, other_sidecar = _read(path)
            laps_read[kind] = (other, _stop_info(other_sidecar, other))
    launch = laps_read.get("launch", (None,))[0]
    finish = laps_read.get("finish", (None,))[0]
    try:
        sequence = lap_sequence(sp, laps, launch, finish)
    except ValueError as exc:
        raise click.BadParameter(str(exc), param_hint="'--laps'") from None
    check_lap_profiles(sp, launch, finish)
    try:
        run = join_laps(sequence)
    except ValueError as exc:
        raise click.BadParameter(str(exc), param_hint="'--laps'") from None
    if not run.lap_stop_index.size:
        return run, None, None
    own = per_stop(run, {k: v[1][0] for k, v in laps_read.items()}, np.nan)
    names = per_stop(run, {k: v[1][1] for k, v in laps_read.items()}, "")
    own = np.asarray(own, dtype=float)
    return run, (None if np.all(np.isnan(own)) else own), (names if any(names) else None)


def _summary(profile_file, sp, trajectory, run, dwell_s, own) -> list[str]:
    """What was read and how the stops and laps were driven, for the terminal."""
    import numpy as np

    stops = trajectory.stop_stations_m.size
    held = ""
    if stops:
        held = (f"; {stops} stop(s), held {dwell_s:g} s each" if dwell_s > 0
                else f"; {stops} stop(s), left at once (--dwell 0)")
        if own is not None and not np.all(np.isnan(own)):
            held += (f", except {int(np.sum(~np.isnan(own)))} with a dwell of its own from the "
                     f"sidecar ({float(np.sum(trajectory.stop_dwell_s)):g} s held in all)")
    lines = [f"read   {profile_file}: {sp.length_m:.1f} m, {sp.n_nodes} stations, planned time "
             f"{sp.moving_time_s:.2f} s" + ("" if run is not None else held)]
    if run is not None:
        starts = trajectory.lap_times_s
        laps = ", ".join(f"{kind} {b - a:.2f} s" for kind, a, b in
                         zip(run.kinds, starts[:-1], starts[1:]))
        lines.append(f"laps   {run.laps}: {laps} (planned time "
                     f"{trajectory.planned_time_s:.2f} s{held})")
    return lines


def _sample(sp, dt_s, station_step_m, dwell_s, own=None, names=None):
    """The trajectory (time or station sampled) and how it was sampled, in words."""
    from ..export import (MAX_SAMPLES, count_station_samples, count_time_samples,
                          sample_by_station, sample_in_time)

    if station_step_m is not None:
        count = count_station_samples(sp, station_step_m)
        if count > MAX_SAMPLES:
            raise click.BadParameter(f"{station_step_m:g} would give {count:.3g} samples (more "
                                     f"than {MAX_SAMPLES}); choose a larger step",
                                     param_hint="'--station-step'")
    else:
        given = dt_s is not None
        dt_s = DEFAULT_DT_S if dt_s is None else dt_s
        count = count_time_samples(sp, dt_s, dwell_s, own)
        if count > MAX_SAMPLES:
            _too_many_in_time(sp, dt_s, given, count, dwell_s, own)
    if station_step_m is not None:
        return (sample_by_station(sp, station_step_m, dwell_s, own, names),
                f"every {station_step_m:g} m of station")
    return sample_in_time(sp, dt_s, dwell_s, own, names), f"every {dt_s:g} s"


def _too_many_in_time(sp, dt_s: float, given: bool, count: int, dwell_s: float, own) -> None:
    """Refuse a time-sampled export of more than :data:`MAX_SAMPLES` samples, naming what makes
    the count huge: the step the user gave, else the dwells or the profile's planned time."""
    import numpy as np

    from ..errors import SpeedFileError
    from ..export import MAX_SAMPLES, stop_dwells

    held = float(np.sum(stop_dwells(sp, dwell_s, own)))
    total = sp.moving_time_s + held
    ratio = total / dt_s
    many = f"{count:.3g}" if math.isfinite(ratio) else f"over {sys.float_info.max:.3g}"
    span = (f"a trajectory of {total:g} s (planned time {sp.moving_time_s:g} s, held at stops "
            f"{held:g} s): {many} samples every {dt_s:g} s, more than {MAX_SAMPLES}")
    if given:
        raise click.BadParameter(f"{dt_s:g} gives {span}; choose a larger step",
                                 param_hint="'--dt'")
    if held > sp.moving_time_s:
        sources = []
        if own is not None and not np.all(np.isnan(own)):
            sources.append("the profile's sidecar (its stops' dwell_s)")
        if dwell_s > 0.0 and (own is None or np.any(np.isnan(own))):
            sources.append(f"--dwell {dwell_s:g}")
        whose = " and ".join(sources)
        raise SpeedFileError(f"the dwells at stops, from {whose}, make {span} at the default "
                             "--dt; hold the stops shorter or give a larger --dt")
    raise SpeedFileError(f"the profile's planned time makes {span} at the default --dt; check "
                         "the profile's time_s, or give a larger --dt or --station-step")
