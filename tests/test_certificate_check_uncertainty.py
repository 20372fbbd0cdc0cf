"""Certificate tests of ``check`` with the curvature's uncertainty: what must hold whatever the
numbers.

Every curve's interval contains its estimate (radius, ball-bank advisory, AASHTO verdict), uses
judged on the bound are never below those on the estimate, a failure on the estimate is never
reported as a pass or as a failure only within the uncertainty, and exact geometry (no bound)
gives intervals of zero width. Geometries are synthetic (tests/helpers.py) with the bound and
standard deviation set by hand, so nothing here depends on how a fit chooses them.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.ndimage import maximum_filter1d

from curvespeed.check import (CurveVerdict, SpeedKind, check_speeds,
                              curvature_ends, radius_interval)
from curvespeed.limits import Limits, RouteConstraints, Superelevation

from helpers import (circle_geometry, geometry_from_curvature, straight_curve_straight,
                     with_radius_interval)

LIMITS = Limits()  # passenger-car comfort: lateral 2.5 m/s^2, decel 2.5 m/s^2, mu 0.7


def exact(geometry):
    """``geometry`` with its curvature taken as exact: no bound, no standard deviation."""
    return dataclasses.replace(geometry, curvature_bound_1pm=None, curvature_sd_1pm=None)


def step(advisory_value):
    """An advisory step as a number (no step at all ranks below every step)."""
    return -1 if advisory_value is None else advisory_value


@st.composite
def uncertain_routes(draw):
    """An open route of straights and arcs (radius 15-800 m, either way) with a bound of 1-1.3
    times the largest |curvature| within up to 15 m (a bound spreads over a change of
    curvature, ahead of the estimate and after it) and a standard deviation of 80-100 % of |curvature| times 0.05 / 3, 0.5 / 3 or
    1.5 / 3 (the last reaches zero curvature: an unbounded largest radius); a superelevation of
    0-8 % on some routes."""
    pieces = []
    for _ in range(draw(st.integers(1, 4))):
        pieces.append(np.zeros(draw(st.integers(20, 120))))
        radius = draw(st.floats(15.0, 800.0)) * draw(st.sampled_from([1.0, -1.0]))
        pieces.append(np.full(draw(st.integers(10, 150)), 1.0 / radius))
    pieces.append(np.zeros(draw(st.integers(20, 120)) + 1))
    kappa = np.concatenate(pieces)
    geo = geometry_from_curvature(kappa, ds=1.0)
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    k = np.abs(kappa)
    # the largest of |curvature| within 0-15 m either way, as a bound spreads over a change
    reach = draw(st.integers(0, 15))
    bound = maximum_filter1d(k, 2 * reach + 1, mode="nearest") * rng.uniform(1.0, 1.3)
    sd = k * rng.uniform(0.8, 1.0, k.size) * draw(st.sampled_from([0.05, 0.5, 1.5])) / 3.0
    geo = dataclasses.replace(geo, curvature_bound_1pm=bound, curvature_sd_1pm=sd)
    e = draw(st.sampled_from([0.0, 0.0, 0.04, 0.08]))
    constraints = RouteConstraints(superelevation=(Superelevation(0.0, geo.length_m, e),)) \
        if e else RouteConstraints()
    return geo, constraints


@settings(max_examples=60)
@given(route=uncertain_routes(), share=st.floats(0.85, 1.15),
       design_kmh=st.sampled_from([None, 30.0, 50.0, 80.0]))
def test_every_interval_contains_its_estimate(route, share, design_kmh):
    # a speed around the one that meets the lateral comfort limit on the tightest estimate
    # (sqrt(a_lat R)): some curves pass, some fail on the estimate, some only on the bound
    geo, constraints = route
    radius = 1.0 / float(np.max(np.abs(geo.curvature_1pm)))
    speeds = np.full(geo.n_nodes, share * math.sqrt(LIMITS.max_lateral_accel_mps2 * radius))
    report = check_speeds(geo, LIMITS, constraints, speeds, kind=SpeedKind.CONSTANT,
                          design_speed_kmh=design_kmh)
    for c in report.curves:
        assert c.min_radius_low_m <= c.min_radius_m <= c.min_radius_high_m
        for unit in ("mph", "kmh"):
            ends = [step(getattr(a, unit)) for a in (c.advisory_low, c.advisory, c.advisory_high)]
            assert ends == sorted(ends), (unit, ends)
        if design_kmh is not None:
            # meeting the minimum at a smaller radius means meeting it at every larger one
            verdicts = [c.meets_min_radius_low, c.meets_min_radius, c.meets_min_radius_high]
            assert verdicts == sorted(verdicts)
        # the judged use is the larger of the two: never below the estimate's (exactly)
        assert c.friction_use >= c.friction_use_estimate
        assert c.comfort_use >= c.comfort_use_estimate
        assert c.limit_speed_mps <= c.limit_speed_estimate_mps
        assert c.verdict is CurveVerdict.PASS or not c.passed
    for name, arr in report.use_estimate.items():
        assert np.all(report.use[name] >= arr)

    # The same speeds on the estimate alone (no bound): whatever fails there fails here too, and
    # is marked as failing on the estimate, not only within the uncertainty.
    alone = check_speeds(exact(geo), LIMITS, constraints, speeds, kind=SpeedKind.CONSTANT,
                         design_speed_kmh=design_kmh)
    assert len(alone.curves) == len(report.curves)
    for mine, theirs in zip(report.curves, alone.curves):
        assert theirs.min_radius_m == mine.min_radius_m
        if not theirs.passed:
            assert mine.verdict is CurveVerdict.FAIL, (mine.number, theirs.violations)
    if not alone.ok:
        assert not report.ok
    # every station of every violation on the estimate lies in a judged stretch of the same
    # kind that says it holds on the estimate
    s = report.station_m
    for theirs in alone.violations:
        stretches = [v for v in report.violations if v.kind == theirs.kind and v.on_estimate]
        for at in s[(s >= theirs.start_m) & (s <= theirs.end_m)]:
            assert any(v.start_m <= at <= v.end_m for v in stretches), (theirs.kind, at)


@pytest.mark.parametrize("geo", [straight_curve_straight(100.0, 60.0, 80.0, 100.0),
                                 circle_geometry(50.0)], ids=["bend", "circle"])
@pytest.mark.parametrize("speed_mps", [8.0, 12.25, 20.0])
def test_exact_geometry_gives_intervals_of_zero_width(geo, speed_mps):
    # geometry_from_curvature has no bound and no standard deviation: its curvature is exact
    assert geo.curvature_bound_1pm is None and geo.curvature_sd_1pm is None
    report = check_speeds(geo, LIMITS, RouteConstraints(), np.full(geo.n_nodes, speed_mps),
                          kind=SpeedKind.CONSTANT, design_speed_kmh=50.0)
    assert report.curves
    for c in report.curves:
        assert c.min_radius_low_m == c.min_radius_m == c.min_radius_high_m
        assert c.advisory_low == c.advisory == c.advisory_high
        assert c.meets_min_radius_low == c.meets_min_radius == c.meets_min_radius_high
        assert c.friction_use == c.friction_use_estimate
        assert c.comfort_use == c.comfort_use_estimate
        assert c.limit_speed_mps == c.limit_speed_estimate_mps
        assert c.lateral_accel_mps2 == c.lateral_accel_bound_mps2
        assert c.verdict is not CurveVerdict.FAILS_ON_BOUND
    for name, arr in report.use.items():
        np.testing.assert_array_equal(arr, report.use_estimate[name])
    assert all(v.on_estimate for v in report.violations)
    assert report.to_dict()["route"]["curvature"] == "exact"


def test_radius_interval_of_exact_curvature_is_one_point():
    geo = straight_curve_straight(50.0, 120.0, 60.0, 50.0)
    nodes = np.flatnonzero(geo.curvature_1pm)
    r = radius_interval(curvature_ends(geo), nodes)
    # 1 / (1 / 120): round-off only
    assert r.low_m == r.estimate_m == r.high_m == pytest.approx(120.0, rel=1e-15)


def test_passing_on_the_estimate_and_failing_on_the_bound_is_marked_and_counts_as_a_failure():
    # Arc of R 100 m with a plausible 95-105 m. At sqrt(2.5 * 100) = 15.81 m/s the lateral
    # acceleration is 2.5 m/s^2 on the estimate (the comfort limit: use 1.0, within the 0.1 %
    # tolerance) and 2.5 * 100 / 95 = 2.63 m/s^2 on the bound (use 1.053).
    geo = with_radius_interval(straight_curve_straight(100.0, 100.0, 120.0, 100.0), 95.0, 105.0)
    v = math.sqrt(2.5 * 100.0) * (1.0 - 1e-6)
    report = check_speeds(geo, LIMITS, RouteConstraints(), np.full(geo.n_nodes, v),
                          kind=SpeedKind.CONSTANT)
    (curve,) = report.curves
    assert curve.verdict is CurveVerdict.FAILS_ON_BOUND and not curve.passed and not report.ok
    assert curve.violations_on_estimate == ()
    # uses a^2-proportional: (v^2/R) / 2.5 on each radius, to round-off of the verifier's sums
    assert curve.comfort_use == pytest.approx(100.0 / 95.0, rel=1e-5)
    assert curve.comfort_use_estimate == pytest.approx(1.0, rel=1e-5)
    (comfort,) = [x for x in report.violations if x.kind == "comfort_ellipse"]
    assert not comfort.on_estimate
    assert "over only within the curvature's uncertainty" in comfort.message
    summary = report.to_dict()["summary"]
    assert summary["curves_failing_on_bound"] == 1 and summary["failed_curves"] == 1
    assert report.to_dict()["curves"][0]["verdict"] == "fails_on_bound"
    # 3 % slower passes on the bound as well: 1.053 * 0.97^2 = 0.990
    slower = check_speeds(geo, LIMITS, RouteConstraints(), np.full(geo.n_nodes, 0.97 * v),
                          kind=SpeedKind.CONSTANT)
    assert slower.ok and slower.curves[0].verdict is CurveVerdict.PASS
