"""Resampled route geometry: stations at uniform arc-length spacing with heading and curvature.

:func:`build_geometry` fits a smoothing spline to the route's points and resamples it by true
arc length. The node convention used by every later step (limits, solvers, writers):

* nodes ``0..n`` at stations ``station_m[k] = k * spacing_m`` with ``station_m[n] = length_m``;
* ``n`` steps between consecutive nodes, all of length ``spacing_m``;
* on a closed route node ``n`` is node ``0`` again (same position, heading modulo 2 pi,
  curvature), so the seam row appears twice and a lap is exactly ``length_m``.
"""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import legendre
from scipy import sparse, special
from scipy.interpolate import BSpline
from scipy.linalg import LinAlgError, solveh_banded
from scipy.optimize import brentq

from .errors import CurvespeedWarning, RouteGeometryError
from .geodesy import LocalProjection
from .route import REVERSAL_TURN_DEG, Route


@dataclass(frozen=True)
class Geometry:
    """A route resampled at uniform station spacing.

    Attributes
    ----------
    station_m : ndarray, shape (n+1,)
        Arc length along the fitted path from the start, metres.
    x_m, y_m : ndarray
        Plan position, metres.
    heading_rad : ndarray
        Direction of travel, radians counter-clockwise from +x, continuous (unwrapped).
    curvature_1pm : ndarray
        Signed curvature, 1/m, positive turning left.
    z_m, grade : ndarray or None
        Elevation (metres) and grade dz/ds (rise over run, + uphill) where the route had elevation.
    closed : bool
        True when the route is a loop (node n coincides with node 0).
    spacing_m : float
        Station step, metres (the requested spacing, shortened so it divides the length).
    projection : LocalProjection or None
        Maps x, y back to latitude/longitude for geographic routes.
    source, name : str
        Where the route came from, for messages and titles.
    """

    station_m: np.ndarray
    x_m: np.ndarray
    y_m: np.ndarray
    heading_rad: np.ndarray
    curvature_1pm: np.ndarray
    z_m: np.ndarray | None
    grade: np.ndarray | None
    closed: bool
    spacing_m: float
    projection: LocalProjection | None = None
    source: str = "route"
    name: str = "route"

    @property
    def n_nodes(self) -> int:
        return int(self.station_m.size)

    @property
    def length_m(self) -> float:
        return float(self.station_m[-1])

    def latlon(self) -> tuple[np.ndarray, np.ndarray] | None:
        """Latitude and longitude of every node, degrees, or None for a metric route."""
        if self.projection is None:
            return None
        return self.projection.to_latlon(self.x_m, self.y_m)

    def total_turning_rad(self) -> float:
        """Integral of curvature over the route (heading change), radians."""
        return float(self.heading_rad[-1] - self.heading_rad[0])


# ---------------------------------------------------------------------------------------------
# Choices of the fit (the reasons are in build_geometry's docstring).

#: Degree of the fitted B-spline. Quintic: curvature (second derivative) is twice continuously
#: differentiable, so its rate of change along the route, which sets lateral jerk at constant
#: speed, is continuous too.
SPLINE_DEGREE = 5
#: Order of the coefficient differences the smoothing penalises (fourth differences ~ c'''').
PENALTY_ORDER = 4
#: Knot intervals per median spacing of the points in the first fit (see _knot_spacing).
KNOTS_PER_SPACING = 2
#: Elevation noise assumed when none is given (standard deviation, metres).
DEFAULT_ELEVATION_NOISE_M = 0.1
#: Most stations a geometry may have (5000 km at 1 m); more is a wrong spacing or a stray point.
MAX_STATIONS = 5_000_000
#: An automatic loop needs its ends closer than this fraction of the route's length too.
CLOSURE_LENGTH_FRACTION = 0.25
#: The default closure tolerance is the larger of this many median point spacings ...
CLOSURE_SPACINGS = 2.0
#: ... and this many position-noise standard deviations.
CLOSURE_NOISE_SIGMAS = 6.0
#: Positions are never taken to be more precise than this (standard deviation, metres): survey
#: coordinates are quoted to the millimetre (common practice). Only matters for exact synthetic
#: points, whose scatter estimate is zero or round-off.
MIN_POSITION_NOISE_M = 1e-3
#: Neighbours on each side of a point used to predict it in :func:`estimate_scatter`: a quintic
#: (degree 2 * 3 - 1, the spline's own degree) through the three points before and after.
SCATTER_NEIGHBOURS = 3
#: Where the fitted path's speed along its parameter falls below this fraction of its median it
#: nearly stands still and turns (a cusp); curvature there describes the points' scatter.
CUSP_SPEED_FRACTION = 0.05

_SCATTER_BOUND_LEVEL = float(special.ndtr(-2.0))   # one-sided, two standard deviations
_GAUSS_NODES = 10                    # Gauss-Legendre nodes per arc-length piece
_LOG_LAMBDA_RANGE = (-6.0, 12.0)     # smoothing weight searched: rho = log10(lam / lam0)
_LOG_LAMBDA_XTOL = 1e-4              # in rho: residual sum within ~0.05 % of its target
_LOG_LAMBDA_PROBES = (16.0, 14.0)    # rho up to which a wider knot spacing is estimated
_LOG_LAMBDA_AIM = 8.0                # rho aimed at after widening the knot spacing
_LOG_LAMBDA_REFINE = 5.0             # below: smoothing over < ~2 knot intervals, refine grid
_MAX_START_INTERVALS = 200_000       # first knot grid at most this fine (refined if needed)
_MAX_REGRIDS = 8
_MIN_PERIODIC_INTERVALS = 2 * (SPLINE_DEGREE + 1)
_ARC_PIECE_M = 2.0                   # longest piece of parameter one Gauss-Legendre rule spans
_NEWTON_TOL = 1e-11                  # arc-length inversion: station error / half a piece
_NEWTON_MAX_ITER = 60


