"""One family's decision (kept or left out, and why) and the helpers that put its ranges and prior centres."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from tunelab.space._spec import ParamSpec


@dataclass
class Decision:
    """One family's decision: kept or left out and why, its estimated trial, its ranges and prior centre."""

    family: str
    include: bool
    reason: str
    trial_s: float | None = None
    score: float = 0.0
    evidence: str = ""
    params: dict[str, ParamSpec] = field(default_factory=dict)
    centre: dict[str, Any] = field(default_factory=dict)
    second: dict[str, Any] | None = None  # a second warm start, hedging the first one's regime


def clamp(value: float, low: float, high: float) -> float:
    """``value`` moved inside ``[low, high]``."""
    return max(low, min(high, value))


def float_spec(low: float, high: float, reason: str, *, log: bool = False) -> ParamSpec:
    """A float range with its reason."""
    return ParamSpec("float", low=float(low), high=float(high), log=log, reason=reason)


def int_spec(low: int, high: int, reason: str, *, log: bool = False) -> ParamSpec:
    """An integer range with its reason; ``high`` never below ``low``."""
    low, high = int(low), int(high)
    return ParamSpec("int", low=low, high=max(low, high), log=log, reason=reason)


def cat_spec(choices: tuple[Any, ...], reason: str) -> ParamSpec:
    """A choice among ``choices`` (the first is the prior centre) with its reason."""
    return ParamSpec("categorical", choices=choices, reason=reason)


def prior_centre(spec: ParamSpec, preferred: Any = None) -> Any:
    """The prior centre: ``preferred`` moved inside the range, else the range's own centre."""
    if preferred is None or spec.kind == "categorical":
        return spec.centre()
    value = clamp(preferred, *spec.bounds)
    return int(round(value)) if spec.kind == "int" else float(value)


def put(d: Decision, name: str, spec: ParamSpec, preferred: Any = None) -> None:
    """Give the family a parameter and its prior centre (``preferred``, kept inside the range)."""
    d.params[name] = spec
    d.centre[name] = prior_centre(spec, preferred)


__all__ = ["Decision", "cat_spec", "clamp", "float_spec", "int_spec", "prior_centre", "put"]
