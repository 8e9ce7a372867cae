"""Options and steps shared by the headless commands."""

from __future__ import annotations

import dataclasses
import json
import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.engine.adapter import ModelAdapter
from workbench.engine.effects import SCALES
from workbench.engine.errors import InputError
from workbench.engine.loading import Dataset, LoadedModel, load_data, load_model
from workbench.engine.segments import describe_segment, parse_condition, segment_mask
from workbench.engine.validation import has_errors, validate


def add_model_argument(p, name: str = "model") -> None:
    p.add_argument(name, type=Path, help="fitted model file (.skops; .joblib/.pkl only with --trust)")


def add_trust(p) -> None:
    p.add_argument("--trust", action="store_true",
                   help="open pickle/joblib files and skops types not trusted by default "
                        "(only for files whose source you trust: opening them can run code)")


def add_data_arguments(p, *, required: bool = True, target_required: bool = False) -> None:
    if required:
        p.add_argument("data", type=Path, help="data file (.csv or .parquet)")
    else:
        p.add_argument("data", type=Path, nargs="?", help="data file (.csv or .parquet)")
    p.add_argument("--target", required=target_required, help="the column holding the actual outcome")
    p.add_argument("--id-column", help="a column that identifies rows (kept, not scored)")
    p.add_argument("--class", dest="positive_class", help="class of interest for classifiers (default: the last class)")


def add_segment(p) -> None:
    p.add_argument(
        "--segment",
        action="append",
        metavar="'COLUMN OP VALUE'",
        help="only the rows where the condition holds, OP one of = != < <= > >= "
        "(for example --segment 'region = North'); repeat it to require several",
    )


def add_scale(p) -> None:
    p.add_argument(
        "--scale",
        choices=SCALES,
        default="output",
        help="output: the explained output (log-odds, log of the mean, value); "
        "response: probability or predicted mean (default output)",
    )


def add_json(p) -> None:
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")


def open_model(args, attr: str = "model") -> tuple[LoadedModel, ModelAdapter]:
    loaded = load_model(getattr(args, attr), trust=getattr(args, "trust", False))
    positive = getattr(args, "positive_class", None)
    adapter = ModelAdapter(loaded.estimator)
    if positive is not None:
        adapter = adapter.with_class(positive)
    return loaded, adapter


def open_data(args, adapter: ModelAdapter | None = None, *, strict: bool = True) -> tuple[Dataset, list]:
    """Load the data file; with an adapter, validate it and stop on errors when ``strict``."""
    data = load_data(args.data, target=getattr(args, "target", None), id_column=getattr(args, "id_column", None))
    findings = []
    if adapter is not None:
        findings = validate(adapter, data.frame, target=data.target, id_column=data.id_column)
        if strict and has_errors(findings):
            first = next(f for f in findings if f.level == "error")
            more = sum(f.level == "error" for f in findings) - 1
            extra = f" (and {more} more problem(s); see `workbench info`)" if more else ""
            raise InputError(f"{args.data}: {first.message}{extra}")
    conditions = tuple(parse_condition(t) for t in getattr(args, "segment", None) or ())
    if conditions:
        data = in_segment(data, conditions)
    return data, findings


def in_segment(data: Dataset, conditions) -> Dataset:
    """The data cut to the segment's rows. The frame keeps the file's row positions as its index,
    and ``read_options["segment"]`` says which rows these are (for the output)."""
    mask = segment_mask(data.frame, conditions)
    where = describe_segment(conditions)
    if not mask.any():
        raise InputError(f"the segment {where} holds no rows of {data.path}")
    segment = {"where": where, "rows": int(mask.sum()), "of": data.n_rows}
    return dataclasses.replace(data, frame=data.frame.loc[mask],
                               read_options={**data.read_options, "segment": segment})


def segment_of(data: Dataset) -> dict | None:
    """``{"where", "rows", "of"}`` for data cut to a segment, None for all rows."""
    return data.read_options.get("segment")


def segment_line(data: Dataset) -> str:
    """A line for the readable output: which rows were used."""
    seg = segment_of(data)
    if seg is None:
        return f"all {data.n_rows} rows"
    return f"segment {seg['where']}: {seg['rows']} of {seg['of']} rows"


def to_plain(obj):
    """numpy/pandas values made JSON-safe (NaN and infinities become null)."""
    if isinstance(obj, dict):
        return {str(k): to_plain(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_plain(obj.tolist())
    if isinstance(obj, np.generic):
        return to_plain(obj.item())
    if isinstance(obj, float):
        return None if math.isnan(obj) or math.isinf(obj) else obj
    if isinstance(obj, Path):
        return str(obj)
    if obj is pd.NA or obj is pd.NaT:
        return None
    if isinstance(obj, pd.Timestamp):
        return obj.isoformat()
    return obj


def print_json(payload) -> None:
    json.dump(to_plain(payload), sys.stdout, indent=2, ensure_ascii=False)
    sys.stdout.write("\n")


def print_table(rows: list[dict], columns: list[str] | None = None, *, floatfmt: str = "{:.4g}") -> None:
    """A plain aligned text table."""
    if not rows:
        print("(nothing)")
        return
    columns = columns or list(rows[0])

    def fmt(v):
        if isinstance(v, float | np.floating):
            return floatfmt.format(v)
        return str(v)

    cells = [[fmt(r.get(c, "")) for c in columns] for r in rows]
    widths = [max(len(c), *(len(row[i]) for row in cells)) for i, c in enumerate(columns)]
    print("  ".join(c.ljust(w) for c, w in zip(columns, widths, strict=True)))
    print("  ".join("-" * w for w in widths))
    for row in cells:
        print("  ".join(v.ljust(w) for v, w in zip(row, widths, strict=True)))


def row_position(args, data: Dataset) -> int:
    n = data.n_rows
    if not 0 <= args.row < n:
        raise InputError(f"row {args.row} is outside the data ({n} rows; rows are numbered 0 to {n - 1})")
    return int(args.row)
