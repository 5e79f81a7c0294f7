"""Choosing optuna's pruner from the user's wish, the budget and the expected trial count."""

from __future__ import annotations

from typing import Any

from tunelab.errors import InputError

PRUNING_CHOICES = ("auto", "off", "median", "halving", "hyperband")


def make_pruner(kind: str, *, max_steps: int, expected_trials: float | None = None) -> Any:
    """An optuna pruner.

    ``auto`` picks successive halving when many trials are expected (it needs a population to
    rank), the median rule otherwise (common practice, no source).
    """
    import optuna

    if kind not in PRUNING_CHOICES:
        raise InputError(f"unknown pruning '{kind}'", f"use one of: {', '.join(PRUNING_CHOICES)}")
    if kind == "auto":
        kind = "halving" if expected_trials is not None and expected_trials >= 60 else "median"
    if kind == "off":
        return optuna.pruners.NopPruner()
    if kind == "median":
        return optuna.pruners.MedianPruner(n_startup_trials=5, n_warmup_steps=1)
    if kind == "halving":
        return optuna.pruners.SuccessiveHalvingPruner(min_resource=1, reduction_factor=3)
    return optuna.pruners.HyperbandPruner(min_resource=1, max_resource=max(max_steps, 2), reduction_factor=3)
