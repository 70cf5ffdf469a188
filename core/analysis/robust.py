"""The robust range: tuning values stable for EVERY value of the toleranced parameters.

Method, chosen from how the toleranced parameters q_i (each in [lo_i, hi_i]) enter the
characteristic polynomial p(s; k, q):

* ``exact`` (one toleranced parameter, any polynomial dependence). Stability at (k, q) can only
  change on the zero set of B = a0 * an * Delta_{n-1} (constant term, leading coefficient,
  (n-1)th Hurwitz determinant as the resultant of the even and odd parts). So k is robustly stable
  iff p(s; k, lo) is Hurwitz and no irreducible factor f(k, q) of B has a root q in [lo, hi]. That
  property can only change at real roots of f(k, lo), f(k, hi) (a root enters through an end) and of
  Res_q(f, df/dq) (two roots meet: a turning point of the boundary), so those are the candidate
  ends; each interval between them is decided exactly at a rational point (Routh, and Sturm counts of
  the roots of f(k_t, q) in the tolerance). Ends are algebraic numbers as in the stable range.
* ``kharitonov`` (two or more parameters, each entering one coefficient additively with a constant
  factor): an interval polynomial, stable for every value iff its four Kharitonov polynomials are
  (Kharitonov 1978); each is a one-parameter problem in k for the exact stable range.
* ``edge-theorem`` (two or more parameters entering the coefficients affinely): the polynomials form
  a polytope, stable iff every edge is (edge theorem, Bartlett, Hollot and Huang 1988); each of the
  m 2^(m-1) edges is a one-toleranced-parameter problem for the exact method above.
* ``sampled`` (products or powers of toleranced parameters): the exact one-parameter method along
  lines of the tolerance box (the last parameter over its whole tolerance, the others at a grid plus
  random values), intersected; an estimate that can only be too large.

>>> from core.algebra.polynomial import mpoly_from_dict
>>> p = mpoly_from_dict(("K", "T"), {(3, 0, 1): 1, (2, 0, 0): 1, (1, 0, 0): 1, (0, 1, 0): 1})  # T s^3 + s^2 + s + K
>>> r = robust_range(p, "K", {"T": (fmpq(1, 2), fmpq(1))}, {})
>>> r.method, r.to_dict()["exact_intervals"], r.endpoints[-1].worst_case
('exact', [['0', '1']], {'T': 1.0})
"""
from __future__ import annotations

import functools
import itertools
import math
import random
from collections.abc import Mapping
from dataclasses import dataclass, field

from flint import arb, arb_poly, ctx, fmpq, fmpq_mpoly, fmpq_mpoly_ctx, fmpq_poly, fmpz_poly

from core.algebra.polynomial import ParametricPolynomial, to_float, to_fmpq
from core.analysis.routh import is_hurwitz
from core.analysis.stable_range import (
    Boundary,
    _boundaries,
    _interpolate_consecutive,
    _irreducible_factors,
    _key,
    _points_start,
    _sign_at,
    interval_fields,
    stable_range,
)
from core.analysis.stable_range import _simplest_between as simplest_between
from core.errors import AnalysisError

__all__ = ["RobustEndpoint", "RobustRange", "check_tolerances", "robust_range"]

METHODS = ("exact", "edge-theorem", "kharitonov", "sampled")
MAX_EDGES = 320          # above this many edges (m >= 7) the box is sampled instead
LINES = 32               # lines of the box (a grid plus random ones) for the sampled estimate
CERTIFY_PIECES = 4096    # subintervals tried to prove no root at an irrational turning value
KIND_OF = {"a0": "origin", "an": "infinity", "delta": "crossing"}


