"""Sparse Gaussian elimination over rational functions in s and parameters, exactly.

Entries are fractions ``(numerator, denominator)`` of fmpq_mpoly values in lowest terms with a
monic denominator (leading coefficient 1 in lex order, s first). The square system has rows and
columns named by the same keys (the signal-flow graph's nodes) and an optional right-hand side.

Pivot choice: least Markowitz cost (row count - 1) * (column count - 1), then the fewest polynomial
terms touched, diagonal pivots first, one named column kept for last. Preferring small entries
makes a long chain merge pairwise, like a balanced product tree, instead of dragging one ever
larger fraction along it. Costs are cached and recomputed only for rows and columns a step changed.

>>> from core.algebra.polynomial import mpoly_context
>>> ctx = mpoly_context([]); s, = ctx.gens(); one = ctx.constant(1)
>>> rows = {"x": {"x": (one, one), "y": (-one, s)}, "y": {"y": (one, one), "x": (one, one)}}
>>> result = eliminate(rows, {"x": (one, one)}, keep_last="y")
>>> [str(n) + " / " + str(d) for n, d in result.pivots], result.sign, result.last_value
(['1 / 1', 's + 1 / s'], 1, (-s, s + 1))
"""
from __future__ import annotations

from dataclasses import dataclass

from flint import fmpq_mpoly

Frac = tuple[fmpq_mpoly, fmpq_mpoly]


class SingularSystem(Exception):
    """No nonzero pivot is left: the determinant is identically zero. ``stuck`` names the rows and
    columns still left."""

    def __init__(self, stuck: list[str]):
        super().__init__(", ".join(stuck))
        self.stuck = stuck


def frac(n: fmpq_mpoly, d: fmpq_mpoly) -> Frac:
    """n/d in lowest terms with a monic denominator."""
    if n.is_zero():
        return n, n.context().constant(1)
    if not d.is_constant():
        g = n.gcd(d)
        if not g.is_one():
            n, d = n / g, d / g
    lc = d.leading_coefficient()
    if lc != 1:
        n, d = n * (1 / lc), d * (1 / lc)
    return n, d


def mul(a: Frac, b: Frac) -> Frac:
    """a * b for fractions in lowest terms (cross cancellation keeps them so)."""
    (an, ad), (bn, bd) = a, b
    if an.is_zero() or bn.is_zero():
        return an if an.is_zero() else bn, ad.context().constant(1)
    if not (an.is_constant() or bd.is_constant()):
        g = an.gcd(bd)
        if not g.is_one():
            an, bd = an / g, bd / g
    if not (bn.is_constant() or ad.is_constant()):
        h = bn.gcd(ad)
        if not h.is_one():
            bn, ad = bn / h, ad / h
    return an * bn, ad * bd


def div(a: Frac, b: Frac) -> Frac:
    """a / b (b nonzero)."""
    bn, bd = b
    lc = bn.leading_coefficient()
    return mul(a, (bd * (1 / lc), bn * (1 / lc)))


def sub(a: Frac, b: Frac) -> Frac:
    """a - b."""
    (an, ad), (bn, bd) = a, b
    if bn.is_zero():
        return a
    if an.is_zero():
        return -bn, bd
    if ad == bd:
        return frac(an - bn, ad)
    g = ad.gcd(bd)
    return frac(an * (bd / g) - bn * (ad / g), (ad / g) * bd)


def product(factors: list[fmpq_mpoly], one: fmpq_mpoly) -> fmpq_mpoly:
    """Product in a balanced tree (cheaper than one long running product)."""
    factors = list(factors) or [one]
    while len(factors) > 1:
        factors = [factors[i] * factors[i + 1] if i + 1 < len(factors) else factors[i]
                   for i in range(0, len(factors), 2)]
    return factors[0]


def fraction_product(factors: list[Frac], one: Frac) -> Frac:
    """Product of fractions in lowest terms, in a balanced tree."""
    factors = list(factors) or [one]
    while len(factors) > 1:
        factors = [mul(factors[i], factors[i + 1]) if i + 1 < len(factors) else factors[i]
                   for i in range(0, len(factors), 2)]
    return factors[0]


