"""The station profile: planned speeds at stations with the route's geometry, checked.

What export, plots and replay read from a profile CSV (or take from a planned
:class:`~curvespeed.profile.Profile`). How each step is driven (constant acceleration, or a jerk
ramp next to rest with its time ``c ds / v``) is written out in :mod:`curvespeed.export`; this
module holds the arrays, their checks and the per-step times.

This module is core numerics: arrays in, frozen dataclasses out; it never reads or writes files.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from . import jerk_switch, lateral_rates, rest_step
from .errors import SpeedFileError

#: The values a :attr:`StationProfile.switch_step` may hold: 0 or a pattern's code.
_CODES = (0, *jerk_switch.PATTERNS)

#: How far a curvature read from a profile file may be from the planned one, 1/m: written to
#: 1e-9 (``io._format.CURVATURE``). Chord rates of the curvature closer than twice this over a
#: step count as equal in :attr:`StationProfile.step_lateral_jerk_mps3`: read back, a step
#: beside a change of rate otherwise took its neighbour's rate (0.10 -> 0.50 m/s^3 at one step,
#: 43 steps of a plan within a 0.5 m/s^3 bound read up to 0.504 at 0.5 m stations).
CURVATURE_ROUNDING_1PM = 1e-9


@dataclass(frozen=True)
class StationProfile:
    """Planned speeds at stations, with the route geometry: what export and plots need.

    Built from a :class:`~curvespeed.profile.Profile` (:meth:`from_profile`) or from a profile
    CSV (:func:`curvespeed.io.profile_csv.read_station_profile`), always through
    :func:`make_station_profile`, which checks it.

    Attributes
    ----------
    station_m : ndarray, shape (n+1,)
        Node stations, metres, strictly increasing.
    x_m, y_m : ndarray
        Plan position of the nodes, metres.
    heading_rad : ndarray
        Direction of travel, radians counter-clockwise from +x, continuous (unwrapped).
    curvature_1pm : ndarray
        Signed curvature, 1/m, positive turning left.
    speed_mps : ndarray
        Planned speed at the nodes, m/s (>= 0; 0 at stops).
    time_s : ndarray or None
        Planned time at the nodes as the profile states it, s (for comparison only: export
        recomputes node times from stations and speeds, see :attr:`node_time_s`).
    accel_mps2, jerk_mps3, lat_accel_mps2 : ndarray or None
        The profile's per-node acceleration (m/s^2), jerk (m/s^3) and lateral acceleration
        (m/s^2), where it has them.
    limit_speed_mps : ndarray or None
        The node-wise speed ceiling (lateral limits, top speed, zones, stops), m/s.
    binding : ndarray of str or None
        The limit that binds at each node.
    z_m, grade : ndarray or None
        Elevation (metres) and grade (rise over run).
    lat, lon : ndarray or None
        WGS84 latitude and longitude of the nodes, degrees, for geographic routes.
    name, source : str
        Route name (for titles) and where the profile came from (for messages).
    where : ndarray of str or None
        Label of each node in its source ("line 12"), for messages.
    rest_time_coef : ndarray, shape (n,)
        For each step next to rest driven with a jerk ramp, the ``c`` of its time ``c ds / v``
        (between 2 and 3, see :mod:`curvespeed.export`); 0 for the other steps.
    linear_time_coef : ndarray, shape (n,)
        For each step driven at constant jerk (the steps a launch's or a stop's jerk ramp
        spans, a move planned as its closed form) or with a switch of its jerk
        (:attr:`switch_step`), the ``c`` of its time ``c ds / (v[k] + v[k+1])``, in (0, 3]
        (:func:`curvespeed.rest_step.linear_accel_step`); 0 for the other steps.
    curvature_bound_1pm : ndarray or None
        The bound on |curvature| the profile was planned on (1/m), where it has one; figures
        judge uses on it, as ``check`` does.
    switch_step : ndarray of int, shape (n,) or None
        The steps among the :attr:`linear_time_coef` ones inside which the jerk switches once,
        by pattern (:data:`curvespeed.jerk_switch.PATTERNS`; 0 elsewhere), continuing the
        acceleration of the step across their slower node (:mod:`curvespeed.jerk_switch`);
        None: none.
    """

    station_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    heading_rad: np.ndarray
    curvature_1pm: np.ndarray
    speed_mps: np.ndarray
    time_s: np.ndarray | None = None
    accel_mps2: np.ndarray | None = None
    jerk_mps3: np.ndarray | None = None
    lat_accel_mps2: np.ndarray | None = None
    limit_speed_mps: np.ndarray | None = None
    binding: np.ndarray | None = None
    z_m: np.ndarray | None = None
    grade: np.ndarray | None = None
    lat: np.ndarray | None = None
    lon: np.ndarray | None = None
    name: str = "route"
    source: str = "profile"
    where: np.ndarray | None = None
    rest_time_coef: np.ndarray | None = None
    curvature_bound_1pm: np.ndarray | None = None
    linear_time_coef: np.ndarray | None = None
    switch_step: np.ndarray | None = None

    @classmethod
    def from_profile(cls, profile) -> "StationProfile":
        """The station profile of a planned :class:`~curvespeed.profile.Profile`."""
        geo = profile.geometry
        latlon = geo.latlon()
        return make_station_profile(
            geo.station_m, geo.x_m, geo.y_m, geo.heading_rad, geo.curvature_1pm,
            profile.speed_mps, time_s=profile.time_s, accel_mps2=profile.accel_mps2,
            jerk_mps3=profile.jerk_mps3, lat_accel_mps2=profile.lat_accel_mps2,
            limit_speed_mps=profile.limit_speed_mps, binding=profile.binding, z_m=geo.z_m,
            grade=geo.grade, lat=None if latlon is None else latlon[0],
            lon=None if latlon is None else latlon[1], name=geo.name, source=geo.source,
            rest_time_coef=profile.rest_time_coef, curvature_bound_1pm=geo.curvature_bound_1pm,
            linear_time_coef=profile.linear_time_coef,
            switch_step=profile.switch_step)

    @property
    def n_nodes(self) -> int:
        return int(self.station_m.size)

    @property
    def length_m(self) -> float:
        """Distance from the first to the last node, metres."""
        return float(self.station_m[-1] - self.station_m[0])

    @property
    def is_geographic(self) -> bool:
        return self.lat is not None

    @property
    def rest_step(self) -> np.ndarray:
        """Steps next to rest driven with a jerk ramp, bool per step."""
        return self.rest_time_coef > 0.0

    @property
    def linear_step(self) -> np.ndarray:
        """Steps away from rest driven at constant jerk, bool per step."""
        return self.linear_time_coef > 0.0

    @cached_property
    def switch_shapes(self):
        """The shape of each :attr:`switch_step` (:func:`curvespeed.jerk_switch.shapes`), or
        None where the profile has none; found once (export and the judge ask for it per
        call)."""
        if self.switch_step is None or not self.switch_step.any():
            return None
        from . import jerk_switch

        return jerk_switch.shapes(self.station_m, self.speed_mps, self.rest_time_coef,
                                  self.linear_time_coef, self.switch_step)

    @property
    def step_time_coef(self) -> np.ndarray:
        """The ``c`` of each step's time ``c ds / (v[k] + v[k+1])``: 2 at constant
        acceleration, :attr:`rest_time_coef` or :attr:`linear_time_coef` where set."""
        return np.where(self.rest_step, self.rest_time_coef,
                        np.where(self.linear_step, self.linear_time_coef, 2.0))

    @property
    def step_accel_mps2(self) -> np.ndarray:
        """``(v[k+1]^2 - v[k]^2) / (2 ds)`` of each step, m/s^2: the constant acceleration of a
        constant-acceleration step, the distance-mean acceleration of one next to rest."""
        v = self.speed_mps
        return (v[1:] ** 2 - v[:-1] ** 2) / (2.0 * np.diff(self.station_m))

    @property
    def step_time_s(self) -> np.ndarray:
        """Time of each step, ``c ds / (v[k] + v[k+1])`` (:attr:`step_time_coef`), s; finite
        (checked on construction)."""
        v = self.speed_mps
        return self.step_time_coef * np.diff(self.station_m) / (v[:-1] + v[1:])

    @property
    def step_lateral_jerk_mps3(self) -> np.ndarray:
        """Largest rate of change of the lateral acceleration ``curvature * v^2`` along each
        step as driven (a bound, with the sign of the larger rate), m/s^3: the planner's
        definition (:meth:`SpeedProblem.step_lateral_jerk
        <curvespeed.problem.SpeedProblem.step_lateral_jerk>`), with each step driven as
        :attr:`rest_time_coef` says. The profile does not say whether the route is a loop:
        the first and last steps are taken as an open route's (one neighbour each)."""
        ramp = self.rest_step
        f = rest_step.accel_factor(rest_step.shape_from_time_coef(
            np.where(ramp, self.rest_time_coef, 2.0)))
        leaving = ramp & (self.speed_mps[:-1] <= 0.0)
        f_start = np.where(ramp, np.where(leaving, 0.0, f), 1.0)
        f_end = np.where(ramp, np.where(leaving, f, 0.0), 1.0)
        ds = np.diff(self.station_m)
        forms = lateral_rates.step_rate_forms(self.curvature_1pm, ds, False, f_start, f_end,
                                              rate_tol=2.0 * CURVATURE_ROUNDING_1PM / ds)
        return lateral_rates.step_lateral_jerk(forms, self.speed_mps ** 2)

    @property
    def node_time_s(self) -> np.ndarray:
        """Time at each node recomputed from stations and speeds, without dwells, s."""
        return np.concatenate(([0.0], np.cumsum(self.step_time_s)))

    @property
    def moving_time_s(self) -> float:
        """Planned time from the first node to the last, without dwells, s."""
        return float(np.sum(self.step_time_s))

    @property
    def stop_nodes(self) -> np.ndarray:
        """Interior nodes where the speed is zero (stops), as indices."""
        v = self.speed_mps
        return np.flatnonzero(v[1:-1] <= 0.0) + 1

    def node_label(self, k: int) -> str:
        """``"line 12 (station 34.0 m)"``: where node ``k`` is, for messages."""
        place = f"{self.where[k]} " if self.where is not None else f"node {k} "
        return f"{place}(station {self.station_m[k]:.1f} m)"


