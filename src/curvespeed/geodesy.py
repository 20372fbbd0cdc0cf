"""Projection of WGS84 latitude/longitude to a local metric frame and back.

A transverse Mercator projection centred on the route (conformal, scale factor 1 on its central
meridian) keeps the scale error below about 1e-4 within ~90 km east or west of the centre, which
is smaller than any limit curvespeed works to. pyproj does the arithmetic; this module only picks
the centre and keeps the definition so outputs can be written back as latitude/longitude.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np


@dataclass(frozen=True)
class LocalProjection:
    """Transverse Mercator on the WGS84 ellipsoid centred at (``lat0_deg``, ``lon0_deg``).

    Attributes
    ----------
    lat0_deg, lon0_deg : float
        Latitude and longitude of the origin, degrees. x is east and y north of it, metres.
    """

    lat0_deg: float
    lon0_deg: float

    @classmethod
    def centred_on(cls, lat_deg: np.ndarray, lon_deg: np.ndarray) -> "LocalProjection":
        """Projection centred on the middle of the points' latitude/longitude extent."""
        lat = np.asarray(lat_deg, dtype=float)
        lon = np.asarray(lon_deg, dtype=float)
        # Centre longitude on the circular mean so routes across the antimeridian work.
        lon_rad = np.radians(lon)
        lon0 = float(np.degrees(np.arctan2(np.sin(lon_rad).mean(), np.cos(lon_rad).mean())))
        lat0 = 0.5 * (float(lat.min()) + float(lat.max()))
        return cls(round(lat0, 9), round(lon0, 9))

    @property
    def proj_string(self) -> str:
        return (
            f"+proj=tmerc +lat_0={self.lat0_deg!r} +lon_0={self.lon0_deg!r} +k=1 "
            "+x_0=0 +y_0=0 +ellps=WGS84 +units=m +no_defs"
        )

    @cached_property
    def _transformers(self):
        from pyproj import CRS, Transformer

        local = CRS.from_proj4(self.proj_string)
        wgs84 = CRS.from_epsg(4326)
        fwd = Transformer.from_crs(wgs84, local, always_xy=True)
        inv = Transformer.from_crs(local, wgs84, always_xy=True)
        return fwd, inv

    def to_metres(self, lat_deg, lon_deg) -> tuple[np.ndarray, np.ndarray]:
        """Project latitude/longitude (degrees) to local x (east), y (north), metres."""
        fwd, _ = self._transformers
        x, y = fwd.transform(np.asarray(lon_deg, dtype=float), np.asarray(lat_deg, dtype=float))
        return np.asarray(x, dtype=float), np.asarray(y, dtype=float)

    def to_latlon(self, x_m, y_m) -> tuple[np.ndarray, np.ndarray]:
        """Inverse of :meth:`to_metres`: local metres to latitude, longitude in degrees."""
        _, inv = self._transformers
        lon, lat = inv.transform(np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float))
        return np.asarray(lat, dtype=float), np.asarray(lon, dtype=float)

    def to_dict(self) -> dict:
        return {"kind": "transverse_mercator_wgs84", "lat0_deg": self.lat0_deg,
                "lon0_deg": self.lon0_deg, "proj": self.proj_string}
