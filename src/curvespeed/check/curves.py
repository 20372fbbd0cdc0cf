"""Curves of a route, and stretches of stations: how ``check`` groups what it finds."""

from __future__ import annotations

import math

import numpy as np

from ..geometry import Geometry
from .settings import NO_CAP_MPS, CurveSettings


def find_curves(geometry: Geometry, settings: CurveSettings = CurveSettings()) -> list[np.ndarray]:
    """Split the route into curves; return each curve's node indices in driving order.

    1. A station is *in a curve* where ``|curvature| > 1 / settings.radius_m``; runs of such
       stations turning the same way are curve pieces (a change of direction always starts a
       new piece).
    2. Pieces turning the same way with at most ``join_gap_m`` of straighter road between them
       are joined (a curve whose curvature dips briefly, or GPS noise).
    3. Curves shorter than ``min_length_m`` or turning less than ``min_turn_deg`` in all are
       dropped as blips.

    On a closed route a curve may run across the seam; its indices then wrap (n-1 -> 0). The
    duplicate seam node ``n`` is never listed.
    """
    kappa = geometry.curvature_1pm
    s = geometry.station_m
    m = kappa.size - 1 if geometry.closed else kappa.size
    k = kappa[:m]
    threshold = 1.0 / settings.radius_m
    sign = np.where(k > threshold, 1, np.where(k < -threshold, -1, 0))
    edges = np.flatnonzero(np.diff(np.concatenate(([0], sign, [0]))) != 0)
    pieces = []                                   # [first, last, sign] of runs of equal sign
    for a, b in zip(edges[:-1], edges[1:]):
        if sign[a] != 0:
            pieces.append([int(a), int(b) - 1, int(sign[a])])
    joined: list[list[int]] = []
    for piece in pieces:
        if joined and joined[-1][2] == piece[2] and s[piece[0]] - s[joined[-1][1]] <= \
                settings.join_gap_m + 1e-9:
            joined[-1][1] = piece[1]
        else:
            joined.append(piece)
    length = geometry.length_m
    wrap = False
    if geometry.closed and len(joined) >= 2 and joined[0][2] == joined[-1][2]:
        gap = (length - s[joined[-1][1]]) + s[joined[0][0]]
        if gap <= settings.join_gap_m + 1e-9:
            wrap = True
    curves = []
    if wrap:
        last = joined.pop()
        first = joined.pop(0)
        curves.append(np.concatenate((np.arange(last[0], m), np.arange(0, first[1] + 1))))
    elif geometry.closed and len(joined) == 1 and joined[0][0] == 0 and joined[0][1] == m - 1:
        curves.append(np.arange(0, m))             # the whole loop is one curve (a circle)
        joined = []
    curves.extend(np.arange(a, b + 1) for a, b, _ in joined)
    keep = []
    ds = geometry.spacing_m
    for nodes in curves:
        extent = extent_m(nodes, geometry)
        turn = abs(float(np.sum(kappa[nodes]))) * ds
        if extent + 1e-9 >= settings.min_length_m and \
                math.degrees(turn) + 1e-9 >= settings.min_turn_deg:
            keep.append(nodes)
    keep.sort(key=lambda nodes: s[nodes[0]])
    return keep


def extent_m(nodes: np.ndarray, geometry: Geometry) -> float:
    """Length from the first to the last node of a curve, metres (wrap-aware)."""
    s = geometry.station_m
    d = s[nodes[-1]] - s[nodes[0]]
    return float(d if d >= 0 else d + geometry.length_m)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """First and last index of each run of True in ``mask``."""
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(np.int8), [0]))))
    return [(int(a), int(b) - 1) for a, b in zip(edges[::2], edges[1::2])]


def stretches(mask: np.ndarray, key: np.ndarray, station_m: np.ndarray,
               join_gap_m: float) -> list[tuple[int, int]]:
    """Runs of True in ``mask``, split where ``key`` changes, then runs with the same key less
    than ``join_gap_m`` apart merged."""
    pieces = []
    for a, b in _runs(mask):
        cuts = np.flatnonzero(key[a + 1:b + 1] != key[a:b]) + a + 1
        starts = [a] + cuts.tolist()
        ends = (cuts - 1).tolist() + [b]
        pieces.extend(zip(starts, ends))
    merged: list[tuple[int, int]] = []
    for a, b in pieces:
        if merged and key[a] == key[merged[-1][1]] and \
                station_m[a] - station_m[merged[-1][1]] <= join_gap_m + 1e-9:
            merged[-1] = (merged[-1][0], b)
        else:
            merged.append((a, b))
    return merged


def territories(curve_nodes: list[np.ndarray], geometry: Geometry):
    """Which curve each station is nearest to, and each curve's stations widened by one step.

    Returns ``(territory, near)``: ``territory[k]`` is the index of the curve nearest to
    station k along the route (-1 when there is no curve), ``near[c, k]`` is True on curve c's
    stations and one station either side (the verifier gives a station the use of the worse of
    its two steps, so a curve's excess shows one step beyond it).
    """
    s = geometry.station_m
    n = s.size
    length = geometry.length_m
    territory = np.full(n, -1)
    near = np.zeros((len(curve_nodes), n), dtype=bool)
    if not curve_nodes:
        return territory, near
    distance = np.empty((len(curve_nodes), n))
    for c, nodes in enumerate(curve_nodes):
        inside = np.zeros(n, dtype=bool)
        inside[nodes] = True
        if geometry.closed:
            inside[-1] = inside[0]
        ends = []
        for end in (s[nodes[0]], s[nodes[-1]]):
            d = np.abs(s - end)
            ends.append(np.minimum(d, length - d) if geometry.closed else d)
        distance[c] = np.where(inside, 0.0, np.minimum(*ends))
        widened = inside.copy()
        widened[1:] |= inside[:-1]
        widened[:-1] |= inside[1:]
        if geometry.closed:
            widened[0] |= inside[-2]
            widened[-1] |= inside[1]
        near[c] = widened
    territory = np.argmin(distance, axis=0)
    return territory, near


def brake_targets(reach_b: np.ndarray, ceiling_b: np.ndarray, closed: bool) -> np.ndarray:
    """For each station, the next station after it where the brake reach rests on a curve's
    lateral ceiling (the curve it must brake for), or -1 if there is none ahead."""
    n = reach_b.size
    binding = (reach_b >= ceiling_b * (1.0 - 1e-9)) & (ceiling_b < 0.5 * NO_CAP_MPS ** 2)
    m = n - 1 if closed else n
    idx = np.arange(m)
    if closed:
        # two laps so a station near the end of the lap sees the curves after the seam
        idx = np.concatenate((idx, idx))
    following = np.full(idx.size, -1)
    nxt = -1
    for pos in range(idx.size - 1, -1, -1):
        following[pos] = nxt
        if binding[idx[pos]]:
            nxt = int(idx[pos])
    out = np.full(n, -1)
    out[:m] = following[:m]
    if closed:
        out[-1] = out[0]
    else:
        out[-1] = -1
    return out

