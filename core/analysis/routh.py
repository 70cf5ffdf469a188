"""Routh array (exact, symbolic in the tuning parameter), exact root counts and a fast Hurwitz test.

Entries are :class:`RationalFunction` values: a numerator over a monic denominator, reduced by their
gcd. Without special cases they live in Q(k) (``fmpq_poly`` in the tuning parameter; constants when
there is none). When a first element is identically zero in a nonzero row the array is rebuilt with
that zero replaced by a small positive ``eps`` (entries then live in Q(eps), or Q(k, eps) as
``fmpq_mpoly`` values); a row that is identically zero is replaced by the derivative of the
auxiliary polynomial formed from the row above.

>>> from core.algebra.polynomial import ParametricPolynomial
>>> from flint import fmpq_poly
>>> arr = routh_array(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K"))
>>> arr.first_column_text()
['1', '3', '-1/3*K + 2', 'K']
>>> routh_counts([fmpq(c) for c in (1, 2, 2, 4, 11, 10)]).rhp
2
>>> is_hurwitz([fmpq(c) for c in (1, 3, 2, 5)])
True
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, cast

from flint import fmpq, fmpq_mpoly, fmpq_mpoly_ctx, fmpq_poly, fmpz, fmpz_poly

from core.algebra.polynomial import ParametricPolynomial, mpoly_text, poly_text

__all__ = [
    "RationalFunction",
    "RootCounts",
    "RouthArray",
    "SpecialCase",
    "fraction_free_rows",
    "imaginary_axis_roots",
    "integer_coefficients",
    "is_hurwitz",
    "real_roots",
    "routh_array",
    "routh_counts",
]

EPS_NAME = "eps"
DISPLAY_BITS = 8_000_000  # a symbolic array for display holds at most this many bits (about 2.4 million digits)
COUNTS_DISPLAY_BITS = 500_000  # the full numeric array beside exact counts (its sign changes): a smaller cap
MPOLY_COST = 16  # a bit of an entry in Q(k, eps) costs about 16 of the fraction-free rows' (measured, bench/)


class ArrayTooLarge(Exception):
    """A Routh array's entries grew past the size allowed (the message says how far it got)."""


def entry_bits(e) -> int:
    """Size in bits of an array entry: an integer, a polynomial (in k, or in k and eps), or
    a rational function of them."""
    if isinstance(e, RationalFunction):
        return entry_bits(e.num) + entry_bits(e.den)
    if isinstance(e, (int, fmpz)):
        return max(int(e).bit_length(), 1)
    if isinstance(e, fmpz_poly):
        return (e.degree() + 1) * max(e.height_bits(), 1)
    if isinstance(e, fmpq_poly):
        return (e.degree() + 1) * max(e.numer().height_bits(), 1) + int(e.denom()).bit_length()
    if isinstance(e, fmpq):
        return int(e.p).bit_length() + int(e.q).bit_length()
    return sum(int(c.p).bit_length() + int(c.q).bit_length() for c in e.coeffs())  # fmpq_mpoly


class _Budget:
    """Counts the bits of the rows built so far; raises ArrayTooLarge past ``limit`` (None: no limit)."""

    def __init__(self, limit: int | None, degree: int):
        self.limit, self.degree, self.used = limit, degree, 0

    def add(self, row: list, power: int) -> None:
        if self.limit is None:
            return
        self.used += sum(entry_bits(e) for e in row)
        if self.used > self.limit:
            raise ArrayTooLarge(f"the symbolic Routh array of this degree-{self.degree} polynomial passes "
                                f"{self.limit:,} bits of entries by row s^{power}: not built (the limit "
                                "keeps the report fast; the verdict and the ranges do not use it)")


