"""Profiles in, trajectories out: the files behind ``curvespeed export`` and ``curvespeed plot``.

Reading
    :func:`read_station_profile` reads a profile CSV (as written by ``curvespeed plan``, see
    :mod:`curvespeed.io.profile_csv`) into a :class:`~curvespeed.export.StationProfile`;
    :func:`read_profile_meta` reads its JSON sidecar (:mod:`curvespeed.io.meta_json`) back into
    the limits and route constraints the profile was planned with.

Writing a :class:`~curvespeed.export.Trajectory` (atomically, deterministic bytes):

``csv``
    header ``time_s,station_m,x_m,y_m,heading_rad,speed_mps,accel_mps2,curvature_1pm,
    yaw_rate_radps,lat_accel_mps2`` (then ``lat,lon`` for geographic profiles), one row per
    sample.
``json``
    one object::

        {"format": "curvespeed-trajectory", "format_version": 1,
         "route": {"name": ..., "profile": ...},
         "sampling": {"mode": "time", "time_step_s": 0.05}
                  or {"mode": "station", "station_step_m": 1.0},
         "dwell_s": ..., "stop_stations_m": [...],
         "planned_time_s": ..., "total_time_s": ..., "samples": N,
         "columns": {"time_s": [...], "station_m": [...], ...}}

    ``columns`` holds the CSV's columns, by the same names and in the same order, as arrays of
    equal length.
``geojson``
    an RFC 7946 ``Feature`` whose geometry is a ``LineString`` of the samples as
    ``[longitude, latitude]`` (WGS84 degrees) and whose ``properties`` hold ``name``,
    ``sampling``, ``dwell_s``, ``total_time_s`` and the per-vertex arrays ``time_s``,
    ``station_m``, ``speed_mps`` and ``curvature_1pm`` (one value per position). Only for
    geographic profiles: a metric profile has no longitude/latitude to write.

Numbers use the fixed formats of :mod:`curvespeed.io._format`: times, speeds and accelerations
1e-6, stations and positions 0.1 mm, heading 1e-7 rad, curvature 1e-9 1/m, yaw rate 1e-7 rad/s,
latitude/longitude 1e-9 degree.
"""

from __future__ import annotations

import dataclasses
import enum
import json
import math
import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import CurvespeedWarning, OutputError, SpeedFileError
from ..export import (TRAJECTORY_COLUMNS, SamplingMode, StationProfile, Trajectory,
                      make_station_profile, planned_time_mismatch)
from ..limits import Limits, RouteConstraints, SpeedZone, Stop, Superelevation
from ._common import read_text
from ._format import CURVATURE, DEGREES, METRES, RADIANS, format_column, format_columns
from .atomic import atomic_open
from .table_csv import read_table_csv

#: Times (s), speeds (m/s) and accelerations (m/s^2): 1e-6.
KINEMATIC = ".6f"
#: Yaw rate, rad/s: 1e-7 (as headings).
YAW_RATE = RADIANS

#: Number format of every trajectory column.
COLUMN_FORMATS = {
    "time_s": KINEMATIC, "station_m": METRES, "x_m": METRES, "y_m": METRES,
    "heading_rad": RADIANS, "speed_mps": KINEMATIC, "accel_mps2": KINEMATIC,
    "curvature_1pm": CURVATURE, "yaw_rate_radps": YAW_RATE, "lat_accel_mps2": KINEMATIC,
    "lat": DEGREES, "lon": DEGREES,
}

#: Columns a profile CSV must have for export and plots.
REQUIRED_PROFILE_COLUMNS = ("station_m", "x_m", "y_m", "heading_rad", "curvature_1pm",
                            "speed_mps")
_OPTIONAL_PROFILE_COLUMNS = ("time_s", "accel_mps2", "jerk_mps3", "lat_accel_mps2",
                             "limit_speed_mps", "z_m", "grade", "lat", "lon")

#: A profile's own time_s may differ from the time recomputed from its rounded stations (0.1 mm)
#: and speeds (1e-6 m/s) by far less than this (s, plus the same fraction of the total time);
#: a larger gap means the columns were edited or come from another model.
TIME_MISMATCH_S = 1e-3
TIME_MISMATCH_REL = 1e-4


