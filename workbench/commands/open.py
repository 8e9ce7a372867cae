"""``workbench open MODEL DATA``: the window with these files open."""

from __future__ import annotations

from pathlib import Path


def register(sub) -> None:
    p = sub.add_parser("open", help="open the window with a model and a data file")
    p.add_argument("model", type=Path, help="fitted model file (.skops, or .joblib/.pkl with --trust)")
    p.add_argument("data", type=Path, nargs="?", help="data file (.csv or .parquet)")
    p.add_argument("--target", help="the column holding the actual outcome")
    p.add_argument("--second-model", type=Path, metavar="MODEL_B", help="a second model (B) to compare")
    p.add_argument("--trust", action="store_true",
                   help="open pickle/joblib files and unlisted skops types without asking "
                        "(only for files whose source you trust: opening them can run code)")
    p.add_argument("--snapshot", type=Path, metavar="DIR", help="save one PNG per level into DIR and exit")
    p.set_defaults(run=run)


def run(args) -> int:
    from workbench.ui.app import run_app

    return run_app(model=args.model, model_b=args.second_model, data=args.data, target=args.target,
                   trust=args.trust, snapshot_dir=args.snapshot)
