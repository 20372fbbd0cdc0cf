"""The overview figure: the route and its numbered curves first, then speed and utilisation.

The same visual language as the HTML report (:mod:`curvespeed.report`), from the same
:class:`~curvespeed.report.ReportData`:

* :func:`draw_plan` - the route in plan, to scale, its curves numbered as in the ``check`` table
  with the ball-bank advisory speed beside each number; failing curves dashed;
* :func:`draw_curve_list` - the curves beside the plan: number, advisory speed, result;
* :func:`draw_speed` - speed along the route with the speed ceiling, numbered curve bands, and
  braking (hatched) and launch zones along the foot of the panel;
* :func:`draw_use` - the utilisation strip: grip and comfort use in % with the 100 % line.

:func:`overview_data` gathers what they draw: the profile checked along its route with
:func:`~curvespeed.check.check_speeds` (the curves, their numbers and advisory speeds, the uses),
or a check result given as the check JSON's dictionary. Colours from
:mod:`curvespeed.report.palette` (colour-blind safe, and every pairing also differs in line
style). matplotlib is imported inside the functions; each takes an ``ax`` and returns what it
drew.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .report.model import ReportData, report_data, report_stops
from .report.palette import BAND_ALPHA, LIGHT_GREY, ROLES, ZONE_ALPHA, curve_colour

STATION_LABEL = "station (m)"
NO_LIMITS = ("limits not known (no sidecar): utilisation not drawn; curves and advisory speeds "
             "do not depend on them")


@dataclass(frozen=True)
class RouteArtists:
    """What :func:`draw_plan` drew: the route, one line and one numbered label per curve."""

    ax: object
    route: object
    curves: tuple
    labels: tuple
    start: object
    stops: tuple = ()


@dataclass(frozen=True)
class SpeedBandArtists:
    """What :func:`draw_speed` drew."""

    ax: object
    speed: object
    ceiling: object
    bands: tuple
    braking: tuple
    launch: tuple
    stops: tuple = ()


@dataclass(frozen=True)
class UseArtists:
    """What :func:`draw_use` drew (lines None when the limits are not known)."""

    ax: object
    grip: object | None
    comfort: object | None
    limit: object | None
    note: object | None = None


def _geometry_of(sp):
    """A Geometry from a profile's own columns (stations, plan, heading, curvature)."""
    from .geometry import Geometry

    spacing = float(np.median(np.diff(sp.station_m))) if sp.station_m.size > 1 else 1.0
    bound = sp.curvature_bound_1pm
    if bound is not None:
        # printed to 1e-9 1/m like the curvature: never below it after rounding
        bound = np.maximum(bound, np.abs(sp.curvature_1pm))
    return Geometry(station_m=sp.station_m, x_m=sp.x_m, y_m=sp.y_m, heading_rad=sp.heading_rad,
                    curvature_1pm=sp.curvature_1pm, z_m=sp.z_m, grade=sp.grade, closed=False,
                    spacing_m=spacing, source=sp.source, name=sp.name,
                    curvature_bound_1pm=bound)


def overview_data(profile, limits=None, constraints=None, check: dict | None = None) -> ReportData:
    """What the overview draws, for a Profile or StationProfile.

    ``check`` (the check JSON's dictionary) gives the curves and uses; without it the profile
    is checked along its route here: a planned Profile on its own geometry, a StationProfile on
    its own columns; both judged on the curvature's bound where the profile has one (a profile
    CSV's ``curvature_bound_1pm``), as ``check`` does. Without ``limits`` the curves are found and numbered all the same
    (they depend on the route alone) and the uses are left out.
    """
    from .check import SpeedKind, check_speeds, checked_constraints
    from .export import as_station_profile
    from .io.meta_json import json_safe
    from .limits import Limits, RouteConstraints

    sp = as_station_profile(profile)
    uses_known = check is not None or limits is not None
    if check is None:
        geometry = getattr(profile, "geometry", None) or _geometry_of(sp)
        used = checked_constraints(constraints or RouteConstraints(), warn=False)
        result = check_speeds(geometry, limits or Limits(), used, sp.speed_mps,
                              kind=SpeedKind.TRACE, speed_source=sp.source)
        check = json_safe(result.to_dict())
        x, y = geometry.x_m, geometry.y_m
    else:
        s = np.asarray(check["per_station"]["station_m"], dtype=float)
        x, y = np.interp(s, sp.station_m, sp.x_m), np.interp(s, sp.station_m, sp.y_m)
    data = report_data(check, x, y, doing="planned", provenance=())
    if constraints is not None and constraints.stops:
        from dataclasses import replace

        data = replace(data, stops=report_stops(json_safe(constraints.to_dict())))
    if not uses_known:
        from dataclasses import replace

        data = replace(data, grip_use=None, comfort_use=None, notes=(NO_LIMITS,))
    return data


def _curve_pieces(c, s0: float, s1: float):
    return [(c.start_m, c.end_m)] if c.end_m >= c.start_m else [(c.start_m, s1), (s0, c.end_m)]


