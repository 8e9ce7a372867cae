"""``workbench audit MODEL DATA --target COL``: run the audit checks, headless.

The checks whose method allows it work on seeded samples (permutation importance on
``--sample`` rows, ICE lines and attributions on the smaller samples of the thresholds); the
others use every row. The output says which checks sampled, "sampled N of M rows, seed S".

Exit codes: 0 when the checks ran (whatever their statuses), 3 when ``--fail-on`` is given and
a check reached that status ("checks failed"), 2 for bad input, 1 for a bug.
"""

from __future__ import annotations

from pathlib import Path

from workbench.commands.common import (
    add_data_arguments,
    add_json,
    add_model_argument,
    add_trust,
    open_data,
    open_model,
    print_json,
    print_table,
)
from workbench.commands.large_data import checks_sampled
from workbench.engine.checks import DIRECTIONS, parse_direction, run_checks, summarise
from workbench.engine.checks.result import at_least
from workbench.engine.errors import InputError
from workbench.engine.loading import load_data

CHECKS_FAILED = 3


def register(sub) -> None:
    p = sub.add_parser("audit", help="run the audit checks (monotonicity, stability, adverse "
                                     "impact, leakage, additivity, calibration, data quality)")
    add_model_argument(p)
    add_data_arguments(p, target_required=True)
    p.add_argument("--reference", type=Path, help="reference data (e.g. the development sample) "
                                                  "for the stability and range checks")
    p.add_argument("--expect", action="append", default=[], metavar="FEATURE=DIRECTION",
                   help=f"expected direction of a feature ({', '.join(DIRECTIONS)}); repeatable")
    p.add_argument("--group", help="column of group labels for the adverse impact ratio "
                                   "(need not be a model input)")
    p.add_argument("--cutoff", type=float, help="decision cutoff on the response scale")
    p.add_argument("--adverse-if", choices=("above", "below"), default="above",
                   help="the adverse decision is a response at/above (default) or below the cutoff")
    p.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    p.add_argument("--sample", type=int, default=2000,
                   help="rows used by permutation importance in the leakage check (default "
                        "2000); the output says which checks sampled and how many rows")
    p.add_argument("--project", type=Path, help="also save a project file (.wbench) with the "
                                                "inputs, settings, results and audit trail")
    p.add_argument("--fail-on", choices=("warn", "fail"),
                   help=f"exit with code {CHECKS_FAILED} when a check reaches this status")
    add_trust(p)
    add_json(p)
    p.set_defaults(run=run)


def parse_expectations(items: list[str]) -> dict[str, str]:
    out = {}
    for item in items:
        if "=" not in item:
            raise InputError(f"--expect {item!r}: write FEATURE=DIRECTION, e.g. age=increasing")
        feature, direction = item.rsplit("=", 1)
        out[feature.strip()] = parse_direction(direction)
    return out


def run(args) -> int:
    expectations = parse_expectations(args.expect)
    loaded, adapter = open_model(args)
    data, _ = open_data(args, adapter)
    reference = None
    if args.reference is not None:
        reference = load_data(args.reference)
        missing = [c for c in adapter.input_columns if c not in reference.frame.columns]
        if missing:
            raise InputError(f"{args.reference}: lacks column(s) the model needs: "
                             f"{', '.join(missing)}")
    if args.group is not None and args.group not in data.frame.columns:
        raise InputError(f"{args.data}: no group column '{args.group}'")
    results = run_checks(adapter, data.frame, data.target,
                         reference=None if reference is None else reference.frame,
                         expectations=expectations, group=args.group, cutoff=args.cutoff,
                         adverse_if=args.adverse_if, seed=args.seed, sample=args.sample,
                         ids=data.ids)
    summary = summarise(results)
    sampled = checks_sampled(results)
    if args.project is not None:
        save_audit_project(args, loaded, data, reference, expectations, results)
    payload = {"model": str(loaded.path), "model_sha256": loaded.sha256,
               "data": str(data.path), "data_sha256": data.sha256,
               "reference": None if reference is None else str(reference.path),
               "reference_sha256": None if reference is None else reference.sha256,
               "summary": summary,
               "rows_in_data": int(len(data.frame)),
               "sampling": [s.as_dict() for s in sampled],
               "checks": [{k: r.as_dict()[k] for k in ("id", "title", "status", "summary",
                                                       "evidence", "parameters", "caution")}
                          for r in results]}
    if args.json:
        print_json(payload)
    else:
        print_table([{"status": r.status.upper(), "check": r.id, "finding": r.summary}
                     for r in results])
        counts = summary["counts"]
        print(f"\n{counts['pass']} passed, {counts['warn']} warned, {counts['fail']} failed")
        for s in sampled:
            print(f"{s.what}: {s.line()}")
        others = "the other checks" if sampled else "the checks"
        print(f"{others} used all {len(data.frame):,} rows")
        cautions = {r.caution for r in results if r.caution}
        for text in cautions:
            print(f"Note: {text}")
    if args.fail_on and any(at_least(r.status, args.fail_on) for r in results):
        return CHECKS_FAILED
    return 0


def save_audit_project(args, loaded, data, reference, expectations, results) -> Path:
    from workbench.engine.cache import cache_key
    from workbench.session.audit import record
    from workbench.session.project import Project, save_project

    project = Project()
    project.set_input("model_a", loaded.path, trust=bool(args.trust), sha256=loaded.sha256)
    project.set_input("data", data.path, sha256=data.sha256)
    if reference is not None:
        project.set_input("reference", reference.path, sha256=reference.sha256)
    project.settings.update(target=data.target, positive_class=args.positive_class,
                            cutoff=args.cutoff, adverse_if=args.adverse_if, seed=args.seed,
                            group=args.group, id_column=data.id_column)
    project.expectations = dict(expectations)
    project.checks = [r.as_dict() for r in results]
    parameters = {"expectations": expectations, "group": args.group, "cutoff": args.cutoff,
                  "adverse_if": args.adverse_if, "sample": args.sample, "seed": args.seed,
                  "reference": None if reference is None else reference.sha256}
    project.results["checks"] = cache_key(loaded.sha256, data.sha256, None, "run_checks",
                                          parameters)
    record(project, "audit checks", parameters)
    return save_project(project, args.project)
