"""Kinematics of a step next to rest under a jerk bound: a jerk ramp, then constant acceleration.

A vehicle leaving rest with bounded jerk starts with zero acceleration. Over the first step (length
``ds``, from rest to the speed ``v`` at the *moving* node) it is driven at constant jerk ``j``
for a time ``t1`` (the *ramp*), then at the constant acceleration ``a = j t1`` it has reached for a
time ``t2`` (the *flat* part), up to the moving node. Arriving at rest is the same motion driven
backwards (constant deceleration, then a ramp down to zero). Uniform-jerk kinematics give, with
``r = t1 / T`` and ``T = t1 + t2``::

    v = a (t1 / 2 + t2),        ds = a t1^2 / 6 + (a t1 / 2) t2 + a t2^2 / 2,

which, eliminating the times, is ``v^2 = 2 a ds - a^4 / (12 j^2)``: the constant-acceleration
relation ``v^2 = 2 a ds`` less what the ramp costs.

The step's *shape* is one number, ``u`` in ``[0, 1]``: ``t1 / t2 = 2 u / (1 - u)`` (``u = 0``
is constant acceleration from rest, ``u = 1`` constant jerk over the whole step). For a fixed
shape every quantity is a fixed multiple of a power of ``v``, so the step stays linear in the
squared speed ``b = v^2`` like every other step of the discrete problem (:mod:`curvespeed.problem`):

* acceleration at the moving node ``a = f b / (2 ds)`` with ``f = 1 + u^2 / 3``
  (:func:`accel_factor`);
* time of the step ``T = c ds / v`` with ``c = 2 (1 + u) / f`` (:func:`time_coef`), between 2
  (``u = 0``) and 3 (``u = 1``, the constant-jerk step ``s ~ t^3``);
* time of the flat part ``t2 = c2 ds / v`` with ``c2 = 2 (1 - u) / f`` (:func:`flat_time_coef`);
* jerk of the ramp ``j = f^2 v^3 / (8 u ds^2)`` (:func:`ramp_jerk`), so a jerk bound ``J`` caps
  the moving node at ``b <= (8 u J ds^2 / f^2)^(2/3)`` (:func:`jerk_cap_b`).

The shape that reaches the acceleration ``A`` exactly at the moving node, ramping at exactly ``J``,
has ``f - 1 = q / (1 - q)`` with ``q = A^3 / (24 J^2 ds)`` (:func:`shape_for_accel`): then the
step is the start of the time-optimal jerk-limited launch itself (ramp to ``A`` in ``A / J``
seconds, then constant ``A``), which the double-S closed form of Biagiotti & Melchiorri (2008,
section 3.4) describes. That needs the ramp to fit in the step, ``A^3 <= 6 J^2 ds`` (``u <= 1``).
When it does not, the acceleration must keep rising across the next stations, and the step keeps
a flat part for that: see :func:`continuing_shape` and :data:`U_CONTINUING`.

Closed forms only; vectorised over arrays; no side effects.
"""

from __future__ import annotations

import numpy as np

#: Shape of a step next to rest when the jerk ramp to the acceleration limit does not fit in one
#: step. A jerk-limited launch then keeps ramping across the next station; in the discrete model
#: that change of acceleration at the moving node is a symmetric ramp about the node (see
#: :meth:`curvespeed.problem.SpeedProblem.jerk_time_terms`), which needs a flat part before the
#: node. Under a ramp that continues at the bound, the step after the first takes
#: ``(2^(1/3) - 1)`` times as long as the first (``s = J t^3 / 6``); the flat part is sized to
#: half of that, ``t2 / T = r = (2^(1/3) - 1) / 2``, so that the node's ramp mirrors half of the
#: next step: ``u = (1 - r) / (1 + r)``, about 0.770.
U_CONTINUING = (1.0 - (2.0 ** (1.0 / 3.0) - 1.0) / 2.0) / (1.0 + (2.0 ** (1.0 / 3.0) - 1.0) / 2.0)


def accel_factor(u):
    """``f``: acceleration at the moving node over the step's mean ``b / (2 ds)``."""
    u = np.asarray(u, dtype=float)
    return 1.0 + u * u / 3.0


def time_coef(u):
    """``c``: the step takes ``c ds / v`` (``v`` at the moving node); 2 at ``u = 0``, 3 at 1."""
    u = np.asarray(u, dtype=float)
    return 2.0 * (1.0 + u) / accel_factor(u)


def flat_time_coef(u):
    """``c2``: the constant-acceleration part lasts ``c2 ds / v``; 0 at ``u = 1``."""
    u = np.asarray(u, dtype=float)
    return 2.0 * (1.0 - u) / accel_factor(u)


def ramp_time(u, v_moving, ds):
    """Time of the ramp, ``t1 = 4 u ds / (f v)``, s (``v`` at the moving node)."""
    u = np.asarray(u, dtype=float)
    return 4.0 * u / accel_factor(u) * ds / np.asarray(v_moving, dtype=float)


