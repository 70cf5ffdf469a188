"""The analysis pipeline: one project in, one :class:`AnalysisResult` out, never raising.

Shared by the app's analysis controller (which runs it on a worker thread), the HTML/PDF report
and the bench. Besides the exact :class:`~core.analysis.report.Report` it precomputes what the
panels draw: pole paths over the tuning parameter's min..max, float coefficient tables for fast
evaluation at a slider value, the step transfer functions with the requirements' joint range and
the reference input's step response at the nominal value.

>>> from core.io.project_file import load_project, project_to_dict
>>> result = analyse_snapshot(project_to_dict(load_project("resources/examples/conveyor_speed.loop.json")), 1)
>>> result.ok, result.tuning_range.name, result.paths.shape[0] == PATH_SAMPLES
(True, 'K', True)
"""
from __future__ import annotations

import math
import time
import traceback
from dataclasses import dataclass, field
from fractions import Fraction
from functools import cached_property
from itertools import pairwise

import numpy as np
from flint import arb, arb_poly

from core.algebra.polynomial import ParametricPolynomial, to_float, to_fmpq
from core.analysis.plane import Plane, plane_of_project
from core.analysis.poles import certified_roots, expand_multiplicity, path_sensitivity, pole_paths
from core.analysis.report import Report, check_project
from core.analysis.requirements import TimeDomain, prepare
from core.analysis.routh import RouthArray, is_hurwitz, routh_counts
from core.analysis.time_response import StepResponse, step_response
from core.errors import LoopwrightError, Notice
from core.io.project_file import project_from_dict
from core.model.diagram import Diagram
from core.model.requirements import Requirements

PATH_SAMPLES = 400  # tuning values at which the pole paths are drawn


@dataclass(frozen=True)
class VerdictAt:
    """Stability at one value of the tuning parameter, decided exactly (or by Routh's sign rule on
    certified float signs). ``decay_met`` is None without a decay requirement; ``order_drops`` says
    the leading coefficient vanishes there."""

    stable: bool
    rhp: int
    jw: int
    decay_met: bool | None = None
    order_drops: bool = False


class FirstColumnSigns:
    """Certified signs of a plain Routh array's first column (entries num/den in the tuning
    parameter) at a value: each polynomial evaluated in ball arithmetic (python-flint arb; the
    float value is exact as a ball, coefficients are rounded with their error in the radius), so
    a sign is returned only when its ball excludes zero, at any magnitude. :meth:`at` gives None
    when any entry is too close to zero to say (then the exact test decides).

    >>> from flint import fmpq_poly
    >>> from core.analysis.routh import RationalFunction
    >>> FirstColumnSigns([RationalFunction(fmpq_poly([2, -1]))]).at(1.0), FirstColumnSigns([RationalFunction(fmpq_poly([2, -1]))]).at(2.0)
    ([1], None)
    """

    def __init__(self, entries):
        self.count = len(entries)
        self.polys = [arb_poly(e.num) for e in entries] + [arb_poly(e.den) for e in entries]

    @staticmethod
    def of(routh: RouthArray) -> FirstColumnSigns | None:
        """The balls when the array is the plain symbolic one (no special rows, no epsilon), so its
        first-column signs at a value count the right-half-plane roots there; else None."""
        plain = routh.parameter is not None and not routh.uses_eps and not routh.special
        column = routh.first_column if plain else []
        if not column or not all(hasattr(e.num, "degree") for e in column):
            return None
        return FirstColumnSigns(column)

    def at(self, value: float) -> list[int] | None:
        if not math.isfinite(value):
            return None
        v = arb(float(value))
        signs = []
        for poly in self.polys:
            y = poly(v)
            if y > 0:
                signs.append(1)
            elif y < 0:
                signs.append(-1)
            else:
                return None
        return [a * b for a, b in zip(signs[: self.count], signs[self.count:])]


@dataclass(frozen=True)
class TuningRange:
    """The tuning parameter as the diagram had it when analysed."""

    name: str
    nominal: float
    minimum: float
    maximum: float


