"""Engine jobs in worker processes: same results as in-process, cancel, stale results, errors.

These start real worker processes ('spawn'), so each test keeps to one small job.
"""

import numpy as np
import pytest

from workbench.engine.errors import Cancelled, InputError
from workbench.ui.pool_tasks import PoolTask, Rows, Shared, engine_call, slow_task


@pytest.fixture
def pool_runner(qtbot):
    from workbench.ui.jobs import JobRunner

    runner = JobRunner(synchronous=False, processes=1)
    yield runner
    runner.shutdown()


def _ended(runner):
    outcomes = []
    runner.job_ended.connect(lambda job, outcome: outcomes.append(outcome))
    return outcomes


def test_partial_dependence_in_a_worker_equals_the_synchronous_run(demo_window, pool_runner, qtbot):
    from workbench.ui.results import Results

    ctx = demo_window.ctx
    state = ctx.focus.state
    here, there = [], []
    ctx.results.partial_dependence("B", state, "debt_to_income", here.append)
    assert len(here) == 1  # synchronous window: delivered at once
    results = Results(ctx.workspace, ctx.focus, pool_runner)
    job = results.partial_dependence("B", state, "debt_to_income", there.append)
    assert job is not None and job.where == "process"
    qtbot.waitUntil(lambda: bool(there), timeout=120_000)
    mine, theirs = here[0], there[0]
    np.testing.assert_array_equal(mine.rows, theirs.rows)
    np.testing.assert_array_equal(mine.result.grid, theirs.result.grid)
    np.testing.assert_allclose(mine.result.pd, theirs.result.pd, rtol=0, atol=1e-12)
    np.testing.assert_allclose(mine.result.ice, theirs.result.ice, rtol=0, atol=1e-12)


def test_pool_task_runs_the_same_in_the_calling_thread(demo_window):
    """Synchronous mode calls the PoolTask itself: Shared inputs and Rows resolve locally."""
    ws = demo_window.ctx.workspace
    rows = np.arange(40)
    task = PoolTask(engine_call, ("effects", "accumulated_local_effects", Shared(ws.adapter("A")),
                                  Rows(Shared(ws.frame), rows), "debt_to_income"),
                    {"rows": rows, "bins": 5})
    result = task(None, None)
    assert np.array_equal(result.rows, rows)


def test_cancel_stops_the_worker_not_only_the_window(pool_runner, qtbot):
    outcomes = _ended(pool_runner)
    done = []
    job = pool_runner.request(("slow",), "A slow job", PoolTask(slow_task, (60.0,)), done.append)
    assert job.where == "process"
    # wait until the worker is inside the task (it reports progress), then cancel
    qtbot.waitUntil(lambda: job.fraction > 0, timeout=60_000)
    pool_runner.cancel(job)
    qtbot.waitUntil(lambda: outcomes == ["cancelled"], timeout=5_000)
    qtbot.waitUntil(lambda: job.future.done(), timeout=5_000)  # the worker itself stopped
    assert isinstance(job.future.exception(), Cancelled)
    assert done == [] and pool_runner.running == [] and not pool_runner.has(("slow",))


def test_cancel_before_the_worker_starts_it(pool_runner, qtbot):
    outcomes = _ended(pool_runner)
    first = pool_runner.request(("first",), "first", PoolTask(slow_task, (60.0,)), lambda r: None)
    queued = pool_runner.request(("queued",), "queued", PoolTask(slow_task, (60.0,)), lambda r: None)
    pool_runner.cancel(queued)  # one worker, busy with the first: the second never starts
    qtbot.waitUntil(lambda: "cancelled" in outcomes, timeout=5_000)
    assert queued.future.cancelled()
    pool_runner.cancel(first)
    qtbot.waitUntil(lambda: outcomes == ["cancelled", "cancelled"], timeout=60_000)


def test_a_quick_task_does_not_wait_behind_a_heavy_one(pool_runner, qtbot):
    """One heavy worker, busy for a minute: a quick task (one row after an edit) still ends."""
    heavy = pool_runner.request(("heavy",), "heavy", PoolTask(slow_task, (60.0,)), lambda r: None)
    qtbot.waitUntil(lambda: heavy.fraction > 0, timeout=60_000)
    done = []
    edit = pool_runner.request(("edit",), "edit", PoolTask(slow_task, (0.05,), quick=True),
                               done.append)
    assert edit.where == "process"
    qtbot.waitUntil(lambda: done == ["finished"], timeout=60_000)
    assert heavy in pool_runner.running and not heavy.future.done()
    pool_runner.cancel(heavy)
    qtbot.waitUntil(lambda: not pool_runner.running, timeout=10_000)


def test_result_for_a_moved_focus_is_dropped_but_cached(pool_runner, qtbot):
    shown = []
    pool_runner.request(("quick",), "quick", PoolTask(slow_task, (0.05,)), shown.append,
                        relevant=lambda: False)
    qtbot.waitUntil(lambda: not pool_runner.running, timeout=60_000)
    assert shown == [] and pool_runner.dropped == 1
    assert pool_runner.cached(("quick",)) == "finished"


def test_input_error_in_the_worker_reaches_the_level(demo_window, pool_runner, qtbot):
    from workbench.ui.results import Results

    ctx = demo_window.ctx
    outcomes = _ended(pool_runner)
    errors = []
    results = Results(ctx.workspace, ctx.focus, pool_runner)
    results.partial_dependence("A", ctx.focus.state, "no_such_column", lambda r: None,
                               errors.append)
    qtbot.waitUntil(lambda: bool(errors), timeout=120_000)
    assert isinstance(errors[0], InputError) and "no_such_column" in str(errors[0])
    assert outcomes and outcomes[0].startswith("failed:")


def test_shared_inputs_are_written_once(demo_window, pool_runner):
    ws = demo_window.ctx.workspace
    lane = pool_runner.lane
    first = lane._ref(Shared(ws.frame))
    again = lane._ref(Shared(ws.frame))
    other = lane._ref(Shared(ws.adapter("A")))
    assert first == again and other.key != first.key


def test_warm_up_writes_the_models_and_data_and_paints_hidden_levels(demo_window, pool_runner,
                                                                     qtbot, monkeypatch):
    win = demo_window
    ws = win.ctx.workspace
    monkeypatch.setattr(win.ctx, "runner", pool_runner)  # worker processes, not synchronous
    grabbed = []
    for level in win.levels.values():
        monkeypatch.setattr(level, "grab", lambda level=level: grabbed.append(level.name))
    win.warm_levels()
    hidden = [name for name, level in win.levels.items() if not level.isVisible()]
    qtbot.waitUntil(lambda: len(grabbed) == len(hidden), timeout=10_000)
    assert grabbed == hidden and win.current_level().name not in grabbed
    written = pool_runner.lane._shared
    for obj in (ws.adapter("A"), ws.adapter("B"), ws.frame, ws.background_frame()):
        assert id(obj) in written
