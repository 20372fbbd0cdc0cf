"""Options shared by commands that take limits: the limits file, overrides and constraints."""

from __future__ import annotations

import click

from ._common import FINITE

#: Command-line option -> Limits field, for overrides of the limits file or the defaults.
LIMIT_OPTIONS = {
    "friction": "friction_coefficient",
    "max_lateral_accel": "max_lateral_accel_mps2",
    "max_accel": "max_accel_mps2",
    "max_decel": "max_decel_mps2",
    "max_speed": "max_speed_mps",
    "max_jerk": "max_jerk_mps3",
    "max_lateral_jerk": "max_lateral_jerk_mps3",
    "max_power": "max_power_w",
    "mass": "mass_kg",
    "drag_area": "drag_area_m2",
    "rolling_resistance": "rolling_resistance_coefficient",
}


def _parse_ranges(values, fields: int, what: str, example: str, option: str):
    from ..io._common import number_problem, parse_number

    out = []
    counts = fields if isinstance(fields, tuple) else (fields,)
    for text in values:
        parts = text.split(":")
        if len(parts) not in counts:
            raise click.BadParameter(f"'{text}' is not {what}; write it as {example}",
                                     param_hint=f"'{option}'")
        nums = [parse_number(p) for p in parts]
        bad = [p for p, n in zip(parts, nums) if n is None]
        if bad:
            raise click.BadParameter(f"'{text}': '{bad[0]}' {number_problem(bad[0])}; write it "
                                     f"as {example}", param_hint=f"'{option}'")
        out.append(nums)
    return out


def limit_override_options(func):
    """Add one option per entry of :data:`LIMIT_OPTIONS`."""
    helps = {
        "friction": "Tyre-road friction coefficient mu.",
        "max_lateral_accel": "Comfort cap on lateral acceleration, m/s^2.",
        "max_accel": "Cap on acceleration along the path, m/s^2.",
        "max_decel": "Cap on deceleration along the path (positive), m/s^2.",
        "max_speed": "Top speed, m/s.",
        "max_jerk": "Longitudinal jerk bound, m/s^3.",
        "max_lateral_jerk": "Bound on the rate of change of lateral acceleration, m/s^3 "
                            "(none by default).",
        "max_power": "Tractive power at the wheels, W (needs --mass).",
        "mass": "Vehicle mass, kg.",
        "drag_area": "Drag coefficient times frontal area Cd*A, m^2 (needs --mass).",
        "rolling_resistance": "Rolling resistance coefficient.",
    }
    for name in reversed(list(LIMIT_OPTIONS)):
        func = click.option(f"--{name.replace('_', '-')}", name, type=FINITE, default=None,
                            metavar="X", help=helps[name])(func)
    return func


def _add(func, options):
    for option in reversed(options):
        func = option(func)
    return func


def _placed(flag: str, dest: str, value: str, station_help: str, what: str) -> list:
    """``--FLAG START_M:END_M:VALUE`` and its ``-xy`` and ``-latlon`` forms (ends given by
    position, snapped to the route), all repeatable."""
    return [
        click.option(f"--{flag}", dest, multiple=True, metavar=f"START_M:END_M:{value}",
                     help=station_help),
        click.option(f"--{flag}-xy", f"{dest}_xy", multiple=True, metavar=f"X1:Y1:X2:Y2:{value}",
                     help=f"{what} between the route's points nearest two positions in its "
                          "metric frame, metres, in driving order (repeatable)."),
        click.option(f"--{flag}-latlon", f"{dest}_latlon", multiple=True,
                     metavar=f"LAT1:LON1:LAT2:LON2:{value}",
                     help=f"{what} between the route's points nearest two WGS84 positions, "
                          "decimal degrees, in driving order (repeatable)."),
    ]


def zone_options(func):
    """Speed zones, superelevation and friction sections: what ``plan`` and ``check`` both
    use."""
    return _add(func, _placed("zone", "zones", "MAX_SPEED_MPS",
                              "Speed cap over a station range (repeatable).", "Speed cap")
                + _placed("superelevation", "superelevations", "RATE",
                          "Cross-slope toward the curve's inside over a station range, as a "
                          "fraction (0.06 = 6 %) (repeatable).", "Cross-slope")
                + _placed("friction-section", "friction_sections", "MU[:MU_LAT]",
                          "Tyre-road friction over a station range (a wet or gravel "
                          "stretch); without MU_LAT the vehicle's ellipse shape is kept, "
                          "scaled. Where sections overlap the lowest wins (repeatable).",
                          "Tyre-road friction"))


