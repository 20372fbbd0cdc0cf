"""Projection of WGS84 latitude/longitude to a local metric frame and back.

A transverse Mercator projection centred on the route (conformal, scale factor 1 on its central
meridian) keeps the scale error below about 1e-4 within ~90 km east or west of the centre, which
is smaller than any limit curvespeed works to. pyproj does the arithmetic; this module only picks
the centre and keeps the definition so outputs can be written back as latitude/longitude.

A route reaching farther east or west than :data:`TMERC_REACH_M` from its central meridian
(4,450 km along the equator would come out 2.1 % long) is projected instead with an oblique
Mercator (Hotine, two-point-free form: centre and azimuth) whose central line is the great
circle that best fits the route; its scale is 1 along that line, so a long route that keeps
within ~90 km of one great circle keeps its lengths to 1e-4 whatever its direction.
:meth:`LocalProjection.scale_error` says how far any projection stretches a given route (the
readers warn above :data:`SCALE_TOLERANCE`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

#: Largest relative scale error of the local projection along a route that passes silently:
#: 1e-4 (10 cm per km) is below every tolerance curvespeed works to.
SCALE_TOLERANCE = 1e-4
#: A transverse Mercator's point scale is about 1 + x^2 / (2 R^2) at x metres from its central
#: meridian (Snyder 1987, ch. 8; from memory): 1e-4 at 90 km. Routes reaching farther east or
#: west (80 km, with room for the series' higher terms) get the oblique Mercator.
TMERC_REACH_M = 80_000.0
#: Mean Earth radius, metres: for choosing the projection only (the arithmetic is pyproj's).
EARTH_RADIUS_M = 6_371_000.0
#: Points used to choose the central line of a long route and to measure its scale error
#: (evenly spaced through the route).
SAMPLE_POINTS = 20_000


class _Transforms:
    """Latitude/longitude to plan metres and back through a subclass's ``_transformers``
    (pyproj's forward and inverse transformers, x east and y north)."""

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


@dataclass(frozen=True)
class LocalProjection(_Transforms):
    """Conformal local projection of the WGS84 ellipsoid centred at (``lat0_deg``, ``lon0_deg``).

    Transverse Mercator (central meridian ``lon0_deg``) when ``azimuth_deg`` is None, else an
    oblique Mercator whose central line passes the centre at that azimuth (degrees clockwise
    from north, within [-90, 90]). Either way x is east and y north at the centre, metres, with
    scale 1 on the central line.

    Attributes
    ----------
    lat0_deg, lon0_deg : float
        Latitude and longitude of the origin, degrees.
    azimuth_deg : float or None
        Azimuth of the oblique Mercator's central line at the origin, degrees; None for the
        transverse Mercator.
    """

    lat0_deg: float
    lon0_deg: float
    azimuth_deg: float | None = None

    @classmethod
    def centred_on(cls, lat_deg: np.ndarray, lon_deg: np.ndarray) -> "LocalProjection":
        """The projection for these points: transverse Mercator centred on their extent, or,
        for points reaching farther than :data:`TMERC_REACH_M` east or west of that centre,
        the oblique Mercator along the great circle that fits them best (if it does better)."""
        lat = np.asarray(lat_deg, dtype=float)
        lon = np.asarray(lon_deg, dtype=float)
        # Centre longitude on the circular mean so routes across the antimeridian work.
        lon_rad = np.radians(lon)
        lon0 = float(np.degrees(np.arctan2(np.sin(lon_rad).mean(), np.cos(lon_rad).mean())))
        lat0 = 0.5 * (float(lat.min()) + float(lat.max()))
        tmerc = cls(round(lat0, 9), round(lon0, 9))
        # spherical transverse Mercator easting R atanh(cos(lat) sin(dlon)): enough to decide
        east = np.cos(np.radians(lat)) * np.sin(np.radians(lon - lon0))
        if EARTH_RADIUS_M * float(np.max(np.arctanh(np.clip(np.abs(east), 0.0, 0.999999)))) \
                <= TMERC_REACH_M:
            return tmerc
        oblique = _best_great_circle(lat, lon)
        if oblique is None:
            return tmerc
        step = max(1, lat.size // SAMPLE_POINTS)
        if oblique.scale_error(lat[::step], lon[::step]) < \
                tmerc.scale_error(lat[::step], lon[::step]):
            return oblique
        return tmerc

    @property
    def description(self) -> str:
        """The projection in words, for summaries: which Mercator, and its centre."""
        if self.azimuth_deg is None:
            return f"transverse Mercator on the central meridian {self.lon0_deg:.6f} deg"
        return (f"oblique Mercator whose central line passes {self.lat0_deg:.6f}, "
                f"{self.lon0_deg:.6f} deg at azimuth {self.azimuth_deg:.3f} deg")

    @property
    def proj_string(self) -> str:
        if self.azimuth_deg is None:
            return (
                f"+proj=tmerc +lat_0={self.lat0_deg!r} +lon_0={self.lon0_deg!r} +k=1 "
                "+x_0=0 +y_0=0 +ellps=WGS84 +units=m +no_defs"
            )
        return (f"+proj=omerc +lat_0={self.lat0_deg!r} +lonc={self.lon0_deg!r} "
                f"+alpha={self.azimuth_deg!r} +k_0=1 +x_0=0 +y_0=0 +ellps=WGS84 +units=m "
                "+no_defs")

    @cached_property
    def _transformers(self):
        from pyproj import CRS, Transformer

        local = CRS.from_proj4(self.proj_string)
        wgs84 = CRS.from_epsg(4326)
        fwd = Transformer.from_crs(wgs84, local, always_xy=True)
        inv = Transformer.from_crs(local, wgs84, always_xy=True)
        return fwd, inv


    def scale_error(self, lat_deg, lon_deg) -> float:
        """Largest ``|k - 1|`` of the projection's point scale ``k`` at these points.

        Lengths, and radii of curvature, in the projected frame differ from those on the
        ellipsoid by this fraction at most (the projection is conformal: the same in every
        direction at a point).
        """
        from pyproj import Proj

        factors = Proj(self.proj_string).get_factors(np.asarray(lon_deg, dtype=float),
                                                    np.asarray(lat_deg, dtype=float))
        k = np.asarray(factors.meridional_scale, dtype=float)
        return float(np.max(np.abs(k - 1.0))) if k.size else 0.0

    def to_dict(self) -> dict:
        if self.azimuth_deg is None:
            return {"kind": "transverse_mercator_wgs84", "lat0_deg": self.lat0_deg,
                    "lon0_deg": self.lon0_deg, "proj": self.proj_string}
        return {"kind": "oblique_mercator_wgs84", "lat0_deg": self.lat0_deg,
                "lon0_deg": self.lon0_deg, "azimuth_deg": self.azimuth_deg,
                "proj": self.proj_string}


def _best_great_circle(lat_deg: np.ndarray, lon_deg: np.ndarray) -> LocalProjection | None:
    """Oblique Mercator along the great circle nearest the points (least squares on a sphere).

    The circle's plane through the Earth's centre has as normal the eigenvector of the
    smallest eigenvalue of the sum of ``v v^T`` over the points' unit vectors ``v``; its
    centre is the mean direction of the points projected onto that plane. None when no circle
    stands out (points all around the globe) or the centre is too near a pole for the
    projection.
    """
    step = max(1, lat_deg.size // SAMPLE_POINTS)
    lat, lon = np.radians(lat_deg[::step]), np.radians(lon_deg[::step])
    v = np.column_stack((np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)))
    normal = np.linalg.eigh(v.T @ v)[1][:, 0]
    on_plane = v - np.outer(v @ normal, normal)
    centre = on_plane.sum(axis=0)
    if np.linalg.norm(centre) < 1e-6 * lat.size:
        return None
    centre /= np.linalg.norm(centre)
    lat_c = float(np.arcsin(np.clip(centre[2], -1.0, 1.0)))
    lon_c = float(np.arctan2(centre[1], centre[0]))
    if abs(np.degrees(lat_c)) > 89.0:
        return None
    along = np.cross(normal, centre)
    east = np.array([-np.sin(lon_c), np.cos(lon_c), 0.0])
    north = np.array([-np.sin(lat_c) * np.cos(lon_c), -np.sin(lat_c) * np.sin(lon_c),
                      np.cos(lat_c)])
    azimuth = float(np.degrees(np.arctan2(along @ east, along @ north)))
    azimuth = 90.0 - (90.0 - azimuth) % 180.0          # the line, not a direction: (-90, 90]
    if azimuth < -89.999:
        # pyproj places the origin half a world away for azimuths within ~1e-6 degree of -90;
        # 90 names the same line (1e-3 degree moves it 20 m at 1000 km from the centre)
        azimuth = 90.0
    projection = LocalProjection(round(float(np.degrees(lat_c)), 9),
                                 round(float(np.degrees(lon_c)), 9), round(azimuth, 9))
    x0, y0 = projection.to_metres(projection.lat0_deg, projection.lon0_deg)
    if not np.hypot(x0, y0) < 1.0:          # the origin must be the centre (pyproj conventions)
        return None
    return projection


@dataclass(frozen=True)
class GeoReference(_Transforms):
    """The projected frame an OpenDRIVE file's ``geoReference`` names (a PROJ string or an
    authority code such as ``EPSG:25832``): plan x, y in metres of that frame, and back.

    Offers the same conversions as :class:`LocalProjection` (``to_metres``, ``to_latlon``,
    ``to_dict``, ``proj_string``), with pyproj doing the arithmetic.
    """

    text: str

    @classmethod
    def from_text(cls, text: str) -> "GeoReference":
        """Check that PROJ reads ``text`` as a projected frame; ValueError otherwise."""
        from pyproj import CRS
        from pyproj.exceptions import CRSError

        try:
            crs = CRS.from_user_input(text.strip())
        except CRSError as exc:
            raise ValueError(str(exc).split("\n")[0]) from None
        if not crs.is_projected:
            raise ValueError("not a projected (metric) coordinate reference")
        return cls(text.strip())

    @property
    def proj_string(self) -> str:
        return self.text

    @cached_property
    def _transformers(self):
        from pyproj import CRS, Transformer

        local = CRS.from_user_input(self.text)
        wgs84 = CRS.from_epsg(4326)
        return (Transformer.from_crs(wgs84, local, always_xy=True),
                Transformer.from_crs(local, wgs84, always_xy=True))

    def to_dict(self) -> dict:
        return {"kind": "opendrive_geo_reference", "proj": self.text}
