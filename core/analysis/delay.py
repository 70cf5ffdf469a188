"""Stability of loops with dead time: characteristic quasi-polynomials Q(s) = sum_k P_k(s) e^(-s tau_k).

Scope: retarded loops (the delay-free part P_0 has the full degree n, every delayed part a lower
one); neutral and advanced loops are refused (E442). Delays are exact non-negative rationals.

What is exact and what is certified:

* Roots at s = 0 and everything about the delay-free loop (tau = 0) are exact (rational
  arithmetic, :func:`core.analysis.routh.routh_counts`).
* Right-half-plane root counts are certified. With one delayed part (Q = P_0 + P_1 e^(-s tau))
  by D-subdivision: the count at tau = 0 (exact) plus two for every pair that crosses the imaginary
  axis as the delay grows from 0 to tau. A crossing at s = jω needs |P_0(jω)| = |P_1(jω)|, i.e. a
  positive root of the exact polynomial W(ω^2) = |P_0(jω)|^2 - |P_1(jω)|^2, isolated exactly; the
  delays where it happens are tau_m = (theta + 2 pi m) / ω, theta = pi - arg(P_0(jω) / P_1(jω)) in
  ball arithmetic (arb), and the direction is the sign of Re(ds/dtau), the same for every m. With
  several delays, by the argument principle on the rectangle [0, R] x [-R, R], R the magnitude bound
  beyond which the term of degree n outweighs all others in the closed right half plane, with
  interval (acb) enclosures on every piece of the contour so that no piece can hide a root.
* The stable range of a tuning gain K that enters affinely (Q = A + K B) at fixed delays: the
  candidates are K = -A(0)/B(0) (exact) and K(ω) = -A(jω)/B(jω) at the zeros of
  g(ω) = Im(A(jω) conj B(jω)) on (0, Ω], Ω the magnitude bound for |K| <= M; zeros are isolated by
  interval bisection with a derivative (monotonicity) test and a sign change, so none is missed;
  every interval between candidates is decided by a certified count at a rational point inside it.
  Certified on the window |K| <= M (reported); M grows until the outermost intervals are unstable.
* The delay margin (the largest extra delay added to every delayed part): the least theta / ω over
  the frequencies where |P_0(jω)| = |B(jω)|, B the delayed parts together; exact roots of W for one
  delayed part, certified interval bisection on (0, R] for several.
* The delay as tuning parameter (one delayed part): every crossing event tau_m in increasing order,
  up to the value past which the destabilising crossings provably outnumber the others for good.
* Rightmost roots: the argument principle on rectangles (each holding one root) plus Newton's
  method, validated when as many roots are found as the region's certified count.
* Endpoints, crossing frequencies and delay margins are balls of relative width at most 1e-9
  (frequencies are refined to 1e-13 relative first).

>>> from flint import fmpq
>>> loop = single_delay_loop([fmpq(1), fmpq(1)], [fmpq(1, 2)], fmpq(1))  # s + 1 + e^(-s)/2
>>> rhp_count(loop.parts), delay_margin(loop.parts).unbounded
(0, True)
"""
from __future__ import annotations

import cmath
import itertools
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from flint import acb, acb_poly, arb, ctx, fmpq, fmpq_poly

from core.algebra.polynomial import to_float
from core.analysis.routh import routh_counts
from core.analysis.stable_range import real_values
from core.errors import AnalysisError

__all__ = [
    "Candidate",
    "Crossing",
    "DelayMargin",
    "DelayRange",
    "Parts",
    "RootSet",
    "crossings",
    "delay_margin",
    "delay_range",
    "gain_range",
    "magnitude_bound",
    "normal_parts",
    "rhp_count",
    "rightmost_roots",
    "single_delay_loop",
]

PREC = 96  # working precision of the ball arithmetic, bits
OMEGA_REL = 1e-13  # crossing frequencies are refined to this relative width
TARGET_REL = 1e-9  # the promised relative width of endpoints and margins
MAX_DEPTH = 64  # bisection depth before a search gives up (E446)
MAX_PIECES = 200_000  # contour or frequency pieces before a search gives up (E446)

Parts = list[tuple[fmpq, list[fmpq]]]  # (delay, coefficients highest power first), delay 0 first


@dataclass(frozen=True)
class Loop:
    """A numeric quasi-polynomial (see :data:`Parts`), normalised and checked to be retarded."""

    parts: Parts


def single_delay_loop(p0: Sequence, p1: Sequence, tau) -> Loop:
    """P_0(s) + P_1(s) e^(-s tau) from two coefficient lists (highest power first)."""
    return Loop(normal_parts([(fmpq(0), [fmpq(c) for c in p0]), (fmpq(tau), [fmpq(c) for c in p1])]))


def _strip(coeffs: Sequence[fmpq]) -> list[fmpq]:
    out = list(coeffs)
    while out and out[0] == 0:
        out.pop(0)
    return out


