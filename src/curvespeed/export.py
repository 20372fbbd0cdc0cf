"""Reference trajectories from a station profile: samples in time or by station.

A planned profile gives speeds ``v[k]`` at stations ``s[k]``. Between consecutive nodes the
squared speed is linear in station (see :mod:`curvespeed.problem`), so step ``k`` has the constant
acceleration

    a[k] = (v[k+1]**2 - v[k]**2) / (2 ds[k])

and takes ``T[k] = 2 ds[k] / (v[k] + v[k+1])``. Inside a step, ``tau`` seconds after leaving
node k (uniform-acceleration kinematics)::

    s(tau) = s[k] + v[k] tau + a[k] tau**2 / 2,        v(tau) = v[k] + a[k] tau,

and, the other way round, a station ``s[k] + d`` is reached after
``tau = 2 d / (v[k] + sqrt(v[k]**2 + 2 a[k] d))`` (the cancellation-free root).

Steps next to rest under a jerk bound
    When the profile was planned with a jerk bound, a step with one end at rest (the start, a
    stop, the end) is driven so that the acceleration is zero at rest: from rest, at constant
    jerk up to an acceleration it then holds up to the moving end (arriving at rest: the same
    backwards). Such a step takes ``T[k] = c ds / v`` (``v`` the speed at its moving end, ``c``
    between 2 and 3) and its shape follows from ``c`` alone (:mod:`curvespeed.rest_step`, where
    the uniform-jerk kinematics are written out); ``c = 3`` is constant jerk over the whole step
    (``s = s[k] + ds x**3``, ``x = tau / T``), which older profiles used. The profile says which
    steps these are and their ``c`` (:attr:`StationProfile.rest_time_coef`, from the
    ``step_kind`` and ``time_s`` columns of a profile CSV); a profile CSV without ``step_kind``
    has them recognised from its own ``time_s`` (a step next to rest that takes more than
    ``2 ds / v``, see :func:`detect_rest_steps`), so the export follows whichever model produced
    the profile.

Steps a launch's jerk ramp spans
    Where a launch (or a stop) ramps its acceleration over many stations, the steps after the
    one next to rest are planned as driven at constant jerk: the acceleration is linear in time
    over the step, and the step takes ``T[k] = c ds / (v[k] + v[k+1])`` with ``c`` a little over
    2 (:attr:`StationProfile.linear_time_coef`, from the ``linear_accel`` step kind and
    ``time_s``). Its start acceleration and jerk follow from ``ds``, the two speeds and ``T``
    (:func:`curvespeed.rest_step.linear_accel_step`); the station reached at a time is the cubic
    in time, and the time at a station is found by bisection. The step in which such a move
    turns below its acceleration cap is driven through the turn: from the acceleration the
    ramp's step next to it ends with, linear in time up to one instant and down after it
    (the ``accel_turn`` step kind, :mod:`curvespeed.jerk_switch`). :mod:`curvespeed.step_motion`
    drives each step as its kind says.

All formulas are used as they stand: samples are placed step by step from node times that are
sums of ``T[k]``, so nothing is integrated numerically and nothing drifts; the last sample is the
end of the route at the planned time plus dwells.

Stops
    An interior node with speed 0 is a stop. The vehicle arrives, stays there for ``dwell_s``
    seconds, then leaves; the formulas above never divide by a zero speed (a step has a zero
    speed at one end at most, which :func:`make_station_profile` checks).

Geometry between nodes
    heading and curvature are linear in station (heading unwrapped, so it is continuous);
    plan position is the cubic Hermite curve through the two nodes with the node headings as
    tangents, which follows a curve far closer than the chord (error of order ``ds**4`` instead
    of ``ds**2 curvature / 8``). Latitude/longitude, where the profile has them, get the same
    interpolation through the step's local conformal map from metres to degrees (see
    :func:`curvespeed.export_shape.interpolate_latlon`).

Elevation and pitch
    Where the profile has elevation (``z_m`` and ``grade`` at the nodes, grade the rise over
    the run of station), the elevation between nodes is the cubic Hermite curve in station
    with the node grades as slopes, and the pitch is ``atan`` of its slope (nose up positive):
    on a constant grade ``g`` both are exact, ``z`` linear and pitch ``atan(g)``.

Derived columns: ``yaw_rate_radps = speed * curvature`` and ``lat_accel_mps2 = speed**2 *
curvature`` (signed, left positive), as for the profile itself.

This module is core numerics: arrays in, frozen dataclasses out; it never reads or writes files.
"""