def ramp_jerk(u, b_moving, ds):
    """Jerk of the ramp, m/s^3, for squared speed ``b_moving`` at the moving node (0 at rest)."""
    u = np.asarray(u, dtype=float)
    v = np.sqrt(np.maximum(np.asarray(b_moving, dtype=float), 0.0))
    f = accel_factor(u)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(u > 0.0, f * f * v ** 3 / (8.0 * np.where(u > 0.0, u, 1.0) * ds * ds),
                        np.where(v > 0.0, np.inf, 0.0))


def jerk_cap_b(u, jerk, ds):
    """Largest squared speed at the moving node whose ramp keeps within ``jerk``, m^2/s^2."""
    u = np.asarray(u, dtype=float)
    f = accel_factor(u)
    return (8.0 * u * jerk * ds * ds / (f * f)) ** (2.0 / 3.0)


def max_ramp_accel(jerk, ds):
    """Acceleration a constant-jerk ramp from rest reaches over one whole step,
    ``(6 J^2 ds)^(1/3)``: the largest a step next to rest can end with."""
    return (6.0 * jerk * jerk * ds) ** (1.0 / 3.0)


def shape_for_accel(accel, jerk, ds, whole_ramp: bool = False):
    """``u`` of the step that ramps at ``jerk`` to ``accel`` and holds it to the moving node.

    ``u = sqrt(3 q / (1 - q))`` with ``q = A^3 / (24 J^2 ds)``, at most :data:`U_CONTINUING`:
    where the ramp does not fit in the step (``A >= (6 J^2 ds)^(1/3)``, ``q >= 1/4``, ``u >= 1``)
    or leaves less flat part than that shape, the step keeps that shape's flat part, and reaches
    a lower acceleration at the bound (the acceleration then keeps rising after the node).
    ``whole_ramp``: the ramp is taken whatever flat part it leaves, up to ``u = 1`` (a move
    that holds ``accel`` past the node, :func:`curvespeed.jerk_model.with_rest_steps`).
    """
    a = np.maximum(np.asarray(accel, dtype=float), 0.0)
    q = np.minimum(a ** 3 / (24.0 * jerk * jerk * ds), 0.25 if whole_ramp else 0.2)
    return np.minimum(np.sqrt(3.0 * q / (1.0 - q)), 1.0 if whole_ramp else U_CONTINUING)


def continuing_shape(accel, jerk, ds, iterations: int = 60):
    """``u`` of a step next to rest that ramps at ``jerk`` as far as it can and leaves the rest
    of the rise to ``accel`` to the change of acceleration about its moving node; at least
    :data:`U_CONTINUING`.

    Where the ramp to ``accel`` does not fit in the step (``accel > (6 J^2 ds)^(1/3)``) the
    acceleration goes on rising across the moving node, from the step's end value
    ``f b / (2 ds)`` (``b`` at the ramp's jerk cap, :func:`jerk_cap_b`) to ``accel``. That
    change is a ramp at ``jerk`` symmetric about the node, whose first half lies in the step's
    flat part ``t2``: it fits when ``2 t2 J >= accel - f b / (2 ds)``. The largest such ``u``
    (the left side falls as ``u`` grows) reaches the node fastest. Where even
    :data:`U_CONTINUING` leaves too little flat part, the rise goes on over several stations
    and that shape is kept. Found by bisection on all steps at once.
    """
    a = np.asarray(accel, dtype=float)

    def holds(u):
        b = jerk_cap_b(u, jerk, ds)
        flat = flat_time_coef(u) * ds / np.sqrt(b)
        return 2.0 * flat * jerk + accel_factor(u) * b / (2.0 * ds) >= a

    lo = np.full(a.shape, U_CONTINUING)
    return np.where(holds(lo), largest_true(holds, lo, np.ones(a.shape), iterations),
                    U_CONTINUING)


def largest_true(holds, lo, hi, iterations: int = 60):
    """The largest value in ``[lo, hi]`` (arrays) where ``holds`` is true, for a predicate that
    is true at ``lo`` and stays true up to some point: the lower end of the bracket after
    ``iterations`` halvings (vectorised bisection)."""
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        good = holds(mid)
        lo, hi = np.where(good, mid, lo), np.where(good, hi, mid)
    return lo


def linear_accel_step(ds, v0, v1, duration):
    """Start acceleration and jerk of a step driven at constant jerk (its acceleration linear in
    time) from ``v0`` to ``v1`` over ``ds`` in ``duration`` seconds: ``v1 = v0 + a0 T + J T^2 /
    2`` and ``ds = v0 T + a0 T^2 / 2 + J T^3 / 6`` give ``J = 12 (T (v0 + v1) / 2 - ds) / T^3``
    and ``a0 = (v1 - v0) / T - J T / 2``. A step at constant acceleration is the case ``J = 0``;
    with ``T = c ds / (v0 + v1)`` the speed stays at least 0 for ``c <= 3`` (in Bernstein form
    its middle coefficient is ``(3 / c - 1) (v0 + v1) >= 0``); below 2 it is concave in time
    and may peak inside the step (a move's top speed)."""
    T = np.asarray(duration, dtype=float)
    v0, v1 = np.asarray(v0, dtype=float), np.asarray(v1, dtype=float)
    jerk = 12.0 * (0.5 * T * (v0 + v1) - ds) / T ** 3
    return (v1 - v0) / T - 0.5 * jerk * T, jerk


