"""Read a column table from CSV: profiles written by curvespeed, and speed traces.

Used wherever a command takes a table back in (``export``, ``plot``, ``check --speeds``). The
first non-comment line is the header; lines starting with ``#`` and blank lines are skipped.
Columns are read by name, so extra columns are allowed. Numeric columns are parsed strictly
(a plain decimal number, finite); text columns (``binding``, ``step_kind``) are kept as
strings.

As for route files, a header with semicolons (or tabs) and no comma selects that separator, with
a warning; such a file may use decimal commas or decimal points, not both.

Columns curvespeed knows (:data:`PLAUSIBLE_RANGES`) are checked against what a road route can
hold, naming the file, line and value: a speed of 1e300 m/s or a latitude of 200 is a corrupt
file or a mix-up of units, and would overflow or give invalid output further on.
"""

from __future__ import annotations

import os
import warnings
from collections import Counter
from dataclasses import dataclass

import numpy as np

from ..errors import CurvespeedWarning, SpeedFileError
from ..route import MAX_COORDINATE_M, MAX_ELEVATION_M
from ._common import (cell_text, decimal_mark_problem, detect_separator, number_problem,
                      parse_column, read_text, separator_warning, split_lines)
from ._format import listed

#: Columns kept as text rather than parsed as numbers.
TEXT_COLUMNS = frozenset({"binding", "step_kind"})

#: Fastest speed read, m/s (3600 km/h): no road vehicle comes near it, so a larger speed is a
#: corrupt file or a unit mix-up, and squaring speeds of 1e160 m/s and more overflows.
MAX_SPEED_MPS = 1000.0
#: Largest curvature magnitude read, 1/m: a radius of 1 mm; the tightest turn of a road vehicle
#: has a radius of metres.
MAX_CURVATURE_1PM = 1000.0
#: Largest magnitude of the other numbers of a profile (accelerations, jerk, time, heading,
#: grade): far beyond any real value, and small enough that sums and squares stay finite.
MAX_OTHER = 1.0e12

_POSITION = (-MAX_COORDINATE_M, MAX_COORDINATE_M, "farther than any place on Earth; check the "
             "units (metres)")
_OTHER = (-MAX_OTHER, MAX_OTHER, "far beyond any value a profile holds")
#: Column -> (lowest, highest, why), checked wherever a table is read.
PLAUSIBLE_RANGES = {
    "station_m": _POSITION, "x_m": _POSITION, "y_m": _POSITION,
    "z_m": (-MAX_ELEVATION_M, MAX_ELEVATION_M, "no place on Earth is that high or deep"),
    "speed_mps": (-MAX_SPEED_MPS, MAX_SPEED_MPS, "no road vehicle is that fast; check the units "
                  "(m/s)"),
    "limit_speed_mps": (-MAX_SPEED_MPS, MAX_SPEED_MPS, "no road vehicle is that fast"),
    "curvature_1pm": (-MAX_CURVATURE_1PM, MAX_CURVATURE_1PM, "a radius below 1 mm"),
    "lat": (-90.0, 90.0, "latitudes lie within [-90, 90] degrees"),
    "lon": (-180.0, 180.0, "longitudes lie within [-180, 180] degrees"),
    "heading_rad": _OTHER, "accel_mps2": _OTHER, "jerk_mps3": _OTHER, "lat_accel_mps2": _OTHER,
    "time_s": _OTHER, "grade": _OTHER,
}


@dataclass(frozen=True)
class Table:
    """Columns of a CSV file by name.

    Attributes
    ----------
    columns : dict of str -> ndarray
        Float arrays (text arrays for :data:`TEXT_COLUMNS`), all of the same length.
    lines : ndarray of int
        1-based file line of each row, for messages.
    source : str
        The file name as given.
    unterminated : bool
        The last row's line has no line end (a file cut short mid-line looks like that).
    """

    columns: dict
    lines: np.ndarray
    source: str
    unterminated: bool = False

    def __len__(self) -> int:
        return int(self.lines.size)

    @property
    def where(self) -> np.ndarray:
        """Label of each row for messages (``"line 12"``), as an object array."""
        return np.array([f"line {n}" for n in self.lines], dtype=object)

    def has(self, *names: str) -> bool:
        return all(n in self.columns for n in names)

    def require(self, *names: str, what: str = "this command") -> list[np.ndarray]:
        """The named columns, or :class:`SpeedFileError` listing the missing ones."""
        missing = [n for n in names if n not in self.columns]
        if missing:
            raise SpeedFileError(
                f"{self.source}: missing column(s) {', '.join(missing)} needed by {what}; "
                f"the file has {listed(self.columns) or 'no columns'}")
        return [self.columns[n] for n in names]


