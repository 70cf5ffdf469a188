"""Performance requirements, their verdicts at one parameter value, and the range meeting them all.

Requirements (each optional):

* **decay** — the model's decay requirement (``AnalysisSettings.decay_mode``/``decay_value``: a
  minimum decay rate sigma, a time to half amplitude or a 2 % settling time). It is *not* stored
  here; its verdict and range come from the Report (:func:`core.analysis.stable_range.decay_range`, exact).
* **damping** — a minimum damping ratio zeta of every pole of the loop (hidden modes included).
* **overshoot** — a maximum overshoot (%) of the step response from the reference (analysis input).
* **gain margin** — a minimum factor by which the tuning parameter may *rise* before the loop loses
  stability: hi / v for the stable interval (lo, hi) holding v (the stable range's rise factor),
  entered as a factor or in dB (20 log10). When the tuning parameter is not a gain this is a
  parameter margin in the same sense.

:func:`joint_range` intersects the stable range with each requirement's range: exact for decay
(shifted Routh, :func:`~core.analysis.stable_range.decay_range`) and gain margin (v < hi / GM from the exact
endpoints); numeric for damping (poles on a fine grid, transitions refined by bisection) and
overshoot (step responses on a grid, then bisection), searched over the tuning parameter's
min..max only and marked numeric. Numeric ranges can miss features narrower than the grid step.

>>> from core.analysis.report import check_polynomial
>>> report = check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K", at={"K": 2})
>>> joint = joint_range(Requirements(min_gain_margin=2), report)
>>> joint.text(), joint.exact
('(0, 3)', True)
"""
from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from core.algebra.polynomial import to_float, to_fmpq
from core.errors import LoopwrightError
from core.model.diagram import DECAY_WORDS
from core.model.requirements import Requirements

if TYPE_CHECKING:  # scipy loads on first use only
    from core.analysis.time_response import ParametricTransfer, StepResponse

DAMPING_SAMPLES = 400
OVERSHOOT_SAMPLES = 41
OVERSHOOT_POINTS = 600
BISECTION_TOLERANCE = 1e-7  # relative to the searched span



# -- verdicts at one value --------------------------------------------------------------------------
@dataclass(frozen=True)
class Verdict:
    """One requirement at one value. ``margin`` > 0 means met with room (in ``unit``); ``passed``
    None means it cannot be judged here (``note`` says why); ``exact`` whether the pass/fail
    decision is exact arithmetic (else floating point)."""

    name: str
    required: float
    actual: float | None
    passed: bool | None
    margin: float | None
    exact: bool
    label: str = ""
    unit: str = ""
    note: str = ""


def loop_poles(report, value: float | None) -> np.ndarray:
    """Every pole of the analysed loop at a value (numpy.roots of the float coefficients)."""
    coeffs = np.trim_zeros(np.array(report.analysed.at_float(value if report.parameter else None)), "f")
    return np.roots(coeffs).astype(complex) if coeffs.size > 1 else np.empty(0, dtype=complex)


def min_damping(poles: np.ndarray) -> float | None:
    """The smallest damping ratio -Re p / |p| (a pole at the origin counts as 0); None without poles."""
    if poles.size == 0:
        return None
    wn = np.abs(poles)
    zeta = np.where(wn > 0, -poles.real / np.where(wn > 0, wn, 1.0), 0.0)
    return float(np.min(zeta))


def evaluate(requirements: Requirements, report, step: StepResponse | None, value: float | None) -> list[Verdict]:
    """Verdicts of every set requirement (decay from the Report first) at ``value``."""
    out = []
    poles = loop_poles(report, value)
    if report.decay is not None:
        out.append(_decay_verdict(report, poles, value))
    if requirements.min_damping is not None:
        out.append(_damping_verdict(requirements.min_damping, poles))
    if requirements.max_overshoot is not None:
        out.append(_overshoot_verdict(requirements.max_overshoot, step))
    if requirements.min_gain_margin is not None:
        out.append(_gain_margin_verdict(requirements, report, value))
    return out


def _decay_verdict(report, poles: np.ndarray, value: float | None) -> Verdict:
    dec = report.decay
    sigma_actual = float(np.min(-poles.real)) if poles.size else None
    if report.parameter is not None and dec.range is not None and value is not None:
        passed = dec.range.contains(to_fmpq(value))
    else:
        passed = bool(dec.nominal_ok)
    if dec.mode == "sigma":
        return Verdict("decay", dec.sigma, sigma_actual, passed,
                       None if sigma_actual is None else sigma_actual - dec.sigma, True,
                       DECAY_WORDS["sigma"].label, "1/s", dec.note)
    scale = math.log(2) if dec.mode == "half_time" else 4.0
    label = DECAY_WORDS[dec.mode].label
    required = scale / dec.sigma
    actual = scale / sigma_actual if sigma_actual is not None and sigma_actual > 0 else None
    return Verdict("decay", required, actual, passed, None if actual is None else required - actual, True,
                   label, "s", dec.note)


