"""Requirement verdicts at the nominal value and the one headline that states stability AND the
requirements' verdict (shared by the command line's text and JSON, and meant for the app's status
bar and report).

>>> from core.analysis.report import check_polynomial
>>> from core.model.requirements import Requirements
>>> report = check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K", at={"K": 2})
>>> headline(report, requirements_outcome(report, Requirements(min_gain_margin=2)))
'STABLE at K = 2; requirements met (1 of 1)'
>>> headline(report, requirements_outcome(report, Requirements(min_gain_margin=4)))
'STABLE at K = 2, but requirements NOT met: gain margin (0 of 1 met)'
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

from core.analysis.report import Report
from core.analysis.requirements import JointRange, Verdict, evaluate, joint_range
from core.errors import LoopwrightError
from core.model.requirements import Requirements

__all__ = ["RequirementsOutcome", "headline", "outcome_from_parts", "requirements_outcome", "robust_at_nominal",
           "robustness_phrase", "search_span", "stability_phrase", "value_text"]

NO_STEP_FOR_POLYNOMIAL = "a typed polynomial has no step response: overshoot is judged for projects only"


@dataclass
class RequirementsOutcome:
    """Every set requirement (decay included) judged at the nominal value, and the tuning values
    meeting them all. ``value`` is the tuning value judged (None: the nominal values, or no
    nominal value at all when ``verdicts`` is empty)."""

    verdicts: list[Verdict]
    joint: JointRange | None
    value: float | None
    notes: list[str] = field(default_factory=list)

    @property
    def failed(self) -> list[Verdict]:
        """The requirements not met."""
        return [v for v in self.verdicts if v.passed is False]

    @property
    def unjudged(self) -> list[Verdict]:
        """The requirements that could not be judged here."""
        return [v for v in self.verdicts if v.passed is None]

    @property
    def all_met(self) -> bool | None:
        """False when any is not met, True when every one is met, None when that cannot be said."""
        if self.failed:
            return False
        if self.unjudged or not self.verdicts:
            return None
        return True

    def to_dict(self) -> dict:
        """JSON-ready fields (non-finite numbers are the JSON writer's business)."""
        return {"value": self.value, "all_met": self.all_met,
                "verdicts": [_verdict_dict(v) for v in self.verdicts],
                "joint_range": self.joint.to_dict() if self.joint is not None else None,
                "notes": self.notes}


def _verdict_dict(v: Verdict) -> dict:
    return {"name": v.name, "label": v.label, "required": v.required, "actual": v.actual, "unit": v.unit,
            "passed": v.passed, "margin": v.margin, "exact": v.exact, "note": v.note}


def requirements_outcome(report: Report, requirements: Requirements, diagram=None,
                         span: tuple[float, float] | None = None) -> RequirementsOutcome | None:
    """Judge ``requirements`` and the report's decay requirement; None when nothing is required.

    ``diagram`` (the analysed project) gives the step response for overshoot; ``span`` (the tuning
    parameter's min..max) lets the numeric criteria be searched for the range meeting all.
    """
    if requirements.is_empty and report.decay is None:
        return None
    notes: list[str] = []
    value = _judged_value(report)
    transfer = _reference_transfer(diagram, report, notes) if requirements.max_overshoot is not None else None
    verdicts: list[Verdict] = []
    searched = requirements
    polys = [report.analysed] + ([transfer.num, transfer.den] if transfer is not None else [])
    if not _fits_floats(polys, [v for v in (value, *(span or ())) if v is not None]):
        notes.append(FLOATS_OUT_OF_RANGE)
        searched = replace(requirements, min_damping=None, max_overshoot=None)
        if report.parameter is None or value is not None:
            verdicts = _exact_only(requirements, report)
    elif report.parameter is None or value is not None:
        step = _step(transfer, value, notes) if transfer is not None else None
        verdicts = evaluate(requirements, report, step, value)
        if diagram is None:
            verdicts = [replace(v, note=NO_STEP_FOR_POLYNOMIAL) if v.name == "overshoot" else v for v in verdicts]
    if report.parameter is not None and value is None:
        notes.append(f"no nominal value of {report.parameter}: the requirements are given as a range only")
    try:
        joint = joint_range(searched, report, transfer, span)
    except LoopwrightError as exc:
        joint = None
        notes.append(f"range meeting all not found: {exc}")
    return RequirementsOutcome(verdicts, joint, value, notes + (joint.notes if joint is not None else []))


def outcome_from_parts(report: Report, requirements: Requirements, step, joint: JointRange | None,
                       ) -> RequirementsOutcome | None:
    """The outcome from parts already computed (the window's analysis holds the nominal step response
    and the joint range): verdicts at the report's nominal value; None when nothing is required."""
    if requirements.is_empty and report.decay is None:
        return None
    value = _judged_value(report)
    judged = report.parameter is None or value is not None
    verdicts = evaluate(requirements, report, step, value) if judged else []
    return RequirementsOutcome(verdicts, joint, value, list(joint.notes) if joint is not None else [])


def search_span(report: Report) -> tuple[float, float] | None:
    """Where to search the numeric criteria when no min..max is given (a typed polynomial): the
    stable range's hull, an unbounded side cut at ten times the largest finite end or nominal value.

    >>> from core.analysis.report import check_polynomial
    >>> search_span(check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K"))
    (0.0, 6.0)
    """
    rng = report.stable_range
    if rng is None or not rng.intervals:
        return None
    (first, _), (_, last) = rng.intervals[0], rng.intervals[-1]
    known = [b.value for iv in rng.intervals for b in iv if b is not None]
    nominal = _judged_value(report)
    scale = 10 * max([abs(x) for x in known + ([nominal] if nominal is not None else [])] + [1.0])
    return (first.value if first is not None else -scale, last.value if last is not None else scale)


FLOAT_LIMIT = 10 ** 300
FLOATS_OUT_OF_RANGE = ("coefficients of the loop or of its transfer function exceed the floating-point range "
                       "(1e300) here: damping and overshoot are not judged (the decay and gain-margin verdicts "
                       "are exact)")
BEYOND_FLOATS = "coefficients beyond the floating-point range"


def _fits_floats(polys, values: list[float]) -> bool:
    """Whether evaluating each polynomial (in the tuning parameter) in floating point at ``values``
    (the nominal value, the searched span's ends) stays within 1e300, and so do the coefficient
    ratios that root finding forms: decided exactly (sum of |c_i| |v|^i for every coefficient)."""
    from core.algebra.polynomial import to_fmpq

    points = [to_fmpq(v) for v in values] or [to_fmpq(0)]
    for poly in polys:
        for v in points:
            sizes = [sum(abs(c[i]) * abs(v) ** i for i in range(c.degree() + 1)) for c in poly.coeffs]
            lead = abs(poly.coeffs[0](v)) if poly.coeffs else 0
            if max(sizes, default=0) > FLOAT_LIMIT or (lead != 0 and max(sizes) > FLOAT_LIMIT * lead):
                return False
    return True


def _exact_only(requirements: Requirements, report: Report) -> list[Verdict]:
    """The verdicts when floating point cannot be used: decay and gain margin from the report's
    exact results, damping and overshoot not judged."""
    out = []
    if report.decay is not None:
        out.append(Verdict("decay", report.decay.sigma, None, report.decay.nominal_ok, None, True,
                           "decay rate σ ≥", "1/s", report.decay.note))
    for name, required, label, unit in (("damping", requirements.min_damping, "damping ratio ζ ≥", ""),
                                        ("overshoot", requirements.max_overshoot, "overshoot ≤", "%")):
        if required is not None:
            out.append(Verdict(name, required, None, None, None, False, label, unit, BEYOND_FLOATS))
    if requirements.min_gain_margin is not None:
        out.append(_gain_margin_from_margins(requirements, report))
    return out


def _gain_margin_from_margins(requirements: Requirements, report: Report) -> Verdict:
    """The gain-margin verdict from the exact stable range's rise factor (hi / nominal)."""
    db = requirements.gain_margin_unit == "db"
    required, factor_needed = requirements.min_gain_margin, requirements.gain_margin_factor
    assert required is not None and factor_needed is not None

    def judged(actual, passed, note):
        margin = None if actual is None else actual - required
        return Verdict("gain margin", required, actual, passed, margin, True, "gain margin (rise factor) ≥",
                       "dB" if db else "×", note)

    m = report.margins
    if m is None or m.nominal <= 0:
        return judged(None, None, "defined for a positive nominal value of the tuning parameter only")
    if not m.stable:
        return judged(None, False, "not stable here")
    if m.high is None:
        return judged(math.inf, True, "may rise without limit")
    factor = m.high / m.nominal
    return judged(20 * math.log10(factor) if db else factor, factor >= factor_needed,
                  "hi / value, hi the exact stable-range end")


def _judged_value(report: Report) -> float | None:
    if report.parameter is None or report.parameter not in report.values:
        return None
    return float(report.values[report.parameter])


def _reference_transfer(diagram, report: Report, notes: list[str]):
    if diagram is None:
        return None
    from core.analysis.time_response import transfer_from_diagram
    try:
        return transfer_from_diagram(diagram, reduction=report.reduction)
    except LoopwrightError as exc:
        notes.append(f"no step response: {exc}")
        return None


def _step(transfer, value: float | None, notes: list[str]):
    from core.analysis.time_response import step_response
    try:
        return step_response(transfer, value)
    except LoopwrightError as exc:
        notes.append(f"no step response: {exc}")
        return None


# -- the headline -----------------------------------------------------------------------------------
SHORT_EXACT = 24  # an exact value longer than this is shown as a decimal in the headline


def value_text(report: Report, name: str) -> str:
    """A parameter's value as typed when short (``1/3``), else as a decimal."""
    exact = str(report.values[name])
    return exact if len(exact) <= SHORT_EXACT else f"{float(report.values[name]):.6g}"


def _count(n: int, what: str) -> str:
    return f"{n} {what}{'' if n == 1 else 's'}"


def stability_phrase(report: Report) -> str:
    """``STABLE at K = 2``, ``UNSTABLE at K = 10: 2 poles in the right half plane``, or the range
    when there is no nominal value."""
    name, nominal = report.parameter, report.nominal
    if nominal is None:
        intervals = report.stable_range.intervals if report.stable_range is not None else []
        if not intervals:
            return f"NOT STABLE for any value of {name}"
        return f"No nominal value of {name}: stable for {name} in {_range_text(report)}"
    at = f" at {name} = {value_text(report, name)}" if name is not None and name in report.values else ""
    if nominal.stable:
        return f"STABLE{at}"
    if nominal.rhp:
        return f"UNSTABLE{at}: {_count(nominal.rhp, 'pole')} in the right half plane" + (
            f", {nominal.jw} on the imaginary axis" if nominal.jw else "")
    if nominal.jw:
        return f"NOT STABLE{at}: {_count(nominal.jw, 'pole')} on the imaginary axis (marginal)"
    why = "the loop is degenerate there" if not nominal.poles and not nominal.lhp else "the loop's order drops there"
    return f"NOT STABLE{at}: {why}"


def _range_text(report: Report) -> str:
    assert report.stable_range is not None
    return " U ".join(f"({_end(lo, '-inf')}, {_end(hi, '+inf')})" for lo, hi in report.stable_range.intervals)


def _end(boundary, unbounded: str) -> str:
    if boundary is None:
        return unbounded
    if boundary.rational is not None and len(str(boundary.rational)) <= SHORT_EXACT:
        return str(boundary.rational)
    return boundary.approx_text(6)


def requirements_phrase(outcome: RequirementsOutcome | None, parameter: str | None) -> str:
    """``; requirements met (3 of 3)``, ``, but requirements NOT met: damping (2 of 3 met)``..."""
    if outcome is None:
        return "; no requirements set"
    if not outcome.verdicts:
        joint = outcome.joint
        if joint is None:
            return "; requirements not judged"
        if not joint.intervals:
            return f"; no value of {parameter} meets every requirement"
        return f"; every requirement met for {parameter} in {_joint_text(joint)}"
    total, met = len(outcome.verdicts), sum(v.passed is True for v in outcome.verdicts)
    if outcome.failed:
        return (f", but requirements NOT met: {', '.join(v.name for v in outcome.failed)} ({met} of {total} met"
                + (f", {len(outcome.unjudged)} not judged" if outcome.unjudged else "") + ")")
    if outcome.unjudged:
        return f"; requirements: {met} of {total} met, not judged: {', '.join(v.name for v in outcome.unjudged)}"
    return f"; requirements met ({met} of {total})"


def _joint_text(joint: JointRange) -> str:
    return joint.text(short=True).replace("∪", "U").replace("−∞", "-inf").replace("+∞", "+inf")


def robustness_phrase(report: Report) -> str:
    """`` for every T in [2/25, 3/25]`` when the nominal tuning value is in the robust range,
    ``, but NOT for every T in [...]`` when it is stable but not robustly, `` (estimated)`` for a
    sampled range; empty without tolerances, a nominal value, or when it is not stable at all."""
    robust = getattr(report, "robust_range", None)
    if robust is None or report.nominal is None or report.parameter not in report.values:
        return ""
    boxes = ", ".join(f"{q} in [{lo}, {hi}]" for q, (lo, hi) in robust.to_dict()["tolerances"].items())
    estimated = "" if robust.to_dict()["exact"] else " (estimated)"
    if robust.contains(report.values[report.parameter]):
        return f" for every {boxes}{estimated}"
    return f", but NOT for every {boxes}{estimated}" if report.nominal.stable else ""


def robust_at_nominal(report: Report) -> bool | None:
    """Whether the nominal tuning value is in the robust range (None without tolerances or nominal)."""
    robust = getattr(report, "robust_range", None)
    if robust is None or report.parameter not in report.values:
        return None
    return robust.contains(report.values[report.parameter])


def headline(report: Report, outcome: RequirementsOutcome | None) -> str:
    """One line stating stability at the nominal values (for every toleranced value, when there are
    tolerances) AND the requirements' verdict."""
    phrase = stability_phrase(report) + robustness_phrase(report)
    if report.nominal is not None and not report.nominal.stable and outcome is not None and outcome.verdicts:
        return phrase + requirements_phrase(outcome, report.parameter).replace(", but", ";", 1)
    return phrase + requirements_phrase(outcome, report.parameter)

