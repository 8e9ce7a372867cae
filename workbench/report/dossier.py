"""The dossier: the sign-off document assembled from a project, as HTML or PDF.

:func:`load_inputs` opens the project's files (each checked against its recorded SHA-256);
:func:`dossier_context` computes what the document shows from engine results and returns plain
data; :func:`dossier_html` renders it (autoescaping on: every user text, column name, note and
display name is escaped; no ``|safe`` on user text); :func:`write_dossier` writes ``.html`` or
``.pdf``. Computations made for the dossier are recorded in the project's audit trail, which
the appendix prints.
"""

from __future__ import annotations

import datetime as dt
import importlib
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.metrics import roc_auc_score

from workbench.engine.adapter import ModelAdapter
from workbench.engine.errors import InputError
from workbench.engine.jobs import step
from workbench.engine.loading import Dataset, LoadedModel, load_data, load_model
from workbench.report import charts
from workbench.report.render import png_data_uri, render_html, write_report
from workbench.session.audit import library_versions, record
from workbench.session.project import InputsChanged, Project

TEMPLATE = "dossier.html.j2"
SECTIONS = (
    ("identity", "Model identity"),
    ("data", "Data identity"),
    ("performance", "Performance"),
    ("ranking", "Ranking"),
    ("effects", "Effect curves"),
    ("pairs", "Pair matrices"),
    ("checks", "Checks"),
    ("versions", "Champion and challenger"),
    ("cases", "Chosen cases"),
    ("notes", "Analyst's notes"),
    ("signoff", "Sign-off"),
    ("appendix", "Appendix: audit trail"),
)
SECTION_TITLES = dict(SECTIONS)
PERIOD_HINTS = ("month", "date", "period")


@dataclass
class DossierInputs:
    """The opened files of a project."""

    model_a: LoadedModel
    adapter_a: ModelAdapter
    data: Dataset
    reference: Dataset | None = None
    model_b: LoadedModel | None = None
    adapter_b: ModelAdapter | None = None


def load_inputs(project: Project, *, trust: bool = False) -> DossierInputs:
    """Open model A (and B), the data (and the reference) of ``project``.

    Refuses (:class:`InputsChanged`) when a file's SHA-256 is not the one recorded.
    """
    changes = project.changed_inputs()
    if changes:
        raise InputsChanged(project.path or "the project", changes, project)
    if project.input_path("model_a") is None or project.input_path("data") is None:
        raise InputError("the project needs model A and the data to make a dossier")
    settings = project.settings

    def model(role):
        path = project.input_path(role)
        if path is None:
            return None, None
        trusted = trust or bool(project.inputs[role].get("trust"))
        loaded = load_model(path, trust=trusted)
        adapter = ModelAdapter(loaded.estimator)
        if settings.get("positive_class") is not None and adapter.classes:
            adapter = adapter.with_class(settings["positive_class"])
        return loaded, adapter

    loaded_a, adapter_a = model("model_a")
    loaded_b, adapter_b = model("model_b")
    data = load_data(project.input_path("data"), target=settings.get("target"),
                     id_column=settings.get("id_column"))
    ref_path = project.input_path("reference")
    reference = load_data(ref_path) if ref_path is not None else None
    return DossierInputs(loaded_a, adapter_a, data, reference, loaded_b, adapter_b)


# ---- small helpers ------------------------------------------------------------------------
def display_name(project: Project, column: str) -> str:
    entry = project.display_names.get(column)
    if isinstance(entry, dict):
        return str(entry.get("name") or column)
    return str(entry) if entry else str(column)


def _plain(v):
    from workbench.engine.checks.result import plain

    return plain(v)


def _params_text(params: dict) -> str:
    return json.dumps(_plain(params), sort_keys=True, ensure_ascii=False, default=str)


