"""How ``check`` finds curves (:class:`CurveSettings`) and its defaults: light, so that a plan's
summary finds its curves (:func:`.curves.find_curves`) without the audit's modules."""

from __future__ import annotations

from dataclasses import dataclass

#: Curve detection defaults (see :func:`.curves.find_curves`).
CURVE_RADIUS_M = 1000.0
JOIN_GAP_M = 20.0
MIN_CURVE_LENGTH_M = 5.0
MIN_CURVE_TURN_DEG = 2.0

#: Top speed used for the curves-only ceiling behind the brake-reach check, m/s: far above any
#: road vehicle, so on straights only the curves ahead bound the reach.
NO_CAP_MPS = 1000.0


@dataclass(frozen=True)
class CurveSettings:
    """How curves are found (see :func:`.curves.find_curves`).

    Attributes
    ----------
    radius_m : float
        A station belongs to a curve where its radius is below this, metres.
    join_gap_m : float
        Curves turning the same way separated by at most this are one curve, metres; violations
        of one kind this close are one stretch.
    min_length_m : float
        Curves shorter than this are dropped as blips, metres.
    min_turn_deg : float
        Curves turning less than this in all are dropped as blips, degrees.
    """

    radius_m: float = CURVE_RADIUS_M
    join_gap_m: float = JOIN_GAP_M
    min_length_m: float = MIN_CURVE_LENGTH_M
    min_turn_deg: float = MIN_CURVE_TURN_DEG

    def to_dict(self) -> dict:
        return {"curve_radius_m": self.radius_m, "join_gap_m": self.join_gap_m,
                "min_curve_length_m": self.min_length_m, "min_curve_turn_deg": self.min_turn_deg}
