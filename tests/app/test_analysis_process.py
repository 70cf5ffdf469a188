"""Analyses in worker processes: a result crosses the process boundary unchanged, the window's
analyses run there once the fork server is ready, and Stop (or a newer edit) ends a heavy analysis
at once, wherever it is (a thread could not be stopped inside a long python-flint call, nor leave
the GUI thread free while that call holds the interpreter lock).

References: the same project analysed in this process (the thread path) gives the same report
dictionary, key for key; the operating system's view of the worker (``is_alive``) after a cancel.
"""
from __future__ import annotations

import json
import pickle
import time
from pathlib import Path

import pytest
from PySide6.QtWidgets import QApplication
from test_controller import unity_loop

import app.controller as controller_module
from app.bridge import ModelSignals
from app.panels import prepare_for_panels
from core.algebra.pickling import register
from core.analysis.pipeline import analyse_snapshot
from core.io.project_file import project_to_dict
from core.model.diagram import Parameter

EXAMPLES = sorted((Path(__file__).resolve().parents[2] / "resources" / "examples").glob("*.loop.json"))


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_a_result_crosses_processes_unchanged(path):
    register()
    result = analyse_snapshot(json.loads(path.read_text(encoding="utf-8")), 1)
    prepare_for_panels(result)
    copy = pickle.loads(pickle.dumps(result, protocol=pickle.HIGHEST_PROTOCOL))
    assert copy.report.to_dict() == result.report.to_dict()
    assert copy.display.get("headline") == result.display.get("headline")
    assert (copy.paths == result.paths).all() or copy.paths.size == result.paths.size == 0
    nominal = result.tuning_range.nominal
    assert copy.verdict_at(nominal * 1.01) == result.verdict_at(nominal * 1.01)  # memo-free paths work too


def _process_controller(qtbot, diagram):
    """A controller whose every analysis runs in a worker process (none counts as light here)."""
    assert controller_module.wait_for_processes(), "worker processes cannot be made here"
    controller_module.THREAD_BELOW_S = 0.0
    signals = ModelSignals(diagram)
    controller = controller_module.AnalysisController(diagram, signals, prepare=prepare_for_panels)
    assert controller.wait_for_idle(30_000)
    return controller, signals


@pytest.fixture(autouse=True)
def keep_thread_threshold():
    saved = controller_module.THREAD_BELOW_S
    yield
    controller_module.THREAD_BELOW_S = saved


def test_a_quick_light_loop_stays_on_a_thread_and_a_heavy_edit_goes_to_a_process(qtbot):
    diagram = unity_loop(nominal=2.0)
    assert controller_module.wait_for_processes()
    signals = ModelSignals(diagram)
    controller = controller_module.AnalysisController(diagram, signals, prepare=prepare_for_panels)
    assert controller.wait_for_idle(30_000)
    diagram.set_parameter(Parameter("K", 5.0, 0.0, 10.0))
    controller.analyse_now()
    assert isinstance(controller._job, controller_module._Job)  # the last analysis was quick
    assert controller.wait_for_idle(30_000)
    diagram.update_node("G", den="(s+1)^30*(s+2)")  # order 31: this one may be long
    controller.analyse_now()
    assert isinstance(controller._job, controller_module._ProcessJob)
    assert controller.wait_for_idle(60_000) and controller.result.ok
    controller.dispose()
    signals.detach()


def test_the_window_analyses_in_a_worker_process(qtbot):
    diagram = unity_loop(nominal=2.0)
    controller, signals = _process_controller(qtbot, diagram)
    diagram.set_parameter(Parameter("K", 5.0, 0.0, 10.0))
    controller.analyse_now()
    job = controller._job
    assert isinstance(job, controller_module._ProcessJob)
    assert controller.wait_for_idle(30_000)
    reference = analyse_snapshot(project_to_dict(diagram), 0)
    assert controller.result.report.to_dict() == reference.report.to_dict()
    assert controller.result.display["headline"].startswith("STABLE at K = 5")
    controller.dispose()
    signals.detach()


def test_stop_ends_a_heavy_analysis_at_once(qtbot):
    diagram = unity_loop(num="K", den="(s+1)^120*(s+3)", nominal=1.0)  # seconds of exact work
    controller, signals = _process_controller(qtbot, diagram)
    diagram.set_parameter(Parameter("K", 2.0, 0.0, 10.0))
    controller.analyse_now()
    job = controller._job
    assert isinstance(job, controller_module._ProcessJob)
    time.sleep(0.3)
    assert job._process.is_alive()  # still working
    controller.cancel()
    deadline = time.monotonic() + 2.0
    while job._process.is_alive() and time.monotonic() < deadline:
        QApplication.processEvents()
        time.sleep(0.01)
    assert not job._process.is_alive() and not controller.busy and controller.stale
    controller.dispose()
    signals.detach()