def make_station_profile(station_m, x_m, y_m, heading_rad, curvature_1pm, speed_mps, *,
                         time_s=None, accel_mps2=None, jerk_mps3=None, lat_accel_mps2=None,
                         limit_speed_mps=None, binding=None, z_m=None, grade=None, lat=None,
                         lon=None, name: str = "route", source: str = "profile",
                         where=None, rest_time_coef=None,
                         curvature_bound_1pm=None, linear_time_coef=None,
                         switch_step=None) -> StationProfile:
    """Check arrays and build a :class:`StationProfile`.

    ``rest_time_coef`` (one value per step: the ``c`` of a step next to rest driven with a jerk
    ramp, 0 for constant acceleration) says how each step is driven; by default the steps next
    to rest are recognised from ``time_s`` (see :func:`detect_rest_steps`), and without
    ``time_s`` every step has constant acceleration.

    Raises
    ------
    SpeedFileError
        Arrays of different lengths, fewer than two nodes, a value that is not finite, stations
        not strictly increasing or a negative speed (:func:`check_stations_and_speeds`), a step
        with zero speed at both ends (the vehicle would never cover it), or only one of
        ``lat``/``lon``. The message names ``source``, the node (``where`` label or index) and
        its station.
    ValueError
        ``rest_time_coef`` without one value per step, a value other than 0 or within [2, 3],
        or one set on a step that does not have exactly one end at rest
        (:func:`steps_next_to_rest`); ``linear_time_coef`` likewise, set only on steps with
        neither end at rest (but a switching step); ``switch_step`` not a pattern code, set on a
        step without a ``linear_time_coef``, or on one whose shape does not fit
        (:func:`curvespeed.jerk_switch.shapes`); readers check their files for this first.
    """
    def arr(values):
        return None if values is None else np.asarray(values, dtype=float).ravel()

    s, v = arr(station_m), arr(speed_mps)
    required = {"station_m": s, "x_m": arr(x_m), "y_m": arr(y_m),
                "heading_rad": arr(heading_rad), "curvature_1pm": arr(curvature_1pm),
                "speed_mps": v}
    optional = {"time_s": arr(time_s), "accel_mps2": arr(accel_mps2),
                "jerk_mps3": arr(jerk_mps3), "lat_accel_mps2": arr(lat_accel_mps2),
                "limit_speed_mps": arr(limit_speed_mps), "z_m": arr(z_m), "grade": arr(grade),
                "lat": arr(lat), "lon": arr(lon), "curvature_bound_1pm": arr(curvature_bound_1pm)}
    n = s.size
    labels = None if where is None else np.asarray(where, dtype=object).ravel()
    text = None if binding is None else np.asarray(binding, dtype=object).ravel()

    _check_columns({**required, **optional}, {"where": labels, "binding": text}, source, labels)
    check_stations_and_speeds(s, v, source, labels)
    bad = np.flatnonzero((v[:-1] <= 0.0) & (v[1:] <= 0.0))
    if bad.size:
        k = int(bad[0])
        place = f"{labels[k]}" if labels is not None else f"node {k}"
        raise SpeedFileError(f"{source}: {place} (station {s[k]:.1f} m): speed is zero here and "
                             f"at the next station ({s[k + 1]:.1f} m), so the vehicle never "
                             "covers that step; plan stops at least two stations apart")

    if rest_time_coef is None:
        coef = detect_rest_steps(s, v, optional["time_s"])
    else:
        coef = np.asarray(rest_time_coef, dtype=float).ravel()
        ramp = coef != 0.0
        if (coef.size != n - 1 or np.any(ramp & ~steps_next_to_rest(v))
                or np.any(ramp & ((coef < 2.0) | (coef > 3.0)))):
            raise ValueError("rest_time_coef must have one value per step, 0 or in [2, 3], "
                             "non-zero only on steps with exactly one end at rest")
    linear = np.zeros(n - 1) if linear_time_coef is None else np.asarray(
        linear_time_coef, dtype=float).ravel()
    on = linear != 0.0
    switch = None if switch_step is None else np.asarray(switch_step).ravel()
    if switch is not None and (switch.size != n - 1 or np.any(~np.isin(switch, _CODES))
                               or np.any((switch > 0) & ~on)):
        raise ValueError("switch_step must have one value per step, a pattern code of "
                         "curvespeed.jerk_switch.PATTERNS (or 0), non-zero only on steps with a "
                         "linear_time_coef")
    switching = np.zeros(n - 1, dtype=bool) if switch is None else switch > 0
    if (linear.size != n - 1 or np.any(on & ~switching & ((v[:-1] <= 0.0) | (v[1:] <= 0.0)))
            or np.any(on & ((linear < 0.0) | (linear > 3.0)))):
        raise ValueError("linear_time_coef must have one value per step, 0 or within (0, 3] "
                         "(a speed that stays at least 0), non-zero only on steps with neither "
                         "end at rest (but a switching step)")
    return StationProfile(
        station_m=s, x_m=required["x_m"], y_m=required["y_m"],
        heading_rad=np.unwrap(required["heading_rad"]), curvature_1pm=required["curvature_1pm"],
        speed_mps=v, binding=text, name=name, source=source, where=labels,
        rest_time_coef=coef, linear_time_coef=linear,
        switch_step=None if switch is None or not switch.any() else _fitting_switches(
            s, v, coef, linear, switch.astype(int)),
        **optional)


