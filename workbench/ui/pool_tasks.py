"""Engine jobs that can run in another process: picklable tasks, shared inputs, the worker side.

No Qt here: worker processes import this module (and the engine) only. A :class:`PoolTask` is a
module-level function with picklable arguments; called as ``task(progress, cancel)`` it runs in
the calling thread (synchronous mode, threads), and :mod:`workbench.ui.process_jobs` sends it to
a worker process instead. Large inputs (the model adapter, the data) are wrapped in
:class:`Shared`: the window writes each one to a file once, and every worker reads it once and
keeps it, so a job carries only a key and row positions.
"""

from __future__ import annotations

import importlib
import inspect
import os
import pickle
import threading
import time
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from workbench.engine.jobs import step

WORKER_CACHE_LIMIT = 8  # shared inputs a worker keeps (two models, data, reference, spares)


@dataclass(frozen=True)
class Sampled:
    """An engine result over some rows of the data; ``rows`` are their positions in it."""

    rows: np.ndarray
    result: object


@dataclass(frozen=True, eq=False)
class Shared:
    """A large input sent to worker processes once (by identity: the same object, one copy)."""

    obj: object


@dataclass(frozen=True)
class SharedRef:
    """What a task carries to a worker in place of a :class:`Shared` input."""

    key: str
    path: str


@dataclass(frozen=True)
class Rows:
    """Some rows of a shared frame, taken where the task runs (positions travel, rows do not)."""

    frame: object  # Shared, SharedRef or a DataFrame
    positions: np.ndarray


@dataclass(frozen=True)
class PoolTask:
    """``fn(*args, progress=..., cancel=..., **kwargs)`` with ``fn`` importable without Qt.

    ``quick``: a small job the user waits for (one row's contributions after an edit); it runs
    on a worker of its own, so it never queues behind heavy jobs.
    """

    fn: Callable
    args: tuple = ()
    kwargs: dict = field(default_factory=dict)
    quick: bool = False

    def __call__(self, progress, cancel):
        args = tuple(resolve(a) for a in self.args)
        kwargs = {k: resolve(v) for k, v in self.kwargs.items()}
        return self.fn(*args, progress=progress, cancel=cancel, **kwargs)

    def with_refs(self, ref_of: Callable[[Shared], SharedRef]) -> PoolTask:
        """This task with every Shared input replaced by its file reference."""

        def swap(value):
            if isinstance(value, Shared):
                return ref_of(value)
            if isinstance(value, Rows) and isinstance(value.frame, Shared):
                return Rows(ref_of(value.frame), value.positions)
            return value

        return PoolTask(self.fn, tuple(swap(a) for a in self.args),
                        {k: swap(v) for k, v in self.kwargs.items()}, self.quick)


# ---- inputs, where the task runs ---------------------------------------------------------------
_loaded: OrderedDict = OrderedDict()


def resolve(value):
    if isinstance(value, Shared):
        return value.obj
    if isinstance(value, SharedRef):
        if value.key not in _loaded:
            with open(value.path, "rb") as fh:
                _loaded[value.key] = pickle.load(fh)  # noqa: S301 - our own file, written by the window
            while len(_loaded) > WORKER_CACHE_LIMIT:
                _loaded.popitem(last=False)
        _loaded.move_to_end(value.key)
        return _loaded[value.key]
    if isinstance(value, Rows):
        return resolve(value.frame).iloc[value.positions]
    return value


def write_shared(obj, key: str, folder: str) -> SharedRef:
    path = os.path.join(folder, f"{key}.pickle")
    with open(path, "wb") as fh:
        pickle.dump(obj, fh, protocol=pickle.HIGHEST_PROTOCOL)
    return SharedRef(key, path)


# ---- worker process ----------------------------------------------------------------------------
_flags = None  # shared bytes: a job's cancel flag is flags[slot]
_progress_queue = None
PROGRESS_INTERVAL_S = 0.05
WORKER_NICENESS = 5  # the window's own process comes first (at 10 the workers got little
# processor time while other programs kept the processors busy)


def init_worker(flags, progress_queue, openmp_threads: int, window_pid: int,
                niceness: int = WORKER_NICENESS) -> None:
    """Runs once in each worker process."""
    global _flags, _progress_queue
    _flags, _progress_queue = flags, progress_queue
    threading.Thread(target=_leave_with_window, args=(window_pid,), daemon=True).start()
    try:
        os.nice(niceness)
    except (AttributeError, OSError):
        pass
    try:
        from threadpoolctl import threadpool_limits

        threadpool_limits(limits=openmp_threads, user_api="openmp")
    except Exception:  # noqa: BLE001 - a missing limit costs speed, not correctness
        pass


def _leave_with_window(window_pid: int) -> None:
    """A window that ended without closing its pool (killed, os._exit) takes its workers along."""
    while os.getppid() == window_pid:
        time.sleep(0.5)
    os._exit(0)


