"""The project file (``.wbench``): JSON of our own schema, saved atomically.

A project holds the inputs (models A and B, data, reference) with their paths and SHA-256,
the settings, the analyst's expectations, display names, reason templates, notes, focus,
chosen cases, results' cache keys, stored check results, the sign-off and the audit trail.

Saving writes a temporary file in the same folder, flushes and fsyncs it, renames it over the
project (``os.replace``, atomic on POSIX and Windows) and fsyncs the folder, so a save cut off
at any point leaves either the old file or the new one. An autosave goes to a side file
(``<name>.wbench.autosave``); :func:`recovery_candidate` offers it when it is newer than the
project (after a crash). On opening, an input whose SHA-256 changed is not used silently:
:func:`open_project` raises :class:`InputsChanged` listing them, unless ``allow_changed``; the
caller re-links (:meth:`Project.relink`) or stops.
"""

from __future__ import annotations

import glob
import json
import os
import tempfile
import time
from dataclasses import dataclass, field
from pathlib import Path

from workbench import __version__
from workbench.engine.errors import InputError
from workbench.engine.loading import sha256_file
from workbench.session.audit import utc_now
from workbench.session.migrate import FORMAT, SCHEMA_VERSION, migrate

SUFFIX = ".wbench"
AUTOSAVE_SUFFIX = ".autosave"
INPUT_ROLES = ("model_a", "model_b", "data", "reference")
DEFAULT_SETTINGS = {"target": None, "positive_class": None, "cutoff": None,
                    "adverse_if": "above", "background_size": 100, "seed": 0, "group": None,
                    "id_column": None}


@dataclass(frozen=True)
class ChangedInput:
    """An input whose file is not what the project recorded."""

    role: str
    path: str
    recorded_sha256: str
    current_sha256: str | None  # None: the file is missing

    @property
    def reason(self) -> str:
        return "missing" if self.current_sha256 is None else "changed"

    def describe(self) -> str:
        if self.current_sha256 is None:
            return f"{self.role} file {self.path} is missing"
        return (f"{self.role} file {self.path} has changed since the project recorded it "
                f"(SHA-256 {self.recorded_sha256[:12]}... is now {self.current_sha256[:12]}...)")


class InputsChanged(InputError):
    """Raised by :func:`open_project` when inputs changed; holds the changes and the project."""

    def __init__(self, path, changes: list[ChangedInput], project: Project) -> None:
        self.changes = changes
        self.project = project
        listed = "; ".join(c.describe() for c in changes)
        super().__init__(f"{path}: {listed}; re-link the input(s) or stop")


@dataclass
class Project:
    """The state of one validation, as plain data (see the module docstring)."""

    inputs: dict = field(default_factory=dict)  # role -> {"path", "sha256", "trust"}
    settings: dict = field(default_factory=lambda: dict(DEFAULT_SETTINGS))
    expectations: dict = field(default_factory=dict)  # feature -> increasing/decreasing/none
    display_names: dict = field(default_factory=dict)  # column -> {"name", "units"}
    reason_templates: dict = field(default_factory=dict)
    notes: str = ""
    focus: dict = field(default_factory=dict)
    cases: list = field(default_factory=list)  # chosen rows (positions in the data)
    results: dict = field(default_factory=dict)  # name -> cache key
    checks: list = field(default_factory=list)  # CheckResult.as_dict() of the last run
    signoff: dict = field(default_factory=dict)  # name, role, date, decision, conditions
    sections: list = field(default_factory=list)  # dossier sections chosen (empty: all)
    audit: list = field(default_factory=list)
    created: str = field(default_factory=utc_now)
    saved: str | None = None
    migrated_from: list = field(default_factory=list)
    path: Path | None = None

    # ---- inputs ---------------------------------------------------------------------------
    def set_input(self, role: str, path, *, trust: bool = False, sha256: str | None = None) -> dict:
        """Record an input file (its SHA-256 is computed unless given)."""
        if role not in INPUT_ROLES:
            raise InputError(f"unknown input role {role!r}; expected one of {', '.join(INPUT_ROLES)}")
        path = Path(path).resolve()
        entry = {"path": str(path), "sha256": sha256 or sha256_file(path), "trust": bool(trust)}
        self.inputs[role] = entry
        return entry

    def input_path(self, role: str) -> Path | None:
        entry = self.inputs.get(role)
        return None if entry is None else self._resolve(entry["path"])

    def _resolve(self, text: str) -> Path:
        p = Path(text)
        if not p.is_absolute() and self.path is not None:
            p = self.path.parent / p
        return p

    def changed_inputs(self) -> list[ChangedInput]:
        out = []
        for role in INPUT_ROLES:
            entry = self.inputs.get(role)
            if not entry:
                continue
            p = self._resolve(entry["path"])
            current = sha256_file(p) if p.is_file() else None
            if current != entry["sha256"]:
                out.append(ChangedInput(role, str(p), entry["sha256"], current))
        return out

    def relink(self, role: str, path) -> dict:
        """Point an input at a (new) file and record its SHA-256, noting it in the audit trail."""
        from workbench.session.audit import record

        old = dict(self.inputs.get(role) or {})
        entry = self.set_input(role, path, trust=old.get("trust", False))
        record(self, "re-link input", {"role": role, "old_path": old.get("path"),
                                       "old_sha256": old.get("sha256"), "path": entry["path"],
                                       "sha256": entry["sha256"]})
        return entry

    # ---- plain data -----------------------------------------------------------------------
    def to_dict(self) -> dict:
        return {
            "format": FORMAT, "schema_version": SCHEMA_VERSION, "workbench_version": __version__,
            "created": self.created, "saved": self.saved, "inputs": self.inputs,
            "settings": self.settings, "expectations": self.expectations,
            "display_names": self.display_names, "reason_templates": self.reason_templates,
            "notes": self.notes, "focus": self.focus, "cases": self.cases,
            "results": self.results, "checks": self.checks, "signoff": self.signoff,
            "sections": self.sections, "audit": self.audit,
        }

    @classmethod
    def from_dict(cls, doc: dict, *, source: str = "the project file") -> Project:
        doc, passed = migrate(doc, source=source)
        settings = dict(DEFAULT_SETTINGS)
        settings.update(doc.get("settings") or {})
        try:
            return cls(inputs=dict(doc.get("inputs") or {}), settings=settings,
                       expectations=dict(doc.get("expectations") or {}),
                       display_names=dict(doc.get("display_names") or {}),
                       reason_templates=dict(doc.get("reason_templates") or {}),
                       notes=str(doc.get("notes") or ""), focus=dict(doc.get("focus") or {}),
                       cases=list(doc.get("cases") or []), results=dict(doc.get("results") or {}),
                       checks=list(doc.get("checks") or []),
                       signoff=dict(doc.get("signoff") or {}),
                       sections=list(doc.get("sections") or []),
                       audit=list(doc.get("audit") or []),
                       created=doc.get("created") or utc_now(), saved=doc.get("saved"),
                       migrated_from=passed)
        except (TypeError, ValueError) as exc:
            raise InputError(f"{source}: the project file is malformed ({exc})") from exc


