"""Stability of a characteristic polynomial in z: every root strictly inside the unit circle.

The polynomial follows the convention of :mod:`core.algebra.polynomial` (coefficients highest
power of z first, exact ``fmpq_poly`` values in the tuning parameter); here its variable is z.

Two exact tests, which always agree:

* **w-plane.** The bilinear map z = (1 + w)/(1 - w) takes the open unit disc onto the open left
  half plane. W(w) = (1 - w)^n P((1 + w)/(1 - w)), n the generic degree, is a polynomial with
  exact coefficients whose roots are w = (z - 1)/(z + 1) for the roots z of P. Special cases: a
  root at z = 1 maps to w = 0 (W(0) = P(1)); a root at z = -1 maps to w at infinity, so the degree
  of W drops (its leading coefficient is (-1)^n P(-1)); a root on |z| = 1 maps to the imaginary
  w-axis, z = e^(j theta) to w = j tan(theta/2); where the degree of P itself drops (a root gone
  to infinity in z) W gains the root w = 1. So P is stable exactly when W is Hurwitz of degree n,
  and the exact s-plane engine (Routh array, stable range) answers every question about P.
* **Jury table.** Rows r^(0) = P's coefficients (z^0 first), then r^(j+1)_k = r_0 r_k - r_m r_(m-k)
  (the 2x2 determinants of the row and its reverse, m = deg r^(j)), down to three entries. With
  a_n > 0, P is stable exactly when P(1) > 0, (-1)^n P(-1) > 0, |a_0| < a_n and
  |r^(j)_0| > |r^(j)_last| for each later row (Jury, 1961). Every condition is necessary, so any
  equality (a root on the circle) reads as not stable. From the fourth stage on (r^(3), ...), each
  row is divided exactly by the first entry of the stage two above (checked, else kept as it is):
  a nonzero factor changes no condition, and the entries stay of linear size.

>>> from flint import fmpq_poly
>>> p = ParametricPolynomial.from_coefficients([1, fmpq_poly([-1, 1]), fmpq(1, 4)], "K")  # z^2 + (K-1) z + 1/4
>>> z_text(bilinear(p), "w")
'(-K + 9/4)*w^2 + 3/2*w + K + 1/4'
>>> jury_stable(p.at(1)), jury_stable(p.at(3)), unit_circle_counts(p.at(fmpq(-1, 4))).to_dict()
(True, False, {'inside': 1, 'on': 1, 'outside': 0})
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

from flint import arb, ctx, fmpq, fmpq_poly, fmpz_poly

from core.algebra.polynomial import ParametricPolynomial, poly_text, strip_leading_zeros, to_fmpq
from core.analysis.routh import entry_bits, is_hurwitz, routh_counts
from core.analysis.stable_range import Endpoint, StableRange, stable_range

__all__ = [
    "JURY_DISPLAY_BITS",
    "CircleCounts",
    "JuryCondition",
    "JuryTable",
    "ZEndpoint",
    "bilinear",
    "jury_certified",
    "jury_stable",
    "jury_table",
    "radius_bounds",
    "radius_range",
    "scaled_by_radius",
    "schur_stable",
    "unit_circle_counts",
    "z_stable_range",
    "z_text",
]

Z = "z"
JURY_DISPLAY_BITS = 1_000_000  # a Jury table for display holds at most this many bits (about 300,000 digits)


# -- the bilinear map ---------------------------------------------------------------------------------
def _binomial_rows(n: int) -> list[list[int]]:
    """Row i: coefficients (w^0 first) of (1 + w)^i (1 - w)^(n - i), integers."""
    rows = []
    for i in range(n + 1):
        poly = fmpz_poly([1, 1]) ** i * fmpz_poly([1, -1]) ** (n - i)
        rows.append([int(poly[j]) for j in range(n + 1)])
    return rows


def bilinear(poly: ParametricPolynomial) -> ParametricPolynomial:
    """W(w) = (1 - w)^n P((1 + w)/(1 - w)) with n the generic degree of P, exact (same parameter).

    >>> z_text(bilinear(ParametricPolynomial.from_coefficients([1, 0, fmpq(-1, 4)])), "w")
    '3/4*w^2 + 5/2*w + 3/4'
    """
    n = poly.degree
    if n < 1:
        return poly
    low_first = list(reversed(poly.coeffs))
    rows = _binomial_rows(n)
    w_low = [sum((low_first[i] * rows[i][j] for i in range(n + 1) if rows[i][j]), fmpq_poly([]))
             for j in range(n + 1)]
    return ParametricPolynomial(tuple(reversed(w_low)), poly.parameter)


def z_text(poly: ParametricPolynomial, variable: str = Z) -> str:
    """Exact text of a polynomial in ``variable`` (z, or w for the w-plane), the parameter by its name.

    >>> from flint import fmpq_poly
    >>> z_text(ParametricPolynomial.from_coefficients([1, fmpq_poly([-1, 1]), fmpq(-1, 4)], "K"))
    'z^2 + (K - 1)*z - 1/4'
    """
    name = poly.parameter or "k"
    n = len(poly.coeffs) - 1
    out = ""
    for i, c in enumerate(poly.coeffs):
        if c.is_zero():
            continue
        power = n - i
        mono = "" if power == 0 else variable if power == 1 else f"{variable}^{power}"
        inner = poly_text([c[j] for j in range(c.degree(), -1, -1)], name)
        if mono and sum(1 for j in range(c.degree() + 1) if c[j] != 0) > 1:
            inner = f"({inner})"
        term = inner if not mono else mono if inner == "1" else "-" + mono if inner == "-1" else f"{inner}*{mono}"
        out = term if not out else out + (" - " + term[1:] if term.startswith("-") else " + " + term)
    return out or "0"


# -- exact verdicts at one value ---------------------------------------------------------------------
def schur_stable(coeffs: Sequence[fmpq], degree: int | None = None) -> bool:
    """Every root strictly inside the unit circle (exact, through the w-plane Hurwitz test).
    ``degree`` (optional): the generic degree; a polynomial whose degree dropped is not stable."""
    coeffs = strip_leading_zeros([to_fmpq(c) for c in coeffs])
    n = len(coeffs) - 1
    if (degree is not None and n != degree) or coeffs == [0]:
        return False
    if n == 0:
        return True
    w = bilinear(ParametricPolynomial.from_coefficients(coeffs)).at()
    return is_hurwitz(w, n)


@dataclass(frozen=True)
class CircleCounts:
    """Roots inside, on and outside the unit circle (with multiplicity), exact."""

    inside: int
    on: int
    outside: int

    def to_dict(self) -> dict:
        return {"inside": self.inside, "on": self.on, "outside": self.outside}


def unit_circle_counts(coeffs: Sequence) -> CircleCounts:
    """Exact counts for a rational polynomial in z (highest power first): the w-plane counts of
    W (left half plane = inside, imaginary axis = on, right = outside) and the roots at z = -1,
    which W loses (its degree drops by their multiplicity).

    >>> unit_circle_counts([1, 0, 0, -1]).to_dict()  # z^3 - 1: the three cube roots of unity
    {'inside': 0, 'on': 3, 'outside': 0}
    """
    exact = strip_leading_zeros([to_fmpq(c) for c in coeffs])
    n = len(exact) - 1
    if exact == [0]:
        raise ValueError("the zero polynomial has no root counts")
    if n == 0:
        return CircleCounts(0, 0, 0)
    w = bilinear(ParametricPolynomial.from_coefficients(exact)).at()
    at_minus_one = n - (len(w) - 1)
    if len(w) == 1:
        return CircleCounts(0, at_minus_one, 0)
    c = routh_counts(w)
    return CircleCounts(c.lhp, c.jw + at_minus_one, c.rhp)


# -- the Jury table ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class JuryCondition:
    """One condition of the table: ``left > 0`` (kind "positive") or |left| > |right| ("dominates");
    entries are polynomials in the tuning parameter."""

    label: str
    kind: str
    left: fmpq_poly
    right: fmpq_poly | None = None
    smaller_first: bool = False  # written |right| < |left|

    def holds(self, value=None) -> bool:
        """Exact truth at a value of the tuning parameter."""
        v = fmpq(0) if value is None else to_fmpq(value)
        a = fmpq(self.left(v))
        if self.kind == "positive":
            return a > 0
        assert self.right is not None
        return abs(a) > abs(fmpq(self.right(v)))

    def text(self, name: str) -> str:
        left = _entry_text(self.left, name)
        if self.kind == "positive":
            return f"{self.label}: {left} > 0"
        assert self.right is not None
        right = _entry_text(self.right, name)
        return f"{self.label}: |{right}| < |{left}|" if self.smaller_first else f"{self.label}: |{left}| > |{right}|"


def _entry_text(p: fmpq_poly, name: str) -> str:
    return poly_text([fmpq(p[i]) for i in range(p.degree(), -1, -1)], name) if not p.is_zero() else "0"


@dataclass
class JuryTable:
    """The rows (each stage's row, z^0 first, and its reverse) and the conditions of the table."""

    rows: list[list[fmpq_poly]]
    conditions: list[JuryCondition]
    parameter: str | None
    degree: int
    lead: fmpq_poly  # the leading coefficient a_n (sign-normalised when constant)
    omitted: str | None = None  # why the table was not built (then rows and conditions are empty)

    def stable_at(self, value=None) -> bool:
        """Exact verdict at a value: the leading coefficient is nonzero and every condition holds."""
        v = fmpq(0) if value is None else to_fmpq(value)
        return self.lead(v) != 0 and all(c.holds(v) for c in self.conditions)

    def rows_text(self) -> list[list[str]]:
        name = self.parameter or "k"
        return [[_entry_text(e, name) for e in row] for row in self.rows]

    def to_dict(self, value=None) -> dict:
        """JSON fields: ``rows`` (texts; each stage's row then its reverse), ``conditions`` (text and,
        at ``value`` or without a parameter, whether it holds) and ``stable`` (None if symbolic)."""
        name = self.parameter or "k"
        judged = (value is not None or self.parameter is None) and self.omitted is None
        return {"rows": self.rows_text(),
                "conditions": [{"condition": c.text(name), "holds": c.holds(value) if judged else None}
                               for c in self.conditions],
                "stable": self.stable_at(value) if judged else None, "omitted": self.omitted}


def _reduced(row: list, above) -> list:
    """The next Jury row r_0 r_k - r_m r_(m-k), divided by ``above`` (the first entry of the stage two
    above, from the second stage on) when that division is exact. Safe at every parameter value:
    where ``above`` vanishes an earlier condition (|first| > |last| of that stage) already fails."""
    m = len(row) - 1
    new = [row[0] * row[k] - row[m] * row[m - k] for k in range(m)]
    if above is not None and above != 0 and all(e % above == 0 for e in new):
        new = [e // above for e in new]
    return new


def jury_table(poly: ParametricPolynomial, limit_bits: int | None = None) -> JuryTable:
    """The Jury table of a polynomial in z, symbolic in its parameter. With ``limit_bits``, a table
    whose entries grow past that many bits is not built: no rows, and ``omitted`` says why.

    >>> from flint import fmpq_poly
    >>> t = jury_table(ParametricPolynomial.from_coefficients([1, fmpq_poly([-1, 1]), fmpq(1, 4)], "K"))
    >>> [c.text("K") for c in t.conditions]
    ['P(1): K + 1/4 > 0', '(-1)^2 P(-1): -K + 9/4 > 0', '|a0| < |a2|: |1/4| < |1|']
    """
    n = poly.degree
    if n < 1:
        raise ValueError("a Jury table needs degree 1 or more")
    low = list(reversed(poly.coeffs))
    lead = low[-1]
    if lead.degree() == 0 and lead[0] < 0:
        low = [-c for c in low]
        lead = -lead
    sign_note = "" if lead.degree() == 0 else "a_n·"
    at_one = sum(low, fmpq_poly([]))
    at_minus_one = sum(((-1) ** (n - i) * c for i, c in enumerate(low)), fmpq_poly([]))
    if sign_note:
        at_one, at_minus_one = at_one * lead, at_minus_one * lead
    conditions = [JuryCondition(f"{sign_note}P(1)", "positive", at_one),
                  JuryCondition(f"{sign_note}(-1)^{n} P(-1)", "positive", at_minus_one)]
    conditions.append(JuryCondition(f"|a0| < |a{n}|", "dominates", lead, low[0], smaller_first=True))
    rows: list[list[fmpq_poly]] = [low, list(reversed(low))]
    stages = [low]
    used = 0
    while len(stages[-1]) > 3:
        used += sum(entry_bits(e) for e in stages[-1])
        if limit_bits is not None and used > limit_bits:
            why = (f"the Jury table of this degree-{n} polynomial passes {limit_bits:,} bits of entries by row "
                   f"{len(rows) - 1}: not built (the verdicts and the range come from the w-plane)")
            return JuryTable([], [], poly.parameter, n, lead, why)
        above = stages[-2][0] if len(stages) >= 3 else None  # never a0: it may be 0 in a stable loop
        current = _reduced(stages[-1], above)
        stages.append(current)
        rows += [current, list(reversed(current))]
        m = len(current) - 1
        conditions.append(JuryCondition(f"row {len(rows) - 1}: |first| > |last| (z^0, z^{m})", "dominates",
                                        current[0], current[m]))
    return JuryTable(rows, conditions, poly.parameter, n, lead)


def jury_stable(coeffs: Sequence) -> bool:
    """Exact stability verdict of a rational polynomial in z (highest power first) from its Jury
    table (not through the w-plane: :func:`schur_stable` is that test).

    >>> jury_stable([1, -1, fmpq(1, 2)]), jury_stable([1, 0, 1])  # z^2 - z + 1/2; z^2 + 1 (on the circle)
    (True, False)
    """
    exact = strip_leading_zeros([to_fmpq(c) for c in coeffs])
    n = len(exact) - 1
    if exact == [0]:
        return False
    if n == 0:
        return True
    return jury_table(ParametricPolynomial.from_coefficients(exact)).stable_at()


def jury_certified(coeffs: Sequence[arb]) -> bool | None:
    """The Jury verdict on ball coefficients (highest power first): True when every condition is
    proven, False when one is proven false (each condition is necessary), None when some ball
    still straddles its threshold (the true coefficients lie in the balls)."""
    low = list(reversed([arb(c) for c in coeffs]))
    n = len(low) - 1
    if n < 1:
        return None if low[0].contains(0) else True
    if low[-1].contains(0):
        return None
    if low[-1] < 0:
        low = [-c for c in low]
    tests = [sum(low, arb(0)), sum(((-1) ** (n - i) * c for i, c in enumerate(low)), arb(0)),
             low[-1] - abs(low[0])]
    current = low
    while len(current) > 3:
        m = len(current) - 1
        current = [current[0] * current[k] - current[m] * current[m - k] for k in range(m)]
        tests.append(abs(current[0]) - abs(current[-1]))
    if any(t < 0 or t == 0 for t in tests):
        return False
    return True if all(t > 0 for t in tests) else None


# -- the stable range in z ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ZEndpoint(Endpoint):
    """An end of the stable range in z: ``kind`` "z_one" (a real root through z = 1),
    "z_minus_one" (through z = -1), "unit_circle" (a complex pair on |z| = 1 at ``angle`` rad;
    ``omega`` = angle / Ts in rad/s when the sample period is known) or "singular"; ``w_kind``
    is the w-plane engine's own kind."""

    angle: float | None = None
    w_kind: str = ""

    def to_dict(self) -> dict:
        return {**super().to_dict(), "angle": self.angle, "w_kind": self.w_kind}


Z_KINDS = {"origin": "z_one", "infinity": "z_minus_one", "crossing": "unit_circle", "singular": "singular"}


def _z_endpoint(e: Endpoint, sample_period: fmpq | None) -> ZEndpoint:
    angle = {"origin": 0.0, "infinity": math.pi}.get(e.kind)
    if e.kind == "crossing":
        angle = None if e.omega is None else 2 * math.atan(e.omega)
    omega = None if angle is None or sample_period is None else angle / float(sample_period)
    return ZEndpoint(e.value, e.exact, Z_KINDS[e.kind], omega, e.approx, angle, e.kind)


def z_stable_range(poly: ParametricPolynomial, nominal=None, sample_period=None) -> StableRange:
    """The exact set of parameter values with every root of P inside the unit circle: the exact
    stable range of the w-polynomial (intervals, margins and candidates are the same sets), with
    each end said in z (:class:`ZEndpoint`).

    >>> from flint import fmpq_poly
    >>> r = z_stable_range(ParametricPolynomial.from_coefficients([1, fmpq_poly([-1, 1]), fmpq(1, 4)], "K"))
    >>> r.to_dict()["exact_intervals"], [e.kind for e in r.endpoints]
    ([['-1/4', '9/4']], ['z_one', 'z_minus_one'])
    """
    ts = None if sample_period is None else to_fmpq(sample_period)
    rng = stable_range(bilinear(poly), nominal)
    return replace(rng, endpoints=[_z_endpoint(e, ts) for e in rng.endpoints])


# -- the radius requirement |z| < r = e^(-sigma Ts) -------------------------------------------------
def radius_bounds(sigma, sample_period, bits: int = 200) -> tuple[fmpq, fmpq]:
    """Rational lo <= e^(-sigma Ts) <= hi (certified with arb; equal when sigma Ts = 0), about
    2^-bits relative apart.

    >>> lo, hi = radius_bounds(1, fmpq(1, 10))
    >>> lo < hi and abs(float(lo) - math.exp(-0.1)) < 1e-15
    True
    """
    x = to_fmpq(sigma) * to_fmpq(sample_period)
    if x == 0:
        return fmpq(1), fmpq(1)
    with ctx.workprec(bits + 32):
        r = (-arb(x)).exp()
        mid, rad = _fmpq_of_arb(r.mid()), _fmpq_of_arb(r.rad())
    return mid - rad, mid + rad


def _fmpq_of_arb(x: arb) -> fmpq:
    man, exp = x.man_exp()
    return fmpq(int(man)) * fmpq(2) ** int(exp) if exp >= 0 else fmpq(int(man), 2 ** int(-exp))


def scaled_by_radius(poly: ParametricPolynomial, radius: fmpq) -> ParametricPolynomial:
    """P(r z): its roots are those of P divided by r, so inside the unit circle exactly when P's
    are inside |z| < r."""
    n = poly.degree
    r = to_fmpq(radius)
    return ParametricPolynomial(tuple(c * r ** (n - i) for i, c in enumerate(poly.coeffs)), poly.parameter)


def radius_range(poly: ParametricPolynomial, sigma, sample_period, nominal=None,
                 bits: int = 200) -> tuple[StableRange, bool | None]:
    """(range, nominal_ok) for the radius requirement |z| < e^(-sigma Ts).

    The range is the exact range for the certified lower bound of r (every value listed meets the
    requirement; its ends lie within the effect of a 2^-bits relative change of r). ``nominal_ok``
    is decided exactly: the bounds are tightened until both give the same verdict (they do: |z|^2 of
    an algebraic root never equals the transcendental e^(-2 sigma Ts) when sigma Ts != 0).
    """
    lo, _ = radius_bounds(sigma, sample_period, bits)
    rng = z_stable_range(scaled_by_radius(poly, lo), nominal, sample_period)
    ok = None if (nominal is None and poly.parameter is not None) else meets_radius(poly, sigma, sample_period,
                                                                                   nominal)
    return rng, ok


def meets_radius(poly: ParametricPolynomial, sigma, sample_period, value=None) -> bool:
    """Exact: every root at ``value`` lies inside |z| < e^(-sigma Ts) (see :func:`radius_range`)."""
    bits = 64
    while True:
        lo, hi = radius_bounds(sigma, sample_period, bits)
        if schur_stable(scaled_by_radius(poly, lo).at(value), poly.degree):
            return True
        if not schur_stable(scaled_by_radius(poly, hi).at(value), poly.degree) or lo == hi:
            return False
        bits *= 2
