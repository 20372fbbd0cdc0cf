"""Plan alignments built from design elements: straights, circular arcs and clothoids.

Road designers lay out a centreline as a sequence of elements whose curvature is constant
(straight: zero; arc: 1/R) or varies linearly with station (clothoid, or Euler spiral). Curvature
is then piecewise linear in station, possibly with steps where an arc meets a straight without a
transition; heading is its exact integral (piecewise quadratic) and position the integral of
``(cos heading, sin heading)``. :class:`Alignment` holds such a centreline exactly and evaluates
it at any stations: it is the exact road against which fitted geometry and planned profiles are
judged, and the form design data take.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.polynomial import legendre

from .model import Geometry

#: Gauss-Legendre nodes per integration piece. Heading is quadratic within an element, and a
#: piece turns by at most _MAX_PIECE_TURN_RAD, so 12 nodes integrate cos and sin of it to
#: round-off (the rule is exact for polynomials of degree 23; the Taylor remainder of cos(theta)
#: over a turn of 0.25 rad at that degree is below 1e-20).
_GL_NODES = 12
#: Their nodes and weights, computed once (computing them costs more than using them).
_GL_X, _GL_W = legendre.leggauss(_GL_NODES)
#: Longest piece (metres) and largest turn across one piece (radians) for the position integral.
_MAX_PIECE_M = 20.0
_MAX_PIECE_TURN_RAD = 0.25


@dataclass(frozen=True)
class Element:
    """One design element: ``length_m`` long, curvature from ``start_1pm`` to ``end_1pm``.

    A straight has both curvatures zero, an arc both equal to ``1/R`` (signed, left positive),
    a clothoid any two values (curvature linear in station between them).
    """

    length_m: float
    start_1pm: float
    end_1pm: float

    def __post_init__(self):
        if not (math.isfinite(self.length_m) and self.length_m > 0):
            raise ValueError(f"element length must be positive, got {self.length_m!r}")
        if not (math.isfinite(self.start_1pm) and math.isfinite(self.end_1pm)):
            raise ValueError("element curvature must be finite")


def line(length_m: float) -> Element:
    """A straight of ``length_m`` metres."""
    return Element(float(length_m), 0.0, 0.0)


def arc(length_m: float, radius_m: float) -> Element:
    """A circular arc of ``length_m`` metres and signed radius (positive turns left)."""
    return Element(float(length_m), 1.0 / radius_m, 1.0 / radius_m)


def spiral(length_m: float, start_1pm: float, end_1pm: float) -> Element:
    """A clothoid whose curvature goes linearly from ``start_1pm`` to ``end_1pm``."""
    return Element(float(length_m), float(start_1pm), float(end_1pm))


def curve(deflection_deg: float, radius_m: float, spiral_m: float = 0.0) -> list[Element]:
    """Spiral in, arc, spiral out, turning the heading by ``deflection_deg`` (left positive).

    Each spiral turns by ``spiral_m / (2 R)``, so the arc is ``R |deflection| - spiral_m`` long.
    Without spirals the arc meets its neighbours with a curvature step.
    """
    k = math.copysign(1.0 / radius_m, deflection_deg)
    arc_m = radius_m * math.radians(abs(deflection_deg)) - spiral_m
    if arc_m <= 0:
        raise ValueError(f"spirals of {spiral_m} m leave no arc at radius {radius_m} m")
    out = [spiral(spiral_m, 0.0, k)] if spiral_m > 0 else []
    out.append(Element(arc_m, k, k))
    if spiral_m > 0:
        out.append(spiral(spiral_m, k, 0.0))
    return out


@dataclass(frozen=True)
class Alignment:
    """A plan alignment of design elements, evaluated exactly at any station.

    Attributes
    ----------
    elements : tuple of Element
        In driving order.
    x0_m, y0_m, heading0_rad : float
        Start point (metres) and heading (radians counter-clockwise from +x).
    """

    elements: tuple[Element, ...]
    x0_m: float = 0.0
    y0_m: float = 0.0
    heading0_rad: float = 0.0
    _start: np.ndarray = field(init=False, repr=False, compare=False)
    _pieces: tuple = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        if not self.elements:
            raise ValueError("an alignment needs at least one element")
        object.__setattr__(self, "elements", tuple(self.elements))
        lengths = np.array([e.length_m for e in self.elements])
        object.__setattr__(self, "_start", np.concatenate(([0.0], np.cumsum(lengths))))
        object.__setattr__(self, "_pieces", self._tabulate())

    @property
    def length_m(self) -> float:
        return float(self._start[-1])

    @property
    def breakpoints_m(self) -> np.ndarray:
        """Stations where one element meets the next (excluding 0 and the end)."""
        return self._start[1:-1].copy()

    # -- evaluation -----------------------------------------------------------------------------
    def _locate(self, s) -> tuple[np.ndarray, np.ndarray]:
        s = np.clip(np.asarray(s, dtype=float), 0.0, self.length_m)
        i = np.clip(np.searchsorted(self._start, s, side="right") - 1, 0, len(self.elements) - 1)
        return i, s - self._start[i]

    def _coeffs(self):
        k0 = np.array([e.start_1pm for e in self.elements])
        rate = np.array([(e.end_1pm - e.start_1pm) / e.length_m for e in self.elements])
        return k0, rate

    def curvature(self, s) -> np.ndarray:
        """Signed curvature at stations ``s`` (1/m); at a step, the value of the element ahead."""
        i, t = self._locate(s)
        k0, rate = self._coeffs()
        return k0[i] + rate[i] * t

    def curvature_rate(self, s) -> np.ndarray:
        """d curvature / d station at ``s`` (1/m^2)."""
        i, _ = self._locate(s)
        return self._coeffs()[1][i]

    def heading(self, s) -> np.ndarray:
        """Heading at stations ``s`` (radians, continuous)."""
        i, t = self._locate(s)
        k0, rate = self._coeffs()
        return self._heading_start[i] + k0[i] * t + 0.5 * rate[i] * t * t

    @property
    def _heading_start(self) -> np.ndarray:
        k0, rate = self._coeffs()
        lengths = np.diff(self._start)
        turn = k0 * lengths + 0.5 * rate * lengths**2
        return self.heading0_rad + np.concatenate(([0.0], np.cumsum(turn)))[:-1]

    def _tabulate(self):
        """Piece boundaries (station) and the position there, integrated piece by piece."""
        bounds = [0.0]
        for start, e in zip(self._start[:-1], self.elements):
            turn_rate = max(abs(e.start_1pm), abs(e.end_1pm))
            step = min(_MAX_PIECE_M, _MAX_PIECE_TURN_RAD / turn_rate if turn_rate else math.inf)
            n = max(1, math.ceil(e.length_m / step))
            bounds.extend(start + e.length_m * np.arange(1, n + 1) / n)
        bounds = np.array(bounds)
        bounds[-1] = self._start[-1]
        a, b = bounds[:-1], bounds[1:]
        dx, dy = self._integrate(a, b, self._locate(0.5 * (a + b))[0])
        x = self.x0_m + np.concatenate(([0.0], np.cumsum(dx)))
        y = self.y0_m + np.concatenate(([0.0], np.cumsum(dy)))
        return bounds, x, y

    def _integrate(self, a, b, element):
        """Integral of (cos, sin) heading from ``a`` to ``b`` within element ``element``."""
        nodes, weights = _GL_X, _GL_W
        k0, rate = self._coeffs()
        h0 = self._heading_start[element]
        start = self._start[element]
        half = 0.5 * (b - a)
        s = 0.5 * (a + b)[:, None] + half[:, None] * nodes[None, :]
        t = s - start[:, None]
        theta = h0[:, None] + k0[element][:, None] * t + 0.5 * rate[element][:, None] * t * t
        return half * (np.cos(theta) @ weights), half * (np.sin(theta) @ weights)

    def position(self, s) -> tuple[np.ndarray, np.ndarray]:
        """Plan position (x, y) at stations ``s``, metres."""
        s = np.clip(np.asarray(s, dtype=float), 0.0, self.length_m)
        bounds, bx, by = self._pieces
        j = np.clip(np.searchsorted(bounds, s, side="right") - 1, 0, bounds.size - 2)
        a = bounds[j]
        element = self._locate(0.5 * (a + bounds[j + 1]))[0]
        dx, dy = self._integrate(a.ravel(), s.ravel(), element.ravel())
        return bx[j] + dx.reshape(s.shape), by[j] + dy.reshape(s.shape)

    def to_geometry(self, spacing_m: float = 1.0, name: str = "alignment") -> Geometry:
        """The alignment at uniform stations (spacing shortened to divide the length).

        Curvature at a node where it steps is the value of the element ahead, except at the
        last node, which takes the value of the element behind.
        """
        n = max(1, math.ceil(self.length_m / spacing_m - 1e-9))
        s = self.length_m * np.arange(n + 1) / n
        x, y = self.position(s)
        kappa = self.curvature(s)
        e = self.elements[-1]
        kappa[-1] = e.end_1pm
        return Geometry(station_m=s, x_m=x, y_m=y, heading_rad=self.heading(s),
                        curvature_1pm=kappa, z_m=None, grade=None, closed=False,
                        spacing_m=float(s[1] - s[0]), name=name)
