"""Diagram reduction: characteristic polynomial, transfer function, hidden modes, Mason cross-check.

Every block value below is invented for the test. Expected results come from the textbook
block-diagram rules named beside each check, evaluated independently with sympy; random diagrams
compare the elimination against Mason's gain formula and closed-loop poles against scipy.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import scipy.signal
import sympy
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.algebra.polynomial import ParametricPolynomial
from core.errors import AnalysisError
from core.graph.mason import mason_gain
from core.graph.reduction import block_polynomials, diagram_parameters, reduce_diagram
from core.graph.signal_graph import build_signal_graph, simple_cycles
from core.model.diagram import Diagram, Node

s, K, T = sympy.symbols("s K T")


# -- helpers -------------------------------------------------------------------------------------
def make(nodes: list[tuple], wires: list[tuple]) -> Diagram:
    """Nodes as ("r", "input") / ("e", "sum", "+-") / ("G", "block", num, den); wires (a, b[, port])."""
    d = Diagram()
    for spec in nodes:
        nid, kind, *rest = spec
        extra = {"signs": rest[0]} if kind == "sum" else {"num": rest[0], "den": rest[1]} if kind == "block" else {}
        d.add_node(Node(nid, kind, **extra))
    for w in wires:
        d.connect(w[0], w[1], w[2] if len(w) > 2 else 0)
    return d


def sym(p) -> sympy.Expr:
    """An fmpq_mpoly as a sympy expression, term by term."""
    gens = sympy.symbols(p.context().names())
    return sympy.Add(*[sympy.Rational(int(c.p), int(c.q)) * sympy.Mul(*[g ** e for g, e in zip(gens, exps)])
                       for exps, c in p.to_dict().items()])


def same_poly(p, expected) -> bool:
    return sympy.cancel(sym(p) - expected) == 0


def same_ratio(num, den, expected) -> bool:
    return sympy.cancel(sym(num) / sym(den) - expected) == 0


def unity_loop(num: str, den: str) -> Diagram:
    return make([("r", "input"), ("e", "sum", "+-"), ("G", "block", num, den), ("y", "output")],
                [("r", "e", 0), ("e", "G"), ("G", "y"), ("G", "e", 1)])


# -- textbook loops ------------------------------------------------------------------------------
def test_unity_feedback_characteristic_is_d_plus_n():
    red = reduce_diagram(unity_loop("K (s+2)", "s (s+1)(s+5)"), "r", "y")
    G = K * (s + 2) / (s * (s + 1) * (s + 5))
    N, D = K * (s + 2), s * (s + 1) * (s + 5)
    assert red.parameters == ["K"]
    assert same_poly(red.characteristic, D + N)  # closed loop 1 + G = 0 -> D + N = 0 (textbook, from memory)
    assert red.closed_den == red.characteristic
    assert same_ratio(red.closed_num, red.closed_den, G / (1 + G))  # T = G/(1+G) (textbook, from memory)
    assert same_poly(red.closed_num, N)  # numerator N * Delta_1 with Delta_1 = 1 (Mason 1956, from memory)
    assert red.hidden_factor.is_one() and red.hidden_blocks == []
    assert red.loops == [["e", "G"]]


def test_series_blocks_multiply():
    d = make([("r", "input"), ("A", "block", "s+3", "s+1"), ("B", "block", "2", "s^2+4"), ("y", "output")],
             [("r", "A"), ("A", "B"), ("B", "y")])
    red = reduce_diagram(d, "r", "y")
    # series connection: G = G1 G2 (textbook block algebra, from memory)
    assert same_ratio(red.closed_num, red.closed_den, (s + 3) / (s + 1) * 2 / (s ** 2 + 4))
    assert same_poly(red.characteristic, (s + 1) * (s ** 2 + 4))  # no loop: Delta = 1
    assert red.loops == [] and red.warnings == []


def test_parallel_blocks_add():
    d = make([("r", "input"), ("b", "branch"), ("A", "block", "1", "s+1"), ("B", "block", "K", "s+2"),
              ("p", "sum", "+-"), ("y", "output")],
             [("r", "b"), ("b", "A"), ("b", "B"), ("A", "p", 0), ("B", "p", 1), ("p", "y")])
    red = reduce_diagram(d, "r", "y")
    # parallel connection: G = G1 +/- G2 (textbook block algebra, from memory)
    assert same_ratio(red.closed_num, red.closed_den, 1 / (s + 1) - K / (s + 2))
    assert same_poly(red.characteristic, (s + 1) * (s + 2))


def test_feedback_with_sensor():
    d = make([("r", "input"), ("e", "sum", "+-"), ("G", "block", "4", "s (s+2)"), ("b", "branch"),
              ("H", "block", "1", "T s + 1"), ("y", "output")],
             [("r", "e", 0), ("e", "G"), ("G", "b"), ("b", "y"), ("b", "H"), ("H", "e", 1)])
    red = reduce_diagram(d, "r", "y")
    G, H = 4 / (s * (s + 2)), 1 / (T * s + 1)
    assert same_ratio(red.closed_num, red.closed_den, G / (1 + G * H))  # T = G/(1+GH) (textbook, from memory)
    assert same_poly(red.characteristic, s * (s + 2) * (T * s + 1) + 4)  # D_G D_H + N_G N_H
    assert red.parameters == ["T"]


def test_positive_feedback():
    d = make([("r", "input"), ("e", "sum", "++"), ("G", "block", "K", "s+3"), ("b", "branch"),
              ("H", "block", "2", "s+1"), ("y", "output")],
             [("r", "e", 0), ("e", "G"), ("G", "b"), ("b", "y"), ("b", "H"), ("H", "e", 1)])
    red = reduce_diagram(d, "r", "y")
    G, H = K / (s + 3), 2 / (s + 1)
    assert same_ratio(red.closed_num, red.closed_den, G / (1 - G * H))  # positive feedback G/(1-GH) (from memory)
    assert same_poly(red.characteristic, (s + 3) * (s + 1) - 2 * K)


def test_nested_inner_and_outer_loops():
    d = make([("r", "input"), ("e1", "sum", "+-"), ("C", "block", "K", "1"), ("e2", "sum", "+-"),
              ("P", "block", "1", "s (s+4)"), ("b", "branch"), ("H", "block", "3", "s+6"), ("y", "output")],
             [("r", "e1", 0), ("e1", "C"), ("C", "e2", 0), ("e2", "P"), ("P", "b"), ("b", "y"),
              ("b", "H"), ("H", "e2", 1), ("b", "e1", 1)])
    red = reduce_diagram(d, "r", "y")
    C, P, H = K, 1 / (s * (s + 4)), 3 / (s + 6)
    inner = P / (1 + P * H)  # inner loop reduced first (textbook block algebra, from memory)
    assert same_ratio(red.closed_num, red.closed_den, C * inner / (1 + C * inner))
    # Delta = 1 - (L_inner + L_outer), both loops touch (Mason 1953, from memory); times D_P D_H
    assert same_poly(red.characteristic, s * (s + 4) * (s + 6) * (1 + P * H + C * P))
    assert sorted(map(sorted, red.loops)) == sorted([sorted(["e2", "P", "b", "H"]),
                                                     sorted(["e1", "C", "e2", "P", "b"])])


def test_two_summing_junctions_in_one_path():
    d = make([("r", "input"), ("e1", "sum", "+-"), ("e2", "sum", "+-"), ("G", "block", "5", "s^2+s"),
              ("b", "branch"), ("H", "block", "K", "1"), ("y", "output")],
             [("r", "e1", 0), ("e1", "e2", 0), ("e2", "G"), ("G", "b"), ("b", "y"), ("b", "H"),
              ("H", "e1", 1), ("b", "e2", 1)])
    red = reduce_diagram(d, "r", "y")
    G = 5 / (s ** 2 + s)
    # two touching loops -G and -G K: T = G / (1 + G + G K) (Mason 1953, from memory)
    assert same_ratio(red.closed_num, red.closed_den, G / (1 + G + G * K))
    assert same_poly(red.characteristic, s ** 2 + s + 5 + 5 * K)


def test_loop_off_the_path_is_left_out_and_named():
    # rule (docs/guarantees.md): only nodes on a wire path from the input to the output are analysed
    d = make([("r", "input"), ("G", "block", "1", "s+1"), ("b", "branch"), ("y", "output"),
              ("z", "sum", "+-"), ("W", "block", "3", "s-2")],
             [("r", "G"), ("G", "b"), ("b", "y"), ("b", "z", 0), ("z", "W"), ("W", "z", 1)])
    red = reduce_diagram(d, "r", "y")
    assert same_ratio(red.closed_num_reduced, red.closed_den_reduced, 1 / (s + 1))
    # the path r -> G -> y alone: characteristic D_G = s + 1 (the side loop's 1 + W is not in it)
    assert same_poly(red.characteristic, s + 1)
    assert red.left_out == ["z", "W"]
    assert any("left out of the analysis" in w and "z, W" in w for w in red.warnings)


def test_non_touching_loops_cross_coupled():
    d = make([("r", "input"), ("e1", "sum", "+--"), ("G1", "block", "2", "s+1"), ("b1", "branch"),
              ("e2", "sum", "+-"), ("G2", "block", "K", "s+3"), ("b2", "branch"), ("H", "block", "1", "s"),
              ("y", "output")],
             [("r", "e1", 0), ("e1", "G1"), ("G1", "b1"), ("b1", "e1", 1), ("b1", "e2", 0), ("e2", "G2"),
              ("G2", "b2"), ("b2", "e2", 1), ("b2", "y"), ("b2", "H"), ("H", "e1", 2)])
    red = reduce_diagram(d, "r", "y")
    G1, G2, H = 2 / (s + 1), K / (s + 3), 1 / s
    L1, L2, L3 = -G1, -G2, -G1 * G2 * H
    # Delta = 1 - (L1 + L2 + L3) + L1 L2, L1 and L2 do not touch (Mason 1953/1956, from memory)
    delta = 1 - (L1 + L2 + L3) + L1 * L2
    assert same_poly(red.characteristic, sympy.cancel(delta * (s + 1) * (s + 3) * s))
    assert same_ratio(red.closed_num, red.closed_den, G1 * G2 / delta)
    num_m, delta_m = mason_gain(d, "r", "y")
    assert num_m == red.closed_num and delta_m == red.characteristic
    assert len(red.loops) == 3


def test_disturbance_entering_at_a_block_output():
    red = reduce_diagram(unity_loop("K", "s (s+1)"), "G", "y")
    G = K / (s * (s + 1))
    # an output disturbance reaches y through the sensitivity 1/(1+G) (textbook, from memory)
    assert same_ratio(red.closed_num, red.closed_den, 1 / (1 + G))
    assert (red.closed_num, red.characteristic) == mason_gain(unity_loop("K", "s (s+1)"), "G", "y")


# -- hidden modes --------------------------------------------------------------------------------
def cancelling_loop() -> Diagram:
    return make([("r", "input"), ("e", "sum", "+-"), ("C", "block", "s-1", "s+2"), ("P", "block", "1", "s-1"),
                 ("y", "output")],
                [("r", "e", 0), ("e", "C"), ("C", "P"), ("P", "y"), ("P", "e", 1)])


def test_cancelled_unstable_pole_stays_in_the_characteristic():
    red = reduce_diagram(cancelling_loop(), "r", "y")
    # C P = 1/(s+2), so the transfer function is 1/(s+3); the plant pole at s = 1 cancels
    assert same_ratio(red.closed_num_reduced, red.closed_den_reduced, 1 / (s + 3))
    assert same_poly(red.characteristic, (s - 1) * (s + 3))
    roots = np.roots([float(c) for c in ParametricPolynomial.from_mpoly(red.hidden_factor).at()])
    assert np.allclose(roots, [1.0])  # numpy.roots: the hidden mode is s = 1
    assert red.hidden_blocks == ["P"]
    assert red.characteristic == red.closed_den_reduced * red.hidden_factor
    assert red.closed_num == red.closed_num_reduced * red.hidden_factor
    assert red.hidden_factor.leading_coefficient() == 1


def test_mason_agrees_on_the_cancelling_loop():
    red = reduce_diagram(cancelling_loop(), "r", "y")
    assert mason_gain(cancelling_loop(), "r", "y") == (red.closed_num, red.characteristic)


# -- warnings and errors -------------------------------------------------------------------------
def test_unit_gain_algebraic_loop_is_refused():
    d = make([("r", "input"), ("e", "sum", "++"), ("b", "branch"), ("U", "block", "1", "1"), ("y", "output")],
             [("r", "e", 0), ("e", "b"), ("b", "U"), ("U", "e", 1), ("b", "y")])
    with pytest.raises(AnalysisError) as err:
        reduce_diagram(d, "r", "y")
    assert err.value.code == "E402"
    assert all(name in err.value.message for name in ("e", "b", "U"))
    assert mason_gain(d, "r", "y")[1].is_zero()  # Delta = 1 - 1 = 0 by Mason too


def test_unknown_ends_are_named():
    with pytest.raises(AnalysisError) as err:
        reduce_diagram(unity_loop("1", "s"), "nope", "y")
    assert err.value.code == "E401" and "nope" in err.value.message
    with pytest.raises(AnalysisError) as err:
        reduce_diagram(unity_loop("1", "s"), "y", "G")
    assert err.value.code == "E401"


def test_ill_posed_and_improper_warnings():
    d = make([("r", "input"), ("e", "sum", "++"), ("G", "block", "s+1", "s+2"), ("y", "output")],
             [("r", "e", 0), ("e", "G"), ("G", "y"), ("G", "e", 1)])
    red = reduce_diagram(d, "r", "y")
    # (s+2) - (s+1) = 1: the degree drops because the loop gain tends to 1 as s grows
    assert same_poly(red.characteristic, sympy.Integer(1))
    assert any(w.startswith("ill-posed loop") and "G" in w for w in red.warnings)
    improper = reduce_diagram(unity_loop("s^2", "s+1"), "r", "y")
    assert any("block G is improper" in w for w in improper.warnings)


def test_unconnected_port_and_unreachable_output():
    d = make([("r", "input"), ("e", "sum", "+-"), ("G", "block", "1", "s+1"), ("y", "output"),
              ("q", "input"), ("F", "block", "1", "s+4")],
             [("r", "e", 0), ("e", "G"), ("q", "F"), ("F", "y")])
    red = reduce_diagram(d, "r", "y")
    assert "node e: input 2 is not connected and contributes zero" in red.warnings
    assert red.closed_num.is_zero() and red.closed_num_reduced.is_zero()
    assert any("does not depend on the input" in w for w in red.warnings)
    assert same_poly(red.characteristic, (s + 1) * (s + 4))
    assert red.hidden_factor == red.characteristic  # every mode is hidden from a zero transfer function


def test_without_ends_only_the_characteristic():
    red = reduce_diagram(unity_loop("K", "s+1"), None, None)
    assert same_poly(red.characteristic, s + 1 + K)
    assert red.closed_num is None and red.hidden_factor is None


def test_block_polynomials_and_parameters():
    d = make([("r", "input"), ("A", "block", "K/(s+2)", "s (s+1)"), ("B", "block", "1", "T s + a")],
             [("r", "A"), ("A", "B")])
    assert diagram_parameters(d) == ["K", "T", "a"]
    polys = block_polynomials(d)
    assert same_poly(polys["A"][0], K) and same_poly(polys["A"][1], s * (s + 1) * (s + 2))
    assert polys["B"][1].context().names() == ("s", "K", "T", "a")


# -- random diagrams -----------------------------------------------------------------------------
def poly_text(coeffs: list[int]) -> str:
    n = len(coeffs) - 1
    return " + ".join(f"({c})*s^{n - i}" for i, c in enumerate(coeffs))


@st.composite
def random_diagrams(draw):
    """Small random interconnections of proper blocks, summing junctions and branch points."""
    nodes: list[tuple] = [("r", "input")]
    for i in range(draw(st.integers(1, 4))):
        deg = draw(st.integers(0, 2))
        den = [draw(st.integers(1, 3)), *draw(st.lists(st.integers(-3, 3), min_size=deg, max_size=deg))]
        num = draw(st.lists(st.integers(-3, 3), min_size=1, max_size=deg + 1))
        factor = "K*" if draw(st.booleans()) else ""
        nodes.append((f"B{i}", "block", factor + "(" + poly_text(num) + ")", poly_text(den)))
    for i in range(draw(st.integers(0, 3))):
        nodes.append((f"S{i}", "sum", draw(st.sampled_from(["+-", "++", "-+", "+--", "+-+"]))))
    for i in range(draw(st.integers(0, 1))):
        nodes.append((f"J{i}", "branch"))
    nodes.append(("y", "output"))
    senders = [n[0] for n in nodes if n[1] != "output"]
    wires = []
    for spec in nodes:
        ports = len(spec[2]) if spec[1] == "sum" else 0 if spec[1] == "input" else 1
        for port in range(ports):
            source = draw(st.sampled_from([*senders, None]))
            if source is not None and source != spec[0]:
                wires.append((source, spec[0], port))
    d = make(nodes, wires)
    source = draw(st.sampled_from(senders))
    target = draw(st.sampled_from([n[0] for n in nodes]))
    return d, source, target


def brute_force_loops(graph) -> set[tuple[str, ...]]:
    """Every simple loop by plain backtracking from each node through later nodes only."""
    order, out = graph.order, set()
    succ = {v: [b for (a, b) in graph.edges if a == v] for v in order}

    def extend(path):
        for w in succ[path[-1]]:
            if w == path[0]:
                out.add(tuple(path))
            elif w not in path and order.index(w) > order.index(path[0]):
                extend([*path, w])

    for v in order:
        extend([v])
    return out


def analysed_subdiagram(d, source, target):
    """The nodes on a wire path from source to target and the wires between them (found here by
    plain forward/backward search), as a diagram of its own for Mason's formula."""
    def closure(start, step):
        seen, todo = {start}, [start]
        while todo:
            v = todo.pop()
            for w in d.wires:
                a, b = step(w)
                if a == v and b not in seen:
                    seen.add(b)
                    todo.append(b)
        return seen
    keep = closure(source, lambda w: (w.source, w.target)) & closure(target, lambda w: (w.target, w.source))
    if target not in keep:
        return d
    sub = Diagram()
    for nid, node in d.nodes.items():
        if nid in keep:
            sub.add_node(replace(node))
    for w in d.wires:
        if w.source in keep and w.target in keep:
            sub.connect(w.source, w.target, w.port)
    return sub


