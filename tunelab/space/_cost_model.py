"""The cost model: the estimated seconds of one trial of a family, and the words that weigh it against the budget.

Each family's cost probe (seconds per fit, extrapolated to all rows) becomes the estimated seconds
of one *trial*: a fit per cross-validation fold on the fold's training rows.  The probes time
scikit-learn stand-ins on a few hundred rows, where fixed set-up work dominates, so each family's
estimate is multiplied by a correction measured against tunelab's own pipelines (``_CORRECTION``).
"""

from __future__ import annotations

import math

from tunelab.models import MLP_RUNGS
from tunelab.probes import scaled_cost
from tunelab.space._rule_facts import RuleFacts
from tunelab.space._rules_of_thumb import TRIAL_SHARE_MAX

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
FIT_OVERHEAD_S = 0.15  # per fold: building the pipeline, encoding, scoring; measured, rounded

# The MLP's per-row cost model, relative only (the probe supplies the machine's speed): a fixed
# cost per mini-batch plus work proportional to the weights and to the hidden units (ReLU,
# dropout, batch norm).  Constants measured with tunelab's torch MLP on one thread.
_MLP_BATCH_S = 0.004
_MLP_WEIGHT_S = 0.6e-9
_MLP_UNIT_S = 50e-9
_MLP_EXPECTED_EPOCHS = 40  # early stopping (patience 10) usually ends about here; measured, rounded


def trial_seconds(family: str, facts: RuleFacts, work: float = 1.0) -> float | None:
    """Estimated seconds of one trial: a fit per fold, ``work`` times the probe's amount of work."""
    probe = facts.cost.get(family)
    if probe is None or probe.estimated_seconds is None:
        return None
    fit = scaled_cost(probe.estimated_seconds, max(facts.n_rows, probe.probe_rows), facts.n_fit, probe.scaling)
    correction = _SVM_REGRESSION_CORRECTION if family == "svm" and facts.task == "regression" else _CORRECTION[family]
    return facts.n_folds * (fit * correction * work + FIT_OVERHEAD_S)


def _mlp_row_cost(width_in: int, hidden: int, layers: int, batch: int, n_out: int) -> float:
    weights = width_in * hidden + hidden * hidden * max(0, layers - 1) + hidden * n_out
    return _MLP_BATCH_S / batch + _MLP_WEIGHT_S * weights + _MLP_UNIT_S * hidden * layers


def mlp_trial_seconds(rung: str, batch: int, epochs: int, facts: RuleFacts) -> float | None:
    """The MLP probe (scikit-learn, 100 units, 50 epochs) scaled to the rung's network and epochs."""
    base = trial_seconds("mlp", facts)
    if base is None:
        return None
    (w_lo, w_hi), (l_lo, l_hi), _ = MLP_RUNGS[rung]
    width, layers = int(math.sqrt(w_lo * w_hi)), int(round((l_lo + l_hi) / 2))
    n_out = facts.n_classes or 1
    size = _mlp_row_cost(facts.width_dense, width, layers, batch, n_out) / _mlp_row_cost(
        facts.width_dense, 100, 1, 200, n_out)
    return base * max(1.0, size) * min(epochs, _MLP_EXPECTED_EPOCHS) / 50


def work_cap(family: str, facts: RuleFacts, per_unit: float, ceiling: int) -> int | None:
    """The largest work knob (trees, rounds) whose trial stays within the trial share of the budget.

    ``per_unit`` is the knob's value that the probe's work corresponds to (100 trees, 100 rounds).
    """
    unit = trial_seconds(family, facts, 1.0)
    if unit is None:
        return None
    overhead = facts.n_folds * FIT_OVERHEAD_S
    allowed = TRIAL_SHARE_MAX * facts.budget - overhead
    per_knob = max(unit - overhead, 1e-9) / per_unit
    return int(min(ceiling, max(0.0, allowed) / per_knob))


def cost_words(seconds: float | None, facts: RuleFacts) -> str:
    """A trial's estimated seconds and its share of the budget, in words for a reason."""
    if seconds is None:
        return "cost unknown (probe failed)"
    share = 100 * seconds / facts.budget
    share_words = "< 1" if share < 1 else f"{share:.0f}"
    return f"a trial ≈ {_secs(seconds)}, {share_words} % of the {budget_words(facts)}"


def _secs(seconds: float) -> str:
    return f"{seconds:.1f} s" if seconds < 10 else f"{seconds:.0f} s"


def budget_words(facts: RuleFacts) -> str:
    """The budget in words, saying when it is the reference one because none was given."""
    words = f"{facts.budget:g} s budget"
    return words if facts.budget_given else words + " (reference; no budget given)"


__all__ = ["FIT_OVERHEAD_S", "budget_words", "cost_words", "mlp_trial_seconds", "trial_seconds", "work_cap"]
