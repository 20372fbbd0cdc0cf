"""Options and steps shared by several subcommands: error mapping, numbers, reading a route."""

from __future__ import annotations

import functools
import os
import sys

import click

from ..errors import CurvespeedError, OutputError

EXIT_OK = 0
EXIT_VIOLATIONS = 1
EXIT_BAD_INPUT = 2
#: A command stopped by a signal exits with 128 + the signal's number (130 for Ctrl-C, 143 for
#: SIGTERM), as shells report it.
EXIT_SIGNAL_BASE = 128


def handle_errors(func):
    """Map what can go wrong to one ``error:`` line and an exit status; never a traceback.

    Library errors and any :class:`OSError` (a file or standard output that cannot be written)
    exit with 2; SIGTERM and Ctrl-C with 128 + the signal number, after the command's
    temporary files were removed (:class:`~curvespeed.io.atomic.OutputFiles`). Exit status 1
    stays reserved for ``check`` finding a violation. Standard output is flushed before the
    command ends, so a full disk there is reported too.
    """

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        _refuse_empty_paths(kwargs)
        try:
            try:
                func(*args, **kwargs)
            finally:
                _flush_stdout()
        except CurvespeedError as exc:
            _fail(str(exc))
        except KeyboardInterrupt as exc:
            signum = getattr(exc, "signum", 2)
            name = getattr(exc, "name", "SIGINT")
            click.echo(f"error: interrupted ({name}); no output file was written", err=True)
            sys.exit(EXIT_SIGNAL_BASE + signum)
        except OSError as exc:
            from ..io.atomic import os_reason

            where = exc.filename if exc.filename is not None else "a file"
            _fail(f"{where}: cannot be written ({os_reason(exc)})")

    return wrapper


def _refuse_empty_paths(kwargs: dict) -> None:
    """Refuse a file or folder given as the empty string (``-o ''``, a variable that was never
    set), as a usage error naming the option, before anything is read: an empty name is no
    file, and a command must not take it for "no such option given" and write nothing."""
    ctx = click.get_current_context(silent=True)
    if ctx is None:
        return
    for param in ctx.command.params:
        if not isinstance(param.type, click.Path):
            continue
        value = kwargs.get(param.name)
        values = value if isinstance(value, (tuple, list)) else (value,)
        if any(isinstance(v, str) and v == "" for v in values):
            raise click.BadParameter("an empty name is no file or folder; give its name",
                                     ctx=ctx, param=param)


#: Extensions of the files curvespeed writes, by what they hold.
WRITTEN_KINDS = {".csv": "a CSV table", ".json": "JSON", ".geojson": "GeoJSON", ".gpx": "GPX",
                 ".png": "a PNG figure", ".svg": "an SVG figure", ".pdf": "a PDF figure",
                 ".html": "an HTML page", ".htm": "an HTML page", ".xodr": "OpenDRIVE",
                 ".toml": "TOML"}


def check_extension(path, option: str, writes: str, suffixes: tuple[str, ...]) -> None:
    """Refuse an output ``path`` whose extension names another format than the one the
    option writes (``plan -o p.gpx`` wrote a CSV under a GPX name), as the commands that
    choose the format by extension do; an extension curvespeed never writes is left alone."""
    from pathlib import Path

    suffix = Path(path).suffix.lower()
    if suffix in WRITTEN_KINDS and suffix not in suffixes:
        raise click.BadParameter(
            f"'{path}' ends in {suffix}, which names {WRITTEN_KINDS[suffix]}, but this "
            f"option writes {writes}; name the file {Path(path).stem}{suffixes[0]}",
            param_hint="'-o' / '--output'" if option == "-o" else f"'{option}'")


def check_extensions(*outputs) -> None:
    """:func:`check_extension` for each ``(path, option, writes, suffixes)`` given a path; called
    once the outputs passed :class:`~curvespeed.io.atomic.OutputFiles`' own check, so an
    output naming an input is refused as that first."""
    for path, option, writes, suffixes in outputs:
        if path:
            check_extension(path, option, writes, suffixes)