from __future__ import annotations

import enum
import math
import sys
from dataclasses import dataclass

import numpy as np

from .export_shape import elevation_at, hermite_position, interpolate_latlon, stop_names_at
from .limits import check_dwell
from .step_motion import state_at_distance, state_at_time
from .station_profile import (RAMP_TIME_EXCESS, StationProfile, as_station_profile,
                              check_stations_and_speeds, detect_rest_steps,
                              make_station_profile, planned_time_mismatch,
                              step_time_coef_from_times, steps_next_to_rest)

#: Columns every trajectory has, in output order (units in the names).
TRAJECTORY_COLUMNS = ("time_s", "station_m", "x_m", "y_m", "heading_rad", "speed_mps",
                      "accel_mps2", "curvature_1pm", "yaw_rate_radps", "lat_accel_mps2")


class SamplingMode(enum.Enum):
    """How a trajectory is sampled: at uniform time steps or at uniform station steps."""

    TIME = "time"
    STATION = "station"


@dataclass(frozen=True)
class Trajectory:
    """A reference trajectory: the profile sampled in time or by station.

    Attributes
    ----------
    time_s : ndarray
        Time since the start, s (non-decreasing).
    station_m : ndarray
        Station, metres (non-decreasing; constant while held at a stop).
    x_m, y_m : ndarray
        Plan position, metres.
    heading_rad : ndarray
        Direction of travel, radians, continuous.
    speed_mps : ndarray
        Speed, m/s.
    accel_mps2 : ndarray
        Acceleration along the path at that instant, m/s^2: constant within a
        constant-acceleration step (at a node: the step being entered), linear in time in the
        ramp of a step next to rest and in a step a launch's ramp spans, 0 while held at a
        stop.
    curvature_1pm : ndarray
        Signed curvature, 1/m.
    yaw_rate_radps : ndarray
        ``speed * curvature``, rad/s.
    lat_accel_mps2 : ndarray
        ``speed**2 * curvature``, m/s^2 (signed, left positive).
    lat, lon : ndarray or None
        WGS84 latitude and longitude, degrees, for geographic profiles.
    mode : SamplingMode
        Sampled in time or by station.
    interval : float
        The requested time step (s) or station step (m).
    dwell_s : float
        Time held at each stop without a dwell of its own, s.
    stop_stations_m : ndarray
        Stations of the stops, metres.
    stop_dwell_s : ndarray or None
        Time held at each stop, s, in station order (None: ``dwell_s`` at every stop).
    elevation_m, pitch_rad : ndarray or None
        Elevation (metres) and pitch (radians, nose up positive) where the profile has
        elevation (module docstring).
    stop_names : tuple of str or None
        Each stop's name in station order ("" for a stop without one), where the profile's
        stops have names.
    stop_name : ndarray of str or None
        Per sample: the name of the stop the vehicle stands at ("" elsewhere); with
        ``stop_names``.
    lap : ndarray of int or None
        Per sample: the lap it belongs to, from 1, for a run of laps
        (:mod:`curvespeed.export_laps`); a sample on a join belongs to the lap it starts.
    lap_stations_m, lap_times_s : ndarray or None
        The station and time at which each lap starts, and the end of the run (laps + 1
        values), for a run of laps.
    start_time : datetime or None
        The absolute time of ``time_s = 0`` (timezone-aware), when one was given.
    local_origin : tuple of float, str or None
        WGS84 (latitude, longitude) in degrees of the local metric frame's origin (``x_m = y_m
        = 0``), ``"none"`` for a route given in x/y only, None when not known.
    planned_time_s : float
        Time along the route without dwells, s.
    total_time_s : float
        ``planned_time_s`` plus one dwell per stop: the time of the last sample, s.
    name, source : str
        Route name and the profile it came from.
    """

    time_s: np.ndarray
    station_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    heading_rad: np.ndarray
    speed_mps: np.ndarray
    accel_mps2: np.ndarray
    curvature_1pm: np.ndarray
    yaw_rate_radps: np.ndarray
    lat_accel_mps2: np.ndarray
    lat: np.ndarray | None
    lon: np.ndarray | None
    mode: SamplingMode
    interval: float
    dwell_s: float
    stop_stations_m: np.ndarray
    planned_time_s: float
    total_time_s: float
    name: str = "route"
    source: str = "profile"
    stop_dwell_s: np.ndarray | None = None
    elevation_m: np.ndarray | None = None
    pitch_rad: np.ndarray | None = None
    stop_names: tuple | None = None
    stop_name: np.ndarray | None = None
    lap: np.ndarray | None = None
    lap_stations_m: np.ndarray | None = None
    lap_times_s: np.ndarray | None = None
    start_time: object | None = None
    local_origin: object | None = None

    @property
    def n_samples(self) -> int:
        return int(self.time_s.size)

    @property
    def is_geographic(self) -> bool:
        return self.lat is not None

    @property
    def laps(self) -> int:
        """Number of laps (1 for a trajectory that is not a run of laps)."""
        return 1 if self.lap_stations_m is None else int(self.lap_stations_m.size - 1)

    def columns(self) -> dict[str, np.ndarray]:
        """Named numeric columns in output order (:data:`TRAJECTORY_COLUMNS`, then lat, lon,
        then elevation_m, pitch_rad where the profile has elevation, then lap for a run of
        laps). Text columns (absolute time, stop name) are the writers' (:mod:`curvespeed.io.
        trajectory`)."""
        out = {name: getattr(self, name) for name in TRAJECTORY_COLUMNS}
        if self.lat is not None:
            out["lat"] = self.lat
            out["lon"] = self.lon
        if self.elevation_m is not None:
            out["elevation_m"] = self.elevation_m
            out["pitch_rad"] = self.pitch_rad
        if self.lap is not None:
            out["lap"] = self.lap
        return out