class RationalFunction:
    """num/den over ``fmpq_poly`` or ``fmpq_mpoly``, reduced by gcd, denominator monic."""

    __slots__ = ("den", "num")

    def __init__(self, num, den=None, reduced: bool = False):
        if den is None:
            den = num * 0 + 1
        elif not reduced:
            if num.is_zero():
                den = den * 0 + 1
            else:
                g = num.gcd(den)
                if not g.is_one():
                    num, den = num // g, den // g
                lc = den.leading_coefficient()
                if lc != 1:
                    inv = 1 / fmpq(lc)
                    num, den = num * inv, den * inv
        self.num, self.den = num, den

    def __add__(self, other: RationalFunction) -> RationalFunction:
        if self.den == other.den:
            return RationalFunction(self.num + other.num, self.den)
        return RationalFunction(self.num * other.den + other.num * self.den, self.den * other.den)

    def __sub__(self, other: RationalFunction) -> RationalFunction:
        if self.den == other.den:
            return RationalFunction(self.num - other.num, self.den)
        return RationalFunction(self.num * other.den - other.num * self.den, self.den * other.den)

    def __mul__(self, other: RationalFunction) -> RationalFunction:
        return RationalFunction(self.num * other.num, self.den * other.den)

    def __truediv__(self, other: RationalFunction) -> RationalFunction:
        if other.num.is_zero():
            raise ZeroDivisionError("rational function division by zero")
        return RationalFunction(self.num * other.den, self.den * other.num)

    def scale(self, c: int) -> RationalFunction:
        return RationalFunction(self.num * c, self.den, reduced=True)

    def is_zero(self) -> bool:
        return self.num.is_zero()

    def is_constant(self) -> bool:
        return self.num.is_constant() and self.den.is_constant()

    def constant(self) -> fmpq:
        """The value of a constant rational function."""
        return fmpq(self.num.leading_coefficient()) if not self.num.is_zero() else fmpq(0)

    def __call__(self, value) -> fmpq:
        """Value at ``value`` of a one-variable function (ZeroDivisionError at a pole)."""
        return self.num(value) / self.den(value)

    def sign_near_zero(self) -> int:
        """Sign as the (one) variable tends to 0 from above (used for eps → 0+)."""
        def low(p: fmpq_poly) -> fmpq:
            return next(p[i] for i in range(p.degree() + 1) if p[i] != 0)
        if self.num.is_zero():
            return 0
        return 1 if (low(self.num) > 0) == (low(self.den) > 0) else -1

    def text(self, name: str = "k") -> str:
        """Parseable text, e.g. ``(3*K + 2)/(K + 1)``."""
        num, den = _poly_text(self.num, name), _poly_text(self.den, name)
        if den == "1":
            return num
        if not _is_atom(num):
            num = f"({num})"
        if not _is_atom(den) or "*" in den or "/" in den:
            den = f"({den})"
        return f"{num}/{den}"

    def __repr__(self) -> str:
        return f"RationalFunction({self.text()!r})"


def _poly_text(p, name: str) -> str:
    if isinstance(p, fmpq_mpoly):
        return mpoly_text(p)
    return poly_text([p[i] for i in range(p.degree(), -1, -1)], name)


def _is_atom(text: str) -> bool:
    return " " not in text and "/" not in text.lstrip("-")


@dataclass(frozen=True)
class SpecialCase:
    """A special case met while building the array, at row index ``row`` (power ``powers[row]``)."""

    row: int
    kind: str  # "zero_row" or "zero_first"
    note: str
    auxiliary: str | None = None
    imaginary_roots: tuple[tuple[float, int], ...] | None = None  # (omega, multiplicity), omega >= 0

    def to_dict(self) -> dict:
        return {"row": self.row, "kind": self.kind, "note": self.note, "auxiliary": self.auxiliary}


