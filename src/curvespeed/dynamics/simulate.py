"""Closed-loop replay: the vehicle model driven by a tracker along a planned profile.

The reference is the profile sampled in time (:func:`curvespeed.export.sample_in_time`, with
the dwell at stops), one sample per tracker period: it gives the planned speed and acceleration
at each instant. The lateral reference is the path itself, at the station the vehicle's centre
of gravity projects to (:class:`~curvespeed.dynamics.path.PathReference`).

Each tracker period (``control_dt_s``, output held over the period, a discrete controller):

* the error state: offset ``e`` (left +), heading error ``e_psi``, their rates
  ``de = vy cos e_psi + vx sin e_psi`` and ``de_psi = r - kappa ds/dt`` with
  ``ds/dt = (vx cos e_psi - vy sin e_psi) / (1 - kappa e)``;
* steering from the lateral tracker (LQR or MPC), held within the steering angle limit;
* longitudinal force ``m (a_ref + k_p (v_ref - v) + k_i integral(v_ref - v))``: the planned
  acceleration as feed-forward plus a PI on speed (its integral held within
  :attr:`ReplaySettings.integral_limit_m`);
* then ``control_dt_s / integration_dt_s`` classical Runge-Kutta steps of the vehicle model
  (:func:`~curvespeed.dynamics.vehicle.rk4_step`).

Where the plan has friction sections (``grip``, :class:`~curvespeed.friction.GripAlong`), the
vehicle's friction coefficient is scaled by the section's over the route's at the vehicle's
station, looked up once per tracker period: a wet patch is driven wet.

The run ends when the vehicle's station reaches the end of the profile, when it comes to rest
after the planned time on a profile that ends at rest, when it loses the path (offset beyond
:attr:`ReplaySettings.lost_path_m` or heading error beyond 90 degrees), or
:attr:`ReplaySettings.extra_time_s` after the planned time.
"""

from __future__ import annotations

import enum
import functools
import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..export import StationProfile, as_station_profile, sample_in_time
from ..friction import GripAlong
from .lqr import LqrTracker, LqrWeights
from .path import PathReference
from .tracker_kind import TrackerKind
from .vehicle import (DEFAULT_VEHICLE, INTEGRATION_STEP_S, Vehicle, VehicleModel,
                      integration_step, steer_rate, tyre_use, validate_vehicle)

#: Columns of a replay, in output order (units in the names).
REPLAY_COLUMNS = ("time_s", "station_m", "x_m", "y_m", "speed_mps", "lateral_error_m",
                  "heading_error_rad", "steer_rad", "steer_rate_radps", "yaw_rate_radps",
                  "front_slip_rad", "rear_slip_rad", "front_tyre_use", "rear_tyre_use",
                  "steer_command_rad", "reference_station_m", "reference_speed_mps")


class ReplayStatus(enum.Enum):
    """How a replay ended."""

    COMPLETED = "completed"
    LOST_PATH = "lost_path"
    NOT_FINISHED = "not_finished"


STATUS_MESSAGES = {
    ReplayStatus.COMPLETED: "reached the end of the profile",
    ReplayStatus.LOST_PATH: "lost the path (offset or heading error too large to recover)",
    ReplayStatus.NOT_FINISHED: "had not reached the end of the profile when the time ran out",
}


@dataclass(frozen=True)
class ReplaySettings:
    """Settings of a replay (module docstring).

    Attributes
    ----------
    tracker : TrackerKind
    control_dt_s : float
        Sample time of the trackers, s.
    integration_dt_s : float
        Step of the Runge-Kutta integration, s (divides ``control_dt_s``).
    speed_gain_1ps, speed_integral_gain_1ps2 : float
        Proportional and integral gains of the speed loop (per s, per s^2).
    integral_limit_m : float
        Bound on the speed loop's integral of the speed error, m (its anti-windup).
    dwell_s : float
        Time held at each stop, s.
    lost_path_m : float
        Offset from the path beyond which the vehicle has lost it, m.
    extra_time_s : float
        Time allowed beyond the planned time to reach the end, s.
    lqr_weights : LqrWeights
    mpc_horizon : int
        Steps of the MPC's preview (each ``mpc_dt_s``).
    mpc_dt_s : float
        Sample time of the MPC, s (a multiple of ``control_dt_s``).
    """

    tracker: TrackerKind = TrackerKind.LQR
    control_dt_s: float = 0.02
    integration_dt_s: float = INTEGRATION_STEP_S
    speed_gain_1ps: float = 1.0
    speed_integral_gain_1ps2: float = 0.25
    integral_limit_m: float = 5.0
    dwell_s: float = 0.0
    lost_path_m: float = 10.0
    extra_time_s: float = 30.0
    lqr_weights: LqrWeights = field(default_factory=LqrWeights)
    mpc_horizon: int = 30
    mpc_dt_s: float = 0.04


