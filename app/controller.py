"""The one analysis controller: debounced, off the GUI thread, newest result wins.

Every model change restarts a short single-shot timer and marks the shown result out of date at
once (``staleChanged``); when the timer fires, the diagram is copied (as its project dictionary, on
the GUI thread) and analysed with :func:`core.analysis.pipeline.analyse_snapshot` in a worker process
forked from a warmed-up fork server (:class:`_ProcessJob`; on a worker thread, :class:`_Job`,
until that server is ready or where processes cannot be made).
Each request carries a generation number; an analysis of an older generation still running is
cancelled, and a result whose generation is no longer the newest is dropped. :meth:`cancel` stops
the running analysis at the user's request. Errors never escape: a
:class:`~core.errors.LoopwrightError` arrives as ``AnalysisResult.error``, anything else as
``AnalysisResult.internal_error``.

The *current value* of the tuning parameter is what the pole-map slider shows. Dragging calls
:meth:`AnalysisController.set_current_value` (cheap: panels evaluate the last result at it);
releasing calls :meth:`AnalysisController.commit_current_value`, which emits ``nominalCommitted``
(name, value): the document layer (:mod:`app.document.editing`) makes it the parameter's nominal
through one undoable command. The controller itself never edits the model.
"""
from __future__ import annotations

import ctypes
import functools
import itertools
import math
import multiprocessing
import pickle
import threading
import time
import traceback
import weakref
from collections.abc import Callable

import shiboken6
from PySide6.QtCore import QCoreApplication, QElapsedTimer, QEventLoop, QObject, QTimer, Signal

from core.algebra.expression import s_degree_bound
from core.algebra.pickling import register as register_pickling
from core.analysis.pipeline import AnalysisResult, analyse_snapshot
from core.io.project_file import project_to_dict
from core.model.diagram import Diagram

DEBOUNCE_MS = 35  # edits arrive on Enter or commit, not per keystroke: a short wait still merges bursts


class AnalysisCancelled(BaseException):
    """Raised inside a worker whose analysis is no longer wanted. A BaseException, so the
    engine's ``except Exception`` guards let it through."""


class _Job:
    """One analysis on its worker thread. :meth:`cancel` raises :class:`AnalysisCancelled` in the
    thread at its next Python instruction (a long call inside a compiled library finishes first);
    after the analysis returned, a cancel does nothing."""

    def __init__(self, token: int, project: dict, generation: int, prepare: Callable[[AnalysisResult], None] | None):
        self.token, self.project, self.generation, self.prepare = token, project, generation, prepare
        self._lock = threading.Lock()
        self._running = True
        self.thread = threading.Thread(target=self._work, name="loopwright-analysis", daemon=True)

    def start(self) -> None:
        self.thread.start()

    def cancel(self) -> None:
        with self._lock:
            if self._running and self.thread.ident is not None:
                self._running = False
                ctypes.pythonapi.PyThreadState_SetAsyncExc(ctypes.c_ulong(self.thread.ident),
                                                           ctypes.py_object(AnalysisCancelled))

    def alive(self) -> bool:
        return self.thread.is_alive()

    def _work(self) -> None:
        try:
            result = analyse_snapshot(self.project, self.generation)
            if self.prepare is not None:
                try:
                    self.prepare(result)
                except Exception:  # only the ready-made texts are lost: the panels make them
                    traceback.print_exc()
            with self._lock:
                if not self._running:
                    return  # cancelled just as it finished
                self._running = False
            _relay().finished.emit(self.token, result)
        except AnalysisCancelled:
            pass


ANALYSIS_IN_PROCESS = True  # analyses run in a worker process once one is ready (see _ProcessJob)
THREAD_BELOW_S = 0.15  # after an analysis this quick, the next runs on a thread (a process adds ~70 ms)...
HEAVY_ORDER = 24  # ...unless the blocks' orders add up to this many: then always in a process


def loop_order_bound(diagram: Diagram) -> int:
    """The blocks' orders in s added up, read from their texts without expanding them (a bound on
    the loop's order: what decides whether an analysis can be long).

    >>> from core.model.diagram import Node
    >>> d = Diagram(); _ = d.add_node(Node("G", "block", num="K", den="(s+1)^30*(s+2)"))
    >>> loop_order_bound(d)
    31
    """
    return sum(max(_text_order(n.num), _text_order(n.den)) for n in diagram.nodes.values() if n.kind == "block")


@functools.lru_cache(maxsize=4096)
def _text_order(text: str) -> int:
    return s_degree_bound(text)
