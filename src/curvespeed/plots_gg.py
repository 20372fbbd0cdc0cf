"""The g-g diagram of a profile: accelerations along and across the path, with the friction
ellipse and the comfort limits of a flat road (see :mod:`curvespeed.plots`)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .export import as_station_profile
from .limits import Limits
from .plots_common import (_BAND_COLOUR, _NO_SIDECAR, _STOP_COLOUR, ACCEL_LABEL, GG_SIZE_IN,
                           LATERAL_LABEL, _accel, _ellipse, _lateral, _new_axes, _note,
                           figure_bytes)


@dataclass(frozen=True)
class GGArtists:
    """What :func:`plot_gg` drew: the points, the friction ellipse and the comfort limits."""

    ax: object
    points: object
    friction: object | None
    comfort: object | None
    note: object | None = None
    section_friction: object | None = None


def plot_gg(profile, limits: Limits | None = None, ax=None,
            friction_sections: tuple = ()) -> GGArtists:
    """g-g diagram: longitudinal (vertical) against lateral (horizontal) acceleration.

    The friction ellipse has semi-axes ``mu_lat g`` across and ``mu g`` along the path; the
    comfort limit is ``max_lateral_accel`` across, ``max_accel`` forward and ``max_decel``
    backward. Both are drawn for a flat road (no grade or superelevation), where the limits
    bound the points directly; on grades and banked curves the planner uses the loads there.
    With ``friction_sections`` (:class:`~curvespeed.friction.FrictionSection`) the lowest
    section's ellipse is drawn too, dotted: points of those stretches lie inside it.
    """
    sp = as_station_profile(profile)
    ax = _new_axes(ax, figsize=(5.0, 5.0))
    friction = comfort = note = section_friction = None
    if limits is not None:
        g = limits.gravity_mps2
        fx, fy = _ellipse(limits.mu_lat * g, limits.mu_long * g, limits.mu_long * g)
        (friction,) = ax.plot(fx, fy, color=_STOP_COLOUR, lw=1.2, zorder=3,
                              label="friction ellipse (flat road)")
        cx, cy = _ellipse(limits.max_lateral_accel_mps2, limits.max_accel_mps2,
                          limits.max_decel_mps2)
        (comfort,) = ax.plot(cx, cy, color=_BAND_COLOUR, lw=1.4, ls="--", zorder=3,
                             label="comfort limits")
        if friction_sections:
            along, across = min((sec.coefficients(limits) for sec in friction_sections),
                                key=lambda pair: pair[0])
            sx, sy = _ellipse(across * g, along * g, along * g)
            (section_friction,) = ax.plot(sx, sy, color=_STOP_COLOUR, lw=1.0, ls=":", zorder=3,
                                          label=f"friction ellipse, lowest section mu "
                                                f"{along:g} (flat road)")
        data = max(float(np.abs(_lateral(sp)).max()), float(np.abs(_accel(sp)).max()))
        reach = 1.1 * max(limits.mu_lat * g, limits.mu_long * g, data)
        ax.set_xlim(-reach, reach)
        ax.set_ylim(-reach, reach)
    else:
        note = _note(ax, _NO_SIDECAR)
    (points,) = ax.plot(_lateral(sp), _accel(sp), ls="none", marker=".", ms=2.5, zorder=2,
                        color="tab:blue", alpha=0.6, label="profile (one point per station)")
    ax.axhline(0.0, color="0.6", lw=0.6, zorder=0)
    ax.axvline(0.0, color="0.6", lw=0.6, zorder=0)
    ax.set_aspect("equal", adjustable="datalim" if limits is None else "box")
    ax.set_xlabel(LATERAL_LABEL)
    ax.set_ylabel(ACCEL_LABEL)
    ax.grid(True, alpha=0.3)
    ax.legend(loc="upper right", fontsize="x-small", framealpha=0.85)
    return GGArtists(ax=ax, points=points, friction=friction, comfort=comfort, note=note,
                     section_friction=section_friction)


def gg_figure(profile, limits: Limits | None = None, friction_sections: tuple = ()):
    """The g-g diagram (:func:`plot_gg`) as a figure of its own, with the route's name."""
    from matplotlib.figure import Figure

    sp = as_station_profile(profile)
    figure = Figure(figsize=GG_SIZE_IN, layout="constrained")
    artists = plot_gg(sp, limits, ax=figure.add_subplot(), friction_sections=friction_sections)
    figure.suptitle(f"{sp.name}: accelerations along and across the path", fontsize="medium")
    return artists


def gg_bytes(profile, fmt: str, limits: Limits | None = None,
             friction_sections: tuple = ()) -> bytes:
    """The g-g figure (:func:`gg_figure`) as the bytes of a ``png``, ``svg`` or ``pdf`` file."""
    return figure_bytes(gg_figure(profile, limits, friction_sections).ax.figure, fmt)
