"""The loop opened at a wire: the transfer function around the loop with the wire cut.

Cutting the wire a -> b (port p), a test signal u enters b's port p in the wire's place and the
signal leaving a is observed: T(s) = x_a / u, computed by :func:`core.graph.reduction.reduce_diagram`
on a copy of the diagram with the wire replaced by an Input node feeding b's port and an Output node
fed by a. The loop transfer function is L = -T (the port's sign is inside T), so the return
difference 1 + L = 1 - T vanishes where the closed loop has a pole on the cut path.

Default wire: the feedback wire into the outermost summing junction (the first sum reached from the
analysis input): a wire into it whose source is reachable from it, a port with sign '-' first.
"""
from __future__ import annotations

import copy
from collections import deque

from flint import fmpq_mpoly

from core.errors import AnalysisError
from core.graph.reduction import reduce_diagram
from core.graph.signal_graph import reachable
from core.model.diagram import Diagram, Node, Wire

__all__ = ["default_opening", "opened_loop"]


def default_opening(diagram: Diagram) -> Wire:
    """The feedback wire into the outermost summing junction (E466 when there is none)."""
    succ: dict[str, list[str]] = {n: [] for n in diagram.nodes}
    for w in diagram.wires:
        succ[w.source].append(w.target)
    start = diagram.analysis.input
    if start is None or start not in diagram.nodes:
        raise AnalysisError("E466", "no analysis input to find the outer summing junction from", where="analysis")
    seen, queue = {start}, deque([start])
    while queue:
        node = queue.popleft()
        if diagram.node(node).kind == "sum":
            around = reachable(node, succ)
            feedback = [w for w in diagram.wires if w.target == node and w.source in around]
            if feedback:
                signs = diagram.node(node).signs
                return min(feedback, key=lambda w: (signs[w.port] != "-", w.port))
        for nxt in succ[node]:
            if nxt not in seen:
                seen.add(nxt)
                queue.append(nxt)
    raise AnalysisError("E466", "no summing junction with a feedback wire is reached from the input",
                        where="analysis")


def _copy(diagram: Diagram) -> Diagram:
    """A copy whose node table and wire list may change without touching ``diagram`` (no listeners)."""
    cut = copy.copy(diagram)
    cut.nodes = dict(diagram.nodes)
    cut.wires = list(diagram.wires)
    cut._listeners = []
    return cut


def opened_loop(diagram: Diagram, wire_key: str | None = None) -> tuple[Wire, fmpq_mpoly, fmpq_mpoly]:
    """(the wire, numerator, denominator) of L = -T around the loop cut at the wire (in s and the
    parameters; common factors cancelled). E466 for an unknown wire or one on no loop."""
    if wire_key is None:
        wire = default_opening(diagram)
    else:
        wire = next((w for w in diagram.wires if w.key == wire_key), None)  # type: ignore[assignment]
        if wire is None:
            raise AnalysisError("E466", f"no wire '{wire_key[:60]}' to open the loop at", where="frequency response")
    cut = _copy(diagram)
    cut.disconnect(wire.key)
    inject, observe = cut.unique_id("opening_in"), cut.unique_id("opening_out")
    cut.add_node(Node(inject, "input"))
    cut.add_node(Node(observe, "output"))
    cut.connect(inject, wire.target, wire.port)
    cut.connect(wire.source, observe, 0)
    red = reduce_diagram(cut, inject, observe)
    num, den = red.closed_num_reduced, red.closed_den_reduced
    if num is None or den is None or num.is_zero():
        raise AnalysisError("E466", f"the wire {wire.key} is on no loop: nothing comes back around it",
                            where="frequency response")
    return wire, -num, den