def normal_parts(parts: Sequence[tuple[fmpq, Sequence[fmpq]]], where: str = "polynomial",
                 retarded: bool = True) -> Parts:
    """Parts with equal delays merged, zero parts dropped, the delay-free part first (created empty
    if missing), checked: delays >= 0 (E440), and retarded (E442) unless ``retarded`` is False (the
    gain's part B of A + K B)."""
    merged: dict[fmpq, fmpq_poly] = {}
    for tau, coeffs in parts:
        if tau < 0:
            raise AnalysisError("E440", f"delay {tau} is negative: a dead time is at least 0", where=where)
        merged[tau] = merged.get(tau, fmpq_poly([])) + fmpq_poly(list(reversed([fmpq(c) for c in coeffs])))
    merged.setdefault(fmpq(0), fmpq_poly([]))
    out: Parts = []
    for tau in sorted(merged):
        poly = merged[tau]
        if tau == 0 or not poly.is_zero():
            out.append((tau, [poly[i] for i in range(poly.degree(), -1, -1)] if not poly.is_zero() else []))
    if retarded:
        check_retarded(out, where)
    return out


def check_retarded(parts: Parts, where: str = "polynomial") -> None:
    """E442 unless the delay-free part has a degree above every delayed part's."""
    n = len(parts[0][1]) - 1
    top = max((len(c) - 1 for _, c in parts[1:]), default=-1)
    if n < 0 and top < 0:
        raise AnalysisError("E403", "the characteristic quasi-polynomial is identically zero", where=where)
    if top == n:
        raise AnalysisError("E442", f"neutral loop: a delayed term has the full degree {n} in s (its roots "
                            "crowd a vertical line; not analysed)", where=where)
    if top > n:
        raise AnalysisError("E442", f"advanced loop: a delayed term has degree {top}, above the delay-free "
                            f"part's {max(n, 0)} (infinitely many right-half-plane roots)", where=where)


# -- bounds and evaluation ----------------------------------------------------------------------
def magnitude_bound(lead: fmpq, lower: Sequence[fmpq]) -> fmpq:
    """A rational R with |lead| x^n > sum_i lower[i] x^i for every x >= R (``lower`` indexed by the
    power, all >= 0, n = len(lower)): R lies beyond the one positive root of that polynomial
    (Descartes), checked exactly; Fujiwara's bound 2 max (lower[i]/|lead|)^(1/(n-i)) is the fallback.

    >>> magnitude_bound(fmpq(1), [fmpq(2), fmpq(1)]) >= 2  # x^2 > x + 2 beyond x = 2
    True
    """
    n = len(lower)
    a = abs(lead)
    ratios = [to_float(c / a) for c in lower]
    fujiwara = 2 * max((r ** (1 / (n - i)) for i, r in enumerate(ratios) if r > 0), default=0.0)
    if fujiwara == 0:
        return fmpq(1, 2 ** 30)

    def excess(x: fmpq) -> fmpq:
        return a * x ** n - sum((c * x ** i for i, c in enumerate(lower)), fmpq(0))
    lo, hi = 0.0, fujiwara
    for _ in range(40):
        mid = (lo + hi) / 2
        lo, hi = (lo, mid) if excess(fmpq(*mid.as_integer_ratio())) > 0 else (mid, hi)
    for candidate in (hi * 1.001, fujiwara * 1.001):
        r = fmpq(*float(candidate).as_integer_ratio())
        if excess(r) > 0:
            return r
    raise AssertionError("Fujiwara's bound failed")  # pragma: no cover - it is a proven bound


def parts_bound(parts: Parts, sigma: fmpq | None = None) -> fmpq:
    """R with no root of Q in {Re s >= sigma, |s| >= R} (sigma <= 0): there |e^(-s tau)| <=
    e^(-sigma tau), bounded above by a rational."""
    n = len(parts[0][1]) - 1
    lower = [fmpq(0)] * n
    for tau, coeffs in parts:
        factor = fmpq(1) if sigma is None or sigma == 0 or tau == 0 else _upper_exp(-sigma * tau)
        d = len(coeffs) - 1
        for k, c in enumerate(coeffs):
            power = d - k
            if power < n:
                lower[power] += abs(c) * factor
    return magnitude_bound(parts[0][1][0], lower)


def _upper_exp(x: fmpq) -> fmpq:
    with ctx.workprec(PREC):
        value = arb(x).exp()
        return _fmpq_of(value.upper()) + fmpq(1, 2 ** 40)


def _fmpq_of(x: arb) -> fmpq:
    man, exp = x.mid().man_exp()
    return fmpq(int(man)) * fmpq(2) ** int(exp) if exp >= 0 else fmpq(int(man), 2 ** int(-exp))


class Evaluator:
    """Q(s) and Q'(s) in ball arithmetic (acb) for numeric parts."""

    def __init__(self, parts: Parts):
        self.terms = []
        for tau, coeffs in parts:
            low_first = [acb(arb(c)) for c in reversed(coeffs)] or [acb(0)]
            poly = acb_poly(low_first)
            self.terms.append((arb(tau), tau == 0, poly, poly.derivative()))

    def value(self, s: acb) -> acb:
        total = acb(0)
        for tau, free, poly, _ in self.terms:
            total += poly(s) if free else poly(s) * (-s * tau).exp()
        return total

    def derivative(self, s: acb) -> acb:
        total = acb(0)
        for tau, free, poly, deriv in self.terms:
            total += deriv(s) if free else (deriv(s) - tau * poly(s)) * (-s * tau).exp()
        return total


def _span(a: float, b: float) -> arb:
    """A ball holding the real interval [a, b]."""
    return arb(a) + (arb(b) - arb(a)) * arb(0.5, 0.5)


def _excludes_zero(z: acb) -> bool:
    return not (z.real.contains(0) and z.imag.contains(0))


