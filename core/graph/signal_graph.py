"""A diagram read as a signal-flow graph: one signal per node, one gain per edge.

Each node's signal is its output (an Output node's signal is what it observes). A wire into a
summing junction carries that port's sign, a wire into a block carries the block's N/D, a wire
into a branch point or an Output carries 1. Wires between the same two nodes add up (a node may
feed two ports of one junction); edges of zero gain (signs that cancel, a block whose numerator
is 0) are dropped. An edge's gain is ``scale * N_t / D_t`` when its target ``t`` is a block, else
just ``scale``.

Block texts are parsed once per (text, parameters) pair and cached.

>>> from core.model.diagram import Diagram, Node
>>> d = Diagram()
>>> for n in (Node("r", "input"), Node("e", "sum", signs="+-"), Node("b", "branch")):
...     _ = d.add_node(n)
>>> _ = d.connect("r", "e", 0); _ = d.connect("e", "b"); _ = d.connect("b", "e", 1)
>>> g = build_signal_graph(d)
>>> sorted((k, str(v)) for k, v in g.edges.items()), g.unconnected
([(('b', 'e'), '-1'), (('e', 'b'), '1'), (('r', 'e'), '1')], [])
>>> simple_cycles(g)
[['e', 'b']]
"""
from __future__ import annotations

from collections.abc import Collection
from dataclasses import dataclass, field
from functools import lru_cache

from flint import fmpq, fmpq_mpoly, fmpq_mpoly_ctx

from core.algebra.polynomial import mpoly_context
from core.errors import AnalysisError
from core.model.diagram import Diagram

MAX_LOOPS = 2000  # enumeration cap for simple loops (their number can grow exponentially)


def diagram_parameters(diagram: Diagram, keep: Collection[str] | None = None) -> list[str]:
    """Every parameter name typed in a block (of the ``keep`` nodes, when given), sorted."""
    names: set[str] = set()
    for node in diagram.nodes.values():
        if node.kind == "block" and (keep is None or node.id in keep):
            names |= _text_parameters(node.num) | _text_parameters(node.den)
    return sorted(names)


@lru_cache(maxsize=4096)
def _text_parameters(text: str) -> frozenset[str]:
    from core.algebra.expression import expression_parameters
    return frozenset(expression_parameters(text))


def check_endpoints(diagram: Diagram, input_id: str | None, output_id: str | None) -> None:
    """E401 unless each given end names a node (and the input one that sends a signal)."""
    unknown = [f"{role} '{nid}'" for role, nid in (("input", input_id), ("output", output_id))
               if nid is not None and nid not in diagram.nodes]
    if unknown:
        raise AnalysisError("E401", f"there is no node for the {' and '.join(unknown)}", where="analysis")
    if input_id is not None and not diagram.nodes[input_id].has_output:
        raise AnalysisError("E401", f"the input '{input_id}' is an output and sends no signal", where="analysis")


@lru_cache(maxsize=1024)
def _parse_block(num: str, den: str, names: tuple[str, ...], where: str) -> tuple[fmpq_mpoly, fmpq_mpoly]:
    from core.algebra.expression import block_transfer, to_mpoly
    ctx = mpoly_context(names)
    n, d = block_transfer(num, den, where=where)
    return to_mpoly(n, ctx), to_mpoly(d, ctx)


def block_polynomials(diagram: Diagram, keep: Collection[str] | None = None) -> dict[str, tuple[fmpq_mpoly, fmpq_mpoly]]:
    """``{block id: (N, D)}`` in ``mpoly_context(diagram_parameters(diagram, keep))``, nothing
    cancelled; only the ``keep`` nodes' blocks when given."""
    names = tuple(diagram_parameters(diagram, keep))
    return {nid: _parse_block(node.num, node.den, names, f"node {nid}")
            for nid, node in diagram.nodes.items() if node.kind == "block" and (keep is None or nid in keep)}


def analysed_part(diagram: Diagram, input_id: str, output_id: str) -> tuple[list[str], list[str]]:
    """(kept, left out): the nodes on some wire path from the input to the output (loops through
    them included), and every other node, both in diagram order. Nothing is left out when no
    wire path joins the two (that case is refused elsewhere, E406)."""
    succ: dict[str, list[str]] = {n: [] for n in diagram.nodes}
    pred: dict[str, list[str]] = {n: [] for n in diagram.nodes}
    for w in diagram.wires:
        succ[w.source].append(w.target)
        pred[w.target].append(w.source)
    on_path = reachable(input_id, succ) & reachable(output_id, pred)
    if output_id not in on_path:
        return list(diagram.nodes), []
    return ([n for n in diagram.nodes if n in on_path], [n for n in diagram.nodes if n not in on_path])


@dataclass
class SignalGraph:
    """Nodes in diagram order, ``edges[(source, target)] = scale``, and the block polynomials."""

    order: list[str]
    kinds: dict[str, str]
    edges: dict[tuple[str, str], fmpq]
    blocks: dict[str, tuple[fmpq_mpoly, fmpq_mpoly]]
    ctx: fmpq_mpoly_ctx
    unconnected: list[tuple[str, int]] = field(default_factory=list)

    def successors(self) -> dict[str, list[str]]:
        """``{node: [targets]}`` in edge order."""
        out: dict[str, list[str]] = {n: [] for n in self.order}
        for (a, b) in self.edges:
            out.setdefault(a, []).append(b)
        return out

    def predecessors(self) -> dict[str, list[str]]:
        """``{node: [sources]}`` in edge order."""
        out: dict[str, list[str]] = {n: [] for n in self.order}
        for (a, b) in self.edges:
            out.setdefault(b, []).append(a)
        return out

    def gain(self, source: str, target: str) -> tuple[fmpq_mpoly, fmpq_mpoly]:
        """The edge gain as (numerator, denominator) polynomials."""
        scale = self.edges[(source, target)]
        if target in self.blocks:
            n, d = self.blocks[target]
            return n * scale, d
        return self.ctx.constant(scale), self.ctx.constant(1)


