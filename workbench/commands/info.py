"""``workbench info MODEL [DATA]``: what the adapter found in a model, and the data checked against it."""

from __future__ import annotations

import sys

from workbench.commands.common import (
    add_data_arguments,
    add_json,
    add_model_argument,
    add_trust,
    open_data,
    open_model,
    print_json,
)
from workbench.engine.validation import has_errors


def register(sub) -> None:
    p = sub.add_parser("info", help="describe a model and check a data file against it")
    add_model_argument(p)
    add_data_arguments(p, required=False)
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def run(args) -> int:
    loaded, adapter = open_model(args)
    findings = list(adapter.findings)
    findings += [_warning(w) for w in loaded.warnings]
    payload = {"file": str(loaded.path), "sha256": loaded.sha256, "format": loaded.format, **adapter.describe()}
    if loaded.trusted_types:
        payload["trusted_types"] = list(loaded.trusted_types)
    if args.data is not None:
        data, data_findings = open_data(args, adapter, strict=False)
        findings += data_findings
        payload["data"] = {"file": str(data.path), "sha256": data.sha256, "rows": data.n_rows,
                           "columns": len(data.frame.columns), **data.read_options}
    payload["findings"] = [f.as_dict() for f in findings]
    if args.json:
        print_json(payload)
    else:
        _print_readable(payload)
    if has_errors(findings):
        first = next(f for f in findings if f.level == "error")
        print(f"workbench: error: {first.message}", file=sys.stderr)
        return 2
    return 0


def _warning(text: str):
    from workbench.engine.adapter import Finding

    return Finding("warning", text)


def _print_readable(p: dict) -> None:
    print(f"model      {p['file']}")
    print(f"sha256     {p['sha256']}")
    print(f"type       {p['model_type']}")
    print(f"task       {p['task']}" + (f"  classes {p['classes']}  class of interest {p['positive_class']!r}" if p["classes"] else ""))
    print(f"output     {p['output']} ({p['output_units']})")
    print(f"inputs     {len(p['input_columns'])} raw columns -> {len(p['model_columns'])} model columns")
    for raw, cols in p["column_map"].items():
        print(f"  {raw:<28} -> {', '.join(cols) if cols else '(dropped)'}")
    if "data" in p:
        d = p["data"]
        print(f"data       {d['file']}  {d['rows']} rows x {d['columns']} columns  sha256 {d['sha256'][:16]}...")
    if p["findings"]:
        print("findings")
        for f in p["findings"]:
            print(f"  [{f['level']}] {f['message']}")
    else:
        print("findings   none")