def _short_repr(value, limit: int = 160) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def hyper_parameters(estimator) -> list[dict]:
    """Shallow ``get_params`` of the estimator and, for a pipeline, of each step."""
    rows = []
    steps = getattr(estimator, "steps", None)
    parts = steps if steps is not None else [(type(estimator).__name__, estimator)]
    for name, part in parts:
        if part in (None, "passthrough") or not hasattr(part, "get_params"):
            continue
        params = part.get_params(deep=False)
        shown = {k: (_short_repr(v) if not isinstance(v, int | float | str | bool | type(None)) else v)
                 for k, v in params.items()
                 if not hasattr(v, "get_params")}
        rows.append({"step": str(name), "type": type(part).__name__,
                     "parameters": _params_text(shown)})
    return rows


def data_period(frame: pd.DataFrame) -> dict | None:
    """First and last value of a month/date column, if the data has one."""
    for c in frame.columns:
        if any(h in str(c).lower() for h in PERIOD_HINTS):
            values = frame[c].dropna()
            if values.empty:
                continue
            try:
                ordered = pd.to_datetime(values.astype(str), errors="raise")
                return {"column": str(c), "first": str(values[ordered.idxmin()]),
                        "last": str(values[ordered.idxmax()])}
            except (ValueError, TypeError):
                continue
    return None


def auc_interval(y01: np.ndarray, p: np.ndarray, *, resamples: int = 200, seed: int = 0,
                 level: float = 0.95) -> dict:
    """AUC with a seeded percentile bootstrap interval over resampled rows (Efron and
    Tibshirani, An Introduction to the Bootstrap, 1993, chapter 13; from memory)."""
    rng = np.random.default_rng(seed)
    n = len(y01)
    draws = []
    for _ in range(int(resamples)):
        idx = rng.integers(0, n, n)
        yy = y01[idx]
        if yy.min() == yy.max():
            continue
        draws.append(roc_auc_score(yy, p[idx]))
    tail = (1 - level) / 2 * 100
    low, high = np.percentile(draws, [tail, 100 - tail]) if len(draws) > 1 else (np.nan, np.nan)
    return {"auc": float(roc_auc_score(y01, p)), "low": float(low), "high": float(high),
            "resamples": int(resamples), "valid": len(draws), "seed": int(seed), "level": level}