def _fitting_switches(s, v, rest_coef, linear, switch) -> np.ndarray:
    """``switch``, checked: every step in it has a shape (:func:`curvespeed.jerk_switch.shapes`);
    else ValueError (a reader names the file's line first)."""
    from . import jerk_switch

    if not np.all(jerk_switch.shapes(s, v, rest_coef, linear, switch).ok[switch > 0]):
        raise ValueError("switch_step set on a step whose speeds, distance and time fit no "
                         "motion of its pattern from the step across its slower node")
    return switch


def _check_columns(numbers: dict, texts: dict, source: str, labels) -> None:
    """Every column (``numbers`` and ``texts`` by name, None where absent) has one value per
    station, there are at least two, lat and lon come together and every number is finite;
    else :class:`SpeedFileError` naming the column and the first bad row."""
    n = numbers["station_m"].size
    for name, values in list(numbers.items()) + list(texts.items()):
        if values is not None and values.size != n:
            raise SpeedFileError(f"{source}: {name} has {values.size} values for {n} stations")
    if n < 2:
        raise SpeedFileError(f"{source}: {n} station(s); a profile needs at least 2")
    if (numbers["lat"] is None) != (numbers["lon"] is None):
        raise SpeedFileError(f"{source}: has only one of lat, lon; give both columns or neither")
    for name, values in numbers.items():
        if values is None:
            continue
        bad = np.flatnonzero(~np.isfinite(values))
        if bad.size:
            k = int(bad[0])
            place = labels[k] if labels is not None else f"node {k}"
            raise SpeedFileError(f"{source}: {place}: {name} is not a finite number; fix or "
                                 "remove that row")