def build_signal_graph(diagram: Diagram, keep: Collection[str] | None = None) -> SignalGraph:
    """Read the diagram's wires as gains (see the module docstring); only the ``keep`` nodes and
    the wires between them when given."""
    kept = list(diagram.nodes) if keep is None else [n for n in diagram.nodes if n in set(keep)]
    members = set(kept)
    blocks = block_polynomials(diagram, members)
    ctx = mpoly_context(diagram_parameters(diagram, members))
    edges: dict[tuple[str, str], fmpq] = {}
    fed: set[tuple[str, int]] = set()
    for w in diagram.wires:
        if w.source not in members or w.target not in members:
            continue
        target = diagram.nodes[w.target]
        sign = -1 if target.kind == "sum" and target.signs[w.port] == "-" else 1
        edges[(w.source, w.target)] = edges.get((w.source, w.target), fmpq(0)) + sign
        fed.add((w.target, w.port))
    edges = {k: v for k, v in edges.items() if v != 0 and not (k[1] in blocks and blocks[k[1]][0].is_zero())}
    unconnected = [(nid, p) for nid in kept
                   for p in range(diagram.nodes[nid].input_count) if (nid, p) not in fed]
    return SignalGraph(kept, {k: diagram.nodes[k].kind for k in kept}, edges, blocks, ctx, unconnected)


def reachable(start: str, adjacency: dict[str, list[str]]) -> set[str]:
    """Every node reachable from ``start`` (itself included) along ``adjacency``."""
    seen, stack = {start}, [start]
    while stack:
        for nxt in adjacency.get(stack.pop(), ()):
            if nxt not in seen:
                seen.add(nxt)
                stack.append(nxt)
    return seen


def strong_components(order: list[str], succ: dict[str, list[str]]) -> list[list[str]]:
    """Strongly connected components (Tarjan), each listed in ``order``."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    comps: list[list[str]] = []
    rank = {n: i for i, n in enumerate(order)}
    for root in order:
        if root in index:
            continue
        work = [(root, iter(succ.get(root, ())))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            v, it = work[-1]
            advanced = False
            for w in it:
                if w not in index:
                    index[w] = low[w] = len(index)
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, iter(succ.get(w, ()))))
                    advanced = True
                    break
                if w in on_stack:
                    low[v] = min(low[v], index[w])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[v])
            if low[v] == index[v]:
                comp = []
                while True:
                    w = stack.pop()
                    on_stack.discard(w)
                    comp.append(w)
                    if w == v:
                        break
                comps.append(sorted(comp, key=rank.__getitem__))
    return comps


def simple_cycles(graph: SignalGraph, limit: int = MAX_LOOPS) -> list[list[str]]:
    """The simple loops (Johnson's algorithm), each starting at its first node in diagram order.

    Stops after ``limit`` loops; callers compare the length with the limit to know.
    """
    succ = graph.successors()
    rank = {n: i for i, n in enumerate(graph.order)}
    cycles: list[list[str]] = []
    for whole in strong_components(graph.order, succ):
        for start in whole[:-1]:
            allowed = {n for n in whole if rank[n] >= rank[start]}
            sub = {n: [m for m in succ[n] if m in allowed] for n in allowed}
            comp = next(c for c in strong_components([n for n in whole if n in allowed], sub) if start in c)
            if len(comp) < 2:
                continue
            if _circuits(start, comp, sub, cycles, limit):
                break
    cycles.sort(key=lambda c: rank[c[0]])
    return cycles[:limit]


def _circuits(start: str, comp: list[str], sub: dict[str, list[str]], cycles: list[list[str]], limit: int) -> bool:
    """Johnson's search for the loops through ``start`` inside ``comp``; True when ``limit`` is hit."""
    members = set(comp)
    adj = {n: [m for m in sub[n] if m in members] for n in comp}
    blocked: set[str] = set()
    blocked_by: dict[str, set[str]] = {n: set() for n in comp}
    path = [start]
    work = [(start, iter(adj[start]), False)]
    blocked.add(start)
    while work:
        v, it, found = work[-1]
        advanced = False
        for w in it:
            if w == start:
                cycles.append(list(path))
                if len(cycles) >= limit:
                    return True
                found = True
            elif w not in blocked:
                work[-1] = (v, it, found)
                path.append(w)
                blocked.add(w)
                work.append((w, iter(adj[w]), False))
                advanced = True
                break
        if advanced:
            continue
        work[-1] = (v, it, found)
        work.pop()
        path.pop()
        if found:
            _unblock(v, blocked, blocked_by)
        else:
            for w in adj[v]:
                blocked_by[w].add(v)
        if work:
            u, uit, ufound = work[-1]
            work[-1] = (u, uit, ufound or found)
    return False


def _unblock(node: str, blocked: set[str], blocked_by: dict[str, set[str]]) -> None:
    stack = [node]
    while stack:
        v = stack.pop()
        if v in blocked:
            blocked.discard(v)
            stack.extend(blocked_by[v])
            blocked_by[v].clear()