def _check_positive(value: float, what: str) -> float:
    value = float(value)
    if not (math.isfinite(value) and value > 0.0):
        raise ValueError(f"{what} must be a positive number, got {value!r}")
    return value


def stop_dwells(sp: StationProfile, dwell_s: float, stop_dwell_s=None) -> np.ndarray:
    """Time held at each stop of ``sp`` (station order), s: ``stop_dwell_s`` (one per stop,
    NaN for none of its own) where given, else ``dwell_s``.

    Raises
    ------
    LimitsError
        A dwell outside 0..:data:`~curvespeed.limits.MAX_DWELL_S` (as the limits file's and the
        command line's are: :func:`~curvespeed.limits.check_dwell`).
    """
    dwells = np.full(sp.stop_nodes.size, check_dwell(dwell_s))
    if stop_dwell_s is None:
        return dwells
    own = np.asarray(stop_dwell_s, dtype=float)
    if own.shape != dwells.shape:
        raise ValueError(f"{own.size} dwell(s) given for the profile's {dwells.size} stop(s)")
    for station, dwell in zip(sp.station_m[sp.stop_nodes], own):
        if not np.isnan(dwell):
            check_dwell(dwell, f"stop at station {station:g} m: ")
    return np.where(np.isnan(own), dwells, own)


def _node_schedule(sp: StationProfile, dwells: np.ndarray) -> tuple[np.ndarray, np.ndarray,
                                                                   np.ndarray]:
    """Arrival and departure time of every node, and a stop mask, with the stops' dwells
    (:func:`stop_dwells`) included."""
    stop = np.zeros(sp.n_nodes, dtype=bool)
    stop[sp.stop_nodes] = True
    hold = np.zeros(sp.n_nodes)
    hold[sp.stop_nodes] = dwells
    # dwell of every stop strictly before node k, added to the moving time
    held_before = np.concatenate(([0.0], np.cumsum(hold)[:-1]))
    arrive = sp.node_time_s + held_before
    depart = arrive + hold
    return arrive, depart, stop


def node_arrival_s(profile, dwells) -> np.ndarray:
    """Time of arrival at every node with the stops' dwells (:func:`stop_dwells`), s."""
    return _node_schedule(as_station_profile(profile), np.asarray(dwells, dtype=float))[0]


#: The most samples a trajectory may have: 5 million rows are about 1 GB of CSV, 14 hours at
#: 0.01 s; ``export`` refuses more, naming the option, and the samplers refuse them too.
MAX_SAMPLES = 5_000_000


