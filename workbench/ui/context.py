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


def project_of(ctx):
    """The project of this window (created on first use and kept on the context)."""
    from workbench.session.project import Project

    project = getattr(ctx, "project", None)
    if project is None:
        project = Project()
        ctx.project = project
    return project
