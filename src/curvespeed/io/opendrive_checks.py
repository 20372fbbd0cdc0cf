"""Plausibility checks on an OpenDRIVE road's plan records, before anything is tabulated.

The rules every route reader applies (docs/input_rules.md) hold here too: a plan coordinate
beyond :data:`~curvespeed.route.MAX_COORDINATE_M` is refused, and so is a length no road on
Earth has (a ``length="1e12"`` would otherwise be tabulated piece by piece until memory runs
out). Consecutive plan records must also join: each record starts where the one before ends
when evaluated up to the next record's station. A lane's width records must give a width
between zero and :data:`MAX_LANE_WIDTH_M` over the whole stretch each covers.
"""

from __future__ import annotations

import math

import numpy as np

from ..route import MAX_COORDINATE_M

#: Longest road or plan record accepted, metres: the equator's length (40,075 km). No road is
#: that long, and a record this long is tabulated in 2 million pieces (about 1 GB of memory),
#: so a larger value is a wrong unit or a broken export, refused before any work.
MAX_ROAD_LENGTH_M = 4.0e7
#: A plan record that starts farther than this from where the one before ends (metres) is
#: reported: the data round coordinates to a few decimals, and 1 cm covers files written with
#: two (it is also the tolerance at which a chain of roads is said not to meet) ...
RECORD_GAP_WARN_M = 0.01
#: ... and one that starts farther than this is refused: the path would jump by more than a
#: vehicle's own positioning error (about a metre for consumer receivers), which no rounding of
#: coordinates explains; the curvature and the profile would ignore the jump.
RECORD_GAP_MAX_M = 1.0
#: Widest lane accepted, metres: a traffic lane is about 2.5-4 m wide, and a verge, shoulder or
#: median written as a lane of its own some tens of metres (common practice); a width beyond
#: 100 m is a wrong unit or a broken export, and would put the path that far from the road.
MAX_LANE_WIDTH_M = 100.0
#: A width this little below zero is round-off, metres: a taper to zero written with its
#: cubic's coefficients to six or more significant digits dips below zero by far less than a
#: millimetre over a hundred metres; anything more is a lane folded over its neighbour.
WIDTH_ROUND_OFF_M = 1e-3


def check_length(doc, element, rid: str, what: str, length: float) -> None:
    """Refuse a road or record length beyond :data:`MAX_ROAD_LENGTH_M`."""
    if length > MAX_ROAD_LENGTH_M:
        raise doc.fail(element, f"road {rid}: {what} {length:.6g} m is longer than the equator "
                                f"({MAX_ROAD_LENGTH_M:.4g} m); no road is that long. Check the "
                                "units (metres) or export the file again")


def check_start(doc, element, rid: str, x: float, y: float) -> None:
    """Refuse a record's start coordinate beyond any place on Earth (as for every reader)."""
    for name, value in (("x", x), ("y", y)):
        if abs(value) > MAX_COORDINATE_M:
            raise doc.fail(element, f"road {rid}: {name} = {value:.6g} m is beyond any place on "
                                    f"Earth (more than {MAX_COORDINATE_M:g} m); check the units "
                                    "(metres) and the geometry's coordinates")


def check_joins(doc, geometries, curves, starts, rid: str) -> None:
    """Refuse (beyond :data:`RECORD_GAP_MAX_M`) or warn about (beyond
    :data:`RECORD_GAP_WARN_M`) a record that does not start where the one before ends."""
    for k in range(1, len(curves)):
        ends = curves[k - 1].evaluate(np.array([starts[k] - starts[k - 1]]))
        here = curves[k].evaluate(np.array([0.0]))
        gap = math.hypot(float(ends.x_m[0] - here.x_m[0]), float(ends.y_m[0] - here.y_m[0]))
        if not gap > RECORD_GAP_WARN_M:
            continue
        text = (f"road {rid}: this geometry starts {gap:.3f} m from where the one before "
                f"({doc.where(geometries[k - 1])}) ends at s = {starts[k]:g} m; the plan jumps")
        if gap > RECORD_GAP_MAX_M:
            raise doc.fail(geometries[k], f"{text} (more than {RECORD_GAP_MAX_M:g} m). Check "
                                          "its x, y and the previous record's length and shape")
        doc.warn(geometries[k], f"{text} (more than {RECORD_GAP_WARN_M:g} m, less than "
                                f"{RECORD_GAP_MAX_M:g} m); the path follows each record as given")


