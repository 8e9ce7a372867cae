"""``workbench`` / ``workbench gui``: start the window."""

from __future__ import annotations


def register(sub) -> None:
    p = sub.add_parser("gui", help="start the window (the default)")
    p.set_defaults(run=run)


def run(args) -> int:
    from workbench.ui.app import run_app

    return run_app()
