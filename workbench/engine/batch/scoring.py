"""Explaining one chunk, on whichever process runs it: attributions, reasons, rejected rows.

A row that cannot be scored does not stop the chunk: text in a numeric column is found by
parsing the column, anything else the model refuses is isolated by bisection (score the
chunk; when that fails, score each half, down to single rows), and goes to the rejects with
its reason. Every other row is explained against the one background sample the run chose, by
the one method it chose, so a row's values do not depend on which chunk holds it.
"""

from __future__ import annotations

import os
import socket
import time
from contextlib import contextmanager
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pyarrow as pa

from workbench.engine.attributions import explain
from workbench.engine.errors import Cancelled
from workbench.engine.reasons import ReasonTemplates, reason_statements

CONTRIBUTION_PREFIX = "contrib__"
REJECT_COLUMNS = ("row", "reason")


@dataclass(frozen=True)
class BatchSettings:
    """Everything that decides the values written (the run's fingerprint is made from these).

    ``reasons``: reason statements per row (None: no reason columns). ``cutoff`` is on the
    response scale; ``adverse_if`` is ``"above"`` or ``"below"``. ``background_size``: rows of
    the seeded uniform sample of the whole input that every chunk is explained against.
    """

    background_size: int = 100
    seed: int = 0
    method: str = "auto"
    form: str = "interventional"
    chunk_rows: int = 50_000
    id_column: str | None = None
    reasons: int | None = None
    cutoff: float | None = None
    adverse_if: str = "above"
    not_allowed: tuple[str, ...] = ()
    templates: ReasonTemplates | None = field(default=None)

    def as_dict(self) -> dict:
        return {"background_size": self.background_size, "seed": self.seed,
                "method": self.method, "form": self.form, "chunk_rows": self.chunk_rows,
                "id_column": self.id_column, "reasons": self.reasons, "cutoff": self.cutoff,
                "adverse_if": self.adverse_if, "not_allowed": list(self.not_allowed),
                "templates": None if self.templates is None else self.templates.to_dict()}


def response_name(adapter) -> str:
    return "probability" if adapter.classes else "response"


def output_schema(adapter, settings: BatchSettings, id_type: pa.DataType | None) -> pa.Schema:
    """Columns of the output file, fixed before the first chunk so that every part agrees."""
    fields = [pa.field("row", pa.int64())]
    if settings.id_column:
        fields.append(pa.field(settings.id_column, id_type or pa.string()))
    fields += [pa.field(n, pa.float64()) for n in
               ("output", response_name(adapter), "base_value", "residual")]
    fields += [pa.field(CONTRIBUTION_PREFIX + f, pa.float64()) for f in adapter.input_columns]
    if settings.reasons:
        fields.append(pa.field("decision", pa.string()))
        for i in range(1, settings.reasons + 1):
            fields += [pa.field(f"reason_{i}_feature", pa.string()),
                       pa.field(f"reason_{i}_contribution", pa.float64()),
                       pa.field(f"reason_{i}_text", pa.string())]
        if settings.not_allowed:
            fields.append(pa.field("not_allowed_flagged", pa.string()))
    return pa.schema(fields)


def reject_schema(settings: BatchSettings, id_type: pa.DataType | None) -> pa.Schema:
    fields = [pa.field("row", pa.int64())]
    if settings.id_column:
        fields.append(pa.field(settings.id_column, id_type or pa.string()))
    fields.append(pa.field("reason", pa.string()))
    return pa.schema(fields)


# ---- finding the rows that cannot be scored ------------------------------------------------
def parse_numbers(adapter, frame: pd.DataFrame) -> tuple[pd.DataFrame, dict[int, str]]:
    """Numeric inputs parsed as numbers; positions of rows holding text there, with the reason."""
    frame = frame.copy()
    problems: dict[int, str] = {}
    categorical = set(adapter.categorical_columns)
    for col in adapter.input_columns:
        series = frame[col]
        if col in categorical or pd.api.types.is_numeric_dtype(series) \
                or pd.api.types.is_bool_dtype(series):
            continue
        parsed = pd.to_numeric(series, errors="coerce")
        bad = np.flatnonzero(series.notna().to_numpy() & parsed.isna().to_numpy())
        for i in bad:
            problems.setdefault(int(i), f"column '{col}' should hold a number but holds "
                                        f"{series.iloc[i]!r}")
        frame[col] = parsed.astype(float)
    return frame, problems


