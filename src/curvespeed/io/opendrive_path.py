"""Which path through an OpenDRIVE network: the chain of roads and the lane followed.

``--road 3,7,12`` names roads in driving order; consecutive roads must be linked, directly
(a road's predecessor or successor) or through a junction (an incoming road and one of the
junction's connecting roads). The link's contact points say which end of each road meets the
next, hence the direction each road is driven in. The lane carries over from road to road by
the lane links (a lane's successor or predecessor, a junction connection's laneLink); where the
data give none, the first driving lane on the travel side is taken, with a warning.

Direction and side: on a road with the traffic rule RHT (the default), vehicles driving along
increasing station use the right lanes (negative ids), those driving against it the left lanes;
LHT the other way round. Lane 0 is the road's centre lane: the reference line shifted by the
lane offset. Without ``--road`` the file's first road is used; without ``--lane`` the first
driving lane on the side the direction of travel calls for.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

from ..errors import CurvespeedWarning, RouteFormatError
from ..geometry.design_curves import Piecewise3
from ..geometry.road_path import PathPiece, RoadPath, build_road_path
from .opendrive import Network, Road, parse_opendrive

_OTHER_END = {"start": "end", "end": "start"}


def read_opendrive(path: str | os.PathLike, roads=None, lane: int | None = None,
                   spacing_m: float = 1.0, closed: bool | None = None,
                   use_elevation: bool = True) -> RoadPath:
    """Read an OpenDRIVE file and build the path along ``roads`` (ids in driving order; the
    first road when None) in ``lane`` (None: the first driving lane on the travel side).

    Returns
    -------
    RoadPath
        The lane centre as an exact :class:`~curvespeed.geometry.model.Geometry`, and the
        superelevation and speed zones the road data give along it.
    """
    from ._common import check_text, read_bytes

    source = str(path)
    data = read_bytes(Path(path), source)
    check_text(data, source)
    network = parse_opendrive(data, source)
    return path_from_network(network, roads, lane, spacing_m, closed, use_elevation)


def path_from_network(network: Network, roads=None, lane: int | None = None,
                      spacing_m: float = 1.0, closed: bool | None = None,
                      use_elevation: bool = True) -> RoadPath:
    """The path along ``roads`` in ``lane`` through a parsed network (see read_opendrive)."""
    ids = [str(r) for r in roads] if roads else [next(iter(network.roads))]
    chain = []
    for rid in ids:
        if rid not in network.roads:
            known = ", ".join(list(network.roads)[:20])
            raise RouteFormatError(f"{network.source}: there is no road '{rid}' (roads in the "
                                   f"file: {known}); check --road")
        chain.append(network.roads[rid])
    reverse = _directions(network, chain, lane)
    pieces = []
    current = lane
    for k, (road, back) in enumerate(zip(chain, reverse)):
        if current is None:
            current = _default_lane(network, road, back)
        _check_side(network, road, back, current)
        road_pieces, current = _road_pieces(network, road, back, current, use_elevation)
        pieces.extend(road_pieces)
        if k + 1 < len(chain):
            current = _next_lane(network, road, chain[k + 1], current)
    projection = _projection(network)
    name = f"road {', '.join(ids)}"
    return build_road_path(pieces, spacing_m, closed, name=name, source=network.source,
                           projection=projection)


def _ends(network: Network, a: Road, b: Road) -> list[tuple[str, str]]:
    """Pairs (end of a, end of b) at which the data link road a to road b (from either road's
    links)."""
    from_a, to_b = _links_to(network, a, b)
    from_b, to_a = _links_to(network, b, a)
    ends_a, ends_b = from_a | to_a, to_b | from_b
    return [(ea, eb) for ea in sorted(ends_a) for eb in sorted(ends_b)]


def _links_to(network: Network, a: Road, b: Road) -> tuple[set, set]:
    """Ends of road ``a`` whose link leads to road ``b`` (directly, or through the junction
    ``b`` belongs to), and the ends of ``b`` those links name as contact points."""
    ends_a, ends_b = set(), set()
    for end, link in (("start", a.predecessor), ("end", a.successor)):
        if link is None:
            continue
        if link.element_type == "road" and link.element_id == b.id:
            ends_a.add(end)
            if link.contact_point:
                ends_b.add(link.contact_point)
        elif link.element_type == "junction" and link.element_id == b.junction:
            ends_a.add(end)
            for c in network.junctions.get(link.element_id, []):
                if c.incoming == a.id and c.connecting == b.id and c.contact_point:
                    ends_b.add(c.contact_point)
    return ends_a, ends_b


def _directions(network: Network, chain: list, lane: int | None) -> list[bool]:
    """Whether each road of the chain is driven against its station."""
    if len(chain) == 1:
        road = chain[0]
        return [lane is not None and lane != 0 and (lane > 0) == (road.rule != "LHT")]
    entry = None
    reverse = []
    for a, b in zip(chain[:-1], chain[1:]):
        pairs = [(ea, eb) for ea, eb in _ends(network, a, b) if ea != entry]
        if not pairs:
            raise RouteFormatError(
                f"{network.source}: road {a.id} (line {a.line}) and road {b.id} (line {b.line})"
                f" are not linked{' at the end the chain leaves by' if entry else ''}: neither "
                "names the other (or a junction holding it) as predecessor or successor; "
                "check the order of --road")
        if entry is None and len(pairs) > 1 and lane is not None and lane != 0:
            backward = (lane > 0) == (a.rule != "LHT")
            pairs = [p for p in pairs if (p[0] == "start") == backward] or pairs
        exit_a, entry = pairs[0]
        reverse.append(exit_a == "start")
    reverse.append(entry == "end")
    return reverse


def _side_sign(road: Road, back: bool) -> int:
    """Sign of the lane ids that carry traffic in this direction (-1: right lanes)."""
    right = -1 if road.rule != "LHT" else 1
    return -right if back else right


def _travel_sections(road: Road, back: bool) -> list:
    return list(reversed(road.sections)) if back else list(road.sections)


def _default_lane(network: Network, road: Road, back: bool) -> int:
    sign = _side_sign(road, back)
    section = _travel_sections(road, back)[0]
    ids = sorted((i for i in section.lanes if i * sign > 0), key=abs)
    for i in ids:
        if section.lanes[i].type == "driving":
            return i
    raise RouteFormatError(
        f"{network.source}: road {road.id}: the lane section at line {section.line} has no "
        f"driving lane on the {'right' if sign < 0 else 'left'} side, which traffic driving "
        f"{'against' if back else 'along'} the road uses ({road.rule}); choose one with --lane")


def _check_side(network: Network, road: Road, back: bool, lane: int) -> None:
    if lane == 0:
        return
    sign = _side_sign(road, back)
    if lane * sign < 0:
        raise RouteFormatError(
            f"{network.source}: road {road.id}: lane {lane} carries traffic "
            f"{'along' if back else 'against'} the road's station ({road.rule}), but the "
            f"chain drives it {'against' if back else 'along'} it; choose a lane with "
            f"{'negative' if sign < 0 else 'positive'} id, or reverse the order of --road")


def _road_pieces(network: Network, road: Road, back: bool, lane: int, use_elevation: bool):
    pieces = []
    sections = _travel_sections(road, back)
    for k, section in enumerate(sections):
        if section.end_m <= section.s_m:          # an empty section: nothing to drive
            continue
        if lane not in section.lanes:
            have = ", ".join(str(i) for i in sorted(section.lanes))
            raise RouteFormatError(f"{network.source}: road {road.id}: lane {lane} is absent "
                                   f"from the lane section at line {section.line} (s = "
                                   f"{section.s_m:g} m; its lanes: {have}); choose another "
                                   "--lane")
        pieces.append(_piece(road, section, lane, back, use_elevation))
        if k + 1 < len(sections) and lane != 0:     # within the road: the lane's own link
            this = section.lanes[lane]
            follow = this.predecessor if back else this.successor
            lane = follow if follow is not None else lane
    return pieces, lane


def _piece(road: Road, section, lane: int, back: bool, use_elevation: bool) -> PathPiece:
    terms = [road.lane_offset]
    sign = 1 if lane > 0 else -1
    for j in range(1, abs(lane) + 1):
        width = section.lanes.get(sign * j)
        if width is None:
            continue
        terms.append(width.widths.scaled(sign * (0.5 if j == abs(lane) else 1.0)))
    return PathPiece(
        reference=road.reference, s_start_m=section.s_m, s_end_m=section.end_m, reverse=back,
        offset=tuple(terms), elevation=road.elevation if use_elevation else Piecewise3(),
        roll=road.roll, breakpoints_m=road.breakpoints_m,
        speed_records=_speed_records(road, section, lane), label=f"road {road.id} lane {lane}")


def _speed_records(road: Road, section, lane: int) -> tuple:
    """(s_from, s_to, m/s, origin) over the section: lane records where it has them, the road
    type's elsewhere."""
    def ranges(records, end):
        records = sorted(records, key=lambda r: r[0])
        out = []
        for k, (s, mps, origin) in enumerate(records):
            to = records[k + 1][0] if k + 1 < len(records) else end
            out.append((s, to, mps, origin))
        return out

    base = [(max(a, section.s_m), min(b, section.end_m), v, o)
            for a, b, v, o in ranges(road.types, road.length_m)]
    top = ranges(section.lanes[lane].speeds, section.end_m) if lane else []
    out = []
    for a, b, v, o in base:
        cuts = [(a, b)]
        for ta, tb, _, _ in top:
            cuts = [piece for lo, hi in cuts
                    for piece in ((lo, min(hi, ta)), (max(lo, tb), hi)) if piece[1] > piece[0]]
        out.extend((lo, hi, v, o) for lo, hi in cuts)
    out.extend(top)
    return tuple(r for r in out if r[2] is not None and r[1] > r[0])


