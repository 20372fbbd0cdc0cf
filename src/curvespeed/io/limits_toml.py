"""Read a limits file (TOML) into :class:`~curvespeed.limits.Limits` and route constraints.

Layout (SI units, unit suffix in every key)::

    [limits]                      # required; any key left out keeps its built-in default
    friction_coefficient = 0.8
    max_lateral_accel_mps2 = 2.5
    max_accel_mps2 = 1.5
    max_decel_mps2 = 2.5
    max_speed_mps = 25.0
    max_jerk_mps3 = 2.0           # optional
    max_lateral_jerk_mps3 = 0.6   # optional, no bound by default
    # optional powertrain and resistances:
    # max_power_w, mass_kg, drag_area_m2, air_density_kgpm3, rolling_resistance_coefficient,
    # lateral_friction_coefficient, gravity_mps2

    [route]                       # optional: fixed speeds at the ends of an open route
    start_speed_mps = 0.0
    end_speed_mps = 0.0

    [[zone]]                      # optional, repeatable: speed cap over a station range
    start_m = 0.0                 # or start_lat, start_lon, end_lat, end_lon (degrees), or
    end_m = 250.0                 # start_x_m, start_y_m, end_x_m, end_y_m: snapped to the route
    max_speed_mps = 8.3

    [[stop]]                      # optional, repeatable: at rest at a station
    station_m = 640.0             # or lat = ..., lon = ... (degrees, WGS84), or x_m, y_m:
                                  # snapped to the route (at most 25 m away)
    dwell_s = 30.0                # optional: seconds held there (else export's --dwell)
    name = "depot"                # optional

    [[superelevation]]            # optional, repeatable: cross-slope toward the curve's inside
    start_m = 1200.0              # or the ends by position, as for [[zone]]
    end_m = 1500.0
    rate = 0.06

    [[friction]]                  # optional, repeatable: tyre-road friction over a range
    start_m = 2000.0              # or the ends by position, as for [[zone]]
    end_m = 2300.0
    friction_coefficient = 0.4
    lateral_friction_coefficient = 0.45   # optional; else the route's ellipse shape, scaled
"""

from __future__ import annotations

import dataclasses
import difflib
import re
import tomllib
from pathlib import Path

from ..errors import LimitsError
from ..friction import FrictionPosition, FrictionSection
from ..limits import (DEFAULT_LIMITS, Limits, RouteConstraints, SpeedZone, Stop, StopPosition,
                      Superelevation, SuperelevationPosition, ZonePosition, check_dwell)
from ._common import check_nesting, finite_value, read_text, show_value, value_problem

_LIMIT_KEYS = tuple(f.name for f in dataclasses.fields(Limits))
_ROUTE_KEYS = ("start_speed_mps", "end_speed_mps")
#: The ways a [[stop]] says where it is (exactly one), and its optional keys.
_STOP_PLACES = (("station_m",), ("lat", "lon"), ("x_m", "y_m"))
_STOP_KEYS = ("station_m", "lat", "lon", "x_m", "y_m", "dwell_s", "name")
#: The ways a [[zone]] says where it runs (exactly one), and its keys.
_ZONE_PLACES = (("start_m", "end_m"), ("start_lat", "start_lon", "end_lat", "end_lon"),
                ("start_x_m", "start_y_m", "end_x_m", "end_y_m"))
#: Ranges placed like [[zone]]: table -> (required value keys, optional value keys).
_RANGE_VALUES = {"zone": (("max_speed_mps",), ()),
                 "superelevation": (("rate",), ()),
                 "friction": (("friction_coefficient",), ("lateral_friction_coefficient",))}
_UNIT_HINTS = {"kmh": "km/h: divide by 3.6 and use the _mps key",
               "kph": "km/h: divide by 3.6 and use the _mps key",
               "mph": "mph: multiply by 0.44704 and use the _mps key",
               "_g": "g units: multiply by 9.80665 and use the _mps2 key",
               "pct": "percent: give a fraction (6 % is 0.06)",
               "percent": "percent: give a fraction (6 % is 0.06)",
               "_kw": "kW: multiply by 1000 and use max_power_w"}


