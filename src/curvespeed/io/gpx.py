"""Read a route from a GPX file (GPX 1.1, also GPX 1.0 and files without a namespace).

The route is the first track that has points, its segments (``trk/trkseg/trkpt``) joined in
file order; without track points, the first route (``rte/rtept``). Other tracks and routes are
ignored with a warning. A track that jumps (two consecutive points more than
:data:`GAP_FACTOR` times the median spacing and at least :data:`GAP_MIN_M` apart, as when the
receiver lost its fix or one segment starts far from where the last one ended) is read with the
jump as a straight line, and a warning names the point. Per point:

* ``lat``/``lon`` attributes, WGS84 degrees (required);
* ``ele``, metres: kept only if every point has one (otherwise dropped with a warning);
* ``time``, ISO 8601 (``2026-05-01T10:00:00Z``, with an offset or fractional seconds; a time
  without a zone is taken as UTC, as GPX specifies): kept as seconds from the first point only
  if every point has one (otherwise dropped with a warning).

Parsing goes through :mod:`defusedxml`, which refuses entity declarations (entity expansion
bombs, external entities) before anything is expanded or fetched. The XML parser reads the raw
bytes so the file's own encoding declaration is honoured. Points are labelled ``trkpt N`` or
``rtept N`` (1-based, counted across the segments of the track used).
"""

from __future__ import annotations

import warnings
import xml.etree.ElementTree as ET
from datetime import datetime, timezone

import defusedxml.ElementTree as DefusedET
from defusedxml import DefusedXmlException, EntitiesForbidden, ExternalReferenceForbidden

import numpy as np

from ..errors import CurvespeedWarning
from ..order_stats import median
from ..route import Route, make_route
from ._common import (cell_text, fail, latlon_range_problem, number_problem, parse_number,
                      project_latlon, swapped_would_fit)

#: A step between consecutive track points longer than this many median steps ...
GAP_FACTOR = 20.0
#: ... and longer than this, metres, is reported as a gap in the track. A receiver logging
#: at a steady rate gives steps of similar length; twenty times the usual step is a lost fix
#: or a missing piece, not a change of speed.
GAP_MIN_M = 100.0

#: GPX namespaces accepted, with the version each stands for ("" is a file without namespace).
GPX_NAMESPACES = {
    "http://www.topografix.com/GPX/1/1": "GPX 1.1",
    "http://www.topografix.com/GPX/1/0": "GPX 1.0",
    "": "GPX without namespace",
}


def parse_route_gpx(data: bytes, source: str, track: int | None = None) -> Route:
    """Build a :class:`~curvespeed.route.Route` from the bytes of a GPX file.

    ``track`` (0-based, counting the tracks that have points) reads that track instead of the
    first, with its points labelled ``trk K trkpt N`` (several drives of one route in one file).

    Parameters
    ----------
    data : bytes
        Whole file content, undecoded (the XML declaration names its encoding).
    source : str
        File name used in messages and stored on the route.

    Raises
    ------
    RouteFormatError
        Malformed XML, entity declarations, not a GPX document, no points, a missing or bad
        coordinate, elevation or time.
    RouteGeometryError
        From :func:`~curvespeed.route.make_route`: fewer than three distinct points, a reversal.
    """
    root = _parse_xml(data, source)
    ns = _gpx_namespace(root, source)

    def q(name: str) -> str:
        return f"{{{ns}}}{name}" if ns else name

    kind, chosen, points, segment_sizes = _chosen_points(root, q, source, track)
    lat, lon, ele, times, where = _read_points(points, q, kind, source)
    z = _all_or_none(ele, ~np.isnan(ele), "elevation (<ele>)", kind, source)
    have_time = np.array([t is not None for t in times])
    time_s = None
    if _all_or_none(have_time, have_time, "time (<time>)", kind, source) is not None:
        t0 = times[0]
        time_s = np.array([(t - t0).total_seconds() for t in times])

    name = _text(chosen.find(q("name")))
    if name is None:
        metadata = root.find(q("metadata"))  # GPX 1.1
        name = _text(metadata.find(q("name")) if metadata is not None else root.find(q("name")))
    x, y, projection = project_latlon(lat, lon, source)
    if kind.endswith("trkpt"):
        _warn_gaps(x, y, time_s, np.cumsum([m for m in segment_sizes if m])[:-1], source)
    return make_route(x, y, z, where=where, source=source, projection=projection,
                      time_s=time_s, name=name)


