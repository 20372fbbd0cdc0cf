"""Absolute times of a trajectory: ISO 8601 UTC text for ``curvespeed export --start-time``.

A sample's absolute time is the start time plus its ``time_s`` as written (the ``.6f`` text of
the CSV's ``time_s`` column, read back as whole microseconds), so the absolute column and the
relative one agree to the microsecond in every file. Times are written in UTC with ``Z``, as
GPX 1.1 requires for its ``time`` elements (an ``xsd:dateTime`` in UTC). Python's datetime has
no leap seconds: a run across an inserted leap second is one second late after it.
"""

from __future__ import annotations

import datetime as dt

from ._format import format_column

#: ``time_s`` is written with this format (:data:`curvespeed.io.trajectory.KINEMATIC`): 1e-6 s.
_SECONDS = ".6f"


def parse_start_time(text: str) -> dt.datetime:
    """An ISO 8601 date and time with a UTC offset (``2026-12-02T08:00:00+01:00`` or
    ``...Z``) as a timezone-aware datetime.

    Raises
    ------
    ValueError
        Not an ISO 8601 date and time, or one without a UTC offset (a local time that could be
        any time zone's); the message says which and gives an example.
    """
    example = "e.g. 2026-12-02T08:00:00+01:00 or 2026-12-02T07:00:00Z"
    try:
        when = dt.datetime.fromisoformat(text.strip())
    except ValueError:
        raise ValueError(f"'{text}' is not an ISO 8601 date and time; give the date, the time "
                         f"and the UTC offset, {example}") from None
    if when.tzinfo is None or when.utcoffset() is None:
        raise ValueError(f"'{text}' has no UTC offset, so it could be any time zone's; add "
                         f"one, {example}")
    return when


def utc_text(when: dt.datetime, digits: int = 6) -> str:
    """``when`` in UTC as ISO 8601 text with ``digits`` (0, 3 or 6) fraction digits and ``Z``."""
    utc = when.astimezone(dt.timezone.utc)
    text = utc.strftime("%Y-%m-%dT%H:%M:%S")
    if digits:
        text += f".{utc.microsecond:06d}"[:digits + 1]
    return text + "Z"


def time_range_problem(start: dt.datetime, duration_s: float) -> str | None:
    """Why ``start`` and ``start + duration_s`` cannot both be written as UTC times (the
    calendar runs from year 1 to year 9999) and what to do, or None when they can."""
    low = dt.datetime.min.replace(tzinfo=dt.timezone.utc)
    high = dt.datetime.max.replace(tzinfo=dt.timezone.utc)
    early = ("is before 0001-01-01T00:00:00Z in UTC, the first time the calendar holds; "
             "give a later start time")
    try:
        begin = start.astimezone(dt.timezone.utc)
    except OverflowError:
        return early
    if begin < low:
        return early
    # a second of margin: a sample's time is its time_s rounded to the microsecond (and to the
    # millisecond in GPX), never more than 0.5 ms past the trajectory's duration
    if duration_s >= (high - begin).total_seconds() - 1.0:
        return (f"plus the trajectory's {duration_s:.2f} s ends after 9999-12-31T23:59:58Z, "
                "the last time the calendar holds less a second for rounding; give an "
                "earlier start time")
    return None


def absolute_times(start: dt.datetime, time_s, digits: int = 6) -> list[str]:
    """UTC text of ``start + time_s`` for every sample (``time_s`` as the CSV writes it;
    ``digits`` 3 rounds to the millisecond)."""
    out = []
    for cell in format_column(time_s, _SECONDS):
        whole, frac = cell.split(".")
        micro = int(whole) * 1_000_000 + int(frac)
        if digits == 3:
            micro = (micro + 500) // 1000 * 1000
        out.append(utc_text(start + dt.timedelta(microseconds=micro), digits))
    return out


__all__ = ["absolute_times", "parse_start_time", "time_range_problem", "utc_text"]
