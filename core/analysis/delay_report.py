"""The analysis of a typed characteristic quasi-polynomial (a loop with dead time), in one report.

The tuning parameter is a gain (entering the polynomial parts affinely) or the delay itself; every
other parameter sits at its value. The stable range comes in the same JSON form as a polynomial's
(``stable_range``), certified (see :mod:`core.analysis.delay`); the report adds the
quasi-polynomial, the delay margin at the nominal values, the crossings there, Padé cross-checks
and the rightmost roots.

>>> r = check_quasi_polynomial("s + 1 + K*exp(-s)", "K", {"K": 1})
>>> r.stable_range.to_dict()["approx_intervals"], r.nominal_stable
([['-1', '2.26182633411']], True)
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from flint import fmpq, fmpq_mpoly

from core.algebra.expression import parse_quasi_polynomial
from core.algebra.polynomial import ParametricPolynomial, mpoly_context, to_fmpq
from core.algebra.quasi import Delay, QuasiPolynomial
from core.analysis.delay import (
    Crossing,
    DelayMargin,
    DelayRange,
    Parts,
    combine,
    delay_margin,
    delay_range,
    gain_range,
    normal_parts,
    rhp_count,
    rightmost_roots,
)
from core.analysis.routh import is_hurwitz
from core.analysis.stable_range import stable_range
from core.errors import AnalysisError, Notice

__all__ = ["PADE_ORDERS", "DelayReport", "PadeCheck", "check_quasi_polynomial", "pade_polynomial"]

PADE_ORDERS = tuple(range(1, 9))


@dataclass
class PadeCheck:
    """One Padé order's rational loop, solved exactly, and whether its nominal verdict agrees."""

    order: int
    range: dict | None
    nominal_stable: bool | None
    agrees: bool | None

    def to_dict(self) -> dict:
        out = {"order": self.order, "nominal_stable": self.nominal_stable, "agrees": self.agrees}
        out.update(self.range or {"intervals": None, "approx_intervals": None})
        return out


@dataclass
class DelayReport:
    """Everything the analysis of a delay loop found."""

    polynomial: str
    quasi: QuasiPolynomial
    parameter: str | None
    values: dict[str, fmpq]
    stable_range: DelayRange | None
    nominal_stable: bool | None
    nominal_rhp: int | None
    margin: DelayMargin | None
    crossings: list[Crossing]
    pade: list[PadeCheck]
    rightmost: dict | None = None
    warnings: list[str] = field(default_factory=list)
    source: str = "typed quasi-polynomial"

    def to_dict(self) -> dict:
        """The JSON contract (``stable_range`` as for polynomials; keys only ever added)."""
        from core.analysis.report import CAUTION

        nominal = None if self.nominal_stable is None else {
            "values": {k: float(v) for k, v in self.values.items()},
            "exact_values": {k: str(v) for k, v in self.values.items()},
            "stable": self.nominal_stable, "rhp": self.nominal_rhp}
        return {
            "source": self.source, "polynomial": self.polynomial, "parameter": self.parameter,
            "quasi_polynomial": self.quasi.to_dict(), "nominal": nominal,
            "stable_range": self.stable_range.to_dict() if self.stable_range is not None else None,
            "delay_margin": self.margin.to_dict() if self.margin is not None else None,
            "crossings": [c.to_dict() for c in self.crossings],
            "pade_check": [p.to_dict() for p in self.pade],
            "rightmost_roots": self.rightmost,
            "warnings": [str(w) for w in self.warnings],
            "warning_kinds": [getattr(w, "kind", "note") for w in self.warnings],
            "caution": CAUTION,
        }


def check_quasi_polynomial(text: str, parameter: str | None = None,
                           at: Mapping[str, object] | None = None) -> DelayReport:
    """Analyse a typed quasi-polynomial (see the module notes). E443 for a delay parameter without a
    value, E404 for another parameter without one, E405 for a name that is not in the text, E440 for
    a negative delay value, E445 for a tuning parameter the delay analysis does not take."""
    declared = set(at or ()) | ({parameter} if parameter else set())
    quasi = parse_quasi_polynomial(text, where="polynomial", declared=declared)
    values = {name: _exact(name, v, name in quasi.delay_parameters) for name, v in (at or {}).items()}
    names = set(quasi.parameters)
    unknown = sorted((set(values) | ({parameter} if parameter else set())) - names)
    if unknown:
        raise AnalysisError("E405", f"parameter {unknown[0]} does not appear in the polynomial",
                            where=f"parameter {unknown[0]}")
    for name in quasi.delay_parameters:
        if name != parameter and name not in values:
            raise AnalysisError("E443", f"delay parameter {name} has no value; give one (--at {name}=...) "
                                "or tune it", where=f"parameter {name}")
    for name in quasi.polynomial_parameters:
        if name != parameter and name not in values:
            raise AnalysisError("E404", f"parameter {name} has no value; give one or tune it", where=f"parameter {name}")
    if parameter is not None and parameter in quasi.delay_parameters:
        return _delay_tuned(text, quasi, parameter, values)
    return _gain_tuned(text, quasi, parameter, values)


