"""The results of ``check``: settings, violations, per-curve figures and the whole report."""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass

import numpy as np

from ..design import AdvisorySpeed, DesignCriterion
from ..geometry import Geometry
from ..limits import Limits, RouteConstraints
# the curve settings live in .settings (light: a plan's summary finds curves without the audit)
from .settings import (CURVE_RADIUS_M, JOIN_GAP_M, MIN_CURVE_LENGTH_M,  # noqa: F401
                       MIN_CURVE_TURN_DEG, NO_CAP_MPS, CurveSettings)
from .uncertainty import curvature_ends


#: A use (demand over limit) above 1 + this is a violation.
USE_TOLERANCE = 1e-3

#: Limits of the verifier reported as violations (``lateral_comfort`` is part of the comfort
#: ellipse and would only repeat it), with a plain name for messages.
CHECKED_LIMITS = {
    "friction_ellipse": "friction ellipse (grip)",
    "comfort_ellipse": "comfort (lateral and along the path)",
    "speed_cap": "top speed / speed zone",
    "power": "power",
    "jerk": "jerk",
    "lateral_jerk": "lateral jerk",
}
#: What sets a speed cap, in words (``SpeedProblem.cap_source``).
CAP_NAMES = {"max_speed": "top speed", "zone": "speed zone",
           "jerk_launch": "leaving rest within the jerk limit", "stop": "stop"}
BRAKE_REACH = "brake_reach"
MIN_RADIUS = "min_radius"
#: Limits whose use depends on the magnitude of curvature (lateral jerk follows the estimate's
#: signed curvature): reported on the curvature estimate as well as judged on its bound.
CURVATURE_LIMITS = ("lateral_comfort", "comfort_ellipse", "friction_ellipse")


class CurveVerdict(enum.Enum):
    """A curve's result (``verdict`` in the reports)."""

    PASS = "pass"                        # within every limit, the curvature's bound included
    FAIL = "fail"                        # over a limit on the curvature estimate itself
    FAILS_ON_BOUND = "fails_on_bound"    # within on the estimate, over on the bound


class SpeedKind(enum.Enum):
    """Where the checked speeds come from, which sets how accelerations are treated."""

    TRACE = "trace"          # a drive or a profile: accelerations from the speeds themselves
    CONSTANT = "constant"    # one speed held everywhere: zero acceleration
    ZONES = "zones"          # the zone speeds (top speed elsewhere) held: zero acceleration


@dataclass(frozen=True)
class Violation:
    """One stretch where a limit is exceeded.

    Attributes
    ----------
    kind : str
        A key of :data:`CHECKED_LIMITS`, or ``"brake_reach"`` or ``"min_radius"``.
    start_m, end_m : float
        Station range, metres (first and last station over the limit).
    station_m : float
        Station of the worst point, metres.
    use : float
        Demand over limit at the worst point (1.25 = 25 % over), judged on the curvature's
        bound. For ``speed_cap`` and ``brake_reach`` a ratio of speeds, for ``min_radius`` the
        minimum radius over the curve's smallest plausible radius, for the ellipses, power and
        jerk a ratio of accelerations (power, jerk).
    speed_mps : float
        Speed checked at the worst point, m/s.
    allowed_speed_mps : float
        At the worst point: the node's speed ceiling (ellipses, power, jerk, caps), the brake
        reach (``brake_reach``), or nan (``min_radius``), m/s.
    message : str
        One line saying what, where and by how much.
    curves : tuple of int
        Numbers of the curves it touches (a brake-reach stretch: the curve it brakes for).
    use_estimate : float
        The largest use over the stretch on the curvature estimate (equal to ``use`` where the
        limit does not depend on curvature, or the geometry is exact).
    on_estimate : bool
        The stretch is over the limit on the estimate too; False: only within the curvature's
        uncertainty.
    """

    kind: str
    start_m: float
    end_m: float
    station_m: float
    use: float
    speed_mps: float
    allowed_speed_mps: float
    message: str
    curves: tuple[int, ...] = ()
    use_estimate: float = math.nan
    on_estimate: bool = True

    def to_dict(self) -> dict:
        return {"kind": self.kind, "start_m": self.start_m, "end_m": self.end_m,
                "station_m": self.station_m, "use": self.use, "speed_mps": self.speed_mps,
                "allowed_speed_mps": self.allowed_speed_mps, "message": self.message,
                "curves": list(self.curves), "use_estimate": self.use_estimate,
                "on_estimate": self.on_estimate}


