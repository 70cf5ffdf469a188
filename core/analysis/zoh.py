"""Zero-order-hold equivalents and sampled loops: a discrete controller C(z) in series with a hold,
a continuous plant G(s) and a sampler, in unity negative feedback.

**The hold.** G(z) = (1 - z^-1) Z{G(s)/s} is computed from the matrix exponential: with
(A, B, C, D) the controllable canonical form of G, exp([[A, B], [0, 0]] Ts) = [[Phi, Gamma], [0, 1]],
and G(z) = C (zI - Phi)^-1 Gamma + D, so its denominator is det(zI - Phi) and its numerator
det(zI - Phi + Gamma C) - det(zI - Phi) + D det(zI - Phi) (a rank-one update of a determinant).
e^(A Ts) is transcendental: python-flint arb computes it in ball arithmetic, the precision raised
until every coefficient is known to :data:`COEFFICIENT_BITS` bits (about 75 digits) against the
largest; the rational coefficients carried are the balls' midpoints rounded to that grid, and
``error_bound`` bounds their distance to the true ones (certified).

**The loop.** With the controller N_c/D_c, a delay of d whole samples and, optionally, one sample of
computation delay (m = d + 1 samples in all), the characteristic polynomial in z is
z^m D_c(z) D_g(z) + N_c(z) N_g(z). Its coefficients are exact in the tuning parameter and carry
the hold's bounded error; verdicts are made exactly on the rational coefficients and then checked
on the balls (which hold the true coefficients): such a verdict is **certified**, never exact.

>>> hold = zoh_equivalent([2], [1, 2], fmpq(1, 2))  # 2/(s + 2): (1 - e^-1)/(z - e^-1)
>>> [round(float(c), 12) for c in hold.num], [round(float(c), 12) for c in hold.den]
([0.632120558829], [1.0, -0.367879441171])
"""
from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from flint import arb, arb_mat, arb_poly, ctx, fmpq, fmpq_poly

from core.algebra.polynomial import ParametricPolynomial, strip_leading_zeros, to_fmpq
from core.analysis.discrete import jury_certified, z_stable_range
from core.analysis.stable_range import Boundary, StableRange
from core.errors import AnalysisError

__all__ = [
    "PeriodSearch",
    "SampledLoop",
    "ZohEquivalent",
    "certified_stable_at",
    "check_sample_period",
    "fixed_controller",
    "gain_range_curve",
    "largest_stable_period",
    "sampled_characteristic",
    "sampled_stable_range",
    "zoh_equivalent",
]

COEFFICIENT_BITS = 250  # each carried coefficient within 2^-250 of the largest (about 75 digits)
MAX_PRECISION = 1 << 14
BALL_PRECISION = 3 * COEFFICIENT_BITS  # working precision of verdicts on the hold's balls


def check_sample_period(value, where: str = "sample period") -> fmpq:
    """The sample period as an exact positive rational; E450 for <= 0, not finite or not a number."""
    if isinstance(value, float) and not math.isfinite(value):
        raise AnalysisError("E450", f"the sample period must be a finite number > 0, not {value!r}", where=where)
    try:
        ts = to_fmpq(value)
    except (TypeError, ValueError, ZeroDivisionError):
        raise AnalysisError("E450", f"the sample period {value!r} is not a number", where=where) from None
    if ts <= 0:
        raise AnalysisError("E450", f"the sample period must be > 0, not {ts}", where=where)
    return ts


@dataclass(frozen=True)
class ZohEquivalent:
    """G(z) = num/den (highest power of z first, den monic) with rational coefficients each within
    ``error_bound`` of the true one; ``num_balls`` / ``den_balls`` hold the true coefficients."""

    num: list[fmpq]
    den: list[fmpq]
    num_balls: list[arb]
    den_balls: list[arb]
    error_bound: fmpq
    sample_period: fmpq


def _exact_list(coeffs: Sequence, what: str) -> list[fmpq]:
    out = strip_leading_zeros([to_fmpq(c) for c in coeffs]) if coeffs else [fmpq(0)]
    if out == [0] and what == "denominator":
        raise AnalysisError("E453", "the plant's denominator is zero", where="plant")
    return out


