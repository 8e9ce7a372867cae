"""Why this decision: the reason statements, nearest flip, similar rows and case sheet options
of ``workbench case``.

The case command calls :func:`add_why_arguments` when it builds its parser, and
:func:`extend_payload` / :func:`print_why` after it has explained the row. Nothing here runs
unless one of these options is given, so the plain case payload stays as it is.

Cutoff: on the response scale (the probability of the class of interest, or the predicted
value). For classifiers it defaults to 0.5, the window's default setting; for regressors and
count models ``--cutoff`` is required whenever reasons, a flip or a sheet is asked for.

Not errors (exit 0, with a message in the payload): a case on the favourable side asked for
reasons (``reasons`` is empty and ``reasons_message`` says so; ``--on-request`` gives its
strongest adverse factors), and a flip not found within the bounds (``flip`` is empty and
``flip_message`` says so). Errors (exit 2, one line): no ``--actionable`` features, unknown
feature names, a probability cutoff outside 0 to 1, a row outside the data, a bad wording file.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from workbench.commands.common import print_table
from workbench.engine.errors import InputError
from workbench.engine.explanation_stability import reason_stability
from workbench.engine.flips import nearest_flips, score_text
from workbench.engine.reasons import DEFAULT_REASONS, ReasonTemplates, reason_statements
from workbench.engine.similar import similar_rows, similar_summary
from workbench.report.render import CAUTIONS

DEFAULT_CLASSIFIER_CUTOFF = 0.5
DEFAULT_SIMILAR = 5


def _names(text: str | None) -> list[str]:
    return [] if not text else [t.strip() for t in str(text).split(",") if t.strip()]


def add_why_arguments(p) -> None:
    g = p.add_argument_group("why this decision")
    g.add_argument("--cutoff", type=float, default=None,
                   help="cutoff on the probability of the class of interest (or the predicted value); "
                        f"default {DEFAULT_CLASSIFIER_CUTOFF} for classifiers, required for regressors")
    g.add_argument("--adverse-if", choices=("above", "below"), default="above",
                   help="adverse side: scores at or above the cutoff (default) or below it")
    g.add_argument("--reasons", type=int, nargs="?", const=DEFAULT_REASONS, default=None, metavar="K",
                   help=f"state up to K reason statements (default {DEFAULT_REASONS}, following the "
                        "Regulation B staff commentary, comment 9(b)(2)-1)")
    g.add_argument("--on-request", action="store_true",
                   help="for a case on the favourable side, give its strongest adverse factors anyway")
    g.add_argument("--not-allowed", metavar="F,...",
                   help="features never stated as reasons and never changed by a flip "
                        "(flagged when they move the score materially)")
    g.add_argument("--wording", type=Path, metavar="FILE.json",
                   help="reason wording: display names, units, number formats, sentences")
    g.add_argument("--stability", type=int, default=0, metavar="N",
                   help="re-explain the case with N other background samples and mark unstable reasons")
    g.add_argument("--flip", action="store_true", help="search the nearest flip")
    g.add_argument("--actionable", metavar="F,...", help="features a flip may change (needed by --flip)")
    g.add_argument("--immutable", metavar="F,...", help="features a flip must never change")
    g.add_argument("--increase-only", metavar="F,...", help="features a flip may only increase")
    g.add_argument("--decrease-only", metavar="F,...", help="features a flip may only decrease")
    g.add_argument("--bounds", metavar="F=LO:HI,...",
                   help="numeric bounds for a flip (default: 1st to 99th percentile of the data)")
    g.add_argument("--max-changes", type=int, default=3, help="most features a flip changes (default 3)")
    g.add_argument("--similar", type=int, default=None, metavar="K",
                   help=f"the K most similar rows by Gower distance (default {DEFAULT_SIMILAR} "
                        "whenever reasons, a flip or a sheet is asked for)")
    g.add_argument("--sheet", type=Path, metavar="OUT.html|OUT.pdf", help="write the case sheet")


def wanted(args) -> bool:
    return bool(getattr(args, "reasons", None) or getattr(args, "flip", False)
                or getattr(args, "sheet", None) or getattr(args, "similar", None)
                or getattr(args, "stability", 0))


def resolve_cutoff(args, adapter) -> tuple[float, str]:
    if args.cutoff is not None:
        if not np.isfinite(args.cutoff):
            raise InputError(f"--cutoff must be a finite number, not {args.cutoff}")
        if adapter.classes and not 0 <= args.cutoff <= 1:
            raise InputError(f"--cutoff is a probability for this classifier: give a number from 0 "
                             f"to 1, not {args.cutoff:g}")
        return float(args.cutoff), "given"
    if adapter.classes:
        return DEFAULT_CLASSIFIER_CUTOFF, f"default: {DEFAULT_CLASSIFIER_CUTOFF} probability"
    raise InputError("this model predicts a value, not a probability: give --cutoff for "
                     "reasons, a flip or a case sheet")


def load_wording(path: Path | None) -> ReasonTemplates | None:
    if path is None:
        return None
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(f"{path}: no such wording file") from None
    except (OSError, ValueError) as exc:
        raise InputError(f"{path}: not a readable JSON wording file ({exc})") from None
    return ReasonTemplates.from_dict(data)


def parse_bounds(text: str | None) -> dict[str, tuple[float, float]]:
    out = {}
    for part in _names(text):
        try:
            name, span = part.split("=", 1)
            lo, hi = span.split(":", 1)
            out[name.strip()] = (float(lo), float(hi))
        except ValueError:
            raise InputError(f"--bounds takes F=LO:HI items separated by commas, not {part!r}") from None
    return out


def _check_features(names: list[str], adapter, option: str) -> None:
    unknown = [n for n in names if n not in adapter.input_columns]
    if unknown:
        raise InputError(f"{option}: not among the model's inputs: {', '.join(unknown)}")


def extend_payload(args, payload: dict, *, adapter, loaded, data, row: int, attributions,
                   background_size=100) -> dict:
    """Add reasons, flip, similar rows and the sheet path to the case payload (when asked for)."""
    if not wanted(args):
        return payload
    cutoff, source = resolve_cutoff(args, adapter)
    not_allowed = _names(args.not_allowed)
    _check_features(not_allowed, adapter, "--not-allowed")
    templates = load_wording(args.wording)
    frame = data.frame
    x = frame.iloc[[row]]
    response = float(payload["prediction"]["response"])
    payload.update({"cutoff": cutoff, "cutoff_source": source, "adverse_if": args.adverse_if,
                    "cautions": list(CAUTIONS)})

    k = args.reasons if args.reasons is not None else DEFAULT_REASONS
    reasons = reason_statements(attributions, x[adapter.input_columns], adapter=adapter,
                                cutoff=cutoff, adverse_if=args.adverse_if, k=k,
                                templates=templates, not_allowed=not_allowed,
                                on_request=args.on_request, response=response)
    payload["decision"] = "adverse" if reasons.adverse else "favourable"
    stability = None
    if args.stability and reasons.reasons:  # nothing to check when no reason is stated
        if not isinstance(background_size, int):
            raise InputError("--stability draws other background samples: it needs --background K, not all")
        stability = reason_stability(adapter, x, frame, resamples=args.stability,
                                     background_size=background_size, seed=args.seed, k=k,
                                     adverse_if=args.adverse_if, not_allowed=not_allowed,
                                     method=args.method)
    if args.reasons is not None or args.sheet is not None or stability is not None:
        payload["reasons"] = [
            {**r.as_dict(), "stable": None if stability is None else stability.is_stable(r.feature)}
            for r in reasons.reasons]
        payload["reasons_message"] = reasons.message
        payload["not_allowed_flags"] = [f.as_dict() for f in reasons.flagged_not_allowed]
        if stability is not None:
            payload["reasons_stability"] = {"resamples": stability.resamples,
                                            "threshold": stability.threshold,
                                            "unstable": list(stability.unstable),
                                            "features": stability.rows()}

    flips = None
    if args.flip:
        if not args.actionable:
            raise InputError("--flip needs --actionable F,... : the features the applicant could change")
        immutable = _names(args.immutable) + not_allowed
        monotone = {f: "increase only" for f in _names(args.increase_only)}
        monotone.update({f: "decrease only" for f in _names(args.decrease_only)})
        flips = nearest_flips(adapter, x, frame, cutoff=cutoff, adverse_if=args.adverse_if,
                              actionable=_names(args.actionable), immutable=immutable,
                              bounds=parse_bounds(args.bounds), monotone=monotone,
                              max_changes=args.max_changes, seed=args.seed)
        payload["flip"] = [o.as_dict() for o in flips.options]
        payload["flip_message"] = flips.message

    k_similar = args.similar if args.similar is not None else DEFAULT_SIMILAR
    if k_similar < 1:
        raise InputError(f"--similar must be at least 1, not {k_similar}")
    scores = np.asarray(adapter.response(frame), dtype=float)
    labels = data.y if getattr(data, "target", None) else None
    similar = similar_rows(frame, row, k=k_similar, columns=list(adapter.input_columns),
                           scores=scores, labels=labels,
                           categorical=[c for c in adapter.categorical_columns if c in frame.columns])
    summary = similar_summary(similar, cutoff=cutoff, adverse_if=args.adverse_if)
    payload["similar"] = [s.as_dict() for s in similar]
    payload["similar_summary"] = summary

    if args.sheet is not None:
        from workbench.report.case_sheet import case_sheet_context, write_case_sheet

        id_column = getattr(data, "id_column", None)
        context = case_sheet_context(
            adapter=adapter, values_row=x[adapter.input_columns], attributions=attributions,
            cutoff=cutoff, adverse_if=args.adverse_if, reasons=reasons, stability=stability,
            flips=flips, similar=similar, similar_summary=summary, templates=templates,
            model_name=Path(loaded.path).name, model_sha256=loaded.sha256,
            data_name=Path(data.path).name if data.path else "", data_sha256=data.sha256,
            data_rows=data.n_rows, row=row, id_label=id_column,
            id_value=frame[id_column].iloc[row] if id_column else None,
            label=data.y.iloc[row] if labels is not None else None,
            cutoff_note=source if source != "given" else "",
            background_source=Path(data.path).name if data.path else "")
        payload["sheet"] = str(write_case_sheet(args.sheet, context))
    return payload


def print_why(payload: dict) -> None:
    """The text form of what :func:`extend_payload` added."""
    if "cutoff" not in payload:
        return
    print()
    print(f"cutoff      {payload['cutoff']:g} ({payload['cutoff_source']}); adverse when "
          f"{'at or above' if payload['adverse_if'] == 'above' else 'below'}: this case is "
          f"{payload['decision']}")
    if "reasons_message" in payload:
        print(payload["reasons_message"])
        for r in payload["reasons"]:
            mark = "" if r.get("stable") in (None, True) else "  [not stable]"
            print(f"  {r['rank']}. {r['text']}{mark}")
        for f in payload["not_allowed_flags"]:
            print(f"  analyst flag: {f['text']}")
    if "flip_message" in payload:
        print(payload["flip_message"])
        for i, o in enumerate(payload["flip"], start=1):
            moves = "; ".join(f"{c['feature']} {c['from']} -> {c['to']}" for c in o["changes"])
            score = score_text(o["new_prediction"], payload["cutoff"])
            print(f"  option {i}: {moves}  (score {score}, distance {o['distance']:.3g})")
    if payload.get("similar"):
        print(payload["similar_summary"])
        print_table(payload["similar"], ["row", "distance", "prediction", "label"])
    if "sheet" in payload:
        print(f"case sheet written: {payload['sheet']}")
    for caution in payload["cautions"]:
        print(f"caution: {caution}")


__all__ = ["add_why_arguments", "extend_payload", "print_why", "resolve_cutoff", "wanted"]
