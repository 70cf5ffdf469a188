"""The whole analysis of a loop, from a typed polynomial or a diagram, gathered in one Report.

>>> r = check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K", at={"K": 2})
>>> r.stable_range.to_dict()["intervals"]
[[0.0, 6.0]]
>>> r.nominal.stable, r.nominal.rhp
(True, 0)
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from flint import arb, ctx, fmpq, fmpq_mpoly, fmpq_poly

from core.algebra.expression import expression_parameters, parse_polynomial, to_mpoly
from core.algebra.polynomial import ParametricPolynomial, mpoly_context, mpoly_text, primitive_scale, to_fmpq
from core.analysis.poles import Pole, certified_roots, dominant_pole, expand_multiplicity
from core.analysis.routh import DISPLAY_BITS, RouthArray, is_hurwitz, routh_array, routh_counts
from core.analysis.stable_range import (
    Margins,
    StableRange,
    decay_range,
    margins,
    real_values,
    resultant_in_s,
    stable_range,
)
from core.errors import AnalysisError, Notice, notice_kind
from core.model.diagram import Diagram

if TYPE_CHECKING:
    from core.analysis.robust import RobustRange
    from core.graph.reduction import Reduction

CAUTION = ("A linear model is not a safety case. Before power is applied, check actuator saturation, "
           "time delays, sampling, sensor noise and hardware limits; defer to the applicable machinery "
           "and functional-safety standards and to licensed engineering practice.")

DECAY_NOTES = {
    "sigma": "minimum decay rate given directly",
    "half_time": "sigma = ln 2 / T from the time to half amplitude T",
    "settling": "sigma ~ 4 / Ts from the 2 % settling time Ts (rule of thumb, common practice)",
}


@dataclass
class Nominal:
    """The loop at the nominal values: exact root counts and certified poles."""

    values: dict[str, float]
    stable: bool
    rhp: int
    jw: int
    lhp: int
    poles: list[Pole]
    sign_changes: list[int]
    notes: list[str]
    exact_values: dict[str, str] = field(default_factory=dict)  # the values analysed, as exact text

    def to_dict(self) -> dict:
        """JSON-ready fields (``poles`` as [re, im] pairs, one per root; ``values`` rounded to
        floats for reading, ``exact_values`` the exact rationals analysed)."""
        return {"values": self.values, "exact_values": self.exact_values, "stable": self.stable,
                "rhp": self.rhp, "jw": self.jw, "lhp": self.lhp,
                "poles": [[p.re, p.im] for p in expand_multiplicity(self.poles)],
                "sign_changes": self.sign_changes, "notes": self.notes}


@dataclass
class Decay:
    """The decay requirement and the parameter range that meets it."""

    sigma: float
    mode: str
    note: str
    range: StableRange | None
    nominal_ok: bool | None

    def to_dict(self) -> dict:
        """JSON-ready fields; ``intervals`` and ``endpoints`` as in the stable range."""
        out = {"sigma": self.sigma, "mode": self.mode, "note": self.note, "nominal_ok": self.nominal_ok,
               "intervals": None, "endpoints": None}
        if self.range is not None:
            rng = self.range.to_dict()
            out["intervals"], out["endpoints"] = rng["intervals"], rng["endpoints"]
            out["exact_intervals"] = rng.get("exact_intervals")
        return out


@dataclass
class HiddenMode:
    """A root of the characteristic polynomial that cancels out of the input-output transfer."""

    pole: Pole
    blocks: list[str]

    @property
    def unstable(self) -> bool:
        """Whether the hidden mode does not decay."""
        return self.pole.re >= 0

    def to_dict(self) -> dict:
        """JSON-ready fields."""
        return {"re": self.pole.re, "im": self.pole.im, "multiplicity": self.pole.multiplicity,
                "unstable": self.unstable, "blocks": self.blocks}


@dataclass
class Report:
    """Everything one analysis found; panels and the command line only read it."""

    polynomial: str
    analysed: ParametricPolynomial
    parameter: str | None
    values: dict[str, fmpq]
    routh: RouthArray
    stable_range: StableRange | None
    nominal: Nominal | None
    decay: Decay | None
    margins: Margins | None = None
    hidden_modes: list[HiddenMode] = field(default_factory=list)
    transfer_function: dict | None = None
    zeros: list[Pole] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    source: str = ""
    closed_num: fmpq_mpoly | None = None  # the transfer function numerator, exact (fmpq_mpoly, factors cancelled)
    left_out: list[str] = field(default_factory=list)  # node ids on no wire path from the input to the output
    reduction: Reduction | None = field(default=None, repr=False, compare=False)  # input to output, for reuse
    robust_range: RobustRange | None = None  # with toleranced parameters (core.analysis.robust)

    @property
    def dominant(self) -> Pole | None:
        """The nominal loop's slowest pole."""
        return dominant_pole(self.nominal.poles) if self.nominal else None

    def to_dict(self) -> dict:
        """The JSON contract of ``python -m core check --json`` (keys kept stable)."""
        dom = self.dominant
        return {
            "source": self.source,
            "domain": "s",
            "polynomial": self.polynomial,
            "analysed_polynomial": self.analysed.text(),
            "degree": self.analysed.degree,
            "parameter": self.parameter,
            "nominal": self.nominal.to_dict() if self.nominal else None,
            "routh": self.routh.to_dict(),
            "stable_range": self.stable_range.to_dict() if self.stable_range else None,
            "margins": self.margins.to_dict() if self.margins is not None else None,
            "decay": self.decay.to_dict() if self.decay else None,
            "hidden_modes": [[h.pole.re, h.pole.im] for h in self.hidden_modes],
            "hidden_mode_details": [h.to_dict() for h in self.hidden_modes],
            "transfer_function": self.transfer_function,
            "poles": [p.to_dict() for p in self.nominal.poles] if self.nominal else None,
            "zeros": [[z.re, z.im] for z in expand_multiplicity(self.zeros)],
            "dominant_pole": dom.to_dict() if dom else None,
            "warnings": [str(w) for w in self.warnings],
            "warning_kinds": [notice_kind(w) for w in self.warnings],
            "left_out": self.left_out,
            "robust_range": self.robust_range.to_dict() if self.robust_range is not None else None,
            "caution": CAUTION,
        }


