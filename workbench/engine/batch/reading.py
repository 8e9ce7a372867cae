"""Reading a CSV or Parquet input in chunks of a fixed number of rows, never the whole file.

Chunk ``k`` always holds rows ``k * chunk_rows`` up to ``(k + 1) * chunk_rows`` (row positions
counting data rows from 0), whatever the file format, so a resumed run finds the same chunks.
Parquet is read by record batches (``ParquetFile.iter_batches``) and re-cut to that size; CSV
through ``pandas.read_csv(chunksize=...)`` with the delimiter and encoding that
:func:`workbench.engine.loading.detect_csv` finds.

Identifier columns read from CSV are kept as text, exactly as written (leading zeros survive),
so every chunk gives them the same type.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from workbench.engine.errors import InputError
from workbench.engine.loading import DATA_SUFFIXES, detect_csv

PARQUET_SUFFIXES = (".parquet", ".pq")


@dataclass(frozen=True)
class Chunk:
    """Rows ``start`` to ``start + len(frame)`` of the input; chunk number ``index``."""

    index: int
    start: int
    frame: pd.DataFrame

    @property
    def stop(self) -> int:
        return self.start + len(self.frame)


class ChunkReader:
    """The chunks of one data file, restricted to ``columns`` (checked against the header).

    ``total_rows`` is known for Parquet (from the footer) and None for CSV, where
    :meth:`fraction_read` estimates progress from the bytes consumed so far.
    """

    def __init__(self, path: str | os.PathLike, columns: list[str], *, chunk_rows: int,
                 id_column: str | None = None, text_columns: tuple[str, ...] = ()):
        self.path = Path(path)
        if isinstance(chunk_rows, bool) or int(chunk_rows) != chunk_rows or int(chunk_rows) < 1:
            raise InputError(f"the chunk size must be a whole number of rows of at least 1, "
                             f"not {chunk_rows!r}")
        self.chunk_rows = int(chunk_rows)
        self.id_column = id_column
        wanted = list(dict.fromkeys([*([id_column] if id_column else []), *columns]))
        self.columns = wanted
        self.text_columns = tuple(c for c in text_columns if c in wanted)
        suffix = self.path.suffix.lower()
        if not self.path.is_file():
            raise InputError(f"{self.path}: no such data file")
        if self.path.stat().st_size == 0:
            raise InputError(f"{self.path}: the file is empty")
        if suffix in PARQUET_SUFFIXES:
            self.format = "parquet"
            try:
                self._parquet = pq.ParquetFile(self.path)
            except Exception as exc:  # noqa: BLE001 - pyarrow raises several kinds
                raise InputError(f"{self.path}: not a readable Parquet file ({exc})") from exc
            header = list(self._parquet.schema_arrow.names)
            self.total_rows: int | None = int(self._parquet.metadata.num_rows)
            self.options: dict = {"format": "parquet"}
        elif suffix in DATA_SUFFIXES:
            self.format = "csv"
            self.options = {"format": "csv", **detect_csv(self.path)}
            try:
                header = [str(c) for c in pd.read_csv(
                    self.path, sep=self.options["delimiter"], encoding=self.options["encoding"],
                    nrows=0).columns]
            except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError) as exc:
                raise InputError(f"{self.path}: not a readable CSV table ({exc})") from exc
            self.total_rows = None
        else:
            raise InputError(f"{self.path}: unknown data file kind '{suffix or '(none)'}'; "
                             "expected .csv or .parquet")
        missing = [c for c in wanted if c not in header]
        if missing:
            role = "ID column" if missing == [id_column] else "column(s) the model needs"
            raise InputError(f"{self.path}: the data lacks the {role}: {', '.join(missing)}")
        self._handle = None

    # ---- identity of the columns --------------------------------------------------------------
    def id_type(self) -> pa.DataType | None:
        """Arrow type of the ID column in the output (text for CSV input)."""
        if self.id_column is None:
            return None
        if self.format == "csv":
            return pa.string()
        kind = self._parquet.schema_arrow.field(self.id_column).type
        if pa.types.is_dictionary(kind):
            kind = kind.value_type
        if pa.types.is_large_string(kind) or pa.types.is_string_view(kind):
            return pa.string()
        return kind

    def fraction_read(self) -> float:
        """How much of the file has been read (bytes for CSV); 0 before, 1 after."""
        if self._handle is None:
            return 0.0
        if self._handle.closed:
            return 1.0
        size = max(self.path.stat().st_size, 1)
        return min(self._handle.tell() / size, 1.0)

    # ---- the chunks -----------------------------------------------------------------------------
    def __iter__(self) -> Iterator[Chunk]:
        frames = self._parquet_frames() if self.format == "parquet" else self._csv_frames()
        for index, frame in enumerate(frames):
            yield Chunk(index, index * self.chunk_rows, frame.reset_index(drop=True))

    def _parquet_frames(self) -> Iterator[pd.DataFrame]:
        pending: list[pa.RecordBatch] = []
        held = 0
        batches = self._parquet.iter_batches(batch_size=self.chunk_rows, columns=self.columns)
        for batch in batches:
            pending.append(batch)
            held += batch.num_rows
            while held >= self.chunk_rows:
                table = pa.Table.from_batches(pending)
                yield self._parquet_frame(table.slice(0, self.chunk_rows))
                rest = table.slice(self.chunk_rows)
                pending, held = rest.to_batches(), rest.num_rows
        if held:
            yield self._parquet_frame(pa.Table.from_batches(pending))

    def _parquet_frame(self, table: pa.Table) -> pd.DataFrame:
        return table.to_pandas()[self.columns]

    def _csv_frames(self) -> Iterator[pd.DataFrame]:
        dtypes = {c: "str" for c in self.text_columns}
        if self.id_column:
            dtypes[self.id_column] = "str"
        with open(self.path, "rb") as handle:
            self._handle = handle
            try:
                reader = pd.read_csv(handle, sep=self.options["delimiter"],
                                     encoding=self.options["encoding"], usecols=self.columns,
                                     dtype=dtypes or None, chunksize=self.chunk_rows)
                with reader:
                    for frame in reader:
                        frame.columns = [str(c) for c in frame.columns]
                        yield frame[self.columns]
            except UnicodeDecodeError as exc:
                raise InputError(f"{self.path}: text encoding changes inside the file ({exc})") from exc
            except pd.errors.ParserError as exc:
                raise InputError(f"{self.path}: not a readable CSV table ({exc})") from exc


def text_categorical_columns(adapter) -> tuple[str, ...]:
    """Categorical inputs whose fitted categories are all text: read them as text from CSV, so
    a chunk where such a column happens to look numeric (or empty) keeps the same type."""
    cmap = adapter.column_map
    if cmap is None:
        return ()
    out = []
    for col, cats in cmap.categories.items():
        values = [c for c in cats if not (isinstance(c, float) and np.isnan(c))]
        if values and all(isinstance(c, str) for c in values):
            out.append(col)
    return tuple(out)
