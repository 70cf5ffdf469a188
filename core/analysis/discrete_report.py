"""The whole analysis of a characteristic polynomial typed in z, gathered in one DiscreteReport.

The text is read by the ordinary expression parser, where every name but s is a parameter: z
comes back as a parameter named z and is made the polynomial's variable here. s in the text is
E452, z in a denominator E458. A parameter named ``Ts`` is the sample period: ``--sample-period``
gives its value, and the exact stable range in Ts at the nominal values gives the largest sample
period (exact, since Ts then enters the coefficients as a polynomial).

>>> r = check_z_polynomial("z^2 + (K - 1)*z + 0.25", parameter="K", at={"K": fmpq(1, 2)}, sample_period=fmpq(1, 10))
>>> r.stable_range.to_dict()["exact_intervals"], r.nominal.stable, r.to_dict()["domain"]
([['-1/4', '9/4']], True, 'z')
"""
from __future__ import annotations

import cmath
import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace

from flint import fmpq, fmpq_mpoly, fmpq_mpoly_ctx

from core.algebra.expression import parse_fraction, to_mpoly
from core.algebra.polynomial import ParametricPolynomial, primitive_scale, to_fmpq
from core.analysis.discrete import (
    JURY_DISPLAY_BITS,
    JuryTable,
    ZEndpoint,
    bilinear,
    jury_table,
    radius_bounds,
    radius_range,
    schur_stable,
    unit_circle_counts,
    z_stable_range,
    z_text,
)
from core.analysis.poles import certified_roots, expand_multiplicity
from core.analysis.report import CAUTION, decay_sigma, values_text
from core.analysis.routh import DISPLAY_BITS, RouthArray, routh_array
from core.analysis.stable_range import Boundary, Endpoint, Margins, StableRange, margins
from core.errors import AnalysisError, ExpressionError, Notice, notice_kind

__all__ = ["SAMPLE_PERIOD_NAME", "DiscreteNominal", "DiscreteReport", "MaxSamplePeriod", "RadiusRequirement",
           "check_z_polynomial", "read_z_polynomial"]

SAMPLE_PERIOD_NAME = "Ts"
Z = "z"
MAX_Z_DEGREE = 200  # as for polynomials in s


def read_z_polynomial(text: str, where: str = "polynomial") -> fmpq_mpoly:
    """The typed text as a polynomial whose first generator is z (then the parameters, sorted).

    >>> read_z_polynomial("z^2 + (K - 1)*z + 0.25").context().names()
    ('z', 'K')
    >>> read_z_polynomial("z^2 + s")
    Traceback (most recent call last):
    ...
    core.errors.ExpressionError: E452 at polynomial: a polynomial in z contains s: type it in one variable
    """
    num, den = parse_fraction(text, where)
    names = {str(x) for part in (num, den) for x in part.free_symbols}
    if "s" in names:
        raise ExpressionError("E452", "a polynomial in z contains s: type it in one variable", where=where)
    if Z in {str(x) for x in den.free_symbols}:
        raise ExpressionError("E458", "z appears in a denominator: multiply it out to a polynomial in z",
                              where=where)
    ctx = fmpq_mpoly_ctx.get((Z, *sorted(names - {Z})), "lex")
    poly = to_mpoly(num, ctx)
    if poly.degrees()[0] > MAX_Z_DEGREE:
        raise ExpressionError("E459", f"degree in z is {poly.degrees()[0]} (at most {MAX_Z_DEGREE})", where=where)
    bottom = to_mpoly(den, ctx)
    return poly * (1 / bottom.leading_coefficient()) if bottom.is_constant() else poly


