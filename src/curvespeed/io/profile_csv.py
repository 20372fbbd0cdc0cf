"""A :class:`~curvespeed.profile.Profile` as CSV: written by ``curvespeed plan``, read back by
``curvespeed export`` and ``plot``.

Columns, in this order (more may follow in later versions; readers should go by name):

``station_m, x_m, y_m, heading_rad, curvature_1pm, speed_mps, accel_mps2, jerk_mps3,
lat_accel_mps2, time_s``
    at every node (see :mod:`curvespeed.profile` for the definitions);
``limit_speed_mps, binding``
    the node's speed ceiling (lateral limits, top speed, zones, stops) and the limit that binds;
``step_kind``
    how the step from this station to the next is driven (:class:`StepKind`):
    ``constant_accel``, or ``jerk_ramp`` for a step next to rest planned with a jerk bound
    (:attr:`Profile.rest_step <curvespeed.profile.Profile.rest_step>`; its shape follows from its
    time, :mod:`curvespeed.rest_step`), or ``linear_accel`` for a step away from rest driven at
    constant jerk (a step a launch's jerk ramp spans, :attr:`Profile.linear_time_coef
    <curvespeed.profile.Profile.linear_time_coef>`; its start acceleration and jerk follow from
    its time, :func:`curvespeed.rest_step.linear_accel_step`); ``accel_turn``,
    ``accel_rise_hold``, ``accel_hold_fall``, ``accel_fall_hold`` or ``accel_rise_hold_fall``
    for a step inside which the jerk switches (:mod:`curvespeed.jerk_switch`);
    ``constant_jerk`` (older profiles) is still read; empty on the last row, where no step
    follows;
``z_m, grade``
    when the route has elevation;
``lat, lon``
    when the route was geographic.

Stations, elevations, speeds and times are written with 9 decimals (:data:`PROFILE_METRES`,
:data:`SPEED`, :data:`TIME`), accelerations and jerk with 6; the rest of the geometry as in
:mod:`curvespeed.io.geometry_csv`. Output is deterministic and
written atomically.

:func:`read_station_profile` reads such a file (or any CSV with the columns
:data:`REQUIRED_PROFILE_COLUMNS`) into a :class:`~curvespeed.export.StationProfile`.
"""

from __future__ import annotations

import enum
import os
import warnings
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from .. import jerk_switch
from ..errors import CurvespeedWarning, SpeedFileError
from ..profile import Profile
from ._format import format_columns
from .atomic import write_text_atomic
from .geometry_csv import geometry_columns
from .profile_positions import check_positions
from .table_csv import Table, read_table_csv

if TYPE_CHECKING:
    from ..export import StationProfile

#: Accelerations (m/s^2), jerk (m/s^3), times (s) and speed caps (m/s): 1e-6.
KINEMATIC = ".6f"
#: Speeds carry 9 decimals: a reader that derives acceleration and jerk from them (``check
#: --speeds``, ``export``) differentiates twice over steps of a few hundredths of a second, and
#: 6 decimals' rounding (5e-7 m/s) came back as up to ``4 v^2 dv / ds^2`` = 1.8e-3 m/s^3 at
#: 30 m/s and 1 m stations: a plan riding a 0.5 m/s^3 jerk bound read 0.3 % over it. At 9
#: decimals that is 2e-6 m/s^3.
SPEED = ".9f"
#: Times carry 9 decimals too: a ``jerk_ramp`` or ``linear_accel`` step is driven as its time
#: says, and a step a launch's ramp spans is only ``(c / 2 - 1)`` = 6e-5 of its 0.12 s longer
#: than at constant acceleration far out on a 0.5 m/s^3 ramp, so 6 decimals' rounding moved the
#: jerk read back from it by up to 5 %.
TIME = ".9f"
#: Stations and elevations carry 9 decimals in a profile (the route file's 0.1 mm elsewhere):
#: the time coefficient ``c`` of a ``jerk_ramp`` or ``linear_accel`` step is read back as
#: ``T (v + v') / ds``, so a station step rounded by 1e-4 m moved ``c`` by 3e-4. Where a ramp
#: to rest nearly fills its step ``c`` is close to 3 and flat in the shape, and on a route whose
#: spacing is not a round number (every fitted log) that moved the shape read back by 0.5 %
#: and its constant part by 13 %: the change of acceleration at the step's moving node, read
#: over twice that part, came back at 1.07 of the jerk bound the plan holds (a wet-road stop
#: planned from an RTK log). A ``linear_accel`` step's jerk, ``12 ds (c / 2 - 1) / T^3``, is
#: as sensitive. At 9 decimals ``c`` is good to about 1e-8. An exported trajectory's pitch
#: follows the elevation's change over a step: at 0.1 mm it was off by up to 1.4e-4 rad at 1 m
#: stations (0.2-2.5 % of the grades tried) and 3e-4 rad at 0.25 m (6 % of a 0.5 % grade).
PROFILE_METRES = ".9f"

