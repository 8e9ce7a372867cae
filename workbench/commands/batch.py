"""``workbench batch MODEL DATA -o OUT.parquet``: SHAP values (and reason statements) for
every row of a data file, chunk by chunk, on this machine or a Dask cluster.

Each row of the output holds its row position (counting data rows from 0), the ID column when
given, the explained output, the probability of the class of interest (or the predicted value),
the base value, the additivity residual, one ``contrib__<feature>`` column per input column and,
with ``--reasons K``, the decision at the cutoff and ``reason_<i>_feature``,
``reason_<i>_contribution`` and ``reason_<i>_text``. Rows that cannot be scored go to
``OUT.rejects.csv`` with their row number and the reason.

A run that stops (killed, cancelled, the machine restarted) leaves ``OUT.parquet.parts/``; the
same command again skips the chunks already written. The parts are reused only when nothing
that decides a value has changed: the workbench version and the versions of numpy, pandas,
scikit-learn, scipy, numba and shap, the model file and the data file (their full SHA-256),
``--class`` and every option that changes the output (``--workers`` and ``--scheduler`` do
not). When anything differs the rerun discards the old parts and starts over, and says on
stderr what differed; to start fresh by hand, delete ``OUT.parquet.parts/``.
"""

from __future__ import annotations

from pathlib import Path

from workbench.commands.batch_progress import BatchProgressDisplay
from workbench.commands.case_why import load_wording, resolve_cutoff
from workbench.commands.common import add_model_argument, add_trust, open_model, print_json
from workbench.engine.attributions import METHOD_CHOICES
from workbench.engine.batch import BatchSettings, run_batch
from workbench.engine.errors import InputError
from workbench.engine.reasons import DEFAULT_REASONS
from workbench.report.render import CAUTIONS

DEFAULT_BACKGROUND = 100
DEFAULT_CHUNK_ROWS = 50_000


def register(sub) -> None:
    p = sub.add_parser("batch", help="SHAP values and reason statements for every row of a file, "
                                     "in chunks, resumable, on one machine or a Dask cluster")
    add_model_argument(p)
    p.add_argument("data", type=Path, help="data file (.csv or .parquet), read in chunks")
    p.add_argument("-o", "--output", type=Path, required=True, metavar="OUT.parquet",
                   help="the output file (Parquet); rejected rows go to OUT.rejects.csv")
    p.add_argument("--id-column", help="a column that identifies rows, copied to the output")
    p.add_argument("--class", dest="positive_class",
                   help="class of interest for classifiers (default: the last class)")
    p.add_argument("--background", type=int, default=DEFAULT_BACKGROUND, metavar="K",
                   help=f"background rows: a seeded uniform sample of the whole input "
                        f"(default {DEFAULT_BACKGROUND}), drawn once for every chunk")
    p.add_argument("--seed", type=int, default=0, help="seed of the background draw and of sampling")
    p.add_argument("--method", default="auto", metavar="METHOD",
                   help="auto (default), tree, tree-reference, linear, exact or sampling")
    p.add_argument("--form", default="interventional", metavar="FORM",
                   help="interventional (default) or path (tree methods only)")
    p.add_argument("--chunk-rows", type=int, default=DEFAULT_CHUNK_ROWS, metavar="N",
                   help=f"rows per chunk (default {DEFAULT_CHUNK_ROWS:,}); memory grows with it, "
                        "results do not change with it")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="K",
                       help="start K local worker processes (Dask, on 127.0.0.1)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="join a running Dask scheduler, e.g. tcp://10.0.0.5:8786")
    g = p.add_argument_group("reason statements")
    g.add_argument("--reasons", type=int, nargs="?", const=DEFAULT_REASONS, default=None,
                   metavar="K", help=f"state up to K reasons per adverse row (default "
                                     f"{DEFAULT_REASONS}, Regulation B commentary 9(b)(2)-1)")
    g.add_argument("--cutoff", type=float, default=None,
                   help="cutoff on the probability of the class of interest (or the predicted "
                        "value); default 0.5 for classifiers, required for regressors")
    g.add_argument("--adverse-if", choices=("above", "below"), default="above",
                   help="adverse side: scores at or above the cutoff (default) or below it")
    g.add_argument("--not-allowed", metavar="F,...",
                   help="features never stated as reasons (flagged when they move the score)")
    g.add_argument("--wording", type=Path, metavar="FILE.json",
                   help="reason wording: display names, units, number formats, sentences")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    add_trust(p)
    p.set_defaults(run=run)


def settings_from(args, adapter) -> BatchSettings:
    if args.method not in METHOD_CHOICES:
        raise InputError(f"unknown --method {args.method!r}; choose one of {', '.join(METHOD_CHOICES)}")
    if args.background < 1:
        raise InputError(f"--background must be at least 1 row, not {args.background}")
    if args.chunk_rows < 1:
        raise InputError(f"--chunk-rows must be at least 1, not {args.chunk_rows}")
    cutoff = None
    templates = None
    not_allowed: tuple[str, ...] = ()
    if args.reasons is not None:
        cutoff, _ = resolve_cutoff(args, adapter)
        templates = load_wording(args.wording)
        not_allowed = tuple(t.strip() for t in (args.not_allowed or "").split(",") if t.strip())
    return BatchSettings(background_size=args.background, seed=args.seed, method=args.method,
                         form=args.form, chunk_rows=args.chunk_rows, id_column=args.id_column,
                         reasons=args.reasons, cutoff=cutoff, adverse_if=args.adverse_if,
                         not_allowed=not_allowed, templates=templates)


def run(args) -> int:
    loaded, adapter = open_model(args)
    settings = settings_from(args, adapter)
    display = BatchProgressDisplay()
    metadata = {"model_file": str(loaded.path), "data_file": str(args.data)}
    if settings.reasons:
        metadata["cautions"] = list(CAUTIONS)
    try:
        summary = run_batch(adapter, args.data, args.output, settings=settings,
                            model_sha256=loaded.sha256, workers=args.workers,
                            scheduler=args.scheduler, metadata=metadata, watch=display,
                            on_event=display.message)
    finally:
        display.close()
    if args.json:
        payload = summary.as_dict()
        if settings.reasons:
            payload["cautions"] = list(CAUTIONS)
        print_json(payload)
    else:
        print_summary(summary)
    return 0


def print_summary(summary) -> None:
    print(f"wrote {summary.output}: {summary.rows_written:,} of {summary.rows_read:,} rows "
          f"explained, {summary.rows_rejected:,} rejected"
          + (f" (see {summary.rejects})" if summary.rejects else ""))
    resumed = f", {summary.chunks_resumed} resumed from an earlier run" if summary.chunks_resumed else ""
    print(f"{summary.chunks} chunk(s) of up to {summary.settings.chunk_rows:,} rows{resumed}; "
          f"ran {summary.executor} in {summary.seconds:.1f} s "
          f"({summary.seconds_explaining:.1f} s explaining)")
    print(f"method {summary.method} ({summary.form}) against {summary.background_rows} background "
          f"rows drawn uniformly from the whole input with seed {summary.seed}; "
          f"base value {summary.base_value:.6g}")
    for note in summary.notes:
        print(f"note: {note}")
    if summary.settings.reasons:
        print(f"reasons: up to {summary.settings.reasons} per row, adverse "
              f"{'at or above' if summary.settings.adverse_if == 'above' else 'below'} "
              f"the cutoff {summary.settings.cutoff:g}")
        for caution in CAUTIONS:
            print(f"caution: {caution}")
    else:
        print(f"caution: {CAUTIONS[0]}")
