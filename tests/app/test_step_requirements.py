"""Step response and requirements panels on the shipped example: filled, following the slider,
undoable edits, verdict badges; checked against numpy/scipy computed independently here."""
from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pytest
from PySide6.QtGui import QUndoStack
from scipy import signal

from app.bridge import ModelSignals
from app.controller import AnalysisController
from app.document.editing import commit_nominals
from app.panels import attach
from app.panels.requirements_panel import RequirementsPanel
from app.panels.step_panel import StepPanel
from core.model.diagram import Node
from core.model.requirements import Requirements


def conveyor_closed_loop(k: float):
    """The example's r -> y transfer function built with numpy from its blocks, independently of core:
    C = K(s+1)/s, A = 8/(s+8), P = 3/((s+0.6)(s+5)), H = 25/(s+25) in the feedback path;
    y/r = C A P / (1 + C A P H) = 24 K (s+1)(s+25) / (s(s+8)(s+0.6)(s+5)(s+25) + 600 K (s+1))."""
    forward_num = np.polymul([24 * k], [1, 1])
    forward_den = np.polymul(np.polymul([1, 0], [1, 8]), np.polymul([1, 0.6], [1, 5]))
    num = np.polymul(forward_num, [1, 25])
    den = np.polyadd(np.polymul(forward_den, [1, 25]), 25 * forward_num)
    return num, den


@pytest.fixture
def panels(qtbot, diagram):
    signals = ModelSignals(diagram)
    stack = QUndoStack()
    controller = AnalysisController(diagram, signals)
    commit_nominals(controller, diagram, stack)
    step, requirements = StepPanel(), RequirementsPanel()
    qtbot.addWidget(step)
    qtbot.addWidget(requirements)
    requirements.set_document(diagram, signals, stack)
    for panel in (step, requirements):
        attach(panel, controller)
    assert controller.wait_for_idle(60_000)
    yield diagram, controller, stack, step, requirements
    controller.dispose()
    signals.detach()


def settle(qtbot, controller):
    assert controller.wait_for_idle(60_000)
    qtbot.wait(30)


def test_step_panel_fills_on_the_example(panels):
    _diagram, _controller, _, step, _ = panels
    t, y = step.plotted_response()
    assert t.size >= 1000 and np.all(np.isfinite(y))
    # Integral action (C has 1/s) and H(0) = 1: zero steady-state error to a step (final value
    # theorem, textbook; from memory).
    assert step.step.metrics.final_value == 1.0
    assert step.values["steady_state_error"].text() == "0"
    num, den = conveyor_closed_loop(2.0)
    _, y_ref = signal.step((num, den), T=t)  # scipy on numpy-built polynomials
    assert y == pytest.approx(y_ref, abs=1e-8)
    overshoot = (y_ref.max() - 1) * 100
    assert step.step.metrics.overshoot == pytest.approx(overshoot, rel=2e-3)
    assert step.values["overshoot"].text().endswith("%")


def test_slider_moves_the_response(qtbot, panels):
    _, controller, _, step, _ = panels
    _, before = step.plotted_response()
    controller.set_current_value(6.0)
    qtbot.waitUntil(lambda: step.step is not None and step.step.value == 6.0, timeout=5000)
    t, after = step.plotted_response()
    assert not np.allclose(before[: after.size], after[: before.size])
    num, den = conveyor_closed_loop(6.0)
    _, y_ref = signal.step((num, den), T=t)
    assert after == pytest.approx(y_ref, abs=1e-8)
    controller.set_current_value(15.0)  # beyond the stable limit 12.87 of the example's notes
    qtbot.waitUntil(lambda: step.step.value == 15.0, timeout=5000)
    assert not step.step.stable and "UNSTABLE" in step.caption.text()
    assert step.values["final_value"].text() == "none (unstable)"


def test_disturbance_input_can_be_chosen(qtbot, panels):
    diagram, controller, _, step, _ = panels
    diagram.add_node(Node("d", "input", x=400, y=-100))  # a load disturbance at the plant input
    diagram.add_node(Node("u", "sum", signs="++", x=500, y=0))
    diagram.disconnect("A->P:0")
    for a, b, port in (("A", "u", 0), ("d", "u", 1), ("u", "P", 0)):
        diagram.connect(a, b, port)
    settle(qtbot, controller)
    assert [step.inputs.itemData(i) for i in range(step.inputs.count())] == ["r", "d"]
    step.select_input("d")  # simulated on the current-value worker
    qtbot.waitUntil(lambda: step.step is not None and step.step.input_id == "d", timeout=5000)
    # The PI controller's integrator rejects a constant load: final value 0 (final value theorem).
    assert step.step.metrics.final_value == 0.0
    assert step.step.metrics.steady_state_error == 0.0


def test_editing_a_requirement_is_undoable(qtbot, panels):
    diagram, controller, stack, _, requirements = panels
    edit = requirements.edits["damping"]
    edit.setText("0.45")
    edit.editingFinished.emit()
    assert diagram.requirements.min_damping == 0.45
    assert stack.count() == 1
    settle(qtbot, controller)
    assert requirements.badges["damping"].text() in ("PASS", "FAIL")
    stack.undo()
    assert diagram.requirements.min_damping is None
    assert edit.text() == ""
    stack.redo()
    assert diagram.requirements.min_damping == 0.45 and edit.text() == "0.45"
    edit.setText("1.7")  # out of range: refused, nothing pushed
    edit.editingFinished.emit()
    assert diagram.requirements.min_damping == 0.45 and stack.count() == 1
    assert "E304" in requirements.problem.text()


def test_verdict_badges(qtbot, panels):
    diagram, controller, _stack, _, requirements = panels
    diagram.set_requirements(Requirements(min_damping=0.4, min_gain_margin=3))
    settle(qtbot, controller)
    # At K = 2: numpy roots of the numpy-built characteristic polynomial give the damping;
    # the example's notes give the stable limit 12.87, so the rise factor is 12.87 / 2 = 6.4.
    _, den = conveyor_closed_loop(2.0)
    poles = np.roots(den)
    zeta = min(-poles.real / np.abs(poles))
    assert requirements.badges["damping"].text() == ("PASS" if zeta >= 0.4 else "FAIL")
    assert requirements.badges["gain margin"].text() == "PASS"
    controller.set_current_value(5.0)  # 12.87 / 5 = 2.57 < 3
    qtbot.waitUntil(lambda: requirements.badges["gain margin"].text() == "FAIL", timeout=5000)
    _, den = conveyor_closed_loop(5.0)
    poles = np.roots(den)
    zeta = min(-poles.real / np.abs(poles))
    assert requirements.badges["damping"].text() == ("PASS" if zeta >= 0.4 else "FAIL")
    assert requirements.badges["overshoot"].text() == ""  # not set: no badge
    html = requirements.range_text.text()
    assert "Stable and meeting all" in html and "numeric" in html
    joint = controller.result.time_domain.joint
    assert joint.contains(2.0) == (min(-np.roots(conveyor_closed_loop(2.0)[1]).real
                                       / np.abs(np.roots(conveyor_closed_loop(2.0)[1]))) >= 0.4)


def test_window_has_both_docks(window):
    assert window.docks["step"].windowTitle() == "Step response"
    assert window.docks["requirements"].windowTitle() == "Requirements"
    view_menu = next(a.menu() for a in window.menuBar().actions() if a.text() == "&View")
    titles = [a.text() for a in view_menu.actions()]
    assert "Step response" in titles and "Requirements" in titles
