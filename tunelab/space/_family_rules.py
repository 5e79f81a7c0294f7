"""The per-family rules: whether each family takes part, its ranges and its prior centre, each with a reason.

How the budget enters: a family whose trial (:mod:`tunelab.space._cost_model`) would eat too large
a share of the budget is left out, and the work knobs (boosting rounds, trees, epochs) are capped
so that a trial at the top of its range still leaves room for several others.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace
from typing import Any

from tunelab.data import HIGH_SKEWNESS
from tunelab.models import FAMILY_NAMES, MLP_RUNGS, ROWS_KEY
from tunelab.space._cost_model import (
    FIT_OVERHEAD_S,
    budget_words,
    cost_words,
    mlp_trial_seconds,
    trial_seconds,
    work_cap,
)
from tunelab.space._decision import Decision, cat_spec, clamp, float_spec, int_spec, prior_centre, put
from tunelab.space._rule_facts import RuleFacts
from tunelab.space._rules_of_thumb import (
    HIST_GB_PRIORS,
    IMBALANCE_HIGH,
    KNN_MAX_WIDTH,
    KNN_SHARE_MAX,
    LANDMARK_CLOSE,
    MIN_SAMPLE_ROWS,
    MLP_MIN_ROWS,
    MLP_SHARE,
    MLP_SHARE_SHARED_SCALE,
    ROUNDS_TIMES_STEP,
    SAMPLE_ROOM,
    SVM_MAX_ROWS,
    SVM_SHARE_MAX,
    TRIAL_SHARE_MAX,
)
from tunelab.space._spec import ParamSpec


def decide_families(facts: RuleFacts) -> tuple[list[Decision], list[str]]:
    """Every family's decision, in the registry's order (it breaks ranking ties), and the MLP ladder's notes."""
    mlp, mlp_notes = _mlp(facts)
    rules: dict[str, Callable[[], Decision]] = {
        "hist_gb": lambda: _on_fewer_rows(_hist_gb, facts),
        "random_forest": lambda: _on_fewer_rows(lambda f: _forest("random_forest", f), facts),
        "extra_trees": lambda: _on_fewer_rows(lambda f: _forest("extra_trees", f), facts),
        "linear": lambda: _linear(facts),
        "svm": lambda: _svm(facts),
        "mlp": lambda: mlp,
        "knn": lambda: _knn(facts),
    }
    return [rules[family]() for family in FAMILY_NAMES], mlp_notes


def _numeric_transform(d: Decision, facts: RuleFacts) -> None:
    """Numeric maps for scaled models: which ones by skewness, in which order by the probe.

    Skewed columns add the log map to the choices; the transform probe (the linear pipeline
    under each map, held-out folds) puts the best map first, which makes it the warm start.
    Without a probe the skewness rule orders them, log before quantile.
    """
    if facts.n_numeric == 0 or facts.skew is None:
        return
    rule = facts.numeric_maps
    if "log" in rule:
        why = (f"numeric columns skewed (mean |skewness| {facts.skew:.1f} > {HIGH_SKEWNESS:g}): "
               "log, plain, quantile maps")
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
    put(d, "num_transform", cat_spec(order, why))


def _class_weight(d: Decision, facts: RuleFacts) -> None:
    # Log loss scores the probabilities themselves, which reweighting the classes biases.
    if facts.imbalance is not None and facts.imbalance >= IMBALANCE_HIGH and facts.metric != "log_loss":
        put(d, "class_weight", cat_spec((None, "balanced"),
                                        f"classes imbalanced (largest/smallest = {facts.imbalance:.1f}): "
                                        "balanced weights searched"))


