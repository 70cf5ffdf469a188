"""Row delay: a degree-6 loop with one dead time, D(s) + K N(s) e^(-s/10).

D and N are the plant of :func:`bench.generators.unity_feedback_loop` at degree 6. Timed calls:
:func:`core.analysis.delay.gain_range` (the certified stable range of K: crossing search, window
growth and a certified count between every pair of candidates) and
:func:`core.analysis.delay.delay_margin` at K = 1 (certified count, exact crossing frequencies).
"""
from __future__ import annotations

from flint import fmpq

from bench.generators import loop_polynomial
from bench.table import Row, ms
from bench.timing import median, repeat
from core.analysis.delay import Parts, combine, delay_margin, gain_range, normal_parts

DELAY = fmpq(1, 10)
RANGE_TARGET_S = 0.100
MARGIN_TARGET_S = 0.020


def delay_loop() -> tuple[Parts, Parts]:
    """(A, B) with A = D(s) delay-free and B = N(s) e^(-s/10).

    >>> a, b = delay_loop()
    >>> len(a[0][1]) - 1, b[1][0]
    (6, 1/10)
    """
    poly = loop_polynomial(6)
    den = [c[0] for c in poly.coeffs]
    num = [c[1] for c in poly.coeffs]
    return normal_parts([(fmpq(0), den)], retarded=False), normal_parts([(DELAY, num)], retarded=False)


def timed_range():
    a, b = delay_loop()
    return lambda: gain_range(a, b, "K", 1.0)


def timed_margin():
    a, b = delay_loop()
    parts = combine(a, b, fmpq(1))
    return lambda: delay_margin(parts)


def run(quick: bool) -> list[Row]:
    rows = []
    for what, make, target in (("stable range of K", timed_range, RANGE_TARGET_S),
                               ("delay margin at K = 1", timed_margin, MARGIN_TARGET_S)):
        times = repeat(make(), repeats=5 if quick else 15)
        took = median(times)
        rows.append(Row("delay", f"{what}, degree 6, one delay, median of {len(times)}", ms(took),
                        f"<= {ms(target)}", took <= target, {"median_s": took, "times_s": times}))
    return rows
