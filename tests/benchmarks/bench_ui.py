"""Speed of the window (a script, not a test): ``python tests/benchmarks/bench_ui.py``.

Run one part with its name as argument (``heartbeat``, ``heartbeat_levels`` (the heartbeat on
a visit to each level with jobs), ``trial_values``, ``portfolio_200k``, ``demo_startup``,
``trial_values_bars_only``, ``trial_values_in_workers``; ``heartbeat_threads`` runs the heartbeat with every job in threads,
as before the worker processes, for comparison).

1. Heartbeat: a 10 ms timer on the main thread while engine jobs run (worker processes); the
   worst gap between beats is the longest the window froze, split into the main thread's own
   processor time and its wait for a processor (Linux schedstat: the machine's load).
2. Trial values: one edit in the Case level (re-score + re-attribute + bars + reason
   statements, synchronous: the time from the edit to the updated bars and score), against
   calling ``adapter.score`` and ``attributions.explain`` directly in the same run, with the
   default OpenMP threads and with one (as the window does for one row).
3. Portfolio with 200,000 rows: filling the table and sorting it by score, against a plain
   ``numpy.argsort`` of the same scores.
"""

from __future__ import annotations

import os
import sys
import threading
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402


def _window(synchronous: bool):
    from PySide6.QtCore import QSettings

    from workbench.ui.app import application, open_demo
    from workbench.ui.window import MainWindow

    app = application()
    settings = QSettings(str(Path(os.environ.get("TMPDIR", "/tmp")) / "bench-ui.ini"),
                         QSettings.Format.IniFormat)
    win = MainWindow(qsettings=settings, synchronous=synchronous)
    win.show()
    win.ctx.runner.warm_up()  # as ``workbench`` does at launch (no-op when synchronous)
    open_demo(win, rows=5000)
    win.warm_levels()  # as ``workbench`` does once the files are open
    return app, win


class StackSampler:
    """A watchdog thread: while the main thread has not beaten for ``after_ms``, it samples the
    main thread's Python stack every few ms (``sys._current_frames``), so the worst gaps can be
    told apart: our code or painting (the main thread's stack moves), or waiting for Python's
    lock while a job in a thread holds it (the stack stays in the event loop)."""

    def __init__(self, after_ms: float = 40.0, every_ms: float = 4.0) -> None:
        self.after, self.every = after_ms / 1000, every_ms / 1000
        self.last_beat = time.perf_counter()
        self.samples: list[tuple[float, str]] = []
        self.main = threading.main_thread().ident
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self) -> StackSampler:
        self._thread.start()
        return self

    def stop(self) -> None:
        self._stop.set()
        self._thread.join(1)

    def beat(self) -> None:
        self.last_beat = time.perf_counter()

    def _run(self) -> None:
        while not self._stop.wait(self.every):
            now = time.perf_counter()
            if now - self.last_beat < self.after:
                continue
            frame = sys._current_frames().get(self.main)
            self.samples.append((now, _short_stack(frame)))

    def during(self, start: float, end: float, top: int = 3) -> list[tuple[int, str]]:
        """The most frequent main-thread stacks sampled between ``start`` and ``end``."""
        from collections import Counter

        counts = Counter(text for t, text in self.samples if start <= t <= end)
        return counts.most_common(top)


def _short_stack(frame, depth: int = 5) -> str:
    """The innermost ``depth`` frames, as ``file:function``, innermost last."""
    parts = []
    while frame is not None:
        code = frame.f_code
        parts.append(f"{Path(code.co_filename).stem}:{code.co_name}:{frame.f_lineno}")
        frame = frame.f_back
    return " < ".join(parts[:depth])


EFFECT_VISITS = (("first", 0, {"model": "B", "level": "Effect", "feature": "debt_to_income"}),
                 ("again", 1, {"model": "B", "level": "Effect", "feature": "debt_to_income"}))
# Every level with jobs, each with a seed not used before (so its jobs run, not the cache).
LEVEL_VISITS = tuple((level, 10 + i, {"model": "B", "level": level, "row": 7,
                                      "feature": "annual_income",
                                      "pair": ("annual_income", "debt_to_income")})
                     for i, level in enumerate(("Case", "Effect", "Ranking", "Pairs", "Versions",
                                                "Checks")))


