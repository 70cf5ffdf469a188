"""Repeated wall-clock timing, medians and percentiles, and a time-capped run in a child process.

>>> times = repeat(lambda: sum(range(1000)), repeats=5)
>>> len(times), median(times) > 0
(5, True)
>>> percentile([1.0, 2.0, 3.0, 4.0], 50)
2.5
"""
from __future__ import annotations

import multiprocessing
import queue
import signal
import statistics
import time
from collections.abc import Callable, Sequence


def repeat(fn: Callable[[], object], repeats: int, warmup: int = 1) -> list[float]:
    """Seconds taken by each of ``repeats`` calls of ``fn`` after ``warmup`` untimed calls."""
    for _ in range(warmup):
        fn()
    out = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        out.append(time.perf_counter() - start)
    return out


def median(values: Sequence[float]) -> float:
    """The median (the middle value, or the mean of the two middle ones)."""
    return statistics.median(values)


def percentile(values: Sequence[float], q: float) -> float:
    """The q-th percentile by linear interpolation between order statistics (numpy's default rule)."""
    data = sorted(values)
    if len(data) == 1:
        return data[0]
    pos = (len(data) - 1) * q / 100.0
    lo = int(pos)
    hi = min(lo + 1, len(data) - 1)
    return data[lo] + (data[hi] - data[lo]) * (pos - lo)


class CapExceeded(Exception):
    """Raised by the alarm when a capped call runs out of time."""


def _alarm(_signum, _frame):
    raise CapExceeded


def time_capped(fn: Callable[[], object], cap_s: float) -> float | None:
    """Seconds taken by ``fn()``, or None when it was stopped after ``cap_s`` seconds.

    Uses a SIGALRM timer, so it works in a main thread and stops pure-Python work (sympy).
    """
    previous = signal.signal(signal.SIGALRM, _alarm)
    start = time.perf_counter()
    signal.setitimer(signal.ITIMER_REAL, cap_s)
    try:
        fn()
    except CapExceeded:
        return None
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
    return time.perf_counter() - start


def _child(target: Callable, args: tuple, results) -> None:
    results.put(target(*args))


def run_in_child(target: Callable, args: tuple, timeout_s: float):
    """``target(*args)`` in a fresh (spawned) child process; its return value, or None when the
    child gives nothing within ``timeout_s`` seconds (it is then terminated). ``target`` must be
    importable; it should cap its own work (:func:`time_capped`) so this is only a safety net.
    """
    spawn = multiprocessing.get_context("spawn")
    results = spawn.Queue()
    child = spawn.Process(target=_child, args=(target, args, results), daemon=True)
    child.start()
    deadline = time.monotonic() + timeout_s
    value = None
    while time.monotonic() < deadline:
        try:
            value = results.get(timeout=0.2)
            break
        except queue.Empty:
            if not child.is_alive():
                break
    child.join(5.0)
    if child.is_alive():
        child.terminate()
        child.join()
    return value
