"""Readers and writers: route files in, geometry and profiles out.

Each file-format family has its own module, which owns every message about that format:

* :mod:`~curvespeed.io.route_csv` - comma-separated ``x_m,y_m[,z_m]`` or ``lat,lon[,ele_m]``
  (semicolon- or tab-separated spreadsheet exports too, with a warning);
* :mod:`~curvespeed.io.geojson` - RFC 7946 LineString (bare, in a Feature or FeatureCollection),
  or a MultiLineString whose parts meet;
* :mod:`~curvespeed.io.gpx` - GPX 1.1 / 1.0 tracks and routes;
* :mod:`~curvespeed.io.geometry_csv` - the resampled geometry as CSV;
* :mod:`~curvespeed.io.opendrive` and :mod:`~curvespeed.io.opendrive_path` - ASAM OpenDRIVE
  road networks (``.xodr``): exact lane-centre geometry, not points (see ``read_opendrive``).

:func:`read_route` picks the reader from the file extension. The input rules and every message a
user can meet are listed in ``docs/input_rules.md``.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

from ..errors import RouteFormatError

if TYPE_CHECKING:                  # only for annotations: the package stays light to import
    from ..route import Route

#: Route file extensions (lower case) and the format each one selects.
ROUTE_EXTENSIONS = {".csv": "csv", ".geojson": "geojson", ".json": "geojson", ".gpx": "gpx"}

__all__ = ["ROUTE_EXTENSIONS", "read_drives", "read_route"]


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
    if p.suffix.lower() == ".xodr":
        raise RouteFormatError(
            f"{source}: an OpenDRIVE road network states its geometry exactly and is not read "
            "as points; use curvespeed.io.opendrive_path.read_opendrive (the command line "
            "reads .xodr files directly)")
    if kind is None:
        ext = f"extension '{p.suffix}'" if p.suffix else "no extension"
        raise RouteFormatError(
            f"{source}: {ext} is not a route format curvespeed reads; use one of "
            f"{', '.join(ROUTE_EXTENSIONS)}, or .xodr (OpenDRIVE, read by the command line)")
    from ._common import check_text, decode_utf8, read_bytes

    data = read_bytes(p, source)
    check_text(data, source)

    if kind == "gpx":
        from .gpx import parse_route_gpx

        return parse_route_gpx(data, source)
    text = decode_utf8(data, source)
    if kind == "csv":
        from .route_csv import parse_route_csv

        return parse_route_csv(text, source)
    from .geojson import parse_route_geojson

    return parse_route_geojson(text, source)


def read_drives(path: str | os.PathLike, all_tracks: bool = False) -> list[Route]:
    """The route (or routes) a file holds: one, or with ``all_tracks`` every track of a GPX file
    with points (several recorded drives of one route), each labelled ``trk K trkpt N``."""
    p = Path(path)
    if not all_tracks or ROUTE_EXTENSIONS.get(p.suffix.lower()) != "gpx":
        return [read_route(path)]
    from ._common import check_text, read_bytes
    from .gpx import count_gpx_tracks, parse_route_gpx

    source = str(path)
    data = read_bytes(p, source)
    check_text(data, source)
    n = count_gpx_tracks(data, source)
    if n == 0:
        return [read_route(path)]          # its own message: no track or route points
    return [parse_route_gpx(data, source, track=i) for i in range(n)]
