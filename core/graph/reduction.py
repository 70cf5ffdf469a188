"""Diagram reduction: the characteristic polynomial and the input-output transfer function, exactly.

The diagram is read as a signal-flow graph x = A x + b u (see :mod:`core.graph.signal_graph`).
Its graph determinant is Delta = det(I - A); the **characteristic polynomial** is

    characteristic = Delta * D_1 * D_2 * ... * D_m      (every block's denominator, nothing cancelled)

which equals det(M) for the polynomial system matrix M (block rows scaled by their D_i). It is
*not rescaled*: its value is exactly Delta times the product, Delta's Mason form starting with 1.
So a pole-zero cancellation never hides a mode.

The transfer function from the input to the output is ``closed_num / closed_den`` with ``closed_den ==
characteristic`` (Cramer's rule on M). The reduced pair divides both by ``hidden_factor``, their
gcd made monic (the coefficient of its leading term, lex order with s first, is 1); its roots are
the hidden modes. A zero transfer function (output not reachable) is a warning, not an error:
then every mode is hidden.

The input may be any node that sends a signal: an Input node is the source itself; for any other
node the input is a signal *added to that node's output* (a disturbance entering there).

The method is sparse Gaussian elimination of I - A over rational functions (entries kept as
reduced numerator/denominator pairs, denominators monic), pivots chosen by least Markowitz cost
with diagonal pivots preferred (for diagonal pivots this is signal-flow-graph node elimination,
the pivot being 1 - self-loop gain); Delta is the signed product of the pivots. The output's
column is kept for last so its value falls out of the final pivot. :func:`core.graph.mason.mason_gain`
gives the same result by Mason's gain formula, for checking.

>>> from core.model.diagram import Diagram, Node
>>> d = Diagram()
>>> for n in (Node("r", "input"), Node("e", "sum", signs="+-"), Node("C", "block", num="s-1", den="s+2"),
...           Node("P", "block", num="1", den="s-1"), Node("y", "output")):
...     _ = d.add_node(n)
>>> for a, b, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "y", 0), ("P", "e", 1)):
...     _ = d.connect(a, b, port)
>>> red = reduce_diagram(d, "r", "y")
>>> from core.algebra.polynomial import mpoly_text
>>> mpoly_text(red.characteristic), mpoly_text(red.closed_num_reduced), mpoly_text(red.closed_den_reduced)
('s^2 + 2*s - 3', '1', 's + 3')
>>> mpoly_text(red.hidden_factor), red.hidden_blocks, red.loops
('s - 1', ['P'], [['e', 'C', 'P']])
"""
from __future__ import annotations

from dataclasses import dataclass, field

from flint import fmpq_mpoly

from core.errors import AnalysisError, Notice
from core.graph.elimination import Frac, SingularSystem, eliminate, frac, fraction_product, product, sub
from core.graph.mason import mason_gain
from core.graph.signal_graph import (
    MAX_LOOPS,
    SignalGraph,
    analysed_part,
    block_polynomials,
    build_signal_graph,
    check_endpoints,
    diagram_parameters,
    reachable,
    simple_cycles,
    strong_components,
)
from core.model.diagram import Diagram

__all__ = ["Reduction", "block_polynomials", "diagram_parameters", "mason_gain", "reduce_diagram"]


@dataclass
class Reduction:
    """What :func:`reduce_diagram` finds; polynomials are fmpq_mpoly in s and ``parameters``."""

    parameters: list[str]
    characteristic: fmpq_mpoly
    closed_num: fmpq_mpoly | None = None
    closed_den: fmpq_mpoly | None = None
    closed_num_reduced: fmpq_mpoly | None = None
    closed_den_reduced: fmpq_mpoly | None = None
    hidden_factor: fmpq_mpoly | None = None
    hidden_blocks: list[str] = field(default_factory=list)
    loops: list[list[str]] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    connected: bool = True  # some wire path leads from the input to the output
    left_out: list[str] = field(default_factory=list)  # node ids on no wire path from the input to the output


