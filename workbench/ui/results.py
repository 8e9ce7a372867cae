"""The engine results the levels show, requested as cached jobs.

The ui computes no explanation itself: every number here comes from a ``workbench.engine``
function, run by the :class:`~workbench.ui.jobs.JobRunner`. The heavy ones are
:class:`~workbench.ui.pool_tasks.PoolTask` jobs, run in worker processes: they carry the model
and the data as ``Shared`` inputs and the rows as positions, never closures. Keys name the model (SHA-256), the
data (SHA-256 of data and reference), the segment and the parameters. Where an engine part has
not landed yet, the request fails at once with :class:`NotAvailable` and the level says so.
"""

from __future__ import annotations

import hashlib
import importlib

import numpy as np
import pandas as pd

from workbench.engine.jobs import rng
from workbench.engine.segments import segment_rows
from workbench.ui.focus import Focus, FocusState
from workbench.ui.jobs import JobRunner
from workbench.ui.pool_tasks import (
    PoolTask,
    Rows,
    Sampled,
    Shared,
    association_blocks,
    call_engine,
    engine_call,
    explain_one_row,
    score_rows,
)
from workbench.ui.workspace import Workspace

SAMPLE_ROWS = 1000  # rows explained for the attribution scatter and mean |attribution|
EFFECT_ROWS = 2000  # rows behind effect curves, ALE and pair maps
IMPORTANCE_ROWS = 5000  # rows permuted for permutation importance
H_SAMPLE = 300  # rows behind the H-statistics (their cost grows with the square of this)
H_SCREEN = 8  # pairwise H among this many features with the strongest overall H
H_BACKGROUND = 100  # each partial dependence averaged over this many sample rows (as the CLI)
NOT_AVAILABLE = "not available yet"


class NotAvailable(Exception):
    """An engine part this view needs is not there (yet), or no model/data is open."""


def engine_part(name: str):
    """``workbench.engine.<name>``, or None while that part has not landed."""
    try:
        return importlib.import_module(f"workbench.engine.{name}")
    except ImportError:
        return None


def _engine_fn(module: str, name: str, what: str):
    part = engine_part(module)
    fn = getattr(part, name, None) if part is not None else None
    if fn is None:
        raise NotAvailable(f"{what}: {NOT_AVAILABLE} (workbench.engine.{module}.{name} is not in this build)")
    return fn


def values_digest(values: dict) -> str:
    return hashlib.sha256(repr(sorted((k, repr(v)) for k, v in values.items())).encode()).hexdigest()[:16]


