"""What decides the values a batch run writes, and how an unfinished run differs from this one.

A rerun may reuse the parts of an unfinished run only when every one of these is the same:
the workbench version and the versions of the libraries that compute the values, the SHA-256
of the model file, the SHA-256 of the whole input file (a full hash: it reads the file once,
far cheaper than explaining it), the class of interest and every setting that changes the
output. Anything else (the number of workers, a scheduler address) does not change a value.
"""

from __future__ import annotations

import hashlib
import json
from importlib import metadata

# the libraries whose version can change a value written (predictions, attributions, parsing)
LIBRARIES = ("numpy", "pandas", "scikit-learn", "scipy", "numba", "shap")

# the command-line option of each setting, to name a changed one the way the user gave it
SETTING_OPTIONS = {"background_size": "--background", "seed": "--seed", "method": "--method",
                   "form": "--form", "chunk_rows": "--chunk-rows", "id_column": "--id-column",
                   "reasons": "--reasons", "cutoff": "--cutoff", "adverse_if": "--adverse-if",
                   "not_allowed": "--not-allowed", "templates": "--wording"}


def library_versions() -> dict[str, str | None]:
    out = {}
    for name in LIBRARIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out


def run_identity(settings: dict, *, model_sha256: str, input_sha256: str,
                 class_of_interest) -> dict:
    """Everything that decides the values written, as JSON-safe data."""
    import workbench  # read at call time: the version is what this process runs now

    return {"workbench_version": workbench.__version__, "libraries": library_versions(),
            "model_sha256": model_sha256, "input_sha256": input_sha256,
            "class_of_interest": None if class_of_interest is None else str(class_of_interest),
            "settings": settings}


def identity_fingerprint(identity: dict) -> str:
    blob = json.dumps(identity, sort_keys=True, default=str)
    return hashlib.sha256(blob.encode()).hexdigest()


def _shown(value) -> str:
    text = json.dumps(value, sort_keys=True, default=str)
    return text if len(text) <= 40 else text[:37] + "..."


def _hash(value) -> str:
    return f"{value[:12]}..." if isinstance(value, str) else _shown(value)


def differences(old: dict, new: dict) -> list[str]:
    """What differs between two identities, one phrase each ("X (A then, B now)")."""
    found = []
    if old.get("workbench_version") != new.get("workbench_version"):
        found.append(f"the workbench version ({old.get('workbench_version')} then, "
                     f"{new.get('workbench_version')} now)")
    old_libs, new_libs = old.get("libraries") or {}, new.get("libraries") or {}
    for name in sorted(set(old_libs) | set(new_libs)):
        if old_libs.get(name) != new_libs.get(name):
            found.append(f"the {name} version ({old_libs.get(name)} then, "
                         f"{new_libs.get(name)} now)")
    if old.get("model_sha256") != new.get("model_sha256"):
        found.append(f"the model file (SHA-256 {_hash(old.get('model_sha256'))} then, "
                     f"{_hash(new.get('model_sha256'))} now)")
    if old.get("input_sha256") != new.get("input_sha256"):
        found.append(f"the input file (SHA-256 {_hash(old.get('input_sha256'))} then, "
                     f"{_hash(new.get('input_sha256'))} now)")
    if old.get("class_of_interest") != new.get("class_of_interest"):
        found.append(f"the class of interest, --class ({old.get('class_of_interest')} then, "
                     f"{new.get('class_of_interest')} now)")
    old_set, new_set = old.get("settings") or {}, new.get("settings") or {}
    for key in sorted(set(old_set) | set(new_set)):
        if old_set.get(key) != new_set.get(key):
            name = SETTING_OPTIONS.get(key, key)
            if key == "templates":
                found.append(f"the reason wording, {name}")
            else:
                found.append(f"{name} ({_shown(old_set.get(key))} then, "
                             f"{_shown(new_set.get(key))} now)")
    if not found and identity_fingerprint(old) != identity_fingerprint(new):
        found.append("the run's settings")
    return found