def _sample_count(sp: StationProfile, count: int, span: float, step: float,
                  unit: str) -> int:
    """``count``, or :class:`~curvespeed.errors.SpeedFileError` where it is more than
    :data:`MAX_SAMPLES` (a script's sampling; ``export`` refuses first, naming its option)."""
    if count > MAX_SAMPLES:
        from .errors import SpeedFileError

        raise SpeedFileError(f"{sp.source}: sampled every {step:g} {unit} over its {span:.6g} "
                             f"{unit}, it would take {count:.3g} samples, more than "
                             f"{MAX_SAMPLES}: sample it less often, or a shorter profile")
    return count


def _regular_count(span: float, interval: float) -> int:
    """Samples at ``0, interval, 2 interval, ...`` strictly before ``span`` (the end gets a
    sample of its own): at least one, the start, however large the interval. A ratio beyond
    any float (a step of 1e-300 s) counts as ``sys.maxsize``, more than any output can hold."""
    ratio = span / interval
    if math.isinf(ratio):
        return sys.maxsize
    return max(int(math.ceil(ratio - 1e-9)), 1)


def count_time_samples(profile, dt_s: float, dwell_s: float = 0.0, stop_dwell_s=None) -> int:
    """Number of samples :func:`sample_in_time` returns for these arguments."""
    sp = as_station_profile(profile)
    dt_s = _check_positive(dt_s, "time step")
    total = sp.moving_time_s + float(np.sum(stop_dwells(sp, dwell_s, stop_dwell_s)))
    return _regular_count(total, dt_s) + 1


def count_station_samples(profile, station_step_m: float) -> int:
    """Upper bound on the number of samples :func:`sample_by_station` returns."""
    sp = as_station_profile(profile)
    step = _check_positive(station_step_m, "station step")
    return _regular_count(sp.length_m, step) + 1 + sp.stop_nodes.size


def sample_in_time(profile, dt_s: float, dwell_s: float = 0.0,
                   stop_dwell_s=None, stop_names=None) -> Trajectory:
    """Sample ``profile`` every ``dt_s`` seconds (module docstring for the kinematics).

    Samples are at ``t = 0, dt, 2 dt, ...`` strictly before the total time, then one last sample
    at exactly the total time (planned time plus one dwell per stop), which is the end of the
    route; so every interval is ``dt`` except the last, which is at most ``dt``.

    Parameters
    ----------
    profile : StationProfile or Profile
    dt_s : float
        Time step, s (> 0).
    dwell_s : float
        Time held at every stop (interior node with zero speed), s (0 to an hour:
        :data:`~curvespeed.limits.MAX_DWELL_S`; each stop's own likewise).
    stop_dwell_s : array or None
        Each stop's own dwell, s, in station order; NaN where ``dwell_s`` applies.
    stop_names : sequence of str or None
        Each stop's name in station order ("" for none), carried to the samples at the stop.

    Returns
    -------
    Trajectory
    """
    sp = as_station_profile(profile)
    dt_s = _check_positive(dt_s, "time step")
    dwells = stop_dwells(sp, dwell_s, stop_dwell_s)
    arrive, depart, stop = _node_schedule(sp, dwells)
    total = float(arrive[-1])
    regular = dt_s * np.arange(_sample_count(sp, _regular_count(total, dt_s), total, dt_s, "s"))
    t = np.concatenate((regular, [total]))

    n_steps = sp.n_nodes - 1
    # step k is driven from depart[k] to arrive[k+1]; a time before depart[k+1] belongs to step k
    k = np.clip(np.searchsorted(depart, t, side="right") - 1, 0, n_steps - 1)
    tau = np.clip(t - depart[k], 0.0, sp.step_time_s[k])
    held = t > arrive[k + 1]  # arrived at node k+1 (a stop) and not yet left
    d, v, accel = state_at_time(sp, k, tau)
    accel = np.where(held, 0.0, accel)
    # the final sample is the end of the route by definition (not by round-off)
    d[-1] = sp.station_m[-1] - sp.station_m[k[-1]]
    v[-1] = sp.speed_mps[-1]
    return _build(sp, k, d, t, v, accel, SamplingMode.TIME, dt_s, dwell_s, arrive[-1], dwells,
                  stop_names)


