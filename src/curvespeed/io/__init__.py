"""Readers and writers: route files in, geometry and profiles out.

Each file-format family has its own module, which owns every message about that format:

* :mod:`~curvespeed.io.route_csv` - comma-separated ``x_m,y_m[,z_m]`` or ``lat,lon[,ele_m]``
  (semicolon- or tab-separated spreadsheet exports too, with a warning);
* :mod:`~curvespeed.io.geojson` - RFC 7946 LineString (bare, in a Feature or FeatureCollection),
  or a MultiLineString whose parts meet;
* :mod:`~curvespeed.io.gpx` - GPX 1.1 / 1.0 tracks and routes;
* :mod:`~curvespeed.io.geometry_csv` - the resampled geometry as CSV.

:func:`read_route` picks the reader from the file extension. The input rules and every message a
user can meet are listed in ``docs/input_rules.md``.
"""

from __future__ import annotations

import codecs
import os
from pathlib import Path
from typing import TYPE_CHECKING

from ..errors import RouteFormatError

if TYPE_CHECKING:                  # only for annotations: the package stays light to import
    from ..route import Route

#: Route file extensions (lower case) and the format each one selects.
ROUTE_EXTENSIONS = {".csv": "csv", ".geojson": "geojson", ".json": "geojson", ".gpx": "gpx"}

__all__ = ["ROUTE_EXTENSIONS", "read_route"]


def read_route(path: str | os.PathLike) -> Route:
    """Read a route file, choosing the format from its extension (case-insensitive).

    ``.csv`` -> comma-separated values, ``.geojson``/``.json`` -> GeoJSON, ``.gpx`` -> GPX.
    CSV and GeoJSON are read as UTF-8, with or without a byte-order mark; GPX goes to the XML
    parser as bytes, so the encoding named in its XML declaration applies.

    Parameters
    ----------
    path : str or path-like
        The route file. Its name, as given, prefixes every error message.

    Returns
    -------
    Route
        Points in a local metric frame (geographic input carries its projection).

    Raises
    ------
    RouteFormatError
        Unknown extension, missing or unreadable file, not UTF-8 text, or anything the format's
        reader refuses.
    RouteGeometryError
        The points do not form a drivable path (see :func:`curvespeed.route.make_route`).
    """
    p = Path(path)
    source = str(path)
    kind = ROUTE_EXTENSIONS.get(p.suffix.lower())
    if kind is None:
        ext = f"extension '{p.suffix}'" if p.suffix else "no extension"
        raise RouteFormatError(
            f"{source}: {ext} is not a route format curvespeed reads; use one of "
            f"{', '.join(ROUTE_EXTENSIONS)}")
    data = _read_bytes(p, source)
    _check_text(data, source)

    if kind == "gpx":
        from .gpx import parse_route_gpx

        return parse_route_gpx(data, source)
    text = _decode_utf8(data, source)
    if kind == "csv":
        from .route_csv import parse_route_csv

        return parse_route_csv(text, source)
    from .geojson import parse_route_geojson

    return parse_route_geojson(text, source)


def _read_bytes(p: Path, source: str) -> bytes:
    try:
        return p.read_bytes()
    except FileNotFoundError:
        raise RouteFormatError(f"{source}: no such file; check the name and folder") from None
    except IsADirectoryError:
        raise RouteFormatError(f"{source}: is a folder, not a route file") from None
    except PermissionError:
        raise RouteFormatError(f"{source}: cannot be read (permission denied)") from None
    except OSError as exc:
        raise RouteFormatError(f"{source}: cannot be read ({exc.strerror or exc})") from None


def _check_text(data: bytes, source: str) -> None:
    """Refuse UTF-16/32 text and binary files with a message saying what to do."""
    if data.startswith((codecs.BOM_UTF32_LE, codecs.BOM_UTF32_BE)):
        raise RouteFormatError(f"{source}: is UTF-32 text; save it as UTF-8")
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        raise RouteFormatError(f"{source}: is UTF-16 text; save it as UTF-8")
    nul = data.find(b"\x00")
    if nul >= 0:
        line = data.count(b"\n", 0, nul) + 1
        raise RouteFormatError(
            f"{source}: line {line}: contains a NUL byte, so it is not a text file; give a "
            "CSV, GeoJSON or GPX route saved as UTF-8")


def _decode_utf8(data: bytes, source: str) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise RouteFormatError(
            f"{source}: line {line}: byte 0x{data[exc.start]:02x} is not valid UTF-8; "
            "save the file as UTF-8") from None
