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

from dataclasses import dataclass, replace

import numpy as np

from ..design import AdvisorySpeed, DesignCriterion, ball_bank_advisory
from ..geometry import Geometry
from .radii import CurvatureEnds, curvature_ends, smallest_radii  # noqa: F401 (re-exported)


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
    low, estimate, high = smallest_radii(ends, nodes)
    return RadiusInterval(low_m=low, estimate_m=estimate, high_m=high)