def build_geometry(route: Route, spacing_m: float = 1.0, position_noise_m: float = 0.05,
                   elevation_noise_m: float | None = None, closed: bool | None = None,
                   closure_tolerance_m: float | None = None) -> Geometry:
    """Fit a smoothing spline to a route and resample it at uniform arc-length spacing.

    Parameters
    ----------
    route : Route
        Points in driving order (see :func:`curvespeed.route.make_route`).
    spacing_m : float
        Requested station spacing, metres. The spacing used is ``L / ceil(L / spacing_m)`` so
        that it divides the fitted length ``L``; it is stored in ``Geometry.spacing_m``.
    position_noise_m : float
        Expected position noise of the points: standard deviation per coordinate, metres. It
        sets how closely the spline follows the points, as an upper bound: points that show
        less scatter than this are followed as closely as their own scatter allows (see Notes,
        *Noise the points show*).
    elevation_noise_m : float, optional
        Expected elevation noise (standard deviation, metres); default 0.1 m, which suits
        surveyed or map-derived heights. Raw satellite-receiver heights scatter by metres
        (common practice): pass a matching value or the grade will be noisy.
    closed : bool, optional
        True joins the last point to the first and fits a periodic spline; False keeps the
        route open; None (default) closes it when its last point lies within
        ``closure_tolerance_m`` of its first and the join does not double back.
    closure_tolerance_m : float, optional
        Largest gap between last and first point that ``closed=None`` treats as a loop.
        Default: the larger of 2 median point spacings (a point list that closes without
        repeating its first point ends about one spacing short of it; irregular sampling can
        make that gap up to about twice the median) and 6 ``position_noise_m`` (two noisy fixes
        of the same spot lie further apart than 6 sigma with probability exp(-9) ~ 1e-4: their
        distance is Rayleigh-distributed with scale sigma*sqrt(2)).

    Returns
    -------
    Geometry
        Nodes ``0..n`` at stations ``k * spacing_m`` with position, heading, signed curvature
        and, when the route has elevation, elevation and grade.

    Raises
    ------
    RouteGeometryError
        For a non-positive spacing, noise or tolerance; a spacing longer than the route; a
        loop whose ends overlap (``closed=True``); a fit that fails or whose path nearly stops
        and turns back (a cusp), naming the station and the nearest point.

    Warns
    -----
    CurvespeedWarning
        When ``closed=True`` bridges a gap wider than the closure tolerance, when a route whose
        ends meet is kept open because its ends overlap, and when the points scatter more than
        ``position_noise_m`` allows even with the least smoothing.

    Notes
    -----
    *Fit.* Each coordinate is a quintic B-spline of the cumulative chord length ``u`` of the
    points, on uniform knots half a median point spacing apart, fitted by penalised least
    squares (a P-spline, Eilers and Marx, 1996): minimise
    ``sum_i |p_i - c(u_i)|^2 / sigma^2 + lam * sum_j |fourth difference of coefficients|^2``,
    the discrete form of a penalty on ``integral |c''''|^2``. Quintic, because curvature is a
    second derivative: it is then twice continuously differentiable, and its rate of change
    along the route (lateral jerk at constant speed) is continuous. Fourth differences, because
    the penalty then leaves cubics in ``u`` free: straight lines, and to first order the start
    of a clothoid transition (``y = x^3 / (6 A^2)``), cost nothing, and at the route's ends
    neither curvature nor its rate is pulled towards zero. (A cubic smoothing spline has natural
    end conditions ``c'' = 0``, i.e. zero curvature at both ends; a third-difference penalty
    still forces ``c''' -> 0`` there, which on a test clothoid gave four times the curvature
    error within 10 m of an end.)

    *Smoothing from the noise.* ``lam`` is chosen so that the weighted residual sum (weights
    ``1/sigma``) equals what the stated noise plausibly produces (the discrepancy principle, as
    FITPACK's ``splprep`` documents for its ``s``): see :func:`residual_target`, with one noisy
    component per point. One, not two: noise along the path moves a point along the path, and
    the chord-length parameter carries that movement (each chord grows or shrinks with it), so
    a smooth fit absorbs it and only the noise across the path remains as residual (checked on
    noisy straight lines: the weighted residual of the best cubic is ~m, not ~2m). The target
    is therefore ``m + 2 sqrt(2 m)``. On a test alignment (straight, clothoids, R = 80 m arc,
    points 0.5-1.5 m apart, sigma 2 and 10 cm) it gave RMS curvature errors 15-50 % smaller than
    the same fit with FITPACK's ``s = 2 m``, with smaller end errors on average (worst end error
    0.16/R against 0.10/R in 40 seeds); aiming at ``m`` itself let curvature swing by up to 2/R
    over the last 10 m of an open end. If the points are within that noise of a cubic in ``u``
    (loops: of a constant) the penalty's null-space fit is used. This holds while points are
    further apart than the noise; points bunched closer than the noise (a trace recorded while
    standing) are reported as a cusp.

    *Noise the points show.* The discrepancy principle spends the whole allowance: on points
    that really carry noise ``sigma`` the noise itself supplies most of the residual, but on
    points more precise than stated the fit must depart from them to reach the target. Straights
    (in the penalty's null space) and long arcs cost almost nothing to follow exactly, so the
    departure goes to the curves, most of it where clothoids meet arcs and the design curvature
    has kinks; the smoothest path that departs there by several ``sigma`` blurs the kinks and
    rings (the smoother's response has negative side lobes), raising curvature in some places
    and lowering it in others. On the invented demo routes (designed alignments, coordinates
    rounded to 1 cm, points 2.5-5 m apart) a stated 5 cm drew a smoothing weight 60-1000 times
    the one the same points with real 5 cm noise added drew, turned R 50 m reverse curves into
    R 42 m, bent the middle of a 40 m arc 19 % tighter and a R 15 m hairpin 8 % tighter; a
    stated 1 cm still moved the tightest radii by 3-9 % and arcs by up to 10 %. The stated
    noise is therefore an upper bound: the fit uses ``min(sigma, max(estimate, 1 mm))``, where
    the estimate is the scatter the points show about a quintic through their six neighbours,
    taken as an upper confidence bound (:func:`estimate_scatter`). On noisy points the
    estimate exceeds the stated noise and nothing changes; on the demo routes it is 2-3.5 mm
    (the rounding, plus the kinks seen by the local quintic), and whatever noise is stated the
    tightest radii come out 1.6-5.6 % from design and the curvature on the arcs (2 m or more
    from their ends) within 3.6-5.9 % of 1/R; what remains sits within a point spacing of the
    kinks, which points 2.5-5 m apart cannot place more precisely. The estimate sees noise
    that changes from point to point; an error that drifts slowly along the route (as
    satellite positions do, common practice) shows little there and is followed like the route
    itself: it shifts the path more than it bends it.

    *Why not FITPACK.* ``scipy.interpolate.splprep`` picks knots adaptively and grows faster than
    linearly with the number of points (about 1.3 s for 10^5 and 42 s for 10^6 points on the
    development machine); ``make_splprep`` and ``make_smoothing_spline`` are slower still. The
    P-spline's normal equations are banded (half-bandwidth 5; 11 for loops after an interleaving
    permutation that folds the wrap-around corners into the band), so each trial ``lam`` costs
    one banded Cholesky solve (LAPACK via :func:`scipy.linalg.solveh_banded`) and the whole fit is
    O(m). The knot spacing adapts to the smoothing the noise calls for (see ``_fit_pspline``).
    Loops use a periodic basis (wrapped coefficients), so position and its first four
    derivatives agree at the seam.

    *Ends.* An open route runs from the foot of its first point on the fitted path to the foot
    of its last (the nearest points of the path), so the path's free ends, which the smoothing
    lets drift along the tangent by several ``sigma``, are trimmed off.

    *Arc length.* Each knot interval is cut into pieces of at most 2 m of ``u``; on each piece
    the speed ``|c'(u)|`` is sampled at 10 Gauss-Legendre nodes and replaced by its Legendre
    interpolant, whose integral is the Gauss-Legendre rule; the cumulative integral gives
    station as a function of ``u`` (checked against adaptive quadrature to ~1e-14 m on 2 m
    pieces; a single 18 m piece already gave the total to 2e-12 m but intermediate stations
    only to 2e-7 m). Stations ``k * ds`` are mapped back to ``u`` by safeguarded Newton
    iteration on that integral (to ~1e-11 m), and the spline is evaluated there. Curvature is
    ``(x' y'' - y' x'') / |c'|^3``, heading ``atan2(y', x')`` made continuous by choosing, at each
    step, the branch nearest the trapezoidal integral of curvature.

    *Elevation.* Each point is placed at the station of its own parameter on the fitted path;
    elevation is fitted against station with the same P-spline (one dimension, one noisy
    component per point, weight ``1/elevation_noise_m``), periodic on loops; grade is its
    derivative. The stated elevation noise is used as given, not lowered to the scatter the
    heights show: satellite heights drift slowly by metres (common practice), which such an
    estimate does not see, and grade, a first derivative, feels a slow drift far more than
    curvature, a second derivative, feels one of the plan position.

    *Loops.* The closing chord joins the last point to the first; a last point closer to the
    first than half a median spacing is a repeat of it and is dropped. Node ``n`` is a copy of
    node 0 except for heading, which is heading at node 0 plus 2 pi times the winding number.

    The geometry feeds speed limits that move vehicles. It supports engineering judgment; speeds
    on public roads and advisory signs follow local codes and licensed practice.
    """
    source = route.source
    _require_positive(spacing_m, "station spacing", source,
                      "give the distance between output stations in metres, e.g. 1")
    _require_positive(position_noise_m, "position noise", source,
                      "give the standard deviation of the point positions in metres, "
                      "e.g. 0.05 for surveyed or map coordinates")
    sigma_z = DEFAULT_ELEVATION_NOISE_M if elevation_noise_m is None else elevation_noise_m
    _require_positive(sigma_z, "elevation noise", source,
                      "give the standard deviation of the elevations in metres, e.g. 0.1")
    chord_length = float(route.chord_stations()[-1])
    if chord_length / spacing_m > MAX_STATIONS:
        raise RouteGeometryError(
            f"{source}: {chord_length / 1000:.1f} km at {spacing_m:g} m spacing would need "
            f"{chord_length / spacing_m:.3g} stations (at most {MAX_STATIONS:.0e}); use "
            f"--spacing {chord_length / MAX_STATIONS:.3g} or more, or look for a stray point")
    if closure_tolerance_m is not None:
        _require_positive(closure_tolerance_m, "closure tolerance", source,
                          "give the largest gap in metres between last and first point that "
                          "still makes a loop")

    closed = None if closed is None else bool(closed)
    x = np.asarray(route.x_m, dtype=float)
    y = np.asarray(route.y_m, dtype=float)
    z = None if route.z_m is None else np.asarray(route.z_m, dtype=float)
    where = np.asarray(route.where, dtype=object)
    if x.size < 3:
        raise RouteGeometryError(
            f"{source}: only {x.size} point(s); a route needs at least 3")

    is_closed, drop_last = _decide_closure(x, y, where, source, closed, closure_tolerance_m,
                                           position_noise_m)
    if drop_last:
        x, y, where = x[:-1], y[:-1], where[:-1]
        z = None if z is None else z[:-1]
    m = x.size

    chord = np.hypot(np.diff(x), np.diff(y))
    u = np.concatenate(([0.0], np.cumsum(chord)))
    span = float(u[-1])
    if is_closed:
        span += math.hypot(x[0] - x[-1], y[0] - y[-1])
    knot_spacing = _knot_spacing(chord, span)

    xy = np.column_stack((x, y))
    sigma_fit = min(position_noise_m,
                    max(estimate_scatter(u, xy, span, is_closed), MIN_POSITION_NOISE_M))
    fit = _fit_or_raise(u, xy, 1.0 / sigma_fit, residual_target(m), span, is_closed,
                        knot_spacing, source, "route")
    # Only a residual beyond what the stated noise allows is worth a warning: below it, the fit
    # follows the points more closely than the stated noise would, because they show less.
    if fit.too_rough and fit.residual_ss * (sigma_fit / position_noise_m) ** 2 > fit.target_ss:
        rms = math.sqrt(fit.residual_ss / m) * sigma_fit
        warnings.warn(
            f"{source}: the points scatter across the smoothest path by {rms:.3g} m (RMS), "
            f"more than the position noise of {position_noise_m:g} m allows; the fitted path "
            "cuts corners there. Check for outliers or raise the position noise",
            CurvespeedWarning, stacklevel=2)

    arc = _ArcLength.from_fit(fit)
    if is_closed:
        u_first, u_last = 0.0, span
    else:
        # The route runs between the feet of its first and last points on the fitted path.
        u_first = _foot_parameter(fit.spline, x[0], y[0], 0.0, span)
        u_last = _foot_parameter(fit.spline, x[-1], y[-1], span, span)
    s_first = float(arc.station(np.array([u_first]))[0])
    point_station = arc.station(u) - s_first
    _check_cusps(arc, s_first, point_station, where, source, position_noise_m)

    length = float(arc.station(np.array([u_last]))[0]) - s_first if not is_closed else arc.length
    if not length > 0:
        raise RouteGeometryError(
            f"{source}: the smoothed path has no length between the first and last point; the "
            f"points may all lie within the position noise ({position_noise_m:g} m) of one spot")
    if spacing_m > length:
        raise RouteGeometryError(
            f"{source}: station spacing {spacing_m:g} m is longer than the fitted route "
            f"({length:.3f} m); use a spacing of at most {length:.4g} m")
    n = max(1, math.ceil(length / spacing_m * (1.0 - 1e-12)))
    ds = length / n
    station = ds * np.arange(n + 1, dtype=float)
    station[-1] = length

    n_eval = n if is_closed else n + 1
    u_nodes = arc.parameter(station[:n_eval] + s_first)
    u_nodes[0] = u_first
    if not is_closed:
        u_nodes[-1] = u_last
    pos = fit.spline(u_nodes)
    d1 = fit.spline(u_nodes, nu=1)
    d2 = fit.spline(u_nodes, nu=2)
    speed = np.hypot(d1[:, 0], d1[:, 1])
    kappa = (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]) / speed**3
    raw_heading = np.arctan2(d1[:, 1], d1[:, 0])
    xs, ys = pos[:, 0], pos[:, 1]
    if is_closed:
        xs, ys, kappa, raw_heading = (np.append(a, a[0]) for a in (xs, ys, kappa, raw_heading))
    heading = _continuous_heading(raw_heading, kappa, ds, is_closed)

    z_nodes = grade = None
    if z is not None:
        z_nodes, grade = _fit_elevation(point_station, z, sigma_z, length, is_closed,
                                        station[:n_eval], source)
        if is_closed:
            z_nodes, grade = np.append(z_nodes, z_nodes[0]), np.append(grade, grade[0])

    return Geometry(station_m=station, x_m=xs, y_m=ys, heading_rad=heading,
                    curvature_1pm=kappa, z_m=z_nodes, grade=grade, closed=is_closed,
                    spacing_m=float(ds), projection=route.projection, source=source,
                    name=route.name)


