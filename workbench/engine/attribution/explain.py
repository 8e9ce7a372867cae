"""Choosing and running an attribution method: :func:`explain`.

Default form: interventional, against a named background sample (see README.md here). The
same game, v(S) = mean over the background of f(x_S, b_rest), is then played by the tree, the
linear and the model-agnostic methods, so attributions of a forest and of a logistic regression
(champion and challenger) mean the same thing and their base value is a number anyone can check:
the mean explained output of the background rows. The path-dependent form (Lundberg, Erion and
Lee 2018, Algorithm 2) is offered for trees: it needs no background and is faster, but it
conditions on the training data's split counts, which a validator cannot see or change.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from workbench.engine import jobs
from workbench.engine.attribution import agnostic, linear, tree
from workbench.engine.attribution.background import select_background
from workbench.engine.attribution.result import Attributions, finish
from workbench.engine.errors import InputError

METHOD_CHOICES = ("auto", "tree", "tree-reference", "linear", "exact", "sampling")
FORMS = ("interventional", "path")


def explain(
    adapter,
    frame: pd.DataFrame,
    *,
    method: str = "auto",
    form: str = "interventional",
    background: pd.DataFrame | None = None,
    background_size: int | str = 100,
    seed: int = 0,
    permutations: int | None = None,
    progress=None,
    cancel=None,
) -> Attributions:
    """SHAP values of every row of ``frame`` for the raw input columns of ``adapter``.

    Parameters
    ----------
    frame : rows to explain, raw columns (extra columns are ignored); a Series is one row.
    method : ``auto`` (tree SHAP for tree ensembles, the closed form for linear models, exact
        enumeration up to 12 columns and permutation sampling beyond for anything else),
        ``tree`` (our kernel, or shap where the kernel is missing), ``tree-reference``
        (shap.TreeExplainer), ``linear``, ``exact`` or ``sampling``.
    form : ``interventional`` (default) or ``path`` (path-dependent; tree methods only).
    background : the reference rows the background is drawn from (default: ``frame``).
    background_size : rows drawn from the reference with ``seed`` (or ``"all"``).
    permutations : orders of columns for ``sampling`` (even; default 64).
    """
    if method not in METHOD_CHOICES:
        raise InputError(
            f"unknown attribution method {method!r}; choose one of {', '.join(METHOD_CHOICES)}"
        )
    if form not in FORMS:
        raise InputError(f"unknown attribution form {form!r}; choose interventional or path")
    frame = agnostic.as_frame(adapter, frame)
    rows = agnostic.raw_columns(adapter, frame)
    if len(rows) == 0:
        raise InputError("there are no rows to explain")
    reference = frame if background is None else agnostic.as_frame(adapter, background)
    run = _Run(
        adapter, rows, reference, form, background_size, seed, permutations, progress, cancel
    )
    jobs.step(progress, cancel, 0.0, "choosing the attribution method")
    if method == "auto":
        result = run.auto()
    elif method in ("tree", "tree-reference"):
        result = run.tree(reference_library=method == "tree-reference", strict=True)
    elif method == "linear":
        result = run.linear(strict=True)
    else:
        if form == "path":
            raise InputError(
                f"the path-dependent form exists for tree methods only, not for {method!r}"
            )
        result = run.agnostic(method)
    worst = result.max_abs_residual
    if worst > _tolerance(result.output):
        note = (
            f"additivity residual up to {worst:.3g}: these values do not add up to the output, "
            "so the method did not explain this model exactly"
        )
        result = replace(result, notes=(*result.notes, note))
    jobs.step(progress, cancel, 1.0, "attributions done")
    return result


def _tolerance(output: np.ndarray) -> float:
    """Largest residual a model-space method may leave before auto distrusts it.

    Exact methods leave rounding only (1e-15 to 1e-13); shap's interventional tree code left
    residuals near 1e-8 in our checks. Far beyond that, the method did not explain this model's
    output (common practice, no source: a relative tolerance of 1e-6).
    """
    scale = float(np.max(np.abs(output))) if output.size else 1.0
    return 1e-6 * max(1.0, scale)


class _Run:
    """One explain() call: shared inputs, the background drawn once, notes gathered on the way."""

    def __init__(
        self, adapter, rows, reference, form, background_size, seed, permutations, progress, cancel
    ):
        self.adapter = adapter
        self.rows = rows
        self.reference = reference
        self.form = form
        self.background_size = background_size
        self.seed = seed
        self.permutations = permutations
        self.progress = progress
        self.cancel = cancel
        self.notes: list[str] = []
        self._bg = None
        self._output = None

    # ---- shared pieces -------------------------------------------------------------------------
    @property
    def background(self) -> pd.DataFrame:
        if self._bg is None:
            picked = select_background(self.reference, self.background_size, seed=self.seed)
            self._bg = agnostic.raw_columns(self.adapter, picked)
        return self._bg

    @property
    def output(self) -> np.ndarray:
        if self._output is None:
            self._output = np.asarray(self.adapter.score(self.rows), dtype=float)
        return self._output

    def _params(self, method: str, form: str, background_rows: int, permutations: int = 0) -> dict:
        return dict(
            method=method,
            form=form,
            background_rows=background_rows,
            seed=self.seed,
            notes=tuple(self.notes),
            permutations=permutations,
        )

    # ---- auto ----------------------------------------------------------------------------------
    def auto(self) -> Attributions:
        adapter = self.adapter
        fe = adapter.final_estimator
        name = type(fe).__name__
        model_space = None
        if not adapter.mappable:
            self.notes.append(
                "a pipeline step cannot be traced to raw columns, so the model-agnostic "
                "method explains the whole pipeline"
            )
        elif tree.is_tree_model(fe):
            model_space = self.tree(reference_library=False, strict=False)
        elif linear.is_linear_model(fe):
            model_space = self.linear(strict=False)
        else:
            self.notes.append(
                f"{name} is neither a tree ensemble nor a linear model: model-agnostic method"
            )
        if model_space is not None:
            worst = model_space.max_abs_residual
            if worst <= _tolerance(model_space.output):
                return model_space
            self.notes.append(
                f"{model_space.method} left an additivity residual of {worst:.3g}; "
                "the model-agnostic method is used instead"
            )
        if self.form == "path":
            self.notes.append(
                "the path-dependent form exists for tree SHAP only; interventional used"
            )
        p = len(adapter.input_columns)
        return self.agnostic("exact" if p <= agnostic.EXACT_AUTO_MAX_COLUMNS else "sampling")

    # ---- tree ----------------------------------------------------------------------------------
    def tree(self, *, reference_library: bool, strict: bool) -> Attributions | None:
        adapter = self.adapter
        fe = adapter.final_estimator
        label = "tree-reference" if reference_library else "tree"
        if not tree.is_tree_model(fe):
            raise InputError(
                f"method '{label}' needs a tree ensemble at the end of the model; "
                f"this is {adapter.model_type}"
            )
        if not adapter.mappable:
            return self._refuse(
                strict,
                f"method '{label}' needs every pipeline step traced to raw columns, "
                "and one step cannot be; use exact or sampling",
            )
        use_kernel = not reference_library and tree.kernel_supports(fe)
        if not use_kernel:
            problem = tree.shap_problem(adapter, self.form)
            if problem is not None:
                why = "our tree kernel is not available for it" if not reference_library else ""
                detail = f"{problem}" + (f" and {why}" if why else "")
                if strict:
                    raise InputError(
                        f"method '{label}' cannot explain this model: {detail}; "
                        "use auto, exact or sampling"
                    )
                self.notes.append(f"tree SHAP not used: {detail}")
                return None
        try:
            z_rows, z_bg = self._model_space(use_kernel)
        except (ValueError, TypeError) as exc:
            return self._refuse(
                strict, f"the model-space matrix could not be built ({exc}); use exact or sampling"
            )
        jobs.step(self.progress, self.cancel, 0.1, "tree SHAP values")
        if use_kernel:
            values, base = tree.kernel_values(
                adapter,
                z_rows,
                z_bg,
                self.form,
                progress=_scaled(self.progress, 0.1, 0.95),
                cancel=self.cancel,
            )
            method = f"tree-{'path' if self.form == 'path' else 'interventional'}"
        else:
            values, base = tree.shap_values(adapter, z_rows, z_bg, self.form)
            method = "tree-reference"
            why = "" if reference_library else "our tree kernel is not available for this model; "
            self.notes.append(f"{why}computed by shap.TreeExplainer ({self.form} form)")
        values, base_value = tree.pick_output(adapter, values, base)
        self._note_parts()
        raw_values = values @ adapter.column_map.aggregation_matrix()
        bg_rows = len(z_bg) if z_bg is not None else 0
        return finish(
            adapter, raw_values, base_value, self.output, **self._params(method, self.form, bg_rows)
        )

    def _model_space(self, use_kernel: bool):
        """Rows and background as the final estimator sees them (background None for path)."""
        adapter = self.adapter
        want_bg = self.form == "interventional"
        try:
            z_rows = adapter.transform(self.rows)
            z_bg = adapter.transform(self.background) if want_bg else None
        except (ValueError, TypeError):
            # HistGradientBoosting fitted on pandas categorical dtypes encodes them itself
            if not (use_kernel and adapter.preprocessor is None):
                raise
            est = adapter.final_estimator
            z_rows = tree.kernel_model_matrix(est, adapter.prepare(self.rows))
            z_bg = (
                tree.kernel_model_matrix(est, adapter.prepare(self.background)) if want_bg else None
            )
        return z_rows, z_bg

    def _note_parts(self) -> None:
        cmap = self.adapter.column_map
        counts = np.bincount(cmap.source, minlength=len(cmap.input_columns))
        split = [c for c, k in zip(cmap.input_columns, counts, strict=True) if k > 1]
        if split:
            shown = ", ".join(split[:5]) + (" ..." if len(split) > 5 else "")
            self.notes.append(
                f"{shown}: each is the sum of the SHAP values of its model-space parts "
                "(local accuracy "
                "holds; for a tree this is not the same as one player per raw column)"
            )

    # ---- linear --------------------------------------------------------------------------------
    def linear(self, *, strict: bool) -> Attributions | None:
        adapter = self.adapter
        fe = adapter.final_estimator
        if not linear.is_linear_model(fe):
            raise InputError(
                f"method 'linear' needs a linear model at the end of the model; "
                f"this is {adapter.model_type}"
            )
        if not adapter.mappable:
            return self._refuse(
                strict,
                "method 'linear' needs every pipeline step traced to raw columns, "
                "and one step cannot be; use exact or sampling",
            )
        if self.form == "path":
            if strict:
                raise InputError(
                    "the path-dependent form exists for tree methods only; use interventional"
                )
            self.notes.append(
                "the path-dependent form exists for tree SHAP only; interventional used"
            )
        z_rows = adapter.transform(self.rows)
        z_bg = adapter.transform(self.background)
        values, base = linear.linear_values(adapter, z_rows, z_bg)
        raw_values = values @ adapter.column_map.aggregation_matrix()
        return finish(
            adapter,
            raw_values,
            base,
            self.output,
            **self._params("linear", "interventional", len(z_bg)),
        )

    # ---- model-agnostic ------------------------------------------------------------------------
    def agnostic(self, method: str) -> Attributions:
        adapter, rows, bg = self.adapter, self.rows, self.background
        base = float(np.mean(adapter.score(bg)))
        span = dict(progress=_scaled(self.progress, 0.05, 0.95), cancel=self.cancel)
        if method == "exact":
            values = agnostic.exact_values(adapter, rows, bg, base, self.output, **span)
            return finish(
                adapter,
                values,
                base,
                self.output,
                **self._params("exact", "interventional", len(bg)),
            )
        permutations = (
            agnostic.DEFAULT_PERMUTATIONS if self.permutations is None else int(self.permutations)
        )
        if permutations < 2:
            raise InputError(f"sampling needs at least 2 permutations, not {permutations}")
        if permutations % 2:
            permutations += 1
            self.notes.append(
                f"permutations rounded up to {permutations} (they come in antithetic pairs)"
            )
        self.notes.append(
            f"sampling: {permutations} permutations ({permutations // 2} antithetic pairs), "
            f"seed {self.seed}"
        )
        values, standard_error = agnostic.sampling_values(
            adapter, rows, bg, base, self.output, permutations=permutations, seed=self.seed, **span
        )
        return finish(
            adapter,
            values,
            base,
            self.output,
            standard_error=standard_error,
            **self._params("sampling", "interventional", len(bg), permutations),
        )

    def _refuse(self, strict: bool, message: str):
        if strict:
            raise InputError(message)
        self.notes.append(message.split("; use")[0])
        return None


def _scaled(progress, lo: float, hi: float):
    if progress is None:
        return None
    return lambda fraction, message: progress(lo + (hi - lo) * fraction, message)
