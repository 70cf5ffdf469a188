"""Frequency response of a loop transfer function L(s) = K * N(s)/D(s) * e^(-s*tau).

N and D are exact rational polynomials, K the nominal tuning gain, tau >= 0 an exact delay. On the
imaginary axis s = jw every part splits into real polynomials in w: N(jw) = Nr(w) + j Ni(w), so

* gain crossovers (|L| = 1) are the positive real roots of K^2 (Nr^2 + Ni^2) - (Dr^2 + Di^2), a
  real polynomial in w also with a delay (|e^(-jw tau)| = 1): certified balls around exact roots;
* phase crossovers (L real negative, the phase -180 degrees mod 360) of a rational loop are the
  positive roots of Im(N conj D) = Ni Dr - Nr Di where K Re(N conj D) < 0: exact roots, the sign of
  the real part decided in ball arithmetic (a root of a factor that also divides the real part is a
  zero or pole of L on the axis, no crossover); w = 0 and w -> infinity are checked exactly. With a
  delay, Im(N conj D e^(-jw tau)) is transcendental: its zeros are certified balls (interval
  bisection with proven sign changes, core.analysis.delay.real_zeros) on [0, w_max], where w_max
  is a proven bound beyond which |L| < 1/GAIN_MARGIN_LIMIT (larger gain margins are not listed);
* every phase crossover gives one gain margin, the factor 1/|L(jw)| by which K can rise (> 1) or
  |L(jw)| by which it can fall before a closed-loop root reaches the axis there; every gain
  crossover gives one phase margin 180 + arg L(jw) (wrapped into (-180, 180]) and the extra delay
  (phase margin mod 360, in radians) / w that would put a root on the axis there; the delay margin
  is the least of these (meaningful for a stable nominal loop);
* the sensitivity peak Ms = max |1/(1 + L(jw))|: for a rational loop certified, |S|^2 = P/Q with
  P = |D|^2 and Q = |D + K N|^2, its maximum over w >= 0 is at w = 0, at infinity or at a positive
  root of P'Q - P Q' (exact roots, values in balls); with a delay estimated (dense logarithmic grid
  plus golden-section refinement of the best samples). Common practice: Ms <= 2, preferably 1.2-1.6.

Curves for plots (:func:`response`) are floats on a logarithmic grid: magnitude, phase unwrapped
(a sum of the continuous angles of jw minus each zero and pole, so no sample-to-sample guessing),
and the polar points.
"""
from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
from flint import acb, acb_poly, arb, ctx, fmpq, fmpq_poly, fmpz_poly

from core.algebra.quasi import QuasiPolynomial
from core.analysis.delay import real_zeros
from core.analysis.routh import real_roots
from core.errors import AnalysisError

__all__ = ["MS_GUIDANCE", "FrequencyAnalysis", "GainMargin", "LoopFunction", "PhaseMargin", "SensitivityPeak",
           "analyse", "loop_of_project", "loop_of_quasi_polynomial", "response"]

GAIN_MARGIN_LIMIT = 1000  # with a delay, phase crossovers where |L| < 1/1000 (over 60 dB) are not listed
PREC = 128
MS_GUIDANCE = "common practice: Ms <= 2, preferably 1.2-1.6"
WHERE = "frequency response"
NO_DELAY = fmpq(0)


@dataclass(frozen=True)
class LoopFunction:
    """L(s) = gain * N(s)/D(s) * e^(-s*delay); coefficient lists lowest power first, exact."""

    gain: fmpq
    numerator: tuple[fmpq, ...]
    denominator: tuple[fmpq, ...]
    delay: fmpq = NO_DELAY

    def text(self) -> str:
        from core.algebra.polynomial import poly_text

        num = poly_text(list(reversed(self.numerator)), "s")
        den = poly_text(list(reversed(self.denominator)), "s")
        tail = "" if self.delay == 0 else f"*exp(-{self.delay}*s)"
        return f"{self.gain}*({num})/({den}){tail}"


@dataclass(frozen=True)
class GainMargin:
    """At a phase crossover: the factor K may rise ("rise", 1/|L|) or fall ("fall", |L|) by."""

    omega: float  # math.inf for the limit w -> infinity
    direction: str
    factor: float
    db: float
    critical_gain: float

    def to_dict(self) -> dict:
        return {"omega": None if math.isinf(self.omega) else self.omega, "at_infinity": math.isinf(self.omega),
                "direction": self.direction, "factor": self.factor, "db": self.db,
                "critical_gain": self.critical_gain}


