"""One OpenMP thread for small model calls made in the window's own process.

scikit-learn's HistGradientBoosting opens an OpenMP parallel region per tree, even for one row.
On a busy two-core machine each region waits for a second thread to be scheduled, so scoring
one row of a 250-tree model took 40 ms to almost 1 s instead of about 10 ms. OpenMP's thread
count is per calling thread, so the limit here touches no other thread's work.
"""

from __future__ import annotations

from contextlib import contextmanager
from functools import lru_cache

from threadpoolctl import ThreadpoolController


@lru_cache(maxsize=1)
def _controller() -> ThreadpoolController:
    return ThreadpoolController()  # finding the libraries costs a few ms: once per process


def find_thread_libraries() -> None:
    """Find the thread libraries now (13 ms), not at the first one-row score of a visit."""
    _controller()


@contextmanager
def single_threaded():
    """OpenMP limited to the calling thread for the duration (one-row scoring, one case)."""
    with _controller().limit(limits=1, user_api="openmp"):
        yield