def _chosen_points(root, q, source: str, track: int | None):
    """The track (or route) to read: ``(kind, element, points, segment sizes)``, ``kind`` the
    points' label (``trkpt``, ``trk K trkpt`` or ``rtept``). Warns about the tracks and routes
    left out; refuses a file without points or a ``track`` it does not have."""
    tracks = [(trk, [pt for seg in trk.findall(q("trkseg")) for pt in seg.findall(q("trkpt"))])
              for trk in root.findall(q("trk"))]
    segment_sizes = {id(trk): [len(seg.findall(q("trkpt"))) for seg in trk.findall(q("trkseg"))]
                     for trk, _ in tracks}
    routes = [(rte, rte.findall(q("rtept"))) for rte in root.findall(q("rte"))]
    tracks = [(el, pts) for el, pts in tracks if pts]
    routes = [(el, pts) for el, pts in routes if pts]
    if track is not None:
        if not 0 <= track < len(tracks):
            raise fail(source, None, f"has {len(tracks)} track(s) with points; there is no "
                                     f"track {track + 1}")
        kind, (chosen, points) = f"trk {track + 1} trkpt", tracks[track]
        ignored = {}
    elif tracks:
        kind, (chosen, points) = "trkpt", tracks[0]
        ignored = {"track": len(tracks) - 1, "route": len(routes)}
    elif routes:
        kind, (chosen, points) = "rtept", routes[0]
        ignored = {"route": len(routes) - 1}
    else:
        n_wpt = len(root.findall(q("wpt")))
        extra = f" (it has {n_wpt} waypoint(s), which do not describe a path)" if n_wpt else ""
        raise fail(source, None, f"no track or route points found{extra}; curvespeed reads "
                                 "trk/trkseg/trkpt or rte/rtept")
    skipped = [f"{n} other {what}(s)" for what, n in ignored.items() if n]
    if skipped:
        what = "track" if kind == "trkpt" else "route"
        hint = ("; if they are drives of the same route, --all-tracks fuses them"
                if ignored.get("track") else "")
        warnings.warn(f"{source}: used the first {what} with points; ignored "
                      f"{' and '.join(skipped)}{hint}", CurvespeedWarning)
    return kind, chosen, points, segment_sizes.get(id(chosen), [])


def _read_points(points, q, kind: str, source: str):
    """Latitude, longitude, elevation (NaN where a point has none), times (None where none) and
    each point's label, checked point by point."""
    n = len(points)
    lat = np.empty(n)
    lon = np.empty(n)
    ele = np.full(n, np.nan)
    times: list[datetime | None] = [None] * n
    where = np.array([f"{kind} {i + 1}" for i in range(n)], dtype=object)
    for i, pt in enumerate(points):
        lat[i] = _coordinate(pt, "lat", source, where[i])
        lon[i] = _coordinate(pt, "lon", source, where[i])
        problem = latlon_range_problem(lat[i], lon[i])
        if problem:
            hint = ("; are lat and lon swapped?" if swapped_would_fit(lat[i], lon[i])
                    else "; fix or remove that point")
            raise fail(source, where[i], problem + hint)
        ele_el = pt.find(q("ele"))
        if ele_el is not None:
            raw = ele_el.text or ""
            v = parse_number(raw)
            if v is None:
                raise fail(source, where[i], f"ele value {cell_text(raw)} {number_problem(raw)}; "
                                             "fix it or remove the <ele> element")
            ele[i] = v
        time_el = pt.find(q("time"))
        if time_el is not None:
            times[i] = _parse_time(time_el.text or "", source, where[i])
    return lat, lon, ele, times, where


def count_gpx_tracks(data: bytes, source: str) -> int:
    """How many tracks of a GPX file have points."""
    root = _parse_xml(data, source)
    ns = _gpx_namespace(root, source)

    def q(name: str) -> str:
        return f"{{{ns}}}{name}" if ns else name

    return sum(1 for trk in root.findall(q("trk"))
               if any(seg.findall(q("trkpt")) for seg in trk.findall(q("trkseg"))))


def _warn_gaps(x: np.ndarray, y: np.ndarray, time_s, segment_starts: np.ndarray,
               source: str) -> None:
    """Warn about jumps in a track (see GAP_FACTOR), naming the largest."""
    step = np.hypot(np.diff(x), np.diff(y))
    moving = step[step > 1e-3]
    if moving.size < 2:
        return
    usual = median(moving)
    gaps = np.flatnonzero(step > max(GAP_FACTOR * usual, GAP_MIN_M))
    if not gaps.size:
        return
    j = int(gaps[np.argmax(step[gaps])])        # step from point j to j + 1 (0-based)
    detail = f"{step[j] / usual:.0f} times the median step of {usual:.1f} m"
    if time_s is not None:
        detail += f", {time_s[j + 1] - time_s[j]:.0f} s later"
    segment = ""
    if j + 1 in set(segment_starts.tolist()):
        segment = (f", where track segment {int(np.searchsorted(segment_starts, j + 1)) + 2} "
                   "starts")
    more = f" (the largest of {gaps.size} such gaps)" if gaps.size > 1 else ""
    warnings.warn(
        f"{source}: trkpt {j + 2} lies {step[j]:.0f} m ({detail}) from trkpt {j + 1}{segment}"
        f"{more}; the route runs straight across the gap. If the receiver lost its fix there, "
        "fill the gap from a map or plan the parts separately",
        CurvespeedWarning, stacklevel=3)