def run_in_worker(job_id: int, slot: int, task: PoolTask):
    """Run ``task`` with progress sent to the window and cancel read from the shared flag."""
    last = [0.0]

    def progress(fraction: float, message: str = "") -> None:
        now = time.perf_counter()
        if now - last[0] >= PROGRESS_INTERVAL_S or fraction >= 1.0:
            last[0] = now
            _progress_queue.put((job_id, float(fraction), str(message)))

    def cancelled() -> bool:
        return bool(_flags[slot])

    return task(progress, cancelled)


def warm_up() -> int:
    """Import the engine in a fresh worker (the first real job then starts at once)."""
    for name in ("attributions", "effects", "interactions", "importance", "associations",
                 "shap_interactions", "flips", "similar", "explanation_stability", "compare"):
        try:
            importlib.import_module(f"workbench.engine.{name}")
        except ImportError:  # a part not in this build: its jobs say so themselves
            pass
    try:
        _first_explanations()
    except Exception:  # noqa: BLE001 - a warm-up that fails costs time, not correctness
        pass
    return os.getpid()


def _first_explanations() -> None:
    """Explain two rows of a tiny boosted model in both forms, so that the compiled tree
    kernels are loaded before a real job needs them (measured on the demo challenger: the
    first one-row explanation in a fresh worker took 0.73 s without this, 0.21 s with it)."""
    import pandas as pd
    from sklearn.ensemble import HistGradientBoostingClassifier

    from workbench.engine.adapter import ModelAdapter
    from workbench.engine.attributions import explain

    rng = np.random.default_rng(0)
    frame = pd.DataFrame({"a": rng.normal(size=40), "b": rng.normal(size=40)})
    model = HistGradientBoostingClassifier(max_iter=3).fit(frame, frame["a"] > 0)
    adapter = ModelAdapter(model)
    for form in ("interventional", "path"):
        explain(adapter, frame.iloc[:2], form=form, background=frame, background_size=10)


# ---- the tasks ---------------------------------------------------------------------------------
def call_engine(fn, *args, **kwargs):
    """Call an engine function with the keyword options it accepts (others are left out)."""
    try:
        params = inspect.signature(fn).parameters
    except (TypeError, ValueError):
        return fn(*args, **kwargs)
    if any(p.kind is inspect.Parameter.VAR_KEYWORD for p in params.values()):
        return fn(*args, **kwargs)
    return fn(*args, **{k: v for k, v in kwargs.items() if k in params})


def engine_function(module: str, name: str):
    return getattr(importlib.import_module(f"workbench.engine.{module}"), name)


def engine_call(module: str, name: str, *args, rows=None, progress=None, cancel=None, **kwargs):
    """``workbench.engine.<module>.<name>(*args, **kwargs)``, as ``Sampled(rows, ...)`` if rows."""
    fn = engine_function(module, name)
    result = call_engine(fn, *args, progress=progress, cancel=cancel, **kwargs)
    return result if rows is None else Sampled(rows, result)


def score_rows(adapter, frame, *, progress=None, cancel=None):
    """(explained output, response) of every row."""
    step(progress, cancel, 0.0, "scoring")
    output = adapter.score(frame)
    step(progress, cancel, 0.5, "scoring")
    response = adapter.response_from_output(output) if adapter.output_kind in (
        "log-odds", "log of the mean", "probability", "value") else adapter.response(frame)
    step(progress, cancel, 1.0, "scored")
    return np.asarray(output, float), np.asarray(response, float)


def association_blocks(frame, columns, *, progress=None, cancel=None):
    """(Associations, Clustering) of ``columns``."""
    result = call_engine(engine_function("associations", "associations"), frame, columns=columns,
                         progress=progress, cancel=cancel)
    clustering = call_engine(engine_function("associations", "cluster_order"), result.strength,
                             result.features)
    return result, clustering


def explain_one_row(adapter, row_frame, *, progress=None, cancel=None, **options):
    """Attributions of one row with one OpenMP thread (more cost than they give for one row)."""
    from workbench.ui.threads import single_threaded

    with single_threaded():
        return engine_call("attributions", "explain", adapter, row_frame, progress=progress,
                           cancel=cancel, **options)


def similar_rows_of(adapter, data, row: int, labels=None, *, k: int = 5, progress=None,
                    cancel=None):
    """The ``k`` rows most like ``row`` (Gower distance), with the model's score of each."""
    from workbench.engine.similar import similar_rows

    step(progress, cancel, 0.0, "scoring the data")
    scores = np.asarray(adapter.response(data), dtype=float)
    step(progress, cancel, 0.5, "finding similar rows")
    columns = [c for c in adapter.input_columns if c in data.columns]
    cats = [c for c in adapter.categorical_columns if c in columns]
    return similar_rows(data, row, k=k, columns=columns, scores=scores, labels=labels,
                        categorical=cats)


def slow_task(seconds: float = 30.0, *, progress=None, cancel=None) -> str:
    """A job that only waits, stepping every 20 ms (tests of cancelling across processes)."""
    end = time.perf_counter() + seconds
    while time.perf_counter() < end:
        step(progress, cancel, 1 - (end - time.perf_counter()) / seconds, "waiting")
        time.sleep(0.02)
    return "finished"
