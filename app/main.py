"""Start the program: ``python -m app [PROJECT]`` (installed as ``loopwright``).

Without a project the shipped example opens (as an unsaved copy). ``--screenshot OUT.png``
builds the window at a fixed size, loads the project, waits until the analysis is finished and
every panel is filled, saves the window as a PNG and exits 0; it works on the offscreen platform.
``--report OUT.pdf|OUT.html`` writes the stability report the same way File > Export does
(:mod:`app.report_export`), offscreen; both through :mod:`app.headless`.
A project that cannot be read: one line on stderr and exit status 2 (with ``--screenshot``), or an
error dialog and an empty project (interactive).
"""
from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

DEFAULT_EXAMPLE = Path(__file__).resolve().parents[1] / "resources" / "examples" / "conveyor_speed.loop.json"


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


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of ``python -m app`` and the ``loopwright`` program."""
    args = build_parser().parse_args(list(sys.argv[1:] if argv is None else argv))
    project = Path(args.project) if args.project else DEFAULT_EXAMPLE
    if args.screenshot:
        from app.headless import screenshot
        return screenshot(args.screenshot, project, copy=not args.project)
    if args.report:
        from app.headless import report_command
        return report_command(args.report, project, copy=not args.project)
    from app.headless import make_application
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

