"""Write the demo scenario to disk, and keep one built copy in the user's cache.

``write_demo`` writes exactly six files::

    lending_champion.skops     lending_reference.parquet    motor_frequency.skops
    lending_challenger.skops   lending_current.parquet      motor_policies.parquet

Models are saved with ``skops.io.dump``. ``skops.io.get_untrusted_types`` lists these types for
them (scikit-learn 1.9.1, skops 0.16.0), which :func:`load_demo_model` accepts and nothing else:

* ``lending_champion.skops``: ``numpy.dtype``
* ``lending_challenger.skops`` and ``motor_frequency.skops``: ``functools.partial``,
  ``sklearn.ensemble._hist_gradient_boosting.predictor.TreePredictor``,
  ``sklearn.utils.validation.check_array``

The whole build (data and the three models) takes a few seconds on one core.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

import pandas as pd
import sklearn
import skops.io

import workbench
from demo_models.build import (
    build_lending_challenger,
    build_lending_champion,
    build_motor_frequency,
)
from demo_models.lending import generate_lending
from demo_models.motor import generate_motor
from workbench.engine.errors import InputError
from workbench.engine.jobs import step

DEMO_FILES = (
    "lending_champion.skops",
    "lending_challenger.skops",
    "lending_reference.parquet",
    "lending_current.parquet",
    "motor_frequency.skops",
    "motor_policies.parquet",
)
# The motor book uses seed + 4, so the default seed 7 gives generate_motor's default 11.
MOTOR_SEED_OFFSET = 4
MODEL_SEED = 0
# The types skops cannot vouch for in these pipelines (see the module docstring).
DEMO_TRUSTED_TYPES = frozenset(
    {
        "numpy.dtype",
        "functools.partial",
        "sklearn.ensemble._hist_gradient_boosting.predictor.TreePredictor",
        "sklearn.utils.validation.check_array",
    }
)


def demo_paths(directory: str | os.PathLike) -> dict[str, Path]:
    """Where each demo file lives in ``directory``: file stem -> path."""
    directory = Path(directory)
    return {name.split(".")[0]: directory / name for name in DEMO_FILES}


def write_demo(
    directory: str | os.PathLike,
    *,
    seed: int = 7,
    n_reference: int = 20_000,
    n_current: int = 20_000,
    n_motor: int = 20_000,
    progress=None,
    cancel=None,
) -> dict[str, Path]:
    """Generate the data, fit the three models and write the six files into ``directory``.

    Returns file stem -> path (``"lending_champion"`` -> ``.../lending_champion.skops``).
    The same arguments give identical frames and identical model predictions.
    """
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    paths = demo_paths(directory)

    step(progress, cancel, 0.0, "Drawing the invented lending and motor data")
    reference, current = generate_lending(seed, n_reference=n_reference, n_current=n_current)
    policies = generate_motor(seed + MOTOR_SEED_OFFSET, n=n_motor)
    _write_frame(reference, paths["lending_reference"])
    _write_frame(current, paths["lending_current"])
    _write_frame(policies, paths["motor_policies"])

    step(progress, cancel, 0.1, "Fitting the lending champion")
    skops.io.dump(build_lending_champion(reference, seed=MODEL_SEED), paths["lending_champion"])
    step(progress, cancel, 0.2, "Fitting the lending challenger")
    skops.io.dump(build_lending_challenger(reference, seed=MODEL_SEED), paths["lending_challenger"])
    step(progress, cancel, 0.6, "Fitting the motor claim-frequency model")
    skops.io.dump(build_motor_frequency(policies, seed=MODEL_SEED), paths["motor_frequency"])
    step(progress, cancel, 1.0, "Demo written")
    return paths


def _write_frame(frame: pd.DataFrame, path: Path) -> None:
    frame.to_parquet(path, index=False, engine="pyarrow")


def load_demo_model(path: str | os.PathLike):
    """Load a demo model, trusting only the types listed in ``DEMO_TRUSTED_TYPES``."""
    untrusted = skops.io.get_untrusted_types(file=path)
    unexpected = sorted(set(untrusted) - DEMO_TRUSTED_TYPES)
    if unexpected:
        raise InputError(f"{path}: unexpected types in the demo model: {', '.join(unexpected)}")
    return skops.io.load(path, trusted=untrusted)


# Raise when the generated data or the model builders change.
SCENARIO_VERSION = 2


def demo_cache_dir() -> Path:
    """The cached demo: ``$WORKBENCH_CACHE/demo-<version>``, by default under ~/.cache/workbench.

    The version names the scenario, workbench and scikit-learn, because a model saved by one
    scikit-learn release is not promised to load in another, and a changed scenario must not be
    served from an older cache.
    """
    root = os.environ.get("WORKBENCH_CACHE")
    if root:
        base = Path(root).expanduser()
    else:
        xdg = os.environ.get("XDG_CACHE_HOME")
        base = (Path(xdg) if xdg else Path.home() / ".cache") / "workbench"
    return base / f"demo-s{SCENARIO_VERSION}-{workbench.__version__}-sklearn{sklearn.__version__}"


def ensure_demo(
    directory: str | os.PathLike | None = None, *, progress=None, cancel=None
) -> dict[str, Path]:
    """Return the demo files, building them first if ``directory`` (default: the cache) lacks any.

    The files are written into a staging directory beside the target and moved in with
    renames, so a reader never finds a half-written file; a cancelled build leaves nothing.
    """
    target = Path(directory) if directory is not None else demo_cache_dir()
    paths = demo_paths(target)
    if all(path.is_file() for path in paths.values()):
        if progress is not None:
            progress(1.0, "Demo ready")
        return paths

    target.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{target.name}.building-", dir=target.parent))
    try:
        write_demo(staging, progress=progress, cancel=cancel)
        try:
            # One atomic step when the target does not exist yet (or is an empty directory).
            staging.rename(target)
        except OSError:
            # The target holds something (perhaps another process's finished build, which is
            # identical): move each file in atomically instead.
            target.mkdir(parents=True, exist_ok=True)
            for name in DEMO_FILES:
                os.replace(staging / name, target / name)
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return paths
