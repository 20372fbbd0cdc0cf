"""Helpers shared by the readers: separators, strict number parsing, latitude/longitude.

Private to :mod:`curvespeed.io`; every message built here is prefixed by the reader with the
file name and the point's place in the file.

Separators (:func:`detect_separator`): a CSV file is comma-separated unless its header line has
no comma but a semicolon (or a tab). Semicolon- and tab-separated files are what spreadsheets
in many European locales save as "CSV"; in them a decimal comma is accepted as well as a
decimal point, but not both in one file (a point there would be a thousands separator, which is
never read).
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
# Characters a column of plain numbers can hold; anything else sends the column down the slow
# path, cell by cell, which names the first offending cell.
_NUMBER_CHARACTERS = re.compile(r"[^0-9eE+\-. \t]")

#: Separators accepted in CSV files, with a name for messages.
SEPARATOR_NAMES = {",": "comma", ";": "semicolon", "\t": "tab"}


def separator_warning(source: str, header_line: int, sep: str, decimal_comma: bool,
                      advice: str) -> str:
    """The warning for a CSV read with another separator than commas (a spreadsheet export)."""
    marks = "decimal commas" if decimal_comma else "decimal points"
    return (f"{source}: line {header_line}: read as {SEPARATOR_NAMES[sep]}-separated values with "
            f"{marks} (a spreadsheet export?); {advice}save the file comma-separated with "
            "decimal points to silence this")


def detect_separator(header_text: str) -> str:
    """The field separator a CSV file uses, judged from its header line.

    A comma anywhere in the header means comma-separated (the standard). Without one, a
    semicolon or else a tab in the header selects that separator. A header with none of them
    (a single column) is read as comma-separated, so the usual "which columns" message applies.
    """
    if "," in header_text:
        return ","
    for sep in (";", "\t"):
        if sep in header_text:
            return sep
    return ","


def parse_number(text: str, decimal_comma: bool = False) -> float | None:
    """Return the value of a plain decimal number, or None if ``text`` is not one.

    Non-finite spellings ("nan", "inf") and values that overflow to infinity give None. With
    ``decimal_comma`` a comma is read as the decimal separator (``"12,5"`` is 12.5).
    """
    s = text.strip()
    if decimal_comma:
        s = s.replace(",", ".")
    if not _NUMBER.fullmatch(s):
        return None
    value = float(s)
    return value if math.isfinite(value) else None


def number_problem(text: str, decimal_comma: bool = False) -> str:
    """Short reason why ``text`` was refused by :func:`parse_number`, for messages."""
    s = text.strip()
    if not s:
        return "is empty"
    if decimal_comma:
        s = s.replace(",", ".")
    if _NON_FINITE.fullmatch(s) or _NUMBER.fullmatch(s):
        return "is not a finite number"
    if not decimal_comma and re.fullmatch(r"[+-]?\d+,\d+", s):
        return "is not a number (decimal comma? use a point as the decimal separator)"
    if re.fullmatch(r"[+-]?\d{1,3}(?:[.,\s]\d{3})+(?:[.,]\d+)?", s):
        return "is not a number (thousands separators? write the number without them)"
    return "is not a number"


def parse_column(cells: list[str], decimal_comma: bool = False):
    """Parse a column of cells as plain finite numbers, fast.

    Returns ``(values, bad)``: a float array and ``None``, or ``None`` and the index of the first
    cell :func:`parse_number` refuses. The fast path checks the characters of the whole column
    at once and converts with numpy, whose conversion accepts every cell :func:`parse_number`
    accepts and, within those characters, nothing else (e.g. it refuses ``"1e"``, ``"+-1"``,
    ``"1.2.3"``); anything unusual falls back to cell-by-cell parsing.
    """
    joined = "\n".join(cells)
    if decimal_comma:
        joined = joined.replace(",", ".")
    if not _NUMBER_CHARACTERS.search(joined.replace("\n", " ")):
        try:
            values = np.array(joined.split("\n") if decimal_comma else cells, dtype=float)
        except ValueError:
            values = None
        if values is not None and values.size == len(cells) and np.isfinite(values).all():
            return values, None
    values = np.empty(len(cells))
    for i, cell in enumerate(cells):
        v = parse_number(cell, decimal_comma)
        if v is None:
            return None, i
        values[i] = v
    return values, None


def decimal_mark_problem(cells: list[str]) -> int | None:
    """In a file that uses decimal commas, index of the first cell that also has a point."""
    for i, cell in enumerate(cells):
        if "." in cell:
            return i
    return None


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


def read_text(path, error=RouteFormatError) -> str:
    """UTF-8 text of ``path`` (a byte-order mark is dropped); ``error`` names the file on failure.

    Refuses, with what to do: a missing or unreadable file, a folder, UTF-16/32 or binary
    content (:func:`check_text`) and bytes that are not UTF-8 (naming the line).
    """
    source = str(path)
    data = read_bytes(path, source, error)
    check_text(data, source, error)
    return decode_utf8(data, source, error)


def read_bytes(path, source: str, error=RouteFormatError) -> bytes:
    """The bytes of ``path``; a missing, unreadable file or a folder raises ``error``."""
    from pathlib import Path

    try:
        return Path(path).read_bytes()
    except FileNotFoundError:
        raise error(f"{source}: no such file; check the name and folder") from None
    except IsADirectoryError:
        raise error(f"{source}: is a folder, not a file") from None
    except PermissionError:
        raise error(f"{source}: cannot be read (permission denied)") from None
    except OSError as exc:
        raise error(f"{source}: cannot be read ({exc.strerror or exc})") from None


def check_text(data: bytes, source: str, error=RouteFormatError) -> None:
    """Refuse UTF-16/32 text and binary files with a message saying what to do."""
    import codecs

    if data.startswith((codecs.BOM_UTF32_LE, codecs.BOM_UTF32_BE)):
        raise error(f"{source}: is UTF-32 text; save it as UTF-8")
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        raise error(f"{source}: is UTF-16 text; save it as UTF-8")
    nul = data.find(b"\x00")
    if nul >= 0:
        line = data.count(b"\n", 0, nul) + 1
        raise error(f"{source}: line {line}: contains a NUL byte, so it is not a text file; "
                    "give the file saved as UTF-8 text")


def decode_utf8(data: bytes, source: str, error=RouteFormatError) -> str:
    """``data`` as UTF-8 (a byte-order mark dropped); a bad byte raises ``error`` naming its line."""
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise error(f"{source}: line {line}: byte 0x{data[exc.start]:02x} is not valid UTF-8; "
                    "save the file as UTF-8") from None
