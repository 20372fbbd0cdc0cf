"""Reference lines of road design data, evaluated exactly: lines, arcs, clothoids and cubics.

A road's reference line is a chain of plan elements, each with its own start point and heading
and a station ``s`` along the road. Straights, arcs and clothoids are evaluated by
:class:`~curvespeed.geometry.elements.Alignment` (heading and curvature in closed form, position
by Gauss-Legendre quadrature to round-off). Two cubic forms are evaluated here:

* :class:`Poly3Curve` -- ``v(u) = a + b u + c u^2 + d u^3`` in a local frame (u along the start
  heading, v to its left); station is arc length, so ``u`` is found from ``s`` by inverting the
  arc-length integral (Newton's method on quadrature, to round-off);
* :class:`ParamPoly3Curve` -- ``u(p)``, ``v(p)`` both cubic in a parameter ``p`` that runs
  either over ``[0, length]`` (``arc_length=True``) or over ``[0, 1]``; ``p`` is linear in the
  station, as the design data define it.

Every curve answers, at offsets ``ds`` from its start: position, heading and signed curvature
(analytic: ``atan2(v', u')`` and ``(u'v'' - v'u'') / (u'^2 + v'^2)^{3/2}``), the curvature's
rate along the station, and ``g = |dr/ds|`` with its rate (1 and 0 where the station is arc
length). :class:`ReferenceLine` strings curves together; :class:`Piecewise3` holds the
piecewise cubics in station that elevation, superelevation, lane offset and lane widths use.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.polynomial import legendre

from .elements import Alignment, Element

#: Gauss-Legendre nodes per arc-length piece of a cubic. The integrand sqrt(u'^2 + v'^2) is
#: smooth (a square root of a quartic bounded away from zero); over pieces of at most
#: _PIECE_P parameter units 10 nodes integrate it to round-off for any road-sized cubic.
_GL_NODES, _GL_WEIGHTS = legendre.leggauss(10)
#: Longest parameter piece of the arc-length table, in parameter units (metres for poly3).
_PIECE_P = 2.0
#: Newton steps that refine the parameter of an arc length (quadratic convergence from the
#: table's linear interpolation, whose error is far below a metre).
_NEWTON_STEPS = 6


@dataclass(frozen=True)
class CurvePoint:
    """A reference line evaluated at stations: arrays of equal shape.

    ``heading_rad`` is the direction of the tangent, ``curvature_1pm`` signed (left positive),
    ``curvature_rate_1pm2`` its derivative along the station, ``speed`` = ``|dr/ds|`` (1 where
    the station is arc length) and ``speed_rate_1pm`` its derivative along the station.
    """

    x_m: np.ndarray
    y_m: np.ndarray
    heading_rad: np.ndarray
    curvature_1pm: np.ndarray
    curvature_rate_1pm2: np.ndarray
    speed: np.ndarray
    speed_rate_1pm: np.ndarray


class ElementCurve:
    """A straight, arc or clothoid starting at ``(x0, y0)`` with heading ``h0``."""

    def __init__(self, x0: float, y0: float, h0: float, length: float, k0: float, k1: float):
        self.length_m = float(length)
        self._alignment = Alignment((Element(self.length_m, k0, k1),), x0, y0, h0)

    def evaluate(self, ds) -> CurvePoint:
        ds = np.asarray(ds, dtype=float)
        a = self._alignment
        x, y = a.position(ds)
        one = np.ones_like(ds)
        return CurvePoint(x, y, a.heading(ds), a.curvature(ds), a.curvature_rate(ds) * one,
                          one, 0.0 * one)


class _ParametricCubic:
    """``(u(p), v(p))`` cubic in ``p``, placed at ``(x0, y0)`` rotated by ``h0``."""

    def __init__(self, x0, y0, h0, u_coef, v_coef):
        self.x0, self.y0, self.h0 = float(x0), float(y0), float(h0)
        self.u = np.polynomial.Polynomial(u_coef)
        self.v = np.polynomial.Polynomial(v_coef)
        self.du, self.dv = self.u.deriv(), self.v.deriv()
        self.ddu, self.ddv = self.du.deriv(), self.dv.deriv()
        self.dddu, self.dddv = self.ddu.deriv(), self.ddv.deriv()

    def speed(self, p):
        return np.hypot(self.du(p), self.dv(p))

    def arc_length(self, a, b):
        """Arc length from ``a`` to ``b`` (arrays), by Gauss-Legendre quadrature."""
        a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
        half = 0.5 * (b - a)
        p = 0.5 * (a + b)[..., None] + half[..., None] * _GL_NODES
        return half * (self.speed(p) @ _GL_WEIGHTS)

    def point(self, p, dp_ds):
        """Position, heading, curvature (and its rate), |dr/ds| and its rate at parameter p,
        for a station that advances the parameter at ``dp_ds`` (scalar or array)."""
        u1, v1, u2, v2 = self.du(p), self.dv(p), self.ddu(p), self.ddv(p)
        u3, v3 = self.dddu(p), self.dddv(p)
        c, s = math.cos(self.h0), math.sin(self.h0)
        u, v = self.u(p), self.v(p)
        x = self.x0 + c * u - s * v
        y = self.y0 + s * u + c * v
        d = u1 * u1 + v1 * v1
        n = u1 * v2 - v1 * u2
        kappa = n / d**1.5
        dkappa_dp = (u1 * v3 - v1 * u3) / d**1.5 - 1.5 * n * 2.0 * (u1 * u2 + v1 * v2) / d**2.5
        root = np.sqrt(d)
        return CurvePoint(x, y, self.h0 + np.arctan2(v1, u1), kappa, dkappa_dp * dp_ds,
                          root * dp_ds, (u1 * u2 + v1 * v2) / root * dp_ds * dp_ds)


class ParamPoly3Curve:
    """A parametric cubic; ``p = ds`` (``arc_length=True``) or ``p = ds / length``."""

    def __init__(self, x0, y0, h0, length, u_coef, v_coef, arc_length: bool):
        self.length_m = float(length)
        self._cubic = _ParametricCubic(x0, y0, h0, u_coef, v_coef)
        self._scale = 1.0 if arc_length else 1.0 / self.length_m

    def evaluate(self, ds) -> CurvePoint:
        ds = np.asarray(ds, dtype=float)
        return self._cubic.point(ds * self._scale, self._scale)

    def true_length_m(self) -> float:
        """Arc length of the whole element (it may differ from the declared length)."""
        n = max(1, math.ceil(self.length_m * self._scale / _PIECE_P))
        edges = np.linspace(0.0, self.length_m * self._scale, n + 1)
        return float(np.sum(self._cubic.arc_length(edges[:-1], edges[1:])))


class Poly3Curve:
    """``v(u) = a + b u + c u^2 + d u^3`` in the local frame; the station is arc length."""

    def __init__(self, x0, y0, h0, length, a, b, c, d):
        self.length_m = float(length)
        self._cubic = _ParametricCubic(x0, y0, h0, (0.0, 1.0), (a, b, c, d))
        # u <= arc length, so u in [0, length] covers the element
        n = max(1, math.ceil(self.length_m / _PIECE_P))
        self._p = np.linspace(0.0, self.length_m, n + 1)
        pieces = self._cubic.arc_length(self._p[:-1], self._p[1:])
        self._sigma = np.concatenate(([0.0], np.cumsum(pieces)))

    def parameter(self, ds) -> np.ndarray:
        """The local ``u`` at arc length ``ds`` (inverse of the arc-length integral)."""
        ds = np.asarray(ds, dtype=float)
        p = np.interp(ds, self._sigma, self._p)
        for _ in range(_NEWTON_STEPS):
            j = np.clip(np.searchsorted(self._p, p, side="right") - 1, 0, self._p.size - 2)
            sigma = self._sigma[j] + self._cubic.arc_length(self._p[j], p)
            p = p - (sigma - ds) / self._cubic.speed(p)
        return p

    def evaluate(self, ds) -> CurvePoint:
        p = self.parameter(ds)
        point = self._cubic.point(p, 1.0 / self._cubic.speed(p))
        # the station is arc length: |dr/ds| is 1 and does not change
        one = np.ones_like(p)
        return CurvePoint(point.x_m, point.y_m, point.heading_rad, point.curvature_1pm,
                          point.curvature_rate_1pm2, one, 0.0 * one)


@dataclass(frozen=True)
class ReferenceLine:
    """Plan curves of one road in station order; ``starts_m[i]`` is where curve i begins."""

    starts_m: np.ndarray
    curves: tuple

    @property
    def length_m(self) -> float:
        return float(self.starts_m[-1] + self.curves[-1].length_m)

    def evaluate(self, s) -> CurvePoint:
        """The reference line at stations ``s`` (each in the element that starts at or
        before it; the end of the road in the last element)."""
        s = np.atleast_1d(np.asarray(s, dtype=float))
        i = np.clip(np.searchsorted(self.starts_m, s, side="right") - 1, 0, len(self.curves) - 1)
        out = {name: np.empty_like(s) for name in CurvePoint.__dataclass_fields__}
        for k in np.unique(i):
            mask = i == k
            point = self.curves[k].evaluate(s[mask] - self.starts_m[k])
            for name in out:
                out[name][mask] = getattr(point, name)
        return CurvePoint(**out)


@dataclass(frozen=True)
class Piecewise3:
    """A piecewise cubic in station: record ``i`` holds from ``starts_m[i]`` to the next start,
    ``coef[i] = (a, b, c, d)`` in ``ds = s - starts_m[i]``; zero where there are no records
    and before the first (the design data's default)."""

    starts_m: np.ndarray = field(default_factory=lambda: np.zeros(0))
    coef: np.ndarray = field(default_factory=lambda: np.zeros((0, 4)))

    def __call__(self, s, derivative: int = 0) -> np.ndarray:
        s = np.asarray(s, dtype=float)
        if not self.starts_m.size:
            return np.zeros_like(s)
        i = np.clip(np.searchsorted(self.starts_m, s, side="right") - 1, 0, self.starts_m.size - 1)
        t = s - self.starts_m[i]
        a, b, c, d = (self.coef[i, j] for j in range(4))
        if derivative == 0:
            out = a + t * (b + t * (c + t * d))
        elif derivative == 1:
            out = b + t * (2.0 * c + 3.0 * t * d)
        elif derivative == 2:
            out = 2.0 * c + 6.0 * t * d
        else:
            raise ValueError("derivative must be 0, 1 or 2")
        return np.where(s < self.starts_m[0], 0.0, out)

    def scaled(self, weight: float) -> "Piecewise3":
        return Piecewise3(self.starts_m, self.coef * weight)


def sum_piecewise(parts, s, derivative: int = 0) -> np.ndarray:
    """Sum of several :class:`Piecewise3` at ``s``."""
    total = np.zeros_like(np.asarray(s, dtype=float))
    for part in parts:
        total = total + part(s, derivative)
    return total