#: Columns every profile CSV starts with, in order.
PROFILE_COLUMNS = ("station_m", "x_m", "y_m", "heading_rad", "curvature_1pm",
                   "curvature_bound_1pm", "speed_mps", "accel_mps2", "jerk_mps3",
                   "lat_accel_mps2", "time_s")

#: Columns a profile CSV must have for export and plots.
REQUIRED_PROFILE_COLUMNS = ("station_m", "x_m", "y_m", "heading_rad", "curvature_1pm",
                            "speed_mps")
_OPTIONAL_PROFILE_COLUMNS = ("time_s", "accel_mps2", "jerk_mps3", "lat_accel_mps2",
                             "limit_speed_mps", "z_m", "grade", "lat", "lon",
                             "curvature_bound_1pm")

#: A profile's own time_s may differ from the time recomputed from its rounded stations and
#: speeds by far less than this (s, plus the same fraction of the total time);
#: a larger gap means the columns were edited or come from another model.
TIME_MISMATCH_S = 1e-3
TIME_MISMATCH_REL = 1e-4


class StepKind(enum.Enum):
    """How a step is driven: the values of the ``step_kind`` column."""

    #: Constant acceleration: the step takes ``2 ds / (v[k] + v[k+1])``.
    CONSTANT_ACCEL = "constant_accel"
    #: Only next to rest: a jerk ramp at the rest end, constant acceleration up to the moving
    #: end; the step takes ``c ds / v`` (``v`` at its moving end, ``c`` in [2, 3] read from
    #: ``time_s``), see :mod:`curvespeed.rest_step`.
    JERK_RAMP = "jerk_ramp"
    #: Only away from rest: the acceleration linear in time over the step (constant jerk); the
    #: step takes ``c ds / (v[k] + v[k+1])`` with ``c`` up to 3 read from ``time_s`` (below 2
    #: where the acceleration falls, the speed peaking inside the step through a move's top
    #: speed), see :func:`curvespeed.rest_step.linear_accel_step`.
    LINEAR_ACCEL = "linear_accel"
    #: The jerk switches once inside the step; timed like ``linear_accel``. Read from its
    #: slower node (backwards where its speed falls), it starts with the acceleration there of
    #: the step across that node (0 at rest; that step must not switch too) and is, on either
    #: side of one instant: a rise, then a fall (``accel_turn``: where a move's acceleration
    #: turns); a rise, then constant (``accel_rise_hold``: reaching a cap); constant, then a
    #: fall (``accel_hold_fall``: leaving it); a fall, then constant (``accel_fall_hold``:
    #: reaching the top speed). ``accel_rise_hold_fall`` switches twice (a rise, constant, a
    #: fall: a cap held for less than the step) and ends with the acceleration of the step
    #: across its faster node, which must not switch. See :mod:`curvespeed.jerk_switch`.
    ACCEL_TURN = "accel_turn"
    ACCEL_RISE_HOLD = "accel_rise_hold"
    ACCEL_HOLD_FALL = "accel_hold_fall"
    ACCEL_FALL_HOLD = "accel_fall_hold"
    ACCEL_RISE_HOLD_FALL = "accel_rise_hold_fall"
    #: Constant jerk over the whole step, only next to rest: ``3 ds / v``. Written by older
    #: versions; read, never written.
    CONSTANT_JERK = "constant_jerk"


