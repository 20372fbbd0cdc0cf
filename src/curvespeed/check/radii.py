"""A curve's smallest radius and its plausible range, from a fitted route's curvature, its
standard deviation and its bound (:mod:`curvespeed.check.uncertainty` states the definitions).

Kept apart from the audit so that ``plan``'s summary, which prints each limiting curve's radius
range, loads none of the check's judging or the road-design tables.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..geometry import Geometry
from ..geometry.curvature import GAMMA


@dataclass(frozen=True)
class CurvatureEnds:
    """``|curvature|`` at every station at the low end, estimate and high end, 1/m.

    Attributes
    ----------
    low : ndarray
        ``max(|kappa| - GAMMA * sd, 0)``: the smallest ``|curvature|`` the noise allows.
    estimate : ndarray
        ``|kappa|``.
    high : ndarray
        The bound (never below ``|kappa|``): the largest ``|curvature|`` the true road can have.
    """

    low: np.ndarray
    estimate: np.ndarray
    high: np.ndarray

    @property
    def exact(self) -> bool:
        """True when the interval has zero width everywhere (exact design geometry)."""
        return bool(np.array_equal(self.low, self.high))


def curvature_ends(geometry: Geometry) -> CurvatureEnds:
    """The :class:`CurvatureEnds` of ``geometry`` (zero width where it has no bound or sd)."""
    estimate = np.abs(geometry.curvature_1pm)
    high = np.maximum(geometry.planning_curvature_1pm, estimate)
    sd = geometry.curvature_sd_1pm
    low = estimate if sd is None else np.maximum(estimate - GAMMA * sd, 0.0)
    return CurvatureEnds(low=low, estimate=estimate, high=high)


def smallest_radii(ends: CurvatureEnds, nodes: np.ndarray) -> tuple[float, float, float]:
    """The smallest radius of the curve on stations ``nodes``, metres: ``(low end, estimate,
    high end)`` (``inf`` where the curvature may be zero)."""

    def radius(kappa: np.ndarray) -> float:
        top = float(np.max(kappa[nodes]))
        return math.inf if top <= 0.0 else 1.0 / top

    return radius(ends.high), radius(ends.estimate), radius(ends.low)
