"""Shared fixtures for the app tests: offscreen Qt, the shipped example, isolated state and settings.

Nothing here touches the user's real settings or state folder: QSettings go to an INI file under
the test's tmp dir and ``LOOPWRIGHT_STATE_DIR`` points at a tmp folder.
"""
from __future__ import annotations

import os
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest
from PySide6.QtCore import QCoreApplication, QSettings

REPO = Path(__file__).resolve().parents[2]
EXAMPLES = REPO / "resources" / "examples"


@pytest.fixture
def example_path() -> Path:
    """The shipped example project the app opens when started without a file."""
    return EXAMPLES / "conveyor_speed.loop.json"


@pytest.fixture
def diagram(example_path):
    """The shipped example loaded as a Diagram."""
    from core.io.project_file import load_project
    return load_project(example_path)


@pytest.fixture
def state_dir(tmp_path, monkeypatch) -> Path:
    """A fresh per-test state folder (recovery files live under it)."""
    folder = tmp_path / "state"
    folder.mkdir()
    monkeypatch.setenv("LOOPWRIGHT_STATE_DIR", str(folder))
    return folder


@pytest.fixture(autouse=True)
def settings(tmp_path, monkeypatch, qapp) -> QSettings:
    """QSettings redirected to an INI file in tmp; the first-start caution marked as already seen."""
    folder = tmp_path / "settings"
    folder.mkdir()
    QCoreApplication.setOrganizationName("Loopwright")
    QCoreApplication.setApplicationName("Loopwright")
    QSettings.setDefaultFormat(QSettings.Format.IniFormat)
    for scope in (QSettings.Scope.UserScope, QSettings.Scope.SystemScope):
        QSettings.setPath(QSettings.Format.IniFormat, scope, str(folder))
    monkeypatch.setenv("LOOPWRIGHT_STATE_DIR", str(tmp_path / "state"))
    store = QSettings()
    store.clear()
    store.setValue("caution/seen", True)
    store.sync()
    return store


def unity_feedback_loop(name: str = "unity feedback test loop"):
    """r -> sum(+,-) -> C = K -> P = 1/(s(s+1)(s+2)) -> branch -> y, the branch fed back to the sum.

    Closed loop: s^3 + 3s^2 + 2s + K (from memory: the classic unity-feedback Routh example).
    """
    from core.model.diagram import Diagram, Node, Parameter
    d = Diagram(name)
    for node in (Node("r", "input", x=0, y=0), Node("e", "sum", signs="+-", x=120, y=0),
                 Node("C", "block", role="controller", num="K", den="1", x=260, y=0),
                 Node("P", "block", role="plant", num="1", den="s*(s+1)*(s+2)", x=440, y=0),
                 Node("b", "branch", x=600, y=0), Node("y", "output", x=700, y=0)):
        d.add_node(node)
    for source, target, port in (("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0),
                                 ("b", "e", 1)):
        d.connect(source, target, port)
    d.set_parameter(Parameter("K", 2.0, 0.0, 10.0))
    d.set_tuning_parameter("K")
    d.set_analysis(input="r", output="y")
    return d


def sensor_feedback_loop(name: str, controller: tuple[str, str], sensor_den: str, parameters=()):
    """Invented loop: r -> sum(+,-) -> controller -> plant 1/(s^2+3s+2) -> branch -> y, with a
    sensor 1/sensor_den on a flipped feedback path into the sum's second input."""
    from core.model.diagram import Diagram, Node
    d = Diagram(name)
    for p in parameters:
        d.set_parameter(p)
    for n in [Node("r", "input", 0, 0), Node("e", "sum", 80, 0, signs="+-"),
              Node("C", "block", 200, 0, role="controller", num=controller[0], den=controller[1]),
              Node("P", "block", 360, 0, role="plant", num="1", den="s^2 + 3s + 2"),
              Node("b", "branch", 460, 0), Node("y", "output", 540, 0),
              Node("H", "block", 280, 120, role="sensor", num="1", den=sensor_den, flipped=True)]:
        d.add_node(n)
    for s, t, p in [("r", "e", 0), ("e", "C", 0), ("C", "P", 0), ("P", "b", 0), ("b", "y", 0),
                    ("b", "H", 0), ("H", "e", 1)]:
        d.connect(s, t, p)
    d.set_analysis(input="r", output="y")
    return d


class ScriptedDialogs:
    """Stands in for app.files.Dialogs: answers from ``answers`` (name -> value or list of values)
    and records every question in ``asked`` as (name, args)."""

    def __init__(self, **answers):
        self.answers = answers
        self.asked: list[tuple[str, tuple]] = []

    def _answer(self, name, *args):
        self.asked.append((name, args))
        value = self.answers.get(name)
        if isinstance(value, list):
            return value.pop(0)
        return value

    def names(self) -> list[str]:
        return [name for name, _ in self.asked]

    def error(self, parent, title, err):
        self._answer("error", title, err)

    def unsaved(self, parent, name):
        return self._answer("unsaved", name) or "cancel"

    def changed_on_disk(self, parent, path):
        return self._answer("changed_on_disk", path) or "cancel"

    def save_failed(self, parent, err):
        return self._answer("save_failed", err) or "cancel"

    def open_path(self, parent, folder):
        return self._answer("open_path", folder)

    def save_path(self, parent, suggestion):
        return self._answer("save_path", suggestion)

    def recover(self, parent, recovery):
        return self._answer("recover", recovery) or "later"


@pytest.fixture
def dialogs() -> ScriptedDialogs:
    """Scripted answers for the window's file questions (set ``dialogs.answers[...]`` in a test)."""
    return ScriptedDialogs()


@pytest.fixture
def window(qtbot, dialogs, state_dir):
    """A MainWindow with scripted dialogs, shown offscreen; closed (unsaved work discarded) at the end."""
    from app.window import MainWindow
    win = MainWindow(dialogs=dialogs)
    qtbot.addWidget(win)
    win.resize(1400, 900)
    win.show()
    yield win
    dialogs.answers["unsaved"] = "discard"
    win.close()


def wait_analysed(window, timeout_ms: int = 60_000) -> None:
    """Wait until the window's analysis controller is idle and has delivered a result."""
    from app.main import settle
    assert settle(window, timeout_ms), "the analysis did not finish"


@pytest.fixture
def make_loop():
    """The factory :func:`unity_feedback_loop`."""
    return unity_feedback_loop


@pytest.fixture
def analysed():
    """The helper :func:`wait_analysed`."""
    return wait_analysed