def residual_target(n_components: int) -> float:
    """Weighted residual sum of squares the smoothing aims at, for noise of known size.

    With weights ``1 / sigma`` each noisy residual component contributes one unit on average, so
    the sum over ``n`` components is chi-square with about ``n`` degrees of freedom: mean ``n``,
    standard deviation ``sqrt(2 n)``. The target is its mean plus two standard deviations, the
    largest residual the stated noise plausibly produces (~98 % one-sided). Aiming at the mean
    alone would, about half the time, chase the noise on data that are smooth (a straight
    line, a constant grade), because the penalty's null-space fit then leaves a little less
    than ``n`` and the rule demands a rougher fit to reach it.
    """
    return float(n_components + 2.0 * math.sqrt(2.0 * n_components))


def estimate_scatter(u: np.ndarray, values: np.ndarray, span: float, periodic: bool) -> float:
    """Scatter of points about a smooth path, estimated from the points alone (metres).

    Each point ``i`` is predicted by the polynomial of degree ``2 q - 1`` in ``u`` through its
    ``q = SCATTER_NEIGHBOURS`` neighbours on either side (Lagrange interpolation, on the actual
    ``u``), and the prediction error is divided by its own noise scale: for independent noise
    of standard deviation ``sigma`` the error ``e_i = p_i - sum_j L_ij p_j`` has standard
    deviation ``sigma * sqrt(1 + sum_j L_ij**2)``. The estimate is the root mean square of
    these normalised errors: a difference-based variance estimate (Rice, Ann. Stat. 12(4), 1984;
    Gasser, Sroka and Jennen-Steinmetz, Biometrika 73(3), 1986; Hall, Kay and Titterington,
    Biometrika 77(3), 1990, all from memory), with differences of order ``2 q`` in place of
    their first or second. On a route in chord length ``u`` only the noise across the path
    remains in ``e_i`` (a point moved along the path moves its own ``u`` with it), so the
    estimate is the per-coordinate ``sigma`` of one noisy component per point, as
    :func:`residual_target` counts it.

    A mean of squares, not a median, because the residual target is a sum over all points: on
    designed alignments the points on straights that run along a coordinate axis carry no
    rounding error at all, and only the sum counts correctly how much the rest carry. The path
    itself contributes the interpolation error ``(q!)**2 / (2q)! * h**(2q) * |c^(2q)|`` on
    points h apart (a circle of radius R: ``h**6 / (20 R**5)``, 0.4 mm for h = 2.5 m and
    R = 8 m); at each join of a clothoid of length L with an arc of radius R, where the third
    derivative of position jumps by ``1 / (R L)``, it adds up to ``0.033 h**3 / (R L)`` at each
    of the six points whose neighbours straddle the join (1.6 cm for h = 2.5 m, R = 8 m,
    L = 4 m). Both make the estimate larger, never smaller, so they can only keep the
    smoothing closer to the stated noise.

    Returns
    -------
    float
        An upper confidence bound for ``sigma``, metres, or ``inf`` when there are too few
        points for one prediction. The mean of ``n`` squared normalised errors is taken as
        ``sigma**2`` times a chi-square variable with ``n_eff`` degrees of freedom divided by
        ``n_eff``, where ``n_eff`` is ``n`` divided by the variance inflation from neighbouring
        errors that share points (for Gaussian errors with correlations ``r_k``,
        ``1 + 2 sum r_k**2``: 3.17 for the stencil of uniformly spaced points); the bound is
        the estimate divided by the chi-square's lower 2.3 % quantile (two standard deviations
        of a normal variable, the margin of :func:`residual_target`). On simulated white noise
        (10 to 10^4 points, spacing uniform or varying 0.5-3 m) it fell below the true
        ``sigma`` in 0.1-5.5 % of trials.
    """
    q = SCATTER_NEIGHBOURS
    m = u.size
    if m < 2 * q + 1:
        return math.inf
    if periodic:   # wrap q points around each end so that every point has its neighbours
        u = np.concatenate((u[-q:] - span, u, u[:q] + span))
        values = np.concatenate((values[-q:], values, values[:q]))
    n = u.size - 2 * q                               # points predicted: q .. q + n - 1
    offsets = [o for o in range(-q, q + 1) if o != 0]
    t = [u[q + o: q + o + n] - u[q: q + n] for o in offsets]
    error = values[q: q + n].copy()
    scale2 = np.ones(n)
    for a, o in enumerate(offsets):
        # Lagrange weight of neighbour o at the point: prod over the others b of t_b / (t_b - t_a).
        weight = np.ones(n)
        for b in range(len(offsets)):
            if b != a:
                weight *= t[b] / (t[b] - t[a])
        error -= weight[:, None] * values[q + o: q + o + n]
        scale2 += weight**2
    mean_square = float(np.mean(np.sum(error**2, axis=1) / scale2))
    if not math.isfinite(mean_square):      # neighbours almost on top of each other
        return math.inf
    # Variance inflation of the mean: on uniform spacing the normalised errors are the
    # 2q-th differences of the noise, whose stencil's autocorrelations r_k give 1 + 2 sum r_k^2.
    stencil = np.array([(-1.0) ** j * math.comb(2 * q, j) for j in range(2 * q + 1)])
    acf = np.correlate(stencil, stencil, mode="full") / float(stencil @ stencil)
    n_eff = n / float(np.sum(acf**2))
    # mean_square * n_eff / sigma^2 is about chi-square with n_eff degrees of freedom; its
    # lower quantile (scipy's chi2.ppf(p, k) is 2 * gammaincinv(k / 2, p)) gives the bound.
    low = 2.0 * special.gammaincinv(0.5 * n_eff, _SCATTER_BOUND_LEVEL)
    return math.sqrt(mean_square * n_eff / low)