@dataclass(frozen=True)
class RobustEndpoint:
    """One end of the robust range and the toleranced values that reach it (the worst case).

    ``worst_case`` holds floats; ``worst_case_exact`` the values that are exact rationals (ends of a
    tolerance, vertices of the box); an empty ``worst_case`` means every toleranced value reaches
    the end alike (``every_value``). ``kind`` says what happens there, as for the stable range.
    """

    value: float
    exact: str
    approx: str
    kind: str
    worst_case: dict[str, float]
    worst_case_exact: dict[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"value": self.value, "exact": self.exact, "approx": self.approx, "kind": self.kind,
                "worst_case": self.worst_case, "worst_case_exact": self.worst_case_exact,
                "every_value": not self.worst_case}


@dataclass
class RobustRange:
    """Open intervals of the tuning parameter stable for every toleranced value, and how found."""

    parameter: str
    tolerances: dict[str, tuple[fmpq, fmpq]]
    method: str
    reason: str
    intervals: list[tuple[Boundary | None, Boundary | None]]
    endpoints: list[RobustEndpoint]
    samples: int | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def exact(self) -> bool:
        return self.method != "sampled"

    def contains(self, value) -> bool:
        """Exact membership of a rational value (a float is read as its shortest decimal)."""
        v = to_fmpq(value)
        return any((lo is None or lo.sign_minus(v) < 0) and (hi is None or hi.sign_minus(v) > 0)
                   for lo, hi in self.intervals)

    def to_dict(self) -> dict:
        name = self.parameter
        return {
            "method": self.method, "exact": self.exact, "reason": self.reason,
            "tolerances": {q: [str(lo), str(hi)] for q, (lo, hi) in self.tolerances.items()},
            **interval_fields(self.intervals, name),
            "endpoints": [e.to_dict() for e in self.endpoints],
            "never_stable": not self.intervals, "samples": self.samples, "notes": self.notes,
        }


@dataclass(frozen=True)
class _End:
    """A finite interval end with what reaches it."""

    boundary: Boundary
    kind: str
    worst: dict  # name -> fmpq (exact) or float


Interval = tuple[_End | None, _End | None]


# -- input checks ---------------------------------------------------------------------------------
def check_tolerances(tolerances: Mapping[str, tuple], parameter: str | None, names) -> dict[str, tuple[fmpq, fmpq]]:
    """Tolerances as exact (lo, hi) pairs: E421 for the tuning parameter, E422 for a name that is
    not a parameter, E420 for an empty, inverted or non-finite interval.

    >>> check_tolerances({"T": ("0.08", "0.12")}, "K", {"K", "T"})
    {'T': (2/25, 3/25)}
    """
    out = {}
    for name, pair in tolerances.items():
        where = f"tolerance {name}"
        if name == parameter:
            raise AnalysisError("E421", f"the tuning parameter '{name}' cannot carry a tolerance", where=where)
        if name not in names:
            raise AnalysisError("E422", f"'{name}' is not a parameter of the loop", where=where)
        try:
            if any(isinstance(v, float) and not math.isfinite(v) for v in pair):
                raise ValueError
            lo, hi = (to_fmpq(v) for v in pair)
        except (TypeError, ValueError, ZeroDivisionError):
            raise AnalysisError("E420", f"the tolerance of '{name}' must be two finite numbers", where=where) from None
        if not lo < hi:
            raise AnalysisError("E420", f"the tolerance of '{name}' is empty or inverted ({lo} .. {hi}): "
                                "give LO < HI", where=where)
        out[name] = (lo, hi)
    return out


