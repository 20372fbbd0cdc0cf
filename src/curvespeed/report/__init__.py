"""The report people hand over: one self-contained HTML page of a plan or a check.

* :mod:`.model` - :func:`report_data` gathers what a report shows (:class:`ReportData`) from the
  check result (the check JSON's dictionary), the stations' plan positions and provenance;
* :mod:`.svg` - the drawings as inline SVG (plan view with numbered curves and advisory speeds,
  speed along the route with curve bands and braking/launch zones, the utilisation strip);
* :mod:`.page` - :func:`report_html`, the page itself (inline CSS and script, prints on A4);
* :mod:`.palette` - the colours, chosen for colour-blind readers, shared with the figures.

Pure builders: data in, text out. Nothing here reads or writes a file or fetches anything; the
command line hands the text to :class:`~curvespeed.io.atomic.OutputFiles`.
"""

from __future__ import annotations

from .model import CAUTIONS, ReportCurve, ReportData, provenance_rows, report_data
from .page import report_html

__all__ = ["CAUTIONS", "ReportCurve", "ReportData", "provenance_rows", "report_data",
           "report_html"]
