"""Read a column table from CSV: profiles written by curvespeed, and speed traces.

Used wherever a command takes a table back in (``export``, ``plot``, ``check --speeds``). The
first non-comment line is the header; lines starting with ``#`` and blank lines are skipped.
Columns are read by name, so extra columns are allowed. Numeric columns are parsed strictly
(a plain decimal number, finite); text columns (``binding``) are kept as strings.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import SpeedFileError
from ._common import number_problem, parse_number

#: Columns kept as text rather than parsed as numbers.
TEXT_COLUMNS = frozenset({"binding"})


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
    try:
        text = Path(path).read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise SpeedFileError(f"{source}: no such file") from None
    except UnicodeDecodeError:
        raise SpeedFileError(f"{source}: not a UTF-8 text file") from None
    except OSError as exc:
        raise SpeedFileError(f"{source}: cannot read: {exc.strerror}") from None

    header = None
    rows: list[list[str]] = []
    lines: list[int] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        cells = [c.strip() for c in line.split(",")]
        if header is None:
            header = [c.lower() for c in cells]
            if len(set(header)) != len(header):
                raise SpeedFileError(f"{source}: line {number}: repeated column name in header")
            if ";" in line and len(cells) == 1:
                raise SpeedFileError(f"{source}: line {number}: separator looks like ';'; "
                                     "curvespeed reads comma-separated files")
            continue
        if len(cells) != len(header):
            raise SpeedFileError(f"{source}: line {number}: {len(cells)} values for "
                                 f"{len(header)} columns")
        rows.append(cells)
        lines.append(number)
    if header is None:
        raise SpeedFileError(f"{source}: empty file; expected a header line and rows")
    if len(rows) < min_rows:
        raise SpeedFileError(f"{source}: {len(rows)} data row(s); at least {min_rows} are needed")

    columns = {}
    for j, name in enumerate(header):
        cells = [r[j] for r in rows]
        if name in TEXT_COLUMNS:
            columns[name] = np.array(cells, dtype=object)
            continue
        values = np.empty(len(cells))
        for i, cell in enumerate(cells):
            value = parse_number(cell)
            if value is None:
                raise SpeedFileError(f"{source}: line {lines[i]}: column '{name}' value "
                                     f"'{cell}' {number_problem(cell)}")
            values[i] = value
        columns[name] = values
    return Table(columns=columns, lines=np.asarray(lines), source=source)