def _linear(facts: RuleFacts) -> Decision:
    trial = trial_seconds("linear", facts)
    d = Decision("linear", True,
                 "fast baseline, strong with many sparse or one-hot features; " + cost_words(trial, facts), trial)
    r = facts.rows_per_column
    if facts.task == "regression":
        # Ridge's penalty is not divided by the rows, so equal shrinkage needs alpha ∝ rows.
        lo, hi = (1e-4, 1.0) if r < 10 else (1e-5, 0.1)
        put(d, "alpha", float_spec(lo * facts.n_fit, hi * facts.n_fit,
                                   f"ridge penalty scales with the {facts.n_fit} training rows; "
                                   f"{'stronger, few rows per column' if r < 10 else 'four decades'}", log=True))
    else:
        lo, hi, why = ((1e-3, 10.0, "toward strong penalties: few rows per column") if r < 10 else
                       (1e-2, 100.0, "four decades around 1") if r < 100 else
                       (1e-2, 1000.0, "toward weak penalties: many rows per column"))
        put(d, "C", float_spec(lo, hi, f"inverse penalty, {why} ({r:.0f} rows per column)", log=True), 1.0)
        _class_weight(d, facts)
    _numeric_transform(d, facts)
    return d


def _hist_gb(facts: RuleFacts) -> Decision:
    cap = work_cap("hist_gb", facts, 100, 500)
    if cap is not None and cap < 20:
        return Decision("hist_gb", False, f"even 20 boosting rounds would pass {TRIAL_SHARE_MAX:.0%} of the "
                        f"{budget_words(facts)}", trial_seconds("hist_gb", facts, 0.2))
    hi = 500 if cap is None else cap
    lo = min(50, hi)
    trial = trial_seconds("hist_gb", facts, math.sqrt(lo * hi) / 100)
    d = Decision("hist_gb", True, "strong default for tabular data; " + cost_words(trial, facts), trial)
    budget_note = "" if hi == 500 else f", capped at {hi} so a trial stays within {TRIAL_SHARE_MAX:.0%} of the budget"
    put(d, "max_iter", int_spec(lo, hi, f"boosting rounds{budget_note}", log=True))
    prior = HIST_GB_PRIORS["regularised" if facts.noisy else "standard"]
    if hi < 500:
        # The budget caps the rounds: the step has to grow as they shrink. On big-400k at equal
        # cost, rounds x step of 12-20 came within 0.003 ROC AUC of the library default on all rows;
        # 6 (60 rounds at 0.1) fell 0.025 below (docs/experiments/big-tables.md).
        lr_lo = clamp(ROUNDS_TIMES_STEP / hi, 0.01, 0.2)
        lr_why = f"step size; floor {lr_lo:.2g} so the {hi} rounds the budget allows add up to {ROUNDS_TIMES_STEP:g}"
    else:
        lr_lo = clamp(5.0 / hi, 0.01, 0.1)
        lr_why = f"step size; floor {lr_lo:.2g} so {hi} rounds can converge"
    put(d, "learning_rate", float_spec(lr_lo, max(0.3, 2 * lr_lo), lr_why, log=True), prior["learning_rate"])
    # never below scikit-learn's own default of 31 leaves: on small multiclass sets (digits) a
    # tighter cap cost a fifth of the log loss in benchmarks/space_priors.py
    leaves_hi = int(clamp(facts.n_fit / 50, 31, 128))
    put(d, "max_leaf_nodes", int_spec(4, leaves_hi, f"tree size, up to one leaf per 50 of the {facts.n_fit} "
                                                    "training rows (at least the library default, 31)", log=True),
        prior["max_leaf_nodes"])
    leaf_lo = int(clamp(facts.n_fit / 2000, 1, 20))
    leaf_hi = int(clamp(facts.n_fit / 20, 8, 500))
    put(d, "min_samples_leaf", int_spec(leaf_lo, leaf_hi, f"leaf size grows with the {facts.n_fit} training rows",
                                        log=True),
        max(prior["min_samples_leaf"], facts.n_fit / 100 if facts.noisy else 0))
    put(d, "l2_regularization", float_spec(1e-4, 10.0, "leaf value shrinkage over five decades", log=True),
        prior["l2_regularization"])
    # Drawing a share of the features for each split regularises the trees.  At both prior centres
    # a share of 0.5 beat all features in five-fold CV on each of the ten benchmark tables, with
    # few columns as with many (benchmarks/boosting_feature_share.py); 0.2 was better
    # still at one centre but worse at the other on two tables, so 0.5 is the centre.
    put(d, "max_features", float_spec(0.2, 1.0, f"share of the {facts.width_tree} features drawn for each split; "
                                                "a random half regularises the trees"), 0.5)
    if facts.task != "regression":
       _class_weight(d, facts)
    _boosting_loss(d, facts)
    other = HIST_GB_PRIORS["standard" if facts.noisy else "regularised"]
    d.second = {**d.centre, **{k: prior_centre(d.params[k], v) for k, v in other.items()}}
    return d


