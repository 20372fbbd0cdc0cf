"""Figures of a speed profile, for a person deciding whether a plan is sane.

Every function takes a profile (a planned :class:`~curvespeed.profile.Profile` or a
:class:`~curvespeed.export.StationProfile` read from a CSV), an optional matplotlib ``ax`` to draw
into, and returns a small frozen dataclass holding the artists it made, so callers (and tests)
can restyle or inspect them:

* :func:`plot_speed` - speed against station, with the speed ceiling (``limit_speed_mps``: the
  lateral limits, top speed, zones and stops), zone limits and stops drawn behind it;
* :func:`plot_curvature` - curvature against station;
* :func:`plot_accel` and :func:`plot_jerk` - longitudinal acceleration and jerk against station,
  with the band the limits allow shaded;
* :func:`plot_gg` - g-g diagram (longitudinal against lateral acceleration) with the friction
  ellipse and the comfort limits of a flat road;
* :func:`plot_plan_view` - the route in plan coloured by speed, with a colour bar, equal aspect;
* :func:`plot_overview` - the overview figure, led by the route and its numbered curves
  (:mod:`curvespeed.plots_overview`); :func:`save_overview` writes it to PNG, SVG or PDF
  (:func:`overview_bytes` gives the bytes); :func:`gg_bytes` the g-g diagram on its own.

matplotlib is imported inside the functions and only through :class:`matplotlib.figure.Figure`
(never pyplot), so nothing opens a window, no global backend is switched, and importing curvespeed
stays fast. Limits and constraints are optional: without them (a profile CSV with no sidecar)
the limit lines, zones and stops are left out and the figure says so.

Axis labels carry SI units; every quantity is the one in the profile, not recomputed, except
where a profile lacks a column (then: acceleration from the step accelerations, lateral
acceleration ``curvature * speed**2``).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .export import as_station_profile
from .limits import Limits, RouteConstraints
# the figures' shared parts and the g-g diagram live beside this module; their names are
# offered here too, as before the split
from .plots_common import (_BAND_COLOUR, _LIMIT_COLOUR, _NO_SIDECAR, _STOP_COLOUR,  # noqa: F401
                           _ZONE_COLOUR, ACCEL_LABEL, BOTH_JERKS_LABEL, CURVATURE_LABEL,
                           FIGURE_FORMATS, GG_SIZE_IN, JERK_LABEL, LATERAL_LABEL,
                           OVERVIEW_DPI, OVERVIEW_SIZE_IN, SPEED_LABEL, STATION_LABEL, X_LABEL,
                           Y_LABEL, _accel, _lateral, _new_axes, _note, figure_bytes,
                           figure_format)
from .plots_gg import GGArtists, gg_bytes, gg_figure, plot_gg  # noqa: F401


# -- artist holders ----------------------------------------------------------------------------

@dataclass(frozen=True)
class SpeedArtists:
    """What :func:`plot_speed` drew: the speed line, the ceiling, zone limits and stop lines."""

    ax: object
    speed: object
    ceiling: object | None
    zones: tuple = ()
    zone_spans: tuple = ()
    stops: tuple = ()


@dataclass(frozen=True)
class LineArtists:
    """A quantity against station: its line, the shaded band the limits allow, limit lines."""

    ax: object
    line: object | None
    band: object | None = None
    limits: tuple = ()
    note: object | None = None
    #: The jerk panel only, when the limits bound lateral jerk: its line (per step, at the
    #: steps' mid-stations) and the +-bound lines.
    lateral_line: object | None = None
    lateral_limits: tuple = ()


@dataclass(frozen=True)
class PlanArtists:
    """What :func:`plot_plan_view` drew: the speed-coloured path, its colour bar, the start."""

    ax: object
    path: object
    colorbar: object
    start: object


@dataclass(frozen=True)
class Overview:
    """The overview figure, its axes by name and the artists of each panel."""

    figure: object
    axes: dict = field(default_factory=dict)
    artists: dict = field(default_factory=dict)
    title: str = ""
    #: What was drawn (:class:`~curvespeed.report.ReportData`): curves, speeds, uses.
    data: object = None


# -- helpers -----------------------------------------------------------------------------------


def format_duration(seconds: float) -> str:
    """``581.2 s (9 min 41 s)``: seconds, with minutes for anything over a minute."""
    if seconds < 60.0:
        return f"{seconds:.1f} s"
    whole = int(round(seconds))
    if whole >= 3600:
        return f"{seconds:.1f} s ({whole // 3600} h {whole % 3600 // 60} min)"
    return f"{seconds:.1f} s ({whole // 60} min {whole % 60} s)"


def overview_title(profile) -> str:
    """Route name, length and planned time, for the overview's title."""
    sp = as_station_profile(profile)
    t = sp.moving_time_s
    mean = sp.length_m / t if t > 0 else float("nan")
    return (f"{sp.name}: {sp.length_m:.0f} m in {format_duration(t)}, mean speed "
            f"{mean:.1f} m/s, top {sp.speed_mps.max():.1f} m/s")