def heartbeat(*, processes: int | None = None, visits=EFFECT_VISITS) -> dict:
    """Worst main-thread gap while a level's jobs run: by default the Effect level for model B,
    first visit (engine imports and compiled kernels loading), then again with another seed
    (steady state); ``visits``: (name, seed, focus changes) of each run."""
    from PySide6.QtCore import QTimer

    from workbench.ui.jobs import spin_events

    app, win = _window(synchronous=False)
    if processes is not None:
        win.ctx.runner.processes = processes  # 0: every job in threads, as before the pool
    out = {}
    for run, seed, changes in visits:
        beats, during, cpu, waited = [], [], [], []
        timer = QTimer()
        sampler = StackSampler().start()

        def beat(beats=beats, during=during, cpu=cpu, waited=waited, sampler=sampler):
            sampler.beat()
            beats.append(time.perf_counter())
            cpu.append(time.thread_time())
            waited.append(_runqueue_wait_s())
            during.append(", ".join(sorted(j.title for j in win.ctx.runner.running)))

        timer.timeout.connect(beat)
        timer.start(10)
        win.ctx.workspace.update_settings(seed=seed)
        win.ctx.focus.update(**changes)
        start = time.perf_counter()
        while win.ctx.runner.running or time.perf_counter() - start < 0.5:
            spin_events(5)  # not app.processEvents(): see workbench.ui.jobs.spin_events
        timer.stop()
        sampler.stop()
        gaps = np.diff(beats) * 1000
        worst = int(np.argmax(gaps))
        # What the worst gap was made of: the main thread running (our code, Qt, painting), the
        # main thread runnable but given no processor (the machine's load), and the rest
        # (waiting for Python's lock, or idle). Less the wait for a processor, the worst gap
        # is the window's own doing, whatever else runs on the machine.
        running_ms = (cpu[worst + 1] - cpu[worst]) * 1000
        queued_ms = (waited[worst + 1] - waited[worst]) * 1000
        own = gaps - np.diff(waited) * 1000  # each gap less its wait for a processor
        own_worst = int(np.nanargmax(own)) if np.isfinite(own).any() else worst
        out[run] = {"jobs_seconds": round(time.perf_counter() - start, 2),
                    "worst_stall_ms": round(float(gaps[worst]), 1),
                    "worst_main_thread_running_ms": round(running_ms, 1),
                    "worst_waiting_for_a_cpu_ms": round(queued_ms, 1),
                    "worst_stall_less_cpu_wait_ms": round(float(own[own_worst]), 1),
                    "worst_less_cpu_wait_running_ms": round(
                        (cpu[own_worst + 1] - cpu[own_worst]) * 1000, 1),
                    "worst_less_cpu_wait_during": during[own_worst],
                    "stalls_over_100ms": int((gaps > 100).sum()),
                    "stalls_over_100ms_less_cpu_wait": int((own > 100).sum()),
                    "median_beat_ms": round(float(np.median(gaps)), 1),
                    "worst_during": during[worst],
                    "worst_main_stacks": sampler.during(beats[worst], beats[worst + 1]),
                    "worst_less_cpu_wait_main_stacks": sampler.during(beats[own_worst],
                                                                      beats[own_worst + 1]),
                    "over_100ms": _long_gaps(gaps, own, beats, during, cpu, sampler)}
        win.ctx.focus.update(level="Portfolio")
        win.ctx.runner.wait_idle(600)
    win.close()
    return out


def _long_gaps(gaps, own, beats, during, cpu, sampler) -> list[dict]:
    """Every gap over 100 ms: its length, less the wait for a processor, the main thread's
    running time, the jobs running and the main thread's most sampled stack."""
    out = []
    for i in np.flatnonzero(gaps > 100):
        stacks = sampler.during(beats[i], beats[i + 1], top=1)
        out.append({"ms": round(float(gaps[i]), 1), "less_cpu_wait_ms": round(float(own[i]), 1),
                    "running_ms": round((cpu[i + 1] - cpu[i]) * 1000, 1), "jobs": during[i],
                    "stack": stacks[0] if stacks else None})
    return out


