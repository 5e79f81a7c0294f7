"""The shipped portfolio's members for this data: turned into its values, moved into its built space."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from tunelab.data import Dataset
from tunelab.space import SpaceSpec, carry_config, load_portfolio


@dataclass
class PortfolioStarts:
    """The portfolio configurations to queue, cheapest first, with the member each came from."""

    configs: list[tuple[str, dict[str, Any]]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def data_shape(dataset: Dataset) -> tuple[int, int]:
    """What the portfolio's relative values are relative to: the rows, and the feature columns used."""
    return dataset.n_rows, max(1, sum(1 for c in dataset.columns if c.role != "id"))


def portfolio_starts(space: SpaceSpec, dataset: Dataset, *, use: bool = True, path: Path | None = None,
                     limit: int | None = None) -> PortfolioStarts:
    """The portfolio members to try first on this data, in this space, at most ``limit`` of them.

    A member whose family the built space leaves out is not tried; a value outside the new range
    moves to the nearest one it allows (as ``--learn-from`` configurations do).
    """
    starts = PortfolioStarts()
    if not use:
        return starts
    portfolio = load_portfolio(path)
    if portfolio is None:
        return starts
    n_rows, n_columns = data_shape(dataset)
    seen: set[str] = set()
    for name, config in portfolio.configs(dataset.task, n_rows, n_columns):
        carried = carry_config(space, config)
        if carried is None or carried.get("family", config["family"]) in space.dropped:
            continue
        key = repr(sorted(carried.items()))
        if key not in seen:
            seen.add(key)
            starts.configs.append((name, carried))
        if limit is not None and len(starts.configs) >= limit:
            break
    if starts.configs:
        where = "the shipped portfolio" if path is None else f"portfolio {path}"
        built = portfolio.built.get("datasets")
        starts.notes.append(f"{len(starts.configs)} configurations of {where}"
                            + (f" (chosen across {built} open datasets)" if built else "") + " run first")
    return starts


__all__ = ["PortfolioStarts", "data_shape", "portfolio_starts"]