def read_table_csv(path: str | os.PathLike, min_rows: int = 2) -> Table:
    """Read ``path``; raise :class:`SpeedFileError` naming file and line on any problem."""
    source = str(path)
    text = read_text(path, SpeedFileError)

    header = None
    sep = ","
    header_line = 0
    rows: list[list[str]] = []
    lines: list[int] = []
    for number, raw in enumerate(split_lines(text), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        if header is None:
            sep = detect_separator(line)
            header = [c.strip().lower() for c in line.split(sep)]
            header_line = number
            repeated = sorted(c for c, n in Counter(header).items() if n > 1)
            if repeated:
                raise SpeedFileError(f"{source}: line {number}: column {listed(repeated)} "
                                     "appears more than once in the header; keep one")
            continue
        cells = [c.strip() for c in line.split(sep)]
        if len(cells) != len(header):
            cut = " (the file looks cut short)" if len(cells) < len(header) else ""
            raise SpeedFileError(f"{source}: line {number}: {len(cells)} values for "
                                 f"{len(header)} columns{cut}; give one value per column, or "
                                 "write the file again")
        rows.append(cells)
        lines.append(number)
    if header is None:
        raise SpeedFileError(f"{source}: empty file; expected a header line naming the columns, "
                             "then one row per station")
    if len(rows) < min_rows:
        raise SpeedFileError(f"{source}: {len(rows)} data row(s); at least {min_rows} are "
                             "needed (one per station)")

    numeric = [j for j, name in enumerate(header) if name not in TEXT_COLUMNS]
    decimal_comma = sep != "," and any("," in r[j] for r in rows for j in numeric)
    columns = {}
    for j, name in enumerate(header):
        cells = [r[j] for r in rows]
        if name in TEXT_COLUMNS:
            columns[name] = np.array(cells, dtype=object)
            continue
        if decimal_comma:
            i = decimal_mark_problem(cells)
            if i is not None:
                raise SpeedFileError(f"{source}: line {lines[i]}: column '{name}' value "
                                     f"{cell_text(cells[i])} has a decimal point, but other values "
                                     "in this file use decimal commas; write every number the same "
                                     "way, without thousands separators")
        values, i = parse_column(cells, decimal_comma)
        if i is not None:
            raise SpeedFileError(f"{source}: line {lines[i]}: column '{name}' value "
                                 f"{cell_text(cells[i])} {number_problem(cells[i], decimal_comma)}"
                                 "; fix or remove that line")
        _check_range(source, name, values, lines)
        columns[name] = values
    if sep != ",":
        warnings.warn(separator_warning(source, header_line, sep, decimal_comma, ""),
                      CurvespeedWarning, stacklevel=2)
    last = text.replace("\r\n", "\n").replace("\r", "\n").rstrip(" \t")
    return Table(columns=columns, lines=np.asarray(lines), source=source,
                 unterminated=bool(lines) and not last.endswith("\n")
                 and len(split_lines(last)) == lines[-1])


def _check_range(source: str, name: str, values: np.ndarray, lines: list[int]) -> None:
    """Refuse the first value of a known column outside :data:`PLAUSIBLE_RANGES`."""
    if name not in PLAUSIBLE_RANGES:
        return
    low, high, why = PLAUSIBLE_RANGES[name]
    bad = np.flatnonzero((values < low) | (values > high))
    if bad.size:
        k = int(bad[0])
        raise SpeedFileError(f"{source}: line {lines[k]}: column '{name}' value "
                             f"{float(values[k]):.6g} is outside {low:g}..{high:g} ({why}); fix "
                             "or remove that line")