@dataclass(frozen=True)
class ReplayResult:
    """A replay's time series (:data:`REPLAY_COLUMNS`, one row per tracker period) and outcome.

    Attributes
    ----------
    columns : dict of str to ndarray
        The time series by column name (units in the names).
    status : ReplayStatus
    vehicle : Vehicle
    settings : ReplaySettings
    planned_time_s : float
        The profile's time (with dwells), s.
    end_station_m : float
        Station of the profile's end, m.
    name, source : str
        Route name and the profile it came from.
    tracker_stats : dict
        The MPC's QP counts (empty for the LQR).
    grip : GripAlong or None
        The road's grip the vehicle drove on, relative to the route's friction (None: the
        vehicle's own coefficient all along).
    """

    columns: dict
    status: ReplayStatus
    vehicle: Vehicle
    settings: ReplaySettings
    planned_time_s: float
    end_station_m: float
    name: str = "route"
    source: str = "profile"
    tracker_stats: dict = field(default_factory=dict)
    grip: GripAlong | None = None

    @property
    def success(self) -> bool:
        return self.status is ReplayStatus.COMPLETED

    @property
    def message(self) -> str:
        return STATUS_MESSAGES[self.status]

    def __getitem__(self, name: str) -> np.ndarray:
        return self.columns[name]


def make_tracker(vehicle: Vehicle, settings: ReplaySettings, top_speed_mps: float):
    """A fresh lateral tracker of ``settings.tracker`` (each replay gets its own: an MPC keeps
    its warm start per run)."""
    if settings.tracker is TrackerKind.LQR:
        return LqrTracker(vehicle, settings.control_dt_s, top_speed_mps, settings.lqr_weights)
    from .mpc import MpcTracker

    return MpcTracker(vehicle, settings.mpc_dt_s, settings.mpc_horizon, top_speed_mps,
                      settings.lqr_weights, every=_ratio(settings.mpc_dt_s,
                                                         settings.control_dt_s, "mpc_dt_s"))


def _ratio(long: float, short: float, what: str) -> int:
    n = int(round(long / short))
    if n < 1 or abs(n * short - long) > 1e-9 * long:
        raise ValueError(f"{what} ({long:g} s) must be a whole multiple of {short:g} s")
    return n


def initial_state(vehicle: Vehicle, path: PathReference, tracker, speed_mps: float):
    """On the path at its start, in the tracker's steady state for the start's curvature."""
    kappa = path.curvature[0]
    g_psi, g_delta = tracker.gains_at(max(speed_mps, 0.0))[-2:]
    e_psi = g_psi * kappa
    delta = max(-vehicle.max_steer_rad, min(vehicle.max_steer_rad, g_delta * kappa))
    heading = path.heading[0] + e_psi
    return (path.x[0], path.y[0], heading, speed_mps, -speed_mps * math.sin(e_psi),
            speed_mps * kappa, delta)


def replay(profile, vehicle: Vehicle = DEFAULT_VEHICLE,
           settings: ReplaySettings = ReplaySettings(),
           grip: GripAlong | None = None) -> ReplayResult:
    """Drive ``vehicle`` along ``profile`` with the tracker of ``settings`` (module docstring).

    Parameters
    ----------
    profile : StationProfile or Profile
    vehicle : Vehicle
    settings : ReplaySettings
    grip : GripAlong, optional
        The road's grip along the route relative to the route's friction (the plan's friction
        sections, :func:`curvespeed.friction.grip_along`): the vehicle's friction coefficient
        is scaled by it wherever the vehicle is (looked up once per tracker period). None: the
        vehicle's coefficient all along.

    Returns
    -------
    ReplayResult

    Raises
    ------
    VehicleError
        A parameter of ``vehicle`` outside its range
        (:func:`~curvespeed.dynamics.vehicle.validate_vehicle`), or a vehicle no integration
        step down to 1/32 of ``settings.integration_dt_s`` follows
        (:func:`~curvespeed.dynamics.vehicle.integration_step`, which the replay takes, and
        its result's settings say), before any work.
    """
    from threadpoolctl import threadpool_limits

    validate_vehicle(vehicle, "vehicle")
    step = integration_step(vehicle, settings.integration_dt_s)
    if step != settings.integration_dt_s:
        settings = replace(settings, integration_dt_s=step)

    # every matrix here is 5x5 to 180x210: the BLAS's threads only cost (measured 10-30x
    # slower gain tables with them on a loaded 2-core machine)
    with threadpool_limits(limits=1, user_api="blas"):
        return _replay(profile, vehicle, settings, grip)


