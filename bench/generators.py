"""Invented, deterministic inputs for the speed table (for timing only; no physical meaning).

>>> loop = unity_feedback_loop(8)
>>> loop.context().names(), loop.degrees()[0]
(('s', 'K'), 8)
>>> len(nested_loops_diagram(10).nodes), len(nested_loops_diagram(50).nodes)
(10, 50)
"""
from __future__ import annotations

from flint import fmpq_mpoly

from core.algebra.polynomial import ParametricPolynomial, mpoly_context
from core.model.diagram import Diagram, Node, Parameter

STAGE_NODES = 6   # e, G, b, H, F, p
GROUP = 3         # stages inside one outer loop
OUTER_NODES = 3   # o, q, R


def unity_feedback_loop(degree: int) -> fmpq_mpoly:
    """D(s) + K N(s): unity feedback around the gain K and a plant N/D with ``degree`` poles.

    D is a product of first- and second-order factors with small integer coefficients, N has
    about degree/4 zeros, so K sits in the lower quarter of the coefficients.
    """
    ctx = mpoly_context(["K"])
    s, k = ctx.gens()
    den, order, i = ctx.constant(1), 0, 0
    while order < degree:
        if degree - order >= 2 and i % 2 == 1:
            den *= s * s + (i % 3 + 1) * s + (i % 5 + 2)
            order += 2
        else:
            den *= s + (i % 4 + 1)
            order += 1
        i += 1
    num = ctx.constant(1)
    for j in range(max(1, degree // 4) - 1):
        num *= s + (j % 3 + 2)
    return den + k * num


def loop_polynomial(degree: int) -> ParametricPolynomial:
    """:func:`unity_feedback_loop` as a polynomial in s with coefficients in K."""
    return ParametricPolynomial.from_mpoly(unity_feedback_loop(degree), "K")


def _stage_count(nodes: int) -> tuple[int, int]:
    """(stages, outer loops) that fit in ``nodes`` with input and output; only full groups get one."""
    stages = 0
    while True:
        nxt = stages + 1
        if 2 + STAGE_NODES * nxt + OUTER_NODES * (nxt // GROUP) > nodes:
            return stages, stages // GROUP
        stages = nxt


def nested_loops_diagram(nodes: int) -> Diagram:
    """A diagram with exactly ``nodes`` nodes (at least 8): a chain of stages, then gain blocks.

    Each stage is an inner feedback loop (summing junction e, block G, branch point b, sensor
    block H back into e) in parallel with a feed-forward block F summed at p; every three stages
    sit inside an outer loop whose feedback block R carries the parameter T. The first stage's
    G carries the tuning parameter K. Leftover node slots become series gain blocks before the
    output. Input ``r``, output ``y``; K and T have nominal values.
    """
    stages, _ = _stage_count(nodes)
    if stages < 1:
        raise ValueError("a nested-loop diagram needs at least 8 nodes")
    d = Diagram(name=f"nested loops, {nodes} nodes")
    column = [0]

    def add(nid: str, kind: str, row: int = 0, **fields) -> str:
        column[0] += 1
        d.add_node(Node(nid, kind, x=90.0 * column[0], y=110.0 * row, **fields))
        return nid

    u = add("r", "input")
    outer = ""
    for k in range(stages):
        opens_group = k % GROUP == 0 and k + GROUP <= stages
        if opens_group:
            outer = add(f"o{k}", "sum", signs="+-")
            d.connect(u, outer, 0)
            u = outer
        e = add(f"e{k}", "sum", signs="+-")
        d.connect(u, e, 0)
        g = add(f"G{k}", "block", role="controller" if k == 0 else "plant",
                num="K (s+1)" if k == 0 else f"s+{k % 5 + 1}", den=f"s^2+{k % 3 + 2} s+{k % 4 + 1}")
        d.connect(e, g)
        b = add(f"b{k}", "branch")
        d.connect(g, b)
        h = add(f"H{k}", "block", row=1, role="sensor", num="1", den=f"s+{k % 2 + 1}")
        d.connect(b, h)
        d.connect(h, e, 1)
        f = add(f"F{k}", "block", row=-1, role="other", num=f"{k % 3 + 1}", den=f"s+{k % 5 + 2}")
        d.connect(u, f)
        p = add(f"p{k}", "sum", signs="++")
        d.connect(b, p, 0)
        d.connect(f, p, 1)
        u = p
        if k % GROUP == GROUP - 1 and k < GROUP * (stages // GROUP):
            q = add(f"q{k}", "branch")
            d.connect(u, q)
            back = add(f"R{k}", "block", row=2, role="sensor", num="T", den="s+3")
            d.connect(q, back)
            d.connect(back, outer, 1)
            u = q
    pad = 0
    while len(d.nodes) < nodes - 1:
        pad += 1
        gain = add(f"A{pad}", "block", role="gain", num=f"{pad % 3 + 1}/2", den="1")
        d.connect(u, gain)
        u = gain
    d.connect(u, add("y", "output"))
    d.set_parameter(Parameter("K", nominal=1.0, minimum=0.0, maximum=5.0))
    if any(node.num == "T" for node in d.nodes.values()):
        d.set_parameter(Parameter("T", nominal=0.5, minimum=0.0, maximum=2.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    return d
