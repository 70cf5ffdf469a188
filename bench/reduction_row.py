"""Row 2: diagram reduction to the characteristic polynomial, and how its time grows with size.

The timed call is :func:`core.graph.reduction.reduce_diagram` (characteristic polynomial only) on
:func:`bench.generators.nested_loops_diagram`. Block texts are parsed once and cached by core, as
in the app, where an edit re-parses only the edited block; the first (cold) call is reported too.
The growth slope is the least-squares slope of log(time) against log(nodes).
"""
from __future__ import annotations

import math
import time

from bench.generators import nested_loops_diagram
from bench.table import Row, ms
from bench.timing import median, repeat
from core.graph.reduction import reduce_diagram

SIZES = (10, 50, 200)
TARGET_50_S = 0.200
TARGET_SLOPE = 3.0


def loglog_slope(sizes, times) -> float:
    """Least-squares slope of log(time) on log(size).

    >>> round(loglog_slope([10, 100, 1000], [1.0, 100.0, 10000.0]), 6)
    2.0
    """
    xs = [math.log(x) for x in sizes]
    ys = [math.log(y) for y in times]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    return sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)


def characteristic_only(nodes: int):
    """The timed call for one size."""
    diagram = nested_loops_diagram(nodes)
    return lambda: reduce_diagram(diagram, None, None)


def run(quick: bool) -> list[Row]:
    rows, medians = [], []
    for nodes in SIZES:
        fn = characteristic_only(nodes)
        start = time.perf_counter()
        red = fn()
        cold = time.perf_counter() - start
        times = repeat(fn, repeats=5 if quick else 15, warmup=0)
        medians.append(median(times))
        degree = int(red.characteristic.degrees()[0])
        target = TARGET_50_S if nodes == 50 else None
        rows.append(Row("2", f"reduction, {nodes} nodes (degree {degree}), median of {len(times)}",
                        f"{ms(medians[-1])} (first call {ms(cold)})", f"<= {ms(target)}" if target else "",
                        None if target is None else medians[-1] <= target,
                        {"nodes": nodes, "degree": degree, "median_s": medians[-1], "cold_s": cold,
                         "times_s": times, "terms": len(red.characteristic)}))
    slope = loglog_slope(SIZES, medians)
    rows.append(Row("2", "growth slope, log time vs log nodes (10, 50, 200)", f"{slope:.2f}",
                    f"<= {TARGET_SLOPE:g}", slope <= TARGET_SLOPE, {"slope": slope}))
    return rows
