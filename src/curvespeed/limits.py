"""Vehicle limits and route-side constraints, in SI units.

:class:`Limits` says what the vehicle and its passengers accept; :class:`RouteConstraints` says
what the route imposes (speed zones, stops, superelevation, start and end speed). Both are plain
frozen values: the TOML reader (:mod:`curvespeed.io.limits_toml`) and the command line build them,
:func:`curvespeed.problem.build_problem` turns them into the discrete problem every solver shares.

Default limits (:data:`DEFAULT_LIMITS`) describe a passenger car driven comfortably. They are
common practice, not a standard: lateral 2-3 m/s^2 is the usual comfort band (we take 2.5),
longitudinal +1.5 / -2.5 m/s^2 sit inside the usual +1.5..2 / -2..3.5 m/s^2 comfort ranges, a
longitudinal jerk of 2 m/s^3 inside the usual 1-2.5 m/s^3 (the adaptive-cruise-control standard
ISO 15622 allows 2.5 m/s^3, from memory), and a friction coefficient of 0.7 is the low end of dry
asphalt (0.7-0.9 in accident-reconstruction handbooks), so grip rarely binds before comfort does.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass

from .errors import CurvespeedWarning, LimitsError
from .units import STANDARD_GRAVITY_MPS2, mps_to_kmh

#: Air density of the ISA standard atmosphere at sea level, kg/m^3.
ISA_SEA_LEVEL_AIR_DENSITY_KGPM3 = 1.225


@dataclass(frozen=True)
class Limits:
    """What the vehicle can do and what its passengers accept.

    Attributes
    ----------
    friction_coefficient : float
        Tyre-road friction coefficient mu (dimensionless). With ``lateral_friction_coefficient``
        it sets the friction ellipse: tyre force along the path up to mu*N, across up to
        mu_lat*N, combined elliptically (N: normal load, including superelevation and grade).
        The route's friction: friction sections (:mod:`curvespeed.friction`) replace it over
        their station ranges.
    max_lateral_accel_mps2 : float
        Comfort cap on the lateral acceleration felt in the road plane, m/s^2.
    max_accel_mps2, max_decel_mps2 : float
        Comfort / actuator caps on acceleration and deceleration along the path, m/s^2 (both
        positive). Combined with lateral acceleration as a comfort ellipse.
    max_speed_mps : float
        Highest speed anywhere, m/s.
    max_jerk_mps3 : float or None
        Longitudinal jerk bound, m/s^3 (enforced by the convex solver; None for no bound).
    max_lateral_jerk_mps3 : float or None
        Bound on the rate of change of lateral acceleration ``d(kappa v^2)/dt``, m/s^3 (enforced
        by the convex solver; None, the default, for no bound). It slows the vehicle where the
        curvature changes quickly (spirals, curve entries); see ``docs/limits.md``.
    lateral_friction_coefficient : float or None
        Friction across the path; None means equal to ``friction_coefficient`` (a circle).
    max_power_w, mass_kg : float or None
        Powertrain: tractive power at the wheels, W, and vehicle mass, kg. Drive force <= P/v.
    drag_area_m2 : float
        Drag coefficient times frontal area Cd*A, m^2 (0 ignores drag). Needs ``mass_kg``.
    air_density_kgpm3 : float
        Air density for drag, kg/m^3.
    rolling_resistance_coefficient : float
        Rolling resistance force over normal load (dimensionless, 0 ignores it).
    gravity_mps2 : float
        Gravitational acceleration, m/s^2.
    """

    friction_coefficient: float = 0.7
    max_lateral_accel_mps2: float = 2.5
    max_accel_mps2: float = 1.5
    max_decel_mps2: float = 2.5
    max_speed_mps: float = 30.0
    max_jerk_mps3: float | None = 2.0
    max_lateral_jerk_mps3: float | None = None
    lateral_friction_coefficient: float | None = None
    max_power_w: float | None = None
    mass_kg: float | None = None
    drag_area_m2: float = 0.0
    air_density_kgpm3: float = ISA_SEA_LEVEL_AIR_DENSITY_KGPM3
    rolling_resistance_coefficient: float = 0.0
    gravity_mps2: float = STANDARD_GRAVITY_MPS2

    @property
    def mu_long(self) -> float:
        return self.friction_coefficient

    @property
    def mu_lat(self) -> float:
        return (self.friction_coefficient if self.lateral_friction_coefficient is None
                else self.lateral_friction_coefficient)

    @property
    def drag_per_b_1pm(self) -> float:
        """Aerodynamic deceleration per squared speed, 1/m: a_drag = this * v^2."""
        if not self.drag_area_m2:
            return 0.0
        return 0.5 * self.air_density_kgpm3 * self.drag_area_m2 / float(self.mass_kg)

    @property
    def power_per_mass_wpkg(self) -> float:
        """Tractive power over mass, W/kg (infinite when no power limit is set)."""
        if self.max_power_w is None:
            return math.inf
        return self.max_power_w / float(self.mass_kg)

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)

    def replace(self, **changes) -> "Limits":
        return dataclasses.replace(self, **changes)


#: Built-in limits for a passenger car in comfortable driving (see module docstring).
DEFAULT_LIMITS = Limits()

_POSITIVE = ("friction_coefficient", "max_lateral_accel_mps2", "max_accel_mps2",
             "max_decel_mps2", "max_speed_mps", "max_jerk_mps3", "max_lateral_jerk_mps3",
             "lateral_friction_coefficient",
             "max_power_w", "mass_kg", "air_density_kgpm3", "gravity_mps2")
_NON_NEGATIVE = ("drag_area_m2", "rolling_resistance_coefficient")

#: The highest jerk bound, m/s^3: at 1,000 m/s^3 a vehicle takes up 10 m/s^2 (about 1 g) in
#: 0.01 s, faster than any brake or drive builds up force (tens of m/s^3 in an emergency stop,
#: common practice, from memory); a bound above it bounds nothing.
MAX_JERK_MPS3 = 1000.0
_NO_JERK_BOUND = ("above 1,000 m/s^3 (1 g taken up in 0.01 s, faster than any brake or "
                  "drive) a jerk bound bounds nothing")

_FRICTION_WHY = ("tyre-road friction is about 0.7-0.9 on dry asphalt, 0.1 on ice, 0.05 on wet "
                 "ice, below 2 even for racing tyres; below 0.01 a vehicle would need over 100 s "
                 "to brake from 10 m/s and could not climb a 1 % grade")

#: Values no vehicle on a road can have, refused: name -> (lowest, highest, why). Sources are
#: common practice unless named.
PHYSICAL_RANGES = {
    "friction_coefficient": (0.01, 2.0, _FRICTION_WHY),
    "lateral_friction_coefficient": (0.01, 2.0, _FRICTION_WHY),
    "air_density_kgpm3": (0.3, 2.0, "air is 1.225 kg/m^3 at sea level in the standard "
                          "atmosphere, about 1.4 on a very cold day and 0.7 at 5,000 m, above "
                          "the highest roads"),
    "drag_area_m2": (0.0, 20.0, "drag coefficient times frontal area is about 0.5-1 m^2 for "
                     "cars and up to about 10 m^2 for trucks and buses"),
    "rolling_resistance_coefficient": (0.0, 0.5, "tyres roll at about 0.01 on asphalt and "
                                       "0.3 in sand"),
    "mass_kg": (1.0, 1e7, "from a few kg for a small robot to about 10,000 t for the heaviest "
                "trains"),
    "gravity_mps2": (9.7, 10.0, "gravity at the Earth's surface is 9.78-9.83 m/s^2"),
    "max_speed_mps": (0.1, 1000.0, "no vehicle on land reaches 1,000 m/s (the land speed "
                      "record is about 340 m/s, from memory); larger values also overflow the "
                      "squared speeds the solvers work in; below 0.1 m/s (0.36 km/h, a tenth "
                      "of walking pace) a 100 m route would take over 15 minutes"),
    "max_accel_mps2": (0.01, math.inf, "below 0.01 m/s^2 a vehicle would take over 100 s to "
                       "gain 1 m/s"),
    "max_decel_mps2": (0.01, math.inf, "below 0.01 m/s^2 a vehicle would take over 100 s to "
                       "lose 1 m/s"),
    "max_lateral_accel_mps2": (0.01, math.inf, "below 0.01 m/s^2 even a 1 km curve would be "
                               "taken at 3 m/s"),
    "max_jerk_mps3": (0.01, MAX_JERK_MPS3, "below 0.01 m/s^3 taking up 1 m/s^2 would last "
                      f"100 s; {_NO_JERK_BOUND}: for no bound plan with --solver envelope"),
    "max_lateral_jerk_mps3": (0.01, MAX_JERK_MPS3, "below 0.01 m/s^3 entering a curve at 1 "
                              f"m/s^2 would last 100 s; {_NO_JERK_BOUND}: leave it unset for "
                              "no bound"),
}
#: The highest speed a limit or speed zone may state, m/s (see ``PHYSICAL_RANGES``); beyond it
#: squared speeds in the problem would overflow long before any vehicle is that fast.
MAX_SPEED_MPS = PHYSICAL_RANGES["max_speed_mps"][1]

#: Power over mass below this, W/kg, is most likely a power in kW under the W key (a loaded
#: truck has about 5 W/kg, a passenger car 30-150 W/kg, common practice): warned about, not
#: refused.
MIN_PLAUSIBLE_POWER_WPKG = 1.0

#: A top speed above this, m/s (252 km/h, beyond the top speed of nearly every road vehicle,
#: common practice), is most likely a value in km/h under the m/s key: warned about, not
#: refused (a proving-ground run that fast still plans).
MAX_PLAUSIBLE_SPEED_MPS = 70.0

#: A lateral comfort cap below this, m/s^2, is most likely a value in g (0.3 g = 2.9 m/s^2):
#: comfort criteria sit at 1-4 m/s^2 (about 2-3 m/s^2 for passenger cars, common practice).
MIN_PLAUSIBLE_LATERAL_MPS2 = 1.0

#: A deceleration cap below this, m/s^2, is most likely a value in g: even a train's service
#: braking is about 0.5-1 m/s^2 (common practice).
MIN_PLAUSIBLE_DECEL_MPS2 = 0.5


def _given(name: str, value: float, given_as=None) -> str:
    """``max_speed_mps = 80``, or ``--max-speed 80`` where ``given_as`` says the value came
    from that command-line option."""
    if given_as and name in given_as:
        return f"{given_as[name]} {value:g}"
    return f"{name} = {value:g}"


def _unit_slips(limits: Limits, given_as=None) -> list[str]:
    """Each limit whose value looks like another unit, said with the unit it looks like and
    the value it would then be in ours; named as the user gave it (``given_as``: field ->
    command-line option, for values from the command line; the field name otherwise)."""
    g = limits.gravity_mps2
    found = []
    if limits.power_per_mass_wpkg < MIN_PLAUSIBLE_POWER_WPKG:
        found.append(
            f"{_given('max_power_w', limits.max_power_w, given_as)} W for "
            f"{_given('mass_kg', limits.mass_kg, given_as)} is "
            f"{limits.power_per_mass_wpkg:.3g} W/kg, less than a loaded truck (about 5 W/kg): "
            f"the vehicle crawls up every grade; if the power is {limits.max_power_w:g} kW, "
            f"that is {limits.max_power_w * 1000.0:g} W")
    v = limits.max_speed_mps
    if v > MAX_PLAUSIBLE_SPEED_MPS:
        found.append(
            f"{_given('max_speed_mps', v, given_as)} m/s is {mps_to_kmh(v):.0f} km/h, faster "
            f"than nearly every road vehicle; if the value is {v:g} km/h, that is "
            f"{v / 3.6:.2f} m/s (divide it by 3.6)")
    for name, low, what in (("max_lateral_accel_mps2", MIN_PLAUSIBLE_LATERAL_MPS2,
                             "gentler than any lateral comfort criterion (about 2-3 m/s^2 "
                             "for passenger cars)"),
                            ("max_decel_mps2", MIN_PLAUSIBLE_DECEL_MPS2,
                             "gentler than a train's service braking (about 0.5-1 m/s^2)")):
        a = getattr(limits, name)
        if a < low:
            found.append(
                f"{_given(name, a, given_as)} m/s^2 is {a / g:.3g} g, {what}; if the value is "
                f"{a:g} g, that is {a * g:.2f} m/s^2 (multiply it by {g:g})")
    return found


def validate_limits(limits: Limits, where: str = "limits", warn: bool = True,
                    given_as=None) -> Limits:
    """Check values; raise :class:`LimitsError`, or warn when comfort exceeds grip or a value
    looks like another unit (a top speed in km/h, a lateral or braking cap in g, a power in kW).

    ``where`` names the origin (a file, "command line") for messages. ``warn=False`` checks
    without warning, for a caller that validates limits someone already validated (and warned
    about, naming their origin). ``given_as`` maps the fields whose values came from the
    command line to the option that gave them (``{"max_speed_mps": "--max-speed"}``): the
    warnings then name the option, as the user wrote it, instead of the limits-file key.
    """
    for name in _POSITIVE + _NON_NEGATIVE:
        value = getattr(limits, name)
        if value is None:
            continue
        if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
            raise LimitsError(f"{where}: {name} must be a finite number, got {value!r}")
        if name in _POSITIVE and value <= 0:
            raise LimitsError(f"{where}: {name} must be positive, got {value:g}")
        if name in _NON_NEGATIVE and value < 0:
            raise LimitsError(f"{where}: {name} must be zero or positive, got {value:g}")
    for name, (low, high, why) in PHYSICAL_RANGES.items():
        value = getattr(limits, name)
        if value is not None and not low <= value <= high:
            span = f"below {low:g}" if high == math.inf else f"outside {low:g}..{high:g}"
            raise LimitsError(f"{where}: {_given(name, value, given_as)} is {span}, which no "
                              "vehicle has: "
                              f"{why}; check the value and its units")
    if limits.max_power_w is not None and limits.mass_kg is None:
        raise LimitsError(f"{where}: max_power_w needs mass_kg (drive acceleration is P/(m v))")
    if limits.drag_area_m2 and limits.mass_kg is None:
        raise LimitsError(f"{where}: drag_area_m2 needs mass_kg (drag deceleration is "
                          "rho Cd A v^2 / (2 m))")
    if not warn:
        return limits
    for slip in _unit_slips(limits, given_as):
        warnings.warn(f"{where}: {slip}", CurvespeedWarning, stacklevel=2)
    g = limits.gravity_mps2
    checks = (("max_lateral_accel_mps2", limits.mu_lat * g, "lateral"),
              ("max_accel_mps2", limits.mu_long * g, "longitudinal"),
              ("max_decel_mps2", limits.mu_long * g, "longitudinal"))
    for name, grip, direction in checks:
        value = getattr(limits, name)
        if value > grip:
            warnings.warn(
                f"{where}: {_given(name, value, given_as)} m/s^2 exceeds the {direction} grip "
                f"mu*g = {grip:.2f} m/s^2; friction is the binding limit there",
                CurvespeedWarning, stacklevel=2)
    return limits


@dataclass(frozen=True)
class SpeedZone:
    """A speed cap over a station range, metres and m/s. ``snap_distance_m``: for a zone given
    by positions, the larger of its two ends' distances from the route, m (else None)."""

    start_m: float
    end_m: float
    max_speed_mps: float
    origin: str = ""
    snap_distance_m: float | None = None


