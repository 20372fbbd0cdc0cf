"""Write the result of ``curvespeed check``: the full report as JSON, the curve table as CSV.

JSON (``--json``)
    Keys in SI units with the unit in the key (``start_m``, ``speed_mps``, ``lateral_accel_mps2``);
    dimensionless values (uses, side-friction factors, superelevation) have no suffix. The only
    non-SI numbers are the ones whose unit is part of the method and named in the key: the
    design speed (``design_speed_kmh``, the unit of the AASHTO formula) and the ball-bank
    advisory speeds (``advisory_speed_mph`` on 5 mph steps, ``advisory_speed_kmh`` on 10 km/h
    steps, and their ``_low_``/``_high_`` ends). Top-level keys: ``tool``, ``version``, ``route_file``, ``verdict``, ``route``,
    ``fit`` (how the geometry was made: noise stated, estimated and used, merges),
    ``speeds``, ``limits``, ``constraints``, ``design``, ``settings``, ``summary``, ``curves``,
    ``violations``, ``per_station`` (one array per quantity, one value per station). Non-finite
    numbers are written as ``null``. No time stamps: the same inputs give the same bytes.
CSV (``--csv``)
    One row per curve in station order, columns :data:`CURVE_COLUMNS` (``meets_min_radius``,
    ``meets_min_radius_low`` and ``meets_min_radius_high`` only with a design speed), numbers in
    the fixed formats of :mod:`curvespeed.io._format`. ``result`` is ``pass`` or ``fail`` (a
    curve that fails only within the curvature's uncertainty is a failure); ``verdict`` tells
    ``fail`` from ``fails_on_bound``. An unbounded ``min_radius_high_m`` is written ``inf``
    (``null`` in the JSON).

Both are written atomically and replace an existing file only with ``force``.
"""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

from .. import __version__
from ..check import CheckReport
from ._format import METRES, RATIO, format_columns
from .atomic import write_text_atomic
from .meta_json import json_safe
from .profile_csv import KINEMATIC

#: Columns of the per-curve CSV, in order, with their number formats.
CURVE_COLUMNS = (
    ("curve", "d"), ("start_m", METRES), ("end_m", METRES), ("length_m", METRES),
    ("direction", "s"), ("min_radius_m", METRES), ("tightest_station_m", METRES),
    ("superelevation", RATIO), ("speed_mps", KINEMATIC), ("lateral_accel_mps2", KINEMATIC),
    ("side_friction_demand", RATIO), ("friction_margin", RATIO),
    ("comfort_margin_mps2", KINEMATIC), ("friction_use", RATIO), ("comfort_use", RATIO),
    ("limit_speed_mps", KINEMATIC), ("approach_speed_mps", KINEMATIC),
    ("braking_distance_needed_m", METRES), ("braking_distance_available_m", METRES),
    ("brake_ok", "s"), ("meets_min_radius", "s"), ("advisory_speed_mph", ".0f"),
    ("advisory_speed_kmh", ".0f"), ("violations", "s"), ("result", "s"),
    # added with the curvature's uncertainty: the interval ends and the estimate's uses
    ("verdict", "s"), ("violations_on_estimate", "s"), ("min_radius_low_m", METRES),
    ("min_radius_high_m", METRES), ("meets_min_radius_low", "s"), ("meets_min_radius_high", "s"),
    ("advisory_speed_low_mph", ".0f"), ("advisory_speed_high_mph", ".0f"),
    ("advisory_speed_low_kmh", ".0f"), ("advisory_speed_high_kmh", ".0f"),
    ("friction_use_estimate", RATIO), ("comfort_use_estimate", RATIO),
    ("lateral_accel_bound_mps2", KINEMATIC), ("side_friction_demand_bound", RATIO),
    ("limit_speed_estimate_mps", KINEMATIC),
)
#: Columns written only with a design speed.
_DESIGN_COLUMNS = ("meets_min_radius", "meets_min_radius_low", "meets_min_radius_high")
#: Yes/no columns.
_FLAGS = ("brake_ok",) + _DESIGN_COLUMNS


def check_report_dict(report: CheckReport, route_file: str | os.PathLike | None = None) -> dict:
    """The JSON content as a dictionary (non-finite numbers already replaced by None)."""
    data = {"tool": "curvespeed", "version": __version__,
            "route_file": None if route_file is None else str(route_file)}
    data.update(report.to_dict())
    return json_safe(data)


