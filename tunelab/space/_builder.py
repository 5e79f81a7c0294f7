"""The data-driven search space: the data's facts in, families, ranges, priors and reasons out.

Every decision the builder takes is a small rule over the data's facts (:class:`tunelab.facts.DataFacts`:
meta-features, probe results, folds, metric) and the budget, and
every rule leaves a one-line reason in the spec, so ``tunelab profile`` can show why the space
looks the way it does.  The rules are rules of thumb unless a comment names a source.

How the budget enters: each family's cost probe (seconds per fit, extrapolated to all rows)
becomes the estimated seconds of one *trial* — a fit per cross-validation fold on the fold's
training rows.  A family whose trial would eat too large a share of the budget is left out, and
the work knobs (boosting rounds, trees, epochs) are capped so that a trial at the top of its
range still leaves room for several others.  The probes time scikit-learn stand-ins on a few
hundred rows, where fixed set-up work dominates, so each family's estimate is multiplied by a
correction measured against tunelab's own pipelines (see ``_CORRECTION``).

TPE has no prior centre, so priors are expressed as warm starts: one config per family at the
centre of its ranges, most promising family first, enqueued before any sampled trial; then, if
the budget allows, a second boosting config in the other regime (usual settings or strongly
regularised) than the one the landmarkers pointed to, as a hedge.
"""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

from tunelab.data import HIGH_SKEWNESS, SHARED_SCALE_MAX_RATIO, ColumnRole
from tunelab.facts import DataFacts
from tunelab.models import FAMILY_NAMES, MLP_RUNGS, ONE_HOT_MAX_CARDINALITY, ROWS_KEY
from tunelab.probes import CostProbe, TransformProbe, scaled_cost
from tunelab.space._spec import FamilySpec, ParamSpec, SpaceSpec

# With no wall-clock budget (a trial cap, or `profile` without --budget) costs are weighed
# against ten minutes; common practice, no source.
REFERENCE_BUDGET_S = 600.0

# How strongly each family is expected to do on an unknown table, before the data speaks.
# Tree ensembles, boosting first, lead on most tabular benchmarks (Grinsztajn, Oyallon and
# Varoquaux 2022, "Why do tree-based models still outperform deep learning on typical tabular
# data?", NeurIPS Datasets and Benchmarks; from memory); the numbers are an ordering, no source.
_STRENGTH = {"hist_gb": 3.0, "random_forest": 2.5, "extra_trees": 2.3, "linear": 2.0,
             "svm": 1.8, "mlp": 1.6, "knn": 1.2}

# Real seconds of a tunelab pipeline fit over the probe's extrapolated estimate: the median ratio
# over ten benchmark tables (benchmarks/datasets.py: credit, digits, diamonds, hpc, wage, chile,
# ames, default, anes96, fair) on the development machine, one thread.  Below 1 where the probe's
# few hundred rows are dominated by fixed set-up work (trees, boosting); above 1 where tunelab's
# preprocessing costs more than the model (linear) or the model does more (SVM probabilities,
# the torch MLP against scikit-learn's).
#
# The MLP's figure was re-measured on 2026-12-04 against the whole estimate (probe, network size
# and expected epochs together): a five-fold narrow-rung trial at the prior centre, real seconds
# over estimated, on the ten space-benchmark tables (seed 0 training split, idle machine): 0.13 to
# 1.12, median 0.30, so the old 4.0 became 1.2.  The spread is early stopping, which no probe sees.
_CORRECTION = {"linear": 2.0, "knn": 0.8, "random_forest": 0.35, "extra_trees": 0.45, "hist_gb": 0.3,
               "svm": 2.0, "mlp": 1.2}
_SVM_REGRESSION_CORRECTION = 1.2  # no probability calibration for regression
_FIT_OVERHEAD_S = 0.15  # per fold: building the pipeline, encoding, scoring; measured, rounded

# Budget shares; common practice, no source.
_TRIAL_SHARE_MAX = 1 / 3  # a trial at the top of a work knob's range: at least three trials fit
_SVM_SHARE_MAX = 0.10  # kernel SVM only where a fit is a small share (about 2 %) of the budget
_KNN_SHARE_MAX = 0.10
_MLP_SHARE = {"narrow": 0.06, "wide": 0.10, "very_wide": 0.10}  # several trials of the rung fit
# On columns of one shared scale (pixel grids and the like) networks are the family most likely to
# lead, so the narrow rung may take a tenth of the budget, as SVM and kNN may; no source.
_MLP_SHARE_SHARED_SCALE = 0.10
_MLP_MIN_ROWS = {"narrow": 500, "wide": 5_000, "very_wide": 20_000}  # training rows of a fold to feed the rung
_SVM_MAX_ROWS = 20_000  # kernel matrix grows with rows squared; common practice, no source
_KNN_MAX_WIDTH = 50  # distances lose contrast in many dimensions; common practice, no source
_WARM_SHARE = 0.5  # warm starts may plan up to half the budget; the rest is for the search
_TRIALS_PER_FAMILY = 3  # trials at its centre each kept family must have room for
_MIN_SAMPLE_ROWS = 2_000  # fewer training rows than this are too few to judge a family by; no source
_SAMPLE_ROOM = 3.0  # a row sample leaves room for about 60 rounds or trees, not just the minimum 20
_IMBALANCE_HIGH = 3.0  # largest class over smallest; common practice, no source
_NOISY_SIGNAL = 0.6  # best landmarker gain over guessing below this: a noisy target; no source
_LANDMARK_CLOSE = 0.02  # landmarker gains within this of the best count as "as good"; no source
_SCORE_FLOOR = 0.5  # a family whose points fall below this has the evidence against it; no source
_GAP_WEIGHT = 5.0  # points lost per unit of landmarker gap (a gap of 0.1 costs half a point); no source
_SHARED_SCALE_MLP_POINTS = 1.0  # the MLP's lift on columns of one shared scale; see _evidence