def _boosting_loss(d: Decision, facts: RuleFacts) -> None:
    # A positive target with a long right tail (prices, wages, amounts) varies on a multiplicative
    # scale: the gamma deviance with its log link fits that scale, and predicts the mean, which is
    # what RMSE scores (McCullagh and Nelder 1989, Generalized Linear Models, 2nd ed., ch. 8: gamma
    # models for positive data whose spread grows with the mean; from memory).  Squared error stays
    # a choice, so cross-validation decides; gamma goes first, into the warm starts.
    if facts.target_skew is not None and facts.target_skew > HIGH_SKEWNESS:
        put(d, "loss", cat_spec(("gamma", "squared_error"),
                                f"target above zero and right-skewed (skewness {facts.target_skew:.1f} > "
                                f"{HIGH_SKEWNESS:g}): gamma deviance (log link) first, squared error as the other "
                                "choice"))


def _on_fewer_rows(decide: Any, facts: RuleFacts) -> Decision:
    """The family on every row when a trial fits the budget; else on a row sample, when that is the only way.

    ``decide(facts)`` is a family's rule (boosting, forests); it leaves a family out when
    even its smallest model (20 rounds or trees) would pass the trial share of the budget.  The
    row sample is sized so that about three times that model fits (fits grow about linearly
    with rows for these families), and the family's ranges are then planned for the sample.

    With a row ladder (rows as a fidelity) the sample is the ladder's top: a trial's first fold
    starts on 1/9 and 1/3 of it, and the good ones climb to the whole sample.
    """
    whole = decide(facts)
    if whole.include or not whole.trial_s:
        return whole
    allowed = TRIAL_SHARE_MAX * facts.budget - facts.n_folds * FIT_OVERHEAD_S
    rows = int(facts.n_fit * max(0.0, allowed) / (SAMPLE_ROOM * whole.trial_s))
    if rows < MIN_SAMPLE_ROWS or rows >= facts.n_fit:
        return whole
    sample = replace(facts, n_fit=rows)  # n_rows stays: the cost probes extrapolate from it
    part = decide(sample)
    if not part.include:
        return whole
    part.reason += f"; trained on {rows} of the {facts.n_fit} training rows of each fold"
    if facts.row_ladder:
        # The ladder climbs to this sample, not to all rows: on big-400k at 2 minutes, boosting
        # planned for the sample but climbing to all rows took a minute a trial, and the search
        # finished 1-2 trials (docs/experiments/big-tables.md).
        part.reason += ", the first fold climbing to it from 1/9 and 1/3 of it"
    part.params[ROWS_KEY] = ParamSpec(
        "fixed", value=rows, reason=f"on all {facts.n_fit} rows even the smallest model would pass "
                                    f"{TRIAL_SHARE_MAX:.0%} of the {budget_words(facts)}; a stratified "
                                    f"sample of {rows} rows fits (export refits on the same number)")
    return part


