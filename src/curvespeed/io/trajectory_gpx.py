"""A trajectory as GPX 1.1 (``curvespeed export --format gpx``).

Layout (GPX 1.1, namespace ``http://www.topografix.com/GPX/1/1``, children in the schema's
order: ``metadata``, ``wpt``, ``trk``)::

    <gpx version="1.1" creator="curvespeed">
      <metadata><name>ROUTE</name><desc>...</desc><time>START</time></metadata>
      <wpt lat=".." lon=".."><ele/><time/><name>STOP</name><desc>dwell ...</desc>
           <type>stop</type></wpt>                     (one per stop)
      <trk><name>ROUTE</name><trkseg>                  (one segment per lap)
        <trkpt lat=".." lon=".."><ele>..</ele><time>..</time></trkpt> ...
      </trkseg></trk>
    </gpx>

``ele`` (metres) where the profile has elevation; ``time`` only with a start time (GPX times
are absolute: UTC, ``xsd:dateTime``), written to the millisecond, the resolution the schema's
note on ``time`` speaks of. GPX 1.1 has no speed element: the speeds are in the times.
Latitude and longitude to 1e-9 degree, as the other formats.
"""

from __future__ import annotations

from xml.sax.saxutils import escape as _escape

import numpy as np

from ..export import Trajectory
from ._format import DEGREES, METRES, format_column, printable
from .trajectory_time import absolute_times, utc_text


def escape(text: str) -> str:
    """``text`` for an XML element: markup escaped, characters XML 1.0 forbids replaced
    (:func:`~curvespeed.io._format.printable`), so a name with a control character cannot make
    the file unreadable."""
    return _escape(printable(text))


def gpx_text(trajectory: Trajectory) -> str:
    """The GPX 1.1 text of ``trajectory`` (module docstring).

    Raises
    ------
    ValueError
        A metric-only trajectory (no latitude/longitude).
    """
    if not trajectory.is_geographic:
        raise ValueError(f"{trajectory.source}: a metric-only trajectory has no longitude/"
                         "latitude for GPX")
    from .trajectory import stop_points

    lat = format_column(trajectory.lat, DEGREES)
    lon = format_column(trajectory.lon, DEGREES)
    ele = (format_column(trajectory.elevation_m, METRES)
           if trajectory.elevation_m is not None else None)
    when = (absolute_times(trajectory.start_time, trajectory.time_s, digits=3)
            if trajectory.start_time is not None else None)

    def point(tag: str, i: int, inner: str = "") -> str:
        body = "".join((f"<ele>{ele[i]}</ele>" if ele else "",
                        f"<time>{when[i]}</time>" if when else "", inner))
        return f'<{tag} lat="{lat[i]}" lon="{lon[i]}">{body}</{tag}>'

    name = escape(trajectory.name)
    desc = (f"reference trajectory from {trajectory.source}: "
            f"{trajectory.total_time_s:.3f} s in all")
    head = [f"<name>{name}</name>", f"<desc>{escape(desc)}</desc>"]
    if trajectory.start_time is not None:
        head.append(f"<time>{utc_text(trajectory.start_time, 3)}</time>")
    lines = ['<?xml version="1.0" encoding="UTF-8"?>',
             '<gpx version="1.1" creator="curvespeed" '
             'xmlns="http://www.topografix.com/GPX/1/1">',
             "  <metadata>" + "".join(head) + "</metadata>"]
    for stop in stop_points(trajectory):
        label = stop["name"] or f"stop {stop['stop']}"
        text = (f"stop {stop['stop']} at station {stop['station_m']:.1f} m, dwell "
                f"{stop['dwell_s']:g} s")
        lines.append("  " + point("wpt", stop["index"], f"<name>{escape(label)}</name>"
                                  f"<desc>{escape(text)}</desc><type>stop</type>"))
    lines.append(f"  <trk><name>{name}</name>")
    laps = trajectory.lap if trajectory.lap is not None else np.ones(trajectory.n_samples, int)
    for lap in np.unique(laps):
        lines.append("    <trkseg>")
        lines.extend("      " + point("trkpt", int(i)) for i in np.flatnonzero(laps == lap))
        lines.append("    </trkseg>")
    lines += ["  </trk>", "</gpx>"]
    return "\n".join(lines) + "\n"


__all__ = ["gpx_text"]
