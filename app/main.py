"""Start the program: ``python -m app [PROJECT]`` (installed as ``loopwright``).

Without a project the shipped example opens (as an unsaved copy). ``--screenshot OUT.png``
builds the window at a fixed size, loads the project, waits until the analysis is finished and
every panel is filled, saves the window as a PNG and exits 0; it works on the offscreen platform.
``--report OUT.pdf|OUT.html`` writes the stability report the same way File > Export does
(:mod:`app.report_export`), offscreen.
A project that cannot be read: one line on stderr and exit status 2 (with ``--screenshot``), or an
error dialog and an empty project (interactive).
"""
from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

DEFAULT_EXAMPLE = Path(__file__).resolve().parents[1] / "resources" / "examples" / "conveyor_speed.loop.json"
SCREENSHOT_SIZE = (1600, 1000)
ANALYSIS_TIMEOUT_MS = 120_000


def build_parser() -> argparse.ArgumentParser:
    """Command-line options of the desktop program."""
    parser = argparse.ArgumentParser(prog="python -m app", description="Loopwright: draw a feedback loop, "
                                     "read its exact stable range.")
    parser.add_argument("project", nargs="?", help="a project file (.loop.json); default: the shipped example")
    parser.add_argument("--screenshot", metavar="OUT.png",
                        help="render the window with everything analysed to a PNG and exit")
    parser.add_argument("--report", metavar="OUT.pdf|OUT.html",
                        help="write the project's stability report (PDF or HTML) without a window and exit")
    return parser


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


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of ``python -m app`` and the ``loopwright`` program."""
    args = build_parser().parse_args(list(sys.argv[1:] if argv is None else argv))
    project = Path(args.project) if args.project else DEFAULT_EXAMPLE
    if args.screenshot:
        return screenshot(args.screenshot, project, copy=not args.project)
    if args.report:
        from app.report_export import report_command
        return report_command(args.report, project, copy=not args.project)
    app = make_application(sys.argv[:1])
    from PySide6.QtCore import QSettings, QTimer

    from app.about import show_first_start_caution
    from app.window import MainWindow
    window = MainWindow()
    if args.project:
        window.files.open(project, ask=False)
    elif project.is_file():
        window.files.open_copy(project)
    window.show()

    def greet() -> None:
        show_first_start_caution(window, QSettings())
        window.files.offer_recoveries()

    QTimer.singleShot(0, greet)
    return app.exec()

