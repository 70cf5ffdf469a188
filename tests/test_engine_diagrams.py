"""Diagram edges of the engine: cancellations only at the nominal values, a block that vanishes at
its nominal value, an input with no path to the output. References: hand derivation (closed loop
L / (1 + L) written out) and sympy's exact gcd and resultant."""
from __future__ import annotations

import pytest
import sympy

from core.analysis.report import check_project
from core.errors import AnalysisError
from core.model.diagram import Diagram, Node, Parameter


def unity_loop(controller, plant, params=(), sweep=None):
    d = Diagram("test loop")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"),
                 Node("C", "block", role="controller", num=controller[0], den=controller[1]),
                 Node("P", "block", role="plant", num=plant[0], den=plant[1]),
                 Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(a, b, port)
    for p in params:
        d.set_parameter(p)
    if sweep:
        d.set_tuning_parameter(sweep)
    d.set_analysis(input="r", output="y")
    return d


def test_mode_cancelling_only_at_a_fixed_value_is_hidden():
    # K (s - a)/(s + 2) with 1/(s - 1): closed loop K (s - a) / ((s + 2)(s - 1) + K (s - a)); at a = 1
    # sympy's gcd of the two is s - 1, an unstable mode hidden from the output
    s, K = sympy.symbols("s K")
    assert sympy.gcd(K * (s - 1), (s + 2) * (s - 1) + K * (s - 1)) == s - 1
    r = check_project(unity_loop(("K*(s-a)", "s+2"), ("1", "s-1"), [Parameter("K", 1.0), Parameter("a", 1.0)], "K"))
    (mode,) = r.hidden_modes
    assert mode.pole.re == 1.0 and mode.pole.im == 0 and mode.unstable and mode.blocks == ["P"]
    assert not r.nominal.stable


def test_values_of_the_tuning_parameter_where_a_mode_cancels_are_named():
    # (s + K)/s with 1/(s + 1): Res_s(s + K, s^2 + 2 s + K) = K^2 - K (sympy): cancellations at K = 0, 1;
    # at the nominal K = 1 the mode s = -1 is hidden
    s, K = sympy.symbols("s K")
    assert sympy.factor(sympy.resultant(s + K, s * (s + 1) + s + K, s)) == K * (K - 1)
    r = check_project(unity_loop(("s+K", "s"), ("1", "s+1"), [Parameter("K", 1.0)], "K"))
    assert [(h.pole.re, h.pole.im) for h in r.hidden_modes] == [(-1.0, 0.0)]
    named = [w for w in r.warnings if "a mode cancels" in w]
    assert len(named) == 2 and "K = 0" in named[0] and "end of the stable range" in named[0]
    assert "K = 1" in named[1] and "inside the stable range" in named[1]


def test_block_whose_denominator_vanishes_at_the_nominal_value_is_refused():
    with pytest.raises(AnalysisError) as err:  # 1/(K - 2) does not exist at K = 2 (hand)
        check_project(unity_loop(("1", "K-2"), ("1", "s+1"), [Parameter("K", 2.0)], "K"))
    assert err.value.code == "E408" and "K = 2" in err.value.message and err.value.where == "node C"


def test_input_with_no_path_to_the_output_is_e406():
    d = Diagram("no wires")
    for node in (Node("r", "input"), Node("G", "block", num="1", den="s+1"), Node("y", "output")):
        d.add_node(node)
    d.set_analysis(input="r", output="y")
    with pytest.raises(AnalysisError) as err:
        check_project(d)
    assert err.value.code == "E406"