# Boosting prior centres (common practice, no source): the library's usual settings, and a
# regularised regime (slower steps, smaller trees, bigger leaves, more shrinkage) for noisy targets.
# The warm starts try the regime the landmarkers point to first and the other one last.
_HIST_GB_PRIORS: dict[str, dict[str, float]] = {
    "standard": {"learning_rate": 0.1, "max_leaf_nodes": 31, "min_samples_leaf": 20, "l2_regularization": 1e-3},
    "regularised": {"learning_rate": 0.05, "max_leaf_nodes": 15, "min_samples_leaf": 40, "l2_regularization": 1.0},
}

# The MLP's per-row cost model, relative only (the probe supplies the machine's speed): a fixed
# cost per mini-batch plus work proportional to the weights and to the hidden units (ReLU,
# dropout, batch norm).  Constants measured with tunelab's torch MLP on one thread.
_MLP_BATCH_S = 0.004
_MLP_WEIGHT_S = 0.6e-9
_MLP_UNIT_S = 50e-9
_MLP_EXPECTED_EPOCHS = 40  # early stopping (patience 10) usually ends about here; measured, rounded


# --------------------------------------------------------------------------------------
# What the rules read
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _RuleFacts:
    """The figures every rule reads: the data's facts in the form the rules use them, and the budget."""

    task: str
    n_rows: int
    n_fit: int  # training rows of one cross-validation fold
    n_folds: int
    n_classes: int | None
    width_tree: int  # columns after tree preprocessing (ordinal codes, SVD text)
    width_dense: int  # columns after scaled, dense preprocessing (one-hot, SVD text)
    rows_per_column: float
    budget: float
    budget_given: bool
    skew: float | None
    imbalance: float | None
    n_numeric: int
    landmarks: Mapping[str, float]
    metric: str
    cost: Mapping[str, CostProbe]  # each family's cost probe
    columns: tuple[ColumnRole, ...]
    text_tokens: Mapping[str, float]  # mean words per value of each text column
    numeric_maps: tuple[str, ...]  # the maps scaled models may search, in the skewness rule's order
    transform_probe: TransformProbe | None
    target_skew: float | None  # regression only, and only for a strictly positive target
    shared_scale: bool  # numeric columns measured in one unit (tunelab.data.shares_one_scale)

    @property
    def signal(self) -> float | None:
        """The best landmarker's gain over guessing (R² for regression), ``None`` if none ran."""
        return max(self.landmarks.values()) if self.landmarks else None

    @property
    def noisy(self) -> bool:
        return self.signal is not None and self.signal < _NOISY_SIGNAL


@dataclass
class _Decision:
    family: str
    include: bool
    reason: str
    trial_s: float | None = None
    score: float = 0.0
    evidence: str = ""
    params: dict[str, ParamSpec] = field(default_factory=dict)
    centre: dict[str, Any] = field(default_factory=dict)
    second: dict[str, Any] | None = None  # a second warm start, hedging the first one's regime


def _rule_facts(data: DataFacts, budget_seconds: float | None) -> _RuleFacts:
    meta, cols = data.meta, [c for c in data.columns if c.role != "id"]
    missing_numeric = sum(1 for c in cols if c.role == "numeric" and c.missing_share > 0)
    base = sum(1 for c in cols if c.role == "numeric") + missing_numeric + 5 * sum(
        1 for c in cols if c.role == "datetime")
    text = sum(1 for c in cols if c.role == "text")
    width_tree = base + sum(1 for c in cols if c.role == "categorical") + 32 * text
    width_dense = base + 32 * text + sum(
        min(c.n_unique, ONE_HOT_MAX_CARDINALITY) if c.n_unique <= ONE_HOT_MAX_CARDINALITY else 1
        for c in cols if c.role == "categorical")
    lm = meta.landmarkers
    # Accuracy over the majority-class rate, rescaled so 0 is guessing and 1 is perfect: on 97 %
    # majority data every raw accuracy is near 0.97 and would look "as good as the best".
    floor = data.majority_share
    landmarks = {k: (v - floor) / (1 - floor) if floor < 1 else 0.0
                 for k, v in (("one_nn", lm.one_nn), ("decision_stump", lm.decision_stump),
                              ("naive_bayes", lm.naive_bayes), ("linear", lm.linear)) if v is not None}
    n_rows, n_folds = data.n_rows, data.n_folds
    return _RuleFacts(
        task=data.task, n_rows=n_rows, n_fit=max(2, int(n_rows * (n_folds - 1) / n_folds)), n_folds=n_folds,
        n_classes=meta.simple.n_classes, width_tree=max(1, width_tree), width_dense=max(1, width_dense),
        rows_per_column=meta.simple.rows_per_column,
        budget=float(budget_seconds) if budget_seconds else REFERENCE_BUDGET_S,
        budget_given=bool(budget_seconds), skew=meta.statistical.mean_abs_skewness,
        imbalance=meta.information.imbalance_ratio, n_numeric=meta.simple.n_numeric,
        landmarks=landmarks, metric=data.metric, cost=meta.cost, columns=data.columns,
        text_tokens=meta.simple.mean_text_tokens, numeric_maps=data.numeric_maps,
        transform_probe=data.transform_probe, target_skew=data.target_skew, shared_scale=data.shared_scale,
    )


