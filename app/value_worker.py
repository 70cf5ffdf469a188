"""Work at the tuning parameter's current value, off the GUI thread, newest request only.

While the pole-map slider moves, the step response and the requirement verdicts at the slider's
value are simulated on one process-wide background thread. Each :class:`ValueWorker` keeps only
its newest request: one waiting request replaces the previous, and an answer that arrives after a
newer request was made is dropped, so a panel never draws an old value over a new one. Answers
come back on the GUI thread through a relay that is never deleted (a worker never emits on a
widget that went away).

>>> worker = ValueWorker()   # in a panel: ValueWorker(self)
>>> worker.pending           # worker.submit(compute, deliver) makes it True until answered
False
"""
from __future__ import annotations

import itertools
import threading
import weakref
from collections.abc import Callable

import shiboken6
from PySide6.QtCore import QCoreApplication, QElapsedTimer, QEventLoop, QObject, Signal

Deliver = Callable[[object, Exception | None], None]


class ValueWorker(QObject):
    """One panel's requests: ``submit(compute, deliver)`` runs ``compute()`` on the background
    thread and calls ``deliver(answer, None)`` (or ``deliver(None, error)`` when it raised) on the
    GUI thread, unless a newer request was submitted meanwhile."""

    def __init__(self, parent: QObject | None = None):
        super().__init__(parent)
        self._token = next(_TOKENS)
        self._serial = 0
        self._deliver: Deliver | None = None
        _relay().workers[self._token] = self

    @property
    def pending(self) -> bool:
        """Whether the newest request has not been answered yet."""
        return self._deliver is not None

    def submit(self, compute: Callable[[], object], deliver: Deliver) -> None:
        self._serial += 1
        self._deliver = deliver
        _queue().put(self._token, self._serial, compute)

    def forget(self) -> None:
        """Drop the newest request (its answer will not be delivered)."""
        self._serial += 1
        self._deliver = None

    def _answered(self, serial: int, answer: object, error: Exception | None) -> None:
        if serial != self._serial or self._deliver is None:
            return
        deliver, self._deliver = self._deliver, None
        deliver(answer, error)


class _Queue:
    """The newest request of each worker, taken by one daemon thread."""

    def __init__(self) -> None:
        self._waiting: dict[int, tuple[int, Callable[[], object]]] = {}
        self._ready = threading.Condition()
        threading.Thread(target=self._run, name="loopwright-current-value", daemon=True).start()

    def put(self, token: int, serial: int, compute: Callable[[], object]) -> None:
        with self._ready:
            self._waiting[token] = (serial, compute)
            self._ready.notify()

    def _run(self) -> None:
        while True:
            with self._ready:
                while not self._waiting:
                    self._ready.wait()
                token = next(iter(self._waiting))
                serial, compute = self._waiting.pop(token)
            try:
                answer, error = compute(), None
            except Exception as exc:  # handed to the panel, which says what failed
                answer, error = None, exc
            _relay().answered.emit(token, serial, (answer, error))


class _Relay(QObject):
    answered = Signal(int, int, object)

    def __init__(self) -> None:
        super().__init__()
        self.workers: weakref.WeakValueDictionary[int, ValueWorker] = weakref.WeakValueDictionary()
        self.answered.connect(self._deliver)

    def _deliver(self, token: int, serial: int, payload: tuple) -> None:
        worker = self.workers.get(token)
        if worker is not None and shiboken6.isValid(worker):
            worker._answered(serial, *payload)


_TOKENS = itertools.count(1)
_RELAY: _Relay | None = None
_QUEUE: _Queue | None = None


def _relay() -> _Relay:
    """The process-wide relay, first made on the GUI thread (by a worker's constructor)."""
    global _RELAY
    if _RELAY is None:
        _RELAY = _Relay()
    return _RELAY


def _queue() -> _Queue:
    global _QUEUE
    if _QUEUE is None:
        _QUEUE = _Queue()
    return _QUEUE


def wait_for(worker: ValueWorker, timeout_ms: int = 10_000) -> None:
    """Process events until the worker's newest request is answered (tests, screenshots)."""
    clock = QElapsedTimer()
    clock.start()
    app = QCoreApplication.instance()
    while worker.pending and clock.elapsed() < timeout_ms and app is not None:
        app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
