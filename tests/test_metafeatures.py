"""Specification of the dataset meta-features (tunelab.facts.compute_metafeatures).

Definitions: Rivolli, Garcia, Soares, Vanschoren and de Carvalho (2022), "Meta-features for
meta-learning", Knowledge-Based Systems.  Reference implementation: pymfe (PyPI,
``pymfe.mfe.MFE``), checked on scikit-learn's bundled iris, wine and breast-cancer data.
Where the two differ in protocol, the test says how, and compares only what is defined the
same way.
"""

from __future__ import annotations

import json
import math
import pickle
import warnings
from functools import cache

import numpy as np
import pandas as pd
import pytest
from sklearn import datasets

from tunelab.errors import InputError
from tunelab.facts import MetaFeatures, compute_metafeatures
from tunelab.probes import COST_FAMILIES, LANDMARKERS, scaled_cost

SEED = 0
BUNDLED = ("iris", "wine", "breast_cancer")


def _bundled(name: str) -> tuple[pd.DataFrame, np.ndarray, str]:
    bunch = getattr(datasets, f"load_{name}")(as_frame=True)
    y = bunch.target.to_numpy()
    return bunch.data, y, "binary" if np.unique(y).size == 2 else "multiclass"


@cache
def _ours(name: str) -> MetaFeatures:
    X, y, task = _bundled(name)
    return compute_metafeatures(X, y, task, {c: "numeric" for c in X.columns}, seed=SEED)


@cache
def _pymfe(name: str) -> dict[str, np.ndarray]:
    """pymfe's per-attribute values (``summary=[]``, no aggregation) for three groups."""
    from pymfe.mfe import MFE

    X, y, _ = _bundled(name)
    mfe = MFE(
        groups=["general", "statistical", "info-theory"],
        summary=[],
        random_state=SEED,
        suppress_warnings=True,
    )
    mfe.fit(X.to_numpy(), y, suppress_warnings=True)
    names, values = mfe.extract(suppress_warnings=True)
    return {n: np.asarray(v, dtype=float) for n, v in zip(names, values)}


@cache
def _pymfe_landmarkers(name: str) -> dict[str, float]:
    """pymfe landmarkers under the protocol tunelab uses.

    pymfe's defaults are unshuffled 10-fold stratified CV on raw values; tunelab shuffles
    with its seed and standardises first.  pymfe's own options ``shuffle_cv_folds=True`` with
    ``random_state`` (same ``StratifiedKFold(10, shuffle=True, random_state)``) and
    ``fit(rescale="standard")`` (``StandardScaler`` on all rows) select that protocol.
    """
    from pymfe.mfe import MFE

    X, y, _ = _bundled(name)
    mfe = MFE(
        groups=["landmarking"],
        features=["one_nn", "best_node", "naive_bayes", "linear_discr"],
        summary=["mean"],  # mean accuracy over the folds
        num_cv_folds=10,
        shuffle_cv_folds=True,
        random_state=SEED,
        suppress_warnings=True,
    )
    mfe.fit(X.to_numpy(), y, rescale="standard", suppress_warnings=True)
    names, values = mfe.extract(suppress_warnings=True)
    return {n.removesuffix(".mean"): float(v) for n, v in zip(names, values)}


# ------------------------------------------------------------------------------------------
# Agreement with pymfe on bundled data (Rivolli et al. 2022 definitions)
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", BUNDLED)
def test_simple_group_matches_pymfe_general_group(name: str) -> None:
    ours, ref = _ours(name).simple, _pymfe(name)
    # pymfe general group: nr_inst, nr_attr, inst_to_attr, nr_num, nr_cat, nr_class (counts).
    assert ours.n_rows == ref["nr_inst"]
    assert ours.n_columns == ref["nr_attr"]
    assert ours.rows_per_column == pytest.approx(float(ref["inst_to_attr"]), rel=1e-12)
    assert ours.n_numeric == ref["nr_num"]
    assert ours.n_categorical == ref["nr_cat"]
    assert ours.n_classes == ref["nr_class"]


