"""The pruning benchmark's replay: the halving rule judged over an unpruned study, trial by trial.

Under a coarse metric (accuracy) the question is whether pruning throws away configurations that
would have won. The replay answers it from a study run with pruning off, so it must judge each
trial exactly as the search's own pruner would have, against the trials before it.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:  # benchmarks/ is a folder of the repository, not installed
    sys.path.insert(0, str(REPO))

from benchmarks.pruning import replay_halving  # noqa: E402
from tunelab.engine import STEPS_PER_FOLD  # noqa: E402
from tunelab.store import TrialRecord  # noqa: E402

FOLD = STEPS_PER_FOLD  # the step after one whole fold: every family is judged there


def _trial(number: int, after_one_fold: float, final: float, family: str = "hist_gb") -> TrialRecord:
    return TrialRecord(number=number, params={"family": family}, value=final, state="complete", step=2 * FOLD,
                       intermediate={FOLD: after_one_fold, 2 * FOLD: final})


# (fold-1 value, finished value) per trial, in order; direction; what the replay must find.
CASES = {
    # Trial 1 trails trial 0 after one fold (0.50 against 0.90: the best third of two is one) but ends best.
    "a late bloomer stopped at the first fold is a stopped winner":
        ([(0.90, 0.90), (0.50, 0.95), (0.95, 0.92)], True, (1, 1, True)),
    "a stopped trial that also ends worse is not a lost winner":
        ([(0.90, 0.90), (0.50, 0.60), (0.95, 0.92)], True, (1, 0, False)),
    # Accuracy ties often (1.0 on an easy table): trial 1 is stopped and would have ended at 1.0,
    # but trial 2, let through, ends there too, so the best score is not lost.
    "a stopped trial tied with one let through does not lose the best":
        ([(0.90, 0.95), (0.50, 1.0), (0.95, 1.0)], True, (1, 0, False)),
    # For a loss lower is better; the first trial has no peer to be judged by.
    "for a loss lower is better":
        ([(1.0, 1.0), (2.0, 0.5), (0.9, 0.95)], False, (1, 1, True)),
}


@pytest.mark.parametrize("case", list(CASES))
def test_the_replay_stops_and_counts_as_the_halving_rule_would(case: str) -> None:
    values, maximise, (stopped, better, lost) = CASES[case]
    trials = [_trial(n, first, final) for n, (first, final) in enumerate(values)]
    assert replay_halving(trials, maximise=maximise) == {"replayed": len(values), "stopped": stopped,
                                                         "stopped_better": better, "best_stopped": lost}


def test_pruned_or_unfinished_trials_of_the_study_are_not_replayed() -> None:
    trials = [_trial(0, 0.9, 0.9), TrialRecord(number=1, params={"family": "hist_gb"}, state="interrupted")]
    assert replay_halving(trials, maximise=True)["replayed"] == 1
    assert replay_halving([], maximise=True) == {"replayed": 0, "stopped": 0, "stopped_better": 0,
                                                 "best_stopped": False}


def test_pooled_seeds_report_how_many_unpruned_studies_lost_their_best_to_the_replay(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    import json

    from benchmarks import pruning

    def record(setting: str, seed: int, best_stopped: bool) -> dict[str, object]:
        replay = {"replayed": 10, "stopped": 6, "stopped_better": int(best_stopped), "best_stopped": best_stopped}
        return {"dataset": "beps", "task": "multiclass", "pruning": setting, "metric": "accuracy", "score": 0.68,
                "counts": {"complete": 4, "pruned": 0 if setting == "off" else 8}, "evaluated": 12,
                "per_minute": 10.0 if setting == "off" else 30.0, "cv_best": 0.67, "seed": seed,
                "replay": replay if setting == "off" else None}

    records = [record("off", 0, True), record("auto", 0, False), record("off", 1, False), record("auto", 1, False)]
    summary = tmp_path / "summary.json"
    summary.write_text(json.dumps({"budget": "60s", "on": "auto", "records": records}))
    assert pruning.main(["--combine", str(summary)]) == 0
    pooled = capsys.readouterr().out.split("mean over seeds 0, 1")[1]
    assert "unpruned best stopped by the replayed rule:  1 of 2 unpruned studies" in pooled
    assert "12/20" in pooled  # trials the replay stopped, of those it replayed, over both seeds
