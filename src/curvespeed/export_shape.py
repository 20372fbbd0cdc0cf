"""The shape of a trajectory between profile nodes: plan position, latitude/longitude,
elevation and pitch, and the stop a sample stands at (the formulas are stated in
:mod:`curvespeed.export`).

This module is core numerics: arrays in, arrays out.
"""

from __future__ import annotations

import numpy as np

from .station_profile import StationProfile


def hermite_position(sp: StationProfile, k, u, ds):
    """Cubic Hermite position at fraction ``u`` of step ``k``, and its offset from the chord.

    Tangents are the node headings scaled by the step length (the curve's derivative with
    respect to ``u`` is ``ds (cos h, sin h)`` at both ends).
    """
    x0, x1 = sp.x_m[k], sp.x_m[k + 1]
    y0, y1 = sp.y_m[k], sp.y_m[k + 1]
    h0, h1 = sp.heading_rad[k], sp.heading_rad[k + 1]
    u2, u3 = u * u, u * u * u
    b10 = u3 - 2.0 * u2 + u       # weight of the start tangent
    b11 = u3 - u2                 # weight of the end tangent
    b01 = -2.0 * u3 + 3.0 * u2    # weight of the end point (start point: 1 - b01)
    # offset from the straight chord p0 + u (p1 - p0): the part the chord misses
    dx = (b01 - u) * (x1 - x0) + ds * (b10 * np.cos(h0) + b11 * np.cos(h1))
    dy = (b01 - u) * (y1 - y0) + ds * (b10 * np.sin(h0) + b11 * np.sin(h1))
    x = x0 + u * (x1 - x0) + dx
    y = y0 + u * (y1 - y0) + dy
    return x, y, dx, dy


def interpolate_latlon(sp: StationProfile, k, u, dx, dy):
    """Latitude/longitude at fraction ``u`` of step ``k``, consistent with the plan position.

    The chord part is linear in latitude/longitude between the nodes (exact at the nodes). The
    small offset ``(dx, dy)`` of the curve from the chord (at most ``ds**2 curvature / 8``, about
    8 mm for a 1 m step on a 15 m radius) is mapped to degrees by the step's local conformal
    map, taken from the chord itself: the complex ratio of the chord in (east-scaled longitude,
    latitude) degrees to the chord in metres. The projection behind the profile is conformal, so
    this map is a rotation and a scale; treating degrees of latitude and of scaled longitude as
    equal lengths (a sphere) errs by at most 0.7 % (the WGS84 ratio of meridian to prime-vertical
    radius) of that offset, below 0.1 mm.
    """
    lat0, lat1 = sp.lat[k], sp.lat[k + 1]
    lon0, lon1 = sp.lon[k], sp.lon[k + 1]
    coslat = np.cos(np.radians(0.5 * (lat0 + lat1)))
    dlon = (lon1 - lon0 + 180.0) % 360.0 - 180.0   # across the antimeridian too
    chord_m = (sp.x_m[k + 1] - sp.x_m[k]) + 1j * (sp.y_m[k + 1] - sp.y_m[k])
    chord_deg = dlon * coslat + 1j * (lat1 - lat0)
    offset_deg = chord_deg / chord_m * (dx + 1j * dy)
    lat = lat0 + u * (lat1 - lat0) + offset_deg.imag
    lon = lon0 + u * dlon + offset_deg.real / coslat
    lon = (lon + 180.0) % 360.0 - 180.0
    return lat, lon


def elevation_at(sp: StationProfile, k, u, ds):
    """Elevation and pitch at fraction ``u`` of step ``k``: the cubic Hermite curve in station
    through the node elevations with the node grades as slopes (the chord's slope where the
    profile has no grade), and ``atan`` of its slope."""
    z0, z1 = sp.z_m[k], sp.z_m[k + 1]
    if sp.grade is None:
        g0 = g1 = (z1 - z0) / ds
    else:
        g0, g1 = sp.grade[k], sp.grade[k + 1]
    u2, u3 = u * u, u * u * u
    z = (z0 * (2.0 * u3 - 3.0 * u2 + 1.0) + z1 * (-2.0 * u3 + 3.0 * u2)
         + ds * (g0 * (u3 - 2.0 * u2 + u) + g1 * (u3 - u2)))
    slope = (6.0 * (u2 - u) * (z0 - z1) / ds + g0 * (3.0 * u2 - 4.0 * u + 1.0)
             + g1 * (3.0 * u2 - 2.0 * u))
    return z, np.arctan(slope)


def stop_names_at(sp: StationProfile, k, d, ds, stop_names):
    """Each stop's name (a tuple) and, per sample, the name of the stop it stands at (a sample
    exactly on a stop's node); ``(None, None)`` without names."""
    if stop_names is None:
        return None, None
    names = tuple(str(n) for n in stop_names)
    stops = sp.stop_nodes
    if len(names) != stops.size:
        raise ValueError(f"{len(names)} stop name(s) given for the profile's {stops.size} "
                         "stop(s)")
    node = np.where(d <= 0.0, k, np.where(d >= ds, k + 1, -1))
    at_stop = np.full(node.size, "", dtype=object)
    for j, n in enumerate(stops):
        at_stop[node == n] = names[j]
    return names, at_stop