# -- the entry point ------------------------------------------------------------------------------
def robust_range(poly: fmpq_mpoly, parameter: str, tolerances: Mapping[str, tuple[fmpq, fmpq]],
                 values: Mapping[str, fmpq], method: str | None = None) -> RobustRange:
    """The robust range of ``parameter`` for ``poly`` (in s and parameters) with the toleranced
    parameters in their intervals and every other one at ``values`` (see the module notes).

    ``method`` (optional) asks for "edge-theorem" or "sampled" where the choice would be another
    one that also applies (for cross-checks); otherwise the best method that applies is taken.
    """
    names = poly.context().names()[1:]
    tol = {q: tolerances[q] for q in sorted(tolerances) if q in names}
    notes = [f"{q} does not enter the loop: its tolerance changes nothing" for q in sorted(tolerances) if q not in tol]
    notes += [f"the nominal value of {q} ({values[q]}) lies outside its tolerance [{lo}, {hi}]"
              for q, (lo, hi) in tol.items() if q in values and not lo <= values[q] <= hi]
    fixed = {n: values[n] for n in names if n != parameter and n not in tol}
    local = _localised(poly, parameter, list(tol), fixed)
    degree = local.degrees()[0]
    if not tol:
        ranges = _one_problem(local, degree, None, {})
        return _result(parameter, tol, "exact", "no toleranced parameter enters the loop: the nominal "
                       "stable range", ranges, notes=notes)
    affine = _affine(local)
    if method == "sampled" or (not affine and len(tol) > 1):
        why = "asked for" if method == "sampled" else "the toleranced parameters enter through products or powers"
        return _sampled_result(parameter, local, degree, tol, why, notes)
    if len(tol) == 1 and method is None:
        q = next(iter(tol))
        touching: list[Boundary] = []
        ranges = _one_problem(local, degree, (q, *tol[q]), {}, touching)
        return _result(parameter, tol, "exact", "one toleranced parameter: every value in its tolerance "
                       "checked exactly through the boundary polynomials", ranges,
                       notes=notes + _touching_notes(touching, parameter))
    weights = _kharitonov_weights(local, len(tol)) if method is None else None
    if weights is not None:
        return _result(parameter, tol, "kharitonov", "each toleranced parameter enters one coefficient "
                       "additively: an interval polynomial, stable for every value iff its four "
                       "Kharitonov polynomials are", _kharitonov(local, degree, tol, weights), notes=notes)
    edges = len(tol) * 2 ** (len(tol) - 1)
    if edges > MAX_EDGES:
        return _sampled_result(parameter, local, degree, tol, f"{edges} edges are too many to check one by one", notes)
    touching = []
    ranges = _edges(local, degree, tol, touching)
    return _result(parameter, tol, "edge-theorem", f"the toleranced parameters enter the coefficients "
                   f"affinely: a polytope of polynomials, stable iff each of its {edges} edges is, "
                   "each decided exactly", ranges, notes=notes + _touching_notes(touching, parameter))


def _touching_notes(touching: list[Boundary], parameter: str) -> list[str]:
    return [f"{parameter} = {b.text(parameter)} is left out: a boundary may touch the tolerance there "
            "(not proven either way; leaving it out can only make the range smaller)" for b in touching]


def _sampled_result(parameter, local, degree, tol, why: str, notes) -> RobustRange:
    ranges, count = _sampled(local, degree, tol)
    return _result(parameter, tol, "sampled", f"{why}: estimated on {count} sampled lines of the tolerance "
                   f"box ({list(tol)[-1]} over its whole tolerance, exactly; the others at a grid and random "
                   "values); the true robust range may be smaller", ranges, count, notes)


def _result(parameter, tol, method, reason, ranges: list[Interval], samples=None, notes=()) -> RobustRange:
    name = parameter or "k"
    ends: list[_End] = []
    for lo, hi in ranges:
        ends += [e for e in (lo, hi) if e is not None and (not ends or _compare(ends[-1].boundary, e.boundary) != 0)]
    endpoints = [RobustEndpoint(e.boundary.value, e.boundary.text(name), e.boundary.approx, e.kind,
                                {q: to_float(v) if isinstance(v, fmpq) else v for q, v in e.worst.items()},
                                {q: str(v) for q, v in e.worst.items() if isinstance(v, fmpq)}) for e in ends]
    return RobustRange(parameter, dict(tol), method, reason,
                       [(None if lo is None else lo.boundary, None if hi is None else hi.boundary) for lo, hi in ranges],
                       endpoints, samples, list(notes))