@pytest.mark.parametrize("name", BUNDLED)
def test_skewness_and_kurtosis_match_pymfe_type_3(name: str) -> None:
    ours, ref = _ours(name).statistical, _pymfe(name)
    # pymfe ft_skewness / ft_kurtosis default method=3 (R e1071 "type 3": m3/s^3 and
    # m4/s^4 - 3 with s at ddof=1), the definition tunelab uses.  pymfe returns signed
    # per-attribute values; tunelab's group reports the mean of |skewness|.  Same formula,
    # so only rounding separates them.
    assert ours.mean_abs_skewness == pytest.approx(np.mean(np.abs(ref["skewness"])), rel=1e-9)
    assert ours.mean_kurtosis == pytest.approx(np.mean(ref["kurtosis"]), rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("name", BUNDLED)
def test_mean_absolute_correlation_matches_pymfe_cor(name: str) -> None:
    # pymfe ft_cor: |Pearson r| over distinct attribute pairs (lower triangle).
    ours, ref = _ours(name).statistical, _pymfe(name)
    assert ours.mean_abs_correlation == pytest.approx(np.mean(ref["cor"]), rel=1e-9)


@pytest.mark.parametrize("name", BUNDLED)
def test_columns_with_outliers_match_pymfe_nr_outliers(name: str) -> None:
    # pymfe ft_nr_outliers: attributes with a value outside [Q1 - 1.5 IQR, Q3 + 1.5 IQR]
    # (np.percentile, linear).  It is a count; tunelab reports it as a share of the numeric
    # columns.  tunelab's outlier_share (share of values) has no pymfe counterpart.
    ours, ref = _ours(name), _pymfe(name)
    expected = float(ref["nr_outliers"]) / ours.simple.n_numeric
    assert ours.statistical.share_columns_with_outliers == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("name", BUNDLED)
def test_class_entropy_and_imbalance_match_pymfe(name: str) -> None:
    ours, ref = _ours(name).information, _pymfe(name)
    # pymfe ft_class_ent: Shannon entropy of the classes in bits.
    assert ours.class_entropy == pytest.approx(float(ref["class_ent"]), rel=1e-12)
    # Imbalance ratio = largest class / smallest class; from pymfe ft_freq_class (relative
    # frequency per class) as max / min.
    expected = np.max(ref["freq_class"]) / np.min(ref["freq_class"])
    assert ours.imbalance_ratio == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("name", BUNDLED)
def test_mutual_information_matches_sklearn_on_pymfe_discretisation(name: str) -> None:
    # Exact reference: pymfe's own equal-frequency discretiser (pymfe._internal.transform_num,
    # floor(n^(1/3)) bins, the binning behind pymfe's mut_inf) followed by
    # sklearn.metrics.mutual_info_score (nats, converted to bits).
    from pymfe import _internal
    from sklearn.metrics import mutual_info_score

    X, y, _ = _bundled(name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        binned = _internal.transform_num(X.to_numpy())
    reference = np.mean(
        [mutual_info_score(binned[:, j], y) / math.log(2) for j in range(binned.shape[1])]
    )
    assert _ours(name).information.mean_mutual_information == pytest.approx(reference, rel=1e-9)


@pytest.mark.parametrize("name", BUNDLED)
def test_mutual_information_matches_pymfe_mut_inf_within_its_smoothing(name: str) -> None:
    # pymfe ft_mut_inf = H(x) + H(y) - H(x, y), but its joint entropy
    # (MFEInfoTheory._calc_joint_ent) adds eps = 1e-8 to every cell of the joint probability
    # table, empty cells included.  Per cell that moves -p log2 p by at most
    # eps * (log2(1/eps) + log2(n) + 1/ln 2) for p = 0 or p >= 1/n, so the mean mutual
    # information differs by at most cells * that bound.  This is the tolerance: it is
    # derived from pymfe's smoothing, not chosen to make the test pass.
    X, y, _ = _bundled(name)
    n, eps = len(X), 1e-8
    cells = int(np.cbrt(n) + 1e-9) * np.unique(y).size
    tolerance = cells * eps * (math.log2(1 / eps) + math.log2(n) + 1 / math.log(2))
    ours = _ours(name).information.mean_mutual_information
    assert ours == pytest.approx(np.mean(_pymfe(name)["mut_inf"]), rel=0, abs=tolerance)


@pytest.mark.parametrize("name", BUNDLED)
def test_landmarkers_match_pymfe_under_the_same_protocol(name: str) -> None:
    # pymfe one_nn (1-NN), best_node (depth-1 tree), naive_bayes (GaussianNB), linear_discr
    # (LDA), mean accuracy over StratifiedKFold(10, shuffle=True, random_state=0) on
    # standardised data (see _pymfe_landmarkers).  tunelab fits LDA with the "lsqr" solver,
    # pymfe with "svd"; the model is the same and so are its predictions on these full-rank
    # data, so the scores must be equal, not merely close.
    ours, ref = _ours(name).landmarkers, _pymfe_landmarkers(name)
    assert ours.metric == "accuracy" and ours.n_folds == 10
    assert ours.one_nn == pytest.approx(ref["one_nn"], abs=1e-12)
    assert ours.decision_stump == pytest.approx(ref["best_node"], abs=1e-12)
    assert ours.naive_bayes == pytest.approx(ref["naive_bayes"], abs=1e-12)
    assert ours.linear == pytest.approx(ref["linear_discr"], abs=1e-12)


def test_regression_landmarkers_match_sklearn_cross_validation() -> None:
    # pymfe defines landmarkers for classification only.  For regression tunelab scores R^2
    # over shuffled KFold(10) on standardised data; reference:
    # sklearn.model_selection.cross_val_score with the same folds and estimators.
    from sklearn.linear_model import Ridge
    from sklearn.model_selection import KFold, cross_val_score
    from sklearn.neighbors import KNeighborsRegressor
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeRegressor

    bunch = datasets.load_diabetes(as_frame=True)
    X, y = bunch.data, bunch.target.to_numpy()
    mf = compute_metafeatures(X, y, "regression", {c: "numeric" for c in X.columns}, seed=SEED)
    scaled = StandardScaler().fit_transform(X.to_numpy())
    folds = KFold(n_splits=10, shuffle=True, random_state=SEED)

    def reference(model: object) -> float:
        return float(cross_val_score(model, scaled, y, cv=folds, scoring="r2").mean())

    lm = mf.landmarkers
    assert lm.metric == "r2"
    assert lm.linear == pytest.approx(reference(Ridge(alpha=1.0)), abs=1e-12)
    assert lm.one_nn == pytest.approx(reference(KNeighborsRegressor(1)), abs=1e-12)
    stump = DecisionTreeRegressor(max_depth=1, random_state=SEED)
    assert lm.decision_stump == pytest.approx(reference(stump), abs=1e-12)
    assert lm.naive_bayes is None and "regression" in lm.notes["naive_bayes"]
    assert mf.information.class_entropy is None and mf.information.imbalance_ratio is None
    assert mf.information.mean_mutual_information is not None


# ------------------------------------------------------------------------------------------
# Behaviour on hand-made data
# ------------------------------------------------------------------------------------------


def _hand_made() -> tuple[pd.DataFrame, np.ndarray, dict[str, str]]:
    X = pd.DataFrame(
        {
            "age": [20.0, np.nan, 35.0, 41.0, 58.0, 63.0],
            "income": [1.0, 2.0, 3.0, 4.0, 5.0, 60.0],
            "city": pd.Series(["a", "b", None, "a", "b", "a"], dtype="string"),
            "comment": pd.Series(
                ["red green", "blue", None, "one two three", "x", "y z"], dtype="string"
            ),
            "seen": pd.to_datetime(
                ["2024-01-01", "2024-02-01", None, "2024-03-01", "2024-04-01", "2024-05-01"]
            ),
        }
    )
    roles = {
        "customer_id": "id",  # dropped by the loader, still counted
        "age": "numeric",
        "income": "numeric",
        "city": "categorical",
        "comment": "text",
        "seen": "datetime",
    }
    return X, np.array([0, 1, 0, 1, 0, 1]), roles


def test_counts_columns_per_role_and_the_missing_share() -> None:
    X, y, roles = _hand_made()
    simple = compute_metafeatures(X, y, "binary", roles, seed=SEED).simple
    assert (simple.n_rows, simple.n_columns) == (6, 5)
    assert (simple.n_numeric, simple.n_categorical, simple.n_text, simple.n_datetime) == (
        2,
        1,
        1,
        1,
    )
    assert simple.n_id == 1
    assert simple.rows_per_column == pytest.approx(6 / 5)
    assert simple.share_categorical == pytest.approx(1 / 5)
    assert simple.share_missing == pytest.approx(4 / 30)  # one missing cell in 4 columns
    assert simple.n_classes == 2
    # tokens of the five present comments: 2, 1, 3, 1, 2
    assert dict(simple.mean_text_tokens) == {"comment": pytest.approx(9 / 5)}


def test_outlier_share_counts_values_outside_tukey_fences() -> None:
    # Tukey's fences [Q1 - 1.5 IQR, Q3 + 1.5 IQR] (Tukey 1977, Exploratory Data Analysis;
    # from memory).  For 1, 2, 3, 4, 100 with linear quartiles Q1 = 2, Q3 = 4: fences
    # [-1, 7], so exactly one of the five values lies outside.
    X = pd.DataFrame({"v": [1.0, 2.0, 3.0, 4.0, 100.0], "w": [5.0, 5.0, 5.0, 5.0, 5.0]})
    mf = compute_metafeatures(X, np.array([0, 1, 0, 1, 0]), "binary", dict.fromkeys(X, "numeric"))
    assert mf.statistical.outlier_share == pytest.approx(1 / 10)  # 10 values in two columns
    assert mf.statistical.share_columns_with_outliers == pytest.approx(1 / 2)
    # the constant column has no defined skewness: only "v" enters the mean
    d = np.array([1.0, 2.0, 3.0, 4.0, 100.0]) - 22.0
    expected_skew = np.mean(d**3) / (np.sum(d**2) / 4) ** 1.5
    assert mf.statistical.mean_abs_skewness == pytest.approx(abs(expected_skew))


def test_mutual_information_of_a_categorical_matches_sklearn() -> None:
    # sklearn.metrics.mutual_info_score on the raw levels (nats -> bits); a missing value is
    # a level of its own in tunelab, so the reference sees it as the string "<NA>".
    rng = np.random.default_rng(3)
    city = rng.choice(["a", "b", "c", "d"], size=300)
    y = (city == "a").astype(int) ^ (rng.random(300) < 0.2)
    city_with_gaps = pd.Series(city, dtype="string")
    city_with_gaps[::17] = None
    X = pd.DataFrame({"city": city_with_gaps})
    from sklearn.metrics import mutual_info_score

    expected = mutual_info_score(city_with_gaps.fillna("<NA>").to_numpy(), y) / math.log(2)
    mf = compute_metafeatures(X, y, "binary", {"city": "categorical"}, seed=SEED)
    assert mf.information.mean_mutual_information == pytest.approx(expected, rel=1e-12)


def test_landmarkers_are_none_when_the_time_cap_is_zero() -> None:
    X, y, task = _bundled("iris")
    mf = compute_metafeatures(X, y, task, dict.fromkeys(X, "numeric"), time_cap_s=0)
    lm = mf.landmarkers
    assert [getattr(lm, name) for name in LANDMARKERS] == [None] * len(LANDMARKERS)
    assert set(lm.notes) == set(LANDMARKERS)
    assert all("time cap" in note for note in lm.notes.values())


def test_a_landmarker_stops_before_a_fold_that_would_pass_the_cap() -> None:
    # A fake clock that moves one second per reading: the first fold "takes" 1 s, so a
    # second fold would end near 2 s + 1 s > 2.5 s and is not started.
    ticks = iter(range(10_000))
    X, y, task = _bundled("iris")
    mf = compute_metafeatures(
        X, y, task, dict.fromkeys(X, "numeric"), time_cap_s=2.5, clock=lambda: next(ticks)
    )
    for name in LANDMARKERS:
        assert getattr(mf.landmarkers, name) is None
        assert mf.landmarkers.notes[name].endswith("after 1 of 10 folds")


def test_cost_probes_are_positive_for_every_family() -> None:
    X, y, task = _bundled("breast_cancer")
    cost = compute_metafeatures(X, y, task, dict.fromkeys(X, "numeric")).cost
    assert tuple(cost) == COST_FAMILIES
    for family, probe in cost.items():
        assert probe.note == ""
        assert probe.probe_seconds is not None and probe.probe_seconds > 0, family
        assert probe.estimated_seconds is not None and probe.estimated_seconds > 0, family


def test_cost_estimates_grow_with_rows() -> None:
    # 20,000 rows are estimated from a 500-row probe times at least 40 (the "n" rule), the
    # 100-row data from its own 100-row probe: noise on a shared machine cannot close that gap.
    rng = np.random.default_rng(7)
    X = pd.DataFrame(rng.normal(size=(20_000, 8)), columns=[f"x{j}" for j in range(8)])
    y = (X["x0"] + rng.normal(size=len(X)) > 0).to_numpy().astype(int)
    roles = dict.fromkeys(X, "numeric")
    small = compute_metafeatures(X.iloc[:100], y[:100], "binary", roles, max_rows=100).cost
    large = compute_metafeatures(X, y, "binary", roles, max_rows=100).cost
    for family in COST_FAMILIES:
        assert large[family].estimated_seconds > small[family].estimated_seconds, family


def test_scaling_rules_extrapolate_as_stated() -> None:
    # The rules themselves (common practice, no source): n, n log n, n^2.
    assert scaled_cost(1.0, 100, 200, "n") == pytest.approx(2.0)
    assert scaled_cost(1.0, 100, 200, "n^2") == pytest.approx(4.0)
    expected = 2 * math.log(200) / math.log(100)
    assert scaled_cost(1.0, 100, 200, "n log n") == pytest.approx(expected)
    with pytest.raises(ValueError):
        scaled_cost(1.0, 100, 200, "n^3")


def test_same_seed_gives_the_same_features() -> None:
    X, y, roles = _hand_made()

    def stable(mf: MetaFeatures) -> dict[str, object]:
        d = mf.to_dict()
        del d["cost"], d["seconds"]  # measured times
        return d

    first = compute_metafeatures(X, y, "binary", roles, seed=5)
    assert stable(first) == stable(compute_metafeatures(X, y, "binary", roles, seed=5))


def test_to_dict_is_plain_json() -> None:
    X, y, roles = _hand_made()
    d = compute_metafeatures(X, y, "binary", roles, seed=SEED).to_dict()
    groups = {"simple", "statistical", "information", "landmarkers", "cost"}
    assert set(d) == groups | {"task", "seconds"}
    json.dumps(d, allow_nan=False)  # raises on NaN, numpy scalars or mapping proxies


def test_pickles_for_worker_processes() -> None:
    mf = _ours("iris")
    assert pickle.loads(pickle.dumps(mf)) == mf


@pytest.mark.parametrize(
    ("roles", "message"),
    [({"a": "numeric"}, "no role"), ({"a": "numeric", "b": "ordinal"}, "unknown role")],
)
def test_rejects_columns_without_a_known_role(roles: dict[str, str], message: str) -> None:
    X = pd.DataFrame({"a": [1.0, 2.0, 3.0], "b": [4.0, 5.0, 6.0]})
    with pytest.raises(InputError, match=message) as caught:
        compute_metafeatures(X, np.array([0, 1, 0]), "binary", roles)
    assert caught.value.hint


def test_rejects_a_target_of_the_wrong_length() -> None:
    X = pd.DataFrame({"a": [1.0, 2.0, 3.0]})
    with pytest.raises(InputError, match="target"):
        compute_metafeatures(X, np.array([0, 1]), "binary", {"a": "numeric"})