PRELOAD = ["core.algebra.pickling", "core.analysis.pipeline", "core.analysis.robust", "core.analysis.plane",
           "core.graph.reduction", "core.io.project_file", "scipy.linalg", "app.panels", "app.controller",
           "app.process_warmup"]


def _analyse_in_child(conn, project: dict, generation: int, prepare) -> None:
    """The worker process' whole life: analyse one project, send the pickled result, end."""
    register_pickling()
    try:
        result = analyse_snapshot(project, generation)
        if prepare is not None:
            try:
                prepare(result)
            except Exception:  # only the ready-made texts are lost: the panels make them
                traceback.print_exc()
        data = pickle.dumps(result, protocol=pickle.HIGHEST_PROTOCOL)
    except Exception as exc:
        data = pickle.dumps(AnalysisResult(generation, internal_error=f"{type(exc).__name__}: {exc}"))
    conn.send_bytes(data)
    conn.close()


class _Processes:
    """The process factory: a fork server that has imported the engine once, so each analysis
    starts in a few milliseconds. Made ready by a background thread at the first controller (the
    first analyses run on a thread meanwhile); ``ready`` stays False where processes cannot be made."""

    def __init__(self) -> None:
        self.ready = False
        self.context = None
        threading.Thread(target=self._warm_up, name="loopwright-process-warm-up", daemon=True).start()

    def _warm_up(self) -> None:
        try:
            context = multiprocessing.get_context("forkserver")
            context.set_forkserver_preload(PRELOAD)
            probe = context.Process(target=_noop, daemon=True)
            probe.start()
            probe.join(60)
            if probe.exitcode == 0:
                self.context, self.ready = context, True
        except Exception:  # no process support here: analyses stay on threads
            traceback.print_exc()


def _noop() -> None:
    """A process that only proves processes can be started."""


_PROCESSES: _Processes | None = None


def _processes() -> _Processes:
    global _PROCESSES
    if _PROCESSES is None:
        _PROCESSES = _Processes()
    return _PROCESSES


def wait_for_processes(timeout_s: float = 60.0) -> bool:
    """Wait until analyses can run in worker processes (benchmarks and tests); False on timeout
    or where processes cannot be made."""
    processes, deadline = _processes(), time.monotonic() + timeout_s
    while not processes.ready and time.monotonic() < deadline:
        time.sleep(0.02)
    return processes.ready


class _ProcessJob:
    """One analysis in its own worker process (the interface of :class:`_Job`). A thread waits for
    the pickled result and delivers it through the relay; :meth:`cancel` kills the process at once,
    whatever it is computing (python-flint holds the interpreter lock in long calls, so a thread
    could neither be stopped there nor leave the window responsive)."""

    def __init__(self, token: int, project: dict, generation: int, prepare, context):
        self.token, self.project, self.generation, self.prepare = token, project, generation, prepare
        self._context = context
        self._lock = threading.Lock()
        self._running = True
        self._process = None
        self._receive = None
        self.thread = threading.Thread(target=self._wait, name="loopwright-analysis-result", daemon=True)

    def start(self) -> None:
        receive, send = self._context.Pipe(duplex=False)
        self._process = self._context.Process(target=_analyse_in_child, daemon=True,
                                              args=(send, self.project, self.generation, self.prepare))
        self._process.start()
        send.close()
        self._receive = receive
        self.thread.start()

    def cancel(self) -> None:
        with self._lock:
            if self._running:
                self._running = False
                if self._process is not None and self._process.is_alive():
                    self._process.kill()

    def alive(self) -> bool:
        return self.thread.is_alive()

    def _wait(self) -> None:
        assert self._receive is not None and self._process is not None
        try:
            data = self._receive.recv_bytes()
        except (EOFError, OSError):
            data = None  # killed (cancelled), or the process died
        finally:
            self._receive.close()
        self._process.join()
        with self._lock:
            if not self._running:
                return
            self._running = False
        if data is None:
            result = AnalysisResult(self.generation, internal_error="the analysis process ended without a result "
                                                                     f"(exit status {self._process.exitcode})")
        else:
            result = pickle.loads(data)
        _relay().finished.emit(self.token, result)


class _Relay(QObject):
    """One per process, never deleted, living on the GUI thread. Workers emit through it (queued to
    the GUI thread) and it hands the result to the controller that asked, if that one still exists.
    A controller (and anything it owns) may be deleted while its worker runs; the worker never
    touches it, so no emit can reach a deleted object."""

    finished = Signal(int, object)

    def __init__(self) -> None:
        super().__init__()
        self.controllers: weakref.WeakValueDictionary[int, AnalysisController] = weakref.WeakValueDictionary()
        self.finished.connect(self._deliver)

    def _deliver(self, token: int, result: AnalysisResult) -> None:
        controller = self.controllers.get(token)
        if controller is not None and shiboken6.isValid(controller):
            controller._on_finished(result)


