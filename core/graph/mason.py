"""Mason's gain formula over a diagram's signal-flow graph (S. J. Mason, 1953 and 1956).

    T = sum_k P_k Delta_k / Delta,   Delta = 1 - sum L_i + sum L_i L_j - ...  (non-touching loops)

Used to check :func:`core.graph.reduction.reduce_diagram`, which finds the same result by elimination.
It enumerates every simple loop, forward path and set of non-touching loops, so its cost grows
exponentially: meant for small diagrams.

Both results are multiplied by the product of every block's denominator, so they are polynomials
comparable directly with ``Reduction.closed_num`` and ``Reduction.characteristic``. Because the loops
of one term never share a node, each block's N_i or D_i enters a term once, and each term is a
plain product: no fraction arithmetic at all.
"""
from __future__ import annotations

from itertools import pairwise

from flint import fmpq, fmpq_mpoly

from core.graph.signal_graph import SignalGraph, build_signal_graph, check_endpoints, simple_cycles
from core.model.diagram import Diagram


def mason_gain(diagram: Diagram, input_id: str, output_id: str) -> tuple[fmpq_mpoly, fmpq_mpoly]:
    """``(sum_k P_k Delta_k, Delta)``, each times the product of all block denominators.

    As in :func:`core.graph.reduction.reduce_diagram`, an input that is not an Input node is a signal
    added to that node's output.
    """
    check_endpoints(diagram, input_id, output_id)
    graph = build_signal_graph(diagram)
    loops = [(set(lp), _chain(graph, lp + lp[:1])) for lp in simple_cycles(graph, limit=10 ** 9)]
    delta = _cofactor(graph, loops, set(), fmpq(1), set())
    numerator = graph.ctx.constant(0)
    for path in _forward_paths(graph, input_id, output_id):
        scale, used = _chain(graph, path)
        numerator += _cofactor(graph, loops, set(path), scale, used)
    return numerator, delta


def _chain(graph: SignalGraph, nodes: list[str]) -> tuple[fmpq, set[str]]:
    """Constant factor and blocks entered along consecutive edges of ``nodes``."""
    scale = fmpq(1)
    for a, b in pairwise(nodes):
        scale *= graph.edges[(a, b)]
    return scale, {b for b in nodes[1:] if b in graph.blocks}


def _cofactor(graph: SignalGraph, loops, touched: set[str], scale: fmpq, used: set[str]) -> fmpq_mpoly:
    """(gain of ``used`` blocks times scale) x Delta of the loops not touching ``touched``, x prod D."""
    free = [lp for lp in loops if not lp[0] & touched]
    total = graph.ctx.constant(0)
    for sign, factor, blocks in _non_touching_sets(free, 0, set(), 1, fmpq(1), set()):
        term = graph.ctx.constant(scale * factor * sign)
        for b, (n, d) in graph.blocks.items():
            term *= n if (b in blocks or b in used) else d
        total += term
    return total


def _non_touching_sets(loops, start: int, nodes: set[str], sign: int, factor: fmpq, blocks: set[str]):
    """Every set of pairwise non-touching loops (the empty set first): (sign, factor, blocks)."""
    yield sign, factor, blocks
    for i in range(start, len(loops)):
        members, (scale, entered) = loops[i]
        if not members & nodes:
            yield from _non_touching_sets(loops, i + 1, nodes | members, -sign, factor * scale, blocks | entered)


def _forward_paths(graph: SignalGraph, start: str, end: str) -> list[list[str]]:
    """Every simple path from ``start`` to ``end`` (``[start]`` alone when they are the same)."""
    succ = graph.successors()
    paths: list[list[str]] = []
    stack = [(start, [start])]
    while stack:
        v, path = stack.pop()
        if v == end:
            paths.append(path)
            continue
        for w in succ.get(v, ()):
            if w not in path:
                stack.append((w, [*path, w]))
    return paths
