"""The expression language: exact numbers, precedence, implicit multiplication, lists, errors, bounds.

References: exact decimals against Python's fractions.Fraction; every parsed expression against the
same expression built with sympy's own operators; polynomial conversions against sympy.Poly.
"""
import time
from fractions import Fraction

import pytest
import sympy

from core.algebra.expression import (
    block_transfer,
    expression_parameters,
    parse_expression,
    parse_fraction,
    parse_polynomial,
    to_mpoly,
)
from core.algebra.polynomial import mpoly_context
from core.errors import ExpressionError

s, K, T, Kp, Ti = sympy.symbols("s K T Kp Ti")


def error_of(func, *args, **kwargs) -> ExpressionError:
    with pytest.raises(ExpressionError) as info:
        func(*args, **kwargs)
    return info.value


@pytest.mark.parametrize("text", ["0.1", "2.5e-3", "1.25", ".5", "3E2", "1e-3", "007", "12.000",
                                  "1.5e+2", "0.333", "1e300", "123456789.987654321"])
def test_decimals_are_exact(text):
    # reference: fractions.Fraction reads decimal text exactly
    ref = Fraction(text)
    assert parse_expression(text) == sympy.Rational(ref.numerator, ref.denominator)


@pytest.mark.parametrize("text, ref", [
    # references: the same expressions built with sympy operators
    ("-s^2", -(s ** 2)),
    ("-2^2", -(sympy.Integer(2) ** 2)),
    ("(-2)^2", sympy.Integer(-2) ** 2),
    ("2^3^2", sympy.Integer(2) ** (sympy.Integer(3) ** 2)),
    ("2**3**2", sympy.Integer(2) ** (sympy.Integer(3) ** 2)),
    ("1 - 2 - 3", sympy.Integer(1) - 2 - 3),
    ("8/4/2", sympy.Integer(8) / 4 / 2),
    ("s + 2*K", s + 2 * K),
    ("2*s^2/3", 2 * s ** 2 / 3),
    ("--s", s),
    ("+-+s", -s),
    ("2*-s", 2 * (-s)),
    ("s - (K - 1)", s - (K - 1)),
    ("K/T*s", K / T * s),
    ("s^2^0", s ** (2 ** 0)),
    ("2^-1^2", None),  # the exponent -(1^2) is negative: refused below
    ("1/(T s + 1)", 1 / (T * s + 1)),
])
def test_precedence_and_associativity(text, ref):
    if ref is None:
        assert error_of(parse_expression, text).code == "E104"
    else:
        assert parse_expression(text) == ref


@pytest.mark.parametrize("text, ref", [
    ("2s", 2 * s),
    ("3(s+1)", 3 * (s + 1)),
    ("(s+1)(s+2)", (s + 1) * (s + 2)),
    ("K s", K * s),
    ("2 K s^2", 2 * K * s ** 2),
    ("s(s+1)", s * (s + 1)),
    ("Ks", sympy.Symbol("Ks")),
    ("2s^2", 2 * s ** 2),
    ("s^2 s", s ** 3),
    ("Kp(1 + 1/(Ti s))", Kp * (1 + 1 / (Ti * s))),
    ("2.5e-3 s", sympy.Rational(1, 400) * s),
    ("0.5(s+1)^2", sympy.Rational(1, 2) * (s + 1) ** 2),
])
def test_implicit_multiplication(text, ref):
    assert parse_expression(text) == ref


@pytest.mark.parametrize("text, ref", [
    ("1, 3, 2", s ** 2 + 3 * s + 2),
    ("1, 2K, K+1", s ** 2 + 2 * K * s + K + 1),
    ("0, 1", sympy.Integer(1)),
    ("1/T, 1", s / T + 1),
    ("2, 0, 0, -1.5", 2 * s ** 3 - sympy.Rational(3, 2)),
])
def test_coefficient_list_is_highest_power_first(text, ref):
    assert sympy.expand(parse_expression(text) - ref) == 0


@pytest.mark.parametrize("text, code, column, words", [
    ("s + \u03c9", "E101", 5, "ASCII"),
    ("2 # 3", "E101", 3, "'#'"),
    ("s\u200f", "E101", 2, "U+200F"),
    ("1\x00", "E101", 2, "U+0000"),
    ("(s+1", "E102", 5, "expected ')' to close '(' opened at column 1"),
    ("1 + * 2", "E102", 5, "expected a number, name or '(' but found '*'"),
    ("s +", "E102", 4, "the text ends"),
    ("s 2", "E102", 3, "operator"),
    ("s + 1)", "E102", 6, "no '('"),
    ("1/2s", "E102", 4, "ambiguous"),
    ("1, , 2", "E102", 4, "found ','"),
    ("s^201", "E104", 3, "201"),
    ("s^K", "E104", 3, "K"),
    ("s^-1", "E104", 4, "-1"),
    ("s^(1/2)", "E104", 3, "1/2"),
    ("1e301", "E105", 1, "1e301"),
    ("2 * 1e400", "E105", 5, "range"),
    ("1, s", "E107", 4, "cannot contain s"),
    ("__import__", "E108", 1, "__import__"),
    ("K + _a", "E108", 5, "_a"),
    ("j s", "E108", 1, "imaginary"),
    ("2 exp(s)", "E108", 3, "functions"),
    ("x" * 65, "E108", 1, "64"),
    ("(" * 101 + "s" + ")" * 101, "E109", 101, "100"),
    ("1/(s - s)", "E110", 3, "zero"),
    ("K/((s+1)^2 - s^2 - 2s - 1)", "E110", 3, "zero"),
])
def test_error_codes_and_columns(text, code, column, words):
    err = error_of(parse_expression, text, where="node P, denominator")
    assert (err.code, err.where) == (code, f"node P, denominator, column {column}")
    assert words in err.message