def _fail(message: str) -> None:
    click.echo(f"error: {message}", err=True)
    sys.exit(EXIT_BAD_INPUT)


def echo(text: str = "") -> None:
    """Print a line on standard output; a stream that cannot be written raises OutputError."""
    try:
        click.echo(text)
    except OSError as exc:
        _silence_stdout()
        from ..io.atomic import os_reason

        raise OutputError(f"standard output: cannot be written ({os_reason(exc)}); the "
                          "command stopped there") from None


def _flush_stdout() -> None:
    try:
        sys.stdout.flush()
    except OSError as exc:
        _silence_stdout()
        from ..io.atomic import os_reason

        raise OutputError(f"standard output: cannot be written ({os_reason(exc)}); the "
                          "command stopped there") from None
    except ValueError:            # already closed
        pass


def _silence_stdout() -> None:
    """Point standard output at the null device, so Python's own flush at exit stays quiet."""
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):
        return                    # not a real file (tests capture output in memory)
    devnull = os.open(os.devnull, os.O_WRONLY)
    os.dup2(devnull, fd)
    os.close(devnull)


class FiniteFloat(click.ParamType):
    """A plain finite decimal number, parsed as every file's numbers are.

    ``nan``, ``inf``, digits other than ASCII 0-9, ``1_000`` and the like are refused with the
    reason (:func:`curvespeed.io._common.parse_number`).
    """

    name = "number"

    def convert(self, value, param, ctx):
        import math

        if isinstance(value, (int, float)) and not isinstance(value, bool):
            if math.isfinite(value):
                return float(value)
            self.fail(f"{value} is not a finite number", param, ctx)
        from ..io._common import number_problem, parse_number

        number = parse_number(str(value))
        if number is None:
            self.fail(f"'{value}' {number_problem(str(value))}", param, ctx)
        return number


#: The type of every number option.
FINITE = FiniteFloat()


class NoiseParam(FiniteFloat):
    """A noise level in metres (a plain positive number), or ``auto`` (estimated from the
    points)."""

    name = "noise"

    def convert(self, value, param, ctx):
        if value is None or (isinstance(value, str) and value.strip().lower() == "auto"):
            return None
        number = super().convert(value, param, ctx)
        if not number > 0:
            self.fail(f"{value} must be a positive number of metres, or 'auto'", param, ctx)
        return number


class RoadList(click.ParamType):
    """Comma-separated road ids (OpenDRIVE ids are strings): ``3,7,12``."""

    name = "roads"

    def convert(self, value, param, ctx):
        if isinstance(value, (list, tuple)):
            return list(value)
        items = [v.strip() for v in str(value).split(",")]
        if not all(items):
            self.fail(f"'{value}' has an empty road id; write the ids separated by commas, "
                      "e.g. 3,7,12", param, ctx)
        return items


def _fit_option_list():
    return [
        click.option("--spacing", "spacing_m", type=FINITE, default=1.0, show_default=True,
                     metavar="M", help="Station spacing of the resampled route, metres."),
        click.option("--position-noise", "position_noise_m", type=NoiseParam(), default="auto",
                     show_default=True, metavar="M|auto",
                     help="Position noise of the route points (standard deviation per "
                          "coordinate), metres; sets the spline smoothing. 'auto' estimates it "
                          "from the points; a number that the points clearly contradict (by "
                          "more than 2x) is reported and the estimate used."),
        click.option("--elevation-noise", "elevation_noise_m", type=NoiseParam(),
                     default="auto", show_default=True, metavar="M|auto",
                     help="Elevation noise, metres; 'auto' estimates it from the heights."),
        click.option("--no-elevation", "use_elevation", flag_value=False, default=True,
                     help="Ignore the route's elevations (no grade)."),
        click.option("--closed/--open", "closed", default=None,
                     help="Treat the route as a closed loop or as open (default: closed when "
                          "its ends meet with the same heading)."),
    ]