def _damping_verdict(required: float, poles: np.ndarray) -> Verdict:
    actual = min_damping(poles)
    passed = actual is not None and actual >= required
    return Verdict("damping", required, actual, passed, None if actual is None else actual - required, False,
                   "damping ratio ζ ≥", "", "smallest damping ratio of all poles (floating point)")


def _overshoot_verdict(required: float, step: StepResponse | None) -> Verdict:
    label = "overshoot ≤"
    if step is None:
        return Verdict("overshoot", required, None, None, None, False, label, "%", "no step response")
    actual = step.metrics.overshoot
    if actual is None:
        return Verdict("overshoot", required, None, False, None, False, label, "%",
                       step.note or "no overshoot figure")
    return Verdict("overshoot", required, actual, actual <= required, required - actual, False, label, "%",
                   "step from the reference input (simulated)")


def _gain_margin_verdict(req: Requirements, report, value: float | None) -> Verdict:
    db = req.gain_margin_unit == "db"
    label = "gain margin (rise factor) ≥"
    unit = "dB" if db else "×"

    required = req.min_gain_margin
    assert required is not None  # judged only when the requirement is set

    def judged(actual, passed, note=""):
        margin = None if actual is None else actual - required
        return Verdict("gain margin", required, actual, passed, margin, True, label, unit, note)

    if report.parameter is None or report.stable_range is None or value is None:
        return judged(None, None, "choose a tuning parameter: the margin is how far it may rise")
    if value <= 0:
        return judged(None, None, "defined for positive values of the tuning parameter only")
    interval = _interval_holding(report.stable_range, float(value))
    if interval is None:
        return judged(None, False, "not stable here")
    hi = interval[1]
    if hi is None:
        return judged(math.inf, True, "may rise without limit")
    factor = hi.value / value
    actual = 20 * math.log10(factor) if db else factor
    return judged(actual, factor >= req.gain_margin_factor, "hi / value, hi the exact stable-range end")


def _interval_holding(rng, v):
    for lo, hi in rng.intervals:
        if (lo is None or lo.value < v) and (hi is None or v < hi.value):
            return lo, hi
    return None


# -- the range meeting all ------------------------------------------------------------------------
@dataclass(frozen=True)
class Bound:
    """An interval end: ``exact`` text when exact, None when found numerically; ``search_edge``
    when it is only the end of the searched span (the set may go on beyond it)."""

    value: float
    exact: str | None = None
    search_edge: bool = False

    def text(self, short: bool = False) -> str:
        """Exact text, or the decimal with '≈' (and '…' at a search edge). ``short``: an exact end
        longer than a plain number (a root of a polynomial) as its decimal instead.

        >>> Bound(1.4142135623730951, "root of K^2 - 2 near 1.41421356237310").text(short=True)
        '1.41421'
        """
        if self.exact is not None:
            return f"{self.value:.6g}" if short and not _plain(self.exact) else self.exact
        return f"≈{self.value:.6g}" + ("…" if self.search_edge else "")


def _plain(text: str) -> bool:
    return len(text) <= 24 and all(c.isdigit() or c in "-/." for c in text)


Interval = tuple[Bound | None, Bound | None]  # open interval; None is an unbounded end


@dataclass
class JointRange:
    """Where every requirement holds together (stability included), with each criterion's own set."""

    parameter: str
    intervals: list[Interval]
    exact: bool
    parts: dict[str, list[Interval]] = field(default_factory=dict)
    span: tuple[float, float] | None = None
    notes: list[str] = field(default_factory=list)

    def contains(self, value: float) -> bool:
        """Whether a value lies inside (floating point)."""
        return _inside(self.intervals, value)

    def text(self, short: bool = False) -> str:
        """``(0, 3) ∪ (4, ≈5.2)``, or 'none' (``short`` as in :meth:`Bound.text`)."""
        return intervals_text(self.intervals, short)

    def to_dict(self) -> dict:
        """JSON-ready fields (floats with None for unbounded ends)."""
        def plain(ivs):
            return [[None if a is None else a.value, None if b is None else b.value] for a, b in ivs]
        return {"parameter": self.parameter, "intervals": plain(self.intervals), "exact": self.exact,
                "text": self.text(), "parts": {k: plain(v) for k, v in self.parts.items()},
                "span": list(self.span) if self.span else None, "notes": self.notes}


