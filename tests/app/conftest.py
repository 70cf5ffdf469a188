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
    from core.project_file import load_project
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
