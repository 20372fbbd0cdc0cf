"""Read a route from a GeoJSON file (RFC 7946).

Accepted shapes, searched in this order:

* a bare ``LineString`` geometry;
* a ``Feature`` whose geometry is a ``LineString``;
* a ``FeatureCollection``: the first feature with a ``LineString`` geometry is the route; any
  further line features are ignored with a warning;
* a ``MultiLineString`` with a single part is taken as that part; several parts are joined in
  order, with a warning, when each starts where the one before ends (within
  :data:`JOIN_TOLERANCE_M`); otherwise it is an error naming the first part that does not
  connect. A ``GeometryCollection`` is searched like a feature collection.

A ``Polygon`` is an area, not a path, and is refused with a hint (give the outline as a
LineString).

Positions are ``[longitude, latitude]`` or ``[longitude, latitude, elevation]`` in WGS84
degrees and metres, as RFC 7946 requires. Elevation is kept only if every position has it.
The route's name comes from the feature's ``properties.name`` when present. Points are labelled
``position N`` (1-based, within the line used).
"""

from __future__ import annotations

import warnings

import numpy as np

from ..errors import CurvespeedWarning
from ..route import Route, make_route
from ._common import (fail, finite_value, latlon_range_problem, load_json, looks_projected,
                      project_latlon, refuse_unprojectable, show_value, value_problem,
                      warn_if_stretched)

_LINE_TYPES = ("LineString", "MultiLineString")
#: Parts of a MultiLineString are joined when each starts within this distance of where the one
#: before ends, metres: coordinates rounded to 5 decimals (about 1.1 m of latitude) move each end
#: by up to 0.8 m, so two rounded copies of one point can be 1.6 m apart.
JOIN_TOLERANCE_M = 2.0


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
    doc = load_json(text, source, advice="fix the file or export it again")
    if not isinstance(doc, dict) or not isinstance(doc.get("type"), str):
        raise fail(source, None, "not a GeoJSON object (the top level needs a \"type\" member)")

    candidates = list(_lines(doc, properties=None, source=source))
    if not candidates:
        found = _describe_types(doc)
        hint = ""
        if "Polygon" in found:
            hint = ("; a Polygon is an area, not a path: if its outline is the route, save the "
                    "outline as a LineString (for a loop, repeat the first position at the end)")
        raise fail(source, None, f"no LineString found (the file holds {found}); "
                                 f"curvespeed needs the route as one LineString{hint}")
    geometry, properties, label = candidates[0]
    if len(candidates) > 1:
        warnings.warn(f"{source}: used the first line ({label}); ignored "
                      f"{len(candidates) - 1} other line feature(s)",
                      CurvespeedWarning)

    coords = geometry.get("coordinates")
    if geometry["type"] == "MultiLineString":
        if not isinstance(coords, list) or not coords:
            raise fail(source, label, "\"coordinates\" must be a non-empty list of lines")
        parts = coords
    else:
        parts = [coords]
    pieces = []
    for p, part in enumerate(parts, start=1):
        if not isinstance(part, list):
            raise fail(source, label, "\"coordinates\" must be a list of positions"
                       if len(parts) == 1 else f"part {p}: must be a list of positions")
        if not part:
            raise fail(source, label, "\"coordinates\" is empty: the line has no positions; "
                       "give the route's positions" if len(parts) == 1 else
                       f"part {p} of the MultiLineString has no positions; remove the empty "
                       "part or give its positions")
        prefix = f"part {p}, " if len(parts) > 1 else ""
        pieces.append((prefix, _read_positions(part, source, prefix)))
    lon = np.concatenate([lo for _, (lo, _, _) in pieces])
    lat = np.concatenate([la for _, (_, la, _) in pieces])
    eles = [e for _, (_, _, e) in pieces]
    ele = np.concatenate(eles) if all(e is not None for e in eles) else None
    if any(e is not None for e in eles) and ele is None:
        warnings.warn(f"{source}: only some parts of the MultiLineString have elevations; "
                      "elevation ignored for the whole route", CurvespeedWarning)
    where = np.array([f"{prefix}position {i + 1}" for prefix, (lo, _, _) in pieces
                      for i in range(lo.size)], dtype=object)
    x, y, projection = project_latlon(lat, lon)
    refuse_unprojectable(projection, lat, lon, x, y, source)
    if len(pieces) > 1:
        keep = _join_parts(x, y, [lo.size for _, (lo, _, _) in pieces], source, label)
        if not keep.all():
            # project again without the repeated join points: the projection is centred on
            # the points, so the result is the same as for one LineString of the same route
            lat, lon, where = lat[keep], lon[keep], where[keep]
            ele = None if ele is None else ele[keep]
            x, y, projection = project_latlon(lat, lon)
    warn_if_stretched(projection, lat, lon, x, source)
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
        geometries = obj.get("geometries")
        if not isinstance(geometries, list):
            raise fail(source, label, "GeometryCollection has no \"geometries\" list (found "
                       f"{show_value(geometries)}); give its geometries as a list")
        for i, geometry in enumerate(geometries):
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
        elif kind in ("FeatureCollection", "GeometryCollection"):
            items = obj.get("features" if kind == "FeatureCollection" else "geometries")
            for item in items if isinstance(items, list) else []:
                walk(item)
        elif isinstance(kind, str) and kind not in kinds:
            kinds.append(kind)

    walk(doc)
    if not kinds:
        return "no geometry"
    return ", ".join(kinds[:5]) + (", ..." if len(kinds) > 5 else "")