class Results:
    """Builds cache keys and engine jobs for one window."""

    def __init__(self, workspace: Workspace, focus: Focus, runner: JobRunner) -> None:
        self.workspace = workspace
        self.focus = focus
        self.runner = runner
        self._rows_cache: dict = {}

    # ---- rows ---------------------------------------------------------------------------------
    def segment_rows(self, state: FocusState) -> np.ndarray:
        key = (self.workspace.generation, state.segment)
        if key not in self._rows_cache:
            frame = self.workspace.frame
            rows = np.arange(0) if frame is None else segment_rows(frame, state.segment)
            self._rows_cache = {key: rows}
        return self._rows_cache[key]

    def sample_rows(self, state: FocusState, limit: int) -> np.ndarray:
        """A seeded sample of the segment's rows (all of them when there are fewer)."""
        rows = self.segment_rows(state)
        if len(rows) <= limit:
            return rows
        pick = rng(self.workspace.settings.seed).choice(len(rows), size=limit, replace=False)
        return np.sort(rows[pick])

    # ---- keys -----------------------------------------------------------------------------------
    def key(self, kind: str, slot: str, state: FocusState | None, **params) -> tuple:
        held = self.workspace.slot(slot)
        settings = self.workspace.settings
        segment = state.segment if state is not None else None
        return (kind, held.sha256 if held else None, self.workspace.data_key(), segment,
                repr(settings.positive_class), tuple(sorted(params.items())))

    def _need(self, slot: str):
        adapter = self.workspace.adapter(slot)
        if adapter is None:
            raise NotAvailable(f"no model {slot} is open")
        if self.workspace.frame is None:
            raise NotAvailable("no data is open")
        return adapter

    def _request(self, key, title, fn, on_done, on_error, relevant):
        return self.runner.request(key, title, fn, on_done, on_error=on_error, relevant=relevant)

    def _fail(self, on_error, exc):
        if on_error is not None:
            on_error(exc)
        return None

    # ---- scoring (the model's own output, not an explanation) --------------------------------
    def scores(self, slot: str, on_done, on_error=None, relevant=None):
        """(explained output, response) of every row, for the Portfolio table."""
        try:
            adapter = self._need(slot)
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        work = PoolTask(score_rows, (Shared(adapter), Shared(self.workspace.frame)))
        return self._request(self.key("scores", slot, None), f"Scoring all rows with model {slot}",
                             work, on_done, on_error, relevant)

    # ---- attributions ------------------------------------------------------------------------
    def _attribution_options(self) -> dict:
        s = self.workspace.settings
        return {"background": self.workspace.background_frame(), "background_size": s.background_size,
                "seed": s.seed}

    def _shared_attribution_options(self) -> dict:
        return {**self._attribution_options(), "background": Shared(self.workspace.background_frame())}

    def _rows(self, rows: np.ndarray) -> Rows:
        return Rows(Shared(self.workspace.frame), rows)

    def sample_attributions(self, slot: str, state: FocusState, on_done, on_error=None, relevant=None):
        """Attributions of a seeded sample of the segment (``Sampled``).

        The ``_engine_fn`` calls in these methods only check that the engine part is there (the
        worker process imports the function itself).
        """
        try:
            adapter = self._need(slot)
            _engine_fn("attributions", "explain", "Attributions")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows = self.sample_rows(state, SAMPLE_ROWS)
        work = PoolTask(engine_call, ("attributions", "explain", Shared(adapter), self._rows(rows)),
                        {"rows": rows, **self._shared_attribution_options()})

        s = self.workspace.settings
        key = self.key("attributions", slot, state, rows=len(rows), bg=s.background_size, seed=s.seed)
        return self._request(key, f"Attributions of {len(rows)} rows (model {slot})", work,
                             on_done, on_error, relevant)

    def case_attributions(self, slot: str, row_frame: pd.DataFrame, digest: str, on_done,
                          on_error=None, relevant=None):
        """Attributions of one row (its values as in the data, or trial values)."""
        try:
            adapter = self._need(slot)
            _engine_fn("attributions", "explain", "Contribution bars")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        # In a worker process too: in a thread, explaining even one row held Python's lock
        # for tens of milliseconds at a time.
        work = PoolTask(explain_one_row, (Shared(adapter), row_frame),
                        self._shared_attribution_options(), quick=True)

        s = self.workspace.settings
        key = self.key("case", slot, None, values=digest, bg=s.background_size, seed=s.seed)
        return self._request(key, f"Contributions of one case (model {slot})", work, on_done,
                             on_error, relevant)

    # ---- ranking ---------------------------------------------------------------------------------
    def associations(self, slot: str, state: FocusState, on_done, on_error=None, relevant=None):
        """(Associations, Clustering) of the model's input columns over the segment."""
        try:
            adapter = self._need(slot)
            _engine_fn("associations", "associations", "Feature association")
            _engine_fn("associations", "cluster_order", "Feature association")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows = self.sample_rows(state, IMPORTANCE_ROWS)
        columns = list(adapter.input_columns)
        work = PoolTask(association_blocks, (self._rows(rows), columns))

        key = self.key("associations", slot, state, rows=len(rows), columns=tuple(columns))
        return self._request(key, "Feature association", work, on_done, on_error, relevant)

    def importance(self, slot: str, state: FocusState, groups, on_done, on_error=None,
                   relevant=None, *, exposure: str | None = None):
        """Permutation importance over a sample of the segment (``Sampled``).

        ``exposure``: a column of the data holding each row's exposure; the metric is then
        weighted by it (a frequency model's deviance of observed frequencies), and rows without
        a positive exposure are left out.
        """
        try:
            adapter = self._need(slot)
            _engine_fn("importance", "permutation_importance", "Permutation importance")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        y_all = self.workspace.labels(slot)
        if y_all is None:
            return self._fail(on_error, NotAvailable(
                "Permutation importance needs the actual outcome: choose the target in the settings"))
        rows = self.sample_rows(state, IMPORTANCE_ROWS)
        known = y_all.iloc[rows].notna().to_numpy()
        options = {}
        if exposure is not None:
            weights = pd.to_numeric(self.workspace.frame[exposure], errors="coerce").to_numpy(float)
            known = known & np.isfinite(weights[rows]) & (weights[rows] > 0)
        rows = rows[known]
        if exposure is not None:
            options["exposure"] = weights[rows]
        seed = self.workspace.settings.seed
        groups = [list(g) for g in groups] if groups else None
        work = PoolTask(engine_call, ("importance", "permutation_importance", Shared(adapter),
                                      self._rows(rows), Rows(Shared(y_all), rows)),
                        {"rows": rows, "repeats": 5, "seed": seed, "groups": groups, **options})

        key = self.key("importance", slot, state, rows=len(rows), seed=seed,
                       groups=tuple(map(tuple, groups or ())),
                       target=self.workspace.settings.target, exposure=exposure)
        weighted = f", weighted by {exposure}" if exposure is not None else ""
        return self._request(key, f"Permutation importance{weighted} (model {slot})", work,
                             on_done, on_error, relevant)

    # ---- effects ------------------------------------------------------------------------------------
    def _effect_frame(self, state: FocusState) -> tuple[np.ndarray, Rows]:
        rows = self.sample_rows(state, EFFECT_ROWS)
        return rows, self._rows(rows)

    @staticmethod
    def _engine_task(module: str, name: str, adapter, *args, rows, **options) -> PoolTask:
        return PoolTask(engine_call, (module, name, Shared(adapter), *args),
                        {"rows": rows, **options})

    def partial_dependence(self, slot, state, feature, on_done, on_error=None, relevant=None):
        try:
            adapter = self._need(slot)
            _engine_fn("effects", "partial_dependence", "Effect curve")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows, frame = self._effect_frame(state)
        seed = self.workspace.settings.seed
        work = self._engine_task("effects", "partial_dependence", adapter, frame, feature, rows=rows,
                                 grid_size=20, ice_rows=200, seed=seed)
        key = self.key("pd", slot, state, feature=feature, rows=len(rows), seed=seed)
        return self._request(key, f"Effect curve of {feature}", work, on_done, on_error, relevant)

    def ale(self, slot, state, feature, on_done, on_error=None, relevant=None):
        try:
            adapter = self._need(slot)
            _engine_fn("effects", "accumulated_local_effects", "ALE curve")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows, frame = self._effect_frame(state)
        work = self._engine_task("effects", "accumulated_local_effects", adapter, frame, feature,
                                 rows=rows, bins=20)

        key = self.key("ale", slot, state, feature=feature, rows=len(rows))
        return self._request(key, f"ALE curve of {feature}", work, on_done, on_error, relevant)

    def pair_map(self, slot, state, pair, on_done, on_error=None, relevant=None):
        try:
            adapter = self._need(slot)
            _engine_fn("effects", "pair_dependence", "Pair map")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows, frame = self._effect_frame(state)
        a, b = pair
        work = self._engine_task("effects", "pair_dependence", adapter, frame, a, b, rows=rows,
                                 grid_size=12)

        key = self.key("pairmap", slot, state, pair=tuple(pair), rows=len(rows))
        return self._request(key, f"Pair map of {a} and {b}", work, on_done, on_error, relevant)

    # ---- pairs -------------------------------------------------------------------------------------
    def interactions(self, slot, state, on_done, on_error=None, relevant=None):
        try:
            adapter = self._need(slot)
            _engine_fn("interactions", "h_statistics", "Interaction strength (H)")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows, frame = self._effect_frame(state)
        seed = self.workspace.settings.seed
        work = self._engine_task("interactions", "h_statistics", adapter, frame, rows=rows,
                                 sample=H_SAMPLE, screen=H_SCREEN, seed=seed,
                                 background=H_BACKGROUND)

        key = self.key("h", slot, state, rows=len(rows), seed=seed, sample=H_SAMPLE,
                       background=H_BACKGROUND)
        return self._request(key, f"Interaction strength H (model {slot})", work, on_done,
                             on_error, relevant)

    def shap_interactions(self, slot, state, on_done, on_error=None, relevant=None):
        """Mean |SHAP interaction value| per pair, for tree models, when the engine offers it."""
        try:
            adapter = self._need(slot)
            _engine_fn("shap_interactions", "shap_interaction_strength", "SHAP interaction strength")
            if not engine_part("shap_interactions").supports(adapter):
                raise NotAvailable("SHAP interaction strength is computed for tree models only "
                                   f"(model {slot} is {adapter.model_type})")
        except NotAvailable as exc:
            return self._fail(on_error, exc)
        rows = self.sample_rows(state, 300)
        work = self._engine_task("shap_interactions", "shap_interaction_strength", adapter,
                                 self._rows(rows), rows=rows, sample=len(rows),
                                 **self._shared_attribution_options())

        key = self.key("shapint", slot, state, rows=len(rows))
        return self._request(key, f"SHAP interaction strength (model {slot})", work, on_done,
                             on_error, relevant)


__all__ = ["NotAvailable", "Results", "Sampled", "call_engine", "engine_part", "values_digest"]
