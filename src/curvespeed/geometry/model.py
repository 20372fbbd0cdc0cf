"""Resampled route geometry: stations at uniform arc-length spacing with heading and curvature.

The node convention used by every later step (limits, solvers, writers):

* nodes ``0..n`` at stations ``station_m[k] = k * spacing_m`` with ``station_m[n] = length_m``;
* ``n`` steps between consecutive nodes, all of length ``spacing_m``;
* on a closed route node ``n`` is node ``0`` again (same position, heading modulo 2 pi,
  curvature), so the seam row appears twice and a lap is exactly ``length_m``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..geodesy import LocalProjection


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
    curvature_bound_1pm : ndarray or None
        An upper bound on |curvature| at each node that covers the true road's: what the fit's
        smoothing can spread out near a change of curvature, plus its noise-driven uncertainty.
        Planning and checking use it; None means |curvature_1pm| is exact (designed geometry).
    curvature_sd_1pm : ndarray or None
        Standard deviation of the curvature estimate from the position noise, 1/m.
    curvature_spread_m : ndarray or None
        How far from each node the estimate may have moved a change of the curvature's rate
        (the smoothing's spread; 0 where the estimate follows reconstructed design elements),
        metres. The lateral jerk bound widens each step's range of curvature rates by it
        (:mod:`curvespeed.lateral_rates`). None: the curvature is exact (designed geometry).
    curvature_rate_margin_1pm2 : ndarray or None
        How far the estimate's curvature rate may be off where it follows reconstructed design
        elements (from their lines' uncertainty), 1/m^2; widens the same ranges. None: zero.
    provenance : dict
        How the geometry was made (noise stated, estimated and used; standstills merged, fixes
        averaged, parts), for summaries and sidecar files.
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
    curvature_bound_1pm: np.ndarray | None = None
    curvature_sd_1pm: np.ndarray | None = None
    curvature_spread_m: np.ndarray | None = None
    curvature_rate_margin_1pm2: np.ndarray | None = None
    provenance: dict = field(default_factory=dict, compare=False)

    @property
    def planning_curvature_1pm(self) -> np.ndarray:
        """|curvature| that plans and checks use: the bound where there is one."""
        if self.curvature_bound_1pm is not None:
            return self.curvature_bound_1pm
        return np.abs(self.curvature_1pm)

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




def geometry_from_curvature(kappa, ds: float = 1.0, closed: bool = False, grade=None,
                            name: str = "synthetic") -> Geometry:
    """Geometry whose nodes have exactly curvature ``kappa`` (1/m) at spacing ``ds`` (m).

    For designed alignments and tests: heading is the trapezoidal integral of curvature,
    position the integral of heading (midpoint heading per step), elevation the integral of
    ``grade`` (rise over run, a scalar or one value per node) when given. Starts at the origin
    heading east. On a closed geometry the caller's curvature must close the loop.
    """
    kappa = np.asarray(kappa, dtype=float)
    n = kappa.size
    s = np.arange(n) * ds
    heading = np.concatenate(([0.0], np.cumsum(0.5 * (kappa[1:] + kappa[:-1]) * ds)))
    mid = 0.5 * (heading[1:] + heading[:-1])
    x = np.concatenate(([0.0], np.cumsum(np.cos(mid) * ds)))
    y = np.concatenate(([0.0], np.cumsum(np.sin(mid) * ds)))
    z = None
    if grade is not None:
        grade = np.broadcast_to(np.asarray(grade, dtype=float), (n,)).copy()
        z = np.concatenate(([0.0], np.cumsum(0.5 * (grade[1:] + grade[:-1]) * ds)))
    return Geometry(station_m=s, x_m=x, y_m=y, heading_rad=heading, curvature_1pm=kappa,
                    z_m=z, grade=grade, closed=closed, spacing_m=ds, name=name)


def summarise_geometry(geometry: Geometry) -> dict:
    """Key figures of a geometry for printing: length, loop, tightest radius, turning, grade.

    Returns
    -------
    dict
        ``length_m``, ``closed``, ``n_nodes``, ``spacing_m``, ``min_radius_m`` (``inf`` on a
        straight route) and ``min_radius_station_m`` (where it occurs), ``total_turning_deg``
        (heading change from first to last node; +-360 times the winding number on a loop),
        ``min_elevation_m``, ``max_elevation_m``, ``min_grade``, ``max_grade`` (None without
        elevation; grade as rise over run).
    """
    abs_kappa = np.abs(geometry.curvature_1pm)
    k = int(np.argmax(abs_kappa))
    kmax = float(abs_kappa[k])
    has_z = geometry.z_m is not None
    return {
        "length_m": geometry.length_m,
        "closed": bool(geometry.closed),
        "n_nodes": geometry.n_nodes,
        "spacing_m": float(geometry.spacing_m),
        "min_radius_m": math.inf if kmax == 0.0 else 1.0 / kmax,
        "min_radius_station_m": float(geometry.station_m[k]),
        "total_turning_deg": math.degrees(geometry.total_turning_rad()),
        "min_elevation_m": float(np.min(geometry.z_m)) if has_z else None,
        "max_elevation_m": float(np.max(geometry.z_m)) if has_z else None,
        "min_grade": float(np.min(geometry.grade)) if has_z else None,
        "max_grade": float(np.max(geometry.grade)) if has_z else None,
    }

