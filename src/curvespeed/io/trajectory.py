"""Trajectory files: what ``curvespeed export`` writes.

The profile it samples is read by :func:`curvespeed.io.profile_csv.read_station_profile` (next
to the profile's writer), and the profile's sidecar by
:func:`curvespeed.io.meta_json.read_profile_meta`.

Writing a :class:`~curvespeed.export.Trajectory` (atomically, deterministic bytes):

``csv``
    header ``time_s,station_m,x_m,y_m,heading_rad,speed_mps,accel_mps2,curvature_1pm,
    yaw_rate_radps,lat_accel_mps2`` (then ``lat,lon`` for geographic profiles), one row per
    sample; then, where they apply, ``elevation_m,pitch_rad`` (the profile has elevation),
    ``lap`` (a run of laps, from 1), ``time_utc`` (with a start time: ISO 8601 UTC, to the
    microsecond, :mod:`curvespeed.io.trajectory_time`) and ``stop_name`` (stops with names: the
    stop's name on the rows standing at it, empty elsewhere; quoted as RFC 4180 says where
    needed).
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
    equal length (text columns as strings). Where they apply, the head also has
    ``stop_names`` (one per stop), ``start_time`` (UTC), ``local_origin`` (``{"lat_deg",
    "lon_deg"}`` of the metric frame's origin, or ``"none"`` for a route in x/y only) and
    ``laps`` (``{"count", "start_station_m": [...], "start_time_s": [...]}``, each lap's start
    and the run's end).
``geojson``
    an RFC 7946 ``Feature`` whose geometry is a ``LineString`` of the samples as
    ``[longitude, latitude]`` (WGS84 degrees) and whose ``properties`` hold ``name``,
    ``sampling``, ``dwell_s``, ``total_time_s`` and the per-vertex arrays ``time_s``,
    ``station_m``, ``speed_mps`` and ``curvature_1pm`` (one value per position). Only for
    geographic profiles: a metric profile has no longitude/latitude to write. Where they
    apply, the properties also hold ``elevation_m``, ``pitch_rad``, ``lap``, ``time_utc``
    (per vertex), ``start_time`` and ``local_origin`` (elevation stays out of the positions:
    RFC 7946 altitude is height above the ellipsoid, which a route's elevation need not be).
    With stops, the properties hold ``stops``: one object per stop (``stop`` number from 1,
    ``name``, ``station_m``, ``dwell_s``, ``arrival_time_s``, and ``lap`` and
    ``arrival_time_utc`` where they apply), and with named stops the per-vertex
    ``stop_name``. With ``stop_points`` (``export --stop-points``) the file is a
    ``FeatureCollection`` of that Feature followed by one ``Point`` Feature per stop with the
    same properties.
``gpx``
    GPX 1.1 (:mod:`curvespeed.io.trajectory_gpx`): the samples as one track, a segment per
    lap, with ``ele`` where the profile has elevation and ``time`` (UTC) with a start time;
    the stops as waypoints. Only for geographic profiles.

Numbers use the fixed formats of :mod:`curvespeed.io._format`: times, speeds and accelerations
1e-6, stations and positions 0.1 mm, heading 1e-7 rad, curvature 1e-9 1/m, yaw rate 1e-7 rad/s,
latitude/longitude 1e-9 degree.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from ..errors import OutputError
from ..export import TRAJECTORY_COLUMNS, SamplingMode, Trajectory
from ._format import (CURVATURE, DEGREES, METRES, QUOTED, RADIANS, format_column, printable,
                      format_columns)
from .atomic import write_text_atomic
from .trajectory_format import FORMAT_BY_SUFFIX, TrajectoryFormat, format_from_suffix
from .trajectory_time import absolute_times, utc_text

#: Times (s), speeds (m/s) and accelerations (m/s^2): 1e-6.
KINEMATIC = ".6f"
#: Yaw rate, rad/s: 1e-7 (as headings).
YAW_RATE = RADIANS

#: Number format of every trajectory column.
COLUMN_FORMATS = {
    "time_s": KINEMATIC, "station_m": METRES, "x_m": METRES, "y_m": METRES,
    "heading_rad": RADIANS, "speed_mps": KINEMATIC, "accel_mps2": KINEMATIC,
    "curvature_1pm": CURVATURE, "yaw_rate_radps": YAW_RATE, "lat_accel_mps2": KINEMATIC,
    "lat": DEGREES, "lon": DEGREES, "elevation_m": METRES, "pitch_rad": RADIANS, "lap": "d",
}


# -- writing -----------------------------------------------------------------------------------

def trajectory_columns(trajectory: Trajectory) -> dict[str, tuple[np.ndarray, str]]:
    """Named columns with their number formats, in output order (numbers, then the text
    columns ``time_utc`` and ``stop_name`` where they apply)."""
    out = {name: (values, COLUMN_FORMATS[name])
           for name, values in trajectory.columns().items()}
    if trajectory.start_time is not None:
        out["time_utc"] = (absolute_times(trajectory.start_time, trajectory.time_s), QUOTED)
    if has_stop_names(trajectory):
        out["stop_name"] = (trajectory.stop_name, QUOTED)
    return out


def has_stop_names(trajectory: Trajectory) -> bool:
    """Whether any stop of the trajectory has a name."""
    return trajectory.stop_names is not None and any(trajectory.stop_names)


def write_trajectory(trajectory: Trajectory, path: str | os.PathLike,
                     fmt: TrajectoryFormat = TrajectoryFormat.CSV, force: bool = False) -> Path:
    """Write ``trajectory`` to ``path`` in format ``fmt`` (atomically; replace only with ``force``).

    Raises
    ------
    OutputError
        ``path`` may not be written (:class:`~curvespeed.io.atomic.OutputFiles`), or GeoJSON or
        GPX was asked for a metric-only trajectory.
    """
    fmt = TrajectoryFormat(fmt)
    if fmt in (TrajectoryFormat.GEOJSON, TrajectoryFormat.GPX) and not trajectory.is_geographic:
        raise OutputError(
            f"{path}: cannot write {'GeoJSON' if fmt is TrajectoryFormat.GEOJSON else 'GPX'}: "
            f"{trajectory.source} is a metric-only profile (no lat, lon columns) and GeoJSON "
            "(RFC 7946) and GPX need WGS84 longitude/latitude; export it as csv or json, or plan "
            "the route from a geographic file (lat,lon CSV, GeoJSON, GPX)")
    return write_text_atomic(trajectory_text(trajectory, fmt), path, force)


def trajectory_text(trajectory: Trajectory, fmt: TrajectoryFormat,
                    stop_points: bool = False) -> str:
    """The trajectory file's text in format ``fmt`` (module docstring).

    Raises
    ------
    ValueError
        GeoJSON for a metric-only trajectory (it has no longitude/latitude), or a value that is
        not finite (a defect: the samplers give finite values for the profiles readers accept).
    """
    _check_finite(trajectory)
    trajectory = _printable_names(trajectory)
    from .trajectory_gpx import gpx_text

    fmt = TrajectoryFormat(fmt)
    if fmt is TrajectoryFormat.GEOJSON:
        return _geojson_text(trajectory, stop_points)
    return {TrajectoryFormat.CSV: _csv_text, TrajectoryFormat.JSON: _json_text,
            TrajectoryFormat.GPX: gpx_text}[fmt](trajectory)


def _printable_names(trajectory: Trajectory) -> Trajectory:
    """The trajectory with characters XML 1.0 forbids replaced in its route name, source and
    stop names (:func:`~curvespeed.io._format.printable`): JSON could escape them, but a
    reader of any format should get the same names."""
    import dataclasses

    def names(values):
        return None if values is None else type(values)(printable(str(v)) for v in values)

    stop_name = (None if trajectory.stop_name is None else
                 np.array(names(trajectory.stop_name.tolist()), dtype=object))
    return dataclasses.replace(
        trajectory, name=printable(trajectory.name), source=printable(str(trajectory.source)),
        stop_names=names(trajectory.stop_names), stop_name=stop_name)


def write_trajectory_csv(trajectory: Trajectory, path: str | os.PathLike,
                         force: bool = False) -> Path:
    """Write the CSV layout (module docstring)."""
    return write_trajectory(trajectory, path, TrajectoryFormat.CSV, force)


def write_trajectory_json(trajectory: Trajectory, path: str | os.PathLike,
                          force: bool = False) -> Path:
    """Write the JSON layout (module docstring)."""
    return write_trajectory(trajectory, path, TrajectoryFormat.JSON, force)


def write_trajectory_geojson(trajectory: Trajectory, path: str | os.PathLike,
                             force: bool = False) -> Path:
    """Write the GeoJSON layout (module docstring): an RFC 7946 Feature with a LineString.

    Raises
    ------
    OutputError
        The trajectory has no latitude/longitude (a metric-only profile); nothing is written.
    """
    return write_trajectory(trajectory, path, TrajectoryFormat.GEOJSON, force)


def _csv_text(trajectory: Trajectory) -> str:
    return format_columns(trajectory_columns(trajectory))


def _json_text(trajectory: Trajectory) -> str:
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
        ("stop_dwell_s", _array(trajectory.stop_dwell_s if trajectory.stop_dwell_s is not None
                                else np.full(trajectory.stop_stations_m.size,
                                             trajectory.dwell_s), KINEMATIC)),
        ("planned_time_s", _number(trajectory.planned_time_s, KINEMATIC)),
        ("total_time_s", _number(trajectory.total_time_s, KINEMATIC)),
        ("samples", str(trajectory.n_samples)),
    ] + extra_metadata(trajectory)
    return ("{\n" + "".join(f"  {json.dumps(k)}: {v},\n" for k, v in head)
            + '  "columns": {\n' + body + "\n  }\n}\n")


def _geojson_text(trajectory: Trajectory, stop_points: bool = False) -> str:
    if not trajectory.is_geographic:
        raise ValueError(f"{trajectory.source}: a metric-only trajectory has no longitude/"
                         "latitude for GeoJSON")
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
    cols = trajectory_columns(trajectory)
    props += [(name, _array(*cols[name])) for name in
              ("elevation_m", "pitch_rad", "lap", "time_utc", "stop_name") if name in cols]
    props += [(k, v) for k, v in extra_metadata(trajectory) if k != "stop_names"]
    stops = _stop_properties(trajectory)
    if stops:
        props.append(("stops", "[" + ", ".join("{" + p + "}" for p, _ in stops) + "]"))
    line = ('{\n  "type": "Feature",\n  "geometry": {\n    "type": "LineString",\n'
            '    "coordinates": [\n' + coords + "\n    ]\n  },\n  \"properties\": {\n"
            + ",\n".join(f"    {json.dumps(k)}: {v}" for k, v in props) + "\n  }\n}")
    if not stop_points:
        return line + "\n"
    points = [line] + [
        '{"type": "Feature", "geometry": {"type": "Point", "coordinates": '
        f'[{_number(trajectory.lon[i], DEGREES)}, {_number(trajectory.lat[i], DEGREES)}]}}, '
        f'"properties": {{{p}}}}}' for p, i in stops]
    return ('{\n"type": "FeatureCollection",\n"features": [\n' + ",\n".join(points)
            + "\n]\n}\n")


def stop_points(trajectory: Trajectory) -> list[dict]:
    """One entry per stop of the run: number (from 1), name, station, dwell, arrival time,
    lap, and its sample's position (lat, lon, elevation where known)."""
    dwells = (trajectory.stop_dwell_s if trajectory.stop_dwell_s is not None
              else np.full(trajectory.stop_stations_m.size, trajectory.dwell_s))
    out = []
    for j, station in enumerate(trajectory.stop_stations_m):
        i = int(np.argmin(np.abs(trajectory.station_m - station)))   # its first sample
        entry = {"stop": j + 1, "name": (trajectory.stop_names[j] if trajectory.stop_names
                                         else ""),
                 "station_m": float(station), "dwell_s": float(dwells[j]),
                 "arrival_time_s": float(trajectory.time_s[i]), "index": i}
        if trajectory.lap is not None:
            entry["lap"] = int(trajectory.lap[i])
        out.append(entry)
    return out


