"""Read a route from a comma-separated file.

The file has one header row naming its columns, then one point per line in driving order.
Two forms are accepted (column names case-insensitive, surrounding spaces ignored, any order):

* metric: ``x_m,y_m`` and optionally ``z_m`` (metres in any local plane frame);
* geographic: ``lat,lon`` and optionally ``ele_m`` (WGS84 degrees, elevation in metres).

Lines starting with ``#`` (before or after the header) are comments; blank lines are ignored.
Geographic routes are projected to a local transverse Mercator frame centred on the route, or
an oblique Mercator along it for one reaching far east or west
(:class:`curvespeed.geodesy.LocalProjection`). Every error names the file and the 1-based line.

Spreadsheet exports: a header with no comma but semicolons (or tabs) is read as separated by
them, with a warning; such a file may use decimal commas (``12,5``) or decimal points, not both.

A metric file whose values all lie within +-180 and span less than
:data:`DEGREE_LIKE_SPAN_M` is most likely latitude/longitude under the wrong column names: it
is read as metres, as its header says, with a warning suggesting the ``lat,lon`` header.
"""

from __future__ import annotations

import csv
import warnings

import numpy as np

from ..errors import CurvespeedWarning
from ..route import Route, make_route
from ._common import (cell_text, decimal_mark_problem, detect_separator, fail,
                      latlon_range_problem, looks_projected, number_problem, parse_column,
                      parse_number, project_latlon, separator_warning, split_lines,
                      swapped_would_fit)
from ._format import listed

METRIC_COLUMNS = ("x_m", "y_m", "z_m")
GEOGRAPHIC_COLUMNS = ("lat", "lon", "ele_m")
ACCEPTED_FORMS = "x_m,y_m[,z_m] (metres) or lat,lon[,ele_m] (WGS84 degrees)"
#: Metric points that all lie within +-180 and span less than this (metres, as read) look like
#: degrees: 2 degrees of latitude are about 220 km, more than nearly any route, while no
#: drivable route fits in 2 m. The points must also lie farther from 0 than twice their span,
#: so a tiny test route drawn around the origin does not trigger it.
DEGREE_LIKE_SPAN_M = 2.0

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
    lines = split_lines(text)
    rows = [(i, line) for i, line in enumerate(lines, start=1)
            if line.strip() and not line.lstrip().startswith("#")]
    if not rows:
        raise fail(source, None, f"no header row and no data; the first line must name the "
                                 f"columns: {ACCEPTED_FORMS}")

    header_line, header_text = rows[0]
    sep = detect_separator(header_text)
    names = _split(header_text, sep)
    columns = _read_header(names, sep, source, f"line {header_line}")
    geographic = "lat" in columns
    if len(rows) == 1:
        raise fail(source, None, f"no data rows after the header on line {header_line}; "
                                 "add one point per line")

    data = rows[1:]
    line_numbers = [n for n, _ in data]
    want = GEOGRAPHIC_COLUMNS if geographic else METRIC_COLUMNS
    keys = [k for k in want if k in columns]
    cells = _columns(data, sep, len(names), {k: columns[k] for k in keys}, source, header_line)
    decimal_comma = sep != "," and any("," in c for k in keys for c in cells[k])
    if decimal_comma:
        for k in keys:
            r = decimal_mark_problem(cells[k])
            if r is not None:
                raise fail(source, f"line {line_numbers[r]}",
                           f"column '{k}' value {cell_text(cells[k][r])} has a decimal point, but "
                           "other values in this file use decimal commas; write every number "
                           "the same way, without thousands separators")
    values, refused = {}, []
    for k in keys:
        values[k], r = parse_column(cells[k], decimal_comma)
        if r is not None:
            refused.append((r, want.index(k), k))
    if refused:
        r, _, k = min(refused)          # the first line with a problem, in column order
        raw = cells[k][r]
        raise fail(source, f"line {line_numbers[r]}",
                   f"column '{k}' value {cell_text(raw)} {number_problem(raw, decimal_comma)}"
                   "; fix or remove that line")
    if sep != ",":
        warnings.warn(separator_warning(source, header_line, sep, decimal_comma,
                                        "check the route summary, or "),
                      CurvespeedWarning, stacklevel=3)
    where = np.array([f"line {n}" for n in line_numbers], dtype=object)

    if geographic:
        _check_latlon_columns(values["lat"], values["lon"], source, where)
        x, y, projection = project_latlon(values["lat"], values["lon"], source)
        z = values.get("ele_m")
    else:
        x, y, projection = values["x_m"], values["y_m"], None
        z = values.get("z_m")
        _warn_if_degrees(x, y, source, where)
    return make_route(x, y, z, where=where, source=source, projection=projection)