# -- argument principle -------------------------------------------------------------------------
def winding(ev: Evaluator, corners: Sequence[complex]) -> int:
    """Roots of Q inside the closed polygon ``corners`` (counter-clockwise), certified: every
    contour piece is bisected until the ball enclosing Q on it excludes 0, so the argument changes
    by less than pi across it and the principal difference of its end values is the true change.
    E446 when an edge passes (too near) a root."""
    total = 0.0
    pieces = 0
    with ctx.workprec(PREC):
        for start, end in zip(corners, [*list(corners[1:]), corners[0]]):
            stack = [(0.0, 1.0, 0)]
            values: dict[float, acb] = {}
            while stack:
                t0, t1, depth = stack.pop()
                pieces += 1
                box = _segment_box(start, end, t0, t1)
                if _excludes_zero(ev.value(box)):
                    v0 = values.get(t0) or ev.value(_point(start, end, t0))
                    v1 = values.get(t1) or ev.value(_point(start, end, t1))
                    values[t0], values[t1] = v0, v1
                    total += cmath.phase(complex(v1 / v0))
                    continue
                if depth >= MAX_DEPTH or pieces > MAX_PIECES:
                    raise AnalysisError("E446", "a root lies on or too near the contour of the certified "
                                        f"count (near s = {complex(_point(start, end, t0)):.6g})", where="delay loop")
                mid = (t0 + t1) / 2
                stack += [(mid, t1, depth + 1), (t0, mid, depth + 1)]
    turns = total / (2 * math.pi)
    count = round(turns)
    if abs(turns - count) > 0.05:  # pragma: no cover - each piece's change is exact up to rounding
        raise AnalysisError("E446", "the certified root count did not close", where="delay loop")
    return count


def _point(a: complex, b: complex, t: float) -> acb:
    return acb(arb(a.real) + (arb(b.real) - arb(a.real)) * arb(t), arb(a.imag) + (arb(b.imag) - arb(a.imag)) * arb(t))


def _segment_box(a: complex, b: complex, t0: float, t1: float) -> acb:
    t = _span(t0, t1)
    return acb(arb(a.real) + (arb(b.real) - arb(a.real)) * t, arb(a.imag) + (arb(b.imag) - arb(a.imag)) * t)


# -- crossings of one delayed part ---------------------------------------------------------------
@dataclass(frozen=True)
class Crossing:
    """A pair ±jω on the imaginary axis when the delayed part's extra delay is
    (theta + 2 pi m) / omega, m = 0, 1, ...; ``direction`` +1 when the pair moves into the right
    half plane as the delay grows, -1 when it moves out. ``omega`` and ``theta`` are balls."""

    omega: arb
    theta: arb
    direction: int

    def delay(self, m: int = 0) -> arb:
        with ctx.workprec(PREC):
            return (self.theta + 2 * arb.pi() * m) / self.omega

    def to_dict(self) -> dict:
        return {"omega": float(self.omega.mid()), "omega_text": self.omega.str(12, radius=False),
                "first_delay": float(self.delay(0).mid()), "direction": "destabilising" if self.direction > 0
                else "stabilising", "period": float((2 * arb.pi() / self.omega).mid())}


def _re_im(coeffs: Sequence[fmpq]) -> tuple[fmpq_poly, fmpq_poly]:
    """Real and imaginary parts of P(jω) as polynomials in ω."""
    low = list(reversed(coeffs))
    re = [c * (1, 0, -1, 0)[i % 4] for i, c in enumerate(low)]
    im = [c * (0, 1, 0, -1)[i % 4] for i, c in enumerate(low)]
    return fmpq_poly(re), fmpq_poly(im)