@dataclass(frozen=True)
class PhaseMargin:
    """At a gain crossover: the phase margin in degrees and the extra delay that uses it up."""

    omega: float
    degrees: float
    phase: float  # arg L(jw) unwrapped, degrees
    delay: float  # (margin mod 360, in radians) / omega

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class SensitivityPeak:
    value: float  # math.inf: a closed-loop pole on the axis, or |S| unbounded
    omega: float | None
    method: str  # "certified" (value within `bound`) | "estimated" (sampled and refined)
    bound: float | None = None

    def to_dict(self) -> dict:
        finite = math.isfinite(self.value)
        return {"value": self.value if finite else None, "unbounded": not finite, "omega": self.omega,
                "method": self.method, "upper_bound": self.bound, "guidance": MS_GUIDANCE}


@dataclass
class FrequencyAnalysis:
    loop: LoopFunction
    gain_crossovers: list[float]
    phase_crossovers: list[float]
    gain_margins: list[GainMargin]
    phase_margins: list[PhaseMargin]
    delay_margin: float | None
    sensitivity_peak: SensitivityPeak
    notes: list[str] = field(default_factory=list)
    opened_at: str = "the tuning gain"

    @property
    def rise_factor(self) -> float | None:
        """The smallest factor K may rise by (None: no phase crossover where |L| < 1)."""
        return min((m.factor for m in self.gain_margins if m.direction == "rise"), default=None)

    @property
    def fall_factor(self) -> float | None:
        return min((m.factor for m in self.gain_margins if m.direction == "fall"), default=None)

    def to_dict(self) -> dict:
        method = "exact roots" if self.loop.delay == 0 else "exact gain crossovers, certified phase crossovers"
        return {
            "loop_function": self.loop.text(),
            "opened_at": self.opened_at,
            "gain_margins": {"rise_factor": self.rise_factor, "fall_factor": self.fall_factor,
                             "all": [m.to_dict() for m in self.gain_margins]},
            "phase_margins": [m.to_dict() for m in self.phase_margins],
            "crossovers": {"gain": self.gain_crossovers,
                           "phase": [None if math.isinf(w) else w for w in self.phase_crossovers],
                           "method": method},
            "delay_margin": self.delay_margin,
            "sensitivity_peak": self.sensitivity_peak.to_dict(),
            "frequency_notes": list(self.notes),
        }


# -- the loop from a typed characteristic polynomial ------------------------------------------------
def loop_of_quasi_polynomial(q: QuasiPolynomial, parameter: str | None, values: Mapping[str, fmpq]) -> LoopFunction:
    """p = D(s) + K N(s) e^(-s tau) opened at the tuning gain K: L = K N e^(-s tau) / D at nominal K.

    E461 without K, E462 for a missing value, E460 when p is not affine in K (or K is absent),
    E463 for a delay in D or several in K's term, E464 for a zero, undefined or improper L.
    """
    if not parameter:
        raise AnalysisError("E461", "name the tuning gain with --param: the loop is opened at it", where=WHERE)
    if parameter not in values:
        raise AnalysisError("E462", f"the tuning gain '{parameter[:40]}' has no value (--at {parameter[:40]}=...)",
                            where=WHERE)
    split = [(delay, _split_affine(poly, parameter, values)) for delay, poly in q.terms]
    missing = [n for d, _ in split for n in d.names if n not in values]
    if missing:
        raise AnalysisError("E462", f"the delay parameter '{missing[0][:40]}' has no value", where=WHERE)
    den: list[fmpq] = []
    num: list[fmpq] = []
    tau = fmpq(0)
    for delay, (free, linear) in split:
        if not delay.is_zero and any(c != 0 for c in free):
            raise AnalysisError("E463", "a delay in the part without the tuning gain: the loop cannot be opened "
                                "at the gain", where=WHERE)
        if delay.is_zero:
            den = free
        if any(c != 0 for c in linear):
            if num:
                raise AnalysisError("E463", "the tuning gain multiplies several delays", where=WHERE)
            num, tau = linear, delay.at(values)
    gain = values[parameter]
    if not num:
        raise AnalysisError("E460", f"the polynomial does not depend on '{parameter[:40]}'", where=WHERE)
    return checked_loop(LoopFunction(fmpq(gain), tuple(num), tuple(den), tau))