HALF_TIME_BITS = 128  # ln 2 is bounded to this many bits for the decay range of a time to half


def decay_sigma(mode: str, value: float) -> tuple[fmpq, str]:
    """Rational sigma (1/s) from a decay requirement, and the note that says how it was read.

    Exact for "sigma" and "settling". For "half_time" sigma = ln 2 / T is transcendental: this is
    an upper bound within 2^-128 relative (certified), so a range computed with it only lists values
    that meet the requirement; the nominal verdict is decided exactly by :func:`_meets_decay`.

    >>> decay_sigma("settling", 2.0)[0]
    2
    """
    if mode not in DECAY_NOTES:
        raise AnalysisError("E405", f"unknown decay mode '{mode}' (sigma, half_time or settling)",
                            where="decay requirement")
    if not (isinstance(value, (int, float)) and math.isfinite(value) and value >= 0):
        raise AnalysisError("E405", "the decay requirement must be a finite number >= 0",
                            where="decay requirement")
    if value == 0:
        return fmpq(0), "no decay requirement"
    if mode == "sigma":
        return to_fmpq(value), DECAY_NOTES[mode]
    if mode == "settling":
        return to_fmpq(4) / to_fmpq(value), DECAY_NOTES[mode]
    return _half_time_sigma(to_fmpq(value), HALF_TIME_BITS)[1], DECAY_NOTES[mode] + (
        f" (ln 2 bounded above to {HALF_TIME_BITS} bits: every value listed meets the requirement)")


def _half_time_sigma(half_time: fmpq, bits: int) -> tuple[fmpq, fmpq]:
    """Rational bounds lo < ln 2 / T < hi, certified (arb), about 2^-bits relative apart."""
    with ctx.workprec(bits + 16):
        ln2 = arb(2).log()
        mid, rad = _fmpq_of_arb(ln2.mid()), _fmpq_of_arb(ln2.rad())
    return (mid - rad) / half_time, (mid + rad) / half_time


def _fmpq_of_arb(x: arb) -> fmpq:
    man, exp = x.man_exp()
    return fmpq(int(man)) * fmpq(2) ** int(exp) if exp >= 0 else fmpq(int(man), 2 ** int(-exp))


