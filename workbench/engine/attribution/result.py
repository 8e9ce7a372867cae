"""The result of an attribution run: per raw column contributions plus what made them."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

METHODS = ("tree-path", "tree-interventional", "tree-reference", "linear", "exact", "sampling")


@dataclass(frozen=True)
class Attributions:
    """SHAP values of ``n`` rows for the raw input columns of a model.

    Attributes
    ----------
    features : raw input columns (``adapter.input_columns``), the columns of ``values``.
    values : (n, p) contributions on the adapter's explained output scale.
    base_value : the explained output the contributions start from (mean over the background for
        the interventional form; the training-cover expectation for the path-dependent form).
    output : (n,) explained output of the rows (``adapter.score``).
    residual : (n,) ``output - base_value - values.sum(1)``; local accuracy says it is zero, so
        anything beyond rounding means the method did not explain this model's output.
    method : one of :data:`METHODS`.
    background_rows : rows in the background sample (0 for the path-dependent form).
    seed : seed of the background draw and of permutation sampling.
    output_kind : ``adapter.output_kind`` (log-odds, probability, raw score, ...).
    notes : why a method was chosen, what it fell back from, what the values do not mean.
    form : ``"interventional"`` or ``"path"`` (path-dependent; trees only).
    permutations : permutations drawn by the sampling method (0 otherwise).
    standard_error : (n, p) standard errors of sampled values, from the spread over antithetic
        pairs (None for the exact methods).
    """

    features: list[str]
    values: np.ndarray
    base_value: float
    output: np.ndarray
    residual: np.ndarray
    method: str
    background_rows: int
    seed: int
    output_kind: str
    notes: tuple[str, ...] = ()
    form: str = "interventional"
    permutations: int = 0
    standard_error: np.ndarray | None = None

    @property
    def n_rows(self) -> int:
        return int(self.values.shape[0])

    @property
    def max_abs_residual(self) -> float:
        return float(np.max(np.abs(self.residual))) if self.residual.size else 0.0

    def row(self, i: int) -> dict[str, float]:
        """Contributions of row ``i`` by feature name."""
        return {f: float(v) for f, v in zip(self.features, self.values[i], strict=True)}


def finish(adapter, values, base_value, output, **params) -> Attributions:
    """Build the result and its additivity residual from the pieces every method produces."""
    values = np.asarray(values, dtype=float)
    output = np.asarray(output, dtype=float)
    base = float(base_value)
    residual = output - base - values.sum(axis=1)
    return Attributions(
        features=list(adapter.input_columns),
        values=values,
        base_value=base,
        output=output,
        residual=residual,
        output_kind=adapter.output_kind,
        **params,
    )
