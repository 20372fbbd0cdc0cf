"""Helpers shared by the readers: bounded reading, separators, strict numbers, latitude/longitude.

Private to :mod:`curvespeed.io`; every message built here is prefixed by the reader with the
file name and the point's place in the file.

Separators (:func:`detect_separator`): a CSV file is comma-separated unless its header line has
no comma but a semicolon (or a tab). Semicolon- and tab-separated files are what spreadsheets
in many European locales save as "CSV"; in them a decimal comma is accepted as well as a
decimal point, but not both in one file (a point there would be a thousands separator, which is
never read).

Reading (:func:`read_bytes`, :func:`read_text`): only regular files, checked with ``os.stat``
before anything is opened (a FIFO would block, ``/dev/zero`` never ends), at most
:data:`MAX_INPUT_BYTES`. Numbers (:func:`parse_number` for text, :func:`finite_value` for values
a JSON or TOML parser made, :func:`load_json` for JSON documents): plain ASCII decimals, finite,
with numbers too long or nesting too deep refused by name rather than crashing the parser.
"""

from __future__ import annotations

import math
import os
import re
import stat

import numpy as np

from ..errors import RouteFormatError
from ..geodesy import EARTH_RADIUS_M, LocalProjection

#: Largest input file read, bytes (128 MiB). A route CSV line takes about 20 bytes, so this is
#: some six million points, far more than any route needs at metre spacing (a profile CSV of
#: 850 km at 1 m stations); reading takes about 25 times a file's size in memory (measured:
#: 530 MB for a 20 MB route of a million points), so the limit keeps a read within about 3 GB.
#: Thin the points or split the route instead.
MAX_INPUT_BYTES = 128 * 1024 * 1024
#: Deepest nesting of arrays and objects accepted in a JSON or TOML file. A GeoJSON route
#: nests about ten levels (collection, feature, geometry, lines, positions), a limits file
#: three; deeper nesting is not one of these files and would exhaust the parsers' stack.
MAX_NESTING = 64

# A plain decimal number: optional sign, ASCII digits with an optional point, optional exponent.
# Stricter than float(), which would also take "nan", "inf", "1_000", surrounding spaces and
# digits of other scripts (Arabic-Indic, full-width), which the docs promise are refused.
_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
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
    if _NUMBER.fullmatch(s):
        return "is not a finite number (too large)"
    if _NON_FINITE.fullmatch(s):
        return "is not a finite number"
    if any(ch.isdigit() and not "0" <= ch <= "9" for ch in s):
        return ("has digits other than ASCII 0-9 (Arabic-Indic, full-width or other scripts?); "
                "write the number with the digits 0-9")
    if not decimal_comma and re.fullmatch(r"[+-]?\d+,\d+", s):
        return "is not a number (decimal comma? use a point as the decimal separator)"
    if re.fullmatch(r"[+-]?\d{1,3}(?:[.,\s]\d{3})+(?:[.,]\d+)?", s):
        return "is not a number (thousands separators? write the number without them)"
    return "is not a number"


def cell_text(text: str, width: int = 40) -> str:
    """A cell as written, quoted, shortened if long: ``'1000000000...' (5000 characters)``."""
    s = text.strip()
    if len(s) <= width:
        return f"'{s}'"
    return f"'{s[:width // 2]}...' ({len(s)} characters)"


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


def project_latlon(lat_deg: np.ndarray, lon_deg: np.ndarray, source: str | None = None):
    """Project WGS84 degrees to a local metric frame centred on the points.

    Returns ``(x_m, y_m, projection)`` ready for :func:`curvespeed.route.make_route`. With a
    ``source``, a route too large for one local projection is warned about
    (:func:`warn_if_stretched`).
    """
    projection = LocalProjection.centred_on(lat_deg, lon_deg)
    x, y = projection.to_metres(lat_deg, lon_deg)
    if source is not None:
        refuse_unprojectable(projection, lat_deg, lon_deg, x, y, source)
        warn_if_stretched(projection, lat_deg, lon_deg, x, source)
    return x, y, projection