def zoh_equivalent(num: Sequence, den: Sequence, sample_period) -> ZohEquivalent:
    """The zero-order-hold equivalent of the proper rational G(s) = num/den (exact coefficients,
    highest power of s first). E453 for an improper plant or a zero denominator, E450 for a bad
    sample period."""
    ts = check_sample_period(sample_period)
    d_monic, rest, direct = _canonical(num, den)
    if not rest:
        with ctx.workprec(BALL_PRECISION):
            value = arb(direct)
        return ZohEquivalent([direct], [fmpq(1)], [value], [arb(1)], fmpq(0), ts)
    prec = 2 * COEFFICIENT_BITS
    while True:
        num_balls, den_balls = _hold_balls(d_monic, rest, direct, ts, prec)
        top = max(abs(b.mid()) for b in num_balls + den_balls)
        widest = max(b.rad() for b in num_balls + den_balls)
        if widest <= top * arb(2) ** (-COEFFICIENT_BITS - 8) or prec >= MAX_PRECISION:
            break
        prec *= 2
    grid = _grid(top)
    num_q = [_rounded(b, grid) for b in num_balls]
    den_q = [_rounded(b, grid) for b in den_balls]
    err = max(abs(_fmpq_of(b.mid()) - q) + _upper(b.rad()) for b, q in zip(num_balls + den_balls, num_q + den_q))
    return ZohEquivalent(strip_leading_zeros(num_q), den_q, num_balls, den_balls, err, ts)


def _canonical(num: Sequence, den: Sequence) -> tuple[list[fmpq], list[fmpq], fmpq]:
    """(monic denominator, strictly proper numerator below it, direct term), highest power first:
    the data of the controllable canonical form. E453 for an improper plant or a zero denominator."""
    n_s, d_s = _exact_list(num, "numerator"), _exact_list(den, "denominator")
    n = len(d_s) - 1
    if len(n_s) - 1 > n:
        raise AnalysisError("E453", "the plant is improper (numerator degree above the denominator's): "
                            "it has no zero-order-hold equivalent", where="plant")
    lead = d_s[0]
    d_monic = [c / lead for c in d_s]
    n_scaled = [fmpq(0)] * (n + 1 - len(n_s)) + [c / lead for c in n_s]
    direct = n_scaled[0]
    return d_monic, [n_scaled[i] - direct * d_monic[i] for i in range(n + 1)][1:], direct


def _hold_balls(d_monic: list[fmpq], rest: list[fmpq], direct: fmpq, ts: fmpq,
                prec: int) -> tuple[list[arb], list[arb]]:
    """Numerator and denominator coefficient balls (highest power first) at ``prec`` bits."""
    n = len(d_monic) - 1
    with ctx.workprec(prec):
        t = arb(ts)
        m = arb_mat(n + 1, n + 1)
        for i in range(n - 1):
            m[i, i + 1] = t
        for j in range(n):
            m[n - 1, j] = -arb(d_monic[n - j]) * t
        m[n - 1, n] = t
        e = m.exp()
        phi = arb_mat([[e[i, j] for j in range(n)] for i in range(n)])
        gamma = [e[i, n] for i in range(n)]
        c_row = [arb(rest[n - 1 - j]) for j in range(n)]  # C = [c_0 ... c_(n-1)]
        updated = arb_mat([[phi[i, j] - gamma[i] * c_row[j] for j in range(n)] for i in range(n)])
        den = phi.charpoly()
        num = updated.charpoly()
        den_list = [den[i] for i in range(n, -1, -1)]
        upd_list = [num[i] for i in range(n, -1, -1)]
        num_list = [upd_list[i] - den_list[i] + arb(direct) * den_list[i] for i in range(n + 1)]
    return num_list, den_list


def _grid(top: arb) -> fmpq:
    """The rounding step: a power of two about 2^-COEFFICIENT_BITS times the largest coefficient."""
    man, exp = top.mid().man_exp()
    size = int(man).bit_length() + int(exp) if man != 0 else 0
    return fmpq(2) ** (size - COEFFICIENT_BITS - 4)


def _rounded(b: arb, grid: fmpq) -> fmpq:
    """The ball's midpoint to the nearest multiple of ``grid`` (an exact rational)."""
    mid = _fmpq_of(b.mid())
    return fmpq((mid / grid + fmpq(1, 2)).floor()) * grid


def _fmpq_of(x: arb) -> fmpq:
    man, exp = x.mid().man_exp()
    return fmpq(int(man)) * fmpq(2) ** int(exp) if exp >= 0 else fmpq(int(man), 2 ** int(-exp))


def _upper(x: arb) -> fmpq:
    """An exact rational upper bound of a nonnegative ball (its radius)."""
    return _fmpq_of(x.mid() + x.rad() * 2) if x != 0 else fmpq(0)


