"""Row 1: the whole report of one loop with one tuning parameter, against the straightforward way.

The timed call is :func:`core.analysis.report.analyse_polynomial` on :func:`bench.generators.unity_feedback_loop`
with the nominal K = 1: Routh array symbolic in K, exact stable range with endpoint kinds and
margins, exact root counts and certified poles at the nominal value. The yardstick
(:mod:`bench.baseline`) only finds the stable set, so the ratio favours the yardstick.
"""
from __future__ import annotations

from flint import fmpq

from bench.baseline import timed_baseline
from bench.generators import unity_feedback_loop
from bench.table import Row, ms
from bench.timing import median, repeat, run_in_child
from core.analysis.report import analyse_polynomial

DEGREES = (8, 10, 20, 40)
TARGETS_S = {20: 0.050, 40: 1.0}
BASELINE_DEGREES = (8, 10)
SPEEDUP_TARGET = 100.0  # at degree 8


def whole_report(degree: int):
    """The timed call at one degree (core keeps no cache between calls)."""
    poly = unity_feedback_loop(degree)
    return lambda: analyse_polynomial(poly, "K", {"K": fmpq(1)})


def run(quick: bool) -> list[Row]:
    rows = []
    ours = {}
    for degree in DEGREES:
        times = repeat(whole_report(degree), repeats=5 if quick else 15)
        ours[degree] = median(times)
        target = TARGETS_S.get(degree)
        rows.append(Row("1", f"whole report, degree {degree}, median of {len(times)}", ms(ours[degree]),
                        f"<= {ms(target)}" if target else "", None if target is None else ours[degree] <= target,
                        {"degree": degree, "median_s": ours[degree], "times_s": times}))
    cap = 30.0 if quick else 120.0
    for degree in BASELINE_DEGREES:
        repeats = (2 if degree == 8 else 1) if quick else (5 if degree == 8 else 3)
        times = run_in_child(timed_baseline, (degree, repeats, cap), timeout_s=repeats * cap + 120) or [None]
        done = [t for t in times if t is not None]
        capped = None in times
        base = median(done) if done and not capped else None
        speedup = base / ours[degree] if base is not None else None
        result = (f"{base:.3g} s -> {speedup:,.0f}x faster" if base is not None
                  else f"> {cap:.0f} s -> > {cap / ours[degree]:,.0f}x faster")
        target = f">= {SPEEDUP_TARGET:.0f}x faster" if degree == 8 else ""
        bound = speedup if speedup is not None else cap / ours[degree]  # capped: a lower bound
        met = bound >= SPEEDUP_TARGET if degree == 8 else None
        rows.append(Row("1", f"baseline (sympy Routh + reduce_inequalities), degree {degree}, "
                        f"median of {len(done)}", result, target, met,
                        {"degree": degree, "baseline_median_s": base, "baseline_times_s": times,
                         "capped_at_s": cap if capped else None, "speedup": speedup}))
    return rows
