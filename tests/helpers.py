"""Shared test helpers: synthetic geometries built from curvature, and shared tolerances.

Synthetic geometries bypass the spline fit so solver tests see exactly the curvature, grade and
spacing they ask for.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from curvespeed.geometry import Geometry, geometry_from_curvature  # noqa: F401 (re-exported)

#: Relative tolerance for quantities the envelope computes in closed form per step (round-off
#: of a few floating-point operations per step accumulates over at most ~1e4 steps).
CLOSED_FORM_RTOL = 1e-9


def circle_geometry(radius_m: float, ds: float = 1.0) -> Geometry:
    """Closed circle (counter-clockwise) of the given radius; spacing divides the circumference."""
    length = 2 * np.pi * radius_m
    n = int(np.ceil(length / ds))
    return geometry_from_curvature(np.full(n + 1, 1.0 / radius_m), ds=length / n, closed=True,
                                   name="circle")


def straight_curve_straight(approach_m: float, radius_m: float, arc_m: float, exit_m: float,
                            ds: float = 1.0) -> Geometry:
    """Open route: straight, circular arc (curvature step, no transition), straight."""
    k = np.concatenate((np.zeros(int(round(approach_m / ds))),
                        np.full(int(round(arc_m / ds)), 1.0 / radius_m),
                        np.zeros(int(round(exit_m / ds)) + 1)))
    return geometry_from_curvature(k, ds=ds)


def with_radius_interval(geometry: Geometry, low_radius_m: float, high_radius_m: float,
                         ) -> Geometry:
    """``geometry`` given a curvature bound and standard deviation wherever it curves, so that
    each curve's smallest radius has the plausible range ``low_radius_m``..``high_radius_m``
    (``inf``: unbounded) around the estimate ``1 / max |curvature|``.

    Where ``|curvature| > 0``: bound ``1 / low_radius_m`` and standard deviation
    ``(|curvature| - 1 / high_radius_m) / 3`` (check uses ``|curvature| - 3 sd`` for the
    largest radius); on straights the bound is 0 and the standard deviation 0.
    """
    from curvespeed.geometry.curvature import GAMMA

    kappa = np.abs(geometry.curvature_1pm)
    curved = kappa > 0.0
    bound = np.where(curved, 1.0 / low_radius_m, 0.0)
    sd = np.where(curved, (kappa - 1.0 / high_radius_m) / GAMMA, 0.0)
    if (bound < kappa).any() or (sd < 0.0).any():
        raise ValueError("the range must contain every curved station's radius")
    return dataclasses.replace(geometry, curvature_bound_1pm=bound, curvature_sd_1pm=sd)


def hook_profile_csv(folder):
    """An invented hook (straight, a 30 m left curve, a 45 m right curve), planned from rest
    with the default limits and written as ``folder/hook.csv``; returns the path."""
    from curvespeed.io.profile_csv import write_profile_csv
    from curvespeed.limits import Limits, RouteConstraints
    from curvespeed.planner import plan_profile

    s = np.arange(241.0)
    kappa = np.interp(s, [0, 50, 80, 120, 150, 170, 200, 240],
                      [0, 0, 1 / 30, 1 / 30, 0, 0, -1 / 45, -1 / 45])
    profile = plan_profile(geometry_from_curvature(kappa, name="Invented hook"), Limits(),
                           RouteConstraints())
    path = folder / "hook.csv"
    write_profile_csv(profile, path)
    return path
