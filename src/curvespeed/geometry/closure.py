"""Whether a route is a loop: its ends meet, and joining them turns like the route does."""

from __future__ import annotations

import math
import warnings

import numpy as np

from ..errors import CurvespeedWarning, RouteGeometryError
from ..order_stats import median, percentile
from ..route import REVERSAL_TURN_DEG

#: An automatic loop needs its ends closer than this fraction of the route's length too.
CLOSURE_LENGTH_FRACTION = 0.25
#: The default closure tolerance is the larger of this many median point spacings ...
CLOSURE_SPACINGS = 2.0
#: ... and this many position-noise standard deviations.
CLOSURE_NOISE_SIGMAS = 6.0
#: An automatic loop also needs the join to turn no more than the route does elsewhere: each
#: turn at the seam (last chord to closing chord, closing chord to first chord; or last chord
#: to first chord when the ends nearly touch) at most this many degrees, or 1.5 times the
#: route's own 95th-percentile turn between chords if that is more. An out-and-back turns by
#: about 90 degrees at each joint of the seam, a loop like anywhere else on it.
CLOSURE_TURN_DEG = 45.0


def _turn_deg(ax: float, ay: float, bx: float, by: float) -> float:
    """Absolute turn from direction a to direction b, degrees in [0, 180]."""
    return abs(math.degrees(math.atan2(ax * by - ay * bx, ax * bx + ay * by)))


def decide_closure(x, y, where, source, closed, tolerance_m, noise_m) -> tuple[bool, bool]:
    """Whether the route is a loop, and whether its last point repeats the first."""
    if closed is False:
        return False, False
    gap = math.hypot(x[-1] - x[0], y[-1] - y[0])
    median_chord = median(np.hypot(np.diff(x), np.diff(y)))
    tol = (max(CLOSURE_SPACINGS * median_chord, CLOSURE_NOISE_SIGMAS * noise_m)
           if tolerance_m is None else float(tolerance_m))
    length = float(np.sum(np.hypot(np.diff(x), np.diff(y))))
    if closed is None and gap <= tol and gap <= CLOSURE_LENGTH_FRACTION * length:
        turn, allowed = _seam_turn(x, y, gap, median_chord)
        if allowed < turn <= REVERSAL_TURN_DEG:      # sharper: ends overlap (handled below)
            warnings.warn(
                f"{source}: the route ends {gap:.1f} m from its start, but joining them turns "
                f"by {turn:.0f} degrees where the route itself turns at most about "
                f"{allowed:.0f} (an out-and-back, not a loop), so it is kept open; pass "
                "--closed if it really is a loop", CurvespeedWarning, stacklevel=3)
            return False, False
    if closed is None and (gap > tol or gap > CLOSURE_LENGTH_FRACTION * length):
        if gap <= 10 * tol and gap <= CLOSURE_LENGTH_FRACTION * length:
            turning = float(np.sum(np.angle(np.exp(1j * np.diff(np.arctan2(np.diff(y),
                                                                             np.diff(x)))))))
            if abs(abs(turning) - 2 * math.pi) < math.radians(30):
                warnings.warn(
                    f"{source}: the route turns by {math.degrees(turning):.0f} degrees and ends "
                    f"{gap:.1f} m from its start, beyond the closure tolerance {tol:.2f} m, so "
                    "it is treated as open; pass --closed if it is a loop",
                    CurvespeedWarning, stacklevel=3)
        return False, False
    repeat = gap < 0.5 * median_chord
    last = x.size - 2 if repeat else x.size - 1          # last point kept
    if last < 2:
        raise RouteGeometryError(
            f"{source}: a loop needs at least 3 distinct points; this one has {last + 1}")
    # Chords meeting at the seam: into the last kept point, the closing chord, out of point 0.
    into = (x[last] - x[last - 1], y[last] - y[last - 1])
    closing = (x[0] - x[last], y[0] - y[last])
    out = (x[1] - x[0], y[1] - y[0])
    turns = (_turn_deg(*into, *closing), _turn_deg(*closing, *out))
    if max(turns) > REVERSAL_TURN_DEG:
        what = (f"joining {where[last]} back to {where[0]} turns by {max(turns):.0f} degrees; "
                "the last points run past the start")
        if closed:
            raise RouteGeometryError(
                f"{source}: cannot close the loop: {what}; remove the overlapping points or "
                "treat the route as open")
        warnings.warn(
            f"{source}: the route ends {gap:.2f} m from its start, but {what}, so it is treated "
            "as open; remove the overlapping points to make it a loop",
            CurvespeedWarning, stacklevel=3)
        return False, False
    if closed and gap > tol:
        warnings.warn(
            f"{source}: closing the loop bridges a gap of {gap:.1f} m from {where[-1]} back to "
            f"{where[0]} (tolerance {tol:.2f} m); check that the route is really a loop",
            CurvespeedWarning, stacklevel=3)
    return True, repeat


def _seam_turn(x, y, gap: float, median_chord: float) -> tuple[float, float]:
    """The largest turn (degrees) joining the route's end to its start, and the most allowed
    (see CLOSURE_TURN_DEG)."""
    heading = np.arctan2(np.diff(y), np.diff(x))
    turns = np.degrees(np.abs(np.angle(np.exp(1j * np.diff(heading)))))
    allowed = max(CLOSURE_TURN_DEG, 1.5 * percentile(turns, 95) if turns.size else 0.0)
    into = (x[-1] - x[-2], y[-1] - y[-2])
    out = (x[1] - x[0], y[1] - y[0])
    if gap <= 0.5 * median_chord:       # the last point repeats the first: last chord to first
        return _turn_deg(*into, *out), allowed
    closing = (x[0] - x[-1], y[0] - y[-1])
    return max(_turn_deg(*into, *closing), _turn_deg(*closing, *out)), allowed