def intervals_text(intervals: list[Interval], short: bool = False) -> str:
    """Text of a union of open intervals."""
    if not intervals:
        return "none"
    return " ∪ ".join(f"({'−∞' if a is None else a.text(short)}, {'+∞' if b is None else b.text(short)})"
                      for a, b in intervals)


def _inside(intervals: list[Interval], v: float) -> bool:
    return any((a is None or a.value < v) and (b is None or v < b.value) for a, b in intervals)


def _later_start(a: Bound | None, b: Bound | None) -> Bound | None:
    if a is None or b is None:
        return b if a is None else a
    if a.value != b.value:
        return a if a.value > b.value else b
    return a if a.exact is not None else b


def _earlier_end(a: Bound | None, b: Bound | None) -> Bound | None:
    if a is None or b is None:
        return b if a is None else a
    if a.value != b.value:
        return a if a.value < b.value else b
    return a if a.exact is not None else b


def intersect(first: list[Interval], second: list[Interval]) -> list[Interval]:
    """Intersection of two sorted unions of open intervals."""
    out = []
    for a0, a1 in first:
        for b0, b1 in second:
            lo, hi = _later_start(a0, b0), _earlier_end(a1, b1)
            if lo is None or hi is None or lo.value < hi.value:
                out.append((lo, hi))
    return sorted(out, key=lambda iv: -math.inf if iv[0] is None else iv[0].value)


def _exact_intervals(rng, name: str) -> list[Interval]:
    return [(None if lo is None else Bound(lo.value, lo.text(name)), None if hi is None else Bound(hi.value, hi.text(name)))
            for lo, hi in rng.intervals]


def gain_margin_intervals(rng, gm: float, name: str) -> list[Interval]:
    """Values v > 0 of the stable set with hi / v >= gm (hi the end of v's interval): exact.

    >>> from core.analysis.report import check_polynomial
    >>> r = check_polynomial("s^3 + 3s^2 + 2s + K", parameter="K").stable_range
    >>> [(a.exact, b.exact) for a, b in gain_margin_intervals(r, 4, "K")]
    [('0', '3/2')]
    """
    gm_q = to_fmpq(gm)
    zero = Bound(0.0, "0")
    out: list[tuple[Bound | None, Bound | None]] = []
    for lo, hi in rng.intervals:
        start = zero if lo is None or lo.value < 0 else Bound(lo.value, lo.text(name))
        if hi is None:
            out.append((start, None))
            continue
        if hi.rational is not None:
            end_q = hi.rational / gm_q
            end = Bound(to_float(end_q), str(end_q))
        else:
            end = Bound(hi.value / gm, f"({hi.text(name)}) / {gm_q}")
        if end.value > start.value:
            out.append((start, end))
    return out


def numeric_set(predicate: Callable[[float], bool], span: tuple[float, float], samples: int,
                candidate: list[Interval] | None = None) -> list[Interval]:
    """Where ``predicate`` holds on [lo, hi] (and inside ``candidate``, where it is evaluated at
    all): a grid of ``samples`` values, each change between neighbours refined by bisection. An
    edge found next to a candidate end is that end (keeping its exact text).

    >>> [(round(a.value, 6), b.value) for a, b in numeric_set(lambda v: v * v > 2, (0, 3), 31)]
    [(1.414214, 3.0)]
    """
    lo, hi = float(span[0]), float(span[1])
    ends = [b for iv in (candidate or []) for b in iv if b is not None]

    def holds(v: float) -> bool:
        return (candidate is None or _inside(candidate, v)) and predicate(v)

    xs = np.linspace(lo, hi, samples)
    ok = [holds(float(x)) for x in xs]
    tol = BISECTION_TOLERANCE * max(hi - lo, 1e-300)
    out: list[Interval] = []
    start = Bound(lo, None, True) if ok[0] else None
    for i in range(1, samples):
        if ok[i] == ok[i - 1]:
            continue
        a, b = float(xs[i - 1]), float(xs[i])
        edge = _bisect(holds, a, b, ok[i - 1], tol)
        near = [e for e in ends if a <= e.value <= b and abs(e.value - edge) <= 2 * tol]
        bound = near[0] if near else Bound(edge)
        if ok[i]:
            start = bound
        else:
            out.append((start, bound))
            start = None
    if ok[-1]:
        out.append((start, Bound(hi, None, True)))
    return out


def _bisect(holds: Callable[[float], bool], a: float, b: float, holds_at_a: bool, tol: float) -> float:
    while b - a > tol:
        mid = 0.5 * (a + b)
        if holds(mid) == holds_at_a:
            a = mid
        else:
            b = mid
    return 0.5 * (a + b)