@dataclass
class AnalysisResult:
    """One finished analysis: a Report, or the error that stopped it, plus precomputed pole paths.

    ``path_values`` (m,) and ``paths`` (m, degree) hold the poles over the tuning parameter's
    min..max; ``coefficient_table`` turns a parameter value into float coefficients fast.
    ``float_warning`` says when the drawn (floating-point) poles at the nominal value disagree
    with the exact root counts; it is also added to the report's warnings. ``steps`` holds the step
    response from the reference input at the nominal value (``step_errors`` why it could not be
    simulated); other inputs are simulated when a panel asks (:meth:`step_at`).
    """

    generation: int
    report: Report | None = None
    error: LoopwrightError | None = None
    float_warning: str | None = None
    internal_error: str | None = None
    elapsed_ms: float = 0.0
    tuning_range: TuningRange | None = None
    path_values: np.ndarray = field(default_factory=lambda: np.empty(0))
    paths: np.ndarray = field(default_factory=lambda: np.empty((0, 0), dtype=complex))
    coefficient_table: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))
    zero_table: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))
    time_domain: TimeDomain | None = None  # step transfer functions, requirements, joint range
    requirements: Requirements = field(default_factory=Requirements)  # the diagram's, as analysed
    plane: Plane | None = None  # the stability plane of the diagram's plane axes, when chosen
    plane_error: str | None = None  # why there is no plane although axes are chosen
    steps: dict[str, StepResponse] = field(default_factory=dict)
    step_errors: dict[str, LoopwrightError] = field(default_factory=dict)
    display: dict[str, object] = field(default_factory=dict)  # texts a caller readies on its worker thread
    _verdicts: dict[float | None, VerdictAt | None] = field(default_factory=dict, repr=False)
    _poles_memo: tuple[float | None, tuple[np.ndarray, list[str]]] | None = field(default=None, repr=False)

    @property
    def ok(self) -> bool:
        """Whether a Report is available."""
        return self.report is not None

    @property
    def message(self) -> str | None:
        """What to show instead of a Report: the error in plain words, or None."""
        if self.error is not None:
            return str(self.error)
        if self.internal_error is not None:
            return f"internal error: {self.internal_error}"
        return None

    def coefficients_at(self, value: float | None) -> np.ndarray:
        """Float coefficients of the analysed polynomial (highest power first) at a parameter value."""
        return _evaluate_table(self.coefficient_table, value)

    def poles_at(self, value: float | None) -> np.ndarray:
        """The loop's poles at a parameter value (numpy.roots; floats, for drawing). Where floats
        fail (coefficients spanning beyond their range), the certified roots that fit."""
        return self.poles_and_beyond(value)[0]

    def poles_and_beyond(self, value: float | None) -> tuple[np.ndarray, list[str]]:
        """(the drawable poles, texts of the poles beyond the float range) at a parameter value;
        the last value's are remembered (a worker can ready the nominal one)."""
        key = None if value is None else float(value)
        if self._poles_memo is None or self._poles_memo[0] != key:
            self._poles_memo = (key, self._poles_and_beyond(value))
        return self._poles_memo[1]

    def _poles_and_beyond(self, value: float | None) -> tuple[np.ndarray, list[str]]:
        coeffs = self.coefficients_at(value)
        roots = _roots(coeffs)
        if (roots.size == coeffs.size - 1 and np.all(np.isfinite(roots))) or self.report is None:
            return roots, []
        exact = self.report.analysed.at(_exact_value(value) if self.report.parameter else None)
        poles = expand_multiplicity(certified_roots(exact))
        fits = [p for p in poles if math.isfinite(p.re) and math.isfinite(p.im)]
        beyond = [p.re_text if p.im == 0 else f"{p.re_text} {'-' if p.im < 0 else '+'} j{p.im_text.lstrip('-')}"
                  for p in poles if p not in fits]
        return np.array([complex(p.re, p.im) for p in fits], dtype=complex), beyond

    def zeros_at(self, value: float | None) -> np.ndarray:
        """Zeros of the closed-loop transfer function at a parameter value (numpy.roots)."""
        return _roots(_evaluate_table(self.zero_table, value))

    @cached_property
    def _first_column(self) -> FirstColumnSigns | None:
        return FirstColumnSigns.of(self.report.routh) if self.report is not None else None

    def verdict_at(self, value: float | None) -> VerdictAt | None:
        """Stability (and the decay requirement) at a value of the tuning parameter; at the nominal
        values without a tuning parameter; None without a Report or a nominal verdict. Remembered
        per value, so a caller can decide the nominal one on its worker thread."""
        key = None if value is None else float(value)
        if key not in self._verdicts:
            if len(self._verdicts) > 4096:  # a long slider drag
                self._verdicts.clear()
            self._verdicts[key] = self._verdict_at(value)
        return self._verdicts[key]

    def _verdict_at(self, value: float | None) -> VerdictAt | None:
        report = self.report
        if report is None:
            return None
        if report.parameter is None or value is None:
            nominal = report.nominal
            return None if nominal is None else VerdictAt(nominal.stable, nominal.rhp, nominal.jw)
        v = to_fmpq(value)
        decay = None
        if report.decay is not None and report.decay.range is not None:
            decay = report.decay.range.contains(v)
        signs = self._first_column.at(value) if self._first_column is not None else None
        if signs is not None:  # Routh: as many right-half-plane roots as sign changes, none on the axis
            rhp = sum(a != b for a, b in pairwise(signs))
            return VerdictAt(rhp == 0, rhp, 0, decay)
        coeffs = report.analysed.at(v)
        dropped = len(coeffs) - 1 < report.analysed.degree
        stable = is_hurwitz(coeffs, report.analysed.degree)  # fast exact test; counts only when unstable
        counts = routh_counts(coeffs) if not stable and len(coeffs) > 1 else None
        return VerdictAt(stable, counts.rhp if counts else 0, counts.jw if counts else 0, decay, dropped)

    def step_at(self, input_id: str, value: float | None) -> StepResponse:
        """The step response from ``input_id`` at a parameter value (None without a tuning parameter):
        the one computed with the analysis at the nominal value, else simulated now. Raises
        LoopwrightError (or KeyError for an input without a transfer function)."""
        if value == self._nominal_value():
            if input_id in self.step_errors:
                raise self.step_errors[input_id]
            if input_id in self.steps:
                return self.steps[input_id]
        if self.time_domain is None:
            raise KeyError(input_id)
        return step_response(self.time_domain.transfers[input_id], value)

    def step_ready(self, input_id: str, value: float | None) -> bool:
        """Whether :meth:`step_at` answers at once (the analysis' own step, at the nominal value)."""
        return value == self._nominal_value() and (input_id in self.steps or input_id in self.step_errors)

    def _nominal_value(self) -> float | None:
        if self.tuning_range is None or self.report is None or self.report.parameter is None:
            return None
        return self.tuning_range.nominal


