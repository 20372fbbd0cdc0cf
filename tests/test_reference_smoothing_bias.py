"""The road laid out from a curvature (curvespeed.geometry.smoothing_bias.layout) against
closed forms: a circle, and a clothoid through scipy's Fresnel integrals (the Euler spiral's
textbook parametrisation, x = A sqrt(pi) C(s / (A sqrt(pi))), y = A sqrt(pi) S(...), with
curvature s / A^2)."""

from __future__ import annotations

import math

import numpy as np
from scipy.special import fresnel

from curvespeed.geometry.smoothing_bias import layout, lowered

#: Positions must agree far below any survey noise (mm): Simpson's rule and the cubic Hermite
#: interpolation err by O(h^4 kappa^3), 1e-8 m here; 1e-6 m leaves room for round-off.
POSITION_TOL_M = 1e-6


def test_constant_curvature_lays_out_a_circle():
    radius = 15.0
    station = np.arange(0.0, 100.0 + 1e-9, 1.0)
    at = np.linspace(0.0, 100.0, 337)        # between the stations too
    xy = layout(station, np.full(station.size, 1.0 / radius), at)
    np.testing.assert_allclose(xy[:, 0], radius * np.sin(at / radius), atol=POSITION_TOL_M)
    np.testing.assert_allclose(xy[:, 1], radius * (1.0 - np.cos(at / radius)),
                               atol=POSITION_TOL_M)


def test_linear_curvature_lays_out_a_clothoid():
    a = 30.0                                   # clothoid parameter: curvature s / a^2
    station = np.arange(0.0, 60.0 + 1e-9, 1.0)
    at = np.linspace(0.0, 60.0, 241)
    xy = layout(station, station / a**2, at)
    scale = a * math.sqrt(math.pi)
    s_f, c_f = fresnel(at / scale)
    np.testing.assert_allclose(xy[:, 0], scale * c_f, atol=POSITION_TOL_M)
    np.testing.assert_allclose(xy[:, 1], scale * s_f, atol=POSITION_TOL_M)


def test_only_a_lowered_magnitude_counts_in_the_direction_the_estimate_turns():
    road = np.array([0.02, 0.02, -0.02, -0.02, 0.0])
    smoothed = np.array([0.018, 0.021, -0.018, -0.021, 0.001])
    estimate = np.array([0.017, 0.022, -0.017, -0.022, 0.002])
    np.testing.assert_allclose(lowered(road, smoothed, estimate),
                               [0.002, 0.0, 0.002, 0.0, 0.0], atol=1e-15)
    # the road's own noise comes off what it shows: 0.002 lowered, 0.0015 of noise -> 0.0005;
    # a lowering within the noise counts for nothing
    np.testing.assert_allclose(lowered(road, smoothed, estimate, 0.0015),
                               [0.0005, 0.0, 0.0005, 0.0, 0.0], atol=1e-15)
    np.testing.assert_allclose(lowered(road, smoothed, estimate, 0.003), 0.0, atol=0.0)
