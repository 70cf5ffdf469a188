"""Off-screen rendering: the window built, loaded and analysed without a user, for
``--screenshot``, ``--report``, the tests and the bench (no import from the entry module).

``analysed_window`` returns the window once every panel shows the finished analysis, or an exit
status after one line on stderr; ``settle`` waits for the analysis of any window.
"""
from __future__ import annotations

import os
import sys
from collections.abc import Sequence
from pathlib import Path

SCREENSHOT_SIZE = (1600, 1000)
ANALYSIS_TIMEOUT_MS = 120_000


def make_application(argv: Sequence[str]):
    """The QApplication with the program's name, organisation and icon."""
    from PySide6.QtWidgets import QApplication

    from app.about import app_icon
    app = QApplication.instance() or QApplication(list(argv))
    app.setApplicationName("Loopwright")
    app.setOrganizationName("Loopwright")
    app.setApplicationDisplayName("Loopwright")
    app.setWindowIcon(app_icon())
    return app


def settle(window, timeout_ms: int = ANALYSIS_TIMEOUT_MS) -> bool:
    """Process events until the analysis is idle, a result is shown and layouts are done."""
    from PySide6.QtCore import QCoreApplication, QElapsedTimer, QEventLoop
    clock = QElapsedTimer()
    clock.start()
    app = QCoreApplication.instance()
    for _ in range(10):
        app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
    while clock.elapsed() < timeout_ms:
        if not window.controller.wait_for_idle(max(1, timeout_ms - clock.elapsed())):
            return False
        for _ in range(10):
            app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
        if not window.controller.busy and window.controller.result is not None:
            return True
    return False


def show_a_block(window) -> None:
    """Select the plant (else any block) so the inspector in the picture shows what it does."""
    blocks = [n for n in window.diagram.nodes.values() if n.kind == "block"]
    plants = [n for n in blocks if n.role == "plant"]
    if blocks:
        window.scene.select_node((plants or blocks)[0].id)


def analysed_window(project: Path, copy: bool, show: bool = True):
    """A rendering window with ``project`` open and analysed, or an exit status (1 or 2) after
    one line on stderr. Shared by ``--screenshot`` and ``--report``."""
    from core.errors import LoopwrightError
    from core.io.project_file import load_project
    try:
        load_project(project)
    except LoopwrightError as err:
        print(f"loopwright: {err}", file=sys.stderr)
        return 2
    make_application(sys.argv[:1])
    from app.window import MainWindow
    window = MainWindow(rendering=True)
    window.resize(*SCREENSHOT_SIZE)
    opened = window.files.open_copy(project) if copy else window.files.open(project, ask=False)
    if not opened:
        print(f"loopwright: cannot open {project}", file=sys.stderr)
        return 2
    if show:
        window.show()
    if not settle(window):
        print("loopwright: the analysis did not finish in time", file=sys.stderr)
        return 1
    return window


def screenshot(out: str, project: Path, copy: bool) -> int:
    """Render the window on ``project`` to ``out``; exit status."""
    window = analysed_window(project, copy)
    if isinstance(window, int):
        return window
    show_a_block(window)
    window.view.fit_all()
    settle(window, 5000)
    image = window.grab()
    if not image.save(out):
        print(f"loopwright: cannot write the picture to {out}", file=sys.stderr)
        return 2
    window.close()
    return 0


def report_command(out: str, project: Path, copy: bool = False) -> int:
    """``python -m app --report OUT.pdf|OUT.html [PROJECT]``: exit 0, 1 (analysis too slow) or 2 (bad input)."""
    from app.pictures import ExportError
    from app.report_export import REPORT_SUFFIXES, export_report
    if Path(out).suffix.lower() not in REPORT_SUFFIXES:
        print(f"loopwright: {out}: the report must end in .html or .pdf", file=sys.stderr)
        return 2
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    window = analysed_window(project, copy, show=False)
    if isinstance(window, int):
        return window
    try:
        export_report(window, out)
    except ExportError as err:
        print(f"loopwright: {err}", file=sys.stderr)
        return 2
    window.undo_stack.setClean()
    window.close()
    return 0
