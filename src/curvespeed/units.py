"""Unit conversions, in one place. Everything inside curvespeed is SI; convert only at the edges."""

from __future__ import annotations

#: Standard gravity, m/s^2 (ISO 80000-3 conventional value).
STANDARD_GRAVITY_MPS2 = 9.80665

KMH_PER_MPS = 3.6
MPH_PER_MPS = 3600.0 / 1609.344


def kmh_to_mps(v_kmh: float) -> float:
    return v_kmh / KMH_PER_MPS


def mps_to_kmh(v_mps: float) -> float:
    return v_mps * KMH_PER_MPS


def mph_to_mps(v_mph: float) -> float:
    return v_mph / MPH_PER_MPS


def mps_to_mph(v_mps: float) -> float:
    return v_mps * MPH_PER_MPS
