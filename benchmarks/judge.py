"""Judge a planned profile against the exact road it was planned for.

A profile is planned on curvature *estimated* from points; the vehicle drives the *exact* road.
This module puts the profile on the exact alignment and measures, on the exact curvature, how
much of every limit the motion the profile describes really uses (1.0: exactly at the limit).

1. **Onto the exact road.** Each profile row's plan position ``(x_m, y_m)`` is projected onto the
   alignment (nearest point: a k-d tree on the alignment every 0.25 m, then Newton steps on
   ``(X - P(s)) . T(s) = 0``), which gives its exact station. The fitted path's stations differ
   slightly from the design's; the profile says which speed to have *where*, so the exact
   stations are what the vehicle drives by.
2. **The motion between rows**, as ``curvespeed export`` drives it: squared speed linear in
   station (constant acceleration) over each step, or the jerk ramps next to rest and the
   constant-jerk steps of a launch (``step_kind``), here over the exact station steps.
3. **Sampled** every ``max_step_m`` (0.125 m by default) inside every step, at both ends of every
   step (so a row where the acceleration changes is seen with both values), and at every element
   joint of the alignment (with the curvature on both sides of it; a joint that falls on a row
   is seen from each step with the road on that step's side).
4. **Uses** on the exact curvature ``kappa`` and its station rate ``kappa'``, with the lateral
   acceleration ``y = kappa v^2``:

   * ``lateral``: ``|y| / A_lat``;
   * ``comfort_ellipse``: ``hypot(a / A, y / A_lat)``, ``A`` the acceleration or deceleration cap;
   * ``friction_ellipse``: ``hypot(a / mu, y / mu_lat) / g`` (flat road);
   * ``top_speed``: ``v / v_max``;
   * ``jerk``: the profile's acceleration read as linear in time between the instants each
     step's value stands for (mid-step for a constant-acceleration step, both ends of a
     constant-jerk step; at the moving node of a step next to rest, the ends of a ramp
     symmetric about the node over the smaller of twice the step's constant part and the
     neighbouring step's time), zero before the start and after the end: jerk is the slope between
     consecutive instants. A vehicle cannot jump its acceleration; this is the reading the
     planner's own jerk bound refers to (docs/method.md), so it measures only what the exact
     stations change;
   * ``lateral_jerk``: ``|d(kappa v^2)/dt| = |kappa' v^3 + 2 kappa v a|``, from the exact
     ``kappa`` and ``kappa'`` and each step's own acceleration ``a``, wherever the curvature is continuous (at an element joint with a
     curvature step the lateral acceleration jumps at any speed above zero: those jumps,
     ``|delta kappa| v^2``, are reported apart as ``lateral_step_mps2``).

   Uses are against the limits given; jerk and lateral jerk have a use only when they are
   bounded (the peak lateral jerk is reported in m/s^3 either way).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from benchmarks._elements import curvature_in, element_table
from curvespeed.export import StationProfile, as_station_profile
from curvespeed.geometry.elements import Alignment
from curvespeed.limits import Limits
from curvespeed.step_motion import state_at_distance

#: Largest station step between samples of the motion, metres.
MAX_STEP_M = 0.125
#: Spacing of the alignment table the projection starts from, metres.
_TABLE_STEP_M = 0.25


@dataclass(frozen=True)
class Judgement:
    """How a profile fares on the exact road.

    Attributes
    ----------
    use : dict of str -> float
        Worst use of each limit (module docstring), dimensionless; 1.0 is exactly at the limit.
    where_m : dict of str -> float
        Exact station of each worst use, metres.
    lateral_jerk_mps3 : float
        Largest ``|d(kappa v^2)/dt|`` where the curvature is continuous, m/s^3.
    lateral_step_mps2 : float
        Largest jump of the lateral acceleration at a curvature step, m/s^2 (0 without steps).
    planned_time_s : float
        Time the profile states (its own stations and speeds), s.
    driven_time_s : float
        Time of the same motion on the exact stations, s.
    max_offset_m : float
        Largest distance of a profile row from the alignment, metres.
    n_samples : int
        Samples of the motion the uses were taken from.
    """

    use: dict
    where_m: dict
    lateral_jerk_mps3: float
    lateral_step_mps2: float
    planned_time_s: float
    driven_time_s: float
    max_offset_m: float
    n_samples: int

    @property
    def worst(self) -> tuple[str, float]:
        """The limit used most and its use."""
        name = max(self.use, key=self.use.get)
        return name, self.use[name]


# -- onto the exact road -----------------------------------------------------------------------

def project_onto(alignment: Alignment, x_m, y_m, iterations: int = 4):
    """Exact station and signed offset (left positive) of plan points on ``alignment``, metres."""
    from scipy.spatial import cKDTree

    x_m, y_m = np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float)
    table = np.linspace(0.0, alignment.length_m,
                        max(2, math.ceil(alignment.length_m / _TABLE_STEP_M) + 1))
    tx, ty = alignment.position(table)
    _, nearest = cKDTree(np.column_stack((tx, ty))).query(np.column_stack((x_m, y_m)))
    s = table[nearest]
    for _ in range(iterations):
        px, py = alignment.position(s)
        h = alignment.heading(s)
        dx, dy = x_m - px, y_m - py
        along = dx * np.cos(h) + dy * np.sin(h)
        across = -dx * np.sin(h) + dy * np.cos(h)
        s = np.clip(s + along / (1.0 - alignment.curvature(s) * across), 0.0, alignment.length_m)
    px, py = alignment.position(s)
    h = alignment.heading(s)
    return s, -(x_m - px) * np.sin(h) + (y_m - py) * np.cos(h)


def on_exact_stations(profile, alignment: Alignment) -> tuple[StationProfile, float]:
    """The profile with its rows moved to their exact stations, and the largest offset (m)."""
    sp = as_station_profile(profile)
    s, offset = project_onto(alignment, sp.x_m, sp.y_m)
    if np.any(np.diff(s) <= 0.0):
        k = int(np.flatnonzero(np.diff(s) <= 0.0)[0])
        raise ValueError(f"{sp.source}: rows {k} and {k + 1} project onto the alignment at "
                         f"stations {s[k]:.3f} and {s[k + 1]:.3f} m, not in driving order; is "
                         "this the profile of that road?")
    return dataclasses.replace(sp, station_m=s), float(np.max(np.abs(offset)))


# -- the motion, sampled -----------------------------------------------------------------------

def sample_motion(sp: StationProfile, alignment: Alignment, max_step_m: float = MAX_STEP_M):
    """Samples of the motion (module docstring): step index, distance into the step, station,
    speed and acceleration.

    Every step is sampled at both ends, at least every ``max_step_m`` and at every element
    joint inside it.
    """
    s = sp.station_m
    ds = np.diff(s)
    m = np.ceil(ds / max_step_m).astype(int)
    k = np.repeat(np.arange(ds.size), m + 1)
    first = np.concatenate(([0], np.cumsum(m + 1)[:-1]))
    frac = (np.arange(k.size) - np.repeat(first, m + 1)) / np.repeat(m, m + 1)
    d = frac * ds[k]
    station = s[k] + d
    joints = alignment.breakpoints_m
    kj = np.searchsorted(s, joints, side="right") - 1
    inside = (kj >= 0) & (kj < ds.size)
    k = np.concatenate((k, kj[inside]))
    d = np.concatenate((d, joints[inside] - s[kj[inside]]))
    station = np.concatenate((station, joints[inside]))   # exactly on the joint
    _, v, a = state_at_distance(sp, k, d)
    return k, d, station, v, a


def road_at_samples(alignment: Alignment, station_m, d, ds):
    """Exact curvature (1/m) and curvature rate (1/m^2) on both sides of each sample.

    Returns ``(kappa_before, rate_before), (kappa_after, rate_after)``; they differ only at an
    element joint. A sample at the end of a step (``d == ds``) belongs to that step, so both
    sides are the road just before it; at the start of a step (``d == 0``) both are the road
    just after it: the acceleration changes at a profile row, and a joint on a row is driven
    with the acceleration of the step on its own side.
    """
    starts = element_table(alignment)[0]
    last = starts.size - 2
    i_before = np.clip(np.searchsorted(starts, station_m, side="left") - 1, 0, last)
    i_after = np.clip(np.searchsorted(starts, station_m, side="right") - 1, 0, last)
    i_before = np.where(d <= 0.0, i_after, i_before)
    i_after = np.where(d >= ds, i_before, i_after)
    return [curvature_in(alignment, station_m, i) for i in (i_before, i_after)]


def profile_jerk(sp: StationProfile) -> tuple[np.ndarray, np.ndarray]:
    """Jerk (m/s^3) between consecutive acceleration instants and the node of each (module
    docstring: the profile's accelerations read as linear in time between their instants; a
    step next to rest is a jerk ramp, then constant acceleration, as export drives it, and the
    change of acceleration at its moving node a ramp symmetric about the node over the smaller
    of twice the constant part and the neighbouring step's time, as the planner's jerk bound
    reads it (docs/method.md); a step a launch's ramp spans, ``linear_accel``, is constant
    jerk, read at both ends; a step inside which the jerk switches, ``accel_turn`` and the
    other kinds of :mod:`curvespeed.jerk_switch`, is read at both ends and at the switch)."""
    from curvespeed import jerk_switch, rest_step

    t = sp.node_time_s
    T = sp.step_time_s
    a = sp.step_accel_mps2
    rest = sp.rest_step
    v = sp.speed_mps
    ds = np.diff(sp.station_m)
    times, values, nodes = [], [], []
    turns = sp.switch_shapes
    for k in range(T.size):
        if rest[k]:
            u = float(rest_step.shape_from_time_coef(sp.rest_time_coef[k]))
            leaving = v[k] <= 0.0
            moving = v[k + 1] if leaving else v[k]
            ramp = float(rest_step.ramp_time(u, moving, ds[k]))
            flat = float(rest_step.accel_factor(u)) * moving * moving / (2.0 * ds[k])
            # the change at the moving node: a ramp symmetric about it over the flat part and
            # the neighbouring step's half, whichever is shorter (docs/method.md)
            nb = k + 1 if leaving else k - 1
            plain_nb = 0 <= nb < T.size and not rest[nb] and not sp.linear_step[nb]
            h = min(T[k] - ramp, 0.5 * T[nb]) if 0 <= nb < T.size else T[k] - ramp
            if leaving:
                times += [t[k], t[k] + ramp, t[k + 1] - h]
                values += [0.0, flat, flat]
                nodes += [k, k, k + 1]
                if plain_nb and h < 0.5 * T[nb]:      # the next step's value from there on
                    times.append(t[k + 1] + h), values.append(a[nb]), nodes.append(k + 1)
            else:
                if plain_nb and h < 0.5 * T[nb]:      # the previous step's value up to there
                    times.append(t[k] - h), values.append(a[nb]), nodes.append(k)
                times += [t[k] + h, t[k + 1] - ramp, t[k + 1]]
                values += [-flat, -flat, 0.0]
                nodes += [k, k, k + 1]
        elif turns is not None and sp.switch_step[k]:   # its start, switches and end
            at, value = jerk_switch.accel_points(turns, np.array([k]), np.array([T[k]]))
            keep = np.concatenate(([True], np.diff(at[0]) > 0.0))  # a piece lasting nothing
            times += (t[k] + at[0][keep]).tolist()
            values += value[0][keep].tolist()
            nodes += [k] * (int(keep.sum()) - 1) + [k + 1]
        elif sp.linear_step[k]:     # constant jerk: its two ends' values
            a0, jerk = rest_step.linear_accel_step(ds[k], v[k], v[k + 1], T[k])
            times += [t[k], t[k + 1]]
            values += [float(a0), float(a0 + jerk * T[k])]
            nodes += [k, k + 1]
        else:
            times.append(t[k] + 0.5 * T[k])
            values.append(a[k])
            nodes.append(k)
    if not rest[0]:
        times.insert(0, 0.0), values.insert(0, 0.0), nodes.insert(0, 0)
    if not rest[-1]:
        times.append(t[-1]), values.append(0.0), nodes.append(T.size)
    times, values, nodes = np.array(times), np.array(values), np.array(nodes)
    dt, da = np.diff(times), np.diff(values)
    keep = dt > 0.0            # an arrival at rest and the departure after it share an instant
    return da[keep] / dt[keep], nodes[1:][keep]


# -- the judgement -----------------------------------------------------------------------------

def _worst(values: np.ndarray, stations: np.ndarray) -> tuple[float, float]:
    i = int(np.argmax(values))
    return float(values[i]), float(stations[i])


def judge_profile(profile, alignment: Alignment, limits: Limits,
                  max_step_m: float = MAX_STEP_M) -> Judgement:
    """Worst use of every limit by ``profile`` driven on the exact ``alignment``.

    ``profile`` is a :class:`~curvespeed.export.StationProfile` (e.g. read from a profile CSV
    with :func:`curvespeed.io.profile_csv.read_station_profile`) or a planned
    :class:`~curvespeed.profile.Profile`. The road is taken flat, without superelevation.
    """
    sp = as_station_profile(profile)
    planned = float(sp.time_s[-1] - sp.time_s[0]) if sp.time_s is not None else sp.moving_time_s
    exact, offset = on_exact_stations(sp, alignment)
    k, d, s, v, a = sample_motion(exact, alignment, max_step_m)
    (k_in, r_in), (k_out, r_out) = road_at_samples(alignment, s, d, np.diff(exact.station_m)[k])
    y = np.maximum(np.abs(k_in), np.abs(k_out)) * v * v
    cap = np.where(a >= 0.0, limits.max_accel_mps2, limits.max_decel_mps2)
    g = limits.gravity_mps2
    uses = {
        "lateral": y / limits.max_lateral_accel_mps2,
        "comfort_ellipse": np.hypot(a / cap, y / limits.max_lateral_accel_mps2),
        "friction_ellipse": np.hypot(a / limits.mu_long, y / limits.mu_lat) / g,
        "top_speed": v / limits.max_speed_mps,
    }
    use, where = {}, {}
    for name, values in uses.items():
        use[name], where[name] = _worst(values, s)
    if limits.max_jerk_mps3 is not None:
        jerk, node = profile_jerk(exact)
        use["jerk"], where["jerk"] = _worst(np.abs(jerk) / limits.max_jerk_mps3,
                                            exact.station_m[node])
    # Each sample is driven with its own step's acceleration on the road of its own side (see
    # road_at_samples). Across a station row a jerk-limited vehicle passes from the step before's
    # acceleration to the step after's, not by a jump, and the lateral jerk is linear in the
    # acceleration: so the road at a row is also driven with the neighbouring step's.
    a_other = a.copy()
    n_steps = exact.station_m.size - 1
    start = (d <= 0.0) & (k > 0)
    if start.any():
        before = k[start] - 1
        a_other[start] = state_at_distance(exact, before,
                                            np.diff(exact.station_m)[before])[2]
    end = (d >= np.diff(exact.station_m)[k]) & (k < n_steps - 1)
    if end.any():
        a_other[end] = state_at_distance(exact, k[end] + 1, np.zeros(int(end.sum())))[2]
    lat_jerk = np.max([np.abs(r * v ** 3 + 2.0 * kap * v * acc)
                       for kap, r in ((k_in, r_in), (k_out, r_out)) for acc in (a, a_other)],
                      axis=0)
    peak_lat_jerk, where_lat_jerk = _worst(lat_jerk, s)
    if limits.max_lateral_jerk_mps3 is not None:
        use["lateral_jerk"] = peak_lat_jerk / limits.max_lateral_jerk_mps3
        where["lateral_jerk"] = where_lat_jerk
    steps = np.abs(k_out - k_in) * v * v
    return Judgement(use=use, where_m=where, lateral_jerk_mps3=peak_lat_jerk,
                     lateral_step_mps2=float(steps.max()), planned_time_s=planned,
                     driven_time_s=exact.moving_time_s, max_offset_m=offset,
                     n_samples=int(s.size))