def _parse_xml(data: bytes, source: str) -> ET.Element:
    return _parse_xml_with(data, source, None, "GPX")


def _parse_xml_with(data: bytes, source: str, target, what: str) -> ET.Element:
    """Parse through defusedxml (``target``: a tree builder, or None for the default);
    ``what`` names the format in the advice ("GPX", "OpenDRIVE file")."""
    try:
        if target is None:
            return DefusedET.fromstring(data)
        parser = DefusedET.DefusedXMLParser(target=target)
        target.parser = parser
        parser.feed(data)
        return parser.close()
    except EntitiesForbidden:
        raise fail(source, None, "refused: the file declares XML entities (<!ENTITY ...>), "
                                 "which can expand without bound or read other files; "
                                 f"remove the DOCTYPE block and export the {what} again") from None
    except ExternalReferenceForbidden:
        raise fail(source, None, "refused: the file refers to an external XML resource; "
                                 f"remove the DOCTYPE block and export the {what} again") from None
    except DefusedXmlException as exc:
        raise fail(source, None, f"refused: the file uses an XML feature curvespeed does not "
                                 f"accept ({type(exc).__name__}); export the {what} "
                                 "again") from None
    except LookupError as exc:                  # an encoding Python does not know
        name = str(exc).rpartition(": ")[2] or str(exc)
        raise fail(source, "line 1", f"the XML declaration names the text encoding '{name}', "
                   "which curvespeed does not know; save the file as UTF-8 and declare "
                   "encoding=\"UTF-8\"") from None
    except ET.ParseError as exc:
        line, column = exc.position
        reason = str(exc).split(": line ")[0]
        raise fail(source, f"line {line}, column {column + 1}",
                   f"not well-formed XML ({reason}); fix the file or export it again") from None


def _gpx_namespace(root: ET.Element, source: str) -> str:
    tag = root.tag
    ns, local = tag[1:].split("}", 1) if tag.startswith("{") else ("", tag)
    if local != "gpx":
        raise fail(source, None, f"root element is <{local}>, not <gpx>; is this a GPX file?")
    if ns not in GPX_NAMESPACES:
        accepted = ", ".join(n for n in GPX_NAMESPACES if n)
        raise fail(source, None, f"unknown GPX namespace '{ns}'; curvespeed reads GPX 1.1 and "
                                 f"1.0 ({accepted}) or no namespace")
    return ns


def _coordinate(pt: ET.Element, attribute: str, source: str, where: str) -> float:
    raw = pt.get(attribute)
    if raw is None:
        raise fail(source, where, f"missing the '{attribute}' attribute; every point needs "
                                  "lat and lon")
    v = parse_number(raw)
    if v is None:
        raise fail(source, where, f"{attribute} value {cell_text(raw)} {number_problem(raw)}; "
                                  "fix or remove that point")
    return v


def _parse_time(text: str, source: str, where: str) -> datetime:
    """ISO 8601 date and time; a time without zone is UTC (the GPX convention)."""
    s = text.strip()
    try:
        if len(s) < 16 or s[10] not in "Tt":
            raise ValueError
        t = datetime.fromisoformat(s)
    except ValueError:
        raise fail(source, where, f"time '{s}' is not an ISO 8601 date and time such as "
                                  "2026-05-01T10:00:00Z; fix it or remove the <time> "
                                  "element") from None
    return t if t.tzinfo is not None else t.replace(tzinfo=timezone.utc)


def _all_or_none(values: np.ndarray, present: np.ndarray, what: str, kind: str, source: str):
    """``values`` if every point has the item, else None (with a warning if only some do)."""
    count = int(present.sum())
    if count == present.size:
        return values
    if count:
        first = int(np.flatnonzero(~present)[0]) + 1
        warnings.warn(f"{source}: only {count} of {present.size} points have {what} (first "
                      f"missing at {kind} {first}); ignored it for the whole route",
                      CurvespeedWarning)
    return None


def _text(element: ET.Element | None) -> str | None:
    if element is None or element.text is None:
        return None
    return element.text.strip() or None
