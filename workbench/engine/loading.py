"""Opening model and data files, with the user's safety first.

Model files:
- ``.skops`` opens without running code. Types skops does not trust by default are listed and
  refused unless the user trusts the file.
- ``.joblib``, ``.pkl``, ``.pickle`` run code when opened: refused unless ``trust=True``.
Data files: CSV (delimiter and encoding detected) and Parquet.
Whatever opens, its SHA-256 is recorded for the audit trail. Every failure is an
:class:`InputError` with one line naming the file and the problem.
"""

from __future__ import annotations

import csv
import hashlib
import pickle
import warnings
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd

from workbench.engine.errors import InputError

MODEL_SUFFIXES = (".skops", ".joblib", ".pkl", ".pickle")
PICKLE_SUFFIXES = (".joblib", ".pkl", ".pickle")
DATA_SUFFIXES = (".csv", ".txt", ".tsv", ".parquet", ".pq")
_SNIFF_BYTES = 256 * 1024
_DELIMITERS = ",;\t|"
_ENCODINGS = ("utf-8-sig", "cp1252")


def sha256_file(path: str | Path, *, block: int = 1 << 20) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while chunk := fh.read(block):
            h.update(chunk)
    return h.hexdigest()


@dataclass(frozen=True)
class LoadedModel:
    estimator: object
    path: Path
    sha256: str
    format: str
    size: int
    trusted_types: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()


def _check_exists(path: Path, what: str) -> None:
    if not path.exists():
        raise InputError(f"{path}: no such {what} file")
    if path.is_dir():
        raise InputError(f"{path}: is a folder, not a {what} file")
    if path.stat().st_size == 0:
        raise InputError(f"{path}: the file is empty")


def untrusted_types(path: str | Path) -> list[str]:
    """Types in a .skops file that skops does not trust by default."""
    import skops.io as sio

    path = Path(path)
    _check_exists(path, "model")
    if not zipfile.is_zipfile(path):
        raise InputError(f"{path}: not a skops model file (not a zip archive; truncated or another kind of file)")
    try:
        return list(sio.get_untrusted_types(file=path))
    except Exception as exc:  # noqa: BLE001 - skops raises many kinds on damaged files
        raise InputError(f"{path}: the skops file is damaged or truncated ({_short(exc)})") from exc