def _trial_seconds(family: str, facts: _RuleFacts, work: float = 1.0) -> float | None:
    """Estimated seconds of one trial: a fit per fold, ``work`` times the probe's amount of work."""
    probe = facts.cost.get(family)
    if probe is None or probe.estimated_seconds is None:
        return None
    fit = scaled_cost(probe.estimated_seconds, max(facts.n_rows, probe.probe_rows), facts.n_fit, probe.scaling)
    correction = _SVM_REGRESSION_CORRECTION if family == "svm" and facts.task == "regression" else _CORRECTION[family]
    return facts.n_folds * (fit * correction * work + _FIT_OVERHEAD_S)


def _mlp_row_cost(width_in: int, hidden: int, layers: int, batch: int, n_out: int) -> float:
    weights = width_in * hidden + hidden * hidden * max(0, layers - 1) + hidden * n_out
    return _MLP_BATCH_S / batch + _MLP_WEIGHT_S * weights + _MLP_UNIT_S * hidden * layers


def _mlp_trial_seconds(rung: str, batch: int, epochs: int, facts: _RuleFacts) -> float | None:
    """The MLP probe (scikit-learn, 100 units, 50 epochs) scaled to the rung's network and epochs."""
    base = _trial_seconds("mlp", facts)
    if base is None:
        return None
    (w_lo, w_hi), (l_lo, l_hi), _ = MLP_RUNGS[rung]
    width, layers = int(math.sqrt(w_lo * w_hi)), int(round((l_lo + l_hi) / 2))
    n_out = facts.n_classes or 1
    size = _mlp_row_cost(facts.width_dense, width, layers, batch, n_out) / _mlp_row_cost(
        facts.width_dense, 100, 1, 200, n_out)
    return base * max(1.0, size) * min(epochs, _MLP_EXPECTED_EPOCHS) / 50


def _share(seconds: float | None, facts: _RuleFacts) -> str:
    if seconds is None:
        return "cost unknown (probe failed)"
    share = 100 * seconds / facts.budget
    share_words = "< 1" if share < 1 else f"{share:.0f}"
    return f"a trial ≈ {_secs(seconds)}, {share_words} % of the {_budget_words(facts)}"


def _secs(seconds: float) -> str:
    return f"{seconds:.1f} s" if seconds < 10 else f"{seconds:.0f} s"


def _budget_words(facts: _RuleFacts) -> str:
    words = f"{facts.budget:g} s budget"
    return words if facts.budget_given else words + " (reference; no budget given)"


def _landmark(facts: _RuleFacts, name: str) -> float | None:
    return facts.landmarks.get(name)


def _best_landmark(facts: _RuleFacts) -> float | None:
    return max(facts.landmarks.values()) if facts.landmarks else None


# --------------------------------------------------------------------------------------
# Parameter helpers
# --------------------------------------------------------------------------------------


def _clamp(value: float, low: float, high: float) -> float:
    return max(low, min(high, value))


def _float(low: float, high: float, reason: str, *, log: bool = False) -> ParamSpec:
    return ParamSpec("float", low=float(low), high=float(high), log=log, reason=reason)


def _int(low: int, high: int, reason: str, *, log: bool = False) -> ParamSpec:
    low, high = int(low), int(high)
    return ParamSpec("int", low=low, high=max(low, high), log=log, reason=reason)


def _cat(choices: tuple[Any, ...], reason: str) -> ParamSpec:
    return ParamSpec("categorical", choices=choices, reason=reason)


def _centre(spec: ParamSpec, preferred: Any = None) -> Any:
    """The prior centre: ``preferred`` moved inside the range, else the range's own centre."""
    if preferred is None or spec.kind == "categorical":
        return spec.centre()
    value = _clamp(preferred, spec.low, spec.high)  # type: ignore[arg-type]
    return int(round(value)) if spec.kind == "int" else float(value)


def _put(d: _Decision, name: str, spec: ParamSpec, preferred: Any = None) -> None:
    d.params[name] = spec
    d.centre[name] = _centre(spec, preferred)


# --------------------------------------------------------------------------------------
# Shared per-family settings
# --------------------------------------------------------------------------------------


def _numeric_transform(d: _Decision, facts: _RuleFacts) -> None:
    """Numeric maps for scaled models: which ones by skewness, in which order by the probe.

    Skewed columns add the log map to the choices; the transform probe (the linear pipeline
    under each map, held-out folds) puts the best map first, which makes it the warm start.
    Without a probe the skewness rule orders them, log before quantile.
    """
    if facts.n_numeric == 0 or facts.skew is None:
        return
    rule = facts.numeric_maps
    if "log" in rule:
        why = f"numeric columns skewed (mean |skewness| {facts.skew:.1f} > {HIGH_SKEWNESS:g}): log, plain, quantile maps"
    else:
        why = f"numeric columns near symmetric (mean |skewness| {facts.skew:.1f}): plain scaling and quantile map"
    if facts.shared_scale:
        why = "columns share one scale: pooled map (one divisor for all) beside them; " + why
    probe = facts.transform_probe
    if facts.shared_scale:
        # The linear probe barely separates pooled from per-column scaling on such tables, while
        # the models that lean on distances and many units do (see tunelab.data.shares_one_scale).
        order = rule
        why += "; pooled first"
    elif probe is not None and len(set(rule) & set(probe.scores)) >= 2:
        order = probe.ranked(rule)
        why += f"; {order[0]} first by the {probe.describe()}"
    else:
        order = rule
        why += f"; {order[0]} first"
    _put(d, "num_transform", _cat(order, why))


