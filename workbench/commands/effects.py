"""``workbench effects MODEL DATA --feature F``: partial dependence, ICE and ALE of one column."""

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
from workbench.commands.rank import model_inputs
from workbench.engine.effects import (
    accumulated_local_effects,
    partial_dependence,
)


def register(sub) -> None:
    p = sub.add_parser(
        "effects", help="effect curve (partial dependence, ICE) and ALE of one column"
    )
    add_model_argument(p)
    add_data_arguments(p)
    p.add_argument("--feature", required=True, help="the input column to vary")
    p.add_argument(
        "--grid", type=int, default=20, help="grid points for a numeric column (default 20)"
    )
    p.add_argument("--ice-rows", type=int, default=200, help="ICE lines to keep (default 200)")
    p.add_argument("--bins", type=int, default=20, help="ALE bins (default 20)")
    add_scale(p)
    add_segment(p)
    p.add_argument("--seed", type=int, default=0, help="seed for the ICE rows (default 0)")
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def run(args) -> int:
    loaded, adapter = open_model(args)
    data, _ = open_data(args, adapter)
    x = model_inputs(adapter, data)
    curve = partial_dependence(
        adapter,
        x,
        args.feature,
        grid_size=args.grid,
        ice_rows=args.ice_rows,
        seed=args.seed,
        scale=args.scale,
    )
    ale = None
    if curve.kind == "numeric":
        a = accumulated_local_effects(adapter, x, args.feature, bins=args.bins, scale=args.scale)
        ale = {"edges": a.edges, "values": a.values, "counts": a.counts}
    payload = {
        "model": str(loaded.path),
        "model_sha256": loaded.sha256,
        "data": str(data.path),
        "data_sha256": data.sha256,
        "feature": curve.feature,
        "kind": curve.kind,
        "scale": curve.scale,
        "units": curve.units,
        "rows": curve.rows_used,
        "grid": list(curve.grid),
        "pd": curve.pd,
        "ale": ale,
        "segment": segment_of(data),
        # ICE rows as positions in the data file (the segment keeps them as its index)
        "ice": {"rows": data.frame.index.to_numpy()[curve.ice_rows], "values": curve.ice,
                "seed": curve.seed},
        "distribution": {
            "counts": curve.counts,
            "edges": None if curve.edges is None else curve.edges,
        },
    }
    if args.json:
        print_json(payload)
        return 0
    print(
        f"effect curve of {curve.feature} ({curve.kind}), mean over {curve.rows_used} rows "
        f"({segment_line(data)}), in {curve.units}"
    )
    rows = [
        {"value": v if curve.kind == "categorical" else float(v), "partial dependence": float(p)}
        for v, p in zip(curve.grid, curve.pd, strict=True)
    ]
    print_table(rows)
    if ale is not None:
        print(f"\naccumulated local effects (centred), {len(ale['counts'])} bins")
        print_table(
            [
                {"edge": float(e), "ALE": float(v)}
                for e, v in zip(ale["edges"], ale["values"], strict=True)
            ]
        )
    print(
        f"\n{len(curve.ice_rows)} ICE lines kept (see --json). The curves describe the model, "
        "not the world."
    )
    return 0
