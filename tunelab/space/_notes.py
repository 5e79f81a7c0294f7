"""The notes a space carries about its data: how each kind of column is prepared, and the signal regime."""

from __future__ import annotations

from tunelab.data import HIGH_SKEWNESS, SHARED_SCALE_MAX_RATIO
from tunelab.models import ONE_HOT_MAX_CARDINALITY
from tunelab.space._rule_facts import RuleFacts
from tunelab.space._rules_of_thumb import IMBALANCE_HIGH, MLP_SHARE_SHARED_SCALE, NOISY_SIGNAL


def preprocessing_notes(facts: RuleFacts) -> list[str]:
    """How each kind of column is prepared, and the scaling, map and class-weight choices that follow."""
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
        notes.append("text columns as TF-IDF (sparse for linear and SVM, SVD components otherwise): "
                     + ", ".join(texts))
    missing = [c for c in facts.columns if c.role == "numeric" and c.missing_share > 0]
    if missing:
        notes.append(f"{len(missing)} numeric columns with missing values: median fill plus a missing indicator")
    if facts.shared_scale:
        notes.append("numeric columns share one scale (many columns, ranges within a factor of "
                     f"{SHARED_SCALE_MAX_RATIO:g}): scaled models may keep one divisor for all (pooled map), "
                     f"and the MLP may take {MLP_SHARE_SHARED_SCALE:.0%} of the budget a trial")
    if facts.skew is not None and facts.skew > HIGH_SKEWNESS:
        notes.append(f"numeric columns skewed (mean |skewness| {facts.skew:.1f}): scaled models search "
                     "log and quantile maps beside plain scaling")
    if facts.shared_scale:
        probe = f" (the {facts.transform_probe.describe()})" if facts.transform_probe is not None else ""
        notes.append(f"numeric map tried first by scaled models: pooled, as the columns share one scale{probe}")
    elif facts.transform_probe is not None:
        notes.append(f"numeric map tried first by scaled models from the {facts.transform_probe.describe()}")
    if facts.imbalance is not None and facts.imbalance >= IMBALANCE_HIGH and facts.metric != "log_loss":
        notes.append(f"classes imbalanced ({facts.imbalance:.1f} : 1): class weights searched")
    return notes


def regime_notes(facts: RuleFacts) -> list[str]:
    """Whether the target looks noisy or clear (which priors follow), and class weights left out under log loss."""
    notes = []
    if facts.signal is not None:
        gain = "R²" if facts.task == "regression" else "gain over guessing"
        if facts.noisy:
            notes.append(f"noisy target (best landmarker {gain} {facts.signal:.2f} < {NOISY_SIGNAL}): "
                         "priors lean to strong regularisation")
        else:
            notes.append(f"clear signal (best landmarker {gain} {facts.signal:.2f}): priors at the usual settings")
    if facts.imbalance is not None and facts.imbalance >= IMBALANCE_HIGH and facts.metric == "log_loss":
        notes.append(f"classes imbalanced ({facts.imbalance:.1f} : 1) but class weights not searched: "
                     "log loss scores probabilities, which reweighting biases")
    return notes


__all__ = ["preprocessing_notes", "regime_notes"]