def _unknown_key(path: Path, table: str, key: str, allowed) -> LimitsError:
    hint = ""
    for marker, text in _UNIT_HINTS.items():
        if marker in key.lower():
            hint = f" (looks like {text})"
            break
    close = difflib.get_close_matches(key, list(allowed), n=1)
    suggestion = f"; did you mean '{close[0]}'?" if close else ""
    # a sentence of its own: after the question, or after the key where there is none
    stop = " " if suggestion else ". "
    return LimitsError(f"{path}: [{table}] unknown key '{key}'{hint}{suggestion}{stop}"
                       f"Accepted keys: {', '.join(allowed)}")


def _number(path: Path, table: str, key: str, value) -> float:
    number = finite_value(value)
    if number is None:
        raise LimitsError(f"{path}: [{table}] {key} {value_problem(value)}; give a plain number "
                          "in the unit its suffix names")
    return number


def read_limits(path: str | Path) -> tuple[Limits, RouteConstraints]:
    """Read ``path``; raise :class:`LimitsError` naming the file, table and key on any problem."""
    path = Path(path)
    text = read_text(path, LimitsError)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise LimitsError(f"{path}: not valid TOML: {exc}") from None
    except ValueError:      # an integer beyond the 4300 digits Python's int() reads
        long = re.search(r"[0-9_]{4300,}", text)
        where = f"line {text.count(chr(10), 0, long.start()) + 1}: " if long else ""
        raise LimitsError(f"{path}: {where}a number with thousands of digits cannot be a "
                          "limit; give a plain number in the unit its key's suffix names") from None
    except RecursionError:
        raise LimitsError(f"{path}: arrays or tables nest too deeply to read; a limits file "
                          "nests at most three levels ([[zone]] entries)") from None
    check_nesting(data, str(path), LimitsError, "TOML")

    known_tables = ("limits", "route", "zone", "stop", "superelevation", "friction")
    if "limits" not in data or not isinstance(data["limits"], dict):
        stray = [k for k in data if k in _LIMIT_KEYS]
        hint = (f" (found {', '.join(stray)} at top level: put it under [limits])" if stray
                else "")
        raise LimitsError(f"{path}: missing [limits] table{hint}; start the file with a line "
                          "'[limits]' followed by the keys to set (an empty table keeps defaults)")
    for key in data:
        if key not in known_tables:
            raise LimitsError(f"{path}: unknown table or key '{key}' at top level; "
                              f"expected [{'], ['.join(known_tables)}]")

    values = {}
    for key, value in data["limits"].items():
        if key not in _LIMIT_KEYS:
            raise _unknown_key(path, "limits", key, _LIMIT_KEYS)
        values[key] = _number(path, "limits", key, value)
    limits = dataclasses.replace(DEFAULT_LIMITS, **values)

    route = data.get("route", {})
    if not isinstance(route, dict):
        raise LimitsError(f"{path}: 'route' must be a table [route]")
    for key in route:
        if key not in _ROUTE_KEYS:
            raise _unknown_key(path, "route", key, _ROUTE_KEYS)
    ends = {k: _number(path, "route", k, route[k]) for k in _ROUTE_KEYS if k in route}
    for key, value in ends.items():
        if value < 0.0:
            raise LimitsError(f"{path}: [route] {key} = {value:g}: the {key.split('_')[0]} "
                              "speed must be zero or positive (0 is at rest); give it in m/s")

    stops, positions = _read_stops(path, data.get("stop", []))
    zones, zone_positions = _read_ranges(path, "zone", data.get("zone", []), SpeedZone,
                                         ZonePosition)
    banks, bank_positions = _read_ranges(path, "superelevation", data.get("superelevation", []),
                                         Superelevation, SuperelevationPosition)
    friction, friction_positions = _read_ranges(path, "friction", data.get("friction", []),
                                                FrictionSection, FrictionPosition)
    constraints = RouteConstraints(zones=zones, stops=stops, superelevation=banks, **ends,
                                   stop_positions=positions, zone_positions=zone_positions,
                                   friction=friction, friction_positions=friction_positions,
                                   superelevation_positions=bank_positions)
    return limits, constraints


