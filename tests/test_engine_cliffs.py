"""Inputs that used to take minutes: the verdict and the stable range never wait for a displayed
symbolic array, Delta_{n-1} comes from evaluation and interpolation (or one bivariate resultant), the Hurwitz test from ball
arithmetic with an exact fallback. Speeds are measured in bench/ (never asserted here).

References: (s + 1)^n + K has roots -1 + K^(1/n) e^(j pi (2m + 1)/n) for K > 0 (hand), so it is
stable iff -1 < K < sec(pi/n)^n (mpmath at 50 digits); a polynomial with a missing coefficient is
never Hurwitz (the necessary condition of equal-signed coefficients, from memory); sympy's
determinant of the Hurwitz matrix for Delta_{n-1}.
"""
from __future__ import annotations

import random

import mpmath
import pytest
import sympy
from flint import fmpq, fmpq_poly

import core.analysis.stable_range as stable_range_module
from core.algebra.polynomial import ParametricPolynomial
from core.analysis.report import check_polynomial, check_project
from core.analysis.routh import DISPLAY_BITS, is_hurwitz, routh_array
from core.analysis.stable_range import hurwitz_delta

K, S = sympy.symbols("K s")


def _sec_power(n: int) -> mpmath.mpf:
    mpmath.mp.dps = 50
    return mpmath.sec(mpmath.pi / n) ** n


def _hurwitz_matrix_delta(coeffs: list, n: int) -> sympy.Expr:
    """Delta_{n-1}: the leading (n-1)x(n-1) minor of the Hurwitz matrix H[i][j] = a_{2j-i+1}
    (a_0 the leading coefficient, 0 outside 0..n), computed by sympy."""
    def a(k):
        return coeffs[k] if 0 <= k <= n else 0
    m = sympy.Matrix(n - 1, n - 1, lambda i, j: a(2 * (j + 1) - (i + 1)))
    return sympy.expand(m.det())


@pytest.mark.parametrize("path", ["interpolation", "bivariate resultant"])
@pytest.mark.parametrize("seed", range(12))
def test_delta_by_interpolation_has_the_roots_of_the_hurwitz_determinant(seed, path, monkeypatch):
    if path == "bivariate resultant":  # the way taken when interpolation would need many points
        monkeypatch.setattr(stable_range_module, "MAX_INTERPOLATION_POINTS", -1)
    rnd = random.Random(seed)
    n = rnd.randint(2, 7)
    coeffs = [sympy.Integer(rnd.randint(1, 4))]
    for _ in range(n):
        if rnd.random() < 0.15:
            coeffs.append(sympy.Integer(0))
        else:
            coeffs.append(sum(sympy.Rational(rnd.randint(-6, 6), rnd.randint(1, 3)) * K ** d for d in range(rnd.randint(1, 3))))
    ours = hurwitz_delta([fmpq_poly([fmpq(int(c.p), int(c.q)) for c in sympy.Poly(e, K).all_coeffs()[::-1]])
                          if e != 0 else fmpq_poly([]) for e in coeffs])
    theirs = _hurwitz_matrix_delta(coeffs, n)
    ours_expr = sum(sympy.Rational(int(ours[i].p), int(ours[i].q)) * K ** i for i in range(ours.degree() + 1))
    if theirs == 0:
        assert ours.is_zero()
        return
    # equal up to a constant: Res_u(E, O) = ±Delta_{n-1} (Orlando's formula; Gantmacher)
    ratio = sympy.cancel(ours_expr / theirs)
    assert ratio.is_number and ratio != 0


@pytest.mark.parametrize("n", [12, 40, 60])
def test_power_plus_gain_range_is_the_closed_form(n):
    (lo, hi), = check_polynomial(f"(s+1)^{n} + K", parameter="K").stable_range.intervals
    assert lo.rational == -1
    assert float(hi.ball.mid()) == pytest.approx(float(_sec_power(n)), rel=1e-12)
    top = _sec_power(n)
    inside = fmpq(int(mpmath.floor(top * 10 ** 30)), 10 ** 30)
    outside = fmpq(int(mpmath.ceil(top * 10 ** 30)), 10 ** 30)
    r = check_polynomial(f"(s+1)^{n} + K", parameter="K").stable_range
    assert r.contains(inside) and not r.contains(outside)


@pytest.mark.parametrize("n", [30, 90])
def test_ball_hurwitz_test_agrees_with_the_closed_form_next_to_the_limit(n):
    base = sympy.Poly((S + 1) ** n, S).all_coeffs()
    top = _sec_power(n)
    for k, stable in ((fmpq(int(mpmath.floor(top * 10 ** 20)), 10 ** 20), True),
                      (fmpq(int(mpmath.ceil(top * 10 ** 20)), 10 ** 20), False),
                      (fmpq(-99, 100), True), (fmpq(-1), False), (fmpq(-101, 100), False), (fmpq(10 ** 6), False)):
        coeffs = [fmpq(int(c)) for c in base]
        coeffs[-1] += k
        assert is_hurwitz(coeffs) is stable


