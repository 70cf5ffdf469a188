"""The exact set of tuning-parameter values for which every root has negative real part.

Method (no sampling). Stability can only change where a root reaches the imaginary axis or the
degree drops, so the candidate boundaries are the real roots of

* the content c(k) (gcd of all coefficients): the polynomial vanishes identically ("singular");
* a0(k), the constant term: a real root passes through s = 0 ("origin");
* an(k), the leading coefficient: a root leaves to / arrives from infinity ("infinity"). These values
  are always excluded, because the loop's order drops there;
* Delta_{n-1}(k), the (n-1)th Hurwitz determinant, computed as the resultant of the even and odd
  parts E(u), O(u) of p(s) = E(s^2) + s O(s^2) (equal to ±Delta_{n-1}): it vanishes when two roots
  sum to zero (a pair ±jω crossing — "crossing" — or a real pair ±a).

Each irreducible factor over Q gives exact rational roots (linear factors) or certified real roots
(flint ``complex_roots``; real roots come back with an exactly zero imaginary part) compared by their
balls, refined until they separate. Every open interval between consecutive candidates is classified
at an exact rational point inside it with :func:`core.analysis.routh.is_hurwitz`. Candidates are never stable,
so two stable intervals meeting at an isolated marginal value stay two intervals.

Endpoint kind, when several causes coincide at one value: "singular" first; then what happens to the
roots there: "origin" if a0 vanishes, else "crossing" if a pair sits on the imaginary axis (checked
exactly at rational values, numerically at 50 digits at irrational ones), else "infinity".

>>> from flint import fmpq_poly
>>> from core.algebra.polynomial import ParametricPolynomial
>>> r = stable_range(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K"))
>>> r.to_dict()["exact_intervals"], [(e.kind, e.omega) for e in r.endpoints]
([['0', '6']], [('origin', None), ('crossing', 1.4142135623730951)])
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from itertools import pairwise

from flint import arb, arb_poly, ctx, fmpq, fmpq_mpoly_ctx, fmpq_poly, fmpz_mpoly_ctx, fmpz_poly

from core.algebra.polynomial import ParametricPolynomial, poly_text, to_float, to_fmpq
from core.analysis.poles import certified_roots
from core.analysis.routh import (
    imaginary_axis_roots,
    integer_coefficients,
    is_hurwitz,
    real_roots,
)
from core.errors import AnalysisError

__all__ = [
    "Boundary",
    "Endpoint",
    "Margins",
    "StableRange",
    "decay_range",
    "hurwitz_delta",
    "margins",
    "real_values",
    "resultant_in_s",
    "stable_range",
]

DIGITS = 15  # significant digits shown for irrational endpoints


@dataclass(frozen=True)
class Boundary:
    """One real candidate value: an exact rational, or the one root of an irreducible integer
    polynomial ``factor`` (degree >= 2) inside the isolating interval (lo, hi) with rational ends
    (so factor(lo) and factor(hi) are nonzero and of opposite signs)."""

    factor: fmpz_poly
    lo: fmpq
    hi: fmpq
    rational: fmpq | None = None

    @classmethod
    def of_rational(cls, factor: fmpz_poly, value: fmpq) -> Boundary:
        return cls(factor, value, value, value)

    @property
    def ball(self) -> arb:
        """A ball containing the value (its midpoint is the interval's)."""
        if self.rational is not None:
            return arb(self.rational)
        return arb((self.lo + self.hi) / 2, (self.hi - self.lo) / 2)

    @property
    def value(self) -> float:
        """The nearest float; infinite when the value lies beyond the float range (see ``approx``)."""
        return to_float(self.rational) if self.rational is not None else float(self.ball.mid())

    @property
    def approx(self) -> str:
        """Twelve significant digits, also beyond the float range (``-1.25e+601``); see ``approx_text``."""
        return self.approx_text(12)

    def approx_text(self, digits: int) -> str:
        """The value in ``digits`` significant figures, with more where fewer would look exact but
        are not (3 + 1e-20 reads ``3.00000000000000000001``, never ``3``), up to 48.

        >>> Boundary.of_rational(fmpz_poly([0, 1]), fmpq(3) + fmpq(1, 10 ** 20)).approx_text(6)
        '3.00000000000000000001'
        >>> Boundary.of_rational(fmpz_poly([0, 1]), fmpq(1, 3)).approx_text(6)
        '0.333333'
        """
        text = self._digits_text(digits)
        while digits < 48 and _falsely_exact(text, digits, self.rational):
            digits *= 2
            text = self._digits_text(digits)
        return text

    def _digits_text(self, digits: int) -> str:
        v = self.value
        finite = math.isfinite(v)  # a value beyond the float range is written from its ball below
        narrow = finite and (self.rational is not None or self.hi - self.lo <= abs(to_fmpq(v)) / fmpq(10) ** (digits + 2))
        if digits <= 15 and v != 0 and narrow:
            return f"{v:.{digits}g}"
        with ctx.workprec(4 * digits + 64):
            if self.rational is not None:
                ball = arb(self.rational)
            else:
                scale = abs(self.lo) if self.lo != 0 else abs(self.hi)
                b = self.narrowed(scale / fmpq(10) ** (digits + 3))
                ball = arb((b.lo + b.hi) / 2, (b.hi - b.lo) / 2)
            head, _, power = ball.str(digits, radius=False).partition("e")
        head = head.rstrip("0").rstrip(".") if "." in head else head
        return f"{head}e{int(power):+d}" if power else head

    def sign_minus(self, v: fmpq) -> int:
        """Exact sign of (value - v) for a rational v (never 0 for an irrational value)."""
        if self.rational is not None:
            return (self.rational > v) - (self.rational < v)
        if v <= self.lo:
            return 1
        if v >= self.hi:
            return -1
        return 1 if _sign_at(self.factor, v) == _sign_at(self.factor, self.lo) else -1

    def bisected(self) -> Boundary:
        """The same value with an isolating interval half as wide (exact signs at the midpoint)."""
        if self.rational is not None:
            return self
        mid = (self.lo + self.hi) / 2
        if _sign_at(self.factor, mid) == _sign_at(self.factor, self.lo):
            return Boundary(self.factor, mid, self.hi)
        return Boundary(self.factor, self.lo, mid)

    def narrowed(self, width: fmpq) -> Boundary:
        """Bisected until its interval is at most ``width`` wide."""
        b = self
        while b.hi - b.lo > width:
            b = b.bisected()
        return b

    def text(self, name: str) -> str:
        if self.rational is not None:
            return str(self.rational)
        poly = poly_text([fmpq(self.factor[i]) for i in range(self.factor.degree(), -1, -1)], name)
        return f"root of {poly} near {self.approx_text(DIGITS)}"


def _falsely_exact(text: str, digits: int, rational: fmpq | None) -> bool:
    """True when ``text`` shows at least three figures fewer than ``digits`` (trailing zeros cut, as
    an exact decimal would look), yet differs from the value (always so for an irrational one)."""
    mantissa = text.lstrip("-").partition("e")[0].replace(".", "").lstrip("0")
    if len(mantissa) > digits - 3:
        return False
    return rational is None or to_fmpq(text) != rational


SIGN_BITS = (128, 512, 2048)  # ball precisions tried (beyond v's own bits) before exact evaluation


def _sign_at(f: fmpz_poly, v: fmpq) -> int:
    """Exact sign of f(v) at a rational v: a ball evaluation decides whenever the ball excludes 0
    (certified), else at higher precision, else exactly (a high-degree f at a many-bit v costs
    tens of milliseconds exactly, microseconds in balls).

    >>> _sign_at(fmpz_poly([-2, 0, 1]), fmpq(141421356237, 10 ** 11)), _sign_at(fmpz_poly([-4, 0, 1]), fmpq(2))
    (-1, 0)
    """
    bits = int(v.p).bit_length() + int(v.q).bit_length()
    coeffs = f.coeffs()
    for extra in SIGN_BITS:
        with ctx.workprec(bits + extra):
            y = arb_poly(coeffs)(arb(v))
        if y > 0:
            return 1
        if y < 0:
            return -1
    x = f(v)
    return (x > 0) - (x < 0)


@dataclass(frozen=True)
class Endpoint:
    value: float
    exact: str
    kind: str  # "origin" | "crossing" | "infinity" | "singular"
    omega: float | None = None
    approx: str = ""  # twelve digits, also where ``value`` is infinite (beyond the float range)

    def to_dict(self) -> dict:
        return {"value": self.value, "exact": self.exact, "kind": self.kind, "omega": self.omega,
                "approx": self.approx or f"{self.value:.12g}"}


@dataclass(frozen=True)
class Margins:
    """How far a nominal value may move inside its stable interval.

    Factors and their dB (20 log10): ``rise_factor`` = hi/nominal when nominal > 0 and hi is finite;
    ``fall_factor`` = nominal/lo when nominal > 0 and lo > 0. Otherwise None: an unbounded side, a
    nominal <= 0, or a lower end at or below 0 (lowering by any factor then never leaves the
    interval). Absolute distances (hi - nominal, nominal - lo) are given for every bounded side.
    """

    nominal: float
    stable: bool
    low: float | None = None
    high: float | None = None
    rise_factor: float | None = None
    fall_factor: float | None = None
    rise_db: float | None = None
    fall_db: float | None = None
    rise_distance: float | None = None
    fall_distance: float | None = None
    low_text: str | None = None  # the ends in twelve digits, also beyond the float range
    high_text: str | None = None

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass
class StableRange:
    """Union of open intervals (``None`` = unbounded end) where the polynomial is Hurwitz."""

    parameter: str | None
    intervals: list[tuple[Boundary | None, Boundary | None]]
    endpoints: list[Endpoint]
    stable_everywhere: bool
    never_stable: bool
    nominal: fmpq | None = None
    margins: Margins | None = None
    candidates: list[Boundary] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {
            **interval_fields(self.intervals, self.parameter or "k"),
            "endpoints": [e.to_dict() for e in self.endpoints],
            "stable_everywhere": self.stable_everywhere,
            "never_stable": self.never_stable,
        }

    def contains(self, value) -> bool:
        """Exact membership test for a rational value."""
        v = to_fmpq(value)
        return any((lo is None or _less(lo, v)) and (hi is None or _less_rev(v, hi)) for lo, hi in self.intervals)


def interval_fields(intervals: list[tuple[Boundary | None, Boundary | None]], name: str) -> dict:
    """The JSON fields of a union of intervals (None: unbounded): ``intervals`` (floats, infinite
    beyond their range), ``approx_intervals`` (twelve digits) and ``exact_intervals``."""
    def ends(text) -> list[list]:
        return [[None if lo is None else text(lo), None if hi is None else text(hi)] for lo, hi in intervals]
    return {"intervals": ends(lambda b: b.value), "approx_intervals": ends(lambda b: b.approx),
            "exact_intervals": ends(lambda b: b.text(name))}


def _less(b: Boundary, v: fmpq) -> bool:
    return b.sign_minus(v) < 0


def _less_rev(v: fmpq, b: Boundary) -> bool:
    return b.sign_minus(v) > 0


def hurwitz_delta(coeffs: list[fmpq_poly]) -> fmpq_poly:
    """±Delta_{n-1}(k) as Res_u(E, O) for p(s) = E(s^2) + s O(s^2), coefficients highest first.

    By evaluation and interpolation: Res_u(E, O) is a polynomial in k of degree at most
    deg_u(O) max deg_k(E) + deg_u(E) max deg_k(O) (the Sylvester matrix's rows), so its values at
    that many consecutive integers plus one, each an integer resultant (flint, exact), fix it; the
    points avoid the zeros of both leading coefficients in u, where the resultant of the values would
    not be the value of the resultant.

    >>> hurwitz_delta([fmpq_poly([1]), fmpq_poly([3]), fmpq_poly([2]), fmpq_poly([0, 1])])  # 6 - K
    (-1)*x + 6
    """
    n = len(coeffs) - 1
    if n < 2:
        return fmpq_poly([1])
    ints, lcd = integer_coefficients(list(coeffs))
    even = _trimmed([ints[n - 2 * i] for i in range(n // 2 + 1)])  # E(u), lowest power of u first
    odd = _trimmed([ints[n - 1 - 2 * i] for i in range((n - 1) // 2 + 1)])
    if not even or not odd:
        return fmpq_poly([])
    bound = (len(odd) - 1) * max(c.degree() for c in even) + (len(even) - 1) * max(c.degree() for c in odd)
    scale = fmpq(lcd) ** (len(even) + len(odd) - 2)
    if bound > MAX_INTERPOLATION_POINTS:
        return _bivariate_resultant(even, odd) / scale
    start = _points_start(even[-1] * odd[-1], bound + 1)
    values = [fmpz_poly([c(x) for c in even]).resultant(fmpz_poly([c(x) for c in odd]))
              for x in range(start, start + bound + 1)]
    return _interpolate_consecutive(values, start) / scale


MAX_INTERPOLATION_POINTS = 300  # beyond, the differences cost O(points^2) in Python: one bivariate resultant


def _bivariate_resultant(even: list[fmpz_poly], odd: list[fmpz_poly]) -> fmpq_poly:
    """Res_u(E, O) of E(u, k), O(u, k) given as coefficients in k of each power of u (lowest first),
    computed at once by flint's multivariate resultant (exact)."""
    mctx = fmpz_mpoly_ctx.get(("u", "k"), "lex")

    def lift(parts: list[fmpz_poly]):
        return mctx.from_dict({(i, j): c[j] for i, c in enumerate(parts) for j in range(c.degree() + 1) if c[j] != 0})
    terms = {exps[1]: c for exps, c in lift(even).resultant(lift(odd), "u").to_dict().items()}
    return fmpq_poly([terms.get(j, 0) for j in range(max(terms, default=-1) + 1)])


def _trimmed(coeffs: list[fmpz_poly]) -> list[fmpz_poly]:
    """Coefficients (lowest power first) without identically zero ones at the top."""
    while coeffs and coeffs[-1].is_zero():
        coeffs = coeffs[:-1]
    return coeffs


def _points_start(lead: fmpz_poly, count: int) -> int:
    """The least x >= 0 with ``lead`` nonzero at x, x + 1, ..., x + count - 1."""
    start, x = 0, 0
    while x < start + count:
        if lead(x) == 0:
            start = x + 1
        x += 1
    return start


def _interpolate_consecutive(values: list, start: int) -> fmpq_poly:
    """The polynomial of degree < len(values) taking ``values`` at start, start + 1, ...: Newton's
    forward differences (integers), then sum_j Delta^j C(x - start, j) by Horner's rule."""
    diffs = list(values)
    heads = []
    while diffs:
        heads.append(diffs[0])
        diffs = [b - a for a, b in pairwise(diffs)]
    x = fmpq_poly([-start, 1])
    out = fmpq_poly([heads[-1]])
    for j in range(len(heads) - 2, -1, -1):  # C(t, j + 1) = C(t, j) (t - j) / (j + 1)
        out = out * (x - j) / (j + 1) + heads[j]
    return out


def resultant_in_s(p: ParametricPolynomial, q: ParametricPolynomial) -> fmpq_poly:
    """Res_s(p, q) as a polynomial in the tuning parameter: zero at k where p and q share a root
    (or both leading coefficients vanish).

    >>> resultant_in_s(ParametricPolynomial.from_coefficients([1, fmpq_poly([0, 1])], "K"),
    ...                ParametricPolynomial.from_coefficients([1, 1], "K"))  # s + K and s + 1: 1 - K
    (-1)*x + 1
    """
    mctx = fmpq_mpoly_ctx.get(("s", "k"), "lex")

    def lift(poly: ParametricPolynomial):
        n = poly.degree
        return mctx.from_dict({(n - i, j): c[j] for i, c in enumerate(poly.coeffs)
                               for j in range(c.degree() + 1) if c[j] != 0})
    res = lift(p).resultant(lift(q), "s")
    terms = {exps[1]: c for exps, c in res.to_dict().items()}
    return fmpq_poly([terms.get(j, 0) for j in range(max(terms, default=-1) + 1)])


def real_values(p: fmpq_poly) -> list[Boundary]:
    """The distinct real roots of a nonzero polynomial, exact (rational or isolated), increasing."""
    return _boundaries(_irreducible_factors(p))


def _irreducible_factors(p: fmpq_poly) -> list[fmpz_poly]:
    if p.degree() <= 0:
        return []
    _, factors = p.numer().factor()
    out = []
    for f, _ in factors:
        if f.leading_coefficient() < 0:
            f = -f
        out.append(f)
    return out


def _key(f: fmpz_poly) -> tuple[int, ...]:
    return tuple(int(c) for c in f.coeffs())


def _boundaries(factors: list[fmpz_poly]) -> list[Boundary]:
    """All real roots of distinct irreducible factors, in increasing order, each isolating interval
    strictly left of the next one's (exact: interval ends are rationals, refined by bisection with
    exact signs; two distinct candidates always separate, so this terminates)."""
    found: list[Boundary] = []
    for f in factors:
        if f.degree() == 1:
            found.append(Boundary.of_rational(f, -fmpq(f[0], f[1])))
        else:
            found += [_isolated(f, ball) for ball in real_roots(f)]
    while True:
        found.sort(key=lambda b: (b.lo, b.hi))
        clash = next((i for i in range(len(found) - 1) if not found[i].hi < found[i + 1].lo), None)
        if clash is None:
            return found
        a, b = found[clash], found[clash + 1]
        wider = clash if a.hi - a.lo >= b.hi - b.lo else clash + 1
        found[wider] = found[wider].bisected()


def _isolated(f: fmpz_poly, ball: arb) -> Boundary:
    """The root of f in a certified real ball as an exact isolating interval [mid - rad, mid + rad]
    (the ball holds exactly one root of f, irrational, so strictly inside)."""
    mid, rad = _fmpq_of(ball.mid()), _fmpq_of(ball.rad())
    return Boundary(f, mid - rad, mid + rad)


def _fmpq_of(x: arb) -> fmpq:
    """The midpoint of a ball, exactly."""
    man, exp = x.mid().man_exp()
    return fmpq(int(man)) * fmpq(2) ** int(exp) if exp >= 0 else fmpq(int(man), 2 ** int(-exp))


def _simplest_between(x: fmpq | None, y: fmpq | None) -> fmpq:
    """The rational with the smallest denominator (then magnitude) strictly inside (x, y)."""
    if x is not None and y is not None and not x < y:
        raise ValueError("empty interval")
    if (x is None or x < 0) and (y is None or y > 0):
        return fmpq(0)
    if y is not None and y <= 0:
        return -_simplest_between(-y, None if x is None else -x)
    assert x is not None  # here 0 <= x < y or y is None
    n = fmpq(x.floor())
    if y is None or n + 1 < y:
        return fmpq(n + 1)
    if x == n:
        return n + 1 / _simplest_between(1 / (y - n), None)
    return n + 1 / _simplest_between(1 / (y - n), 1 / (x - n))


def _test_points(bounds: list[Boundary]) -> list[fmpq]:
    if not bounds:
        return [fmpq(0)]
    pts = [_simplest_between(None, bounds[0].lo)]
    for a, b in pairwise(bounds):
        pts.append(_simplest_between(a.hi, b.lo))
    pts.append(_simplest_between(bounds[-1].hi, None))
    return pts


def stable_range(poly: ParametricPolynomial, nominal=None) -> StableRange:
    """The exact stable set of the tuning parameter (see the module notes for the method).

    Raises AnalysisError E403 for the zero polynomial.
    """
    n = poly.degree
    if n < 0:
        raise AnalysisError("E403", "the characteristic polynomial is identically zero")
    nominal_q = None if nominal is None else to_fmpq(nominal)
    if all(c.degree() <= 0 for c in poly.coeffs):
        stable = is_hurwitz(poly.at(), n)
        out = StableRange(poly.parameter, [(None, None)] if stable else [], [], stable, not stable, nominal_q)
        return _with_margins(out)
    content = poly.coeffs[0]
    for c in poly.coeffs[1:]:
        content = content.gcd(c)
    reduced = [c // content for c in poly.coeffs] if content.degree() > 0 else list(poly.coeffs)
    sources = {"singular": content, "origin": reduced[-1], "infinity": reduced[0],
               "crossing": hurwitz_delta(reduced)}
    owner: dict[tuple[int, ...], set[str]] = {}
    factors = []
    for kind, p in sources.items():
        if p.is_zero():
            continue
        for f in _irreducible_factors(p):
            if _key(f) not in owner:
                factors.append(f)
            owner.setdefault(_key(f), set()).add(kind)
    bounds = _boundaries(factors)
    reduced_poly = ParametricPolynomial(tuple(reduced), poly.parameter)
    flags = [is_hurwitz(reduced_poly.at(x), n) for x in _test_points(bounds)]
    intervals = []
    ends: list[Boundary] = []
    for i, stable in enumerate(flags):
        if not stable:
            continue
        lo = bounds[i - 1] if i > 0 else None
        hi = bounds[i] if i < len(bounds) else None
        intervals.append((lo, hi))
        ends += [b for b in (lo, hi) if b is not None and (not ends or ends[-1] is not b)]
    name = poly.parameter or "k"
    endpoints = [_endpoint(b, owner[_key(b.factor)], reduced_poly, name) for b in ends]
    out = StableRange(poly.parameter, intervals, endpoints,
                      stable_everywhere=intervals == [(None, None)], never_stable=not intervals,
                      nominal=nominal_q, candidates=bounds)
    return _with_margins(out)


def _with_margins(r: StableRange) -> StableRange:
    if r.nominal is not None:
        r.margins = margins(r, r.nominal)
    return r


def _endpoint(b: Boundary, kinds: set[str], poly: ParametricPolynomial, name: str) -> Endpoint:
    exact = b.text(name)
    if "singular" in kinds:
        return Endpoint(b.value, exact, "singular", approx=b.approx)
    if "origin" in kinds:
        return Endpoint(b.value, exact, "origin", approx=b.approx)
    drops = "infinity" in kinds
    if "crossing" in kinds:
        omega, on_axis = _crossing_omega(b, poly, drops)
        if on_axis or not drops:
            return Endpoint(b.value, exact, "crossing", omega, b.approx)
    return Endpoint(b.value, exact, "infinity", approx=b.approx)


CROSSING_BITS = 512  # an irrational crossing value is approached by a rational this close


def _crossing_omega(b: Boundary, poly: ParametricPolynomial, drops: bool) -> tuple[float | None, bool]:
    """(omega, on_axis): smallest omega > 0 with ±jω a root at the boundary value.

    Exact at rational values. At an irrational value b, from certified roots at a rational r with
    |r - b| below 2^-512: p(jω) = 0 means u = -ω^2 is a common root of the even and odd parts E(u),
    O(u) of p(s) = E(s^2) + s O(s^2), so the negative real roots of the one of lower degree (half
    the degree of p, much cheaper to isolate) are the candidates, and the pair is the one where the
    other part is smallest against the size of its terms. A root of multiplicity m moves by about
    |r - b|^(1/m), far below double precision, so repeated pairs keep their omega; ``on_axis`` when
    that relative residual is below 1e-6 (a common root's is near 2^-512, any other's near 1).
    """
    if b.rational is not None:
        pairs = [w for w, _ in imaginary_axis_roots(poly.at(b.rational)) if w > 0]
        return (pairs[0], True) if pairs else (None, False)
    near = b.narrowed(fmpq(1, 2 ** CROSSING_BITS))
    coeffs = poly.at((near.lo + near.hi) / 2)
    if drops:
        coeffs = coeffs[1:]
    n = len(coeffs) - 1
    halves = [[coeffs[n - 2 * i] for i in range(n // 2 + 1)],
              [coeffs[n - 1 - 2 * i] for i in range((n - 1) // 2 + 1)] if n >= 1 else [fmpq(0)]]
    parts = [fmpq_poly(half) for half in halves]  # lowest power of u first
    if min(part.degree() for part in parts) < 1:
        return _omega_from_all_roots(coeffs)
    roots_of, other = sorted(parts, key=lambda part: part.degree())
    best = None
    for u in certified_roots([roots_of[i] for i in range(roots_of.degree(), -1, -1)]):
        if u.im == 0 and u.re < 0:
            residual = _relative_value(other, u.re)
            if best is None or residual < best[0]:
                best = (residual, math.sqrt(-u.re))
    if best is None:
        return None, False
    return best[1], best[0] <= 1e-6


def _relative_value(f: fmpq_poly, x: float) -> float:
    """|f(x)| / sum |f_i x^i| (the size of f's terms), in floating point (f scaled first so that
    its largest coefficient is 1: no overflow)."""
    top = max(abs(f[i]) for i in range(f.degree() + 1))
    value = size = 0.0
    for i in range(f.degree(), -1, -1):
        c = float(f[i] / top)
        value = value * x + c
        size = size * abs(x) + abs(c)
    return abs(value) / size if size else math.inf


def _omega_from_all_roots(coeffs: list[fmpq]) -> tuple[float | None, bool]:
    """(omega, on_axis) from every certified root (low degrees): the pair nearest the axis."""
    upper = [p for p in certified_roots(coeffs) if p.im > 0]
    if not upper:
        return None, False
    nearest = min(upper, key=lambda p: (abs(p.re), p.im))
    return nearest.im, abs(nearest.re) <= 1e-6 * max(1.0, nearest.natural_frequency)


def margins(r: StableRange, nominal) -> Margins:
    """Margins of ``nominal`` inside its stable interval (all None fields when it is not stable).

    >>> from flint import fmpq_poly
    >>> from core.algebra.polynomial import ParametricPolynomial
    >>> m = margins(stable_range(ParametricPolynomial.from_coefficients([1, 3, 2, fmpq_poly([0, 1])], "K")), 2)
    >>> m.rise_factor, round(m.rise_db, 3), m.fall_factor
    (3.0, 9.542, None)
    """
    v = to_fmpq(nominal)
    for lo, hi in r.intervals:
        if (lo is None or _less(lo, v)) and (hi is None or _less_rev(v, hi)):
            break
    else:
        return Margins(float(v), False)
    nom = float(v)
    low = None if lo is None else lo.value
    high = None if hi is None else hi.value
    rise = high / nom if v > 0 and high is not None else None
    fall = nom / low if v > 0 and low is not None and low > 0 else None
    return Margins(nom, True, low, high, rise, fall,
                   None if rise is None else 20 * math.log10(rise),
                   None if fall is None else 20 * math.log10(fall),
                   None if high is None else high - nom, None if low is None else nom - low,
                   None if lo is None else lo.approx, None if hi is None else hi.approx)


def decay_range(poly: ParametricPolynomial, sigma, nominal=None) -> StableRange:
    """Values where every root lies left of Re s = -sigma (``stable_range`` of ``poly.shifted(sigma)``).

    Endpoint kinds then refer to the line Re s = -sigma: "origin" means a real root crosses it at
    s = -sigma, "crossing" a pair crossing at -sigma ± jω.
    """
    return stable_range(poly.shifted(to_fmpq(sigma)), nominal)
