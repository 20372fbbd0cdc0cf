"""The report's drawings as inline SVG text: plan view, speed along the route, utilisation strip.

Drawn by our own code from :class:`~curvespeed.report.model.ReportData`, so a report needs no
plotting library and no network. Lines are thinned to at most two points per horizontal pixel
(the smallest and largest value in each, so no peak is lost). Every text is escaped.
"""

from __future__ import annotations

import html
import math

import numpy as np

from ..io._format import printable
from .model import ReportData
from .palette import BAND_ALPHA, LIGHT_GREY, ROLES, ZONE_ALPHA, curve_colour

WIDTH = 760
PAD_LEFT, PAD_RIGHT, PAD_TOP, PAD_BOTTOM = 52, 14, 22, 34


def _esc(text) -> str:
    """``text`` for the page: markup escaped, characters XML forbids replaced (a control
    character in a stop's or route's name)."""
    return html.escape(printable(str(text)), quote=True)


def _f(value: float) -> str:
    return f"{value:.1f}"


def nice_ticks(lo: float, hi: float, count: int = 6) -> list[float]:
    """Round tick values (1, 2 or 5 times a power of ten apart) covering ``[lo, hi]``."""
    span = max(hi - lo, 1e-9)
    raw = span / max(count - 1, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    return [first + i * step for i in range(int((hi - first) / step + 1e-9) + 1)]


def thin(y: np.ndarray, n_bins: int) -> np.ndarray:
    """Indices keeping each bin's smallest and largest value (all of them if few)."""
    n = y.size
    if n <= 2 * n_bins:
        return np.arange(n)
    edges = np.linspace(0, n, n_bins + 1).astype(int)
    keep = [0, n - 1]
    clean = np.nan_to_num(y, nan=0.0)
    for a, b in zip(edges[:-1], edges[1:]):
        if b > a:
            keep += [a + int(np.argmin(clean[a:b])), a + int(np.argmax(clean[a:b]))]
    return np.unique(keep)


class _Frame:
    """Maps station (x) and a value (y) to pixels inside the chart's padding."""

    def __init__(self, s0, s1, y0, y1, height):
        self.s0, self.s1, self.y0, self.y1, self.height = s0, s1, y0, y1, height
        self.left, self.right = PAD_LEFT, WIDTH - PAD_RIGHT
        self.top, self.bottom = PAD_TOP, height - PAD_BOTTOM

    def px(self, s):
        return self.left + (np.asarray(s) - self.s0) / (self.s1 - self.s0) * (self.right - self.left)

    def py(self, y):
        y = np.clip(np.asarray(y, dtype=float), self.y0, self.y1)
        return self.bottom - (y - self.y0) / (self.y1 - self.y0) * (self.bottom - self.top)

    def polyline(self, s, y, colour, width=1.6, dash=None, cls=""):
        idx = thin(np.asarray(y, dtype=float), int(self.right - self.left))
        pts = " ".join(f"{_f(a)},{_f(b)}" for a, b in zip(self.px(s[idx]), self.py(y[idx])))
        dashes = f' stroke-dasharray="{dash}"' if dash else ""
        return (f'<polyline class="{cls}" points="{pts}" fill="none" stroke="{colour}" '
                f'stroke-width="{width}"{dashes} stroke-linejoin="round"/>')

    def span(self, a, b, fill, opacity, cls="", extra=""):
        x0, x1 = self.px(a), self.px(b)
        return (f'<rect class="{cls}" x="{_f(x0)}" y="{_f(self.top)}" '
                f'width="{_f(max(x1 - x0, 0.8))}" height="{_f(self.bottom - self.top)}" '
                f'fill="{fill}" fill-opacity="{opacity}"{extra}/>')

    def axes(self, y_label: str, y_ticks, fmt="{:g}") -> str:
        out = [f'<rect x="{self.left}" y="{self.top}" width="{self.right - self.left}" '
               f'height="{self.bottom - self.top}" fill="none" stroke="{LIGHT_GREY}"/>']
        for t in nice_ticks(self.s0, self.s1, 8):
            x = _f(self.px(t))
            out.append(f'<line x1="{x}" x2="{x}" y1="{self.bottom}" y2="{self.bottom + 4}" '
                       f'stroke="#444"/><text x="{x}" y="{self.bottom + 15}" '
                       f'text-anchor="middle">{t:g}</text>')
        for t in y_ticks:
            y = _f(self.py(t))
            out.append(f'<line x1="{self.left}" x2="{self.right}" y1="{y}" y2="{y}" '
                       f'stroke="{LIGHT_GREY}" stroke-width="0.6"/><text x="{self.left - 5}" '
                       f'y="{y}" dy="0.32em" text-anchor="end">{fmt.format(t)}</text>')
        out.append(f'<text x="{(self.left + self.right) / 2:.0f}" y="{self.height - 4}" '
                   'text-anchor="middle">station (m)</text>')
        out.append(f'<text transform="translate(12 {(self.top + self.bottom) / 2:.0f}) '
                   f'rotate(-90)" text-anchor="middle">{_esc(y_label)}</text>')
        return "\n".join(out)


def _svg(ident: str, height: float, title: str, body: list[str]) -> str:
    return (f'<svg id="{ident}" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH} '
            f'{height:.0f}" role="img" aria-labelledby="{ident}-title" font-size="11" '
            f'font-family="sans-serif"><title id="{ident}-title">{_esc(title)}</title>\n'
            + "\n".join(body) + "\n</svg>")


def _curve_bands(frame: _Frame, data: ReportData, labels: bool) -> list[str]:
    out = []
    for c in data.curves:
        pieces = ([(c.start_m, c.end_m)] if c.end_m >= c.start_m else
                  [(c.start_m, frame.s1), (frame.s0, c.end_m)])      # across a loop's seam
        for a, b in pieces:
            out.append(frame.span(a, b, curve_colour(c.verdict) if c.verdict != "pass"
                                  else ROLES["curve"], BAND_ALPHA, "curve-band",
                                  f' data-curve="{c.number}"'))
        if labels:
            out.append(f'<text class="band-label" x="{_f(frame.px(c.tightest_station_m))}" '
                       f'y="{frame.top - 6}" text-anchor="middle">{c.number}</text>')
    return out


def speed_svg(data: ReportData) -> str:
    """Speed along the route: ceiling, curve bands (numbered), braking and launch zones."""
    height = 280
    s = data.station_m
    finite_ceiling = data.limit_speed_mps[np.isfinite(data.limit_speed_mps)]
    top = max(float(np.max(data.speed_mps)) * 1.15, 1.0)
    if finite_ceiling.size:
        top = max(top, min(float(np.max(finite_ceiling)), 1.5 * top) * 1.05)
    frame = _Frame(float(s[0]), float(s[-1]), 0.0, top, height)
    body = ['<defs><pattern id="brake-hatch" width="6" height="6" patternUnits="userSpaceOnUse" '
            'patternTransform="rotate(45)"><rect width="6" height="6" fill="'
            f'{ROLES["braking"]}" fill-opacity="{ZONE_ALPHA}"/><line x1="0" y1="0" x2="0" '
            f'y2="6" stroke="{ROLES["braking"]}" stroke-width="1.2" stroke-opacity="0.55"/>'
            '</pattern></defs>']
    body += _curve_bands(frame, data, labels=True)
    # braking and launch zones: a shaded strip along the foot of the chart
    foot = f' y="{_f(frame.bottom - 14)}" height="14"'
    body += [frame.span(a, b, "url(#brake-hatch)", 1.0, "braking-zone").replace(
        f' y="{_f(frame.top)}"', "").replace(
        f' height="{_f(frame.bottom - frame.top)}"', foot) for a, b in data.zones(-1)]
    body += [frame.span(a, b, ROLES["launch"], 2 * ZONE_ALPHA, "launch-zone").replace(
        f' y="{_f(frame.top)}"', "").replace(
        f' height="{_f(frame.bottom - frame.top)}"', foot) for a, b in data.zones(1)]
    body.append(frame.axes("speed (m/s)", nice_ticks(0.0, top, 6)))
    ceiling = np.where(np.isfinite(data.limit_speed_mps), data.limit_speed_mps, top)
    body.append(frame.polyline(s, ceiling, ROLES["ceiling"], 1.0, "5 3", "ceiling"))
    body.append(frame.polyline(s, data.speed_mps, ROLES["speed"], 1.8, cls="speed"))
    body += _stop_marks(frame, data)
    return _svg("speed-chart", height, "Speed along the route with curve bands, braking and "
                "launch zones", body)


def _stop_marks(frame: _Frame, data: ReportData) -> list[str]:
    """Each stop as a dotted vertical line with its name (or "stop") at the top, and its
    name, station and dwell as the line's tooltip."""
    out = []
    for stop in data.stops:
        x = _f(frame.px(stop.station_m))
        out.append(f'<g class="stop"><title>{_esc(stop.label())}</title><line x1="{x}" '
                   f'x2="{x}" y1="{_f(frame.top)}" y2="{_f(frame.bottom)}" '
                   f'stroke="{ROLES["start"]}" stroke-width="1" stroke-dasharray="2 3"/>'
                   f'<text class="stop-label" x="{x}" y="{_f(frame.top + 12)}" '
                   f'text-anchor="start" dx="3">{_esc(stop.name or "stop")}</text></g>')
    return out


def use_svg(data: ReportData) -> str:
    """Grip and comfort use along the route, per cent, with the 100 % line."""
    height = 170
    s = data.station_m
    if data.grip_use is None or data.comfort_use is None:
        return _svg("use-strip", 40, "Utilisation not known",
                    ['<text x="10" y="24">utilisation not known: the limits were not given</text>'])
    grip, comfort = 100 * data.grip_use, 100 * data.comfort_use
    top = max(110.0, 1.05 * float(np.nanmax(np.concatenate((grip, comfort)))))
    frame = _Frame(float(s[0]), float(s[-1]), 0.0, top, height)
    body = _curve_bands(frame, data, labels=False)
    body.append(frame.axes("use (%)", nice_ticks(0.0, top, 4)))
    y100 = _f(frame.py(100.0))
    body.append(f'<line class="limit" x1="{frame.left}" x2="{frame.right}" y1="{y100}" '
                f'y2="{y100}" stroke="{ROLES["limit"]}" stroke-dasharray="2 2"/>')
    body.append(frame.polyline(s, grip, ROLES["grip"], 1.5, cls="grip-use"))
    body.append(frame.polyline(s, comfort, ROLES["comfort"], 1.5, "6 3", "comfort-use"))
    return _svg("use-strip", height, "Grip and comfort use along the route, per cent", body)


def _plan_frame(x, y, width, height, pad=34):
    x0, x1, y0, y1 = float(x.min()), float(x.max()), float(y.min()), float(y.max())
    scale = min((width - 2 * pad) / max(x1 - x0, 1e-9), (height - 2 * pad) / max(y1 - y0, 1e-9))
    ox = pad + ((width - 2 * pad) - scale * (x1 - x0)) / 2 - scale * x0
    oy = height - pad - ((height - 2 * pad) - scale * (y1 - y0)) / 2 + scale * y0
    return scale, (lambda xs: ox + scale * np.asarray(xs)), (lambda ys: oy - scale * np.asarray(ys))


def _scale_bar(scale: float, height: float) -> str:
    target = 120 / scale                      # about 120 px of route
    power = 10.0 ** math.floor(math.log10(target))
    length = max(m * power for m in (1, 2, 5) if m * power <= target)
    px = length * scale
    return (f'<g class="scale-bar"><line x1="14" x2="{_f(14 + px)}" y1="{height - 12}" '
            f'y2="{height - 12}" stroke="#222" stroke-width="2"/><text x="14" '
            f'y="{height - 17}">{length:g} m</text></g>')


def plan_svg(data: ReportData) -> str:
    """The route in plan with its curves numbered as in the check table, advisory speeds beside."""
    x, y = data.x_m, data.y_m
    span_x, span_y = float(np.ptp(x)), float(np.ptp(y))
    height = float(np.clip(WIDTH * span_y / max(span_x, 1e-9), 260, 560))
    scale, px, py = _plan_frame(x, y, WIDTH, height)
    step = max(1, x.size // 3000)
    idx = np.unique(np.concatenate((np.arange(0, x.size, step), [x.size - 1])))
    path = " ".join(f"{_f(a)},{_f(b)}" for a, b in zip(px(x[idx]), py(y[idx])))
    body = [f'<polyline class="route" points="{path}" fill="none" stroke="{LIGHT_GREY}" '
            'stroke-width="5" stroke-linejoin="round" stroke-linecap="round"/>']
    body += [_plan_curve(c, data, px, py) for c in data.curves]
    body.append(f'<circle class="start" cx="{_f(px(x[0]))}" cy="{_f(py(y[0]))}" r="5" '
                f'fill="{ROLES["start"]}"/><text x="{_f(px(x[0]) + 8)}" '
                f'y="{_f(py(y[0]) - 6)}">start</text>')
    if not data.closed:
        body.append(f'<rect class="end" x="{_f(px(x[-1]) - 4)}" y="{_f(py(y[-1]) - 4)}" '
                    f'width="8" height="8" fill="{ROLES["start"]}"/><text '
                    f'x="{_f(px(x[-1]) + 8)}" y="{_f(py(y[-1]) + 12)}">end</text>')
    for stop in data.stops:
        sx = _f(px(float(np.interp(stop.station_m, data.station_m, x))))
        sy = _f(py(float(np.interp(stop.station_m, data.station_m, y))))
        body.append(f'<g class="stop"><title>{_esc(stop.label())}</title><rect x="{sx}" '
                    f'y="{sy}" width="7" height="7" transform="translate(-3.5 -3.5)" '
                    f'fill="white" stroke="{ROLES["start"]}" stroke-width="1.5"/><text '
                    f'x="{sx}" y="{sy}" dx="7" dy="-5">{_esc(stop.name or "stop")}</text></g>')
    placed: list[tuple[float, float]] = []
    body += [_curve_label(c, data, px, py, placed) for c in data.curves]
    body.append(_scale_bar(scale, height))
    return _svg("plan-view", height, "The route in plan, curves numbered as in the curve table "
                "with their advisory speeds", body)


def stations_between(s: np.ndarray, a: float, b: float) -> np.ndarray:
    """Indices of the stations from ``a`` to ``b``, across a loop's seam when ``b < a``."""
    if b >= a:
        return np.flatnonzero((s >= a) & (s <= b))
    return np.concatenate((np.flatnonzero(s >= a), np.flatnonzero(s <= b)))


def _plan_curve(c, data: ReportData, px, py) -> str:
    nodes = stations_between(data.station_m, c.start_m, c.end_m)
    if nodes.size < 2:
        return ""
    pts = " ".join(f"{_f(a)},{_f(b)}" for a, b in zip(px(data.x_m[nodes]), py(data.y_m[nodes])))
    dash = ' stroke-dasharray="7 4"' if c.verdict != "pass" else ""
    colour = curve_colour(c.verdict) if c.verdict != "pass" else ROLES["curve"]
    return (f'<polyline class="plan-curve" data-curve="{c.number}" points="{pts}" fill="none" '
            f'stroke="{colour}" stroke-width="5"{dash} stroke-linecap="round"/>')


def _curve_label(c, data: ReportData, px, py, placed: list) -> str:
    """A numbered disc outside the curve at its tightest point, the advisory speed beside it.

    Discs move further out (with a leader line) until clear of those ``placed`` before.
    """
    s, x, y = data.station_m, data.x_m, data.y_m
    k = int(np.clip(np.searchsorted(s, c.tightest_station_m), 1, s.size - 2))
    hx, hy = x[k + 1] - x[k - 1], y[k + 1] - y[k - 1]
    norm = math.hypot(hx, hy) or 1.0
    # the outside of a left-hand curve is to the right of travel, and the other way round
    side = -1.0 if c.direction == "left" else 1.0
    nx, ny = side * hy / norm, -side * hx / norm     # right-hand normal in plan (x east, y north)
    x0, y0 = float(px(x[k])), float(py(y[k]))
    for reach in (20, 40, 60, 80, 100, 120):
        cx, cy = x0 + reach * nx, y0 - reach * ny
        if all(abs(cx - a) > 58 or abs(cy - b) > 20 for a, b in placed):
            break
    placed.append((cx, cy))
    leader = (f'<line x1="{_f(x0)}" y1="{_f(y0)}" x2="{_f(cx)}" y2="{_f(cy)}" stroke="#888" '
              'stroke-width="0.8"/>') if reach > 20 else ""
    colour = curve_colour(c.verdict)
    advisory = "" if c.advisory_kmh is None else f"{c.advisory_kmh} km/h"
    anchor = "start" if nx >= 0 else "end"
    tx = cx + (13 if nx >= 0 else -13)
    return (f'<g class="curve-label" data-curve="{c.number}">{leader}<circle cx="{_f(cx)}" '
            f'cy="{_f(cy)}" r="9.5" fill="#fff" stroke="{colour}" stroke-width="2"/><text '
            f'x="{_f(cx)}" y="{_f(cy)}" dy="0.35em" text-anchor="middle" font-weight="bold">'
            f'{c.number}</text><text class="advisory" x="{_f(tx)}" y="{_f(cy)}" dy="0.35em" '
            f'text-anchor="{anchor}">{_esc(advisory)}</text></g>')
