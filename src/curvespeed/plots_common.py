"""What the figures of :mod:`curvespeed.plots` share: sizes, labels, colours, small helpers, and
the figure's file bytes.

matplotlib is imported inside the functions, never pyplot.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from .errors import OutputError
from .station_profile import StationProfile

FIGURE_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}

#: Overview figure size, inches, and resolution for raster output, dots per inch.
OVERVIEW_SIZE_IN = (13.0, 11.0)
OVERVIEW_DPI = 110
#: The g-g figure's size, inches.
GG_SIZE_IN = (6.0, 6.0)

STATION_LABEL = "station (m)"
SPEED_LABEL = "speed (m/s)"
CURVATURE_LABEL = "curvature (1/m)"
ACCEL_LABEL = "longitudinal acceleration (m/s²)"
JERK_LABEL = "longitudinal jerk (m/s³)"
BOTH_JERKS_LABEL = "jerk (m/s³)"
LATERAL_LABEL = "lateral acceleration (m/s²)"
X_LABEL = "x (m)"
Y_LABEL = "y (m)"

_LIMIT_COLOUR = "0.45"
_BAND_COLOUR = "tab:green"
_ZONE_COLOUR = "tab:purple"
_STOP_COLOUR = "tab:red"
_NO_SIDECAR = "limits, zones and stops not known (no sidecar)"


def _new_axes(ax, figsize=(8.0, 4.0)):
    """``ax`` itself, or the axes of a new pyplot-free figure."""
    if ax is not None:
        return ax
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    return fig.add_subplot()


def _accel(sp: StationProfile) -> np.ndarray:
    if sp.accel_mps2 is not None:
        return sp.accel_mps2
    a = sp.step_accel_mps2
    out = np.empty(sp.n_nodes)
    out[1:-1] = 0.5 * (a[:-1] + a[1:])
    out[0], out[-1] = a[0], a[-1]
    return out


def _lateral(sp: StationProfile) -> np.ndarray:
    if sp.lat_accel_mps2 is not None:
        return sp.lat_accel_mps2
    return sp.curvature_1pm * sp.speed_mps ** 2


def _note(ax, text: str):
    return ax.text(0.01, 0.97, text, transform=ax.transAxes, ha="left", va="top",
                   fontsize="small", color="0.35")


def _ellipse(a_x: float, a_up: float, a_down: float, n: int = 361):
    """Closed curve x = a_x cos t, y = (a_up or a_down) sin t."""
    t = np.linspace(0.0, 2.0 * np.pi, n)
    s = np.sin(t)
    return a_x * np.cos(t), np.where(s >= 0.0, a_up, a_down) * s


def figure_bytes(figure, fmt: str) -> bytes:
    """``figure`` as the bytes of a ``png``, ``svg`` or ``pdf`` file, without time stamps (and
    with a fixed SVG id salt), so the same figure gives the same bytes."""
    import io

    import matplotlib

    metadata = {"png": {"Software": None}, "svg": {"Date": None},
                "pdf": {"CreationDate": None, "ModDate": None}}[fmt]
    buffer = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": "curvespeed"}):
        figure.savefig(buffer, format=fmt, dpi=OVERVIEW_DPI, metadata=metadata)
    return buffer.getvalue()


def figure_format(path: str | os.PathLike) -> str:
    """``png``, ``svg`` or ``pdf`` from the file extension; :class:`OutputError` otherwise."""
    suffix = Path(path).suffix.lower()
    if suffix not in FIGURE_FORMATS:
        got = f"extension '{Path(path).suffix}'" if Path(path).suffix else "no extension"
        raise OutputError(f"{path}: {got} is not a figure format curvespeed writes; use "
                          f"{', '.join(FIGURE_FORMATS)}")
    return FIGURE_FORMATS[suffix]