@dataclass(frozen=True)
class ZonePosition:
    """A speed zone given by the positions of its two ends, not yet on the route: ``start`` and
    ``end`` are ``(x_m, y_m)`` in the route's metric frame or, with ``geographic``,
    ``(lat_deg, lon_deg)``. :func:`curvespeed.placement.place_positions` snaps both ends."""

    start: tuple[float, float]
    end: tuple[float, float]
    max_speed_mps: float
    geographic: bool = False
    origin: str = ""


def warn_zones_above_top_speed(zones, limits: Limits, given_as=None) -> None:
    """Warn about each speed zone faster than the top speed: it never binds, and its speed is
    most likely in km/h (the warning says what it is in m/s then). For the user's zones only:
    a road's own speed records may lie above a slow vehicle's top speed."""
    top = limits.max_speed_mps
    for z in zones:
        if z.max_speed_mps > top:
            here = f"{z.origin}: " if z.origin else ""
            warnings.warn(
                f"{here}speed zone {z.start_m:g}..{z.end_m:g} m: max speed "
                f"{z.max_speed_mps:g} m/s ({mps_to_kmh(z.max_speed_mps):.0f} km/h) is above "
                f"the top speed {_given('max_speed_mps', top, given_as)} m/s, so it never "
                "binds; if the value "
                f"is {z.max_speed_mps:g} km/h, that is {z.max_speed_mps / 3.6:.2f} m/s (divide "
                "it by 3.6)", CurvespeedWarning, stacklevel=2)


