"""What the rules read: the data's facts in the form the rules use them, and the budget.

Derived once per space from :class:`tunelab.facts.DataFacts`: training rows of a fold, the width
of the encoded data, landmarker scores as gains over guessing, and the budget the costs are
weighed against.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from tunelab.data import ColumnRole
from tunelab.facts import DataFacts
from tunelab.models import ONE_HOT_MAX_CARDINALITY
from tunelab.probes import LANDMARKERS, CostProbe, TransformProbe
from tunelab.space._rules_of_thumb import NOISY_SIGNAL, REFERENCE_BUDGET_S


@dataclass(frozen=True)
class RuleFacts:
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
    row_ladder: bool = False  # trials climb a row ladder (rows as a fidelity): no family gets a fixed row cap

    @property
    def signal(self) -> float | None:
        """The best landmarker's gain over guessing (R² for regression), ``None`` if none ran."""
        return max(self.landmarks.values()) if self.landmarks else None

    @property
    def noisy(self) -> bool:
        """Whether the best landmarker gains so little over guessing that the target looks noisy."""
        return self.signal is not None and self.signal < NOISY_SIGNAL


def rule_facts(data: DataFacts, budget_seconds: float | None) -> RuleFacts:
    """Read the data's facts the way the rules use them, for a budget (``None``: the reference budget)."""
    meta, cols = data.meta, [c for c in data.columns if c.role != "id"]
    missing_numeric = sum(1 for c in cols if c.role == "numeric" and c.missing_share > 0)
    base = sum(1 for c in cols if c.role == "numeric") + missing_numeric + 5 * sum(
        1 for c in cols if c.role == "datetime")
    text = sum(1 for c in cols if c.role == "text")
    width_tree = base + sum(1 for c in cols if c.role == "categorical") + 32 * text
    width_dense = base + 32 * text + sum(
        min(c.n_unique, ONE_HOT_MAX_CARDINALITY) if c.n_unique <= ONE_HOT_MAX_CARDINALITY else 1
        for c in cols if c.role == "categorical")
    # Accuracy over the majority-class rate, rescaled so 0 is guessing and 1 is perfect: on 97 %
    # majority data every raw accuracy is near 0.97 and would look "as good as the best".
    floor = data.majority_share
    scores = {name: getattr(meta.landmarkers, name) for name in LANDMARKERS}
    landmarks = {k: (v - floor) / (1 - floor) if floor < 1 else 0.0 for k, v in scores.items() if v is not None}
    n_rows, n_folds = data.n_rows, data.n_folds
    return RuleFacts(
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


__all__ = ["RuleFacts", "rule_facts"]
