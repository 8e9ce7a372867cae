"""Draws after results: one per event-loop turn, held while the widget is hidden."""

from PySide6.QtWidgets import QLabel

from workbench.ui.draw_queue import DrawQueue, draws_waiting


def test_draws_wait_for_the_widget_to_be_shown_and_run_one_per_turn(qtbot):
    label = QLabel("nothing yet")
    qtbot.addWidget(label)
    queue = DrawQueue(label)
    seen = []

    def draw(text):
        return lambda: (seen.append(text), label.setText(text))

    queue.later(draw("first"))
    queue.later(draw("second"))
    qtbot.wait(30)
    assert label.text() == "nothing yet" and not draws_waiting()  # hidden: nothing drawn

    label.show()
    qtbot.waitUntil(lambda: label.text() == "second", timeout=2000)
    assert seen == ["first", "second"] and not draws_waiting()

    queue.later(draw("stale"))
    queue.clear()  # the level moved on before the draw ran
    qtbot.wait(30)
    assert label.text() == "second"


def test_a_synchronous_queue_draws_at_once(qtbot):
    label = QLabel("nothing yet")
    qtbot.addWidget(label)
    DrawQueue(label, synchronous=True).later(lambda: label.setText("drawn"))
    assert label.text() == "drawn"


def test_the_job_area_keeps_its_height_as_jobs_start_and_end(qtbot):
    """A job starting or ending must not resize the window's plots (the area's height stays)."""
    from workbench.ui.job_area import JobArea
    from workbench.ui.jobs import Job, JobRunner

    runner = JobRunner(synchronous=True)
    area = JobArea(runner)
    qtbot.addWidget(area)
    area.show()
    height = area.height()
    jobs = [Job(("k", i), f"job {i} with a long title " * 3, lambda p, c: None) for i in range(5)]
    for job in jobs:
        runner.job_started.emit(job)
    qtbot.wait(10)
    assert len(area.rows) == 5 and area.height() == height
    assert area.rows[jobs[0].id].title.toolTip() == jobs[0].title
    for job in jobs:
        runner.job_ended.emit(job, "done")
    qtbot.wait(10)
    assert area.rows == {} and area.height() == height
    assert area.last.text() == f"Last: {jobs[-1].title} — done"