#: The longest time a vehicle may be held at a stop, s: held longer than an hour it is parked,
#: not on a run (a layover at a terminus is well within it); an export or replay would also
#: sample the standstill for hours (72,000 samples per hour at 0.05 s).
MAX_DWELL_S = 3600.0
DWELL_WHY = ("a vehicle held at a stop for more than an hour (3600 s) is parked, not on a run: "
             "export or replay the runs before and after it separately")


def check_dwell(dwell_s, where: str = "", name: str = "dwell_s") -> float:
    """``dwell_s`` as a float when it is a time a vehicle may be held at a stop, zero to
    :data:`MAX_DWELL_S`; else :class:`LimitsError` saying why and what to do, starting with
    ``where`` (``l.toml: [stop #2] ``, ``stop at station 80 m: ``) and ``name`` (a key, or an
    option such as ``--dwell``)."""
    try:
        value = float(dwell_s)
    except (TypeError, ValueError):
        value = math.nan
    if 0.0 <= value <= MAX_DWELL_S:
        return value
    why = (DWELL_WHY if value > MAX_DWELL_S else
           "a dwell is how long the vehicle stands there: zero or positive" if value < 0.0 else
           "a dwell is a number of seconds")
    shown = f"{value:g}" if not math.isnan(value) else repr(dwell_s)
    given = f"{name} {shown}" if name.startswith("--") else f"{name} = {shown}"
    raise LimitsError(f"{where}{given} is outside 0..{MAX_DWELL_S:g} s: {why}; give zero or a "
                      f"positive number of seconds up to {MAX_DWELL_S:g}")