class TrajectoryFormat(enum.Enum):
    """Output formats of ``curvespeed export`` (the command line offers these values)."""

    CSV = "csv"
    JSON = "json"
    GEOJSON = "geojson"


#: Output file extension (lower case) -> format, for choosing the format from the file name.
FORMAT_BY_SUFFIX = {".csv": TrajectoryFormat.CSV, ".json": TrajectoryFormat.JSON,
                    ".geojson": TrajectoryFormat.GEOJSON}


def format_from_suffix(path: str | os.PathLike) -> TrajectoryFormat | None:
    """The format an output file name implies (``.csv``, ``.json``, ``.geojson``), or None."""
    return FORMAT_BY_SUFFIX.get(Path(path).suffix.lower())


# -- reading -----------------------------------------------------------------------------------

def read_station_profile(path: str | os.PathLike, name: str | None = None) -> StationProfile:
    """Read a profile CSV into a :class:`~curvespeed.export.StationProfile`.

    Needs the columns :data:`REQUIRED_PROFILE_COLUMNS`; keeps ``time_s``, ``accel_mps2``,
    ``jerk_mps3``, ``lat_accel_mps2``, ``limit_speed_mps``, ``binding``, ``z_m``, ``grade``,
    ``lat`` and ``lon`` where present. Warns (:class:`CurvespeedWarning`) when the file's own
    ``time_s`` disagrees with the time implied by its stations and speeds.

    Parameters
    ----------
    path : str or path-like
        The profile CSV.
    name : str, optional
        Route name for titles (default: the file name without extension).

    Raises
    ------
    SpeedFileError
        Unreadable file, missing column, a bad value, stations not increasing, a negative speed,
        or a step with zero speed at both ends; the message names the file and line.
    """
    table = read_table_csv(path, min_rows=2)
    required = table.require(*REQUIRED_PROFILE_COLUMNS, what="a profile (export and plot)")
    optional = {c: table.columns.get(c) for c in _OPTIONAL_PROFILE_COLUMNS}
    where = np.array([f"line {n}" for n in table.lines], dtype=object)
    sp = make_station_profile(*required, binding=table.columns.get("binding"),
                              name=name or Path(path).stem, source=table.source, where=where,
                              **optional)
    mismatch = planned_time_mismatch(sp)
    if mismatch is not None:
        k, gap = mismatch
        if gap > TIME_MISMATCH_S + TIME_MISMATCH_REL * sp.moving_time_s:
            warnings.warn(
                f"{table.source}: {sp.node_label(k)}: time_s differs by {gap:.3f} s from the time "
                "its stations and speeds imply (2 ds / (v[k] + v[k+1]) per step); curvespeed uses "
                "stations and speeds", CurvespeedWarning, stacklevel=2)
    return sp


@dataclass(frozen=True)
class ProfileSidecar:
    """What a profile's JSON sidecar says about how the profile was made.

    Attributes
    ----------
    limits : Limits
        The vehicle limits used.
    constraints : RouteConstraints
        Zones, stops, superelevation and end speeds used.
    route_name : str or None
        The route's name.
    closed : bool or None
        Whether the route is a loop.
    total_time_s : float or None
        Planned time, s.
    source : str
        The sidecar's file name.
    """

    limits: Limits
    constraints: RouteConstraints
    route_name: str | None
    closed: bool | None
    total_time_s: float | None
    source: str


