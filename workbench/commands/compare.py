"""``workbench compare MODEL_A MODEL_B DATA --target COL``: champion against challenger."""

from __future__ import annotations

from pathlib import Path

from workbench.commands.common import (
    add_data_arguments,
    add_json,
    add_trust,
    open_data,
    open_model,
    print_json,
    print_table,
)
from workbench.engine.compare import compare_versions
from workbench.engine.errors import InputError
from workbench.engine.validation import has_errors, validate

CAUTION = ("Read with care: the swap table describes how two models decide, not the people "
           "behind the rows; decisions about people must be reviewed by compliance under "
           "local law. Not legal advice.")


def register(sub) -> None:
    p = sub.add_parser("compare", help="champion against challenger on the same rows")
    p.add_argument("model_a", metavar="MODEL_A", type=Path, help="the champion's model file")
    p.add_argument("model_b", metavar="MODEL_B", type=Path, help="the challenger's model file")
    add_data_arguments(p, target_required=True)
    p.add_argument("--cutoff", type=float, help="one cutoff for both models (response scale)")
    p.add_argument("--cutoff-a", type=float, help="the champion's own cutoff (with --cutoff-b)")
    p.add_argument("--cutoff-b", type=float, help="the challenger's own cutoff (with --cutoff-a)")
    p.add_argument("--adverse-if", choices=("above", "below"), default="above",
                   help="the decision is adverse when the score is at or above the cutoff "
                        "(default), or below it")
    p.add_argument("--resamples", type=int, default=1000,
                   help="paired bootstrap resamples (default 1000)")
    p.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    p.add_argument("--moved-threshold", type=float, default=0.05,
                   help="a row moved when |score B - score A| exceeds this (default 0.05)")
    p.add_argument("--bands", type=int, default=10, help="double lift bands (default 10)")
    p.add_argument("--weight", help="column of sample weights (count models: the exposure)")
    p.add_argument("--importance-repeats", type=int, default=3,
                   help="shuffles per column for the ranking shift (default 3)")
    p.add_argument("--importance-rows", type=int, default=5000,
                   help="rows shuffled for the ranking shift (default 5000)")
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def run(args) -> int:
    loaded_a, adapter_a = open_model(args, "model_a")
    loaded_b, adapter_b = open_model(args, "model_b")
    data, _ = open_data(args, adapter_a)
    findings = validate(adapter_b, data.frame, target=data.target, id_column=data.id_column)
    if has_errors(findings):
        first = next(f for f in findings if f.level == "error")
        raise InputError(f"{args.data}: model B: {first.message}")
    frame = data.frame
    present = data.y.notna().to_numpy()
    dropped = int((~present).sum())
    if dropped:
        frame = frame.loc[present].reset_index(drop=True)
    weight = None
    if args.weight is not None:
        if args.weight not in frame.columns:
            raise InputError(f"{args.data}: no weight column '{args.weight}'")
        weight = frame[args.weight].to_numpy(dtype=float)
    c = compare_versions(adapter_a, adapter_b, frame, frame[data.target], cutoff=args.cutoff,
                         cutoff_a=args.cutoff_a, cutoff_b=args.cutoff_b,
                         adverse_if=args.adverse_if, moved_threshold=args.moved_threshold,
                         resamples=args.resamples, seed=args.seed, bands=args.bands,
                         weight=weight, importance_repeats=args.importance_repeats,
                         importance_rows=args.importance_rows)
    payload = build_payload(c)
    payload.update({
        "model_a": str(loaded_a.path), "model_a_sha256": loaded_a.sha256,
        "model_b": str(loaded_b.path), "model_b_sha256": loaded_b.sha256,
        "data": str(data.path), "data_sha256": data.sha256, "rows_without_target": dropped,
    })
    if args.json:
        print_json(payload)
        return 0
    print_readable(c, payload, dropped)
    return 0


