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


RECORDS = REPO / "benchmarks" / "records"
LIMIT = 50_000  # bytes a committed record may take, per file and per folder (the project's own rule)


def test_no_committed_record_file_or_folder_is_over_the_size_limit() -> None:
    for folder in [RECORDS, *[p for p in RECORDS.rglob("*") if p.is_dir()]]:
        files = [p for p in folder.iterdir() if p.is_file()]
        assert sum(p.stat().st_size for p in files) <= LIMIT, folder
        for path in files:
            assert path.stat().st_size <= LIMIT, path


def test_space_benchmark_summaries_reprint_the_sixteen_seed_verdict(capsys: pytest.CaptureFixture[str]) -> None:
    from benchmarks.space_priors import report

    rows = [row for name in ("space-priors-seeds-40-47", "space-priors-seeds-48-55")
            for row in json.loads((RECORDS / name / "summary.json").read_text())["rows"]]
    summary = report(rows)
    capsys.readouterr()
    # benchmarks/README.md: built wins 8 of 10, none lost beyond 1 %, best CV better on 9 of 10.
    assert summary["seeds"] == list(range(40, 56))
    assert (summary["built_wins"], summary["built_losses_beyond_1pct"], summary["built_better_cv"]) == (8, 0, 9)
    digits = next(p for p in summary["paired"] if p["dataset"] == "digits")
    assert (digits["won"], digits["lost"]) == (13, 3)


def test_pruning_summary_reprints_the_pooled_table_of_seeds_8_to_15(capsys: pytest.CaptureFixture[str]) -> None:
    assert pruning.main(["--combine", str(RECORDS / "pruning-seeds-8-15" / "summary.json")]) == 0
    pooled = capsys.readouterr().out.split("mean over seeds 8, 9, 10, 11, 12, 13, 14, 15")[1]
    # benchmarks/README.md: at least 2x on 6 of 6, test equal or better on 5 of 6, best CV 3 of 6.
    assert "at least 2x the configurations per minute:    6 of 6" in pooled
    assert "equal or better test score with pruning:      5 of 6" in pooled
    assert "equal or better best cv score with pruning:   3 of 6" in pooled
    assert "4.52x" in pooled  # credit


def test_suite_summary_reprints_the_held_back_table_both_readmes_quote(capsys: pytest.CaptureFixture[str]) -> None:
    from benchmarks import suite

    summary = RECORDS / "suite-held-seeds-41-43" / "summary.json.gz"
    assert suite.main(["--combine", str(summary), "--markdown", "held"]) == 0
    rows = capsys.readouterr().out.strip().splitlines()[2:]
    assert [r.split(" | ")[0] for r in rows] == ["| roc_auc", "| accuracy", "| rmse", "| log_loss", "| mae"]
    quoted = (REPO / "benchmarks" / "README.md").read_text()
    for row in rows:  # the script's table, row for row, is the one benchmarks/README.md shows
        assert row.replace(" | 41, 42, 43 | ", " | ") in quoted
    # The root README quotes the same numbers under its own headings.
    root = (REPO / "README.md").read_text()
    assert "| ROC AUC (5 binary tables) | 3 of 5 | 3 of 5 | 0.831 / 0.764 / 0.782 | 0 of 5 |" in root
    assert "| log loss (5 binary + 5 multiclass) | 8 of 10 | 8 of 10 | 0.967 / 0.858 / 0.817 | 1 of 10 |" in root


# benchmarks/README.md and docs/experiments/pruning.md quote these verdicts of pruning under accuracy:
# (records, seeds, tables at 2x, test equal or better, unpruned best lost in the replay).
ACCURACY_VERDICTS = [
    ("pruning-accuracy-seeds-44-46", "44, 45, 46", 5, 4, 5),  # ranked by the Brier score at the rungs
    ("pruning-accuracy-seeds-47-49", "47, 48, 49", 0, 3, 4),  # and a margin of 0.75 standard errors (reverted)
]


@pytest.mark.parametrize(("folder", "seeds", "fast", "as_good", "lost"), ACCURACY_VERDICTS)
def test_pruning_under_accuracy_records_reprint_the_quoted_verdict(
        folder: str, seeds: str, fast: int, as_good: int, lost: int, capsys: pytest.CaptureFixture[str]) -> None:
    files = sorted(str(p) for p in (RECORDS / folder).glob("*.json"))
    assert pruning.main(["--combine", *files]) == 0
    pooled = capsys.readouterr().out.split(f"mean over seeds {seeds}")[1]
    assert f"at least 2x the configurations per minute:    {fast} of 5" in pooled
    assert f"equal or better test score with pruning:      {as_good} of 5" in pooled
    assert f"unpruned best stopped by the replayed rule:  {lost} of 15 unpruned studies" in pooled
