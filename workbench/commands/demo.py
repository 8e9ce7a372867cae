"""``workbench demo``: the built-in demo (the window), ``--snapshot DIR`` to save a PNG per level,
or ``--write DIR`` to write its files."""

from __future__ import annotations

from pathlib import Path


def register(sub) -> None:
    p = sub.add_parser("demo", help="open the built-in lending demo, or write its files with --write DIR")
    p.add_argument("--write", type=Path, metavar="DIR", help="write the demo models and data into DIR and exit")
    p.add_argument("--seed", type=int, default=7, help="scenario seed (default 7)")
    p.add_argument("--snapshot", type=Path, metavar="DIR",
                   help="open the demo, wait for its work, save one PNG per level into DIR and exit")
    p.set_defaults(run=run)


def run(args) -> int:
    from demo_models.write import write_demo

    if args.write is not None:
        paths = write_demo(args.write, seed=args.seed)
        for name, path in paths.items():
            print(f"{name:<28} {path}")
        return 0
    from workbench.ui.app import run_app

    return run_app(demo=True, snapshot_dir=args.snapshot)