def _meets_decay(poly: ParametricPolynomial, mode: str, value: float, sigma: fmpq, nominal) -> bool:
    """Exact: every root at the nominal value lies left of Re s = -sigma (sigma = ln 2 / T for a
    time to half: bracketed ever tighter until both bounds agree; they do, since the real part of
    an algebraic root never equals the transcendental -ln 2 / T)."""
    if mode != "half_time":
        return _shifted_stable(poly, sigma, nominal)
    bits = 64
    while True:
        lo, hi = _half_time_sigma(to_fmpq(value), bits)
        if _shifted_stable(poly, hi, nominal):
            return True
        if not _shifted_stable(poly, lo, nominal):
            return False
        bits *= 2


def _exact_values(values: Mapping[str, object] | None) -> dict[str, fmpq]:
    out = {}
    for name, v in (values or {}).items():
        try:
            if isinstance(v, float) and not math.isfinite(v):
                raise ValueError
            out[name] = to_fmpq(v)
        except (TypeError, ValueError, ZeroDivisionError):
            raise AnalysisError("E404", f"value {v!r} of parameter '{name}' is not a finite number",
                                where=f"parameter {name}") from None
    return out


def analyse_polynomial(poly_mpoly, parameter: str | None, values: Mapping[str, fmpq],
                       decay: tuple[str, float] = ("sigma", 0.0), shown: str | None = None,
                       tolerances: Mapping[str, tuple[fmpq, fmpq]] | None = None) -> Report:
    """Routh array, stable range, decay range and nominal poles of one characteristic polynomial,
    and the robust range when ``tolerances`` ({name: (lo, hi)}, exact, checked) are given.

    ``poly_mpoly`` is an fmpq_mpoly in ``s`` and parameters; every parameter but ``parameter``
    must have a value in ``values`` (a toleranced one without a value sits at its tolerance's middle).
    """
    names = poly_mpoly.context().names()[1:]
    tolerances = dict(tolerances or {})
    values = {**{q: (lo + hi) / 2 for q, (lo, hi) in tolerances.items() if q not in values and q in names},
              **values}
    if parameter is not None and parameter not in names:
        raise AnalysisError("E405", f"the tuning parameter '{parameter}' does not appear in the polynomial",
                            where=f"parameter {parameter}")
    missing = [n for n in names if n != parameter and n not in values]
    if missing:
        raise AnalysisError("E404", f"parameter {', '.join(missing)} has no value; give one or tune it",
                            where=f"parameter {missing[0]}")
    poly_mpoly = poly_mpoly * primitive_scale(poly_mpoly)  # integer coefficients, same roots and signs
    analysed = ParametricPolynomial.from_mpoly(poly_mpoly, parameter, values)
    if analysed.degree < 0:
        fixed = {k: v for k, v in values.items() if k != parameter}
        at = f" at {values_text(fixed)}" if fixed and not poly_mpoly.is_zero() else ""
        raise AnalysisError("E403", f"the characteristic polynomial is identically zero{at}", where="polynomial")
    warnings: list[str] = []
    rng = stable_range(analysed) if parameter else None
    routh = routh_array(analysed, limit_bits=DISPLAY_BITS)
    if routh.omitted:
        warnings.append(Notice(f"Routh array not shown: {routh.omitted}", "routh_omitted"))
    nominal_value = values.get(parameter) if parameter else None
    nominal = None
    if parameter is None or nominal_value is not None:
        nominal = _nominal(analysed, nominal_value, values, warnings)
    mode, dvalue = decay
    sigma, note = decay_sigma(mode, dvalue)
    dec = None
    if sigma > 0:
        drange = decay_range(analysed, sigma) if parameter else None
        ok = None if nominal is None else _meets_decay(analysed, mode, dvalue, sigma, nominal_value)
        dec = Decay(float(sigma), mode, note, drange, ok)
    marg = margins(rng, nominal_value) if (rng is not None and nominal_value is not None) else None
    robust = None
    if tolerances and parameter is not None:
        from core.analysis.robust import robust_range
        robust = robust_range(poly_mpoly, parameter, tolerances, values)
    elif tolerances:
        warnings.append(Notice("tolerances are given but no tuning parameter: no robust range", "note"))
    return Report(polynomial=shown or mpoly_text(poly_mpoly), analysed=analysed, parameter=parameter,
                  values=dict(values), routh=routh, stable_range=rng, nominal=nominal, decay=dec,
                  margins=marg, warnings=warnings, robust_range=robust)