def check_stations_and_speeds(station_m, speed_mps, source: str, where=None) -> None:
    """Check rows of station and speed: stations strictly increasing, no negative speed.

    The one check of station/speed rows, for profiles (:func:`make_station_profile`) and for
    speeds to check (:mod:`curvespeed.io.speed_trace`). Raises at the first row that fails.

    Parameters
    ----------
    station_m, speed_mps : array_like, shape (n,)
        Stations (metres) and speeds (m/s) of the rows, finite.
    source : str
        Where the rows come from (a file name), at the start of every message.
    where : sequence of str, optional
        Label of each row in its source ("line 12"); default "node k".

    Raises
    ------
    SpeedFileError
        A station that is not after the previous one (both rows named), or a negative speed
        (row and station named); the message says what to do.
    """
    s = np.asarray(station_m, dtype=float)
    v = np.asarray(speed_mps, dtype=float)

    def place(k: int) -> str:
        return str(where[k]) if where is not None else f"node {k}"

    back = np.flatnonzero(np.diff(s) <= 0.0)
    if back.size:
        k = int(back[0]) + 1
        # 10 significant digits: the 0.1 mm of a written station on routes up to 1000 km
        raise SpeedFileError(f"{source}: {place(k)}: station_m {s[k]:.10g} is not after "
                             f"{s[k - 1]:.10g} on {place(k - 1)}; stations must increase in "
                             "driving order (sort the rows by station and remove repeats)")
    negative = np.flatnonzero(v < 0.0)
    if negative.size:
        k = int(negative[0])
        raise SpeedFileError(f"{source}: {place(k)}: speed_mps {v[k]:g} is negative (station "
                             f"{s[k]:.1f} m); give speeds as magnitudes along the direction of "
                             "travel")