def stop_and_end_options(func):
    """Stops and the speeds at the ends: what a planning command uses (``check`` judges speeds
    it is given and has no use for them)."""
    return _add(func, [
        click.option("--stop", "stops", multiple=True, type=FINITE, metavar="STATION_M",
                     help="Come to rest at this station (repeatable)."),
        click.option("--stop-xy", "stops_xy", multiple=True, metavar="X_M:Y_M",
                     help="Come to rest at the route's point nearest this position in the "
                          "route's metric frame (at most 25 m off; repeatable)."),
        click.option("--stop-latlon", "stops_latlon", multiple=True, metavar="LAT:LON",
                     help="Come to rest at the route's point nearest this WGS84 position, "
                          "decimal degrees (geographic routes; at most 25 m off; repeatable)."),
        click.option("--start-speed", type=FINITE, default=None, metavar="MPS",
                     help="Speed at the start of an open route, m/s (default 0)."),
        click.option("--end-speed", type=FINITE, default=None, metavar="MPS",
                     help="Speed at the end of an open route, m/s (default 0)."),
    ])


def constraint_options(func):
    """Every route constraint on the command line: zones, superelevation, stops, end speeds."""
    return zone_options(stop_and_end_options(func))


def zone_positions(zones_xy, zones_latlon) -> tuple:
    """``--zone-xy`` and ``--zone-latlon`` as zones by position (placed once the route is
    read)."""
    from ..limits import ZonePosition

    xy = _parse_ranges(zones_xy, 5, "a zone by position", "X1:Y1:X2:Y2:MAX_SPEED_MPS",
                       "--zone-xy")
    ll = _parse_ranges(zones_latlon, 5, "a zone by position",
                       "LAT1:LON1:LAT2:LON2:MAX_SPEED_MPS", "--zone-latlon")
    _check_latlon_ranges(ll, zones_latlon, "--zone-latlon")
    return (tuple(ZonePosition((a, b), (c, d), v, origin=f"--zone-xy {t}")
                  for (a, b, c, d, v), t in zip(xy, zones_xy))
            + tuple(ZonePosition((a, b), (c, d), v, geographic=True, origin=f"--zone-latlon {t}")
                    for (a, b, c, d, v), t in zip(ll, zones_latlon)))


def _check_latlon_ranges(values, texts, option: str) -> None:
    for row, text in zip(values, texts):
        a, b, c, d = row[:4]
        if not all(-90.0 <= lat <= 90.0 and -180.0 <= lon <= 360.0
                   for lat, lon in ((a, b), (c, d))):
            raise click.BadParameter(f"'{text}': a position is not on Earth (lat -90..90, lon "
                                     "-180..180); check the order (lat first)",
                                     param_hint=f"'{option}'")


def section_options(friction_sections=(), friction_sections_xy=(), friction_sections_latlon=(),
                    superelevations_xy=(), superelevations_latlon=()) -> tuple:
    """``--friction-section`` (by station or position) and ``--superelevation-xy``/``-latlon``
    as :class:`~curvespeed.friction.FrictionSection`, :class:`~curvespeed.friction.FrictionPosition`
    and :class:`~curvespeed.limits.SuperelevationPosition` entries (those by position placed
    once the route is read)."""
    from ..friction import FrictionPosition, FrictionSection
    from ..limits import SuperelevationPosition

    out = []
    for value, text in zip(_parse_ranges(friction_sections, (3, 4), "a friction section",
                                         "START_M:END_M:MU or START_M:END_M:MU:MU_LAT",
                                         "--friction-section"), friction_sections):
        out.append(FrictionSection(*value[:3], value[3] if len(value) == 4 else None,
                                   origin=f"--friction-section {text}"))
    for option, texts, geographic in (("--friction-section-xy", friction_sections_xy, False),
                                      ("--friction-section-latlon", friction_sections_latlon,
                                       True)):
        form = "LAT1:LON1:LAT2:LON2" if geographic else "X1:Y1:X2:Y2"
        rows = _parse_ranges(texts, (5, 6), "a friction section by position",
                             f"{form}:MU or {form}:MU:MU_LAT", option)
        if geographic:
            _check_latlon_ranges(rows, texts, option)
        out += [FrictionPosition((r[0], r[1]), (r[2], r[3]), r[4],
                                 r[5] if len(r) == 6 else None, geographic=geographic,
                                 origin=f"{option} {t}") for r, t in zip(rows, texts)]
    for option, texts, geographic in (("--superelevation-xy", superelevations_xy, False),
                                      ("--superelevation-latlon", superelevations_latlon, True)):
        form = "LAT1:LON1:LAT2:LON2" if geographic else "X1:Y1:X2:Y2"
        rows = _parse_ranges(texts, 5, "a superelevation range by position", f"{form}:RATE",
                             option)
        if geographic:
            _check_latlon_ranges(rows, texts, option)
        out += [SuperelevationPosition((r[0], r[1]), (r[2], r[3]), r[4], geographic=geographic,
                                       origin=f"{option} {t}") for r, t in zip(rows, texts)]
    return tuple(out)


