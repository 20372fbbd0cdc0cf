"""Shared test helpers: synthetic geometries built from curvature, and shared tolerances.

Synthetic geometries bypass the spline fit so solver tests see exactly the curvature, grade and
spacing they ask for.
"""

from __future__ import annotations

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
