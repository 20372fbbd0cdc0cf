"""Read an ASAM OpenDRIVE road network (``.xodr``, versions 1.4 to 1.8) into plain objects.

What is read, per road: the plan view (``line``, ``arc``, ``spiral``, ``poly3`` and
``paramPoly3`` with either ``pRange``), ``elevationProfile``, ``lateralProfile``
superelevation, ``lanes`` (``laneOffset``, lane sections with lane ``width`` records, lane
links and lane ``speed`` records), road ``type`` speed records, and ``link`` predecessor and
successor; junction connections with their lane links; the header's ``geoReference``.
Everything else (objects, signals, lane markings, materials, ...) does not bear on a speed
profile and is skipped. A feature that does bear on it and that curvespeed does not evaluate
(lane ``border`` records, a ``lateralProfile`` ``shape``) is refused or warned about, naming
its element and line.

Parsing goes through :mod:`defusedxml` (entity declarations and external references refused,
as for GPX) with a tree builder that records each element's line for messages. Speeds are
converted to m/s from ``m/s``, ``km/h`` or ``mph`` (no unit: m/s, the standard's SI default).
"""

from __future__ import annotations

import math
import warnings
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field

import numpy as np

from ..errors import CurvespeedWarning
from ..geometry.design_curves import (ElementCurve, ParamPoly3Curve, Piecewise3, Poly3Curve,
                                      ReferenceLine)
from ..units import kmh_to_mps, mph_to_mps
from ._common import cell_text, fail, number_problem, parse_number
from .opendrive_checks import (check_joins, check_lane_offsets, check_length, check_start,
                               check_widths)

#: Speed units of the standard's speed records, to m/s.
SPEED_UNITS = {"m/s": lambda v: v, "km/h": kmh_to_mps, "mph": mph_to_mps}
#: Versions read (revMajor 1, revMinor in this range); others are read with a warning.
MINORS_READ = range(4, 9)
#: Declared road length and the sum of its plan elements may differ by this much, metres,
#: before a warning (files round lengths to a few decimals).
LENGTH_TOLERANCE_M = 1e-3


@dataclass(frozen=True)
class Link:
    element_type: str              # "road" or "junction"
    element_id: str
    contact_point: str | None      # "start", "end" or None
    line: int


@dataclass
class Lane:
    id: int
    type: str
    widths: Piecewise3
    width_starts_m: tuple
    predecessor: int | None
    successor: int | None
    speeds: list                    # (road station from, m/s, origin)
    line: int


@dataclass
class LaneSection:
    s_m: float
    end_m: float
    lanes: dict
    line: int


@dataclass
class Road:
    id: str
    name: str
    length_m: float
    junction: str
    rule: str                      # "RHT" or "LHT"
    reference: ReferenceLine
    element_starts_m: tuple
    elevation: Piecewise3
    roll: Piecewise3
    lane_offset: Piecewise3
    sections: list
    types: list                    # (s_m, m/s or None, origin)
    predecessor: Link | None
    successor: Link | None
    line: int
    breakpoints_m: tuple = ()


@dataclass
class Connection:
    incoming: str
    connecting: str
    contact_point: str | None
    lane_links: dict
    line: int


@dataclass
class Network:
    source: str
    version: str
    roads: dict
    junctions: dict = field(default_factory=dict)
    geo_reference: str | None = None


class _LineBuilder(ET.TreeBuilder):
    """Tree builder that notes the line each element starts on."""

    def __init__(self):
        super().__init__()
        self.lines: dict = {}
        self.parser = None

    def start(self, tag, attrs):
        element = super().start(tag, attrs)
        self.lines[element] = self.parser.parser.CurrentLineNumber
        return element


class _Doc:
    """The parsed tree, its lines and the file name, for messages."""

    def __init__(self, root, lines, source):
        self.root, self.lines, self.source = root, lines, source

    def where(self, element) -> str:
        return f"line {self.lines.get(element, '?')}, <{_local(element.tag)}>"

    def fail(self, element, message: str):
        return fail(self.source, self.where(element), message)

    def warn(self, element, message: str) -> None:
        warnings.warn(f"{self.source}: {self.where(element)}: {message}", CurvespeedWarning,
                      stacklevel=4)

    def number(self, element, name: str, default: float | None = None) -> float:
        raw = element.get(name)
        if raw is None:
            if default is not None:
                return default
            raise self.fail(element, f"missing the '{name}' attribute; the standard requires "
                                     "it here")
        value = parse_number(raw)
        if value is None:
            raise self.fail(element, f"{name} value {cell_text(raw)} {number_problem(raw)}; "
                                     "fix the file or export it again")
        return value

    def children(self, element, name: str) -> list:
        return [c for c in element if _local(c.tag) == name]

    def child(self, element, name: str):
        found = self.children(element, name)
        return found[0] if found else None


