"""Where a benchmark run's raw results go: one JSON file per run, named by script, budget, seeds and start time."""

from __future__ import annotations

import json
from datetime import datetime
from pathlib import Path
from typing import Any


def write_results(directory: str | Path, stem: str, started: datetime, payload: dict[str, Any]) -> Path:
    """Write ``<stem>-<UTC start>.json`` into ``directory`` and say where; ``--combine`` reads these back."""
    out_dir = Path(directory)
    out_dir.mkdir(parents=True, exist_ok=True)
    out = out_dir / f"{stem}-{started.strftime('%Y%m%dT%H%M%SZ')}.json"
    out.write_text(json.dumps({**payload, "started": started.isoformat()}, indent=2, default=str), encoding="utf-8")
    print(f"\nresults: {out}")
    return out
