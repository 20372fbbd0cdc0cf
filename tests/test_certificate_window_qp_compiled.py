"""The compiled assembly of a window's QP (curvespeed.solvers.window_qp, ``_window_qp.c``)
against the numpy assembly it stands in for (QPBuilder.reduced_numpy), bit for bit.

The QPs are those the solver itself makes: receding-horizon windows driven along the bundled
routes (invented, routes/README.md) with their stops, zones and loop seam, setting off from
rest and arriving at stops, one and several sequential-convex iterations per window, and the
whole open routes' QPs (with stretches held at a speed cap); then the same builders around
random iterates anywhere between rest and the envelope, which reach the chords' other branches
(one chord or two, the iterate clipped or at the envelope). Both assemblies run the same
operations in the same order, so equality is exact: no tolerance. The independent blocks the
compiled call finds as it writes the rows are qp_rows.interval_blocks' on the numpy QP (itself
checked against scipy's connected components in test_certificate_replan_shortcuts.py).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from curvespeed.replan import Replanner
from curvespeed.solvers import convex_qp, qp_rows, window_qp
from curvespeed.solvers.convex import ConvexOptions
from curvespeed.solvers.corner_rows import corner_pairs

import test_certificate_replan as replan_cases

pytestmark = pytest.mark.skipif(window_qp._compiled is None,
                                reason="the compiled assembly was not built (no C compiler)")

FIELDS = ("indptr", "indices", "data", "lo", "up", "prow", "pcol", "pval", "q")


def _assert_same(builder, b_hat):
    fast, fast_scale = window_qp.reduced(builder, b_hat)
    ref, ref_scale = builder.reduced_numpy(b_hat)
    assert fast.n == ref.n
    assert np.float64(fast_scale).tobytes() == np.float64(ref_scale).tobytes()
    for name in FIELDS:
        a, b = getattr(fast, name), getattr(ref, name)
        assert a.shape == b.shape, name
        # bytes, not values: the same zeros' signs and NaNs too
        assert a.astype(b.dtype).tobytes() == b.tobytes(), name
    # the blocks found in the same call are those found on the numpy QP
    assert ref.block_starts is None
    assert np.array_equal(fast.block_starts, qp_rows.interval_blocks(ref))


def _solver_qps(make, limits_change, iterations, monkeypatch):
    """Every (builder, iterate) the solver assembles a QP at while a vehicle drives the route
    (and while the Replanner plans the whole route once)."""
    seen = []
    plain = convex_qp.QPBuilder.reduced

    def record(self, b_hat):
        seen.append((self, np.array(b_hat, dtype=float)))
        return plain(self, b_hat)

    monkeypatch.setattr(convex_qp.QPBuilder, "reduced", record)
    geo, limits, constraints = make()
    limits = limits.replace(**limits_change)
    replanner = Replanner(geo, limits, constraints,
                          options=ConvexOptions(threads=1, max_iterations=iterations))
    replan_cases.drive(replanner, geo, constraints, 60)
    monkeypatch.undo()
    return [(b, x) for b, x in seen if window_qp.applies(b)]


@pytest.mark.parametrize("iterations", [1, 30])
@pytest.mark.parametrize("limits_change", [{}, {"max_jerk_mps3": 0.6}], ids=["default", "jerk"])
@pytest.mark.parametrize("case", sorted(replan_cases.CASES))
def test_compiled_assembly_equals_numpy_on_the_solvers_qps(case, limits_change, iterations,
                                                             monkeypatch):
    make, _ = replan_cases.CASES[case]
    qps = _solver_qps(make, limits_change, iterations, monkeypatch)
    assert len(qps) >= 20           # the drive's windows, not only the whole route's QPs
    windows = [b for b, _ in qps if b.p.end_reserve is not None]
    assert windows
    if case == "shuttle":           # windows setting off from a stop and running into one
        assert any(b.lay.fixed[1:].any() for b in windows)
    # corner rows on some of the pairs and some of their blocks (corner_rows.CornerSelection)
    assert any(0 < b.corners[1].sum() < 4 * b.corners[1].shape[0] for b in windows)
    for builder, b_hat in qps:
        _assert_same(builder, b_hat)


@pytest.mark.parametrize("case", sorted(replan_cases.CASES))
def test_compiled_assembly_equals_numpy_around_random_iterates(case, monkeypatch):
    make, _ = replan_cases.CASES[case]
    qps = _solver_qps(make, {}, 1, monkeypatch)
    rng = np.random.default_rng(7)
    for builder, _ in qps[:: max(1, len(qps) // 12)]:
        e = builder.b_env[: builder.lay.nv]
        pairs = corner_pairs(builder.lay)
        for _ in range(4):
            # corner rows on a random part of every pair's blocks
            builder.corners = (pairs, rng.uniform(size=(pairs.shape[0], 4)) < 0.3)
            u = rng.uniform(size=e.size)
            # anywhere from rest to the envelope, some nodes exactly at it or at rest
            b_hat = np.where(u < 0.1, e, np.where(u > 0.95, 0.0, e * rng.uniform(size=e.size)))
            _assert_same(builder, b_hat)


def test_the_compiled_assembly_takes_only_the_window_shape(monkeypatch):
    """Lateral jerk, comfort term, power and loops go the numpy way."""
    make, _ = replan_cases.CASES["mountain"]
    builder, _ = _solver_qps(make, {}, 1, monkeypatch)[-1]
    assert window_qp.applies(builder)
    p, lay = builder.p, builder.lay
    variants = [
        convex_qp.QPBuilder(replace(p, limits=p.limits.replace(max_lateral_jerk_mps3=1.0)),
                            lay, builder.b_env, builder.opt),
        convex_qp.QPBuilder(p, lay, builder.b_env, ConvexOptions(comfort_weight=0.1)),
        convex_qp.QPBuilder(replace(p, limits=p.limits.replace(max_power_w=80e3,
                                                               mass_kg=1500.0)),
                            lay, builder.b_env, builder.opt),
        convex_qp.QPBuilder(replace(p, closed=True), lay, builder.b_env, builder.opt),
    ]
    assert not any(window_qp.applies(b) for b in variants)


def test_the_compiled_assembly_refuses_a_station_out_of_range(monkeypatch):
    make, _ = replan_cases.CASES["mountain"]
    builder, b_hat = _solver_qps(make, {}, 1, monkeypatch)[-1]
    t = builder.p.jerk_terms
    bad = replace(t, next=np.where(t.next == t.next.max(), builder.lay.nv, t.next))
    p = replace(builder.p, jerk_terms=bad)
    broken = convex_qp.QPBuilder(p, builder.lay, builder.b_env, builder.opt)
    with pytest.raises(ValueError, match="out of range"):
        window_qp.reduced(broken, b_hat)