def _runqueue_wait_s() -> float:
    """Seconds the calling thread has spent runnable but not running (Linux schedstat)."""
    try:
        with open(f"/proc/self/task/{threading.get_native_id()}/schedstat") as fh:
            return int(fh.read().split()[1]) / 1e9
    except (OSError, ValueError, IndexError):
        return float("nan")


def trial_values(*, with_reasons: bool = True) -> dict:
    """One trial edit in the Case level; ``with_reasons=False`` leaves out the reasons panel
    (reason statements, similar rows), which also reacts to every edit."""
    from workbench.engine.attributions import explain
    from workbench.ui.levels import case as case_module
    from workbench.ui.threads import single_threaded

    if not with_reasons:
        case_module.show_for_case_level = lambda *args, **kwargs: None
    app, win = _window(synchronous=True)
    out = {}
    for slot in ("A", "B"):
        win.ctx.focus.update(model=slot, level="Case", row=7)
        case = win.levels["Case"]
        adapter = win.ctx.workspace.adapter(slot)
        ui_times, direct_times, single_times = [], [], []

        def direct(frame, adapter=adapter):
            adapter.score(frame)
            explain(adapter, frame, background=win.ctx.workspace.background_frame(),
                    background_size=100, seed=0)

        for k, value in enumerate(np.linspace(0.1, 0.8, 8)):
            t0 = time.perf_counter()
            case.set_trial("debt_to_income", float(value) + k * 1e-6)
            ui_times.append(time.perf_counter() - t0)
            frame = case.trial_frame()
            t0 = time.perf_counter()
            direct(frame)
            direct_times.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            with single_threaded():
                direct(frame)
            single_times.append(time.perf_counter() - t0)
        ui = np.median(ui_times[1:])
        d, d1 = np.median(direct_times[1:]), np.median(single_times[1:])
        out[slot] = {"ui_ms": ms(ui), "ui_max_ms": ms(max(ui_times[1:])),
                     "direct_ms": ms(d), "direct_one_thread_ms": ms(d1),
                     "ratio_to_direct": round(ui / d, 2),
                     "ratio_to_direct_one_thread": round(ui / d1, 2)}
    win.close()
    return out


def trial_values_in_workers(*, edits: int = 8) -> dict:
    """Trial edits on the challenger with the worker processes, as the window runs: from the
    edit to the new contribution bars, with the workers idle and then while the Pairs level's
    H-statistics keep both heavy workers busy (the edit goes to the quick worker)."""
    from workbench.ui.jobs import spin_events

    app, win = _window(synchronous=False)
    runner = win.ctx.runner
    win.ctx.focus.update(model="B", level="Case", row=7)
    case = win.levels["Case"]

    def settle():
        start = time.perf_counter()
        while runner.running and time.perf_counter() - start < 300:
            spin_events(5)

    def edit_times(tag: float) -> list[float]:
        times = []
        for k, value in enumerate(np.linspace(0.1, 0.8, edits)):
            before = case.contributions
            t0 = time.perf_counter()
            case.set_trial("debt_to_income", float(value) + tag + k * 1e-6)
            while case.contributions is before and time.perf_counter() - t0 < 30:
                spin_events(1)
            times.append(time.perf_counter() - t0)
        return times

    settle()
    idle = edit_times(0.0)
    win.ctx.focus.update(model="B", level="Pairs")  # H-statistics start in the heavy workers
    spin_events(50)
    win.ctx.focus.update(model="B", level="Case", row=7)
    busy_jobs = sorted(j.title for j in runner.running)
    busy = edit_times(1e-3)
    out = {"idle_median_ms": ms(np.median(idle[1:])), "idle_max_ms": ms(max(idle[1:])),
           "first_edit_ms": ms(idle[0]),
           "busy_median_ms": ms(np.median(busy)), "busy_max_ms": ms(max(busy)),
           "jobs_running_while_busy": busy_jobs, "load": os.getloadavg()[0]}
    runner.cancel_all()
    win.close()
    return out