def _shifted_stable(poly: ParametricPolynomial, sigma: fmpq, value) -> bool:
    """Exact check that every root lies left of -sigma at one value (the order must not drop)."""
    return is_hurwitz(poly.shifted(sigma).at(value), poly.degree)


def _nominal(poly: ParametricPolynomial, value, values: Mapping[str, fmpq], warnings: list[str]) -> Nominal:
    coeffs = poly.at(value)
    if coeffs == [0]:
        return _degenerate_nominal(poly, value, values, warnings)
    counts = routh_counts(coeffs)
    poles = certified_roots(coeffs)
    notes = list(counts.special)
    if len(coeffs) - 1 < poly.degree:
        notes.append(f"the leading coefficient vanishes here: the loop's order drops from {poly.degree} "
                     f"to {len(coeffs) - 1}")
    float_rhp = sum(p.multiplicity for p in poles if p.re > 0)
    if counts.jw == 0 and float_rhp != counts.rhp:
        warnings.append(Notice(f"numerically sensitive: certified roots show {float_rhp} in the right half plane, "
                        f"the exact Routh count is {counts.rhp}; trust the exact count", "numerically_sensitive"))
    stable = counts.rhp == 0 and counts.jw == 0 and len(coeffs) - 1 == poly.degree and len(coeffs) > 0
    return Nominal(values={k: float(v) for k, v in values.items()}, stable=stable, rhp=counts.rhp,
                   jw=counts.jw, lhp=counts.lhp, poles=poles, sign_changes=list(counts.sign_changes),
                   notes=notes, exact_values={k: str(v) for k, v in values.items()})


def _degenerate_nominal(poly: ParametricPolynomial, value, values: Mapping[str, fmpq],
                        warnings: list[str]) -> Nominal:
    """The nominal loop when the characteristic polynomial vanishes identically there: no verdict
    of stability can hold (every s solves the loop equations), so it is reported as not stable."""
    where = f"{poly.parameter} = {value}" if poly.parameter else "the nominal values"
    note = (f"the loop is degenerate at {where}: the characteristic polynomial vanishes identically "
            "there, so the loop equations do not determine the signals (not stable)")
    warnings.append(Notice(note, "degenerate"))
    return Nominal(values={k: float(v) for k, v in values.items()}, stable=False, rhp=0, jw=0, lhp=0,
                   poles=[], sign_changes=[], notes=[note], exact_values={k: str(v) for k, v in values.items()})


def check_polynomial(text: str, parameter: str | None = None, at: Mapping[str, object] | None = None,
                     decay: float = 0.0, decay_mode: str = "sigma",
                     tolerances: Mapping[str, tuple] | None = None) -> Report:
    """Analyse a typed characteristic polynomial; ``at`` maps parameter names to values;
    ``tolerances`` (optional) maps parameter names to (lo, hi) and adds the robust range.

    >>> r = check_polynomial("0.1*s^3 + s^2 + s + K", "K", tolerances={"T": (1, 2)})
    Traceback (most recent call last):
    core.errors.AnalysisError: E422 at tolerance T: 'T' is not a parameter of the loop
    """
    from core.analysis.robust import check_tolerances

    declared = set(at or ()) | set(tolerances or ()) | ({parameter} if parameter else set())
    expr = parse_polynomial(text, where="polynomial", declared=declared)
    names = sorted(expression_parameters(text))
    values = _exact_values(at)
    unknown = sorted(set(values) - set(names) - ({parameter} if parameter else set()))
    if unknown:
        raise AnalysisError("E405", f"parameter {', '.join(unknown)} does not appear in the polynomial",
                            where=f"parameter {unknown[0]}")
    tol = check_tolerances(tolerances or {}, parameter, set(names))
    poly = to_mpoly(expr, mpoly_context(names))
    report = analyse_polynomial(poly, parameter, values, (decay_mode, decay), tolerances=tol)
    report.source = "typed polynomial"
    return report


