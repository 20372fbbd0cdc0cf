"""How sharp is a step of curvature? Candidate roads compared with the points like for like.

An arc entered without a clothoid is a jump of curvature; a smoothing spline spreads it over
several metres and rings on either side (:mod:`.alignment` reads where it lies). From the
smoothed curvature alone one cannot tell how the road gets from one level to the other, so the
bound near a step has had to assume the larger level over the whole smear: metres of a straight
planned as if they were already the arc.

The points say more than the smoothed curvature does. :func:`confirm_steps` lays out candidate
roads for each step the alignment found: its two neighbouring elements (their fitted lines)
joined by a transition of length ``L`` (0: a jump; else a clothoid) centred at ``c``, over a
grid of both. Each candidate's positions at the points' stations, moved rigidly onto the points
(least squares), are smoothed by the *same* smoother as the points were (the fine scale: the fit
is linear in the data, so the smoothed candidate is the points' fit plus the smoothed
difference), and its curvature is compared with the points' own smoothed curvature. A candidate
whose smoothed curvature stays within ``gamma`` standard deviations of the points' (their noise,
by Monte Carlo) everywhere its transition and ringing reach cannot be told apart from the road
by these points. The bound there is the largest |curvature| over all such candidates, at each
station over the station steps either side (the planner holds a node's limit over the steps
next to it), plus ``gamma`` standard deviations of the lines and each line's misfit level (how
far the fine estimate departs from it beyond its noise, for a line that is not quite the road's
element). When no candidate fits (the
"step" is something else: a hairpin, a bump the lines do not describe), nothing changes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Transition lengths tried, in smoothing spread widths (0: a jump). A transition as long as the
#: spread is resolved by the fine scale and read as its own element by the alignment.
LENGTHS = (0.0, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.6, 0.8, 1.0)
#: Centres tried: within the step's location uncertainty (and one metre), every
#: CENTRE_FRACTION of the spread width but at most every 0.1 m (on exact 1 m points the fit
#: already separates centres 0.25 m apart by 5 standard deviations).
CENTRE_FRACTION = 0.02
CENTRE_STEP_M = 0.1
#: A transition is compared only where its jump is at least this many times what the
#: comparison can tell apart (``gamma`` standard deviations of the fine curvature): where noise
#: is that large every candidate fits (simulated logs, tests/test_reference_recorded_drives.py:
#: RTK at 100 Hz, jumps of 1.4 gamma sd, and consumer logs accepted every candidate) and the
#: candidates' lines, not the points, would set the bound. On exact design points the jumps of
#: arcs entered without a clothoid are 80 gamma sd and a few percent of the candidates fit.
RESOLVED = 4.0
#: How far from a transition the candidates are compared with the points, and the bound set
#: from them, in spread widths of the fine scale (as far as the fine scale spreads and rings a
#: jump, twice over). Farther, the candidates' lines stand for the road less well: at 4, points
#: with 5 cm of noise on the winding road let a line fitted across a straight and a clothoid
#: set the bound 3 % short of the clothoid 58 m past the step (tests/test_reference_steps.py).
REACH = 2.0
#: Shortest element, in spread widths of the fine scale, whose line a candidate may join: the
#: fine scale blurs each end of an element over a spread width and rings over another, so only
#: a longer element has an interior whose curvature is its own; a shorter one's line is read
#: off its ends' blur and need not be the road's. Logs at 1 Hz (fixes 11-14 m apart) showed it:
#: a consumer receiver's log (spread 54 m) read an arc of 104 m entered without a clothoid as
#: part of one line rising over 187 m, and candidates joining it set the bound 30-68 % short of
#: the arc; an RTK log (spread 22 m) read a 40 m clothoid and a 60 m arc as lines 2-8 % short
#: (tests/test_reference_steps.py). On exact points every element is at least 4.6 spread widths.
MIN_LINE_SPREADS = 4.0
#: Largest number of (point, candidate) pairs one transition is compared on, about 0.5 s;
#: denser logs (a fix every 0.2 m planned at 10 m stations) keep the bound they had.
MAX_WORK = 3_000_000
#: Coefficients solved for beyond the compared window, in spread widths (each about four
#: smoothing lengths; the smoother's influence falls by about e^-1 per smoothing length).
MARGIN = 2.0
#: Integration step for the candidates' positions, in spread widths (their curvature is
#: piecewise linear; the trapezoid rule on heading and position errs by O(h^2 kappa^2) per
#: metre: at 1 % of a 5 m spread and R 60 m, under 1e-7 m over the window).
GRID_FRACTION = 0.01


@dataclass(frozen=True)
class ConfirmedSteps:
    """Where candidate roads explain the points near steps: ``explained`` (stations), the
    bound there and the curvature of the candidate that fits best (1/m; NaN elsewhere)."""

    explained: np.ndarray
    bound: np.ndarray
    kappa: np.ndarray        # the best-fitting candidate's curvature there (NaN elsewhere)
    centres: tuple = ()      # (centre m, how far it may be off m) of each explained transition


@dataclass(frozen=True)
class FineScale:
    """The smoother the alignment was read from: its normal equations (``system``, ``rho``),
    the derivatives of the points' fit at the nodes (``d1``, ``d2``), its curvature and that
    curvature's standard deviation under the points' noise, and its spread width (m)."""

    system: object
    rho: float
    d1: np.ndarray
    d2: np.ndarray
    kappa: np.ndarray
    sd: np.ndarray
    spread_m: float


def confirm_steps(rebuilt, fine: FineScale, u_points: np.ndarray, values: np.ndarray,
                  weight: np.ndarray, u_nodes: np.ndarray, station: np.ndarray,
                  gamma: float) -> ConfirmedSteps:
    """Candidate roads at each step of ``rebuilt`` (a :class:`.alignment.Reconstruction`)
    compared with the points (see the module docstring)."""
    n = station.size
    explained = np.zeros(n, dtype=bool)
    bound = np.full(n, np.nan)
    best = np.full(n, np.nan)
    centres = []
    point_station = np.interp(u_points, u_nodes, station)
    edges = np.concatenate(([-np.inf], rebuilt.breaks_m, [np.inf]))
    ends = np.concatenate(([station[0]], rebuilt.breaks_m, [station[-1]]))
    for left, right, centre, reach in _transitions(rebuilt, edges, fine.spread_m):
        if min(ends[left + 1] - ends[left], ends[right + 1] - ends[right]) < (
                MIN_LINE_SPREADS * fine.spread_m):
            continue        # a line read off its ends' blur: no candidate stands for the road
        near = _Step(rebuilt, left, right, centre, edges, station, fine.spread_m)
        if near.evaluate.size < 3 or abs(near.right[0] - near.left[0]) < (
                RESOLVED * gamma * float(np.max(fine.sd[near.evaluate]))):
            continue
        cands = near.candidates(reach)
        in_window = np.count_nonzero((point_station >= near.grid[0])
                                     & (point_station <= near.grid[-1]))
        if in_window * cands.shape[1] > MAX_WORK:
            continue        # too dense a log for the comparison: the bound stays as it was
        misfit = _misfit(near, cands, fine, u_points, point_station, values, weight, u_nodes)
        z = np.max(np.abs(misfit) / fine.sd[near.evaluate][:, None], axis=0)
        ok = z <= gamma
        if not ok.any():
            continue
        ds = float(station[1] - station[0])
        at = near.evaluate
        kappa = near.curvature(cands[:, ok])
        own = _node_max(near.grid, np.abs(kappa), station[at], ds)
        # where the points read more curvature than a candidate smoothed alike, the road may
        # have more than the candidate there: that excess, averaged over half a spread (as the
        # alignment's own bound does), is added to it
        sign = np.sign(kappa[np.minimum(np.searchsorted(near.grid, station[at]),
                                        near.grid.size - 1)])
        half = math.ceil(0.25 * fine.spread_m / ds)
        missed = np.maximum(_moving_mean(-sign * misfit[:, ok], max(1, half)), 0.0)
        explained[at] = True
        centres.append((centre, reach))
        # plus the lines' own uncertainty: gamma standard deviations, and what the fine estimate
        # departs from them beyond its noise (a candidate is only as good as its lines: an RTK
        # log at 2 Hz read a clothoid into an arc as a jump 19 m early, and the line joined
        # after it, fitted across the rest of the clothoid and the arc, let the candidates
        # bound the arc 0.8 % short; tests/test_certificate_exact_roads.py)
        bound[at] = (np.max(own + missed, axis=1) + gamma * near.line_sd(rebuilt.sd, station)
                     + rebuilt.misfit_level[at])
        fit = near.curvature(cands[:, [int(np.argmin(z))]])[:, 0]
        best[at] = np.interp(station[at], near.grid, fit)
    return ConfirmedSteps(explained, bound, best, tuple(centres))


def transition_zone(confirmed: ConfirmedSteps, station: np.ndarray,
                    width: np.ndarray) -> np.ndarray:
    """Stations within ``width`` (per station: the adaptive estimate's spread, taken where
    the transition is) of where an explained transition may lie: its smear and ringing reach
    that far in the adaptive estimate."""
    mask = np.zeros(station.size, dtype=bool)
    for centre, reach in confirmed.centres:
        at = min(int(np.searchsorted(station, centre)), station.size - 1)
        mask |= np.abs(station - centre) <= reach + width[at]
    return mask


def _transitions(rebuilt, edges: np.ndarray, spread: float):
    """(element before, element after, centre m, how far the centre may be off m) of every step, and of every
    element shorter than two spread widths between two kinks: a transition the fine scale
    cannot resolve either (a short clothoid, or a step read as one)."""
    out = [(m, m + 1, float(rebuilt.breaks_m[m]), float(rebuilt.reach_m[m]))
           for m in np.flatnonzero(rebuilt.step)]
    for e in range(1, edges.size - 2):
        a, b = edges[e], edges[e + 1]
        if b - a < 2.0 * spread and not rebuilt.step[e - 1] and not rebuilt.step[e]:
            out.append((e - 1, e + 1, 0.5 * (a + b), 0.5 * (b - a) + 1.0))
    return out


class _Step:
    """One transition between the elements ``left`` and ``right`` (the next, or the one after a
    short element in between): the neighbourhood compared (nodes ``evaluate``: as far as the smear
    and ringing reach, within those elements) and the candidates' curvature on a fine grid."""

    def __init__(self, rebuilt, left: int, right: int, centre: float, edges: np.ndarray,
                 station: np.ndarray, spread: float):
        self.b = centre
        self.spread = spread
        ds = float(station[1] - station[0])
        lo = max(edges[left], self.b - REACH * spread)     # the element before the transition
        hi = min(edges[right + 1], self.b + REACH * spread)  # and the one after
        self.evaluate = np.flatnonzero((station >= lo) & (station <= hi))
        self.between = (edges[left + 1], edges[right])      # a short element's span, if any
        (ia, sa), (ib, sb) = rebuilt.lines[left], rebuilt.lines[right]
        x0 = float(station[0])
        # the lines are in station-index units; in metres from the step:
        self.left = (ia + sa * (self.b - x0) / ds, sa / ds)
        self.right = (ib + sb * (self.b - x0) / ds, sb / ds)
        # beyond the two elements the reconstruction's own curvature (neighbouring kinks)
        self.reach = 1.5 * spread                  # the smoother's reach past the compared nodes
        self.h = GRID_FRACTION * spread
        self.grid = np.arange(lo - self.reach, hi + self.reach + self.h, self.h)
        self.outside = np.interp(self.grid, station, rebuilt.kappa)
        self.inside = (self.grid >= edges[left]) & (self.grid <= edges[right + 1])

    def line_sd(self, sd: np.ndarray, station: np.ndarray) -> np.ndarray:
        """The lines' standard deviation at the compared nodes: a short element between the
        two (``between``) is not a line of the candidates, so there the larger of its
        neighbours' at their ends counts."""
        at = self.evaluate
        out = sd[at].copy()
        a, b = self.between
        inside = (station[at] > a) & (station[at] < b)
        if inside.any():
            ends = np.searchsorted(station, [a, b])
            out[inside] = max(sd[max(ends[0] - 1, 0)], sd[min(ends[1], station.size - 1)])
        return out

    def candidates(self, reach_m: float) -> np.ndarray:
        """(2, K): transition length and centre offset (m) of every candidate."""
        half = max(reach_m, 1.0)
        step = max(CENTRE_STEP_M, CENTRE_FRACTION * self.spread)
        offsets = np.arange(-half, half + 1e-9, step)
        lengths = np.array(LENGTHS) * self.spread
        L, c = np.meshgrid(lengths, offsets, indexing="ij")
        return np.vstack((L.ravel(), c.ravel()))

    def curvature(self, cands: np.ndarray) -> np.ndarray:
        """(grid, K) curvature of the candidates."""
        t = (self.grid - self.b)[:, None]
        L, c = cands[0][None, :], cands[1][None, :]
        left = self.left[0] + self.left[1] * t
        right = self.right[0] + self.right[1] * t
        start = c - 0.5 * L
        f = np.clip((t - start) / np.maximum(L, 1e-12), 0.0, 1.0)
        f = np.where(L > 0, f, (t >= c).astype(float))
        k = left + f * (right - left)
        return np.where(self.inside[:, None], k, self.outside[:, None])


