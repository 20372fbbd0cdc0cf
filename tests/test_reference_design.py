"""Reference tests of the road-design criteria against published values and closed forms.

Sources are named beside each check; see ../shared/REFERENCES.md. Values recalled from memory are
marked "(from memory)". The check through :func:`curvespeed.check.check_speeds` uses synthetic
geometries of exact curvature, so the radius it sees is the one asked for.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from curvespeed.check import MIN_RADIUS, CurveVerdict, SpeedKind, check_speeds
from curvespeed.design import (AASHTO_2011_SIDE_FRICTION, aashto_min_radius_m,
                               aashto_side_friction, ball_bank_advisory, ball_bank_angle_deg,
                               ball_bank_speed, ball_bank_threshold_deg, design_criterion,
                               side_friction_demand, table_radius_m)
from curvespeed.errors import LimitsError
from curvespeed.limits import Limits, RouteConstraints, Superelevation
from curvespeed.units import kmh_to_mps, mph_to_mps

from helpers import straight_curve_straight, with_radius_interval

G = 9.81  # the value the ball-bank check values in REFERENCES.md were computed with


# --- AASHTO Green Book 2011, Table 3-7: side-friction factors (from memory) ---------------------
@pytest.mark.parametrize("v_kmh, f_max", [(20, 0.35), (40, 0.23), (50, 0.19), (60, 0.17),
                                          (80, 0.14), (100, 0.12), (120, 0.09)])
def test_side_friction_factor_at_listed_design_speeds(v_kmh, f_max):
    # Source: AASHTO Green Book 2011 (metric), Table 3-7, f_max (from memory). Listed rows are
    # returned as printed; the only error is the float representation of two decimals.
    assert aashto_side_friction(v_kmh) == pytest.approx(f_max, abs=1e-12)


def test_side_friction_between_rows_lies_between_its_neighbours():
    # Our rule (linear between listed rows), checked against the two published neighbours.
    f70 = aashto_side_friction(70.0)
    assert 0.14 < f70 < 0.17
    assert f70 == pytest.approx(0.5 * (0.17 + 0.14), abs=1e-12)


@pytest.mark.parametrize("v_kmh", [10.0, 19.9, 120.1, 140.0, math.nan])
def test_side_friction_outside_the_table_is_refused(v_kmh):
    with pytest.raises(LimitsError, match="outside the AASHTO side-friction table"):
        aashto_side_friction(v_kmh)


def test_table_covers_the_published_range_in_order():
    speeds = [v for v, _ in AASHTO_2011_SIDE_FRICTION]
    factors = [f for _, f in AASHTO_2011_SIDE_FRICTION]
    assert speeds == sorted(speeds)
    assert factors == sorted(factors, reverse=True)  # f_max falls with design speed


# --- AASHTO simplified curve formula R_min = V^2 / (127 (e_max + f_max)) -----------------------
# Source: Green Book 2011, simplified curve formula; unrounded values from REFERENCES.md, which
# prints them to 0.1 m: abs=0.05 m is half that last digit.
@pytest.mark.parametrize("v_kmh, e_max, r_min", [
    (80, 0.04, 280.0), (80, 0.06, 252.0), (80, 0.08, 229.1),
    (100, 0.04, 492.1), (100, 0.06, 437.4), (100, 0.08, 393.7),
    (120, 0.04, 872.2), (120, 0.06, 755.9), (120, 0.08, 667.0),
])
def test_minimum_radius_by_the_simplified_formula(v_kmh, e_max, r_min):
    f_max = aashto_side_friction(v_kmh)
    assert aashto_min_radius_m(v_kmh, e_max, f_max) == pytest.approx(r_min, abs=0.05)
    crit = design_criterion(v_kmh, e_max)
    assert crit.min_radius_m == pytest.approx(r_min, abs=0.05)


def test_published_tables_round_to_whole_metres():
    # Green Book 2011 tables print R_min in whole metres: 229.1 m is listed as 229 m.
    crit = design_criterion(80.0, 0.08)
    assert crit.table_min_radius_m == 229.0
    assert table_radius_m(252.0) == 252.0
    assert table_radius_m(437.4) == 437.0
    assert table_radius_m(755.9) == 756.0


def check_curve(radius_m, design_kmh=80.0, e_max=0.08):
    """Check a gentle constant speed on straight - arc - straight with a design speed."""
    geo = straight_curve_straight(100.0, radius_m, 120.0, 100.0)
    speeds = np.full(geo.n_nodes, 10.0)   # far below every limit: only the design check acts
    return check_speeds(geo, Limits(), RouteConstraints(), speeds, kind=SpeedKind.CONSTANT,
                        design_speed_kmh=design_kmh, e_max=e_max)


@pytest.mark.parametrize("radius_m", [229.0, 229.1, 240.0, 400.0])
def test_curve_at_or_above_the_minimum_radius_passes(radius_m):
    # Green Book 2011, Table 3-7: 80 km/h, e_max 8 %, f_max 0.14 (from memory) -> 229 m.
    report = check_curve(radius_m)
    (curve,) = report.curves
    assert curve.min_radius_m == pytest.approx(radius_m, rel=1e-12)
    assert curve.meets_min_radius is True
    assert report.ok


@pytest.mark.parametrize("radius_m", [200.0, 228.0])
def test_curve_below_the_minimum_radius_fails(radius_m):
    report = check_curve(radius_m)
    (curve,) = report.curves
    assert curve.meets_min_radius is False
    assert not curve.passed and MIN_RADIUS in curve.violations
    (viol,) = [v for v in report.violations if v.kind == MIN_RADIUS]
    assert viol.use == pytest.approx(229.0 / radius_m, rel=1e-12)
    # the violation covers the arc: stations 100 .. 219 m (120 nodes at 1 m from station 100)
    assert (viol.start_m, viol.end_m) == (100.0, 219.0)
    assert not report.ok


def test_no_design_speed_means_no_radius_verdict():
    geo = straight_curve_straight(100.0, 150.0, 120.0, 100.0)
    report = check_speeds(geo, Limits(), RouteConstraints(), np.full(geo.n_nodes, 10.0),
                          kind=SpeedKind.CONSTANT)
    assert report.curves[0].meets_min_radius is None
    assert report.design is None


def test_e_max_outside_the_green_book_range_is_refused():
    with pytest.raises(LimitsError, match="e_max"):
        design_criterion(80.0, 0.2)
    with pytest.raises(LimitsError, match="e_max"):
        design_criterion(80.0, -0.01)


# --- Side-friction demand: f = (v^2/(gR) - e) / (1 + e v^2/(gR)) -------------------------------
@pytest.mark.parametrize("e, f, radius", [(0.0, 0.15, 100.0), (0.06, 0.15, 150.0),
                                          (0.08, 0.14, 229.1), (-0.02, 0.20, 80.0)])
def test_side_friction_demand_inverts_the_banked_curve_relation(e, f, radius):
    # Source: point mass on a banked curve, v^2/(gR) = (e + f)/(1 - e f) (Green Book 2011
    # eq. 3-8). Round-off only: a few operations in double precision.
    v = math.sqrt(G * radius * (e + f) / (1 - e * f))
    assert side_friction_demand(v, radius, e, G) == pytest.approx(f, rel=1e-12)


def test_side_friction_demand_on_a_flat_curve_is_lateral_accel_over_g():
    # e = 0: f = v^2 / (g R), the textbook lateral acceleration over g.
    assert side_friction_demand(15.0, 100.0, 0.0, G) == pytest.approx(2.25 / G, rel=1e-12)


# --- Ball-bank criterion -------------------------------------------------------------------------
# Source: MUTCD 2009 section 2C.08 / FHWA advisory-speed procedure (thresholds from memory) and
# the rigid-body relation B = atan(v^2/(gR)) - atan(e), body roll neglected. Check values from
# REFERENCES.md, printed to 0.01 km/h: abs=0.005 km/h is half that last digit.
@pytest.mark.parametrize("e, angle, v_kmh", [
    (0.0, 16.0, 60.38), (0.0, 14.0, 56.30), (0.0, 12.0, 51.98),
    (0.06, 16.0, 66.97), (0.06, 14.0, 63.19), (0.06, 12.0, 59.25),
])
def test_ball_bank_speed_on_a_100_m_curve(e, angle, v_kmh):
    v = ball_bank_speed(100.0, e, angle, G)
    assert v * 3.6 == pytest.approx(v_kmh, abs=0.005)
    # and the reading at that speed is the angle again (round-off only)
    assert ball_bank_angle_deg(v, 100.0, e, G) == pytest.approx(angle, abs=1e-9)


@pytest.mark.parametrize("v_mph, threshold", [(5, 16.0), (15, 16.0), (20, 16.0), (25, 14.0),
                                              (30, 14.0), (35, 12.0), (50, 12.0), (70, 12.0)])
def test_ball_bank_thresholds_by_speed(v_mph, threshold):
    # MUTCD 2009 section 2C.08 (from memory): 16 deg up to 20 mph, 14 deg 25-30 mph, 12 deg
    # from 35 mph.
    assert ball_bank_threshold_deg(mph_to_mps(v_mph)) == threshold


def test_advisory_speed_on_a_flat_100_m_curve():
    # From the check values above: the 14 deg speed is 56.30 km/h = 34.98 mph, so 30 mph (a
    # 14 deg step) passes; 35 mph is a 12 deg step and the 12 deg speed is 51.98 km/h =
    # 32.30 mph, so 35 mph fails -> 30 mph. In km/h: 50 km/h (31.1 mph, a 12 deg step) is
    # below 51.98 km/h and passes; 60 km/h fails -> 50 km/h.
    assert 56.30 / 1.609344 > 30 and 51.98 / 1.609344 < 35
    adv = ball_bank_advisory(100.0, 0.0, G)
    assert (adv.mph, adv.kmh, adv.capped) == (30, 50, False)


def test_advisory_speed_on_a_banked_100_m_curve():
    # e = 0.06: the 12 deg speed is 59.25 km/h = 36.8 mph -> 35 mph passes, 40 mph fails;
    # 50 km/h passes, 60 km/h (above 59.25) fails.
    adv = ball_bank_advisory(100.0, 0.06, G)
    assert (adv.mph, adv.kmh) == (35, 50)


def test_advisory_speed_is_the_highest_step_whose_reading_is_within_its_threshold():
    # Property of the definition, for a range of curves: the advisory step passes, the next
    # step fails.
    for radius in (15.0, 40.0, 80.0, 150.0, 300.0):
        for e in (0.0, 0.04, 0.08):
            adv = ball_bank_advisory(radius, e, G)
            for value, step, to_mps in ((adv.mph, 5, mph_to_mps), (adv.kmh, 10, kmh_to_mps)):
                assert value is not None
                v_ok, v_next = to_mps(value), to_mps(value + step)
                assert ball_bank_angle_deg(v_ok, radius, e, G) <= ball_bank_threshold_deg(v_ok)
                if not adv.capped:
                    assert ball_bank_angle_deg(v_next, radius, e, G) > \
                        ball_bank_threshold_deg(v_next)


def test_advisory_on_a_very_tight_turn_is_none_below_the_lowest_step():
    # R = 1 m: at 5 mph (2.24 m/s) the reading is atan(0.51) = 27 deg > 16 deg.
    adv = ball_bank_advisory(1.0, 0.0, G)
    assert adv.mph is None


# --- Both ends of a curve's radius interval ----------------------------------------------------
# A fitted route's curve has a smallest radius estimate and a plausible range (check docs); the
# design criteria are evaluated at both ends. Synthetic curves of exact curvature with the range
# set by hand (tests/helpers.py), so each end is the radius asked for.

#: Ball-bank check speeds on a 100 m curve, km/h, by superelevation and threshold (REFERENCES.md:
#: MUTCD 2009 section 2C.08 / FHWA procedure, thresholds from memory; B = atan(v^2/(gR)) - atan(e),
#: g = 9.81).
BALL_BANK_100_M_KMH = {0.0: {16.0: 60.38, 14.0: 56.30, 12.0: 51.98},
                       0.06: {16.0: 66.97, 14.0: 63.19, 12.0: 59.25}}


def advisory_from_published(e: float, radius_m: float, step: float, to_kmh: float) -> int:
    """Highest advisory step (``step`` in a unit of ``to_kmh`` km/h) on a curve of ``radius_m``,
    from the published 100 m speeds: at fixed superelevation and angle the ball-bank speed
    sqrt(g R tan(B + atan e)) scales as sqrt(R) (closed form). A step is held to 16 degrees up
    to 20 mph, 14 up to 30 mph and 12 above (MUTCD 2009, from memory); steps pass from the
    lowest up to the first that fails."""
    best = 0
    value = step
    while True:
        kmh = value * to_kmh
        mph = kmh / 1.609344
        angle = 16.0 if mph <= 20.0 else 14.0 if mph <= 30.0 else 12.0
        if kmh > BALL_BANK_100_M_KMH[e][angle] * math.sqrt(radius_m / 100.0):
            return int(best)
        best = value
        value += step


def interval_curve(estimate_m, low_m, high_m, e=0.0, speed_mps=10.0, **check):
    """Straight - arc of ``estimate_m`` - straight with the radius range ``low_m``..``high_m``,
    checked at a constant speed (and a design speed if given)."""
    geo = with_radius_interval(straight_curve_straight(100.0, estimate_m, 120.0, 100.0),
                               low_m, high_m)
    bank = RouteConstraints(superelevation=(Superelevation(0.0, geo.length_m, e),)) if e else \
        RouteConstraints()
    return check_speeds(geo, Limits(gravity_mps2=G), bank, np.full(geo.n_nodes, speed_mps),
                        kind=SpeedKind.CONSTANT, **check)


@pytest.mark.parametrize("e", [0.0, 0.06])
def test_ball_bank_advisory_at_both_ends_of_the_radius_interval(e):
    # Estimate 100 m, plausible 81-121 m (0.9^2 and 1.1^2 of 100 m: the published speeds scale
    # by 0.9 and 1.1). e = 0: at 81 m the 14 and 12 degree speeds are 50.67 and 46.78 km/h, so
    # 30 mph (48.28 km/h, a 14 degree step) passes and 35 mph fails; 40 km/h passes, 50 km/h
    # (a 12 degree step) fails. At 121 m the 12 degree speed is 57.18 km/h: 35 mph (56.33 km/h)
    # passes, 40 mph fails; 50 km/h passes, 60 fails. e = 0.06 likewise from 59.25-66.97 km/h.
    report = interval_curve(100.0, 81.0, 121.0, e=e)
    (curve,) = report.curves
    # the radii are the ones asked for, to round-off (1 / (1 / R) and a sum of three terms)
    assert (curve.min_radius_low_m, curve.min_radius_m, curve.min_radius_high_m) == \
        pytest.approx((81.0, 100.0, 121.0), rel=1e-12)
    assert curve.superelevation == pytest.approx(e, abs=1e-15)
    for radius, adv in ((81.0, curve.advisory_low), (100.0, curve.advisory),
                        (121.0, curve.advisory_high)):
        assert adv.mph == advisory_from_published(e, radius, 5, 1.609344), radius
        assert adv.kmh == advisory_from_published(e, radius, 10, 1.0), radius
    if e == 0.0:   # the values worked out in the comment above
        assert (curve.advisory_low.mph, curve.advisory.mph, curve.advisory_high.mph) == \
            (30, 30, 35)
        assert (curve.advisory_low.kmh, curve.advisory.kmh, curve.advisory_high.kmh) == \
            (40, 50, 50)
    # a slow speed far within every limit: the advisory interval is information, not a verdict
    assert curve.verdict is CurveVerdict.PASS and report.ok


def test_unbounded_largest_radius_needs_no_advisory():
    # The noise allows a straight (|curvature| - 3 sd <= 0): the largest radius is unbounded and
    # a straight needs no advisory speed below the highest step (80 mph / 130 km/h).
    report = interval_curve(100.0, 90.0, math.inf)
    (curve,) = report.curves
    assert curve.min_radius_high_m == math.inf
    assert (curve.advisory_high.mph, curve.advisory_high.kmh, curve.advisory_high.capped) == \
        (80, 130, True)


@pytest.mark.parametrize("low, estimate, high, verdicts, result", [
    # Green Book 2011, 80 km/h, e_max 8 %, f_max 0.14 (from memory): R_min 229 m.
    (230.0, 235.0, 240.0, (True, True, True), CurveVerdict.PASS),
    (225.0, 235.0, 240.0, (False, True, True), CurveVerdict.FAILS_ON_BOUND),
    (220.0, 225.0, 240.0, (False, False, True), CurveVerdict.FAIL),
    (200.0, 210.0, 220.0, (False, False, False), CurveVerdict.FAIL),
])
def test_minimum_radius_verdict_at_both_ends(low, estimate, high, verdicts, result):
    report = interval_curve(estimate, low, high, design_speed_kmh=80.0, e_max=0.08)
    (curve,) = report.curves
    assert (curve.meets_min_radius_low, curve.meets_min_radius,
            curve.meets_min_radius_high) == verdicts
    assert curve.verdict is result
    assert report.ok == (result is CurveVerdict.PASS)
    if result is not CurveVerdict.PASS:
        (viol,) = [v for v in report.violations if v.kind == MIN_RADIUS]
        # judged at the smallest plausible radius, reported on the estimate too (round-off)
        assert viol.use == pytest.approx(229.0 / low, rel=1e-12)
        assert viol.use_estimate == pytest.approx(229.0 / estimate, rel=1e-12)
        assert viol.on_estimate == (result is CurveVerdict.FAIL)
        if result is CurveVerdict.FAILS_ON_BOUND:
            assert f"radius {estimate:.1f} m meets the minimum 229 m" in viol.message
            assert f"within the curvature's uncertainty, {low:.1f} m, does not" in viol.message
