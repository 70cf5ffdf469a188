"""A Qt session for the app rows that never touches the user's own settings or state folder.

QSettings go to an INI file and ``LOOPWRIGHT_STATE_DIR`` to a folder, both under ``scratch``;
the 30-node project is the shipped example when there is one, else a generated one saved there.
"""
from __future__ import annotations

import os
from pathlib import Path

EXAMPLE = Path(__file__).resolve().parents[1] / "resources" / "examples" / "line_tension_30.loop.json"
WINDOW_SIZE = (1600, 1000)


def isolate(scratch: Path) -> None:
    """Point settings and recovery files into ``scratch`` (before any window exists)."""
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    os.environ["LOOPWRIGHT_STATE_DIR"] = str(scratch / "state")
    from PySide6.QtCore import QCoreApplication, QSettings
    QCoreApplication.setOrganizationName("Loopwright")
    QCoreApplication.setApplicationName("Loopwright")
    QSettings.setDefaultFormat(QSettings.Format.IniFormat)
    for scope in (QSettings.Scope.UserScope, QSettings.Scope.SystemScope):
        QSettings.setPath(QSettings.Format.IniFormat, scope, str(scratch / "settings"))


def project_path(scratch: Path, nodes: int = 30) -> tuple[Path, str]:
    """(the project to open, where it came from)."""
    if EXAMPLE.is_file():
        return EXAMPLE, f"shipped example {EXAMPLE.name}"
    from bench.generators import nested_loops_diagram
    from core.io.project_file import save_project
    path = scratch / f"nested_loops_{nodes}.loop.json"
    save_project(nested_loops_diagram(nodes), path)
    return path, f"generated {nodes}-node nested-loop diagram"


def open_window(path: Path):
    """A shown MainWindow (offscreen-safe, no saved layout) on the project at ``path``."""
    from app.headless import make_application
    from app.window import MainWindow
    make_application(["loopwright-bench"])
    window = MainWindow(rendering=True)
    window.resize(*WINDOW_SIZE)
    if not window.files.open(path, ask=False):
        raise RuntimeError(f"cannot open {path}")
    window.show()
    return window
