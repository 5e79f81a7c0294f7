"""How the cost of one fit grows with the rows: the rule each family's cost probe is extrapolated by."""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from types import MappingProxyType

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


__all__ = ["SCALING_RULES", "scaled_cost"]
