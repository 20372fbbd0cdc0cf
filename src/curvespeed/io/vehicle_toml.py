"""Read a vehicle file (TOML) for ``curvespeed replay`` into a
:class:`~curvespeed.dynamics.vehicle.Vehicle`.

Layout (SI units, unit suffix in every key; any key left out keeps the built-in mid-size car's
value, :data:`~curvespeed.dynamics.vehicle.DEFAULT_VEHICLE`)::

    [vehicle]
    mass_kg = 1500.0
    yaw_inertia_kgm2 = 2500.0
    front_axle_to_cg_m = 1.2
    rear_axle_to_cg_m = 1.6
    front_cornering_stiffness_npr = 140000.0   # whole axle, N/rad
    rear_cornering_stiffness_npr = 160000.0
    friction_coefficient = 0.9
    max_steer_rad = 0.6                        # road-wheel angle
    max_steer_rate_radps = 0.8
    steer_lag_s = 0.1
    tyre_curve = "brush"                       # or "saturated_linear"

Unknown tables or keys, values that are not finite numbers and values outside the ranges of
:data:`~curvespeed.dynamics.vehicle.PARAMETER_RANGES` are refused with the file, the line and the
key (:class:`~curvespeed.errors.VehicleError`). Whether the replay's integration step follows the
vehicle's lateral motion is the replay's question (it splits the step where needed,
:func:`~curvespeed.dynamics.vehicle.integration_step`).
"""

from __future__ import annotations

import dataclasses
import difflib
import re
import tomllib
from pathlib import Path

from ..dynamics.vehicle import (DEFAULT_VEHICLE, TyreCurve, Vehicle, check_parameter,
                                validate_vehicle)
from ..errors import VehicleError
from ._common import check_nesting, finite_value, read_text, value_problem

#: Keys of the ``[vehicle]`` table, in the file's documented order.
VEHICLE_KEYS = ("mass_kg", "yaw_inertia_kgm2", "front_axle_to_cg_m", "rear_axle_to_cg_m",
                "front_cornering_stiffness_npr", "rear_cornering_stiffness_npr",
                "friction_coefficient", "max_steer_rad", "max_steer_rate_radps", "steer_lag_s",
                "tyre_curve")
_UNIT_HINTS = {"deg": "degrees: multiply by pi/180 and use the _rad key",
               "_ms": "milliseconds: divide by 1000 and use the _s key",
               "per_deg": "per degree: multiply by 180/pi and use the _npr key",
               "_g": "g units: give a friction coefficient"}


def _line(text: str, key: str, table_start: int) -> str:
    """``line N: `` of ``key`` inside the table that starts at ``table_start``, if found."""
    match = re.compile(rf"^[ \t]*\"?{re.escape(key)}\"?[ \t]*=", re.M).search(text, table_start)
    return f"line {text.count(chr(10), 0, match.start()) + 1}: " if match else ""


def read_vehicle(path: str | Path) -> Vehicle:
    """Read ``path``; raise :class:`VehicleError` naming the file, line and key on any problem."""
    path = Path(path)
    text = read_text(path, VehicleError)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise VehicleError(f"{path}: not valid TOML: {exc}; fix the file (a vehicle file is "
                           "a [vehicle] table of key = number lines)") from None
    except (ValueError, RecursionError):
        raise VehicleError(f"{path}: a number with thousands of digits or arrays nested too "
                           "deeply; a vehicle file is a [vehicle] table of key = number "
                           "lines") from None
    check_nesting(data, str(path), VehicleError, "TOML")
    for key in data:
        if key != "vehicle":
            raise VehicleError(f"{path}: {_line(text, key, 0)}unknown table or key '{key}' at "
                               "top level; a vehicle file has one table, [vehicle]")
    table = data.get("vehicle")
    if not isinstance(table, dict):
        raise VehicleError(f"{path}: missing [vehicle] table; start the file with a line "
                           "'[vehicle]' followed by the keys to set (an empty table keeps the "
                           "built-in mid-size car)")
    start = text.find("[vehicle]")
    values = {}
    for key, value in table.items():
        where = f"{path}: {_line(text, key, max(start, 0))}[vehicle] {key}"
        if key not in VEHICLE_KEYS:
            raise VehicleError(f"{where}: unknown key{_hint(key)}. Accepted keys: "
                               f"{', '.join(VEHICLE_KEYS)}")
        if key == "tyre_curve":
            choices = [c.value for c in TyreCurve]
            if value not in choices:
                raise VehicleError(f"{where} = {value!r} is not a tyre curve; give one of "
                                   f"{', '.join(repr(c) for c in choices)}")
            values[key] = TyreCurve(value)
            continue
        number = finite_value(value)
        if number is None:
            raise VehicleError(f"{where} {value_problem(value)}; give a plain number in the "
                               "unit its suffix names")
        values[key] = number
        check_parameter(key, number, f"{path}: {_line(text, key, max(start, 0))}[vehicle]")
    return validate_vehicle(dataclasses.replace(DEFAULT_VEHICLE, **values), str(path))


def _hint(key: str) -> str:
    for marker, text in _UNIT_HINTS.items():
        if marker in key.lower():
            return f" (looks like {text})"
    close = difflib.get_close_matches(key, list(VEHICLE_KEYS), n=1)
    return f"; did you mean '{close[0]}'?" if close else ""
