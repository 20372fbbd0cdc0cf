"""Simulated recorded drives: an exact design alignment driven and logged by a positioning receiver.

A drive follows an exact :class:`~curvespeed.geometry.elements.Alignment` (straights, clothoids,
arcs) with a realistic speed: limited by a lateral acceleration in curves and a top speed,
reached and left with bounded acceleration and deceleration, from rest at the start, to rest at
the end and at every stop, with a dwell at each. The receiver logs at a fixed rate; each fix is the
true position plus two errors per coordinate, as satellite positioning errors are usually
modelled (common practice; /work/shared/REFERENCES.md "Positioning logs"):

* a white part, independent from fix to fix;
* a slowly drifting part, a first-order Gauss-Markov process
  ``e_k = exp(-dt/tau) e_{k-1} + w_k`` with ``std(w) = sigma sqrt(1 - exp(-2 dt/tau))``, so its
  standard deviation is ``sigma`` at every fix and its correlation time ``tau``.

Typical levels (common practice, ranges recalled from memory): RTK fixed solutions 1-2 cm
horizontal; single-frequency consumer receivers 1-3 m horizontal, most of it slowly varying over
tens of seconds to minutes; vertical errors about 1.5-2 times the horizontal.

Everything here is invented for the tests; the roads are no real roads.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from curvespeed.geometry.elements import Alignment, curve, line, spiral


@dataclass(frozen=True)
class Receiver:
    """Error model of a positioning receiver (standard deviations per coordinate, metres)."""

    white_m: float
    drift_m: float
    drift_tau_s: float
    vertical_factor: float = 1.7     # vertical errors ~1.5-2x horizontal (common practice)


#: RTK fixed solution: 1 cm white, 1 cm drifting over a minute (common practice, from memory).
RTK = Receiver(white_m=0.01, drift_m=0.01, drift_tau_s=60.0)
#: Consumer single-frequency receiver: 0.5 m white, 1.5 m drifting over a minute (common
#: practice, from memory: 1-3 m in all, most of it slowly varying).
CONSUMER = Receiver(white_m=0.5, drift_m=1.5, drift_tau_s=60.0)


@dataclass(frozen=True)
class DriveLog:
    """One simulated log: fix times, positions and the true station of every fix."""

    time_s: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    z_m: np.ndarray | None
    true_station_m: np.ndarray
    alignment: Alignment


def invented_road(x0=500.0, y0=-200.0, heading0=0.3) -> Alignment:
    """An invented 3.2 km road: straights, arcs of R 80-400 m with and without clothoids,
    a reverse curve and a tight R 25 m bend. Radii 80 m and up except one."""
    elements = [line(250.0), *curve(60, 200.0, 60.0), line(300.0), *curve(-90, 80.0, 40.0),
                line(120.0), *curve(45, 400.0), line(200.0), *curve(-40, 150.0, 50.0),
                *curve(40, 150.0, 50.0), line(250.0), *curve(110, 25.0, 20.0), line(300.0),
                *curve(-70, 300.0, 80.0), line(200.0)]
    return Alignment(tuple(elements), x0, y0, heading0)


def arc_interiors(alignment: Alignment, margin_m: float) -> list[tuple[float, float, float]]:
    """(start, end, curvature) of every constant-curvature, non-zero element, shrunk by
    ``margin_m`` at both ends (skipped when nothing is left)."""
    out = []
    s = 0.0
    for e in alignment.elements:
        if e.start_1pm == e.end_1pm != 0.0 and e.length_m > 2 * margin_m:
            out.append((s + margin_m, s + e.length_m - margin_m, e.start_1pm))
        s += e.length_m
    return out


def tightest_bend(alignment: Alignment) -> tuple[float, float]:
    """(start, end) stations of the run of curved elements (its clothoids and arc) that holds
    the road's tightest arc."""
    ends = np.cumsum([0.0] + [e.length_m for e in alignment.elements])
    sharp = [max(abs(e.start_1pm), abs(e.end_1pm)) for e in alignment.elements]
    lo = hi = int(np.argmax(sharp))
    while lo > 0 and sharp[lo - 1] > 0.0:
        lo -= 1
    while hi < len(sharp) - 1 and sharp[hi + 1] > 0.0:
        hi += 1
    return float(ends[lo]), float(ends[hi + 1])