def _misfit(near: _Step, cands, fine: FineScale, u_points, point_station, values, weight,
            u_nodes) -> np.ndarray:
    """(nodes, K) smoothed curvature of each candidate minus the points' smoothed curvature."""
    kappa = near.curvature(cands)
    h = near.h
    heading = np.vstack((np.zeros(kappa.shape[1]),
                         np.cumsum(0.5 * h * (kappa[1:] + kappa[:-1]), axis=0)))
    cos, sin = np.cos(heading), np.sin(heading)
    x = np.vstack((np.zeros(kappa.shape[1]), np.cumsum(0.5 * h * (cos[1:] + cos[:-1]), axis=0)))
    y = np.vstack((np.zeros(kappa.shape[1]), np.cumsum(0.5 * h * (sin[1:] + sin[:-1]), axis=0)))
    pts = np.flatnonzero((point_station >= near.grid[0]) & (point_station <= near.grid[-1]))
    # the candidates at the points' stations, each moved rigidly onto the points (weighted
    # least squares rotation and translation), tapered to the points towards the window's ends
    at = np.clip((point_station[pts] - near.grid[0]) / h, 0, near.grid.size - 1.000001)
    i0 = at.astype(np.intp)
    f = (at - i0)[:, None]
    mx = (1 - f) * x[i0] + f * x[i0 + 1]
    my = (1 - f) * y[i0] + f * y[i0 + 1]
    w2 = weight[pts] ** 2
    data = values[pts]
    dx, dy = _rigid_fit(mx, my, data, w2)
    taper = _taper(point_station[pts], near.grid[0], near.grid[-1], near.reach)
    diff = np.empty((pts.size, 2 * cands.shape[1]))
    diff[:, 0::2] = taper[:, None] * dx
    diff[:, 1::2] = taper[:, None] * dy
    # solved on the coefficients near the window only: MARGIN spread widths beyond it
    margin = MARGIN * near.spread * (u_points[pts[-1]] - u_points[pts[0]]) / max(
        point_station[pts[-1]] - point_station[pts[0]], 1e-9)
    pert, _ = fine.system.local_response(fine.rho, diff, pts, margin)
    nodes = near.evaluate
    e1 = pert(u_nodes[nodes], nu=1).reshape(nodes.size, -1, 2)
    e2 = pert(u_nodes[nodes], nu=2).reshape(nodes.size, -1, 2)
    p1 = fine.d1[nodes][:, None, :] + e1
    p2 = fine.d2[nodes][:, None, :] + e2
    curv = (p1[..., 0] * p2[..., 1] - p1[..., 1] * p2[..., 0]) / np.hypot(
        p1[..., 0], p1[..., 1]) ** 3
    return curv - fine.kappa[nodes][:, None]


