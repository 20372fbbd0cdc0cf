"""Read a route from a GeoJSON file (RFC 7946).

Accepted shapes, searched in this order:

* a bare ``LineString`` geometry;
* a ``Feature`` whose geometry is a ``LineString``;
* a ``FeatureCollection``: the first feature with a ``LineString`` geometry is the route; any
  further line features are ignored with a warning;
* a ``MultiLineString`` with a single part is taken as that part; with several parts it is an
  error (join the parts into one line first). A ``GeometryCollection`` is searched like a
  feature collection.

Positions are ``[longitude, latitude]`` or ``[longitude, latitude, elevation]`` in WGS84
degrees and metres, as RFC 7946 requires. Elevation is kept only if every position has it.
The route's name comes from the feature's ``properties.name`` when present. Points are labelled
``position N`` (1-based, within the line used).
"""

from __future__ import annotations

import json
import math
import warnings
from numbers import Real

import numpy as np

from ..errors import CurvespeedWarning
from ..route import Route, make_route
from ._common import fail, latlon_range_problem, looks_projected, project_latlon

_LINE_TYPES = ("LineString", "MultiLineString")


def parse_route_geojson(text: str, source: str) -> Route:
    """Build a :class:`~curvespeed.route.Route` from the text of a GeoJSON file.

    Parameters
    ----------
    text : str
        Whole file content, already decoded.
    source : str
        File name used in messages and stored on the route.

    Raises
    ------
    RouteFormatError
        Invalid JSON, no LineString, a multi-part line, a malformed position or a coordinate
        out of range.
    RouteGeometryError
        From :func:`~curvespeed.route.make_route`: fewer than three distinct points, a reversal.
    """
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as exc:
        raise fail(source, f"line {exc.lineno}, column {exc.colno}",
                   f"not valid JSON ({exc.msg}); fix the file or export it again") from None
    except RecursionError:
        raise fail(source, None, "JSON nesting is too deep to be a GeoJSON route") from None
    if not isinstance(doc, dict) or not isinstance(doc.get("type"), str):
        raise fail(source, None, "not a GeoJSON object (the top level needs a \"type\" member)")

    candidates = list(_lines(doc, properties=None, source=source))
    if not candidates:
        found = _describe_types(doc)
        raise fail(source, None, f"no LineString found (the file holds {found}); "
                                 "curvespeed needs the route as one LineString")
    geometry, properties, label = candidates[0]
    if len(candidates) > 1:
        warnings.warn(f"{source}: used the first line ({label}); ignored "
                      f"{len(candidates) - 1} other line feature(s)",
                      CurvespeedWarning)

    coords = geometry.get("coordinates")
    if geometry["type"] == "MultiLineString":
        if not isinstance(coords, list):
            raise fail(source, label, "\"coordinates\" must be a list of lines")
        if len(coords) != 1:
            raise fail(source, label, f"MultiLineString has {len(coords)} parts; join them "
                                      "into one LineString in driving order first")
        coords = coords[0]
    if not isinstance(coords, list):
        raise fail(source, label, "\"coordinates\" must be a list of positions")

    lon, lat, ele = _read_positions(coords, source)
    where = np.array([f"position {i + 1}" for i in range(lon.size)], dtype=object)
    x, y, projection = project_latlon(lat, lon)
    name = None
    if isinstance(properties, dict) and isinstance(properties.get("name"), str):
        name = properties["name"].strip() or None
    return make_route(x, y, ele, where=where, source=source, projection=projection, name=name)


def _lines(obj, properties, source, label=None):
    """Yield ``(geometry, properties, label)`` for every line geometry in document order."""
    kind = obj.get("type") if isinstance(obj, dict) else None
    if kind in _LINE_TYPES:
        yield obj, properties, label or kind
    elif kind == "Feature":
        geometry = obj.get("geometry")
        if isinstance(geometry, dict):
            yield from _lines(geometry, obj.get("properties"), source, label or "the feature")
    elif kind == "FeatureCollection":
        features = obj.get("features")
        if not isinstance(features, list):
            raise fail(source, None, "FeatureCollection has no \"features\" list")
        for i, feature in enumerate(features):
            yield from _lines(feature, None, source, f"feature {i + 1}")
    elif kind == "GeometryCollection":
        for i, geometry in enumerate(obj.get("geometries") or []):
            yield from _lines(geometry, properties, source,
                              f"{label + ', ' if label else ''}geometry {i + 1}")


def _describe_types(doc: dict) -> str:
    """Short list of the geometry types present, for the "no LineString" message."""
    kinds: list[str] = []

    def walk(obj):
        if not isinstance(obj, dict):
            return
        kind = obj.get("type")
        if kind == "Feature":
            walk(obj.get("geometry"))
        elif kind == "FeatureCollection":
            for f in obj.get("features") or []:
                walk(f)
        elif kind == "GeometryCollection":
            for g in obj.get("geometries") or []:
                walk(g)
        elif isinstance(kind, str) and kind not in kinds:
            kinds.append(kind)

    walk(doc)
    if not kinds:
        return "no geometry"
    return ", ".join(kinds[:5]) + (", ..." if len(kinds) > 5 else "")


def _is_number(v) -> bool:
    return isinstance(v, Real) and not isinstance(v, bool)


def _read_positions(coords: list, source: str):
    """Longitude, latitude and (when complete) elevation arrays from a list of positions."""
    n = len(coords)
    lon = np.empty(n)
    lat = np.empty(n)
    ele = np.empty(n)
    with_ele = 0
    for i, pos in enumerate(coords):
        where = f"position {i + 1}"
        if not isinstance(pos, list) or len(pos) < 2:
            raise fail(source, where, f"expected [longitude, latitude] or [longitude, latitude, "
                                      f"elevation], got {json.dumps(pos)[:60]}")
        for j, what in enumerate(("longitude", "latitude", "elevation")[:len(pos)]):
            v = pos[j]
            if not _is_number(v) or not math.isfinite(v):
                raise fail(source, where, f"{what} {json.dumps(v)[:30]} is not a finite number; "
                                          "fix or remove that position")
        lon[i], lat[i] = float(pos[0]), float(pos[1])
        if len(pos) >= 3:
            ele[i] = float(pos[2])
            with_ele += 1
        _check_lonlat(lon[i], lat[i], source, where)

    if with_ele == n and n:
        return lon, lat, ele
    if with_ele:
        warnings.warn(f"{source}: only {with_ele} of {n} positions have an elevation; "
                      "elevation ignored for the whole route", CurvespeedWarning)
    return lon, lat, None


def _check_lonlat(lon: float, lat: float, source: str, where: str) -> None:
    problem = latlon_range_problem(lat, lon)
    if problem is None:
        return
    if -90.0 <= lon <= 90.0 and -180.0 <= lat <= 180.0:
        hint = ("; the position looks like [latitude, longitude] - GeoJSON positions are "
                "[longitude, latitude]")
    elif looks_projected(lat, lon):
        hint = ("; these look like projected metres - GeoJSON (RFC 7946) needs WGS84 "
                "longitude/latitude, so reproject the file")
    else:
        hint = "; fix or remove that position"
    raise fail(source, where, problem + hint)
