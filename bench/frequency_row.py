"""Row frequency: the frequency response of a degree-6 loop L(s) = K N(s)/D(s) at K = 1.

D and N are the plant of :func:`bench.generators.unity_feedback_loop` at degree 6. Timed calls:
:func:`core.analysis.frequency.response` at 400 logarithmic frequency points (magnitude, unwrapped
phase, polar points: what a panel redraws), and :func:`core.analysis.frequency.analyse` (exact
crossovers, every margin, the certified sensitivity peak), without and with a delay of 1/10 s.
"""
from __future__ import annotations

from flint import fmpq

from bench.generators import loop_polynomial
from bench.table import Row, ms
from bench.timing import median, repeat
from core.analysis.frequency import NO_DELAY, LoopFunction, analyse, frequency_grid, response

RESPONSE_TARGET_S = 0.030
POINTS = 400


def degree_six_loop(delay: fmpq = NO_DELAY) -> LoopFunction:
    """L = N/D of the degree-6 benchmark plant, K = 1 (coefficients lowest power first).

    >>> loop = degree_six_loop()
    >>> len(loop.denominator) - 1, loop.gain
    (6, 1)
    """
    poly = loop_polynomial(6)
    den = [c[0] for c in reversed(poly.coeffs)]
    num = [c[1] for c in reversed(poly.coeffs)]
    return LoopFunction(fmpq(1), tuple(num), tuple(den), delay)


def timed_response():
    loop = degree_six_loop()
    grid = frequency_grid(loop, POINTS)
    return lambda: response(loop, grid)


def run(quick: bool) -> list[Row]:
    rows = []
    times = repeat(timed_response(), repeats=5 if quick else 15)
    took = median(times)
    rows.append(Row("frequency", f"response at {POINTS} points, degree 6, median of {len(times)}", ms(took),
                    f"<= {ms(RESPONSE_TARGET_S)}", took <= RESPONSE_TARGET_S, {"median_s": took, "times_s": times}))
    for label, delay in (("rational", fmpq(0)), ("delay 1/10 s", fmpq(1, 10))):
        loop = degree_six_loop(delay)
        times = repeat(lambda loop=loop: analyse(loop), repeats=3 if quick else 7)
        took = median(times)
        rows.append(Row("frequency", f"margins and Ms, degree 6, {label}, median of {len(times)}", ms(took),
                        "", None, {"median_s": took, "times_s": times}))
    return rows
