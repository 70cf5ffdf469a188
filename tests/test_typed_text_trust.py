"""Typed text that must not be read silently: names with s run into them (E111), malformed and
ambiguous numbers (E112), and characters pasted from documents.

References: every accepted reading is compared with the same expression built by sympy's own
operators; number values with Python's fractions.Fraction (exact decimal reading); the character
names with unicodedata.
"""
import keyword
import unicodedata
from fractions import Fraction

import pytest
import sympy
from hypothesis import assume, given
from hypothesis import strategies as st

from core.algebra.expression import (
    RESERVED,
    check_glued_names,
    glued_reading,
    parse_expression,
    parse_polynomial,
    read_block,
)
from core.algebra.numbers import read_value
from core.analysis.report import check_polynomial
from core.errors import ExpressionError

s = sympy.Symbol("s")


def error_of(func, *args, **kwargs) -> ExpressionError:
    with pytest.raises(ExpressionError) as info:
        func(*args, **kwargs)
    return info.value


# -- names with s run into them --------------------------------------------------------------------
@pytest.mark.parametrize("text, name, column, meant", [
    ("Kp*(Tis+1)", "Tis", 5, sympy.Symbol("Kp") * (sympy.Symbol("Ti") * s + 1)),
    ("2sK", "sK", 2, 2 * s * sympy.Symbol("K")),
    ("s^2 + 3ss", "ss", 8, s ** 2 + 3 * s * s),
    ("s2 + 3 s + 2", "s2", 1, s ** 2 + 3 * s + 2),
    ("K (T1s + 1)", "T1s", 4, sympy.Symbol("K") * (sympy.Symbol("T1") * s + 1)),
])
def test_a_name_with_s_run_into_it_is_refused_with_the_product_meant(text, name, column, meant):
    err = error_of(read_block, text, "1", declared={"K", "Kp"}, where="node C")
    assert err.code == "E111" and f"'{name}'" in err.message
    assert err.where == f"node C, numerator, column {column}"
    # the suggestion, typed in place of the name, reads as the product meant (sympy reference)
    suggestion = glued_reading(name)
    assert suggestion in err.message
    assert parse_expression(text.replace(name, suggestion, 1)) == meant


Tis, sK, ss, s2, Kp = sympy.symbols("Tis sK ss s2 Kp")


@pytest.mark.parametrize("text, expected", [("Kp*(Tis+1)", Kp * (Tis + 1)), ("2sK", 2 * sK),
                                            ("s^2 + 3ss", s ** 2 + 3 * ss), ("s2 + 1", s2 + 1)])
def test_a_declared_name_with_s_in_it_is_used_as_typed(text, expected):
    reading = read_block(text, "1", declared={"Tis", "sK", "ss", "s2", "Kp"})
    # reference: the same expression built with sympy's operators, the names as plain symbols
    assert sympy.expand(reading.numerator - expected) == 0
    assert reading.new_names == ()


letters = st.text(alphabet="ABCDEFGHKLMNPQRTUVWXYZabcdfghkmnpqrtuvwxyz", min_size=1, max_size=4)


def _usable(name: str) -> bool:
    return name not in RESERVED and not keyword.iskeyword(name) and not keyword.issoftkeyword(name)


@given(stem=letters, front=st.booleans())
def test_the_rule_holds_for_any_name_not_only_the_examples(stem, front):
    # any name with s in front of a letter or after a letter is refused when undeclared and
    # accepted when declared; the suggestion reads as stem times s (sympy reference)
    name = f"s{stem}" if front else f"{stem}s"
    text = f"2*{name} + 1"
    assume(_usable(name) and _usable(stem))  # reserved words are E108 before any other rule
    assert error_of(check_glued_names, text, set()).code == "E111"
    check_glued_names(text, {name})
    assert parse_expression(glued_reading(name)) == sympy.Symbol(stem) * s


@pytest.mark.parametrize("name", ["T_s", "s_1", "Ksp", "K", "wn", "sigma_"])
def test_names_that_only_contain_s_or_separate_it_are_plain_names(name):
    # '_' separates on purpose; an s inside a name is not looked at (rule in docs/syntax.md)
    if glued_reading(name) is None:
        check_glued_names(f"{name} + 1", set())
    assert parse_expression(name) == sympy.Symbol(name)


def test_new_names_are_reported_where_they_were_typed():
    reading = read_block("Kp (Tn s + 1)", "s (Ti s + 1)", declared={"Kp"})
    assert [(n.name, n.part, n.column) for n in reading.new_names] == [
        ("Tn", "numerator", 5), ("Ti", "denominator", 4)]
    # the reading itself is the same as sympy's (reference)
    Kp, Tn = sympy.symbols("Kp Tn")
    assert sympy.expand(reading.numerator - Kp * (Tn * s + 1)) == 0