def _class_weight(d: _Decision, facts: _RuleFacts) -> None:
    # Log loss scores the probabilities themselves, which reweighting the classes biases.
    if facts.imbalance is not None and facts.imbalance >= _IMBALANCE_HIGH and facts.metric != "log_loss":
        _put(d, "class_weight", _cat((None, "balanced"),
                                     f"classes imbalanced (largest/smallest = {facts.imbalance:.1f}): "
                                     "balanced weights searched"))


def _work_cap(family: str, facts: _RuleFacts, per_unit: float, ceiling: int) -> int | None:
    """The largest work knob (trees, rounds) whose trial stays within the trial share of the budget.

    ``per_unit`` is the knob's value that the probe's work corresponds to (100 trees, 100 rounds).
    """
    unit = _trial_seconds(family, facts, 1.0)
    if unit is None:
        return None
    overhead = facts.n_folds * _FIT_OVERHEAD_S
    allowed = _TRIAL_SHARE_MAX * facts.budget - overhead
    per_knob = max(unit - overhead, 1e-9) / per_unit
    return int(min(ceiling, max(0.0, allowed) / per_knob))


# --------------------------------------------------------------------------------------
# Families
# --------------------------------------------------------------------------------------


def _linear(facts: _RuleFacts) -> _Decision:
    trial = _trial_seconds("linear", facts)
    d = _Decision("linear", True, "fast baseline, strong with many sparse or one-hot features; " + _share(trial, facts),
                  trial)
    r = facts.rows_per_column
    if facts.task == "regression":
        # Ridge's penalty is not divided by the rows, so equal shrinkage needs alpha ∝ rows.
        lo, hi = (1e-4, 1.0) if r < 10 else (1e-5, 0.1)
        _put(d, "alpha", _float(lo * facts.n_fit, hi * facts.n_fit,
                                f"ridge penalty scales with the {facts.n_fit} training rows; "
                                f"{'stronger, few rows per column' if r < 10 else 'four decades'}", log=True))
    else:
        lo, hi, why = ((1e-3, 10.0, "toward strong penalties: few rows per column") if r < 10 else
                       (1e-2, 100.0, "four decades around 1") if r < 100 else
                       (1e-2, 1000.0, "toward weak penalties: many rows per column"))
        _put(d, "C", _float(lo, hi, f"inverse penalty, {why} ({r:.0f} rows per column)", log=True), 1.0)
        _class_weight(d, facts)
    _numeric_transform(d, facts)
    return d


def _hist_gb(facts: _RuleFacts) -> _Decision:
    cap = _work_cap("hist_gb", facts, 100, 500)
    if cap is not None and cap < 20:
        return _Decision("hist_gb", False, f"even 20 boosting rounds would pass {_TRIAL_SHARE_MAX:.0%} of the "
                         f"{_budget_words(facts)}", _trial_seconds("hist_gb", facts, 0.2))
    hi = 500 if cap is None else cap
    lo = min(50, hi)
    trial = _trial_seconds("hist_gb", facts, math.sqrt(lo * hi) / 100)
    d = _Decision("hist_gb", True, "strong default for tabular data; " + _share(trial, facts), trial)
    budget_note = "" if hi == 500 else f", capped at {hi} so a trial stays within {_TRIAL_SHARE_MAX:.0%} of the budget"
    _put(d, "max_iter", _int(lo, hi, f"boosting rounds{budget_note}", log=True))
    prior = _HIST_GB_PRIORS["regularised" if facts.noisy else "standard"]
    lr_lo = _clamp(5.0 / hi, 0.01, 0.1)
    _put(d, "learning_rate", _float(lr_lo, 0.3, f"step size; floor {lr_lo:.2g} so {hi} rounds can converge",
                                    log=True), prior["learning_rate"])
    # never below scikit-learn's own default of 31 leaves: on small multiclass sets (digits) a
    # tighter cap cost a fifth of the log loss in benchmarks/space_priors.py
    leaves_hi = int(_clamp(facts.n_fit / 50, 31, 128))
    _put(d, "max_leaf_nodes", _int(4, leaves_hi, f"tree size, up to one leaf per 50 of the {facts.n_fit} training rows "
                                                 "(at least the library default, 31)", log=True),
         prior["max_leaf_nodes"])
    leaf_lo = int(_clamp(facts.n_fit / 2000, 1, 20))
    leaf_hi = int(_clamp(facts.n_fit / 20, 8, 500))
    _put(d, "min_samples_leaf", _int(leaf_lo, leaf_hi, f"leaf size grows with the {facts.n_fit} training rows",
                                     log=True), max(prior["min_samples_leaf"], facts.n_fit / 100 if facts.noisy else 0))
    _put(d, "l2_regularization", _float(1e-4, 10.0, "leaf value shrinkage over five decades", log=True),
         prior["l2_regularization"])
    # Drawing a share of the features for each split regularises the trees.  At both prior centres
    # a share of 0.5 beat all features in five-fold CV on each of the ten benchmark tables, with
    # few columns as with many (benchmarks/boosting_feature_share.py); 0.2 was better
    # still at one centre but worse at the other on two tables, so 0.5 is the centre.
    _put(d, "max_features", _float(0.2, 1.0, f"share of the {facts.width_tree} features drawn for each split; "
                                             "a random half regularises the trees"), 0.5)
    if facts.task != "regression":
        _class_weight(d, facts)
    _boosting_loss(d, facts)
    other = _HIST_GB_PRIORS["standard" if facts.noisy else "regularised"]
    d.second = {**d.centre, **{k: _centre(d.params[k], v) for k, v in other.items()}}
    return d