def steps_next_to_rest(speed_mps) -> np.ndarray:
    """Steps with exactly one end at rest (speed 0), bool per step: the only steps that may
    be driven with a jerk ramp (the docstring of :mod:`curvespeed.export`)."""
    v = np.asarray(speed_mps, dtype=float)
    return (v[:-1] <= 0.0) != (v[1:] <= 0.0)


#: A step next to rest whose time exceeds ``2 ds / v`` by more than this fraction was driven
#: with a jerk ramp. Times written to 1e-6 s move the ratio by far less; a ramp this short
#: (``c = 2.002``, ``u = 1e-3``) changes the step's time by 0.1 % and is told apart from
#: constant acceleration by nothing else.
RAMP_TIME_EXCESS = 1e-3


def step_time_coef_from_times(station_m, speed_mps, time_s, lowest=2.0) -> np.ndarray:
    """The ``c`` of each step's time ``c ds / (v[k] + v[k+1])`` from the profile's own times,
    clipped to [``lowest``, 3] (rounding of the written times; ``lowest`` may be per step, 0
    for a step driven at constant jerk or switching, whose speed may peak inside it)."""
    s, v = np.asarray(station_m, dtype=float), np.asarray(speed_mps, dtype=float)
    ratio = np.diff(np.asarray(time_s, dtype=float)) * (v[:-1] + v[1:]) / np.diff(s)
    return np.clip(ratio, lowest, 3.0)