def reduce_diagram(diagram: Diagram, input_id: str | None, output_id: str | None) -> Reduction:
    """Characteristic polynomial, loops and (when both ends are given) the transfer function.

    Raises AnalysisError E401 for an unknown input or output, E402 when Delta is identically zero,
    E410 when the blocks' orders add up to more than MAX_LOOP_ORDER (refused before any work).
    """
    check_endpoints(diagram, input_id, output_id)
    endpoints = (input_id, output_id) if input_id is not None and output_id is not None else None
    kept, left_out = analysed_part(diagram, *endpoints) if endpoints is not None else (list(diagram.nodes), [])
    graph = build_signal_graph(diagram, kept)
    _check_order(graph)
    with_transfer = endpoints is not None
    loops = simple_cycles(graph)
    warnings = _left_out_warnings(diagram, left_out, endpoints) + _port_warnings(diagram, graph) \
        + _improper_warnings(diagram, graph)
    if len(loops) >= MAX_LOOPS:
        warnings.append(Notice(f"more than {MAX_LOOPS} loops: only the first {MAX_LOOPS} are listed",
                               "loops_truncated"))
    observed = output_id if endpoints is not None and graph.kinds[endpoints[1]] != "input" else None
    pivots, sign, x_out = _eliminate(graph, input_id if with_transfer else None, observed, loops)
    # Delta = sign * prod(pivots) in lowest terms: its denominator divides prod(D_i) exactly
    one = graph.ctx.constant(1)
    delta = fraction_product(pivots, (one, one))
    characteristic = delta[0] * (product([d for _, d in graph.blocks.values()], one) / delta[1]) * sign
    warnings += _ill_posed_warnings(diagram, graph, characteristic, loops)
    red = Reduction(diagram_parameters(diagram, kept), characteristic, loops=loops, warnings=warnings,
                    left_out=left_out)
    if endpoints is not None:
        input_id, output_id = endpoints
        if observed is None:  # an Input node observed: it is the input itself or independent of it
            num = characteristic if output_id == input_id else graph.ctx.constant(0)
        else:
            assert x_out is not None  # eliminated with an observed output
            num = x_out[0] * (characteristic / x_out[1])
        _set_transfer_function(red, graph, num)
        red.connected = output_id == input_id or output_id in reachable(input_id, graph.successors())
        warnings += _reach_warnings(diagram, graph, input_id, output_id, num)
    return red


# -- elimination --------------------------------------------------------------------------------
def _eliminate(graph: SignalGraph, source: str | None, observed: str | None,
               loops: list[list[str]]) -> tuple[list[Frac], int, Frac | None]:
    """Pivots and sign of I - A (Delta = sign * their product); the observed signal per unit input."""
    ctx = graph.ctx
    one = ctx.constant(1)
    rows: dict[str, dict[str, Frac]] = {v: {v: (one, one)} for v in graph.order if graph.kinds[v] != "input"}
    rhs: dict[str, Frac] = {}
    for (a, b), scale in graph.edges.items():
        gain = frac(graph.blocks[b][0] * scale, graph.blocks[b][1]) if b in graph.blocks else \
            (ctx.constant(scale), one)
        if a in rows:
            rows[b][a] = (-gain[0], gain[1])
        elif a == source:
            rhs[b] = gain
    if source in rows:  # a signal added to a node's output
        rhs[source] = sub(rhs.get(source, (ctx.constant(0), one)), (-one, one))
    try:
        result = eliminate(rows, rhs, keep_last=observed)
    except SingularSystem as exc:
        raise _singular_error(graph, exc.stuck, loops) from None
    return result.pivots, result.sign, result.last_value


def _singular_error(graph: SignalGraph, stuck: list[str], loops: list[list[str]]) -> AnalysisError:
    """E402 naming a loop of gain exactly one through the stuck nodes (else their strong component)."""
    one_loops = [lp for lp in loops if set(lp) & set(stuck) and _is_unit_loop(graph, lp)]
    if one_loops:
        names = one_loops[0]
    else:
        comps = strong_components(graph.order, graph.successors())
        names = next((c for c in comps if len(c) > 1 and set(c) & set(stuck)), stuck)
    return AnalysisError("E402", "algebraic loop with gain one through " + " -> ".join(names)
                         + ": the loop equations have no unique solution (Delta is identically zero)",
                         where=f"node {names[0]}" if names else None)


def _is_unit_loop(graph: SignalGraph, loop: list[str]) -> bool:
    num, den = graph.ctx.constant(1), graph.ctx.constant(1)
    for a, b in zip(loop, loop[1:] + loop[:1]):
        n, d = graph.gain(a, b)
        num, den = num * n, den * d
    return num == den