# -- panels ------------------------------------------------------------------------------------

def plot_speed(profile, constraints: RouteConstraints | None = None, ax=None) -> SpeedArtists:
    """Speed against station, with the ceiling, zone limits and stops drawn behind it.

    Parameters
    ----------
    profile : Profile or StationProfile
    constraints : RouteConstraints, optional
        Zones and stops to draw; without them only the profile's own ceiling is drawn.
    ax : matplotlib Axes, optional

    Returns
    -------
    SpeedArtists
    """
    sp = as_station_profile(profile)
    ax = _new_axes(ax)
    s = sp.station_m
    ceiling = None
    if sp.limit_speed_mps is not None:
        (ceiling,) = ax.plot(s, sp.limit_speed_mps, color=_LIMIT_COLOUR, lw=0.9, zorder=1,
                             label="speed ceiling (curvature, top speed, zones, stops)")
    zones, spans, stops = [], [], []
    if constraints is not None:
        for i, zone in enumerate(constraints.zones):
            spans.append(ax.axvspan(zone.start_m, zone.end_m, color=_ZONE_COLOUR, alpha=0.08,
                                    lw=0, zorder=0))
            (line,) = ax.plot([zone.start_m, zone.end_m], [zone.max_speed_mps] * 2,
                              color=_ZONE_COLOUR, lw=2.0, ls="--", zorder=2,
                              label="zone limit" if i == 0 else None)
            zones.append(line)
        for i, stop in enumerate(constraints.stops):
            stops.append(ax.axvline(stop.station_m, color=_STOP_COLOUR, lw=1.0, ls=":",
                                    zorder=2, label="stop" if i == 0 else None))
    (speed,) = ax.plot(s, sp.speed_mps, color="tab:blue", lw=1.6, zorder=3,
                       label="planned speed")
    ax.set_xlabel(STATION_LABEL)
    ax.set_ylabel(SPEED_LABEL)
    top = max(float(sp.speed_mps.max()), 1e-3)
    ax.set_ylim(0.0, 1.15 * top)
    ax.set_xlim(s[0], s[-1])
    ax.grid(True, alpha=0.3)
    ax.legend(loc="lower right", bbox_to_anchor=(1.0, 1.0), ncol=4, fontsize="small",
              frameon=False, borderaxespad=0.2)
    return SpeedArtists(ax=ax, speed=speed, ceiling=ceiling, zones=tuple(zones),
                        zone_spans=tuple(spans), stops=tuple(stops))


def plot_curvature(profile, ax=None) -> LineArtists:
    """Signed curvature (positive turning left) against station."""
    sp = as_station_profile(profile)
    ax = _new_axes(ax)
    (line,) = ax.plot(sp.station_m, sp.curvature_1pm, color="tab:orange", lw=1.0)
    ax.axhline(0.0, color="0.6", lw=0.6, zorder=0)
    ax.set_xlabel(STATION_LABEL)
    ax.set_ylabel(CURVATURE_LABEL)
    ax.set_xlim(sp.station_m[0], sp.station_m[-1])
    ax.grid(True, alpha=0.3)
    return LineArtists(ax=ax, line=line)


def _band(ax, lo: float, hi: float, what: str):
    band = ax.axhspan(lo, hi, color=_BAND_COLOUR, alpha=0.12, zorder=0,
                      label=f"{what} allowed by the limits")
    lines = (ax.axhline(lo, color=_BAND_COLOUR, lw=0.8, ls="--", zorder=1),
             ax.axhline(hi, color=_BAND_COLOUR, lw=0.8, ls="--", zorder=1))
    return band, lines


