"""AnalysisController: debounce, stale results dropped, errors shown plainly, current value."""
from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import threading

import numpy as np
import pytest
from PySide6.QtGui import QUndoStack

import app.controller as controller_module
import core.analysis.pipeline as pipeline
from app.bridge import ModelSignals
from app.controller import AnalysisController
from app.document.editing import commit_nominals
from app.panels import PolynomialPanel, RangePanel, RouthPanel, attach
from core.analysis.pipeline import PATH_SAMPLES
from core.model.diagram import Diagram, Node, Parameter


def unity_loop(num: str = "K", den: str = "s^3 + 3s^2 + 2s", nominal: float = 2.0) -> Diagram:
    """r -> sum(+ -) -> G -> y with unity feedback; G = num/den, K tuned over 0..10."""
    d = Diagram(name="test loop")
    for node in (Node("r", "input"), Node("e", "sum", signs="+-"), Node("G", "block", num=num, den=den),
                 Node("b", "branch"), Node("y", "output")):
        d.add_node(node)
    for src, dst, port in (("r", "e", 0), ("e", "G", 0), ("G", "b", 0), ("b", "y", 0), ("b", "e", 1)):
        d.connect(src, dst, port)
    d.set_parameter(Parameter("K", nominal, 0.0, 10.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    return d


@pytest.fixture(autouse=True)
def analyses_on_threads(monkeypatch):
    """These tests replace the analysis in this process (monkeypatch), so it must run here, on a thread."""
    monkeypatch.setattr(controller_module, "ANALYSIS_IN_PROCESS", False)


@pytest.fixture
def counted(monkeypatch):
    """Count the analyses the worker runs (the real analysis still runs)."""
    calls = []
    real = controller_module.analyse_snapshot

    def counting(project, generation):
        calls.append(generation)
        return real(project, generation)
    monkeypatch.setattr(controller_module, "analyse_snapshot", counting)
    return calls


def make(qtbot, diagram, undo_stack=None):
    signals = ModelSignals(diagram)
    ctl = AnalysisController(diagram, signals)
    if undo_stack is not None:
        commit_nominals(ctl, diagram, undo_stack)
    results = []
    ctl.resultReady.connect(results.append)
    return ctl, signals, results


def test_first_result_has_the_loop(qtbot, counted):
    d = unity_loop()
    ctl, _, results = make(qtbot, d)
    assert ctl.wait_for_idle(10000)
    assert len(results) == 1 and results[0].ok
    # K/(s(s+1)(s+2)) in unity feedback: s^3 + 3s^2 + 2s + K (from memory, textbook root-locus example)
    got = np.sort_complex(results[0].poles_at(2.0))
    want = np.sort_complex(np.roots([1, 3, 2, 2]))  # reference: numpy
    assert np.allclose(got, want)
    assert results[0].paths.shape == (PATH_SAMPLES, 3)
    assert ctl.current_value == 2.0


def test_quick_edits_make_one_analysis(qtbot, counted):
    d = unity_loop()
    ctl, _, results = make(qtbot, d)
    for nominal in (1.0, 1.5, 2.5, 3.0, 3.5):  # one burst, well inside the DEBOUNCE_MS window
        d.set_parameter(Parameter("K", nominal, 0.0, 10.0))
    assert ctl.wait_for_idle(10000)
    assert len(counted) == 1
    assert len(results) == 1 and results[0].tuning_range.nominal == 3.5
    assert results[0].generation == ctl.generation


def test_stale_result_is_dropped(qtbot, monkeypatch):
    d = unity_loop()
    gate = threading.Event()
    real = controller_module.analyse_snapshot
    seen = []

    def slow_first(project, generation):
        seen.append(project["parameters"])
        if len(seen) == 1:
            gate.wait(5)  # hold the first analysis until the model has changed
        return real(project, generation)
    monkeypatch.setattr(controller_module, "analyse_snapshot", slow_first)
    ctl, _, results = make(qtbot, d)
    ctl.analyse_now()
    qtbot.waitUntil(lambda: len(seen) == 1, timeout=30000)  # a loaded machine may start it late
    d.set_parameter(Parameter("K", 7.0, 0.0, 10.0))  # newer generation while the first still runs
    gate.set()
    assert ctl.wait_for_idle(10000)
    assert len(seen) == 2
    assert [r.tuning_range.nominal for r in results] == [7.0]  # the first (K = 2) result never arrived


def test_error_arrives_as_message(qtbot):
    d = unity_loop()
    d.set_parameter(Parameter("T", 1.0, 0.0, 2.0))
    d.set_tuning_parameter("T")  # tuned but typed in no block: the analysis refuses with E405
    ctl, _, results = make(qtbot, d)
    panels = [PolynomialPanel(), RouthPanel(), RangePanel()]
    for p in panels:
        qtbot.addWidget(p)
        attach(p, ctl)
    assert ctl.wait_for_idle(10000)
    result = results[-1]
    assert result.report is None and result.error is not None and result.error.code == "E405"
    for p in panels:
        assert not p.message.isHidden() and "E405" in p.message.text() and "appears in no block" in p.message.text()


def test_unexpected_exception_becomes_internal_error(qtbot, monkeypatch):
    def broken(diagram):
        raise RuntimeError("boom")
    monkeypatch.setattr(pipeline, "check_project", broken)
    ctl, _, results = make(qtbot, unity_loop())
    assert ctl.wait_for_idle(10000)
    assert results[-1].message == "internal error: RuntimeError: boom"


def test_busy_goes_up_and_down(qtbot):
    d = unity_loop()
    ctl, _, _ = make(qtbot, d)
    assert ctl.wait_for_idle(10000)
    states = []
    ctl.busyChanged.connect(states.append)
    d.set_parameter(Parameter("K", 4.0, 0.0, 10.0))
    assert ctl.wait_for_idle(10000)
    assert states == [True, False]


def test_live_value_and_commit_through_undo(qtbot):
    d = unity_loop()
    stack = QUndoStack()
    ctl, _, results = make(qtbot, d, stack)
    assert ctl.wait_for_idle(10000)
    values = []
    ctl.currentValueChanged.connect(values.append)
    ctl.set_current_value(4.0)
    ctl.set_current_value(4.5)
    assert values == [4.0, 4.5] and d.parameters["K"].nominal == 2.0  # live: the model is untouched
    ctl.commit_current_value()
    assert d.parameters["K"].nominal == 4.5
    assert stack.count() == 1
    stack.undo()
    assert d.parameters["K"].nominal == 2.0
    assert ctl.wait_for_idle(10000)
    assert results[-1].tuning_range.nominal == 2.0 and ctl.current_value == 2.0


def test_dispose_abandons_a_running_analysis_and_ignores_later_changes(qtbot, monkeypatch):
    d = unity_loop()
    gate = threading.Event()
    real = controller_module.analyse_snapshot
    started = []

    def held(project, generation):
        started.append(generation)
        gate.wait(5)  # still running when the controller is disposed
        return real(project, generation)
    monkeypatch.setattr(controller_module, "analyse_snapshot", held)
    ctl, _, results = make(qtbot, d)
    ctl.analyse_now()
    qtbot.waitUntil(lambda: len(started) == 1)
    assert ctl.dispose() is False  # the worker is still alive and was not waited for
    assert not ctl.busy and ctl.disposed
    gate.set()
    assert ctl.dispose(wait_ms=5000) is True  # second call: waits for the worker, no error
    qtbot.wait(50)  # let a queued delivery (if any) arrive
    assert results == []  # the abandoned result is dropped
    d.set_parameter(Parameter("K", 5.0, 0.0, 10.0))  # the model changes after dispose: nothing runs
    qtbot.wait(DEBOUNCE_WAIT_MS)
    assert started == [started[0]] and not ctl.busy and results == []


DEBOUNCE_WAIT_MS = 3 * controller_module.DEBOUNCE_MS


def spin_forever_on_first_call(monkeypatch):
    """Make the first analysis never end (a pure-Python loop, so a cancel can reach it); later
    analyses are real. Returns the list of worker threads that ran an analysis."""
    real = controller_module.analyse_snapshot
    threads = []

    def first_spins(project, generation):
        threads.append(threading.current_thread())
        while len(threads) == 1:
            sum(range(100))
        return real(project, generation)
    monkeypatch.setattr(controller_module, "analyse_snapshot", first_spins)
    return threads


def test_a_never_ending_analysis_is_cancelled_by_the_next_change(qtbot, monkeypatch):
    threads = spin_forever_on_first_call(monkeypatch)
    d = unity_loop()
    ctl, _, results = make(qtbot, d)
    ctl.analyse_now()
    qtbot.waitUntil(lambda: len(threads) == 1)
    d.set_parameter(Parameter("K", 7.0, 0.0, 10.0))
    assert ctl.stale  # marked out of date at once, before anything was analysed
    qtbot.waitUntil(lambda: bool(results), timeout=10000)
    assert [r.tuning_range.nominal for r in results] == [7.0] and not ctl.stale
    threads[0].join(5)
    assert not threads[0].is_alive()  # the spinning analysis was stopped, not left burning a core


def test_stop_keeps_the_last_result_marked_out_of_date(qtbot, monkeypatch):
    d = unity_loop()
    ctl, _, results = make(qtbot, d)
    assert ctl.wait_for_idle(10000) and len(results) == 1 and not ctl.stale
    threads = spin_forever_on_first_call(monkeypatch)
    stale_marks = []
    ctl.staleChanged.connect(stale_marks.append)
    d.set_parameter(Parameter("K", 3.0, 0.0, 10.0))
    assert stale_marks == [True] and ctl.stale
    qtbot.waitUntil(lambda: len(threads) == 1)
    ctl.cancel()
    assert not ctl.busy and ctl.stale and ctl.result is results[0]
    threads[0].join(5)
    assert not threads[0].is_alive()
    d.set_parameter(Parameter("K", 4.0, 0.0, 10.0))  # the next change is analysed as usual
    qtbot.waitUntil(lambda: len(results) == 2, timeout=10000)
    assert results[1].tuning_range.nominal == 4.0 and not ctl.stale and stale_marks[-1] is False
