"""Plausibility checks on an OpenDRIVE road's plan records, before anything is tabulated.

The rules every route reader applies (docs/input_rules.md) hold here too: a plan coordinate
beyond :data:`~curvespeed.route.MAX_COORDINATE_M` is refused, and so is a length no road on
Earth has (a ``length="1e12"`` would otherwise be tabulated piece by piece until memory runs
out). Consecutive plan records must also join: each record starts where the one before ends
when evaluated up to the next record's station.
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