def plot_accel(profile, limits: Limits | None = None, ax=None) -> LineArtists:
    """Longitudinal acceleration against station, the band ``[-max_decel, max_accel]`` shaded."""
    sp = as_station_profile(profile)
    ax = _new_axes(ax)
    band, lims, note = None, (), None
    if limits is not None:
        band, lims = _band(ax, -limits.max_decel_mps2, limits.max_accel_mps2, "acceleration")
    else:
        note = _note(ax, _NO_SIDECAR)
    (line,) = ax.plot(sp.station_m, _accel(sp), color="tab:blue", lw=1.0, zorder=2,
                      label="acceleration")
    ax.set_xlabel(STATION_LABEL)
    ax.set_ylabel(ACCEL_LABEL)
    ax.set_xlim(sp.station_m[0], sp.station_m[-1])
    ax.grid(True, alpha=0.3)
    return LineArtists(ax=ax, line=line, band=band, limits=lims, note=note)


def plot_jerk(profile, limits: Limits | None = None, ax=None) -> LineArtists:
    """Longitudinal jerk against station, the band ``+-max_jerk`` shaded when a bound is set.

    When the limits also bound lateral jerk, its per-step values are drawn too, with dotted
    lines at ``+-max_lateral_jerk``.
    """
    sp = as_station_profile(profile)
    ax = _new_axes(ax)
    band, lims, note = None, (), None
    if limits is None:
        note = _note(ax, _NO_SIDECAR)
    elif limits.max_jerk_mps3 is None:
        note = _note(ax, "no jerk bound set in the limits")
    else:
        band, lims = _band(ax, -limits.max_jerk_mps3, limits.max_jerk_mps3, "jerk")
    line = None
    if sp.jerk_mps3 is not None:
        (line,) = ax.plot(sp.station_m, sp.jerk_mps3, color="tab:brown", lw=0.9, zorder=2,
                          label="jerk")
    else:
        note = _note(ax, "the profile has no jerk_mps3 column")
    lateral_line, lateral_limits = None, ()
    if limits is not None and limits.max_lateral_jerk_mps3 is not None:
        mid = 0.5 * (sp.station_m[:-1] + sp.station_m[1:])
        (lateral_line,) = ax.plot(mid, sp.step_lateral_jerk_mps3, color="tab:purple", lw=0.8,
                                  zorder=2, label="lateral jerk")
        j = limits.max_lateral_jerk_mps3
        lateral_limits = tuple(ax.axhline(y, color="tab:purple", lw=0.8, ls=":", zorder=1)
                               for y in (-j, j))
        ax.legend(handles=[h for h in (line, lateral_line) if h is not None], loc="upper right",
                  fontsize="small")
    ax.set_xlabel(STATION_LABEL)
    ax.set_ylabel(JERK_LABEL if lateral_line is None else BOTH_JERKS_LABEL)
    ax.set_xlim(sp.station_m[0], sp.station_m[-1])
    ax.grid(True, alpha=0.3)
    return LineArtists(ax=ax, line=line, band=band, limits=lims, note=note,
                       lateral_line=lateral_line, lateral_limits=lateral_limits)


def plot_plan_view(profile, ax=None) -> PlanArtists:
    """The route in plan (x east, y north), coloured by speed, with a colour bar; equal aspect."""
    from matplotlib.collections import LineCollection

    sp = as_station_profile(profile)
    ax = _new_axes(ax, figsize=(6.0, 6.0))
    xy = np.column_stack((sp.x_m, sp.y_m))
    segments = np.stack((xy[:-1], xy[1:]), axis=1)
    step_speed = 0.5 * (sp.speed_mps[:-1] + sp.speed_mps[1:])
    path = LineCollection(segments, cmap="viridis", linewidths=2.5)
    path.set_array(step_speed)
    path.set_clim(0.0, max(float(sp.speed_mps.max()), 1e-3))
    ax.add_collection(path)
    (start,) = ax.plot([sp.x_m[0]], [sp.y_m[0]], marker="o", ms=7, color="k", ls="none",
                       label="start")
    ax.set_aspect("equal", adjustable="datalim")
    ax.autoscale_view()
    colorbar = ax.figure.colorbar(path, ax=ax, shrink=0.85)
    colorbar.set_label(SPEED_LABEL)
    ax.set_xlabel(X_LABEL)
    ax.set_ylabel(Y_LABEL)
    ax.grid(True, alpha=0.3)
    ax.legend(loc="best", fontsize="small")
    return PlanArtists(ax=ax, path=path, colorbar=colorbar, start=start)


# -- overview ----------------------------------------------------------------------------------

