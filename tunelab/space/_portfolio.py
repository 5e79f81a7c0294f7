"""The shipped portfolio: a few configurations chosen offline to do well together across many datasets.

A first-time user has no earlier study to learn from; the portfolio fills that gap.  It is built by
greedy portfolio construction on normalised regret across a corpus of open datasets (Wistuba,
Schilling & Schmidt-Thieme 2015, ICDM, "Sequential model-free hyperparameter tuning"; Pfisterer,
van Rijn, Probst, Müller & Bischl 2021, GECCO, "Learning multiple defaults for machine learning
algorithms") by ``benchmarks/build_portfolio.py``, which writes ``portfolio.json`` beside this
module with its inputs recorded.

A member's values are kept *relative to the data* where the right value moves with it, and turned
into this data's values at ``run`` (``Portfolio.configs``), then moved into the built space as
``--learn-from`` configurations are (``carry_config``).  The conventions (``RELATIVE``):

* ``{"per": "rows", "value": s}`` — ``s`` times the training rows (a leaf size as a share of them);
* ``{"per": "sqrt_rows", "value": s}`` — ``s`` times their square root (neighbours);
* ``{"per": "columns", "value": g}`` — ``g`` over the encoded columns (an RBF kernel's width);
* ``{"per": "rows_per_column", "value": c}`` — ``c`` times rows per column (a regularisation).

Every other value is absolute.  Integers are rounded and kept at least 1.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from tunelab.errors import InputError

FORMAT = "tunelab-portfolio"
VERSION = 1
SHIPPED = Path(__file__).with_name("portfolio.json")
RELATIVE: dict[str, str] = {
    "rows": "times the training rows",
    "sqrt_rows": "times the square root of the training rows",
    "columns": "over the encoded columns",
    "rows_per_column": "times the training rows per encoded column",
}
INTEGER_PARAMS = frozenset({"max_iter", "max_leaf_nodes", "min_samples_leaf", "n_estimators", "n_neighbors",
                            "hidden_width", "n_layers", "batch_size", "max_epochs", "patience"})


@dataclass(frozen=True)
class Member:
    """One configuration of the portfolio: its family, the tasks it serves, its values."""

    name: str
    family: str
    tasks: tuple[str, ...]
    values: Mapping[str, Any]
    cost: float = 1.0  # its mean fit time over the corpus, relative to the cheapest member

    def config(self, n_rows: int, n_columns: int) -> dict[str, Any]:
        """This member's configuration for data of ``n_rows`` training rows and ``n_columns`` encoded columns."""
        config: dict[str, Any] = {"family": self.family}
        for name, value in self.values.items():
            config[f"{self.family}.{name}"] = absolute(name, value, n_rows, n_columns)
        return config


@dataclass(frozen=True)
class Portfolio:
    """The members, cheapest first, and how the file was built."""

    members: tuple[Member, ...]
    built: Mapping[str, Any] = field(default_factory=dict)
    source: str = ""

    def for_task(self, task: str) -> list[Member]:
        """The members that serve ``task``, cheapest first."""
        return sorted((m for m in self.members if task in m.tasks), key=lambda m: (m.cost, m.name))

    def configs(self, task: str, n_rows: int, n_columns: int) -> list[tuple[str, dict[str, Any]]]:
        """``(member name, configuration)`` for this data, cheapest first."""
        return [(m.name, m.config(n_rows, n_columns)) for m in self.for_task(task)]


def absolute(name: str, value: Any, n_rows: int, n_columns: int) -> Any:
    """A member's value for this data (see the module docstring for the relative conventions)."""
    if not isinstance(value, Mapping):
        return value
    per, number = value.get("per"), value.get("value")
    if per not in RELATIVE or not isinstance(number, (int, float)):
        raise InputError(f"portfolio value of {name} is not one of the conventions: {value!r}",
                         f"use {{'per': one of {', '.join(RELATIVE)}, 'value': NUMBER}} or a plain value")
    rows, columns = max(1, n_rows), max(1, n_columns)
    scale = {"rows": rows, "sqrt_rows": math.sqrt(rows), "columns": 1.0 / columns,
             "rows_per_column": rows / columns}[per]
    result = float(number) * scale
    return max(1, int(round(result))) if name in INTEGER_PARAMS else result


def load_portfolio(path: Path | None = None) -> Portfolio | None:
    """The portfolio in ``path`` (default: the shipped one); ``None`` when none is shipped yet.

    Raises
    ------
    InputError
        A file given that is missing, not JSON, or not a portfolio of a version this tunelab reads.
    """
    source = path or SHIPPED
    if not source.exists():
        if path is None:
            return None
        raise InputError(f"portfolio file not found: {path}", "rebuild one with benchmarks/build_portfolio.py")
    try:
        data = json.loads(source.read_text(encoding="utf-8"))
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"portfolio file {source} is not valid JSON",
                         "rebuild it with benchmarks/build_portfolio.py") from exc
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise InputError(f"{source} is not a tunelab portfolio", "rebuild it with benchmarks/build_portfolio.py")
    if int(data.get("version", 0)) > VERSION:
        raise InputError(f"portfolio {source} was written by a newer tunelab", "upgrade tunelab")
    members = tuple(Member(str(m["name"]), str(m["family"]), tuple(m["tasks"]), dict(m["values"]),
                           float(m.get("cost", 1.0))) for m in data.get("members", []))
    return Portfolio(members, dict(data.get("built", {})), str(source))


def portfolio_document(members: list[Member], built: Mapping[str, Any]) -> dict[str, Any]:
    """The JSON a portfolio file holds (what ``benchmarks/build_portfolio.py`` writes)."""
    return {"format": FORMAT, "version": VERSION, "conventions": RELATIVE, "built": dict(built),
            "members": [{"name": m.name, "family": m.family, "tasks": list(m.tasks), "values": dict(m.values),
                         "cost": m.cost} for m in members]}


__all__ = ["FORMAT", "RELATIVE", "SHIPPED", "VERSION", "Member", "Portfolio", "absolute", "load_portfolio",
           "portfolio_document"]
