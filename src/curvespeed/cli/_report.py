"""The HTML report's steps shared by ``plan --report``, ``check --report`` and ``report``."""

from __future__ import annotations

import os


def generated_utc() -> str:
    """When the report is made, UTC, to the second.

    ``SOURCE_DATE_EPOCH`` (seconds since 1970, the reproducible-builds convention) fixes it, so
    the same inputs can give the same bytes.
    """
    from datetime import datetime, timezone

    epoch = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    when = (datetime.fromtimestamp(int(epoch), timezone.utc) if epoch.isdigit()
            else datetime.now(timezone.utc))
    return when.strftime("%Y-%m-%d %H:%M:%S UTC")


def input_files(*entries) -> list[tuple[str, str, str | None]]:
    """(role, path, SHA-256) of each given input; entries without a path are left out."""
    from ..io.meta_json import file_sha256

    return [(role, str(path), file_sha256(path)) for role, path in entries if path]


def check_of_plan(geometry, limits, constraints, profile):
    """The planned profile checked along its route: the curves and uses its report shows.

    Stops and end speeds are planning targets the check does not judge (dropped quietly here:
    the profile reaches them by construction).
    """
    from ..check import SpeedKind, check_speeds, checked_constraints

    return check_speeds(geometry, limits, checked_constraints(constraints, warn=False),
                        profile.speed_mps, kind=SpeedKind.TRACE,
                        speed_source="the planned profile")


def report_text(check: dict, x_m, y_m, *, doing: str, files, solver: str, notes=()) -> str:
    """The report page for the check result ``check`` (the check JSON's dictionary)."""
    from .. import __version__
    from ..report import provenance_rows, report_data, report_html

    rows = provenance_rows(files, solver, __version__, generated_utc())
    return report_html(report_data(check, x_m, y_m, doing=doing, provenance=rows, notes=notes))
