"""Row 4: how the desktop program feels on a 30-node loop (offscreen Qt, CPU raster painting).

* edit -> panels: push an EditNodeCommand on the window's undo stack (a new numerator text each
  time, so no parse cache helps) and run the event loop until the controller's ``resultReady``
  has reached every analysis panel (our slot is connected after theirs, so it runs after their
  ``show_result``); "painted" additionally repaints the analysis panels synchronously. Nothing is
  subtracted: the controller's debounce interval is inside the figure and reported beside it.
* slider frame: the slider held down and moved as a drag does (``QSlider.setValue``, which runs
  the pole map's slider path, the controller's current value and every panel's
  ``set_current_value``), the events that queued processed, then the analysis panels repainted
  synchronously.
* GUI-thread gap: a 10 ms timer ticks on the GUI thread while heavy projects (a degree-150 block,
  a dense degree-40 loop) are opened and analysed; the longest time between two ticks.
* cold start: a child process (:mod:`bench.cold_start`) from its start to the end of the first
  paint pass of the main window, and to every panel filled; its peak memory from getrusage.
"""
from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from itertools import pairwise
from pathlib import Path

from bench.app_session import isolate, open_window, project_path
from bench.table import Row, ms
from bench.timing import median, percentile

TARGET_EDIT_S = 0.150
TARGET_FRAME_S = 0.016
TARGET_COLD_S = 2.0
TARGET_GAP_S = 0.100
HEAVY_BLOCKS = (("degree-150 block", "K", "(s+1)^150"),
                ("dense degree-40 loop", "K*(s+3)", "(s^2 + 0.7*s + 2)^12*(s+2)^16"))
REPO = Path(__file__).resolve().parents[1]


def _panels(window):
    return list(window.analysis_panels)


def _edited_block(window) -> str:
    """A block with s in its denominator (the first one in node order)."""
    return next(n.id for n in window.diagram.nodes.values() if n.kind == "block" and "s" in n.den)


def edit_latencies(window, count: int) -> tuple[list[float], list[float], list[float]]:
    """(to panels updated, to panels painted, worker analysis time) in seconds per edit."""
    from PySide6.QtCore import QEventLoop, QTimer

    from app.document.commands import EditNodeCommand
    controller = window.controller
    node_id = _edited_block(window)
    original = window.diagram.nodes[node_id].num
    received, painted, worker = [], [], []
    loop = QEventLoop()
    arrival: dict[str, float] = {}

    def on_result(result) -> None:
        if result.generation == controller.generation and "t" not in arrival:
            arrival["t"] = time.perf_counter()
            arrival["worker"] = result.elapsed_ms / 1000.0
            for panel in _panels(window):
                panel.repaint()
            arrival["painted"] = time.perf_counter()
            loop.quit()

    controller.resultReady.connect(on_result)
    guard = QTimer()
    guard.setSingleShot(True)
    guard.timeout.connect(loop.quit)
    try:
        for i in range(count):
            arrival.clear()
            text = f"{1 + (i + 1) / 1000:.3f}*({original})"
            start = time.perf_counter()
            window.undo_stack.push(EditNodeCommand(window.diagram, node_id, num=text))
            guard.start(30_000)
            loop.exec()
            guard.stop()
            if "t" not in arrival:
                raise RuntimeError("no analysis result within 30 s of an edit")
            received.append(arrival["t"] - start)
            painted.append(arrival["painted"] - start)
            worker.append(arrival["worker"])
    finally:
        controller.resultReady.disconnect(on_result)
    return received, painted, worker


