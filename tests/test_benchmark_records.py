"""The committed benchmark records: small, and read back by the scripts' ``--combine``.

``benchmarks/records/`` keeps a compact summary of each run quoted in ``benchmarks/README.md``
(the raw per-run JSON stays in git history); ``--combine`` over a summary prints the run's table
again, so these tests check the figures the README quotes.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:  # benchmarks/ is a folder of the repository, not installed
    sys.path.insert(0, str(REPO))

from benchmarks import pruning  # noqa: E402


def _pruning_record(dataset: str, setting: str, seed: int, per_minute: float, score: float) -> dict[str, object]:
    return {"dataset": dataset, "task": "regression", "pruning": setting, "metric": "rmse", "score": score,
            "counts": {"complete": 3, "pruned": 0 if setting == "off" else 9}, "evaluated": 12,
            "per_minute": per_minute, "cv_best": score, "seed": seed}


def test_pruning_combine_reads_one_summary_holding_several_seeds(tmp_path: Path,
                                                                  capsys: pytest.CaptureFixture[str]) -> None:
    records = [_pruning_record("wage", "off", 0, 10.0, 34.0), _pruning_record("wage", "auto", 0, 30.0, 33.0),
               _pruning_record("wage", "off", 1, 20.0, 36.0), _pruning_record("wage", "auto", 1, 30.0, 37.0)]
    summary = tmp_path / "summary.json"
    summary.write_text(json.dumps({"budget": "60s", "on": "auto", "records": records}))
    assert pruning.main(["--combine", str(summary)]) == 0
    out = capsys.readouterr().out
    assert "seed 0" in out and "seed 1" in out
    # Pooled: off 15 -> on 30 configs/min is 2x; test rmse 35.0 -> 35.0 is equal.
    pooled = out.split("mean over seeds 0, 1")[1]
    assert "2.00x" in pooled
    assert "equal or better test score with pruning:      1 of 1" in pooled