@dataclass(frozen=True)
class Stop:
    """A point where the vehicle must be at rest, station in metres.

    ``dwell_s`` is how long the vehicle stays there, s (None: the export's default);
    ``name`` a label of the user's; ``snap_distance_m`` how far from the route the position
    it was given by lay, m (None for a stop given by station).
    """

    station_m: float
    origin: str = ""
    dwell_s: float | None = None
    name: str = ""
    snap_distance_m: float | None = None


@dataclass(frozen=True)
class StopPosition:
    """A stop given by position, not yet on the route: ``x_m``/``y_m`` in the route's metric
    frame, or ``lat_deg``/``lon_deg`` (WGS84) for a geographic route.
    :func:`curvespeed.placement.place_positions` snaps it to the route and makes it a :class:`Stop`.
    """

    x_m: float | None = None
    y_m: float | None = None
    lat_deg: float | None = None
    lon_deg: float | None = None
    origin: str = ""
    dwell_s: float | None = None
    name: str = ""


def stop_node(station_m: float, ds: float, n_nodes: int, closed: bool) -> int:
    """The node a stop at ``station_m`` is placed on: the nearest station (node 0 for the end
    of a closed route)."""
    k = int(round(station_m / ds))
    return 0 if closed and k == n_nodes - 1 else k