def loop_of_project(diagram, values: Mapping[str, fmpq], wire_key: str | None = None) -> tuple[LoopFunction, str]:
    """L at the parameters' values, the loop opened at a wire (default: the feedback wire into the
    outermost summing junction; core.graph.opening), and the wire's key. E462 for a missing value,
    E466 for no wire to open at, E464 for a zero, undefined or improper L."""
    from core.graph.opening import opened_loop

    wire, num, den = opened_loop(diagram, wire_key)
    loop = LoopFunction(fmpq(1), tuple(_in_s(num, values)), tuple(_in_s(den, values)))
    return checked_loop(loop), wire.key


def _in_s(poly, values: Mapping[str, fmpq]) -> list[fmpq]:
    """Coefficients in s (lowest first) at the parameters' values."""
    names = poly.context().names()
    out: dict[int, fmpq] = {}
    for exps, c in poly.to_dict().items():
        value = fmpq(c)
        for name, e in zip(names[1:], exps[1:]):
            if e:
                if name not in values:
                    raise AnalysisError("E462", f"the parameter '{name[:40]}' has no value", where=WHERE)
                value *= fmpq(values[name]) ** e
        out[exps[0]] = out.get(exps[0], fmpq(0)) + value
    return [out.get(i, fmpq(0)) for i in range(max(out, default=-1) + 1)]


def checked_loop(loop: LoopFunction) -> LoopFunction:
    """The loop with trailing zeros trimmed; E464 for K = 0, N = 0, D = 0 or an improper L."""
    num, den = _trim(loop.numerator), _trim(loop.denominator)
    if loop.gain == 0 or not num:
        raise AnalysisError("E464", "the loop transfer function is zero (gain or numerator zero)", where=WHERE)
    if not den:
        raise AnalysisError("E464", "the loop transfer function is undefined (its denominator is zero)", where=WHERE)
    if len(num) > len(den) or (loop.delay != 0 and len(num) == len(den)):
        raise AnalysisError("E464", "the loop transfer function is improper (numerator degree "
                            f"{len(num) - 1}, denominator degree {len(den) - 1})", where=WHERE)
    return LoopFunction(loop.gain, num, den, loop.delay)


def _trim(coeffs: Sequence[fmpq]) -> tuple[fmpq, ...]:
    out = list(coeffs)
    while out and out[-1] == 0:
        out.pop()
    return tuple(out)


def _split_affine(poly, parameter: str, values: Mapping[str, fmpq]) -> tuple[list[fmpq], list[fmpq]]:
    """(part without K, coefficient of K), each a list in s (lowest first), other names at values."""
    names = poly.context().names()
    parts: tuple[dict[int, fmpq], dict[int, fmpq]] = ({}, {})
    for exps, c in poly.to_dict().items():
        value = fmpq(c)
        k_power = 0
        for name, e in zip(names[1:], exps[1:]):
            if name == parameter:
                k_power = e
            elif e:
                if name not in values:
                    raise AnalysisError("E462", f"the parameter '{name[:40]}' has no value (--at)", where=WHERE)
                value *= fmpq(values[name]) ** e
        if k_power > 1:
            raise AnalysisError("E460", f"the polynomial is not affine in '{parameter[:40]}' (power {k_power})",
                                where=WHERE)
        parts[k_power][exps[0]] = parts[k_power].get(exps[0], fmpq(0)) + value
    return tuple([d.get(i, fmpq(0)) for i in range(max(d, default=-1) + 1)] for d in parts)  # type: ignore[return-value]


# -- polynomials in w on the axis ---------------------------------------------------------------
def _axis_parts(coeffs: Sequence[fmpq]) -> tuple[fmpq_poly, fmpq_poly]:
    """(Re, Im) of C(jw) as real polynomials in w."""
    re = [fmpq(0)] * len(coeffs)
    im = [fmpq(0)] * len(coeffs)
    for k, c in enumerate(coeffs):
        sign = 1 if k % 4 in (0, 1) else -1
        (re if k % 2 == 0 else im)[k] = sign * c
    return fmpq_poly(re), fmpq_poly(im)


def _positive_roots(f: fmpq_poly) -> list[tuple[arb, fmpz_poly]]:
    """Certified positive real roots of f (balls, increasing) with their irreducible factor."""
    if f.is_zero() or f.degree() < 1:
        return []
    out = []
    for g, _ in f.numer().factor()[1]:
        if g.degree() == 1:
            r = fmpq(-g[0], g[1])
            if r > 0:
                out.append((arb(r), g))
            continue
        prec = PREC
        while True:
            balls = real_roots(g, prec)
            if not any(b.contains(0) for b in balls):
                break
            prec *= 2
        out += [(b, g) for b in balls if b > 0]
    return sorted(out, key=lambda x: float(x[0].mid()))


