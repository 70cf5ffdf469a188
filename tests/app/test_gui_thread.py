"""Nothing heavy runs on the GUI thread: while a large project is opened, analysed, edited,
selected and replaced, the exact engine's expensive steps (the analysis itself, Routh counting,
entry texts, symbolic factoring) are only ever called on a worker thread. Counted, not timed (speed
is measured in bench/); the functions spied on are the ones that cost seconds at high degree."""
from __future__ import annotations

import json
import threading

import pytest

import core.analysis.pipeline as pipeline
import core.analysis.report as report_module
import core.analysis.routh as routh_module

HEAVY_PLANT = "(s+0.6)^30*(s+5)"


def heavy_project(tmp_path, example_path):
    data = json.loads(example_path.read_text(encoding="utf-8"))
    for node in data["nodes"]:
        if node.get("role") == "plant":
            node["denominator"] = HEAVY_PLANT
    path = tmp_path / "heavy.loop.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


@pytest.fixture
def gui_thread_calls(monkeypatch):
    """Names of spied functions called on the main (GUI) thread. The analysis runs on a thread here
    (in a worker process nothing of it can reach the GUI thread; the thread path is the one to check)."""
    import app.controller as controller_module
    monkeypatch.setattr(controller_module, "ANALYSIS_IN_PROCESS", False)
    calls: list[str] = []

    def spy(owner, name):
        real = getattr(owner, name)

        def spied(*args, **kwargs):
            if threading.current_thread() is threading.main_thread():
                calls.append(name)
            return real(*args, **kwargs)
        monkeypatch.setattr(owner, name, spied)

    spy(pipeline, "check_project")
    spy(report_module, "check_project")
    spy(pipeline, "routh_counts")
    spy(routh_module.RouthArray, "rows_text")
    import sympy
    spy(sympy, "factor_list")
    return calls


def test_opening_editing_and_selecting_a_large_loop_leaves_the_engine_off_the_gui_thread(
        window, example_path, analysed, tmp_path, gui_thread_calls):
    path = heavy_project(tmp_path, example_path)
    assert window.files.open(path, ask=False)
    analysed(window, 120_000)
    result = window.controller.result
    assert result.ok and result.report.analysed.degree >= 30, result.message
    plant = next(n for n in window.diagram.nodes.values() if n.role == "plant")
    window.scene.select_node(plant.id)  # the inspector shows the block factored
    name = result.tuning_range.name
    param = window.diagram.parameters[name]
    window.diagram.set_parameter(type(param)(name, param.nominal * 0.9, param.minimum, param.maximum))
    analysed(window, 120_000)
    window.routh_panel.table.viewport().repaint()
    assert window.files.open(path, ask=False)  # replaced by itself: a new controller, a new analysis
    analysed(window, 120_000)
    assert gui_thread_calls == []


def test_following_the_slider_simulates_and_judges_off_the_gui_thread(window, example_path, analysed, qtbot,
                                                                     monkeypatch):
    import app.panels.requirements_panel as requirements_panel
    calls: list[str] = []
    for owner, name in ((pipeline, "step_response"), (requirements_panel, "evaluate")):
        real = getattr(owner, name)

        def spied(*args, _real=real, _name=name, **kwargs):
            if threading.current_thread() is threading.main_thread():
                calls.append(_name)
            return _real(*args, **kwargs)
        monkeypatch.setattr(owner, name, spied)
    assert window.files.open(example_path, ask=False)
    analysed(window)
    window.docks["step"].raise_()
    tuning = window.controller.result.tuning_range
    values = [tuning.nominal * f for f in (0.5, 0.8, 1.2)]
    for value in values:
        window.controller.set_current_value(value)
        qtbot.wait(30)
    step = window.step_panel
    qtbot.waitUntil(lambda: step.step is not None and step.step.value == values[-1], timeout=10_000)
    assert calls == []
