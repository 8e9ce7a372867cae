"""Reading project files written by older layouts: a registry of one-step upgrades.

``STEPS[n]`` turns a project of schema ``n`` into schema ``n + 1``; :func:`migrate` applies
them in turn up to :data:`SCHEMA_VERSION`. A file from a newer (or unknown) schema is refused
with a clear message rather than guessed at.

Schemas:
1. the first layout: one ``model`` input, ``notes`` as a list of paragraphs, no expectations,
   display names, cases or sign-off;
2. models A and B (``model_a``, ``model_b``), notes as one text, expectations, display names,
   reason templates, focus, chosen cases, results' cache keys, stored checks, sign-off.
"""

from __future__ import annotations

import copy
from collections.abc import Callable

from workbench.engine.errors import InputError

SCHEMA_VERSION = 2
FORMAT = "workbench-project"


def _v1_to_v2(doc: dict) -> dict:
    inputs = dict(doc.get("inputs") or {})
    if "model" in inputs:
        inputs["model_a"] = inputs.pop("model")
    notes = doc.get("notes", "")
    if isinstance(notes, list):
        notes = "\n\n".join(str(p) for p in notes)
    doc.update(inputs=inputs, notes=notes)
    for key, empty in (("expectations", {}), ("display_names", {}), ("reason_templates", {}),
                       ("focus", {}), ("cases", []), ("results", {}), ("checks", []),
                       ("signoff", {}), ("audit", [])):
        doc.setdefault(key, empty)
    return doc


STEPS: dict[int, Callable[[dict], dict]] = {1: _v1_to_v2}


def migrate(doc: dict, *, source: str = "the project file") -> tuple[dict, list[int]]:
    """The document at :data:`SCHEMA_VERSION` and the versions it passed through."""
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise InputError(f"{source}: not a workbench project file")
    version = doc.get("schema_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise InputError(f"{source}: the project file has no valid schema version ({version!r})")
    if version > SCHEMA_VERSION:
        raise InputError(f"{source}: written by a newer workbench (project schema {version}; this "
                         f"version reads schemas up to {SCHEMA_VERSION}); open it with a newer "
                         "workbench")
    doc = copy.deepcopy(doc)
    passed = []
    while version < SCHEMA_VERSION:
        step = STEPS.get(version)
        if step is None:
            raise InputError(f"{source}: no way to read project schema {version}")
        doc = step(doc)
        passed.append(version)
        version += 1
        doc["schema_version"] = version
    return doc, passed