def fit_options(func):
    """Add the options of the fit every route goes through (spacing, noise, elevation,
    closed/open); ``batch`` takes these alone."""
    for option in reversed(_fit_option_list()):
        func = option(func)
    return func


def geometry_options(func):
    """Add the route-resampling options: :func:`fit_options`, then the part of a drive and
    further drives."""
    options = _fit_option_list() + [
        click.option("--part", "part", type=click.IntRange(min=1), default=None, metavar="N",
                     help="Where the recorded vehicle reverses, the drive splits into parts: "
                          "use part N (default: the longest)."),
        click.option("--drive", "drives", multiple=True, type=click.Path(dir_okay=False),
                     metavar="FILE",
                     help="Another recorded drive of the same route (repeatable): all are "
                          "fused into one centreline."),
        click.option("--all-tracks", "all_tracks", is_flag=True,
                     help="Read every track of a GPX file as a drive of the same route and "
                          "fuse them."),
        click.option("--road", "roads", type=RoadList(), default=None, metavar="ID[,ID...]",
                     help="OpenDRIVE: the road, or the chain of linked roads in driving order "
                          "(default: the file's first road)."),
        click.option("--lane", "lane", type=int, default=None, metavar="ID",
                     help="OpenDRIVE: the lane to follow on the first road (negative: right of "
                          "the reference line; 0: the centre lane). Default: the first driving "
                          "lane on the side the road's traffic rule drives on."),
    ]
    for option in reversed(options):
        func = option(func)
    return func

def load_geometry(route_file, spacing_m, position_noise_m, elevation_noise_m, use_elevation,
                  closed, part, drives=(), all_tracks=False, roads=None, lane=None):
    """Read ``route_file`` (and any further drives) and resample it; library errors propagate
    to the CLI handler. The arguments after the file are the values of
    :func:`geometry_options`, in its order. Several drives are fused into one centreline.

    An OpenDRIVE file (``.xodr``) gives its exact lane-centre geometry instead: the first item
    returned is then the :class:`~curvespeed.geometry.road_path.RoadPath` (with the road's own
    superelevation and speed zones), not a Route.
    """
    from pathlib import Path

    if Path(str(route_file)).suffix.lower() in OPENDRIVE_EXTENSIONS:
        return _load_road(route_file, spacing_m, position_noise_m, elevation_noise_m,
                          use_elevation, closed, part, drives, all_tracks, roads, lane)
    if roads or lane is not None:
        raise click.UsageError("--road and --lane choose a path through an OpenDRIVE road "
                               "network; they apply to .xodr files only")
    from ..geometry import build_geometry
    from ..io import read_drives

    routes = list(read_drives(route_file, all_tracks))
    for extra in drives:
        routes.extend(read_drives(extra, all_tracks))
    options = dict(spacing_m=spacing_m, position_noise_m=position_noise_m,
                   elevation_noise_m=elevation_noise_m, closed=closed,
                   part=None if part is None else part - 1, use_elevation=use_elevation)
    if len(routes) > 1:
        from ..geometry.fusion import build_fused_geometry

        return routes[0], build_fused_geometry(routes, **options)
    return routes[0], build_geometry(routes[0], **options)


#: Extensions read as OpenDRIVE road networks.
OPENDRIVE_EXTENSIONS = (".xodr",)


def _load_road(route_file, spacing_m, position_noise_m, elevation_noise_m, use_elevation,
               closed, part, drives, all_tracks, roads, lane):
    """The exact lane-centre path of an OpenDRIVE file (no fit: noise options do not apply)."""
    if drives or all_tracks or part is not None:
        raise click.UsageError("--drive, --all-tracks and --part apply to recorded drives; an "
                               "OpenDRIVE file states its geometry exactly")
    if position_noise_m is not None or elevation_noise_m is not None:
        import warnings

        from ..errors import CurvespeedWarning

        warnings.warn(f"{route_file}: --position-noise and --elevation-noise are ignored: an "
                      "OpenDRIVE file states its geometry exactly", CurvespeedWarning)
    from ..io.opendrive_path import read_opendrive

    path = read_opendrive(route_file, roads, lane, spacing_m, closed, use_elevation)
    return path, path.geometry