# -- the sampled loop ---------------------------------------------------------------------------------
Controller = Callable[[fmpq], tuple[ParametricPolynomial, ParametricPolynomial]]


@dataclass
class SampledLoop:
    """Discrete controller N_c/D_c (polynomials in z, coefficients in the tuning parameter; given as
    a function of the sample period, since a digital controller's coefficients usually hold Ts),
    zero-order hold, continuous plant num/den in s (exact numbers), sampler, unity negative feedback;
    ``delay_samples`` whole samples of delay and an optional one-sample ``computation_delay``."""

    controller: Controller
    plant_num: list
    plant_den: list
    delay_samples: int = 0
    computation_delay: bool = False
    parameter: str | None = None

    def __post_init__(self):
        if not isinstance(self.delay_samples, int) or isinstance(self.delay_samples, bool) or not (
                0 <= self.delay_samples <= MAX_DELAY_SAMPLES):
            raise AnalysisError("E454", f"the delay must be a whole number of samples from 0 to "
                                f"{MAX_DELAY_SAMPLES}, not {self.delay_samples!r}", where="delay")

    @property
    def delay(self) -> int:
        """Samples of delay in all (whole-sample delay plus the computation delay)."""
        return self.delay_samples + (1 if self.computation_delay else 0)


MAX_DELAY_SAMPLES = 200


def fixed_controller(num: ParametricPolynomial, den: ParametricPolynomial) -> Controller:
    """A controller whose coefficients do not depend on the sample period."""
    return lambda ts: (num, den)


@dataclass
class SampledCharacteristic:
    """The loop's characteristic polynomial in z at one sample period: exact rational coefficients
    (in the tuning parameter) within ``error_bound`` × (size of the controller's coefficients) of the
    true ones, and a way to get ball coefficients holding the true ones at a parameter value."""

    polynomial: ParametricPolynomial
    hold: ZohEquivalent
    controller_num: ParametricPolynomial
    controller_den: ParametricPolynomial
    delay: int

    def balls_at(self, value=None) -> list[arb]:
        """Coefficients (highest power first) at a value of the tuning parameter, as balls holding
        the true coefficients."""
        with ctx.workprec(BALL_PRECISION):
            return _loop_balls(self.controller_num, self.controller_den, self.hold.num_balls,
                               self.hold.den_balls, self.delay, value, self.polynomial.degree)

    def certified_stable(self, value=None) -> bool | None:
        """The Jury verdict on the true coefficients (None: undecided at this precision)."""
        balls = self.balls_at(value)
        with ctx.workprec(BALL_PRECISION):
            return jury_certified(balls)


def _loop_balls(nc: ParametricPolynomial, dc: ParametricPolynomial, ng: list[arb], dg: list[arb], delay: int,
                value, degree: int) -> list[arb]:
    """z^m D_c D_g + N_c N_g at a value of the tuning parameter, ball coefficients highest first
    (at the working precision)."""
    v = fmpq(0) if value is None else to_fmpq(value)
    nc_b = arb_poly(list(reversed([arb(c(v)) for c in nc.coeffs])))
    dc_b = arb_poly(list(reversed([arb(c(v)) for c in dc.coeffs])))
    total = arb_poly([0] * delay + [1]) * dc_b * arb_poly(list(reversed(dg))) + nc_b * arb_poly(list(reversed(ng)))
    return [total[i] for i in range(degree, -1, -1)]


def certified_stable_at(loop: SampledLoop, sample_period, value=None) -> bool | None:
    """The certified verdict at one sample period, computed with no more precision than it needs:
    the hold's balls and the Jury conditions at 128 bits, then doubled while undecided (up to
    :data:`SEARCH_PRECISION`); None when still undecided there."""
    ts = check_sample_period(sample_period)
    d_monic, rest, direct = _canonical(loop.plant_num, loop.plant_den)
    nc, dc = _controller_at(loop, ts)
    degree = max(dc.degree + len(d_monic) - 1 + loop.delay, nc.degree + len(d_monic) - 1)
    prec = 128
    while prec <= SEARCH_PRECISION:
        if rest:
            ng, dg = _hold_balls(d_monic, rest, direct, ts, prec)
        else:
            ng, dg = [arb(direct)], [arb(1)]
        with ctx.workprec(prec):
            verdict = jury_certified(_loop_balls(nc, dc, ng, dg, loop.delay, value, degree))
        if verdict is not None:
            return verdict
        prec *= 2
    return None


SEARCH_PRECISION = 2048