# ---- the context --------------------------------------------------------------------------
class _Builder:
    def __init__(self, project, inputs, sections, progress, cancel, *, resamples, seed, rows,
                 h_matrix):
        self.project = project
        self.inputs = inputs
        self.sections = sections
        self.progress, self.cancel = progress, cancel
        self.resamples, self.seed, self.rows, self.h_matrix = resamples, seed, rows, h_matrix
        settings = project.settings
        self.cutoff = settings.get("cutoff")
        self.adverse_if = settings.get("adverse_if") or "above"
        data = inputs.data
        self.frame = data.frame
        self.y01 = None
        adapter = inputs.adapter_a
        if data.target is not None and adapter.task == "binary":
            from workbench.engine.validation import coerce_target

            y = coerce_target(adapter, data.frame[data.target])
            known = y.notna().to_numpy()
            self.known = known
            self.y01 = (y[known] == adapter.positive_class).to_numpy(dtype=int)
        self.importance = None

    def label(self, column):
        return display_name(self.project, column)

    def sample(self, n: int) -> pd.DataFrame:
        if len(self.frame) <= n:
            return self.frame
        pick = np.sort(np.random.default_rng(self.seed).choice(len(self.frame), n, replace=False))
        return self.frame.iloc[pick].reset_index(drop=True)

    def identity(self, which: str):
        loaded = self.inputs.model_a if which == "A" else self.inputs.model_b
        adapter = self.inputs.adapter_a if which == "A" else self.inputs.adapter_b
        if loaded is None:
            return None
        return {"slot": which, "file": loaded.path.name, "sha256": loaded.sha256,
                "size": loaded.size, "format": loaded.format, "type": adapter.model_type,
                "task": adapter.task, "output": adapter.output_units,
                "classes": [str(c) for c in adapter.classes],
                "positive_class": None if adapter.positive_class is None else str(adapter.positive_class),
                "inputs": [self.label(c) for c in adapter.input_columns],
                "hyper_parameters": hyper_parameters(loaded.estimator)}

    def data_identity(self, ds: Dataset | None, role: str):
        if ds is None:
            return None
        return {"role": role, "file": ds.path.name if ds.path else "(in memory)",
                "sha256": ds.sha256, "rows": ds.n_rows, "columns": [str(c) for c in ds.frame.columns],
                "target": ds.target, "period": data_period(ds.frame)}

    def performance(self):
        adapter = self.inputs.adapter_a
        if self.y01 is None:
            return None
        from workbench.engine.metrics import binary_metrics

        p = np.asarray(adapter.response(self.frame.loc[self.known]), dtype=float)
        m = binary_metrics(self.y01, p, cutoff=self.cutoff, adverse_if=self.adverse_if)
        interval = auc_interval(self.y01, p, resamples=self.resamples, seed=self.seed)
        record(self.project, "dossier: performance with bootstrap AUC interval",
               {"resamples": self.resamples, "seed": self.seed, "cutoff": self.cutoff})
        figures = [("AUC", m.auc), ("Gini", m.gini), ("KS statistic", m.ks),
                   ("Brier score", m.brier), ("log loss", m.log_loss)]
        return {"figures": [{"name": k, "value": v} for k, v in figures], "interval": interval,
                "rows": m.n, "positives": m.positives, "cutoff": self.cutoff}

    def ranking(self, checks):
        leak = next((c for c in checks if c.get("id") == "leakage"), None)
        if leak is not None:
            ranked = leak["evidence"]["ranking"]
            rows = leak["parameters"]["rows"]
            metric = leak["evidence"]["metric"]
            source = "taken from the leakage check"
        else:
            if self.inputs.data.target is None:
                return None
            from workbench.engine.importance import permutation_importance

            known = self.frame[self.inputs.data.target].notna()
            imp = permutation_importance(self.inputs.adapter_a, self.frame.loc[known],
                                         self.frame.loc[known, self.inputs.data.target],
                                         repeats=3, seed=self.seed, max_rows=self.rows)
            record(self.project, "dossier: permutation importance",
                   {"repeats": 3, "seed": self.seed, "max_rows": self.rows})
            ranked = [{"feature": imp.features[i], "importance": float(imp.mean[i]),
                       "spread": float(imp.spread[i])} for i in imp.order]
            rows, metric, source = imp.rows_used, imp.metric, "computed for the dossier"
        self.importance = ranked
        png = charts.ranked_bars([self.label(r["feature"]) for r in ranked],
                                 [r["importance"] or 0.0 for r in ranked],
                                 errors=[r.get("spread") or 0.0 for r in ranked],
                                 xlabel=f"permutation importance (worsening of {metric})",
                                 title="Ranking: permutation importance of each input")
        return {"picture": png_data_uri(png), "metric": metric, "rows": rows, "source": source,
                "table": [{"feature": self.label(r["feature"]), "importance": r["importance"],
                           "spread": r.get("spread")} for r in ranked]}

    def effects(self, top: int = 3):
        from workbench.engine.effects import partial_dependence

        adapter = self.inputs.adapter_a
        order = [r["feature"] for r in self.importance] if self.importance else list(adapter.input_columns)
        x = self.sample(min(self.rows, 1000))
        out = []
        for f in order[:top]:
            curve = partial_dependence(adapter, x, f, ice_rows=1, seed=self.seed)
            series = {"model A": curve.pd}
            if self.inputs.adapter_b is not None and f in self.inputs.adapter_b.input_columns:
                other = partial_dependence(self.inputs.adapter_b, x, f, grid=curve.grid,
                                           ice_rows=1, seed=self.seed)
                if other.units == curve.units:
                    series["model B"] = other.pd
            png = charts.curves(list(curve.grid), series, xlabel=self.label(f), ylabel=curve.units,
                                title=f"Effect curve of {self.label(f)}",
                                categorical=curve.kind == "categorical")
            out.append({"feature": self.label(f), "picture": png_data_uri(png),
                        "rows": curve.rows_used})
        record(self.project, "dossier: effect curves",
               {"features": order[:top], "rows": len(x), "seed": self.seed})
        return out

    def pairs(self):
        from workbench.engine.associations import associations

        adapter = self.inputs.adapter_a
        x = self.sample(min(len(self.frame), 5000))[adapter.input_columns]
        assoc = associations(x, categorical=[c for c in adapter.categorical_columns if c in x.columns])
        labels = [self.label(c) for c in assoc.features]
        out = {"association": png_data_uri(charts.matrix(
            labels, assoc.strength, title="Association matrix (|Spearman|, Cramer's V, eta)",
            colorbar_label="strength")), "h": None}
        if self.h_matrix:
            from workbench.engine.interactions import h_statistics

            h = h_statistics(adapter, self.frame, sample=150, screen=6, seed=self.seed)
            out["h"] = png_data_uri(charts.matrix(
                [self.label(c) for c in h.features], np.nan_to_num(h.h_pairs),
                title="Interaction matrix (Friedman's H)", colorbar_label="H"))
            record(self.project, "dossier: H-statistics", {"sample": 150, "screen": 6,
                                                           "seed": self.seed})
        return out

    def checks(self):
        stored = list(self.project.checks)
        if stored:
            return stored
        from workbench.engine.checks import run_checks

        settings = self.project.settings
        results = run_checks(self.inputs.adapter_a, self.frame, self.inputs.data.target,
                             reference=None if self.inputs.reference is None else self.inputs.reference.frame,
                             expectations=self.project.expectations,
                             group=settings.get("group") if self.cutoff is not None else None,
                             cutoff=self.cutoff, adverse_if=self.adverse_if, seed=self.seed)
        self.project.checks = [r.as_dict() for r in results]
        record(self.project, "audit checks (for the dossier)",
               {"expectations": self.project.expectations, "group": settings.get("group"),
                "cutoff": self.cutoff, "seed": self.seed})
        return self.project.checks

    def versions(self):
        if self.inputs.adapter_b is None or self.inputs.data.target is None:
            return None
        try:
            compare = importlib.import_module("workbench.engine.compare")
        except ImportError:
            return None
        target = self.inputs.data.target
        known = self.frame[target].notna()
        frame = self.frame.loc[known].reset_index(drop=True)
        c = compare.compare_versions(self.inputs.adapter_a, self.inputs.adapter_b, frame,
                                     frame[target], cutoff=self.cutoff,
                                     adverse_if=self.adverse_if, resamples=self.resamples,
                                     seed=self.seed, importance_rows=self.rows)
        record(self.project, "dossier: champion and challenger comparison",
               {"resamples": self.resamples, "seed": self.seed, "cutoff": self.cutoff})
        rows = []
        for name, diff in c.difference.items():
            iv = c.intervals.get(name)
            rows.append({"metric": name, "a": c.metrics_a.get(name), "b": c.metrics_b.get(name),
                         "difference": diff, "low": None if iv is None else iv.low,
                         "high": None if iv is None else iv.high})
        swap = None
        if c.swap is not None:
            cells = {"both_accept": "both accept", "swap_in": "swap in (A declines, B accepts)",
                     "swap_out": "swap out (A accepts, B declines)", "both_decline": "both decline"}
            swap = [{"cell": text, "rows": c.swap.counts.get(k), "bad_rate": c.swap.bad_rate.get(k)}
                    for k, text in cells.items()]
        return {"metrics": rows, "spearman": c.spearman, "kendall": c.kendall,
                "moved_share": c.moved_share, "moved_threshold": c.moved_threshold,
                "swap": _plain(swap), "notes": list(c.notes), "rows": c.n}

    def templates(self):
        """The project's reason wording (``ReasonTemplates.to_dict`` form), display names as a
        fallback for the names."""
        from workbench.engine.reasons import FeatureWording, ReasonTemplates

        try:
            templates = ReasonTemplates.from_dict(self.project.reason_templates or {})
        except InputError:
            templates = ReasonTemplates()
        for column in self.project.display_names:
            if column not in templates.features:
                templates = templates.with_feature(column, FeatureWording(self.label(column)))
        return templates

    def cases(self):
        from dataclasses import replace

        from workbench.engine.attributions import explain

        adapter = self.inputs.adapter_a
        out = []
        rows = [int(r) for r in self.project.cases if 0 <= int(r) < len(self.frame)]
        if not rows:
            return out
        background = self.inputs.reference.frame if self.inputs.reference is not None else self.frame
        bg_size = int(self.project.settings.get("background_size") or 100)
        attrs = explain(adapter, self.frame.iloc[rows].reset_index(drop=True),
                        background=background, background_size=bg_size, seed=self.seed)
        record(self.project, "dossier: attributions of the chosen cases",
               {"rows": rows, "background_size": bg_size, "seed": self.seed,
                "method": attrs.method})
        ids = self.inputs.data.ids
        response = adapter.response(self.frame.iloc[rows])
        sheet = _case_sheet_module() if self.cutoff is not None else None
        templates = self.templates() if sheet is not None else None
        for k, r in enumerate(rows):
            entry = {"row": r, "id": None if ids is None else str(ids.iloc[r]),
                     "response": float(response[k]), "decision": None, "method": attrs.method,
                     "reasons": [], "reasons_message": None, "inputs": []}
            if sheet is not None:
                # the case sheet's own gathering: reason statements and values in its wording
                from workbench.engine.reasons import reason_statements

                one = replace(attrs, values=attrs.values[k:k + 1], output=attrs.output[k:k + 1],
                              residual=attrs.residual[k:k + 1])
                values_row = self.frame.iloc[[r]][adapter.input_columns].reset_index(drop=True)
                reasons = reason_statements(one, values_row, adapter=adapter, cutoff=self.cutoff,
                                            adverse_if=self.adverse_if, templates=templates,
                                            response=float(response[k]))
                ctx = sheet.case_sheet_context(adapter=adapter, values_row=values_row,
                                               attributions=one, cutoff=self.cutoff,
                                               adverse_if=self.adverse_if, reasons=reasons,
                                               templates=templates, row=r)
                entry.update(picture=ctx["bars_png"], decision=ctx["score"]["decision"],
                             reasons=[s["text"] for s in ctx["reasons"]["statements"]],
                             reasons_message=ctx["reasons"]["message"], inputs=ctx["inputs"])
            else:
                png = charts.contribution_bars([self.label(f) for f in attrs.features],
                                               attrs.values[k], base_value=attrs.base_value,
                                               output=float(attrs.output[k]),
                                               units=adapter.output_units,
                                               title="Contribution bars")
                entry["picture"] = png_data_uri(png)
                if self.cutoff is not None:
                    from workbench.engine.metrics import adverse_decision

                    adverse = bool(adverse_decision([response[k]], self.cutoff, self.adverse_if)[0])
                    entry["decision"] = ("adverse side of the cutoff" if adverse
                                         else "favourable side of the cutoff")
            out.append(entry)
        return out

    def build(self) -> dict:
        wanted = self.sections
        ctx: dict = {"sections": [(k, t) for k, t in SECTIONS if k in wanted]}
        plan = [k for k, _ in ctx["sections"]]
        steps = max(len(plan), 1)

        def at(i, what):
            step(self.progress, self.cancel, i / steps, f"dossier: {what}")

        at(0, "identity")
        ctx["models"] = [m for m in (self.identity("A"), self.identity("B")) if m]
        ctx["datasets"] = [d for d in (self.data_identity(self.inputs.data, "data"),
                                       self.data_identity(self.inputs.reference, "reference")) if d]
        ctx["versions_of_libraries"] = library_versions()
        checks = self.checks() if ("checks" in wanted or "ranking" in wanted) else []
        for i, key in enumerate(plan):
            at(i, SECTION_TITLES[key].lower())
            if key == "performance":
                ctx["performance"] = self.performance()
            elif key == "ranking":
                ctx["ranking"] = self.ranking(checks)
            elif key == "effects":
                if self.importance is None and "ranking" not in wanted:
                    self.ranking(checks)
                ctx["effects"] = self.effects()
            elif key == "pairs":
                ctx["pairs"] = self.pairs()
            elif key == "checks":
                ctx["checks"] = [{"id": c["id"], "title": c["title"], "status": c["status"],
                                  "summary": c["summary"], "caution": c.get("caution")}
                                 for c in checks]
                ctx["check_cautions"] = sorted({c["caution"] for c in checks if c.get("caution")})
            elif key == "versions":
                ctx["versions"] = self.versions()
            elif key == "cases":
                ctx["cases"] = self.cases()
        step(self.progress, self.cancel, 1.0, "dossier: done")
        project = self.project
        ctx["notes"] = [p for p in project.notes.split("\n\n") if p.strip()]
        so = project.signoff
        ctx["signoff"] = {k: str(so.get(k) or "") for k in ("name", "role", "date", "decision",
                                                             "conditions")}
        ctx["audit"] = [{"when": e.get("when"), "what": e.get("what"), "seed": e.get("seed"),
                         "parameters": _params_text(e.get("parameters") or {}),
                         "versions": ", ".join(f"{k} {v}" for k, v in (e.get("versions") or {}).items())}
                        for e in project.audit]
        ctx["expectations"] = [{"feature": self.label(f), "direction": d}
                               for f, d in project.expectations.items()]
        ctx["settings"] = {k: ("" if v is None else str(v)) for k, v in project.settings.items()}
        ctx["project_file"] = project.path.name if project.path else ""
        return ctx