def check_widths(doc, elements, rows, section_end_m: float, rid: str, lane_id: int) -> None:
    """Refuse a lane's ``<width>`` record whose cubic goes below zero (beyond
    :data:`WIDTH_ROUND_OFF_M`) or above :data:`MAX_LANE_WIDTH_M` anywhere on the stretch it
    covers: from its ``sOffset`` to the next record's, the last one to the section's end.
    ``rows`` are ``(s, a, b, c, d)`` with ``s`` the road station, one per element."""
    order = sorted(range(len(rows)), key=lambda k: rows[k][0])
    for i, k in enumerate(order):
        start = rows[k][0]
        stop = rows[order[i + 1]][0] if i + 1 < len(order) else section_end_m
        (low, at_low), (high, at_high) = _cubic_extremes(rows[k][1:], max(stop - start, 0.0))
        here = f"road {rid} lane {lane_id}: its width"
        if not high <= MAX_LANE_WIDTH_M:
            raise doc.fail(elements[k], f"{here} is {high:.6g} m at s = {start + at_high:g} m, "
                                        f"wider than {MAX_LANE_WIDTH_M:g} m, which no lane is "
                                        "(a traffic lane is 2.5-4 m, a verge or median some "
                                        "tens of metres); check the units (metres) and the "
                                        "record's a, b, c, d")
        if low < -WIDTH_ROUND_OFF_M:
            raise doc.fail(elements[k], f"{here} is {low:.6g} m at s = {start + at_low:g} m: a "
                                        "width is zero or more (a lane that ends narrows to "
                                        "0 m); check the record's a, b, c, d, whose cubic "
                                        "must stay at or above zero up to the next record")


#: Largest lateral shift of a road's lanes from its reference line, m: a ``<laneOffset>`` moves
#: them by up to a few lane widths where a road widens or its marking shifts (common practice);
#: beyond 100 m it is a wrong unit or a broken export, and would put the path that far from the
#: road.
MAX_LANE_OFFSET_M = 100.0


def check_lane_offsets(doc, elements, road_length_m: float, rid: str) -> None:
    """Refuse a ``<laneOffset>`` record whose cubic leaves +-:data:`MAX_LANE_OFFSET_M`
    anywhere on the stretch it covers: from its ``s`` to the next record's, the last one to the
    road's end."""
    rows = [tuple(doc.number(e, k) for k in "sabcd") for e in elements]
    order = sorted(range(len(rows)), key=lambda k: rows[k][0])
    for i, k in enumerate(order):
        start = rows[k][0]
        stop = rows[order[i + 1]][0] if i + 1 < len(order) else road_length_m
        (low, at_low), (high, at_high) = _cubic_extremes(rows[k][1:], max(stop - start, 0.0))
        value, at = (high, at_high) if not high <= -low else (low, at_low)
        if not abs(value) <= MAX_LANE_OFFSET_M:
            raise doc.fail(elements[k], f"road {rid}: its lane offset is {value:.6g} m at "
                                        f"s = {start + at:g} m, more than {MAX_LANE_OFFSET_M:g} m "
                                        "from the reference line, which no road's lanes are "
                                        "(a lane offset is up to a few lane widths); check the "
                                        "units (metres) and the record's a, b, c, d")


def _cubic_extremes(coefficients, span: float):
    """The lowest and highest value of ``a + b t + c t^2 + d t^3`` on ``0 <= t <= span``, each
    as ``(value, t)``: at an end, or where the derivative ``b + 2 c t + 3 d t^2`` is zero
    (a value that overflows counts as infinitely wide)."""
    a, b, c, d = coefficients
    candidates = [0.0, span]
    if d != 0.0:
        disc = 4.0 * c * c - 12.0 * d * b
        if disc >= 0.0:
            root = math.sqrt(disc)
            candidates += [(-2.0 * c + root) / (6.0 * d), (-2.0 * c - root) / (6.0 * d)]
    elif c != 0.0:
        candidates.append(-b / (2.0 * c))
    found = [(a + t * (b + t * (c + t * d)), t) for t in candidates if 0.0 <= t <= span]
    if not all(math.isfinite(value) for value, _ in found):
        return (0.0, 0.0), (math.inf, next(t for v, t in found if not math.isfinite(v)))
    return (min(found, key=lambda f: f[0]), max(found, key=lambda f: f[0]))
