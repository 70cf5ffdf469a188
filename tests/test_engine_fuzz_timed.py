"""Fuzz test of the exact engine with a time limit per case: no hang, no internal error, and the
stable range right at rational points.

Every case runs in one child process that reads cases one by one, so a case that never returns is
caught (the child is killed and the case named) instead of stalling the suite. The limit is a hang
guard, far above the engine's speed targets (those live in the benchmark, never in tests).

Reference: the Hurwitz criterion as sympy determinants of the Hurwitz matrix's leading minors, in
exact rationals (Hurwitz 1895, from memory; tests/test_engine_property.hurwitz_reference), at
random rational points and at points a hair either side of every reported endpoint.
"""
from __future__ import annotations

import json
import random
import select
import subprocess
import sys
from fractions import Fraction

import pytest
import sympy

from tests.test_engine_property import hurwitz_reference

K, S = sympy.symbols("K s")
CASE_LIMIT_S = 60.0  # a hang guard: every case here takes well under a second
CASES = 40

CHILD = r"""
import json, sys
from fractions import Fraction
from flint import fmpq
from core.analysis.report import check_polynomial
from core.errors import LoopwrightError
for line in sys.stdin:
    case = json.loads(line)
    try:
        report = check_polynomial(case["text"], "K")
    except LoopwrightError as exc:
        print(json.dumps({"error": str(exc)}), flush=True)
        continue
    rng = report.stable_range
    narrow = [b.narrowed(fmpq(1, 10 ** 40)) for lo_hi in rng.intervals for b in lo_hi if b is not None]
    ends = sorted({b.rational if b.rational is not None else (b.lo + b.hi) / 2 for b in narrow})
    hair = [fmpq(1, 10 ** 30)]
    probes = [fmpq(Fraction(p).numerator, Fraction(p).denominator) for p in case["points"]]
    probes += [e + d for e in ends for d in (-hair[0], hair[0])]
    print(json.dumps({"points": [str(p) for p in probes],
                      "inside": [rng.contains(p) for p in probes]}), flush=True)
"""


def random_rational(rnd: random.Random) -> Fraction:
    kind = rnd.randrange(4)
    if kind == 0:
        return Fraction(rnd.randint(-20, 20), rnd.randint(1, 9))
    if kind == 1:
        return Fraction(rnd.randint(1, 9)) + Fraction(rnd.choice([1, -1]), 10 ** rnd.randint(15, 25))
    if kind == 2:
        return Fraction(rnd.randint(1, 9) * 10 ** rnd.randint(-6, 6))
    return Fraction(rnd.randint(0, 3))


def term(value: Fraction) -> str:
    return f"({value.numerator}/{value.denominator})"


def random_case(rnd: random.Random) -> str:
    """A loop-like polynomial in s and K: products of real and quadratic factors, some repeated
    or a hair apart, plus K times a low-degree polynomial, sometimes K inside a factor."""
    factors = []
    for _ in range(rnd.randint(1, 4)):
        a, b = random_rational(rnd), random_rational(rnd)
        factor = f"(s + {term(abs(a))})" if rnd.random() < 0.5 else f"(s^2 + {term(a)}*s + {term(abs(b))})"
        if rnd.random() < 0.25:
            factor = factor.replace("s +", f"s + {term(random_rational(rnd))}*K +", 1)
        factors.append(factor + (f"^{rnd.randint(2, 3)}" if rnd.random() < 0.2 else ""))
    gain = f"K*(s + {term(random_rational(rnd))})" if rnd.random() < 0.5 else "K"
    return "*".join(factors) + f" + {gain}"


def reference_stable(text: str, value: Fraction) -> bool:
    expr = sympy.sympify(text.replace("^", "**"), locals={"K": K, "s": S})
    full = sympy.Poly(sympy.expand(expr), S)
    at = sympy.Poly(sympy.expand(expr.subs(K, sympy.Rational(value.numerator, value.denominator))), S)
    return hurwitz_reference(at.all_coeffs(), full.degree())


def test_random_loops_finish_and_agree_with_hurwitz():
    rnd = random.Random(20261203)
    child = subprocess.Popen([sys.executable, "-c", CHILD], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                             text=True)
    assert child.stdin is not None and child.stdout is not None
    try:
        for _ in range(CASES):
            text = random_case(rnd)
            points = [str(random_rational(rnd) * rnd.choice([1, 10, 100])) for _ in range(3)]
            child.stdin.write(json.dumps({"text": text, "points": points}) + "\n")
            child.stdin.flush()
            ready, _, _ = select.select([child.stdout], [], [], CASE_LIMIT_S)
            if not ready:
                pytest.fail(f"no answer within {CASE_LIMIT_S:.0f} s for {text}")
            line = child.stdout.readline()
            assert line, f"the engine's child process died on {text}"
            answer = json.loads(line)
            if "error" in answer:
                assert answer["error"].startswith("E"), answer  # a catalogued error, never a crash
                continue
            for point, inside in zip(answer["points"], answer["inside"], strict=True):
                assert inside == reference_stable(text, Fraction(point)), (text, point)
    finally:
        child.kill()
        child.wait()
