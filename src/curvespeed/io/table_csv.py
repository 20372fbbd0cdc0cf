"""Read a column table from CSV: profiles written by curvespeed, and speed traces.

Used wherever a command takes a table back in (``export``, ``plot``, ``check --speeds``). The
first non-comment line is the header; lines starting with ``#`` and blank lines are skipped.
Columns are read by name, so extra columns are allowed. Numeric columns are parsed strictly
(a plain decimal number, finite); text columns (``binding``, ``step_kind``) are kept as
strings.

As for route files, a header with semicolons (or tabs) and no comma selects that separator, with
a warning; such a file may use decimal commas or decimal points, not both.
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import CurvespeedWarning, SpeedFileError
from ._common import (decimal_mark_problem, detect_separator, number_problem,
                      parse_column, read_text, separator_warning)

#: Columns kept as text rather than parsed as numbers.
TEXT_COLUMNS = frozenset({"binding", "step_kind"})


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
    """

    columns: dict
    lines: np.ndarray
    source: str

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
                f"the file has {', '.join(self.columns) or 'no columns'}")
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
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        if header is None:
            sep = detect_separator(line)
            header = [c.strip().lower() for c in line.split(sep)]
            header_line = number
            repeated = sorted({c for c in header if header.count(c) > 1})
            if repeated:
                raise SpeedFileError(f"{source}: line {number}: column {', '.join(repeated)} "
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
                                     f"'{cells[i]}' has a decimal point, but other values in "
                                     "this file use decimal commas; write every number the same "
                                     "way, without thousands separators")
        values, i = parse_column(cells, decimal_comma)
        if i is not None:
            raise SpeedFileError(f"{source}: line {lines[i]}: column '{name}' value "
                                 f"'{cells[i]}' {number_problem(cells[i], decimal_comma)}; fix "
                                 "or remove that line")
        columns[name] = values
    if sep != ",":
        warnings.warn(separator_warning(source, header_line, sep, decimal_comma, ""),
                      CurvespeedWarning, stacklevel=2)
    return Table(columns=columns, lines=np.asarray(lines), source=source)
