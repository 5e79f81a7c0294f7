"""Dataset meta-features: what the search-space builder knows about a dataset before any trial.

The groups follow Rivolli, Garcia, Soares, Vanschoren and de Carvalho (2022), "Meta-features
for meta-learning", Knowledge-Based Systems: *simple* (counts and shares), *statistical*
(moments, correlation, outliers), *information-theoretic* (entropies, mutual information) and
*landmarkers* (cross-validated scores of fast, simple learners).  A fifth group, *cost
probes*, is tunelab's own: measured seconds per fit of every model family on a small
subsample, extrapolated to the full data, so that the budget can be split before the first
trial runs.

Definitions are chosen to agree with the reference implementation ``pymfe`` where it
defines the same quantity (skewness and kurtosis "type 3", equal-frequency discretisation with
``floor(n ** (1/3))`` bins for mutual information, entropies in bits, accuracy over 10-fold
stratified cross-validation for landmarkers).  Landmarkers use pymfe's optional protocol
(shuffled folds, features standardised first: ``MFE(shuffle_cv_folds=True)`` with
``fit(rescale="standard")``) rather than its default (unshuffled folds on raw values), because
1-NN on raw values measures the units of the columns more than the data.  The tests check
the agreement on scikit-learn's bundled data sets.  Where tunelab goes beyond pymfe (missing
values, categorical / text / datetime columns, regression targets) the rule is stated in the
docstring of the function that applies it.

Everything is bounded in time: statistics and mutual information use at most
``_STATS_MAX_ROWS`` rows, landmarkers at most ``max_rows`` rows and ``time_cap_s`` seconds
each, cost probes ``probe_rows`` rows, so 50,000 rows x 50 columns take a few seconds.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, fields, is_dataclass
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from tunelab.data._roles import ROLES
from tunelab.data._task import TASKS, Task
from tunelab.errors import InputError
from tunelab.values import plain

if TYPE_CHECKING:  # pragma: no cover - imported lazily at run time to keep start-up fast
    from sklearn.base import BaseEstimator

COST_FAMILIES: tuple[str, ...] = (
    "linear",
    "knn",
    "random_forest",
    "extra_trees",
    "hist_gb",
    "svm",
    "mlp",
)

# How the cost of one fit (plus one prediction pass) grows with the number of rows n, for a
# fixed set of columns and hyperparameters.  Common practice, no source: linear models,
# histogram boosting and MLPs do a fixed number of passes over the data; tree ensembles sort
# at every split (n log n); brute-force nearest neighbours compare every query with every
# training row, and kernel SVMs solve a problem over the n x n kernel matrix (between n^2 and
# n^3; n^2 is the usual planning figure).
SCALING_RULES: Mapping[str, str] = MappingProxyType(
    {
        "linear": "n",
        "knn": "n^2",
        "random_forest": "n log n",
        "extra_trees": "n log n",
        "hist_gb": "n",
        "svm": "n^2",
        "mlp": "n",
    }
)

LANDMARKERS: tuple[str, ...] = ("one_nn", "decision_stump", "naive_bayes", "linear")

_STATS_MAX_ROWS = 50_000  # rows used for statistics, mutual information and token counts
_LANDMARK_FOLDS = 10  # Rivolli et al. (2022) and pymfe both use 10-fold cross-validation
_MAX_ONE_HOT_LEVELS = 10  # most frequent levels of a categorical kept as indicator columns
_OUTLIER_WHISKER = 1.5  # Tukey's fences: outside [Q1 - 1.5 IQR, Q3 + 1.5 IQR]
_REPEAT_BELOW_S = 0.05  # a probe faster than this is repeated and the fastest run kept
_PROBE_REPEATS = 3


# --------------------------------------------------------------------------------------
# Value objects
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SimpleFeatures:
    """Counts and shares that need no model (Rivolli et al. 2022, "simple" group).

    Attributes
    ----------
    n_rows, n_columns
        Rows and feature columns (id columns excluded).
    rows_per_column
        ``n_rows / n_columns`` (pymfe ``inst_to_attr``).
    n_numeric, n_categorical, n_text, n_datetime
        Feature columns per role.
    n_id
        Columns whose role is ``"id"`` in ``roles`` (dropped by the loader, counted here).
    share_categorical
        ``n_categorical / n_columns``.
    share_missing
        Missing cells over all cells of the feature columns.
    n_classes
        Distinct target values for classification, ``None`` for regression.
    mean_text_tokens
        Per text column, mean number of whitespace-separated tokens over non-missing cells
        (on at most ``_STATS_MAX_ROWS`` sampled rows).
    """

    n_rows: int
    n_columns: int
    rows_per_column: float
    n_numeric: int
    n_categorical: int
    n_text: int
    n_datetime: int
    n_id: int
    share_categorical: float
    share_missing: float
    n_classes: int | None
    mean_text_tokens: Mapping[str, float]


@dataclass(frozen=True)
class StatisticalFeatures:
    """Shape of the numeric columns (Rivolli et al. 2022, "statistical" group).

    Only columns with role ``"numeric"`` enter; categorical codes have no meaningful moments.
    A value is ``None`` when no column qualifies.

    Attributes
    ----------
    mean_abs_skewness
        Mean over columns of ``|m3 / s**3|`` (``s`` with ``ddof=1``: e1071 and pymfe
        "type 3"), over non-missing values; constant columns and columns with fewer than three
        values are left out.
    mean_kurtosis
        Mean over the same columns of the excess kurtosis ``m4 / s**4 - 3`` (type 3).
    mean_abs_correlation
        Mean of the absolute Pearson correlation over distinct pairs of numeric columns
        (pairwise-complete rows when values are missing; pymfe ``cor``).
    outlier_share
        Share of non-missing numeric values outside Tukey's fences
        ``[Q1 - 1.5 IQR, Q3 + 1.5 IQR]`` of their column (quartiles by linear interpolation).
    share_columns_with_outliers
        Share of numeric columns with at least one such value (pymfe ``nr_outliers`` divided
        by the number of numeric columns).
    rows_used
        Rows the figures were computed on (a seeded sample when the data is larger).
    """

    mean_abs_skewness: float | None
    mean_kurtosis: float | None
    mean_abs_correlation: float | None
    outlier_share: float | None
    share_columns_with_outliers: float | None
    rows_used: int


@dataclass(frozen=True)
class InformationFeatures:
    """Entropy-based figures (Rivolli et al. 2022, "information-theoretic" group), in bits.

    Attributes
    ----------
    class_entropy
        Shannon entropy of the class distribution; ``None`` for regression.
    imbalance_ratio
        Size of the largest class over the size of the smallest; ``None`` for regression.
    mean_mutual_information
        Mean over numeric, datetime and categorical columns of the mutual information with
        the target.  Numeric and datetime columns are cut into ``floor(m ** (1/3))``
        equal-frequency bins (``m`` rows used), as pymfe does; categoricals use their levels;
        a missing value is a level of its own; text columns are left out.  For regression
        the target is binned the same way (tunelab's extension).  Like every plug-in
        estimate it grows with the number of levels: a near-unique categorical scores close
        to the class entropy.
    rows_used
        Rows the figures were computed on.
    """

    class_entropy: float | None
    imbalance_ratio: float | None
    mean_mutual_information: float | None
    rows_used: int


@dataclass(frozen=True)
class Landmarkers:
    """Cross-validated scores of four fast learners (Rivolli et al. 2022, "landmarking").

    Attributes
    ----------
    metric
        ``"accuracy"`` for classification, ``"r2"`` for regression.
    one_nn, decision_stump, naive_bayes, linear
        Mean score over the folds; ``None`` when skipped (the reason is in ``notes``).
        ``naive_bayes`` is ``None`` for regression.  ``linear`` is linear discriminant
        analysis for classification and ridge regression for regression.
    rows_used
        Rows in the landmarking sample (at most ``max_rows``).
    n_folds
        Folds of the (stratified, for classification) shuffled k-fold split.
    notes
        Landmarker name to the reason it was skipped.
    """

    metric: str
    one_nn: float | None
    decision_stump: float | None
    naive_bayes: float | None
    linear: float | None
    rows_used: int
    n_folds: int
    notes: Mapping[str, str]


@dataclass(frozen=True)
class CostProbe:
    """Measured and extrapolated cost of one fit of a model family.

    Attributes
    ----------
    family
        One of :data:`COST_FAMILIES`.
    model
        The estimator and settings that were timed.
    probe_rows
        Rows of the probe sample.
    probe_seconds
        CPU seconds (this thread's) of one fit plus one prediction pass of ``model`` on the probe
        sample, on one thread (the fastest of up to three runs when a run is shorter than
        50 ms; ensembles and the MLP are timed at a fifth of the work and multiplied by 5).
    estimated_seconds
        ``probe_seconds`` scaled to all rows by ``scaling``; ``None`` when the probe failed.
    scaling
        Growth of the cost with the rows ``n`` (see :data:`SCALING_RULES`).
    note
        Why the probe failed, or an empty string.
    """

    family: str
    model: str
    probe_rows: int
    probe_seconds: float | None
    estimated_seconds: float | None
    scaling: str
    note: str = ""


@dataclass(frozen=True)
class MetaFeatures:
    """All meta-features of one dataset, grouped as in Rivolli et al. (2022).

    Frozen; the mappings inside are plain dicts, to be read only, so that the object
    pickles to worker processes.

    Attributes
    ----------
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``.
    simple, statistical, information, landmarkers
        The four groups of Rivolli et al. (2022).
    cost
        Family name to :class:`CostProbe`, in the order of :data:`COST_FAMILIES`.
    seconds
        Wall-clock seconds the computation took.
    """

    task: str
    simple: SimpleFeatures
    statistical: StatisticalFeatures
    information: InformationFeatures
    landmarkers: Landmarkers
    cost: Mapping[str, CostProbe]
    seconds: float

    def to_dict(self) -> dict[str, Any]:
        """Return plain dicts, lists, numbers, strings and ``None``, ready for ``json.dumps``.

        Returns
        -------
        dict
            One key per group, nested the same way as the dataclasses.
        """
        result = plain(self)
        assert isinstance(result, dict)
        return result


# --------------------------------------------------------------------------------------
# Entry point
# --------------------------------------------------------------------------------------


def compute_metafeatures(
    X: pd.DataFrame,
    y: np.ndarray,
    task: Task,
    roles: Mapping[str, str],
    *,
    seed: int = 0,
    max_rows: int = 5000,
    time_cap_s: float = 2.0,
    probe_rows: int = 500,
    clock: Callable[[], float] = time.perf_counter,
    probe_clock: Callable[[], float] = time.thread_time,
) -> MetaFeatures:
    """Describe a dataset with meta-features, in bounded time.

    The space builder uses these to set priors and to split the budget between model
    families before any trial has run, so every part is capped in rows or seconds rather
    than exact on huge data.

    Parameters
    ----------
    X
        Feature columns as cleaned by the loader (no target; id columns dropped, or ignored
        if present with role ``"id"``).
    y
        Target, one value per row of ``X``.
    task
        ``"binary"``, ``"multiclass"`` or ``"regression"``.
    roles
        Column name to ``"numeric"``, ``"categorical"``, ``"text"``, ``"datetime"`` or
        ``"id"``; every column of ``X`` needs one.
    seed
        Seeds every subsample, fold split and randomised model.
    max_rows
        Rows of the landmarking sample.
    time_cap_s
        Seconds each landmarker may take; a landmarker that reaches the cap, or would pass it
        with its next fold, is skipped (``None``, with the reason in ``Landmarkers.notes``).
        ``0`` skips all landmarkers.
    probe_rows
        Rows of the sample each model family is timed on.
    clock
        Monotonic clock in seconds; a seam for tests.  It times the landmarkers (their caps
        are wall-clock limits) and the whole computation.
    probe_clock
        The clock of the cost probes: this thread's CPU seconds, so that the space built
        from them does not change with what else the machine runs (wall-clock probes on a
        busy machine kept SVM in one profile of a table and not in the next).  The probes
        fit on one thread, as trials do.

    Returns
    -------
    MetaFeatures
        The five groups; :meth:`MetaFeatures.to_dict` gives the JSON form.

    Raises
    ------
    InputError
        When ``task`` is unknown, a column has no or an unknown role, ``y`` does not match
        ``X`` in length, or there are no rows or no feature columns.
    """
    started = clock()
    col_roles = _check_inputs(X, y, task, roles, max_rows=max_rows, probe_rows=probe_rows)
    y_arr = np.asarray(y)
    n_rows = len(X)
    stats_seq, landmark_seq, probe_seq = np.random.SeedSequence(seed).spawn(3)
    stats_rows = _sample_rows(n_rows, _STATS_MAX_ROWS, np.random.default_rng(stats_seq))
    landmark_rows = _sample_rows(n_rows, max_rows, np.random.default_rng(landmark_seq))
    probe_sample = _sample_rows(n_rows, probe_rows, np.random.default_rng(probe_seq))
    classification = task != "regression"
    y_codes = _class_codes(y_arr) if classification else None
    target = y_codes if y_codes is not None else y_arr

    # One BLAS / OpenMP thread throughout: on a shared 2-core machine, two threads under
    # contention were measured up to 10x slower, and the probes are meant as per-worker
    # costs.  The limit only reaches libraries already loaded, hence the imports first.
    import sklearn.discriminant_analysis  # noqa: F401
    import sklearn.ensemble  # noqa: F401
    import sklearn.neighbors  # noqa: F401
    import sklearn.svm  # noqa: F401
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1):
        simple = _simple_features(X, col_roles, roles, y_codes, stats_rows)
        statistical = _statistical_features(X, col_roles, stats_rows)
        information = _information_features(X, col_roles, y_arr, y_codes, stats_rows)
        landmarkers = _landmarkers(
            _design_matrix(X, col_roles, landmark_rows),
            target[landmark_rows],
            classification,
            seed=seed,
            time_cap_s=time_cap_s,
            clock=clock,
        )
        cost = _cost_probes(
            _design_matrix(X, col_roles, probe_sample),
            target[probe_sample],
            n_rows,
            classification,
            seed=seed,
            clock=probe_clock,
        )
    return MetaFeatures(
        task=task,
        simple=simple,
        statistical=statistical,
        information=information,
        landmarkers=landmarkers,
        cost=cost,
        seconds=float(clock() - started),
    )


def _check_inputs(
    X: pd.DataFrame,
    y: Any,
    task: str,
    roles: Mapping[str, str],
    *,
    max_rows: int,
    probe_rows: int,
) -> dict[str, str]:
    """Validate and return the roles of the feature columns of ``X`` (id columns left out)."""
    if task not in TASKS:
        raise InputError(
            f"unknown task {task!r}", hint=f"use one of: {', '.join(TASKS)}"
        )
    if len(X) == 0:
        raise InputError("the data has no rows", hint="check the data file and its filters")
    if len(np.asarray(y)) != len(X):
        raise InputError(
            f"the target has {len(np.asarray(y))} values but the data has {len(X)} rows",
            hint="pass the target column of the same frame",
        )
    if max_rows < 2 or probe_rows < 2:
        raise InputError(
            "max_rows and probe_rows must be at least 2", hint="use the defaults (5000, 500)"
        )
    col_roles: dict[str, str] = {}
    for column in X.columns:
        role = roles.get(column)
        if role is None:
            raise InputError(
                f"column {column!r} has no role", hint="pass the roles inferred by the loader"
            )
        if role not in ROLES:
            raise InputError(
                f"column {column!r} has unknown role {role!r}",
                hint=f"use one of: {', '.join(ROLES)}",
            )
        if role != "id":
            col_roles[str(column)] = role
    if not col_roles:
        raise InputError(
            "the data has no feature columns", hint="keep at least one non-id column"
        )
    return col_roles


def _sample_rows(n: int, cap: int, rng: np.random.Generator) -> np.ndarray:
    """All row positions when ``n <= cap``, else ``cap`` positions drawn without replacement.

    The sample is sorted so that data under the cap keeps its original order, which makes
    fold splits identical to those of a reference computed on the full data.
    """
    if n <= cap:
        return np.arange(n)
    return np.sort(rng.choice(n, size=cap, replace=False))


def _class_codes(y: np.ndarray) -> np.ndarray:
    _, codes = np.unique(y, return_inverse=True)
    return codes.reshape(-1).astype(np.int64)


def _columns(col_roles: Mapping[str, str], *wanted: str) -> list[str]:
    return [c for c, r in col_roles.items() if r in wanted]


# --------------------------------------------------------------------------------------
# Simple
# --------------------------------------------------------------------------------------


def _simple_features(
    X: pd.DataFrame,
    col_roles: Mapping[str, str],
    roles: Mapping[str, str],
    y_codes: np.ndarray | None,
    stats_rows: np.ndarray,
) -> SimpleFeatures:
    n_rows, n_columns = len(X), len(col_roles)
    counts = {role: len(_columns(col_roles, role)) for role in ROLES}
    features = X[list(col_roles)]
    share_missing = float(features.isna().to_numpy().mean())
    text_tokens = {
        column: _mean_tokens(X[column].iloc[stats_rows])
        for column in _columns(col_roles, "text")
    }
    return SimpleFeatures(
        n_rows=n_rows,
        n_columns=n_columns,
        rows_per_column=n_rows / n_columns,
        n_numeric=counts["numeric"],
        n_categorical=counts["categorical"],
        n_text=counts["text"],
        n_datetime=counts["datetime"],
        n_id=sum(1 for r in roles.values() if r == "id"),
        share_categorical=counts["categorical"] / n_columns,
        share_missing=share_missing,
        n_classes=None if y_codes is None else int(np.unique(y_codes).size),
        mean_text_tokens=text_tokens,
    )


def _token_counts(s: pd.Series) -> np.ndarray:
    """Whitespace tokens per cell; missing cells give NaN."""
    counts = s.astype("string").str.split().str.len()
    return counts.to_numpy(dtype=float, na_value=np.nan)


def _mean_tokens(s: pd.Series) -> float:
    counts = _token_counts(s)
    present = counts[~np.isnan(counts)]
    return float(present.mean()) if present.size else 0.0


# --------------------------------------------------------------------------------------
# Statistical
# --------------------------------------------------------------------------------------


def _numeric_matrix(X: pd.DataFrame, columns: Sequence[str], rows: np.ndarray) -> np.ndarray:
    if not columns:
        return np.empty((len(rows), 0))
    return _finite(X[list(columns)].iloc[rows].to_numpy(dtype=float, na_value=np.nan))


def _finite(values: np.ndarray) -> np.ndarray:
    """Infinite values count as missing: no moment, quantile or scaler survives them."""
    values = np.array(values, dtype=float)
    values[np.isinf(values)] = np.nan
    return values


def _statistical_features(
    X: pd.DataFrame, col_roles: Mapping[str, str], rows: np.ndarray
) -> StatisticalFeatures:
    A = _numeric_matrix(X, _columns(col_roles, "numeric"), rows)
    skews, kurts = [], []
    for j in range(A.shape[1]):
        skew, kurt = type3_moments(A[:, j])
        if skew is not None and kurt is not None:
            skews.append(abs(skew))
            kurts.append(kurt)
    outlier_share, share_cols = _outliers(A)
    return StatisticalFeatures(
        mean_abs_skewness=float(np.mean(skews)) if skews else None,
        mean_kurtosis=float(np.mean(kurts)) if kurts else None,
        mean_abs_correlation=_mean_abs_correlation(A),
        outlier_share=outlier_share,
        share_columns_with_outliers=share_cols,
        rows_used=len(rows),
    )


def type3_moments(values: np.ndarray) -> tuple[float | None, float | None]:
    """Skewness ``m3 / s**3`` and excess kurtosis ``m4 / s**4 - 3`` with ``s`` at ``ddof=1``.

    These are the "type 3" estimators of R's e1071 and pymfe's defaults (b1 and b2 - 3 in
    Joanes and Gill 1998, from memory).  ``None`` for fewer than three values or a constant
    column, where they are undefined.
    """
    v = values[~np.isnan(values)]
    n = v.size
    if n < 3 or np.ptp(v) == 0:
        return None, None
    d = v - v.mean()
    m2, m3, m4 = (d**2).mean(), (d**3).mean(), (d**4).mean()
    s2 = m2 * n / (n - 1)
    if s2 <= 0:
        return None, None
    return float(m3 / s2**1.5), float(m4 / s2**2 - 3.0)


def _mean_abs_correlation(A: np.ndarray) -> float | None:
    if A.shape[1] < 2:
        return None
    with np.errstate(invalid="ignore", divide="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if np.isnan(A).any():
            corr = pd.DataFrame(A).corr().to_numpy()
        else:
            corr = np.corrcoef(A, rowvar=False)
    pairs = np.abs(corr[np.tril_indices(A.shape[1], k=-1)])
    pairs = pairs[np.isfinite(pairs)]
    return float(pairs.mean()) if pairs.size else None


def _outliers(A: np.ndarray) -> tuple[float | None, float | None]:
    """Share of values, and of columns with any value, outside Tukey's 1.5 IQR fences."""
    present = ~np.isnan(A)
    filled_columns = present.any(axis=0)
    if not filled_columns.any():
        return None, None
    B = A[:, filled_columns]
    q1, q3 = np.nanpercentile(B, [25, 75], axis=0)
    reach = _OUTLIER_WHISKER * (q3 - q1)
    with np.errstate(invalid="ignore"):
        outside = (B < q1 - reach) | (B > q3 + reach)
    return (
        float(outside.sum() / present.sum()),
        float(outside.any(axis=0).mean()),
    )


# --------------------------------------------------------------------------------------
# Information-theoretic
# --------------------------------------------------------------------------------------


def _information_features(
    X: pd.DataFrame,
    col_roles: Mapping[str, str],
    y: np.ndarray,
    y_codes: np.ndarray | None,
    rows: np.ndarray,
) -> InformationFeatures:
    m = len(rows)
    n_bins = _cube_root_bins(m)
    class_entropy = imbalance = None
    if y_codes is not None:
        counts = np.bincount(y_codes)
        counts = counts[counts > 0]
        class_entropy = _entropy_bits(counts)
        imbalance = float(counts.max() / counts.min())
        target = y_codes[rows]
    else:
        target = _equal_frequency_codes(np.asarray(y, dtype=float)[rows], n_bins)
    mis = []
    for column, role in col_roles.items():
        if role == "text":
            continue
        s = X[column].iloc[rows]
        if role == "numeric":
            values = _finite(s.to_numpy(dtype=float, na_value=np.nan))
            codes = _equal_frequency_codes(values, n_bins)
        elif role == "datetime":
            codes = _equal_frequency_codes(_datetime_seconds(s), n_bins)
        else:
            codes = _category_codes(s)
        mis.append(_mutual_information_bits(codes, target))
    return InformationFeatures(
        class_entropy=class_entropy,
        imbalance_ratio=imbalance,
        mean_mutual_information=float(np.mean(mis)) if mis else None,
        rows_used=m,
    )


def _cube_root_bins(m: int) -> int:
    # pymfe's rule, int(m ** (1/3)); np.cbrt keeps perfect cubes exact (125 -> 5).
    return max(1, int(np.cbrt(m) + 1e-9))


def _equal_frequency_codes(values: np.ndarray, n_bins: int) -> np.ndarray:
    """Equal-frequency bin of each value, with missing values in a bin of their own.

    Bin edges are the quantiles at ``1/k, 2/k, ..., 1`` (linear interpolation); edges closer
    than 1e-8 are merged, so ties make fewer, unequal bins.  This is pymfe's
    ``_equal_frequency_discretization``.
    """
    present = ~np.isnan(values)
    codes = np.zeros(values.size, dtype=np.int64)
    if not present.any():
        return codes
    edges = np.quantile(values[present], np.linspace(0.0, 1.0, n_bins + 1)[1:])
    edges = np.unique(edges[np.append(True, np.diff(edges) > 1e-8)])
    codes[present] = np.digitize(values[present], edges, right=True)
    codes[~present] = edges.size
    return codes


def _category_codes(s: pd.Series) -> np.ndarray:
    codes, _ = pd.factorize(s, use_na_sentinel=True)
    return np.asarray(codes, dtype=np.int64) + 1  # missing (-1) becomes level 0


def _entropy_bits(counts: np.ndarray) -> float:
    p = counts[counts > 0] / counts.sum()
    return float(-(p * np.log2(p)).sum())


def _mutual_information_bits(a: np.ndarray, b: np.ndarray) -> float:
    """``H(a) + H(b) - H(a, b)`` in bits, for non-negative integer codes."""
    joint = a * (int(b.max()) + 1) + b
    return (
        _entropy_bits(np.bincount(a))
        + _entropy_bits(np.bincount(b))
        - _entropy_bits(np.bincount(joint))
    )


def _datetime_seconds(s: pd.Series) -> np.ndarray:
    """Seconds since 1970 as floats (NaN for missing), whatever the resolution or zone."""
    if not pd.api.types.is_datetime64_any_dtype(s.dtype):
        s = pd.to_datetime(s, errors="coerce", utc=True)
    if getattr(s.dt, "tz", None) is not None:
        s = s.dt.tz_convert("UTC").dt.tz_localize(None)
    delta = (s - pd.Timestamp("1970-01-01")) / pd.Timedelta(seconds=1)
    return delta.to_numpy(dtype=float, na_value=np.nan)


# --------------------------------------------------------------------------------------
# Design matrix shared by landmarkers and cost probes
# --------------------------------------------------------------------------------------


def _design_matrix(
    X: pd.DataFrame, col_roles: Mapping[str, str], rows: np.ndarray
) -> np.ndarray:
    """A standardised float matrix of the sampled rows, for the learners that need numbers.

    Numeric columns as they are, datetimes as seconds since 1970, text as its token count,
    missing values replaced by the column median (0 for an all-missing column); each
    categorical becomes indicator columns for its ``_MAX_ONE_HOT_LEVELS`` most frequent levels
    (rarer levels and missing values are all-zero), which keeps the width bounded.  Every
    column is then standardised on the sample (scikit-learn's ``StandardScaler``) — an
    unsupervised transform, so fitting it before the folds leaks nothing about the target;
    this is also what pymfe does with ``fit(rescale="standard")``.
    """
    from sklearn.preprocessing import StandardScaler

    sub = X.iloc[rows]
    parts: list[np.ndarray] = []
    for column, role in col_roles.items():
        s = sub[column]
        if role == "categorical":
            codes = _category_codes(s) - 1
            counts = np.bincount(codes[codes >= 0]) if (codes >= 0).any() else np.zeros(0)
            top = np.argsort(-counts, kind="stable")[:_MAX_ONE_HOT_LEVELS]
            parts.append((codes[:, None] == top[None, :]).astype(float))
            continue
        if role == "numeric":
            v = _finite(s.to_numpy(dtype=float, na_value=np.nan))
        elif role == "datetime":
            v = _datetime_seconds(s)
        else:
            v = _token_counts(s)
        missing = np.isnan(v)
        if missing.any():
            v = np.where(missing, np.median(v[~missing]) if (~missing).any() else 0.0, v)
        parts.append(v[:, None])
    matrix = np.hstack(parts) if parts else np.zeros((len(rows), 0))
    if matrix.shape[1] == 0:  # e.g. only an all-missing categorical: one constant column
        matrix = np.zeros((len(rows), 1))
    return StandardScaler().fit_transform(matrix)


# --------------------------------------------------------------------------------------
# Landmarkers
# --------------------------------------------------------------------------------------


def _landmark_models(classification: bool, seed: int) -> dict[str, BaseEstimator | None]:
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
    from sklearn.linear_model import Ridge
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier, KNeighborsRegressor
    from sklearn.tree import DecisionTreeClassifier, DecisionTreeRegressor

    if classification:
        return {
            "one_nn": KNeighborsClassifier(n_neighbors=1),
            "decision_stump": DecisionTreeClassifier(max_depth=1, random_state=seed),
            "naive_bayes": GaussianNB(),
            # pymfe's linear_discr uses the default "svd" solver; "lsqr" fits the same
            # pooled-covariance model three times faster (equal predictions at full rank).
            "linear": LinearDiscriminantAnalysis(solver="lsqr"),
        }
    return {
        "one_nn": KNeighborsRegressor(n_neighbors=1),
        "decision_stump": DecisionTreeRegressor(max_depth=1, random_state=seed),
        "naive_bayes": None,
        "linear": Ridge(alpha=1.0),
    }


def _folds(
    y: np.ndarray, classification: bool, seed: int
) -> tuple[list[tuple[np.ndarray, np.ndarray]], str]:
    """Shuffled k-fold splits (stratified for classes), or no splits and the reason.

    Ten folds as in pymfe; fewer when the smallest class (or the data) is smaller than ten.
    """
    from sklearn.model_selection import KFold, StratifiedKFold

    n = len(y)
    if classification:
        counts = np.bincount(y)
        counts = counts[counts > 0]
        if counts.size < 2:
            return [], "skipped: the sample has a single class"
        k = int(min(_LANDMARK_FOLDS, max(2, counts.min())))
        splitter: Any = StratifiedKFold(n_splits=k, shuffle=True, random_state=seed)
    else:
        if n < 2:
            return [], "skipped: fewer than 2 rows"
        k = min(_LANDMARK_FOLDS, n)
        splitter = KFold(n_splits=k, shuffle=True, random_state=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # "least populated class has ..."
        return list(splitter.split(np.zeros((n, 1)), y)), ""


def _fold_score(y_true: np.ndarray, y_pred: np.ndarray, classification: bool) -> float:
    if classification:
        return float(np.mean(y_true == y_pred))
    residual = float(((y_true - y_pred) ** 2).sum())
    total = float(((y_true - y_true.mean()) ** 2).sum())
    return 1.0 - residual / total if total > 0 else float("nan")


def _landmarkers(
    M: np.ndarray,
    y: np.ndarray,
    classification: bool,
    *,
    seed: int,
    time_cap_s: float,
    clock: Callable[[], float],
) -> Landmarkers:
    """Mean fold score of each landmarker, each stopped at ``time_cap_s`` seconds.

    Folds run one after another; before each fold the landmarker is abandoned when the
    time spent has reached the cap or the next fold, at the mean pace so far, would pass it.
    A cap therefore bounds the time by about one fold over the cap, without threads.
    """
    from sklearn.base import clone

    splits, split_note = _folds(y, classification, seed)
    scores: dict[str, float | None] = {}
    notes: dict[str, str] = {}
    target = y if classification else np.asarray(y, dtype=float)
    for name, model in _landmark_models(classification, seed).items():
        scores[name] = None
        if model is None:
            notes[name] = "not defined for regression"
            continue
        if split_note:
            notes[name] = split_note
            continue
        started = clock()
        fold_scores: list[float] = []
        for done, (train, test) in enumerate(splits):
            spent = clock() - started
            pace = spent / done if done else 0.0
            if spent >= time_cap_s or spent + pace > time_cap_s:
                notes[name] = (
                    f"skipped: time cap of {time_cap_s:g} s reached after "
                    f"{done} of {len(splits)} folds"
                )
                break
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")  # collinear LDA, constant folds
                    fitted = clone(model).fit(M[train], target[train])
                    predicted = fitted.predict(M[test])
            except Exception as exc:  # tiny or degenerate folds must not stop the profile
                notes[name] = f"failed: {type(exc).__name__}: {exc}".splitlines()[0]
                break
            fold_scores.append(_fold_score(target[test], predicted, classification))
        else:
            finite = [s for s in fold_scores if math.isfinite(s)]
            if finite:
                scores[name] = float(np.mean(finite))
            else:
                notes[name] = "skipped: no fold gave a finite score"
    return Landmarkers(
        metric="accuracy" if classification else "r2",
        one_nn=scores["one_nn"],
        decision_stump=scores["decision_stump"],
        naive_bayes=scores["naive_bayes"],
        linear=scores["linear"],
        rows_used=len(y),
        n_folds=len(splits),
        notes=notes,
    )


# --------------------------------------------------------------------------------------
# Cost probes
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Probe:
    model: BaseEstimator  # the reduced configuration that is timed
    description: str  # the configuration the estimate is for
    work_factor: float  # estimate = measured time x work_factor (trees, iterations, epochs)


def _probe_models(classification: bool, seed: int) -> dict[str, _Probe]:
    """The estimator timed for each family.

    Estimates are for library defaults with the work per fit fixed: 100 trees, 100 boosting
    iterations without early stopping, 50 epochs of scikit-learn's MLP (one hidden layer of
    100 units).  That MLP stands in for tunelab's torch MLP, whose own cost the space builder
    derives from it with a measured correction (``tunelab.space._builder``).  To stay
    fast, ensembles and the MLP are timed with a fifth of that work (20 trees, 20
    iterations, 10 epochs) and multiplied by 5: cost grows linearly with the number of trees,
    iterations or epochs (common practice, no source; it slightly over-counts fixed set-up
    work such as binning).
    """
    from sklearn import ensemble, linear_model, neighbors, neural_network, svm

    mlp = {"hidden_layer_sizes": (100,), "max_iter": 10, "tol": 0.0, "random_state": seed}
    trees = {"n_estimators": 20, "random_state": seed}
    boost = {"max_iter": 20, "early_stopping": False, "random_state": seed}
    if classification:
        return {
            "linear": _Probe(
                linear_model.LogisticRegression(max_iter=200), "LogisticRegression", 1
            ),
            "knn": _Probe(
                neighbors.KNeighborsClassifier(), "KNeighborsClassifier(5 neighbours)", 1
            ),
            "random_forest": _Probe(
                ensemble.RandomForestClassifier(**trees), "RandomForestClassifier(100 trees)", 5
            ),
            "extra_trees": _Probe(
                ensemble.ExtraTreesClassifier(**trees), "ExtraTreesClassifier(100 trees)", 5
            ),
            "hist_gb": _Probe(
                ensemble.HistGradientBoostingClassifier(**boost),
                "HistGradientBoostingClassifier(100 iterations)",
                5,
            ),
            "svm": _Probe(svm.SVC(), "SVC(rbf kernel)", 1),
            "mlp": _Probe(
                neural_network.MLPClassifier(**mlp), "MLPClassifier(100 units, 50 epochs)", 5
            ),
        }
    return {
        "linear": _Probe(linear_model.Ridge(), "Ridge", 1),
        "knn": _Probe(neighbors.KNeighborsRegressor(), "KNeighborsRegressor(5 neighbours)", 1),
        "random_forest": _Probe(
            ensemble.RandomForestRegressor(**trees), "RandomForestRegressor(100 trees)", 5
        ),
        "extra_trees": _Probe(
            ensemble.ExtraTreesRegressor(**trees), "ExtraTreesRegressor(100 trees)", 5
        ),
        "hist_gb": _Probe(
            ensemble.HistGradientBoostingRegressor(**boost),
            "HistGradientBoostingRegressor(100 iterations)",
            5,
        ),
        "svm": _Probe(svm.SVR(), "SVR(rbf kernel)", 1),
        "mlp": _Probe(
            neural_network.MLPRegressor(**mlp), "MLPRegressor(100 units, 50 epochs)", 5
        ),
    }


def scaled_cost(seconds: float, probe_rows: int, n_rows: int, scaling: str) -> float:
    """Extrapolate a measured cost from ``probe_rows`` to ``n_rows`` rows.

    Parameters
    ----------
    seconds
        Cost measured on ``probe_rows`` rows.
    probe_rows, n_rows
        Rows measured on, and rows to estimate for.
    scaling
        ``"n"``, ``"n log n"`` or ``"n^2"`` (see :data:`SCALING_RULES`).

    Returns
    -------
    float
        ``seconds * g(n_rows) / g(probe_rows)`` for the growth function ``g``.

    Raises
    ------
    ValueError
        For an unknown ``scaling``.
    """
    growth: dict[str, Callable[[float], float]] = {
        "n": lambda n: n,
        "n log n": lambda n: n * math.log(max(n, 2.0)),
        "n^2": lambda n: n * n,
    }
    if scaling not in growth:
        raise ValueError(f"unknown scaling rule {scaling!r}")
    g = growth[scaling]
    return seconds * g(float(n_rows)) / g(float(probe_rows))


def _cost_probes(
    M: np.ndarray,
    y: np.ndarray,
    n_rows: int,
    classification: bool,
    *,
    seed: int,
    clock: Callable[[], float],
) -> Mapping[str, CostProbe]:
    """Time one fit plus one prediction pass per family, then extrapolate to ``n_rows``."""
    target = y if classification else np.asarray(y, dtype=float)
    probes: dict[str, CostProbe] = {}
    for family, probe in _probe_models(classification, seed).items():
        scaling = SCALING_RULES[family]
        try:
            seconds = _time_fit(probe.model, M, target, clock) * probe.work_factor
        except Exception as exc:  # a failed probe must not stop the profile
            note = f"probe failed: {type(exc).__name__}: {exc}".splitlines()[0]
            probes[family] = CostProbe(
                family, probe.description, len(y), None, None, scaling, note=note
            )
            continue
        probes[family] = CostProbe(
            family=family,
            model=probe.description,
            probe_rows=len(y),
            probe_seconds=seconds,
            estimated_seconds=scaled_cost(seconds, len(y), max(n_rows, len(y)), scaling),
            scaling=scaling,
        )
    return probes


def _time_fit(
    model: BaseEstimator, M: np.ndarray, y: np.ndarray, clock: Callable[[], float]
) -> float:
    from sklearn.base import clone

    best = math.inf
    for _ in range(_PROBE_REPEATS):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # convergence warnings of the short probes
            started = clock()
            clone(model).fit(M, y).predict(M)
            seconds = clock() - started
        best = min(best, seconds)
        if seconds >= _REPEAT_BELOW_S:
            break
    return float(max(best, 1e-9))


__all__ = [
    "COST_FAMILIES",
    "CostProbe",
    "InformationFeatures",
    "LANDMARKERS",
    "Landmarkers",
    "MetaFeatures",
    "SCALING_RULES",
    "SimpleFeatures",
    "StatisticalFeatures",
    "compute_metafeatures",
    "scaled_cost",
]
