"""Long runs (make test-slow): exact Routh counts against counts known without any float.

Reference 1: 10,000 polynomials multiplied out from random rational roots, so the true numbers of
roots right of, on and left of the imaginary axis are known by construction. Roots are drawn to be
hard: a billionth from the axis, clustered a millionth apart, repeated, on the axis, and spread
over many decades. Reference 2: random integer polynomials checked with sympy's exact rectangle
root count (tests/test_numerically_hard.sympy_rhp). No numpy anywhere (tests/test_routh_slow.py
covers the comparison with numpy).
"""
from __future__ import annotations

import random

import pytest
from flint import fmpq, fmpq_poly

from core.analysis.routh import is_hurwitz, routh_counts
from tests.test_numerically_hard import sympy_rhp

pytestmark = pytest.mark.slow


def real_part(rnd: random.Random) -> fmpq:
    kind = rnd.randrange(6)
    sign = rnd.choice([1, -1])
    if kind == 0:
        return fmpq(sign, 10 ** rnd.randint(6, 12))          # a hair from the axis
    if kind == 1:
        return fmpq(0)                                       # on the axis
    if kind == 2:
        return fmpq(sign * rnd.randint(1, 10**6), 10**6)      # fine grid: clusters
    if kind == 3:
        e = rnd.randint(-6, 6)
        return fmpq(sign * 10 ** max(e, 0), 10 ** max(-e, 0))  # many decades
    return fmpq(sign * rnd.randint(1, 40), rnd.randint(1, 8))


def random_roots(rnd: random.Random):
    """(polynomial, rhp, jw) with roots drawn as above, some repeated or a millionth apart."""
    poly, rhp, jw = fmpq_poly([rnd.choice([1, 2, 7])]), 0, 0
    for _ in range(rnd.randint(1, 6)):
        base = real_part(rnd)
        for k in range(rnd.choice([1, 1, 1, 2, 3])):          # repeated, or clustered a millionth apart
            re = base if rnd.random() < 0.5 else base + fmpq(k, 10**6)
            if rnd.random() < 0.5:
                factor = fmpq_poly([-re, 1])                  # s - re
                width = 1
            else:
                im = fmpq(rnd.randint(1, 10**6), rnd.choice([1, 10**3, 10**6]))
                factor = fmpq_poly([re * re + im * im, -2 * re, 1])  # (s - re)^2 + im^2
                width = 2
            poly *= factor
            rhp += width * (re > 0)
            jw += width * (re == 0)
    return poly, rhp, jw


def test_ten_thousand_polynomials_with_known_counts():
    rnd = random.Random(20261201)
    for i in range(10_000):
        poly, rhp, jw = random_roots(rnd)
        coeffs = [poly[k] for k in range(poly.degree(), -1, -1)]
        counts = routh_counts(coeffs)
        degree = poly.degree()
        assert (counts.rhp, counts.jw, counts.lhp) == (rhp, jw, degree - rhp - jw), (i, coeffs)
        assert is_hurwitz(coeffs) == (rhp == 0 and jw == 0), (i, coeffs)


def test_random_integer_polynomials_against_sympy():
    rnd = random.Random(7)
    checked = 0
    while checked < 300:
        coeffs = [fmpq(rnd.choice([1, 2, 3, -1]))] + [fmpq(rnd.randint(-50, 50)) for _ in range(rnd.randint(2, 14))]
        counts = routh_counts(coeffs)
        if counts.jw:
            continue
        assert counts.rhp == sympy_rhp(coeffs), coeffs
        checked += 1