def damping_predicate(report, zeta: float) -> Callable[[float], bool]:
    """v -> whether every pole has damping ratio >= zeta (the order must not drop)."""
    degree = report.analysed.degree

    def meets(v: float) -> bool:
        coeffs = np.trim_zeros(np.array(report.analysed.at_float(v)), "f")
        if coeffs.size - 1 != degree:
            return False
        damping = min_damping(np.roots(coeffs).astype(complex))
        return damping is None or damping >= zeta
    return meets


def overshoot_predicate(transfer: ParametricTransfer, limit: float) -> Callable[[float], bool]:
    """v -> whether the loop is stable with a step overshoot <= limit (%)."""
    from core.analysis.time_response import step_response

    def meets(v: float) -> bool:
        try:
            step = step_response(transfer, v, points=OVERSHOOT_POINTS)
        except LoopwrightError:
            return False
        over = step.metrics.overshoot
        return step.stable and over is not None and over <= limit
    return meets


def joint_range(requirements: Requirements, report, transfer: ParametricTransfer | None = None,
                span: tuple[float, float] | None = None) -> JointRange | None:
    """The tuning-parameter values that are stable and meet every set requirement.

    ``transfer`` (the reference step's transfer function) is needed for overshoot, ``span`` (the
    tuning parameter's min..max) for the numeric criteria. None without a tuning parameter or when
    nothing is required.
    """
    name = report.parameter
    if name is None or report.stable_range is None:
        return None
    if requirements.is_empty and report.decay is None:
        return None
    parts = {"stable": _exact_intervals(report.stable_range, name)}
    notes: list[str] = []
    if report.decay is not None and report.decay.range is not None:
        parts["decay"] = _exact_intervals(report.decay.range, name)
    factor = requirements.gain_margin_factor
    if factor is not None:
        parts["gain margin"] = gain_margin_intervals(report.stable_range, factor, name)
        if requirements.gain_margin_unit == "db":
            notes.append("gain margin in dB: the factor 10^(dB/20) is rounded to a float")
    joint = parts["stable"]
    for key in list(parts)[1:]:
        joint = intersect(joint, parts[key])
    numeric = []
    if requirements.min_damping is not None:
        numeric.append(("damping", damping_predicate(report, requirements.min_damping), DAMPING_SAMPLES))
    if requirements.max_overshoot is not None:
        if transfer is None:
            notes.append("overshoot not searched: no transfer function from the reference input")
        else:
            numeric.append(("overshoot", overshoot_predicate(transfer, requirements.max_overshoot),
                            OVERSHOOT_SAMPLES))
    if span is None:
        if numeric:
            notes.append("numeric criteria need the tuning parameter's min and max")
        numeric = []
    for key, predicate, samples in numeric:
        assert span is not None  # each searched where stable, so its own set is shown
        parts[key] = numeric_set(predicate, span, samples, parts["stable"])
        joint = intersect(joint, parts[key])
    if numeric and span is not None:
        notes.append(f"numeric ({', '.join(k for k, _, _ in numeric)}): searched over "
                     f"{span[0]:g} .. {span[1]:g} on a grid refined by bisection")
    exact = not numeric
    return JointRange(name, joint, exact, parts, span, notes)


# -- everything the panels need, computed once per analysis ------------------------------------------
@dataclass
class TimeDomain:
    """Transfer functions from every input node, the requirements and the joint range."""

    transfers: dict[str, ParametricTransfer]
    reference: str | None
    requirements: Requirements
    joint: JointRange | None = None
    errors: dict[str, str] = field(default_factory=dict)


def prepare(diagram, report, span: tuple[float, float] | None) -> TimeDomain:
    """Transfer functions from the analysis input and every other Input node to the output, and the
    joint range of ``diagram.requirements`` (errors per input kept as messages, never raised)."""
    from core.analysis.time_response import transfer_from_diagram

    reference = diagram.analysis.input
    inputs = ([reference] if reference else []) + [n.id for n in diagram.nodes.values()
                                                   if n.kind == "input" and n.id != reference]
    transfers, errors = {}, {}
    for node_id in inputs:
        try:
            reuse = getattr(report, "reduction", None) if node_id == reference else None  # same diagram, same ends
            transfers[node_id] = transfer_from_diagram(diagram, node_id, reduction=reuse)
        except LoopwrightError as exc:
            errors[node_id] = str(exc)
    requirements = diagram.requirements
    joint = None
    try:
        joint = joint_range(requirements, report, transfers.get(reference), span)
    except LoopwrightError as exc:
        errors["joint range"] = str(exc)
    return TimeDomain(transfers, reference, requirements, joint, errors)
