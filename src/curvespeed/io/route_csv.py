"""Read a route from a comma-separated file.

The file has one header row naming its columns, then one point per line in driving order.
Two forms are accepted (column names case-insensitive, surrounding spaces ignored, any order):

* metric: ``x_m,y_m`` and optionally ``z_m`` (metres in any local plane frame);
* geographic: ``lat,lon`` and optionally ``ele_m`` (WGS84 degrees, elevation in metres).

Lines starting with ``#`` (before or after the header) are comments; blank lines are ignored.
Geographic routes are projected to a local transverse Mercator frame centred on the route
(:class:`curvespeed.geodesy.LocalProjection`). Every error names the file and the 1-based line.
"""

from __future__ import annotations

import csv

import numpy as np

from ..route import Route, make_route
from ._common import (fail, latlon_range_problem, looks_projected, number_problem,
                      parse_number, project_latlon, swapped_would_fit)

METRIC_COLUMNS = ("x_m", "y_m", "z_m")
GEOGRAPHIC_COLUMNS = ("lat", "lon", "ele_m")
ACCEPTED_FORMS = "x_m,y_m[,z_m] (metres) or lat,lon[,ele_m] (WGS84 degrees)"

# Names people often write instead of ours, with the name to use.
_LIKELY_MEANT = {
    "x": "x_m", "y": "y_m", "z": "z_m", "easting": "x_m", "northing": "y_m",
    "latitude": "lat", "longitude": "lon", "lng": "lon", "long": "lon",
    "ele": "ele_m", "elevation": "ele_m", "alt": "ele_m", "altitude": "ele_m",
    "z_m": "ele_m", "ele_m": "z_m",
}


def parse_route_csv(text: str, source: str) -> Route:
    """Build a :class:`~curvespeed.route.Route` from the text of a route CSV file.

    Parameters
    ----------
    text : str
        Whole file content (already decoded; line ends ``\\n``, ``\\r\\n`` or ``\\r``).
    source : str
        File name used in messages and stored on the route.

    Raises
    ------
    RouteFormatError
        Missing or unknown header columns, a bad separator, a value that is not a finite
        number, or a latitude/longitude out of range.
    RouteGeometryError
        From :func:`~curvespeed.route.make_route`: fewer than three distinct points, a reversal.
    """
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    rows = [(i + 1, line) for i, line in enumerate(lines)
            if line.strip() and not line.lstrip().startswith("#")]
    if not rows:
        raise fail(source, None, f"no header row and no data; the first line must name the "
                                 f"columns: {ACCEPTED_FORMS}")

    header_line, header_text = rows[0]
    names = _split(header_text)
    columns = _read_header(names, header_text, source, f"line {header_line}")
    geographic = "lat" in columns
    if len(rows) == 1:
        raise fail(source, None, f"no data rows after the header on line {header_line}; "
                                 "add one point per line")

    want = GEOGRAPHIC_COLUMNS if geographic else METRIC_COLUMNS
    keys = [k for k in want if k in columns]
    values = {k: np.empty(len(rows) - 1) for k in keys}
    where = []
    for r, (line_no, line) in enumerate(rows[1:]):
        label = f"line {line_no}"
        fields = _split(line)
        if len(fields) != len(names):
            raise fail(source, label, f"has {len(fields)} value(s) but the header on line "
                                      f"{header_line} names {len(names)} column(s); "
                                      "give one value per column")
        for k in keys:
            raw = fields[columns[k]]
            v = parse_number(raw)
            if v is None:
                raise fail(source, label, f"column '{k}' value '{raw.strip()}' "
                                          f"{number_problem(raw)}; fix or remove that line")
            values[k][r] = v
        if geographic:
            _check_latlon(values["lat"][r], values["lon"][r], source, label)
        where.append(label)

    if geographic:
        x, y, projection = project_latlon(values["lat"], values["lon"])
        z = values.get("ele_m")
    else:
        x, y, projection = values["x_m"], values["y_m"], None
        z = values.get("z_m")
    return make_route(x, y, z, where=np.array(where, dtype=object), source=source,
                      projection=projection)


def _split(line: str) -> list[str]:
    """Fields of one comma-separated line (double quotes allowed around a field)."""
    return next(csv.reader([line], delimiter=",", quotechar='"'))


def _read_header(names: list[str], header_text: str, source: str, where: str) -> dict[str, int]:
    """Map accepted column names to their index, or raise naming what is wrong."""
    if len(names) == 1:
        for sep, label in ((";", "';'"), ("\t", "a tab")):
            if sep in header_text:
                raise fail(source, where, f"separator looks like {label} - curvespeed reads "
                                          "comma-separated files; save the file with commas")
    if all(parse_number(n) is not None for n in names):
        raise fail(source, where, "first line looks like data, not a header; add a header "
                                  f"row naming the columns: {ACCEPTED_FORMS}")

    clean = [n.strip().lower() for n in names]
    columns: dict[str, int] = {}
    for i, n in enumerate(clean):
        if not n:
            raise fail(source, where, f"column {i + 1} of the header has no name (a trailing "
                                      "comma?); name it or remove it")
        if n in columns:
            raise fail(source, where, f"column '{n}' appears twice in the header; keep one")
        columns[n] = i

    metric = "x_m" in columns and "y_m" in columns
    geographic = "lat" in columns and "lon" in columns
    if metric and geographic:
        raise fail(source, where, "header has both x_m,y_m and lat,lon; keep one pair: "
                                  f"{ACCEPTED_FORMS}")
    if not (metric or geographic):
        raise fail(source, where, f"header ({', '.join(clean)}) has neither x_m,y_m nor "
                                  f"lat,lon; accepted forms: {ACCEPTED_FORMS}")
    allowed = GEOGRAPHIC_COLUMNS if geographic else METRIC_COLUMNS
    extra = [n for n in clean if n not in allowed]
    if extra:
        hints = [f"'{n}' -> '{_LIKELY_MEANT[n]}'" for n in extra
                 if _LIKELY_MEANT.get(n) in allowed]
        hint = f" (rename {', '.join(hints)})" if hints else ""
        form = "lat,lon[,ele_m]" if geographic else "x_m,y_m[,z_m]"
        raise fail(source, where, f"unknown column(s) {', '.join(repr(n) for n in extra)}"
                                  f"{hint}; with this header the accepted columns are {form}; "
                                  "remove the others")
    return columns


def _check_latlon(lat: float, lon: float, source: str, where: str) -> None:
    problem = latlon_range_problem(lat, lon)
    if problem is None:
        return
    if swapped_would_fit(lat, lon):
        hint = "; are lat and lon swapped?"
    elif looks_projected(lat, lon):
        hint = "; these look like projected metres: use x_m,y_m columns instead"
    else:
        hint = "; fix or remove that line"
    raise fail(source, where, problem + hint)