def _local(tag: str) -> str:
    return tag.rpartition("}")[2] if isinstance(tag, str) else ""


def parse_xml(data: bytes, source: str) -> _Doc:
    """Parse the bytes safely, keeping each element's line."""
    from .gpx import _parse_xml_with

    builder = _LineBuilder()
    root = _parse_xml_with(data, source, builder, "OpenDRIVE file")
    return _Doc(root, builder.lines, source)


def parse_opendrive(data: bytes, source: str) -> Network:
    """Read the network: roads, junctions and the geographic reference.

    Raises
    ------
    RouteFormatError
        Not an OpenDRIVE document, a missing or bad attribute, an unknown plan element, lane
        ``border`` records, a road without plan geometry; each message names the line.
    """
    doc = parse_xml(data, source)
    if _local(doc.root.tag) != "OpenDRIVE":
        raise fail(source, None, f"root element is <{_local(doc.root.tag)}>, not <OpenDRIVE>; "
                                 "is this an OpenDRIVE file?")
    header = doc.child(doc.root, "header")
    version = "unknown"
    geo = None
    if header is not None:
        major, minor = header.get("revMajor", "?"), header.get("revMinor", "?")
        version = f"{major}.{minor}"
        if major != "1" or not minor.isdigit() or int(minor) not in MINORS_READ:
            doc.warn(header, f"OpenDRIVE version {version}; curvespeed reads 1.4 to 1.8 and "
                             "reads this file as if it were one of them")
        ref = doc.child(header, "geoReference")
        if ref is not None and (ref.text or "").strip():
            geo = ref.text.strip()
        offset = doc.child(header, "offset")
        if geo and offset is not None and \
                any(doc.number(offset, k, 0.0) for k in ("x", "y", "z", "hdg")):
            doc.warn(offset, "the header's offset is not applied: positions stay in the file's "
                             "plan coordinates, so latitude and longitude from the geoReference "
                             "are shifted by it")
    roads = {}
    for el in doc.children(doc.root, "road"):
        road = _road(doc, el)
        if road.id in roads:
            raise doc.fail(el, f"road id '{road.id}' appears twice (first at line "
                               f"{roads[road.id].line}); road ids must be unique")
        roads[road.id] = road
    if not roads:
        raise fail(source, None, "no <road> elements; the file describes no road")
    junctions = {el.get("id", ""): _junction(doc, el)
                 for el in doc.children(doc.root, "junction")}
    return Network(source, version, roads, junctions, geo)


def _road(doc: _Doc, el) -> Road:
    rid = el.get("id")
    if rid is None:
        raise doc.fail(el, "missing the 'id' attribute; every road needs one")
    length = doc.number(el, "length")
    check_length(doc, el, rid, "length", length)
    reference, starts = _plan_view(doc, el, rid, length)
    link = doc.child(el, "link")
    pred = succ = None
    if link is not None:
        pred = _link(doc, doc.child(link, "predecessor"))
        succ = _link(doc, doc.child(link, "successor"))
    elevation = _records(doc, doc.child(el, "elevationProfile"), "elevation")
    lateral = doc.child(el, "lateralProfile")
    roll = _records(doc, lateral, "superelevation")
    if lateral is not None:
        for name in ("shape", "crossfall"):
            extra = doc.child(lateral, name)
            if extra is not None:
                doc.warn(extra, f"road {rid}: <{name}> (cross-section shape) is not evaluated; "
                                "the lane heights use the elevation and superelevation only")
    lanes = doc.child(el, "lanes")
    if lanes is None:
        raise doc.fail(el, f"road {rid} has no <lanes>; the standard requires them")
    offset = _records(doc, lanes, "laneOffset")
    check_lane_offsets(doc, doc.children(lanes, "laneOffset"), length, rid)
    sections = _sections(doc, lanes, rid, reference.length_m)
    types = []
    for t in doc.children(el, "type"):
        speed = doc.child(t, "speed")
        mps = _speed(doc, speed, "max") if speed is not None else None
        here = doc.where(speed if speed is not None else t)
        types.append((doc.number(t, "s"), mps, f"{doc.source}: {here}"))
    breaks = set(starts) | set(offset.starts_m) | set(elevation.starts_m) | set(roll.starts_m)
    for sec in sections:
        breaks.add(sec.s_m)
        for lane in sec.lanes.values():
            breaks.update(lane.width_starts_m)
    return Road(rid, el.get("name", ""), length, el.get("junction", "-1"),
                el.get("rule", "RHT").upper(), reference, tuple(starts), elevation, roll,
                offset, sections, types, pred, succ, doc.lines.get(el, 0),
                tuple(sorted(breaks)))