def geometry_from_curvature(kappa, ds: float = 1.0, closed: bool = False, grade=None,
                            name: str = "synthetic") -> Geometry:
    """Geometry whose nodes have exactly curvature ``kappa`` (1/m) at spacing ``ds`` (m).

    For designed alignments and tests: heading is the trapezoidal integral of curvature,
    position the integral of heading (midpoint heading per step), elevation the integral of
    ``grade`` (rise over run, a scalar or one value per node) when given. Starts at the origin
    heading east. On a closed geometry the caller's curvature must close the loop.
    """
    kappa = np.asarray(kappa, dtype=float)
    n = kappa.size
    s = np.arange(n) * ds
    heading = np.concatenate(([0.0], np.cumsum(0.5 * (kappa[1:] + kappa[:-1]) * ds)))
    mid = 0.5 * (heading[1:] + heading[:-1])
    x = np.concatenate(([0.0], np.cumsum(np.cos(mid) * ds)))
    y = np.concatenate(([0.0], np.cumsum(np.sin(mid) * ds)))
    z = None
    if grade is not None:
        grade = np.broadcast_to(np.asarray(grade, dtype=float), (n,)).copy()
        z = np.concatenate(([0.0], np.cumsum(0.5 * (grade[1:] + grade[:-1]) * ds)))
    return Geometry(station_m=s, x_m=x, y_m=y, heading_rad=heading, curvature_1pm=kappa,
                    z_m=z, grade=grade, closed=closed, spacing_m=ds, name=name)