def plot_overview(profile, limits: Limits | None = None,
                  constraints: RouteConstraints | None = None, title: str | None = None,
                  figure=None, check: dict | None = None) -> Overview:
    """The overview: the route with its numbered curves first, then speed and utilisation.

    Drawn by :mod:`curvespeed.plots_overview` in the report's visual language: the plan view
    with the curves numbered as in the ``check`` table and their advisory speeds, the list of
    curves beside it, the speed along the route with curve bands and braking/launch zones, and
    the utilisation strip. The g-g diagram is a figure of its own (:func:`gg_bytes`).

    Parameters
    ----------
    profile : Profile or StationProfile
    limits : Limits, optional
        Limits the profile was planned with (the uses); without them the strip says so.
    constraints : RouteConstraints, optional
        Zones and superelevation the profile was planned with.
    title : str, optional
        Default: :func:`overview_title` (route name, length, time, speeds).
    figure : matplotlib Figure, optional
        Draw into this (empty) figure instead of a new one of :data:`OVERVIEW_SIZE_IN`.
    check : dict, optional
        A check result (the check JSON's dictionary) to take curves and uses from; by default
        the profile is checked along its route (:func:`~curvespeed.plots_overview.overview_data`).

    Returns
    -------
    Overview
        ``axes`` and ``artists`` keyed by ``plan``, ``curves``, ``speed``, ``use``.
    """
    from .plots_overview import draw_curve_list, draw_plan, draw_speed, draw_use, overview_data

    sp = as_station_profile(profile)
    data = overview_data(profile, limits, constraints, check)
    if figure is None:
        from matplotlib.figure import Figure

        figure = Figure(figsize=OVERVIEW_SIZE_IN, layout="constrained")
        # keep a strip at the bottom free for the caution line
        figure.get_layout_engine().set(rect=(0.0, 0.025, 1.0, 0.975))
    grid = figure.add_gridspec(3, 2, width_ratios=(3.4, 1.0), height_ratios=(2.4, 1.3, 0.75))
    axes = {"plan": figure.add_subplot(grid[0, 0]), "curves": figure.add_subplot(grid[0, 1]),
            "speed": figure.add_subplot(grid[1, :])}
    axes["use"] = figure.add_subplot(grid[2, :], sharex=axes["speed"])
    artists = {"plan": draw_plan(data, axes["plan"]),
               "curves": draw_curve_list(data, axes["curves"]),
               "speed": draw_speed(data, axes["speed"]), "use": draw_use(data, axes["use"])}
    axes["speed"].tick_params(labelbottom=False)
    text = title if title is not None else overview_title(sp)
    figure.suptitle(text, fontsize="large")
    figure.text(0.005, 0.003, "curvespeed profile: an engineering aid, not a speed "
                "recommendation. Speeds on public roads and advisory signs follow local codes "
                "and licensed engineering practice.", fontsize="x-small", color="0.4",
                ha="left", va="bottom")
    return Overview(figure=figure, axes=axes, artists=artists, title=text, data=data)


def save_overview(profile, path: str | os.PathLike, limits: Limits | None = None,
                  constraints: RouteConstraints | None = None, force: bool = False,
                  title: str | None = None) -> Path:
    """Draw :func:`plot_overview` and write it to ``path`` (``.png``, ``.svg`` or ``.pdf``).

    Written atomically (:class:`~curvespeed.io.atomic.OutputFiles`); an existing file is
    replaced only with ``force``. See :func:`overview_bytes`.

    Raises
    ------
    OutputError
        Unknown extension, or ``path`` may not be written (exists without ``force``, folder
        missing, not a regular file).
    """
    from .io.atomic import OutputFiles

    fmt = figure_format(path)
    outputs = OutputFiles(force, signals=False)
    outputs.add_output(path, "the figure")
    with outputs:
        outputs.write_bytes(path, overview_bytes(profile, fmt, limits, constraints, title))
    return Path(path)


def overview_bytes(profile, fmt: str, limits: Limits | None = None,
                   constraints: RouteConstraints | None = None,
                   title: str | None = None, check: dict | None = None) -> bytes:
    """The overview figure as the bytes of a ``png``, ``svg`` or ``pdf`` file.

    The library call behind ``curvespeed plot`` and ``curvespeed plan --plot``. Output carries
    no time stamp (and SVG ids use a fixed salt), so the same inputs give the same bytes with
    the same matplotlib.
    """
    overview = plot_overview(profile, limits, constraints, title=title, check=check)
    return figure_bytes(overview.figure, fmt)
