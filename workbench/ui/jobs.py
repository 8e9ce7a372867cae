"""Engine work off the main thread: one job per request, progress, cancel, a result cache.

A job is ``fn(progress, cancel) -> result``; ``cancel`` is a ``threading.Event`` the engine
polls through ``workbench.engine.jobs.step``. Results are cached by key (model, data, segment,
parameters), so going back to a view shows it at once. A result whose requester no longer
wants it (``relevant()`` is False on arrival: the focus has moved on) is cached but not shown.
``synchronous=True`` runs jobs in the calling thread, for tests and snapshots.
"""

from __future__ import annotations

import itertools
import threading
import time
import traceback
from collections import OrderedDict
from collections.abc import Callable, Hashable
from dataclasses import dataclass, field

from PySide6.QtCore import QCoreApplication, QEventLoop, QObject, QRunnable, QThreadPool, Signal

from workbench.engine.errors import Cancelled

CACHE_LIMIT = 96
_PROGRESS_INTERVAL_S = 0.05
_ids = itertools.count(1)


@dataclass
class Job:
    """One running computation; ``cancel`` stops it at the engine's next step."""

    key: Hashable
    title: str
    fn: Callable
    id: int = field(default_factory=lambda: next(_ids))
    cancel: threading.Event = field(default_factory=threading.Event)
    waiters: list = field(default_factory=list)  # (on_done, on_error, relevant)
    fraction: float = 0.0
    message: str = ""
    started_at: float = field(default_factory=time.perf_counter)
    result: object = None
    error: BaseException | None = None


class _Signals(QObject):
    # Only plain numbers and text cross threads: the result or error waits on the Job itself,
    # so no Python object travels through Qt's queued connections.
    progressed = Signal(float, str)
    returned = Signal()
    errored = Signal()


class _Runnable(QRunnable):
    def __init__(self, job: Job, signals: _Signals) -> None:
        super().__init__()
        self.job = job
        self.signals = signals

    def run(self) -> None:  # worker thread
        last = [0.0]

        def progress(fraction: float, message: str = "") -> None:
            now = time.perf_counter()
            if now - last[0] >= _PROGRESS_INTERVAL_S or fraction >= 1.0:
                last[0] = now
                self.signals.progressed.emit(float(fraction), str(message))

        try:
            self.job.result = self.job.fn(progress, self.job.cancel)
        except BaseException as exc:  # noqa: BLE001 - handed to the main thread
            exc.__traceback_text__ = traceback.format_exc()
            self.job.error = exc
            self.signals.errored.emit()
        else:
            self.signals.returned.emit()


class JobRunner(QObject):
    """Runs jobs on a small thread pool and tells the window about them."""

    job_started = Signal(object)  # Job
    job_progressed = Signal(object)  # Job (fraction and message updated)
    job_ended = Signal(object, str)  # Job, "done" | "cancelled" | "failed: <message>"

    def __init__(self, parent: QObject | None = None, *, synchronous: bool = False,
                 max_threads: int = 2) -> None:
        super().__init__(parent)
        self.synchronous = synchronous
        self.pool = QThreadPool(self)
        self.pool.setMaxThreadCount(max_threads)
        self._cache: OrderedDict = OrderedDict()
        self._running: dict[Hashable, Job] = {}
        self._signals: dict[int, _Signals] = {}
        self.dropped = 0  # results that arrived after their requester moved on

    # ---- cache ------------------------------------------------------------------------------
    def cached(self, key: Hashable):
        if key in self._cache:
            self._cache.move_to_end(key)
            return self._cache[key]
        return None

    def has(self, key: Hashable) -> bool:
        return key in self._cache

    def clear_cache(self) -> None:
        self._cache.clear()

    def _store(self, key: Hashable, result) -> None:
        self._cache[key] = result
        self._cache.move_to_end(key)
        while len(self._cache) > CACHE_LIMIT:
            self._cache.popitem(last=False)

    # ---- jobs ---------------------------------------------------------------------------------
    @property
    def running(self) -> list[Job]:
        return list(self._running.values())

    def request(self, key: Hashable, title: str, fn: Callable, on_done: Callable, *,
                on_error: Callable | None = None,
                relevant: Callable[[], bool] | None = None) -> Job | None:
        """Deliver the result for ``key`` to ``on_done``: from the cache, a running job or a new one."""
        if key in self._cache:
            on_done(self.cached(key))
            return None
        waiter = (on_done, on_error, relevant)
        if key in self._running:
            self._running[key].waiters.append(waiter)
            return self._running[key]
        job = Job(key, title, fn, waiters=[waiter])
        self._running[key] = job
        self.job_started.emit(job)
        if self.synchronous:
            self._run_here(job)
            return job
        signals = _Signals()
        signals.progressed.connect(lambda f, m, j=job: self._on_progress(j, f, m))
        signals.returned.connect(lambda j=job: self._on_returned(j, j.result))
        signals.errored.connect(lambda j=job: self._on_errored(j, j.error))
        self._signals[job.id] = signals
        self.pool.start(_Runnable(job, signals))
        return job

    def _run_here(self, job: Job) -> None:
        def progress(fraction: float, message: str = "") -> None:
            self._on_progress(job, fraction, message)

        try:
            result = job.fn(progress, job.cancel)
        except BaseException as exc:  # noqa: BLE001
            exc.__traceback_text__ = traceback.format_exc()
            self._on_errored(job, exc)
        else:
            self._on_returned(job, result)

    def cancel(self, job: Job) -> None:
        job.cancel.set()

    def cancel_all(self) -> None:
        for job in self.running:
            job.cancel.set()

    def wait_idle(self, timeout_s: float = 60.0) -> bool:
        """Process events until no job runs (snapshots and tests); False on timeout."""
        end = time.perf_counter() + timeout_s
        while self._running:
            if time.perf_counter() > end:
                return False
            QCoreApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 50)
            time.sleep(0.005)
        QCoreApplication.processEvents()
        return True

    # ---- arrivals (main thread) -------------------------------------------------------------
    def _on_progress(self, job: Job, fraction: float, message: str) -> None:
        job.fraction, job.message = fraction, message
        self.job_progressed.emit(job)

    def _finish(self, job: Job) -> list:
        self._running.pop(job.key, None)
        self._signals.pop(job.id, None)
        return job.waiters

    def _on_returned(self, job: Job, result) -> None:
        self._store(job.key, result)
        waiters = self._finish(job)
        self.job_ended.emit(job, "done")
        for on_done, _on_error, relevant in waiters:
            if relevant is not None and not relevant():
                self.dropped += 1
                continue
            on_done(result)

    def _on_errored(self, job: Job, exc: BaseException) -> None:
        waiters = self._finish(job)
        if isinstance(exc, Cancelled):
            outcome = "cancelled"
        else:
            text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            outcome = f"failed: {text}"
        self.job_ended.emit(job, outcome)
        for _on_done, on_error, relevant in waiters:
            if relevant is not None and not relevant():
                continue
            if on_error is not None:
                on_error(exc)
