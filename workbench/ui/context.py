"""What every level is given: the open files, the focus, the job runner and the results."""

from __future__ import annotations

from dataclasses import dataclass

from workbench.ui.focus import Focus
from workbench.ui.jobs import JobRunner
from workbench.ui.results import Results
from workbench.ui.workspace import Workspace


@dataclass
class Context:
    workspace: Workspace
    focus: Focus
    runner: JobRunner
    results: Results

    @classmethod
    def create(cls, *, synchronous: bool = False) -> Context:
        workspace, focus = Workspace(), Focus()
        runner = JobRunner(synchronous=synchronous)
        return cls(workspace, focus, runner, Results(workspace, focus, runner))