def _rigid_fit(mx, my, data, w2):
    """Candidate minus points after the weighted least-squares rotation and translation of
    each candidate (columns) onto the points (Kabsch in 2-D: one angle)."""
    wsum = float(w2.sum())
    cx, cy = (w2 @ mx) / wsum, (w2 @ my) / wsum
    px, py = (w2 @ data[:, 0]) / wsum, (w2 @ data[:, 1]) / wsum
    ax, ay = mx - cx, my - cy
    bx, by = (data[:, 0] - px)[:, None], (data[:, 1] - py)[:, None]
    s_cos = w2 @ (ax * bx + ay * by)
    s_sin = w2 @ (ax * by - ay * bx)
    angle = np.arctan2(s_sin, s_cos)
    c, s = np.cos(angle), np.sin(angle)
    rx = c * ax - s * ay + px
    ry = s * ax + c * ay + py
    return rx - data[:, 0][:, None], ry - data[:, 1][:, None]


def _taper(s, lo, hi, ramp):
    """1 inside, a raised cosine to 0 over ``ramp`` metres at each end of ``[lo, hi]``."""
    d = np.minimum(s - lo, hi - s) / max(ramp, 1e-9)
    return np.where(d >= 1.0, 1.0, 0.5 - 0.5 * np.cos(math.pi * np.clip(d, 0.0, 1.0)))


def _node_max(grid, values, nodes, ds):
    """(nodes, K): at each node the largest of ``values`` (grid, K) within a station step."""
    lo = np.searchsorted(grid, nodes - ds, side="left")
    hi = np.searchsorted(grid, nodes + ds, side="right")
    return np.array([values[a:b].max(axis=0) for a, b in zip(lo, hi)])


def _moving_mean(values: np.ndarray, half: int) -> np.ndarray:
    """Mean over ``2 half + 1`` rows centred on each row (ends padded with the end rows)."""
    padded = np.pad(values, ((half, half), (0, 0)), mode="edge")
    csum = np.vstack((np.zeros((1, values.shape[1])), np.cumsum(padded, axis=0)))
    return (csum[2 * half + 1:] - csum[: -2 * half - 1]) / (2 * half + 1)