def summarise_geometry(geometry: Geometry) -> dict:
    """Key figures of a geometry for printing: length, loop, tightest radius, turning, grade.

    Returns
    -------
    dict
        ``length_m``, ``closed``, ``n_nodes``, ``spacing_m``, ``min_radius_m`` (``inf`` on a
        straight route) and ``min_radius_station_m`` (where it occurs), ``total_turning_deg``
        (heading change from first to last node; +-360 times the winding number on a loop),
        ``min_elevation_m``, ``max_elevation_m``, ``min_grade``, ``max_grade`` (None without
        elevation; grade as rise over run).
    """
    abs_kappa = np.abs(geometry.curvature_1pm)
    k = int(np.argmax(abs_kappa))
    kmax = float(abs_kappa[k])
    has_z = geometry.z_m is not None
    return {
        "length_m": geometry.length_m,
        "closed": bool(geometry.closed),
        "n_nodes": geometry.n_nodes,
        "spacing_m": float(geometry.spacing_m),
        "min_radius_m": math.inf if kmax == 0.0 else 1.0 / kmax,
        "min_radius_station_m": float(geometry.station_m[k]),
        "total_turning_deg": math.degrees(geometry.total_turning_rad()),
        "min_elevation_m": float(np.min(geometry.z_m)) if has_z else None,
        "max_elevation_m": float(np.max(geometry.z_m)) if has_z else None,
        "min_grade": float(np.min(geometry.grade)) if has_z else None,
        "max_grade": float(np.max(geometry.grade)) if has_z else None,
    }


# ---------------------------------------------------------------------------------------------
# Steps of build_geometry.

def _require_positive(value, what: str, source: str, hint: str) -> None:
    ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    if not ok or not math.isfinite(value) or value <= 0:
        raise RouteGeometryError(
            f"{source}: {what} must be a positive number of metres (got {value!r}); {hint}")


def _turn_deg(ax: float, ay: float, bx: float, by: float) -> float:
    """Absolute turn from direction a to direction b, degrees in [0, 180]."""
    return abs(math.degrees(math.atan2(ax * by - ay * bx, ax * bx + ay * by)))


def _decide_closure(x, y, where, source, closed, tolerance_m, noise_m) -> tuple[bool, bool]:
    """Whether the route is a loop, and whether its last point repeats the first."""
    if closed is False:
        return False, False
    gap = math.hypot(x[-1] - x[0], y[-1] - y[0])
    median_chord = float(np.median(np.hypot(np.diff(x), np.diff(y))))
    tol = (max(CLOSURE_SPACINGS * median_chord, CLOSURE_NOISE_SIGMAS * noise_m)
           if tolerance_m is None else float(tolerance_m))
    length = float(np.sum(np.hypot(np.diff(x), np.diff(y))))
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


def _fit_or_raise(u, values, weight, target, span, periodic, knot_spacing, source, what):
    try:
        return _fit_pspline(u, values, weight, target, span, periodic, knot_spacing)
    except (LinAlgError, ValueError) as exc:
        raise RouteGeometryError(
            f"{source}: the smoothing spline for the {what} could not be fitted ({exc}); check "
            "the points for gross outliers or a path that crosses back over itself") from exc


def _knot_spacing(gaps: np.ndarray, span: float) -> float:
    """Initial knot spacing: ``KNOTS_PER_SPACING`` intervals per median gap between points.

    More knot intervals than points locally let a lightly smoothed fit pass through every point
    even where sampling is irregular (with one interval per median gap, sharp corners of sparse
    polylines stayed out of reach of the least smoothing in 9 of 300 random test routes). The
    count is capped at ``2 * KNOTS_PER_SPACING`` per point so gaps of near-repeated points cannot
    blow it up; heavy smoothing widens the spacing later (see ``_fit_pspline``).
    """
    n_points = gaps.size + 1
    return max(float(np.median(gaps)) / KNOTS_PER_SPACING,
               span / (2 * KNOTS_PER_SPACING * n_points))


def _foot_parameter(spline: BSpline, px: float, py: float, u0: float, span: float) -> float:
    """Parameter of the point of the fitted path nearest (px, py), by Newton from ``u0``."""
    u = u0
    for _ in range(50):
        c, d1, d2 = spline(u), spline(u, nu=1), spline(u, nu=2)
        rx, ry = px - c[0], py - c[1]
        grad = rx * d1[0] + ry * d1[1]
        curv = d1[0] ** 2 + d1[1] ** 2 - (rx * d2[0] + ry * d2[1])
        if not curv > 0:
            break
        u_new = min(max(u + grad / curv, 0.0), span)
        if abs(u_new - u) <= 1e-12 * max(1.0, span):
            return u_new
        u = u_new
    return u


def _check_cusps(arc: _ArcLength, s_first, point_station, where, source, noise_m) -> None:
    """Raise where the fitted path nearly stops and turns back (speed along u collapses)."""
    speed = arc.node_speed
    floor = CUSP_SPEED_FRACTION * float(np.median(speed))
    j, q = np.unravel_index(int(np.argmin(speed)), speed.shape)
    if speed[j, q] >= floor:
        return
    u_bad = arc.start + arc.h * (j + 0.5 * (1.0 + arc.nodes[q]))
    s_bad = float(arc.station(np.array([u_bad]))[0]) - s_first
    near = where[int(np.argmin(np.abs(point_station - s_bad)))]
    raise RouteGeometryError(
        f"{source}: station {s_bad:.1f} m (near {near}): the smoothed path nearly stands still "
        "and turns there (a cusp): the points bunch up or zig-zag, as in a trace recorded while "
        "standing. Remove or thin out those points, or, if they are only noisy, raise the "
        f"position noise (now {noise_m:g} m)")


def _continuous_heading(raw: np.ndarray, kappa: np.ndarray, ds: float, closed: bool):
    """Unwrap heading, taking each step's 2 pi branch nearest the integral of curvature."""
    step = np.diff(raw)
    expected = 0.5 * (kappa[1:] + kappa[:-1]) * ds
    step += 2.0 * np.pi * np.round((expected - step) / (2.0 * np.pi))
    heading = raw[0] + np.concatenate(([0.0], np.cumsum(step)))
    if closed:
        winding = np.round((heading[-1] - heading[0]) / (2.0 * np.pi))
        heading[-1] = heading[0] + 2.0 * np.pi * winding
    return heading


def _fit_elevation(point_station, z, sigma_z, length, closed, node_station, source):
    m = z.size
    knot_spacing = _knot_spacing(np.diff(point_station), length)
    fit = _fit_or_raise(point_station, z[:, None], 1.0 / sigma_z, residual_target(m), length,
                        closed, knot_spacing, source, "elevation")
    if fit.too_rough:
        rms = math.sqrt(fit.residual_ss / m) * sigma_z
        warnings.warn(
            f"{source}: the elevations scatter about the smoothest profile by {rms:.3g} m (RMS), "
            f"more than the elevation noise of {sigma_z:g} m allows; check for outliers or "
            "raise the elevation noise", CurvespeedWarning, stacklevel=3)
    s = np.clip(node_station, 0.0, length)
    return fit.spline(s)[:, 0], fit.spline(s, nu=1)[:, 0]


# ---------------------------------------------------------------------------------------------
# Penalised spline fit (P-spline), smoothing set by the expected residual sum.

@dataclass(frozen=True)
class _SplineFit:
    """A B-spline c(u) on uniform knots over ``[0, span]`` (one period when ``periodic``)."""

    spline: BSpline
    span: float
    n_intervals: int
    periodic: bool
    residual_ss: float        # weighted residual sum of squares reached
    target_ss: float          # the one asked for
    too_rough: bool           # even the least smoothing left more residual than the target
    log_lambda: float         # log10 of the smoothing weight relative to the trace ratio