def _forest(family: str, facts: RuleFacts) -> Decision:
    cap = work_cap(family, facts, 100, 500)
    if cap is not None and cap < 20:
        return Decision(family, False, f"even 20 trees would pass {TRIAL_SHARE_MAX:.0%} of the "
                        f"{budget_words(facts)}", trial_seconds(family, facts, 0.2))
    hi = 500 if cap is None else cap
    lo = min(50, hi)
    trial = trial_seconds(family, facts, math.sqrt(lo * hi) / 100)
    why = ("robust, little tuning needed" if family == "random_forest"
           else "random split points: lower variance than random forest on noisy data")
    d = Decision(family, True, f"{why}; " + cost_words(trial, facts), trial)
    budget_note = "" if hi == 500 else f", capped at {hi} so a trial stays within {TRIAL_SHARE_MAX:.0%} of the budget"
    put(d, "n_estimators", int_spec(lo, hi, f"more trees help less and less; cost grows linearly{budget_note}",
                                    log=True))
    # Hastie, Tibshirani and Friedman, The Elements of Statistical Learning (2nd ed.), section 15.3:
    # m = sqrt(p) features per split for classification, p / 3 for regression (from memory).
    p = facts.width_tree
    centre = 1 / math.sqrt(p) if facts.task != "regression" else 1 / 3
    lo_f = clamp(centre / 3, 1 / p, 1.0)
    rule = "√p" if facts.task != "regression" else "p/3"
    put(d, "max_features", float_spec(lo_f, 1.0, f"share of the {p} features per split, centred on the {rule} rule",
                                      log=True), max(centre, lo_f))
    leaf_hi = int(clamp(facts.n_fit / 40, 8, 100))
    # ESL 15.3 again: leaves of 1 row for classification, 5 for regression; bigger on a noisy target
    leaf = clamp(facts.n_fit / 100, 3, 30) if facts.noisy else 1 if facts.task != "regression" else 5
    put(d, "min_samples_leaf", int_spec(1, leaf_hi, f"leaf size, up to one per 40 of the {facts.n_fit} training rows",
                                        log=True), leaf)
    if facts.task != "regression":
       _class_weight(d, facts)
    return d