def magnitude_difference(p0: Sequence[fmpq], p1: Sequence[fmpq]) -> fmpq_poly:
    """W(x) with W(ω^2) = |P_0(jω)|^2 - |P_1(jω)|^2, exact.

    >>> magnitude_difference([fmpq(1), fmpq(1)], [fmpq(2)])  # ω^2 + 1 - 4
    x + (-3)
    """
    r0, i0 = _re_im(p0)
    r1, i1 = _re_im(p1)
    w = r0 * r0 + i0 * i0 - r1 * r1 - i1 * i1
    return fmpq_poly([w[2 * i] for i in range(w.degree() // 2 + 1)]) if not w.is_zero() else w


def crossings(p0: Sequence[fmpq], delayed: Parts) -> list[Crossing]:
    """Every crossing of P_0(s) + e^(-s delta) B(s), delta >= 0 the extra delay, B = sum of the
    delayed parts at their delays. One delayed part: from the exact roots of W; several: the zeros
    of |P_0(jω)|^2 - |B(jω)|^2 on (0, R] by certified interval bisection (:func:`real_zeros`), R the
    magnitude bound beyond which |P_0(jω)| exceeds the sum of the delayed parts' magnitudes."""
    if len(delayed) != 1:
        return _interval_crossings(p0, delayed)
    tau, p1 = delayed[0]
    w = magnitude_difference(p0, p1)
    if w.is_zero():
        raise AnalysisError("E446", "|P_0(jω)| = |P_1(jω)| at every frequency: degenerate loop", where="delay loop")
    square_part = w.gcd(w.derivative())
    if square_part.degree() > 0 and any(b.sign_minus(fmpq(0)) > 0 for b in real_values(square_part)):
        raise AnalysisError("E446", "a repeated crossing frequency (a pair touches the imaginary axis "
                            "without crossing): not analysed", where="delay loop")
    ev0, ev1 = Evaluator([(fmpq(0), list(p0))]), Evaluator([(tau, list(p1))])
    out = []
    for b in real_values(w):
        if b.sign_minus(fmpq(0)) <= 0:
            continue
        out.append(_crossing(b, ev0, ev1))
    return out


def _interval_crossings(p0: Sequence[fmpq], delayed: Parts) -> list[Crossing]:
    ev0, evb = Evaluator([(fmpq(0), list(p0))]), Evaluator(delayed)
    at_zero = sum((c[-1] for _, c in delayed if c), fmpq(0))
    if p0 and p0[-1] ** 2 == at_zero ** 2:
        raise AnalysisError("E446", "|P_0| = |B| at zero frequency: crossings of a loop with several delays "
                            "are not searched then", where="delay loop")
    r = to_float(parts_bound(normal_parts([(fmpq(0), list(p0)), *delayed]))) * (1 + 1e-9) + 1e-9

    def f(w: arb) -> arb:
        s = acb(0, w)
        v0, vb = ev0.value(s), evb.value(s)
        return v0.real ** 2 + v0.imag ** 2 - vb.real ** 2 - vb.imag ** 2

    def df(w: arb) -> arb:
        s = acb(0, w)
        j = acb(0, 1)
        return 2 * ((ev0.value(s).conjugate() * j * ev0.derivative(s)).real
                    - (evb.value(s).conjugate() * j * evb.derivative(s)).real)
    return [_crossing_at(w, ev0, evb) for w in real_zeros(f, df, 0.0, r)]


def _crossing(b, ev0: Evaluator, ev1: Evaluator) -> Crossing:
    with ctx.workprec(PREC):
        x = b.narrowed(abs(b.lo) * fmpq(1, 10 ** 14) if b.lo != 0 else fmpq(1, 10 ** 30)).ball
        return _crossing_at(x.sqrt(), ev0, ev1)


def _crossing_at(omega: arb, ev0: Evaluator, ev1: Evaluator) -> Crossing:
    """The crossing at the frequency ball ``omega``: theta = pi - arg(P_0/B) and the direction."""
    with ctx.workprec(PREC):
        s = acb(0, omega)
        v0, v1 = ev0.value(s), ev1.value(s)
        theta = arb.pi() - (v0 / v1).arg()
        d0, d1 = ev0.derivative(s), ev1.derivative(s)
        push = -((d0 / v0 - d1 / v1) / s).real
        if push.contains(0):
            raise AnalysisError("E446", f"the crossing at ω = {float(omega.mid()):.6g} has no certified "
                                "direction", where="delay loop")
        return Crossing(omega, theta, 1 if push > 0 else -1)


# -- counts -------------------------------------------------------------------------------------
def origin_value(parts: Parts) -> fmpq:
    """Q(0), exact."""
    return sum((c[-1] for _, c in parts if c), fmpq(0))


def rhp_count(parts: Parts) -> int:
    """Right-half-plane roots of the quasi-polynomial, certified (see the module notes). E446 when
    a root lies on the imaginary axis (exactly at s = 0, or within the arithmetic's reach)."""
    if origin_value(parts) == 0:
        raise AnalysisError("E446", "a root at s = 0: on the imaginary axis", where="delay loop")
    if len(parts) == 1:
        return routh_counts(parts[0][1]).rhp
    if len(parts) == 2:
        swept = _swept_count(parts)
        if swept is not None:
            return swept
    r = to_float(parts_bound(parts)) * (1 + 1e-9) + 1e-9
    return winding(Evaluator(parts), [complex(0, -r), complex(r, -r), complex(r, r), complex(0, r)])


def _swept_count(parts: Parts) -> int | None:
    """D-subdivision from tau = 0 (None when the delay-free loop has roots on the axis there)."""
    (_, p0), (tau, p1) = parts
    total = fmpq_poly(list(reversed(p0))) + fmpq_poly(list(reversed(p1)))
    counts = routh_counts([total[i] for i in range(total.degree(), -1, -1)])
    if counts.jw:
        return None
    count = counts.rhp
    with ctx.workprec(PREC):
        for c in crossings(p0, [(fmpq(0), p1)]):
            count += 2 * c.direction * _crossings_below(c, arb(tau))
    return count


def _crossings_below(c: Crossing, tau: arb) -> int:
    """#{m >= 0 : (theta + 2 pi m) / omega < tau}, certified (E446 if tau sits on a crossing)."""
    m_real = (tau * c.omega - c.theta) / (2 * arb.pi())
    if m_real < 0:
        return 0
    floor_lo, floor_hi = math.floor(float(m_real.lower())), math.floor(float(m_real.upper()))
    if floor_lo != floor_hi or m_real.contains(floor_lo):
        raise AnalysisError("E446", f"a root lies on the imaginary axis near ω = {float(c.omega.mid()):.6g}",
                            where="delay loop")
    return floor_lo + 1


# -- delay margin -------------------------------------------------------------------------------
@dataclass
class DelayMargin:
    """The largest extra delay (added to every delayed part) the loop tolerates, certified: a ball
    ``value`` (relative width <= 1e-9) and its crossing frequency; ``unbounded`` when no crossing
    exists (stable for every extra delay); None fields when the nominal loop is not stable."""

    stable: bool
    value: arb | None = None
    omega: arb | None = None
    unbounded: bool = False
    crossings: list[Crossing] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {"stable": self.stable, "unbounded": self.unbounded,
                "value": None if self.value is None else float(self.value.mid()),
                "approx": None if self.value is None else self.value.str(12, radius=False),
                "certified": None if self.value is None else self.value.str(15),
                "omega": None if self.omega is None else float(self.omega.mid()),
                "relative_width": None if self.value is None else _relative_width(self.value)}


def _relative_width(x: arb) -> float:
    mid = abs(float(x.mid()))
    return float(x.rad()) / mid if mid else math.inf


def delay_margin(parts: Parts) -> DelayMargin:
    """Delay margin at the given delays: min over crossing frequencies ω of theta / ω."""
    stable = rhp_count(parts) == 0
    found = crossings(parts[0][1], parts[1:])
    if not stable:
        return DelayMargin(False, crossings=found)
    if not found:
        return DelayMargin(True, unbounded=True)
    first = min(found, key=lambda c: float(c.delay(0).mid()))
    value = first.delay(0)
    if _relative_width(value) > TARGET_REL:  # pragma: no cover - frequencies are refined to 1e-13
        raise AnalysisError("E446", "the delay margin could not be certified to 1e-9", where="delay loop")
    return DelayMargin(True, value, first.omega, crossings=found)


# -- zeros of a real function of frequency --------------------------------------------------------
RealFunction = Callable[[arb], arb]


def real_zeros(f: RealFunction, df: RealFunction, lo: float, hi: float, skip_origin: bool = False) -> list[arb]:
    """Every zero of f on (lo, hi], each a ball of relative width <= 1e-13, certified: a piece is
    dropped only when f's enclosure on it excludes 0 or f is proven monotone there with no sign
    change; a zero is kept only where f is monotone with a proven sign change. ``skip_origin``: f(0) =
    0 is known and not wanted (a piece [0, b] with f' excluding 0 holds no other zero). E446 for a
    zero that cannot be isolated (repeated, or beyond the search bounds)."""
    out: list[arb] = []
    stack = [(lo, hi, 0)]
    pieces = 0
    with ctx.workprec(PREC):
        while stack:
            a, b, depth = stack.pop()
            pieces += 1
            span = _span(a, b)
            if not f(span).contains(0):
                continue
            slope = df(span)
            if not slope.contains(0):
                if skip_origin and a == 0:
                    continue
                fa, fb = f(arb(a)), f(arb(b))
                if (fa > 0 and fb < 0) or (fa < 0 and fb > 0):
                    out.append(_refine(f, a, b, fa > 0))
                    continue
                if (fa > 0 and fb > 0) or (fa < 0 and fb < 0):
                    continue
            if depth >= MAX_DEPTH or pieces > MAX_PIECES:
                raise AnalysisError("E446", f"a repeated or unresolved zero near ω = {a:.6g}", where="delay loop")
            mid = (a + b) / 2
            stack += [(mid, b, depth + 1), (a, mid, depth + 1)]
    return sorted(out, key=lambda x: float(x.mid()))


def _refine(f: RealFunction, a: float, b: float, positive_at_a: bool) -> arb:
    while b - a > OMEGA_REL * abs(b):
        mid = (a + b) / 2
        if mid in (a, b):
            break
        value = f(arb(mid))
        if value.contains(0):
            break
        if (value > 0) == positive_at_a:
            a = mid
        else:
            b = mid
    return _span(a, b)


# -- stable range of a gain at fixed delays -------------------------------------------------------
@dataclass(frozen=True)
class Candidate:
    """A tuning value where a root may sit on the imaginary axis: exact (``rational``) or a ball."""

    ball: arb
    kind: str  # "origin" | "crossing" | "zero_delay"
    omega: arb | None = None
    rational: fmpq | None = None

    @property
    def value(self) -> float:
        return to_float(self.rational) if self.rational is not None else float(self.ball.mid())

    def text(self) -> str:
        return str(self.rational) if self.rational is not None else self.ball.str(15)

    def approx(self) -> str:
        return f"{self.value:.12g}"

    def endpoint(self):
        from core.analysis.stable_range import Endpoint
        omega = None if self.omega is None else float(self.omega.mid())
        return Endpoint(self.value, self.text(), self.kind, omega, self.approx())


@dataclass
class DelayRange:
    """The stable set of the tuning parameter, a union of open intervals (None: unbounded) between
    candidates, certified on ``window`` (see the module notes)."""

    parameter: str
    intervals: list[tuple[Candidate | None, Candidate | None]]
    window: tuple[float, float]
    notes: list[str] = field(default_factory=list)
    switches: list[dict] = field(default_factory=list)

    @property
    def endpoints(self) -> list[Candidate]:
        out: list[Candidate] = []
        for lo, hi in self.intervals:
            for end in (lo, hi):
                if end is not None and (not out or out[-1] is not end):
                    out.append(end)
        return out

    def contains(self, value) -> bool:
        v = to_float(fmpq(value))
        return any((lo is None or lo.value < v) and (hi is None or v < hi.value) for lo, hi in self.intervals)

    def to_dict(self) -> dict:
        """The same keys as a polynomial's stable range, plus the certified window and notes."""
        def ends(text) -> list[list]:
            return [[None if lo is None else text(lo), None if hi is None else text(hi)] for lo, hi in self.intervals]
        return {"intervals": ends(lambda c: c.value), "approx_intervals": ends(lambda c: c.approx()),
                "exact_intervals": ends(lambda c: c.text()),
                "endpoints": [c.endpoint().to_dict() for c in self.endpoints],
                "stable_everywhere": self.intervals == [(None, None)], "never_stable": not self.intervals,
                "certified": True, "window": list(self.window), "notes": list(self.notes),
                "switches": list(self.switches)}


def combine(a: Parts, b: Parts, k: fmpq) -> Parts:
    """The parts of A + k B."""
    return normal_parts([*a, *[(tau, [k * c for c in coeffs]) for tau, coeffs in b]])


def _derivative_at_zero(parts: Parts) -> fmpq:
    """Q'(0) exact: sum_k P_k'(0) - tau_k P_k(0)."""
    total = fmpq(0)
    for tau, c in parts:
        if c:
            total += (c[-2] if len(c) > 1 else 0) - tau * c[-1]
    return total


def check_gain_loop(a: Parts, b: Parts) -> int:
    """The degree n of the delay-free part; E445 when the gain enters the term of degree n, E442
    when a delayed term reaches it."""
    n = len(a[0][1]) - 1
    if len(b[0][1]) - 1 >= n:
        raise AnalysisError("E445", "the tuning parameter multiplies the highest power of s of the delay-free "
                            "part: not analysed for delay loops", where="delay loop")
    for tau, coeffs in [*a[1:], *b[1:]]:
        if tau != 0 and len(coeffs) - 1 >= n:
            check_retarded([(fmpq(0), a[0][1]), (tau, coeffs)])
    return n


WINDOW_GROWTH = 8
WINDOW_STEPS = 6


def gain_range(a: Parts, b: Parts, parameter: str, hint: float = 1.0) -> DelayRange:
    """The stable set of K for Q = A + K B at fixed delays (A, B normalised parts; B(s) may be
    delay-free or delayed), certified on the window |K| <= M with M from ``hint`` (a typical size:
    the nominal value, the delay-free range's ends), grown while an outermost interval is stable."""
    check_gain_loop(a, b)
    notes: list[str] = []
    a0, b0 = origin_value(a), origin_value(b)
    if a0 == 0 and b0 == 0:
        return DelayRange(parameter, [], (-math.inf, math.inf), ["a root at s = 0 for every value"])
    origin = None if b0 == 0 else Candidate(arb(-a0 / b0), "origin", None, -a0 / b0)
    size = max(1.0, abs(hint), abs(origin.value) if origin else 0.0)
    limit = 2.0 * size
    for step in range(WINDOW_STEPS):
        cands = ([origin] if origin is not None and abs(origin.value) < limit else []) + \
            _crossing_candidates(a, b, limit, notes)
        cands = _merged(sorted(cands, key=lambda c: c.value))
        tests = _test_points(cands, limit)
        flags = [rhp_count(combine(a, b, t)) == 0 for t in tests]
        if not (flags[0] or flags[-1]) or step == WINDOW_STEPS - 1:
            break
        limit *= WINDOW_GROWTH
    if flags[0] or flags[-1]:
        notes.append(f"stable up to the window's edge |{parameter}| = {limit:.6g}: taken as unbounded there")
    intervals = []
    for i, stable in enumerate(flags):
        if stable:
            intervals.append((cands[i - 1] if i > 0 else None, cands[i] if i < len(cands) else None))
    return DelayRange(parameter, intervals, (-limit, limit), notes)


def _merged(cands: list[Candidate]) -> list[Candidate]:
    out: list[Candidate] = []
    for c in cands:
        if out and out[-1].ball.overlaps(c.ball):
            if out[-1].rational is None and c.rational is not None:
                out[-1] = c
            continue
        out.append(c)
    return out


def _test_points(cands: list[Candidate], limit: float) -> list[fmpq]:
    """A rational inside each gap: below the first, between neighbours, above the last (within the
    window)."""
    edges = [-limit] + [x for c in cands for x in (float(c.ball.lower()), float(c.ball.upper()))] + [limit]
    points = []
    for lo, hi in zip(edges[::2], edges[1::2]):
        points.append(_simple_between(lo, hi))
    return points


def _simple_between(lo: float, hi: float) -> fmpq:
    """A rational with a small denominator strictly inside (lo, hi)."""
    width = hi - lo
    if lo < 0 < hi:
        return fmpq(0)
    for den in (1, 2, 4, 8, 10, 16, 100, 1000, 2 ** 20):
        candidate = math.floor(lo * den) + 1
        if candidate / den < hi and candidate / den > lo:
            return fmpq(candidate, den)
    mid = lo + width / 2
    return fmpq(*mid.as_integer_ratio())


def _crossing_candidates(a: Parts, b: Parts, limit: float, notes: list[str]) -> list[Candidate]:
    """K(ω) = -A(jω)/B(jω) at the zeros of Im(A(jω) conj B(jω)) on (0, Ω], |K| <= limit."""
    n = len(a[0][1]) - 1
    lower = [fmpq(0)] * n
    big = fmpq(*float(limit).as_integer_ratio())
    for parts, scale in ((a, fmpq(1)), (b, big)):
        for _, coeffs in parts:
            d = len(coeffs) - 1
            for k, c in enumerate(coeffs):
                if d - k < n:
                    lower[d - k] += abs(c) * scale
    omega_max = to_float(magnitude_bound(a[0][1][0], lower)) * (1 + 1e-9)
    ea, eb = Evaluator(a), Evaluator(b)

    def g(w: arb) -> arb:
        s = acb(0, w)
        return (ea.value(s) * eb.value(s).conjugate()).imag

    def dg(w: arb) -> arb:
        s = acb(0, w)
        va, vb = ea.value(s), eb.value(s)
        return (acb(0, 1) * (ea.derivative(s) * vb.conjugate() - va * eb.derivative(s).conjugate())).imag

    start = 0.0
    if _derivative_at_zero(a) * origin_value(b) - origin_value(a) * _derivative_at_zero(b) == 0:
        start = omega_max * 1e-9
        notes.append(f"frequencies below {start:.3g} rad/s not searched (degenerate at zero frequency)")
    out = []
    for w in real_zeros(g, dg, start, omega_max, skip_origin=start == 0):
        with ctx.workprec(PREC):
            s = acb(0, w)
            vb = eb.value(s)
            if not _excludes_zero(vb):
                continue
            gain = -(ea.value(s) / vb).real
            if abs(float(gain.mid())) <= limit:
                out.append(Candidate(gain, "crossing", w))
    return out


# -- the delay as the tuning parameter ------------------------------------------------------------
MAX_SWITCH_EVENTS = 2_000


def delay_range(p0: Sequence[fmpq], p1: Sequence[fmpq], parameter: str, scale: fmpq | None = None) -> DelayRange:
    """The stable set of tau >= 0 for P_0(s) + P_1(s) e^(-s scale tau), certified: every stability
    switch up to the value beyond which the crossings into the right half plane provably outnumber
    the ones out of it for good (the count's lower bound c0 + 2 sum_dir ... grows linearly there),
    or the first 2,000 crossing events when no such value exists (said in the notes)."""
    parts = normal_parts([(fmpq(0), list(p0)), (fmpq(1), list(p1))])
    if origin_value(parts) == 0:
        return DelayRange(parameter, [], (0.0, math.inf), ["a root at s = 0 for every delay"])
    free = fmpq_poly(list(reversed(parts[0][1]))) + fmpq_poly(list(reversed(parts[1][1])))
    counts = routh_counts([free[i] for i in range(free.degree(), -1, -1)])
    if counts.jw:
        raise AnalysisError("E446", "the delay-free loop has roots on the imaginary axis: the delay sweep "
                            "starts on the boundary", where="delay loop")
    found = crossings(parts[0][1], [(fmpq(0), parts[1][1])])
    events, notes = _switch_events(found, counts.rhp)
    count = counts.rhp
    zero = Candidate(arb(0), "zero_delay", None, fmpq(0))
    intervals: list[tuple[Candidate | None, Candidate | None]] = []
    start: Candidate | None = zero if count == 0 else None
    switches = []
    with ctx.workprec(PREC):
        for delay, crossing in events:
            tau = delay / arb(scale if scale is not None else fmpq(1))
            candidate = Candidate(tau, "crossing", crossing.omega)
            before = count
            count += 2 * crossing.direction
            if (before == 0) != (count == 0):
                switches.append({"value": candidate.value, "approx": candidate.approx(), "omega":
                                 float(crossing.omega.mid()), "becomes": "stable" if count == 0 else "unstable"})
            if before == 0 and count > 0 and start is not None:
                intervals.append((start, candidate))
                start = None
            elif before > 0 and count == 0:
                start = candidate
    if start is not None:
        intervals.append((start, None))
    return DelayRange(parameter, intervals, (0.0, math.inf), notes, switches)


def _switch_events(found: list[Crossing], rhp0: int) -> tuple[list[tuple[arb, Crossing]], list[str]]:
    """Every crossing event (delay, crossing) in increasing delay up to the bound past which the
    loop stays unstable; certified order (E446 when two events cannot be told apart)."""
    with ctx.workprec(PREC):
        two_pi = 2 * math.pi
        up = [c for c in found if c.direction > 0]
        down = [c for c in found if c.direction < 0]
        slope = sum(float(c.omega.mid()) for c in up) - sum(float(c.omega.mid()) for c in down)
        notes = []
        bound = math.inf
        if slope > 0:
            offset = two_pi * (len(down) - rhp0 / 2) + sum(float(c.theta.mid()) for c in up) \
                - sum(float(c.theta.mid()) for c in down)
            bound = max(0.0, offset / slope) * (1 + 1e-6) + 1e-9
        events: list[tuple[arb, Crossing]] = []
        for c in found:
            period = two_pi / float(c.omega.mid())
            first = float(c.theta.mid()) / float(c.omega.mid())
            m = 0
            while first + m * period <= bound and len(events) < MAX_SWITCH_EVENTS:
                events.append((c.delay(m), c))
                m += 1
        if bound == math.inf or len(events) >= MAX_SWITCH_EVENTS:
            notes.append(f"switches searched over the first {len(events)} crossing events only")
        events.sort(key=lambda e: float(e[0].mid()))
        for (d1, _), (d2, _) in itertools.pairwise(events):
            if d1.overlaps(d2):
                raise AnalysisError("E446", "two crossings at the same delay cannot be told apart", where="delay loop")
        return events, notes


# -- rightmost roots ---------------------------------------------------------------------------
@dataclass
class RootSet:
    """Roots of a quasi-polynomial found right of ``complete_right_of`` (a real part): ``validated``
    when their number equals the certified argument-principle count of that region (so none there
    is missing), each refined by Newton's method inside a rectangle holding exactly one root."""

    roots: list[complex]
    complete_right_of: float | None
    counted: int
    validated: bool

    def to_dict(self) -> dict:
        return {"roots": [[z.real, z.imag] for z in self.roots], "complete_right_of": self.complete_right_of,
                "counted": self.counted, "validated": self.validated}


ROOT_SPLIT = 0.4637  # rectangles are cut off-centre: a cut through the middle would meet real roots


def rightmost_roots(parts: Parts, wanted: int = 10, budget_s: float = 1.0) -> RootSet:
    """At least ``wanted`` rightmost roots (fewer when the time budget runs out: then not
    validated): the region Re s >= sigma, |s| < R(sigma) is widened leftwards until it holds
    ``wanted`` roots by the argument principle, then cut into rectangles with one root each."""
    import time

    deadline = time.perf_counter() + budget_s
    ev = Evaluator(parts)
    sigma, short_of = -1.0, 0.0  # short_of: a real part whose region holds too few roots
    too_many: float | None = None  # one whose region holds more than three times the wanted number
    counted = 0
    region: tuple[float, float, float, float] | None = None
    for _ in range(60):
        if time.perf_counter() > deadline:
            break
        r = to_float(parts_bound(parts, fmpq(*sigma.as_integer_ratio()))) * (1 + 1e-9) + 1e-9
        if not math.isfinite(r) or r > 1e6:
            break
        try:
            n = _count(ev, (sigma, r, -r, r))
        except AnalysisError:
            sigma *= 1.0137
            continue
        region, counted = (sigma, r, -r, r), n
        if n < wanted:
            short_of = sigma
        elif n <= 3 * wanted or short_of - sigma < 1e-3 * abs(sigma):
            break
        else:
            too_many = sigma
        sigma = 2 * sigma if too_many is None else (short_of + too_many) / 2
    if region is None:
        return RootSet([], None, 0, False)
    found = _newton_sweep(ev, region, counted, deadline)
    if len(found) != counted:
        subdivided = _isolate(ev, region, counted, deadline)
        found = subdivided if len(subdivided) > len(found) else found
    found.sort(key=lambda z: (-z.real, -z.imag))
    return RootSet(found, region[0], counted, len(found) == counted)


def _count(ev: Evaluator, rect: tuple[float, float, float, float]) -> int:
    x0, x1, y0, y1 = rect
    return winding(ev, [complex(x0, y0), complex(x1, y0), complex(x1, y1), complex(x0, y1)])


def _newton_sweep(ev: Evaluator, rect: tuple[float, float, float, float], counted: int,
                  deadline: float) -> list[complex]:
    """Newton's method from a grid of starts; each distinct root kept only when a small square
    around it (disjoint from the others') holds exactly one root by the argument principle. When
    as many are kept as the region holds, none is missing; otherwise the caller subdivides."""
    import time

    x0, x1, y0, y1 = rect
    roots: list[complex] = []
    for columns, rows in ((12, 24), (24, 96)):  # a finer grid when the coarse one misses some
        for i in range(columns):
            for j in range(rows):
                if time.perf_counter() > deadline or len(roots) >= counted:
                    break
                z = _newton(ev, complex(x0 + (i + 0.5) * (x1 - x0) / columns, y0 + (j + 0.5) * (y1 - y0) / rows))
                if z is None or not (x0 < z.real < x1 and y0 < z.imag < y1):
                    continue
                if any(abs(z - w) <= 1e-9 * max(1.0, abs(z)) for w in roots):
                    continue
                roots.append(z)
    kept = []
    for z in roots:
        gap = min((abs(z - w) for w in roots if w is not z), default=1.0)
        half = min(1e-6 * max(1.0, abs(z)), gap / 3, z.real - x0, x1 - z.real, z.imag - y0, y1 - z.imag)
        try:
            if _count(ev, (z.real - half, z.real + half, z.imag - half * 0.9137, z.imag + half * 1.0731)) == 1:
                kept.append(z)
        except AnalysisError:
            continue
    return kept


def _isolate(ev: Evaluator, rect: tuple[float, float, float, float], inside: int, deadline: float) -> list[complex]:
    import time

    out: list[complex] = []
    stack = [(rect, inside)]
    while stack and time.perf_counter() < deadline:
        (x0, x1, y0, y1), n = stack.pop()
        if n == 0:
            continue
        if n == 1:
            z = _newton(ev, complex((x0 + x1) / 2, (y0 + y1) / 2))
            if z is not None and x0 <= z.real <= x1 and y0 <= z.imag <= y1:
                out.append(z)
                continue
        for cut in (ROOT_SPLIT, 0.5 - 0.0731, 0.5 + 0.0593):
            if x1 - x0 >= y1 - y0:
                xm = x0 + cut * (x1 - x0)
                halves = ((x0, xm, y0, y1), (xm, x1, y0, y1))
            else:
                ym = y0 + cut * (y1 - y0)
                halves = ((x0, x1, y0, ym), (x0, x1, ym, y1))
            try:
                first = _count(ev, halves[0])
            except AnalysisError:
                continue
            stack += [(halves[0], first), (halves[1], n - first)]
            break
    return out


def _newton(ev: Evaluator, z: complex, steps: int = 60) -> complex | None:
    with ctx.workprec(PREC):
        for _ in range(steps):
            s = acb(z.real, z.imag)
            step = complex(ev.value(s) / ev.derivative(s))
            z -= step
            if not (math.isfinite(z.real) and math.isfinite(z.imag)):
                return None
            if abs(step) <= 1e-14 * max(1.0, abs(z)):
                return z
    return None
