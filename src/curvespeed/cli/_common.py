"""Options and steps shared by several subcommands: reading and resampling a route."""

from __future__ import annotations

import functools
import sys

import click

from ..errors import CurvespeedError

EXIT_OK = 0
EXIT_VIOLATIONS = 1
EXIT_BAD_INPUT = 2


def handle_errors(func):
    """Turn library errors into a one-line message on stderr and exit status 2."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return func(*args, **kwargs)
        except CurvespeedError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(EXIT_BAD_INPUT)

    return wrapper


class NoiseParam(click.ParamType):
    """A noise level in metres, or ``auto`` (estimated from the points)."""

    name = "noise"

    def convert(self, value, param, ctx):
        if value is None or (isinstance(value, str) and value.strip().lower() == "auto"):
            return None
        try:
            number = float(value)
        except (TypeError, ValueError):
            self.fail(f"{value!r} is neither 'auto' nor a number of metres", param, ctx)
        if not (number > 0 and number < float("inf")):
            self.fail(f"{value!r} must be a positive number of metres, or 'auto'", param, ctx)
        return number


def geometry_options(func):
    """Add the route-resampling options (spacing, noise, closed/open, part) to a command."""
    options = [
        click.option("--spacing", "spacing_m", type=float, default=1.0, show_default=True,
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
        click.option("--part", "part", type=click.IntRange(min=1), default=None, metavar="N",
                     help="Where the recorded vehicle reverses, the drive splits into parts: "
                          "use part N (default: the longest)."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def load_geometry(route_file, spacing_m, position_noise_m, elevation_noise_m, closed,
                  use_elevation=True, part=None):
    """Read ``route_file`` and resample it; library errors propagate to the CLI handler."""
    from ..geometry import build_geometry
    from ..io import read_route

    route = read_route(route_file)
    geometry = build_geometry(route, spacing_m=spacing_m, position_noise_m=position_noise_m,
                              elevation_noise_m=elevation_noise_m, closed=closed,
                              part=None if part is None else part - 1,
                              use_elevation=use_elevation)
    return route, geometry


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