def _stop_properties(trajectory: Trajectory) -> list[tuple[str, int]]:
    """Each stop's GeoJSON properties (the members of an object, as text) and its sample."""
    out = []
    for stop in stop_points(trajectory):
        i = stop.pop("index")
        props = [("stop", str(stop["stop"])), ("name", json.dumps(stop["name"])),
                 ("station_m", _number(stop["station_m"], METRES)),
                 ("dwell_s", _number(stop["dwell_s"], KINEMATIC)),
                 ("arrival_time_s", _number(stop["arrival_time_s"], KINEMATIC))]
        if "lap" in stop:
            props.append(("lap", str(stop["lap"])))
        if trajectory.start_time is not None:
            props.append(("arrival_time_utc", json.dumps(absolute_times(
                trajectory.start_time, [stop["arrival_time_s"]])[0])))
        out.append((", ".join(f"{json.dumps(k)}: {v}" for k, v in props), i))
    return out


def extra_metadata(trajectory: Trajectory) -> list[tuple[str, str]]:
    """The JSON head's entries that apply (module docstring): stop names, start time, local
    origin, laps."""
    out = []
    if has_stop_names(trajectory):
        out.append(("stop_names", json.dumps(list(trajectory.stop_names))))
    if trajectory.start_time is not None:
        out.append(("start_time", json.dumps(utc_text(trajectory.start_time))))
    origin = trajectory.local_origin
    if origin == "none":
        out.append(("local_origin", json.dumps("none")))
    elif origin is not None:
        out.append(("local_origin", f'{{"lat_deg": {_number(origin[0], DEGREES)}, '
                                    f'"lon_deg": {_number(origin[1], DEGREES)}}}'))
    if trajectory.lap_stations_m is not None:
        out.append(("laps", f'{{"count": {trajectory.laps}, "start_station_m": '
                            f'{_array(trajectory.lap_stations_m, METRES)}, "start_time_s": '
                            f'{_array(trajectory.lap_times_s, KINEMATIC)}}}'))
    return out