def _plan_view(doc: _Doc, el, rid: str, length: float):
    plan = doc.child(el, "planView")
    geometries = doc.children(plan, "geometry") if plan is not None else []
    if not geometries:
        raise doc.fail(el, f"road {rid} has no <planView><geometry>; there is no plan to follow")
    curves, starts = [], []
    for g in geometries:
        s, x, y, hdg, glen = (doc.number(g, k) for k in ("s", "x", "y", "hdg", "length"))
        if not glen > 0:
            raise doc.fail(g, f"road {rid}: geometry length {glen:g} m must be positive")
        check_length(doc, g, rid, "geometry length", glen)
        check_start(doc, g, rid, x, y)
        kinds = [c for c in g if _local(c.tag) not in ("userData", "include", "dataQuality")]
        if len(kinds) != 1:
            raise doc.fail(g, f"road {rid}: a <geometry> must hold exactly one plan element "
                              f"(line, arc, spiral, poly3 or paramPoly3), found {len(kinds)}")
        curves.append(_curve(doc, kinds[0], rid, x, y, hdg, glen))
        starts.append(s)
    starts = np.array(starts)
    if np.any(np.diff(starts) <= 0):
        k = int(np.flatnonzero(np.diff(starts) <= 0)[0]) + 1
        raise doc.fail(geometries[k], f"road {rid}: geometry s {starts[k]:g} m does not come "
                                      "after the previous one; list them in station order")
    check_joins(doc, geometries, curves, starts, rid)
    reference = ReferenceLine(starts, tuple(curves))
    if abs(reference.length_m - length) > LENGTH_TOLERANCE_M:
        doc.warn(el, f"road {rid}: declared length {length:.3f} m, its plan elements end at "
                     f"{reference.length_m:.3f} m; the plan elements are used")
    return reference, list(starts)


def _curve(doc: _Doc, c, rid: str, x, y, hdg, length):
    kind = _local(c.tag)
    if kind == "line":
        return ElementCurve(x, y, hdg, length, 0.0, 0.0)
    if kind == "arc":
        k = doc.number(c, "curvature")
        return ElementCurve(x, y, hdg, length, k, k)
    if kind == "spiral":
        return ElementCurve(x, y, hdg, length, doc.number(c, "curvStart"),
                            doc.number(c, "curvEnd"))
    if kind == "poly3":
        return Poly3Curve(x, y, hdg, length, *(doc.number(c, k) for k in "abcd"))
    if kind == "paramPoly3":
        u = [doc.number(c, f"{k}U") for k in "abcd"]
        v = [doc.number(c, f"{k}V") for k in "abcd"]
        p_range = c.get("pRange", "normalized")
        if p_range not in ("arcLength", "normalized"):
            raise doc.fail(c, f"road {rid}: pRange '{p_range}' is neither 'arcLength' nor "
                              "'normalized'")
        curve = ParamPoly3Curve(x, y, hdg, length, u, v, p_range == "arcLength")
        true = curve.true_length_m()
        if abs(true - length) > max(LENGTH_TOLERANCE_M, 1e-3 * length):
            doc.warn(c, f"road {rid}: the curve is {true:.3f} m long but its geometry says "
                        f"{length:.3f} m; stations follow the design data and the path's "
                        "length is measured along the curve")
        return curve
    raise doc.fail(c, f"road {rid}: plan element <{kind}> is not one curvespeed evaluates "
                      "(line, arc, spiral, poly3, paramPoly3)")


def _records(doc: _Doc, parent, name: str) -> Piecewise3:
    """Piecewise cubic from records with ``s`` (or ``sOffset``) and a, b, c, d."""
    if parent is None:
        return Piecewise3()
    rows = []
    for r in doc.children(parent, name):
        rows.append((doc.number(r, "s"), *(doc.number(r, k) for k in "abcd")))
    return _piecewise(rows)


