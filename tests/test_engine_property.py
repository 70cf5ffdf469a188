"""Property test: polynomials drawn to have candidate values closer than double precision and
repeated roots, on purpose, checked at rational points against an independent reference.

Reference: the Hurwitz criterion as sympy determinants of the leading minors of the Hurwitz matrix
(all positive for a positive leading coefficient; Hurwitz 1895, from memory), in exact rationals,
evaluated at rational points just inside and just outside every reported endpoint and between
them. The loop's order must not drop (the stable range excludes such values by definition).
"""
from __future__ import annotations

from fractions import Fraction
from itertools import pairwise

import sympy
from flint import fmpq
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.analysis.report import check_polynomial

K, S = sympy.symbols("K s")


def hurwitz_reference(coeffs: list[sympy.Rational], degree: int) -> bool:
    """All leading minors of the Hurwitz matrix positive (coefficients highest first, a0 > 0)."""
    while coeffs and coeffs[0] == 0:
        coeffs = coeffs[1:]
    n = len(coeffs) - 1
    if n != degree or n < 1:
        return False
    if coeffs[0] < 0:
        coeffs = [-c for c in coeffs]

    def a(k):
        return coeffs[k] if 0 <= k <= n else 0
    h = sympy.Matrix(n, n, lambda i, j: a(2 * (j + 1) - (i + 1)))
    return all(h[:m, :m].det() > 0 for m in range(1, n + 1))


tiny = st.integers(min_value=17, max_value=40).map(lambda e: sympy.Rational(1, 10 ** e))
small = st.integers(min_value=-4, max_value=4).map(sympy.Integer)
base_root = st.sampled_from([sympy.Integer(1), sympy.Rational(1, 3), sympy.sqrt(2), -sympy.Integer(2)])


@st.composite
def close_or_repeated(draw):
    """A polynomial in s and K whose coefficients have roots in K a tiny distance apart (rational or
    irrational) or whose roots in s repeat."""
    r = draw(base_root)
    gap = draw(tiny)
    kind = draw(st.sampled_from(["close_constant", "close_middle", "repeated_pair", "repeated_real"]))
    if kind == "close_constant":  # a0 = (K - r)^2 - gap^2 style: two roots 2*gap apart around r
        a0 = sympy.expand((K - r) ** 2 - gap ** 2) if r.is_rational else sympy.expand((K ** 2 - 2) * (K - 1 - gap))
        poly = S ** 3 + draw(st.integers(1, 5)) * S ** 2 + (K + draw(st.integers(3, 6))) * S + a0
    elif kind == "close_middle":  # a1 vanishes at r and r + gap: pairs cross twice, very close
        a1 = sympy.expand((K - 1) * (K - 1 - gap) * 10 ** 40 - 2) if draw(st.booleans()) else sympy.expand((K - 1) * (K - 1 - gap))
        poly = S ** 2 + a1 * S + 1
    elif kind == "repeated_pair":  # (s^2 + c(K) s + d)^m: a pair of multiplicity m crossing
        m = draw(st.integers(2, 3))
        c = K ** 2 - 2 if not r.is_rational else K - r
        poly = sympy.expand((S ** 2 + c * S + draw(st.integers(1, 3))) ** m)
    else:  # (s + K - r)^m (s + 1): a repeated real root through s = 0
        m = draw(st.integers(2, 4))
        poly = sympy.expand((S + K - (r if r.is_rational else 1)) ** m * (S + 1 + draw(small) ** 2))
    return sympy.Poly(poly, S)


def _text(poly: sympy.Poly) -> str:
    return str(poly.as_expr()).replace("**", "^")


def _points(rng) -> list[fmpq]:
    """Rational points just inside and outside every endpoint, and between endpoints."""
    pts = [fmpq(0), fmpq(-10 ** 6), fmpq(10 ** 6)]
    for b in rng.candidates:
        if b.rational is not None:
            eps = fmpq(1, 10 ** 50)
            pts += [b.rational - eps, b.rational + eps]
        else:
            nb = b.narrowed(fmpq(1, 10 ** 50))
            pts += [nb.lo, nb.hi]
    ordered = sorted(set(pts))
    pts += [(x + y) / 2 for x, y in pairwise(ordered)]
    return pts


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(close_or_repeated())
def test_reported_range_matches_the_hurwitz_reference_at_rational_points(poly):
    report = check_polynomial(_text(poly), parameter="K")
    rng = report.stable_range
    degree = poly.degree()
    for x in _points(rng):
        q = sympy.Rational(int(x.p), int(x.q))
        coeffs = [sympy.expand(c.subs(K, q)) for c in poly.all_coeffs()]
        assert rng.contains(x) is hurwitz_reference(coeffs, degree), (str(x), _text(poly))


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(close_or_repeated(), st.integers(-3, 3), st.integers(1, 4))
def test_nominal_verdict_matches_the_reference(poly, num, den):
    value = Fraction(num, den)
    report = check_polynomial(_text(poly), parameter="K", at={"K": value})
    coeffs = [c.subs(K, sympy.Rational(num, den)) for c in poly.all_coeffs()]
    assert report.nominal.stable is hurwitz_reference(coeffs, poly.degree())
    assert report.stable_range.contains(fmpq(num, den)) is report.nominal.stable