def _exact(name: str, value, is_delay: bool) -> fmpq:
    """A value, exact; E440 for a delay (E404 for another parameter) that is not a finite number."""
    try:
        if isinstance(value, float) and not math.isfinite(value):
            raise ValueError
        return to_fmpq(value)
    except (TypeError, ValueError, ZeroDivisionError):
        code, what = ("E440", "delay") if is_delay else ("E404", "parameter")
        raise AnalysisError(code, f"value {value!r} of {what} '{name}' is not a finite number",
                            where=f"parameter {name}") from None


def _delay_value(delay: Delay, values: Mapping[str, fmpq]) -> fmpq:
    value = delay.at(values)
    if value < 0:
        raise AnalysisError("E440", f"delay {delay.text()} is negative ({value}) at the given values",
                            where="polynomial")
    return value


def _coefficients(poly: fmpq_mpoly, parameter: str | None, values: Mapping[str, fmpq]) -> ParametricPolynomial:
    return ParametricPolynomial.from_mpoly(poly, parameter, {k: v for k, v in values.items() if k != parameter})


def _gain_tuned(text: str, quasi: QuasiPolynomial, parameter: str | None, values: dict[str, fmpq]) -> DelayReport:
    a_parts, b_parts = [], []
    degree = max(_coefficients(p, parameter, values).degree for _, p in quasi.terms)
    for delay, poly in quasi.terms:
        tau = _delay_value(delay, values)
        coeffs = _coefficients(poly, parameter, values).coeffs
        if any(c.degree() > 1 for c in coeffs):
            raise AnalysisError("E445", f"the tuning parameter {parameter} enters a delay loop non-linearly "
                                "(only A + K B is analysed)", where=f"parameter {parameter}")
        width = degree + 1 - len(coeffs)
        a_parts.append((tau, [fmpq(0)] * width + [c[0] for c in coeffs]))
        b_parts.append((tau, [fmpq(0)] * width + [c[1] for c in coeffs]))
    a = normal_parts(a_parts, retarded=parameter is None)
    b = normal_parts(b_parts, retarded=False)
    warnings: list[str] = []
    nominal = values.get(parameter) if parameter else None
    rng = None
    if parameter is not None:
        hint = _hint(quasi, parameter, values)
        rng = gain_range(a, b, parameter, hint)
        warnings += [Notice(n, "note") for n in rng.notes]
    report = DelayReport(text, quasi, parameter, values, rng, None, None, None, [], [], warnings=warnings)
    if parameter is None or nominal is not None:
        _judge_nominal(report, a if nominal is None else combine(a, b, nominal))
    report.pade = _pade_checks(quasi, parameter, values, report.nominal_stable, rng)
    return report


def _hint(quasi: QuasiPolynomial, parameter: str, values: Mapping[str, fmpq]) -> float:
    """A typical size of the tuning gain: the nominal value and the delay-free loop's range ends."""
    sizes = [abs(float(values[parameter]))] if parameter in values else []
    total = quasi.terms[0][1]
    for _, poly in quasi.terms[1:]:
        total = total + poly
    free = _coefficients(total, parameter, values)
    if free.degree >= 0:
        sizes += [abs(e.value) for e in stable_range(free).endpoints if math.isfinite(e.value)]
    return max(sizes, default=1.0)


def _delay_tuned(text: str, quasi: QuasiPolynomial, parameter: str, values: dict[str, fmpq]) -> DelayReport:
    if parameter in quasi.polynomial_parameters:
        raise AnalysisError("E445", f"the delay {parameter} also appears outside exp(...): not analysed",
                            where=f"parameter {parameter}")
    delayed = quasi.terms[1:]
    if len(delayed) != 1 or delayed[0][0].constant != 0 or len(delayed[0][0].parts) != 1:
        raise AnalysisError("E445", f"tuning the delay {parameter} is analysed for one delayed term "
                            f"e^(-c*{parameter}*s) only", where=f"parameter {parameter}")
    (delay, poly), scale = delayed[0], delayed[0][0].parts[0][1]
    p0 = _coefficients(quasi.terms[0][1], None, values).at()
    p1 = _coefficients(poly, None, values).at()
    rng = delay_range(p0, p1, parameter, scale)
    report = DelayReport(text, quasi, parameter, values, rng, None, None, None, [], [],
                         warnings=[Notice(n, "note") for n in rng.notes])
    if parameter in values:
        tau = _delay_value(delay, values)
        _judge_nominal(report, normal_parts([(fmpq(0), p0), (tau, p1)]))
    report.pade = _pade_checks(quasi, parameter, values, report.nominal_stable, rng)
    return report


