"""Small conversions every layer shares: JSON-ready values and durations in words."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import fields, is_dataclass
from typing import Any


def plain(value: Any) -> Any:
    """JSON-ready Python values: dataclasses and mappings as dicts, sequences as lists, numpy scalars
    as the Python value they hold, and a non-finite float as ``None``."""
    if is_dataclass(value) and not isinstance(value, type):
        return {f.name: plain(getattr(value, f.name)) for f in fields(value)}
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    item = getattr(value, "item", None)
    if item is not None and getattr(value, "shape", None) == ():
        value = item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def format_duration(seconds: float) -> str:
    """``75`` → ``1m15s``; short, for progress lines and tables."""
    seconds = max(0.0, float(seconds))
    if seconds < 60:
        return f"{seconds:.0f}s" if seconds >= 10 else f"{seconds:.1f}s"
    minutes, sec = divmod(int(round(seconds)), 60)
    if minutes < 60:
        return f"{minutes}m{sec:02d}s"
    hours, minutes = divmod(minutes, 60)
    return f"{hours}h{minutes:02d}m"


def format_score(value: float) -> str:
    """A score or a difference of scores in metric units: four decimals, or two with thousands
    separators for large-valued metrics (RMSE in currency units)."""
    return f"{value:.4f}" if abs(value) < 10 else f"{value:,.2f}"


__all__ = ["format_duration", "format_score", "plain"]
