"""Nominal values given to a project stay exact: never rounded through a float.

Reference: s^3 + 3 s^2 + 2 s + 18 K is Hurwitz iff K > 0 and 3 * 2 > 18 K (the third-order Routh
condition a2 a1 > a3 a0, from memory; Ogata, Modern Control Engineering); at K = 1/3 it is
(s + 3)(s^2 + 2) (sympy factor), so exactly marginal with roots ±j sqrt(2).
"""
from __future__ import annotations

from fractions import Fraction

import pytest
import sympy

from core.analysis.report import check_project
from core.errors import AnalysisError
from core.model.diagram import Diagram, Node, Parameter


def third_order_loop(nominal: float = 1.0) -> Diagram:
    """18 K / (s (s + 1) (s + 2)) in unity negative feedback, K the tuning parameter."""
    d = Diagram("third order")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", role="controller", num="18*K", den="1"),
                 Node("P", "block", role="plant", num="1", den="s*(s+1)*(s+2)"),
                 Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    d.set_parameter(Parameter("K", nominal, 0.0, 1.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    return d


def _hurwitz(k: Fraction) -> bool:
    return k > 0 and 3 * 2 > 18 * k  # Routh, third order (module docstring)


def test_a_third_given_as_text_is_exactly_marginal():
    s = sympy.symbols("s")
    assert sympy.factor(s ** 3 + 3 * s ** 2 + 2 * s + 6) == (s + 3) * (s ** 2 + 2)
    r = check_project(third_order_loop(), values={"K": "1/3"})
    assert (r.nominal.stable, r.nominal.rhp, r.nominal.jw, r.nominal.lhp) == (False, 0, 2, 1)
    assert r.nominal.exact_values == {"K": "1/3"}
    assert r.to_dict()["nominal"]["exact_values"] == {"K": "1/3"}


@pytest.mark.parametrize("text", ["0.33333333333333333334", "0.33333333333333333333",
                                  "0.3333333333333333", Fraction(1, 3) + Fraction(1, 10 ** 30)])
def test_values_closer_to_the_boundary_than_a_float_keep_their_verdict(text):
    exact = Fraction(text)
    r = check_project(third_order_loop(), values={"K": text})
    assert r.nominal.stable is _hurwitz(exact)
    assert r.nominal.rhp == (0 if exact <= Fraction(1, 3) else 2)  # the pair crosses at K = 1/3
    assert r.margins.stable is _hurwitz(exact)


def test_given_values_override_the_nominal_only_for_the_names_given():
    r = check_project(third_order_loop(nominal=0.25))
    assert r.nominal.exact_values == {"K": "1/4"} and r.nominal.stable  # 0.25 is 1/4 exactly


@pytest.mark.parametrize("values, code", [({"T": "1"}, "E405"), ({"K": "one"}, "E404"),
                                          ({"K": float("nan")}, "E404"), ({"K": "1/0"}, "E404")])
def test_bad_given_values_are_catalogued_errors(values, code):
    with pytest.raises(AnalysisError) as err:
        check_project(third_order_loop(), values=values)
    assert err.value.code == code
