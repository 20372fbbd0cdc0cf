"""The tables and layers of a batch run: ``summary.csv``, ``failures.csv`` and the curves layer.

``summary.csv``
    One row per road that was processed, in input order: ``route_id``, ``source``,
    ``length_m``, ``stations``, ``closed`` and, for ``plan``, ``time_s``, ``mean_speed_mps``,
    ``max_speed_mps``, ``solver``; for ``check``, ``checked_speed_mps`` (empty: the zones or top
    speed were checked); then ``curves``, ``curves_failing``, ``worst_curve_use`` (1 = at the
    limit), ``violations``, ``result`` (``pass``/``fail``) and ``warnings`` (how many).
``failures.csv``
    One row per road that could not be processed, in input order: ``route_id``, ``source``,
    ``error`` (the error's type), ``message`` (what, where, what to do).
``curves.geojson`` / ``curves.gpkg``
    One LineString per curve (WGS84 longitude, latitude; EPSG:4326) with :data:`CURVE_FIELDS`:
    route id, curve number, start, apex (tightest point) and end stations, radius, the speed
    judged there and the highest the limits allow, ball-bank advisory speeds, worst use of any
    limit and the verdict. A road given in a local metric frame has no place on Earth: its
    curves have a null geometry. The GeoJSON is RFC 7946 text written in a fixed number format
    (the same roads give the same bytes); the GeoPackage goes through GDAL (pyogrio) and carries
    GDAL's own time stamps.

Text is written with the standard ``csv`` module (sources and messages contain commas) and the
fixed number formats of :mod:`curvespeed.io._format`.
"""

from __future__ import annotations

import csv
import io
import json
import math

from ._format import DEGREES, METRES, RATIO, format_column
from .profile_csv import KINEMATIC

PLAN_COLUMNS = (("route_id", "s"), ("source", "s"), ("length_m", METRES), ("stations", "d"),
                ("closed", "b"), ("time_s", ".3f"), ("mean_speed_mps", KINEMATIC),
                ("max_speed_mps", KINEMATIC), ("solver", "s"))
CHECK_COLUMNS = (("route_id", "s"), ("source", "s"), ("length_m", METRES), ("stations", "d"),
                 ("closed", "b"), ("checked_speed_mps", KINEMATIC))
RESULT_COLUMNS = (("curves", "d"), ("curves_failing", "d"), ("worst_curve_use", RATIO),
                  ("violations", "d"), ("result", "s"), ("warnings", "d"))
FAILURE_COLUMNS = ("route_id", "source", "error", "message")
#: Attributes of the curves layer, with their number formats (``s`` text, ``d`` integer).
CURVE_FIELDS = (("route_id", "s"), ("curve", "d"), ("start_m", METRES), ("apex_m", METRES),
                ("end_m", METRES), ("direction", "s"), ("min_radius_m", METRES),
                ("min_radius_low_m", METRES), ("speed_mps", KINEMATIC),
                ("limit_speed_mps", KINEMATIC), ("advisory_speed_kmh", ".0f"),
                ("advisory_speed_mph", ".0f"), ("worst_use", RATIO), ("verdict", "s"))


def _cell(value, spec: str) -> str:
    if value is None:
        return ""
    if spec == "s":
        return str(value)
    if spec == "b":
        return "yes" if value else "no"
    return format_column([value], spec)[0]


def _csv_text(header, rows) -> str:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return out.getvalue()


def summary_columns(command: str) -> tuple:
    return (PLAN_COLUMNS if command == "plan" else CHECK_COLUMNS) + RESULT_COLUMNS


def summary_csv_text(command: str, rows: list[dict]) -> str:
    """``summary.csv``: ``rows`` are the roads' summary dictionaries, in output order."""
    columns = summary_columns(command)
    return _csv_text([name for name, _ in columns],
                     [[_cell(row.get(name), spec) for name, spec in columns] for row in rows])


def failures_csv_text(rows: list[dict]) -> str:
    """``failures.csv``: ``rows`` hold route_id, source, error, message."""
    return _csv_text(FAILURE_COLUMNS, [[row[name] for name in FAILURE_COLUMNS] for row in rows])


def _json_number(value, spec: str):
    """A number as JSON text in the field's fixed format (``null`` when missing or not finite)."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "null"
    if spec == "s":
        return json.dumps(str(value))
    return format_column([value], spec)[0]


def curve_feature_text(curve: dict) -> str:
    """One curve as a GeoJSON Feature on one line."""
    props = ", ".join(f"{json.dumps(name)}: {_json_number(curve.get(name), spec)}"
                      for name, spec in CURVE_FIELDS)
    if curve.get("lonlat"):
        coords = ", ".join(f"[{format(lon, DEGREES)}, {format(lat, DEGREES)}]"
                           for lon, lat in curve["lonlat"])
        geometry = f'{{"type": "LineString", "coordinates": [{coords}]}}'
    else:
        geometry = "null"
    return f'{{"type": "Feature", "properties": {{{props}}}, "geometry": {geometry}}}'


class CurvesGeoJSON:
    """Writes ``curves.geojson`` feature by feature to an open text file."""

    def __init__(self, fh):
        self.fh = fh
        self.count = 0
        fh.write('{"type": "FeatureCollection", "features": [\n')

    def add(self, curve: dict) -> None:
        self.add_text(curve_feature_text(curve), 1)

    def add_text(self, text: str, count: int) -> None:
        """``count`` features already made by :func:`curve_feature_text`, joined by ``,\n``."""
        if count:
            self.fh.write((",\n" if self.count else "") + text)
            self.count += count

    def close(self) -> None:
        self.fh.write("\n]}\n")


def curve_wkb(curve: dict) -> bytes | None:
    """A curve's line as the GeoPackage stores it (WKB); None for a road in a local frame."""
    import shapely

    if not curve.get("lonlat"):
        return None
    return shapely.to_wkb(shapely.linestrings(curve["lonlat"]))


class CurvesGeoPackage:
    """Writes ``curves.gpkg`` (layer ``curves``, EPSG:4326) in blocks of rows through pyogrio."""

    BLOCK = 2000

    def __init__(self, path: str):
        self.path = path
        self.rows: list[dict] = []
        self.geoms: list = []
        self.started = False

    def add(self, curve: dict) -> None:
        self.add_row(curve, curve_wkb(curve))

    def add_row(self, curve: dict, wkb: bytes | None) -> None:
        """A curve whose line :func:`curve_wkb` made already (its ``lonlat`` is not read)."""
        self.rows.append(curve)
        self.geoms.append(wkb)
        if len(self.rows) >= self.BLOCK:
            self._flush()

    def _flush(self) -> None:
        import numpy as np
        import pyogrio.raw

        if not self.rows and self.started:
            return
        geoms = self.geoms
        fields, data = [], []
        for name, spec in CURVE_FIELDS:
            fields.append(name)
            values = [r.get(name) for r in self.rows]
            if spec == "s":
                data.append(np.array([str(v) for v in values], dtype=object))
            elif spec == "d":
                data.append(np.array(values, dtype=np.int64))
            else:
                data.append(np.array([math.nan if v is None else float(v) for v in values]))
        pyogrio.raw.write(self.path, np.array(geoms, dtype=object), data, fields,
                          layer="curves", driver="GPKG", geometry_type="LineString",
                          crs="EPSG:4326", append=self.started)
        self.started = True
        self.rows, self.geoms = [], []

    def close(self) -> None:
        self._flush()
