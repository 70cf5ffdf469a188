"""Row plane: the stability plane of a degree-6 loop in two controller gains at 200 x 200.

The timed call is :func:`core.analysis.plane.stability_plane` on a PI controller Kp + Ki/s around
the degree-5 plant of :func:`bench.generators.unity_feedback_loop` (its N/D), characteristic
polynomial s D(s) + (Kp s + Ki) N(s): exact boundary polynomials, exact counts on every one of
the 200 columns (so on all 40,000 grid points), regions, arcs and five exact slices.
"""
from __future__ import annotations

from flint import fmpq, fmpq_mpoly

from bench.generators import unity_feedback_loop
from bench.table import Row, ms
from bench.timing import median, repeat
from core.algebra.polynomial import mpoly_context
from core.analysis.plane import stability_plane

RESOLUTION = 200
TARGET_S = 0.300
RANGES = ((fmpq(-10), fmpq(80)), (fmpq(-10), fmpq(150)))  # all three regions (0, 1 and 2 roots) inside


def pi_loop() -> fmpq_mpoly:
    """s D(s) + (Kp s + Ki) N(s) for the plant N/D of the degree-5 generated loop (degree 6).

    >>> pi_loop().degrees()[0]
    6
    """
    loop = unity_feedback_loop(5)
    ctx = mpoly_context(["Ki", "Kp"])
    s, ki, kp = ctx.gens()
    den, num = ctx.constant(0), ctx.constant(0)
    for (es, ek), c in loop.to_dict().items():
        if ek:
            num += c * s**es
        else:
            den += c * s**es
    return s * den + (kp * s + ki) * num


def timed_plane():
    poly = pi_loop()
    return lambda: stability_plane(poly, "Kp", "Ki", {}, *RANGES, resolution=RESOLUTION)


def run(quick: bool) -> list[Row]:
    times = repeat(timed_plane(), repeats=3 if quick else 9)
    result = timed_plane()()
    took = median(times)
    return [Row("plane", f"stability plane, degree 6 in Kp and Ki, {RESOLUTION} x {RESOLUTION}, median of "
                f"{len(times)}", ms(took), f"<= {ms(TARGET_S)}", took <= TARGET_S,
                {"median_s": took, "times_s": times, "regions": len(result.regions),
                 "arcs": len(result.arcs)})]
