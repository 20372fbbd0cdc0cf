"""The rules every route reader applies, on a path built from road design data.

A road's plan records and elevation records are cubics: a record that is fine at its start can
reach far beyond any place on Earth, or rise steeper than any road, within its length. So the
lane centre is checked where it is sampled, as the points of a route file are: a position
beyond :data:`~curvespeed.route.MAX_COORDINATE_M` or an elevation beyond
:data:`~curvespeed.route.MAX_ELEVATION_M` is refused naming the road, lane and station, and
grades beyond :data:`~curvespeed.geometry.elevation.MAX_ROAD_GRADE` are warned about.
"""

from __future__ import annotations

import numpy as np

from ..errors import RouteGeometryError
from ..route import MAX_COORDINATE_M, MAX_ELEVATION_M
from .elevation import warn_steep_grades

#: What a steep grade on a road's design data means, and what to do.
_ROAD_GRADE_HINT = ("The road's <elevationProfile> (with its superelevation across the lane) "
                    "gives them: check its records (metres, b as rise over run), or ignore "
                    "elevation (--no-elevation)")


def check_path_values(values: dict, station, road_station, which, pieces, source: str,
                      has_z: bool) -> None:
    """Refuse positions and elevations beyond any place on Earth; warn about steep grades.

    ``values`` holds the sampled lane centre ("x", "y", "z", "grade"), ``which`` the piece of
    each node and ``road_station`` its station on that piece's road.
    """
    checks = [("x", "x", MAX_COORDINATE_M, "the plan records (x, y, length, shape)"),
              ("y", "y", MAX_COORDINATE_M, "the plan records (x, y, length, shape)")]
    if has_z:
        checks.append(("z", "elevation", MAX_ELEVATION_M,
                       "the <elevationProfile> records (a, b, c, d; metres)"))
    for key, what, limit, records in checks:
        bad = np.flatnonzero(np.abs(values[key]) > limit)
        if not bad.size:
            continue
        k = int(bad[0])
        raise RouteGeometryError(
            f"{source}: {pieces[which[k]].label}: at road station {road_station[k]:.2f} m "
            f"(path station {station[k]:.2f} m) the {what} is {values[key][k]:.6g} m, beyond "
            f"any place on Earth (more than {limit:g} m); check {records} there")
    if has_z:
        warn_steep_grades(station, values["grade"], source, stacklevel=5, hint=_ROAD_GRADE_HINT)
