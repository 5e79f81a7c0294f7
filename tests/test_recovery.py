"""Recovery after a crash: a running trial nobody owns any more is interrupted and its config re-queued."""

from __future__ import annotations

import time

import optuna
from optuna.trial import TrialState

from tunelab.engine import Budget, FakeClock, SearchSettings, TrialResult, open_search_study, recover, trial_state
from tunelab.ops import run_objective_study
from tunelab.space import ParamSpec, SpaceSpec
from tunelab.store import Store, keys

LAUNCH_ATTR = keys.LAUNCH

SPACE = SpaceSpec(params={"x": ParamSpec("float", low=-5.0, high=5.0)})
HOUR = 3600.0


def _study_with_an_untagged_running_trial(store_path) -> int:
    """Two finished trials, then one left RUNNING with no owner (as a kill between claim and tag left it)."""
    run_objective_study("bowl", lambda config, report: TrialResult(config["x"] ** 2, [config["x"] ** 2]), SPACE,
                        Budget(trials=2), store=str(store_path), direction="minimize", clock=FakeClock(),
                        settings=SearchSettings(heartbeat_interval=None))
    plain = optuna.load_study(study_name="bowl", storage=f"sqlite:///{store_path}")
    trial = plain.ask()
    trial.suggest_float("x", -5.0, 5.0)
    assert LAUNCH_ATTR not in plain.trials[-1].user_attrs
    return trial.number


def _recover(store_path, **kwargs):
    st = Store.open(str(store_path))
    record = st.get_study("bowl")
    study = open_search_study(st, record, launch_number=1, create=False)
    return st, study.study, recover(st, record, study, now=time.time(), stale_after=HOUR, phase=1, **kwargs)


def test_an_ownerless_running_trial_is_interrupted_and_requeued_at_once_when_no_launch_is_live(store_path):
    number = _study_with_an_untagged_running_trial(store_path)
    st, study, found = _recover(store_path)
    assert found.interrupted == [number] and found.requeued == [number]
    assert trial_state(study.trials[number]) == "interrupted"
    queued = study.trials[-1]
    assert queued.state == TrialState.WAITING and queued.system_attrs["fixed_params"] == study.trials[number].params
    st.close()


def test_an_ownerless_running_trial_is_left_alone_while_another_launch_is_live_and_it_is_young(store_path):
    number = _study_with_an_untagged_running_trial(store_path)
    with Store.open(str(store_path)) as st:
        other = st.start_launch(st.get_study("bowl").id, kind="run", now=time.time())  # this process: alive
    st, study, found = _recover(store_path, own_launch=other + 1)
    assert found.interrupted == [] and study.trials[number].state == TrialState.RUNNING
    st.close()


def test_a_claimed_queued_trial_carries_its_owner_in_the_store_before_the_config_is_flushed(store_path):
    _study_with_an_untagged_running_trial(store_path)
    st = Store.open(str(store_path))
    study = optuna.load_study(study_name="bowl", storage=st.optuna_storage())
    study.enqueue_trial({"x": 1.5})
    st.optuna_storage().stamp = {LAUNCH_ATTR: 42, "tl_phase": 1}
    claimed = study.ask()
    assert claimed.number == 3  # the queued one, not a new trial (which is created with its owner anyway)
    seen = optuna.load_study(study_name="bowl", storage=f"sqlite:///{store_path}").trials[claimed.number]
    assert seen.state == TrialState.RUNNING and seen.user_attrs[LAUNCH_ATTR] == 42
    st.close()