@dataclass
class Elimination:
    """The determinant is ``sign`` times the product of ``pivots``; ``last_value`` is the kept
    column's unknown (None without a right-hand side or kept column)."""

    pivots: list[Frac]
    sign: int
    last_value: Frac | None


def eliminate(rows: dict[str, dict[str, Frac]], rhs: dict[str, Frac] | None = None,
              keep_last: str | None = None) -> Elimination:
    """Eliminate the whole square system ``rows[row][column]`` (zero entries absent).

    Raises :class:`SingularSystem` when the determinant is identically zero. ``rows`` and ``rhs``
    are consumed.
    """
    return _Eliminator(rows, rhs or {}, keep_last).run()


class _Eliminator:
    def __init__(self, rows, rhs, keep_last):
        self.rows, self.rhs, self.keep_last = rows, rhs, keep_last
        self.cols: dict[str, set[str]] = {v: set() for v in rows}
        for r, row in rows.items():
            for c in row:
                self.cols[c].add(r)
        self.rank = {v: i for i, v in enumerate(rows)}
        self.keys: dict[str, tuple] = {}

    def run(self) -> Elimination:
        pairs, pivots, last = [], [], None
        while self.rows:
            r, c = self._choose()
            p, prhs = self._pivot(r, c)
            pairs.append((r, c))
            pivots.append(p)
            if c == self.keep_last:
                ctx = p[0].context()
                last = div(prhs, p) if prhs is not None else (ctx.constant(0), ctx.constant(1))
        return Elimination(pivots, _permutation_sign(pairs), last)

    def _key(self, r: str, c: str) -> tuple:
        rows, cols = self.rows, self.cols
        entries = list(rows[r].values()) + [rows[i][c] for i in cols[c] if i != r]
        if r in self.rhs:
            entries.append(self.rhs[r])
        bulk = sum(len(n) + len(d) for n, d in entries)
        return (len(rows[r]) - 1) * (len(cols[c]) - 1), bulk, self.rank[r], self.rank[c]

    def _choose(self) -> tuple[str, str]:
        best, best_key = None, None
        for v, row in self.rows.items():
            if v != self.keep_last and v in row:
                if v not in self.keys:
                    self.keys[v] = self._key(v, v)
                if best_key is None or self.keys[v] < best_key:
                    best, best_key = (v, v), self.keys[v]
        if best is not None:
            return best
        for r, row in self.rows.items():  # no diagonal pivot left: any nonzero entry
            for c in row:
                if c != self.keep_last or len(self.cols) == 1:
                    key = self._key(r, c)
                    if best_key is None or key < best_key:
                        best, best_key = (r, c), key
        if best is None:
            raise SingularSystem(list(self.rows) + [c for c in self.cols if c not in self.rows])
        return best

    def _pivot(self, r: str, c: str) -> tuple[Frac, Frac | None]:
        rows, cols, rhs = self.rows, self.cols, self.rhs
        prow = rows.pop(r)
        p = prow.pop(c)
        prhs = rhs.pop(r, None)
        changed = set(prow) | {r, c}
        for i in cols.pop(c) - {r}:
            row_i = rows[i]
            f = div(row_i.pop(c), p)
            for j, val in prow.items():
                new = sub(row_i[j], mul(f, val)) if j in row_i else mul((-f[0], f[1]), val)
                if new[0].is_zero():
                    row_i.pop(j, None)
                    cols[j].discard(i)
                else:
                    row_i[j] = new
                    cols[j].add(i)
            if prhs is not None:
                rhs[i] = sub(rhs[i], mul(f, prhs)) if i in rhs else mul((-f[0], f[1]), prhs)
                if rhs[i][0].is_zero():
                    rhs.pop(i)
            changed.add(i)
        for j in prow:
            cols[j].discard(r)
        for v in changed:
            self.keys.pop(v, None)
        return p, prhs


def _permutation_sign(pairs: list[tuple[str, str]]) -> int:
    """Sign of the permutation taking each pivot row to its pivot column."""
    mapping = dict(pairs)
    seen: set[str] = set()
    sign = 1
    for start in mapping:
        if start in seen:
            continue
        length, v = 0, start
        while v not in seen:
            seen.add(v)
            v = mapping[v]
            length += 1
        if length % 2 == 0:
            sign = -sign
    return sign
