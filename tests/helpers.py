"""Shared test helpers: synthetic geometries built from curvature, and shared tolerances.

Synthetic geometries bypass the spline fit so solver tests see exactly the curvature, grade and
spacing they ask for.
"""

from __future__ import annotations

import numpy as np

from curvespeed.geometry import Geometry

#: Relative tolerance for quantities the envelope computes in closed form per step (round-off
#: of a few floating-point operations per step accumulates over at most ~1e4 steps).
CLOSED_FORM_RTOL = 1e-9


def geometry_from_curvature(kappa, ds: float = 1.0, closed: bool = False, grade=None,
                            name: str = "synthetic") -> Geometry:
    """Geometry whose nodes have exactly curvature ``kappa`` (1/m) at spacing ``ds`` (m).

    Heading is the trapezoidal integral of curvature; positions the integral of heading.
    """
    kappa = np.asarray(kappa, dtype=float)
    n = kappa.size
    s = np.arange(n) * ds
    heading = np.concatenate(([0.0], np.cumsum(0.5 * (kappa[1:] + kappa[:-1]) * ds)))
    mid = 0.5 * (heading[1:] + heading[:-1])
    x = np.concatenate(([0.0], np.cumsum(np.cos(mid) * ds)))
    y = np.concatenate(([0.0], np.cumsum(np.sin(mid) * ds)))
    z = None
    if grade is not None:
        grade = np.broadcast_to(np.asarray(grade, dtype=float), (n,)).copy()
        z = np.concatenate(([0.0], np.cumsum(0.5 * (grade[1:] + grade[:-1]) * ds)))
    return Geometry(station_m=s, x_m=x, y_m=y, heading_rad=heading, curvature_1pm=kappa,
                    z_m=z, grade=grade, closed=closed, spacing_m=ds, name=name)


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
