"""``workbench rank MODEL DATA --target COL``: permutation importance of every input column."""

from __future__ import annotations

from workbench.commands.common import (
    add_data_arguments,
    add_json,
    add_model_argument,
    add_segment,
    add_trust,
    open_data,
    open_model,
    print_json,
    print_table,
    segment_line,
    segment_of,
)
from workbench.commands.large_data import add_sample_option, take_sample
from workbench.engine.associations import associations, cluster_order
from workbench.engine.effects import model_frame
from workbench.engine.errors import InputError
from workbench.engine.importance import permutation_importance
from workbench.engine.metrics import default_metric

DEFAULT_SAMPLE = 50_000  # shuffling every column several times scores the rows many times


def register(sub) -> None:
    p = sub.add_parser("rank", help="rank the input columns by permutation importance")
    add_model_argument(p)
    add_data_arguments(p, target_required=True)
    p.add_argument(
        "--metric",
        help="auc, log_loss, brier (classifiers); rmse, mae (regressors); "
        "poisson_deviance (counts); default by task",
    )
    p.add_argument("--repeats", type=int, default=5, help="shuffles per column (default 5)")
    p.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    p.add_argument(
        "--groups",
        choices=("auto", "none"),
        default="auto",
        help="auto: also permute blocks of associated columns together (default)",
    )
    p.add_argument(
        "--group-threshold",
        type=float,
        default=0.5,
        help="association strength that joins columns into a block (default 0.5)",
    )
    p.add_argument("--exposure", help="count models: column holding the exposure")
    add_sample_option(p, DEFAULT_SAMPLE, "rows ranked (importance and blocks)", "--max-rows")
    add_segment(p)
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def model_inputs(adapter, data, frame=None):
    """The model's input columns of the data (for unnamed models: all but target and ID)."""
    frame = data.frame if frame is None else frame
    if not adapter.named_columns:
        frame = frame.drop(columns=[c for c in (data.target, data.id_column) if c is not None])
    return model_frame(adapter, frame)


def association_blocks(adapter, x, threshold: float = 0.5):
    """Associations of the model's input columns and their clustering into blocks."""
    assoc = associations(x, categorical=[c for c in adapter.categorical_columns if c in x.columns])
    return assoc, cluster_order(assoc.strength, assoc.features, threshold=threshold)


def run(args) -> int:
    loaded, adapter = open_model(args)
    data, _ = open_data(args, adapter)
    frame = data.frame
    present = data.y.notna().to_numpy()
    dropped = int((~present).sum())
    if dropped:
        frame = frame.loc[present]
    frame, sampled = take_sample(frame, args.sample, args.seed)  # one sample for everything
    exposure = None
    if args.exposure is not None:
        if args.exposure not in frame.columns:
            raise InputError(f"{args.data}: no exposure column '{args.exposure}'")
        exposure = frame[args.exposure].to_numpy(dtype=float)
    x = model_inputs(adapter, data, frame)
    blocks = []
    if args.groups == "auto":
        blocks = association_blocks(adapter, x, args.group_threshold)[1].blocks
    result = permutation_importance(
        adapter,
        x,
        frame[data.target],
        metric=args.metric,
        repeats=args.repeats,
        seed=args.seed,
        groups=blocks,
        exposure=exposure,
    )
    payload = {
        "model": str(loaded.path),
        "model_sha256": loaded.sha256,
        "data": str(data.path),
        "data_sha256": data.sha256,
        "metric": result.metric,
        "higher_is_better": result.greater_is_better,
        "baseline": result.baseline,
        "repeats": result.repeats,
        "seed": result.seed,
        "rows": result.rows_used,
        "rows_without_target": dropped,
        "sample": sampled.as_dict(),
        "segment": segment_of(data),
        "features": [
            {
                "feature": result.features[i],
                "importance": result.mean[i],
                "spread": result.spread[i],
            }
            for i in result.order
        ],
        "groups": [
            {"features": g.features, "importance": g.mean, "spread": g.spread}
            for g in sorted(result.groups, key=lambda g: -g.mean)
        ],
    }
    if args.json:
        print_json(payload)
        return 0
    print(
        f"permutation importance: worsening of {result.metric} when a column is shuffled "
        f"({result.repeats} repeats, seed {result.seed}, {result.rows_used} rows; "
        f"{segment_line(data)}; {sampled.line()})"
    )
    print(
        f"{result.metric} on the data as it is: {result.baseline:.4g}"
        + (
            ""
            if args.metric
            else f" (default for a {adapter.task} model: {default_metric(adapter.task)})"
        )
    )
    print_table(
        [
            {
                "feature": r["feature"],
                "importance": float(r["importance"]),
                "spread": float(r["spread"]),
            }
            for r in payload["features"]
        ]
    )
    if payload["groups"]:
        print("\nblocks of associated columns shuffled together")
        print_table(
            [
                {
                    "block": " + ".join(g["features"]),
                    "importance": float(g["importance"]),
                    "spread": float(g["spread"]),
                }
                for g in payload["groups"]
            ]
        )
    return 0


__all__ = ["association_blocks", "model_inputs", "register", "run"]