def sample_by_station(profile, station_step_m: float, dwell_s: float = 0.0,
                      stop_dwell_s=None, stop_names=None) -> Trajectory:
    """Sample ``profile`` every ``station_step_m`` metres of station.

    Samples are at ``s0, s0 + step, ...`` strictly before the end, then the end of the route;
    interior stops are added as samples of their own (so a tracker that indexes by distance sees
    the speed reach zero). A stop's sample carries its arrival time; the dwell shows as the gap
    to the next sample's time. Stations are strictly increasing.

    Parameters
    ----------
    profile : StationProfile or Profile
    station_step_m : float
        Station step, metres (> 0).
    dwell_s : float
        Time held at every stop, s (0 to an hour, as for :func:`sample_in_time`).
    stop_dwell_s : array or None
        Each stop's own dwell, s, in station order; NaN where ``dwell_s`` applies.
    stop_names : sequence of str or None
        Each stop's name in station order ("" for none), carried to the samples at the stop.

    Returns
    -------
    Trajectory
    """
    sp = as_station_profile(profile)
    step = _check_positive(station_step_m, "station step")
    dwells = stop_dwells(sp, dwell_s, stop_dwell_s)
    arrive, depart, stop = _node_schedule(sp, dwells)
    s0, s1 = float(sp.station_m[0]), float(sp.station_m[-1])
    grid = s0 + step * np.arange(_sample_count(sp, _regular_count(s1 - s0, step), s1 - s0,
                                               step, "m"))
    sigma = np.unique(np.concatenate((grid, sp.station_m[sp.stop_nodes], [s1])))

    n_steps = sp.n_nodes - 1
    k = np.clip(np.searchsorted(sp.station_m, sigma, side="right") - 1, 0, n_steps - 1)
    ds = np.diff(sp.station_m)[k]
    d = np.clip(sigma - sp.station_m[k], 0.0, ds)
    tau, v, accel = state_at_distance(sp, k, d)
    t = depart[k] + tau
    # at a node itself: its arrival time (for a stop, the dwell follows)
    t = np.where(d <= 0.0, arrive[k], t)
    t = np.where(d >= ds, arrive[k + 1], t)
    return _build(sp, k, d, t, v, accel, SamplingMode.STATION, step, dwell_s, arrive[-1],
                  dwells, stop_names)


def _build(sp: StationProfile, k, d, t, v, accel, mode, interval, dwell_s, total,
           dwells, stop_names=None) -> Trajectory:
    """Interpolate geometry at distance ``d`` into step ``k`` and assemble the trajectory."""
    ds = np.diff(sp.station_m)[k]
    u = d / ds
    s = sp.station_m[k] + d
    h0, h1 = sp.heading_rad[k], sp.heading_rad[k + 1]
    heading = h0 + u * (h1 - h0)
    kappa = sp.curvature_1pm[k] + u * (sp.curvature_1pm[k + 1] - sp.curvature_1pm[k])
    x, y, dx, dy = hermite_position(sp, k, u, ds)
    lat = lon = None
    if sp.lat is not None:
        lat, lon = interpolate_latlon(sp, k, u, dx, dy)
    z = pitch = None
    if sp.z_m is not None:
        z, pitch = elevation_at(sp, k, u, ds)
    names, at_stop = stop_names_at(sp, k, d, ds, stop_names)
    return Trajectory(
        time_s=np.asarray(t, dtype=float), station_m=s, x_m=x, y_m=y, heading_rad=heading,
        speed_mps=v, accel_mps2=np.asarray(accel, dtype=float), curvature_1pm=kappa,
        yaw_rate_radps=v * kappa, lat_accel_mps2=v * v * kappa, lat=lat, lon=lon, mode=mode,
        interval=float(interval), dwell_s=float(dwell_s),
        stop_stations_m=sp.station_m[sp.stop_nodes].copy(), stop_dwell_s=dwells,
        planned_time_s=sp.moving_time_s, total_time_s=float(total), name=sp.name,
        source=sp.source, elevation_m=z, pitch_rad=pitch, stop_names=names, stop_name=at_stop)


__all__ = ["RAMP_TIME_EXCESS", "SamplingMode", "StationProfile", "TRAJECTORY_COLUMNS",
           "Trajectory", "as_station_profile", "check_stations_and_speeds",
           "count_station_samples", "count_time_samples", "detect_rest_steps",
           "make_station_profile", "node_arrival_s", "planned_time_mismatch",
           "sample_by_station", "sample_in_time", "step_time_coef_from_times",
           "steps_next_to_rest", "stop_dwells"]
