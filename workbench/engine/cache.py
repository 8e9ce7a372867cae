"""A cache of engine results keyed by what made them.

Key: SHA-256 of (model SHA-256, data SHA-256, segment key, function name, parameters), so a
result is reused only for the same model file, the same data, the same rows and the same options.
Results live in memory (least recently used first out, at most ``max_entries``) and, when a
folder is given, on disk as pickles of our own result objects in a folder this program owns and
writes; nothing from elsewhere is ever read from it (file names are the keys we computed).
"""

from __future__ import annotations

import hashlib
import json
import os
import pickle
import tempfile
import threading
from collections import OrderedDict
from collections.abc import Callable, Mapping
from pathlib import Path

import numpy as np

CACHE_FORMAT = 1  # bump when result classes change shape, so old files are not reused
_KEY_LENGTH = 64


def _plain(value):
    """Parameters as JSON-able values with a stable form (arrays and tuples become lists)."""
    if isinstance(value, Mapping):
        return {str(k): _plain(v) for k, v in sorted(value.items(), key=lambda kv: str(kv[0]))}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    if isinstance(value, set | frozenset):
        return sorted((_plain(v) for v in value), key=repr)
    if isinstance(value, np.ndarray):
        return {"array": _plain(value.tolist()), "dtype": str(value.dtype)}
    if isinstance(value, np.generic):
        return value.item()
    if value is None or isinstance(value, bool | int | float | str):
        return value
    return repr(value)


def cache_key(
    model_sha256: str,
    data_sha256: str,
    segment: str | None,
    function: str,
    parameters: Mapping | None = None,
) -> str:
    """A hex SHA-256 naming one result: same inputs and parameters, same key."""
    payload = {
        "format": CACHE_FORMAT,
        "model": model_sha256,
        "data": data_sha256,
        "segment": segment,
        "function": function,
        "parameters": _plain(dict(parameters or {})),
    }
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), allow_nan=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


class ResultCache:
    """In-memory LRU cache of results, optionally backed by a folder of pickles."""

    def __init__(self, *, max_entries: int = 64, folder: str | Path | None = None) -> None:
        if int(max_entries) < 1:
            raise ValueError("max_entries must be at least 1")
        self.max_entries = int(max_entries)
        self.folder = None if folder is None else Path(folder)
        self._memory: OrderedDict[str, object] = OrderedDict()
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    def __len__(self) -> int:
        return len(self._memory)

    def __contains__(self, key: str) -> bool:
        return key in self._memory or (self._path(key) is not None and self._path(key).exists())

    def _path(self, key: str) -> Path | None:
        if self.folder is None:
            return None
        if len(key) != _KEY_LENGTH or any(ch not in "0123456789abcdef" for ch in key):
            raise ValueError("cache keys come from cache_key()")
        return self.folder / f"{key}.pickle"

    def _remember(self, key: str, value) -> None:
        self._memory[key] = value
        self._memory.move_to_end(key)
        while len(self._memory) > self.max_entries:
            self._memory.popitem(last=False)

    def get(self, key: str, default=None):
        """The cached result, or ``default``; a disk hit is kept in memory afterwards."""
        with self._lock:
            if key in self._memory:
                self._memory.move_to_end(key)
                self.hits += 1
                return self._memory[key]
        path = self._path(key)
        if path is not None and path.exists():
            try:
                with open(path, "rb") as fh:
                    value = pickle.load(fh)  # our own file, written by put() below
            except (OSError, EOFError, pickle.UnpicklingError, AttributeError, ImportError):
                path.unlink(missing_ok=True)  # damaged or from an older program: recompute
            else:
                with self._lock:
                    self._remember(key, value)
                    self.hits += 1
                return value
        with self._lock:
            self.misses += 1
        return default

    def put(self, key: str, value) -> None:
        with self._lock:
            self._remember(key, value)
        path = self._path(key)
        if path is None:
            return
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, suffix=".tmp")
        try:
            with os.fdopen(fd, "wb") as fh:
                pickle.dump(value, fh, protocol=pickle.HIGHEST_PROTOCOL)
            os.replace(tmp, path)  # atomic: a reader never sees half a file
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise

    def get_or_compute(self, key: str, compute: Callable[[], object]):
        """The cached result for ``key``, computing and storing it on a miss."""
        missing = object()
        value = self.get(key, missing)
        if value is not missing:
            return value
        value = compute()
        self.put(key, value)
        return value

    def clear(self, *, disk: bool = False) -> None:
        with self._lock:
            self._memory.clear()
        if disk and self.folder is not None and self.folder.exists():
            for path in self.folder.glob("*.pickle"):
                path.unlink(missing_ok=True)
