"""Figures of a closed-loop replay (:mod:`curvespeed.dynamics.simulate`), in the style of
:mod:`curvespeed.plots`: each function takes the :class:`~curvespeed.dynamics.simulate.ReplayResult`
and an optional matplotlib ``ax``, and returns the artists it made.

* :func:`plot_lateral_error` - lateral error against station, with the gate if one was given;
* :func:`plot_replay_speed` - driven and planned speed against station;
* :func:`plot_steer` - steering angle and command with the angle limit;
* :func:`plot_tyre_use` - front and rear tyre use with the saturation line;
* :func:`replay_figure_bytes` - all four in one figure, as PNG, SVG or PDF bytes.

matplotlib is imported inside the functions (through :class:`matplotlib.figure.Figure`, never
pyplot).
"""

from __future__ import annotations

from dataclasses import dataclass

from .dynamics.simulate import ReplayResult
from .dynamics.summary import SATURATED_USE, ReplaySummary
from .plots import STATION_LABEL, _new_axes, figure_bytes


@dataclass(frozen=True)
class ReplayArtists:
    """The axes and the lines a replay panel drew."""

    ax: object
    lines: tuple


def plot_lateral_error(result: ReplayResult, gate_m: float | None = None,
                       ax=None) -> ReplayArtists:
    """Lateral error (m, left +) against station; the gate ``+-gate_m`` when given."""
    ax = _new_axes(ax)
    s = result["station_m"]
    (line,) = ax.plot(s, result["lateral_error_m"], color="tab:blue", lw=1.0,
                      label="lateral error")
    lines = [line]
    if gate_m is not None:
        lines += _both_signs(ax, gate_m, "--", "--max-lateral-error")
    _finish(ax, "lateral error (m)", "upper right")
    return ReplayArtists(ax=ax, lines=tuple(lines))


def plot_replay_speed(result: ReplayResult, ax=None) -> ReplayArtists:
    """Driven and planned speed (m/s) against the vehicle's station."""
    ax = _new_axes(ax)
    s = result["station_m"]
    (planned,) = ax.plot(s, result["reference_speed_mps"], color="0.45", lw=1.0,
                         label="planned (at that time)")
    (driven,) = ax.plot(s, result["speed_mps"], color="tab:blue", lw=1.2, label="driven")
    _finish(ax, "speed (m/s)", "lower right")
    return ReplayArtists(ax=ax, lines=(planned, driven))


def plot_steer(result: ReplayResult, ax=None) -> ReplayArtists:
    """Steering angle and command (rad) against station, with the angle limit."""
    ax = _new_axes(ax)
    s = result["station_m"]
    (command,) = ax.plot(s, result["steer_command_rad"], color="0.6", lw=0.8, label="command")
    (angle,) = ax.plot(s, result["steer_rad"], color="tab:green", lw=1.1, label="angle")
    limit = result.vehicle.max_steer_rad
    lines = [command, angle] + _both_signs(ax, limit, ":", "angle limit")
    _finish(ax, "road-wheel steering (rad)", "upper right")
    return ReplayArtists(ax=ax, lines=tuple(lines))


def plot_tyre_use(result: ReplayResult, ax=None) -> ReplayArtists:
    """Front and rear tyre use (force over what friction allows) against station."""
    ax = _new_axes(ax)
    s = result["station_m"]
    (front,) = ax.plot(s, result["front_tyre_use"], color="tab:orange", lw=1.0, label="front")
    (rear,) = ax.plot(s, result["rear_tyre_use"], color="tab:purple", lw=1.0, label="rear")
    limit = ax.axhline(SATURATED_USE, color="tab:red", lw=0.9, ls="--", label="saturated")
    ax.set_ylim(0.0, 1.1)
    _finish(ax, "tyre use (1 = friction limit)", "upper right")
    return ReplayArtists(ax=ax, lines=(front, rear, limit))


def plot_replay(result: ReplayResult, summary: ReplaySummary, gate_m: float | None = None):
    """All four panels in one figure with a title; returns the figure."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(12.0, 9.0), layout="constrained")
    axes = fig.subplots(4, 1, sharex=True)
    plot_lateral_error(result, gate_m, axes[0])
    plot_replay_speed(result, axes[1])
    plot_steer(result, axes[2])
    plot_tyre_use(result, axes[3])
    for ax in axes[:-1]:
        ax.set_xlabel("")
    fig.suptitle(f"{result.name}: {result.settings.tracker.value} tracker, max lateral error "
                 f"{summary.max_lateral_error_m:.3f} m, peak tyre use "
                 f"{max(summary.peak_front_tyre_use, summary.peak_rear_tyre_use):.2f} "
                 f"({summary.status})")
    return fig


def replay_figure_bytes(result: ReplayResult, summary: ReplaySummary, fmt: str,
                        gate_m: float | None = None) -> bytes:
    """:func:`plot_replay` as the bytes of a ``png``, ``svg`` or ``pdf`` file (no time stamps)."""
    return figure_bytes(plot_replay(result, summary, gate_m), fmt)


def _both_signs(ax, value: float, style: str, label: str) -> list:
    """Red horizontal lines at +-``value`` (one legend entry)."""
    return [ax.axhline(sign * value, color="tab:red", lw=0.9, ls=style,
                       label=label if sign > 0 else None) for sign in (1.0, -1.0)]


def _finish(ax, ylabel: str, legend_loc: str) -> None:
    """Station axis, the quantity's label, a light grid and a frameless legend."""
    ax.set_xlabel(STATION_LABEL)
    ax.set_ylabel(ylabel)
    ax.grid(True, alpha=0.3)
    ax.legend(loc=legend_loc, fontsize="small", frameon=False)
