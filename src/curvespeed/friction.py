"""Friction by section: a tyre-road friction coefficient over a station range.

A :class:`FrictionSection` replaces the route's friction (``Limits.friction_coefficient`` and
``lateral_friction_coefficient``) over ``start_m..end_m``: a wet patch, a gravel stretch, a
low-grip test surface. :func:`node_friction` turns the sections into the per-node coefficients
every solver, the verifier and ``check`` use (:class:`~curvespeed.problem.SpeedProblem`).

The rules, stated once here and in ``docs/limits.md``:

* **Ellipse shape.** A section gives ``friction_coefficient`` (along the path) and optionally
  ``lateral_friction_coefficient`` (across it). Given only the first, the section keeps the
  vehicle's ellipse shape: both of the route's coefficients are scaled by the same ratio
  ``mu_section / mu_route``, so a route with mu 0.8 along and 0.9 across and a section of 0.4
  gives 0.4 along and 0.45 across. Given both, they are taken as they are.
* **Overlaps.** Where sections overlap, the lowest coefficient wins, along and across
  separately (the conservative reading, as for speed zones). A section may also lie above the
  route's friction (a high-grip test surface): it then raises the friction where it covers
  whole steps.
* **Boundaries between stations.** Each step takes the lowest friction found anywhere along
  it (a step a section only partly covers keeps the route's friction too), and a node the
  lowest of the steps touching it. So the nodes of every step that overlaps a low-friction
  section take its coefficient -- the same node convention as speed zones -- and the plan
  never counts on grip a step does not have all along.

Core numerics: nothing here reads or writes files.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from .errors import CurvespeedWarning, LimitsError
from .limits import PHYSICAL_RANGES, Limits


@dataclass(frozen=True)
class FrictionSection:
    """Friction over a station range, metres.

    Attributes
    ----------
    start_m, end_m : float
        Station range of the section, m.
    friction_coefficient : float
        Tyre-road friction along the path over the section (dimensionless).
    lateral_friction_coefficient : float or None
        Friction across the path; None scales the route's lateral friction by the same ratio
        as the longitudinal one (module docstring).
    origin : str
        Where the section was given (file and entry, or the option), for messages.
    snap_distance_m : float or None
        For a section given by positions, the larger of its two ends' distances from the
        route, m (else None).
    """

    start_m: float
    end_m: float
    friction_coefficient: float
    lateral_friction_coefficient: float | None = None
    origin: str = ""
    snap_distance_m: float | None = None

    def coefficients(self, limits: Limits) -> tuple[float, float]:
        """``(mu_long, mu_lat)`` over the section for a vehicle with route ``limits``."""
        mu = self.friction_coefficient
        if self.lateral_friction_coefficient is not None:
            return mu, self.lateral_friction_coefficient
        return mu, limits.mu_lat * (mu / limits.mu_long)

    def label(self) -> str:
        """The section in a user's words: stations and origin."""
        here = f" ({self.origin})" if self.origin else ""
        return f"friction section {self.start_m:g}..{self.end_m:g} m{here}"


@dataclass(frozen=True)
class FrictionPosition:
    """A friction section given by the positions of its two ends, not yet on the route:
    ``start`` and ``end`` are ``(x_m, y_m)`` in the route's metric frame or, with
    ``geographic``, ``(lat_deg, lon_deg)``. :func:`curvespeed.placement.place_positions` snaps
    both ends and makes it a :class:`FrictionSection`."""

    start: tuple[float, float]
    end: tuple[float, float]
    friction_coefficient: float
    lateral_friction_coefficient: float | None = None
    geographic: bool = False
    origin: str = ""


def validate_friction_sections(sections, length_m: float, end_m: float) -> None:
    """Check each section's range and coefficients; raise :class:`LimitsError` (warn about a
    section running past an end, as for speed zones).

    ``end_m`` is the last station still on the route (its length plus round-off)."""
    low, high, why = PHYSICAL_RANGES["friction_coefficient"]
    for sec in sections:
        here = f"{sec.origin}: " if sec.origin else ""
        span = f"friction section {sec.start_m:g}..{sec.end_m:g} m"
        if not (math.isfinite(sec.start_m) and math.isfinite(sec.end_m)
                and sec.end_m > sec.start_m):
            raise LimitsError(f"{here}{span}: end must be after start")
        for name in ("friction_coefficient", "lateral_friction_coefficient"):
            mu = getattr(sec, name)
            if mu is None:
                continue
            if not (math.isfinite(mu) and low <= mu <= high):
                raise LimitsError(f"{here}{span}: {name} = {mu:g} is outside {low:g}..{high:g}: "
                                  f"{why}; check the value")
        if sec.start_m >= length_m or sec.end_m <= 0.0:
            raise LimitsError(f"{here}{span} lies outside the route (0..{length_m:.2f} m); "
                              "check its stations against the route summary")
        if sec.start_m < -(end_m - length_m) or sec.end_m > end_m:
            warnings.warn(f"{here}{span} runs past the route (0..{length_m:.2f} m); it applies "
                          f"over {max(sec.start_m, 0.0):g}..{min(sec.end_m, length_m):.1f} m "
                          "only. Check its stations against the route summary",
                          CurvespeedWarning, stacklevel=3)


def touching_nodes(start_m: float, end_m: float, ds: float, n_nodes: int) -> slice:
    """The nodes of every step that overlaps ``start_m..end_m`` (the node convention of speed
    zones and friction sections)."""
    i0 = max(int(math.floor(start_m / ds + 1e-9)), 0)
    i1 = min(int(math.ceil(end_m / ds - 1e-9)), n_nodes - 1)
    return slice(i0, i1 + 1)