def _judge_nominal(report: DelayReport, parts: Parts) -> None:
    """The certified verdict at the nominal values, the delay margin and the crossings there."""
    try:
        report.nominal_rhp = rhp_count(parts)
    except AnalysisError as err:
        if err.code != "E446":
            raise
        report.nominal_stable = False
        report.warnings.append(Notice(f"nominal loop: {err.message}: not stable", "note"))
        return
    report.nominal_stable = report.nominal_rhp == 0
    roots = rightmost_roots(parts)
    report.rightmost = roots.to_dict()
    if not roots.validated:
        report.warnings.append(Notice(f"rightmost roots: {len(roots.roots)} found of {roots.counted} counted "
                                      "(time budget): not validated", "note"))
    if len(parts) >= 2:
        try:
            report.margin = delay_margin(parts)
        except AnalysisError as err:
            if err.code != "E446":
                raise
            report.warnings.append(Notice(f"delay margin not computed: {err.message}", "note"))
        else:
            report.crossings = report.margin.crossings


# -- Padé cross-checks ----------------------------------------------------------------------------
def _pade_coefficients(order: int) -> list[fmpq]:
    """c_k of the (order, order) Padé approximant of e^(-x): N(x) = sum c_k (-x)^k, D(x) = sum c_k x^k."""
    f = math.factorial
    return [fmpq(f(2 * order - k) * f(order), f(2 * order) * f(k) * f(order - k)) for k in range(order + 1)]


def pade_polynomial(quasi: QuasiPolynomial, order: int) -> fmpq_mpoly:
    """The characteristic polynomial with every e^(-s tau) replaced by its Padé approximant N/D and the
    denominators multiplied through (their roots, in the left half plane, are added): exact, in s, the
    parameters and the delay parameters.

    >>> from core.algebra.polynomial import mpoly_text
    >>> mpoly_text(pade_polynomial(parse_quasi_polynomial("s + exp(-2*s)"), 1))  # s(1 + s) + (1 - s)
    's^2 + 1'
    """
    names = set(quasi.parameters)
    ctx = mpoly_context(names)
    gens = dict(zip(ctx.names(), ctx.gens()))
    one = ctx.from_dict({(0,) * ctx.nvars(): 1})
    c = _pade_coefficients(order)

    def lift(poly: fmpq_mpoly) -> fmpq_mpoly:
        return ctx.from_dict({tuple(e for e in _reindex(exps, poly.context().names(), ctx.names())): v
                              for exps, v in poly.to_dict().items()})

    def delay_mpoly(delay: Delay) -> fmpq_mpoly:
        out = one * delay.constant
        for name, k in delay.parts:
            out += gens[name] * k
        return out
    nums, dens = [], []
    for delay, _ in quasi.terms:
        x = gens["s"] * delay_mpoly(delay)
        nums.append(sum((x ** k * (c[k] * (-1) ** k) for k in range(order + 1)), ctx.from_dict({})))
        dens.append(sum((x ** k * c[k] for k in range(order + 1)), ctx.from_dict({})))
    total = ctx.from_dict({})
    for i, (_, poly) in enumerate(quasi.terms):
        term = lift(poly) * nums[i]
        for j in range(len(quasi.terms)):
            if j != i:
                term *= dens[j]
        total += term
    return total


def _reindex(exps, names, target) -> list[int]:
    full = [0] * len(target)
    for name, e in zip(names, exps):
        full[list(target).index(name)] = e
    return full


def _pade_checks(quasi: QuasiPolynomial, parameter: str | None, values: Mapping[str, fmpq],
                 certified: bool | None, rng: DelayRange | None) -> list[PadeCheck]:
    out = []
    fixed = {k: v for k, v in values.items() if k != parameter}
    nominal = values.get(parameter) if parameter else None
    for order in PADE_ORDERS:
        poly = ParametricPolynomial.from_mpoly(pade_polynomial(quasi, order), parameter, fixed)
        if parameter is None:
            stable = is_hurwitz(poly.at(), poly.degree)
            out.append(PadeCheck(order, None, stable, None if certified is None else stable == certified))
            continue
        exact = stable_range(poly)
        data = exact.to_dict()
        if rng is not None and rng.window[0] == 0:  # a delay: only tau >= 0 counts
            data = _clipped(data)
        verdict = None if nominal is None else exact.contains(nominal)
        out.append(PadeCheck(order, data, verdict, None if verdict is None or certified is None else verdict == certified))
    return out


def _clipped(data: dict) -> dict:
    """A range of a delay restricted to tau > 0."""
    keys = ("intervals", "approx_intervals", "exact_intervals")
    out: dict[str, list] = {key: [] for key in keys}
    for i, (lo, hi) in enumerate(data["intervals"]):
        if hi is not None and hi <= 0:
            continue
        for key in keys:
            pair = list(data[key][i])
            if lo is None or lo < 0:
                pair[0] = 0.0 if key == "intervals" else "0"
            out[key].append(pair)
    return out