def _replay(profile, vehicle: Vehicle, settings: ReplaySettings, grip) -> ReplayResult:
    sp: StationProfile = as_station_profile(profile)
    substeps = _ratio(settings.control_dt_s, settings.integration_dt_s, "control_dt_s")
    ref = sample_in_time(sp, settings.control_dt_s, settings.dwell_s)
    path = PathReference(sp.station_m, sp.x_m, sp.y_m, sp.heading_rad, sp.curvature_1pm)
    top = 1.25 * float(np.max(sp.speed_mps)) + 5.0
    tracker = make_tracker(vehicle, settings, top)
    state = initial_state(vehicle, path, tracker, float(sp.speed_mps[0]))
    status, rows = _run(vehicle, settings, substeps, ref, path, tracker, state, sp, grip)
    stats = {}
    if tracker.needs_preview:
        stats = {"qp_solves": tracker.solves, "qp_fallbacks": tracker.fallbacks,
                 "mean_qp_iterations": tracker.iterations / max(tracker.solves, 1)}
    columns = {name: np.asarray(col, dtype=float) for name, col in zip(REPLAY_COLUMNS, rows)}
    return ReplayResult(columns=columns, status=status, vehicle=vehicle, settings=settings,
                        planned_time_s=float(ref.total_time_s), end_station_m=path.end_m,
                        name=sp.name, source=sp.source, tracker_stats=stats, grip=grip)


def _run(vehicle, settings, substeps, ref, path, tracker, state, sp, grip):
    """The closed loop; returns the status and the columns as lists (REPLAY_COLUMNS order)."""
    dt, h = settings.control_dt_s, settings.integration_dt_s
    kp, ki = settings.speed_gain_1ps, settings.speed_integral_gain_1ps2
    limit_i = settings.integral_limit_m
    max_steer, mass = vehicle.max_steer_rad, vehicle.mass_kg
    model = VehicleModel(vehicle)
    step = model.step
    ref_s = ref.station_m.tolist()
    ref_v = ref.speed_mps.tolist()
    ref_a = ref.accel_mps2.tolist()
    n_ref = len(ref_s)
    end_s, ends_at_rest = path.end_m, float(sp.speed_mps[-1]) <= 0.0
    last_tick = n_ref - 1 + int(math.ceil(settings.extra_time_s / dt))
    preview = _Preview(ref, path, tracker) if tracker.needs_preview else None
    cols = [[] for _ in REPLAY_COLUMNS]
    integral = 0.0
    status = ReplayStatus.NOT_FINISHED
    for i in range(last_tick + 1):
        x, y, yaw, vx, vy, r, delta = state
        s, e, heading, kappa = path.project(x, y)
        if grip is not None:
            mu = vehicle.friction_coefficient * grip.at(s)
            if mu != model.mu:
                model.set_friction(mu)
        e_psi = math.remainder(yaw - heading, math.tau)
        ce, se = math.cos(e_psi), math.sin(e_psi)
        s_dot = (vx * ce - vy * se) / (1.0 - kappa * e) if kappa * e < 0.9 else vx
        de = vy * ce + vx * se
        de_psi = r - kappa * s_dot
        if i < n_ref:
            s_ref, v_ref, a_ref = ref_s[i], ref_v[i], ref_a[i]
        else:
            s_ref, v_ref, a_ref = ref_s[-1], ref_v[-1], 0.0
        window = functools.partial(preview.at, i, s) if preview is not None else None
        command = tracker.steer(e, de, e_psi, de_psi, delta, vx, kappa, window)
        command = -max_steer if command < -max_steer else (max_steer if command > max_steer
                                                           else command)
        error_v = v_ref - vx
        integral = max(-limit_i, min(limit_i, integral + error_v * dt))
        force = mass * (a_ref + kp * error_v + ki * integral)
        if v_ref <= 0.0 and vx <= 0.05 and a_ref <= 0.0:
            force = min(force, 0.0)           # held at rest: brakes on, no creeping
        alpha_f, alpha_r, use_f, use_r = tyre_use(model, vx, vy, r, delta, force)
        for col, value in zip(cols, (i * dt, s, x, y, vx, e, e_psi, delta,
                                     steer_rate(vehicle, delta, command), r, alpha_f, alpha_r,
                                     use_f, use_r, command, s_ref, v_ref)):
            col.append(value)
        if abs(e) > settings.lost_path_m or abs(e_psi) > 0.5 * math.pi:
            status = ReplayStatus.LOST_PATH
            break
        if s >= end_s or (ends_at_rest and i >= n_ref - 1 and vx <= 0.01
                          and s >= end_s - 5.0):
            status = ReplayStatus.COMPLETED
            break
        for _ in range(substeps):
            state = step(state, command, force, h)
    return status, cols


class _Preview:
    """The planned speed and the path's curvature over the MPC's horizon, from station ``s``:
    future stations advance by the planned speeds of the coming ticks."""

    def __init__(self, ref, path: PathReference, tracker):
        self.speed = ref.speed_mps
        self.path = path
        self.every = tracker.every
        self.horizon = tracker.horizon
        self.dt = tracker.dt_s

    def at(self, i: int, s: float):
        idx = np.minimum(i + self.every * np.arange(self.horizon), self.speed.size - 1)
        v = self.speed[idx]
        stations = s + np.concatenate(([0.0], np.cumsum(v[:-1]) * self.dt))
        kappa = np.array([self.path.curvature_at(float(q)) for q in stations])
        return v, kappa