# -- writing -----------------------------------------------------------------------------------

def step_kinds(profile: Profile) -> list[str]:
    """The ``step_kind`` cell of every row: the step to the next station, empty on the last."""
    kind = np.where(np.asarray(profile.rest_step, dtype=bool), StepKind.JERK_RAMP.value,
                    StepKind.CONSTANT_ACCEL.value).astype(object)
    if profile.linear_time_coef is not None:
        kind[profile.linear_time_coef > 0.0] = StepKind.LINEAR_ACCEL.value
    if profile.switch_step is not None:
        for code, value in SWITCH_KINDS.items():
            kind[profile.switch_step == code] = value
    return kind.tolist() + [""]


def profile_columns(profile: Profile) -> dict[str, tuple[object, str]]:
    """Named columns and number formats of ``profile``, in output order."""
    geo = geometry_columns(profile.geometry)
    columns = {name: geo[name] for name in PROFILE_COLUMNS[:5]}
    columns["station_m"] = (profile.geometry.station_m, PROFILE_METRES)
    columns.update({
        "curvature_bound_1pm": (profile.geometry.planning_curvature_1pm, geo["curvature_1pm"][1]),
        "speed_mps": (profile.speed_mps, SPEED),
        "accel_mps2": (profile.accel_mps2, KINEMATIC),
        "jerk_mps3": (profile.jerk_mps3, KINEMATIC),
        "lat_accel_mps2": (profile.lat_accel_mps2, KINEMATIC),
        "time_s": (profile.time_s, TIME),
        "limit_speed_mps": (profile.limit_speed_mps, KINEMATIC),
        "binding": (profile.binding, "s"),
        "step_kind": (step_kinds(profile), "s"),
    })
    for name in ("z_m", "grade", "lat", "lon"):
        if name in geo:
            columns[name] = geo[name]
    if "z_m" in columns:
        columns["z_m"] = (profile.geometry.z_m, PROFILE_METRES)
    return columns


def profile_csv_text(profile: Profile) -> str:
    """The profile CSV file's text (module docstring)."""
    return format_columns(profile_columns(profile))


def write_profile_csv(profile: Profile, path: str | os.PathLike, force: bool = False) -> Path:
    """Write ``profile`` to ``path`` (atomically; an existing file only with ``force``)."""
    return write_text_atomic(profile_csv_text(profile), path, force)


# -- reading -----------------------------------------------------------------------------------