def draw_plan(data: ReportData, ax) -> RouteArtists:
    """The route in plan with numbered curves and advisory speeds; equal aspect."""
    from .report.svg import stations_between

    (route,) = ax.plot(data.x_m, data.y_m, color=LIGHT_GREY, lw=5, solid_capstyle="round",
                       zorder=1)
    curves, labels, placed = [], [], []
    span = max(float(np.ptp(data.x_m)), float(np.ptp(data.y_m)), 1.0)
    for c in data.curves:
        nodes = stations_between(data.station_m, c.start_m, c.end_m)
        colour = curve_colour(c.verdict) if c.verdict != "pass" else ROLES["curve"]
        (line,) = ax.plot(data.x_m[nodes], data.y_m[nodes], color=colour, lw=3.5,
                          ls="--" if c.verdict != "pass" else "-", zorder=2)
        curves.append(line)
        k = int(np.clip(np.searchsorted(data.station_m, c.tightest_station_m), 1,
                        data.station_m.size - 2))
        hx = data.x_m[k + 1] - data.x_m[k - 1]
        hy = data.y_m[k + 1] - data.y_m[k - 1]
        norm = float(np.hypot(hx, hy)) or 1.0
        side = -1.0 if c.direction == "left" else 1.0     # outside of the curve
        at = _clear_spot((data.x_m[k], data.y_m[k]), (side * hy / norm, -side * hx / norm),
                         span, placed)
        advisory = "" if c.advisory_kmh is None else f"  {c.advisory_kmh} km/h"
        labels.append(ax.annotate(
            f"{c.number}{advisory}", xy=(data.x_m[k], data.y_m[k]), xytext=at,
            fontsize="small", fontweight="bold", ha="center", va="center", zorder=4,
            bbox={"boxstyle": "round,pad=0.25", "fc": "white", "ec": curve_colour(c.verdict),
                  "lw": 1.2},
            arrowprops={"arrowstyle": "-", "color": "0.5", "lw": 0.6}))
    (start,) = ax.plot([data.x_m[0]], [data.y_m[0]], "o", color=ROLES["start"], ms=6, zorder=3)
    ax.annotate("start", (data.x_m[0], data.y_m[0]), xytext=(6, 6),
                textcoords="offset points", fontsize="small")
    if not data.closed:
        ax.plot([data.x_m[-1]], [data.y_m[-1]], "s", color=ROLES["start"], ms=6, zorder=3)
        ax.annotate("end", (data.x_m[-1], data.y_m[-1]), xytext=(6, -10),
                    textcoords="offset points", fontsize="small")
    stops = []
    for stop in data.stops:
        at = (float(np.interp(stop.station_m, data.station_m, data.x_m)),
              float(np.interp(stop.station_m, data.station_m, data.y_m)))
        (mark,) = ax.plot([at[0]], [at[1]], "s", mfc="white", mec=ROLES["start"], ms=5,
                          zorder=3)
        stops.append((mark, ax.annotate(stop.name or "stop", at, xytext=(5, -9),
                                        textcoords="offset points", fontsize="x-small")))
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("x (m)")
    ax.set_ylabel("y (m)")
    ax.grid(True, alpha=0.25)
    return RouteArtists(ax=ax, route=route, curves=tuple(curves), labels=tuple(labels),
                        start=start, stops=tuple(stops))


def _clear_spot(point, outward, span: float, placed: list) -> tuple[float, float]:
    """Where a curve's label goes: outside the curve, moved out until clear of earlier ones."""
    for reach in (0.035, 0.07, 0.105, 0.14, 0.175):
        at = (point[0] + outward[0] * reach * span, point[1] + outward[1] * reach * span)
        if all(abs(at[0] - a) > 0.09 * span or abs(at[1] - b) > 0.03 * span for a, b in placed):
            break
    placed.append(at)
    return at


def draw_curve_list(data: ReportData, ax, rows: int = 28):
    """The curves beside the plan: number, advisory speed (km/h), result; worst first if many."""
    ax.set_axis_off()
    curves = list(data.curves)
    if len(curves) > rows:
        curves = sorted(curves, key=lambda c: (c.verdict == "pass", -c.grip_use))[:rows]
        curves.sort(key=lambda c: c.number)
    verdicts = {"pass": "pass", "fail": "FAIL", "fails_on_bound": "FAIL*"}
    lines = [f"{'#':>3} {'advisory':>9}  result"]
    lines += [f"{c.number:>3} {'-' if c.advisory_kmh is None else c.advisory_kmh:>4} km/h  "
              f"{verdicts.get(c.verdict, c.verdict)}" for c in curves]
    if len(data.curves) > rows:
        lines.append(f"({len(data.curves) - rows} more in the check table)")
    if not data.curves:
        lines.append("no curves")
    if any(c.verdict == "fails_on_bound" for c in curves):
        lines.append("* within the curvature's uncertainty")
    return ax.text(0.0, 1.0, "\n".join(lines), transform=ax.transAxes, va="top", ha="left",
                   family="monospace", fontsize="small")


