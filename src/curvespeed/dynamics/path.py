"""The planned path as a tracker sees it: where a point lies along it and how far off.

Between two stations the path is taken as the circular arc that leaves the first station with
its heading and curvature (the planner's curvature is piecewise linear in station; over a 1 m
step the arc departs from it by ``dkappa ds^3 / 6``, micrometres). A point is projected onto the
arc of the station just behind it, in that station's frame (``along``, ``lateral``)::

    theta = atan2(kappa along, 1 - kappa lateral)        turning angle to the foot point
    s     = s_k + theta / kappa                          station of the foot point
    e     = (1 - sqrt((kappa along)^2 + (1 - kappa lateral)^2)) / kappa   signed offset, left +

(a straight line when ``kappa`` is ~0). Past either end the first or last arc is extended.
Projection starts from the previous answer and walks station by station, so following a
vehicle costs O(1) per call.
"""

from __future__ import annotations

import bisect
import math

import numpy as np

#: Below this |curvature| (1/m) an arc is treated as a straight line.
_STRAIGHT_1PM = 1e-9


class PathReference:
    """Stations, positions, headings and curvatures of a profile, for projection.

    Parameters
    ----------
    station_m, x_m, y_m, heading_rad, curvature_1pm : array_like
        The profile's nodes (:class:`~curvespeed.export.StationProfile`), stations strictly
        increasing, heading continuous.
    """

    def __init__(self, station_m, x_m, y_m, heading_rad, curvature_1pm):
        self.station = [float(v) for v in np.asarray(station_m, dtype=float)]
        self.x = [float(v) for v in np.asarray(x_m, dtype=float)]
        self.y = [float(v) for v in np.asarray(y_m, dtype=float)]
        self.heading = [float(v) for v in np.asarray(heading_rad, dtype=float)]
        self.curvature = [float(v) for v in np.asarray(curvature_1pm, dtype=float)]
        self.cos = [math.cos(h) for h in self.heading]
        self.sin = [math.sin(h) for h in self.heading]
        self.last = len(self.station) - 2          # index of the last step
        self.index = 0

    @property
    def start_m(self) -> float:
        return self.station[0]

    @property
    def end_m(self) -> float:
        return self.station[-1]

    def curvature_at(self, s: float) -> float:
        """Curvature at station ``s`` (linear between stations, held past the ends), 1/m."""
        st = self.station
        if s <= st[0]:
            return self.curvature[0]
        if s >= st[-1]:
            return self.curvature[-1]
        k = bisect.bisect_right(st, s) - 1
        u = (s - st[k]) / (st[k + 1] - st[k])
        return self.curvature[k] + u * (self.curvature[k + 1] - self.curvature[k])

    def project(self, px: float, py: float):
        """Foot point of ``(px, py)``: ``(station_m, lateral_offset_m, heading_rad,
        curvature_1pm)``, the offset positive to the left of the direction of travel."""
        k = self.index
        along, lateral = self._local(k, px, py)
        while along < 0.0 and k > 0:
            k -= 1
            along, lateral = self._local(k, px, py)
        while k < self.last and along >= self.station[k + 1] - self.station[k]:
            k += 1
            along, lateral = self._local(k, px, py)
        self.index = k
        kappa = self.curvature[k]
        if abs(kappa) < _STRAIGHT_1PM:
            s, offset, heading = self.station[k] + along, lateral, self.heading[k]
        else:
            ka, kl = kappa * along, 1.0 - kappa * lateral
            theta = math.atan2(ka, kl)
            s = self.station[k] + theta / kappa
            offset = (1.0 - math.sqrt(ka * ka + kl * kl)) / kappa
            heading = self.heading[k] + theta
        return s, offset, heading, self.curvature_at(s)

    def reset(self, station_m: float) -> None:
        """Start the next projection's walk from the step holding ``station_m``."""
        k = bisect.bisect_right(self.station, station_m) - 1
        self.index = min(max(k, 0), self.last)

    def _local(self, k: int, px: float, py: float):
        dx, dy = px - self.x[k], py - self.y[k]
        c, s = self.cos[k], self.sin[k]
        return dx * c + dy * s, dy * c - dx * s