def _case_sheet_module():
    """``workbench.report.case_sheet`` when this build has it, else None."""
    try:
        return importlib.import_module("workbench.report.case_sheet")
    except ImportError:
        return None


def dossier_context(project: Project, inputs: DossierInputs | None = None, *, trust: bool = False,
                    sections=None, resamples: int = 200, rows: int = 2000,
                    h_matrix: bool = False, generated: str | None = None, progress=None,
                    cancel=None) -> dict:
    """Plain data for the dossier template. ``sections``: keys of :data:`SECTIONS` to include
    (default: the project's choice, or all). Computations are recorded in ``project.audit``."""
    inputs = inputs or load_inputs(project, trust=trust)
    chosen = list(sections or project.sections or [k for k, _ in SECTIONS])
    unknown = [s for s in chosen if s not in SECTION_TITLES]
    if unknown:
        raise InputError(f"unknown dossier section(s): {', '.join(unknown)}; choose from "
                         f"{', '.join(SECTION_TITLES)}")
    seed = int(project.settings.get("seed") or 0)
    builder = _Builder(project, inputs, set(chosen), progress, cancel, resamples=resamples,
                       seed=seed, rows=rows, h_matrix=h_matrix)
    ctx = builder.build()
    ctx["generated"] = generated or dt.datetime.now(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    ctx["title"] = "Model validation dossier"
    return ctx


def dossier_html(context: dict) -> str:
    return render_html(TEMPLATE, **context)


def write_dossier(project: Project, path, *, trust: bool = False, sections=None,
                  inputs: DossierInputs | None = None, h_matrix: bool = False, progress=None,
                  cancel=None) -> Path:
    """Build and write the dossier as ``.html`` or ``.pdf`` (by the suffix)."""
    path = Path(path)
    if path.suffix.lower() not in (".html", ".htm", ".pdf"):
        raise InputError(f"{path}: a dossier is written as .html or .pdf")
    ctx = dossier_context(project, inputs, trust=trust, sections=sections, h_matrix=h_matrix,
                          progress=progress, cancel=cancel)
    record(project, "dossier written", {"file": path.name, "sections": [k for k, _ in ctx["sections"]]})
    return write_report(dossier_html(ctx), path, title=ctx["title"])


__all__ = ["SECTIONS", "DossierInputs", "display_name", "dossier_context", "dossier_html",
           "load_inputs", "write_dossier"]
