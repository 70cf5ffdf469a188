"""Row "sampled": a degree-6 continuous plant behind a zero-order hold with a discrete PI controller.

Two timed calls, targets from the issue: the certified stable range of the gain K at Ts = 0.1 s
(:func:`core.analysis.zoh.sampled_stable_range`: hold equivalent in arb, exact range in z through
the w-plane, each end confirmed on the balls; target <= 50 ms) and the largest stable sample period
at K = 1 (:func:`core.analysis.zoh.largest_stable_period`: certified scan and bisection to 1e-6
relative; target <= 200 ms). The plant is the N/D of :func:`bench.generators.unity_feedback_loop`
(invented, timing only); the controller K ((1 + Ts/Ti) z - 1)/(z - 1) with Ti = 1 s.
"""
from __future__ import annotations

from flint import fmpq, fmpq_poly

from bench.generators import unity_feedback_loop
from bench.table import Row, ms
from bench.timing import median, repeat
from core.algebra.polynomial import ParametricPolynomial
from core.analysis.zoh import SampledLoop, largest_stable_period, sampled_stable_range

RANGE_TARGET_S, PERIOD_TARGET_S = 0.050, 0.200
SAMPLE_PERIOD = fmpq(1, 10)
INTEGRAL_TIME = fmpq(1)


def pi_controller(ts: fmpq) -> tuple[ParametricPolynomial, ParametricPolynomial]:
    """K ((1 + Ts/Ti) z - 1)/(z - 1): a PI controller with the integral by backward differences."""
    num = ParametricPolynomial.from_coefficients([fmpq_poly([0, 1 + ts / INTEGRAL_TIME]), fmpq_poly([0, -1])], "K")
    return num, ParametricPolynomial.from_coefficients([1, -1], "K")


def pi_loop(degree: int = 6) -> SampledLoop:
    """The sampled loop around the degree-``degree`` plant N/D.

    >>> loop = pi_loop()
    >>> len(loop.plant_den) - 1, loop.parameter
    (6, 'K')
    """
    poly = unity_feedback_loop(degree).subs({})
    den = [fmpq(0)] * (degree + 1)
    num = [fmpq(0)] * (degree + 1)
    for (es, ek), c in poly.to_dict().items():
        (num if ek else den)[degree - es] += c
    return SampledLoop(pi_controller, num, den, parameter="K")


def run(quick: bool) -> list[Row]:
    loop = pi_loop()
    repeats = 5 if quick else 15
    range_times = repeat(lambda: sampled_stable_range(loop, SAMPLE_PERIOD), repeats=repeats)
    result = sampled_stable_range(loop, SAMPLE_PERIOD)
    period_times = repeat(lambda: largest_stable_period(loop, nominal=1), repeats=max(3, repeats // 3))
    search = largest_stable_period(loop, nominal=1)
    took_range, took_period = median(range_times), median(period_times)
    return [
        Row("sampled", f"stable range at Ts = {float(SAMPLE_PERIOD):g} s, degree-6 plant, discrete PI, median of "
            f"{len(range_times)}", ms(took_range), f"<= {ms(RANGE_TARGET_S)}", took_range <= RANGE_TARGET_S,
            {"median_s": took_range, "times_s": range_times, "intervals": result.range.to_dict()["approx_intervals"],
             "certified": result.certified}),
        Row("sampled", f"largest stable sample period at K = 1, median of {len(period_times)}", ms(took_period),
            f"<= {ms(PERIOD_TARGET_S)}", took_period <= PERIOD_TARGET_S,
            {"median_s": took_period, "times_s": period_times, "search": search.to_dict()}),
    ]