def straight_interiors(alignment: Alignment, margin_m: float) -> list[tuple[float, float]]:
    out = []
    s = 0.0
    for e in alignment.elements:
        if e.start_1pm == e.end_1pm == 0.0 and e.length_m > 2 * margin_m:
            out.append((s + margin_m, s + e.length_m - margin_m))
        s += e.length_m
    return out


def driving_speed(alignment: Alignment, stops=(), top_speed=25.0, lat_accel=2.0, accel=1.2,
                  decel=1.8, ds=0.25, end_speeds=(0.0, 0.0)) -> tuple[np.ndarray, np.ndarray]:
    """Speed (m/s) on a station grid: curves at ``lat_accel``, rest at the stops and the ends
    speeds ``end_speeds`` (m/s; at most what the curves and ``top_speed`` allow there)."""
    n = max(2, math.ceil(alignment.length_m / ds))
    s = np.linspace(0.0, alignment.length_m, n + 1)
    kappa = np.abs(alignment.curvature(s))
    cap = np.minimum(top_speed**2, lat_accel / np.maximum(kappa, 1e-12))
    cap[[0, -1]] = np.minimum(cap[[0, -1]], np.square(end_speeds))
    for stop in stops:
        cap[int(np.argmin(np.abs(s - stop)))] = 0.0
    b = cap.copy()
    step = s[1] - s[0]
    for i in range(1, b.size):
        b[i] = min(b[i], b[i - 1] + 2 * accel * step)
    for i in range(b.size - 2, -1, -1):
        b[i] = min(b[i], b[i + 1] + 2 * decel * step)
    return s, np.sqrt(b)


def station_timeline(s, v, dwell_s: float, stops=(), start_dwell_s=None, end_dwell_s=None):
    """Time (s) at each grid station, with a dwell at rest at every stop and at both ends (an
    end driven through at speed has none)."""
    dt = np.zeros(s.size)
    vm = v[:-1] + v[1:]
    dt[1:] = np.where(vm > 0, 2 * np.diff(s) / np.where(vm > 0, vm, 1), 0.0)
    t = np.cumsum(dt)
    dwell = np.zeros(s.size)
    for stop in stops:
        dwell[int(np.argmin(np.abs(s - stop)))] += dwell_s
    dwell[0] += (dwell_s if start_dwell_s is None else start_dwell_s) if v[0] == 0.0 else 0.0
    dwell[-1] += (dwell_s if end_dwell_s is None else end_dwell_s) if v[-1] == 0.0 else 0.0
    # arrival and departure times at each grid station (they differ only where it dwells)
    arrive = t + np.concatenate(([0.0], np.cumsum(dwell)[:-1]))
    leave = arrive + dwell
    return arrive, leave


def gauss_markov(n: int, dt: float, sigma: float, tau: float, rng) -> np.ndarray:
    """Stationary first-order Gauss-Markov sequence with standard deviation ``sigma``."""
    if sigma == 0.0:
        return np.zeros(n)
    phi = math.exp(-dt / tau)
    w = rng.normal(0.0, sigma * math.sqrt(1.0 - phi * phi), n)
    w[0] = rng.normal(0.0, sigma)
    # e_k = phi e_{k-1} + w_k, as a linear filter
    from scipy.signal import lfilter

    return lfilter([1.0], [1.0, -phi], w)


def simulate_drive(alignment: Alignment, rate_hz: float, receiver: Receiver, seed: int = 0,
                   stops=(), dwell_s: float = 20.0, top_speed=25.0, lat_accel=2.0,
                   elevation=None, start_dwell_s=None, end_dwell_s=None,
                   end_speeds=(0.0, 0.0)) -> DriveLog:
    """Drive ``alignment`` and log it at ``rate_hz`` with ``receiver``'s errors.

    ``elevation`` is an optional function of station giving the true elevation (metres).
    ``end_speeds``: the speeds (m/s) the drive starts and ends at; 0 (at rest, with a dwell) by
    default, as a log that begins and ends parked; above 0 the log begins or ends on the move,
    as one cut out of a longer drive.
    """
    rng = np.random.default_rng(seed)
    s, v = driving_speed(alignment, stops, top_speed, lat_accel, end_speeds=end_speeds)
    arrive, leave = station_timeline(s, v, dwell_s, stops, start_dwell_s, end_dwell_s)
    t_end = leave[-1]
    t = np.arange(0.0, t_end + 1e-9, 1.0 / rate_hz)
    # station at time t: interleave arrival/departure times (dwell: station constant)
    times = np.column_stack((arrive, leave)).ravel()
    stations = np.repeat(s, 2)
    true_s = np.interp(t, times, stations)
    x, y = alignment.position(true_s)
    dt = 1.0 / rate_hz
    n = t.size
    ex = rng.normal(0.0, receiver.white_m, n) + gauss_markov(n, dt, receiver.drift_m,
                                                             receiver.drift_tau_s, rng)
    ey = rng.normal(0.0, receiver.white_m, n) + gauss_markov(n, dt, receiver.drift_m,
                                                             receiver.drift_tau_s, rng)
    z = None
    if elevation is not None:
        f = receiver.vertical_factor
        ez = rng.normal(0.0, f * receiver.white_m, n) + gauss_markov(
            n, dt, f * receiver.drift_m, receiver.drift_tau_s, rng)
        z = elevation(true_s) + ez
    return DriveLog(t, x + ex, y + ey, z, true_s, alignment)