def _boosting_loss(d: _Decision, facts: _RuleFacts) -> None:
    # A positive target with a long right tail (prices, wages, amounts) varies on a multiplicative
    # scale: the gamma deviance with its log link fits that scale, and predicts the mean, which is
    # what RMSE scores (McCullagh and Nelder 1989, Generalized Linear Models, 2nd ed., ch. 8: gamma
    # models for positive data whose spread grows with the mean; from memory).  Squared error stays
    # a choice, so cross-validation decides; gamma goes first, into the warm starts.
    if facts.target_skew is not None and facts.target_skew > HIGH_SKEWNESS:
        _put(d, "loss", _cat(("gamma", "squared_error"),
                             f"target above zero and right-skewed (skewness {facts.target_skew:.1f} > {HIGH_SKEWNESS:g}): "
                             "gamma deviance (log link) first, squared error as the other choice"))


def _on_fewer_rows(decide: Any, facts: _RuleFacts) -> _Decision:
    """The family on every row when a trial fits the budget; else on a row sample, when that is the only way.

    ``decide(facts)`` is a family's rule (boosting, forests); it leaves a family out when
    even its smallest model (20 rounds or trees) would pass the trial share of the budget.  The
    row sample is sized so that about three times that model fits (fits grow about linearly
    with rows for these families), and the family's ranges are then planned for the sample.
    """
    whole = decide(facts)
    if whole.include or not whole.trial_s:
        return whole
    allowed = _TRIAL_SHARE_MAX * facts.budget - facts.n_folds * _FIT_OVERHEAD_S
    rows = int(facts.n_fit * max(0.0, allowed) / (_SAMPLE_ROOM * whole.trial_s))
    if rows < _MIN_SAMPLE_ROWS or rows >= facts.n_fit:
        return whole
    sample = replace(facts, n_fit=rows)  # n_rows stays: the cost probes extrapolate from it
    part = decide(sample)
    if not part.include:
        return whole
    part.reason += f"; trained on {rows} of the {facts.n_fit} training rows of each fold"
    part.params[ROWS_KEY] = ParamSpec(
        "fixed", value=rows, reason=f"on all {facts.n_fit} rows even the smallest model would pass "
                                    f"{_TRIAL_SHARE_MAX:.0%} of the {_budget_words(facts)}; a stratified "
                                    f"sample of {rows} rows fits (export refits on the same number)")
    return part


def _forest(family: str, facts: _RuleFacts) -> _Decision:
    cap = _work_cap(family, facts, 100, 500)
    if cap is not None and cap < 20:
        return _Decision(family, False, f"even 20 trees would pass {_TRIAL_SHARE_MAX:.0%} of the "
                         f"{_budget_words(facts)}", _trial_seconds(family, facts, 0.2))
    hi = 500 if cap is None else cap
    lo = min(50, hi)
    trial = _trial_seconds(family, facts, math.sqrt(lo * hi) / 100)
    why = ("robust, little tuning needed" if family == "random_forest"
           else "random split points: lower variance than random forest on noisy data")
    d = _Decision(family, True, f"{why}; " + _share(trial, facts), trial)
    budget_note = "" if hi == 500 else f", capped at {hi} so a trial stays within {_TRIAL_SHARE_MAX:.0%} of the budget"
    _put(d, "n_estimators", _int(lo, hi, f"more trees help less and less; cost grows linearly{budget_note}", log=True))
    # Hastie, Tibshirani and Friedman, The Elements of Statistical Learning (2nd ed.), section 15.3:
    # m = sqrt(p) features per split for classification, p / 3 for regression (from memory).
    p = facts.width_tree
    centre = 1 / math.sqrt(p) if facts.task != "regression" else 1 / 3
    lo_f = _clamp(centre / 3, 1 / p, 1.0)
    rule = "√p" if facts.task != "regression" else "p/3"
    _put(d, "max_features", _float(lo_f, 1.0, f"share of the {p} features per split, centred on the {rule} rule",
                                   log=True), max(centre, lo_f))
    leaf_hi = int(_clamp(facts.n_fit / 40, 8, 100))
    # ESL 15.3 again: leaves of 1 row for classification, 5 for regression; bigger on a noisy target
    leaf = _clamp(facts.n_fit / 100, 3, 30) if facts.noisy else 1 if facts.task != "regression" else 5
    _put(d, "min_samples_leaf", _int(1, leaf_hi, f"leaf size, up to one per 40 of the {facts.n_fit} training rows",
                                     log=True), leaf)
    if facts.task != "regression":
        _class_weight(d, facts)
    return d


