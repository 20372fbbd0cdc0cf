"""Deterministic number formatting for CSV output, shared by every writer.

Numbers are written with Python's ``format`` (correctly rounded, identical on every platform)
using fixed format specifications per quantity, so a file written twice from the same arrays is
byte-identical. A value that rounds to zero is written without a minus sign ("-0.0000" becomes
"0.0000"), so round-off noise of either sign gives the same text. Non-finite values are written
as Python spells them (``nan``, ``inf``, ``-inf``).
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Mapping

import numpy as np

try:
    from . import _csv_rows
except ImportError:         # no C compiler at install: the rows are joined by ``%`` below
    _csv_rows = None

#: Lengths, positions, stations and elevations, metres: 0.1 mm.
METRES = ".4f"
#: Headings and other angles, radians: 1e-7 rad.
RADIANS = ".7f"
#: Curvature, 1/m: fixed 1e-9 1/m (0.1 % of a 1000 km radius). Fixed rather than significant
#: digits so the round-off noise on straights (|curvature| ~ 1e-17) prints as 0.000000000
#: instead of platform-dependent digits.
CURVATURE = ".9f"
#: Grade (rise over run) and other dimensionless ratios: 1e-6.
RATIO = ".6f"
#: Latitude and longitude, degrees: 1e-9 deg (about 0.1 mm).
DEGREES = ".9f"


#: Free text (names), quoted as RFC 4180 says where it holds a comma, quote or line break.
QUOTED = "quoted-text"


#: Characters XML 1.0 forbids in a document (the C0 controls but tab, line feed and carriage
#: return; lone surrogates; U+FFFE and U+FFFF). A NUL also stops many CSV readers.
_UNWRITABLE = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")
#: What an unwritable character becomes: the replacement character, so a reader sees that
#: something was there.
REPLACEMENT = "\ufffd"


def printable(text: str) -> str:
    """``text`` with every character XML 1.0 forbids replaced by U+FFFD (a name from a limits
    file or a route holding a control character is written so that every reader can read the
    file: GPX, CSV, JSON and GeoJSON alike)."""
    return _UNWRITABLE.sub(REPLACEMENT, text)


def listed(names, limit: int = 12, quote: bool = False) -> str:
    """``a, b, c`` for a message, at most ``limit`` names and then ``and N more``: a header of
    200,000 columns must not make a message of megabytes."""
    names = list(names)
    shown = [repr(n) if quote else str(n) for n in names[:limit]]
    more = len(names) - len(shown)
    return ", ".join(shown) + (f" and {more} more" if more > 0 else "")


def quoted(text: str) -> str:
    """``text`` as one CSV cell (RFC 4180): in double quotes, inner quotes doubled, when it
    holds a comma, a double quote or a line break; as it is otherwise. Characters XML 1.0
    forbids (a NUL, other control characters) become U+FFFD (:func:`printable`)."""
    text = printable(text)
    if any(ch in text for ch in ',"\n\r'):
        return '"' + text.replace('"', '""') + '"'
    return text


def format_column(values, spec: str) -> list[str]:
    """Format every value of a 1-D array with ``spec`` (a ``format`` specification)."""
    flat = np.asarray(values).ravel()
    if _FIXED.fullmatch(spec) and flat.dtype.kind == "f":
        return _fixed_column(flat, spec)
    if spec == "s" and flat.dtype.kind in "UO":      # format(text, "s") is the text itself
        cells = flat.tolist()
        if all(type(c) is str for c in cells):       # (labels kept as objects: str each)
            return [_drop_negative_zero(c) if c.startswith("-") else c for c in cells]
    cells = [format(v, spec) for v in flat.tolist()]
    return [_drop_negative_zero(c) for c in cells]


#: Fixed-point specifications, which ``%`` formats in one pass over a whole column: the same
#: correctly rounded conversion as ``format`` (both use the interpreter's float-to-string
#: routine with the 'f' conversion), about ten times faster on a 10,000-row profile.
_FIXED = re.compile(r"\.[0-9]+f")
#: What a cell must not hold (it would break the CSV).
_BREAKS = re.compile(r'[,"\n\r]')
#: Rows formatted at a time by :func:`format_columns` (bounded memory on long routes).
_ROW_BLOCK = 50_000


def _fixed_column(flat: np.ndarray, spec: str) -> list[str]:
    if flat.size == 0:
        return []
    cells = (("%" + spec + "\x00") * flat.size % tuple(flat.tolist())).split("\x00")[:-1]
    for i in _negative_zeros(flat, spec):
        cells[i] = _drop_negative_zero(cells[i])
    return cells


def _negative_zeros(flat: np.ndarray, spec: str) -> list[int]:
    """Where a value may print as a negative zero (``-0.000``) with the fixed ``spec``: only a
    negative value (or -0.0) smaller than one unit of the last digit can."""
    tiny = 10.0 ** -int(spec[1:-1])
    return np.flatnonzero(np.signbit(flat) & (flat > -tiny)).tolist()


def _fixed_values(flat: np.ndarray, spec: str) -> np.ndarray:
    """The values of a float column for ``%`` with the fixed ``spec`` (float64), those that
    would print as a negative zero replaced by 0.0 (which prints the same digits without the
    sign)."""
    values = np.array(flat, dtype=np.float64)
    for i in _negative_zeros(flat, spec):
        cell = ("%" + spec) % float(values[i])
        if _drop_negative_zero(cell) != cell:
            values[i] = 0.0
    return values


def format_columns(columns: Mapping[str, tuple[object, str]]) -> str:
    """CSV text (header line, then one line per row, ``\\n`` line ends) from named columns.

    Float columns with fixed-point specifications are printed a block of rows at a time by the
    compiled kernel (``_csv_rows.c``) or by one ``%`` over the block, its reference (the same
    conversion as :func:`format_column`); the others are formatted cell by cell first.

    Parameters
    ----------
    columns : mapping of str to (array, str)
        Column name -> (values, format specification such as :data:`METRES`, or
        :data:`QUOTED` for free text), in output order.
        All arrays must have the same length.

    Returns
    -------
    str
        The whole file content, ending with a newline.

    Raises
    ------
    ValueError
        Columns of different lengths, or a name or text cell (``s`` format) that would break
        the CSV (comma, quote or line break in it).
    """
    names = list(columns)
    cells, conversions = [], []
    for values, spec in columns.values():
        flat = None if spec == QUOTED else np.asarray(values).ravel()
        if flat is not None and _FIXED.fullmatch(spec) and flat.dtype.kind == "f":
            cells.append(_fixed_values(flat, spec))
            conversions.append("%" + spec)
        else:
            cells.append([quoted(str(v)) for v in values] if spec == QUOTED
                         else format_column(flat, spec))
            conversions.append("%s")
    lengths = {len(c) for c in cells}
    if len(lengths) > 1:
        sizes = ", ".join(f"{n}={len(c)}" for n, c in zip(names, cells))
        raise ValueError(f"columns have different lengths ({sizes})")
    text_columns = [col for col, (_, spec) in zip(cells, columns.values())
                    if spec.endswith("s") and spec != QUOTED]
    if _BREAKS.search("".join(names)) or any(_BREAKS.search("".join(c)) for c in text_columns):
        for text in names + [c for col in text_columns for c in col]:
            if _BREAKS.search(text):
                raise ValueError(f"{text!r} contains a comma, quote or line break")
    n_rows = lengths.pop() if lengths else 0
    parts = [",".join(names) + "\n"]
    for lo in range(0, n_rows, _ROW_BLOCK):
        parts.append(_rows([col[lo: lo + _ROW_BLOCK] for col in cells], conversions))
    return "".join(parts)


def _rows(block: list, conversions: list[str], compiled: bool | None = None) -> str:
    """The rows of a block of columns (float64 arrays printed by their ``%`` conversions, lists
    of text by ``%s``), each ending in a newline: by the compiled kernel (default: when it was
    built; about ten times faster on a 10,000-row profile) or by one ``%`` over the block, its
    reference, the same text."""
    if compiled is None:
        compiled = _csv_rows is not None
    if compiled:
        precisions = [-1 if conv == "%s" else int(conv[2:-1]) for conv in conversions]
        return _csv_rows.rows([col if conv == "%s" else np.ascontiguousarray(col)
                               for col, conv in zip(block, conversions)], precisions)
    row = ",".join(conversions) + "\n"
    cells = [col if conv == "%s" else col.tolist() for col, conv in zip(block, conversions)]
    return row * len(cells[0]) % tuple(itertools.chain.from_iterable(zip(*cells)))


def _drop_negative_zero(cell: str) -> str:
    if cell.startswith("-"):
        mantissa = cell[1:].split("e")[0].split("E")[0]
        if mantissa and set(mantissa) <= {"0", "."}:
            return cell[1:]
    return cell
