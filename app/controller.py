"""The one analysis controller: debounced, off the GUI thread, newest result wins.

Every model change restarts a short single-shot timer; when it fires, the diagram is copied (as
its project dictionary, on the GUI thread) and analysed on a worker thread with
:func:`core.analysis.report.check_project`. Each request carries a generation number; a result whose
generation is no longer the newest is dropped. Errors never escape: a
:class:`~core.errors.LoopwrightError` arrives as ``AnalysisResult.error``, anything else as
``AnalysisResult.internal_error``.

The *current value* of the tuning parameter is what the pole-map slider shows. Dragging calls
:meth:`AnalysisController.set_current_value` (cheap: panels evaluate the last result at it);
releasing calls :meth:`AnalysisController.commit_current_value`, which makes it the parameter's
nominal value through one undoable command.
"""
from __future__ import annotations

import math
import threading
import time
import traceback
from dataclasses import dataclass, field, replace

import numpy as np
from PySide6.QtCore import QCoreApplication, QElapsedTimer, QEventLoop, QObject, QTimer, Signal

from app.commands import SetParameterCommand
from core.algebra.polynomial import ParametricPolynomial
from core.analysis.poles import path_sensitivity, pole_paths
from core.analysis.report import Report, check_project
from core.analysis.requirements import TimeDomain, prepare
from core.analysis.time_response import StepResponse, step_response
from core.errors import LoopwrightError
from core.io.project_file import project_from_dict, project_to_dict
from core.model.diagram import Diagram

DEBOUNCE_MS = 35  # edits arrive on Enter or commit, not per keystroke: a short wait still merges bursts
PATH_SAMPLES = 400


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
    tuning: TuningRange | None = None
    path_values: np.ndarray = field(default_factory=lambda: np.empty(0))
    paths: np.ndarray = field(default_factory=lambda: np.empty((0, 0), dtype=complex))
    coefficient_table: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))
    zero_table: np.ndarray = field(default_factory=lambda: np.empty((0, 0)))
    time_domain: TimeDomain | None = None  # step transfer functions, requirements, joint range
    steps: dict[str, StepResponse] = field(default_factory=dict)
    step_errors: dict[str, LoopwrightError] = field(default_factory=dict)

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
        """The loop's poles at a parameter value (numpy.roots; floats, for drawing)."""
        return _roots(self.coefficients_at(value))

    def zeros_at(self, value: float | None) -> np.ndarray:
        """Zeros of the closed-loop transfer function at a parameter value (numpy.roots)."""
        return _roots(_evaluate_table(self.zero_table, value))

    def step_at(self, input_id: str, value: float | None) -> StepResponse:
        """The step response from ``input_id`` at a parameter value (None without a tuning parameter):
        the one computed with the analysis at the nominal value, else simulated now. Raises
        LoopwrightError (or KeyError for an input without a transfer function)."""
        if value == self._nominal_value():
            if input_id in self.step_errors:
                raise self.step_errors[input_id]
            if input_id in self.steps:
                return self.steps[input_id]
        return step_response(self.time_domain.transfers[input_id], value)

    def _nominal_value(self) -> float | None:
        return self.tuning.nominal if self.tuning is not None and self.report.parameter is not None else None


def _evaluate_table(table: np.ndarray, value: float | None) -> np.ndarray:
    if table.size == 0:
        return np.empty(0)
    v = 0.0 if value is None else float(value)
    powers = v ** np.arange(table.shape[1] - 1, -1, -1, dtype=float)
    return np.trim_zeros(table @ powers, "f")


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
            table[row, width - 1 - i] = float(c[i])
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
        report = check_project(diagram)
        result.report = report
        result.coefficient_table = coefficient_table(report.analysed)
        result.zero_table = zero_table(report)
        tuning = _tuning_range(diagram, report)
        result.tuning = tuning
        if tuning is not None and report.analysed.degree >= 1:
            result.path_values = np.linspace(tuning.minimum, tuning.maximum, PATH_SAMPLES)
            result.paths = pole_paths(report.analysed, result.path_values)
        result.float_warning = float_sensitivity(result, tuning)
        if result.float_warning is not None:
            report.warnings.append(result.float_warning)
        result.time_domain = _time_domain(diagram, report, tuning)
        _nominal_steps(result)
    except LoopwrightError as exc:
        result.report, result.error = None, exc
    except Exception as exc:
        result.report = None
        result.internal_error = f"{type(exc).__name__}: {exc}"
        traceback.print_exc()
    result.elapsed_ms = (time.perf_counter() - start) * 1000.0
    return result


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
    nominal = result.report.nominal
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


def set_nominal(diagram: Diagram, undo_stack, name: str, value: float) -> None:
    """Make ``value`` the nominal of parameter ``name``: one undoable command when a stack is given."""
    new = replace(diagram.parameters[name], nominal=float(value))
    if undo_stack is None:
        diagram.set_parameter(new)
    else:
        undo_stack.push(SetParameterCommand(diagram, new))


def _work(relay: _Relay, project: dict, generation: int) -> None:
    result = analyse_snapshot(project, generation)
    try:
        relay.finished.emit(result)
    except RuntimeError:  # the controller was deleted while this analysis ran
        pass


class _Relay(QObject):
    """Lives on the GUI thread; the worker emits through it so delivery is queued to the GUI."""

    finished = Signal(object)