@dataclass
class RouthArray:
    """Rows of exact entries, ``rows[i]`` belonging to ``s^powers[i]``."""

    rows: list[list[RationalFunction]]
    powers: list[int]
    special: list[SpecialCase] = field(default_factory=list)
    parameter: str | None = None
    uses_eps: bool = False
    omitted: str | None = None  # why the array was not built (then rows and powers are empty)

    @property
    def first_column(self) -> list[RationalFunction]:
        return [row[0] for row in self.rows]

    def _name(self) -> str:
        if self.parameter is None and self.uses_eps:
            return EPS_NAME
        return self.parameter or "k"

    def rows_text(self) -> list[list[str]]:
        return [[e.text(self._name()) for e in row] for row in self.rows]

    def first_column_text(self) -> list[str]:
        return [e.text(self._name()) for e in self.first_column]

    def first_column_signs(self) -> list[int] | None:
        """Signs of the first column (as eps → 0+); None when entries depend on the parameter."""
        col = self.first_column
        if any(not isinstance(e.num, fmpq_poly) for e in col):
            return None
        if self.uses_eps:
            return [e.sign_near_zero() for e in col]
        if not all(e.is_constant() for e in col):
            return None
        return [(e.constant() > 0) - (e.constant() < 0) for e in col]

    def sign_changes(self) -> list[int] | None:
        """Row indices i where the first-column sign differs from row i - 1 (None if symbolic)."""
        signs = self.first_column_signs()
        if signs is None:
            return None
        return [i for i in range(1, len(signs)) if signs[i] * signs[i - 1] < 0]

    def to_dict(self) -> dict:
        return {"rows": self.rows_text(), "powers": list(self.powers),
                "first_column": self.first_column_text(),
                "special": [s.to_dict() for s in self.special], "omitted": self.omitted}


class _NeedsEps(Exception):
    """Raised by the first pass when a first element is identically zero."""


def routh_array(poly: ParametricPolynomial, value=None, limit_bits: int | None = None) -> RouthArray:
    """The Routh array of ``poly``, symbolic in its parameter.

    ``value`` (optional) is the parameter value at which a parametric auxiliary polynomial's
    imaginary-axis roots are reported. With ``limit_bits``, an array whose entries grow past that
    many bits is not built: the result has no rows and ``omitted`` says why. Raises ValueError for
    the zero polynomial.
    """
    if poly.degree < 0:
        raise ValueError("the zero polynomial has no Routh array")
    try:
        return _routh_array(poly, value, limit_bits)
    except ArrayTooLarge as exc:
        return RouthArray([], [], [], poly.parameter, omitted=str(exc))


def _routh_array(poly: ParametricPolynomial, value, limit_bits: int | None) -> RouthArray:
    constant = all(c.degree() <= 0 for c in poly.coeffs)
    ints, lcd = integer_coefficients(list(poly.coeffs))
    ff = fraction_free_rows(ints, budget=_Budget(limit_bits, poly.degree))
    if ff is not None:  # no special case: entries of L*p are P[i][j] / P[i-1][0]; divide by L
        inv = fmpq(1) / lcd
        rows = [[RationalFunction(fmpq_poly(e) * inv) for e in r] for r in ff[:2]]
        rows += [[RationalFunction(fmpq_poly(e) * inv, fmpq_poly(ff[i - 1][0])) for e in ff[i]]
                 for i in range(2, len(ff))]
        return RouthArray(rows, list(range(poly.degree, -1, -1)), [], poly.parameter)
    try:
        return _build(poly, constant, eps_mode=False, value=value, budget=_Budget(limit_bits, poly.degree))
    except _NeedsEps:
        if limit_bits is not None and not constant:
            limit_bits //= MPOLY_COST
        return _build(poly, constant, eps_mode=True, value=value, budget=_Budget(limit_bits, poly.degree))


