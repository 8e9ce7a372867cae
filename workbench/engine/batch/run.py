"""``run_batch``: attributions (and reason statements) for every row of a data file.

The run, in order:
1. open the input as chunks of ``settings.chunk_rows`` rows (:mod:`.reading`);
2. take the run's identity (workbench and library versions, SHA-256 of the input and of the
   model, class of interest, settings: :mod:`.identity`); resume the work folder when it is the
   same, otherwise discard its parts, start over and say what differs (:mod:`.parts`);
3. draw the background ONCE: a seeded uniform sample of ``background_size`` rows of the whole
   input (:func:`.sampling.reservoir_sample`), kept in the work folder;
4. choose the attribution method ONCE, by explaining a few background rows with
   ``settings.method`` (``auto`` picks tree, linear or model-agnostic), then use it for every
   chunk, so no chunk can fall back to another method on its own;
5. explain the chunks not yet done, in this process or on Dask workers (:mod:`.executors`),
   writing each as its own part; rows that cannot be scored go to the rejects;
6. assemble the parts in row order into the output (temporary file + ``os.replace``).

A row's values depend on the row, the model, the background and the method only, so the
output is the same whatever the chunk size, the number of workers or the order chunks finish.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from workbench.engine import jobs
from workbench.engine.attributions import explain
from workbench.engine.batch.executors import DaskCluster, InProcess, run_chunks
from workbench.engine.batch.identity import run_identity
from workbench.engine.batch.parts import WorkFolder
from workbench.engine.batch.reading import ChunkReader, text_categorical_columns
from workbench.engine.batch.sampling import reservoir_sample
from workbench.engine.batch.scoring import (
    BatchSettings,
    ChunkJob,
    _check_output,
    isolate_failures,
    output_schema,
    parse_numbers,
    reject_schema,
)
from workbench.engine.errors import InputError
from workbench.engine.loading import sha256_file
from workbench.engine.reasons import check_cutoff, check_side

# explain()'s method names by the method its result reports
_METHOD_OF_RESULT = {"tree-path": "tree", "tree-interventional": "tree",
                     "tree-reference": "tree-reference", "linear": "linear", "exact": "exact",
                     "sampling": "sampling"}
_PROBE_ROWS = 8


@dataclass(frozen=True)
class BatchProgress:
    """Where a run stands, for a progress display.

    ``rows_total`` is exact for Parquet and estimated from the bytes read for CSV
    (``total_is_estimate``). ``rows_resumed`` were done by an earlier, interrupted run.
    """

    rows_done: int
    rows_total: int | None
    total_is_estimate: bool
    rows_resumed: int
    rows_rejected: int
    chunks_done: int
    seconds: float = 0.0  # since the first chunk of this run was sent




@dataclass(frozen=True)
class BatchSummary:
    """What a run wrote and how."""

    output: Path
    rejects: Path | None
    rows_read: int
    rows_written: int
    rows_rejected: int
    chunks: int
    chunks_resumed: int
    method: str
    form: str
    background_rows: int
    base_value: float
    seed: int
    executor: str
    seconds: float
    input_sha256: str
    model_sha256: str
    settings: BatchSettings
    started_over: str | None = None
    notes: tuple[str, ...] = ()
    background_positions: tuple[int, ...] = ()  # row positions of the background rows
    seconds_explaining: float = 0.0  # from the first chunk sent to the last one written
    processes_used: int = 0  # distinct processes that explained chunks in this call
    cpu_seconds: float = 0.0  # processor time those processes spent explaining
    worker_seconds: float = 0.0  # wall-clock time they spent explaining, summed over them
    main_cpu_seconds: float = 0.0  # this process's processor time while the chunks were explained

    def as_dict(self) -> dict:
        return {"output": str(self.output), "rejects": None if self.rejects is None else str(self.rejects),
                "rows_read": self.rows_read, "rows_written": self.rows_written,
                "rows_rejected": self.rows_rejected, "chunks": self.chunks,
                "chunks_resumed": self.chunks_resumed, "method": self.method, "form": self.form,
                "background_rows": self.background_rows, "base_value": self.base_value,
                "seed": self.seed, "executor": self.executor, "seconds": self.seconds,
                "input_sha256": self.input_sha256, "model_sha256": self.model_sha256,
                "settings": self.settings.as_dict(), "started_over": self.started_over,
                "notes": list(self.notes), "background_positions": list(self.background_positions),
                "seconds_explaining": self.seconds_explaining,
                "processes_used": self.processes_used, "cpu_seconds": self.cpu_seconds,
                "worker_seconds": self.worker_seconds,
                "main_cpu_seconds": self.main_cpu_seconds}


def check_settings(adapter, settings: BatchSettings) -> BatchSettings:
    """Refuse options that cannot work, with one line each; fill the classifier cutoff."""
    if isinstance(settings.background_size, bool) or int(settings.background_size) < 1:
        raise InputError(f"the background must hold at least 1 row, not {settings.background_size!r}")
    if settings.reasons is not None:
        if int(settings.reasons) != settings.reasons or settings.reasons < 1:
            raise InputError(f"the number of reasons must be at least 1, not {settings.reasons!r}")
        check_side(settings.adverse_if)
        if settings.cutoff is None:
            raise InputError("reason statements need a cutoff on the response scale")
        cutoff = check_cutoff(settings.cutoff)
        if adapter.classes and not 0 <= cutoff <= 1:
            raise InputError(f"the cutoff is a probability for this classifier: give a number "
                             f"from 0 to 1, not {cutoff:g}")
        unknown = [f for f in settings.not_allowed if f not in adapter.input_columns]
        if unknown:
            raise InputError(f"not among the model's inputs: {', '.join(unknown)}")
        settings = replace(settings, cutoff=cutoff)
    if settings.id_column is not None and settings.id_column in adapter.input_columns:
        raise InputError(f"the ID column '{settings.id_column}' is one of the model's inputs")
    return settings


def run_batch(adapter, data: str | Path, out: str | Path, *, settings: BatchSettings,
              model_sha256: str, workers: int | None = None, scheduler: str | None = None,
              metadata: dict | None = None, progress=None, cancel=None,
              watch: Callable[[BatchProgress], None] | None = None,
              on_event: Callable[[str], None] | None = None,
              stop_after_chunks: int | None = None) -> BatchSummary:
    """Explain every row of ``data`` and write ``out`` (Parquet); see the module docstring.

    ``workers`` / ``scheduler``: run on Dask (see :mod:`.executors`); neither: this process.
    ``metadata``: extra JSON-safe entries for the output's key-value metadata (cautions).
    ``watch`` receives a :class:`BatchProgress` after every chunk; ``on_event`` one-line
    messages (starting over, resuming, the cluster used). ``stop_after_chunks`` is a test
    hook: stop with :class:`RuntimeError` once that many chunks were written in this call.
    """
    started = time.perf_counter()
    say = on_event or (lambda message: None)
    settings = check_settings(adapter, settings)
    data, out = Path(data), Path(out)
    if out.suffix.lower() not in (".parquet", ".pq"):
        raise InputError(f"{out}: the output is written as Parquet; give a .parquet file name")
    if not out.parent.is_dir():
        raise InputError(f"{out.parent}: no such folder for the output")
    if out.resolve() == data.resolve():
        raise InputError(f"{out}: the output would overwrite the input")
    reader = ChunkReader(data, list(adapter.input_columns), chunk_rows=settings.chunk_rows,
                         id_column=settings.id_column,
                         text_columns=text_categorical_columns(adapter))
    jobs.step(progress, cancel, 0.0, "fingerprinting the input")
    input_sha = sha256_file(data)
    header = {"input": {"path": str(data), **reader.options},
              "chunk_rows": settings.chunk_rows, "total_rows": reader.total_rows}
    identity = run_identity(settings.as_dict(), model_sha256=model_sha256,
                            input_sha256=input_sha, class_of_interest=adapter.positive_class)
    work = WorkFolder(out, identity, header).open()
    resumed_rows = work.resumed_rows
    if work.started_over:
        say(work.started_over)
    elif work.chunks:
        say(f"resuming: {len(work.chunks)} chunk(s), {work.resumed_rows:,} rows already written "
            f"in {work.folder}")

    background, background_positions, notes = _background(adapter, reader, settings, work,
                                                           progress, cancel)
    method, form, method_notes, base_value = _choose_method(adapter, background, settings)
    settings = replace(settings, form=form)
    notes += method_notes
    schema = output_schema(adapter, settings, reader.id_type())
    rejected_schema = reject_schema(settings, reader.id_type())

    schemas = (schema, rejected_schema)
    if workers is None and scheduler is None:
        executor = InProcess(adapter, background, settings, schemas)
    else:
        executor = DaskCluster(adapter, background, settings, schemas, workers=workers,
                               scheduler=scheduler, on_start=lambda name: say(f"running on {name}"))
    total_read = 0
    written_now = 0
    chunk_notes: list[str] = []
    processes: set[str] = set()
    cpu_seconds = worker_seconds = 0.0

    first_sent = None
    first_cpu = 0.0

    def todo():
        nonlocal total_read, first_sent, first_cpu
        for chunk in reader:
            total_read = chunk.stop
            if chunk.index in work.chunks:
                continue
            jobs.step(progress, cancel, _fraction(reader, work, total_read), "explaining rows")
            if first_sent is None:
                first_sent, first_cpu = time.perf_counter(), time.process_time()
            yield ChunkJob(chunk.index, chunk.start, chunk.frame, method)

    with executor:
        jobs.step(progress, cancel, 0.0, "starting the workers")
        executor.warm_up(ChunkJob(-1, 0, background.iloc[:_PROBE_ROWS], method))
        for result in run_chunks(executor, todo()):
            work.add_part(result.index, result.start, result.start + result.rows_seen,
                          result.rows, result.rejects, result.notes)
            chunk_notes.extend(n for n in result.notes if n not in chunk_notes)
            written_now += 1
            processes.update(result.workers)
            cpu_seconds += result.cpu_seconds
            worker_seconds += result.seconds
            if watch is not None:
                watch(_status(reader, work, total_read, resumed_rows,
                              time.perf_counter() - (first_sent or started)))
            jobs.step(progress, cancel, _fraction(reader, work, total_read), "explaining rows")
            if stop_after_chunks is not None and written_now >= stop_after_chunks:
                raise RuntimeError(f"stopped after {written_now} chunk(s) (test hook)")
    explaining = time.perf_counter() - first_sent if first_sent is not None else 0.0
    main_cpu = time.process_time() - first_cpu if first_sent is not None else 0.0
    work.set_total(total_read)
    rows_written = sum(c["rows"] for c in work.chunks.values())
    rows_rejected = sum(c["rejected"] for c in work.chunks.values())
    if rows_written + rows_rejected != total_read:
        raise RuntimeError(f"the parts hold {rows_written + rows_rejected} rows, the input {total_read}")
    resumed = len(work.chunks) - written_now
    info = {"settings": settings.as_dict(), "method": method, "form": settings.form,
            "background_rows": len(background), "base_value": base_value,
            "background_positions": list(background_positions),
            "input_sha256": input_sha, "model_sha256": model_sha256,
            "output_kind": adapter.output_kind, "output_units": adapter.output_units,
            **(metadata or {})}
    schema = schema.with_metadata({b"workbench": json.dumps(info, sort_keys=True, default=str).encode()})
    jobs.step(progress, cancel, 1.0, "assembling the output")
    output, rejects = work.assemble(schema, rejected_schema)
    return BatchSummary(output, rejects, total_read, rows_written, rows_rejected, len(work.chunks),
                        resumed, method, settings.form, len(background), base_value,
                        settings.seed, executor.name, time.perf_counter() - started, input_sha,
                        model_sha256, settings, work.started_over,
                        tuple(dict.fromkeys([*notes, *chunk_notes])), background_positions,
                        explaining, len(processes), cpu_seconds, worker_seconds, main_cpu)


def _fraction(reader, work, rows_seen: int) -> float:
    if reader.total_rows:
        return min(rows_seen / reader.total_rows, 1.0)
    return reader.fraction_read()


def _status(reader, work, rows_seen: int, resumed_rows: int, seconds: float) -> BatchProgress:
    done = sum(c["stop"] - c["start"] for c in work.chunks.values())
    total, estimate = reader.total_rows, False
    if total is None:
        frac = reader.fraction_read()
        total = max(int(round(rows_seen / frac)), rows_seen) if frac > 0 else None
        estimate = frac < 1.0
    rejected = sum(c["rejected"] for c in work.chunks.values())
    return BatchProgress(done, total, estimate, resumed_rows, rejected, len(work.chunks), seconds)


def _background(adapter, reader, settings, work, progress, cancel):
    """(rows, positions, notes) of the background: from the work folder when resuming, else
    drawn and stored there."""
    saved = work.saved_background()
    if saved is not None:
        return saved
    jobs.step(progress, cancel, 0.0, "drawing the background sample")

    def usable_chunks():
        for chunk in reader:
            frame, problems = parse_numbers(adapter, chunk.frame)
            mask = np.ones(len(frame), dtype=bool)
            mask[list(problems)] = False
            jobs.step(progress, cancel, 0.0, "drawing the background sample")
            yield frame[adapter.input_columns], mask

    sample, positions, _ = reservoir_sample(usable_chunks(), settings.background_size,
                                            settings.seed)
    notes = []
    if len(sample) < settings.background_size:
        notes.append(f"background: {len(sample)} rows, all the usable rows of the input "
                     f"({settings.background_size} were asked for)")
    bad = isolate_failures(lambda part: _check_output(adapter, part), sample,
                           np.arange(len(sample)))
    if bad:
        keep = np.array([i for i in range(len(sample)) if i not in bad], dtype=np.int64)
        if len(keep) == 0:
            raise InputError(f"{reader.path}: the model cannot score any of the background rows "
                             f"(for example: {next(iter(bad.values()))})")
        sample, positions = sample.iloc[keep].reset_index(drop=True), positions[keep]
        notes.append(f"background: {len(bad)} drawn row(s) the model cannot score were left out")
    return work.save_background(sample, positions, notes)


def _choose_method(adapter, background, settings) -> tuple[str, str, tuple[str, ...], float]:
    """Explain a few background rows with the asked method and form; keep what they became
    (auto picks the method; the path form falls back to interventional off trees)."""
    probe = explain(adapter, background.iloc[:_PROBE_ROWS], method=settings.method,
                    form=settings.form, background=background, background_size="all",
                    seed=settings.seed)
    return _METHOD_OF_RESULT[probe.method], probe.form, probe.notes, float(probe.base_value)
