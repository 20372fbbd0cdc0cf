"""The CSV writers' compiled rows (``io/_csv_rows.c``) are the ``%`` join's twin: the same text
to the last character. Python's ``"%.<p>f"`` (the interpreter's correctly rounded conversion,
ties to even, the sign of a negative value that rounds to zero kept) is the reference for every
float cell; the kernel's own exact 128-bit path is checked against it on values chosen to
stress it (exact ties at the last digit, subnormals, the ends of its reach) and on random ones
over 30 orders of magnitude, and its hand-over to the interpreter (nan, inf, huge values, more
than 17 decimals) likewise. A bundled route's profile CSV is the same file either way."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from curvespeed.io import _format
from curvespeed.io._format import format_columns

ROUTES = Path(__file__).resolve().parents[1] / "routes"

kernel = _format._csv_rows


def _values() -> np.ndarray:
    rng = np.random.default_rng(5)
    n = 4000
    spread = rng.normal(size=n) * 10.0 ** rng.integers(-12, 22, n)
    # j / 2^s: exact binary fractions, whose decimals end in 5 at digit s, so with s - 1
    # decimals every one of them is an exact tie (rounded to the even neighbour)
    ties = (rng.integers(-10**6, 10**6, n) * 2 + 1) / 2.0 ** rng.integers(1, 12, n)
    edges = [0.0, -0.0, 0.5, 1.5, 2.5, -2.5, 0.125, -0.375, 5e-324, -5e-324, 2.2250738585072014e-308,
             1e-320, 0.05, 0.005, -4e-5, 1.0000005, 123456.78905, 2.0**52, 2.0**53 + 2,
             2.0**70, -(2.0**71), 2.0**72, 2.0**80, 1e300, -1e300, np.nan, -np.nan, np.inf,
             -np.inf, float(np.nextafter(0.5, 1.0)), float(np.nextafter(0.5, 0.0))]
    return np.concatenate([spread, ties, edges])


def _reference(values: np.ndarray, p: int) -> str:
    return ("%." + str(p) + "f\n") * values.size % tuple(values.tolist())


@pytest.mark.parametrize("p", range(0, 21))
def test_each_float_cell_is_pythons_own_format(p):
    assert kernel is not None, "the CSV rows kernel was not built"
    values = _values()
    assert kernel.rows([values], [p]) == _reference(values, p)
    # the exact path itself, value by value, where it answers
    answered = 0
    for v in values.tolist():
        cell = kernel.fixed(v, p)
        if cell is not None:
            assert cell == "%.*f" % (p, v), (v, p)
            answered += 1
    if p <= 17:        # the exact path prints all but nan, inf and |x| >= 2^70
        assert answered == sum(np.isfinite(v) and abs(v) < 2.0**70 for v in values.tolist())
    else:
        assert answered == 0


def test_ties_round_to_even():
    # exact binary ties (written out by hand, from the rule: round half to even)
    assert kernel.rows([np.array([0.125, 0.375, 2.5, 3.5, -0.5, 0.5])], [2]) == \
        "0.12\n0.38\n2.50\n3.50\n-0.50\n0.50\n"
    assert kernel.rows([np.array([0.5, 1.5, 2.5, -2.5, -0.4])], [0]) == "0\n2\n2\n-2\n-0\n"


def test_rows_join_cells_and_text():
    a = np.array([1.0, -2.25])
    b = ["lateral_comfort", "é"]
    assert kernel.rows([a, b, a], [1, -1, 3]) == "1.0,lateral_comfort,1.000\n-2.2,é,-2.250\n"
    assert kernel.rows([np.zeros(0)], [4]) == ""


def test_bad_columns_are_refused():
    with pytest.raises(ValueError, match="different lengths"):
        kernel.rows([np.zeros(2), ["x"]], [1, -1])
    with pytest.raises(TypeError, match="float64"):
        kernel.rows([np.zeros(2, dtype=np.float32)], [1])
    with pytest.raises(TypeError, match="list of str"):
        kernel.rows([("x", "y")], [-1])
    with pytest.raises(TypeError, match="not a str"):
        kernel.rows([["x", 1]], [-1])
    with pytest.raises(ValueError, match="one precision per column"):
        kernel.rows([np.zeros(2)], [1, 2])


def test_profile_csv_is_the_same_file_either_way(monkeypatch):
    import curvespeed as cs
    from curvespeed.io.profile_csv import profile_columns

    geo = cs.build_geometry(cs.read_route(ROUTES / "mountain_road.csv"))
    profile = cs.plan_profile(geo, cs.Limits(), cs.RouteConstraints())
    columns = profile_columns(profile)
    monkeypatch.setattr(_format, "_ROW_BLOCK", 997)       # several blocks
    fast = format_columns(columns)
    monkeypatch.setattr(_format, "_csv_rows", None)
    assert fast == format_columns(columns)
    assert fast.count("\n") == geo.n_nodes + 1
