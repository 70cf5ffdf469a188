"""Numerically hard loops: the exact verdict never follows floating-point noise.

References: polynomials are built from known rational roots (the true counts are known by
construction); sympy's exact rectangle root count ``Poly.count_roots(inf, sup)`` is an
independent exact method; numpy.roots only shows where floats go wrong. The textbook loop
s^3 + 3s^2 + 2s + K is stable exactly for 0 < K < 6 (classic Routh example, from memory).
"""
from __future__ import annotations

import random
import time
from fractions import Fraction

import numpy as np
import pytest
import sympy
from flint import fmpq

from core.analysis.poles import certified_roots, path_sensitivity
from core.analysis.report import check_polynomial
from core.analysis.routh import routh_counts

s = sympy.symbols("s")


def q(text: str) -> str:
    """A rational as parser text in parentheses, e.g. (1/1000000)."""
    f = Fraction(text)
    return f"({f.numerator}/{f.denominator})"


def product_text(reals: list[Fraction], pairs: list[tuple[Fraction, Fraction]]) -> str:
    """(s - r)... (s^2 - 2a s + a^2 + b^2)... for real roots r and pairs a +- jb."""
    factors = [f"(s - {q(r)})" for r in reals]
    factors += [f"(s^2 - {q(2 * a)}*s + {q(a * a + b * b)})" for a, b in pairs]
    return "*".join(factors)


def known_counts(reals, pairs) -> tuple[int, int]:
    rhp = sum(r > 0 for r in reals) + 2 * sum(a > 0 for a, _ in pairs)
    jw = sum(r == 0 for r in reals) + 2 * sum(a == 0 for a, _ in pairs)
    return rhp, jw


def sympy_rhp(coeffs) -> int:
    """Roots with Re > 0 by sympy's exact rectangle count (no roots on the imaginary axis assumed)."""
    poly = sympy.Poly([sympy.Rational(int(c.p), int(c.q)) for c in coeffs], s)
    bound = 1 + max(abs(c / poly.LC()) for c in poly.all_coeffs()[1:])  # Cauchy's root bound
    return poly.count_roots(sympy.I * -bound, bound + sympy.I * bound) - poly.count_roots(-sympy.I * bound,
                                                                                            sympy.I * bound)


def coefficients(reals, pairs) -> list[fmpq]:
    expr = sympy.expand(sympy.sympify(1) * sympy.Mul(*[s - sympy.Rational(r.numerator, r.denominator) for r in reals])
                        * sympy.Mul(*[(s - sympy.Rational(a.numerator, a.denominator)) ** 2
                                      + sympy.Rational(b.numerator, b.denominator) ** 2 for a, b in pairs]))
    return [fmpq(int(c.p), int(c.q)) for c in sympy.Poly(expr, s).all_coeffs()]


# -- coefficients spanning many decades -------------------------------------------------------------
WIDE = [Fraction(-1, 10**k) for k in (9, 7, 5, 3, 1)] + [Fraction(-10), Fraction(-1000)]  # constant term 1e-21


@pytest.mark.parametrize("flip", [None, 0, 3, 6])
def test_roots_from_a_billionth_to_a_thousand(flip):
    reals = list(WIDE)
    if flip is not None:
        reals[flip] = -reals[flip]  # one root moved to the right half plane
    coeffs = coefficients(reals, [])
    assert max(abs(c) for c in coeffs) >= 10**3 and min(abs(c) for c in coeffs) <= fmpq(1, 10**21)
    report = check_polynomial(product_text(reals, []))
    rhp, jw = known_counts(reals, [])
    assert (report.nominal.rhp, report.nominal.jw, report.nominal.stable) == (rhp, jw, rhp == 0)
    # certified poles: every root found to 9 significant digits (reference: the roots we built from)
    found = sorted(p.re for p in report.nominal.poles)
    assert np.allclose(found, sorted(float(r) for r in reals), rtol=1e-9, atol=0)


def test_tiny_and_huge_pairs():
    pairs = [(Fraction(-1, 10**7), Fraction(1, 10**5)), (Fraction(-10**4), Fraction(10**6))]
    reals = [Fraction(1, 10**8)]
    report = check_polynomial(product_text(reals, pairs))
    assert (report.nominal.rhp, report.nominal.jw) == known_counts(reals, pairs) == (1, 0)
    assert report.nominal.rhp == sympy_rhp(report.analysed.at())


# -- clustered and repeated roots ------------------------------------------------------------------
def test_tenfold_root():
    # (s+1)^10: one root of multiplicity 10 (binomial theorem)
    report = check_polynomial("(s+1)^10")
    assert report.nominal.stable and report.nominal.lhp == 10
    assert [(p.re, p.im, p.multiplicity) for p in report.nominal.poles] == [(-1.0, 0.0, 10)]
    # numpy scatters the tenfold root by about eps^(1/10) (float reference, for contrast)
    spread = np.max(np.abs(np.roots(np.poly([-1.0] * 10)) + 1))
    assert spread > 1e-3


@pytest.mark.parametrize("sign", [1, -1])
def test_roots_a_millionth_apart(sign):
    # eight roots at sign*(1 + k/10^6): all in one half plane, none repeated
    reals = [sign * (1 + Fraction(k, 10**6)) for k in range(8)]
    report = check_polynomial(product_text(reals, []))
    assert (report.nominal.rhp, report.nominal.lhp) == ((8, 0) if sign > 0 else (0, 8))
    assert sum(p.multiplicity for p in report.nominal.poles) == 8 and len(report.nominal.poles) == 8


def test_repeated_roots_on_both_sides():
    # (s-1)^4 (s+1)^4 (s^2+1)^2: 4 right, 4 left, 4 on the axis (by construction)
    report = check_polynomial("(s-1)^4*(s+1)^4*(s^2+1)^2")
    assert (report.nominal.rhp, report.nominal.jw, report.nominal.lhp) == (4, 4, 4)
    assert not report.nominal.stable