def _fit_pspline(u, values, weight, target_ss, span, periodic, knot_spacing) -> _SplineFit:
    """Penalised least-squares quintic B-spline through ``values`` (m, d) at ``u`` (m,).

    Minimises ``sum w^2 |values - c(u)|^2 + lam * sum |fourth differences of coefficients|^2``
    with ``lam`` found by Brent's method on ``rho = log10(lam / lam0)`` so that the weighted
    residual sum equals ``target_ss``. If even the penalty's null-space fit (a cubic in ``u``;
    a constant on a loop), which has the largest residual of all, stays below the target, that
    fit is returned.

    The smoothing length of a P-spline scales as ``h * 10**(rho / (2 * order))`` for knot
    spacing ``h`` (up to a constant set by how ``lam0`` is normalised); the banded solve stays
    accurate up to ``rho`` of about 12, where the fit is smooth over more than ten knot
    intervals. When the data want more smoothing than that, the root is estimated from the
    residual at ``rho = 16`` (or 14 if that solve breaks down) and the knot spacing widened so
    that it falls near ``rho = 8`` (several knot intervals per smoothing length, where a
    P-spline is indistinguishable from the smoothing spline), and the fit is repeated on the
    coarser grid. When the root lies below ``rho = 5`` (smoothing over only a couple of knot
    intervals) the grid is refined the same way, down to ``knot_spacing``; the first grid has
    at most ``_MAX_START_INTERVALS`` intervals. A solve whose residual exceeds the null-space
    fit's has lost accuracy and is treated as failed.
    """
    values = np.asarray(values, dtype=float)
    n_floor = _MIN_PERIODIC_INTERVALS if periodic else 1
    null_ss, null_fit = _null_space_fit(u, values, weight, span, periodic)
    if null_ss <= target_ss:
        return _null_space_spline(null_fit, null_ss, target_ss, span, periodic, n_floor)
    n_fine = max(n_floor, math.ceil(span / knot_spacing - 1e-9))
    # Dense points usually need smoothing over many of them: start coarser and refine only if
    # the root then calls for less smoothing than the grid resolves well.
    n_int = max(n_floor, min(n_fine, _MAX_START_INTERVALS))
    lo, hi = _LOG_LAMBDA_RANGE

    def excess(system, rho):
        return math.log(system.residual(rho) / target_ss)

    for _ in range(_MAX_REGRIDS):
        system = _PenalisedSystem(u, values, weight, span, periodic, n_int, null_ss)
        top = _highest_usable(system, lo, hi)
        root = None
        if system.residual(top) <= target_ss:             # wants more smoothing: widen
            if n_int == n_floor:
                break
            rho_est = top
            for probe in _LOG_LAMBDA_PROBES:   # far beyond hi the banded Cholesky may break down
                try:
                    at_probe = excess(system, probe)
                except LinAlgError:
                    continue
                # Where log(residual / target) crosses zero, interpolated between top and the
                # probe (a rough estimate is enough: the root is found on the new grid).
                at_top = excess(system, top)
                rho_est = (probe if at_probe <= 0
                           else top + (probe - top) * -at_top / (at_probe - at_top))
                break
        elif system.residual(lo) >= target_ss:           # wants less than the grid allows
            if n_int == n_fine:
                break
            rho_est = lo - 2 * PENALTY_ORDER              # refine by 10x at least
        else:
            root = rho_est = brentq(lambda r: excess(system, r), lo, top, xtol=_LOG_LAMBDA_XTOL)
            if rho_est >= _LOG_LAMBDA_REFINE or n_int == n_fine:
                break
        factor = 10.0 ** ((rho_est - _LOG_LAMBDA_AIM) / (2 * PENALTY_ORDER))
        n_new = min(n_fine, max(n_floor, int(n_int / factor)))
        if n_new == n_int:
            break
        n_int = n_new

    too_rough = False
    if root is not None:
        rho = root
    elif system.residual(top) <= target_ss:
        rho = top
    else:
        rho, too_rough = lo, True
    coef = system.coefficients(rho)
    if periodic:
        coef = coef[np.arange(n_int + SPLINE_DEGREE) % n_int]
    spline = BSpline(system.knots, coef, SPLINE_DEGREE, extrapolate=False)
    return _SplineFit(spline, span, n_int, periodic, system.residual(rho), target_ss, too_rough,
                      rho)


def _highest_usable(system: _PenalisedSystem, lo: float, hi: float) -> float:
    """The largest ``rho`` in ``hi, hi - 2, ...`` whose solve keeps its accuracy."""
    rho = hi
    while True:
        try:
            system.residual(rho)
            return rho
        except LinAlgError:
            if rho - 2.0 < lo:
                raise
            rho -= 2.0


def _null_space_fit(u, values, weight, span, periodic):
    """Least-squares fit in the penalty's null space: a cubic in u (open) or a constant (loop).

    Returns its weighted residual sum, the largest any penalised fit can have, and a function
    evaluating it.
    """
    if periodic:
        mean = values.mean(axis=0)
        resid = values - mean
        return float(weight**2 * np.sum(resid**2)), lambda uq: np.broadcast_to(
            mean, (np.size(uq), mean.size)).copy()
    degree = min(PENALTY_ORDER - 1, u.size - 1)

    def legendre_columns(uq):
        t = 2.0 * np.asarray(uq, dtype=float) / span - 1.0
        cols = [np.ones_like(t), t]              # Legendre polynomials: well conditioned
        for p in range(2, degree + 1):
            cols.append(((2 * p - 1) * t * cols[-1] - (p - 1) * cols[-2]) / p)
        return cols[: degree + 1]

    basis = legendre_columns(u)
    columns = values.T.copy()                    # (d, m), contiguous, never the caller's data
    gram = np.array([[np.sum(a * b) for b in basis] for a in basis])
    coef = np.linalg.solve(gram, np.array([[np.sum(a * v) for v in columns] for a in basis]))
    resid = columns
    for a, c in zip(basis, coef):
        for j in range(resid.shape[0]):
            resid[j] -= c[j] * a

    def evaluate(uq):
        return sum(a[:, None] * c for a, c in zip(legendre_columns(uq), coef))

    return float(weight**2 * np.sum(resid**2)), evaluate


def _null_space_spline(null_fit, null_ss, target_ss, span, periodic, n_int) -> _SplineFit:
    """The null-space fit written exactly as a quintic B-spline on ``n_int`` uniform intervals."""
    k = SPLINE_DEGREE
    h = span / n_int
    knots = h * np.arange(-k, n_int + k + 1, dtype=float)
    knots[k], knots[n_int + k] = 0.0, span
    n_coef = n_int + k
    samples = np.linspace(0.0, span, 4 * n_coef)
    if periodic:
        coef = null_fit(np.zeros(n_coef))        # a constant: equal coefficients
    else:    # a cubic lies in the spline space, so least squares on samples reproduces it
        design = BSpline.design_matrix(samples, knots, k).toarray()
        coef = np.linalg.lstsq(design, null_fit(samples), rcond=None)[0]
    spline = BSpline(knots, coef, k, extrapolate=False)
    return _SplineFit(spline, span, n_int, periodic, null_ss, target_ss, False, math.inf)