def read_profile_meta(path: str | os.PathLike) -> ProfileSidecar:
    """Read a profile's JSON sidecar (``PROFILE.meta.json``).

    Raises
    ------
    SpeedFileError
        Missing or unreadable file, invalid JSON, or a ``limits``/``constraints`` entry that is
        not what ``curvespeed plan`` writes; the message names the file and the key.
    """
    source = str(path)
    text = read_text(path, SpeedFileError)
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise SpeedFileError(f"{source}: line {exc.lineno}, column {exc.colno}: not valid JSON "
                             f"({exc.msg}); write the sidecar again with curvespeed plan") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("limits"), dict):
        raise SpeedFileError(f"{source}: no \"limits\" object; this is not a curvespeed profile "
                             "sidecar (PROFILE.meta.json written by curvespeed plan)")

    def number(value, key: str, optional: bool = False):
        if value is None and optional:
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value):
            raise SpeedFileError(f"{source}: {key} must be a finite number, got "
                                 f"{json.dumps(value)[:40]}")
        return float(value)

    fields = {f.name: f for f in dataclasses.fields(Limits)}
    optional_limits = {"max_jerk_mps3", "lateral_friction_coefficient", "max_power_w", "mass_kg"}
    values = {key: number(value, f"limits.{key}", key in optional_limits)
              for key, value in doc["limits"].items() if key in fields}
    limits = Limits(**values)

    raw = doc.get("constraints") or {}
    if not isinstance(raw, dict):
        raise SpeedFileError(f"{source}: \"constraints\" must be an object")

    def entries(key: str, cls, names: tuple[str, ...]):
        items = raw.get(key) or []
        if not isinstance(items, list):
            raise SpeedFileError(f"{source}: constraints.{key} must be a list")
        out = []
        for i, item in enumerate(items):
            label = f"constraints.{key}[{i}]"
            if not isinstance(item, dict) or any(n not in item for n in names):
                raise SpeedFileError(f"{source}: {label} needs {', '.join(names)}")
            nums = [number(item[n], f"{label}.{n}") for n in names]
            out.append(cls(*nums, origin=str(item.get("origin") or "")))
        return tuple(out)

    constraints = RouteConstraints(
        zones=entries("zones", SpeedZone, ("start_m", "end_m", "max_speed_mps")),
        stops=entries("stops", Stop, ("station_m",)),
        superelevation=entries("superelevation", Superelevation, ("start_m", "end_m", "rate")),
        start_speed_mps=number(raw.get("start_speed_mps"), "constraints.start_speed_mps", True),
        end_speed_mps=number(raw.get("end_speed_mps"), "constraints.end_speed_mps", True))
    route = doc.get("route") if isinstance(doc.get("route"), dict) else {}
    name = route.get("name") if isinstance(route.get("name"), str) else None
    closed = route.get("closed") if isinstance(route.get("closed"), bool) else None
    total = doc.get("total_time_s")
    total = float(total) if isinstance(total, (int, float)) and not isinstance(total, bool) \
        else None
    return ProfileSidecar(limits=limits, constraints=constraints, route_name=name, closed=closed,
                          total_time_s=total, source=source)


# -- writing -----------------------------------------------------------------------------------

def trajectory_columns(trajectory: Trajectory) -> dict[str, tuple[np.ndarray, str]]:
    """Named columns with their number formats, in output order."""
    return {name: (values, COLUMN_FORMATS[name])
            for name, values in trajectory.columns().items()}


def write_trajectory(trajectory: Trajectory, path: str | os.PathLike,
                     fmt: TrajectoryFormat = TrajectoryFormat.CSV, force: bool = False) -> Path:
    """Write ``trajectory`` to ``path`` in format ``fmt`` (atomically; replace only with ``force``).

    Raises
    ------
    OutputError
        ``path`` exists without ``force``, its folder is missing, or GeoJSON was asked for a
        metric-only trajectory.
    """
    writer = {TrajectoryFormat.CSV: write_trajectory_csv,
              TrajectoryFormat.JSON: write_trajectory_json,
              TrajectoryFormat.GEOJSON: write_trajectory_geojson}[TrajectoryFormat(fmt)]
    return writer(trajectory, path, force=force)


def write_trajectory_csv(trajectory: Trajectory, path: str | os.PathLike,
                         force: bool = False) -> Path:
    """Write the CSV layout (module docstring)."""
    _check_finite(trajectory)
    text = format_columns(trajectory_columns(trajectory))
    with atomic_open(path, force) as fh:
        fh.write(text)
    return Path(path)