def read_station_profile(path: str | os.PathLike, name: str | None = None) -> StationProfile:
    """Read a profile CSV into a :class:`~curvespeed.export.StationProfile`.

    Needs the columns :data:`REQUIRED_PROFILE_COLUMNS`; keeps ``time_s``, ``accel_mps2``,
    ``jerk_mps3``, ``lat_accel_mps2``, ``limit_speed_mps``, ``binding``, ``z_m``, ``grade``,
    ``lat``, ``lon`` and ``curvature_bound_1pm`` where present. How each step is driven comes
    from the ``step_kind`` column (:func:`read_step_kinds`; the time of a ``jerk_ramp`` or a
    ``linear_accel`` step from ``time_s``); a file without it (older or hand-made) has its
    steps next to rest recognised from ``time_s`` (:func:`curvespeed.export.detect_rest_steps`)
    and every other step at constant acceleration. Warns (:class:`CurvespeedWarning`) when
    the file's own ``time_s`` disagrees with the time implied by its stations and speeds.

    Parameters
    ----------
    path : str or path-like
        The profile CSV.
    name : str, optional
        Route name for titles (default: the file name without extension).

    Raises
    ------
    SpeedFileError
        Unreadable file, missing column, a bad value (a ``step_kind`` among them), stations not
        increasing, a negative speed, or a step with zero speed at both ends; the message names
        the file and line.
    """
    # the export layer only where a profile is read (writing one, as plan does, needs none of it)
    from ..export import make_station_profile, planned_time_mismatch, steps_next_to_rest

    table = read_table_csv(path, min_rows=2)
    required = table.require(*REQUIRED_PROFILE_COLUMNS, what="a profile (export and plot)")
    optional = {c: table.columns.get(c) for c in _OPTIONAL_PROFILE_COLUMNS}
    kinds = read_step_kinds(table)
    coef, linear = (None, None) if kinds is None else _time_coefs(table, kinds)
    # a step's kind must suit its ends' speeds; that is checked once the speeds themselves are
    # (a step with both ends at rest is refused as never driven, which says more)
    v = table.columns["speed_mps"]
    sp = make_station_profile(*required, binding=table.columns.get("binding"),
                              name=name or Path(path).stem, source=table.source,
                              where=table.where,
                              rest_time_coef=None if coef is None else
                              np.where(steps_next_to_rest(v), coef, 0.0),
                              linear_time_coef=None if linear is None else
                              np.where((v[:-1] > 0.0) & (v[1:] > 0.0)
                                       & (kinds == StepKind.LINEAR_ACCEL.value), linear, 0.0),
                              **optional)
    if kinds is not None:
        _check_step_kinds(table, kinds, sp.speed_mps)
        sp = _with_switches(table, kinds, sp, linear)
    check_positions(sp)
    mismatch = planned_time_mismatch(sp)
    if mismatch is not None:
        k, gap = mismatch
        if gap > TIME_MISMATCH_S + TIME_MISMATCH_REL * sp.moving_time_s:
            warnings.warn(
                f"{table.source}: {sp.node_label(k)}: time_s differs by {gap:.3f} s from the time "
                "its stations and speeds imply (2 ds / (v[k] + v[k+1]) per step, otherwise where "
                "step_kind says a step is not driven at constant acceleration); curvespeed uses "
                "stations and speeds",
                CurvespeedWarning, stacklevel=2)
    return sp


def read_step_kinds(table: Table) -> np.ndarray | None:
    """The ``step_kind`` column, one value per step (an array of :class:`StepKind` values);
    None without the column.

    Every row but the last holds one of the :class:`StepKind` values; the last row (no step
    follows it) is empty, or one of those values, which is ignored. Whether each step next to
    rest has exactly one end at rest is checked against the speeds by
    :func:`read_station_profile`.

    Raises
    ------
    SpeedFileError
        Any other value; the message names the file, the line and the value, and says what is
        allowed.
    """
    cells = table.columns.get("step_kind")
    if cells is None:
        return None
    allowed = [kind.value for kind in StepKind]
    kinds = np.asarray(cells, dtype=object)
    valid = np.isin(kinds, allowed)
    valid[-1] |= kinds[-1] == ""
    bad = np.flatnonzero(~valid)
    if bad.size:
        k = int(bad[0])
        cut = (" (the last line has no line end: the file looks cut short; write it again)"
               if table.unterminated and k == kinds.size - 1 else "")
        raise SpeedFileError(
            f"{table.source}: {table.where[k]}: column 'step_kind' value '{kinds[k]}' is not a "
            f"step kind{cut}; use {', '.join(allowed[:-1])} or {allowed[-1]} for the step from "
            "that station to the next (empty on the last row), or remove the column to have "
            "the steps recognised from time_s")
    return kinds[:-1]


_REST_KINDS = (StepKind.JERK_RAMP.value, StepKind.CONSTANT_JERK.value)
#: The kind of each switching pattern (:data:`curvespeed.jerk_switch.PATTERNS`), by its code.
SWITCH_KINDS = {jerk_switch.TURN: StepKind.ACCEL_TURN.value,
                jerk_switch.RISE_HOLD: StepKind.ACCEL_RISE_HOLD.value,
                jerk_switch.HOLD_FALL: StepKind.ACCEL_HOLD_FALL.value,
                jerk_switch.FALL_HOLD: StepKind.ACCEL_FALL_HOLD.value,
                jerk_switch.RISE_HOLD_FALL: StepKind.ACCEL_RISE_HOLD_FALL.value}
