"""A root of a scalar function within a bracket, by Brent's method.

The smoothing weight of every fit is such a root (:func:`.pspline.fit_pspline`); importing a
general optimisation library for this one function cost about 0.1 s of every plan's start-up.
The test suite checks the roots and the evaluations spent against ``scipy.optimize.brentq``.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable

#: Relative tolerance on the root: four units of round-off.
RTOL = 4.0 * sys.float_info.epsilon


def brent_root(f: Callable[[float], float], a: float, b: float, xtol: float,
               rtol: float = RTOL, maxiter: int = 100) -> float:
    """A zero of ``f`` in ``[a, b]`` (``f(a)`` and ``f(b)`` of opposite signs) to within
    ``xtol + rtol * |x|``: Brent's method (Brent, Algorithms for Minimization without
    Derivatives, 1973, ch. 4; from memory), which keeps a bracket and takes inverse quadratic
    interpolation or secant steps while they shrink it fast enough, bisection otherwise."""
    x_pre, x_cur = float(a), float(b)
    f_pre, f_cur = float(f(x_pre)), float(f(x_cur))
    if f_pre == 0.0:
        return x_pre
    if f_cur == 0.0:
        return x_cur
    if math.copysign(1.0, f_pre) == math.copysign(1.0, f_cur):
        raise ValueError("f(a) and f(b) must have different signs")
    x_blk = f_blk = s_pre = s_cur = 0.0
    for _ in range(maxiter):
        if f_pre != 0.0 and f_cur != 0.0 and (math.copysign(1.0, f_pre)
                                              != math.copysign(1.0, f_cur)):
            x_blk, f_blk = x_pre, f_pre           # the bracket's other end
            s_pre = s_cur = x_cur - x_pre
        if abs(f_blk) < abs(f_cur):               # the best estimate is x_cur
            x_pre, x_cur, x_blk = x_cur, x_blk, x_cur
            f_pre, f_cur, f_blk = f_cur, f_blk, f_cur
        delta = (xtol + rtol * abs(x_cur)) / 2.0
        s_bis = (x_blk - x_cur) / 2.0
        if f_cur == 0.0 or abs(s_bis) < delta:
            return x_cur
        if abs(s_pre) > delta and abs(f_cur) < abs(f_pre):
            if x_pre == x_blk:                    # secant
                s_try = -f_cur * (x_cur - x_pre) / (f_cur - f_pre)
            else:                                 # inverse quadratic interpolation
                d_pre = (f_pre - f_cur) / (x_pre - x_cur)
                d_blk = (f_blk - f_cur) / (x_blk - x_cur)
                s_try = -f_cur * (f_blk * d_blk - f_pre * d_pre) / (d_blk * d_pre * (f_blk - f_pre))
            if 2.0 * abs(s_try) < min(abs(s_pre), 3.0 * abs(s_bis) - delta):
                s_pre, s_cur = s_cur, s_try       # a short enough step: take it
            else:
                s_pre = s_cur = s_bis
        else:
            s_pre = s_cur = s_bis
        x_pre, f_pre = x_cur, f_cur
        x_cur += s_cur if abs(s_cur) > delta else math.copysign(delta, s_bis)
        f_cur = float(f(x_cur))
    raise ArithmeticError(f"no root within {maxiter} iterations")
