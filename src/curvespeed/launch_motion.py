"""A launch from rest at the jerk bound, as the steps of a launch planned as its ramp drive it.

A time-optimal jerk-limited launch from rest (the double-S motion, Biagiotti & Melchiorri 2008,
section 3.4) ramps its acceleration at the bound ``J`` until it reaches its peak: the
acceleration cap, or where the move turns. :mod:`curvespeed.launch_steps` plans the steps
wholly inside that ramp as the ramp itself, and the step in which the ramp ends
(:func:`planned_launch`):

* where the move holds the cap, as a step from the ramp's acceleration at its near node to the
  cap at its far node, linearly in time (a jerk below ``J``; a profile's ``linear_accel`` step,
  which an exported trajectory drives exactly), the cap held after it;
* where the move turns below the cap, as the double-S motion itself: the ramp up to its peak,
  then ``-J`` (exported as the constant-jerk step with the same time, below the peak).

:class:`JerkPieces` is such a motion (constant jerk by pieces, from rest): time, speed and
acceleration at any time or distance, and a stretch's distance-weighted mean time
``int t ds / ds``, at which a step's mean acceleration ``(v'^2 - v^2) / (2 ds)`` is the
motion's wherever the acceleration is linear in time over the step; :func:`accel_phase` is the
closed form's acceleration phase. Nothing here reads or writes files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


def accel_phase(span_m: float, v_top: float, accel: float, jerk: float) -> tuple[float, float]:
    """``(Tj, Ta)`` of the double-S rest-to-rest move of ``span_m`` under ``v_top``, ``accel``
    and ``jerk`` (Biagiotti & Melchiorri 2008, section 3.4, symmetric case): the jerk ramp's
    duration and the whole acceleration phase's (the acceleration is at its peak ``J Tj`` for
    ``Ta - 2 Tj``)."""
    if v_top * jerk >= accel * accel:
        tj, ta = accel / jerk, accel / jerk + v_top / accel
    else:
        tj = math.sqrt(v_top / jerk)
        ta = 2.0 * tj
    if span_m >= v_top * ta:                    # top speed reached
        return tj, ta
    tj = accel / jerk
    ta = 0.5 * tj + math.sqrt(0.25 * tj * tj + span_m / accel)
    if ta >= 2.0 * tj:                          # the acceleration cap reached
        return tj, ta
    tj = (span_m / (2.0 * jerk)) ** (1.0 / 3.0)
    return tj, 2.0 * tj


@dataclass(frozen=True)
class JerkPieces:
    """A motion from rest whose jerk is ``jerk[i]`` from ``start_s[i]`` on (``start_s[0]`` is
    0; the last piece goes on for ever)."""

    start_s: tuple
    jerk: tuple

    def _knots(self):
        """Per piece: start time, jerk, and the distance, speed, acceleration at its start."""
        knots, s, v, a = [], 0.0, 0.0, 0.0
        for i, (t0, j) in enumerate(zip(self.start_s, self.jerk)):
            knots.append((t0, j, s, v, a))
            if i + 1 < len(self.start_s):
                h = self.start_s[i + 1] - t0
                s, v, a = (s + v * h + a * h * h / 2 + j * h ** 3 / 6, v + a * h + j * h * h / 2,
                           a + j * h)
        return knots

    def at_time(self, t):
        """Distance, speed and acceleration at times ``t >= 0``."""
        t = np.maximum(np.asarray(t, dtype=float), 0.0)
        s, v, a = np.zeros_like(t), np.zeros_like(t), np.zeros_like(t)
        for t0, j, s0, v0, a0 in self._knots():
            h = t - t0
            on = h >= 0.0
            s = np.where(on, s0 + v0 * h + a0 * h * h / 2 + j * h ** 3 / 6, s)
            v = np.where(on, v0 + a0 * h + j * h * h / 2, v)
            a = np.where(on, a0 + j * h, a)
        return s, v, a

    def time_at(self, distance, upper_s: float, iterations: int = 60):
        """Time at which the motion has covered ``distance`` (reached before ``upper_s``, while
        it moves forward): on the piece the distance falls in, the root of its cubic by Newton's
        method kept inside a shrinking bracket (bisection where a step would leave it), to the
        last bits."""
        d = np.atleast_1d(np.asarray(distance, dtype=float))
        knots = np.array(self._knots())
        k = np.clip(np.searchsorted(knots[:, 2], d, side="right") - 1, 0, len(knots) - 1)
        t0, j, s0, v0, a0 = knots[k].T
        ends = np.append(knots[1:, 0], max(upper_s, float(knots[-1, 0])))
        lo, hi = np.zeros_like(d), ends[k] - t0
        gap = d - s0
        h = 0.5 * (lo + hi)
        for _ in range(iterations):
            f = h * (v0 + h * (a0 / 2 + h * j / 6)) - gap
            lo, hi = np.where(f < 0.0, h, lo), np.where(f < 0.0, hi, h)
            slope = v0 + h * (a0 + h * j / 2)
            with np.errstate(divide="ignore", invalid="ignore"):
                step = h - f / slope
            h_new = np.where((slope > 0.0) & (step >= lo) & (step <= hi), step, 0.5 * (lo + hi))
            done = (np.abs(h_new - h) <= 4e-16 * (t0 + h)) | (gap <= 0.0)
            h = h_new
            if np.all(done):
                break
        out = t0 + np.where(gap > 0.0, h, 0.0)        # at a piece's start: its start time
        return out if np.ndim(distance) else out[0]

    def mean_time(self, t0, t1, ds: float):
        """Distance-weighted mean time of the stretches between times ``t0`` and ``t1``, each
        ``ds`` long: ``int t v dt / ds`` (``t v`` is a cubic on each piece, which two-point
        Gauss-Legendre integrates exactly)."""
        t0, t1 = np.asarray(t0, dtype=float), np.asarray(t1, dtype=float)
        breaks = list(self.start_s) + [max(float(np.max(t1)), self.start_s[-1])]
        total = np.zeros_like(t0)
        for lo, hi in zip(breaks[:-1], breaks[1:]):
            a, b = np.clip(t0, lo, hi), np.clip(t1, lo, hi)
            half, mid = 0.5 * (b - a), 0.5 * (b + a)
            for x in (-1.0 / math.sqrt(3.0), 1.0 / math.sqrt(3.0)):
                t = mid + half * x
                total = total + half * t * self.at_time(t)[1]
        return total / ds


def turns_below(peak: float, accel: float) -> bool:
    """Whether a ramp peaking at ``peak`` turns below the cap ``accel`` (beyond rounding)."""
    return peak < accel * (1.0 - 1e-9)


@dataclass(frozen=True)
class PlannedLaunch:
    """A launch as planned (module docstring): its ``motion``; ``corner``, the index from rest of
    the step in which its ramp ends (``[corner ds, (corner + 1) ds]``); ``peak_share``, where in
    that step's time the ramp ends (1: at its far node, or the step goes on to the cap; 0: at
    its near node); and a time by which the motion has covered two steps more, moving forward
    all along (a bracket for :meth:`JerkPieces.time_at`)."""

    motion: JerkPieces
    corner: int
    peak_share: float
    horizon_s: float

    def states(self, ds: float, n_nodes: int):
        """Time, speed and acceleration at the first ``n_nodes`` nodes from rest."""
        t = self.motion.time_at(np.arange(n_nodes) * ds, self.horizon_s)
        _, v, a = self.motion.at_time(t)
        return t, v, a


def planned_launch(ramp_m: float, accel: float, jerk: float, ds: float) -> PlannedLaunch:
    """The launch as planned (module docstring) for a jerk ramp from rest ``ramp_m`` long (at
    least one step), with ``accel`` the acceleration it may reach: where the ramp reaches it
    (``J^2 ramp_m >= accel^3 / 6``) the move holds it (a move that reaches it and soon leaves
    it is not planned so, :func:`curvespeed.launch_steps.closed_form_launches`); else the move
    turns at the ramp's peak and the step in which it does is the double-S motion's own (ramp,
    then ``-J``)."""
    m = max(int(math.ceil(ramp_m / ds - 1e-9)) - 1, 1)
    t_m = (6.0 * m * ds / jerk) ** (1.0 / 3.0)
    t_peak = (6.0 * ramp_m / jerk) ** (1.0 / 3.0)
    if turns_below(jerk * t_peak, accel):                  # the double-S turns at its peak
        tent = JerkPieces((0.0, t_peak), (jerk, -jerk))
        t_far = float(tent.time_at((m + 1) * ds, 3.0 * t_peak))
        share = min(max((t_peak - t_m) / (t_far - t_m), 0.0), 1.0)
        return PlannedLaunch(tent, m, share, 3.0 * t_peak)
    v_m, a_m = 0.5 * jerk * t_m * t_m, jerk * t_m
    # linear from a_m to the cap over the step: ds = v_m T + (2 a_m + accel) T^2 / 6
    qa, qb = (2.0 * a_m + accel) / 6.0, v_m
    step = 2.0 * ds / (qb + math.sqrt(qb * qb + 4.0 * qa * ds))
    return PlannedLaunch(JerkPieces((0.0, t_m, t_m + step), (jerk, (accel - a_m) / step, 0.0)),
                         m, 1.0, 3.0 * (t_m + step))
