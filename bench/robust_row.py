"""Row "robust": the robust range against toleranced parameters (core.analysis.robust).

Two timed calls, targets from the issue: one toleranced time constant T in a degree-10 loop
(exact one-parameter method, target <= 200 ms) and five affinely entering toleranced parameters in
a degree-8 loop (edge theorem, 80 edges, target <= 1 s). Invented inputs (timing only).
"""
from __future__ import annotations

from flint import fmpq, fmpq_mpoly

from bench.generators import unity_feedback_loop
from bench.table import Row, ms
from bench.timing import median, repeat
from core.algebra.polynomial import mpoly_context
from core.analysis.robust import robust_range

ONE_TARGET_S, FIVE_TARGET_S = 0.200, 1.0


def one_toleranced(degree: int = 10) -> tuple[fmpq_mpoly, dict]:
    """D(s) (T s + 1) + K N(s) with D of degree ``degree`` - 1 and T in [0.08, 0.12].

    >>> poly, tol = one_toleranced(10)
    >>> poly.degrees()[0], sorted(tol)
    (10, ['T'])
    """
    ctx = mpoly_context(["K", "T"])
    s, k, t = ctx.gens()
    base = unity_feedback_loop(degree - 1)
    den = base.subs({"K": 0})
    num = (base - den).subs({"K": 1})
    return _lifted(ctx, den) * (t * s + 1) + k * _lifted(ctx, num), {"T": (fmpq(2, 25), fmpq(3, 25))}


def _lifted(ctx, p: fmpq_mpoly) -> fmpq_mpoly:
    """A polynomial in (s, K) moved into a context (s, K, more...)."""
    extra = (0,) * (len(ctx.names()) - 2)
    return ctx.from_dict({(e[0], e[1], *extra): c for e, c in p.to_dict().items()})


NAMES = ("qa", "qb", "qc", "qd", "qe")


def five_affine(degree: int = 8) -> tuple[fmpq_mpoly, dict]:
    """The degree-8 unity loop plus five toleranced terms entering affinely (one in two
    coefficients, one times K, so neither Kharitonov nor one coefficient each).

    >>> poly, tol = five_affine()
    >>> poly.degrees()[0], len(tol)
    (8, 5)
    """
    ctx = mpoly_context(["K", *NAMES])
    s, k, a, b, c, d, e = ctx.gens()
    poly = _lifted(ctx, unity_feedback_loop(degree)) + a * s ** 7 + b * s ** 5 + c * k + d * s ** 3 + e * (s ** 2 + s)
    return poly, {n: (fmpq(-1, 10), fmpq(1, 10)) for n in NAMES}


def run(quick: bool) -> list[Row]:
    rows = []
    for label, (poly, tol), target in (("one toleranced parameter, degree 10", one_toleranced(), ONE_TARGET_S),
                                       ("five affine toleranced parameters (80 edges), degree 8", five_affine(),
                                        FIVE_TARGET_S)):
        result = robust_range(poly, "K", tol, {})
        times = repeat(lambda poly=poly, tol=tol: robust_range(poly, "K", tol, {}), repeats=3 if quick else 9)
        t = median(times)
        rows.append(Row("robust", f"robust range, {label} ({result.method}), median of {len(times)}", ms(t),
                        f"<= {ms(target)}", t <= target, {"median_s": t, "times_s": times, "method": result.method}))
    return rows
