"""One uniform face for any fitted scikit-learn estimator or pipeline.

The adapter answers: what task is this, which classes, which class do we explain, on which
scale (the *explained output*), which raw columns does it need, how do they map to model space,
and how to score a frame in batches. Every engine function reaches the model through it.

Explained output by task:
- binary / multiclass with a ``decision_function``: the raw margin of the class of interest
  (log-odds for binary), probability alongside;
- classifiers without one (forests, single trees, k-NN...): the probability itself;
- log-link regressors (Poisson/Gamma/Tweedie GLMs, HistGradientBoosting with a Poisson or Gamma
  loss): the log of the mean, because that is where the model is additive;
- other regressors: the predicted value.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.special import expit, logit
from sklearn.base import is_classifier
from sklearn.linear_model import GammaRegressor, PoissonRegressor, TweedieRegressor
from sklearn.pipeline import Pipeline

from workbench.engine.columns import ColumnMap, UnmappableStep, build_column_map
from workbench.engine.errors import InputError

SCORE_CHUNK_ROWS = 200_000


@dataclass(frozen=True)
class Finding:
    """Something the user should know about the model or the data: level error, warning or info."""

    level: str
    message: str
    column: str | None = None

    def as_dict(self) -> dict:
        return {"level": self.level, "message": self.message}


def _log_link(est) -> bool:
    if isinstance(est, PoissonRegressor | GammaRegressor):
        return True
    if isinstance(est, TweedieRegressor):
        link = getattr(est, "link", "auto")
        return link == "log" or (link == "auto" and est.power > 0)
    loss = getattr(est, "loss", None)
    name = type(est).__name__
    return name.startswith("HistGradientBoostingRegressor") and loss in ("poisson", "gamma")


def _describe(estimator) -> str:
    if isinstance(estimator, Pipeline):
        return "Pipeline(" + " -> ".join(_describe(s) for _, s in estimator.steps if s not in (None, "passthrough")) + ")"
    inner = getattr(estimator, "transformers", None)
    if inner is not None and type(estimator).__name__ == "ColumnTransformer":
        parts = sorted({type(t).__name__ if not isinstance(t, str) else t for _, t, _ in estimator.transformers})
        return "ColumnTransformer[" + ", ".join(parts) + "]"
    return type(estimator).__name__


@dataclass
class ModelAdapter:
    """Wraps a fitted estimator or pipeline; see the module docstring for the explained output."""

    estimator: object
    positive_class: object = None
    input_columns_override: list[str] | None = None
    findings: list[Finding] = field(default_factory=list)

    def __post_init__(self) -> None:
        est = self.estimator
        if not hasattr(est, "predict"):
            raise InputError(f"the file holds a {type(est).__name__}, not a fitted scikit-learn model")
        if isinstance(est, Pipeline):
            self.final_estimator = est.steps[-1][1]
            steps = [s for _, s in est.steps[:-1] if s not in (None, "passthrough")]
            if not steps:
                self.preprocessor = None
            elif len(steps) == 1:
                self.preprocessor = steps[0]
            else:
                self.preprocessor = est[:-1]
        else:
            self.final_estimator = est
            self.preprocessor = None
        self.model_type = _describe(est)
        self._init_task()
        self._init_columns()

    # ---- task, classes, output -------------------------------------------------------------
    def _init_task(self) -> None:
        fe = self.final_estimator
        if is_classifier(self.estimator) or hasattr(fe, "classes_"):
            self.classes = list(np.asarray(getattr(self.estimator, "classes_", fe.classes_)).tolist())
            self.task = "binary" if len(self.classes) == 2 else "multiclass"
            if self.positive_class is None:
                self.positive_class = self.classes[-1]
            if self.positive_class not in self.classes:
                match = [c for c in self.classes if str(c) == str(self.positive_class)]
                if not match:
                    raise InputError(
                        f"class of interest {self.positive_class!r} is not one of the model's classes {self.classes}"
                    )
                self.positive_class = match[0]
            self.class_index = self.classes.index(self.positive_class)
            self.has_margin = hasattr(self.estimator, "decision_function")
            if self.has_margin:
                self.output_kind = "log-odds" if self.task == "binary" else "raw score"
            else:
                self.output_kind = "probability"
            self.log_link = False
        else:
            self.classes = []
            self.class_index = 0
            self.positive_class = None
            self.has_margin = False
            self.log_link = _log_link(fe)
            loss = getattr(fe, "loss", "")
            poisson = isinstance(fe, PoissonRegressor) or loss == "poisson" or (
                isinstance(fe, TweedieRegressor) and 0 < fe.power < 2
            )
            self.task = "count" if self.log_link and poisson else "regression"
            self.output_kind = "log of the mean" if self.log_link else "value"

    @property
    def output_units(self) -> str:
        """Text for axis labels of the explained output."""
        if self.output_kind == "log-odds":
            return f"log-odds of {self.positive_class}"
        if self.output_kind == "raw score":
            return f"raw score (softmax logit) of {self.positive_class}"
        if self.output_kind == "probability":
            return f"probability of {self.positive_class}"
        if self.output_kind == "log of the mean":
            return "log of the predicted mean"
        return "predicted value"

    @property
    def response_units(self) -> str:
        if self.classes:
            return f"probability of {self.positive_class}"
        return "predicted mean" if self.log_link else "predicted value"

    # ---- columns --------------------------------------------------------------------------------
    def _init_columns(self) -> None:
        names = getattr(self.estimator, "feature_names_in_", None)
        if names is None and self.preprocessor is not None:
            names = getattr(self.preprocessor, "feature_names_in_", None)
        if names is None:
            names = getattr(self.final_estimator, "feature_names_in_", None)
        if self.input_columns_override is not None:
            names = self.input_columns_override
        if names is None:
            n = getattr(self.estimator, "n_features_in_", None)
            if n is None:
                raise InputError("the model does not say how many input columns it expects")
            names = [f"x{i}" for i in range(int(n))]
            self.named_columns = False
        else:
            self.named_columns = True
        self.input_columns = [str(c) for c in names]
        try:
            self.column_map: ColumnMap | None = build_column_map(self.preprocessor, self.input_columns)
            self.mappable = True
        except UnmappableStep as exc:
            self.column_map = None
            self.mappable = False
            self.findings.append(
                Finding(
                    "warning",
                    f"a pipeline step cannot be traced to raw columns ({exc}); "
                    "attributions will use the model-agnostic method",
                )
            )
        hgb_cats = self._native_categorical_mask()
        cats = list(self.column_map.categorical) if self.column_map else []
        if hgb_cats is not None and self.column_map is not None:
            for j in np.flatnonzero(hgb_cats):
                raw = self.input_columns[int(self.column_map.source[j])]
                if raw not in cats:
                    cats.append(raw)
        self.categorical_columns = cats

    def _native_categorical_mask(self):
        return getattr(self.final_estimator, "is_categorical_", None)

    @property
    def model_columns(self) -> list[str]:
        return list(self.column_map.model_columns) if self.column_map else []

    @property
    def column_map_dict(self) -> dict[str, list[str]]:
        return self.column_map.as_dict() if self.column_map else {}

    def with_class(self, positive_class) -> ModelAdapter:
        return ModelAdapter(self.estimator, positive_class, self.input_columns_override)

    # ---- scoring --------------------------------------------------------------------------------
    def prepare(self, frame: pd.DataFrame) -> pd.DataFrame | np.ndarray:
        """The columns the model takes, in order (extra columns dropped)."""
        if not self.named_columns:
            return frame.to_numpy() if isinstance(frame, pd.DataFrame) else np.asarray(frame)
        missing = [c for c in self.input_columns if c not in frame.columns]
        if missing:
            raise InputError(f"the data lacks column(s) the model needs: {', '.join(missing)}")
        return frame[self.input_columns]

    def _chunked(self, frame: pd.DataFrame, fn) -> np.ndarray:
        x = self.prepare(frame)
        n = len(x)
        if n <= SCORE_CHUNK_ROWS:
            return fn(x)
        parts = [fn(x[i : i + SCORE_CHUNK_ROWS]) for i in range(0, n, SCORE_CHUNK_ROWS)]
        return np.concatenate(parts, axis=0)

    def _output_of(self, x) -> np.ndarray:
        est = self.estimator
        if self.classes:
            if self.has_margin:
                d = np.asarray(est.decision_function(x), dtype=float)
                if d.ndim == 1:
                    return d if self.class_index == 1 else -d
                return d[:, self.class_index]
            return np.asarray(est.predict_proba(x), dtype=float)[:, self.class_index]
        pred = np.asarray(est.predict(x), dtype=float)
        if self.log_link:
            return np.log(pred)
        return pred

    def score(self, frame: pd.DataFrame) -> np.ndarray:
        """Explained output for every row, shape (n,)."""
        return self._chunked(frame, self._output_of)

    def probability(self, frame: pd.DataFrame) -> np.ndarray | None:
        """Probability of the class of interest, or None for regressors."""
        if not self.classes:
            return None
        return self._chunked(frame, lambda x: np.asarray(self.estimator.predict_proba(x))[:, self.class_index])

    def probabilities(self, frame: pd.DataFrame) -> np.ndarray:
        """All class probabilities (n, n_classes) for classifiers."""
        return self._chunked(frame, lambda x: np.asarray(self.estimator.predict_proba(x), dtype=float))

    def response(self, frame: pd.DataFrame) -> np.ndarray:
        """The business scale: probability of the class of interest, or the predicted mean/value."""
        if self.classes:
            return self.probability(frame)
        return self._chunked(frame, lambda x: np.asarray(self.estimator.predict(x), dtype=float))

    def response_from_output(self, output: np.ndarray) -> np.ndarray:
        """Map explained output to the business scale (exact for binary margins and log links)."""
        output = np.asarray(output, dtype=float)
        if self.output_kind == "log-odds":
            return expit(output)
        if self.output_kind == "log of the mean":
            return np.exp(output)
        return output

    def output_from_response(self, response) -> np.ndarray:
        response = np.asarray(response, dtype=float)
        if self.output_kind == "log-odds":
            return logit(np.clip(response, 1e-15, 1 - 1e-15))
        if self.output_kind == "log of the mean":
            return np.log(response)
        return response

    @property
    def output_is_response_monotone(self) -> bool:
        """True when the explained output orders rows the same way as the business scale."""
        return self.output_kind in ("log-odds", "probability", "log of the mean", "value")

    def transform(self, frame: pd.DataFrame) -> np.ndarray:
        """Model-space matrix as the final estimator receives it (dense float64)."""
        x = self.prepare(frame)
        if self.preprocessor is None:
            arr = x.to_numpy() if isinstance(x, pd.DataFrame) else np.asarray(x)
        else:
            arr = self.preprocessor.transform(x)
            if hasattr(arr, "toarray"):
                arr = arr.toarray()
            if isinstance(arr, pd.DataFrame):
                arr = arr.to_numpy()
        return np.asarray(arr, dtype=float)

    def describe(self) -> dict:
        """What the adapter found, as plain data (the ``info`` command's JSON)."""
        return {
            "model_type": self.model_type,
            "task": self.task,
            "classes": [_plain(c) for c in self.classes],
            "positive_class": _plain(self.positive_class),
            "output": self.output_kind,
            "output_units": self.output_units,
            "input_columns": list(self.input_columns),
            "categorical_columns": list(self.categorical_columns),
            "model_columns": self.model_columns,
            "column_map": self.column_map_dict,
            "mappable": self.mappable,
        }


def _plain(v):
    if isinstance(v, np.generic):
        return v.item()
    return v
