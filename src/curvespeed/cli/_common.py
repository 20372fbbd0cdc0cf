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


def geometry_options(func):
    """Add the route-resampling options (spacing, noise, closed/open) to a command."""
    options = [
        click.option("--spacing", "spacing_m", type=FINITE, default=1.0, show_default=True,
                     metavar="M", help="Station spacing of the resampled route, metres."),
        click.option("--position-noise", "position_noise_m", type=FINITE, default=0.05,
                     show_default=True, metavar="M",
                     help="Largest expected position noise of the route points (standard deviation "
                          "per coordinate), metres; sets the spline smoothing (less if the points "
                          "scatter less). Use 1-3 for GPS traces."),
        click.option("--elevation-noise", "elevation_noise_m", type=FINITE, default=None,
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