def _entries(path: Path, name: str, entries, allowed, places):
    """Each [[name]] entry as ``(n, label, entry, place keys)``, its keys checked."""
    if isinstance(entries, dict) or not isinstance(entries, list):
        raise LimitsError(f"{path}: '{name}' must be written as [[{name}]] entries")
    ways = ", or ".join(" and ".join(keys) for keys in places)
    for n, entry in enumerate(entries, start=1):
        label = f"{name} #{n}"
        if not isinstance(entry, dict):
            raise LimitsError(f"{path}: '{name}' entry #{n} is {show_value(entry)}, not a table; "
                              f"write each as a [[{name}]] block with {ways}")
        for key in entry:
            if key not in allowed:
                raise _unknown_key(path, label, key, allowed)
        given = [keys for keys in places if any(k in entry for k in keys)]
        if len(given) != 1 or any(k not in entry for k in given[0]):
            found = ", ".join(k for keys in places for k in keys if k in entry) or "none"
            raise LimitsError(f"{path}: [[{name}]] #{n} needs exactly one place: {ways} "
                              f"(found: {found})")
        yield n, label, entry, given[0]


def _check_latlon(path: Path, label: str, lat: float, lon: float) -> None:
    if not (-90.0 <= lat <= 90.0 and -180.0 <= lon <= 360.0):
        raise LimitsError(f"{path}: [{label}] lat {lat:g}, lon {lon:g} is not a position on "
                          "Earth (lat -90..90, lon -180..180 degrees); check the order (lat "
                          "first) and the unit (decimal degrees)")


def _read_ranges(path: Path, name: str, entries, by_station, by_position
                 ) -> tuple[tuple, tuple]:
    """The [[name]] entries of a range table ([[zone]], [[superelevation]], [[friction]]):
    ranges by station (``by_station(start_m, end_m, *values)``), and ranges by the positions
    of their ends (``by_position(start, end, *values, geographic=...)``)."""
    required, optional = _RANGE_VALUES[name]
    allowed = tuple(k for keys in _ZONE_PLACES for k in keys) + required + optional
    ranges, positions = [], []
    for n, label, entry, place in _entries(path, name, entries, allowed, _ZONE_PLACES):
        missing = [k for k in required if k not in entry]
        if missing:
            raise LimitsError(f"{path}: [[{name}]] #{n} lacks {', '.join(missing)}; each "
                              f"[[{name}]] needs {', '.join(required)}")
        values = [_number(path, label, k, entry[k]) for k in required]
        values += [_number(path, label, k, entry[k]) if k in entry else None for k in optional]
        nums = [_number(path, label, k, entry[k]) for k in place]
        origin = f"{path} [[{name}]] #{n}"
        if len(nums) == 2:
            ranges.append(by_station(nums[0], nums[1], *values, origin=origin))
            continue
        geographic = place[0] == "start_lat"
        if geographic:
            _check_latlon(path, label, nums[0], nums[1])
            _check_latlon(path, label, nums[2], nums[3])
        positions.append(by_position((nums[0], nums[1]), (nums[2], nums[3]), *values,
                                     geographic=geographic, origin=origin))
    return tuple(ranges), tuple(positions)


def _read_stops(path: Path, entries) -> tuple[tuple, tuple]:
    """The [[stop]] entries: stops by station, and stops by position (placed on the route
    later, once it is read)."""
    stops, positions = [], []
    for n, label, entry, place in _entries(path, "stop", entries, _STOP_KEYS, _STOP_PLACES):
        origin = f"{path} [[stop]] #{n}"
        nums = {k: _number(path, label, k, entry[k]) for k in place}
        dwell = _number(path, label, "dwell_s", entry["dwell_s"]) if "dwell_s" in entry else None
        if dwell is not None:
            check_dwell(dwell, f"{path}: [{label}] ")
        name = entry.get("name", "")
        if not isinstance(name, str):
            raise LimitsError(f"{path}: [{label}] name is {show_value(name)}; give it as a "
                              "quoted string, e.g. name = \"depot\"")
        if "lat" in nums:
            _check_latlon(path, label, nums["lat"], nums["lon"])
        if "station_m" in nums:
            stops.append(Stop(nums["station_m"], origin=origin, dwell_s=dwell, name=name))
        else:
            positions.append(StopPosition(x_m=nums.get("x_m"), y_m=nums.get("y_m"),
                                          lat_deg=nums.get("lat"), lon_deg=nums.get("lon"),
                                          origin=origin, dwell_s=dwell, name=name))
    return tuple(stops), tuple(positions)
