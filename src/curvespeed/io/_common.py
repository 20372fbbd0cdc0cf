"""Helpers shared by the route readers: strict number parsing and latitude/longitude handling.

Private to :mod:`curvespeed.io`; every message built here is prefixed by the reader with the
file name and the point's place in the file.
"""

from __future__ import annotations

import math
import re

import numpy as np

from ..errors import RouteFormatError
from ..geodesy import LocalProjection

# A plain decimal number: optional sign, digits with an optional point, optional exponent.
# Stricter than float(), which would also take "nan", "inf", "1_000" and surrounding spaces.
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_NON_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)


def parse_number(text: str) -> float | None:
    """Return the value of a plain decimal number, or None if ``text`` is not one.

    Non-finite spellings ("nan", "inf") and values that overflow to infinity give None.
    """
    s = text.strip()
    if not _NUMBER.fullmatch(s):
        return None
    value = float(s)
    return value if math.isfinite(value) else None


def number_problem(text: str) -> str:
    """Short reason why ``text`` was refused by :func:`parse_number`, for messages."""
    s = text.strip()
    if not s:
        return "is empty"
    if _NON_FINITE.fullmatch(s) or _NUMBER.fullmatch(s):
        return "is not a finite number"
    if re.fullmatch(r"[+-]?\d+,\d+", s):
        return "is not a number (decimal comma? use a point as the decimal separator)"
    return "is not a number"


def latlon_range_problem(lat: float, lon: float) -> str | None:
    """Describe what is out of range in a latitude/longitude pair (degrees), or None if valid."""
    bad = []
    if not -90.0 <= lat <= 90.0:
        bad.append(f"latitude {lat:.12g} is outside [-90, 90]")
    if not -180.0 <= lon <= 180.0:
        bad.append(f"longitude {lon:.12g} is outside [-180, 180]")
    return " and ".join(bad) or None


def swapped_would_fit(lat: float, lon: float) -> bool:
    """True if exchanging latitude and longitude would put both in range."""
    return -90.0 <= lon <= 90.0 and -180.0 <= lat <= 180.0


def looks_projected(lat: float, lon: float) -> bool:
    """True if the pair looks like projected metres (both far beyond any degree value)."""
    return abs(lat) > 1000.0 and abs(lon) > 1000.0


def project_latlon(lat_deg: np.ndarray, lon_deg: np.ndarray):
    """Project WGS84 degrees to a local metric frame centred on the points.

    Returns ``(x_m, y_m, projection)`` ready for :func:`curvespeed.route.make_route`.
    """
    projection = LocalProjection.centred_on(lat_deg, lon_deg)
    x, y = projection.to_metres(lat_deg, lon_deg)
    return x, y, projection


def fail(source: str, where: str | None, message: str) -> RouteFormatError:
    """Build a :class:`RouteFormatError` reading "SOURCE: WHERE: MESSAGE"."""
    place = f"{source}: {where}: " if where else f"{source}: "
    return RouteFormatError(place + message)