def build_payload(c) -> dict:
    """The comparison as plain data (the ``--json`` output, also used by the dossier)."""
    names = list(c.difference)
    shift = c.ranking
    swap = None
    if c.swap is not None:
        swap = {**c.swap.counts, "bad_rates": dict(c.swap.bad_rate),
                "labelled": dict(c.swap.labelled), "cutoff_a": c.swap.cutoff_a,
                "cutoff_b": c.swap.cutoff_b, "adverse_if": c.swap.adverse_if}
    lift = []
    if c.double_lift is not None:
        d = c.double_lift
        lift = [{"band": k + 1, "actual": d.actual[k], "predicted_a": d.pred_a[k],
                 "predicted_b": d.pred_b[k], "actual_relative": d.actual_relative[k],
                 "predicted_a_relative": d.pred_a_relative[k],
                 "predicted_b_relative": d.pred_b_relative[k], "weight": d.weight[k],
                 "ratio_low": d.ratio_low[k], "ratio_high": d.ratio_high[k]}
                for k in range(d.bands)]
    return {
        "task": c.task, "units": c.units, "rows": c.n, "resamples": c.resamples, "seed": c.seed,
        "columns_only_a": list(c.compatibility.only_a),
        "columns_only_b": list(c.compatibility.only_b),
        "metrics": {
            "a": {k: c.metrics_a[k] for k in names},
            "b": {k: c.metrics_b[k] for k in names},
            "difference": dict(c.difference),
            "interval": {k: {"low": c.intervals[k].low, "high": c.intervals[k].high,
                             "level": c.intervals[k].level, "valid": c.intervals[k].valid}
                         for k in names},
            "higher_is_better": dict(c.higher_is_better),
        },
        "delong": None if c.delong is None else {
            "z": c.delong.z, "p": c.delong.p_value, "auc_a": c.delong.auc_a,
            "auc_b": c.delong.auc_b, "positives": c.delong.positives,
            "negatives": c.delong.negatives},
        "agreement": {"spearman": c.spearman, "kendall": c.kendall,
                      "moved_share": c.moved_share, "moved_threshold": c.moved_threshold},
        "swap": swap,
        "ranking_shift": [{"feature": shift.features[i], "importance_a": shift.importance_a[i],
                           "importance_b": shift.importance_b[i], "rank_a": shift.rank_a[i],
                           "rank_b": shift.rank_b[i], "used_a": shift.used_a[i],
                           "used_b": shift.used_b[i]} for i in shift.order],
        "ranking_metric": shift.metric,
        "double_lift": lift,
        "notes": list(c.notes),
    }


def print_readable(c, payload: dict, dropped: int) -> None:
    print(f"champion (A) against challenger (B): {c.n} rows, {c.task} models, scores in "
          f"{c.units}; differences are B - A")
    if dropped:
        print(f"{dropped} row(s) without the target were left out")
    m = payload["metrics"]
    level = int(round(100 * next(iter(c.intervals.values())).level))
    print(f"\nmetrics (paired bootstrap, {c.resamples} resamples, seed {c.seed})")
    print_table([{"metric": k, "A": float(m["a"][k]), "B": float(m["b"][k]),
                  "B - A": float(m["difference"][k]),
                  f"{level}% interval": f"{m['interval'][k]['low']:.4g} to "
                                        f"{m['interval'][k]['high']:.4g}",
                  "better": "higher" if m["higher_is_better"][k] else "lower"}
                 for k in m["a"]])
    if c.delong is not None:
        print(f"DeLong test of equal AUC: z = {c.delong.z:.3f}, two-sided p "
              f"{p_text(c.delong.p_value)} ({c.delong.positives} positives, "
              f"{c.delong.negatives} negatives)")
    a = payload["agreement"]
    print(f"\nscore agreement: Spearman {a['spearman']:.4f}, Kendall {a['kendall']:.4f}; "
          f"{100 * a['moved_share']:.1f}% of rows moved by more than {a['moved_threshold']:g}")
    if c.swap is not None:
        s = c.swap
        print(f"\nswap table (A's cutoff {s.cutoff_a:g}, B's cutoff {s.cutoff_b:g}, "
              f"adverse {s.adverse_if} the cutoff)")
        print_table([
            {"": "A accepts", "B accepts": _cell(s, "both_accept"),
             "B declines": _cell(s, "swap_out")},
            {"": "A declines", "B accepts": _cell(s, "swap_in"),
             "B declines": _cell(s, "both_decline")}])
        print(CAUTION)
    print(f"\nranking shift (permutation importance, {payload['ranking_metric']}; "
          "largest rank change first)")
    print_table([{"feature": r["feature"], "importance A": float(r["importance_a"]),
                  "importance B": float(r["importance_b"]), "rank A": r["rank_a"],
                  "rank B": r["rank_b"]} for r in payload["ranking_shift"]])
    if payload["double_lift"]:
        print("\ndouble lift chart (bands of equal weight by the ratio B / A, lowest first)")
        print_table([{"band": r["band"], "actual": float(r["actual"]),
                      "predicted A": float(r["predicted_a"]),
                      "predicted B": float(r["predicted_b"])} for r in payload["double_lift"]])
    for note in c.notes:
        print(f"note: {note}")


def p_text(p: float) -> str:
    """``= 0.0312``, or ``< 1e-300`` where the normal tail underflows to zero."""
    return "< 1e-300" if p == 0 else f"= {p:.3g}"


def _cell(swap, cell: str) -> str:
    rate = swap.bad_rate[cell]
    shown = "" if rate != rate else f", bad rate {100 * rate:.1f}%"  # NaN: no labels
    return f"{swap.counts[cell]}{shown}"


__all__ = ["build_payload", "register", "run"]