@dataclass(frozen=True)
class CurveCheck:
    """Results for one curve.

    Single values describe the curvature *estimate*; uses, speed ceilings and the verdict are
    judged on the curvature's *bound*, which covers the true road. ``*_low``/``*_high`` are the
    ends of an interval (see :mod:`curvespeed.check.uncertainty`); on exact geometry they equal
    the estimate.

    Attributes
    ----------
    number : int
        1-based, in station order.
    start_m, end_m, length_m : float
        First and last station of the curve and its length, metres (on a closed route a curve
        across the seam has ``end_m < start_m``).
    direction : str
        "left" or "right" in the direction of travel.
    min_radius_m, tightest_station_m : float
        Smallest radius of the estimate, ``1 / max |kappa|``, and where it is, metres.
    min_radius_low_m, min_radius_high_m : float
        Smallest and largest plausible smallest radius, metres: ``1 / max bound`` and
        ``1 / max(|kappa| - 3 sd)`` (``inf``: unbounded, the noise allows a straight).
    superelevation : float
        Cross-slope at the tightest point, rise over run toward the inside (0.06 = 6 %).
    speed_mps : float
        Speed checked at the tightest point, m/s.
    lateral_accel_mps2, lateral_accel_bound_mps2 : float
        Lateral acceleration felt in the road plane there (net of superelevation), on the
        estimate and on the bound's curvature there, m/s^2.
    side_friction_demand, side_friction_demand_bound : float
        ``f = (v^2/(gR) - e)/(1 + e v^2/(gR))`` there, on the estimate and on the bound.
    friction_margin : float
        Lateral friction coefficient minus ``f`` (estimate; negative: more grip asked than given);
        the lowest coefficient over the curve where it spans friction sections.
    comfort_margin_mps2 : float
        Lateral comfort limit minus the lateral acceleration (estimate), m/s^2.
    friction_use, comfort_use : float
        Peak use of the friction and comfort ellipses over the curve, judged on the bound
        (1 = at the limit).
    friction_use_estimate, comfort_use_estimate : float
        The same on the estimate.
    limit_speed_mps, limit_speed_estimate_mps : float
        Highest speed the limits allow at the tightest point (curve, top speed, zones), on the
        bound and on the estimate, m/s; on a curve spanning friction sections, the lowest over
        the curve.
    approach_speed_mps : float
        Speed checked at the station just before the curve, m/s.
    braking_distance_needed_m : float
        ``(v_approach^2 - v_limit^2) / (2 a)`` with ``a`` the smaller of the deceleration limit
        and mu g (level road, straight-line braking; the lowest mu from the approach station to
        the tightest point); 0 when no braking is needed, metres.
    braking_distance_available_m : float
        From the approach station to the tightest point, metres.
    brake_ok : bool
        No brake-reach violation ends at this curve (the exact check, with grade and the
        friction ellipse; the two distances above are the level-road estimate).
    meets_min_radius, meets_min_radius_low, meets_min_radius_high : bool or None
        Radius at least the AASHTO minimum for the design speed, at the estimate, the low end
        and the high end (None: no design speed given). The low end is the one judged.
    advisory, advisory_low, advisory_high : AdvisorySpeed
        Ball-bank advisory speed (mph and km/h conventions) at the estimate, the low end and the
        high end of the radius.
    violations : tuple of str
        Kinds of the violations that touch this curve.
    violations_on_estimate : tuple of str
        Those of them that hold on the curvature estimate too.
    worst_use : float
        Largest use of any limit on the curve (sort key; > 1 means a failure).
    """

    number: int
    start_m: float
    end_m: float
    length_m: float
    direction: str
    min_radius_m: float
    min_radius_low_m: float
    min_radius_high_m: float
    tightest_station_m: float
    superelevation: float
    speed_mps: float
    lateral_accel_mps2: float
    lateral_accel_bound_mps2: float
    side_friction_demand: float
    side_friction_demand_bound: float
    friction_margin: float
    comfort_margin_mps2: float
    friction_use: float
    comfort_use: float
    friction_use_estimate: float
    comfort_use_estimate: float
    limit_speed_mps: float
    limit_speed_estimate_mps: float
    approach_speed_mps: float
    braking_distance_needed_m: float
    braking_distance_available_m: float
    brake_ok: bool
    meets_min_radius: bool | None
    meets_min_radius_low: bool | None
    meets_min_radius_high: bool | None
    advisory: AdvisorySpeed
    advisory_low: AdvisorySpeed
    advisory_high: AdvisorySpeed
    violations: tuple[str, ...]
    violations_on_estimate: tuple[str, ...]
    worst_use: float

    @property
    def passed(self) -> bool:
        """No violation, the curvature's bound included (a ``fails_on_bound`` curve fails)."""
        return not self.violations

    @property
    def verdict(self) -> CurveVerdict:
        if not self.violations:
            return CurveVerdict.PASS
        return CurveVerdict.FAIL if self.violations_on_estimate else CurveVerdict.FAILS_ON_BOUND

    def to_dict(self) -> dict:
        out = {
            "number": self.number, "start_m": self.start_m, "end_m": self.end_m,
            "length_m": self.length_m, "direction": self.direction,
            "min_radius_m": self.min_radius_m, "tightest_station_m": self.tightest_station_m,
            "superelevation": self.superelevation, "speed_mps": self.speed_mps,
            "lateral_accel_mps2": self.lateral_accel_mps2,
            "side_friction_demand": self.side_friction_demand,
            "friction_margin": self.friction_margin,
            "comfort_margin_mps2": self.comfort_margin_mps2,
            "friction_use": self.friction_use, "comfort_use": self.comfort_use,
            "limit_speed_mps": self.limit_speed_mps,
            "approach_speed_mps": self.approach_speed_mps,
            "braking_distance_needed_m": self.braking_distance_needed_m,
            "braking_distance_available_m": self.braking_distance_available_m,
            "brake_ok": self.brake_ok, "meets_min_radius": self.meets_min_radius,
            "advisory_speed_mph": self.advisory.mph, "advisory_speed_kmh": self.advisory.kmh,
            "advisory_capped": self.advisory.capped,
            "violations": list(self.violations), "worst_use": self.worst_use,
            "passed": self.passed,
        }
        out.update(self.interval_dict())
        return out

    def interval_dict(self) -> dict:
        """The keys added with the curvature's uncertainty (after the original ones)."""
        return {
            "verdict": self.verdict.value,
            "violations_on_estimate": list(self.violations_on_estimate),
            "min_radius_low_m": self.min_radius_low_m,
            "min_radius_high_m": self.min_radius_high_m,
            "meets_min_radius_low": self.meets_min_radius_low,
            "meets_min_radius_high": self.meets_min_radius_high,
            "advisory_speed_low_mph": self.advisory_low.mph,
            "advisory_speed_high_mph": self.advisory_high.mph,
            "advisory_speed_low_kmh": self.advisory_low.kmh,
            "advisory_speed_high_kmh": self.advisory_high.kmh,
            "advisory_low_capped": self.advisory_low.capped,
            "advisory_high_capped": self.advisory_high.capped,
            "friction_use_estimate": self.friction_use_estimate,
            "comfort_use_estimate": self.comfort_use_estimate,
            "lateral_accel_bound_mps2": self.lateral_accel_bound_mps2,
            "side_friction_demand_bound": self.side_friction_demand_bound,
            "limit_speed_estimate_mps": self.limit_speed_estimate_mps,
        }