def _knn(facts: RuleFacts) -> Decision:
    trial = trial_seconds("knn", facts)
    one_nn, best = facts.landmarks.get("one_nn"), facts.signal
    informative = one_nn is not None and best is not None and one_nn >= best - LANDMARK_CLOSE
    if facts.width_dense > KNN_MAX_WIDTH and not informative:
        return Decision("knn", False, f"high-dimensional ({facts.width_dense} encoded columns > {KNN_MAX_WIDTH}) "
                        "and the 1-NN landmarker trails: distances carry little signal", trial)
    if trial is None or trial > KNN_SHARE_MAX * facts.budget:
        return Decision("knn", False, f"{cost_words(trial, facts)}, over the {KNN_SHARE_MAX:.0%} allowed", trial)
    why = "distances are informative" if informative else "local averaging, a different bias from trees"
    d = Decision("knn", True, f"{why}; " + cost_words(trial, facts), trial)
    k_hi = int(clamp(2 * math.sqrt(facts.n_fit), 10, 200))
    k_hi = max(2, min(k_hi, facts.n_fit // 2))
    put(d, "n_neighbors", int_spec(1, k_hi, f"neighbours, up to 2√n of the {facts.n_fit} training rows", log=True),
        clamp(math.sqrt(facts.n_fit) / 2, 5, 50))
    put(d, "weights", cat_spec(("distance", "uniform"), "closer neighbours count more, or all alike"))
    _numeric_transform(d, facts)
    return d


def _svm(facts: RuleFacts) -> Decision:
    trial = trial_seconds("svm", facts)
    if facts.n_rows > SVM_MAX_ROWS:
        return Decision("svm", False, f"{facts.n_rows} rows: the kernel matrix grows with rows squared "
                        f"(limit {SVM_MAX_ROWS})", trial)
    if trial is None or trial > SVM_SHARE_MAX * facts.budget:
        return Decision("svm", False, f"{cost_words(trial, facts)}, over the {SVM_SHARE_MAX:.0%} allowed", trial)
    d = Decision("svm", True, "smooth non-linear boundaries on scaled data; " + cost_words(trial, facts), trial)
    put(d, "C", float_spec(1e-2, 1e2, "inverse penalty, four decades around 1", log=True), 1.0)
    p = facts.width_dense
    put(d, "gamma", float_spec(0.1 / p, 10 / p, f"kernel width around 1/p for {p} scaled columns", log=True), 1 / p)
    if facts.task != "regression":
       _class_weight(d, facts)
    _numeric_transform(d, facts)
    return d


def _mlp(facts: RuleFacts) -> tuple[Decision, list[str]]:
    batch = (64, 32, 128) if facts.n_fit < 2000 else (128, 256, 64) if facts.n_fit < 20_000 else (256, 512, 1024)
    epochs_hi = 200 if facts.n_fit < 20_000 else 100
    rungs: list[str] = []
    notes: list[str] = []
    trials: dict[str, float | None] = {}
    for rung in MLP_RUNGS:
        trial = mlp_trial_seconds(rung, batch[0], epochs_hi, facts)
        trials[rung] = trial
        rows_ok = facts.n_fit >= MLP_MIN_ROWS[rung]
        share = MLP_SHARE_SHARED_SCALE if facts.shared_scale and rung == "narrow" else MLP_SHARE[rung]
        cost_ok = trial is not None and trial <= share * facts.budget
        below_ok = rung == "narrow" or (rungs and rungs[-1] == list(MLP_RUNGS)[list(MLP_RUNGS).index(rung) - 1])
        if rows_ok and cost_ok and below_ok:
            rungs.append(rung)
        elif rung != "narrow":
            why = (f"needs {MLP_MIN_ROWS[rung]} training rows a fold, has {facts.n_fit}" if not rows_ok else
                   f"{cost_words(trial, facts)}, over the {share:.0%} allowed" if not cost_ok else
                   "the rung below it is out")
            notes.append(f"MLP rung '{rung}' left out: {why}")
    if not rungs:
        rows_ok = facts.n_fit >= MLP_MIN_ROWS["narrow"]
        why = (f"{facts.n_fit} training rows a fold, too few to train a network with an inner validation "
               f"split (needs {MLP_MIN_ROWS['narrow']})" if not rows_ok else
               f"{cost_words(trials['narrow'], facts)}: fewer than several trials of even the narrow rung fit")
        return Decision("mlp", False, why, trials["narrow"]), []
    ladder = ", ".join(rungs)
    d = Decision("mlp", True, f"torch MLP, batch norm and ReLU, rungs: {ladder}; "
                 + cost_words(trials["narrow"], facts), trials["narrow"])
    put(d, "rung", cat_spec(tuple(rungs), "network size ladder: 1 layer of 100–500 units; 2–3 layers of 1,200–1,500 "
                                          "with 40–50 % dropout; 1 layer of 8,000–10,000 with 60–80 % dropout"))
    put(d, "rung_width", float_spec(0.0, 1.0, "position in the rung's width range (log scale)"), 0.5)
    if "wide" in rungs:
       put(d, "rung_depth", float_spec(0.0, 1.0, "position in the rung's layer range"), 0.0)
    put(d, "rung_dropout", float_spec(0.0, 1.0, "position in the rung's dropout range"), 0.5)
    put(d, "learning_rate", float_spec(1e-4, 1e-2, "Adam step size, two decades around 1e-3", log=True), 1e-3)
    put(d, "weight_decay", float_spec(1e-6, 1e-2, "L2 penalty on the weights", log=True), 1e-4)
    put(d, "batch_size", cat_spec(batch, f"mini-batch rows suited to {facts.n_fit} training rows"))
    put(d, "max_epochs", int_spec(20, epochs_hi, "epoch cap; early stopping usually ends sooner", log=True),
        min(100, epochs_hi))
    _numeric_transform(d, facts)
    return d, notes


__all__ = ["decide_families"]
