"""The space builder's rules of thumb: budget shares, thresholds, family strengths and prior centres.

Each figure says where it comes from: a source, a measurement, or "common practice, no source".
The measured cost figures live with the cost model (:mod:`tunelab.space._cost_model`).
"""

from __future__ import annotations

# With no wall-clock budget (a trial cap, or `profile` without --budget) costs are weighed
# against ten minutes; common practice, no source.
REFERENCE_BUDGET_S = 600.0

# How strongly each family is expected to do on an unknown table, before the data speaks.
# Tree ensembles, boosting first, lead on most tabular benchmarks (Grinsztajn, Oyallon and
# Varoquaux 2022, "Why do tree-based models still outperform deep learning on typical tabular
# data?", NeurIPS Datasets and Benchmarks; from memory); the numbers are an ordering, no source.
STRENGTH = {"hist_gb": 3.0, "random_forest": 2.5, "extra_trees": 2.3, "linear": 2.0,
            "svm": 1.8, "mlp": 1.6, "knn": 1.2}

# Budget shares; common practice, no source.
TRIAL_SHARE_MAX = 1 / 3  # a trial at the top of a work knob's range: at least three trials fit
SVM_SHARE_MAX = 0.10  # kernel SVM only where a fit is a small share (about 2 %) of the budget
KNN_SHARE_MAX = 0.10
MLP_SHARE = {"narrow": 0.06, "wide": 0.10, "very_wide": 0.10}  # several trials of the rung fit
# On columns of one shared scale (pixel grids and the like) networks are the family most likely to
# lead, so the narrow rung may take a tenth of the budget, as SVM and kNN may; no source.
MLP_SHARE_SHARED_SCALE = 0.10
MLP_MIN_ROWS = {"narrow": 500, "wide": 5_000, "very_wide": 20_000}  # training rows of a fold to feed the rung
SVM_MAX_ROWS = 20_000  # kernel matrix grows with rows squared; common practice, no source
KNN_MAX_WIDTH = 50  # distances lose contrast in many dimensions; common practice, no source
WARM_SHARE = 0.5  # warm starts may plan up to half the budget; the rest is for the search
TRIALS_PER_FAMILY = 3  # trials at its centre each kept family must have room for
MIN_SAMPLE_ROWS = 2_000  # fewer training rows than this are too few to judge a family by; no source
ROUNDS_TIMES_STEP = 12.0  # capped boosting: rounds x step at least this; one table (docs/experiments/big-tables.md)
SAMPLE_ROOM = 3.0  # a row sample leaves room for about 60 rounds or trees, not just the minimum 20
IMBALANCE_HIGH = 3.0  # largest class over smallest; common practice, no source
NOISY_SIGNAL = 0.6  # best landmarker gain over guessing below this: a noisy target; no source
LANDMARK_CLOSE = 0.02  # landmarker gains within this of the best count as "as good"; no source
SCORE_FLOOR = 0.5  # a family whose points fall below this has the evidence against it; no source
GAP_WEIGHT = 5.0  # points lost per unit of landmarker gap (a gap of 0.1 costs half a point); no source
SHARED_SCALE_MLP_POINTS = 1.0  # the MLP's lift on columns of one shared scale; see tunelab.space._ranking

# Boosting prior centres (common practice, no source): the library's usual settings, and a
# regularised regime (slower steps, smaller trees, bigger leaves, more shrinkage) for noisy targets.
# The warm starts try the regime the landmarkers point to first and the other one last.
HIST_GB_PRIORS: dict[str, dict[str, float]] = {
    "standard": {"learning_rate": 0.1, "max_leaf_nodes": 31, "min_samples_leaf": 20, "l2_regularization": 1e-3},
    "regularised": {"learning_rate": 0.05, "max_leaf_nodes": 15, "min_samples_leaf": 40, "l2_regularization": 1.0},
}


__all__ = ["GAP_WEIGHT", "HIST_GB_PRIORS", "IMBALANCE_HIGH", "KNN_MAX_WIDTH", "KNN_SHARE_MAX", "LANDMARK_CLOSE",
           "MIN_SAMPLE_ROWS", "MLP_MIN_ROWS", "MLP_SHARE", "MLP_SHARE_SHARED_SCALE", "NOISY_SIGNAL",
           "REFERENCE_BUDGET_S", "ROUNDS_TIMES_STEP",
           "SAMPLE_ROOM", "SCORE_FLOOR", "SHARED_SCALE_MLP_POINTS", "STRENGTH", "SVM_MAX_ROWS", "SVM_SHARE_MAX",
           "TRIALS_PER_FAMILY", "TRIAL_SHARE_MAX", "WARM_SHARE"]