# -- polynomials in (s, k, q...) -----------------------------------------------------------------
def _localised(poly: fmpq_mpoly, parameter: str, toleranced: list[str], fixed: Mapping[str, fmpq]) -> fmpq_mpoly:
    """``poly`` at the fixed values, in the context (s, k, q1, ..., qm)."""
    names = poly.context().names()
    if fixed:
        poly = poly.subs({str(n): v for n, v in fixed.items()})
    order = ["s", parameter, *toleranced]
    where = [names.index(n) if n in names else None for n in order]
    ctx2 = fmpq_mpoly_ctx.get(tuple(order[:1] + ["k"] + [f"q{i}" for i in range(len(toleranced))]), "lex")
    terms: dict[tuple[int, ...], fmpq] = {}
    for exps, c in poly.to_dict().items():
        key = tuple(0 if i is None else exps[i] for i in where)
        terms[key] = terms.get(key, fmpq(0)) + c
    return ctx2.from_dict(terms)


def _coefficients(p: fmpq_mpoly, degree: int) -> list[fmpq_mpoly]:
    """The coefficients of s^degree, ..., s^0 as polynomials in the other generators (same context)."""
    by_power: dict[int, dict] = {}
    for exps, c in p.to_dict().items():
        key = (0, *exps[1:])
        by_power.setdefault(exps[0], {})[key] = c
    ctx2 = p.context()
    return [ctx2.from_dict(by_power.get(i, {})) for i in range(degree, -1, -1)]


def _affine(p: fmpq_mpoly) -> bool:
    return all(sum(exps[2:]) <= 1 for exps in p.to_dict())


