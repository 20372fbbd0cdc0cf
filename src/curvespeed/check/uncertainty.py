"""The curvature's uncertainty in ``check``: each curve's radius as an interval, and the road-design
figures (ball-bank advisory speed, AASHTO minimum radius) at both of its ends.

A fitted route carries, per station, the curvature estimate ``kappa``, its standard deviation
``sd`` from the position noise, and an upper bound on ``|kappa|`` that covers the true road
(what the fit's smoothing spreads out near a change of curvature, plus
:data:`~curvespeed.geometry.curvature.GAMMA` standard deviations); see
:mod:`curvespeed.geometry.curvature`. For one curve (its stations ``nodes``):

* the **estimate** of its smallest radius is ``1 / max |kappa|``;
* the **low end** (smallest plausible radius) is ``1 / max bound``: the bound covers the true
  road, so the true curve is no tighter;
* the **high end** (largest plausible radius) is ``1 / max(|kappa| - GAMMA sd)``, the
  noise's one-sided confidence limit on the largest curvature, never below zero curvature; at
  zero it is infinite ("unbounded", as a straight's radius is). It covers the noise, not the
  smoothing: where the fit overshoots a peak of curvature (ringing next to a sudden change, a
  few per cent) the true radius can lie a little above it. Only the low end is a bound.

Because the bound is never below ``|kappa|`` (it is clipped to it here, to hold whatever made the
geometry) and ``sd >= 0``, ``low <= estimate <= high`` always; on exact geometry (no bound, no
standard deviation) the three coincide. The ball-bank advisory speed rises with the radius and
the AASHTO verdict passes from some radius on, so evaluated at the three radii (with the
superelevation of the curve's tightest point) they are ordered the same way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..design import AdvisorySpeed, DesignCriterion, ball_bank_advisory
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


def estimate_geometry(geometry: Geometry) -> Geometry:
    """``geometry`` without its bound and spread: the limits then apply to the estimate
    ``|kappa|`` and its own curvature rates."""
    if geometry.curvature_bound_1pm is None and geometry.curvature_spread_m is None:
        return geometry
    return replace(geometry, curvature_bound_1pm=None, curvature_spread_m=None,
                   curvature_rate_margin_1pm2=None)


@dataclass(frozen=True)
class RadiusInterval:
    """A curve's smallest radius: estimate and plausible range, metres.

    Attributes
    ----------
    low_m : float
        Smallest plausible radius, ``1 / max bound`` over the curve.
    estimate_m : float
        ``1 / max |kappa|`` over the curve.
    high_m : float
        Largest plausible radius, ``1 / max(|kappa| - GAMMA sd)``; ``inf`` when the noise
        allows a straight (unbounded).
    """

    low_m: float
    estimate_m: float
    high_m: float

    def advisories(self, e: float, gravity_mps2: float
                   ) -> tuple[AdvisorySpeed, AdvisorySpeed, AdvisorySpeed]:
        """Ball-bank advisory speed at the low end, the estimate and the high end."""
        return tuple(ball_bank_advisory(r, e, gravity_mps2)
                     for r in (self.low_m, self.estimate_m, self.high_m))

    def meets(self, design: DesignCriterion | None
              ) -> tuple[bool | None, bool | None, bool | None]:
        """AASHTO minimum-radius verdict at the low end, the estimate and the high end."""
        if design is None:
            return None, None, None
        return tuple(design.passes(r) for r in (self.low_m, self.estimate_m, self.high_m))


def radius_interval(ends: CurvatureEnds, nodes: np.ndarray) -> RadiusInterval:
    """The :class:`RadiusInterval` of the curve on stations ``nodes``."""
    def radius(kappa: np.ndarray) -> float:
        top = float(np.max(kappa[nodes]))
        return math.inf if top <= 0.0 else 1.0 / top

    return RadiusInterval(low_m=radius(ends.high), estimate_m=radius(ends.estimate),
                          high_m=radius(ends.low))
