"""The per-node inputs of the discrete problem, from the geometry, the limits and the route
constraints: speed caps (top speed, zones, stops) and what sets each, bank and grade angles,
the fixed end speeds, and the range of curvature rates the lateral jerk bound uses.
:func:`curvespeed.problem.build_problem` calls these; core numerics, no files.
"""

from __future__ import annotations

import numpy as np

from . import lateral_rates
from .errors import LimitsError
from .friction import touching_nodes
from .geometry import Geometry
from .limits import Limits, RouteConstraints, stop_node


def rate_spread(geometry: Geometry, limits: Limits):
    """:attr:`SpeedProblem.rate_spread` for ``geometry``: the chord rates within the estimate's
    spread of each step, when the lateral jerk is bounded and the curvature is an estimate."""
    spread, margin = geometry.curvature_spread_m, geometry.curvature_rate_margin_1pm2
    if limits.max_lateral_jerk_mps3 is None or spread is None:
        return None
    if not (np.any(spread > 0.0) or (margin is not None and np.any(margin > 0.0))):
        return None
    return lateral_rates.spread_rate_range(geometry.curvature_1pm, float(geometry.spacing_m),
                                           geometry.closed, spread, margin)


def speed_caps(geometry: Geometry, limits: Limits, constraints: RouteConstraints):
    """Cap on ``b`` at each node from top speed, zones and stops; what sets it; stop nodes."""
    n = geometry.station_m.size
    ds = float(geometry.spacing_m)
    cap = np.full(n, float(limits.max_speed_mps) ** 2)
    source = np.full(n, "max_speed", dtype=object)
    for zone in constraints.zones:
        # every node of a step that overlaps the zone, so linear-in-b steps stay under the cap
        sl = touching_nodes(zone.start_m, zone.end_m, ds, n)
        tighter = cap[sl] > zone.max_speed_mps ** 2
        cap[sl] = np.where(tighter, zone.max_speed_mps ** 2, cap[sl])
        source[sl] = np.where(tighter, "zone", source[sl])
    stop_nodes = []
    for stop in constraints.stops:
        k = stop_node(stop.station_m, ds, n, geometry.closed)
        stop_nodes.append(k)
        cap[k] = 0.0
        source[k] = "stop"
    if geometry.closed:
        cap[-1] = cap[0] = min(cap[0], cap[-1])
    return cap, source, stop_nodes


def bank_and_grade(geometry: Geometry, mu_lat: np.ndarray, friction_index: np.ndarray,
                    constraints: RouteConstraints):
    """Bank angle (from superelevation) and grade angle at each node, radians; refuses a
    cross-slope a vehicle at rest would slide down (``mu_lat``: each node's lateral friction)."""
    s = geometry.station_m
    e = np.zeros(s.size)
    for sup in constraints.superelevation:
        mask = (s >= sup.start_m - 1e-9) & (s <= sup.end_m + 1e-9)
        e[mask] = sup.rate
    theta = np.arctan(e)
    gamma = np.arctan(geometry.grade) if geometry.grade is not None else np.zeros(s.size)
    # A vehicle at rest on a cross-slope steeper than friction allows would slide.
    too_steep = np.abs(e) > mu_lat * np.cos(gamma)
    if too_steep.any():
        k = int(np.flatnonzero(too_steep)[0])
        sup = next((x for x in constraints.superelevation
                    if x.start_m - 1e-9 <= s[k] <= x.end_m + 1e-9 and x.rate == e[k]), None)
        named = f" ({sup.origin})" if sup is not None and sup.origin else ""
        section = (constraints.friction[friction_index[k]] if friction_index[k] >= 0 else None)
        where = (f"of the {section.label()}" if section is not None
                 else "of the route")
        raise LimitsError(f"superelevation {e[k]:g}{named} at station {s[k]:.1f} m exceeds the "
                          f"lateral friction coefficient {mu_lat[k]:g} {where}: a vehicle "
                          "would slide at rest; lower the cross-slope or check the friction")
    return theta, gamma


def end_speeds_b(geometry: Geometry, constraints: RouteConstraints):
    """Fixed squared speeds at the ends of an open route (at rest by default); None on a loop."""
    if geometry.closed:
        if constraints.start_speed_mps is not None or constraints.end_speed_mps is not None:
            raise LimitsError("start and end speed do not apply to a closed route (the lap is "
                              "periodic); plan it as open (--open) to fix them")
        return None, None
    v0 = 0.0 if constraints.start_speed_mps is None else constraints.start_speed_mps
    v1 = 0.0 if constraints.end_speed_mps is None else constraints.end_speed_mps
    return v0 * v0, v1 * v1
