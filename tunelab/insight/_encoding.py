"""Trial parameters as numbers on [0, 1] along each parameter's sampling scale.

The importance methods and the spread both see a parameter the way the sampler searched it: a
log-scaled range on the log scale, integers and categorical choices as equal-width cells.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from tunelab.errors import InputError
from tunelab.space import ParamSpec
from tunelab.store import TrialRecord


@dataclass(frozen=True)
class Encoded:
    """A group of trials as a matrix: one column per non-constant parameter, values on [0, 1]."""

    names: tuple[str, ...]
    unit: np.ndarray  # trials x names
    y: np.ndarray  # the trials' scores


def is_constant(spec: ParamSpec) -> bool:
    """Whether a parameter can take one value only (nothing to learn from it)."""
    if spec.kind == "categorical":
        return len(spec.choices) <= 1
    if spec.kind in ("float", "int"):
        return spec.low == spec.high
    return True


def internal(name: str, spec: ParamSpec, value: Any, number: int) -> float:
    """A value as a number: a categorical choice's index, a number as itself (checked against its range)."""
    hint = "pass the search space the study was searched with"
    if spec.kind == "categorical":
        for index, choice in enumerate(spec.choices):
            if choice == value:
                return float(index)
        raise InputError(f"trial {number}: {name}={value!r} is not in its search space", hint)
    try:
        number_value = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(f"trial {number}: {name}={value!r} is not in its search space", hint) from exc
    low, high = map(float, spec.bounds)
    slack = 1e-9 * (high - low)
    if not low - slack <= number_value <= high + slack:
        raise InputError(f"trial {number}: {name}={value!r} is outside [{spec.low}, {spec.high}]", hint)
    return number_value


def unit(spec: ParamSpec, values: np.ndarray) -> np.ndarray:
    """Numbers from :func:`internal` mapped to [0, 1] along the sampling scale.

    Log-scaled parameters map on the log scale, so a uniform measure on [0, 1] is the one the
    sampler searches; categorical choices and integers get equal-width cells.
    """
    if spec.kind == "categorical":
        return np.asarray((values + 0.5) / len(spec.choices))
    low, high = map(float, spec.bounds)
    if spec.log:
        out = (np.log(values) - math.log(low)) / (math.log(high) - math.log(low))
    elif spec.kind == "int":
        out = (values - low + 0.5) / (high - low + 1.0)
    else:
        out = (values - low) / (high - low)
    return np.asarray(np.clip(out, 0.0, 1.0))


def snap(u: np.ndarray, bins: int) -> np.ndarray:
    """Positions on [0, 1] moved to the centre of their cell among ``bins`` equal cells."""
    return np.asarray((np.minimum(np.floor(u * bins), bins - 1) + 0.5) / bins)


def encode(trials: Sequence[TrialRecord], names: Sequence[str], space: Mapping[str, ParamSpec]) -> Encoded:
    """The trials' non-constant parameters among ``names`` as a [0, 1] matrix, and their scores."""
    kept = tuple(n for n in names if not is_constant(space[n]))
    matrix = np.empty((len(trials), len(kept)))
    for j, name in enumerate(kept):
        values = np.array([internal(name, space[name], t.params[name], t.number) for t in trials])
        matrix[:, j] = unit(space[name], values)
    return Encoded(kept, matrix, np.array([t.score for t in trials]))


def position(spec: ParamSpec, value: Any) -> float:
    """Where one value sits on the [0, 1] scale."""
    return float(unit(spec, np.array([internal("value", spec, value, -1)]))[0])


__all__ = ["Encoded", "encode", "internal", "is_constant", "position", "snap", "unit"]