#: Kinds of steps timed ``c ds / (v + v')`` with ``c`` from ``time_s``: away from rest, but a
#: switching step may have an end at rest.
_MOVING_KINDS = (StepKind.LINEAR_ACCEL.value, *SWITCH_KINDS.values())
#: Kinds whose time coefficient comes from ``time_s``.
_TIMED_KINDS = (StepKind.JERK_RAMP.value,) + _MOVING_KINDS


def _time_coefs(table: Table, kinds: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The ``c`` of each step's time ``c ds / (v[k] + v[k+1])`` by its kind, as
    ``(rest_time_coef, linear_time_coef)``: 3 for ``constant_jerk`` and from ``time_s`` for
    ``jerk_ramp`` in the first, from ``time_s`` for ``linear_accel`` and ``accel_turn`` in the
    second, 0 elsewhere (constant acceleration)."""
    rest = np.where(kinds == StepKind.CONSTANT_JERK.value, 3.0, 0.0)
    timed = np.isin(kinds, _TIMED_KINDS)
    if not timed.any():
        return rest, np.zeros(kinds.size)
    times = table.columns.get("time_s")
    if times is None:
        k = int(np.flatnonzero(timed)[0])
        raise SpeedFileError(
            f"{table.source}: {table.where[k]}: column 'step_kind' value '{kinds[k]}' needs the "
            "time_s column (how the step is driven follows from its time); add time_s, or "
            "remove the step_kind column")
    from ..export import step_time_coef_from_times

    s, v = table.columns["station_m"], table.columns["speed_mps"]
    linear = np.isin(kinds, _MOVING_KINDS)
    with np.errstate(divide="ignore", invalid="ignore"):
        # a step driven at constant jerk, or switching, may take less than 2 ds / (v + v'):
        # its speed may peak inside it (a move's top speed)
        from_times = step_time_coef_from_times(s, v, times, np.where(linear, 0.0, 2.0))
        ramp = np.where(3.0 - from_times <= _whole_ramp_reach(s, v, times), 3.0, from_times)
    return (np.where(kinds == StepKind.JERK_RAMP.value, ramp, rest),
            np.where(linear, from_times, 0.0))


def _whole_ramp_reach(station_m, speed_mps, time_s) -> np.ndarray:
    """How far below 3 a ``jerk_ramp`` step's ``c = T (v + v') / ds`` may be read from a file
    whose step is a ramp over its whole length (``c = 3``): twice the most that rounding
    ``T``, ``v + v'`` and ``ds`` (each a difference or sum of two values written to 9 decimals,
    so off by up to 1e-9) moves it. Near 3 the shape is ill-conditioned (``1 - u`` grows as
    ``sqrt(3 - c)``): a ``c`` read 5e-10 below 3 gave a constant part of 3e-5 of the step, over
    which the change of acceleration at the moving node (1e-6 m/s^2 of rounding) read as 0.9 of
    a 0.5 m/s^3 jerk bound (6 times it at 1e-13 below), where the plan's ramp runs on through
    the node. Such a ``c`` is read as 3."""
    v = np.asarray(speed_mps, dtype=float)
    relative = (1e-9 / np.diff(np.asarray(time_s, dtype=float)) + 1e-9 / (v[:-1] + v[1:])
                + 1e-9 / np.diff(np.asarray(station_m, dtype=float)))
    return np.where(np.isfinite(relative), 2.0 * 3.0 * relative, 0.0)    # (a bad step: as read)


def check_step_kind_column(table: Table, speed_mps: np.ndarray) -> None:
    """The ``step_kind`` rules of :func:`read_station_profile` for any table with station and
    speed rows (``check --speeds`` reads a profile too): every value a step kind, each suited
    to its step's speeds, a timed one with a ``time_s`` column. Nothing to check without the
    column."""
    kinds = read_step_kinds(table)
    if kinds is not None:
        rest, linear = _time_coefs(table, kinds)
        _check_step_kinds(table, kinds, speed_mps)
        _fitting_switches(table, kinds, rest, linear)


def _check_step_kinds(table: Table, kinds: np.ndarray, speed_mps: np.ndarray) -> None:
    """Refuse a step kind next to rest on a step without exactly one end at rest, and
    ``linear_accel`` on a step with an end at rest (file, line, value)."""
    from ..export import steps_next_to_rest

    v, where = speed_mps, table.where
    next_to_rest = steps_next_to_rest(v)
    for bad, allowed_on in ((np.isin(kinds, _REST_KINDS) & ~next_to_rest,
                             "a step with exactly one end at rest (speed 0)"),
                            ((kinds == StepKind.LINEAR_ACCEL.value) & ((v[:-1] <= 0.0)
                                                                       | (v[1:] <= 0.0)),
                             "a step with neither end at rest")):
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            raise SpeedFileError(
                f"{table.source}: {where[k]}: column 'step_kind' value '{kinds[k]}' is allowed "
                f"only on {allowed_on}, but speed_mps is {v[k]:g} here and {v[k + 1]:g} on "
                f"{where[k + 1]}; use {StepKind.CONSTANT_ACCEL.value} there, or remove the "
                "column to have the steps recognised from time_s")


def switch_codes(kinds: np.ndarray) -> np.ndarray:
    """The pattern code (:data:`curvespeed.jerk_switch.PATTERNS`) of each step's kind, 0 for a
    kind without a switch."""
    codes = np.zeros(kinds.size, dtype=int)
    for code, value in SWITCH_KINDS.items():
        codes[kinds == value] = code
    return codes


def _with_switches(table: Table, kinds: np.ndarray, sp: StationProfile,
                   linear: np.ndarray) -> StationProfile:
    """``sp`` with its switching steps (:attr:`StationProfile.switch_step`; their time
    coefficients ``linear``, kept where an end is at rest too), each checked to fit
    (:func:`_fitting_switches`)."""
    import dataclasses

    codes = switch_codes(kinds)
    if not codes.any():
        return sp
    linear = np.where(codes > 0, linear, sp.linear_time_coef)
    _fitting_switches(table, kinds, sp.rest_time_coef, linear)
    return dataclasses.replace(sp, linear_time_coef=linear, switch_step=codes)


def _fitting_switches(table: Table, kinds: np.ndarray, rest_coef, linear_coef) -> None:
    """Refuse a switching step whose slower node has no step beyond it to continue (a
    switching one, or none while moving), or whose stations, speeds and time fit no motion of
    its kind (:func:`curvespeed.jerk_switch.shapes`; file, line)."""
    codes = switch_codes(kinds)
    if not codes.any():
        return
    s, v = table.columns["station_m"], table.columns["speed_mps"]
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = jerk_switch.shapes(s, v, rest_coef, linear_coef, codes).ok
    bad = np.flatnonzero((codes > 0) & ~ok)
    if bad.size:
        k = int(bad[0])
        raise SpeedFileError(
            f"{table.source}: {table.where[k]}: column 'step_kind' value '{kinds[k]}' needs the "
            "step across its slower node (the one with the lower speed) to be at rest or a step "
            "that does not switch, and its stations, speeds and time_s to fit an acceleration "
            "that continues that step's and switches its jerk once inside the step as the kind "
            f"says; they do not (edited values?): use {StepKind.LINEAR_ACCEL.value} or "
            f"{StepKind.CONSTANT_ACCEL.value} there, or plan the profile again")


__all__ = ["KINEMATIC", "PROFILE_COLUMNS", "REQUIRED_PROFILE_COLUMNS", "SWITCH_KINDS", "StepKind",
           "TIME_MISMATCH_REL", "TIME_MISMATCH_S", "check_step_kind_column", "profile_columns",
           "profile_csv_text",
           "read_station_profile",
           "read_step_kinds", "step_kinds", "write_profile_csv"]