def node_friction(limits: Limits, sections, ds: float, n_nodes: int, closed: bool
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-node friction ``(mu_long, mu_lat, section)``: the coefficients each node plans with
    and the index into ``sections`` of the section that sets the longitudinal one, -1 where the
    route's own friction does.

    Each step first takes the lowest friction found anywhere along it: the lowest of the
    sections overlapping it, and the route's friction unless one section covers the whole step.
    Each node then takes the lower of its (one or two) steps. Without sections every node holds
    the route's coefficients exactly (the scalars themselves), so a route without sections
    plans exactly as with scalar friction.
    """
    route_long, route_lat = float(limits.mu_long), float(limits.mu_lat)
    if not sections:                # the route's scalars, untouched by any arithmetic
        return (np.full(n_nodes, route_long), np.full(n_nodes, route_lat),
                np.full(n_nodes, -1, dtype=int))
    steps = max(n_nodes - 1, 1)
    step_long = np.full(steps, np.inf)
    step_lat = np.full(steps, np.inf)
    step_index = np.full(steps, -1, dtype=int)
    whole = np.zeros(steps, dtype=bool)
    k = np.arange(steps)
    for i, sec in enumerate(sections):
        sl = touching_nodes(sec.start_m, sec.end_m, ds, n_nodes)
        on = slice(sl.start, max(sl.stop - 1, sl.start))     # the steps between those nodes
        along, across = sec.coefficients(limits)
        lower = along < step_long[on]
        step_index[on] = np.where(lower, i, step_index[on])
        step_long[on] = np.minimum(step_long[on], along)
        step_lat[on] = np.minimum(step_lat[on], across)
        whole[on] |= ((sec.start_m <= k[on] * ds + 1e-9 * ds)
                      & (sec.end_m >= (k[on] + 1) * ds - 1e-9 * ds))
    route_wins = ~whole & ~(step_long < route_long)
    step_index[route_wins] = -1
    step_long = np.where(whole, step_long, np.minimum(step_long, route_long))
    step_lat = np.where(whole, step_lat, np.minimum(step_lat, route_lat))
    # node k touches steps k-1 and k (one step at an open end; both ends' steps on a loop)
    before = np.concatenate(([step_long[-1] if closed else np.inf], step_long))
    after = np.concatenate((step_long, [step_long[0] if closed else np.inf]))
    take_before = before < after
    ib = np.concatenate(([step_index[-1] if closed else -1], step_index))
    ia = np.concatenate((step_index, [step_index[0] if closed else -1]))
    lat_b = np.concatenate(([step_lat[-1] if closed else np.inf], step_lat))
    lat_a = np.concatenate((step_lat, [step_lat[0] if closed else np.inf]))
    mu_long = np.minimum(before, after)[:n_nodes]
    mu_lat = np.minimum(lat_b, lat_a)[:n_nodes]
    index = np.where(take_before, ib, ia)[:n_nodes]
    return mu_long, mu_lat, index


@dataclass(frozen=True)
class GripAlong:
    """How the road's grip along the route compares with the route's own friction, station by
    station: ``scale[i]`` over ``edges[i] <= s < edges[i + 1]`` (1 outside every section).

    This is the road as the sections describe it, for a model that drives it (the replay), not
    the planning convention of :func:`node_friction`, which gives each node the lowest
    friction of its steps. A vehicle model with one friction coefficient (a friction circle)
    takes the lower of a section's two ratios, along and across (module docstring: the
    section's coefficients over the route's), so it never counts on more grip than the
    section gives either way.
    """

    edges: np.ndarray
    scale: np.ndarray

    def at(self, station_m: float) -> float:
        """The scale at ``station_m`` (1 before the first edge and after the last)."""
        i = int(np.searchsorted(self.edges, station_m, side="right")) - 1
        return float(self.scale[i]) if 0 <= i < self.scale.size else 1.0

    def stretches(self, mu: float) -> list[dict]:
        """The stretches where the grip differs from the route's, with the friction
        coefficient ``mu`` scaled there: ``[{start_m, end_m, friction_coefficient}]``."""
        return [{"start_m": float(a), "end_m": float(b), "friction_coefficient": mu * float(f)}
                for a, b, f in zip(self.edges[:-1], self.edges[1:], self.scale) if f != 1.0]


def grip_along(limits: Limits, sections) -> GripAlong:
    """:class:`GripAlong` of ``sections`` (validated ones) against the route's ``limits``;
    where sections overlap the lowest wins, as for planning."""
    edges = np.unique([x for sec in sections for x in (sec.start_m, sec.end_m)])
    if edges.size < 2:
        return GripAlong(np.zeros(0), np.zeros(0))
    mid = 0.5 * (edges[:-1] + edges[1:])
    lowest = np.full(mid.size, np.inf)
    for sec in sections:
        along, across = sec.coefficients(limits)
        covered = (mid > sec.start_m) & (mid < sec.end_m)
        lowest[covered] = np.minimum(lowest[covered],
                                     min(along / limits.mu_long, across / limits.mu_lat))
    return GripAlong(edges, np.where(np.isfinite(lowest), lowest, 1.0))


def section_at(sections, index: np.ndarray, nodes) -> FrictionSection | None:
    """The section setting the friction at the lowest-friction node among ``nodes`` (None
    where the route's own friction applies there)."""
    nodes = np.atleast_1d(np.asarray(nodes))
    if nodes.size == 0:
        return None
    found = index[nodes]
    found = found[found >= 0]
    return sections[int(found[0])] if found.size else None