# ---- saving -------------------------------------------------------------------------------
def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:  # folders cannot be opened on some systems (Windows): rename is enough there
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_atomically(text: str, path: Path) -> Path:
    """Write ``text`` to ``path`` so that a reader sees the old file or the new, never half."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    _fsync_folder(folder)
    _remove_leftovers(path)
    return path


LEFTOVER_AGE_S = 600  # temporary files of saves cut off this long ago are no one's any more


def _remove_leftovers(path: Path) -> None:
    """Delete temporary files that saves of ``path`` killed mid-write left behind."""
    now = time.time()
    for tmp in path.parent.glob(f".{glob.escape(path.name)}.*.tmp"):
        try:
            if now - tmp.stat().st_mtime > LEFTOVER_AGE_S:
                tmp.unlink()
        except OSError:
            pass


def _serialise(project: Project) -> str:
    from workbench.engine.checks.result import plain

    return json.dumps(plain(project.to_dict()), indent=1, ensure_ascii=False, allow_nan=False)


def save_project(project: Project, path=None) -> Path:
    """Save atomically to ``path`` (default: where it was opened); removes a stale autosave."""
    path = Path(path) if path is not None else project.path
    if path is None:
        raise InputError("the project has no file name yet; choose where to save it")
    if path.suffix.lower() != SUFFIX:
        raise InputError(f"{path}: a project file name must end in {SUFFIX}")
    project.saved = utc_now()
    write_atomically(_serialise(project), path)
    project.path = path
    side = autosave_path(path)
    if side.exists():
        side.unlink()
    return path


def autosave_path(path) -> Path:
    path = Path(path)
    return path.with_name(path.name + AUTOSAVE_SUFFIX)


def autosave(project: Project, path=None) -> Path:
    """Save a copy beside the project (``<name>.wbench.autosave``), atomically."""
    path = Path(path) if path is not None else project.path
    if path is None:
        raise InputError("the project has no file name yet; nothing to autosave beside")
    return write_atomically(_serialise(project), autosave_path(path))


def recovery_candidate(path) -> Path | None:
    """The autosave of ``path`` when it is newer than the project (or the project is gone)."""
    side = autosave_path(path)
    if not side.is_file():
        return None
    project = Path(path)
    if not project.exists() or side.stat().st_mtime_ns > project.stat().st_mtime_ns:
        return side
    return None


def discard_autosave(path) -> None:
    side = autosave_path(path)
    if side.exists():
        side.unlink()


# ---- opening ------------------------------------------------------------------------------
def read_project(path) -> Project:
    """Parse a project (or autosave) file, migrating older schemas; inputs are not checked."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: no such project file")
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not a workbench project file (not text)") from exc
    except json.JSONDecodeError as exc:
        raise InputError(f"{path}: the project file is damaged (not valid JSON: {exc.msg} at "
                         f"line {exc.lineno})") from exc
    project = Project.from_dict(doc, source=str(path))
    real = path
    if path.name.endswith(SUFFIX + AUTOSAVE_SUFFIX):
        real = path.with_name(path.name[: -len(AUTOSAVE_SUFFIX)])
    project.path = real
    return project


def open_project(path, *, allow_changed: bool = False, recover: bool = False) -> Project:
    """Open a project; raise :class:`InputsChanged` if an input's SHA-256 no longer matches.

    ``recover``: read the newer autosave instead, when :func:`recovery_candidate` finds one.
    """
    source = Path(path)
    if recover:
        source = recovery_candidate(path) or source
    project = read_project(source)
    changes = project.changed_inputs()
    if changes and not allow_changed:
        raise InputsChanged(path, changes, project)
    return project


__all__ = [
    "AUTOSAVE_SUFFIX", "INPUT_ROLES", "SUFFIX", "ChangedInput", "InputsChanged", "Project",
    "autosave", "autosave_path", "discard_autosave", "open_project", "read_project",
    "recovery_candidate", "save_project", "write_atomically",
]
