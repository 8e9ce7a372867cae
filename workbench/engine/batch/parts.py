"""The work folder of a batch run: one part file per chunk, a manifest, atomic assembly.

``OUT.parquet.parts/`` holds ``manifest.json`` (the run's identity: the workbench and library
versions, the SHA-256 of the model and of the input, the class of interest and the settings, see
:mod:`.identity`; its fingerprint; and per finished chunk its row boundaries and counts), ``background.parquet`` (the background sample, so a resumed run uses the very same
rows) and per chunk ``part-000007.parquet`` with its ``part-000007.rejects.parquet``. A part
counts as done only once the manifest lists it; both are written to a temporary name first and
moved in with ``os.replace``, so a run killed at any moment leaves a folder a rerun can trust.

A rerun whose identity differs in anything does not reuse a single part: it discards the folder
and starts over, and says which things differ (``WorkFolder.started_over``).
"""

from __future__ import annotations

import json
import os
import shutil
import tempfile
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq

from workbench.engine.batch.identity import differences, identity_fingerprint

MANIFEST_FORMAT = 2  # 2: the run's identity with versions and class of interest
MANIFEST = "manifest.json"
BACKGROUND = "background.parquet"


def parts_folder(out: Path) -> Path:
    return out.with_name(out.name + ".parts")


def rejects_path(out: Path) -> Path:
    """``OUT.parquet`` -> ``OUT.rejects.csv``."""
    return out.with_name(out.stem + ".rejects.csv")


def _atomic_bytes(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_table_atomic(table: pa.Table, path: Path) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    try:
        pq.write_table(table, tmp)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


class WorkFolder:
    """The parts of one run; :meth:`open` decides between resuming and starting over."""

    def __init__(self, out: Path, identity: dict, header: dict):
        self.out = out
        self.folder = parts_folder(out)
        self.identity = identity
        self.fingerprint = identity_fingerprint(identity)
        self.header = {**header, "identity": identity}
        self.chunks: dict[int, dict] = {}
        self.started_over: str | None = None  # why an unfinished run's parts were discarded

    def open(self) -> WorkFolder:
        manifest = self.folder / MANIFEST
        if self.folder.is_dir():
            old = _read_manifest(manifest)
            if (old is not None and old.get("format") == MANIFEST_FORMAT
                    and old.get("fingerprint") == self.fingerprint):
                self.header = {**self.header, "background": old.get("background", {})}
                self.chunks = {int(k): v for k, v in old.get("chunks", {}).items()
                               if (self.folder / v["file"]).is_file()
                               and (self.folder / v["rejects"]).is_file()}
                return self
            self.started_over = self._why_not_resumed(old)
            shutil.rmtree(self.folder)
        self.folder.mkdir(parents=True)
        self._save()
        return self

    def _why_not_resumed(self, old: dict | None) -> str:
        if old is None:
            return (f"{self.folder} holds no readable manifest; its parts were discarded and "
                    "the run starts over")
        if old.get("format") != MANIFEST_FORMAT:
            return (f"{self.folder} was written by another workbench version (manifest format "
                    f"{old.get('format')}); its parts were discarded and the run starts over")
        found = differences(old.get("identity") or {}, self.identity)
        done = len(old.get("chunks") or {})
        return (f"starting over: {'; '.join(found)} differ(s) from the unfinished run in "
                f"{self.folder}, so its {done} finished chunk(s) were discarded")

    @property
    def resumed_rows(self) -> int:
        return sum(c["stop"] - c["start"] for c in self.chunks.values())

    def _save(self) -> None:
        body = {**self.header, "format": MANIFEST_FORMAT, "fingerprint": self.fingerprint,
                "chunks": {str(k): v for k, v in sorted(self.chunks.items())}}
        _atomic_bytes(self.folder / MANIFEST, json.dumps(body, indent=1, sort_keys=True).encode())

    # ---- background -----------------------------------------------------------------------------
    def saved_background(self) -> tuple[pd.DataFrame, tuple[int, ...], tuple[str, ...]] | None:
        """(rows, their positions in the input, notes) of the stored background, or None."""
        path = self.folder / BACKGROUND
        info = self.header.get("background") or {}
        if not path.is_file() or "positions" not in info:
            return None
        return (pd.read_parquet(path), tuple(int(i) for i in info["positions"]),
                tuple(info.get("notes", ())))

    def save_background(self, frame: pd.DataFrame, positions, notes) -> tuple:
        """Store the background; return it as read back, so first and resumed runs agree."""
        write_table_atomic(pa.Table.from_pandas(frame, preserve_index=False),
                           self.folder / BACKGROUND)
        self.header["background"] = {"positions": [int(i) for i in positions],
                                     "notes": list(notes)}
        self._save()
        return self.saved_background()

    # ---- parts ----------------------------------------------------------------------------------
    def add_part(self, index: int, start: int, stop: int, rows: pa.Table, rejects: pa.Table,
                 notes=()) -> None:
        name = f"part-{index:06d}"
        write_table_atomic(rows, self.folder / f"{name}.parquet")
        write_table_atomic(rejects, self.folder / f"{name}.rejects.parquet")
        self.chunks[index] = {"start": int(start), "stop": int(stop), "rows": rows.num_rows,
                              "rejected": rejects.num_rows, "file": f"{name}.parquet",
                              "rejects": f"{name}.rejects.parquet", "notes": list(notes)}
        self._save()

    def set_total(self, total_rows: int) -> None:
        self.header["total_rows"] = int(total_rows)
        self._save()

    def assemble(self, schema: pa.Schema, reject_schema: pa.Schema) -> tuple[Path, Path | None]:
        """Join the parts in row order into OUT (and OUT.rejects.csv), then drop the folder."""
        order = sorted(self.chunks)
        fd, tmp = tempfile.mkstemp(prefix=f".{self.out.name}.", suffix=".tmp", dir=self.out.parent)
        os.close(fd)
        try:
            with pq.ParquetWriter(tmp, schema) as writer:
                for k in order:
                    writer.write_table(pq.read_table(self.folder / self.chunks[k]["file"],
                                                     schema=schema))
            os.replace(tmp, self.out)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
        rejected = rejects_path(self.out)
        if sum(self.chunks[k]["rejected"] for k in order) == 0:
            rejected.unlink(missing_ok=True)  # a stale file from an earlier run would mislead
            written = None
        else:
            written = self._assemble_rejects(order, reject_schema, rejected)
        shutil.rmtree(self.folder, ignore_errors=True)
        return self.out, written

    def _assemble_rejects(self, order, reject_schema, target: Path) -> Path:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
        os.close(fd)
        try:
            header = True
            for k in order:
                if not self.chunks[k]["rejected"]:
                    continue
                frame = pq.read_table(self.folder / self.chunks[k]["rejects"],
                                      schema=reject_schema).to_pandas()
                frame.to_csv(tmp, mode="w" if header else "a", header=header, index=False)
                header = False
            os.replace(tmp, target)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
        return target


def _read_manifest(path: Path) -> dict | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return data if isinstance(data, dict) else None