def register_drives(outputs, drives) -> None:
    """The further drives are inputs too: no output may overwrite one."""
    for path in drives:
        outputs.add_input(path, "a drive (--drive)")
def describe_fit(provenance: dict) -> list[str]:
    """Lines for a summary: the noise the fit used and what was merged, averaged or split."""
    if not provenance:
        return []

    def noise_text(entry):
        stated = "auto" if entry["stated_m"] is None else f"{entry['stated_m']:g} m"
        est = "-" if entry["estimated_m"] is None else f"{entry['estimated_m']:.3g} m"
        return (f"{entry['used_m']:.3g} m used ({entry['origin']}; stated {stated}, "
                f"estimated {est})")

    lines = [f"noise          position {noise_text(provenance['position_noise'])}"]
    if "elevation_noise" in provenance:
        lines.append(f"               elevation {noise_text(provenance['elevation_noise'])}")
    elif provenance.get("elevation") == "ignored":
        lines.append("               elevation ignored (--no-elevation)")
    drift = provenance.get("drift_rate_m2ps")
    if drift is not None:
        unit = "m^2/s" if provenance.get("time_stamps") else "m^2 per fix"
        lines.append(f"               drift {drift:.3g} {unit} (from fixes taken standing still)")
    parts = [f"{provenance['points_read']} points read, {provenance['points_fitted']} fitted"]
    if "drives" in provenance:
        spread, off = provenance["spread_between_drives_m"], provenance["centreline_offset_m"]
        lines.append(f"drives         {len(provenance['drives'])} fused; they lie "
                     f"{spread['rms']:.2f} m (RMS) from their mean, at most {spread['max']:.2f} "
                     f"m (station {spread['max_station_m']:.0f} m); the fused centreline "
                     f"{off['rms']:.2f} m (RMS) from it, at most {off['max']:.2f} m (station "
                     f"{off['max_station_m']:.0f} m)")
    if provenance["standstills_merged"]:
        parts.append(f"{provenance['standstills_merged']} standstill(s) merged "
                     f"({provenance['fixes_in_standstills']} fixes)")
    if provenance["averaging_cell_m"]:
        parts.append(f"dense fixes averaged over {provenance['averaging_cell_m']:.3g} m")
    lines.append("fit            " + "; ".join(parts))
    if "parts" in provenance:
        lines.append(f"parts          the vehicle reverses: {len(provenance['parts'])} parts, "
                     f"part {provenance['part_used']} used")
    return lines


def sidecar_or_none(profile_file, instead: str):
    """The sidecar next to the profile, if there is a readable one; a broken one is warned
    about (its error, then ``instead``: what the command does without it) and gives None."""
    import warnings

    from ..errors import CurvespeedWarning
    from ..io.meta_json import default_meta_path, read_profile_meta

    meta = default_meta_path(profile_file)
    if not meta.exists():
        return None
    try:
        return read_profile_meta(meta)
    except CurvespeedError as exc:
        warnings.warn(f"{exc}; {instead}", CurvespeedWarning, stacklevel=3)
        return None


def profile_sidecar(profile_file, meta_file=None, without: str | None = None):
    """The sidecar of a profile and its path: the one named with ``--meta`` (which must be
    readable), else the one next to the profile (``(None, path)`` when there is none).

    ``without`` says what the command does without a sidecar ("drawing without limits, zones
    and stops"): a broken sidecar next to the profile is warned about and skipped, and a
    missing one noted on standard error, both in those words. With ``without`` None, a missing
    sidecar is not noted and a broken one is skipped with a warning ending "going on without
    it".
    """
    from ..io.meta_json import default_meta_path, read_profile_meta

    if meta_file is not None:
        return read_profile_meta(meta_file), meta_file
    default = default_meta_path(profile_file)
    if not default.exists():
        if without is not None:
            click.echo(f"note: no sidecar {default} found; {without} (give --meta FILE to add "
                       "them)", err=True)
        return None, default
    return sidecar_or_none(profile_file, _instead(without)), default