def _product(a: Sequence[fmpq_poly], b: Sequence[fmpq_poly]) -> list[fmpq_poly]:
    """Product of two polynomials in z given highest power first (coefficients in the parameter)."""
    out = [fmpq_poly([]) for _ in range(len(a) + len(b) - 1)]
    for i, x in enumerate(a):
        for j, y in enumerate(b):
            out[i + j] += x * y
    return out


def _sum(a: list[fmpq_poly], b: list[fmpq_poly]) -> list[fmpq_poly]:
    size = max(len(a), len(b))
    a = [fmpq_poly([])] * (size - len(a)) + a
    b = [fmpq_poly([])] * (size - len(b)) + b
    return [x + y for x, y in zip(a, b)]


def _controller_at(loop: SampledLoop, ts: fmpq) -> tuple[ParametricPolynomial, ParametricPolynomial]:
    """The controller's N_c, D_c at one sample period; E455 for a zero denominator or a controller
    that is not causal."""
    nc, dc = loop.controller(ts)
    if dc.degree < 0:
        raise AnalysisError("E455", "the controller's denominator is zero", where="controller")
    if nc.degree > dc.degree:
        raise AnalysisError("E455", "the controller is not causal (numerator degree in z above the "
                            "denominator's)", where="controller")
    return nc, dc


def sampled_characteristic(loop: SampledLoop, sample_period) -> SampledCharacteristic:
    """z^m D_c D_g + N_c N_g at one sample period (see the module notes). E455 when it vanishes
    identically, E453 for a bad plant."""
    ts = check_sample_period(sample_period)
    hold = zoh_equivalent(loop.plant_num, loop.plant_den, ts)
    nc, dc = _controller_at(loop, ts)
    ng = [fmpq_poly([c]) for c in hold.num]
    dg = [fmpq_poly([c]) for c in hold.den]
    shifted_dc = list(dc.coeffs) + [fmpq_poly([])] * loop.delay
    total = _sum(_product(shifted_dc, dg), _product(list(nc.coeffs), ng))
    poly = ParametricPolynomial(tuple(total), loop.parameter)
    if poly.degree < 1:
        raise AnalysisError("E455", "the sampled loop's characteristic polynomial is constant: nothing "
                            "to analyse", where="controller")
    return SampledCharacteristic(poly, hold, nc, dc, loop.delay)


@dataclass
class SampledRange:
    """The stable range of the tuning parameter at one sample period, with its certification:
    ``certified`` when every interval's verdict was confirmed on the true (ball) coefficients, and
    each end bracketed within ``end_tolerance`` (relative) by certified verdicts on both sides."""

    sample_period: fmpq
    range: StableRange
    characteristic: SampledCharacteristic
    certified: bool
    end_tolerance: fmpq
    notes: list[str] = field(default_factory=list)


END_BITS = 100  # each end is bracketed within 2^-100 relative


def sampled_stable_range(loop: SampledLoop, sample_period, nominal=None) -> SampledRange:
    """The exact stable range for the rational coefficients carried, certified on the true ones."""
    char = sampled_characteristic(loop, sample_period)
    rng = z_stable_range(char.polynomial, nominal, char.hold.sample_period)
    notes = []
    certified = True
    delta = fmpq(1, 2 ** END_BITS)
    for lo, hi in rng.intervals:
        for end, inside in ((lo, True), (hi, False)):
            if end is None:
                continue
            if not _end_certified(char, end, delta, lower_is_outside=inside):
                certified = False
                notes.append(f"the end near {end.approx} is not confirmed within 2^-{END_BITS} on the true "
                             "coefficients (the hold's error could move it)")
    if not rng.intervals and loop.parameter is None:
        certified = char.certified_stable() is False
    return SampledRange(char.hold.sample_period, rng, char, certified, delta, notes)


def _end_certified(char: SampledCharacteristic, end: Boundary, delta: fmpq, lower_is_outside: bool) -> bool:
    """Certified verdicts just below and just above an end (within delta relative) differ as the
    range says: unstable on the outside, stable on the inside."""
    b = end.narrowed(delta * max(abs(end.lo), abs(end.hi), fmpq(1)) / 4)
    step = delta * max(abs(b.lo), abs(b.hi), fmpq(1))
    below, above = b.lo - step, b.hi + step
    want_below, want_above = (False, True) if lower_is_outside else (True, False)
    return char.certified_stable(below) is want_below and char.certified_stable(above) is want_above


def gain_range_curve(loop: SampledLoop, periods: Sequence) -> list[SampledRange]:
    """The stable range of the tuning parameter at each sample period (exact slices)."""
    return [sampled_stable_range(loop, ts) for ts in periods]