def _knn(facts: _RuleFacts) -> _Decision:
    trial = _trial_seconds("knn", facts)
    one_nn, best = _landmark(facts, "one_nn"), _best_landmark(facts)
    informative = one_nn is not None and best is not None and one_nn >= best - _LANDMARK_CLOSE
    if facts.width_dense > _KNN_MAX_WIDTH and not informative:
        return _Decision("knn", False, f"high-dimensional ({facts.width_dense} encoded columns > {_KNN_MAX_WIDTH}) "
                         "and the 1-NN landmarker trails: distances carry little signal", trial)
    if trial is None or trial > _KNN_SHARE_MAX * facts.budget:
        return _Decision("knn", False, f"{_share(trial, facts)}, over the {_KNN_SHARE_MAX:.0%} allowed", trial)
    why = "distances are informative" if informative else "local averaging, a different bias from trees"
    d = _Decision("knn", True, f"{why}; " + _share(trial, facts), trial)
    k_hi = int(_clamp(2 * math.sqrt(facts.n_fit), 10, 200))
    k_hi = max(2, min(k_hi, facts.n_fit // 2))
    _put(d, "n_neighbors", _int(1, k_hi, f"neighbours, up to 2√n of the {facts.n_fit} training rows", log=True),
         _clamp(math.sqrt(facts.n_fit) / 2, 5, 50))
    _put(d, "weights", _cat(("distance", "uniform"), "closer neighbours count more, or all alike"))
    _numeric_transform(d, facts)
    return d


def _svm(facts: _RuleFacts) -> _Decision:
    trial = _trial_seconds("svm", facts)
    if facts.n_rows > _SVM_MAX_ROWS:
        return _Decision("svm", False, f"{facts.n_rows} rows: the kernel matrix grows with rows squared "
                         f"(limit {_SVM_MAX_ROWS})", trial)
    if trial is None or trial > _SVM_SHARE_MAX * facts.budget:
        return _Decision("svm", False, f"{_share(trial, facts)}, over the {_SVM_SHARE_MAX:.0%} allowed", trial)
    d = _Decision("svm", True, "smooth non-linear boundaries on scaled data; " + _share(trial, facts), trial)
    _put(d, "C", _float(1e-2, 1e2, "inverse penalty, four decades around 1", log=True), 1.0)
    p = facts.width_dense
    _put(d, "gamma", _float(0.1 / p, 10 / p, f"kernel width around 1/p for {p} scaled columns", log=True), 1 / p)
    if facts.task != "regression":
        _class_weight(d, facts)
    _numeric_transform(d, facts)
    return d


def _mlp(facts: _RuleFacts) -> tuple[_Decision, list[str]]:
    batch = (64, 32, 128) if facts.n_fit < 2000 else (128, 256, 64) if facts.n_fit < 20_000 else (256, 512, 1024)
    epochs_hi = 200 if facts.n_fit < 20_000 else 100
    rungs: list[str] = []
    notes: list[str] = []
    trials: dict[str, float | None] = {}
    for rung in MLP_RUNGS:
        trial = _mlp_trial_seconds(rung, batch[0], epochs_hi, facts)
        trials[rung] = trial
        rows_ok = facts.n_fit >= _MLP_MIN_ROWS[rung]
        share = _MLP_SHARE_SHARED_SCALE if facts.shared_scale and rung == "narrow" else _MLP_SHARE[rung]
        cost_ok = trial is not None and trial <= share * facts.budget
        below_ok = rung == "narrow" or (rungs and rungs[-1] == list(MLP_RUNGS)[list(MLP_RUNGS).index(rung) - 1])
        if rows_ok and cost_ok and below_ok:
            rungs.append(rung)
        elif rung != "narrow":
            why = (f"needs {_MLP_MIN_ROWS[rung]} training rows a fold, has {facts.n_fit}" if not rows_ok else
                   f"{_share(trial, facts)}, over the {share:.0%} allowed" if not cost_ok else
                   "the rung below it is out")
            notes.append(f"MLP rung '{rung}' left out: {why}")
    if not rungs:
        rows_ok = facts.n_fit >= _MLP_MIN_ROWS["narrow"]
        why = (f"{facts.n_fit} training rows a fold, too few to train a network with an inner validation "
               f"split (needs {_MLP_MIN_ROWS['narrow']})" if not rows_ok else
               f"{_share(trials['narrow'], facts)}: fewer than several trials of even the narrow rung fit")
        return _Decision("mlp", False, why, trials["narrow"]), []
    ladder = ", ".join(rungs)
    d = _Decision("mlp", True, f"torch MLP, batch norm and ReLU, rungs: {ladder}; "
                  + _share(trials["narrow"], facts), trials["narrow"])
    _put(d, "rung", _cat(tuple(rungs), "network size ladder: 1 layer of 100–500 units; 2–3 layers of 1,200–1,500 "
                                       "with 40–50 % dropout; 1 layer of 8,000–10,000 with 60–80 % dropout"))
    _put(d, "rung_width", _float(0.0, 1.0, "position in the rung's width range (log scale)"), 0.5)
    if "wide" in rungs:
        _put(d, "rung_depth", _float(0.0, 1.0, "position in the rung's layer range"), 0.0)
    _put(d, "rung_dropout", _float(0.0, 1.0, "position in the rung's dropout range"), 0.5)
    _put(d, "learning_rate", _float(1e-4, 1e-2, "Adam step size, two decades around 1e-3", log=True), 1e-3)
    _put(d, "weight_decay", _float(1e-6, 1e-2, "L2 penalty on the weights", log=True), 1e-4)
    _put(d, "batch_size", _cat(batch, f"mini-batch rows suited to {facts.n_fit} training rows"))
    _put(d, "max_epochs", _int(20, epochs_hi, "epoch cap; early stopping usually ends sooner", log=True),
         min(100, epochs_hi))
    _numeric_transform(d, facts)
    return d, notes


# --------------------------------------------------------------------------------------
# Ranking and assembly
# --------------------------------------------------------------------------------------


def _evidence(family: str, facts: _RuleFacts) -> tuple[float, str]:
    """Points from the landmarkers, and the words for them.

    Landmarker scores are read as gains over guessing (see ``_rule_facts``), so a gap means the same
    on balanced and on heavily imbalanced classes.  Two rules, no source:

    * a family whose landmarker trails the best landmarker loses ``_GAP_WEIGHT`` points per unit
      of the gap (linear: the linear landmarker; kNN: 1-NN; SVM and MLP: the better of the two).
      No landmarker speaks for tree ensembles (a single split is too weak a stand-in), so they
      keep their prior;
    * when 1-NN is the best landmarker, by a margin, local smooth structure favours neighbours
      and kernels: kNN and SVM gain a point, except under log loss, where their probabilities
      (vote shares, Platt scaling) count as much as their boundaries;
    * under log loss kNN loses a point: its probabilities are shares of neighbour votes, often
      exactly 0 or 1;
    * on columns of one shared scale the MLP gains ``_SHARED_SCALE_MLP_POINTS``: on scikit-learn's
      digits, seeds 16–31, a pooled-map MLP at the prior centre scored test log loss 0.057 on
      average against 0.088 for boosting at the library's defaults (measured 2026-12-04).
    """
    best = _best_landmark(facts)
    if best is None:
        return 0.0, ""
    one_nn, stump, linear = (_landmark(facts, k) for k in ("one_nn", "decision_stump", "linear"))
    proxies = {"linear": (linear,), "knn": (one_nn,), "svm": (linear, one_nn), "mlp": (linear, one_nn)}
    points, words = 0.0, []
    present = [v for v in proxies.get(family, ()) if v is not None]
    if present:
        gap = best - max(present)
        if gap > _LANDMARK_CLOSE:
            points -= min(2.0, _GAP_WEIGHT * gap)
            words.append(f"its landmarker trails the best by {gap:.2f}")
        elif family == "linear":
            words.append("linear landmarker among the best")
    others = [v for v in (linear, stump) if v is not None]
    probabilities_scored = facts.metric == "log_loss"
    if (family in ("knn", "svm") and one_nn is not None and others and one_nn > max(others) + _LANDMARK_CLOSE
            and not probabilities_scored):
        points += 1.0
        words.append("1-NN is the best landmarker: smooth local structure")
    if family == "knn" and facts.metric == "log_loss":
        points -= 1.0
        words.append("log loss punishes its vote-share probabilities")
    if family == "mlp" and facts.shared_scale:
        points += _SHARED_SCALE_MLP_POINTS
        words.append("columns share one scale: networks lead on grids of like measurements")
    return points, "; ".join(words)


def _select(decisions: list[_Decision], facts: _RuleFacts) -> tuple[list[_Decision], str]:
    """Keep the best-scoring candidates while a few trials of each still fit the budget (at least two).

    Linear and boosting are exempt: linear is the cheap fallback, boosting the strongest family.
    """
    candidates = [d for d in decisions if d.include]
    for d in candidates:
        bonus, d.evidence = _evidence(d.family, facts)
        share = (d.trial_s or 0.0) / facts.budget
        d.score = _STRENGTH[d.family] + bonus - 4.0 * share
        if d.evidence:
            d.reason += f"; {d.evidence}"
    ranked = sorted(candidates, key=lambda d: -d.score)
    planned = 0.0
    for position, d in enumerate(ranked):
        need = _TRIALS_PER_FAMILY * (d.trial_s or 0.0)
        # linear stays whatever its landmarker says: the cheapest fallback, and the landmarker
        # sees raw columns, not the quantile or log maps the search can give it.  Boosting stays
        # whenever a trial of it fits at all (see _hist_gb): the strongest family on most tables,
        # and the cost probes, timed on a few hundred rows of a busy machine, overstate its cost.
        if position >= 2 and d.score < _SCORE_FLOOR and d.family != "linear":
            d.include = False
            d.reason = f"ranked {position + 1} of {len(ranked)}; the landmarkers speak against it: {d.evidence}"
        elif position >= 2 and planned + need > facts.budget and d.family != "hist_gb":
            d.include = False
            d.reason = (f"ranked {position + 1} of {len(ranked)}; {_TRIALS_PER_FAMILY} trials of each family "
                        f"ranked above already fill {planned / facts.budget:.0%} of the {_budget_words(facts)}")
        else:
            planned += need
    kept = [d for d in ranked if d.include]
    why = (f"{len(kept)} of {len(FAMILY_NAMES)} families, ranked by strength, landmarkers and cost, "
           f"kept while {_TRIALS_PER_FAMILY} trials of each fit the {_budget_words(facts)}")
    return kept, why


def _prep_params(facts: _RuleFacts) -> tuple[dict[str, ParamSpec], dict[str, Any]]:
    params: dict[str, ParamSpec] = {}
    centre: dict[str, Any] = {}
    tokens = facts.text_tokens
    if tokens:
        words = ", ".join(f"{name} {t:.1f}" for name, t in tokens.items())
        hi = int(_clamp(2 * facts.n_rows, 1000, 20000))
        params["prep.text_features"] = _int(300, hi, f"TF-IDF vocabulary; mean words per value: {words}", log=True)
        centre["prep.text_features"] = _centre(params["prep.text_features"], 5000)
        comp_hi = int(_clamp(facts.n_rows / 20, 16, 256))
        params["prep.text_components"] = _int(8, comp_hi, "SVD components of the TF-IDF text, for tree, kNN and "
                                                           "MLP models", log=True)
        centre["prep.text_components"] = _centre(params["prep.text_components"], 32)
    return params, centre


def _preprocessing_notes(facts: _RuleFacts) -> list[str]:
    notes: list[str] = []
    cats = [c for c in facts.columns if c.role == "categorical"]
    if cats:
        few = sum(1 for c in cats if c.n_unique <= ONE_HOT_MAX_CARDINALITY)
        notes.append(f"categorical columns: {few} one-hot (≤ {ONE_HOT_MAX_CARDINALITY} levels), "
                     f"{len(cats) - few} target-encoded (more levels), ordinal codes for trees")
    dates = [c.name for c in facts.columns if c.role == "datetime"]
    if dates:
        notes.append(f"datetime columns split into year, month, weekday, hour and day count: {', '.join(dates)}")
    texts = [c.name for c in facts.columns if c.role == "text"]
    if texts:
        notes.append(f"text columns as TF-IDF (sparse for linear and SVM, SVD components otherwise): {', '.join(texts)}")
    missing = [c for c in facts.columns if c.role == "numeric" and c.missing_share > 0]
    if missing:
        notes.append(f"{len(missing)} numeric columns with missing values: median fill plus a missing indicator")
    if facts.shared_scale:
        notes.append("numeric columns share one scale (many columns, ranges within a factor of "
                     f"{SHARED_SCALE_MAX_RATIO:g}): scaled models may keep one divisor for all (pooled map), "
                     f"and the MLP may take {_MLP_SHARE_SHARED_SCALE:.0%} of the budget a trial")
    if facts.skew is not None and facts.skew > HIGH_SKEWNESS:
        notes.append(f"numeric columns skewed (mean |skewness| {facts.skew:.1f}): scaled models search "
                     "log and quantile maps beside plain scaling")
    if facts.shared_scale:
        probe = f" (the {facts.transform_probe.describe()})" if facts.transform_probe is not None else ""
        notes.append(f"numeric map tried first by scaled models: pooled, as the columns share one scale{probe}")
    elif facts.transform_probe is not None:
        notes.append(f"numeric map tried first by scaled models from the {facts.transform_probe.describe()}")
    if facts.imbalance is not None and facts.imbalance >= _IMBALANCE_HIGH and facts.metric != "log_loss":
        notes.append(f"classes imbalanced ({facts.imbalance:.1f} : 1): class weights searched")
    return notes


def _regime_notes(facts: _RuleFacts) -> list[str]:
    notes = []
    if facts.signal is not None:
        gain = "R²" if facts.task == "regression" else "gain over guessing"
        if facts.noisy:
            notes.append(f"noisy target (best landmarker {gain} {facts.signal:.2f} < {_NOISY_SIGNAL}): "
                         "priors lean to strong regularisation")
        else:
            notes.append(f"clear signal (best landmarker {gain} {facts.signal:.2f}): priors at the usual settings")
    if facts.imbalance is not None and facts.imbalance >= _IMBALANCE_HIGH and facts.metric == "log_loss":
        notes.append(f"classes imbalanced ({facts.imbalance:.1f} : 1) but class weights not searched: "
                     "log loss scores probabilities, which reweighting biases")
    return notes


def build_space(data: DataFacts, *, budget_seconds: float | None) -> SpaceSpec:
    """Build a search space for one dataset from its facts and the budget.

    Parameters
    ----------
    data
        The dataset's facts (:func:`tunelab.facts.data_facts`): the cost probes decide which
        families fit the budget, the landmarkers how promising each is; class weights are not
        searched under a log-loss metric, which scores the probabilities that reweighting
        biases; the numeric-map probe, when there is one, orders the maps the scaled families
        search (else the skewness rule orders them).
    budget_seconds
        The study's wall-clock budget; ``None`` weighs costs against a reference of
        ``REFERENCE_BUDGET_S`` seconds.

    Returns
    -------
    SpaceSpec
        Families that fit, ranges scaled to the data, warm starts at the prior centres of the
        most promising families first, and a one-line reason for every decision.
    """
    facts = _rule_facts(data, budget_seconds)
    mlp, mlp_notes = _mlp(facts)
    rules = {"hist_gb": lambda: _on_fewer_rows(_hist_gb, facts),
             "random_forest": lambda: _on_fewer_rows(lambda f: _forest("random_forest", f), facts),
             "extra_trees": lambda: _on_fewer_rows(lambda f: _forest("extra_trees", f), facts),
             "linear": lambda: _linear(facts), "svm": lambda: _svm(facts), "mlp": lambda: mlp,
             "knn": lambda: _knn(facts)}
    decisions = [rules[family]() for family in FAMILY_NAMES]  # the registry's order breaks ranking ties
    kept, family_reason = _select(decisions, facts)
    prep, prep_centre = _prep_params(facts)
    families = {d.family: FamilySpec(dict(d.params), d.reason) for d in kept}
    warm = [{"family": d.family, **prep_centre, **{f"{d.family}.{k}": v for k, v in d.centre.items()}}
            for d in kept]
    planned = sum(d.trial_s or 0.0 for d in kept)
    for d in kept:
        if d.second is not None and d.second != d.centre and planned + (d.trial_s or 0.0) <= _WARM_SHARE * facts.budget:
            warm.append({"family": d.family, **prep_centre, **{f"{d.family}.{k}": v for k, v in d.second.items()}})
            planned += d.trial_s or 0.0
    left_out = [f"{d.family} left out: {d.reason}" for d in decisions if not d.include]
    kept_mlp = any(d.family == "mlp" for d in kept)
    notes = [f"{len(facts.columns)} columns, {facts.n_rows} rows, {facts.task}; {facts.n_folds}-fold "
             "cross-validation per trial",
             *left_out, *(mlp_notes if kept_mlp else []), *_preprocessing_notes(facts),
             *_regime_notes(facts),
             "warm starts (prior centres, tried first): " + ", ".join(w["family"] for w in warm)]
    costs = sorted(d.trial_s for d in kept if d.trial_s)
    return SpaceSpec(params=prep, families=families, warm_starts=tuple(warm), notes=tuple(notes),
                     family_reason=family_reason, trial_seconds=statistics.median(costs) if costs else None)


__all__ = ["REFERENCE_BUDGET_S", "build_space"]