@pytest.mark.parametrize("func, text, code", [
    (parse_expression, "x" * 10_001, "E103"),
    (parse_expression, "s^100 * s^101", "E106"),
    (parse_expression, "1, " * 201 + "1", "E106"),
    (parse_fraction, "(s+K+T+Kp)^200", "E106"),
    (parse_fraction, "(10^200 s + 1)^2", "E105"),
    (parse_polynomial, "1/(s+1)", "E107"),
    (parse_expression, "", "E102"),
])
def test_whole_text_errors(func, text, code):
    assert error_of(func, text).code == code


@pytest.mark.parametrize("text, code", [
    ("1e999999999", "E105"),
    ("9^9^9", "E104"),
    ("9^9^9^9", "E104"),
    ("(" * 100_000, "E103"),
    ("(" * 5_000, "E109"),
    ("(s+K+T+Kp)^200", "E106"),
    ("((s+1)^200)^200", "E106"),
    ("(10^300)^200", "E104"),
    ("(10^150)^3", "E105"),
    ("1" * 9_000, "E105"),
])
def test_bounds_fail_fast(text, code):
    start = time.perf_counter()
    assert error_of(parse_fraction, text).code == code
    assert time.perf_counter() - start < 1.0


def test_deep_nesting_within_the_limit_parses():
    text = "(" * 100 + "s+1" + ")*s" * 100  # 100 levels, each multiplying by s: degree 101
    num, den = parse_fraction(text)
    assert (sympy.degree(num, s), den) == (101, 1)


def test_block_transfer_keeps_every_typed_denominator():
    # reference: N/D must equal num/den as sympy simplifies it, while D keeps the typed factors
    assert block_transfer("s+1", "s+1") == (s + 1, s + 1)
    num, den = block_transfer("(s+1)/(s+2)", "1/(s+2)")
    assert (num, den) == (sympy.expand((s + 1) * (s + 2)), s + 2)
    num, den = block_transfer("K/(T s + 1)", "s(s+3)")
    assert sympy.cancel(num / den - K / ((T * s + 1) * s * (s + 3))) == 0
    assert sympy.Poly(den, s).degree() == 3


def test_block_transfer_errors_name_the_field():
    err = error_of(block_transfer, "  ", "s+1", where="node G")
    assert (err.code, err.where, err.message) == ("E102", "node G, numerator", "numerator is empty")
    err = error_of(block_transfer, "1", "K - K", where="node G")
    assert (err.code, err.where) == ("E110", "node G, denominator")
    err = error_of(block_transfer, "1", "s+*", where="node G")
    assert (err.code, err.where) == ("E102", "node G, denominator, column 3")


def test_parse_fraction_uses_the_least_common_denominator():
    # reference: sympy.lcm of the two typed denominators; value checked with sympy.cancel
    num, den = parse_fraction("1/(s^2 - 1) + 1/(s + 1)")
    assert sympy.expand(den - sympy.lcm(s ** 2 - 1, s + 1)) == 0
    assert sympy.cancel(num / den - (1 / (s ** 2 - 1) + 1 / (s + 1))) == 0


def test_parse_polynomial_multiplies_out_parameter_denominators():
    assert parse_polynomial("s^2 + s/T + 1") == sympy.expand(T * (s ** 2 + s / T + 1))
    assert parse_polynomial("0.5 s^2 + s + 1") == s ** 2 / 2 + s + 1
    assert parse_polynomial("1, 3, 2") == s ** 2 + 3 * s + 2


def test_expression_parameters_lists_typed_names():
    assert expression_parameters("Kp (1 + 1/(Ti s)) + s") == {"Kp", "Ti"}
    assert expression_parameters("K - K + T_1 s") == {"K", "T_1"}
    assert error_of(expression_parameters, "K +").code == "E102"


def test_to_mpoly_matches_sympy_poly():
    expr = parse_polynomial("s^3 + (2 + K) s^2 + K T s/3 - 7")
    poly = to_mpoly(expr, mpoly_context(["K", "T"]))
    # reference: sympy.Poly over QQ with generators in the context's order
    ref = sympy.Poly(expr, s, K, T, domain=sympy.QQ)
    assert {m: (int(c.p), int(c.q)) for m, c in poly.to_dict().items()} == \
        {m: (int(c.p), int(c.q)) for m, c in ref.terms()}
    assert error_of(to_mpoly, K * s, mpoly_context([])).code == "E107"
    assert error_of(to_mpoly, 1 / s, mpoly_context([])).code == "E107"
