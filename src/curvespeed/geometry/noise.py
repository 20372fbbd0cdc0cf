"""Noise of points about a smooth path, estimated from the points alone."""

from __future__ import annotations

import math
import sys
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import CurvespeedWarning
from ..order_stats import percentile

#: Neighbours on each side of a point used to predict it in :func:`estimate_scatter`: a quintic
#: (degree 2 * 3 - 1, the spline's own degree) through the three points before and after.
SCATTER_NEIGHBOURS = 3
_SCATTER_BOUND_Z = -2.0            # one-sided, two standard deviations


def estimate_noise(u: np.ndarray, values: np.ndarray, span: float, periodic: bool,
                   scale: np.ndarray | None = None) -> tuple[float, float]:
    """Point estimate and upper confidence bound of :func:`estimate_scatter` (inf, inf when
    there are fewer than :data:`MIN_POINTS_TO_ESTIMATE` points)."""
    if u.size < MIN_POINTS_TO_ESTIMATE:
        return math.inf, math.inf
    return (estimate_scatter(u, values, span, periodic, scale=scale, bound=False),
            estimate_scatter(u, values, span, periodic, scale=scale))


def estimate_scatter(u: np.ndarray, values: np.ndarray, span: float, periodic: bool,
                     components: int = 1, scale: np.ndarray | None = None,
                     bound: bool = True) -> float:
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

    ``components`` is how many noisy components each point's prediction error carries: one for a
    path in chord length (above), two when ``u`` is time or sampling order, where noise along
    the path stays in the error too. ``scale`` gives each point's noise relative to the others
    (points that average several fixes are more precise); the estimate is then the noise of a
    point of relative scale 1.

    Returns
    -------
    float
        An upper confidence bound for ``sigma`` (``bound=False``: the estimate itself), metres, or ``inf`` when there are too few
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
    rel = np.ones(m) if scale is None else np.asarray(scale, dtype=float)
    if periodic:   # wrap q points around each end so that every point has its neighbours
        u = np.concatenate((u[-q:] - span, u, u[:q] + span))
        values = np.concatenate((values[-q:], values, values[:q]))
        rel = np.concatenate((rel[-q:], rel, rel[:q]))
    n = u.size - 2 * q                               # points predicted: q .. q + n - 1
    offsets = [o for o in range(-q, q + 1) if o != 0]
    t = [u[q + o: q + o + n] - u[q: q + n] for o in offsets]
    error = values[q: q + n].copy()
    scale2 = rel[q: q + n] ** 2
    for a, o in enumerate(offsets):
        # Lagrange weight of neighbour o at the point: prod over the others b of t_b / (t_b - t_a).
        weight = np.ones(n)
        for b in range(len(offsets)):
            if b != a:
                weight *= t[b] / (t[b] - t[a])
        error -= weight[:, None] * values[q + o: q + o + n]
        scale2 += (weight * rel[q + o: q + o + n]) ** 2
    squares = np.sum(error**2, axis=1) / scale2
    # A stray point must not set the noise of the whole route: squares beyond WINSOR_FACTOR^2
    # times the 90th percentile are capped there (for Gaussian noise that cap lies beyond
    # 6 sigma and changes nothing; a 5 m spike among centimetre-precise points no longer
    # passes for a metre of noise everywhere).
    cap = (WINSOR_FACTOR**2) * percentile(squares, 90)
    mean_square = float(np.mean(np.minimum(squares, cap))) / components
    if not math.isfinite(mean_square):      # neighbours almost on top of each other
        return math.inf
    # Variance inflation of the mean: on uniform spacing the normalised errors are the
    # 2q-th differences of the noise, whose stencil's autocorrelations r_k give 1 + 2 sum r_k^2.
    stencil = np.array([(-1.0) ** j * math.comb(2 * q, j) for j in range(2 * q + 1)])
    acf = np.correlate(stencil, stencil, mode="full") / float(stencil @ stencil)
    n_eff = components * n / float(np.sum(acf**2))
    if not bound:
        return math.sqrt(mean_square)
    # mean_square * n_eff / sigma^2 is about chi-square with n_eff degrees of freedom; its
    # lower quantile gives the bound.
    low = chi_square_quantile(n_eff, _SCATTER_BOUND_Z)
    return math.sqrt(mean_square * n_eff / low)


def chi_square_quantile(dof: float, z: float) -> float:
    """The quantile of the chi-square distribution with ``dof`` degrees of freedom (4 or more)
    at probability ``Phi(z)`` (the normal distribution's; ``z`` up to 0): ``2 x`` for the ``x``
    with ``P(dof / 2, x) = Phi(z)``, ``P`` the regularised lower incomplete gamma function, by
    Newton's method from the Wilson-Hilferty approximation (Wilson and Hilferty, 1931; from
    memory). ``P(a, x)`` is its power series ``x^a e^-x / Gamma(a + 1) sum_n x^n / ((a + 1)
    ... (a + n))`` (Abramowitz and Stegun 6.5.29, from memory; it converges where ``x < a + 1``,
    as every lower quantile has), the prefactor in logarithms about ``x = a`` so that large
    ``a`` keeps its digits. The test suite checks it against scipy's ``chi2.ppf``."""
    a, p = 0.5 * dof, 0.5 * math.erfc(-z / math.sqrt(2.0))
    root = 1.0 / (9.0 * a)
    x = a * max(1.0 - root + z * math.sqrt(root), 0.1) ** 3
    last = math.inf
    for _ in range(50):
        lower, log_density = _gamma_p(a, x)
        step = (lower - p) / math.exp(log_density)
        # converged: a step of round-off, or one no smaller than the last once it is tiny
        if abs(step) <= 4.0 * sys.float_info.epsilon * x or (
                abs(step) >= last and abs(step) <= 1e-12 * x):
            return 2.0 * (x - step)
        last = abs(step)
        x = x - step if x - step > 0.0 else 0.5 * x
    raise ArithmeticError(f"no chi-square quantile for {dof} degrees of freedom")


