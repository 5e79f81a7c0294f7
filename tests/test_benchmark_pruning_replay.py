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


def test_a_late_bloomer_stopped_at_the_first_fold_counts_as_a_stopped_winner() -> None:
    # Trial 1 trails trial 0 after one fold (0.50 against 0.90: the best third of two is one) but ends best.
    trials = [_trial(0, 0.90, 0.90), _trial(1, 0.50, 0.95), _trial(2, 0.95, 0.92)]
    replay = replay_halving(trials, maximise=True)
    assert replay == {"replayed": 3, "stopped": 1, "stopped_better": 1, "best_stopped": True}


def test_a_stopped_trial_that_also_ends_worse_is_not_a_lost_winner() -> None:
    trials = [_trial(0, 0.90, 0.90), _trial(1, 0.50, 0.60), _trial(2, 0.95, 0.92)]
    replay = replay_halving(trials, maximise=True)
    assert replay == {"replayed": 3, "stopped": 1, "stopped_better": 0, "best_stopped": False}


def test_a_stopped_trial_tied_with_one_let_through_does_not_lose_the_best() -> None:
    # Accuracy ties often (1.0 on an easy table): the score is kept although that trial was stopped.
    # Trial 1 is stopped after one fold and would have ended at 1.0; trial 2, let through, ends there too.
    trials = [_trial(0, 0.90, 0.95), _trial(1, 0.50, 1.0), _trial(2, 0.95, 1.0)]
    replay = replay_halving(trials, maximise=True)
    assert replay == {"replayed": 3, "stopped": 1, "stopped_better": 0, "best_stopped": False}


def test_for_a_loss_lower_is_better_and_the_first_trial_has_no_peer_to_be_judged_by() -> None:
    trials = [_trial(0, 1.0, 1.0), _trial(1, 2.0, 0.5), _trial(2, 0.9, 0.95)]
    replay = replay_halving(trials, maximise=False)
    assert replay == {"replayed": 3, "stopped": 1, "stopped_better": 1, "best_stopped": True}


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