def load_model(path: str | Path, *, trust: bool = False) -> LoadedModel:
    """Open a fitted model file. ``trust`` allows pickles and unlisted skops types."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in MODEL_SUFFIXES:
        raise InputError(
            f"{path}: unknown model file kind '{suffix or '(none)'}'; expected one of {', '.join(MODEL_SUFFIXES)}"
        )
    _check_exists(path, "model")
    caught: list[str] = []
    if suffix == ".skops":
        estimator, trusted = _load_skops(path, trust)
    else:
        if not trust:
            raise InputError(
                f"{path}: a {suffix} file can run any code when it is opened; refused. "
                "Open it only if you trust where it came from (--trust), or save the model with skops"
            )
        estimator = _load_pickle(path, caught)
        trusted = ()
    _check_model(path, estimator)
    return LoadedModel(estimator, path, sha256_file(path), suffix.lstrip("."), path.stat().st_size, tuple(trusted), tuple(caught))


def _load_skops(path: Path, trust: bool):
    import skops.io as sio

    found = untrusted_types(path)
    if found and not trust:
        raise InputError(
            f"{path}: holds types skops does not trust by default: {', '.join(found)}; "
            "open it only if you trust its source (--trust)"
        )
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return sio.load(path, trusted=found), found
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"{path}: the skops file could not be read ({_short(exc)})") from exc


def _load_pickle(path: Path, caught: list[str]):
    import joblib

    try:
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            obj = joblib.load(path)
        for w in seen:
            if "InconsistentVersionWarning" in type(w.message).__name__ or "version" in str(w.message).lower():
                caught.append(str(w.message).splitlines()[0])
        return obj
    except (ModuleNotFoundError, ImportError, AttributeError) as exc:
        raise InputError(
            f"{path}: made with a library version this installation does not have ({_short(exc)})"
        ) from exc
    except (EOFError, pickle.UnpicklingError, ValueError, zipfile.BadZipFile, IndexError, KeyError) as exc:
        raise InputError(f"{path}: truncated or not a pickle/joblib file ({_short(exc)})") from exc


def _check_model(path: Path, estimator) -> None:
    from sklearn.exceptions import NotFittedError
    from sklearn.utils.validation import check_is_fitted

    if not hasattr(estimator, "predict") or not hasattr(estimator, "get_params"):
        raise InputError(f"{path}: holds a {type(estimator).__name__}, not a fitted scikit-learn model")
    try:
        check_is_fitted(estimator)
    except NotFittedError as exc:
        raise InputError(f"{path}: the {type(estimator).__name__} in it has not been fitted") from exc
    except TypeError:
        pass


def _short(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text[:200]


# ---- data ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class Dataset:
    """A data file as loaded: the frame, its identity and the roles of its columns."""

    frame: pd.DataFrame
    path: Path | None
    sha256: str
    target: str | None = None
    id_column: str | None = None
    read_options: dict = field(default_factory=dict)

    @property
    def y(self) -> pd.Series | None:
        return None if self.target is None else self.frame[self.target]

    @property
    def ids(self) -> pd.Series | None:
        return None if self.id_column is None else self.frame[self.id_column]

    @property
    def n_rows(self) -> int:
        return len(self.frame)


def frame_sha256(frame: pd.DataFrame) -> str:
    """A content hash of an in-memory frame (for data that did not come from a file)."""
    h = hashlib.sha256()
    h.update(",".join(map(str, frame.columns)).encode())
    h.update(pd.util.hash_pandas_object(frame, index=False).to_numpy().tobytes())
    return h.hexdigest()


def detect_csv(path: Path) -> dict:
    """Encoding and delimiter of a CSV file, from its first bytes."""
    with open(path, "rb") as fh:
        head = fh.read(_SNIFF_BYTES)
    if not head.strip():
        raise InputError(f"{path}: the file is empty")
    if b"\x00" in head:
        raise InputError(f"{path}: looks like a binary file, not CSV text")
    text = None
    for enc in _ENCODINGS:
        try:
            text = head.decode(enc)
            encoding = enc
            break
        except UnicodeDecodeError as exc:
            # a multi-byte character cut at the end of the sample is not an error
            if enc.startswith("utf-8") and exc.start >= len(head) - 3:
                text = head[: exc.start].decode(enc)
                encoding = enc
                break
    if text is None:
        raise InputError(f"{path}: text encoding not recognised (tried {', '.join(_ENCODINGS)})")
    lines = [ln for ln in text.splitlines()[:50] if ln.strip()]
    sample = "\n".join(lines)
    try:
        delimiter = csv.Sniffer().sniff(sample, delimiters=_DELIMITERS).delimiter
    except csv.Error:
        counts = {d: lines[0].count(d) for d in _DELIMITERS} if lines else {}
        delimiter = max(counts, key=counts.get) if counts and max(counts.values()) > 0 else ","
    return {"encoding": encoding, "delimiter": delimiter}


def read_table(path: str | Path, *, columns: list[str] | None = None) -> tuple[pd.DataFrame, dict]:
    """Read a CSV or Parquet file into a frame, with clear errors."""
    path = Path(path)
    suffix = path.suffix.lower()
    _check_exists(path, "data")
    if suffix in (".parquet", ".pq"):
        try:
            return pd.read_parquet(path, columns=columns), {"format": "parquet"}
        except Exception as exc:  # noqa: BLE001 - pyarrow raises several kinds
            raise InputError(f"{path}: not a readable Parquet file ({_short(exc)})") from exc
    if suffix not in DATA_SUFFIXES:
        raise InputError(f"{path}: unknown data file kind '{suffix or '(none)'}'; expected .csv or .parquet")
    opts = detect_csv(path)
    try:
        frame = pd.read_csv(path, sep=opts["delimiter"], encoding=opts["encoding"], usecols=columns, low_memory=False)
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: text encoding changes inside the file ({_short(exc)})") from exc
    except pd.errors.EmptyDataError as exc:
        raise InputError(f"{path}: the file has no columns") from exc
    except (pd.errors.ParserError, ValueError) as exc:
        raise InputError(f"{path}: not a readable CSV table ({_short(exc)})") from exc
    return frame, {"format": "csv", **opts}


def load_data(
    path: str | Path,
    *,
    target: str | None = None,
    id_column: str | None = None,
) -> Dataset:
    """Load a data file; ``target`` and ``id_column`` must be columns of it when given."""
    path = Path(path)
    frame, opts = read_table(path)
    if len(frame.columns) == 0:
        raise InputError(f"{path}: the file has no columns")
    if len(frame) == 0:
        raise InputError(f"{path}: the file has a header but no rows")
    frame.columns = [str(c) for c in frame.columns]
    dupes = frame.columns[frame.columns.duplicated()].tolist()
    if dupes:
        raise InputError(f"{path}: column name(s) appear twice: {', '.join(dupes)}")
    for role, col in (("target", target), ("ID", id_column)):
        if col is not None and col not in frame.columns:
            shown = ", ".join(frame.columns[:12]) + (" ..." if len(frame.columns) > 12 else "")
            raise InputError(f"{path}: no {role} column '{col}' (columns are: {shown})")
    return Dataset(frame, path, sha256_file(path), target, id_column, opts)


def dataset_from_frame(frame: pd.DataFrame, *, target: str | None = None, id_column: str | None = None) -> Dataset:
    return Dataset(frame, None, frame_sha256(frame), target, id_column, {})


def numeric_problem(series: pd.Series) -> tuple[int, object] | None:
    """(count, example) of values in a column that are not numbers, or None if all parse."""
    if pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series):
        return None
    present = series.dropna()
    parsed = pd.to_numeric(present, errors="coerce")
    bad = present[parsed.isna()]
    if len(bad) == 0:
        return None
    return int(len(bad)), bad.iloc[0]


__all__ = [
    "Dataset",
    "LoadedModel",
    "dataset_from_frame",
    "detect_csv",
    "frame_sha256",
    "load_data",
    "load_model",
    "numeric_problem",
    "read_table",
    "sha256_file",
    "untrusted_types",
]
