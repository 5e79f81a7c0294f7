"""Carry a configuration found on earlier data into the search space built for new data.

The builder scales ranges with the data, so an earlier study's best values can fall outside the
new space. A number is moved to the nearest value the new range allows, a category the new space
lacks is left for the sampler to draw, a parameter the new space does not search is dropped, and a
config whose model family is not in the new space is not carried at all (the builder left that
family out for this data, usually for its cost).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from tunelab.space._spec import ParamSpec, SpaceSpec

_DROP = object()


def carry_config(space: SpaceSpec, config: Mapping[str, Any]) -> dict[str, Any] | None:
    """``config`` expressed in ``space``, or None when its model family is not searched there."""
    searched: dict[str, ParamSpec] = dict(space.params)
    carried: dict[str, Any] = {}
    if space.families:
        family = config.get("family", next(iter(space.families)) if len(space.families) == 1 else None)
        if family not in space.families:
            return None
        if len(space.families) > 1:
            carried["family"] = family
        searched.update({f"{family}.{name}": spec for name, spec in space.families[family].params.items()})
    for name, spec in searched.items():
        if name in config:
            value = _within(spec, config[name])
            if value is not _DROP:
                carried[name] = value
    return carried


def carry_configs(space: SpaceSpec, configs: Sequence[Mapping[str, Any]], limit: int) -> list[dict[str, Any]]:
    """The first ``limit`` configs that carry into ``space``, in order, without repeats."""
    out: list[dict[str, Any]] = []
    seen: set[str] = set()
    for config in configs:
        carried = carry_config(space, config)
        if carried is None:
            continue
        key = repr(sorted(carried.items()))
        if key not in seen:
            seen.add(key)
            out.append(carried)
        if len(out) == limit:
            break
    return out


def _within(spec: ParamSpec, value: Any) -> Any:
    if spec.kind == "fixed":
        return _DROP  # the space holds it; SpaceSpec.complete fills it in
    if spec.kind == "categorical":
        return value if value in spec.choices else _DROP
    try:
        number = float(value)
    except (TypeError, ValueError):
        return _DROP
    if math.isnan(number):
        return _DROP
    low, high = spec.bounds
    number = min(max(number, float(low)), float(high))
    return int(round(number)) if spec.kind == "int" else number