def _next_lane(network: Network, a: Road, b: Road, lane: int) -> int | None:
    """The lane on road b that lane ``lane`` of road a leads to (None: choose the default)."""
    if lane == 0:
        return 0
    for c in network.junctions.get(b.junction, []):
        if c.incoming == a.id and c.connecting == b.id and lane in c.lane_links:
            return c.lane_links[lane]
    found = _linked_lane(a, b, lane)
    if found is not None:
        return found
    warnings.warn(f"{network.source}: road {a.id} lane {lane}: no lane link leads to road "
                  f"{b.id}; following its first driving lane on the travel side",
                  CurvespeedWarning, stacklevel=2)
    return None


def _linked_lane(a: Road, b: Road, lane: int) -> int | None:
    """Lane link of road a's lane at the end that meets road b (successor at the end,
    predecessor at the start)."""
    for end, link, section in (("end", a.successor, a.sections[-1]),
                               ("start", a.predecessor, a.sections[0])):
        if link is None or lane not in section.lanes:
            continue
        if (link.element_type == "road" and link.element_id == b.id) or \
                (link.element_type == "junction" and link.element_id == b.junction):
            this = section.lanes[lane]
            found = this.successor if end == "end" else this.predecessor
            if found is not None:
                return found
    return None


def _projection(network: Network):
    if not network.geo_reference:
        return None
    from ..geodesy import GeoReference

    try:
        return GeoReference.from_text(network.geo_reference)
    except ValueError as exc:
        warnings.warn(f"{network.source}: <geoReference> '{network.geo_reference[:60]}' is not "
                      f"a coordinate reference PROJ reads ({exc}); the path stays in the file's "
                      "plan coordinates, without latitude and longitude", CurvespeedWarning,
                      stacklevel=2)
        return None
