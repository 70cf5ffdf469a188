"""The straightforward way to an exact stable range, as the yardstick for row 1.

A symbolic Routh array in sympy (each entry put through ``sympy.cancel``), then
``sympy.reduce_inequalities`` on "every first-column entry > 0". It assumes a positive leading
coefficient and no special case (no first-column entry identically zero), which holds for the
generated loops. From the textbook Routh criterion (Routh 1877; e.g. Ogata, *Modern Control
Engineering*, from memory).

>>> from bench.generators import unity_feedback_loop
>>> baseline_stable_set(unity_feedback_loop(4))
(-9 < K) & (K < 24)
"""
from __future__ import annotations

import sympy
from flint import fmpq_mpoly

from bench.timing import time_capped

K = sympy.Symbol("K", real=True)


def sympy_coefficients(poly: fmpq_mpoly) -> list[sympy.Expr]:
    """Coefficients in K of a polynomial in s and K (context names ('s', 'K')), highest power first."""
    by_power: dict[int, sympy.Expr] = {}
    for (es, ek), c in poly.to_dict().items():
        term = sympy.Rational(int(c.p), int(c.q)) * K ** ek
        by_power[es] = by_power.get(es, sympy.Integer(0)) + term
    degree = max(by_power)
    return [sympy.expand(by_power.get(p, sympy.Integer(0))) for p in range(degree, -1, -1)]


def routh_first_column(coeffs: list[sympy.Expr]) -> list[sympy.Expr]:
    """First column of the Routh array, each entry through ``sympy.cancel``."""
    n = len(coeffs) - 1
    width = n // 2 + 2
    zero = sympy.Integer(0)
    rows = [list(coeffs[0::2]), list(coeffs[1::2])]
    rows = [r + [zero] * (width - len(r)) for r in rows]
    for _ in range(2, n + 1):
        prev, above = rows[-1], rows[-2]
        new = [sympy.cancel((prev[0] * above[j + 1] - above[0] * prev[j + 1]) / prev[0])
               for j in range(width - 1)]
        rows.append([*new, zero])
    return [r[0] for r in rows]


def baseline_stable_set(poly: fmpq_mpoly):
    """The stable set of K as a sympy relational (the straightforward method)."""
    column = routh_first_column(sympy_coefficients(poly))
    if any(not c.free_symbols and not c > 0 for c in column):
        return sympy.false
    conditions = [c > 0 for c in column if c.free_symbols]
    return sympy.reduce_inequalities(conditions, K)


def timed_baseline(degree: int, repeats: int, cap_s: float) -> list[float | None]:
    """Seconds per run of :func:`baseline_stable_set` on the generated loop of this degree; a run
    stopped at the cap gives None and ends the series (entry point of the child process)."""
    from bench.generators import unity_feedback_loop
    poly = unity_feedback_loop(degree)
    times: list[float | None] = []
    for _ in range(repeats):
        times.append(time_capped(lambda: baseline_stable_set(poly), cap_s))
        if times[-1] is None:
            break
    return times
