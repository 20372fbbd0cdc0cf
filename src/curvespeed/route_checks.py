"""Checks of the route constraints (:class:`~curvespeed.limits.RouteConstraints`) against the
route they apply to: station ranges on the route, speeds, dwell times and rates in range.

Core numerics: nothing here reads or writes files.
"""

from __future__ import annotations

import math
import warnings

from .errors import CurvespeedWarning, LimitsError
from .limits import (END_TOLERANCE_M, MAX_SPEED_MPS, PHYSICAL_RANGES, RouteConstraints,
                     check_dwell)
from .units import format_apart

#: The lowest speed a speed zone may state, m/s: the lowest top speed (``PHYSICAL_RANGES``).
MIN_SPEED_MPS = PHYSICAL_RANGES["max_speed_mps"][0]


def validate_constraints(rc: RouteConstraints, length_m: float, closed: bool) -> RouteConstraints:
    """Check station ranges and values against the route; raise :class:`LimitsError`."""
    def here(item) -> str:
        return f"{item.origin}: " if item.origin else ""

    # the route's span as a person reads it: its length cut (not rounded up) to the centimetre,
    # so a station just past the end never looks inside it (round-off of 1e-8 cm aside)
    route = f"(0..{math.floor(length_m * 100.0 + 1e-8) / 100.0:.2f} m)"
    end = length_m + END_TOLERANCE_M

    for z in rc.zones:
        if not (math.isfinite(z.start_m) and math.isfinite(z.end_m) and z.end_m > z.start_m):
            raise LimitsError(f"{here(z)}speed zone {z.start_m:g}..{z.end_m:g} m: end must be "
                              "after start")
        if not (z.max_speed_mps > 0 and math.isfinite(z.max_speed_mps)):
            raise LimitsError(f"{here(z)}speed zone {z.start_m:g}..{z.end_m:g} m: max speed must "
                              f"be positive, got {z.max_speed_mps:g} m/s (use a stop for zero)")
        if z.max_speed_mps < MIN_SPEED_MPS:
            raise LimitsError(f"{here(z)}speed zone {z.start_m:g}..{z.end_m:g} m: max speed "
                              f"{z.max_speed_mps:g} m/s is below {MIN_SPEED_MPS:g} m/s (0.36 "
                              "km/h, a tenth of walking pace), as no top speed may be; use a stop "
                              "to come to rest, and check the value and its units")
        if z.max_speed_mps > MAX_SPEED_MPS:
            raise LimitsError(f"{here(z)}speed zone {z.start_m:g}..{z.end_m:g} m: max speed "
                              f"{z.max_speed_mps:g} m/s is above {MAX_SPEED_MPS:g} m/s, which no "
                              "vehicle reaches; check the value and its units")
        if z.start_m >= length_m or z.end_m <= 0:
            raise LimitsError(f"{here(z)}speed zone {z.start_m:g}..{z.end_m:g} m lies outside the "
                              f"route {route}; check its stations against the route summary")
        if z.start_m < -END_TOLERANCE_M or z.end_m > end:
            warnings.warn(f"{here(z)}speed zone {z.start_m:g}..{z.end_m:g} m runs past the route "
                          f"{route}; it applies over "
                          f"{max(z.start_m, 0.0):g}..{min(z.end_m, length_m):.1f} m only. Check "
                          "its stations against the route summary", CurvespeedWarning,
                          stacklevel=2)
    for s in rc.stops:
        if not (math.isfinite(s.station_m) and -END_TOLERANCE_M <= s.station_m <= end):
            station, last = format_apart(s.station_m, length_m)
            raise LimitsError(f"{here(s)}stop at station {station} m lies outside the route "
                              f"(0..{last} m); check its station against the route summary")
        if s.dwell_s is not None:
            check_dwell(s.dwell_s, f"{here(s)}stop at station {s.station_m:g} m: ")
    for e in rc.superelevation:
        if not (math.isfinite(e.start_m) and math.isfinite(e.end_m) and e.end_m > e.start_m):
            raise LimitsError(f"{here(e)}superelevation {e.start_m:g}..{e.end_m:g} m: end must be "
                              "after start")
        if not (math.isfinite(e.rate) and abs(e.rate) <= 0.2):
            raise LimitsError(f"{here(e)}superelevation rate {e.rate:g} at "
                              f"{e.start_m:g}..{e.end_m:g} m is outside +-0.2 (rise over run: "
                              "0.06 means 6 %)")
    from .friction import validate_friction_sections

    validate_friction_sections(rc.friction, length_m, end)
    for name in ("start_speed_mps", "end_speed_mps"):
        v = getattr(rc, name)
        if v is not None and not (math.isfinite(v) and v >= 0):
            raise LimitsError(f"{name} = {v:g}: the {name.split('_')[0]} speed must be zero or "
                              "positive (0 is at rest); give it in m/s")
    return rc
