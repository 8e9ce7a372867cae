"""Headless attributions and reason statements for a whole portfolio, chunk by chunk.

``run_batch(adapter, data, out, settings=BatchSettings(...), model_sha256=...)`` reads the data
in chunks, explains them in this process or on Dask workers, writes one part per chunk (a killed
run resumes) and assembles the output atomically. ``sample_rows`` is the shared helper for
commands that may work on a sample of large data.
"""

from workbench.engine.batch.run import BatchProgress, BatchSummary, check_settings, run_batch
from workbench.engine.batch.sampling import reservoir_sample, sample_rows
from workbench.engine.batch.scoring import CONTRIBUTION_PREFIX, BatchSettings

__all__ = [
    "CONTRIBUTION_PREFIX",
    "BatchProgress",
    "BatchSettings",
    "BatchSummary",
    "check_settings",
    "reservoir_sample",
    "run_batch",
    "sample_rows",
]
