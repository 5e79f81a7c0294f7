"""How alike two datasets look, from their meta-features, to pick which earlier studies to learn from.

The method is the meta-learning warm start of Feurer, Springenberg & Hutter (2015, "Initializing
Bayesian hyperparameter optimization via meta-learning", AAAI; from memory): describe each
dataset by a vector of meta-features, start the search on new data from the best configurations
found on the datasets nearest to it by L1 distance. Their vectors were normalised over a fixed
collection of datasets; a store holds a handful of studies, too few to normalise over, so every
entry here is put on a 0–1 scale by construction instead (common practice, no source).

The entries say what decides which models and ranges work: size and shape, column kinds, how
skewed and redundant the numbers are, how hard and how balanced the target is, and which simple
model does relatively well (landmarkers, Pfahringer et al. 2000, as read by Rivolli et al. 2022).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from tunelab.facts._metafeatures import MetaFeatures
from tunelab.probes import LANDMARKERS

SimilarityVector = dict[str, float]


def similarity_vector(meta: MetaFeatures) -> SimilarityVector:
    """The dataset's meta-features as entries in [0, 1]; entries that do not apply are left out.

    Stored with each study (JSON-ready), so later data can find it without reloading this data.
    """
    s, st, info, lm = meta.simple, meta.statistical, meta.information, meta.landmarkers
    columns = max(1, s.n_columns)
    vector: dict[str, float | None] = {
        "log_rows": _unit(math.log10(max(1, s.n_rows)) / 6.0),  # a million rows maps to 1
        "log_columns": _unit(math.log10(columns) / 3.0),  # a thousand columns maps to 1
        "share_categorical": s.share_categorical,
        "share_text": s.n_text / columns,
        "share_missing": s.share_missing,
        "skewness": _squash(st.mean_abs_skewness),
        "correlation": st.mean_abs_correlation,
        "outliers": st.outlier_share,
    }
    if s.n_classes and info.class_entropy is not None and s.n_classes > 1:
        vector["class_balance"] = info.class_entropy / math.log2(s.n_classes)
    if info.imbalance_ratio:
        vector["imbalance"] = 1.0 - 1.0 / info.imbalance_ratio
    scores = {name: getattr(lm, name) for name in LANDMARKERS if getattr(lm, name) is not None}
    if scores:
        best = max(scores.values())
        vector["landmark_best"] = best
        for name, score in scores.items():  # which kind of simple model does relatively well
            vector[f"landmark_gap_{name}"] = best - score
    return {k: _unit(float(v)) for k, v in vector.items() if v is not None and math.isfinite(float(v))}


def meta_distance(a: Mapping[str, float], b: Mapping[str, float]) -> float | None:
    """Mean absolute difference over the entries both vectors hold (0 = alike, 1 = opposite).

    ``None`` when they share no entry. A mean rather than a sum keeps a regression table (no class
    entries) comparable with a classification one.
    """
    shared = [key for key in a if key in b]
    if not shared:
        return None
    return sum(abs(float(a[key]) - float(b[key])) for key in shared) / len(shared)


def _squash(value: float | None) -> float | None:
    return None if value is None else value / (1.0 + value)


def _unit(value: float) -> float:
    return min(1.0, max(0.0, value))


__all__ = ["SimilarityVector", "meta_distance", "similarity_vector"]