def check_agreement(case) -> None:
    d, source, target = case
    num_m, delta_m = mason_gain(analysed_subdiagram(d, source, target), source, target)
    try:
        red = reduce_diagram(d, source, target)
    except AnalysisError as err:
        assert err.code == "E402"
        assert delta_m.is_zero()  # Mason's Delta vanishes exactly when elimination finds no pivot
        return
    # exactly equal, not only as rational functions: both are scaled by every block's denominator
    assert red.characteristic == delta_m
    assert red.closed_num == num_m
    assert red.closed_num * delta_m == num_m * red.closed_den
    degree_bound = sum(p[1].degrees()[0] for p in block_polynomials(d).values())
    assert red.left_out == [n for n in d.nodes if n not in analysed_subdiagram(d, source, target).nodes]
    assert red.characteristic.degrees()[0] <= degree_bound


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(random_diagrams())
def test_elimination_agrees_with_mason(case):
    check_agreement(case)


@pytest.mark.slow
@settings(max_examples=2000, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(random_diagrams())
def test_elimination_agrees_with_mason_many(case):
    check_agreement(case)


@settings(max_examples=25, deadline=None)
@given(random_diagrams())
def test_loop_enumeration_matches_brute_force(case):
    graph = build_signal_graph(case[0])
    assert {tuple(lp) for lp in simple_cycles(graph)} == brute_force_loops(graph)


@settings(max_examples=30, deadline=None)
@given(num=st.lists(st.integers(-5, 5), min_size=1, max_size=3),
       den=st.lists(st.integers(-5, 5), min_size=3, max_size=4).filter(lambda c: c[0] != 0))
def test_unity_feedback_poles_match_scipy(num, den):
    if len(num) >= len(den):  # keep G strictly proper so the state-space form has no direct term
        num = num[len(num) - len(den) + 1:]
    num = np.trim_zeros(num, "f")
    if len(num) == 0:
        return
    red = reduce_diagram(unity_loop(poly_text(num), poly_text(den)), "r", "y")
    char = ParametricPolynomial.from_mpoly(red.characteristic).at_float()
    # closed loop by hand: x' = (A - B C) x for u = r - y (scipy.signal.tf2ss realisation of G)
    A, B, C, _ = scipy.signal.tf2ss(num, den)
    poles = np.linalg.eigvals(A - B @ C)
    assert np.allclose(np.poly(poles), np.array(char) / char[0], rtol=1e-7, atol=1e-7)