# -- roots within 1e-9 of the imaginary axis ---------------------------------------------------------
NEAR_AXIS = "(s^2 + (2/1000000000)*s + 1)^2*(s+1)^3"  # a double pair at -1e-9 +- j (approximately)


def test_double_pair_just_left_of_the_axis_is_stable_exactly():
    report = check_polynomial(NEAR_AXIS)
    assert report.nominal.stable and report.nominal.rhp == 0 and report.nominal.jw == 0
    assert all(p.re < 0 for p in report.nominal.poles)  # certified root isolation agrees
    coeffs = [float(c) for c in report.analysed.at()]
    drawn = np.roots(coeffs)
    # numpy (float reference) puts two of them in the right half plane ...
    assert np.sum(drawn.real > 0) > 0
    # ... and the path check says so in words
    warning = path_sensitivity(drawn, report.nominal.rhp, report.nominal.jw)
    assert warning is not None and warning.startswith("numerically sensitive")
    assert path_sensitivity(np.roots([1.0, 3.0, 2.0, 2.0]), 0, 0) is None  # a benign loop: no warning


@pytest.mark.parametrize("re, expected", [("-1/1000000000", 0), ("1/1000000000", 2), ("0", None)])
def test_pair_a_billionth_from_the_axis(re, expected):
    a = Fraction(re)
    pairs = [(a, Fraction(1)), (Fraction(-2), Fraction(3))]
    report = check_polynomial(product_text([Fraction(-5)], pairs))
    rhp, jw = known_counts([Fraction(-5)], pairs)
    assert (report.nominal.rhp, report.nominal.jw) == (rhp, jw)
    if expected is not None:
        assert rhp == expected == sympy_rhp(report.analysed.at())


def test_real_root_a_billionth_right_of_zero():
    report = check_polynomial("(s - 1/1000000000)*(s+1)^2*(s^2+s+1)")
    assert (report.nominal.rhp, report.nominal.jw) == (1, 0)


# -- degree 60 ---------------------------------------------------------------------------------------
def random_factors(rnd: random.Random, linear: int, quadratic: int):
    reals = [Fraction(rnd.choice([-1, 1]) * rnd.randint(1, 9), rnd.randint(1, 9)) for _ in range(linear)]
    pairs = [(Fraction(rnd.choice([-1, 1]) * rnd.randint(1, 9), rnd.randint(1, 5)), Fraction(rnd.randint(1, 7)))
             for _ in range(quadratic)]
    return reals, pairs


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_degree_sixty_counts_equal_the_known_counts(seed):
    reals, pairs = random_factors(random.Random(seed), 20, 20)
    start = time.perf_counter()
    report = check_polynomial(product_text(reals, pairs))
    assert time.perf_counter() - start < 20
    assert report.analysed.degree == 60
    rhp, jw = known_counts(reals, pairs)
    assert (report.nominal.rhp, report.nominal.jw, report.nominal.lhp) == (rhp, jw, 60 - rhp - jw)
    assert sum(p.multiplicity for p in report.nominal.poles if p.re > 0) == rhp


@pytest.mark.parametrize("seed", range(6))
def test_random_integer_polynomials_against_sympy_rectangle_count(seed):
    # no construction here: random integer coefficients, degree 6..12, checked with sympy's exact count
    rnd = random.Random(seed)
    while True:
        coeffs = [fmpq(rnd.choice([1, 2, 3]))] + [fmpq(rnd.randint(-30, 30)) for _ in range(rnd.randint(6, 12))]
        counts = routh_counts(coeffs)
        if counts.jw == 0:  # the rectangle count wants no roots on its edge
            break
    assert counts.rhp == sympy_rhp(coeffs)


# -- stable ranges where the parameter enters at huge and tiny scales ---------------------------------
@pytest.mark.parametrize("scale, upper", [("1/1000000000000", "6000000000000"), ("1000000000000", "3/500000000000"),
                                          ("1", "6")])
def test_stable_range_with_scaled_parameter(scale, upper):
    # s^3 + 3s^2 + 2s + c*K is stable for 0 < c*K < 6 (textbook), so 0 < K < 6/c exactly
    report = check_polynomial(f"s^3 + 3s^2 + 2s + ({scale})*K", parameter="K", at={"K": 0})
    assert report.stable_range.to_dict()["exact_intervals"] == [["0", upper]]
    assert [e.kind for e in report.stable_range.endpoints] == ["origin", "crossing"]


@pytest.mark.parametrize("a", ["1000000", "1/1000000"])
def test_stable_range_unchanged_by_time_scaling(a):
    # p(s/a) has roots a times those of p(s): same stable range 0 < K < 6, crossing at a*sqrt(2)
    scaled = "(s/(" + a + "))"
    report = check_polynomial(f"{scaled}^3 + 3*{scaled}^2 + 2*{scaled} + K", parameter="K", at={"K": 1})
    assert report.stable_range.to_dict()["exact_intervals"] == [["0", "6"]]
    crossing = report.stable_range.endpoints[-1]
    assert crossing.kind == "crossing"
    assert crossing.omega == pytest.approx(float(Fraction(a)) * 2 ** 0.5, rel=1e-9)


def test_certified_roots_of_a_near_axis_double_pair_keep_their_sign():
    coeffs = coefficients([Fraction(-1)], [(Fraction(-1, 10**9), Fraction(1))] * 2)
    poles = certified_roots(coeffs)
    assert [p.multiplicity for p in poles if p.im != 0] == [2, 2]
    assert all(p.re < 0 for p in poles)
    assert routh_counts(coeffs).rhp == 0