def write_check_json(report: CheckReport, path: str | os.PathLike, force: bool = False,
                     route_file: str | os.PathLike | None = None) -> Path:
    """Write the full report to ``path`` as JSON (atomically)."""
    return write_text_atomic(check_json_text(report, route_file), path, force)


def check_json_text(report: CheckReport, route_file: str | os.PathLike | None = None) -> str:
    """The JSON report's text (module docstring)."""
    data = check_report_dict(report, route_file)
    per_station = data.pop("per_station")
    text = json.dumps(data, indent=2, allow_nan=False)
    # one line per per-station array keeps the file readable and diffable
    rows = [f'    {json.dumps(name)}: {json.dumps(values, allow_nan=False)}'
            for name, values in per_station.items()]
    return text[:-2] + ',\n  "per_station": {\n' + ",\n".join(rows) + "\n  }\n}\n"


def curve_table_columns(report: CheckReport) -> dict[str, tuple[object, str]]:
    """Named columns and formats of the per-curve table, in output order.

    The cells are the curves' own report values (:meth:`CurveCheck.to_dict`): flags as
    ``yes``/``no`` (empty when not computed), a missing advisory speed as ``nan``, lists of
    violation kinds joined by ``;``, ``result`` as ``pass``/``fail``.
    """
    def cell(name: str, row: dict):
        if name == "curve":
            return row["number"]
        if name == "result":
            return "pass" if row["passed"] else "fail"
        value = row[name]
        if name in _FLAGS:
            return "" if value is None else ("yes" if value else "no")
        if isinstance(value, list):
            return ";".join(value)
        return math.nan if value is None else value

    rows = [c.to_dict() for c in report.curves]
    return {name: ([cell(name, row) for row in rows], spec) for name, spec in CURVE_COLUMNS
            if not (name in _DESIGN_COLUMNS and report.design is None)}


def curve_csv_text(report: CheckReport) -> str:
    """The per-curve CSV file's text (module docstring)."""
    return format_columns(curve_table_columns(report))


def write_curve_csv(report: CheckReport, path: str | os.PathLike, force: bool = False) -> Path:
    """Write the per-curve table to ``path`` as CSV (atomically)."""
    return write_text_atomic(curve_csv_text(report), path, force)


# -- reading back (for ``curvespeed report``) --------------------------------------------------

#: Keys every curve of a check JSON needs for a report.
_CURVE_KEYS = ("number", "start_m", "end_m", "tightest_station_m", "direction", "min_radius_m",
               "speed_mps", "limit_speed_mps", "friction_use", "comfort_use", "brake_ok")
#: Per-station arrays a report draws.
_STATION_ARRAYS = ("station_m", "speed_mps", "accel_mps2", "limit_speed_mps")


def read_check_json(path: str | os.PathLike) -> dict:
    """Read a check JSON (``curvespeed check --json``) back, for a report.

    Raises
    ------
    SpeedFileError
        Missing or unreadable file, invalid JSON, or not what ``check --json`` writes (a key
        missing, per-station arrays of different lengths or holding non-numbers); the message
        names the file and the key.
    """
    from ..errors import SpeedFileError
    from ._common import load_json, read_text

    source = str(path)
    advice = "write it again with curvespeed check --json"
    doc = load_json(read_text(path, SpeedFileError), source, SpeedFileError, advice=advice)

    def bad(what: str) -> SpeedFileError:
        return SpeedFileError(f"{source}: {what}; this is not a check result of curvespeed "
                              f"check --json ({advice})")

    if not isinstance(doc, dict) or not isinstance(doc.get("per_station"), dict):
        raise bad('no "per_station" object')
    per = doc["per_station"]
    n = None
    for key in _STATION_ARRAYS:
        values = per.get(key)
        if not isinstance(values, list) or not values:
            raise bad(f"per_station.{key} is missing or empty")
        if n is not None and len(values) != n:
            raise bad(f"per_station.{key} has {len(values)} values, per_station.station_m {n}")
        n = len(values)
        for i, v in enumerate(values):
            if not isinstance(v, (int, float)) or isinstance(v, bool):
                raise bad(f"per_station.{key}[{i}] is {json.dumps(v)[:30]}, not a number")
    curves = doc.get("curves")
    if not isinstance(curves, list):
        raise bad('no "curves" list')
    for i, curve in enumerate(curves):
        missing = [k for k in _CURVE_KEYS if not isinstance(curve, dict) or k not in curve]
        if missing:
            raise bad(f"curves[{i}] has no {', '.join(missing)}")
    return doc