def _sampling_json(trajectory: Trajectory) -> str:
    if trajectory.mode is SamplingMode.TIME:
        return f'{{"mode": "time", "time_step_s": {_number(trajectory.interval, KINEMATIC)}}}'
    return f'{{"mode": "station", "station_step_m": {_number(trajectory.interval, METRES)}}}'


def _number(value: float, spec: str) -> str:
    return format_column([value], spec)[0]


def _array(values, spec: str) -> str:
    if spec == QUOTED:
        return json.dumps([str(v) for v in values])
    return "[" + ", ".join(format_column(values, spec)) + "]"


def _check_finite(trajectory: Trajectory) -> None:
    for name, values in trajectory.columns().items():
        if name == "lap":
            continue
        if not np.all(np.isfinite(values)):
            k = int(np.flatnonzero(~np.isfinite(values))[0])
            raise ValueError(f"trajectory column {name} is not finite at sample {k}")


__all__ = ["COLUMN_FORMATS", "FORMAT_BY_SUFFIX", "TRAJECTORY_COLUMNS", "TrajectoryFormat",
           "format_from_suffix", "trajectory_columns", "trajectory_text", "write_trajectory",
           "write_trajectory_csv", "write_trajectory_geojson", "write_trajectory_json",
           "has_stop_names", "stop_points", "extra_metadata"]