def slider_frames(window, count: int) -> list[float]:
    """Seconds per slider step: setValue, the events it queued, and the analysis panels repainted."""
    from PySide6.QtWidgets import QApplication
    slider = window.pole_map.slider
    lo, hi = slider.minimum(), slider.maximum()
    positions = [lo + (hi - lo) * ((7 * i) % count) // max(count - 1, 1) for i in range(count)]
    slider.setSliderDown(True)
    frames = []
    try:
        for pos in positions:
            start = time.perf_counter()
            slider.setValue(pos)
            QApplication.processEvents()  # work the panels queued for this value belongs to the frame
            for panel in _panels(window):
                panel.repaint()
            frames.append(time.perf_counter() - start)
    finally:
        slider.blockSignals(True)  # releasing would commit a new nominal value: not part of the drag
        slider.setSliderDown(False)
        slider.blockSignals(False)
    return frames


def cold_starts(project: Path, scratch: Path, count: int) -> list[dict]:
    """Per run: seconds to 'painted' and to 'analysed' from the child's start, and its peak KiB."""
    runs = []
    for _ in range(count):
        start = time.perf_counter()
        child = subprocess.Popen([sys.executable, "-m", "bench.cold_start", str(project), str(scratch)],
                                 cwd=REPO, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
        run: dict = {}
        for line in child.stdout:
            word, *rest = line.split()
            if word in ("painted", "analysed"):
                run[word] = time.perf_counter() - start
            elif word == "maxrss_kb":
                run["maxrss_kb"] = int(rest[0])
        child.wait(120)
        if "painted" not in run:
            raise RuntimeError("the cold-start child printed no 'painted' marker")
        runs.append(run)
    return runs


def gui_gap(window, den: str, num: str, timeout_s: float = 120.0) -> tuple[float, float]:
    """(the longest gap between 10 ms GUI-thread ticks, the analysis' wall time) while the window's
    block G becomes ``num / den`` and is analysed."""
    from PySide6.QtCore import QElapsedTimer, QTimer
    from PySide6.QtWidgets import QApplication

    from app.document.commands import EditNodeCommand, push
    clock, ticks = QElapsedTimer(), []
    timer = QTimer()
    timer.setInterval(10)
    timer.timeout.connect(lambda: ticks.append(clock.elapsed() / 1000.0))
    node = _edited_block(window)
    clock.start()
    timer.start()
    start = time.perf_counter()
    push(window.undo_stack, EditNodeCommand(window.diagram, node, num=num, den=den))
    while (window.controller.stale or window.controller.busy) and time.perf_counter() - start < timeout_s:
        QApplication.processEvents()
        time.sleep(0.001)
    wall = time.perf_counter() - start
    timer.stop()
    gaps = [b - a for a, b in pairwise(ticks)]
    return max(gaps, default=wall), wall


def run(quick: bool) -> list[Row]:
    from app.controller import DEBOUNCE_MS, wait_for_processes
    from app.headless import settle
    with tempfile.TemporaryDirectory(prefix="loopwright-bench-") as tmp:
        scratch = Path(tmp)
        isolate(scratch)
        project, origin = project_path(scratch)
        window = open_window(project)
        if not settle(window, 60_000):
            raise RuntimeError("the first analysis did not finish")
        wait_for_processes()  # from here on every analysis runs in a worker process, as in use
        nodes = len(window.diagram.nodes)
        received, painted, worker = edit_latencies(window, 8 if quick else 25)
        frames = slider_frames(window, 30 if quick else 120)
        heavy = [(label, *gui_gap(window, den, num)) for label, num, den in HEAVY_BLOCKS]
        window.undo_stack.setClean()  # else closing asks whether to save the benchmark's edits
        window.close()
        starts = cold_starts(project, scratch, 2 if quick else 5)
    rows = []
    med, p95 = median(received), percentile(received, 95)
    rows.append(Row("4", f"edit a block -> every panel updated, {nodes} nodes ({origin}), {len(received)} edits",
                    f"median {ms(med)}, p95 {ms(p95)} (debounce {DEBOUNCE_MS} ms included; analysis in "
                    f"the worker {ms(median(worker))}; panels painted {ms(median(painted))})",
                    f"<= {ms(TARGET_EDIT_S)} median", med <= TARGET_EDIT_S,
                    {"median_s": med, "p95_s": p95, "debounce_ms": DEBOUNCE_MS, "worker_median_s": median(worker),
                     "painted_median_s": median(painted), "times_s": received, "project": str(project.name)}))
    fmed, f95 = median(frames), percentile(frames, 95)
    rows.append(Row("4", f"slider drag frame (set value -> panels repainted), {len(frames)} frames",
                    f"median {ms(fmed)}, p95 {ms(f95)}", f"<= {ms(TARGET_FRAME_S)}", fmed <= TARGET_FRAME_S,
                    {"median_s": fmed, "p95_s": f95, "times_s": frames}))
    for label, gap, wall in heavy:
        rows.append(Row("4", f"GUI-thread worst gap while a {label} is analysed (10 ms ticks)",
                        f"{ms(gap)} (analysis {ms(wall)})", f"<= {ms(TARGET_GAP_S)}", gap <= TARGET_GAP_S,
                        {"gap_s": gap, "analysis_s": wall, "project": label}))
    cold = median([r["painted"] for r in starts])
    analysed = median([r["analysed"] for r in starts if "analysed" in r] or [float("nan")])
    peak = max(r.get("maxrss_kb", 0) for r in starts)
    rows.append(Row("4", f"cold start -> first painted window (child process), median of {len(starts)}",
                    f"{ms(cold)} (every panel filled {ms(analysed)}; peak memory {peak / 1024:.0f} MiB)",
                    f"<= {TARGET_COLD_S:g} s", cold <= TARGET_COLD_S,
                    {"median_s": cold, "analysed_median_s": analysed, "peak_rss_kib": peak, "runs": starts}))
    return rows