@dataclass(frozen=True)
class CheckReport:
    """Everything :func:`check_speeds` found.

    Attributes
    ----------
    geometry : Geometry
        The route checked.
    speed_kind : SpeedKind
        Trace, constant or zones (how accelerations were treated).
    speed_source : str
        Where the speeds came from, for reports (a file name, "constant 22.2 m/s", ...).
    speed_mps, accel_mps2 : ndarray
        Checked speed (m/s) and its acceleration along the path (m/s^2; zero for held speeds)
        at every station.
    limit_speed_mps : ndarray
        Each station's speed ceiling (lateral limits, top speed, zones) on the curvature's
        bound, m/s.
    brake_reach_mps : ndarray
        Highest speed at each station from which braking within the limits reaches every
        curve ahead in time, m/s (large on long straights).
    use : dict of str -> ndarray
        Per-station use of each limit from the verifier (1 = at the limit), judged: the larger
        of the uses on the curvature's bound and on its estimate (the bound's, except where
        superelevation more than balances the curve).
    use_estimate : dict of str -> ndarray
        The same on the curvature estimate alone.
    limit_speed_estimate_mps : ndarray
        Each station's speed ceiling on the curvature estimate, m/s.
    curves : tuple of CurveCheck
        In station order.
    violations : tuple of Violation
        In station order.
    design : DesignCriterion or None
        The minimum-radius criterion, when a design speed was given.
    limits : Limits
    constraints : RouteConstraints
        As used (stops and start/end speeds removed).
    settings : CurveSettings
    tolerance : float
        Use tolerance (see :data:`USE_TOLERANCE`).
    """

    geometry: Geometry
    speed_kind: SpeedKind
    speed_source: str
    speed_mps: np.ndarray
    accel_mps2: np.ndarray
    limit_speed_mps: np.ndarray
    brake_reach_mps: np.ndarray
    use: dict
    use_estimate: dict
    limit_speed_estimate_mps: np.ndarray
    curves: tuple[CurveCheck, ...]
    violations: tuple[Violation, ...]
    design: DesignCriterion | None
    limits: Limits
    constraints: RouteConstraints
    settings: CurveSettings
    tolerance: float = USE_TOLERANCE

    @property
    def ok(self) -> bool:
        """True when every speed is within every limit checked."""
        return not self.violations

    @property
    def station_m(self) -> np.ndarray:
        return self.geometry.station_m

    def failed_curves(self) -> list[CurveCheck]:
        """Curves that fail, on the estimate or only on the curvature's bound."""
        return [c for c in self.curves if not c.passed]

    def curves_failing_on_bound(self) -> list[CurveCheck]:
        """Curves within every limit on the estimate that fail on the curvature's bound."""
        return [c for c in self.curves if c.verdict is CurveVerdict.FAILS_ON_BOUND]

    def other_violations(self) -> list[Violation]:
        """Violations that touch no curve (straights: top speed, hard braking, jerk...)."""
        return [v for v in self.violations if not v.curves]

    def worst_violation(self) -> Violation | None:
        if not self.violations:
            return None
        return max(self.violations, key=lambda v: v.use)

    def to_dict(self) -> dict:
        """Full result with SI units and unit-suffixed keys (JSON-ready apart from nan/inf)."""
        geo = self.geometry
        stations = {
            "station_m": geo.station_m.tolist(),
            "curvature_1pm": geo.curvature_1pm.tolist(),
            "speed_mps": self.speed_mps.tolist(),
            "accel_mps2": self.accel_mps2.tolist(),
            "limit_speed_mps": self.limit_speed_mps.tolist(),
            "brake_reach_mps": self.brake_reach_mps.tolist(),
        }
        stations.update({f"{name}_use": arr.tolist() for name, arr in self.use.items()})
        ends = curvature_ends(geo)
        sd = geo.curvature_sd_1pm
        stations.update({
            "curvature_bound_1pm": ends.high.tolist(),
            "curvature_sd_1pm": (np.zeros(geo.n_nodes) if sd is None else sd).tolist(),
            "limit_speed_estimate_mps": self.limit_speed_estimate_mps.tolist(),
        })
        stations.update({f"{name}_use_estimate": self.use_estimate[name].tolist()
                         for name in CURVATURE_LIMITS})
        return {
            "verdict": "pass" if self.ok else "fail",
            "route": {"name": geo.name, "source": geo.source, "length_m": geo.length_m,
                      "closed": geo.closed, "stations": geo.n_nodes,
                      "spacing_m": geo.spacing_m,
                      "curvature": "exact" if ends.exact else "estimated"},
            "fit": geo.provenance,
            "speeds": {"kind": self.speed_kind.value, "source": self.speed_source},
            "limits": self.limits.to_dict(),
            "constraints": self.constraints.to_dict(),
            "design": None if self.design is None else self.design.to_dict(),
            "settings": dict(self.settings.to_dict(), use_tolerance=self.tolerance),
            "summary": {"curves": len(self.curves),
                        "failed_curves": len(self.failed_curves()),
                        "violations": len(self.violations),
                        "peak_use": {name: float(np.max(arr)) for name, arr in self.use.items()},
                        "curves_failing_on_bound": len(self.curves_failing_on_bound()),
                        "violations_on_estimate": sum(v.on_estimate for v in self.violations),
                        "peak_use_estimate": {name: float(np.max(self.use_estimate[name]))
                                              for name in CURVATURE_LIMITS}},
            "curves": [c.to_dict() for c in self.curves],
            "violations": [v.to_dict() for v in self.violations],
            "per_station": stations,
        }