@dataclass
class DiscreteNominal:
    """The polynomial at the nominal values: exact unit-circle counts and certified roots."""

    values: dict[str, fmpq]
    stable: bool
    inside: int
    on: int
    outside: int
    roots: list  # certified Poles (re, im) in the z-plane
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        poles = expand_multiplicity(self.roots)
        return {"values": {k: float(v) for k, v in self.values.items()},
                "exact_values": {k: str(v) for k, v in self.values.items()}, "stable": self.stable,
                "inside": self.inside, "on": self.on, "outside": self.outside,
                "poles": [[p.re, p.im] for p in poles],
                "poles_polar": [[abs(complex(p.re, p.im)), cmath.phase(complex(p.re, p.im))] for p in poles],
                "notes": list(self.notes)}


@dataclass
class RadiusRequirement:
    """The decay requirement as a radius: every root inside |z| < r = e^(-sigma Ts)."""

    sigma: fmpq
    mode: str
    note: str
    radius_low: fmpq
    radius_high: fmpq
    range: StableRange | None
    nominal_ok: bool | None

    def to_dict(self) -> dict:
        out = {"sigma": float(self.sigma), "mode": self.mode, "note": self.note,
               "radius": float((self.radius_low + self.radius_high) / 2),
               "radius_bounds": [str(self.radius_low), str(self.radius_high)],
               "range_method": "certified: exact range for the lower bound of r, every value listed meets it",
               "nominal_method": "exact (bounds of r tightened until the verdict is the same for both)",
               "nominal_ok": self.nominal_ok, "intervals": None, "endpoints": None, "exact_intervals": None}
        if self.range is not None:
            rng = self.range.to_dict()
            out.update(intervals=rng["intervals"], endpoints=rng["endpoints"], exact_intervals=rng["exact_intervals"])
        return out


@dataclass
class MaxSamplePeriod:
    """The longest sample period with every root inside the circle, at the nominal values: the end of
    the stable interval of Ts that holds the given sample period (or the first one above 0), exact."""

    range: StableRange
    lo: Boundary | None
    hi: Boundary | None
    stable_for_none: bool = False  # no sample period > 0 is stable

    def to_dict(self) -> dict:
        ends = self.range.to_dict()
        hi = self.hi
        return {"value": None if hi is None else hi.value, "exact": None if hi is None else hi.text(SAMPLE_PERIOD_NAME),
                "approx": None if hi is None else hi.approx, "unbounded": hi is None and not self.stable_for_none,
                "stable_for_none": self.stable_for_none,
                "method": "exact (stable range in Ts)",
                "stable_periods": ends["intervals"], "exact_stable_periods": ends["exact_intervals"],
                "endpoints": ends["endpoints"]}


@dataclass
class DiscreteReport:
    """Everything one analysis of a polynomial in z found (the command line only reads it)."""

    polynomial: str
    analysed: ParametricPolynomial
    parameter: str | None
    values: dict[str, fmpq]
    sample_period: fmpq | None
    w_polynomial: ParametricPolynomial
    w_routh: RouthArray
    jury: JuryTable | None
    stable_range: StableRange | None
    nominal: DiscreteNominal | None
    margins: Margins | None = None
    decay: RadiusRequirement | None = None
    max_sample_period: MaxSamplePeriod | None = None
    warnings: list[str] = field(default_factory=list)
    source: str = "typed polynomial in z"

    def to_dict(self) -> dict:
        """JSON fields: the s-domain report's keys where they mean the same, and the z-plane ones."""
        jury_value = None if self.parameter is None else self.values.get(self.parameter)
        judged = self.parameter is None or jury_value is not None
        return {
            "source": self.source,
            "domain": "z",
            "sample_period": None if self.sample_period is None else float(self.sample_period),
            "exact_sample_period": None if self.sample_period is None else str(self.sample_period),
            "polynomial": self.polynomial,
            "analysed_polynomial": z_text(self.analysed),
            "degree": self.analysed.degree,
            "parameter": self.parameter,
            "nominal": self.nominal.to_dict() if self.nominal else None,
            "routh": None,
            "w_polynomial": z_text(self.w_polynomial, "w"),
            "w_routh": {**self.w_routh.to_dict(), "variable": "w", "map": "z = (1 + w)/(1 - w)"},
            "jury": None if self.jury is None else self.jury.to_dict(jury_value if judged else None),
            "stable_range": self.stable_range.to_dict() if self.stable_range else None,
            "margins": self.margins.to_dict() if self.margins is not None else None,
            "decay": self.decay.to_dict() if self.decay else None,
            "max_sample_period": self.max_sample_period.to_dict() if self.max_sample_period else None,
            "warnings": [str(w) for w in self.warnings],
            "warning_kinds": [notice_kind(w) for w in self.warnings],
            "caution": CAUTION,
        }


