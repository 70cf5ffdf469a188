"""Child process of row 4's cold start: ``python -m bench.cold_start PROJECT SCRATCH``.

Prints ``painted`` as soon as the first paint pass of the main window has finished (a zero
timer queued from the first paint event runs after that pass), then ``analysed`` once every
panel shows the analysis, then ``maxrss_kb N`` (peak resident memory, getrusage), and exits.
The parent times the markers from the moment it started this process.
"""
from __future__ import annotations

import resource
import sys
from pathlib import Path


def main(argv: list[str]) -> int:
    project, scratch = Path(argv[0]), Path(argv[1])
    from bench.app_session import isolate, open_window
    isolate(scratch)
    from PySide6.QtCore import QEvent, QEventLoop, QObject, QTimer
    from PySide6.QtWidgets import QMainWindow

    from app.headless import make_application, settle

    app = make_application(["loopwright-bench"])

    class FirstPaint(QObject):
        seen = False

        def eventFilter(self, obj, event):
            if not self.seen and event.type() == QEvent.Type.Paint and obj.isWidgetType() \
                    and isinstance(obj.window(), QMainWindow):
                self.seen = True
                QTimer.singleShot(0, lambda: print("painted", flush=True))
            return False

    watcher = FirstPaint()
    app.installEventFilter(watcher)
    window = open_window(project)
    while not watcher.seen:
        app.processEvents(QEventLoop.ProcessEventsFlag.WaitForMoreEvents)
    ok = settle(window, 60_000)
    print("analysed" if ok else "analysis-timeout", flush=True)
    print("maxrss_kb", resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, flush=True)
    window.close()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