def linear_state_at_time(ds, v0, v1, duration, tau):
    """Distance, speed and acceleration ``tau`` seconds into a step driven at constant jerk
    (:func:`linear_accel_step`); ``tau`` is clipped to the step."""
    T = np.asarray(duration, dtype=float)
    a0, jerk = linear_accel_step(ds, v0, v1, T)
    t = np.clip(tau, 0.0, T)
    d = np.asarray(v0, dtype=float) * t + 0.5 * a0 * t * t + jerk * t ** 3 / 6.0
    return d, v0 + a0 * t + 0.5 * jerk * t * t, a0 + jerk * t


def linear_time_at_distance(ds, v0, v1, duration, d, iterations: int = 60):
    """Seconds into a step driven at constant jerk (:func:`linear_accel_step`) at which the
    distance ``d`` is reached: the distance grows with time over the step (the speed is not
    negative), so bisection on ``[0, T]`` (:func:`largest_true`, to ``T / 2^60``)."""
    T = np.asarray(duration, dtype=float)
    target = np.clip(np.asarray(d, dtype=float), 0.0, ds)
    shape = np.broadcast(T, target).shape
    return largest_true(lambda t: linear_state_at_time(ds, v0, v1, T, t)[0] < target,
                        np.zeros(shape), np.broadcast_to(T, shape).copy(), iterations)


def shape_from_time_coef(c):
    """``u`` from the step's time coefficient ``c`` in [2, 3] (the inverse of :func:`time_coef`):
    ``c u^2 - 6 u + 3 c - 6 = 0``, smaller root ``u = (3 - sqrt(9 + 6 c - 3 c^2)) / c``."""
    c = np.clip(np.asarray(c, dtype=float), 2.0, 3.0)
    return np.clip((3.0 - np.sqrt(np.maximum(9.0 + 6.0 * c - 3.0 * c * c, 0.0))) / c, 0.0, 1.0)


def leaving_state_at_time(u, v_moving, ds, tau):
    """Distance from rest, speed and acceleration ``tau`` seconds after leaving rest.

    ``tau`` is clipped to the step. Returns ``(d, v, a)``; see the module docstring.
    """
    u, v1 = np.asarray(u, dtype=float), np.asarray(v_moving, dtype=float)
    f = accel_factor(u)
    safe_v = np.where(v1 > 0.0, v1, 1.0)
    T = time_coef(u) * ds / safe_v
    t1 = ramp_time(u, safe_v, ds)
    a = f * v1 * v1 / (2.0 * ds)
    tau = np.clip(tau, 0.0, T)
    in_ramp = tau < t1
    jerk = np.where(t1 > 0.0, a / np.where(t1 > 0.0, t1, 1.0), 0.0)
    x = np.minimum(tau, t1)                     # time spent ramping so far
    y = np.maximum(tau - t1, 0.0)               # time in the flat part so far
    v_r = 0.5 * jerk * x * x
    d = jerk * x ** 3 / 6.0 + v_r * y + 0.5 * a * y * y
    v = v_r + a * y
    acc = np.where(in_ramp, jerk * x, a)
    return d, v, acc


def leaving_time_at_distance(u, v_moving, ds, d):
    """Time after leaving rest at which the distance ``d`` (within the step) is reached, s."""
    u, v1 = np.asarray(u, dtype=float), np.asarray(v_moving, dtype=float)
    f = accel_factor(u)
    safe_v = np.where(v1 > 0.0, v1, 1.0)
    t1 = ramp_time(u, safe_v, ds)
    a = f * v1 * v1 / (2.0 * ds)
    jerk = np.where(t1 > 0.0, a / np.where(t1 > 0.0, t1, 1.0), 0.0)
    d_r = jerk * t1 ** 3 / 6.0                  # end of the ramp
    v_r = 0.5 * jerk * t1 * t1
    d = np.clip(np.asarray(d, dtype=float), 0.0, ds)
    with np.errstate(divide="ignore", invalid="ignore"):
        in_ramp = np.cbrt(6.0 * d / np.where(jerk > 0.0, jerk, 1.0))
        rest = d - d_r
        flat = t1 + np.where(rest > 0.0, 2.0 * rest / (v_r + np.sqrt(v_r * v_r + 2.0 * a * rest)),
                             0.0)
    return np.where((d <= d_r) & (jerk > 0.0), in_ramp, flat)


__all__ = ["U_CONTINUING", "accel_factor", "continuing_shape", "flat_time_coef", "jerk_cap_b",
           "largest_true", "leaving_state_at_time", "leaving_time_at_distance",
           "linear_accel_step", "linear_state_at_time", "linear_time_at_distance",
           "max_ramp_accel", "ramp_jerk", "ramp_time",
           "shape_for_accel", "shape_from_time_coef", "time_coef"]