def read_profile_with_sidecar(profile_file, meta_file=None, without: str | None = None):
    """``(station profile, sidecar or None, sidecar path)``: a profile CSV read with its route
    name from its sidecar (:func:`profile_sidecar` says which sidecar and what ``without``
    does; :func:`fitting_sidecar` checks the sidecar against the profile)."""
    from ..io.profile_csv import read_station_profile

    sidecar, path = profile_sidecar(profile_file, meta_file, without)
    name = sidecar.route_name if sidecar is not None else None
    sp = read_station_profile(profile_file, name=name)
    checked = fitting_sidecar(sidecar, sp, _instead(without), named=meta_file is not None)
    return _renamed(sp, sidecar, checked, profile_file), checked, path


def _instead(without: str | None) -> str:
    """What a command with ``--meta`` does without a sidecar, for a warning's end."""
    return f"{without} (give --meta FILE to add them)" if without else "going on without it"


def read_profile_and_sidecar(profile_file, instead: str):
    """``(station profile, sidecar or None)`` for a command with no ``--meta``: the sidecar
    next to the profile when it is readable and fits the profile, else None after a warning
    that ends with ``instead`` (what the command does without it)."""
    from ..io.profile_csv import read_station_profile

    sidecar = sidecar_or_none(profile_file, instead)
    sp = read_station_profile(profile_file, name=sidecar.route_name if sidecar else None)
    checked = fitting_sidecar(sidecar, sp, instead)
    return _renamed(sp, sidecar, checked, profile_file), checked


def _renamed(sp, sidecar, checked, profile_file):
    """The profile named after its file again when its sidecar was set aside."""
    if sidecar is None or checked is not None or not sidecar.route_name:
        return sp
    import dataclasses
    from pathlib import Path

    return dataclasses.replace(sp, name=Path(profile_file).stem)


def fitting_sidecar(sidecar, sp, instead: str, named: bool = False):
    """``sidecar`` when its limits and constraints are valid for the profile ``sp`` (limits
    within their ranges; every stop, zone, friction and superelevation section on the
    profile's stations; dwells zero or more), else: for a sidecar the user ``named`` (``--meta``)
    a :class:`~curvespeed.errors.SpeedFileError`, for one found next to the profile a warning
    naming it and what is wrong, ending with ``instead``, and None."""
    if sidecar is None:
        return None
    import warnings

    from ..errors import CurvespeedWarning, SpeedFileError
    from ..limits import validate_limits
    from ..route_checks import validate_constraints

    try:
        with warnings.catch_warnings():
            # a zone or section running past an end is what plan warned about and clipped
            warnings.simplefilter("ignore", CurvespeedWarning)
            validate_limits(sidecar.limits, where="limits", warn=False)
            validate_constraints(sidecar.constraints, sp.length_m, bool(sidecar.closed))
        return sidecar
    except CurvespeedError as exc:
        problem = (f"{sidecar.source}: does not fit the profile {sp.source} "
                   f"(0..{sp.length_m:.2f} m): {exc}")
    if named:
        raise SpeedFileError(f"{problem}; write the sidecar again with curvespeed plan, or "
                             "drop --meta") from None
    warnings.warn(f"{problem}; the sidecar is ignored: {instead}", CurvespeedWarning,
                  stacklevel=3)
    return None


def radius_cell(*, low_m: float, estimate_m: float, high_m: float, compact: bool = False) -> str:
    """A curve's smallest radius for a terminal table: ``estimate (low-high)`` (the plausible
    range of :class:`curvespeed.check.uncertainty.RadiusInterval`; ``unbounded`` where the
    noise allows a straight); with ``compact``, the estimate alone where the range has no
    width (exact design geometry)."""
    if compact and low_m == estimate_m == high_m:
        return f"{estimate_m:.1f}"
    high = "unbounded" if high_m == float("inf") else f"{high_m:.1f}"
    return f"{estimate_m:.1f} ({low_m:.1f}-{high})"