def stop_positions(stops_xy, stops_latlon) -> tuple:
    """``--stop-xy`` and ``--stop-latlon`` as stops by position (placed once the route is
    read)."""
    from ..limits import StopPosition

    xy = _parse_ranges(stops_xy, 2, "a position", "X_M:Y_M (e.g. 120.5:-40)", "--stop-xy")
    ll = _parse_ranges(stops_latlon, 2, "a position", "LAT:LON in decimal degrees (e.g. "
                       "48.1375:11.5755)", "--stop-latlon")
    for (lat, lon), text in zip(ll, stops_latlon):
        if not (-90.0 <= lat <= 90.0 and -180.0 <= lon <= 360.0):
            raise click.BadParameter(f"'{text}' is not a position on Earth (lat -90..90, lon "
                                     "-180..180); check the order (lat first)",
                                     param_hint="'--stop-latlon'")
    return (tuple(StopPosition(x_m=x, y_m=y, origin=f"--stop-xy {t}")
                  for (x, y), t in zip(xy, stops_xy))
            + tuple(StopPosition(lat_deg=a, lon_deg=b, origin=f"--stop-latlon {t}")
                    for (a, b), t in zip(ll, stops_latlon)))


def options_given(overrides: dict) -> dict:
    """Limits field -> the option that set it on the command line (``{"max_speed_mps":
    "--max-speed"}``): warnings name a value from the command line as the user wrote it."""
    return {LIMIT_OPTIONS[k]: "--" + k.replace("_", "-") for k, v in overrides.items()
            if v is not None}


def resolve_limits(limits_file, overrides: dict, zones, stops, superelevations,
                   start_speed, end_speed, positions: tuple = ()):
    """Limits and constraints from the file (or defaults) with command-line overrides on top.

    ``positions`` are stops and zones by position from the command line
    (:func:`stop_positions`, :func:`zone_positions`), and friction sections and superelevation
    by position (:func:`section_options`)."""
    from ..friction import FrictionPosition, FrictionSection
    from ..limits import (DEFAULT_LIMITS, RouteConstraints, SpeedZone, Stop, StopPosition,
                          Superelevation, SuperelevationPosition, ZonePosition, validate_limits,
                          warn_zones_above_top_speed)

    if limits_file:
        from ..io.limits_toml import read_limits

        limits, constraints = read_limits(limits_file)
        origin = str(limits_file)
    else:
        limits, constraints = DEFAULT_LIMITS, RouteConstraints()
        origin = "built-in defaults"
    changes = {LIMIT_OPTIONS[k]: v for k, v in overrides.items() if v is not None}
    given_as = options_given(overrides)
    if changes:
        limits = limits.replace(**changes)
        origin += " with command-line overrides"
    validate_limits(limits, origin, given_as=given_as)
    _check_end_speeds(start_speed, end_speed)
    extra = RouteConstraints(
        zones=tuple(SpeedZone(*z, origin="--zone") for z in
                    _parse_ranges(zones, 3, "a speed zone", "START_M:END_M:MAX_SPEED_MPS",
                                        "--zone")),
        stops=tuple(Stop(s, origin="--stop") for s in stops),
        superelevation=tuple(Superelevation(*e, origin="--superelevation") for e in
                             _parse_ranges(superelevations, 3, "a superelevation range",
                                           "START_M:END_M:RATE", "--superelevation")),
        start_speed_mps=start_speed, end_speed_mps=end_speed,
        stop_positions=tuple(p for p in positions if isinstance(p, StopPosition)),
        zone_positions=tuple(p for p in positions if isinstance(p, ZonePosition)),
        friction=tuple(p for p in positions if isinstance(p, FrictionSection)),
        friction_positions=tuple(p for p in positions if isinstance(p, FrictionPosition)),
        superelevation_positions=tuple(p for p in positions
                                       if isinstance(p, SuperelevationPosition)))
    constraints = constraints.merged(extra)
    warn_zones_above_top_speed(constraints.zones, limits, given_as)
    return limits, constraints, origin


