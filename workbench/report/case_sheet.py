"""The case sheet: one case's explanation document, in HTML or PDF.

:func:`case_sheet_context` gathers what the sheet shows from engine results (plain data only,
so the template never calls the engine); :func:`case_sheet_html` renders it with autoescaping
on; :func:`write_case_sheet` writes ``.html`` or ``.pdf`` by the file's suffix. Every sheet
carries the cautions of :data:`workbench.report.render.CAUTIONS` (a template global).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd

from workbench.engine.flips import score_text
from workbench.engine.reasons import ReasonTemplates, format_value
from workbench.report import charts
from workbench.report.render import png_data_uri, render_html, write_report

TEMPLATE = "case_sheet.html.j2"


def _plain(value):
    if isinstance(value, np.generic):
        value = value.item()
    if value is None or value is pd.NA or (isinstance(value, float) and math.isnan(value)):
        return None
    return value


def _shown(value, wording) -> str:
    text = format_value(value, wording)
    if text != "not recorded" and wording.unit and wording.unit != "count":
        text = f"{text} {wording.unit}"
    return text


def _precise(wording):
    """The same wording with one more digit for percentages (flip changes are often small)."""
    if "%" in wording.number_format:
        return type(wording)(wording.display_name, wording.unit, "{:.1%}", wording.sentence)
    return wording


def case_sheet_context(*, adapter, values_row: pd.DataFrame, attributions, cutoff: float,
                       adverse_if: str = "above", reasons=None, stability=None, flips=None,
                       similar=None, similar_summary: str | None = None,
                       templates: ReasonTemplates | None = None, model_name: str = "",
                       model_sha256: str = "", data_name: str = "", data_sha256: str = "",
                       data_rows: int | None = None, row: int = 0, id_label: str | None = None,
                       id_value=None, label=None, cutoff_note: str = "",
                       background_source: str = "", generated: str | None = None) -> dict:
    """Plain data for the case sheet template from engine results.

    ``attributions``: the case's Attributions (one row). ``reasons``: a ReasonResult.
    ``stability``: a StabilityResult or None. ``flips``: a FlipResult or None (not searched).
    ``similar``: a list of SimilarRow or None. Text is passed through as typed: the template
    escapes it.
    """
    templates = templates or ReasonTemplates()
    values = {c: values_row[c].iloc[0] for c in values_row.columns}
    contributions = np.asarray(attributions.values, dtype=float).reshape(-1)
    features = list(attributions.features)
    names = [templates.wording(f).display_name for f in features]
    output = float(np.ravel(attributions.output)[0])
    response = float(np.asarray(adapter.response(values_row), dtype=float)[0])
    adverse = (response >= cutoff) if adverse_if == "above" else (response < cutoff)
    cutoff_output = None
    if adapter.output_kind != "raw score":
        cutoff_output = float(adapter.output_from_response(np.array([cutoff]))[0])
        if not math.isfinite(cutoff_output):
            cutoff_output = None
    png = charts.contribution_bars(names, contributions, base_value=float(attributions.base_value),
                                   output=output, units=adapter.output_units, cutoff=cutoff_output,
                                   title="Contribution bars: what moved this case's score")
    order = np.argsort(-np.abs(contributions), kind="stable")
    inputs = [{"name": names[j], "value": _shown(values.get(features[j]), templates.wording(features[j])),
               "contribution": float(contributions[j])} for j in order]
    return {
        "generated": generated or dt.datetime.now(dt.UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "case": {"row": int(row), "id_label": id_label or "id", "id_value": _plain(id_value)},
        "model": {"name": model_name, "sha256": model_sha256, "type": adapter.model_type,
                  "output_units": adapter.output_units, "response_units": adapter.response_units},
        "data": {"name": data_name, "sha256": data_sha256, "rows": data_rows},
        "score": {"response": response, "output": output, "cutoff": float(cutoff),
                  "adverse": bool(adverse), "adverse_if": adverse_if,
                  "adverse_rule": "at or above the cutoff" if adverse_if == "above" else "below the cutoff",
                  "decision": "adverse side of the cutoff" if adverse else "favourable side of the cutoff",
                  "label": _plain(label), "cutoff_note": cutoff_note},
        "reasons": _reasons(reasons, stability, templates),
        "bars_png": png_data_uri(png),
        "flips": _flips(flips, templates),
        "similar": None if similar is None else {
            "summary": similar_summary or f"{len(similar)} similar rows.",
            "rows": [{"row": r.row, "distance": r.distance, "prediction": r.prediction,
                      "label": _plain(r.label)} for r in similar]},
        "inputs": inputs,
        "method": {"method": attributions.method, "form": attributions.form,
                   "background_rows": int(attributions.background_rows),
                   "seed": int(attributions.seed), "base_value": float(attributions.base_value),
                   "residual": float(np.ravel(attributions.residual)[0]),
                   "notes": list(attributions.notes), "background_source": background_source},
    }


def _reasons(reasons, stability, templates) -> dict:
    if reasons is None:
        return {"message": "Reason statements were not asked for.", "statements": [], "flags": [],
                "k": 4, "not_allowed": [], "stability": None}
    rates = {}
    if stability is not None:
        rates = dict(zip(stability.features, map(float, stability.change_rate), strict=True))
    items = [{"rank": r.rank, "text": r.text, "contribution": r.contribution,
              "stable": stability is None or stability.is_stable(r.feature),
              "change_rate": rates.get(r.feature)} for r in reasons.reasons]
    return {
        "message": reasons.message, "statements": items,
        "flags": [f.text for f in reasons.flagged_not_allowed], "k": reasons.k,
        "not_allowed": [templates.wording(f).display_name for f in reasons.not_allowed],
        "stability": None if stability is None else {
            "resamples": stability.resamples, "background_size": stability.background_size,
            "threshold": stability.threshold},
    }


def _flips(flips, templates) -> dict | None:
    if flips is None:
        return None
    options = []
    for o in flips.options:
        changes = [{"name": templates.wording(f).display_name,
                    "before": _shown(a, _precise(templates.wording(f))),
                    "after": _shown(b, _precise(templates.wording(f)))}
                   for f, a, b in o.changes]
        options.append({"changes": changes, "new_prediction": score_text(o.new_response, flips.cutoff),
                        "distance": o.distance})
    moved = ", ".join(templates.wording(f).display_name for f in flips.actionable)
    rules = (f"Only these features were allowed to change: {moved}; at most {flips.max_changes} "
             "at once; numeric values within the bounds, categorical values as observed in the "
             "data. Distance: Gower distance to the case over the model's inputs.")
    return {"message": flips.message, "options": options, "rules": rules}


def case_sheet_html(context: Mapping) -> str:
    """The case sheet as self-contained HTML (user text escaped by the template)."""
    return render_html(TEMPLATE, s=context)


def write_case_sheet(path: str | Path, context: Mapping) -> Path:
    """Write the case sheet as ``.html`` or ``.pdf`` (by the suffix) and return its path."""
    title = f"Case sheet: row {context['case']['row']}"
    return write_report(case_sheet_html(context), path, title=title)


__all__ = ["case_sheet_context", "case_sheet_html", "write_case_sheet"]