def _delta(coeffs: list[fmpq_mpoly]) -> fmpq_mpoly:
    """Res_u(E, O) for p = E(s^2) + s O(s^2): ±Delta_{n-1}, a polynomial in k and q (generator s
    plays u)."""
    n = len(coeffs) - 1
    ctx2 = coeffs[0].context()
    if n < 2:
        return ctx2.from_dict({(0,) * ctx2.nvars(): 1})
    s = ctx2.gens()[0]
    even = sum((coeffs[n - 2 * i] * s ** i for i in range(n // 2 + 1)), ctx2.from_dict({}))
    odd = sum((coeffs[n - 1 - 2 * i] * s ** i for i in range((n - 1) // 2 + 1)), ctx2.from_dict({}))
    if even.is_zero() or odd.is_zero():
        return ctx2.from_dict({})
    if odd.degrees()[0] == 0:
        return odd ** even.degrees()[0]
    return even.resultant(odd, "s")


def _in_k(p: fmpq_mpoly) -> fmpq_poly:
    """A polynomial of the context (s, k, q) that involves k only, as an fmpq_poly in k."""
    terms = {exps[1]: c for exps, c in p.to_dict().items()}
    return fmpq_poly([terms.get(j, 0) for j in range(max(terms, default=-1) + 1)])


def _in_q(p: fmpq_mpoly, k: fmpq) -> fmpq_poly:
    """p(k, q) at a rational k as an fmpq_poly in q (context (s, k, q))."""
    terms: dict[int, fmpq] = {}
    for exps, c in p.to_dict().items():
        terms[exps[2]] = terms.get(exps[2], fmpq(0)) + c * k ** exps[1]
    return fmpq_poly([terms.get(j, 0) for j in range(max(terms, default=-1) + 1)])


def _at_q(p: fmpq_mpoly, q: fmpq) -> fmpq_mpoly:
    return p.subs({p.context().names()[2]: q})


# -- one toleranced parameter: the exact method --------------------------------------------------
def _one_problem(p: fmpq_mpoly, degree: int, tol: tuple | None, worst_fixed: dict,
                 touching: list[Boundary] | None = None) -> list[Interval]:
    """Robust intervals of k for p in the context (s, k[, q]) with q in [lo, hi] (``tol`` = (name,
    lo, hi); None: no q). ``degree`` is the degree every member must keep. Isolated irrational
    values left out only because no proof was found that they are robust go into ``touching``."""
    if p.is_zero() or p.degrees()[0] != degree:
        return []
    if tol is None:
        pp = ParametricPolynomial(tuple(_in_k(c) for c in _coefficients(p, degree)), "k")
        rng = stable_range(pp)
        kinds = {e.exact: e.kind for e in rng.endpoints}

        def as_end(b: Boundary | None) -> _End | None:
            return None if b is None else _End(b, kinds.get(b.text("k"), "crossing"), dict(worst_fixed))
        return [(as_end(lo), as_end(hi)) for lo, hi in rng.intervals]
    name, lo, hi = tol
    coeffs = _coefficients(p, degree)
    sources = {"a0": coeffs[-1], "an": coeffs[0], "delta": _delta(coeffs)}
    if any(src.is_zero() for src in sources.values()):
        return []
    factors: dict[tuple, tuple[fmpq_mpoly, str]] = {}
    for kind, src in sources.items():
        for f, _ in src.factor()[1]:
            if f.total_degree() > 0:
                factors.setdefault(tuple(sorted(f.to_dict().items())), (f, kind))
    owners: dict[tuple, set] = {}
    cand: list = []

    def add(poly_k: fmpq_poly, role: tuple) -> bool:
        if poly_k.is_zero():
            return False
        for g in _irreducible_factors(poly_k):
            if _key(g) not in owners:
                cand.append(g)
            owners.setdefault(_key(g), set()).add(role)
        return True

    bivariate: list[tuple[fmpq_mpoly, str]] = []
    for f, kind in factors.values():
        if f.degrees()[2] == 0:
            add(_in_k(f), ("always", kind, None))
            continue
        bivariate.append((f, kind))
        for end in (lo, hi):
            if not add(_in_k(_at_q(f, end)), ("end", kind, end)):
                return []  # q = end is a boundary root for every k
        add(turning_resultant(f), ("turn", kind, len(bivariate) - 1))
    bounds = _boundaries(cand)
    points = _test_points(bounds)
    at_lo = [_in_k(_at_q(c, lo)) for c in coeffs]
    flags = [_robust_at(at_lo, degree, bivariate, x, lo, hi) for x in points]
    keep = [_turn_kept(bounds[i], owners[_key(bounds[i].factor)], bivariate, lo, hi)
            if flags[i] and flags[i + 1] else False for i in range(len(bounds))]
    if touching is not None:
        touching += [b for i, b in enumerate(bounds) if flags[i] and flags[i + 1] and not keep[i]
                     and b.rational is None and all(r[0] == "turn" for r in owners[_key(b.factor)])]
    out: list[Interval] = []
    start: _End | None = None
    open_ = False
    for i, ok in enumerate(flags):
        if ok and not open_:
            start = None if i == 0 else _end_of(bounds[i - 1], owners, bivariate, name, lo, hi, worst_fixed)
            open_ = True
        if open_ and (i == len(bounds) or not (ok and keep[i])):
            if ok:
                hi_end = None if i == len(bounds) else _end_of(bounds[i], owners, bivariate, name, lo, hi, worst_fixed)
                out.append((start, hi_end))
            open_ = False
    return out


def turning_resultant(f: fmpq_mpoly) -> fmpq_poly:
    """Res_q(f, df/dq) as a polynomial in k (context (s, k, q), no s): zero where two roots q meet.

    By evaluation and interpolation, as for ``hurwitz_delta``: its degree in k is at most
    (2 deg_q f - 1) deg_k f, and at integers where the leading coefficient in q does not vanish
    the resultant of the values (flint, exact integers) is the value of the resultant.

    >>> ctx3 = fmpq_mpoly_ctx.get(("s", "k", "q"), "lex")
    >>> _, k, q = ctx3.gens()
    >>> turning_resultant(q ** 2 - k)  # the discriminant of q^2 - k, up to a constant factor: -4k
    (-4)*x
    """
    terms = f.to_dict()
    den = 1
    for c in terms.values():
        den = den * int(c.q) // math.gcd(den, int(c.q))
    dq = max(e[2] for e in terms)
    by_q = [[0] * (max(e[1] for e in terms) + 1) for _ in range(dq + 1)]
    for e, c in terms.items():
        by_q[e[2]][e[1]] += int(c * den)
    coeffs = [fmpz_poly(row) for row in by_q]
    derived = [coeffs[j + 1] * (j + 1) for j in range(dq)]
    bound = (2 * dq - 1) * max(c.degree() for c in coeffs)
    start = _points_start(coeffs[-1], bound + 1)
    values = [fmpz_poly([c(x) for c in coeffs]).resultant(fmpz_poly([c(x) for c in derived]))
              for x in range(start, start + bound + 1)]
    return _interpolate_consecutive(values, start)


def _test_points(bounds: list[Boundary]) -> list[fmpq]:
    if not bounds:
        return [fmpq(0)]
    pts = [simplest_between(None, bounds[0].lo)]
    pts += [simplest_between(a.hi, b.lo) for a, b in itertools.pairwise(bounds)]
    return [*pts, simplest_between(bounds[-1].hi, None)]


def _robust_at(at_lo: list[fmpq_poly], degree, bivariate, k: fmpq, lo: fmpq, hi: fmpq) -> bool:
    """Exact: stable at (k, lo) (``at_lo``: the coefficients at q = lo, in k) and no boundary factor
    has a root q in [lo, hi] at k."""
    if not is_hurwitz([c(k) for c in at_lo], degree):
        return False
    return not any(_has_root_in(_in_q(f, k), lo, hi) for f, _ in bivariate)


def _has_root_in(g: fmpq_poly, lo: fmpq, hi: fmpq) -> bool:
    """Whether g has a real root in [lo, hi] (exact: Sturm sequence; the zero polynomial has)."""
    if g.is_zero():
        return True
    if g.degree() < 1:
        return False
    if g(lo) == 0 or g(hi) == 0:
        return True
    seq = [g, g.derivative()]
    while not seq[-1].is_zero() and seq[-1].degree() > 0:
        seq.append(-(seq[-2] % seq[-1]))
    seq = [h for h in seq if not h.is_zero()]
    return _changes(seq, lo) != _changes(seq, hi)


def _changes(seq: list[fmpq_poly], x: fmpq) -> int:
    signs = [s for s in (_sign(h(x)) for h in seq) if s]
    return sum(1 for a, b in itertools.pairwise(signs) if a != b)


def _sign(x: fmpq) -> int:
    return (x > 0) - (x < 0)


def _turn_kept(b: Boundary, roles: set, bivariate, lo: fmpq, hi: fmpq) -> bool:
    """Whether a candidate between two robust intervals is robust itself (then they join). Only a
    turning value can be; it is, iff no boundary factor has a root q in [lo, hi] there: exact at a
    rational value, proven by ball arithmetic at an irrational one (when no proof is found the value
    is left out, which can only make the range smaller)."""
    if any(role[0] != "turn" for role in roles):
        return False
    if b.rational is not None:
        return not any(_has_root_in(_in_q(f, b.rational), lo, hi) for f, _ in bivariate)
    near = b.narrowed(fmpq(1, 2 ** 100))
    return all(_no_root_proven(f, near, lo, hi) for f, _ in bivariate)


def _no_root_proven(f: fmpq_mpoly, b: Boundary, lo: fmpq, hi: fmpq) -> bool:
    with ctx.workprec(256):
        kb = b.ball
        terms: dict[int, arb] = {}
        for exps, c in f.to_dict().items():
            terms[exps[2]] = terms.get(exps[2], arb(0)) + arb(c) * kb ** exps[1]
        g = arb_poly([terms.get(j, arb(0)) for j in range(max(terms) + 1)])
        pieces = [(lo, hi)]
        tried = 0
        while pieces:
            a, c = pieces.pop()
            tried += 1
            if tried > CERTIFY_PIECES:
                return False
            value = g(arb((a + c) / 2, (c - a) / 2))
            if value.contains(0):
                m = (a + c) / 2
                pieces += [(a, m), (m, c)]
        return True


def _end_of(b: Boundary, owners, bivariate, name: str, lo: fmpq, hi: fmpq, worst_fixed: dict) -> _End:
    """The end at candidate ``b``: its kind and the worst-case value of the toleranced parameter."""
    roles = owners[_key(b.factor)]
    worst = dict(worst_fixed)
    order = ("a0", "delta", "an")
    for tag in ("always", "end", "turn"):
        mine = sorted((r for r in roles if r[0] == tag), key=lambda r: order.index(r[1]))
        if not mine:
            continue
        role = mine[0]
        if tag == "end":
            worst[name] = role[2]
        elif tag == "turn":
            worst[name] = _turning_value(bivariate[role[2]][0], b, lo, hi)
        return _End(b, KIND_OF[role[1]], worst)
    return _End(b, "crossing", worst)


def _turning_value(f: fmpq_mpoly, b: Boundary, lo: fmpq, hi: fmpq) -> float:
    """The q in [lo, hi] where f(b, q) has its double root (floating point, for showing)."""
    near = b.narrowed(fmpq(1, 2 ** 60))
    g = _in_q(f, (near.lo + near.hi) / 2)
    best = None
    pairs: list = g.complex_roots()  # (ball, multiplicity) pairs
    for root, _ in pairs:
        re, im = float(root.real.mid()), abs(float(root.imag.mid()))
        if float(lo) - 1e-9 <= re <= float(hi) + 1e-9 and (best is None or im < best[0]):
            best = (im, re)
    return best[1] if best else float((lo + hi) / 2)


# -- sets of intervals ----------------------------------------------------------------------------
def _compare(a: Boundary, b: Boundary) -> int:
    """Exact sign of a - b."""
    if a.rational is not None:
        return -b.sign_minus(a.rational)
    if b.rational is not None:
        return a.sign_minus(b.rational)
    while True:
        if a.hi <= b.lo:
            return -1
        if b.hi <= a.lo:
            return 1
        if a.factor == b.factor:
            lo, hi = max(a.lo, b.lo), min(a.hi, b.hi)
            if _sign_at(a.factor, lo) != _sign_at(a.factor, hi):
                return 0
        if a.hi - a.lo >= b.hi - b.lo:
            a = a.bisected()
        else:
            b = b.bisected()


def _intersect(xs: list[Interval], ys: list[Interval]) -> list[Interval]:
    """The intersection of two unions of disjoint open intervals."""
    out = []
    for a_lo, a_hi in xs:
        for b_lo, b_hi in ys:
            lo = a_lo if b_lo is None else b_lo if a_lo is None else (
                a_lo if _compare(a_lo.boundary, b_lo.boundary) >= 0 else b_lo)
            hi = a_hi if b_hi is None else b_hi if a_hi is None else (
                a_hi if _compare(a_hi.boundary, b_hi.boundary) <= 0 else b_hi)
            if lo is None or hi is None or _compare(lo.boundary, hi.boundary) < 0:
                out.append((lo, hi))

    def order(x: Interval, y: Interval) -> int:
        if x[0] is None or y[0] is None:
            return (y[0] is None) - (x[0] is None)
        return _compare(x[0].boundary, y[0].boundary)
    return sorted(out, key=functools.cmp_to_key(order))


def _intersect_all(parts: list[list[Interval]]) -> list[Interval]:
    out: list[Interval] = [(None, None)]
    for part in parts:
        out = _intersect(out, part)
        if not out:
            break
    return out


# -- several toleranced parameters ---------------------------------------------------------------
def _kharitonov_weights(p: fmpq_mpoly, m: int) -> dict[int, tuple[int, fmpq]] | None:
    """{parameter index: (power of s, constant factor)} when each toleranced parameter enters one
    coefficient only, as (constant) * q; else None."""
    weights: dict[int, tuple[int, fmpq]] = {}
    for exps, c in p.to_dict().items():
        qs = [i for i in range(m) if exps[2 + i]]
        if not qs:
            continue
        i = qs[0]
        if exps[1] != 0 or (i in weights and weights[i][0] != exps[0]):
            return None
        weights[i] = (exps[0], c)
    return weights


KHARITONOV_PATTERNS = ("lluu", "uull", "luul", "ullu")  # by power of s mod 4: lower / upper bound


def _kharitonov(p: fmpq_mpoly, degree: int, tol: dict, weights: dict) -> list[Interval]:
    names = list(tol)
    base = p.subs({f"q{i}": 0 for i in range(len(names))})
    parts = []
    for pattern in KHARITONOV_PATTERNS:
        pick = {}
        for i, (power, w) in weights.items():
            low, high = tol[names[i]]
            want_upper = pattern[power % 4] == "u"
            pick[names[i]] = high if (w > 0) == want_upper else low
        vertex = base + sum((w * pick[names[i]] * p.context().gens()[0] ** power
                             for i, (power, w) in weights.items()), p.context().from_dict({}))
        parts.append(_one_problem(_drop_qs(vertex), degree, None, pick))
    return _intersect_all(parts)


def _drop_qs(p: fmpq_mpoly) -> fmpq_mpoly:
    """A polynomial without toleranced parameters in the context (s, k)."""
    ctx2 = fmpq_mpoly_ctx.get(("s", "k"), "lex")
    return ctx2.from_dict({exps[:2]: c for exps, c in p.to_dict().items()})


def _edges(p: fmpq_mpoly, degree: int, tol: dict, touching: list[Boundary] | None = None) -> list[Interval]:
    names = list(tol)
    ctx3 = fmpq_mpoly_ctx.get(("s", "k", "q"), "lex")
    parts = []
    for free in range(len(names)):
        others = [i for i in range(len(names)) if i != free]
        for corner in itertools.product((0, 1), repeat=len(others)):
            fixed = {names[i]: tol[names[i]][c] for i, c in zip(others, corner)}
            at = p.subs({f"q{i}": fixed[names[i]] for i in others})
            edge = ctx3.from_dict({(e[0], e[1], e[2 + free]): c for e, c in at.to_dict().items()})
            parts.append(_one_problem(edge, degree, (names[free], *tol[names[free]]), fixed, touching))
            if not parts[-1]:
                return []
    return _intersect_all(parts)


def _sampled(p: fmpq_mpoly, degree: int, tol: dict) -> tuple[list[Interval], int]:
    """The exact robust range along lines of the box: the last toleranced parameter over its whole
    tolerance (the exact one-parameter method), the others at a grid plus random values."""
    names = list(tol)
    rest, last = names[:-1], len(names) - 1
    per_axis = max(2, min(5, round((LINES / 2) ** (1 / max(len(rest), 1)))))
    grid = [[tol[n][0] + (tol[n][1] - tol[n][0]) * fmpq(j, per_axis - 1) for j in range(per_axis)] for n in rest]
    points = list(itertools.islice(itertools.product(*grid), LINES // 2))
    rng = random.Random(20261203)
    points += [tuple(tol[n][0] + (tol[n][1] - tol[n][0]) * fmpq(rng.randint(1, 1023), 1024) for n in rest)
               for _ in range(LINES - len(points) if rest else 0)]
    ctx3 = fmpq_mpoly_ctx.get(("s", "k", "q"), "lex")
    parts = []
    for point in points:
        at = p.subs({f"q{i}": v for i, v in enumerate(point)}) if point else p
        line = ctx3.from_dict({(e[0], e[1], e[2 + last]): c for e, c in at.to_dict().items()})
        parts.append(_one_problem(line, degree, (names[last], *tol[names[last]]), dict(zip(rest, point))))
        if not parts[-1]:
            break
    return _intersect_all(parts), len(points)