def _short(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return f"{type(exc).__name__}: {text[:200]}"


def isolate_failures(fn, frame: pd.DataFrame, positions: np.ndarray) -> dict[int, str]:
    """Rows (positions of ``frame``) on which ``fn`` raises, found by bisection."""
    if len(positions) == 0:
        return {}
    try:
        fn(frame.iloc[positions])
        return {}
    except (Cancelled, MemoryError):
        raise
    except Exception as exc:  # noqa: BLE001 - whatever the model refuses, the row is rejected
        if len(positions) == 1:
            return {int(positions[0]): f"the model could not use this row ({_short(exc)})"}
    mid = len(positions) // 2
    return {**isolate_failures(fn, frame, positions[:mid]),
            **isolate_failures(fn, frame, positions[mid:])}


def _check_output(adapter, rows: pd.DataFrame) -> None:
    out = np.asarray(adapter.score(rows), dtype=float)
    if not np.all(np.isfinite(out)):
        raise ValueError("the model's output is not a finite number")


# ---- one chunk -------------------------------------------------------------------------------
@dataclass(frozen=True)
class ChunkJob:
    """What a worker needs besides the model and the background: the rows and their place."""

    index: int
    start: int
    frame: pd.DataFrame
    method: str
    one_thread: bool = False


@dataclass(frozen=True)
class ChunkResult:
    """The finished rows of a chunk (or of a piece of one) as Arrow tables in the output's
    schema, built where the rows were explained, so the main process only appends them."""

    index: int
    start: int
    rows: pa.Table
    rejects: pa.Table
    notes: tuple[str, ...] = ()
    workers: tuple[str, ...] = ()  # host:pid of the processes that explained the rows
    cpu_seconds: float = 0.0  # processor time those processes spent on them
    seconds: float = 0.0  # wall-clock time those processes spent on them (summed)

    @property
    def rows_seen(self) -> int:
        return self.rows.num_rows + self.rejects.num_rows


def join_results(index: int, start: int, pieces: list[ChunkResult]) -> ChunkResult:
    """One chunk's result from the results of its consecutive pieces (in row order)."""
    pieces = sorted(pieces, key=lambda r: r.start)
    return ChunkResult(index, start, pa.concat_tables([r.rows for r in pieces]),
                       pa.concat_tables([r.rejects for r in pieces]),
                       tuple(dict.fromkeys(n for r in pieces for n in r.notes)),
                       tuple(dict.fromkeys(w for r in pieces for w in r.workers)),
                       sum(r.cpu_seconds for r in pieces), sum(r.seconds for r in pieces))


def explain_chunk(job: ChunkJob, adapter, background: pd.DataFrame, settings: BatchSettings,
                  schemas: tuple[pa.Schema, pa.Schema]) -> ChunkResult:
    """Attributions (and reasons) of the rows of one chunk, as tables in ``schemas`` (rows,
    rejects); rejects for the rows that fail. ``job.one_thread``: keep numba, OpenMP and BLAS
    to one thread (a worker process sharing the cores with other workers)."""
    with _thread_limits(job.one_thread):
        return _explain_chunk(job, adapter, background, settings, schemas)


def warm_up_rows(job: ChunkJob, adapter, background: pd.DataFrame, settings: BatchSettings,
                 schemas=None) -> int:
    """Explain ``job``'s rows and drop the result, so that a worker has its imports and
    compiled kernels loaded before its first chunk; the number of rows explained."""
    with _thread_limits(job.one_thread):
        explain(adapter, job.frame[adapter.input_columns], method=job.method, form=settings.form,
                background=background, background_size="all", seed=settings.seed)
    return len(job.frame)


@contextmanager
def _thread_limits(one_thread: bool):
    if not one_thread:
        yield
        return
    _one_thread()
    from threadpoolctl import threadpool_limits

    # HistGradientBoosting's predict (OpenMP) and BLAS would otherwise start a thread per core
    with threadpool_limits(limits=1):
        yield


def _explain_chunk(job, adapter, background, settings, schemas) -> ChunkResult:
    cpu_started, started = time.process_time(), time.perf_counter()
    frame, problems = parse_numbers(adapter, job.frame)
    rows = frame[adapter.input_columns]
    positions = np.array([i for i in range(len(rows)) if i not in problems], dtype=np.int64)
    problems.update(isolate_failures(lambda part: _check_output(adapter, part), rows, positions))

    def attribute(part):
        return explain(adapter, part, method=job.method, form=settings.form,
                       background=background, background_size="all", seed=settings.seed)

    good = np.array([i for i in range(len(rows)) if i not in problems], dtype=np.int64)
    notes: tuple[str, ...] = ()
    result = None
    if len(good):
        try:
            result = attribute(rows.iloc[good])
        except (Cancelled, MemoryError):
            raise
        except Exception:  # noqa: BLE001 - isolate the rows that the explanation refuses
            problems.update(isolate_failures(attribute, rows, good))
            good = np.array([i for i in range(len(rows)) if i not in problems], dtype=np.int64)
            result = attribute(rows.iloc[good]) if len(good) else None
    if result is not None:
        notes = result.notes
    row_schema, rejected_schema = schemas
    table = pa.Table.from_pandas(_row_table(adapter, settings, job, frame, rows, good, result),
                                 schema=row_schema, preserve_index=False)
    rejects = pa.Table.from_pandas(_reject_table(settings, job, problems),
                                   schema=rejected_schema, preserve_index=False)
    return ChunkResult(job.index, job.start, table, rejects, notes,
                       (f"{socket.gethostname()}:{os.getpid()}",),
                       time.process_time() - cpu_started, time.perf_counter() - started)


def _one_thread() -> None:
    """A worker process that shares the cores with others keeps numba to one thread."""
    try:
        import numba

        numba.set_num_threads(1)
    except (ImportError, ValueError):
        pass


def _row_table(adapter, settings, job, frame, rows, good, result) -> pd.DataFrame:
    cols: dict[str, object] = {"row": job.start + good}
    if settings.id_column:
        cols[settings.id_column] = frame[settings.id_column].iloc[good].to_numpy()
    n = len(good)
    if result is None:  # every row of the chunk was rejected
        output = response = residual = np.zeros(0)
        values, base = np.zeros((0, len(adapter.input_columns))), 0.0
    else:
        output, values, residual = result.output, result.values, result.residual
        base = result.base_value
        response = np.asarray(adapter.response(rows.iloc[good]), dtype=float)
    cols["output"] = output
    cols[response_name(adapter)] = response
    cols["base_value"] = np.full(n, base, dtype=float)
    cols["residual"] = residual
    for j, f in enumerate(adapter.input_columns):
        cols[CONTRIBUTION_PREFIX + f] = values[:, j]
    table = pd.DataFrame(cols)
    if settings.reasons:
        _add_reasons(table, adapter, settings, rows.iloc[good], values, response)
    return table


def _add_reasons(table, adapter, settings, explained, values, response) -> None:
    k = settings.reasons
    features = list(adapter.input_columns)
    records = explained.to_dict("records")
    decision, flagged = [], []
    reason_cols = {f"reason_{i}_{part}": [] for i in range(1, k + 1)
                   for part in ("feature", "contribution", "text")}
    for i, record in enumerate(records):
        got = reason_statements(dict(zip(features, values[i].tolist(), strict=True)), record,
                                adapter=adapter, cutoff=settings.cutoff,
                                adverse_if=settings.adverse_if, k=k, templates=settings.templates,
                                not_allowed=settings.not_allowed, response=float(response[i]))
        decision.append("adverse" if got.adverse else "favourable")
        flagged.append(", ".join(f.feature for f in got.flagged_not_allowed) or None)
        for r in range(1, k + 1):
            reason = got.reasons[r - 1] if r <= len(got.reasons) else None
            reason_cols[f"reason_{r}_feature"].append(None if reason is None else reason.feature)
            reason_cols[f"reason_{r}_contribution"].append(
                np.nan if reason is None else reason.contribution)
            reason_cols[f"reason_{r}_text"].append(None if reason is None else reason.text)
    table["decision"] = pd.Series(decision, dtype=object)
    for name, column in reason_cols.items():
        table[name] = pd.Series(column, dtype=float if name.endswith("contribution") else object)
    if settings.not_allowed:
        table["not_allowed_flagged"] = pd.Series(flagged, dtype=object)


def _reject_table(settings, job, problems: dict[int, str]) -> pd.DataFrame:
    order = sorted(problems)
    cols: dict[str, object] = {"row": np.asarray([job.start + i for i in order], dtype=np.int64)}
    if settings.id_column:
        cols[settings.id_column] = job.frame[settings.id_column].iloc[order].to_numpy()
    cols["reason"] = pd.Series([problems[i] for i in order], dtype=object)
    return pd.DataFrame(cols)