class AnalysisController(QObject):
    """Runs the analysis of one diagram whenever it changes; see the module docstring.

    ``signals`` is the diagram's ModelSignals (anything with a ``changed`` signal);
    ``undo_stack`` (a QUndoStack) receives the command made by :meth:`commit_current_value`.
    """

    resultReady = Signal(object)
    busyChanged = Signal(bool)
    currentValueChanged = Signal(float)

    def __init__(self, diagram: Diagram, signals, undo_stack=None, parent: QObject | None = None,
                 debounce_ms: int = DEBOUNCE_MS):
        super().__init__(parent)
        self._diagram = diagram
        self._undo_stack = undo_stack
        self._generation = 0
        self._running = False
        self._busy = False
        self._result: AnalysisResult | None = None
        self._current: float | None = None
        self._dragging = False
        self._disposed = False
        self._held = False
        self._worker: threading.Thread | None = None
        self._relay = _Relay(self)
        self._relay.finished.connect(self._on_finished)
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(debounce_ms)
        self._timer.timeout.connect(self._start)
        self._signals = signals
        signals.changed.connect(self.schedule)
        self.schedule()

    # -- state ----------------------------------------------------------------------------------
    @property
    def result(self) -> AnalysisResult | None:
        """The newest delivered result."""
        return self._result

    @property
    def generation(self) -> int:
        """The generation of the newest request (bumped on every change)."""
        return self._generation

    @property
    def busy(self) -> bool:
        """Whether an analysis is waiting on the timer or running."""
        return self._busy

    @property
    def current_value(self) -> float | None:
        """The tuning parameter's current (slider) value; None without a tuning parameter."""
        return self._current

    # -- requests -------------------------------------------------------------------------------
    def schedule(self) -> None:
        """Note a model change: a new generation, analysed after the debounce interval."""
        if self._disposed:
            return
        self._generation += 1
        self._timer.start()
        self._set_busy(True)

    def analyse_now(self) -> None:
        """Skip the debounce wait (the result still arrives through ``resultReady``)."""
        if self._disposed:
            return
        self._generation += 1
        self._timer.stop()
        self._set_busy(True)
        self._start()

    def hold(self, held: bool) -> None:
        """While held, no analysis starts (changes still count); releasing starts the one that waited.
        The window holds the first analysis until its first paint, so the two do not compete."""
        self._held = held
        if not held and self._busy and not self._timer.isActive():
            self._start()

    def _start(self) -> None:
        if self._running or self._disposed or self._held:
            return  # _on_finished starts again when the newest generation was not analysed
        self._running = True
        generation = self._generation
        try:
            project = project_to_dict(self._diagram)
        except Exception as exc:
            self._running = False
            self._on_finished(AnalysisResult(generation, internal_error=f"{type(exc).__name__}: {exc}"))
            return
        self._worker = threading.Thread(target=_work, args=(self._relay, project, generation),
                                        name="loopwright-analysis", daemon=True)
        self._worker.start()

    def _on_finished(self, result: AnalysisResult) -> None:
        self._running = False
        if self._disposed:
            return
        if result.generation != self._generation:
            if not self._timer.isActive():
                self._start()  # stale: the newest change has not been analysed yet
            return
        self._result = result
        self._adopt_tuning(result)
        self.resultReady.emit(result)
        if not self._timer.isActive():
            self._set_busy(False)

    def _adopt_tuning(self, result: AnalysisResult) -> None:
        tuning = result.tuning
        if tuning is None:
            self._current = None
            return
        if self._dragging and self._current is not None:
            return
        self._current = tuning.nominal
        self.currentValueChanged.emit(tuning.nominal)

    def _set_busy(self, busy: bool) -> None:
        if busy != self._busy:
            self._busy = busy
            self.busyChanged.emit(busy)

    # -- current value --------------------------------------------------------------------------
    def set_current_value(self, value: float) -> None:
        """Move the current value live (slider drag); panels follow through ``currentValueChanged``."""
        if self._result is None or self._result.tuning is None or not math.isfinite(value):
            return
        self._dragging = True
        if value != self._current:
            self._current = float(value)
            self.currentValueChanged.emit(self._current)

    def commit_current_value(self) -> None:
        """Make the current value the tuning parameter's nominal (one undoable command)."""
        self._dragging = False
        tuning = self._result.tuning if self._result is not None else None
        if tuning is None or self._current is None or self._disposed:
            return
        param = self._diagram.parameters.get(tuning.name)
        if param is None or param.nominal == self._current:
            return
        set_nominal(self._diagram, self._undo_stack, tuning.name, self._current)

    # -- end of life ------------------------------------------------------------------------------
    def dispose(self, wait_ms: int = 0) -> bool:
        """Stop for good: no more analyses, timers stopped, signals disconnected, a running analysis
        abandoned (its result is dropped). Waits up to ``wait_ms`` for the worker thread; returns
        True when no worker is left running. Safe to call twice.

        The worker is a daemon thread that only reads its own copy of the project, so abandoning it
        is safe: it cannot touch this controller's diagram and dies with the process.
        """
        if not self._disposed:
            self._disposed = True
            self._timer.stop()
            try:
                self._signals.changed.disconnect(self.schedule)
            except (RuntimeError, TypeError):  # already gone or never connected
                pass
            try:
                self._relay.finished.disconnect(self._on_finished)
            except (RuntimeError, TypeError):
                pass
            self._generation += 1  # anything still in flight is stale
            self._set_busy(False)
        worker = self._worker
        if worker is not None and worker.is_alive() and wait_ms > 0:
            worker.join(wait_ms / 1000.0)
        return worker is None or not worker.is_alive()

    @property
    def disposed(self) -> bool:
        """Whether :meth:`dispose` was called."""
        return self._disposed

    # -- tests and screenshots ------------------------------------------------------------------
    def wait_for_idle(self, timeout_ms: int = 5000) -> bool:
        """Process events until no analysis is pending; True when idle before the timeout."""
        clock = QElapsedTimer()
        clock.start()
        app = QCoreApplication.instance()
        while self._busy and clock.elapsed() < timeout_ms:
            app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
            time.sleep(0.002)
        return not self._busy
