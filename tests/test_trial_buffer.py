"""The trial storage writes each trial in a few transactions, and never loses a config to a crash."""

from __future__ import annotations

import optuna
import pytest
from optuna.exceptions import UpdateFinishedTrialError
from sqlalchemy import event

from tunelab.store import Store


def _study(store_path, name="buffered"):
    st = Store.open(str(store_path), create=True)
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    study = optuna.create_study(storage=st.optuna_storage(), study_name=name, direction="maximize",
                                sampler=optuna.samplers.RandomSampler(seed=0))
    return st, study


def _fresh_read(store_path, name="buffered"):
    """What another process sees: a new connection to the same file."""
    return optuna.load_study(study_name=name, storage=f"sqlite:///{store_path}").trials


def test_new_trials_are_created_with_their_owner_and_the_config_is_stored_at_the_flush(store_path):
    st, study = _study(store_path)
    st.optuna_storage().stamp = {"tl_launch": 7, "tl_phase": 1}
    trial = study.ask()
    assert _fresh_read(store_path)[0].user_attrs == {"tl_launch": 7, "tl_phase": 1}
    x = trial.suggest_float("x", 0, 1)
    assert _fresh_read(store_path)[0].params == {}  # not yet: buffered until the flush
    st.optuna_storage().flush()
    assert _fresh_read(store_path)[0].params == {"x": x}
    st.close()


def test_reports_and_attributes_reach_the_store_with_the_final_state(store_path):
    st, study = _study(store_path)
    trial = study.ask()
    trial.suggest_int("k", 1, 9)
    trial.report(0.5, 1)
    trial.report(0.7, 2)
    trial.set_user_attr("fold_scores", [0.7, 0.71])
    study.tell(trial, 0.71)
    seen = _fresh_read(store_path)[0]
    assert seen.state == optuna.trial.TrialState.COMPLETE and seen.value == 0.71
    assert seen.intermediate_values == {1: 0.5, 2: 0.7}
    assert seen.user_attrs["fold_scores"] == [0.7, 0.71]
    st.close()


def test_a_trial_costs_at_most_three_write_transactions(store_path):
    st, study = _study(store_path)
    engine = st.optuna_storage()._backend.engine
    wrote, commits = [], []

    @event.listens_for(engine, "before_cursor_execute")
    def _statement(conn, cursor, statement, *args):
        if statement.lstrip().split(" ", 1)[0].upper() in ("INSERT", "UPDATE", "DELETE"):
            wrote.append(1)

    @event.listens_for(engine, "commit")
    def _commit(conn):
        if wrote:
            commits.append(1)
            wrote.clear()

    for _ in range(5):
        trial = study.ask()
        for name in "abcdef":
            trial.suggest_float(name, 0, 1)
        st.optuna_storage().flush()
        trial.set_user_attr("cpu_seconds", 0.1)
        trial.set_user_attr("fold_scores", [1.0])
        study.tell(trial, 1.0)
    assert len(commits) <= 5 * 3  # create, flush, final state; optuna alone: one per parameter and attribute
    st.close()


def test_a_trial_another_worker_marked_interrupted_is_not_overwritten(store_path):
    st, study = _study(store_path)
    trial = study.ask()
    trial.suggest_float("x", 0, 1)
    st.optuna_storage().flush()
    other = optuna.load_study(study_name="buffered", storage=f"sqlite:///{store_path}")
    other._storage.set_trial_state_values(other.trials[0]._trial_id, optuna.trial.TrialState.FAIL)
    with pytest.raises(UpdateFinishedTrialError):
        study.tell(trial, 1.0)
    assert _fresh_read(store_path)[0].state == optuna.trial.TrialState.FAIL
    st.close()


def test_a_queued_config_is_claimed_and_run_by_one_process(store_path):
    st, study = _study(store_path)
    study.enqueue_trial({"x": 0.25})
    trial = study.ask()
    assert trial.suggest_float("x", 0, 1) == 0.25
    study.tell(trial, 0.5)
    trials = _fresh_read(store_path)
    assert len(trials) == 1 and trials[0].params == {"x": 0.25} and trials[0].value == 0.5
    st.close()


def test_a_stop_that_lands_before_the_loop_holds_the_trial_still_leaves_nothing_running(store_path):
    # Ctrl-C inside study.ask(): the trial row exists, the search loop has no handle on it.
    from tunelab.engine._search import _mark_orphans_interrupted

    st, study = _study(store_path)
    study.ask()
    assert st.optuna_storage().running_here() == [0]
    assert _mark_orphans_interrupted(study) == 1
    [seen] = _fresh_read(store_path)
    assert seen.state == optuna.trial.TrialState.FAIL and seen.user_attrs["tl_state"] == "interrupted"
    assert st.optuna_storage().running_here() == []
    st.close()