def check_z_polynomial(text: str, parameter: str | None = None, at: Mapping[str, object] | None = None,
                       sample_period=None, decay: float = 0.0, decay_mode: str = "sigma") -> DiscreteReport:
    """Analyse a typed characteristic polynomial in z (see the module notes)."""
    poly = read_z_polynomial(text)
    names = poly.context().names()[1:]
    values = {k: to_fmpq(v) for k, v in (at or {}).items()}
    unknown = sorted(set(values) - set(names))
    if unknown:
        raise AnalysisError("E405", f"parameter {', '.join(unknown)} does not appear in the polynomial",
                            where=f"parameter {unknown[0]}")
    ts = _sample_period(sample_period, values, names)
    if ts is not None and SAMPLE_PERIOD_NAME in names:
        values[SAMPLE_PERIOD_NAME] = ts
    if parameter is not None and parameter not in names:
        raise AnalysisError("E405", f"the tuning parameter '{parameter}' does not appear in the polynomial",
                            where=f"parameter {parameter}")
    missing = [n for n in names if n != parameter and n not in values]
    if missing:
        hint = " (the sample period: give it with --sample-period)" if SAMPLE_PERIOD_NAME in missing else ""
        raise AnalysisError("E404", f"parameter {', '.join(missing)} has no value; give one or tune it{hint}",
                            where=f"parameter {missing[0]}")
    poly = poly * primitive_scale(poly)
    analysed = ParametricPolynomial.from_mpoly(poly, parameter, values)
    if analysed.degree < 0:
        raise AnalysisError("E403", "the characteristic polynomial is identically zero", where="polynomial")
    w = bilinear(analysed)
    warnings: list[str] = []
    w_routh = routh_array(w, limit_bits=DISPLAY_BITS) if w.degree >= 0 else routh_array(analysed)
    if w_routh.omitted:
        warnings.append(Notice(f"w-plane Routh array not shown: {w_routh.omitted.replace('row s^', 'row w^')}",
                               "routh_omitted"))
    jury = jury_table(analysed, JURY_DISPLAY_BITS) if analysed.degree >= 1 else None
    if jury is not None and jury.omitted:
        warnings.append(Notice(f"Jury table not shown: {jury.omitted}", "routh_omitted"))
    nominal_value = values.get(parameter) if parameter else None
    rng = _tuning_range(analysed, nominal_value, ts) if parameter else None
    nominal = _nominal(analysed, nominal_value, values) if (parameter is None or nominal_value is not None) else None
    report = DiscreteReport(text, analysed, parameter, values, ts, w, w_routh,
                            jury, rng, nominal,
                            margins(rng, nominal_value) if rng is not None and nominal_value is not None else None,
                            warnings=warnings)
    report.decay = _radius(analysed, ts, decay, decay_mode, nominal_value)
    if SAMPLE_PERIOD_NAME in names:
        report.max_sample_period = _max_period(poly, values, parameter, ts)
    return report