_RELAY: _Relay | None = None
_TOKENS = itertools.count(1)


def _relay() -> _Relay:
    """The process-wide relay; first made by a controller's constructor, so on the GUI thread."""
    global _RELAY
    if _RELAY is None:
        _RELAY = _Relay()
    return _RELAY


class AnalysisController(QObject):
    """Runs the analysis of one diagram whenever it changes; see the module docstring.

    ``signals`` is the diagram's ModelSignals (anything with a ``changed`` signal). ``prepare``
    runs on the worker thread with each result before it is delivered (the panels' slow text work).
    """

    resultReady = Signal(object)
    busyChanged = Signal(bool)
    staleChanged = Signal(bool)
    currentValueChanged = Signal(float)
    nominalCommitted = Signal(str, float)

    def __init__(self, diagram: Diagram, signals, parent: QObject | None = None,
                 debounce_ms: int = DEBOUNCE_MS, prepare: Callable[[AnalysisResult], None] | None = None):
        super().__init__(parent)
        self._prepare = prepare
        self._diagram = diagram
        self._generation = 0
        self._job: _Job | _ProcessJob | None = None
        self._started = time.perf_counter()
        self._last_seconds: float | None = None  # how long the last delivered analysis took
        self._panels: list[weakref.WeakMethod] = []
        self._unshown: list[weakref.WeakMethod] = []
        self._shown_generation = 0
        self._busy = False
        self._result: AnalysisResult | None = None
        self._current: float | None = None
        self._dragging = False
        self._disposed = False
        self._held = False
        self._token = next(_TOKENS)
        _relay().controllers[self._token] = self
        self._timer = QTimer(self)
        self._timer.setSingleShot(True)
        self._timer.setInterval(debounce_ms)
        self._timer.timeout.connect(self._start)
        self._signals = signals
        signals.changed.connect(self.schedule)
        self.schedule()

    # -- state ----------------------------------------------------------------------------------
    @property
    def result(self) -> AnalysisResult | None:
        """The newest delivered result."""
        return self._result

    @property
    def generation(self) -> int:
        """The generation of the newest request (bumped on every change)."""
        return self._generation

    @property
    def busy(self) -> bool:
        """Whether an analysis is waiting on the timer or running."""
        return self._busy

    @property
    def stale(self) -> bool:
        """Whether the model changed since the shown result was computed (True before the first)."""
        return self._shown_generation != self._generation

    @property
    def current_value(self) -> float | None:
        """The tuning parameter's current (slider) value; None without a tuning parameter."""
        return self._current

    # -- requests -------------------------------------------------------------------------------
    def schedule(self) -> None:
        """Note a model change: a new generation, analysed after the debounce interval."""
        if self._disposed:
            return
        self._generation += 1
        self._timer.start()
        self._set_busy(True)
        self.staleChanged.emit(True)

    def analyse_now(self) -> None:
        """Skip the debounce wait (the result still arrives through ``resultReady``)."""
        if self._disposed:
            return
        self._generation += 1
        self._timer.stop()
        self._set_busy(True)
        self.staleChanged.emit(True)
        self._start()

    def hold(self, held: bool) -> None:
        """While held, no analysis starts (changes still count); releasing starts the one that waited.
        The window holds the first analysis until its first paint, so the two do not compete."""
        self._held = held
        if not held and self._busy and not self._timer.isActive():
            self._start()

    def cancel(self) -> None:
        """Stop the running analysis (the user's Stop): the panels keep the last result, marked out
        of date, until the next change is analysed."""
        self._timer.stop()
        if self._job is not None:
            self._job.cancel()
            self._job = None
        self._set_busy(False)

    def _start(self) -> None:
        """Analyse the newest generation now; an analysis of an older one is cancelled first, so a
        slow analysis never holds up the one the user is waiting for."""
        if self._disposed or self._held:
            return
        generation = self._generation
        if self._job is not None:
            if self._job.generation == generation and self._job.alive():
                return
            self._job.cancel()
            self._job = None
        try:
            project = project_to_dict(self._diagram)
        except Exception as exc:
            self._on_finished(AnalysisResult(generation, internal_error=f"{type(exc).__name__}: {exc}"))
            return
        processes = _processes() if ANALYSIS_IN_PROCESS else None
        light = (self._last_seconds is not None and self._last_seconds < THREAD_BELOW_S
                 and loop_order_bound(self._diagram) < HEAVY_ORDER)
        if processes is not None and processes.ready and not light:
            self._job = _ProcessJob(self._token, project, generation, self._prepare, processes.context)
        else:
            self._job = _Job(self._token, project, generation, self._prepare)
        self._job.start()
        self._started = time.perf_counter()

    def _on_finished(self, result: AnalysisResult) -> None:
        if self._job is not None and self._job.generation == result.generation:
            self._job = None
        if self._disposed or result.generation != self._generation:
            return  # stale: the newest generation is on the timer or already running
        self._result = result
        self._last_seconds = time.perf_counter() - self._started
        self._shown_generation = result.generation
        self._adopt_tuning(result)
        self._unshown = list(self._panels)
        self._show_next(result)

    def add_panel(self, show: Callable[[AnalysisResult], None]) -> None:
        """Call ``show(result)`` (a widget's bound method) with every new result, one panel per
        event-loop pass, before ``resultReady``: a large result's display never holds the GUI
        thread for all panels at once. ``busy`` lasts until the last panel has shown it."""
        self._panels.append(weakref.WeakMethod(show))

    def _show_next(self, result: AnalysisResult) -> None:
        if self._disposed or self._result is not result:
            return  # a newer result took over
        while self._unshown:
            show = self._unshown.pop(0)()
            if show is None or not shiboken6.isValid(show.__self__):
                continue
            show(result)
            if self._unshown:
                QTimer.singleShot(0, self, lambda: self._show_next(result))
                return
        self.resultReady.emit(result)
        self.staleChanged.emit(False)
        if not self._timer.isActive():
            self._set_busy(False)

    def _adopt_tuning(self, result: AnalysisResult) -> None:
        tuning = result.tuning_range
        if tuning is None:
            self._current = None
            return
        if self._dragging and self._current is not None:
            return
        self._current = tuning.nominal
        self.currentValueChanged.emit(tuning.nominal)

    def _set_busy(self, busy: bool) -> None:
        if busy != self._busy:
            self._busy = busy
            self.busyChanged.emit(busy)

    # -- current value --------------------------------------------------------------------------
    def set_current_value(self, value: float) -> None:
        """Move the current value live (slider drag); panels follow through ``currentValueChanged``."""
        if self._result is None or self._result.tuning_range is None or not math.isfinite(value):
            return
        self._dragging = True
        if value != self._current:
            self._current = float(value)
            self.currentValueChanged.emit(self._current)

    def commit_current_value(self) -> None:
        """Ask for the current value to become the tuning parameter's nominal (``nominalCommitted``)."""
        self._dragging = False
        tuning = self._result.tuning_range if self._result is not None else None
        if tuning is None or self._current is None or self._disposed:
            return
        param = self._diagram.parameters.get(tuning.name)
        if param is None or param.nominal == self._current:
            return
        self.nominalCommitted.emit(tuning.name, self._current)

    # -- end of life ------------------------------------------------------------------------------
    def dispose(self, wait_ms: int = 0) -> bool:
        """Stop for good: no more analyses, timers stopped, signals disconnected, a running analysis
        cancelled (its result is dropped). Waits up to ``wait_ms`` for the worker thread; returns
        True when no worker is left running. Safe to call twice.

        The worker only reads its own copy of the project, so abandoning it is safe: it cannot
        touch this controller's diagram, and a cancel it cannot take at once ends it later.
        """
        job = self._job
        if not self._disposed:
            self._disposed = True
            self._timer.stop()
            try:
                self._signals.changed.disconnect(self.schedule)
            except (RuntimeError, TypeError):  # already gone or never connected
                pass
            _relay().controllers.pop(self._token, None)
            self._generation += 1  # anything still in flight is stale
            if job is not None:
                job.cancel()
            self._set_busy(False)
        if job is not None and job.alive() and wait_ms > 0:
            job.thread.join(wait_ms / 1000.0)
        return job is None or not job.alive()

    @property
    def disposed(self) -> bool:
        """Whether :meth:`dispose` was called."""
        return self._disposed

    # -- tests and screenshots ------------------------------------------------------------------
    def wait_for_idle(self, timeout_ms: int = 5000) -> bool:
        """Process events until no analysis is pending; True when idle before the timeout."""
        clock = QElapsedTimer()
        clock.start()
        app = QCoreApplication.instance()
        while self._busy and clock.elapsed() < timeout_ms:
            app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
            time.sleep(0.002)
        return not self._busy