def _piecewise(rows) -> Piecewise3:
    if not rows:
        return Piecewise3()
    rows = sorted(rows, key=lambda r: r[0])
    arr = np.array(rows, dtype=float)
    return Piecewise3(arr[:, 0], arr[:, 1:])


def _sections(doc: _Doc, lanes_el, rid: str, road_length: float) -> list:
    els = doc.children(lanes_el, "laneSection")
    if not els:
        raise doc.fail(lanes_el, f"road {rid} has no <laneSection>")
    starts = [doc.number(e, "s") for e in els]
    out = []
    for k, e in enumerate(els):
        end = min(starts[k + 1] if k + 1 < len(els) else road_length, road_length)
        lanes = {}
        for side in ("left", "center", "right"):
            block = doc.child(e, side)
            for lane_el in doc.children(block, "lane") if block is not None else []:
                lane = _lane(doc, lane_el, rid, starts[k], end)
                lanes[lane.id] = lane
        out.append(LaneSection(starts[k], end, lanes, doc.lines.get(e, 0)))
    return out


def _lane(doc: _Doc, el, rid: str, section_s: float, section_end: float) -> Lane:
    raw = el.get("id")
    if raw is None or not raw.strip().lstrip("+-").isdigit():
        raise doc.fail(el, f"road {rid}: lane id {cell_text(raw or '')} is not a whole number")
    lane_id = int(raw)
    if lane_id != 0 and doc.child(el, "border") is not None:
        raise doc.fail(doc.child(el, "border"), f"road {rid} lane {lane_id}: lane <border> "
                       "records are not evaluated by curvespeed; describe the lane by <width> "
                       "records (most editors can export either)")
    width_els = doc.children(el, "width")
    rows = [(section_s + doc.number(w, "sOffset"), *(doc.number(w, k) for k in "abcd"))
            for w in width_els]
    if lane_id != 0 and not rows:
        raise doc.fail(el, f"road {rid} lane {lane_id} has no <width>; its centre is unknown")
    check_widths(doc, width_els, rows, section_end, rid, lane_id)
    link = doc.child(el, "link")
    pred = succ = None
    if link is not None:
        p, s = doc.child(link, "predecessor"), doc.child(link, "successor")
        pred = int(doc.number(p, "id")) if p is not None else None
        succ = int(doc.number(s, "id")) if s is not None else None
    speeds = [(section_s + doc.number(sp, "sOffset"), _speed(doc, sp, "max"),
               f"{doc.source}: {doc.where(sp)}") for sp in doc.children(el, "speed")]
    return Lane(lane_id, el.get("type", "none"), _piecewise(rows),
                tuple(r[0] for r in rows), pred, succ, speeds, doc.lines.get(el, 0))


def _speed(doc: _Doc, el, name: str) -> float | None:
    """A speed record's value in m/s; None for 'no limit' or 'undefined'."""
    raw = (el.get(name) or "").strip()
    if raw.lower() in ("no limit", "undefined", ""):
        return None
    unit = el.get("unit", "m/s")
    if unit not in SPEED_UNITS:
        raise doc.fail(el, f"speed unit '{unit}' is not one of {', '.join(SPEED_UNITS)}")
    value = doc.number(el, name)
    if not (value > 0 and math.isfinite(value)):
        raise doc.fail(el, f"speed {value:g} {unit} must be positive")
    return SPEED_UNITS[unit](value)


def _link(doc: _Doc, el) -> Link | None:
    if el is None:
        return None
    kind, eid = el.get("elementType"), el.get("elementId")
    if kind not in ("road", "junction") or eid is None:
        raise doc.fail(el, "a link needs elementType 'road' or 'junction' and an elementId")
    cp = el.get("contactPoint")
    if cp not in (None, "start", "end"):
        raise doc.fail(el, f"contactPoint '{cp}' is neither 'start' nor 'end'")
    return Link(kind, eid, cp, doc.lines.get(el, 0))


def _junction(doc: _Doc, el) -> list:
    out = []
    for c in doc.children(el, "connection"):
        lane_links = {int(doc.number(ll, "from")): int(doc.number(ll, "to"))
                      for ll in doc.children(c, "laneLink")}
        out.append(Connection(c.get("incomingRoad", ""), c.get("connectingRoad", ""),
                              c.get("contactPoint"), lane_links, doc.lines.get(c, 0)))
    return out