def _gamma_p(a: float, x: float) -> tuple[float, float]:
    """``P(a, x)`` for ``0 < x < a + 1`` and the logarithm of its derivative in ``x``."""
    if a >= 30.0:      # log(x^a e^-x / Gamma(a + 1)) about x = a: a (log1p(t) - t) - ..., t = x/a - 1
        t = x / a - 1.0
        if abs(t) < 0.1:                          # log1p(t) - t = -t^2/2 + t^3/3 - ...
            log_shape, power = 0.0, t
            for n in range(2, 40):
                power *= -t
                log_shape += power / n
        else:
            log_shape = math.log1p(t) - t
        # log Gamma(a + 1) = a log a - a + log(2 pi a) / 2 + 1/(12 a) - 1/(360 a^3) + ... (Stirling)
        stirling = (1.0 / (12.0 * a) - 1.0 / (360.0 * a**3) + 1.0 / (1260.0 * a**5)
                    - 1.0 / (1680.0 * a**7))
        log_prefactor = a * log_shape - 0.5 * math.log(2.0 * math.pi * a) - stirling
    else:
        log_prefactor = a * math.log(x) - x - math.lgamma(a + 1.0)
    # for x <= a + 1 the n-th term is below exp(-(n^2 / 2 - n) / a): 12 sqrt(a) + 60 terms
    # take it below 1e-30 of the first
    terms = np.cumprod(x / (a + np.arange(1.0, 12.0 * math.sqrt(a + 1.0) + 60.0)))
    series = 1.0 + math.fsum(terms.tolist())
    return math.exp(log_prefactor) * series, log_prefactor + math.log(a / x)


#: Normalised squared errors are capped at this factor squared times their 90th percentile.
WINSOR_FACTOR = 4.0
#: A stated noise that differs from the estimate by more than this factor either way is
#: reported, and the estimate is used (see :func:`choose_noise`).
DISAGREEMENT_FACTOR = 2.0


@dataclass(frozen=True)
class NoiseChoice:
    """The noise a fit used, and where it came from (standard deviations, metres).

    ``stated`` is None when the user left it to the data (``auto``); ``estimated`` is None when
    there were too few points to tell.
    """

    what: str
    stated: float | None
    estimated: float | None
    used: float

    @property
    def origin(self) -> str:
        if self.stated is not None and self.used == self.stated:
            return "stated"
        return "estimated" if self.estimated is not None else "default"

    def to_dict(self) -> dict:
        return {"stated_m": self.stated, "estimated_m": self.estimated, "used_m": self.used,
                "origin": self.origin}


#: Fewer points than this give no usable estimate of their noise (the confidence interval of a
#: variance from n normalised differences spans a factor of about 1 +- 2 sqrt(3.17 / n)).
MIN_POINTS_TO_ESTIMATE = 20


def choose_noise(what: str, stated: float | None, estimated: tuple[float, float], floor: float,
                 default: float, source: str, stacklevel: int = 3) -> NoiseChoice:
    """The noise to smooth with: the user's statement unless the points clearly disagree.

    ``estimated`` is the point estimate and its upper confidence bound (both inf when the points
    are too few). The upper bound (never below ``floor``) is used when nothing is stated, and
    when the statement lies more than :data:`DISAGREEMENT_FACTOR` outside the range between
    the two, with a warning naming both. Stated too low, the fit would follow noise the points plainly
    carry (on a dense log, a path several times too long); stated too high, it would cut
    curves that the points' own scatter shows are resolved (on design points, radii 5-20 %
    too tight at clothoid-arc joints). ``default`` serves when there are too few points to
    estimate anything.
    """
    point, upper = estimated
    est = max(upper, floor) if math.isfinite(upper) else None
    if est is None:
        used = default if stated is None else stated
        return NoiseChoice(what, stated, None, used)
    if stated is None:
        return NoiseChoice(what, None, est, est)
    low = max(point, floor)
    if low / DISAGREEMENT_FACTOR <= stated <= DISAGREEMENT_FACTOR * est:
        return NoiseChoice(what, stated, est, stated)
    ratio = stated / (low if stated < low else est)
    side = "less" if ratio < 1 else "more"
    factor = max(ratio, 1 / ratio)          # short however far off (1e300 m stated)
    times = f"{factor:.1f}" if factor < 1e6 else f"{factor:.3g}"
    warnings.warn(
        f"{source}: the {what} noise stated, {stated:g} m, is {times} times "
        f"{side} than the points show ({est:.3g} m, estimated from their scatter); using "
        f"{est:.3g} m. Leave the noise to the data (auto), or check the units and the file",
        CurvespeedWarning, stacklevel=stacklevel)
    return NoiseChoice(what, stated, est, est)