def draw_speed(data: ReportData, ax) -> SpeedBandArtists:
    """Speed along the route: ceiling, numbered curve bands, braking and launch zones."""
    s = data.station_m
    top = max(float(np.max(data.speed_mps)) * 1.18, 1.0)
    bands = []
    for c in data.curves:
        colour = curve_colour(c.verdict) if c.verdict != "pass" else ROLES["curve"]
        for a, b in _curve_pieces(c, s[0], s[-1]):
            bands.append(ax.axvspan(a, b, color=colour, alpha=BAND_ALPHA, lw=0, zorder=0))
        ax.text(c.tightest_station_m, 1.01, str(c.number), transform=ax.get_xaxis_transform(),
                ha="center", va="bottom", fontsize="x-small")
    braking = tuple(ax.axvspan(a, b, ymin=0.0, ymax=0.07, facecolor="none",
                               edgecolor=ROLES["braking"], hatch="////", lw=0, zorder=1)
                    for a, b in data.zones(-1))
    launch = tuple(ax.axvspan(a, b, ymin=0.0, ymax=0.07, color=ROLES["launch"],
                              alpha=2 * ZONE_ALPHA, lw=0, zorder=1) for a, b in data.zones(1))
    ceiling_values = np.where(np.isfinite(data.limit_speed_mps), data.limit_speed_mps, np.nan)
    (ceiling,) = ax.plot(s, ceiling_values, color=ROLES["ceiling"], lw=1.0, ls="--", zorder=2,
                         label="speed ceiling")
    (speed,) = ax.plot(s, data.speed_mps, color=ROLES["speed"], lw=1.8, zorder=3, label="speed")
    from matplotlib.patches import Patch

    verdicts = {c.verdict for c in data.curves}
    handles = [speed, ceiling, Patch(color=ROLES["curve"], alpha=BAND_ALPHA, label="curve")]
    handles += [Patch(color=curve_colour(v), alpha=BAND_ALPHA, label=label)
                for v, label in (("fail", "failing curve"),
                                 ("fails_on_bound", "failing within uncertainty")) if v in verdicts]
    handles += [Patch(facecolor="none", edgecolor=ROLES["braking"], hatch="////",
                      label="braking"),
                Patch(color=ROLES["launch"], alpha=2 * ZONE_ALPHA, label="launch")]
    ax.legend(handles=handles, loc="upper right", ncol=len(handles), fontsize="x-small",
              framealpha=0.9)
    stops = tuple(_stop_mark(ax, stop) for stop in data.stops)
    ax.set_ylim(0.0, top)
    ax.set_xlim(s[0], s[-1])
    ax.set_ylabel("speed (m/s)")
    ax.grid(True, axis="y", alpha=0.3)
    return SpeedBandArtists(ax=ax, speed=speed, ceiling=ceiling, bands=tuple(bands),
                            braking=braking, launch=launch, stops=stops)


def _stop_mark(ax, stop):
    """A stop on the speed panel: a dotted line with its name (or "stop") and dwell."""
    line = ax.axvline(stop.station_m, color=ROLES["start"], lw=0.9, ls=":", zorder=2)
    dwell = "" if stop.dwell_s is None else f" ({stop.dwell_s:g} s)"
    text = ax.text(stop.station_m, 0.45, f"{stop.name or 'stop'}{dwell}",
                   transform=ax.get_xaxis_transform(), rotation=90, ha="center",
                   va="center", fontsize="x-small", zorder=4,
                   bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                         "alpha": 0.85})
    return line, text


def draw_use(data: ReportData, ax) -> UseArtists:
    """Grip and comfort use along the route, per cent, with the 100 % line."""
    s = data.station_m
    ax.set_xlim(s[0], s[-1])
    ax.set_xlabel(STATION_LABEL)
    ax.set_ylabel("use (%)")
    if data.grip_use is None or data.comfort_use is None:
        note = ax.text(0.01, 0.5, NO_LIMITS, transform=ax.transAxes, va="center",
                       fontsize="small", color="0.35")
        ax.set_yticks([])
        return UseArtists(ax=ax, grip=None, comfort=None, limit=None, note=note)
    for c in data.curves:
        for a, b in _curve_pieces(c, s[0], s[-1]):
            ax.axvspan(a, b, color=ROLES["curve"], alpha=0.5 * BAND_ALPHA, lw=0, zorder=0)
    limit = ax.axhline(100.0, color=ROLES["limit"], lw=0.8, ls=":", zorder=1)
    (grip,) = ax.plot(s, 100 * data.grip_use, color=ROLES["grip"], lw=1.3, zorder=3,
                      label="grip use (friction ellipse)")
    (comfort,) = ax.plot(s, 100 * data.comfort_use, color=ROLES["comfort"], lw=1.3, ls="--",
                         zorder=2, label="comfort use")
    peak = float(np.nanmax(np.concatenate((100 * data.grip_use, 100 * data.comfort_use))))
    ax.set_ylim(0.0, max(110.0, 1.05 * peak))
    ax.legend(loc="lower right", ncol=2, fontsize="x-small", framealpha=0.9)
    ax.grid(True, axis="y", alpha=0.3)
    return UseArtists(ax=ax, grip=grip, comfort=comfort, limit=limit)