def fraction_free_rows(coeffs: list, budget: _Budget | None = None) -> list[list] | None:
    """Polynomial rows P_i with Routh entries r[i][j] = P[i][j] / P[i-1][0] (i >= 2; rows 0, 1 as
    given), so that P[i][0] is the Hurwitz determinant Delta_i; None when some P[i][0] is zero
    (a special case). Each new row is (P[i-1][0] P[i-2][j+1] - P[i-2][0] P[i-1][j+1]) divided
    exactly by P[i-3][0] (by 1 for rows 2 and 3): Sylvester's identity for the Hurwitz minors.
    Works on any exact ring elements with exact ``//`` (fmpz_poly, fmpz, fmpq_poly). A ``budget``
    raises ArrayTooLarge once the rows grow past its limit.

    >>> [r[0] for r in fraction_free_rows([fmpz(c) for c in (1, 3, 2, 5)])]  # Delta_0..Delta_3 (a0 first)
    [1, 3, 1, 5]
    """
    n = len(coeffs) - 1
    zero = coeffs[0] * 0
    rows = [coeffs[0::2], coeffs[1::2]][: n + 1]
    rows = [r + [zero] * ((n - i) // 2 + 1 - len(r)) for i, r in enumerate(rows)]
    if any(r[0] == 0 for r in rows):
        return None
    for i, r in enumerate(rows):
        if budget is not None:
            budget.add(r, n - i)
    for i in range(2, n + 1):
        above, prev = rows[i - 2], rows[i - 1]
        a, b = prev[0], above[0]
        width = (n - i) // 2 + 1
        new = [a * above[j + 1] - b * (prev[j + 1] if j + 1 < len(prev) else zero) for j in range(width)]
        if i >= 4:
            d = rows[i - 3][0]
            new = [e // d for e in new]
        if new[0] == 0:
            return None
        if budget is not None:
            budget.add(new, n - i)
        rows.append(new)
    return rows


def integer_coefficients(coeffs: list[fmpq_poly]) -> tuple[list[fmpz_poly], fmpz]:
    """(L * c for each c as fmpz_poly, L) with L the least common denominator."""
    lcd = fmpz(1)
    for c in coeffs:
        lcd = lcd.lcm(c.denom())
    return [(c * lcd).numer() for c in coeffs], lcd


def _build(poly: ParametricPolynomial, constant: bool, eps_mode: bool, value,
           budget: _Budget | None = None) -> RouthArray:
    n = poly.degree
    if eps_mode and not constant:
        name = poly.parameter or "k"
        ctx = fmpq_mpoly_ctx.get((name, EPS_NAME if name != EPS_NAME else EPS_NAME + "_"), "lex")
        eps = RationalFunction(ctx.gens()[1])

        def lift(c: fmpq_poly) -> RationalFunction:
            return RationalFunction(ctx.from_dict({(i, 0): c[i] for i in range(c.degree() + 1) if c[i] != 0}))
    else:
        eps = RationalFunction(fmpq_poly([0, 1]))

        def lift(c: fmpq_poly) -> RationalFunction:
            return RationalFunction(fmpq_poly([c[0]]) if eps_mode else c)
    coeffs = [lift(c) for c in poly.coeffs]
    zero = coeffs[0].scale(0)
    powers = list(range(n, -1, -1))
    width = [p // 2 + 1 for p in powers]
    rows = [coeffs[0::2], coeffs[1::2]][: n + 1]
    rows = [r + [zero] * (width[i] - len(r)) for i, r in enumerate(rows)]
    special: list[SpecialCase] = []
    name = poly.parameter or (EPS_NAME if eps_mode else "k")
    i = 1
    while i <= n:
        if i >= 2:
            above, prev = rows[i - 2], rows[i - 1]
            a, b = prev[0], above[0]
            above = above + [zero] * (width[i] + 1 - len(above))
            prev = prev + [zero] * (width[i] + 1 - len(prev))
            rows.append([(a * above[j + 1] - b * prev[j + 1]) / a for j in range(width[i])])
        row = rows[i]
        if budget is not None:
            budget.add(row, powers[i])
        if all(e.is_zero() for e in row):
            m = powers[i - 1]
            prev = rows[i - 1]
            aux = [prev[j] for j in range(len(prev)) if m - 2 * j >= 0]
            rows[i] = [prev[j].scale(m - 2 * j) for j in range(width[i])]
            aux_text = poly_text_rf(aux, m, name)
            roots = _aux_roots(aux, m, constant, value)
            where = "" if roots is None else "; imaginary-axis roots: " + (
                ", ".join(_root_text(w, mult) for w, mult in roots) if roots else "none")
            special.append(SpecialCase(i, "zero_row",
                                       f"row s^{powers[i]} is zero: replaced by the derivative of the auxiliary "
                                       f"polynomial {aux_text} from row s^{m}{where}", aux_text,
                                       None if roots is None else tuple(roots)))
        elif row[0].is_zero():
            if not eps_mode:
                raise _NeedsEps
            row[0] = eps
            special.append(SpecialCase(i, "zero_first",
                                       f"first element of row s^{powers[i]} is zero: replaced by ε > 0 and "
                                       f"continued; signs read as ε → 0+"))
        i += 1
    return RouthArray(rows, powers, special, poly.parameter, eps_mode)


def poly_text_rf(coeffs: list[RationalFunction], degree: int, name: str) -> str:
    """Text of sum coeffs[j] * s^(degree - 2j) with rational-function coefficients."""
    terms = []
    for j, c in enumerate(coeffs):
        if c.is_zero():
            continue
        p = degree - 2 * j
        mono = "" if p == 0 else "s" if p == 1 else f"s^{p}"
        t = c.text(name)
        if mono:
            t = mono if t == "1" else "-" + mono if t == "-1" else f"{t}*{mono}" if " " not in t else f"({t})*{mono}"
        terms.append(t)
    out = ""
    for t in terms:
        out = t if not out else out + (" - " + t[1:] if t.startswith("-") else " + " + t)
    return out or "0"


def _root_text(omega: float, mult: int) -> str:
    base = "s = 0" if omega == 0 else f"s = ±{omega:.6g}j"
    return base + (f" (multiplicity {mult})" if mult > 1 else "")


def _aux_roots(aux: list[RationalFunction], m: int, constant: bool, value) -> list[tuple[float, int]] | None:
    if not all(isinstance(c.num, fmpq_poly) for c in aux):
        return None
    if constant:
        if not all(c.is_constant() for c in aux):
            return None  # depends on eps
        vals = [c.constant() for c in aux]
    elif value is None:
        return None
    else:
        try:
            vals = [c(fmpq(value) if not isinstance(value, fmpq) else value) for c in aux]
        except ZeroDivisionError:
            return None
    dense = []
    for j, v in enumerate(vals):
        dense.append(v)
        if m - 2 * j > 0:
            dense.append(fmpq(0))
    dense = dense[: m + 1]
    while dense and dense[0] == 0:
        dense.pop(0)
    if len(dense) < 2:
        return []
    return imaginary_axis_roots(dense)


# ---- exact counting -------------------------------------------------------------------------------

def _to_poly(coeffs: list[fmpq]) -> fmpq_poly:
    return fmpq_poly(list(reversed(coeffs)))


def _mirror(p: fmpq_poly) -> fmpq_poly:
    """p(-s)."""
    return fmpq_poly([p[i] if i % 2 == 0 else -p[i] for i in range(p.degree() + 1)])


def _root_pairs(f: fmpz_poly | fmpq_poly) -> list[tuple[Any, int]]:
    """(root ball, multiplicity) pairs from flint (its type stub says a plain list of balls)."""
    return cast("list[tuple[Any, int]]", f.complex_roots())


def real_roots(f: fmpz_poly, prec: int = 64) -> list:
    """Certified real roots (arb balls, increasing) of a squarefree integer polynomial."""
    from flint import ctx
    while True:
        with ctx.workprec(prec):
            roots = [c.real for c, _ in _root_pairs(f) if c.imag.is_zero()]
        roots.sort(key=lambda r: float(r.mid()))
        if all(not roots[i].overlaps(roots[i + 1]) for i in range(len(roots) - 1)):
            return roots
        prec *= 2


def _negative_real_roots(h: fmpq_poly) -> list[tuple[list, int]]:
    """Negative real roots of h (h(0) != 0) as (balls, multiplicity) per irreducible factor."""
    out = []
    _, factors = h.numer().factor()
    for f, mult in factors:
        if f.degree() == 1:
            r = -fmpq(f[0], f[1])
            if r < 0:
                out.append(([r], mult))
            continue
        prec = 64
        while True:
            roots = real_roots(f, prec)
            if all(not r.contains(0) for r in roots):
                break
            prec *= 2
        neg = [r for r in roots if r < 0]
        if neg:
            out.append((neg, mult))
    return out


def imaginary_axis_roots(coeffs: list[fmpq]) -> list[tuple[float, int]]:
    """Roots on the imaginary axis as (omega >= 0, multiplicity), omega increasing; each omega > 0
    stands for the pair ±j*omega.

    >>> imaginary_axis_roots([fmpq(c) for c in (1, 3, 8, 24, 16, 48)])  # (s^2+4)^2 (s+3)
    [(2.0, 2)]
    """
    p = _to_poly(coeffs)
    zeros = 0
    while p.degree() > 0 and p[0] == 0:
        p = fmpq_poly([p[i] for i in range(1, p.degree() + 1)])
        zeros += 1
    out = [(0.0, zeros)] if zeros else []
    g = p.gcd(_mirror(p))
    if g.degree() > 0:
        h = fmpq_poly([g[2 * i] for i in range(g.degree() // 2 + 1)])  # g(s) = h(s^2)
        pairs = []
        for balls, mult in _negative_real_roots(h):
            for b in balls:
                pairs.append((math.sqrt(-float(b if isinstance(b, fmpq) else b.mid())), mult))
        out += sorted(pairs)
    return out


@dataclass(frozen=True)
class RootCounts:
    """Roots in the right half plane, on the imaginary axis and in the left half plane."""

    rhp: int
    jw: int
    lhp: int
    sign_changes: list[int]
    special: list[str]
    array: RouthArray | None = None

    def to_dict(self) -> dict:
        return {"rhp": self.rhp, "jw": self.jw, "lhp": self.lhp, "sign_changes": self.sign_changes,
                "special": list(self.special)}


def routh_counts(coeffs: list[fmpq]) -> RootCounts:
    """Exact root counts of a rational polynomial (highest power first, leading coefficient nonzero).

    Authoritative method: split off s^m (roots at 0) and g = gcd(p(s), p(-s)), which holds every root
    pair symmetric about the origin (so every imaginary-axis root); count g's imaginary roots exactly
    (g(s) = h(s^2), jω roots ↔ negative real roots of h, with multiplicity); g's other roots split half
    RHP, half LHP; the rest p / (s^m g) has neither axis roots nor symmetric pairs, so the Routh array
    with the ε method counts its RHP roots exactly. ``sign_changes`` and the special notes describe the
    full array of p (display); a note says so if its sign count differs from the exact count.

    >>> c = routh_counts([fmpq(c) for c in (1, 7, 6, 42, 8, 56)])
    >>> (c.rhp, c.jw, c.lhp)
    (0, 4, 1)
    """
    coeffs = [fmpq(c) for c in coeffs]
    while coeffs and coeffs[0] == 0:
        coeffs.pop(0)
    n = len(coeffs) - 1
    if n < 0:
        raise ValueError("the zero polynomial has no root counts")
    p = _to_poly(coeffs)
    zeros = 0
    while p.degree() > 0 and p[0] == 0:
        p = fmpq_poly([p[i] for i in range(1, p.degree() + 1)])
        zeros += 1
    g = p.gcd(_mirror(p))
    jw_g = 2 * sum(mult * len(balls) for balls, mult in _negative_real_roots(
        fmpq_poly([g[2 * i] for i in range(g.degree() // 2 + 1)]))) if g.degree() > 0 else 0
    off_axis_g = g.degree() - jw_g
    rest = p // g
    rest_coeffs = [rest[i] for i in range(rest.degree(), -1, -1)]
    rest_array = routh_array(ParametricPolynomial.from_coefficients(rest_coeffs))
    notes: list[str] = []
    if sum(1 for s in rest_array.special if s.kind == "zero_first") > 1:
        rhp_rest = _rhp_by_isolation(rest)
        notes.append("several ε substitutions: counts of the non-symmetric part confirmed by certified "
                     "root isolation")
    else:
        rhp_rest = len(rest_array.sign_changes() or [])
    rhp = rhp_rest + off_axis_g // 2
    jw = zeros + jw_g
    same = zeros == 0 and g.degree() == 0  # then rest is p (g is monic)
    array = rest_array if same else routh_array(ParametricPolynomial.from_coefficients(coeffs),
                                                limit_bits=COUNTS_DISPLAY_BITS)
    if array.omitted:
        notes.append("the full array (with its ε rows) is too large to write out; the counts come from "
                     "the symmetric-part split")
    notes += [s.note for s in array.special]
    changes = array.sign_changes() or []
    if len(changes) != rhp and not array.omitted:
        notes.append(f"the array's {len(changes)} sign change(s) do not give the RHP count here; "
                     f"exact count {rhp} from the symmetric-part split")
    return RootCounts(rhp, jw, n - rhp - jw, changes, notes, array)


def _rhp_by_isolation(p: fmpq_poly) -> int:
    from flint import ctx
    _, factors = p.numer().factor()
    count = 0
    for f, mult in factors:
        prec = 64
        while True:
            with ctx.workprec(prec):
                roots = [c for c, _ in _root_pairs(f)]
            if all(not c.real.contains(0) for c in roots):
                break
            prec *= 2
        count += mult * sum(1 for c in roots if c.real > 0)
    return count


def is_hurwitz(coeffs: list[fmpq], degree: int | None = None) -> bool:
    """True when every root lies in the open left half plane (exact; fast).

    ``degree`` (optional) is the generic degree: a polynomial whose degree dropped is not Hurwitz.
    Works fraction-free on integers: Hurwitz iff every Hurwitz determinant Delta_i (the fraction-free
    Routh first column) has the sign of the leading coefficient; any zero gives False.
    """
    n = len(coeffs) - 1
    if (degree is not None and n != degree) or n < 0 or coeffs[0] == 0:
        return False
    lcd = fmpz(1)
    for c in coeffs:
        lcd = lcd.lcm(fmpq(c).q)
    sign = 1 if coeffs[0] > 0 else -1
    ints = [(fmpq(c) * lcd * sign).p for c in coeffs]
    if any(c <= 0 for c in ints):  # necessary condition: all coefficients of one sign
        return False
    if n <= 2:
        return True
    by_balls = _hurwitz_by_balls(ints)
    return by_balls if by_balls is not None else _hurwitz_determinants_positive(ints)


def _hurwitz_by_balls(ints: list[fmpz]) -> bool | None:
    """The Hurwitz test in ball arithmetic (arb: each ball holds the exact entry), or None when
    some first-column ball still holds 0 at the highest precision tried. Exact as a decision: all
    first-column entries of the plain Routh array proven positive is Hurwitz's condition; one proven
    negative after proven positive ones means some Delta_i < 0, so not Hurwitz. Rows are arb_poly
    values, a few flint calls each; the precision starts at twice the coefficients' size and doubles
    up to the size the exact integers would reach."""
    from flint import arb, arb_poly, ctx

    bits = max(int(c).bit_length() for c in ints)
    prec, top = 2 * bits + 64, len(ints) * bits
    while prec <= top:
        with ctx.workprec(prec):
            above, prev = arb_poly([arb(c) for c in ints[0::2]]), arb_poly([arb(c) for c in ints[1::2]])
            for _ in range(2, len(ints)):
                new = above.right_shift(1) - prev.right_shift(1) * (above[0] / prev[0])
                if not new[0] > 0:
                    if new[0] < 0:
                        return False
                    break
                above, prev = prev, new
            else:
                return True
        prec *= 2
    return None


def _hurwitz_determinants_positive(ints: list[fmpz]) -> bool:
    """Whether every Delta_i is positive, for integer coefficients that are all positive: the
    recurrence of :func:`fraction_free_rows` with each row held as one fmpz_poly (entry j the
    coefficient of x^j), so a row costs a few flint operations; stops at the first Delta_i <= 0."""
    n = len(ints) - 1
    above, prev = fmpz_poly(ints[0::2]), fmpz_poly(ints[1::2])
    firsts = [above[0], prev[0]]
    for i in range(2, n + 1):
        new = prev[0] * above.right_shift(1) - above[0] * prev.right_shift(1)
        if i >= 4:
            new = new // firsts[i - 3]
        if new[0] <= 0:
            return False
        firsts.append(new[0])
        above, prev = prev, new
    return True
