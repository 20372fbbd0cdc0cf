"""Resampled route geometry: stations at uniform arc-length spacing with heading and curvature.

:func:`build_geometry` fits a smoothing spline to the route's points and resamples it by true
arc length. The node convention used by every later step (limits, solvers, writers):

* nodes ``0..n`` at stations ``station_m[k] = k * spacing_m`` with ``station_m[n] = length_m``;
* ``n`` steps between consecutive nodes, all of length ``spacing_m``;
* on a closed route node ``n`` is node ``0`` again (same position, heading modulo 2 pi,
  curvature), so the seam row appears twice and a lap is exactly ``length_m``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .geodesy import LocalProjection


@dataclass(frozen=True)
class Geometry:
    """A route resampled at uniform station spacing.

    Attributes
    ----------
    station_m : ndarray, shape (n+1,)
        Arc length along the fitted path from the start, metres.
    x_m, y_m : ndarray
        Plan position, metres.
    heading_rad : ndarray
        Direction of travel, radians counter-clockwise from +x, continuous (unwrapped).
    curvature_1pm : ndarray
        Signed curvature, 1/m, positive turning left.
    z_m, grade : ndarray or None
        Elevation (metres) and grade dz/ds (rise over run, + uphill) where the route had elevation.
    closed : bool
        True when the route is a loop (node n coincides with node 0).
    spacing_m : float
        Station step, metres (the requested spacing, shortened so it divides the length).
    projection : LocalProjection or None
        Maps x, y back to latitude/longitude for geographic routes.
    source, name : str
        Where the route came from, for messages and titles.
    """

    station_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    heading_rad: np.ndarray
    curvature_1pm: np.ndarray
    z_m: np.ndarray | None
    grade: np.ndarray | None
    closed: bool
    spacing_m: float
    projection: LocalProjection | None = None
    source: str = "route"
    name: str = "route"

    @property
    def n_nodes(self) -> int:
        return int(self.station_m.size)

    @property
    def length_m(self) -> float:
        return float(self.station_m[-1])

    def latlon(self) -> tuple[np.ndarray, np.ndarray] | None:
        """Latitude and longitude of every node, degrees, or None for a metric route."""
        if self.projection is None:
            return None
        return self.projection.to_latlon(self.x_m, self.y_m)

    def total_turning_rad(self) -> float:
        """Integral of curvature over the route (heading change), radians."""
        return float(self.heading_rad[-1] - self.heading_rad[0])