def check_project(project: Diagram | str | Path, decay: tuple[str, float] | None = None,
                  values: Mapping[str, object] | None = None,
                  tolerances: Mapping[str, tuple] | None = None) -> Report:
    """Analyse a project (a Diagram or a path to a project file).

    The robust range is computed from the parameters' tolerances in the project, each replaced by
    the one in ``tolerances`` (optional, {name: (lo, hi)}) when given there; E420-E422 for a bad one.

    ``values`` (optional) overrides parameters' nominal values exactly: ints, Fractions, fmpq or
    decimal/fraction text such as ``"1/3"`` or ``"0.33333333333333333334"`` (never through a float).
    Raises E405 for a name that is not a parameter of the project, E404 for a value that is not a
    finite number.

    Raises E111 for a block text with s run into an undeclared name, E406 when no wire path leads
    from the input to the output, E408 when a block's denominator vanishes identically at the
    nominal values.
    """
    from core.graph.reduction import reduce_diagram
    from core.io.project_file import load_project

    source = ""
    if not isinstance(project, Diagram):
        source = str(project)
        project = load_project(project)
    settings = project.analysis
    project.check_block_names()
    red = reduce_diagram(project, settings.input, settings.output)
    if not red.connected:
        raise AnalysisError("E406", f"no wire path leads from the input {settings.input} to the output "
                            f"{settings.output}: connect them to analyse the loop", where="analysis")
    given = _override_values(project, values)
    exact = _exact_values({p.name: p.nominal for p in project.parameters.values() if p.name not in given})
    exact.update(given)
    parameter = project.tuning_parameter
    used = red.characteristic.context().names()[1:]
    if parameter is not None and parameter not in used:
        raise AnalysisError("E405", f"the tuning parameter '{parameter}' appears in no block",
                            where=f"parameter {parameter}")
    kept = [n for n in project.nodes if n not in set(red.left_out)]
    _check_block_denominators(project, exact, kept)
    report = analyse_polynomial(red.characteristic, parameter,
                                {k: v for k, v in exact.items() if k in used},
                                decay or (settings.decay_mode, settings.decay_value),
                                tolerances=_project_tolerances(project, tolerances))
    report.source = source or project.name
    report.reduction = red
    report.left_out = list(red.left_out)
    report.warnings = list(red.warnings) + report.warnings
    num, den = red.closed_num_reduced, red.closed_den_reduced
    if red.closed_num is not None and red.closed_den is not None and num is not None and den is not None:
        scale, full_scale = primitive_scale(den), primitive_scale(red.closed_den)
        report.transfer_function = {
            "num": mpoly_text(num * scale), "den": mpoly_text(den * scale),
            "num_full": mpoly_text(red.closed_num * full_scale), "den_full": mpoly_text(red.closed_den * full_scale)}
        report.closed_num = num * scale
        all_values = {k: v for k, v in exact.items() if k in used}
        if not red.closed_num.is_zero():
            if parameter is None or parameter in all_values:
                report.hidden_modes, report.zeros = _nominal_cancellation(project, red, all_values, kept)
            if parameter is not None:
                report.warnings += _cancellation_values(red, parameter, all_values, report.stable_range)
        for mode in report.hidden_modes:
            where = f" (from {', '.join(mode.blocks)})" if mode.blocks else ""
            state = "UNSTABLE" if mode.unstable else "stable"
            report.warnings.append(Notice(f"hidden mode at s = {_complex_text(mode.pole)}{where}: {state}; it "
                                          "cancels out of the input-output transfer function but is still in "
                                          "the loop", "hidden_mode"))
    return report


def _project_tolerances(project: Diagram, given: Mapping[str, tuple] | None) -> dict[str, tuple[fmpq, fmpq]]:
    """The project's tolerances with the given ones put in, exact and checked."""
    from core.analysis.robust import check_tolerances

    merged: dict[str, tuple] = {p.name: p.tolerance for p in project.parameters.values() if p.tolerance is not None}
    merged.update(given or {})
    return check_tolerances(merged, project.tuning_parameter, set(project.parameters))


def _override_values(project: Diagram, values: Mapping[str, object] | None) -> dict[str, fmpq]:
    """Exact values given for some of the project's parameters (E405 for an unknown name)."""
    unknown = sorted(set(values or ()) - set(project.parameters))
    if unknown:
        raise AnalysisError("E405", f"the project has no parameter '{unknown[0]}'", where=f"parameter {unknown[0]}")
    return _exact_values(values)


