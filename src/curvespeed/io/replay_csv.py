"""Replay files: the time series ``curvespeed replay`` writes, and its summary as JSON.

CSV: header :data:`~curvespeed.dynamics.simulate.REPLAY_COLUMNS` (``time_s, station_m, x_m,
y_m, speed_mps, lateral_error_m, heading_error_rad, steer_rad, steer_rate_radps,
yaw_rate_radps, front_slip_rad, rear_slip_rad, front_tyre_use, rear_tyre_use,
steer_command_rad, reference_station_m, reference_speed_mps``), one row per tracker period.
Lateral error is positive to the left of the direction of travel; tyre use is the axle's force
over what friction allows (1 = saturated). Numbers use the fixed formats of
:mod:`curvespeed.io._format` (positions 0.1 mm, angles 1e-7 rad, speeds and times 1e-6).

JSON summary: one object ``{"format": "curvespeed-replay-summary", "format_version": 1,
"profile": ..., "tracker": ..., "vehicle": {...}, "summary": {...}}`` with the figures of
:class:`~curvespeed.dynamics.summary.ReplaySummary` (units in the key names), and
``"road_friction": [{"start_m", "end_m", "friction_coefficient"}]`` where the plan's friction
sections changed the vehicle's friction (only then).
"""

from __future__ import annotations

import dataclasses
import json

from ..dynamics.simulate import REPLAY_COLUMNS, ReplayResult
from ..dynamics.summary import ReplaySummary
from ._format import METRES, RADIANS, RATIO, format_columns

KINEMATIC = ".6f"

#: Number format of every replay column.
COLUMN_FORMATS = {
    "time_s": KINEMATIC, "station_m": METRES, "x_m": METRES, "y_m": METRES,
    "speed_mps": KINEMATIC, "lateral_error_m": METRES, "heading_error_rad": RADIANS,
    "steer_rad": RADIANS, "steer_rate_radps": RADIANS, "yaw_rate_radps": RADIANS,
    "front_slip_rad": RADIANS, "rear_slip_rad": RADIANS, "front_tyre_use": RATIO,
    "rear_tyre_use": RATIO, "steer_command_rad": RADIANS, "reference_station_m": METRES,
    "reference_speed_mps": KINEMATIC,
}


def replay_csv_text(result: ReplayResult) -> str:
    """The replay CSV's text (module docstring)."""
    return format_columns({name: (result.columns[name], COLUMN_FORMATS[name])
                           for name in REPLAY_COLUMNS})


def replay_summary_json_text(result: ReplayResult, summary: ReplaySummary) -> str:
    """The JSON summary's text (module docstring); deterministic (sorted vehicle keys, no time
    stamps)."""
    vehicle = dataclasses.asdict(result.vehicle)
    vehicle["tyre_curve"] = result.vehicle.tyre_curve.value
    doc = {
        "format": "curvespeed-replay-summary",
        "format_version": 1,
        "route": result.name,
        "profile": result.source,
        "tracker": result.settings.tracker.value,
        "tracker_period_s": result.settings.control_dt_s,
        "integration_step_s": result.settings.integration_dt_s,
        "tracker_stats": result.tracker_stats,
        "vehicle": vehicle,
        "summary": summary.to_dict(),
    }
    if result.grip is not None:     # the plan's friction sections, as the vehicle drove them
        doc["road_friction"] = result.grip.stretches(result.vehicle.friction_coefficient)
    return json.dumps(doc, indent=2, sort_keys=False) + "\n"