def test_typed_polynomial_treats_named_parameters_as_declared():
    # --poly "s^2 + Ks + 1": Ks is probably K*s
    assert error_of(check_polynomial, "s^2 + Ks + 1", "K").code == "E111"
    report = check_polynomial("s^2 + Ks + 1", "Ks")  # named as the tuning parameter: a parameter
    assert report.parameter == "Ks"
    assert parse_polynomial("s^2 + Ks + 1") == s ** 2 + sympy.Symbol("Ks") + 1  # no check without declared


def test_a_project_file_with_an_undeclared_name_with_s_in_it_is_refused():
    from core.analysis.report import check_project
    from core.model.diagram import Diagram, Node
    d = Diagram()
    for n in (Node("r", "input"), Node("C", "block", num="Tis + 1", den="s"), Node("y", "output")):
        d.add_node(n)
    d.connect("r", "C")
    d.connect("C", "y")
    d.set_analysis(input="r", output="y")
    err = error_of(check_project, d)
    assert err.code == "E111" and err.where == "node C, numerator, column 1"


# -- numbers in expressions -------------------------------------------------------------------------
@pytest.mark.parametrize("text", ["1e3e3", "2e", "2eK", "1.5E2e1 s", "3 + 4e"])
def test_a_number_run_into_a_name_starting_with_e_is_refused(text):
    err = error_of(parse_expression, text)
    assert err.code == "E112" and "is not a number" in err.message


@pytest.mark.parametrize("text, value", [("1e3 s", Fraction(1000)), ("2.5e-3K", Fraction(1, 400)),
                                         ("3E2 x", Fraction(300))])
def test_an_exponent_then_a_name_is_still_a_product(text, value):
    # reference: Fraction reads the decimal; the rest is one symbol
    expr = parse_expression(text)
    coeff, rest = expr.as_coeff_Mul()
    assert coeff == sympy.Rational(value.numerator, value.denominator) and rest.is_Symbol


# -- parameter values --------------------------------------------------------------------------------
@pytest.mark.parametrize("text", ["1,000", "12,345", "1,000,000", "1,000.5", "1.000,5", "1 000", "1_000",
                                  "inf", "-inf", "nan", "1e3e3", "0x10", "1e", "abc", "", "1'000", "\uff11"])
def test_ambiguous_or_malformed_values_are_refused(text):
    err = error_of(read_value, text, where="parameter K, nominal")
    assert err.code == "E112" and err.where == "parameter K, nominal"
    if text:
        assert repr(text.strip())[1:-1][:10] in err.message or text.strip() in err.message


@pytest.mark.parametrize("text, ref", [("2", "2"), ("0.25", "0.25"), ("2,5", "2.5"), ("0,500", "0.500"),
                                       ("1,0000", "1.0000"), ("\u22123", "-3"), ("1e-6", "1e-6"),
                                       (".5", ".5"), ("5.", "5."), ("1,5e3", "1.5e3"), (" 7 ", "7")])
def test_plain_values_read_as_the_decimal_they_are(text, ref):
    # reference: Python's Fraction reads the decimal exactly; the value is its nearest float
    assert read_value(text) == float(Fraction(ref))


@pytest.mark.parametrize("text", ["1e400", "-1e301", "1e-400", "1e1000000000"])
def test_values_out_of_range_are_refused_before_they_are_built(text):
    assert error_of(read_value, text).code == "E105"


# -- pasted characters ----------------------------------------------------------------------------
K = sympy.Symbol("K")


@pytest.mark.parametrize("pasted, expected", [
    ("s² + 3s + 2", s ** 2 + 3 * s + 2),
    ("(s+1)³(s+2)", (s + 1) ** 3 * (s + 2)),
    ("s¹⁰ + 1", s ** 10 + 1),
    ("K·(s + 1)", K * (s + 1)),
    ("K⋅s", K * s),
    ("2×s − 1", 2 * s - 1),
    ("\u2212s\u00b2\u2212\u00a01", -s ** 2 - 1),
    ("0.5s\u2009+\u202f1", s / 2 + 1),
])
def test_pasted_characters_read_as_their_plain_counterparts(pasted, expected):
    # reference: the same expression built with sympy's own operators
    assert sympy.expand(parse_expression(pasted) - expected) == 0


def test_pasted_characters_keep_their_columns_in_errors():
    err = error_of(parse_expression, "s² + (s")
    assert err.where == "column 8"  # the end of the text, counted in typed characters
    err = error_of(parse_expression, "s⁻¹")
    assert err.code == "E104"


def test_other_non_ascii_characters_are_still_refused_by_name():
    err = error_of(parse_expression, "s + \u03c9")
    assert err.code == "E101" and unicodedata.name("\u03c9") in err.message