def _tuning_range(poly: ParametricPolynomial, nominal, ts: fmpq | None) -> StableRange:
    """The stable range of the tuning parameter; when that parameter is the sample period itself,
    each end's frequency is its angle over that end's own period."""
    if poly.parameter != SAMPLE_PERIOD_NAME:
        return z_stable_range(poly, nominal, ts)
    rng = z_stable_range(poly, nominal, None)
    ends: list[Endpoint] = [replace(e, omega=e.angle / e.value) if e.angle is not None and 0 < e.value < math.inf else e
            for e in rng.endpoints if isinstance(e, ZEndpoint)]
    return replace(rng, endpoints=ends)


def _sample_period(value, values: Mapping[str, fmpq], names) -> fmpq | None:
    from core.analysis.zoh import check_sample_period

    if value is None:
        given = values.get(SAMPLE_PERIOD_NAME)
        return None if given is None else check_sample_period(given, where=f"parameter {SAMPLE_PERIOD_NAME}")
    ts = check_sample_period(value)
    if SAMPLE_PERIOD_NAME in values and values[SAMPLE_PERIOD_NAME] != ts:
        raise AnalysisError("E457", f"the sample period is given twice (as {SAMPLE_PERIOD_NAME} and as the sample "
                            "period) with different values", where="sample period")
    return ts


def _nominal(poly: ParametricPolynomial, value, values: Mapping[str, fmpq]) -> DiscreteNominal:
    coeffs = poly.at(value)
    notes = []
    if coeffs == [0]:
        where = values_text(values) if values else "the nominal values"
        return DiscreteNominal(dict(values), False, 0, 0, 0, [],
                               [f"the characteristic polynomial vanishes identically at {where} (not stable)"])
    counts = unit_circle_counts(coeffs)
    if len(coeffs) - 1 < poly.degree:
        notes.append(f"the leading coefficient vanishes here: the order drops from {poly.degree} to "
                     f"{len(coeffs) - 1} (a root went to infinity in z: not stable)")
    stable = schur_stable(coeffs, poly.degree)
    return DiscreteNominal(dict(values), stable, counts.inside, counts.on, counts.outside,
                           certified_roots(coeffs), notes)


def _radius(poly: ParametricPolynomial, ts: fmpq | None, decay: float, mode: str, nominal) -> RadiusRequirement | None:
    sigma, note = decay_sigma(mode, decay)
    if sigma == 0:
        return None
    if ts is None:
        raise AnalysisError("E456", "a decay requirement for a polynomial in z needs the sample period "
                            "(the radius is e^(-sigma Ts))", where="decay requirement")
    lo, hi = radius_bounds(sigma, ts)
    rng, ok = radius_range(poly, sigma, ts, nominal)
    return RadiusRequirement(sigma, mode, note, lo, hi, rng if poly.parameter else None, ok)


def _max_period(poly: fmpq_mpoly, values: Mapping[str, fmpq], parameter: str | None,
                ts: fmpq | None) -> MaxSamplePeriod | None:
    """The exact stable range in Ts at the nominal values (None without a nominal tuning value)."""
    fixed = {k: v for k, v in values.items() if k != SAMPLE_PERIOD_NAME}
    if parameter not in (None, SAMPLE_PERIOD_NAME) and parameter not in fixed:
        return None
    in_ts = ParametricPolynomial.from_mpoly(poly, SAMPLE_PERIOD_NAME, fixed)
    if in_ts.degree < 1:
        return None
    rng = z_stable_range(in_ts, None, None)
    positive = [(lo, hi) for lo, hi in rng.intervals if hi is None or hi.sign_minus(fmpq(0)) > 0]
    chosen = next((iv for iv in positive if ts is not None and _inside(iv, ts)), positive[0] if positive else None)
    if chosen is None:
        return MaxSamplePeriod(rng, None, None, stable_for_none=True)
    return MaxSamplePeriod(rng, chosen[0], chosen[1])


def _inside(interval, value: fmpq) -> bool:
    lo, hi = interval
    return (lo is None or lo.sign_minus(value) < 0) and (hi is None or hi.sign_minus(value) > 0)
