"""Do a profile's positions agree with its stations? A profile CSV states both, and export,
plot and replay trust each: export places its samples by station between the rows' positions,
replay drives the positions and ends the run at the last one. A file whose rows' positions were
edited, zeroed or shuffled apart from their stations must be refused, naming the line.

Between two consecutive rows the path is a curve of length ``ds`` (the station step) whose
curvature is about the rows' ``curvature_1pm``. Its chord (the straight-line distance between
the positions) is then

* never longer than ``ds``: no path between two points is shorter than the straight line;
* never much shorter than the chord of a circular arc of length ``ds`` with the larger of the
  two rows' curvatures, ``2 sin(k ds / 2) / k`` (a curve whose curvature stays below ``k``
  turns less, so its chord is longer, for ``k ds`` up to pi).

The allowances, each with its reason:

* the positions' rounding: the file's own (the coarsest decimal its x_m and y_m are written
  to; 0.1 mm as plan writes them), twice over per coordinate pair, since both rows are rounded;
* a relative 2e-3 of ``ds`` above it: a geographic route's stations are measured on the
  ellipsoid and its positions on a transverse Mercator plane, whose scale grows as
  1 + (d / R)^2 / 2 with the distance d from the origin: 1.2e-3 at 200 km, where routes are
  warned about as too wide for one projection anyway;
* below it, half the arc's chord: the curvature between two rows is a fitted curve's and may
  exceed both rows' values somewhat; "far shorter" is what the check is for (all positions
  zero, one row's position moved), not a fine test of the fit.
"""

from __future__ import annotations

import numpy as np

from ..errors import SpeedFileError

#: Relative allowance of a chord above its station step (projection scale, module docstring).
CHORD_ABOVE_STEP = 2e-3
#: Fraction of the arc's chord (curvature from the rows) a chord may not fall below.
CHORD_BELOW_ARC = 0.5


def position_rounding_m(x_m: np.ndarray, y_m: np.ndarray) -> float:
    """Half a unit of the last decimal the positions are written to (up to 9 decimals): the
    largest error rounding put into any of them, m."""
    values = np.concatenate((x_m, y_m))
    for decimals in range(10):
        scaled = values * 10.0 ** decimals
        # a value written to this many decimals, scaled, is a whole number but for the
        # float's own error (1e-16 of it, far below 1e-6 for any position a file may hold)
        off = np.abs(scaled - np.round(scaled))
        if np.all(off <= np.maximum(1e-6, 1e-14 * np.abs(scaled))):
            return 0.5 * 10.0 ** -decimals
    return 0.5e-9


def arc_chord_m(curvature_1pm: np.ndarray, ds: np.ndarray) -> np.ndarray:
    """Chord of a circular arc of length ``ds`` and curvature ``curvature_1pm`` (0 for an arc
    turning half a circle or more, where the chord no longer shrinks steadily)."""
    k = np.abs(curvature_1pm)
    half = 0.5 * k * ds
    with np.errstate(invalid="ignore", divide="ignore"):
        chord = np.where(k * ds < 1e-6, ds, 2.0 * np.sin(half) / np.where(k > 0, k, 1.0))
    return np.where(half >= 0.5 * np.pi, 0.0, chord)


def check_positions(sp, rounding_m: float | None = None) -> None:
    """Refuse a profile (:class:`~curvespeed.station_profile.StationProfile`) whose consecutive
    positions disagree with its stations (module docstring), at the first line that does.

    Raises
    ------
    SpeedFileError
        Naming the file, the two lines, the distance between their positions, the station step
        and what to do.
    """
    x, y, s = sp.x_m, sp.y_m, sp.station_m
    q = position_rounding_m(x, y) if rounding_m is None else rounding_m
    ds = np.diff(s)
    chord = np.hypot(np.diff(x), np.diff(y))
    # a file rounding its positions coarser than a quarter of a step (all zeros read as
    # whole metres) cannot hide a disagreement behind its rounding
    slack = np.minimum(2.0 * np.sqrt(2.0) * q, 0.25 * ds)
    k = np.maximum(np.abs(sp.curvature_1pm[:-1]), np.abs(sp.curvature_1pm[1:]))
    least = CHORD_BELOW_ARC * arc_chord_m(k, ds) - slack
    most = ds * (1.0 + CHORD_ABOVE_STEP) + slack
    bad = np.flatnonzero((chord > most) | (chord < least))
    if not bad.size:
        return
    j = int(bad[0])
    if chord[j] > most[j]:
        how = (f"longer than the station step {ds[j]:.4f} m (no path between two points is "
               "shorter than the straight line)")
    else:
        arc = float(arc_chord_m(k[j:j + 1], ds[j:j + 1])[0])
        how = (f"far shorter than the station step {ds[j]:.4f} m allows at curvature "
               f"{k[j]:.6g} 1/m (an arc that long has a chord of {arc:.4f} m)")
    raise SpeedFileError(
        f"{sp.source}: {sp.node_label(j + 1)}: its position (x_m, y_m) is {chord[j]:.4f} m from "
        f"that of {sp.node_label(j)}, {how}; the positions and stations of the file disagree "
        "(edited or damaged rows): plan the profile again with curvespeed plan")