def _check_end_speeds(start_speed, end_speed) -> None:
    """Refuse a negative ``--start-speed`` or ``--end-speed``, naming the option."""
    from ..errors import LimitsError

    for option, value in (("--start-speed", start_speed), ("--end-speed", end_speed)):
        if value is not None and value < 0.0:
            raise LimitsError(f"{option} {value:g}: the {option[2:].split('-')[0]} speed must be "
                              "zero or positive (0 is at rest); give it in m/s")


def limits_and_geometry(route_file, limits_file, overrides: dict, constraint_args: tuple,
                        geometry_args: tuple, positions: tuple = (), place_stops: bool = True):
    """Limits, constraints and their origin, and the resampled route, checked against each other.

    ``constraint_args`` are the values of :func:`constraint_options` (zones, stops,
    superelevations, start speed, end speed), ``geometry_args`` those of
    :func:`~curvespeed.cli._common.geometry_options` (spacing, position noise, elevation noise,
    closed). ``positions`` are stops and zones by position from the command line; zones by
    position (file and command line) are snapped to the route, and stops too with
    ``place_stops`` (``check``, which has no use for stops, leaves them). Returns
    ``(limits, constraints, origin, geometry)``.
    """
    from ._common import load_geometry

    limits, constraints, origin = resolve_limits(limits_file, overrides, *constraint_args,
                                                 positions=positions)
    source, geometry = load_geometry(route_file, *geometry_args)
    from ..limits import warn_zones_above_top_speed
    from ..placement import place_positions

    given = len(constraints.zones)
    constraints = place_positions(constraints, geometry, stops=place_stops)
    warn_zones_above_top_speed(constraints.zones[given:], limits, options_given(overrides))
    road_zones = getattr(source, "zones", None)
    if road_zones is not None:            # an OpenDRIVE path: the road's own data, under the user's
        from ..limits import RouteConstraints, overlay_constraints

        road = RouteConstraints(zones=road_zones, superelevation=source.superelevation)
        constraints = overlay_constraints(road, constraints)
        if road_zones or source.superelevation:
            origin += " with the road data's speed records and superelevation"
    return limits, constraints, origin, geometry


def snapped_lines(constraints) -> list[str]:
    """One line per stop or zone given by position: where it went on the route and how far
    it was."""
    lines = [f"{kind:<8} {z.origin}: snapped to stations {z.start_m:.1f}..{z.end_m:.1f} m, "
             f"ends up to {z.snap_distance_m:.2f} m from the route"
             for kind, items in (("zone", constraints.zones), ("friction", constraints.friction),
                                 ("superelevation", constraints.superelevation))
             for z in items if z.snap_distance_m is not None]
    for stop in constraints.stops:
        if stop.snap_distance_m is None:
            continue
        name = f" '{stop.name}'" if stop.name else ""
        lines.append(f"stop     {stop.origin}{name}: snapped to station {stop.station_m:.1f} m, "
                     f"{stop.snap_distance_m:.2f} m from the route")
    return lines


def friction_lines(constraints, limits) -> list[str]:
    """One line per friction section: its stations and the coefficients it plans with."""
    lines = []
    for sec in constraints.friction:
        along, across = sec.coefficients(limits)
        lines.append(f"friction {sec.start_m:.1f}..{sec.end_m:.1f} m: mu {along:g} (lateral "
                     f"{across:.3g}) instead of {limits.mu_long:g} ({limits.mu_lat:g})"
                     + (f"; {sec.origin}" if sec.origin else ""))
    return lines