def _join_parts(x, y, sizes: list[int], source: str, label: str) -> np.ndarray:
    """Check that MultiLineString parts connect end to start; raise naming the first that does not.

    Returns the mask of positions to keep: a part whose first position repeats the last of the
    part before (within 1 mm) loses that copy, so the join point appears once.
    """
    place = None if label == "MultiLineString" else label
    ends = np.cumsum(sizes)
    keep = np.ones(x.size, dtype=bool)
    for p in range(1, len(sizes)):
        last, first = ends[p - 1] - 1, ends[p - 1]
        gap = float(np.hypot(x[first] - x[last], y[first] - y[last]))
        if gap > JOIN_TOLERANCE_M:
            prev_start, stop = ends[p - 1] - sizes[p - 1], ends[p] - 1
            reversed_fits = (
                np.hypot(x[stop] - x[last], y[stop] - y[last]) <= JOIN_TOLERANCE_M
                or np.hypot(x[first] - x[prev_start], y[first] - y[prev_start])
                <= JOIN_TOLERANCE_M)
            hint = (f" (part {p} or {p + 1} seems to run the other way: reverse it)"
                    if reversed_fits else "")
            raise fail(source, place,
                       f"MultiLineString has {len(sizes)} parts, and part {p + 1} starts "
                       f"{gap:.1f} m from where part {p} ends{hint}; curvespeed joins parts "
                       f"only when they meet (within {JOIN_TOLERANCE_M:g} m): join them into "
                       "one LineString in driving order")
        if gap < 1e-3:
            keep[first] = False
    warnings.warn(f"{source}: {place + ': ' if place else ''}joined the {len(sizes)} parts of "
                  "the MultiLineString end to start into one line; check that they are in "
                  "driving order", 
                  CurvespeedWarning, stacklevel=3)
    return keep


def _read_positions(coords: list, source: str, prefix: str = ""):
    """Longitude, latitude and (when complete) elevation arrays from a list of positions."""
    n = len(coords)
    lon = np.empty(n)
    lat = np.empty(n)
    ele = np.empty(n)
    with_ele = 0
    for i, pos in enumerate(coords):
        where = f"{prefix}position {i + 1}"
        if not isinstance(pos, list) or len(pos) < 2:
            raise fail(source, where, f"expected [longitude, latitude] or [longitude, latitude, "
                                      f"elevation], got {show_value(pos, 60)}")
        values = [finite_value(v) for v in pos[:3]]
        for v, raw, what in zip(values, pos, ("longitude", "latitude", "elevation")):
            if v is None:
                raise fail(source, where, f"{what} {value_problem(raw)}; fix or remove that "
                                          "position")
        lon[i], lat[i] = values[0], values[1]
        if len(pos) >= 3:
            ele[i] = values[2]
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
