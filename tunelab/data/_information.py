"""The information-theoretic meta-features: entropies and mutual information, in bits (Rivolli et al. 2022).

Numeric and datetime columns are cut into ``floor(m ** (1/3))`` equal-frequency bins, pymfe's
discretisation; categoricals use their levels.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from tunelab.data._columns import category_codes, datetime_seconds, finite


@dataclass(frozen=True)
class InformationFeatures:
    """Entropy-based figures (Rivolli et al. 2022, "information-theoretic" group), in bits.

    Attributes
    ----------
    class_entropy
        Shannon entropy of the class distribution; ``None`` for regression.
    imbalance_ratio
        Size of the largest class over the size of the smallest; ``None`` for regression.
    mean_mutual_information
        Mean over numeric, datetime and categorical columns of the mutual information with
        the target.  Numeric and datetime columns are cut into ``floor(m ** (1/3))``
        equal-frequency bins (``m`` rows used), as pymfe does; categoricals use their levels;
        a missing value is a level of its own; text columns are left out.  For regression
        the target is binned the same way (tunelab's extension).  Like every plug-in
        estimate it grows with the number of levels: a near-unique categorical scores close
        to the class entropy.
    rows_used
        Rows the figures were computed on.
    """

    class_entropy: float | None
    imbalance_ratio: float | None
    mean_mutual_information: float | None
    rows_used: int


def information_features(
    X: pd.DataFrame,
    col_roles: Mapping[str, str],
    y: np.ndarray,
    y_codes: np.ndarray | None,
    rows: np.ndarray,
) -> InformationFeatures:
    m = len(rows)
    n_bins = _cube_root_bins(m)
    class_entropy = imbalance = None
    if y_codes is not None:
        counts = np.bincount(y_codes)
        counts = counts[counts > 0]
        class_entropy = _entropy_bits(counts)
        imbalance = float(counts.max() / counts.min())
        target = y_codes[rows]
    else:
        target = _equal_frequency_codes(np.asarray(y, dtype=float)[rows], n_bins)
    mis = []
    for column, role in col_roles.items():
        if role == "text":
            continue
        s = X[column].iloc[rows]
        if role == "numeric":
            values = finite(s.to_numpy(dtype=float, na_value=np.nan))
            codes = _equal_frequency_codes(values, n_bins)
        elif role == "datetime":
            codes = _equal_frequency_codes(datetime_seconds(s), n_bins)
        else:
            codes = category_codes(s)
        mis.append(_mutual_information_bits(codes, target))
    return InformationFeatures(
        class_entropy=class_entropy,
        imbalance_ratio=imbalance,
        mean_mutual_information=float(np.mean(mis)) if mis else None,
        rows_used=m,
    )


def _cube_root_bins(m: int) -> int:
    # pymfe's rule, int(m ** (1/3)); np.cbrt keeps perfect cubes exact (125 -> 5).
    return max(1, int(np.cbrt(m) + 1e-9))


def _equal_frequency_codes(values: np.ndarray, n_bins: int) -> np.ndarray:
    """Equal-frequency bin of each value, with missing values in a bin of their own.

    Bin edges are the quantiles at ``1/k, 2/k, ..., 1`` (linear interpolation); edges closer
    than 1e-8 are merged, so ties make fewer, unequal bins.  This is pymfe's
    ``_equal_frequency_discretization``.
    """
    present = ~np.isnan(values)
    codes = np.zeros(values.size, dtype=np.int64)
    if not present.any():
        return codes
    edges = np.quantile(values[present], np.linspace(0.0, 1.0, n_bins + 1)[1:])
    edges = np.unique(edges[np.append(True, np.diff(edges) > 1e-8)])
    codes[present] = np.digitize(values[present], edges, right=True)
    codes[~present] = edges.size
    return codes


def _entropy_bits(counts: np.ndarray) -> float:
    p = counts[counts > 0] / counts.sum()
    return float(-(p * np.log2(p)).sum())


def _mutual_information_bits(a: np.ndarray, b: np.ndarray) -> float:
    """``H(a) + H(b) - H(a, b)`` in bits, for non-negative integer codes."""
    joint = a * (int(b.max()) + 1) + b
    return (
        _entropy_bits(np.bincount(a))
        + _entropy_bits(np.bincount(b))
        - _entropy_bits(np.bincount(joint))
    )


__all__ = ["InformationFeatures", "information_features"]
