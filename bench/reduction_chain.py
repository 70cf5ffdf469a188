"""Speed of diagram reduction on long chains of nested loops and parallel paths (reported, never asserted).

Each stage is an inner feedback loop (junction, block G_k, branch point, sensor H_k) in parallel
with a feed-forward block F_k; every three stages sit inside an outer loop whose feedback block
carries the parameter T, and the first stage's gain carries K. Invented values, for timing only.

    python -m bench.reduction_chain 1 7 28 56      # stage counts; about 7 nodes per stage
"""
from __future__ import annotations

import sys
import time

from core.graph.reduction import reduce_diagram
from core.model.diagram import Diagram, Node


def nested_chain(stages: int, group: int = 3) -> Diagram:
    """The benchmark diagram with ``stages`` stages (input r, output y)."""
    d = Diagram(name=f"chain of {stages} stages")

    def add(nid: str, kind: str, **fields) -> str:
        d.add_node(Node(nid, kind, **fields))
        return nid

    u = add("r", "input")
    outer = ""
    for k in range(stages):
        if k % group == 0:
            outer = add(f"o{k}", "sum", signs="+-")
            d.connect(u, outer, 0)
            u = outer
        e = add(f"e{k}", "sum", signs="+-")
        d.connect(u, e, 0)
        g = add(f"G{k}", "block", num="K (s+1)" if k == 0 else f"s+{k % 5 + 1}",
                den=f"s^2+{k % 3 + 1} s+{k % 4 + 1}")
        d.connect(e, g)
        b = add(f"b{k}", "branch")
        d.connect(g, b)
        h = add(f"H{k}", "block", num="1", den=f"s+{k % 2 + 1}")
        d.connect(b, h)
        d.connect(h, e, 1)
        f = add(f"F{k}", "block", num=f"{k % 3 + 1}", den=f"s+{k % 5 + 2}")
        d.connect(u, f)
        p = add(f"p{k}", "sum", signs="++")
        d.connect(b, p, 0)
        d.connect(f, p, 1)
        u = p
        if k % group == group - 1 or k == stages - 1:
            q = add(f"q{k}", "branch")
            d.connect(u, q)
            back = add(f"R{k}", "block", num="T", den="s+3")
            d.connect(q, back)
            d.connect(back, outer, 1)
            u = q
    d.connect(u, add("y", "output"))
    return d


def main(argv: list[str]) -> None:
    for stages in map(int, argv or ["1", "7", "28", "56"]):
        d = nested_chain(stages)
        t0 = time.perf_counter()
        reduce_diagram(d, "r", "y")  # first run parses every block text
        t1 = time.perf_counter()
        red = reduce_diagram(d, "r", "y")
        t2 = time.perf_counter()
        char_only = reduce_diagram(d, None, None)
        t3 = time.perf_counter()
        assert char_only.characteristic == red.characteristic
        print(f"{len(d.nodes):4d} nodes {len(d.wires):4d} wires  first {1000 * (t1 - t0):8.1f} ms  "
              f"again {1000 * (t2 - t1):8.1f} ms  characteristic only {1000 * (t3 - t2):8.1f} ms  "
              f"degree {red.characteristic.degrees()[0]}  terms {len(red.characteristic)}  loops {len(red.loops)}",
              flush=True)


if __name__ == "__main__":
    main(sys.argv[1:])