# -- results and warnings --------------------------------------------------------------------------
def _set_transfer_function(red: Reduction, graph: SignalGraph, num: fmpq_mpoly) -> None:
    hidden = num.gcd(red.characteristic)
    red.closed_num, red.closed_den = num, red.characteristic
    red.closed_num_reduced, red.closed_den_reduced = num / hidden, red.characteristic / hidden
    red.hidden_factor = hidden
    if hidden.degrees()[0] > 0:
        red.hidden_blocks = [b for b in graph.order if b in graph.blocks
                             and graph.blocks[b][1].gcd(hidden).degrees()[0] > 0]


def _left_out_warnings(diagram: Diagram, left_out: list[str], endpoints: tuple[str, str] | None) -> list[str]:
    if not left_out or endpoints is None:
        return []
    return [Notice(f"left out of the analysis (on no wire path from the input {endpoints[0]} to the output "
                   f"{endpoints[1]}): {', '.join(left_out)}", "left_out")]


def _port_warnings(diagram: Diagram, graph: SignalGraph) -> list[str]:
    return [Notice(f"node {nid}: input {port + 1} is not connected and contributes zero", "open_port")
            for nid, port in graph.unconnected]


MAX_LOOP_ORDER = 200  # the sum of the analysed blocks' orders in s (the characteristic degree's bound)


def _check_order(graph: SignalGraph) -> None:
    """Refuse, before any elimination, a loop whose order could pass MAX_LOOP_ORDER."""
    order = sum(max(_s_degree(n), _s_degree(d)) for n, d in graph.blocks.values())
    if order > MAX_LOOP_ORDER:
        raise AnalysisError("E410", f"the analysed blocks' orders in s add up to {order}; loops of order up "
                                    f"to {MAX_LOOP_ORDER} are analysed (lower the blocks' orders, or leave "
                                    "blocks off the input-output path)", where="diagram")


def _s_degree(p: fmpq_mpoly) -> int:
    return p.degrees()[0] if not p.is_zero() else -1


def _improper_warnings(diagram: Diagram, graph: SignalGraph) -> list[str]:
    out: list[str] = []
    for b, (n, d) in graph.blocks.items():
        if _s_degree(n) > _s_degree(d):
            out.append(Notice(f"block {b} is improper: its numerator has degree {_s_degree(n)} in s, "
                              f"its denominator {_s_degree(d)}", "improper_block"))
    return out


def _ill_posed_warnings(diagram: Diagram, graph: SignalGraph, characteristic: fmpq_mpoly,
                        loops: list[list[str]]) -> list[str]:
    """Warn when the loop gain tends to 1 as s grows (characteristic degree drops)."""
    blocks = graph.blocks
    if any(_s_degree(n) > _s_degree(d) for n, d in blocks.values()):
        return []
    expected = sum(_s_degree(d) for _, d in blocks.values())
    got = _s_degree(characteristic)
    if got >= expected:
        return []
    suspects: list[str] = []
    for lp in loops:
        if all(_s_degree(blocks[b][0]) == _s_degree(blocks[b][1]) for b in lp if b in blocks):
            suspects += [n for n in lp if n not in suspects and (n in blocks or not any(b in blocks for b in lp))]
    named = f" (loop through {', '.join(suspects)})" if suspects else ""
    return [Notice(f"ill-posed loop{named}: the loop gain tends to 1 as s grows, so the characteristic "
                   f"polynomial has degree {got} instead of {expected}", "ill_posed")]


def _reach_warnings(diagram: Diagram, graph: SignalGraph, input_id: str, output_id: str,
                    num: fmpq_mpoly) -> list[str]:
    out: list[str] = []
    forward = reachable(input_id, graph.successors())
    backward = reachable(output_id, graph.predecessors())
    if output_id not in forward or num.is_zero():
        out.append(Notice(f"the output {output_id} does not depend on the input {input_id}: the transfer "
                          "function is 0", "not_reached"))
    unreached = [n for n in graph.order if n not in forward and graph.kinds[n] != "input"]
    if unreached:
        out.append(Notice(f"not reached from the input {input_id}: {', '.join(unreached)}", "not_reached"))
    unseen = [n for n in graph.order if n not in backward and graph.kinds[n] != "output"]
    if unseen:
        out.append(Notice(f"not seen at the output {output_id}: {', '.join(unseen)}", "not_reached"))
    return out
