"""What a replay says about a profile: tracking errors, tyre use and steering saturation."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .simulate import ReplayResult

#: Tyre use at or above this counts as saturated: on the brush curve 0.99 of the friction limit
#: is reached at about 78 % of the sliding slip angle, where the tyre has almost no margin left.
SATURATED_USE = 0.99
#: A steering command within this fraction of the angle limit, or a rate within it of the rate
#: limit, counts as saturated steering.
STEER_SATURATED_FRACTION = 0.999


@dataclass(frozen=True)
class ReplaySummary:
    """Figures of one replay (units in the names; stations where the peak happened).

    ``saturated_spans_m`` are the station ranges ``(start, end)`` where either axle's tyre use
    reached :data:`SATURATED_USE`; ``steer_angle_saturated_s`` and ``steer_rate_saturated_s``
    the time spent at the steering angle and rate limits.
    """

    status: str
    completed: bool
    message: str
    duration_s: float
    planned_time_s: float
    end_gap_m: float
    max_lateral_error_m: float
    max_lateral_error_station_m: float
    rms_lateral_error_m: float
    max_heading_error_rad: float
    rms_heading_error_rad: float
    max_speed_error_mps: float
    rms_speed_error_mps: float
    peak_front_tyre_use: float
    peak_front_tyre_use_station_m: float
    peak_rear_tyre_use: float
    peak_rear_tyre_use_station_m: float
    saturated_s: float
    saturated_spans_m: tuple
    steer_angle_saturated_s: float
    steer_rate_saturated_s: float
    max_steer_rad: float

    @property
    def saturated(self) -> bool:
        return self.saturated_s > 0.0

    def to_dict(self) -> dict:
        out = {name: getattr(self, name) for name in self.__dataclass_fields__}
        out["saturated_spans_m"] = [list(span) for span in self.saturated_spans_m]
        out["saturated"] = self.saturated
        return out


def _rms(values) -> float:
    return float(np.sqrt(np.mean(np.square(values)))) if values.size else 0.0


def _peak(values, stations):
    k = int(np.argmax(np.abs(values)))
    return float(abs(values[k])), float(stations[k])


def _spans(mask, stations) -> tuple:
    """Station ranges of the runs of ``True`` in ``mask``."""
    if not mask.any():
        return ()
    edges = np.diff(np.concatenate(([0], mask.astype(np.int8), [0])))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1) - 1
    return tuple((float(stations[a]), float(stations[b])) for a, b in zip(starts, ends))


def summarise(result: ReplayResult) -> ReplaySummary:
    """The :class:`ReplaySummary` of ``result``."""
    c = result.columns
    s = c["station_m"]
    dt = result.settings.control_dt_s
    e_max, e_at = _peak(c["lateral_error_m"], s)
    uf, uf_at = _peak(c["front_tyre_use"], s)
    ur, ur_at = _peak(c["rear_tyre_use"], s)
    saturated = (c["front_tyre_use"] >= SATURATED_USE) | (c["rear_tyre_use"] >= SATURATED_USE)
    vehicle = result.vehicle
    angle_sat = np.abs(c["steer_command_rad"]) >= STEER_SATURATED_FRACTION * vehicle.max_steer_rad
    rate_sat = (np.abs(c["steer_rate_radps"])
                >= STEER_SATURATED_FRACTION * vehicle.max_steer_rate_radps)
    speed_error = c["speed_mps"] - c["reference_speed_mps"]
    return ReplaySummary(
        status=result.status.value, completed=result.success, message=result.message,
        duration_s=float(c["time_s"][-1]), planned_time_s=result.planned_time_s,
        end_gap_m=float(result.end_station_m - s[-1]),
        max_lateral_error_m=e_max, max_lateral_error_station_m=e_at,
        rms_lateral_error_m=_rms(c["lateral_error_m"]),
        max_heading_error_rad=float(np.max(np.abs(c["heading_error_rad"]))),
        rms_heading_error_rad=_rms(c["heading_error_rad"]),
        max_speed_error_mps=float(np.max(np.abs(speed_error))),
        rms_speed_error_mps=_rms(speed_error),
        peak_front_tyre_use=uf, peak_front_tyre_use_station_m=uf_at,
        peak_rear_tyre_use=ur, peak_rear_tyre_use_station_m=ur_at,
        saturated_s=float(np.count_nonzero(saturated) * dt),
        saturated_spans_m=_spans(saturated, s),
        steer_angle_saturated_s=float(np.count_nonzero(angle_sat) * dt),
        steer_rate_saturated_s=float(np.count_nonzero(rate_sat) * dt),
        max_steer_rad=float(np.max(np.abs(c["steer_rad"]))))


def exceeds(summary: ReplaySummary, max_lateral_error_m: float | None) -> bool:
    """Whether a gate on the lateral error fails (a run that lost the path fails any gate)."""
    if max_lateral_error_m is None:
        return False
    return (summary.status == "lost_path"
            or not math.isfinite(summary.max_lateral_error_m)
            or summary.max_lateral_error_m > max_lateral_error_m)
