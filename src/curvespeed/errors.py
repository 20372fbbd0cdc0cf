"""Exceptions and warnings raised by curvespeed.

The library raises; only the command-line layer turns these into messages and exit codes.
Every message says what is wrong, where (file, line, point index or station) and what to do.
"""

from __future__ import annotations


class CurvespeedError(Exception):
    """Root of every error curvespeed raises on purpose."""


class RouteFormatError(CurvespeedError, ValueError):
    """A route file cannot be read: wrong header, bad value, unsupported structure."""


class RouteGeometryError(CurvespeedError, ValueError):
    """The points were read but do not form a drivable path (too few points, a reversal)."""


class LimitsError(CurvespeedError, ValueError):
    """A limits file or a limit given on the command line is invalid, or a bound given in
    code (a stop's dwell, a run's number of laps) lies outside its range."""


class SpeedFileError(CurvespeedError, ValueError):
    """A speed trace or profile file given for checking or export cannot be used."""


class ReplanError(CurvespeedError, ValueError):
    """An argument of the receding-horizon replanner is invalid: the horizon, or the vehicle's
    station, speed or acceleration (not a number, negative speed, off the route)."""


class VehicleError(CurvespeedError, ValueError):
    """A vehicle file or a vehicle parameter for replay is invalid."""


class InfeasibleError(CurvespeedError, RuntimeError):
    """No speed profile satisfies the limits and route constraints as given."""


class JerkBoundInfeasible(InfeasibleError):
    """No jerk-limited profile exists, and no single stop, curve, zone or end speed was found
    to blame by the closed forms (the planner may then probe the start and end speeds)."""


class SolverError(CurvespeedError, RuntimeError):
    """A numerical solver failed or returned an answer the verifier refuses."""


class OutputError(CurvespeedError, OSError):
    """An output file cannot be written (exists without --force, folder missing, ...)."""


class BatchError(CurvespeedError, ValueError):
    """A batch run cannot start: an input layer, a field or the output folder is unusable."""


class CurvespeedWarning(UserWarning):
    """Something was repaired or assumed; the result is usable but the input deserves a look."""
