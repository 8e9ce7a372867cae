"""The audit trail: every computation run on a project, with what is needed to repeat it.

Each entry records what was run, its parameters, the seed, when (UTC, ISO 8601) and the versions
of the libraries that computed it. The dossier prints the trail in its appendix.
"""

from __future__ import annotations

import platform
from datetime import UTC, datetime
from importlib import metadata

from workbench import __version__

_LIBRARIES = ("numpy", "pandas", "scikit-learn", "shap", "scipy")


def utc_now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def library_versions() -> dict[str, str]:
    versions = {"workbench": __version__, "python": platform.python_version()}
    for name in _LIBRARIES:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "not installed"
    return versions


def _plain(value):
    from workbench.engine.checks.result import plain

    return plain(value)


def record(project, what: str, parameters: dict | None = None, *, seed: int | None = None) -> dict:
    """Append one entry to ``project.audit`` and return it.

    ``seed`` defaults to ``parameters["seed"]`` or the project's settings seed.
    """
    parameters = dict(parameters or {})
    if seed is None:
        seed = parameters.get("seed", project.settings.get("seed"))
    entry = {"what": str(what), "parameters": _plain(parameters), "seed": seed,
             "when": utc_now(), "versions": library_versions()}
    project.audit.append(entry)
    return entry