def _evaluate_table(table: np.ndarray, value: float | None) -> np.ndarray:
    if table.size == 0:
        return np.empty(0)
    v = 0.0 if value is None else float(value)
    powers = v ** np.arange(table.shape[1] - 1, -1, -1, dtype=float)
    return np.trim_zeros(table @ powers, "f")


def _exact_value(value: float | None):
    """A slider's float as the exact binary rational it is (no decimal rounding)."""
    return None if value is None else to_fmpq(Fraction(float(value)))


def _roots(coeffs: np.ndarray) -> np.ndarray:
    if coeffs.size < 2 or not np.all(np.isfinite(coeffs)):
        return np.empty(0, dtype=complex)
    return np.roots(coeffs).astype(complex)


def coefficient_table(poly: ParametricPolynomial) -> np.ndarray:
    """Matrix C with C @ [v^d, ..., v, 1] = the polynomial's coefficients (highest power first) at v.

    >>> from flint import fmpq_poly
    >>> coefficient_table(ParametricPolynomial.from_coefficients([1, fmpq_poly([2, 3])], "K")).tolist()
    [[0.0, 1.0], [3.0, 2.0]]
    """
    coeffs = poly.coeffs
    width = max(max((c.degree() for c in coeffs), default=0) + 1, 1)
    table = np.zeros((len(coeffs), width))
    for row, c in enumerate(coeffs):
        for i in range(c.degree() + 1):
            table[row, width - 1 - i] = to_float(c[i])
    return table