def detect_rest_steps(station_m, speed_mps, time_s) -> np.ndarray:
    """Steps next to rest that the profile's times show were driven with a jerk ramp.

    A step with exactly one end at rest takes ``2 ds / v`` at constant acceleration and
    ``c ds / v`` (``c`` up to 3) with a jerk ramp (the docstring of
    :mod:`curvespeed.export`); its time in ``time_s`` decides, beyond
    :data:`RAMP_TIME_EXCESS`. Returns ``c`` per step (0: constant acceleration); without
    ``time_s``, zeros. Used for profile CSV files without a ``step_kind`` column (older or
    hand-made files).
    """
    s = np.asarray(station_m, dtype=float)
    if time_s is None:
        return np.zeros(s.size - 1)
    coef = step_time_coef_from_times(s, speed_mps, time_s)
    ramp = steps_next_to_rest(speed_mps) & (coef > 2.0 * (1.0 + RAMP_TIME_EXCESS))
    return np.where(ramp, coef, 0.0)


def as_station_profile(profile) -> StationProfile:
    """A :class:`StationProfile` from either a StationProfile or a planned Profile."""
    if isinstance(profile, StationProfile):
        return profile
    return StationProfile.from_profile(profile)



def planned_time_mismatch(sp: StationProfile) -> tuple[int, float] | None:
    """Largest gap between the profile's ``time_s`` and the time recomputed from speeds.

    Returns ``(node, gap_s)`` or None when the profile has no ``time_s``.
    """
    if sp.time_s is None:
        return None
    gap = np.abs((sp.time_s - sp.time_s[0]) - sp.node_time_s)
    k = int(np.argmax(gap))
    return k, float(gap[k])


#: Longest time a profile may plan for one step between stations, s: an hour to cover one step
#: (at most a few tens of metres at any spacing plan uses) is a vehicle standing, not driving;
#: a standstill is a stop (speed 0 at a station, with a dwell), and a speed that low is a
#: unit slip or a damaged file.
MAX_STEP_TIME_S = 3600.0
#: Longest planned time of a whole profile, s (11.6 days of driving without a stop): no road
#: route is driven that long in one go, and sampling it every 0.05 s would take 2e7 samples.
MAX_PLANNED_TIME_S = 1e6


def implausible_time(sp: StationProfile) -> str | None:
    """Why the profile's planned time (from its stations and speeds) is implausible, naming
    the slowest stretch (file lines, stations, speeds) and what to do; None when it is not.

    Export and replay sample the profile in time: checked before either allocates its samples
    (1e-9 m/s over 1 km would otherwise be 2e13 samples)."""
    step = sp.step_time_s
    total = float(np.sum(step))
    slow = step > MAX_STEP_TIME_S
    if not slow.any() and total <= MAX_PLANNED_TIME_S:
        return None
    k = int(np.argmax(step))
    first = last = k
    while first > 0 and slow[first - 1]:
        first -= 1
    while last + 1 < step.size and slow[last + 1]:
        last += 1
    v = sp.speed_mps[first:last + 2]
    moving = v[v > 0.0]
    low = float(moving.min()) if moving.size else 0.0
    return (f"{sp.source}: the planned time {total:.4g} s for {sp.length_m:.1f} m is not "
            f"plausible (a step may take at most {MAX_STEP_TIME_S:g} s, the whole profile "
            f"{MAX_PLANNED_TIME_S:g} s): the slowest stretch, {sp.node_label(first)} to "
            f"{sp.node_label(last + 1)}, is planned at speeds down to {low:.3g} m/s, its "
            f"slowest step taking {float(step[k]):.4g} s; check the speed_mps column (units, "
            "damage), or plan the profile again with curvespeed plan")


def check_planned_time(sp: StationProfile) -> None:
    """Raise :class:`SpeedFileError` with :func:`implausible_time`'s reason where the
    profile's planned time is implausible (export and replay, before they sample it)."""
    problem = implausible_time(sp)
    if problem is not None:
        raise SpeedFileError(problem)
