"""``workbench case MODEL DATA --row N``: one row's SHAP values per raw input column.

The payload is built by :func:`case_payload` so that other views of a case (reason statements,
nearest flip, the case sheet) can extend the same dictionary.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from workbench.commands.case_why import add_why_arguments, extend_payload, print_why
from workbench.commands.common import (
    add_data_arguments,
    add_json,
    add_model_argument,
    add_trust,
    open_data,
    open_model,
    print_json,
    print_table,
    row_position,
)
from workbench.engine.attributions import METHOD_CHOICES, Attributions, explain
from workbench.engine.errors import InputError
from workbench.engine.loading import Dataset

DEFAULT_BACKGROUND = 100
CAUTION = "These contributions describe the model, not the world."


def register(sub) -> None:
    p = sub.add_parser(
        "case", help="explain one row: the contribution of each input column (SHAP values)"
    )
    add_model_argument(p)
    add_data_arguments(p)
    p.add_argument(
        "--row", type=int, required=True, help="the row to explain, counting data rows from 0"
    )
    p.add_argument(
        "--background",
        default=None,
        metavar="K|all",
        help=f"background rows drawn from the data file (default {DEFAULT_BACKGROUND}, "
        "or every row when the file has fewer)",
    )
    p.add_argument(
        "--method",
        default="auto",
        metavar="METHOD",
        help="auto (default), tree, tree-reference (shap's TreeExplainer), linear, exact "
        "or sampling",
    )
    p.add_argument(
        "--form",
        default="interventional",
        metavar="FORM",
        help="interventional (default: against the background) or path (tree methods only)",
    )
    p.add_argument(
        "--seed", type=int, default=0, help="seed of the background draw and of sampling"
    )
    p.add_argument(
        "--permutations",
        type=int,
        default=None,
        help="orders of columns for the sampling method (default 64)",
    )
    add_why_arguments(p)
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def background_size(text: str | None, n_rows: int) -> int | str:
    """The --background option as explain() takes it (InputError for anything else)."""
    if text is None:
        return min(DEFAULT_BACKGROUND, n_rows)
    text = str(text).strip().lower()
    if text == "all":
        return "all"
    if not text.isdigit() or int(text) < 1:
        raise InputError(f"--background must be a whole number of rows or 'all', not {text!r}")
    return int(text)


def run(args) -> int:
    if args.method not in METHOD_CHOICES:
        raise InputError(
            f"unknown --method {args.method!r}; choose one of {', '.join(METHOD_CHOICES)}"
        )
    loaded, adapter = open_model(args)
    data, _ = open_data(args, adapter)
    row = row_position(args, data)
    size = background_size(args.background, data.n_rows)
    attributions = explain(
        adapter,
        data.frame.iloc[[row]],
        method=args.method,
        form=args.form,
        background=data.frame,
        background_size=size,
        seed=args.seed,
        permutations=args.permutations,
    )
    payload = case_payload(adapter, data, row, attributions)
    payload["model"] = {"file": str(loaded.path), "sha256": loaded.sha256}
    payload["data"] = {"file": str(data.path), "sha256": data.sha256}
    extend_payload(
        args,
        payload,
        adapter=adapter,
        loaded=loaded,
        data=data,
        row=row,
        attributions=attributions,
        background_size=size,
    )
    if args.json:
        print_json(payload)
    else:
        print_case(payload)
        print_why(payload)
    return 0


def _plain(value):
    if value is None or (not isinstance(value, str) and pd.isna(value)):
        return None
    return value.item() if isinstance(value, np.generic) else value


def _attribution(attributions: Attributions, x: pd.DataFrame, i: int, j: int) -> dict:
    feature = attributions.features[j]
    item = {
        "feature": feature,
        "value": _plain(x[feature].iloc[0]) if feature in x else None,
        "contribution": float(attributions.values[i, j]),
    }
    if attributions.standard_error is not None:
        item["standard_error"] = float(attributions.standard_error[i, j])
    return item


def case_payload(
    adapter, data: Dataset | pd.DataFrame, row: int, attributions: Attributions
) -> dict:
    """Everything the case command shows for data row ``row`` (a position, counting from 0).

    ``attributions`` explains that row alone, or every row of ``data`` (then row ``row`` is used).
    """
    frame = data.frame if isinstance(data, Dataset) else data
    i = 0 if attributions.n_rows == 1 else row
    x = frame.iloc[[row]]
    probability = adapter.probability(x)
    contributions = attributions.values[i]
    order = np.argsort(-np.abs(contributions), kind="stable")
    payload = {
        "row": int(row),
        "task": adapter.task,
        "output": attributions.output_kind,
        "prediction": {
            "output": float(attributions.output[i]),
            "probability": None if probability is None else float(probability[0]),
            "response": float(adapter.response(x)[0]),
        },
        "base_value": float(attributions.base_value),
        "attributions": [_attribution(attributions, x, i, j) for j in order],
        "additivity_residual": float(attributions.residual[i]),
        "method": attributions.method,
        "background": {"rows": int(attributions.background_rows), "seed": int(attributions.seed)},
        "form": attributions.form,
        "permutations": int(attributions.permutations),
        "output_units": adapter.output_units,
        "class_of_interest": _plain(adapter.positive_class),
        "notes": list(attributions.notes),
        "caution": CAUTION,
    }
    if isinstance(data, Dataset) and data.id_column is not None:
        payload["id"] = _plain(frame[data.id_column].iloc[row])
    return payload


def _shown(value) -> str:
    if value is None:
        return "(missing)"
    if isinstance(value, float):
        return f"{value:.10g}"
    return str(value)


def print_case(p: dict) -> None:
    pred = p["prediction"]
    who = f"row {p['row']}" + (f" (id {p['id']})" if "id" in p else "")
    print(f"case        {who}  task {p['task']}")
    line = f"output      {pred['output']:.6g} {p['output_units']}"
    if pred["probability"] is not None and p["output"] != "probability":
        line += f"  (probability {pred['probability']:.4g})"
    elif pred["probability"] is None and pred["response"] != pred["output"]:
        line += f"  (predicted {pred['response']:.6g})"
    print(line)
    bg = p["background"]
    where = (
        f"mean over {bg['rows']} background rows, seed {bg['seed']}"
        if bg["rows"]
        else "expectation over the training data's tree paths"
    )
    print(f"base value  {p['base_value']:.6g}  ({where})")
    print(f"method      {p['method']} ({p['form']})")
    print()
    rows = [
        {
            "feature": a["feature"],
            "value": _shown(a["value"]),
            "contribution": a["contribution"],
            "standard error": a.get("standard_error", ""),
        }
        for a in p["attributions"]
    ]
    columns = ["feature", "value", "contribution"]
    if any("standard_error" in a for a in p["attributions"]):
        columns.append("standard error")
    print_table(rows, columns)
    total = sum(a["contribution"] for a in p["attributions"])
    print()
    print(
        f"base value + contributions = {p['base_value']:.6g} + {total:.6g} = "
        f"{p['base_value'] + total:.6g}; additivity residual {p['additivity_residual']:.2g}"
    )
    for note in p["notes"]:
        print(f"note: {note}")
    print(p["caution"])