def _at_axis(coeffs: Sequence[fmpq], w: arb) -> acb:
    return acb_poly([acb(c) for c in coeffs])(acb(0, w))


def _value(loop: LoopFunction, w: arb) -> acb:
    """L(jw) in ball arithmetic."""
    out = acb(loop.gain) * _at_axis(loop.numerator, w) / _at_axis(loop.denominator, w)
    if loop.delay != 0:
        out *= acb(0, -w * arb(loop.delay)).exp()
    return out


# -- analysis -----------------------------------------------------------------------------------
def analyse(loop: LoopFunction) -> FrequencyAnalysis:
    """Crossovers, every gain and phase margin, the delay margin and Ms of ``loop`` (module notes)."""
    loop = checked_loop(loop)
    notes: list[str] = []
    with ctx.workprec(PREC):
        gains = _gain_crossovers(loop, notes)
        phases = _phase_crossovers(loop, notes)
        margins = [_gain_margin(loop, w, exact) for w, exact in phases]
        phase_margins = [_phase_margin(loop, w) for w in gains]
        peak = sensitivity_peak(loop)
    delay_margin = min((m.delay for m in phase_margins), default=None)
    return FrequencyAnalysis(loop, [float(w.mid()) for w in gains],
                             [m.omega for m in margins], margins, phase_margins, delay_margin, peak, notes)


def _gain_crossovers(loop: LoopFunction, notes: list[str]) -> list[arb]:
    nr, ni = _axis_parts(loop.numerator)
    dr, di = _axis_parts(loop.denominator)
    f = loop.gain ** 2 * (nr * nr + ni * ni) - (dr * dr + di * di)
    if f.is_zero():
        notes.append("|L(jw)| = 1 at every frequency: no isolated gain crossover")
        return []
    return [w for w, _ in _positive_roots(f)]


def _phase_crossovers(loop: LoopFunction, notes: list[str]) -> list[tuple[arb | float, fmpq | None]]:
    """Phase crossovers as (w ball, exact |L| where rational), w = 0 and infinity included as floats."""
    out: list[tuple[arb | float, fmpq | None]] = []
    n0, d0 = loop.numerator[0], loop.denominator[0]
    if d0 != 0 and n0 != 0 and loop.gain * n0 / d0 < 0:
        out.append((0.0, abs(loop.gain * n0 / d0)))
    out += [(w, None) for w in (_rational_phase_crossovers(loop) if loop.delay == 0 else
                                _delayed_phase_crossovers(loop, notes))]
    lead = loop.gain * loop.numerator[-1] / loop.denominator[-1]
    if len(loop.numerator) == len(loop.denominator) and lead < 0:
        out.append((math.inf, abs(lead)))
    return out


def _rational_phase_crossovers(loop: LoopFunction) -> list[arb]:
    nr, ni = _axis_parts(loop.numerator)
    dr, di = _axis_parts(loop.denominator)
    im = ni * dr - nr * di
    re = loop.gain * (nr * dr + ni * di)
    out = []
    for w, factor in _positive_roots(im):
        if re.is_zero() or (re % fmpq_poly(factor)).is_zero():
            continue  # L is zero or infinite there: no crossover
        if _negative(re, w, factor):
            out.append(w)
    return out


def _negative(re: fmpq_poly, w: arb, factor: fmpz_poly) -> bool:
    """Sign of re at the root of ``factor`` in ball ``w`` (nonzero: factor does not divide re)."""
    prec = PREC
    while True:
        with ctx.workprec(prec):
            if factor.degree() > 1:
                w = next(b for b in real_roots(factor, prec) if b.overlaps(w))
            v = arb_poly_eval(re, w)
        if v < 0:
            return True
        if v > 0:
            return False
        prec *= 2


def arb_poly_eval(f: fmpq_poly, x: arb) -> arb:
    from flint import arb_poly

    return arb_poly([arb(f[i]) for i in range(f.degree() + 1)])(x)


