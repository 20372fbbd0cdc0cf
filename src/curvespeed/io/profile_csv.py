"""Write a :class:`~curvespeed.profile.Profile` as CSV.

Columns, in this order (more may follow in later versions; readers should go by name):

``station_m, x_m, y_m, heading_rad, curvature_1pm, speed_mps, accel_mps2, jerk_mps3,
lat_accel_mps2, time_s``
    at every node (see :mod:`curvespeed.profile` for the definitions);
``limit_speed_mps, binding``
    the node's speed ceiling (lateral limits, top speed, zones, stops) and the limit that binds;
``z_m, grade``
    when the route has elevation;
``lat, lon``
    when the route was geographic.

Speeds, accelerations, jerk and time are written with 6 decimals; geometry as in
:mod:`curvespeed.io.geometry_csv`. Output is deterministic and written atomically.
"""

from __future__ import annotations

import os
from pathlib import Path

from ..profile import Profile
from ._format import format_columns
from .atomic import atomic_open
from .geometry_csv import geometry_columns

#: Speeds (m/s), accelerations (m/s^2), jerk (m/s^3) and times (s): 1e-6.
KINEMATIC = ".6f"

#: Columns every profile CSV starts with, in order.
PROFILE_COLUMNS = ("station_m", "x_m", "y_m", "heading_rad", "curvature_1pm", "speed_mps",
                   "accel_mps2", "jerk_mps3", "lat_accel_mps2", "time_s")


def profile_columns(profile: Profile) -> dict[str, tuple[object, str]]:
    """Named columns and number formats of ``profile``, in output order."""
    geo = geometry_columns(profile.geometry)
    columns = {name: geo[name] for name in PROFILE_COLUMNS[:5]}
    columns.update({
        "speed_mps": (profile.speed_mps, KINEMATIC),
        "accel_mps2": (profile.accel_mps2, KINEMATIC),
        "jerk_mps3": (profile.jerk_mps3, KINEMATIC),
        "lat_accel_mps2": (profile.lat_accel_mps2, KINEMATIC),
        "time_s": (profile.time_s, KINEMATIC),
        "limit_speed_mps": (profile.limit_speed_mps, KINEMATIC),
        "binding": (profile.binding, "s"),
    })
    for name in ("z_m", "grade", "lat", "lon"):
        if name in geo:
            columns[name] = geo[name]
    return columns


def write_profile_csv(profile: Profile, path: str | os.PathLike, force: bool = False) -> Path:
    """Write ``profile`` to ``path`` (atomically; an existing file only with ``force``)."""
    text = format_columns(profile_columns(profile))
    with atomic_open(path, force) as fh:
        fh.write(text)
    return Path(path)
