"""A loaded, cleaned dataset ready for search: features, target, roles, task."""

from __future__ import annotations

import difflib
import hashlib
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from tunelab.data._read import read_table_hashed
from tunelab.data._roles import ColumnRole, infer_roles
from tunelab.data._task import TASKS, Task, check_target, infer_task
from tunelab.errors import InputError


@dataclass
class Dataset:
    """Features and target after cleaning, with the decisions that produced them.

    ``X`` keeps only usable columns (identifiers dropped) in cleaned dtypes: numeric as float,
    categorical and text as object with NaN for missing, datetime as datetime64.
    """

    X: pd.DataFrame
    y: np.ndarray
    task: Task
    target: str
    columns: list[ColumnRole]
    classes: list[object] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    fingerprint: str = ""
    sha256: str = ""  # of the file it was read from, hashed while reading (every step of a launch reuses it)

    @property
    def roles(self) -> dict[str, str]:
        """Column name → role for the columns kept in ``X``."""
        return {c.name: c.role for c in self.columns if c.role != "id"}

    @property
    def cardinality(self) -> dict[str, int]:
        """Column name → distinct values, what the preprocessor sizes its encodings by."""
        return {c.name: c.n_unique for c in self.columns}

    @property
    def n_rows(self) -> int:
        return int(self.X.shape[0])


def dataset_fingerprint(file_hash: str, target: str, task: str) -> str:
    """The identity of a study's data: file bytes + target + task."""
    return hashlib.sha256(f"{file_hash}\n{target}\n{task}".encode()).hexdigest()


def load_dataset(path: str | Path, target: str, task: str | None = None) -> Dataset:
    """Read a file and prepare it for search.

    Raises
    ------
    InputError
        Unreadable file, unknown target column, unusable target, or unknown task.
    """
    path = Path(path)
    frame, sha = read_table_hashed(path)
    dataset = prepare_frame(frame, target, task)
    dataset.sha256 = sha
    dataset.fingerprint = dataset_fingerprint(sha, target, dataset.task)
    return dataset


def prepare_frame(frame: pd.DataFrame, target: str, task: str | None = None) -> Dataset:
    """Clean a DataFrame that already holds the target column (see :func:`load_dataset`)."""
    if target not in frame.columns:
        close = difflib.get_close_matches(target, [str(c) for c in frame.columns], n=3)
        hint = f"did you mean {', '.join(repr(c) for c in close)}?" if close else (
            f"columns are: {', '.join(map(str, list(frame.columns)[:12]))}")
        raise InputError(f"target column '{target}' is not in the data", hint)
    if task is not None and task not in TASKS:
        raise InputError(f"unknown task '{task}'", f"use one of: {', '.join(TASKS)}")
    notes: list[str] = []
    y_raw = frame[target]
    if y_raw.dtype == object or pd.api.types.is_string_dtype(y_raw):
        y_raw = y_raw.where(y_raw.isna() | (y_raw.astype(str).str.strip() != ""))
    if pd.api.types.is_numeric_dtype(y_raw) and not pd.api.types.is_bool_dtype(y_raw):
        y_raw = y_raw.replace([np.inf, -np.inf], np.nan)
    chosen: Task = task or infer_task(y_raw)
    check_target(y_raw, target, chosen)
    keep = y_raw.notna().to_numpy()
    if not keep.all():
        notes.append(f"dropped {int((~keep).sum())} rows whose target is missing")
    features = frame.loc[keep].drop(columns=[target]).reset_index(drop=True)
    y_kept = y_raw[keep].reset_index(drop=True)
    columns = infer_roles(features)
    dropped = [c.name for c in columns if c.role == "id"]
    if dropped:
        notes.append(f"dropped identifier columns: {', '.join(dropped)}")
    usable = [c for c in columns if c.role != "id"]
    if not usable:
        raise InputError("no usable feature columns (all look like identifiers)", "check the file's columns")
    X = pd.DataFrame({c.name: clean_column(features[c.name], c.role) for c in usable})
    classes: list[object] = []
    if chosen == "regression":
        y = y_kept.to_numpy(dtype=float)
    else:
        y = _class_labels(y_kept)
        classes = sorted(pd.unique(y).tolist(), key=lambda v: (str(type(v)), v))
    return Dataset(X=X, y=y, task=chosen, target=target, columns=columns, classes=classes, notes=notes)


def _class_labels(y: pd.Series) -> np.ndarray:
    if pd.api.types.is_bool_dtype(y):
        return y.astype(int).to_numpy()
    if pd.api.types.is_numeric_dtype(y):
        values = y.to_numpy(dtype=float)
        if np.all(np.mod(values, 1) == 0):
            return values.astype(np.int64)
        return values
    return y.astype(str).to_numpy(dtype=object)


def clean_column(column: pd.Series, role: str) -> pd.Series:
    if role == "numeric":
        if pd.api.types.is_bool_dtype(column) or column.dtype == object:
            column = column.map(lambda v: v if pd.isna(v) else float(v))
        values = pd.to_numeric(column, errors="coerce").astype(float)
        return values.replace([np.inf, -np.inf], np.nan)
    if role == "datetime":
        if pd.api.types.is_datetime64_any_dtype(column):
            return column
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            parsed = pd.to_datetime(column, errors="coerce", format="mixed", utc=True)
        return parsed.dt.tz_localize(None)
    out = column.astype(object)
    return out.where(out.notna(), np.nan).map(lambda v: v if v is np.nan or pd.isna(v) else str(v))