def zero_table(report: Report) -> np.ndarray:
    """Coefficient table of the closed-loop numerator (other parameters at nominal); empty if none."""
    if report.closed_num is None:
        return np.empty((0, 0))
    try:
        num = ParametricPolynomial.from_mpoly(report.closed_num, report.parameter, report.values)
    except KeyError:  # a parameter without a value: no zeros to draw
        return np.empty((0, 0))
    return coefficient_table(num) if num.degree >= 1 else np.empty((0, 0))


def analyse_snapshot(project: dict, generation: int) -> AnalysisResult:
    """Analyse one project dictionary; never raises (errors become fields of the result)."""
    start = time.perf_counter()
    result = AnalysisResult(generation)
    try:
        diagram = project_from_dict(project, source="<analysis copy>")
        result.requirements = diagram.requirements
        report = check_project(diagram)
        result.report = report
        result.coefficient_table = coefficient_table(report.analysed)
        result.zero_table = zero_table(report)
        tuning = _tuning_range(diagram, report)
        result.tuning_range = tuning
        if tuning is not None and report.analysed.degree >= 1:
            result.path_values = np.linspace(tuning.minimum, tuning.maximum, PATH_SAMPLES)
            result.paths = pole_paths(report.analysed, result.path_values)
        result.float_warning = float_sensitivity(result, tuning)
        if result.float_warning is not None:
            report.warnings.append(Notice(result.float_warning, "numerically_sensitive"))
        result.time_domain = _time_domain(diagram, report, tuning)
        _nominal_steps(result)
        _plane(result, diagram, report)
    except LoopwrightError as exc:
        result.report, result.error = None, exc
    except Exception as exc:
        result.report = None
        result.internal_error = f"{type(exc).__name__}: {exc}"
        traceback.print_exc()
    result.elapsed_ms = (time.perf_counter() - start) * 1000.0
    return result


PLANE_RESOLUTION = 60  # the window's plane grid (PLANE_RESOLUTION x PLANE_RESOLUTION exact labels)


def _plane(result: AnalysisResult, diagram: Diagram, report: Report) -> None:
    """The stability plane of the diagram's two plane axes over their min..max (each other
    parameter at its nominal value); an error becomes ``plane_error``, the rest of the result stays."""
    x, y = diagram.analysis.plane_x, diagram.analysis.plane_y
    if x is None or y is None:
        return
    try:
        result.plane = plane_of_project(diagram, report, x, y, resolution=PLANE_RESOLUTION)
    except LoopwrightError as exc:
        result.plane_error = str(exc)
    except Exception as exc:  # a bug in the plane must not take the rest of the analysis with it
        traceback.print_exc()
        result.plane_error = f"the stability plane failed (internal error: {type(exc).__name__}); please report it"


def _time_domain(diagram: Diagram, report: Report, tuning: TuningRange | None) -> TimeDomain | None:
    """Step transfer functions and the requirements' joint range; a failure here only loses them."""
    try:
        return prepare(diagram, report, (tuning.minimum, tuning.maximum) if tuning is not None else None)
    except Exception:
        traceback.print_exc()
        return None


def _nominal_steps(result: AnalysisResult) -> None:
    """The step response from the reference input at the nominal value, so no panel simulates it
    on the GUI thread when the result arrives."""
    td = result.time_domain
    if td is None or td.reference not in td.transfers:
        return
    try:
        result.steps[td.reference] = step_response(td.transfers[td.reference], result._nominal_value())
    except LoopwrightError as exc:
        result.step_errors[td.reference] = exc
    except Exception:
        traceback.print_exc()


def float_sensitivity(result: AnalysisResult, tuning: TuningRange | None) -> str | None:
    """A warning when the poles drawn at the nominal value (numpy) disagree with the exact counts."""
    nominal = result.report.nominal if result.report is not None else None
    if nominal is None:
        return None
    drawn = result.poles_at(tuning.nominal if tuning is not None else None)
    return path_sensitivity(drawn, nominal.rhp, nominal.jw)


def _tuning_range(diagram: Diagram, report: Report) -> TuningRange | None:
    name = report.parameter
    if name is None or name not in diagram.parameters:
        return None
    p = diagram.parameters[name]
    return TuningRange(name, p.nominal, p.minimum, p.maximum)