@functools.cache
def _uniform_basis_polynomials() -> np.ndarray:
    """Power-basis coefficients of the k+1 uniform B-spline pieces on one knot interval.

    Row ``p`` holds the coefficients of ``tau**p`` (``tau`` in [0, 1]) for the basis functions
    ``j .. j+k`` that are nonzero on interval ``j``; taken from scipy's B-spline evaluation at
    ``k+1`` points, which determines the degree-k pieces exactly.
    """
    k = SPLINE_DEGREE
    knots = np.arange(-k, k + 2, dtype=float)            # one interval [0, 1] with full support
    tau = (np.arange(k + 1) + 0.5) / (k + 1)
    values = BSpline.design_matrix(tau, knots, k).toarray()[:, : k + 1]
    return np.linalg.solve(np.vander(tau, k + 1, increasing=True), values)


class _PenalisedSystem:
    """Normal equations of the P-spline on one knot grid, solved for any ``lam``.

    The unknowns are corrections ``delta`` to a baseline spline ``g`` whose coefficients lie on
    the points' chord polyline at the Greville abscissae (``g`` reproduces straight lines and is
    within noise and sagitta of the data). Solving for the small ``delta`` instead of the
    coefficients themselves keeps round-off proportional to the correction, not to the route's
    extent, when ``lam`` is large. The matrix ``B^T W B + lam D^T D`` is assembled as a cyclic
    band (entry ``[d, i]`` is row ``i``, column ``i + d`` modulo the size) and copied into LAPACK
    upper-band storage; periodic systems are first permuted to the order 0, n-1, 1, n-2, ...,
    which folds the wrap-around corners into a band of half-width ``2 * degree + 1``.
    """

    def __init__(self, u, values, weight, span, periodic, n_int, ceiling_ss):
        k = SPLINE_DEGREE
        self._ceiling = ceiling_ss
        m, dims = values.shape
        h = span / n_int
        knots = h * np.arange(-k, n_int + k + 1, dtype=float)
        knots[k], knots[n_int + k] = 0.0, span
        self.knots = knots
        n = n_int if periodic else n_int + k

        # Basis values: on uniform knots every interval carries the same k+1 polynomial pieces.
        rel = np.clip(u, 0.0, span) / h
        first = np.clip(np.floor(rel).astype(np.intp), 0, n_int - 1)
        tau = rel - first
        poly = _uniform_basis_polynomials()
        vals_t = np.repeat(poly[k][:, None], m, axis=1)     # (k+1, m): basis r at point i
        for p in range(k - 1, -1, -1):
            vals_t *= tau
            vals_t += poly[p][:, None]
        cols_t = first + np.arange(k + 1)[:, None]
        if periodic:
            cols_t %= n
        basis = sparse.csr_matrix((vals_t.T.ravel(), cols_t.T.ravel(),
                                   np.arange(0, m * (k + 1) + 1, k + 1)), shape=(m, n))

        greville = np.convolve(knots[1:-1], np.ones(k) / k, mode="valid")[:n]
        if periodic:
            uu = np.concatenate((u - span, u, u + span))
            vv = np.concatenate((values, values, values))
        else:   # continue straight beyond the ends so the outer coefficients are near the data,
            # along the chord to the point about `reach` away (averages out the noise)
            reach = (k + 1) * h
            i = min(max(int(np.searchsorted(u, u[0] + reach)), 1), m - 1)
            j = max(min(int(np.searchsorted(u, u[-1] - reach)), m - 2), 0)
            start = values[0] - reach * (values[i] - values[0]) / (u[i] - u[0])
            end = values[-1] + reach * (values[-1] - values[j]) / (u[-1] - u[j])
            uu = np.concatenate(([u[0] - reach], u, [u[-1] + reach]))
            vv = np.vstack((start, values, end))
        baseline = np.column_stack([np.interp(greville, uu, vv[:, j]) for j in range(dims)])
        data = values - basis @ baseline

        w2 = float(weight) ** 2
        gram = np.zeros((k + 1, n))
        for r in range(k + 1):
            for r2 in range(r, k + 1):
                gram[r2 - r] += np.bincount(cols_t[r], weights=vals_t[r] * vals_t[r2],
                                            minlength=n)
        gram *= w2
        penalty = _difference_penalty(n, periodic)
        self.lam0 = float(gram[0].sum() / penalty[0].sum())

        if periodic:
            order = np.empty(n, dtype=np.intp)
            order[0::2] = np.arange((n + 1) // 2)
            order[1::2] = n - 1 - np.arange(n // 2)
            pos = np.empty(n, dtype=np.intp)
            pos[order] = np.arange(n)
            d_idx, i_idx = np.indices((k + 1, n))
            pi, pj = pos[i_idx], pos[(i_idx + d_idx) % n]
            offset = np.abs(pi - pj)
            self.bandwidth = int(offset.max())
            where = (self.bandwidth - offset, np.maximum(pi, pj))
            self._gram_band = np.zeros((self.bandwidth + 1, n), order="F")
            self._penalty_band = np.zeros((self.bandwidth + 1, n), order="F")
            self._gram_band[where] = gram
            self._penalty_band[where] = penalty
            self._pos = pos
        else:
            self.bandwidth = k
            self._gram_band = np.zeros((k + 1, n), order="F")     # LAPACK's layout
            self._penalty_band = np.zeros((k + 1, n), order="F")
            for d in range(k + 1):
                self._gram_band[k - d, d:] = gram[d, : n - d]
                self._penalty_band[k - d, d:] = penalty[d, : n - d]
            self._pos = None
        self._n = n
        self._rhs = w2 * (basis.T @ data)                     # B^T W (values - g(u))
        self._penalty_baseline = _apply_penalty(baseline, periodic)   # D^T D g
        self._baseline = baseline
        self._basis, self._data, self._w2 = basis, data, w2
        self._cache: dict[float, tuple[np.ndarray, float]] = {}

    def _solve(self, rho: float) -> tuple[np.ndarray, float]:
        if rho not in self._cache:
            lam = self.lam0 * 10.0**rho
            band = self._gram_band + lam * self._penalty_band
            rhs = self._rhs - lam * self._penalty_baseline
            if self._pos is not None:
                permuted = np.empty_like(rhs)
                permuted[self._pos] = rhs
                rhs = permuted
            delta = solveh_banded(band, rhs, overwrite_ab=True, overwrite_b=True,
                                  check_finite=False)
            if self._pos is not None:
                delta = delta[self._pos]
            resid = self._data - self._basis @ delta
            resid_ss = float(self._w2 * np.sum(resid**2))
            if resid_ss > self._ceiling * (1.0 + 1e-6):
                # More residual than the null-space fit, the most any lam can leave: round-off.
                raise LinAlgError("the banded solve lost accuracy")
            self._cache[rho] = (self._baseline + delta, resid_ss)
        return self._cache[rho]

    def residual(self, rho: float) -> float:
        return self._solve(rho)[1]

    def coefficients(self, rho: float) -> np.ndarray:
        return self._solve(rho)[0]


def _difference_stencil() -> np.ndarray:
    d = PENALTY_ORDER
    return np.array([(-1.0) ** (d - i) * math.comb(d, i) for i in range(d + 1)])


def _difference_penalty(n: int, periodic: bool) -> np.ndarray:
    """``D^T D`` for ``PENALTY_ORDER``-th differences of ``n`` coefficients, as a cyclic band.

    Row ``r`` of ``D`` holds the stencil in columns ``r .. r + order`` (modulo ``n`` when
    periodic), so ``(D^T D)[i, i + d] = sum_a stencil[a] * stencil[a + d]`` over the rows
    ``r = i - a`` that exist.
    """
    stencil = _difference_stencil()
    order = PENALTY_ORDER
    band = np.zeros((SPLINE_DEGREE + 1, n))
    for d in range(order + 1):
        for a in range(order + 1 - d):
            if periodic:
                band[d] += stencil[a] * stencil[a + d]
            elif n > order:
                band[d, a: n - order + a] += stencil[a] * stencil[a + d]
    return band


def _apply_penalty(coef: np.ndarray, periodic: bool) -> np.ndarray:
    """``D^T D coef`` for coefficient arrays of shape (n, d)."""
    stencil = _difference_stencil()
    order = PENALTY_ORDER
    n = coef.shape[0]
    if periodic:
        diff = sum(stencil[a] * np.roll(coef, -a, axis=0) for a in range(order + 1))
        return sum(stencil[a] * np.roll(diff, a, axis=0) for a in range(order + 1))
    out = np.zeros_like(coef)
    if n <= order:
        return out
    diff = sum(stencil[a] * coef[a: n - order + a] for a in range(order + 1))
    for a in range(order + 1):
        out[a: n - order + a] += stencil[a] * diff
    return out


# ---------------------------------------------------------------------------------------------
# Arc length of the fitted curve and its inverse.

@dataclass(frozen=True)
class _ArcLength:
    """Station as a function of the spline parameter, per piece of knot interval in Legendre form.

    On piece ``j`` (``u = start + h * (j + (1 + tau) / 2)``, ``tau`` in [-1, 1]) the speed
    ``|c'(u)|`` is interpolated at Gauss-Legendre nodes; ``integral`` holds the Legendre
    coefficients of its antiderivative from ``tau = -1``, so station is
    ``knot_station[j] + h/2 * integral_j(tau)``.
    """

    start: float
    h: float
    nodes: np.ndarray            # Gauss-Legendre nodes in [-1, 1]
    node_speed: np.ndarray       # (pieces, q) speed at the nodes
    speed: np.ndarray            # (pieces, q) Legendre coefficients of the speed
    integral: np.ndarray         # (pieces, q+1) Legendre coefficients of its antiderivative
    knot_station: np.ndarray     # (pieces + 1,) station at the ends of the pieces

    @property
    def length(self) -> float:
        return float(self.knot_station[-1])

    @classmethod
    def from_fit(cls, fit: _SplineFit, piece_m: float | None = None) -> "_ArcLength":
        """Tabulate station along ``fit``: each knot interval is cut into equal pieces no longer
        than ``piece_m`` (in the parameter, ~metres), each integrated by Gauss-Legendre."""
        k, n_int, knot_h = SPLINE_DEGREE, fit.n_intervals, fit.span / fit.n_intervals
        piece_m = _ARC_PIECE_M if piece_m is None else piece_m
        sub = max(1, math.ceil(knot_h / piece_m - 1e-9))
        h = knot_h / sub
        q = _GAUSS_NODES
        nodes, weights = legendre.leggauss(q)
        deriv = fit.spline.derivative()
        # Knots are uniform, so on every knot interval the k derivative basis functions take
        # the same values at the same relative nodes: evaluate them once on interval 0.
        local = (np.arange(sub)[:, None] + 0.5 * (1.0 + nodes)) * h          # (sub, q)
        local = np.clip(local.ravel(), 0.0, knot_h)
        stencil = BSpline.design_matrix(local, deriv.t, k - 1).toarray()
        if np.any(stencil[:, k:]):
            raise AssertionError("unexpected B-spline support on the first knot interval")
        stencil = stencil[:, :k]
        coef = deriv.c
        velocity = np.zeros((n_int, sub * q, coef.shape[1]))
        for r in range(k):
            velocity += stencil[None, :, r, None] * coef[r: r + n_int][:, None, :]
        node_speed = np.sqrt(np.sum(velocity**2, axis=2)).reshape(n_int * sub, q)
        vander = legendre.legvander(nodes, q - 1)
        speed = (node_speed * weights) @ vander * (np.arange(q) + 0.5)
        integral = legendre.legint(speed, m=1, lbnd=-1, axis=1)
        knot_station = np.concatenate(([0.0], np.cumsum(0.5 * h * integral.sum(axis=1))))
        return cls(0.0, h, nodes, node_speed, speed, integral, knot_station)

    def station(self, u: np.ndarray) -> np.ndarray:
        """Station (m) of parameter values ``u``."""
        n_pieces = self.integral.shape[0]
        rel = (np.asarray(u, dtype=float) - self.start) / self.h
        j = np.clip(np.floor(rel).astype(int), 0, n_pieces - 1)
        tau = np.clip(2.0 * (rel - j) - 1.0, -1.0, 1.0)
        return self.knot_station[j] + 0.5 * self.h * legendre.legval(tau, self.integral[j].T,
                                                                     tensor=False)

    def parameter(self, s: np.ndarray) -> np.ndarray:
        """Parameter values at stations ``s`` (m): safeguarded Newton within each piece."""
        n_pieces = self.integral.shape[0]
        s = np.asarray(s, dtype=float)
        j = np.clip(np.searchsorted(self.knot_station, s, side="right") - 1, 0, n_pieces - 1)
        target = (s - self.knot_station[j]) / (0.5 * self.h)        # integral_j(tau) wanted
        whole = self.integral[j].sum(axis=1)                         # integral_j(1)
        tau = np.clip(2.0 * target / np.where(whole > 0, whole, 1.0) - 1.0, -1.0, 1.0)
        lo, hi = np.full(s.shape, -1.0), np.full(s.shape, 1.0)
        todo = np.arange(s.size)
        for _ in range(_NEWTON_MAX_ITER):
            if todo.size == 0:
                break
            cj = self.integral[j[todo]].T
            f = legendre.legval(tau[todo], cj, tensor=False) - target[todo]
            done = np.abs(f) <= _NEWTON_TOL
            below = f < 0
            lo[todo[below]] = tau[todo[below]]
            hi[todo[~below]] = tau[todo[~below]]
            slope = legendre.legval(tau[todo], self.speed[j[todo]].T, tensor=False)
            with np.errstate(divide="ignore", invalid="ignore"):
                step = tau[todo] - f / slope
            sub_lo, sub_hi = lo[todo], hi[todo]
            bad = ~((step > sub_lo) & (step < sub_hi)) | ~np.isfinite(step)
            step[bad] = 0.5 * (sub_lo[bad] + sub_hi[bad])
            tau[todo[~done]] = step[~done]
            todo = todo[~done]
        return self.start + self.h * (j + 0.5 * (1.0 + tau))
