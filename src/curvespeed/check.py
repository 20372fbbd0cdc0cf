"""Audit speeds along a route: friction, comfort, braking and road-design criteria.

:func:`check_speeds` is the one library call behind ``curvespeed check``. It takes speeds at the
geometry's stations (a recorded drive or a profile, one constant speed, or the speed zones of a
limits file) and reports, per station and per curve, how much of each limit they use.

What is checked
---------------
* **Per station**, the use of every limit of the shared discrete problem
  (:mod:`curvespeed.problem`), computed by the independent verifier
  (:func:`curvespeed.verify.verify_profile`): friction ellipse (grip), comfort ellipse, top
  speed and zones, power, jerk and lateral jerk where those limits are set. For a speed *trace*
  (:attr:`SpeedKind.TRACE`) the accelerations come from the trace itself, so the combined
  (friction-ellipse) demand includes its braking and driving. A *constant* speed or the *zone*
  speeds are speeds to hold: they are checked at zero acceleration (their steps are where a
  vehicle would have to change speed, which the brake-reach check below covers).
* **Brake reach**: the highest speed at each station from which braking within the limits
  (comfort deceleration, the friction ellipse, grade) can still bring the vehicle down to what
  every curve ahead allows. It is the backward pass of the forward-backward envelope
  (:mod:`curvespeed.solvers.envelope`) run over the curves' lateral ceiling alone (no top speed,
  no zones). Stations where the checked speed is above it, yet within the lateral limits there,
  form a *brake-reach* violation: the speed rises into a curve faster than the brakes can undo.
* **Per curve** (see :func:`find_curves` for how curves are found): station range, length,
  minimum radius, direction, superelevation, the speed checked at the tightest point, the
  lateral demand there in m/s^2 and as the side-friction factor
  ``f = (v^2/(gR) - e)/(1 + e v^2/(gR))``, the margins to the lateral friction coefficient and
  the lateral comfort limit, the highest speed the limits allow there (the node's ceiling from
  :meth:`~curvespeed.problem.SpeedProblem.lateral_ceiling_b`, including top speed and zones),
  the braking distance needed from the speed checked just before the curve down to that speed,
  the AASHTO minimum radius for a design speed, and the ball-bank advisory speed
  (:mod:`curvespeed.design`).

Stops and start/end speeds of the constraints are planning targets and are not checked (a
recorded drive only samples them approximately); they are ignored with a warning. Under a jerk
bound a trace's own rest points (speed exactly zero: the ends of an open route, isolated
stations) are rest points of the problem, so a jerk-limited start or stop is judged by the same
model of a step next to rest the planner uses, a jerk ramp then constant acceleration
(:func:`rest_constraints`); at an open route's end where the trace is moving, only the jerk
within the end step is checked (what came before the first station is unknown).

Each violation is a stretch of stations over one limit; stretches of the same kind less than
``CurveSettings.join_gap_m`` apart are reported as one (their worst point and use are kept).

Tolerance: a use within :data:`USE_TOLERANCE` (0.1 %) of 1 counts as at the limit, not over it.
Speeds files print 1e-6 m/s, which over 1 m steps moves accelerations by up to ~1e-4 m/s^2 at
50 m/s; measured speeds are never better than 0.1 %.
"""

from __future__ import annotations

import enum
import math
import warnings
from dataclasses import dataclass, replace

import numpy as np

from .design import AdvisorySpeed, DesignCriterion, ball_bank_advisory, design_criterion, \
    side_friction_demand
from .errors import CurvespeedWarning, SpeedFileError
from .geometry import Geometry
from .limits import Limits, RouteConstraints, Stop
from .problem import SpeedProblem, build_problem
from .profile import derive
from .verify import verify_profile

#: A use (demand over limit) above 1 + this is a violation.
USE_TOLERANCE = 1e-3

#: Curve detection defaults (see :func:`find_curves`).
CURVE_RADIUS_M = 1000.0
JOIN_GAP_M = 20.0
MIN_CURVE_LENGTH_M = 5.0
MIN_CURVE_TURN_DEG = 2.0

#: Top speed used for the curves-only ceiling behind the brake-reach check, m/s: far above any
#: road vehicle, so on straights only the curves ahead bound the reach.
_NO_CAP_MPS = 1000.0

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
_CAP_NAMES = {"max_speed": "top speed", "zone": "speed zone",
              "jerk_launch": "leaving rest within the jerk limit", "stop": "stop"}