@dataclass
class PeriodSearch:
    """The longest sample period found stable at the nominal values: ``stable`` (certified stable)
    and ``unstable`` (certified not stable, or None when none was found below ``limit``) bracket the
    first loss of stability met as the period grows from ``start`` by factors of ``growth``, the
    bracket narrowed to ``tolerance`` (relative). A window of instability narrower than one scan
    step between two stable periods could be missed: the bracket is certified, "first" is not."""

    stable: fmpq | None
    unstable: fmpq | None
    start: fmpq
    growth: fmpq
    tolerance: fmpq
    evaluations: int
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {"stable": None if self.stable is None else float(self.stable),
                "unstable": None if self.unstable is None else float(self.unstable),
                "exact_stable": None if self.stable is None else str(self.stable),
                "exact_unstable": None if self.unstable is None else str(self.unstable),
                "method": "certified bracket from a scan in the sample period and bisection",
                "start": float(self.start), "growth": float(self.growth), "tolerance": float(self.tolerance),
                "evaluations": self.evaluations, "notes": list(self.notes)}


SCAN_GROWTH = fmpq(5, 4)  # the scan's step: each sample period 25 % longer than the last
PERIOD_TOLERANCE = fmpq(1, 10 ** 6)  # the bracket's relative width


def largest_stable_period(loop: SampledLoop, nominal=None, start=None, growth=SCAN_GROWTH,
                          tolerance=PERIOD_TOLERANCE, limit=None) -> PeriodSearch:
    """Scan the sample period upward from ``start`` (default: a thousandth of the plant's fastest
    time constant) until a certified unstable verdict, then bisect to ``tolerance`` relative."""
    if loop.parameter is not None and nominal is None:
        raise AnalysisError("E404", f"the largest sample period needs a value of {loop.parameter}",
                            where=f"parameter {loop.parameter}")
    start_q = to_fmpq(start) if start is not None else _default_start(loop.plant_num, loop.plant_den)
    limit_q = to_fmpq(limit) if limit is not None else start_q * 10 ** 9
    count = 0

    def verdict(ts: fmpq) -> bool | None:
        nonlocal count
        count += 1
        return certified_stable_at(loop, ts, nominal)

    growth_q, tol = to_fmpq(growth), to_fmpq(tolerance)
    first = verdict(start_q)
    if first is not True:
        why = "not stable" if first is False else "undecided"
        return PeriodSearch(None, None, start_q, growth_q, tol, count,
                            [f"the loop is {why} at the shortest sample period tried ({float(start_q):.6g} s)"])
    stable, ts = start_q, start_q
    unstable = None
    notes: list[str] = []
    while ts < limit_q:
        ts = _short(ts * growth_q)
        v = verdict(ts)
        if v is True:
            stable = ts
            continue
        if v is None:
            notes.append(f"undecided at {float(ts):.6g} s (the hold's error straddles the boundary): "
                         "treated as the boundary")
        unstable = ts
        break
    if unstable is None:
        notes.append(f"stable up to {float(stable):.6g} s, the longest period scanned")
        return PeriodSearch(stable, None, start_q, growth_q, tol, count, notes)
    while unstable - stable > tol * stable:
        mid = _short((stable + unstable) / 2)
        v = verdict(mid)
        if v is True:
            stable = mid
        elif v is False:
            unstable = mid
        else:
            notes.append(f"undecided at {float(mid):.6g} s: the bracket stops there")
            break
    return PeriodSearch(stable, unstable, start_q, growth_q, tol, count, notes)


def _short(x: fmpq) -> fmpq:
    """A rational with a short denominator close to x (within 2^-60 relative), to keep the work small."""
    if x == 0:
        return x
    exponent = int(x.p).bit_length() - int(x.q).bit_length() - 60
    grid = fmpq(2) ** exponent
    return fmpq((x / grid).floor()) * grid if (x / grid).floor() > 0 else x


def _default_start(num: Sequence, den: Sequence) -> fmpq:
    """A thousandth of the plant's fastest time constant (1/|pole| or 1/|zero|), a power of ten."""
    from core.analysis.poles import certified_roots

    sizes = [p.natural_frequency for part in (num, den) for p in certified_roots(
        strip_leading_zeros([to_fmpq(c) for c in part]) or [fmpq(1)])]
    fastest = max([s for s in sizes if math.isfinite(s) and s > 0], default=1.0)
    return fmpq(1, 10) ** (3 + max(0, math.ceil(math.log10(fastest))))
