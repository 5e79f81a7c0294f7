"""Column roles: what each column is, so preprocessing can treat it right.

Roles are ``numeric``, ``categorical``, ``text`` (free text), ``datetime`` and ``id``
(identifiers, dropped).  The rules are simple and explainable; each decision returns a
reason so ``profile`` can show it.
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

Role = Literal["numeric", "categorical", "text", "datetime", "id"]
ROLES: tuple[Role, ...] = ("numeric", "categorical", "text", "datetime", "id")

_ID_NAME = re.compile(r"(^|[_\W])(id|uuid|guid|key)$|^id[_\W]", re.IGNORECASE)
_TEXT_MIN_TOKENS = 3.0  # mean words per value; common practice, no source
_ID_UNIQUE_SHARE = 0.95
_MONTH_NAME = re.compile(r"\b(?:jan|feb|mar|apr|may|jun|jul|aug|sep|oct|nov|dec)[a-z]*\b", re.IGNORECASE)


@dataclass(frozen=True)
class ColumnRole:
    """The inferred role of one column and why."""

    name: str
    role: Role
    reason: str
    missing_share: float
    n_unique: int


def infer_role(name: str, column: pd.Series) -> ColumnRole:
    """Infer one column's role from its dtype, uniqueness, and content."""
    n = len(column)
    present = column.dropna()
    missing = float(1 - len(present) / n) if n else 0.0
    n_unique = int(present.nunique())

    def role(r: Role, why: str) -> ColumnRole:
        return ColumnRole(name, r, why, missing, n_unique)

    if pd.api.types.is_bool_dtype(column):
        return role("numeric", "boolean, used as 0/1")
    if pd.api.types.is_datetime64_any_dtype(column):
        return role("datetime", "datetime values")
    if pd.api.types.is_numeric_dtype(column):
        integer = bool(np.all(np.mod(present.to_numpy(dtype=float), 1) == 0)) if len(present) else False
        if integer and _ID_NAME.search(name) and n_unique >= _ID_UNIQUE_SHARE * len(present) and len(present) > 20:
            return role("id", "integer identifier (unique values, id-like name)")
        return role("numeric", "numbers")
    values = present.astype(str)
    if len(values) == 0:
        return role("categorical", "no values present")
    if _looks_datetime(values):
        return role("datetime", "text that parses as dates")
    tokens = values.str.split().str.len().mean()
    if tokens >= _TEXT_MIN_TOKENS and n_unique > 0.3 * len(values):
        return role("text", f"free text, {tokens:.1f} words per value on average")
    if len(values) > 50 and n_unique >= _ID_UNIQUE_SHARE * len(values):
        return role("id", f"{n_unique} distinct values in {len(values)} rows, so it identifies rows")
    return role("categorical", f"{n_unique} categories")


def _looks_datetime(values: pd.Series) -> bool:
    sample = values.head(200)
    if sample.str.fullmatch(r"[-+]?\d+(\.\d+)?").mean() > 0.5:
        return False  # plain numbers stored as text are not dates
    if not sample.str.contains(r"\d").all():
        return False
    # A date has two numbers (day and month, or a year and more) or a month's name; the parser
    # alone also reads ordinals ("1st", "3rd": a passenger class) as days of the current month.
    dated = (sample.str.count(r"\d+") >= 2) | sample.str.contains(_MONTH_NAME)
    if dated.mean() < 0.9:
        return False
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        parsed = pd.to_datetime(sample, errors="coerce", format="mixed")
    return bool(parsed.notna().mean() >= 0.9)


def infer_roles(frame: pd.DataFrame, exclude: str | None = None) -> list[ColumnRole]:
    """Infer every column's role, skipping ``exclude`` (the target)."""
    return [infer_role(str(c), frame[c]) for c in frame.columns if c != exclude]