def _columns(data, sep: str, width: int, wanted: dict[str, int], source: str,
             header_line: int) -> dict[str, list[str]]:
    """The cells of the wanted columns, checking that every line has ``width`` fields.

    Files without double quotes (nearly all) are split with plain string operations, which
    keeps a million-line file to about a second; quoted fields go through :mod:`csv`.
    """
    lines = [line for _, line in data]
    if not any('"' in line for line in lines):
        counts = [line.count(sep) for line in lines]
        if counts.count(width - 1) == len(counts):
            flat = sep.join(lines).split(sep)
            return {k: flat[j::width] for k, j in wanted.items()}
        fields = [line.split(sep) for line in lines]
    else:
        fields = list(csv.reader(lines, delimiter=sep, quotechar='"'))
    wrong = [r for r, f in enumerate(fields) if len(f) != width]
    if wrong:
        r = wrong[0]
        raise fail(source, f"line {data[r][0]}",
                   f"has {len(fields[r])} value(s) but the header on line {header_line} names "
                   f"{width} column(s); give one value per column"
                   + (" (a line cut short? check the end of the file)"
                      if r == len(fields) - 1 and len(fields[r]) < width else ""))
    return {k: [f[j] for f in fields] for k, j in wanted.items()}


def _split(line: str, sep: str = ",") -> list[str]:
    """Fields of one separated line (double quotes allowed around a field)."""
    return next(csv.reader([line], delimiter=sep, quotechar='"'))


def _read_header(names: list[str], sep: str, source: str, where: str) -> dict[str, int]:
    """Map accepted column names to their index, or raise naming what is wrong."""
    if all(parse_number(n, decimal_comma=sep != ",") is not None for n in names):
        raise fail(source, where, "first line looks like data, not a header; add a header "
                                  f"row naming the columns: {ACCEPTED_FORMS}")

    clean = [n.strip().lower() for n in names]
    columns: dict[str, int] = {}
    for i, n in enumerate(clean):
        if not n:
            raise fail(source, where, f"column {i + 1} of the header has no name (a trailing "
                                      "separator?); name it or remove it")
        if n in columns:
            raise fail(source, where, f"column '{n}' appears twice in the header; keep one")
        columns[n] = i

    metric = "x_m" in columns and "y_m" in columns
    geographic = "lat" in columns and "lon" in columns
    if metric and geographic:
        raise fail(source, where, "header has both x_m,y_m and lat,lon; keep one pair: "
                                  f"{ACCEPTED_FORMS}")
    if not (metric or geographic):
        raise fail(source, where, f"header ({listed(clean)}) has neither x_m,y_m nor "
                                  f"lat,lon; accepted forms: {ACCEPTED_FORMS}")
    allowed = GEOGRAPHIC_COLUMNS if geographic else METRIC_COLUMNS
    extra = [n for n in clean if n not in allowed]
    if extra:
        hints = [f"'{n}' -> '{_LIKELY_MEANT[n]}'" for n in extra
                 if _LIKELY_MEANT.get(n) in allowed]
        hint = f" (rename {', '.join(hints)})" if hints else ""
        form = "lat,lon[,ele_m]" if geographic else "x_m,y_m[,z_m]"
        raise fail(source, where, f"unknown column(s) {listed(extra, quote=True)}"
                                  f"{hint}; with this header the accepted columns are {form}; "
                                  "remove the others")
    return columns


def _check_latlon_columns(lat: np.ndarray, lon: np.ndarray, source: str, where) -> None:
    """Raise for the first point whose latitude or longitude is out of range."""
    bad = np.flatnonzero((np.abs(lat) > 90.0) | (np.abs(lon) > 180.0))
    if bad.size:
        r = int(bad[0])
        _check_latlon(float(lat[r]), float(lon[r]), source, where[r])


def _warn_if_degrees(x: np.ndarray, y: np.ndarray, source: str, where) -> None:
    """Warn when metric columns hold what look like latitude/longitude degrees."""
    if x.size < 2 or max(np.abs(x).max(), np.abs(y).max()) > 180.0:
        return
    span = max(float(np.ptp(x)), float(np.ptp(y)))
    centre = float(np.hypot(np.mean(x), np.mean(y)))
    if span < DEGREE_LIKE_SPAN_M and centre > 2.0 * span:
        warnings.warn(
            f"{source}: {where[0]} to {where[-1]}: every x_m, y_m value lies within +-180 and the "
            f"points span only {span:.3g} m, so these look like degrees of latitude and "
            "longitude, not metres; if they are, rename the columns lat and lon (matching what "
            "each holds)", CurvespeedWarning, stacklevel=4)


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