def test_a_huge_symbolic_array_is_omitted_not_waited_for():
    poly = check_polynomial("(s+1)^80 + K", parameter="K")
    assert poly.routh.rows == [] and poly.routh.omitted and f"{DISPLAY_BITS:,} bits" in poly.routh.omitted
    assert any(w.startswith("Routh array not shown") for w in poly.warnings)
    assert poly.to_dict()["routh"]["omitted"] == poly.routh.omitted
    (lo, hi), = poly.stable_range.intervals  # the range does not use the array
    assert lo.rational == -1 and float(hi.ball.mid()) == pytest.approx(float(_sec_power(80)), rel=1e-12)


def test_a_small_array_is_still_built_in_full():
    arr = routh_array(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K"), limit_bits=DISPLAY_BITS)
    assert arr.omitted is None and arr.first_column_text() == ["1", "3", "-1/3*K + 2", "K"]  # Ogata-style example


def test_dense_degree_40_with_a_missing_term_is_never_stable_without_its_epsilon_array():
    rnd = random.Random(1)
    text = " + ".join(f"({rnd.randint(1, 9)}+{rnd.randint(1, 9)}*K)*s^{p}" for p in range(40, -1, -1) if p != 39)
    r = check_polynomial(text, parameter="K", at={"K": 1})
    assert r.stable_range.never_stable and r.nominal.stable is False
    assert r.routh.omitted is not None and r.routh.rows == []
    coeffs = [c for c in r.analysed.at(1)]
    assert is_hurwitz(coeffs) is False and coeffs[1] == 0


@pytest.mark.parametrize("n", [7, 60])
def test_power_plus_gain_crosses_at_tan_pi_over_n(n):
    # at K = sec(pi/n)^n the roots -1 + sec(pi/n) e^(±j pi/n) are ±j tan(pi/n) (hand; mpmath)
    r = check_polynomial(f"(s+1)^{n} + K", parameter="K").stable_range
    low, high = r.endpoints
    assert low.kind == "origin" and high.kind == "crossing"
    mpmath.mp.dps = 50
    assert high.omega == pytest.approx(float(mpmath.tan(mpmath.pi / n)), rel=1e-12)


def test_s200_plus_one_counts_without_building_the_whole_eps_array():
    # Reference (by hand): the roots of s^200 = -1 are exp(j*pi*(2k+1)/200), k = 0..199: none on the
    # axis (2k+1 is odd, never 100), 100 with a positive real part.
    report = check_polynomial("s^200 + 1")
    assert (report.nominal.rhp, report.nominal.jw, report.nominal.lhp) == (100, 0, 100)
    assert any("too large to write out" in n for n in report.nominal.notes)


def test_a_loop_of_order_above_the_limit_is_refused_before_any_work():
    # Stated limit (docs/guarantees.md): the analysed blocks' orders add up to at most 200.
    from bench.generators import nested_loops_diagram
    from core.errors import AnalysisError
    from core.graph.reduction import MAX_LOOP_ORDER

    with pytest.raises(AnalysisError) as err:
        check_project(nested_loops_diagram(500))
    assert err.value.code == "E410" and f"up to {MAX_LOOP_ORDER}" in err.value.message


@pytest.mark.parametrize("n", [24, 36])
def test_power_plus_s_range_is_right_either_side_of_its_end(n):
    """(s + K)^n + s, once over two minutes at n = 80 (Delta_{n-1} of K-degree ~n^2/2 by one
    bivariate resultant): the single end is checked by mpmath's roots at 80 digits, 1e-12 either
    side of it (the rightmost pair's real part changes sign there)."""
    report = check_polynomial(f"(s+K)^{n} + s", "K")
    (end,) = [b for pair in report.stable_range.intervals for b in pair if b is not None]
    near = end.narrowed(fmpq(1, 10 ** 30))
    mid = (near.lo + near.hi) / 2
    mpmath.mp.dps = 80
    for side in (-1, 1):
        v = mid + side * fmpq(1, 10 ** 12)
        value = mpmath.mpf(int(v.p)) / int(v.q)
        coeffs = [mpmath.binomial(n, i) * value ** i for i in range(n + 1)]
        coeffs[n - 1] += 1
        roots = mpmath.polyroots(coeffs, maxsteps=400, extraprec=400)
        assert report.stable_range.contains(v) == all(r.real < 0 for r in roots)