BRAKE_REACH = "brake_reach"
MIN_RADIUS = "min_radius"
_KIND_NAMES = dict(CHECKED_LIMITS, **{BRAKE_REACH: "too fast to brake for the curve ahead",
                                      MIN_RADIUS: "radius below the design minimum"})


class SpeedKind(enum.Enum):
    """Where the checked speeds come from, which sets how accelerations are treated."""

    TRACE = "trace"          # a drive or a profile: accelerations from the speeds themselves
    CONSTANT = "constant"    # one speed held everywhere: zero acceleration
    ZONES = "zones"          # the zone speeds (top speed elsewhere) held: zero acceleration


@dataclass(frozen=True)
class CurveSettings:
    """How curves are found (see :func:`find_curves`).

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
        Demand over limit at the worst point (1.25 = 25 % over). For ``speed_cap`` and
        ``brake_reach`` a ratio of speeds, for ``min_radius`` the minimum radius over the
        curve's radius, for the ellipses, power and jerk a ratio of accelerations (power, jerk).
    speed_mps : float
        Speed checked at the worst point, m/s.
    allowed_speed_mps : float
        At the worst point: the node's speed ceiling (ellipses, power, jerk, caps), the brake
        reach (``brake_reach``), or nan (``min_radius``), m/s.
    message : str
        One line saying what, where and by how much.
    curves : tuple of int
        Numbers of the curves it touches (a brake-reach stretch: the curve it brakes for).
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

    def to_dict(self) -> dict:
        return {"kind": self.kind, "start_m": self.start_m, "end_m": self.end_m,
                "station_m": self.station_m, "use": self.use, "speed_mps": self.speed_mps,
                "allowed_speed_mps": self.allowed_speed_mps, "message": self.message,
                "curves": list(self.curves)}


@dataclass(frozen=True)
class CurveCheck:
    """Results for one curve.

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
        Smallest radius and where it is, metres.
    superelevation : float
        Cross-slope at the tightest point, rise over run toward the inside (0.06 = 6 %).
    speed_mps : float
        Speed checked at the tightest point, m/s.
    lateral_accel_mps2 : float
        Lateral acceleration felt in the road plane there (net of superelevation), m/s^2.
    side_friction_demand : float
        ``f = (v^2/(gR) - e)/(1 + e v^2/(gR))`` there (dimensionless).
    friction_margin : float
        Lateral friction coefficient minus ``f`` (negative: more grip asked than given).
    comfort_margin_mps2 : float
        Lateral comfort limit minus the lateral acceleration, m/s^2.
    friction_use, comfort_use : float
        Peak use of the friction and comfort ellipses over the curve (1 = at the limit).
    limit_speed_mps : float
        Highest speed the limits allow at the tightest point (curve, top speed, zones), m/s.
    approach_speed_mps : float
        Speed checked at the station just before the curve, m/s.
    braking_distance_needed_m : float
        ``(v_approach^2 - v_limit^2) / (2 a)`` with ``a`` the smaller of the deceleration limit
        and mu g (level road, straight-line braking); 0 when no braking is needed, metres.
    braking_distance_available_m : float
        From the approach station to the tightest point, metres.
    brake_ok : bool
        No brake-reach violation ends at this curve (the exact check, with grade and the
        friction ellipse; the two distances above are the level-road estimate).
    meets_min_radius : bool or None
        Radius at least the AASHTO minimum for the design speed (None: no design speed given).
    advisory : AdvisorySpeed
        Ball-bank advisory speed (mph and km/h conventions).
    violations : tuple of str
        Kinds of the violations that touch this curve.
    worst_use : float
        Largest use of any limit on the curve (sort key; > 1 means a failure).
    """

    number: int
    start_m: float
    end_m: float
    length_m: float
    direction: str
    min_radius_m: float
    tightest_station_m: float
    superelevation: float
    speed_mps: float
    lateral_accel_mps2: float
    side_friction_demand: float
    friction_margin: float
    comfort_margin_mps2: float
    friction_use: float
    comfort_use: float
    limit_speed_mps: float
    approach_speed_mps: float
    braking_distance_needed_m: float
    braking_distance_available_m: float
    brake_ok: bool
    meets_min_radius: bool | None
    advisory: AdvisorySpeed
    violations: tuple[str, ...]
    worst_use: float

    @property
    def passed(self) -> bool:
        return not self.violations

    def to_dict(self) -> dict:
        return {
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
        Each station's speed ceiling (lateral limits, top speed, zones), m/s.
    brake_reach_mps : ndarray
        Highest speed at each station from which braking within the limits reaches every
        curve ahead in time, m/s (large on long straights).
    use : dict of str -> ndarray
        Per-station use of each limit from the verifier (1 = at the limit).
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
        return [c for c in self.curves if not c.passed]

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
        return {
            "verdict": "pass" if self.ok else "fail",
            "route": {"name": geo.name, "source": geo.source, "length_m": geo.length_m,
                      "closed": geo.closed, "stations": geo.n_nodes,
                      "spacing_m": geo.spacing_m},
            "speeds": {"kind": self.speed_kind.value, "source": self.speed_source},
            "limits": self.limits.to_dict(),
            "constraints": self.constraints.to_dict(),
            "design": None if self.design is None else self.design.to_dict(),
            "settings": dict(self.settings.to_dict(), use_tolerance=self.tolerance),
            "summary": {"curves": len(self.curves),
                        "failed_curves": len(self.failed_curves()),
                        "violations": len(self.violations),
                        "peak_use": {name: float(np.max(arr)) for name, arr in self.use.items()}},
            "curves": [c.to_dict() for c in self.curves],
            "violations": [v.to_dict() for v in self.violations],
            "per_station": stations,
        }


# --- curves ------------------------------------------------------------------------------------

def find_curves(geometry: Geometry, settings: CurveSettings = CurveSettings()) -> list[np.ndarray]:
    """Split the route into curves; return each curve's node indices in driving order.

    1. A station is *in a curve* where ``|curvature| > 1 / settings.radius_m``; runs of such
       stations turning the same way are curve pieces (a change of direction always starts a
       new piece).
    2. Pieces turning the same way with at most ``join_gap_m`` of straighter road between them
       are joined (a curve whose curvature dips briefly, or GPS noise).
    3. Curves shorter than ``min_length_m`` or turning less than ``min_turn_deg`` in all are
       dropped as blips.

    On a closed route a curve may run across the seam; its indices then wrap (n-1 -> 0). The
    duplicate seam node ``n`` is never listed.
    """
    kappa = geometry.curvature_1pm
    s = geometry.station_m
    m = kappa.size - 1 if geometry.closed else kappa.size
    k = kappa[:m]
    threshold = 1.0 / settings.radius_m
    sign = np.where(k > threshold, 1, np.where(k < -threshold, -1, 0))
    edges = np.flatnonzero(np.diff(np.concatenate(([0], sign, [0]))) != 0)
    pieces = []                                   # [first, last, sign] of runs of equal sign
    for a, b in zip(edges[:-1], edges[1:]):
        if sign[a] != 0:
            pieces.append([int(a), int(b) - 1, int(sign[a])])
    joined: list[list[int]] = []
    for piece in pieces:
        if joined and joined[-1][2] == piece[2] and s[piece[0]] - s[joined[-1][1]] <= \
                settings.join_gap_m + 1e-9:
            joined[-1][1] = piece[1]
        else:
            joined.append(piece)
    length = geometry.length_m
    wrap = False
    if geometry.closed and len(joined) >= 2 and joined[0][2] == joined[-1][2]:
        gap = (length - s[joined[-1][1]]) + s[joined[0][0]]
        if gap <= settings.join_gap_m + 1e-9:
            wrap = True
    curves = []
    if wrap:
        last = joined.pop()
        first = joined.pop(0)
        curves.append(np.concatenate((np.arange(last[0], m), np.arange(0, first[1] + 1))))
    elif geometry.closed and len(joined) == 1 and joined[0][0] == 0 and joined[0][1] == m - 1:
        curves.append(np.arange(0, m))             # the whole loop is one curve (a circle)
        joined = []
    curves.extend(np.arange(a, b + 1) for a, b, _ in joined)
    keep = []
    ds = geometry.spacing_m
    for nodes in curves:
        extent = _extent_m(nodes, geometry)
        turn = abs(float(np.sum(kappa[nodes]))) * ds
        if extent + 1e-9 >= settings.min_length_m and \
                math.degrees(turn) + 1e-9 >= settings.min_turn_deg:
            keep.append(nodes)
    keep.sort(key=lambda nodes: s[nodes[0]])
    return keep


def _extent_m(nodes: np.ndarray, geometry: Geometry) -> float:
    """Length from the first to the last node of a curve, metres (wrap-aware)."""
    s = geometry.station_m
    d = s[nodes[-1]] - s[nodes[0]]
    return float(d if d >= 0 else d + geometry.length_m)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """First and last index of each run of True in ``mask``."""
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
    return [(int(a), int(b) - 1) for a, b in zip(edges[::2], edges[1::2])]


def _stretches(mask: np.ndarray, key: np.ndarray, station_m: np.ndarray,
               join_gap_m: float) -> list[tuple[int, int]]:
    """Runs of True in ``mask``, split where ``key`` changes, then runs with the same key less
    than ``join_gap_m`` apart merged."""
    pieces = []
    for a, b in _runs(mask):
        cuts = np.flatnonzero(key[a + 1:b + 1] != key[a:b]) + a + 1
        starts = [a] + cuts.tolist()
        ends = (cuts - 1).tolist() + [b]
        pieces.extend(zip(starts, ends))
    merged: list[tuple[int, int]] = []
    for a, b in pieces:
        if merged and key[a] == key[merged[-1][1]] and \
                station_m[a] - station_m[merged[-1][1]] <= join_gap_m + 1e-9:
            merged[-1] = (merged[-1][0], b)
        else:
            merged.append((a, b))
    return merged


def _territories(curve_nodes: list[np.ndarray], geometry: Geometry):
    """Which curve each station is nearest to, and each curve's stations widened by one step.

    Returns ``(territory, near)``: ``territory[k]`` is the index of the curve nearest to
    station k along the route (-1 when there is no curve), ``near[c, k]`` is True on curve c's
    stations and one station either side (the verifier gives a station the use of the worse of
    its two steps, so a curve's excess shows one step beyond it).
    """
    s = geometry.station_m
    n = s.size
    length = geometry.length_m
    territory = np.full(n, -1)
    near = np.zeros((len(curve_nodes), n), dtype=bool)
    if not curve_nodes:
        return territory, near
    distance = np.empty((len(curve_nodes), n))
    for c, nodes in enumerate(curve_nodes):
        inside = np.zeros(n, dtype=bool)
        inside[nodes] = True
        if geometry.closed:
            inside[-1] = inside[0]
        ends = []
        for end in (s[nodes[0]], s[nodes[-1]]):
            d = np.abs(s - end)
            ends.append(np.minimum(d, length - d) if geometry.closed else d)
        distance[c] = np.where(inside, 0.0, np.minimum(*ends))
        widened = inside.copy()
        widened[1:] |= inside[:-1]
        widened[:-1] |= inside[1:]
        if geometry.closed:
            widened[0] |= inside[-2]
            widened[-1] |= inside[1]
        near[c] = widened
    territory = np.argmin(distance, axis=0)
    return territory, near


def _brake_targets(reach_b: np.ndarray, ceiling_b: np.ndarray, closed: bool) -> np.ndarray:
    """For each station, the next station after it where the brake reach rests on a curve's
    lateral ceiling (the curve it must brake for), or -1 if there is none ahead."""
    n = reach_b.size
    binding = (reach_b >= ceiling_b * (1.0 - 1e-9)) & (ceiling_b < 0.5 * _NO_CAP_MPS ** 2)
    m = n - 1 if closed else n
    idx = np.arange(m)
    if closed:
        # two laps so a station near the end of the lap sees the curves after the seam
        idx = np.concatenate((idx, idx))
    following = np.full(idx.size, -1)
    nxt = -1
    for pos in range(idx.size - 1, -1, -1):
        following[pos] = nxt
        if binding[idx[pos]]:
            nxt = int(idx[pos])
    out = np.full(n, -1)
    out[:m] = following[:m]
    if closed:
        out[-1] = out[0]
    else:
        out[-1] = -1
    return out


# --- speeds to check ---------------------------------------------------------------------------

def checked_constraints(constraints: RouteConstraints, warn: bool = True) -> RouteConstraints:
    """The constraints ``check`` applies: speed zones and superelevation.

    Stops and start/end speeds are planning targets, not limits of the road; they are dropped
    (with a :class:`CurvespeedWarning` naming where they came from when ``warn``).
    """
    dropped = []
    if constraints.stops:
        origin = constraints.stops[0].origin or "the constraints"
        dropped.append(f"{len(constraints.stops)} stop(s) (first from {origin})")
    if constraints.start_speed_mps is not None or constraints.end_speed_mps is not None:
        dropped.append("the start/end speed")
    if dropped and warn:
        warnings.warn(f"check ignores {' and '.join(dropped)}: they are planning targets, not "
                      "limits a speed can exceed; remove them to silence this warning",
                      CurvespeedWarning, stacklevel=3)
    return RouteConstraints(zones=constraints.zones, superelevation=constraints.superelevation)


def zone_speeds_mps(geometry: Geometry, limits: Limits,
                    constraints: RouteConstraints) -> np.ndarray:
    """Speeds checked without a speeds file: each station's zone speed, the top speed elsewhere.

    Every station of a step that touches a zone takes the zone's speed (the node convention of
    :func:`~curvespeed.problem.build_problem`), m/s.
    """
    problem = build_problem(geometry, limits, checked_constraints(constraints, warn=False),
                            jerk_model=False)
    return np.sqrt(problem.cap_b)


def brake_reach_b(geometry: Geometry, limits: Limits,
                  constraints: RouteConstraints) -> tuple[np.ndarray, np.ndarray]:
    """Curves-only ceiling and brake reach, as squared speeds (m^2/s^2) at every station.

    The ceiling is :meth:`~curvespeed.problem.SpeedProblem.lateral_ceiling_b` of the problem
    with the curves' lateral limits and superelevation only (no top speed, no zones). The reach
    is the envelope's backward pass over that ceiling with a free end: the highest squared speed
    at each station from which braking within the limits (comfort deceleration, friction
    ellipse, grade, resistances) meets every ceiling ahead. On a closed route the pass runs two
    laps backward so that curves just after the seam are seen from the end of the lap.
    """
    from .solvers.envelope import brake_reach

    with warnings.catch_warnings():
        # the same limits were validated (and any warning shown) for the main problem
        warnings.simplefilter("ignore", CurvespeedWarning)
        problem = build_problem(geometry, limits.replace(max_speed_mps=_NO_CAP_MPS),
                                RouteConstraints(superelevation=constraints.superelevation),
                                jerk_model=False)
    ceiling = problem.lateral_ceiling_b()
    return ceiling, brake_reach(problem, ceiling)


def rest_constraints(used: RouteConstraints, speed_mps: np.ndarray,
                     geometry: Geometry) -> RouteConstraints:
    """``used`` plus the rest points of a speed trace, so a jerk bound is checked as planned.

    Under a jerk bound a vehicle leaves and reaches rest with a jerk ramp (see
    :mod:`curvespeed.problem`); a profile planned that way has exactly zero speed there. The
    trace's own rest points become the problem's: on an open route its first and last speeds are
    the start and end speeds, and every isolated station with speed exactly zero (at least three
    steps from the previous rest point) is a stop. A run of several zero speeds (standing still
    over more than a station) stays a plain constant-acceleration stretch.
    """
    v = np.asarray(speed_mps, dtype=float)
    n = v.size
    zero = v == 0.0
    closed = geometry.closed
    last = 0 if (not closed and zero[0]) else -10 ** 9
    end_rest = (not closed) and bool(zero[-1])
    stops = []
    first = 0 if closed else 1
    for k in np.flatnonzero(zero[first:n - 1]) + first:
        k = int(k)
        alone = (k == 0 or not zero[k - 1]) and not zero[k + 1]
        if alone and k - last >= 3 and not (end_rest and n - 1 - k < 3):
            stops.append(Stop(float(geometry.station_m[k]), origin="speeds at rest"))
            last = k
    return RouteConstraints(
        zones=used.zones, stops=tuple(stops), superelevation=used.superelevation,
        start_speed_mps=None if closed else float(v[0]),
        end_speed_mps=None if closed else float(v[-1]))


def _station_use(problem: SpeedProblem, b: np.ndarray,
                 kind: SpeedKind) -> tuple[dict, np.ndarray]:
    """Per-station use of every limit (verifier) and the acceleration it was evaluated with."""
    if kind is SpeedKind.TRACE:
        use = dict(verify_profile(problem, b).use)
        d = derive(problem, b)
        if "jerk" in use and not problem.closed:
            # The acceleration before the first and after the last station of a trace is
            # unknown (the derivation takes it as zero): at an end not at rest only the jerk
            # inside the end step counts.
            jerk = use["jerk"].copy()
            scale = problem.limits.max_jerk_mps3
            for node, step in ((0, 0), (-1, -1)):
                if b[node] > 0.0:
                    jerk[node] = abs(d["step_jerk_mps3"][step]) / scale
            use["jerk"] = jerk
        return use, d["accel_mps2"]
    # Held speeds: zero acceleration everywhere. Each distinct speed is verified as a constant
    # profile and its stations take their uses from that run (zones give a handful of values).
    values, inverse = np.unique(b, return_inverse=True)
    use: dict[str, np.ndarray] = {}
    for i, value in enumerate(values):
        at = inverse == i
        for name, arr in verify_profile(problem, np.full(b.size, value)).use.items():
            use.setdefault(name, np.zeros(b.size))[at] = arr[at]
    return use, np.zeros(b.size)


# --- the check ---------------------------------------------------------------------------------

def check_speeds(geometry: Geometry, limits: Limits, constraints: RouteConstraints, speed_mps, *,
                 kind: SpeedKind = SpeedKind.TRACE, speed_source: str = "speeds",
                 design_speed_kmh: float | None = None, e_max: float = 0.08,
                 settings: CurveSettings = CurveSettings(),
                 tolerance: float = USE_TOLERANCE) -> CheckReport:
    """Check speeds along ``geometry`` against ``limits``, zones and road-design criteria.

    Parameters
    ----------
    geometry : Geometry
        The resampled route.
    limits : Limits
        Vehicle and comfort limits.
    constraints : RouteConstraints
        Zones and superelevation are applied; stops and start/end speeds are ignored (warning).
    speed_mps : array_like, shape (n_nodes,)
        Speed to check at every station, m/s (finite, >= 0).
    kind : SpeedKind
        ``TRACE``: accelerations from the speeds themselves; ``CONSTANT`` / ``ZONES``: speeds
        to hold, checked at zero acceleration.
    speed_source : str
        Label of the speeds for reports and messages.
    design_speed_kmh : float, optional
        Design speed for the AASHTO minimum-radius check, km/h (20-120).
    e_max : float
        Maximum superelevation rate for that check, rise over run (0.08 = 8 %).
    settings : CurveSettings
        How curves are found.
    tolerance : float
        Use tolerance; a use above ``1 + tolerance`` is a violation.

    Returns
    -------
    CheckReport

    Raises
    ------
    SpeedFileError
        Wrong number of speeds, a negative or non-finite speed.
    LimitsError
        Invalid limits, constraints, design speed or ``e_max``.
    """
    s = geometry.station_m
    v = np.asarray(speed_mps, dtype=float).ravel()
    n = geometry.n_nodes
    if v.size != n:
        raise SpeedFileError(f"{speed_source}: {v.size} speeds for {n} stations; give one speed "
                             "per station of the route")
    bad = np.flatnonzero(~np.isfinite(v) | (v < 0.0))
    if bad.size:
        k = int(bad[0])
        raise SpeedFileError(f"{speed_source}: speed {v[k]!r} m/s at station {s[k]:.1f} m is not "
                             "a finite, non-negative number; fix the speeds")
    design = None if design_speed_kmh is None else design_criterion(design_speed_kmh, e_max)
    used = checked_constraints(constraints)
    if kind is SpeedKind.TRACE:
        # rest points of the trace, so a jerk-limited start, stop or end is judged as planned
        problem = build_problem(geometry, limits, rest_constraints(used, v, geometry))
    else:
        # held speeds: no rest, zero acceleration
        problem = build_problem(geometry, limits, used, jerk_model=False)
    b = v * v
    ceiling_b = problem.lateral_ceiling_b()
    use, accel = _station_use(problem, b, kind)
    lat_ceiling_b, reach_b = brake_reach_b(geometry, limits, used)
    curve_nodes = find_curves(geometry, settings)

    territory, near = _territories(curve_nodes, geometry)

    found: list[tuple[Violation, set]] = []
    for name, label in CHECKED_LIMITS.items():
        arr = use.get(name)
        if arr is None:
            continue
        for i0, i1 in _stretches(arr > 1.0 + tolerance, territory, s, settings.join_gap_m):
            k = _worst_node(arr, i0, i1, v / np.sqrt(np.maximum(ceiling_b, 1e-300)))
            allowed = math.sqrt(problem.cap_b[k]) if name == "speed_cap" else \
                math.sqrt(ceiling_b[k])
            what = _CAP_NAMES.get(str(problem.cap_source[k]), label) if name == "speed_cap" \
                else label
            message = _limit_message(name, what, s[i0], s[i1], s[k], float(arr[k]), v[k],
                                     allowed, accel[k])
            c = int(territory[i0])
            touched = {c} if c >= 0 and near[c, i0:i1 + 1].any() else set()
            found.append((Violation(name, float(s[i0]), float(s[i1]), float(s[k]), float(arr[k]),
                                    float(v[k]), allowed, message), touched))

    v_reach = np.sqrt(reach_b)
    v_lat = np.sqrt(lat_ceiling_b)
    with np.errstate(divide="ignore", invalid="ignore"):
        reach_use = np.where(v_reach > 0.0, v / v_reach, np.where(v > 0.0, np.inf, 1.0))
    too_fast = (reach_use > 1.0 + tolerance) & (v <= v_lat * (1.0 + tolerance))
    target = _brake_targets(reach_b, lat_ceiling_b, geometry.closed)
    for i0, i1 in _stretches(too_fast, target, s, settings.join_gap_m):
        k = i0 + int(np.argmax(np.where(too_fast[i0:i1 + 1], reach_use[i0:i1 + 1], 0.0)))
        j = int(target[i1])
        c = int(territory[j]) if j >= 0 else -1
        touched = {c} if c >= 0 and near[c, j] else set()
        where = (f"the curve at station {s[j]:.1f} m ({v_lat[j]:.2f} m/s allowed there)"
                 if j >= 0 else "the curves ahead")
        message = (f"stations {s[i0]:.1f}-{s[i1]:.1f} m: too fast to brake for {where}: "
                   f"{v[k]:.2f} m/s at {s[k]:.1f} m where braking within the limits allows at "
                   f"most {v_reach[k]:.2f} m/s ({100 * (reach_use[k] - 1):.1f} % over); "
                   "slow down earlier")
        found.append((Violation(BRAKE_REACH, float(s[i0]), float(s[i1]), float(s[k]),
                                float(reach_use[k]), float(v[k]), float(v_reach[k]), message),
                      touched))

    curves: list[CurveCheck] = []
    a_brake = min(limits.max_decel_mps2, limits.mu_long * limits.gravity_mps2)
    for c, nodes in enumerate(curve_nodes):
        kap = np.abs(geometry.curvature_1pm[nodes])
        j = int(nodes[int(np.argmax(kap))])
        radius = 1.0 / float(kap.max())
        if design is not None and not design.passes(radius):
            tight = nodes[kap > 1.0 / design.table_min_radius_m]
            ratio = design.table_min_radius_m / radius
            message = (f"stations {s[tight[0]]:.1f}-{s[tight[-1]]:.1f} m: radius {radius:.1f} m "
                       f"is below the minimum {design.table_min_radius_m:.0f} m for "
                       f"{design.design_speed_kmh:g} km/h (e_max {design.e_max:g}, f_max "
                       f"{design.f_max:.3f}; {design.source})")
            found.append((Violation(MIN_RADIUS, float(s[tight[0]]), float(s[tight[-1]]),
                                    float(s[j]), ratio, float(v[j]), math.nan, message), {c}))
        curves.append(_curve_check(c, nodes, j, radius, problem, geometry, v, b, use, ceiling_b,
                                   a_brake, design))

    found.sort(key=lambda item: (item[0].start_m, item[0].kind))
    violations = tuple(replace(viol, curves=tuple(sorted(t + 1 for t in touched)))
                       for viol, touched in found)
    finished = []
    for curve in curves:
        hits = [viol for viol in violations if curve.number in viol.curves]
        kinds = tuple(dict.fromkeys(viol.kind for viol in hits))
        worst = max([curve.worst_use] + [viol.use for viol in hits])
        finished.append(replace(curve, violations=kinds, worst_use=worst,
                                brake_ok=BRAKE_REACH not in kinds))
    return CheckReport(
        geometry=geometry, speed_kind=kind, speed_source=speed_source, speed_mps=v,
        accel_mps2=np.asarray(accel, dtype=float), limit_speed_mps=np.sqrt(ceiling_b),
        brake_reach_mps=v_reach, use=use, curves=tuple(finished), violations=violations,
        design=design, limits=limits, constraints=used, settings=settings, tolerance=tolerance)


def _worst_node(use: np.ndarray, first: int, last: int, tie_break: np.ndarray) -> int:
    """Node of largest use in ``first..last``; among equal uses, the largest ``tie_break``.

    The verifier gives a node the use of the worse of its two steps, so the station before a
    curve shares the curve's first use; the tie-break (speed over ceiling) names the station
    that is actually too fast.
    """
    seg = use[first:last + 1]
    ties = np.flatnonzero(seg >= seg.max() * (1.0 - 1e-9))
    return first + int(ties[np.argmax(tie_break[first:last + 1][ties])])


def _limit_message(name: str, label: str, start: float, end: float, at: float, use: float,
                   v: float, allowed: float, accel: float) -> str:
    over = f"{100 * (use - 1):.1f} % over"
    head = f"stations {start:.1f}-{end:.1f} m: {label}"
    if name == "speed_cap":
        return f"{head}: {v:.2f} m/s at {at:.1f} m above the {allowed:.2f} m/s allowed ({over})"
    if name == "lateral_jerk" and accel == 0.0:
        # at a held speed the lateral jerk v^3 dkappa/ds grows as v^3
        return (f"{head} at {100 * use:.1f} % ({over}) at {at:.1f} m: {v:.2f} m/s held where "
                f"the curvature changes; the bound allows {v / use ** (1 / 3):.2f} m/s there")
    if v > allowed * (1.0 + 1e-9):
        return (f"{head} at {100 * use:.1f} % ({over}) at {at:.1f} m: {v:.2f} m/s where the "
                f"limits allow {allowed:.2f} m/s")
    return (f"{head} at {100 * use:.1f} % ({over}) at {at:.1f} m: {v:.2f} m/s with acceleration "
            f"{accel:+.2f} m/s^2")


def _curve_check(c: int, nodes: np.ndarray, j: int, radius: float, problem: SpeedProblem,
                 geometry: Geometry, v: np.ndarray, b: np.ndarray, use: dict,
                 ceiling_b: np.ndarray, a_brake: float,
                 design: DesignCriterion | None) -> CurveCheck:
    """Per-curve figures (violations and worst use are filled in by the caller)."""
    lim = problem.limits
    g = lim.gravity_mps2
    s = geometry.station_m
    closed = geometry.closed
    m = s.size - 1 if closed else s.size
    e = float(problem.sin_bank[j] / problem.cos_bank[j])
    a_lat = float(problem.felt_lateral(b[j], j))
    f = float(side_friction_demand(v[j], radius, e, g))
    limit_v = math.sqrt(ceiling_b[j])
    first = int(nodes[0])
    approach = (first - 1) % m if closed else max(first - 1, 0)
    available = float(s[j] - s[approach])
    if available < 0.0:
        available += geometry.length_m
    v_app = float(v[approach])
    needed = max(v_app * v_app - limit_v * limit_v, 0.0) / (2.0 * a_brake)
    peaks = [float(np.max(use[name][nodes])) for name in ("friction_ellipse", "comfort_ellipse",
                                                          "power", "jerk") if name in use]
    return CurveCheck(
        number=c + 1, start_m=float(s[first]), end_m=float(s[nodes[-1]]),
        length_m=_extent_m(nodes, geometry),
        direction="left" if geometry.curvature_1pm[j] > 0 else "right",
        min_radius_m=radius, tightest_station_m=float(s[j]), superelevation=e,
        speed_mps=float(v[j]), lateral_accel_mps2=a_lat, side_friction_demand=f,
        friction_margin=lim.mu_lat - f, comfort_margin_mps2=lim.max_lateral_accel_mps2 - a_lat,
        friction_use=float(np.max(use["friction_ellipse"][nodes])),
        comfort_use=float(np.max(use["comfort_ellipse"][nodes])),
        limit_speed_mps=limit_v, approach_speed_mps=v_app,
        braking_distance_needed_m=needed, braking_distance_available_m=available,
        brake_ok=True, meets_min_radius=None if design is None else design.passes(radius),
        advisory=ball_bank_advisory(radius, e, g), violations=(), worst_use=max(peaks))