def _check_block_denominators(project: Diagram, values: Mapping[str, fmpq], kept: list[str]) -> None:
    """E408 for an analysed block whose denominator is identically zero at the nominal values."""
    from core.graph.signal_graph import block_polynomials

    for block, (_, den) in block_polynomials(project, kept).items():
        names = den.context().names()[1:]
        at: dict[str | int, fmpq] = {n: values[n] for n in names if n in values}
        if not den.is_zero() and at and den.subs(at).is_zero():
            used = {str(n): v for n, v in at.items() if den.degrees()[names.index(str(n)) + 1] > 0}
            raise AnalysisError("E408", f"block {block}: its denominator {mpoly_text(den)} is zero at "
                                f"{values_text(used)}, so the block does not exist there", where=f"node {block}")


def _univariate(poly, values: Mapping[str, fmpq]) -> fmpq_poly:
    """The polynomial in s at the given values of every parameter."""
    return fmpq_poly(list(reversed(ParametricPolynomial.from_mpoly(poly, None, values).at())))


def _nominal_cancellation(project: Diagram, red, values: Mapping[str, fmpq],
                          kept: list[str]) -> tuple[list[HiddenMode], list[Pole]]:
    """Hidden modes and transfer-function zeros at the nominal values: the common factor of the
    transfer function's numerator and the characteristic polynomial taken after substituting every
    value, so a cancellation that happens only at these values is found too."""
    from core.graph.signal_graph import block_polynomials

    num, den = _univariate(red.closed_num, values), _univariate(red.closed_den, values)
    if num.is_zero() or den.is_zero():
        return [], []
    common = num.gcd(den)
    if common.degree() < 1:
        return [], _poles_of(num)
    blocks = [b for b, (_, d) in block_polynomials(project, kept).items()
              if not d.is_zero() and _univariate(d, values).gcd(common).degree() > 0]
    return [HiddenMode(p, blocks) for p in _poles_of(common)], _poles_of(num // common)


def _poles_of(p: fmpq_poly) -> list[Pole]:
    return certified_roots([p[i] for i in range(p.degree(), -1, -1)])


CANCELLATION_DEGREE = 40  # above this degree in s, values where extra modes cancel are not searched


def _cancellation_values(red, parameter: str, values: Mapping[str, fmpq], rng: StableRange | None) -> list[str]:
    """Warnings naming the tuning values where a further mode cancels out of the transfer function:
    the real roots of Res_s(N/g, D/g) (g the generic common factor), exact; a rational one is kept
    only when an exact gcd there confirms a common root."""
    fixed = {k: v for k, v in values.items() if k != parameter}
    num = ParametricPolynomial.from_mpoly(red.closed_num_reduced, parameter, fixed)
    den = ParametricPolynomial.from_mpoly(red.closed_den_reduced, parameter, fixed)
    if num.degree < 1 or den.degree < 1:
        return []
    if den.degree > CANCELLATION_DEGREE:
        return [Notice(f"values of {parameter} where a further mode cancels were not searched above degree "
                       f"{CANCELLATION_DEGREE} in s", "cancellation")]
    out: list[str] = []
    ends = [] if rng is None else [e for lo, hi in rng.intervals for e in (lo, hi) if e is not None]
    for b in real_values(resultant_in_s(num, den)):
        if b.rational is not None and _univariate_at(num, b.rational).gcd(_univariate_at(den, b.rational)).degree() < 1:
            continue  # both leading coefficients vanish there: no common root
        at_end = any(e.factor == b.factor and e.lo <= b.hi and b.lo <= e.hi for e in ends)
        inside = rng is not None and b.rational is not None and rng.contains(b.rational)
        where = ", inside the stable range" if inside else ", at an end of the stable range" if at_end else ""
        out.append(Notice(f"at {parameter} = {b.text(parameter)} a mode cancels out of the input-output "
                          f"transfer function (hidden there{where})", "cancellation"))
    return out


def _univariate_at(p: ParametricPolynomial, value: fmpq) -> fmpq_poly:
    return fmpq_poly(list(reversed(p.at(value))))


def _complex_text(p: Pole) -> str:
    if p.im == 0:
        return f"{p.re:.6g}"
    return f"{p.re:.6g} {'+' if p.im > 0 else '-'} j{abs(p.im):.6g}"


def values_text(values: Mapping[str, fmpq]) -> str:
    """``K = 2, T = 1/10`` for a note."""
    return ", ".join(f"{k} = {v}" for k, v in sorted(values.items()))
