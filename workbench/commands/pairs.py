"""``workbench pairs MODEL DATA``: Friedman's H-statistics and associations of the input columns.

"order" and "blocks" come from clustering the association matrix of the input columns
(associations.cluster_order); H pairs are listed strongest first, only among the screened columns.
"""

from __future__ import annotations

from workbench.commands.common import (
    add_data_arguments,
    add_json,
    add_model_argument,
    add_scale,
    add_segment,
    add_trust,
    open_data,
    open_model,
    print_json,
    print_table,
    segment_line,
    segment_of,
)
from workbench.commands.rank import association_blocks, model_inputs
from workbench.engine.errors import InputError
from workbench.engine.interactions import h_statistics

H_BACKGROUND = 100  # rows each partial dependence is averaged over, by default


def background_rows(text: str) -> int | None:
    """--background as h_statistics takes it: a number of rows, or None for the whole sample."""
    if str(text).strip().lower() == "all":
        return None
    try:
        rows = int(text)
    except ValueError:
        raise InputError(f"--background must be a whole number of rows or 'all', not {text!r}") from None
    if rows < 2:
        raise InputError(f"--background needs at least 2 rows, not {rows}")
    return rows


def register(sub) -> None:
    p = sub.add_parser(
        "pairs", help="interaction strength (H-statistic) and association of column pairs"
    )
    add_model_argument(p)
    add_data_arguments(p)
    p.add_argument(
        "--sample", type=int, default=300, help="rows in the H-statistic sample (default 300)"
    )
    p.add_argument(
        "--screen",
        type=int,
        default=8,
        help="pairs only among this many columns with the strongest overall H (default 8)",
    )
    p.add_argument(
        "--background",
        default=str(H_BACKGROUND),
        help="average each partial dependence over this many of the sample rows, a Monte Carlo "
        "estimate of the same functions at about half the model calls; 'all' averages over "
        f"the whole sample, as Friedman and Popescu do (default {H_BACKGROUND})",
    )
    p.add_argument("--seed", type=int, default=0, help="seed for the row sample (default 0)")
    add_scale(p)
    add_segment(p)
    p.add_argument(
        "--block-threshold",
        type=float,
        default=0.5,
        help="association strength that joins columns into a block (default 0.5)",
    )
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def run(args) -> int:
    loaded, adapter = open_model(args)
    data, _ = open_data(args, adapter)
    x = model_inputs(adapter, data)
    res = h_statistics(
        adapter,
        x,
        sample=args.sample,
        screen=args.screen,
        seed=args.seed,
        scale=args.scale,
        background=background_rows(args.background),
    )
    assoc, clusters = association_blocks(adapter, x, args.block_threshold)
    index = {f: i for i, f in enumerate(res.features)}
    payload = {
        "model": str(loaded.path),
        "model_sha256": loaded.sha256,
        "data": str(data.path),
        "data_sha256": data.sha256,
        "features": res.features,
        "order": clusters.order,
        "sample": res.sample,
        "screen": res.screen,
        "seed": res.seed,
        "background": res.background,
        "scale": res.scale,
        "segment": segment_of(data),
        "units": res.units,
        "screened": res.screened,
        "h_overall": dict(zip(res.features, res.h_overall, strict=True)),
        "h2_overall": dict(zip(res.features, res.h2_overall, strict=True)),
        # strength: the unnormalised pairwise H, the rms of the interaction part in output units
        "h_pairs": [
            {"a": a, "b": b, "h": h, "h2": h * h,
             "strength": float(res.pair_strength[index[a], index[b]])}
            for a, b, h in res.ranked_pairs()
        ],
        "association": {"features": assoc.features, "matrix": assoc.matrix},
        "blocks": clusters.blocks,
    }
    if args.json:
        print_json(payload)
        return 0
    print(
        f"Friedman's H-statistic on a sample of {res.sample} rows (seed {res.seed}; "
        f"{segment_line(data)}), {res.units}; "
        f"pairs among the {len(res.screened)} strongest columns"
    )
    print_table(
        [
            {"feature": f, "overall H": float(h)}
            for f, h in sorted(payload["h_overall"].items(), key=lambda kv: -kv[1])
        ]
    )
    print()
    print_table([
        {"pair": f"{p['a']} x {p['b']}", "H": float(p["h"]), f"strength ({res.units})": p["strength"]}
        for p in payload["h_pairs"]
    ])
    print("H is the pair's interaction as a share of its joint effect; strength is the same "
          "interaction in the output's units (root mean square), which ranks weak pairs lower.")
    if clusters.blocks:
        print(
            "\nblocks of associated columns: " + "; ".join(" + ".join(b) for b in clusters.blocks)
        )
    return 0
