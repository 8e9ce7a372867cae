"""Conventions every long computation follows: progress, cancel, chunks, seeds.

A long function takes keyword arguments ``progress`` (a callable ``(fraction, message)``) and
``cancel`` (a callable returning True when the user asked to stop, or a ``threading.Event``).
It works in chunks, calls :func:`step` between chunks, and is deterministic for a given seed.
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterator

import numpy as np

from workbench.engine.errors import Cancelled

ProgressFn = Callable[[float, str], None]
CancelFn = Callable[[], bool] | threading.Event | None


def is_cancelled(cancel: CancelFn) -> bool:
    if cancel is None:
        return False
    if isinstance(cancel, threading.Event):
        return cancel.is_set()
    return bool(cancel())


def step(progress: ProgressFn | None, cancel: CancelFn, fraction: float, message: str = "") -> None:
    """Report progress and raise :class:`Cancelled` if the user asked to stop."""
    if is_cancelled(cancel):
        raise Cancelled(message or "cancelled")
    if progress is not None:
        progress(float(min(max(fraction, 0.0), 1.0)), message)


def chunk_slices(n: int, chunk: int) -> Iterator[slice]:
    chunk = max(int(chunk), 1)
    for start in range(0, n, chunk):
        yield slice(start, min(start + chunk, n))


def rng(seed: int | None) -> np.random.Generator:
    return np.random.default_rng(0 if seed is None else seed)