def _delayed_phase_crossovers(loop: LoopFunction, notes: list[str]) -> list[arb]:
    """Certified zeros of Im L(jw) with Re L(jw) < 0 on (0, w_max] (module notes)."""
    num, den, tau = loop.numerator, loop.denominator, arb(loop.delay)
    dnum = [k * c for k, c in enumerate(num)][1:] or [fmpq(0)]
    dden = [k * c for k, c in enumerate(den)][1:] or [fmpq(0)]

    def a_of(w: arb) -> acb:
        return _at_axis(num, w) * _at_axis(den, w).conjugate() * acb(0, -w * tau).exp()

    def f(w: arb) -> arb:
        return a_of(w).imag

    def df(w: arb) -> arb:
        s = acb(0, w)
        rot = acb(0, -w * tau).exp()
        n, d = _at_axis(num, w), _at_axis(den, w)
        dn = acb_poly([acb(c) for c in dnum])(s) * acb(0, 1)
        dd = acb_poly([acb(c) for c in dden])(s) * acb(0, 1)
        return ((dn * d.conjugate() + n * dd.conjugate() - acb(0, 1) * tau * n * d.conjugate()) * rot).imag

    limit = float(_magnitude_limit(loop))
    try:
        zeros = real_zeros(f, df, 0.0, limit, skip_origin=True)
    except AnalysisError:
        raise AnalysisError("E465", "a phase crossover of the delayed loop could not be isolated", where=WHERE) from None
    notes.append(f"phase crossovers searched on (0, {limit:.6g}] rad/s: beyond, |L| < 1/{GAIN_MARGIN_LIMIT} (proven)")
    out = []
    for w in zeros:
        value = (acb(loop.gain) * a_of(w)).real
        if value < 0:
            out.append(w)
        elif not value > 0:
            raise AnalysisError("E465", f"phase crossover near w = {float(w.mid()):.6g} undecided", where=WHERE)
    return out


def _magnitude_limit(loop: LoopFunction) -> fmpq:
    """A w beyond which |L(jw)| < 1/GAIN_MARGIN_LIMIT, proven: |K| sum|n_k| w^k against
    |d_n| w^n - sum_{k<n} |d_k| w^k (n above the numerator's degree)."""
    n = len(loop.denominator) - 1
    w = fmpq(1)
    while True:
        top = abs(loop.gain) * sum(abs(c) * w ** k for k, c in enumerate(loop.numerator))
        low = abs(loop.denominator[-1]) * w ** n - sum(abs(c) * w ** k for k, c in enumerate(loop.denominator[:-1]))
        if low > 0 and top * GAIN_MARGIN_LIMIT < low:
            return w
        w *= 2


def _gain_margin(loop: LoopFunction, w: arb | float, exact: fmpq | None) -> GainMargin:
    magnitude = float(exact) if exact is not None else float(abs(_value(loop, w)).mid())  # type: ignore[arg-type]
    omega = w if isinstance(w, float) else float(w.mid())
    rise = magnitude < 1
    factor = 1 / magnitude if rise else magnitude
    critical = float(loop.gain) / magnitude
    return GainMargin(omega, "rise" if rise else "fall", factor, 20 * math.log10(factor), critical)


def _phase_margin(loop: LoopFunction, w: arb) -> PhaseMargin:
    margin = float((-_value(loop, w)).arg().mid())  # in (-pi, pi]
    omega = float(w.mid())
    phase = float(unwrapped_phase(loop, np.array([omega]))[0])
    return PhaseMargin(omega, math.degrees(margin), phase, (margin % (2 * math.pi)) / omega)


# -- sensitivity peak -----------------------------------------------------------------------------
def sensitivity_peak(loop: LoopFunction) -> SensitivityPeak:
    """Ms = max over w >= 0 of |1/(1 + L(jw))| (module notes: certified without a delay)."""
    closed = [loop.gain * (loop.numerator[k] if k < len(loop.numerator) else 0) + c
              for k, c in enumerate(loop.denominator)]
    cr, ci = _axis_parts(closed)
    dr, di = _axis_parts(loop.denominator)
    q = cr * cr + ci * ci
    p = dr * dr + di * di
    if closed[0] == 0 or _positive_roots(q) or q.degree() < p.degree():
        return SensitivityPeak(math.inf, None, "certified")
    if loop.delay != 0:
        return _sampled_peak(loop)
    candidates: list[tuple[arb, float]] = [(arb(p[0] / q[0]), 0.0)]
    if q.degree() == p.degree():
        candidates.append((arb(p[p.degree()] / q[q.degree()]), math.inf))
    for w, _ in _positive_roots(p.derivative() * q - p * q.derivative()):
        candidates.append((arb_poly_eval(p, w) / arb_poly_eval(q, w), float(w.mid())))
    best, omega = max(candidates, key=lambda c: float(c[0].mid()))
    upper = max(float((c[0] + c[0].rad()).mid()) for c in candidates)
    return SensitivityPeak(math.sqrt(float(best.mid())), None if math.isinf(omega) else omega, "certified",
                           math.sqrt(upper) * (1 + 1e-15))