def write_trajectory_json(trajectory: Trajectory, path: str | os.PathLike,
                          force: bool = False) -> Path:
    """Write the JSON layout (module docstring)."""
    _check_finite(trajectory)
    cols = trajectory_columns(trajectory)
    body = ",\n".join(f"    {json.dumps(name)}: {_array(values, spec)}"
                      for name, (values, spec) in cols.items())
    head = [
        ("format", json.dumps("curvespeed-trajectory")),
        ("format_version", "1"),
        ("route", json.dumps({"name": trajectory.name, "profile": trajectory.source})),
        ("sampling", _sampling_json(trajectory)),
        ("dwell_s", _number(trajectory.dwell_s, KINEMATIC)),
        ("stop_stations_m", _array(trajectory.stop_stations_m, METRES)),
        ("planned_time_s", _number(trajectory.planned_time_s, KINEMATIC)),
        ("total_time_s", _number(trajectory.total_time_s, KINEMATIC)),
        ("samples", str(trajectory.n_samples)),
    ]
    text = ("{\n" + "".join(f"  {json.dumps(k)}: {v},\n" for k, v in head)
            + '  "columns": {\n' + body + "\n  }\n}\n")
    with atomic_open(path, force) as fh:
        fh.write(text)
    return Path(path)


def write_trajectory_geojson(trajectory: Trajectory, path: str | os.PathLike,
                             force: bool = False) -> Path:
    """Write the GeoJSON layout (module docstring): an RFC 7946 Feature with a LineString.

    Raises
    ------
    OutputError
        The trajectory has no latitude/longitude (a metric-only profile); nothing is written.
    """
    if not trajectory.is_geographic:
        raise OutputError(
            f"{path}: cannot write GeoJSON: {trajectory.source} is a metric-only profile (no "
            "lat, lon columns) and GeoJSON (RFC 7946) needs WGS84 longitude/latitude; export it "
            "as csv or json, or plan the route from a geographic file (lat,lon CSV, GeoJSON, GPX)")
    _check_finite(trajectory)
    lon = format_column(trajectory.lon, DEGREES)
    lat = format_column(trajectory.lat, DEGREES)
    coords = ",\n".join(f"      [{x}, {y}]" for x, y in zip(lon, lat))
    props = [
        ("name", json.dumps(trajectory.name)),
        ("profile", json.dumps(trajectory.source)),
        ("sampling", _sampling_json(trajectory)),
        ("dwell_s", _number(trajectory.dwell_s, KINEMATIC)),
        ("total_time_s", _number(trajectory.total_time_s, KINEMATIC)),
        ("time_s", _array(trajectory.time_s, KINEMATIC)),
        ("station_m", _array(trajectory.station_m, METRES)),
        ("speed_mps", _array(trajectory.speed_mps, KINEMATIC)),
        ("curvature_1pm", _array(trajectory.curvature_1pm, CURVATURE)),
    ]
    text = ('{\n  "type": "Feature",\n  "geometry": {\n    "type": "LineString",\n'
            '    "coordinates": [\n' + coords + "\n    ]\n  },\n  \"properties\": {\n"
            + ",\n".join(f"    {json.dumps(k)}: {v}" for k, v in props) + "\n  }\n}\n")
    with atomic_open(path, force) as fh:
        fh.write(text)
    return Path(path)


def _sampling_json(trajectory: Trajectory) -> str:
    if trajectory.mode is SamplingMode.TIME:
        return f'{{"mode": "time", "time_step_s": {_number(trajectory.interval, KINEMATIC)}}}'
    return f'{{"mode": "station", "station_step_m": {_number(trajectory.interval, METRES)}}}'


def _number(value: float, spec: str) -> str:
    return format_column([value], spec)[0]


def _array(values, spec: str) -> str:
    return "[" + ", ".join(format_column(values, spec)) + "]"


def _check_finite(trajectory: Trajectory) -> None:
    for name, values in trajectory.columns().items():
        if not np.all(np.isfinite(values)):
            k = int(np.flatnonzero(~np.isfinite(values))[0])
            raise ValueError(f"trajectory column {name} is not finite at sample {k}")


__all__ = ["COLUMN_FORMATS", "FORMAT_BY_SUFFIX", "ProfileSidecar", "REQUIRED_PROFILE_COLUMNS",
           "TRAJECTORY_COLUMNS", "TrajectoryFormat", "format_from_suffix", "read_profile_meta",
           "read_station_profile", "trajectory_columns", "write_trajectory",
           "write_trajectory_csv", "write_trajectory_geojson", "write_trajectory_json"]
