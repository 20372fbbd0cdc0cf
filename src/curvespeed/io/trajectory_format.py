"""The output formats of ``curvespeed export``, kept apart from the writers.

The command line needs these names when it starts (for its options and help); the writers in
:mod:`curvespeed.io.trajectory` need numpy. Keeping the names here lets ``curvespeed --help``
start without importing numpy.
"""

from __future__ import annotations

import enum
import os
from pathlib import Path


class TrajectoryFormat(enum.Enum):
    """Output formats of ``curvespeed export`` (the command line offers these values)."""

    CSV = "csv"
    JSON = "json"
    GEOJSON = "geojson"
    GPX = "gpx"


#: Output file extension (lower case) -> format, for choosing the format from the file name.
FORMAT_BY_SUFFIX = {".csv": TrajectoryFormat.CSV, ".json": TrajectoryFormat.JSON,
                    ".geojson": TrajectoryFormat.GEOJSON, ".gpx": TrajectoryFormat.GPX}


def format_from_suffix(path: str | os.PathLike) -> TrajectoryFormat | None:
    """The format an output file name implies (``.csv``, ``.json``, ``.geojson``, ``.gpx``), or None."""
    return FORMAT_BY_SUFFIX.get(Path(path).suffix.lower())