@dataclass(frozen=True)
class Superelevation:
    """Cross-slope over a station range.

    ``rate`` is rise over run across the road (0.06 = 6 %), positive when the road is banked
    toward the inside of the curve (the usual case; it adds lateral capacity), negative for an
    adverse cross-slope.
    """

    start_m: float
    end_m: float
    rate: float
    origin: str = ""
    snap_distance_m: float | None = None


@dataclass(frozen=True)
class SuperelevationPosition:
    """A superelevation range given by the positions of its two ends (as
    :class:`ZonePosition`), not yet on the route; ``rate`` as for :class:`Superelevation`."""

    start: tuple[float, float]
    end: tuple[float, float]
    rate: float
    geographic: bool = False
    origin: str = ""


@dataclass(frozen=True)
class RouteConstraints:
    """What the route imposes besides its geometry.

    ``start_speed_mps`` / ``end_speed_mps`` of None mean the default: at rest on an open route,
    periodic (lap joins itself) on a closed one. ``friction`` holds
    :class:`~curvespeed.friction.FrictionSection` entries; the ``*_positions`` hold what is
    given by position until :func:`curvespeed.placement.place_positions` puts it on the route.
    """

    zones: tuple[SpeedZone, ...] = ()
    stops: tuple[Stop, ...] = ()
    superelevation: tuple[Superelevation, ...] = ()
    start_speed_mps: float | None = None
    end_speed_mps: float | None = None
    stop_positions: tuple[StopPosition, ...] = ()
    zone_positions: tuple[ZonePosition, ...] = ()
    friction: tuple = ()
    friction_positions: tuple = ()
    superelevation_positions: tuple[SuperelevationPosition, ...] = ()

    def merged(self, other: "RouteConstraints") -> "RouteConstraints":
        """Constraints of both; ``other``'s start/end speeds win where set."""
        return RouteConstraints(
            zones=self.zones + other.zones,
            stops=self.stops + other.stops,
            superelevation=self.superelevation + other.superelevation,
            start_speed_mps=(other.start_speed_mps if other.start_speed_mps is not None
                             else self.start_speed_mps),
            end_speed_mps=(other.end_speed_mps if other.end_speed_mps is not None
                           else self.end_speed_mps),
            stop_positions=self.stop_positions + other.stop_positions,
            zone_positions=self.zone_positions + other.zone_positions,
            friction=self.friction + other.friction,
            friction_positions=self.friction_positions + other.friction_positions,
            superelevation_positions=(self.superelevation_positions
                                      + other.superelevation_positions),
        )

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)


def overlay_constraints(road: RouteConstraints, user: RouteConstraints) -> RouteConstraints:
    """The road data's own constraints with the user's on top: wherever the user gives a speed
    zone or a superelevation range, the road's zones or superelevation over that range are
    dropped and the user's apply; stops, friction sections and end speeds are the user's."""
    return dataclasses.replace(
        user, zones=_cut(road.zones, user.zones) + user.zones,
        superelevation=_cut(road.superelevation, user.superelevation) + user.superelevation)


def _cut(items: tuple, covers: tuple) -> tuple:
    """``items`` (with start_m, end_m) without the station ranges of ``covers``."""
    out = []
    for item in items:
        spans = [(item.start_m, item.end_m)]
        for c in covers:
            spans = [span for lo, hi in spans
                     for span in ((lo, min(hi, c.start_m)), (max(lo, c.end_m), hi))
                     if span[1] > span[0]]
        out.extend(dataclasses.replace(item, start_m=lo, end_m=hi) for lo, hi in spans)
    return tuple(out)


#: A station this close past either end of the route is at that end, m: the route's length is a
#: sum of many arc-length pieces and carries their round-off (a 400 m straight measures
#: 399.9999999999997 m), which no one can see in a station they type.
END_TOLERANCE_M = 1e-3
