"""Road-design criteria for curves: AASHTO minimum radius and the ball-bank advisory speed.

Pure functions, no I/O. Speeds follow the unit of the published method: the AASHTO formula is
written in km/h and the ball-bank thresholds in mph, so those functions take and give those
units; everything else is SI (m, m/s, radians or degrees where named).

Sources
-------
* AASHTO, *A Policy on Geometric Design of Highways and Streets* ("Green Book"), 2011 edition,
  metric: the simplified curve formula ``R_min = V^2 / (127 (e_max + f_max))`` (V in km/h,
  127 ~ 3.6^2 g) and the side-friction factors ``f_max`` by design speed (Table 3-7). The factors
  in :data:`AASHTO_2011_SIDE_FRICTION` are *from memory*, not re-read from the publication.
* Ball-bank criterion for curve advisory speeds, MUTCD 2009 section 2C.08 and the FHWA
  advisory-speed procedure (thresholds *from memory*): 16 degrees up to 20 mph, 14 degrees at
  25-30 mph, 12 degrees from 35 mph. Reading of a rigid ball-bank indicator with body roll
  neglected: ``B = atan(v^2 / (g R)) - atan(e)``.
* Side-friction demand of a point mass on a banked curve (Green Book 2011 eq. 3-8 and any
  dynamics text): ``f = (v^2/(gR) - e) / (1 + e v^2/(gR))``.

Advisory speeds are set by the road authority under local codes; these numbers support that
practice and do not replace it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .errors import LimitsError
from .units import KMH_PER_MPS, MPH_PER_MPS, STANDARD_GRAVITY_MPS2

#: AASHTO Green Book 2011 (metric), Table 3-7: design speed (km/h) -> maximum side-friction
#: factor f_max. Values *(from memory)*. Speeds between listed rows are interpolated linearly;
#: speeds outside 20..120 km/h are refused (see :func:`aashto_side_friction`).
AASHTO_2011_SIDE_FRICTION: tuple[tuple[float, float], ...] = (
    (20.0, 0.35),
    (40.0, 0.23),
    (50.0, 0.19),
    (60.0, 0.17),
    (80.0, 0.14),
    (100.0, 0.12),
    (120.0, 0.09),
)

#: Label of the table above, for reports.
AASHTO_SOURCE = "AASHTO Green Book 2011, Table 3-7 (f_max values from memory)"

#: Constant of the metric simplified curve formula, about 3.6^2 * 9.81 (Green Book 2011).
AASHTO_METRIC_CONSTANT = 127.0

#: Maximum superelevation rates the Green Book works with span 4-12 %; larger is refused.
MAX_E_MAX = 0.12

#: Ball-bank thresholds, MUTCD 2009 section 2C.08 *(from memory)*: (upper speed of the band in
#: mph, threshold in degrees). Band edges: up to 20 mph -> 16; above 20 up to 30 mph -> 14;
#: above 30 mph -> 12. On the 5 mph steps this is exactly "16 up to 20, 14 at 25-30, 12 from
#: 35"; between steps (e.g. a 10 km/h step of 40 km/h = 24.9 mph) the stricter band applies.
BALL_BANK_BANDS_MPH: tuple[tuple[float, float], ...] = ((20.0, 16.0), (30.0, 14.0),
                                                         (math.inf, 12.0))

#: Step of US advisory speeds, mph, and of the metric convention used here, km/h.
ADVISORY_STEP_MPH = 5
ADVISORY_STEP_KMH = 10
#: Highest advisory step considered; a curve that passes at this step needs no advisory speed
#: below it (reported as this value).
ADVISORY_MAX_MPH = 80
ADVISORY_MAX_KMH = 130


def aashto_side_friction(design_speed_kmh: float) -> float:
    """Maximum side-friction factor f_max for a design speed, AASHTO Green Book 2011.

    Parameters
    ----------
    design_speed_kmh : float
        Design speed, km/h, within the table's range (20-120 km/h).

    Returns
    -------
    float
        f_max (dimensionless): the listed value at a listed speed, linear interpolation
        between the two neighbouring rows otherwise.

    Raises
    ------
    LimitsError
        Speed outside 20-120 km/h (the table is not extrapolated).
    """
    v = float(design_speed_kmh)
    lo_v, hi_v = AASHTO_2011_SIDE_FRICTION[0][0], AASHTO_2011_SIDE_FRICTION[-1][0]
    if not (math.isfinite(v) and lo_v <= v <= hi_v):
        raise LimitsError(f"design speed {v:g} km/h is outside the AASHTO side-friction table "
                          f"({lo_v:g}-{hi_v:g} km/h); give a design speed in that range")
    for (v0, f0), (v1, f1) in zip(AASHTO_2011_SIDE_FRICTION, AASHTO_2011_SIDE_FRICTION[1:]):
        if v0 <= v <= v1:
            return f0 + (f1 - f0) * (v - v0) / (v1 - v0)
    raise AssertionError("unreachable: speed checked against the table range")


def check_e_max(e_max: float) -> float:
    """Return ``e_max`` if it is a usable maximum superelevation rate, else raise LimitsError."""
    if not (math.isfinite(e_max) and 0.0 <= e_max <= MAX_E_MAX):
        raise LimitsError(f"maximum superelevation e_max = {e_max:g} is outside 0..{MAX_E_MAX:g}"
                          " (rise over run: 0.08 means 8 %); give a rate as a fraction")
    return float(e_max)


def aashto_min_radius_m(v_kmh: float, e_max: float, f_max: float) -> float:
    """Minimum curve radius by the simplified formula ``V^2 / (127 (e_max + f_max))``, metres.

    Parameters
    ----------
    v_kmh : float
        Design speed, km/h.
    e_max : float
        Maximum superelevation rate, rise over run (0.08 = 8 %).
    f_max : float
        Maximum side-friction factor (see :func:`aashto_side_friction`).

    Returns
    -------
    float
        Unrounded minimum radius, metres (published tables round to whole metres; see
        :func:`table_radius_m`).
    """
    total = e_max + f_max
    if not total > 0.0:
        raise LimitsError(f"e_max + f_max = {total:g} must be positive for a minimum radius")
    return v_kmh * v_kmh / (AASHTO_METRIC_CONSTANT * total)


def table_radius_m(radius_m: float) -> float:
    """``radius_m`` rounded to whole metres, half up, as the Green Book 2011 tables print it."""
    return float(math.floor(radius_m + 0.5))


def side_friction_demand(speed_mps, radius_m, e, gravity_mps2: float = STANDARD_GRAVITY_MPS2):
    """Side-friction factor a point mass needs on a banked curve (dimensionless).

    ``f = (v^2/(gR) - e) / (1 + e v^2/(gR))`` (Green Book 2011 eq. 3-8 rearranged). Negative
    when the superelevation alone more than balances the curve. Works on numbers and arrays;
    an infinite radius (a straight) gives ``-e``.
    """
    q = speed_mps * speed_mps / (gravity_mps2 * radius_m)
    return (q - e) / (1.0 + e * q)


def ball_bank_angle_deg(speed_mps: float, radius_m: float, e: float,
                        gravity_mps2: float = STANDARD_GRAVITY_MPS2) -> float:
    """Ball-bank indicator reading ``atan(v^2/(gR)) - atan(e)``, degrees (body roll neglected)."""
    return math.degrees(math.atan(speed_mps * speed_mps / (gravity_mps2 * radius_m))
                        - math.atan(e))


def ball_bank_speed(radius_m: float, e: float, angle_deg: float,
                    gravity_mps2: float = STANDARD_GRAVITY_MPS2) -> float:
    """Speed at which the ball-bank reading equals ``angle_deg``, m/s.

    Inverse of :func:`ball_bank_angle_deg`: ``v = sqrt(g R tan(B + atan(e)))``.
    """
    total = math.radians(angle_deg) + math.atan(e)
    if total <= 0.0:
        return 0.0
    if total >= math.pi / 2:
        return math.inf
    return math.sqrt(gravity_mps2 * radius_m * math.tan(total))


def ball_bank_threshold_deg(speed_mps: float) -> float:
    """Ball-bank threshold for a speed, degrees (bands of :data:`BALL_BANK_BANDS_MPH`)."""
    v_mph = speed_mps * MPH_PER_MPS
    for upper_mph, threshold in BALL_BANK_BANDS_MPH:
        # a hair of slack so 20 mph converted to m/s and back stays in the 20 mph band
        if v_mph <= upper_mph * (1.0 + 1e-12):
            return threshold
    raise AssertionError("unreachable: the last band is unbounded")


@dataclass(frozen=True)
class AdvisorySpeed:
    """Ball-bank advisory speed of one curve in both unit conventions.

    Attributes
    ----------
    mph : int or None
        Highest 5 mph step whose ball-bank reading is within the threshold for that step (US
        convention); None when even 5 mph is over it.
    kmh : int or None
        Same criterion on 10 km/h steps (the threshold picked by the step's speed in mph); None
        when even 10 km/h is over it.
    capped : bool
        True when the search stopped at its top step (80 mph / 130 km/h): the curve needs no
        advisory speed below that.
    """

    mph: int | None
    kmh: int | None
    capped: bool


def _highest_step(radius_m: float, e: float, gravity_mps2: float, step: int, top: int,
                  per_mps: float) -> tuple[int | None, bool]:
    """Highest multiple of ``step`` (unit: ``per_mps`` per m/s) passing the criterion."""
    best = None
    for value in range(step, top + 1, step):
        v = value / per_mps
        if ball_bank_angle_deg(v, radius_m, e, gravity_mps2) > ball_bank_threshold_deg(v):
            # the reading grows with speed and the threshold never rises: no later step passes
            return best, False
        best = value
    return best, True


def ball_bank_advisory(radius_m: float, e: float,
                       gravity_mps2: float = STANDARD_GRAVITY_MPS2) -> AdvisorySpeed:
    """Advisory speed of a curve by the ball-bank criterion, mph and km/h conventions.

    For each step (5 mph; separately 10 km/h) the reading ``B = atan(v^2/(gR)) - atan(e)`` at
    that step's speed is compared with the threshold for that speed (16/14/12 degrees, see
    :data:`BALL_BANK_BANDS_MPH`); the advisory is the highest step that passes. Because the
    reading rises with speed and the threshold never does, the passing steps are all steps up to
    the advisory: the result equals the ball-bank limit speed rounded down to the step.

    Parameters
    ----------
    radius_m : float
        Radius at the curve's tightest point, metres (``inf`` for a straight).
    e : float
        Superelevation there, rise over run toward the inside of the curve.
    gravity_mps2 : float
        Gravitational acceleration, m/s^2.
    """
    mph, capped_mph = _highest_step(radius_m, e, gravity_mps2, ADVISORY_STEP_MPH,
                                    ADVISORY_MAX_MPH, MPH_PER_MPS)
    kmh, capped_kmh = _highest_step(radius_m, e, gravity_mps2, ADVISORY_STEP_KMH,
                                    ADVISORY_MAX_KMH, KMH_PER_MPS)
    return AdvisorySpeed(mph=mph, kmh=kmh, capped=capped_mph and capped_kmh)


@dataclass(frozen=True)
class DesignCriterion:
    """The AASHTO minimum radius for one design speed.

    Attributes
    ----------
    design_speed_kmh : float
        Design speed, km/h (the unit of the published formula).
    e_max : float
        Maximum superelevation rate, rise over run.
    f_max : float
        Side-friction factor for the design speed (table value or interpolated).
    min_radius_m : float
        Unrounded ``V^2 / (127 (e_max + f_max))``, metres.
    table_min_radius_m : float
        The same rounded to whole metres as the published table prints it; a curve passes when
        its radius is at least this.
    source : str
        The table the factor came from.
    """

    design_speed_kmh: float
    e_max: float
    f_max: float
    min_radius_m: float
    table_min_radius_m: float
    source: str = AASHTO_SOURCE

    def passes(self, radius_m: float) -> bool:
        """True if a curve of ``radius_m`` metres meets the minimum radius.

        The radius is compared with :attr:`table_min_radius_m` with a relative allowance of
        1e-9 for floating-point round-off (a radius computed as ``1 / (1 / 229)``).
        """
        return radius_m >= self.table_min_radius_m * (1.0 - 1e-9)

    def to_dict(self) -> dict:
        return {"design_speed_kmh": self.design_speed_kmh, "e_max": self.e_max,
                "f_max": self.f_max, "min_radius_m": self.min_radius_m,
                "table_min_radius_m": self.table_min_radius_m, "source": self.source}


def design_criterion(design_speed_kmh: float, e_max: float = 0.08) -> DesignCriterion:
    """Minimum-radius criterion for a design speed (km/h) and maximum superelevation."""
    e_max = check_e_max(e_max)
    f_max = aashto_side_friction(design_speed_kmh)
    r_min = aashto_min_radius_m(design_speed_kmh, e_max, f_max)
    return DesignCriterion(float(design_speed_kmh), e_max, f_max, r_min, table_radius_m(r_min))