def _sampled_peak(loop: LoopFunction) -> SensitivityPeak:
    grid = frequency_grid(loop, 4000)
    values = np.abs(1 / (1 + complex_response(loop, grid)))
    best = (float(values[0]), float(grid[0]))
    for i in np.argsort(values)[-3:]:
        lo, hi = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
        best = max(best, _golden_max(loop, float(lo), float(hi)))
    return SensitivityPeak(best[0], best[1], "estimated")


def _golden_max(loop: LoopFunction, lo: float, hi: float) -> tuple[float, float]:
    def s(w: float) -> float:
        return float(abs(1 / (1 + complex_response(loop, np.array([w]))[0])))

    ratio = (math.sqrt(5) - 1) / 2
    a, b = math.log(lo), math.log(hi)
    for _ in range(60):
        c, d = b - ratio * (b - a), a + ratio * (b - a)
        if s(math.exp(c)) > s(math.exp(d)):
            b = d
        else:
            a = c
    w = math.exp((a + b) / 2)
    return s(w), w


# -- curves -------------------------------------------------------------------------------------
def _float_roots(coeffs: Sequence[fmpq]) -> np.ndarray:
    return np.roots([float(c) for c in reversed(coeffs)]) if len(coeffs) > 1 else np.array([])


def complex_response(loop: LoopFunction, omegas: np.ndarray) -> np.ndarray:
    """L(jw) in floats (Horner on coefficients scaled by their largest)."""
    s = 1j * np.asarray(omegas, dtype=float)
    num = np.polyval([float(c) for c in reversed(loop.numerator)], s)
    den = np.polyval([float(c) for c in reversed(loop.denominator)], s)
    return float(loop.gain) * num / den * np.exp(-s * float(loop.delay))


def unwrapped_phase(loop: LoopFunction, omegas: np.ndarray) -> np.ndarray:
    """arg L(jw) in degrees, continuous in w > 0 (but for a zero or pole on the axis): the sum of the
    angles of jw - z over zeros, minus over poles, the sign of the constant (-180 when negative)
    and -w tau."""
    w = np.asarray(omegas, dtype=float)
    s = 1j * w[:, None]
    lead = float(loop.gain * loop.numerator[-1] / loop.denominator[-1])
    total = np.zeros_like(w) + (-math.pi if lead < 0 else 0.0)
    total += _angles(s, _float_roots(loop.numerator)) - _angles(s, _float_roots(loop.denominator))
    return np.degrees(total - w * float(loop.delay))


def _angles(s: np.ndarray, roots: np.ndarray) -> np.ndarray:
    """Sum over roots z of arg(jw - z), continuous in w: as arg(z - jw) + pi for Re z > 0 (jw - z
    then crosses the negative real axis at w = Im z)."""
    if not roots.size:
        return np.zeros(s.shape[0])
    right = roots.real > 0
    angles = np.where(right[None, :], np.angle(roots[None, :] - s) + np.pi, np.angle(s - roots[None, :]))
    return angles.sum(axis=1)


def frequency_grid(loop: LoopFunction, points: int = 400) -> np.ndarray:
    """Logarithmic grid covering every corner frequency (roots' sizes, 1/tau) a decade either side."""
    sizes = [abs(r) for r in np.concatenate([_float_roots(loop.numerator), _float_roots(loop.denominator)])
             if abs(r) > 0]
    if loop.delay != 0:
        sizes.append(1 / float(loop.delay))
    sizes = sizes or [1.0]
    lo = math.floor(math.log10(min(sizes))) - 1
    hi = math.ceil(math.log10(max(sizes))) + 1
    return np.logspace(lo, hi, points)


def response(loop: LoopFunction, omegas: np.ndarray | None = None, points: int = 400) -> dict[str, np.ndarray]:
    """Curves for plots: ``omega``, ``magnitude``, ``magnitude_db``, ``phase`` (unwrapped degrees),
    ``real`` and ``imag`` (the polar plot)."""
    w = frequency_grid(loop, points) if omegas is None else np.asarray(omegas, dtype=float)
    value = complex_response(loop, w)
    magnitude = np.abs(value)
    with np.errstate(divide="ignore"):
        db = 20 * np.log10(magnitude)
    return {"omega": w, "magnitude": magnitude, "magnitude_db": db, "phase": unwrapped_phase(loop, w),
            "real": value.real, "imag": value.imag}
