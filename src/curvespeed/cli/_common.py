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


def geometry_options(func):
    """Add the route-resampling options (spacing, noise, closed/open) to a command."""
    options = [
        click.option("--spacing", "spacing_m", type=float, default=1.0, show_default=True,
                     metavar="M", help="Station spacing of the resampled route, metres."),
        click.option("--position-noise", "position_noise_m", type=float, default=0.05,
                     show_default=True, metavar="M",
                     help="Largest expected position noise of the route points (standard deviation "
                          "per coordinate), metres; sets the spline smoothing (less if the points "
                          "scatter less). Use 1-3 for GPS traces."),
        click.option("--elevation-noise", "elevation_noise_m", type=float, default=None,
                     metavar="M", help="Expected elevation noise, metres (default 0.1)."),
        click.option("--closed/--open", "closed", default=None,
                     help="Treat the route as a closed loop or as open (default: closed when "
                          "its ends meet)."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def load_geometry(route_file, spacing_m, position_noise_m, elevation_noise_m, closed):
    """Read ``route_file`` and resample it; library errors propagate to the CLI handler."""
    from ..geometry import build_geometry
    from ..io import read_route

    route = read_route(route_file)
    kwargs = {}
    if elevation_noise_m is not None:
        kwargs["elevation_noise_m"] = elevation_noise_m
    geometry = build_geometry(route, spacing_m=spacing_m, position_noise_m=position_noise_m,
                              closed=closed, **kwargs)
    return route, geometry