def _reach_m(projection: LocalProjection, lat, lon) -> np.ndarray:
    """Geodesic distance of each point from the projection's centre, metres."""
    from pyproj import Geod

    return Geod(ellps="WGS84").inv(np.full(lat.size, projection.lon0_deg),
                                   np.full(lat.size, projection.lat0_deg), lon, lat)[2]


def refuse_unprojectable(projection: LocalProjection, lat_deg, lon_deg, x_m, y_m,
                         source: str) -> None:
    """Refuse a route that reaches so far round the Earth that the local projection breaks.

    Both local projections break down a quarter of the way round the Earth from their centre
    (about 10,000 km, 90 degrees of arc): the transverse Mercator's scale grows without bound
    there, and the oblique Mercator's along-line coordinate folds back (PROJ gives no finite
    scale from about 89.9 degrees). The points' coordinates then come out infinite or
    folded, which would otherwise be blamed on the first point.
    """
    from ..geodesy import SAMPLE_POINTS, TMERC_REACH_M

    lat, lon = np.asarray(lat_deg, dtype=float), np.asarray(lon_deg, dtype=float)
    x, y = np.asarray(x_m, dtype=float), np.asarray(y_m, dtype=float)
    finite = bool(np.isfinite(x).all() and np.isfinite(y).all())
    if not lat.size or (finite and projection.azimuth_deg is None
                        and float(np.max(np.abs(x))) <= TMERC_REACH_M):
        return
    step = max(1, lat.size // SAMPLE_POINTS)
    if finite and math.isfinite(projection.scale_error(lat[::step], lon[::step])):
        return
    reach = float(np.max(_reach_m(projection, lat, lon)))
    arc = math.degrees(reach / EARTH_RADIUS_M)
    raise RouteFormatError(
        f"{source}: the route reaches {reach / 1000:.0f} km ({arc:.0f} degrees of arc) from "
        f"its centre (latitude {projection.lat0_deg:.4g}, longitude {projection.lon0_deg:.4g})"
        ": a local map projection cannot hold points about a quarter of the way round the "
        "Earth from its centre (it stretches them without bound or folds them back), so "
        "lengths and curvature cannot be measured. Split the route into parts, each well "
        "within 10,000 km of its middle, or give it in a metric frame")


def warn_if_stretched(projection: LocalProjection, lat_deg, lon_deg, x_m, source: str) -> None:
    """Warn when the projection stretches the route's lengths by more than 1e-4 somewhere.

    A transverse Mercator reaching less than :data:`~curvespeed.geodesy.TMERC_REACH_M` east
    or west is within that by construction and is not checked further.
    """
    import warnings

    from ..errors import CurvespeedWarning
    from ..geodesy import SAMPLE_POINTS, SCALE_TOLERANCE, TMERC_REACH_M

    lat, lon = np.asarray(lat_deg, dtype=float), np.asarray(lon_deg, dtype=float)
    if not lat.size or (projection.azimuth_deg is None
                        and float(np.max(np.abs(x_m))) <= TMERC_REACH_M):
        return
    step = max(1, lat.size // SAMPLE_POINTS)
    error = projection.scale_error(lat[::step], lon[::step])
    if error <= SCALE_TOLERANCE:
        return
    reach = _reach_m(projection, lat[::step], lon[::step])
    warnings.warn(
        f"{source}: the route reaches {np.max(reach) / 1000:.0f} km from its centre and strays "
        "far from any one great circle, too far for one local map projection: lengths and "
        f"radii come out up to {100 * error:.2g} % off in parts of it (a local projection is "
        "good to 0.01 % within about 90 km of its central line). Split the route into parts, "
        "or give it in a metric frame", CurvespeedWarning, stacklevel=3)


def fail(source: str, where: str | None, message: str) -> RouteFormatError:
    """Build a :class:`RouteFormatError` reading "SOURCE: WHERE: MESSAGE"."""
    place = f"{source}: {where}: " if where else f"{source}: "
    return RouteFormatError(place + message)


def read_text(path, error=RouteFormatError) -> str:
    """UTF-8 text of ``path`` (a byte-order mark is dropped); ``error`` names the file on failure.

    Refuses, with what to do: what :func:`read_bytes` refuses, UTF-16/32 or binary content
    (:func:`check_text`) and bytes that are not UTF-8 (naming the line).
    """
    source = str(path)
    data = read_bytes(path, source, error)
    check_text(data, source, error)
    return decode_utf8(data, source, error)


def read_bytes(path, source: str, error=RouteFormatError, limit: int | None = None) -> bytes:
    """The bytes of the regular file ``path``, at most ``limit`` (:data:`MAX_INPUT_BYTES`).

    A missing or unreadable file, a folder, a device, a FIFO or a socket, and a file larger than
    the limit raise ``error``. The file's type is checked with ``os.stat`` before it is opened,
    so a FIFO is never opened (that would block) and ``/dev/zero`` never read; the file is then
    opened without blocking and checked again through the open descriptor.
    """
    limit = MAX_INPUT_BYTES if limit is None else limit
    try:
        st = os.stat(path)
        _check_input_stat(st, source, limit, error)
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise error(f"{source}: no such file; check the name and folder") from None
    except NotADirectoryError:
        raise error(f"{source}: no such file (a part of its folder path is a file); check the "
                    "name and folder") from None
    except PermissionError:
        raise error(f"{source}: cannot be read (permission denied)") from None
    except OSError as exc:
        raise error(f"{source}: cannot be read ({exc.strerror or exc})") from None
    with os.fdopen(fd, "rb") as fh:
        try:
            _check_input_stat(os.fstat(fh.fileno()), source, limit, error)
            data = fh.read(limit + 1)
        except OSError as exc:
            raise error(f"{source}: cannot be read ({exc.strerror or exc})") from None
    if len(data) > limit:
        raise error(_too_large(source, f"over {limit:,} bytes", limit))
    return data


def _check_input_stat(st: os.stat_result, source: str, limit: int, error) -> None:
    if stat.S_ISDIR(st.st_mode):
        raise error(f"{source}: is a folder, not a file")
    if not stat.S_ISREG(st.st_mode):
        from .atomic import file_kind

        raise error(f"{source}: is {file_kind(st.st_mode)}, not a regular file; curvespeed reads "
                    "only regular files (a device or pipe may never end or block forever): "
                    "save the data to a file and give that")
    if st.st_size > limit:
        raise error(_too_large(source, f"{st.st_size:,} bytes", limit))


def _too_large(source: str, size: str, limit: int) -> str:
    return (f"{source}: is {size}, more than the {limit:,} bytes ({limit / 2**20:.0f} MiB) "
            "curvespeed reads: some six million route points, far more than a route needs, "
            "and reading takes about 25 times a file's size in memory; thin the points or "
            "split the file")


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


def split_lines(text: str) -> list[str]:
    """Lines of ``text`` split at ``\\n``, ``\\r\\n`` and ``\\r`` only.

    Unlike :meth:`str.splitlines`, a Unicode line or paragraph separator (U+2028, U+2029, U+0085)
    inside a comment or a cell stays where it is, so line numbers match what editors show.
    """
    return text.replace("\r\n", "\n").replace("\r", "\n").split("\n")


def finite_value(value) -> float | None:
    """The float value of a number a JSON or TOML parser made, or None if it is not one.

    Booleans, strings, lists and the like, non-finite values and integers too large for a
    float (``10**400``, which Python's ``float()`` refuses with an OverflowError) give None.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    try:
        number = float(value)
    except OverflowError:
        return None
    return number if math.isfinite(number) else None


def show_value(value, width: int = 40) -> str:
    """A JSON or TOML value as short text for a message (``5`` for a whole float like 5.0)."""
    import json

    if isinstance(value, float) and value.is_integer() and abs(value) < 1e16:
        value = int(value)
    text = json.dumps(value, default=str, ensure_ascii=False)
    return text if len(text) <= width else text[: width - 3] + "..."


def shown_number(value, width: int = 30) -> str:
    """A value that should have been a number, for "got ..." in a message."""
    if isinstance(value, float) and math.isinf(value):
        return "a number too large to be finite"
    if isinstance(value, int) and not isinstance(value, bool) and finite_value(value) is None:
        return f"an integer of {len(str(abs(value)))} digits, too large to be finite"
    return show_value(value, width)


def value_problem(value, width: int = 30) -> str:
    """Why a parsed value is not a finite number, to follow its name in a message.

    "is not a finite number (too large)" (``1e999``, or an integer of 400 digits, which
    :func:`load_json` hands over as infinity), ``"true is not a finite number"``, ...
    """
    if isinstance(value, float) and math.isinf(value):
        return "is not a finite number (too large)"
    if isinstance(value, int) and not isinstance(value, bool) and finite_value(value) is None:
        return f"has {len(str(abs(value)))} digits: not a finite number (too large)"
    return f"{show_value(value, width)} is not a finite number"


def _json_number(text: str) -> float:
    """A JSON number token as a float; too large for a float: infinity (refused where used).

    The JSON scanner hands over only tokens of JSON's number grammar (ASCII digits, optional
    fraction and exponent), a subset of what :func:`parse_number` accepts, so ``float`` gives
    the same value without a second pattern match; unlike ``int`` it has no digit limit.
    """
    return float(text)


def load_json(text: str, source: str, error=RouteFormatError, advice: str = "fix the file"):
    """Parse JSON ``text``; every number becomes a float, through :func:`parse_number`.

    Integers too long for Python's integer parser (over 4300 digits) or too large for a float
    become infinity, which the reader then refuses naming the key or position. ``NaN`` and
    ``Infinity`` (not JSON, but written by some tools) are read as such and refused the same way.

    Raises ``error`` for invalid JSON (with line and column) and for nesting deeper than
    :data:`MAX_NESTING`.
    """
    import json

    if _nests_too_deep(text):       # before the parser recurses into it
        raise error(_too_deep(source, "JSON"))
    try:
        doc = json.loads(text, parse_int=_json_number, parse_float=_json_number)
    except json.JSONDecodeError as exc:
        raise error(f"{source}: line {exc.lineno}, column {exc.colno}: not valid JSON "
                    f"({exc.msg}); {advice}") from None
    except RecursionError:
        raise error(_too_deep(source, "JSON")) from None
    check_nesting(doc, source, error, "JSON")
    return doc


#: JSON strings (with their escapes) and everything that is not a bracket.
_JSON_STRINGS = re.compile(r'"(?:[^"\\]|\\.)*"')
_NOT_BRACKETS = re.compile(r"[^\[\]{}]+")


def _nests_too_deep(text: str) -> bool:
    """Whether arrays and objects in JSON ``text`` open more than :data:`MAX_NESTING` deep,
    found from the brackets outside strings, without parsing. The parser itself recurses once
    per level and, thousands of levels down, runs out of stack: its RecursionError was caught,
    but objects torn down on the way could report errors of their own through Python's
    unraisable-exception hook, a traceback on the user's screen."""
    if text.count("[") + text.count("{") <= MAX_NESTING:
        return False
    brackets = _NOT_BRACKETS.sub("", _JSON_STRINGS.sub("", text))
    codes = np.frombuffer(brackets.encode("ascii"), dtype=np.uint8)
    steps = np.where((codes == ord("[")) | (codes == ord("{")), 1, -1)
    return bool(steps.size) and int(np.max(np.cumsum(steps))) > MAX_NESTING


def check_nesting(doc, source: str, error, what: str) -> None:
    """Raise ``error`` if lists and dicts in ``doc`` nest deeper than :data:`MAX_NESTING`."""
    level = [doc] if isinstance(doc, (dict, list)) else []
    depth = 0
    while level:
        depth += 1
        if depth > MAX_NESTING:
            raise error(_too_deep(source, what))
        level = [child for item in level
                 for child in (item.values() if isinstance(item, dict) else item)
                 if isinstance(child, (dict, list))]


def _too_deep(source: str, what: str) -> str:
    return (f"{source}: {what} arrays and objects nest more than {MAX_NESTING} levels deep; no "
            "curvespeed input nests that deep, so this is not a route, limits or sidecar file")