def simulate_reversal(alignment: Alignment, forward_to_m: float, back_to_m: float,
                      rate_hz: float, receiver: Receiver, seed: int = 0,
                      dwell_s: float = 10.0, top_speed: float = 8.0) -> DriveLog:
    """Drive forwards from the start to ``forward_to_m``, stop, and back up to ``back_to_m``
    (a manoeuvre, not a route: the log a vehicle reversing into a bay leaves)."""
    rng = np.random.default_rng(seed)
    legs = []
    t0 = 0.0
    for start, end in ((0.0, forward_to_m), (forward_to_m, back_to_m)):
        length = abs(end - start)
        straight = Alignment((line(length),))
        s, v = driving_speed(straight, (), top_speed, 2.0)
        arrive, leave = station_timeline(s, v, dwell_s, (), None, None)
        t = np.arange(0.0, leave[-1], 1.0 / rate_hz)
        along = np.interp(t, np.column_stack((arrive, leave)).ravel(), np.repeat(s, 2))
        legs.append((t0 + t, start + np.sign(end - start) * along))
        t0 += leave[-1]
    t = np.concatenate([a for a, _ in legs])
    true_s = np.concatenate([b for _, b in legs])
    x, y = alignment.position(true_s)
    n, dt = t.size, 1.0 / rate_hz
    ex = rng.normal(0.0, receiver.white_m, n) + gauss_markov(n, dt, receiver.drift_m,
                                                             receiver.drift_tau_s, rng)
    ey = rng.normal(0.0, receiver.white_m, n) + gauss_markov(n, dt, receiver.drift_m,
                                                             receiver.drift_tau_s, rng)
    return DriveLog(t, x + ex, y + ey, None, true_s, alignment)


def log_route(log: DriveLog, source: str = "drive.gpx"):
    """The log as a :class:`~curvespeed.route.Route`, as a reader would make it from a file with
    time stamps (labels ``trkpt N``)."""
    from curvespeed.route import make_route

    where = [f"trkpt {i + 1}" for i in range(log.time_s.size)]
    return make_route(log.x_m, log.y_m, log.z_m, where=where, source=source,
                      time_s=log.time_s)


def write_gpx(logs, path, lat0: float = -35.0, lon0: float = -20.0) -> None:
    """Write logs as the tracks of one GPX 1.1 file (one track each, with time stamps), placed
    by a transverse Mercator at an invented open-ocean origin."""
    from datetime import datetime, timedelta, timezone

    from pyproj import Transformer

    to_latlon = Transformer.from_crs(
        f"+proj=tmerc +lat_0={lat0} +lon_0={lon0} +k=1 +x_0=0 +y_0=0 +ellps=WGS84",
        "EPSG:4326", always_xy=True)
    t0 = datetime(2026, 5, 1, 10, 0, 0, tzinfo=timezone.utc)
    parts = ['<?xml version="1.0" encoding="UTF-8"?>',
             '<gpx version="1.1" creator="curvespeed tests" '
             'xmlns="http://www.topografix.com/GPX/1/1">']
    for k, log in enumerate(logs):
        lon, lat = to_latlon.transform(log.x_m, log.y_m)
        parts.append(f"<trk><name>invented drive {k + 1}</name><trkseg>")
        for la, lo, t in zip(lat, lon, log.time_s):
            stamp = (t0 + timedelta(seconds=float(t))).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
            parts.append(f'<trkpt lat="{la:.8f}" lon="{lo:.8f}"><time>{stamp}</time></trkpt>')
        parts.append("</trkseg></trk>")
    parts.append("</gpx>")
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write("\n".join(parts) + "\n")
