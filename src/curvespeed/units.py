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


def format_apart(value: float, bound: float, decimals: int = 1) -> tuple[str, str]:
    """``value`` and ``bound`` as text with enough decimals that unequal numbers look unequal.

    For messages such as "stop at station 100000 m lies outside the route (0..99999.96 m)":
    one decimal unless that would print the two alike, then more (up to 9, then 17 significant
    digits). Plain numbers, never numpy reprs.
    """
    value, bound = float(value), float(bound)
    for places in range(decimals, 10):
        a, b = f"{value:.{places}f}", f"{bound:.{places}f}"
        if value == bound or float(a) != float(b):
            return _short(value, places), b
    return f"{value:.17g}", f"{bound:.17g}"


def _short(value: float, places: int) -> str:
    """``value`` with at most ``places`` decimals and no trailing zeros (100000, 12.5); in
    exponent form beyond a billion (1e+300, not three hundred digits)."""
    if abs(value) >= 1e9:
        return f"{value:g}"
    text = f"{value:.{places}f}".rstrip("0").rstrip(".")
    return text or "0"
