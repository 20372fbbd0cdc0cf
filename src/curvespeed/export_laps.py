"""A run of laps on a loop: profiles of single laps joined end to end into one station profile.

A closed route's profile is a flying lap: it starts and ends at the same place and speed, so
laps can follow each other. A run of ``N`` laps is

    [launch lap or flying lap] + (N - 2) flying laps + [finish lap or flying lap]

where the launch lap is a profile of the same loop planned from rest up to the flying lap's
speed at the start (a standing start), and the finish lap one planned from that speed down to
rest (a standing finish). The laps are joined into one :class:`StationProfile` whose stations
keep growing (lap ``j`` covers ``[s_j, s_j + L]``): each join keeps the next lap's first node,
so the run's time is the sum of its laps' times, e.g. launch + (N - 1) x flying lap, and the
samplers of :mod:`curvespeed.export` sample the whole run in one time base, continuous across
the joins.

This module is core numerics: station profiles in, a station profile out; it never reads or
writes files.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

import numpy as np

from .errors import LimitsError, SpeedFileError
from .station_profile import StationProfile, make_station_profile

#: Two laps join when the end of one lies within this distance of the start of the next, m.
#: Laps planned from one route file (closed for the flying lap, opened at its start for a launch
#: or finish lap) put their ends within millimetres (the written positions are to 0.1 mm, the
#: open and closed fits differ near the ends by less than the points' noise); 5 cm still refuses
#: a lap of another route, another part of it or another spacing.
JOIN_GAP_M = 0.05
#: Two laps join when their speeds at the join differ by at most this, m/s. A launch lap is
#: planned with ``--end-speed`` set to the flying lap's start speed as written (1e-6 m/s), and
#: the planner holds an end speed to its solver tolerance; 1 mm/s is far below what a tracker
#: resolves, and still refuses a lap planned to another speed.
JOIN_SPEED_MPS = 1e-3
#: The most laps a run may have: a 24-hour endurance race runs fewer than 1,000 laps (common
#: practice, from memory); more laps are days of driving in one time base, and a count far
#: beyond it (10**9) would exhaust the memory before :data:`MAX_RUN_NODES` is checked.
MAX_LAPS = 1000
#: The joined run may have at most this many stations (laps x stations per lap): about 20
#: arrays of 8-byte floats per station, so some 300 MB at this size.
MAX_RUN_NODES = 2_000_000


@dataclass(frozen=True)
class LapRun:
    """Laps joined into one profile.

    Attributes
    ----------
    profile : StationProfile
        The whole run, stations growing from the first lap's start.
    lap_stations_m : ndarray, shape (laps + 1,)
        Station at which each lap starts, and the end of the run, metres.
    lap_nodes : ndarray of int, shape (laps + 1,)
        Node of the run at which each lap starts, and its last node.
    kinds : tuple of str
        ``"launch"``, ``"flying"`` or ``"finish"`` per lap.
    lap_stop_index : list of ndarray
        For each stop of the run (station order): ``(lap, index of that stop among its lap's
        own stops)``, or ``(lap, -1)`` for a stop on a join (the loop's start at rest).
    """

    profile: StationProfile
    lap_stations_m: np.ndarray
    lap_nodes: np.ndarray
    kinds: tuple
    lap_stop_index: np.ndarray

    @property
    def laps(self) -> int:
        return len(self.kinds)

    def node_lap(self) -> np.ndarray:
        """The lap (from 1) of every node; a join node belongs to the lap it starts."""
        lap = np.zeros(self.profile.n_nodes, dtype=int)
        for j in range(self.laps):
            lap[self.lap_nodes[j]:] = j + 1
        return lap


def lap_sequence(flying: StationProfile, laps: int, launch: StationProfile | None = None,
                 finish: StationProfile | None = None) -> list[tuple[str, StationProfile]]:
    """The laps of a run, in order, as ``(kind, profile)`` (module docstring).

    Raises
    ------
    LimitsError
        ``laps`` not a whole number from 1 to :data:`MAX_LAPS`.
    ValueError
        One lap asked to be both a launch and a finish lap.
    """
    laps = _lap_count(laps)
    if laps == 1 and launch is not None and finish is not None:
        raise ValueError("a run of one lap cannot both start from rest (launch lap) and end "
                         "at rest (finish lap); plan that lap from rest to rest on the opened "
                         "route and export it alone, or ask for two laps or more")
    kinds = ["flying"] * int(laps)
    if launch is not None:
        kinds[0] = "launch"
    if finish is not None:
        kinds[-1] = "finish"
    own = {"flying": flying, "launch": launch, "finish": finish}
    return [(kind, own[kind]) for kind in kinds]


def _lap_count(laps) -> int:
    """``laps`` as an int when it is a whole number from 1 to :data:`MAX_LAPS`, else
    :class:`LimitsError` saying what to do."""
    whole = not isinstance(laps, bool) and (isinstance(laps, numbers.Integral) or (
        isinstance(laps, numbers.Real) and math.isfinite(laps) and float(laps).is_integer()))
    if not whole or laps < 1:
        raise LimitsError(f"a run needs a whole number of laps, at least 1, got {laps!r}")
    if laps > MAX_LAPS:
        raise LimitsError(
            f"{int(laps)} laps is more than {MAX_LAPS}: a 24-hour endurance race runs fewer "
            f"laps, and more would be days of driving in one time base; ask for at most "
            f"{MAX_LAPS} laps, and export a longer session in runs of up to {MAX_LAPS}")
    return int(laps)


def check_lap_profiles(flying: StationProfile, launch: StationProfile | None = None,
                       finish: StationProfile | None = None) -> None:
    """Check that the profiles can be joined into laps: the flying lap is a loop (ends where
    and as fast as it starts), a launch lap starts at rest and ends where and as fast as the
    flying lap starts, a finish lap starts there at that speed and ends at rest.

    Raises
    ------
    SpeedFileError
        The message names the profile, what does not fit by how much, and what to do.
    """
    v0 = float(flying.speed_mps[0])
    _join(flying, flying, "the flying lap's end and its own start",
          "plan the closed route (curvespeed plan ROUTE --closed) for the flying lap")
    plan_hint = "curvespeed plan ROUTE --open --start-speed {a} --end-speed {b}"
    if launch is not None:
        if launch.speed_mps[0] > 0.0:
            raise SpeedFileError(
                f"{launch.source}: the launch lap starts at {launch.speed_mps[0]:g} m/s, not "
                "from rest; plan it as " + plan_hint.format(a=0, b=f"{v0:.6f}"))
        _join(launch, flying, "the launch lap's end and the flying lap's start",
              "plan the launch lap as " + plan_hint.format(a=0, b=f"{v0:.6f}"))
    if finish is not None:
        if finish.speed_mps[-1] > 0.0:
            raise SpeedFileError(
                f"{finish.source}: the finish lap ends at {finish.speed_mps[-1]:g} m/s, not at "
                "rest; plan it as " + plan_hint.format(a=f"{v0:.6f}", b=0))
        _join(flying, finish, "the flying lap's end and the finish lap's start",
              "plan the finish lap as " + plan_hint.format(a=f"{v0:.6f}", b=0))


def _join(before: StationProfile, after: StationProfile, what: str, advice: str) -> None:
    gap = float(np.hypot(after.x_m[0] - before.x_m[-1], after.y_m[0] - before.y_m[-1]))
    if gap > JOIN_GAP_M:
        raise SpeedFileError(
            f"{before.source} / {after.source}: {what} are {gap:.3f} m apart (at most "
            f"{JOIN_GAP_M:g} m joins laps); both laps must come from the same loop, the flying "
            f"lap planned closed; {advice}")
    dv = float(after.speed_mps[0] - before.speed_mps[-1])
    if abs(dv) > JOIN_SPEED_MPS or ((after.speed_mps[0] <= 0.0) != (before.speed_mps[-1] <= 0.0)):
        raise SpeedFileError(
            f"{before.source} / {after.source}: at {what} the speed jumps from "
            f"{before.speed_mps[-1]:.6f} to {after.speed_mps[0]:.6f} m/s (at most "
            f"{JOIN_SPEED_MPS:g} m/s joins laps); {advice}")


def join_laps(sequence: list[tuple[str, StationProfile]]) -> LapRun:
    """Join the laps of :func:`lap_sequence` into one profile (checked with
    :func:`check_lap_profiles` first).

    Raises
    ------
    ValueError
        The run would have more than :data:`MAX_RUN_NODES` stations.
    """
    total = sum(p.n_nodes - 1 for _, p in sequence) + 1
    if total > MAX_RUN_NODES:
        raise ValueError(f"{len(sequence)} laps of {sequence[0][1].n_nodes} stations make "
                         f"{total} stations (at most {MAX_RUN_NODES}); ask for fewer laps")
    names = ("station_m", "x_m", "y_m", "heading_rad", "curvature_1pm", "speed_mps", "z_m",
             "grade", "lat", "lon", "curvature_bound_1pm")
    parts = {n: [] for n in names}
    coef, linear, turn, starts, nodes, stop_index = [], [], [], [0.0], [0], []
    offset, node = 0.0, 0
    for j, (_, lap) in enumerate(sequence):
        last = j == len(sequence) - 1
        keep = slice(None) if last else slice(0, -1)   # a join keeps the next lap's first node
        s = lap.station_m - lap.station_m[0]
        for n in names:
            values = s + offset if n == "station_m" else getattr(lap, n)
            parts[n].append(None if values is None else values[keep])
        coef.append(lap.rest_time_coef)
        linear.append(lap.linear_time_coef)
        turn.append(np.zeros(lap.n_nodes - 1, dtype=int) if lap.switch_step is None
                    else lap.switch_step)
        own = {int(k): i for i, k in enumerate(lap.stop_nodes)}
        kept_nodes = range(lap.n_nodes if last else lap.n_nodes - 1)
        stop_index.extend((j, own.get(k, -1)) for k in kept_nodes
                          if lap.speed_mps[k] <= 0.0 and 0 < node + k < total - 1)
        offset += float(s[-1])
        node += lap.n_nodes - 1
        starts.append(offset)
        nodes.append(node)
    joined = {n: (None if any(p is None for p in v) else np.concatenate(v))
              for n, v in parts.items()}
    first = sequence[0][1]
    profile = make_station_profile(
        joined.pop("station_m"), joined.pop("x_m"), joined.pop("y_m"), joined.pop("heading_rad"),
        joined.pop("curvature_1pm"), joined.pop("speed_mps"), name=first.name,
        source=" + ".join(dict.fromkeys(p.source for _, p in sequence)),
        rest_time_coef=np.concatenate(coef), linear_time_coef=np.concatenate(linear),
        switch_step=np.concatenate(turn), **joined)
    return LapRun(profile=profile, lap_stations_m=np.array(starts), lap_nodes=np.array(nodes),
                  kinds=tuple(kind for kind, _ in sequence),
                  lap_stop_index=np.array(stop_index, dtype=int).reshape(-1, 2))


def per_stop(run: LapRun, per_lap: dict, fill) -> np.ndarray | list:
    """A value per stop of the run from each lap's own values: ``per_lap`` maps a lap's kind to
    its array (one value per stop of that lap's profile, or None); ``fill`` where a lap has
    none or the stop is on a join."""
    out = []
    for lap, i in run.lap_stop_index:
        values = per_lap.get(run.kinds[lap])
        out.append(fill if values is None or i < 0 else values[i])
    return out


#: A sample within this distance of a join belongs to the lap that starts there, m: the
#: sampler's station ``s[k] + d`` may miss the join node's station by round-off (1e-12 m on
#: routes of kilometres); written stations are to 0.1 mm, so a micrometre is never seen.
JOIN_STATION_M = 1e-6


def with_laps(trajectory, run: LapRun):
    """``trajectory`` (sampled from ``run.profile``) with the lap of each sample and each lap's
    start station and time (:class:`~curvespeed.export.Trajectory` ``lap``,
    ``lap_stations_m``, ``lap_times_s``)."""
    import dataclasses

    from .export import node_arrival_s

    inner = run.lap_stations_m[1:-1] - JOIN_STATION_M
    lap = np.searchsorted(inner, trajectory.station_m, side="right") + 1
    arrive = node_arrival_s(run.profile, trajectory.stop_dwell_s)
    return dataclasses.replace(trajectory, lap=lap, lap_stations_m=run.lap_stations_m.copy(),
                               lap_times_s=arrive[run.lap_nodes])


__all__ = ["JOIN_GAP_M", "JOIN_SPEED_MPS", "JOIN_STATION_M", "LapRun", "MAX_LAPS", "MAX_RUN_NODES",
           "check_lap_profiles", "join_laps", "lap_sequence", "per_stop", "with_laps"]