def ms(seconds: float) -> float:
    return round(float(seconds) * 1000, 1)


def portfolio_200k() -> dict:
    from PySide6.QtCore import Qt

    from workbench.engine.loading import dataset_from_frame

    app, win = _window(synchronous=True)
    base = win.ctx.workspace.frame
    big = pd.concat([base] * 40, ignore_index=True).head(200_000)
    t0 = time.perf_counter()
    win.ctx.workspace.set_data(dataset_from_frame(big, target=win.ctx.workspace.settings.target))
    app.processEvents()
    fill = time.perf_counter() - t0
    portfolio = win.levels["Portfolio"]
    col = next(i for i, h in enumerate(portfolio.model.headers) if h.startswith("score"))
    t0 = time.perf_counter()
    portfolio.model.sort(col, Qt.SortOrder.DescendingOrder)
    app.processEvents()
    sort = time.perf_counter() - t0
    scores = portfolio.model.arrays[col]
    t0 = time.perf_counter()
    np.argsort(-scores, kind="stable")
    plain = time.perf_counter() - t0
    rows = portfolio.model.rowCount()
    # scrolling: a page at a time and jumps across the table, each step painted at once
    win.ctx.focus.update(level="Portfolio")
    app.processEvents()
    bar = portfolio.table.verticalScrollBar()
    steps = []
    for value in [bar.pageStep() * k for k in range(1, 21)] + [bar.maximum(), 0,
                                                              bar.maximum() // 2]:
        t0 = time.perf_counter()
        bar.setValue(min(value, bar.maximum()))
        portfolio.table.viewport().repaint()
        steps.append(time.perf_counter() - t0)
    win.close()
    return {"rows": rows, "fill_and_score_s": round(fill, 2), "sort_ms": round(sort * 1000, 1),
            "numpy_argsort_ms": round(plain * 1000, 1), "sort_ratio": round(sort / plain, 1),
            "scroll_step_median_ms": ms(np.median(steps)), "scroll_step_max_ms": ms(max(steps))}


STARTUP = """
import time
t0 = time.perf_counter()
from workbench.ui.app import application, open_demo
from workbench.ui.window import MainWindow
from workbench.ui.jobs import spin_events
app = application()
win = MainWindow()
win.show()
win.ctx.runner.warm_up()
shown = time.perf_counter()
open_demo(win)
win.warm_levels()
opened = time.perf_counter()
portfolio = win.levels["Portfolio"]
while portfolio._scores is None and time.perf_counter() - t0 < 120:
    spin_events(5)
scored = time.perf_counter()
print(round(shown - t0, 2), round(opened - t0, 2), round(scored - t0, 2), portfolio.model.rowCount())
import os
win.ctx.runner.shutdown()
os._exit(0)
"""


def demo_startup() -> dict:
    """Seconds from a fresh interpreter to the window shown, the demo open (cached demo files)
    and the Portfolio filled with the challenger's scores, as ``workbench demo`` does it."""
    import subprocess

    out = subprocess.run([sys.executable, "-c", STARTUP], capture_output=True, text=True,
                         env={**os.environ, "QT_QPA_PLATFORM": "offscreen"}, timeout=300)
    shown, opened, scored, rows = out.stdout.split()[-4:]
    return {"window_shown_s": float(shown), "demo_open_s": float(opened),
            "portfolio_scored_s": float(scored), "rows": int(rows)}


if __name__ == "__main__":
    only = sys.argv[1:]
    for name, fn in (("heartbeat", heartbeat), ("trial_values", trial_values),
                     ("heartbeat_threads", lambda: heartbeat(processes=0)),
                     ("heartbeat_levels", lambda: heartbeat(visits=LEVEL_VISITS)),
                     ("portfolio_200k", portfolio_200k), ("demo_startup", demo_startup),
                     ("trial_values_bars_only", lambda: trial_values(with_reasons=False)),
                     ("trial_values_in_workers", trial_values_in_workers)):
        if not only or name in only:
            print(name, fn(), flush=True)
    os._exit(0)  # skip Qt teardown
