"""Write a resampled :class:`~curvespeed.geometry.Geometry` as CSV.

Columns, in this order:

``station_m, x_m, y_m, heading_rad, curvature_1pm``
    always;
``z_m, grade``
    when the route has elevation;
``lat, lon``
    when the route was geographic (WGS84 degrees, from the route's projection).

Number formats (see :mod:`curvespeed.io._format`): metres 4 decimals (0.1 mm), heading 7
decimals, curvature fixed 9 decimals (1e-9 1/m; fixed rather than significant digits so
round-off on straights prints as zero and files are identical across machines), grade 6
decimals, latitude/longitude 9 decimals. One header line, then one line per node, ``\\n`` line
ends, UTF-8. The file is written atomically (:class:`curvespeed.io.atomic.OutputFiles`).
"""

from __future__ import annotations

import os
from pathlib import Path

from ..geometry import Geometry
from ._format import CURVATURE, DEGREES, METRES, RADIANS, RATIO, format_columns
from .atomic import write_text_atomic


def geometry_columns(geometry: Geometry) -> dict[str, tuple[object, str]]:
    """Named columns and their number formats for ``geometry``, in output order."""
    columns: dict[str, tuple[object, str]] = {
        "station_m": (geometry.station_m, METRES),
        "x_m": (geometry.x_m, METRES),
        "y_m": (geometry.y_m, METRES),
        "heading_rad": (geometry.heading_rad, RADIANS),
        "curvature_1pm": (geometry.curvature_1pm, CURVATURE),
    }
    if geometry.z_m is not None:
        columns["z_m"] = (geometry.z_m, METRES)
        columns["grade"] = (geometry.grade, RATIO)
    latlon = geometry.latlon()
    if latlon is not None:
        columns["lat"] = (latlon[0], DEGREES)
        columns["lon"] = (latlon[1], DEGREES)
    return columns


def geometry_csv_text(geometry: Geometry) -> str:
    """The geometry CSV file's text (module docstring)."""
    return format_columns(geometry_columns(geometry))


def write_geometry_csv(geometry: Geometry, path: str | os.PathLike, force: bool = False) -> Path:
    """Write ``geometry`` to ``path`` as CSV and return the path.

    Raises
    ------
    OutputError
        ``path`` exists and ``force`` is false, or its folder does not exist.
    """
    return write_text_atomic(geometry_csv_text(geometry), path, force)
