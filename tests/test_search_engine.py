"""The search loop on a fake clock: budgets, trial caps, states, pruning, determinism, recovery."""

from __future__ import annotations

import math

import optuna
import pytest

from tunelab.engine import Budget, FakeClock, SearchSettings, TrialResult
from tunelab.ops import run_objective_study
from tunelab.space import ParamSpec, SpaceSpec
from tunelab.store import Store

SPACE = SpaceSpec(params={"x": ParamSpec("float", low=-5.0, high=5.0), "y": ParamSpec("float", low=-5.0, high=5.0)})


def quadratic(clock: FakeClock, seconds_per_step: float = 2.0, steps: int = 5):
    """A bowl with its minimum at (1, -2); each step costs fake seconds."""

    def objective(config, report):
        value = (config["x"] - 1) ** 2 + (config["y"] + 2) ** 2
        for step in range(1, steps + 1):
            clock.advance(seconds_per_step)
            report(step, value)
        return TrialResult(value, [value] * steps)

    return objective


def settings() -> SearchSettings:
    return SearchSettings(heartbeat_interval=None)


def test_a_ten_minute_search_on_a_fake_clock_stays_inside_its_box(store_path):
    clock = FakeClock()
    result = run_objective_study("bowl", quadratic(clock), SPACE, Budget(600), store=str(store_path),
                                 direction="minimize", clock=clock, settings=settings())
    s = result.summary
    assert s.elapsed <= 600 + 10  # one step of 2 s past the deadline at most
    assert sum(s.counts.values()) >= 55
    with Store.open(str(store_path)) as st:
        wall, _ = st.spent(st.get_study("bowl").id)
    assert wall == pytest.approx(s.elapsed)


def test_tpe_finds_the_bowls_minimum(store_path):
    clock = FakeClock()
    result = run_objective_study("bowl", quadratic(clock, 0.1), SPACE, Budget(trials=80), store=str(store_path),
                                 direction="minimize", clock=clock, settings=settings())
    assert result.summary.counts["complete"] == 80
    assert result.summary.best_value < 0.2  # analytic optimum 0 at (1, -2)


def test_trial_cap_counts_finished_trials(store_path):
    clock = FakeClock()
    result = run_objective_study("bowl", quadratic(clock), SPACE, Budget(3600, trials=7), store=str(store_path),
                                 direction="minimize", clock=clock, settings=settings())
    assert result.summary.stop_reason == "trial count reached"
    assert sum(result.summary.counts.values()) == 7


def test_same_seed_gives_the_same_trial_sequence(tmp_path):
    sequences = []
    for i in range(2):
        clock = FakeClock()
        run_objective_study("bowl", quadratic(clock), SPACE, Budget(trials=15), store=str(tmp_path / f"{i}.db"),
                            direction="minimize", seed=3, clock=clock, settings=settings())
        study = optuna.load_study(study_name="bowl", storage=f"sqlite:///{tmp_path / f'{i}.db'}")
        sequences.append([(t.params["x"], t.params["y"]) for t in study.trials])
    assert sequences[0] == sequences[1]


def test_a_failing_config_is_recorded_and_the_search_goes_on(store_path):
    clock = FakeClock()

    def objective(config, report):
        clock.advance(1)
        if config["x"] > 0:
            raise ValueError("model exploded")
        return TrialResult(config["x"])

    result = run_objective_study("flaky", objective, SPACE, Budget(trials=20), store=str(store_path),
                                 clock=clock, settings=settings())
    assert result.summary.counts["failed"] > 0
    assert result.summary.counts["complete"] > 0
    study = optuna.load_study(study_name="flaky", storage=f"sqlite:///{store_path}")
    failed = [t for t in study.trials if t.state == optuna.trial.TrialState.FAIL]
    assert all("model exploded" in t.user_attrs["error"] for t in failed)


def test_a_trial_running_at_the_deadline_is_interrupted(store_path):
    clock = FakeClock()
    result = run_objective_study("slow", quadratic(clock, seconds_per_step=30), SPACE, Budget(100),
                                 store=str(store_path), direction="minimize", clock=clock, settings=settings())
    assert result.summary.counts["interrupted"] == 1
    assert result.summary.counts["complete"] == 0


def test_pruned_trials_keep_the_step_they_reached(store_path):
    clock = FakeClock()

    def objective(config, report):
        value = abs(config["x"])
        for step in range(1, 6):
            clock.advance(1)
            report(step, value)
        return TrialResult(value)

    result = run_objective_study("prune", objective, SPACE, Budget(trials=60), store=str(store_path),
                                 direction="minimize", pruning="median", clock=clock, settings=settings())
    assert result.summary.counts["pruned"] > 0
    study = optuna.load_study(study_name="prune", storage=f"sqlite:///{store_path}")
    pruned = [t for t in study.trials if t.state == optuna.trial.TrialState.PRUNED]
    assert all(t.user_attrs["fidelity"].startswith("step ") for t in pruned)
    assert all(math.isfinite(t.value) for t in pruned)


def test_a_cpu_budget_stops_the_search_when_cpu_seconds_run_out(store_path):
    import time

    def burn(config, report):
        end = time.process_time() + 0.05
        while time.process_time() < end:
            pass
        return TrialResult(config["x"])

    result = run_objective_study("cpu", burn, SPACE, Budget(3600, cpu_seconds=1.0), store=str(store_path),
                                 settings=settings())
    assert result.summary.stop_reason == "CPU budget spent"
    with Store.open(str(store_path)) as st:
        _, cpu = st.spent(st.get_study("cpu").id)
    assert 1.0 <= cpu < 3.0  # the engine's own CPU (sampler, store) is counted too


def test_a_store_that_stops_answering_while_progress_is_shown_is_waited_for_like_any_other(store_path):
    # Progress reads the best value from the store; a connection lost at that moment used to end
    # the launch at once instead of waiting for the store (seen once in the PostgreSQL fault test).
    from sqlalchemy.exc import OperationalError

    clock, failures = FakeClock(), [1]

    def objective(config, report):
        clock.advance(1)
        return TrialResult(abs(config["x"]))

    def progress(_):
        if failures and failures.pop():
            raise OperationalError("SELECT", {}, Exception("server closed the connection unexpectedly"))

    result = run_objective_study("progress", objective, SPACE, Budget(trials=5), store=str(store_path),
                                 direction="minimize", clock=clock, settings=settings(), on_progress=progress)
    assert result.summary.reconnected == 1 and result.summary.counts["complete"] >= 4


def test_a_trial_found_ended_by_another_workers_recovery_while_it_ran_ends_the_launch_as_lost(store_path):
    # After SIGSTOP past the stale limit, a worker's report could meet its trial already marked
    # interrupted by another worker; it printed optuna's traceback and its launch ended "crashed"
    # (2 of 20 frozen-worker runs of benchmarks/fault_loop.py). Its claim is gone: the launch is lost.
    from optuna.exceptions import UpdateFinishedTrialError

    class _ClaimGone:
        def run(self, config, should_prune, limits, clock):
            raise UpdateFinishedTrialError("Trial#0 has already finished and can not be updated.")

        def close(self):
            pass

    result = run_objective_study("claim", lambda config, report: TrialResult(0.0), SPACE, Budget(trials=3),
                                 store=str(store_path), clock=FakeClock(), settings=settings(),
                                 runner_factory=lambda objective: _ClaimGone())
    assert result.summary.lost and result.summary.stop_reason.startswith("lost:")
    with Store.open(str(store_path)) as st:
        assert [launch.state for launch in st.launches(st.get_study("claim").id)] == ["lost"]


def test_a_launch_declared_dead_between_claiming_a_trial_and_starting_it_ends_as_lost(store_path, monkeypatch):
    # Frozen (SIGSTOP) just after optuna handed it a trial, a worker woke to find the trial already
    # marked interrupted by another worker's recovery; stamping the trial raised, and its launch
    # ended "crashed" instead of "lost" (1 fresh-clone run of the frozen-worker fault test).
    real_ask = optuna.Study.ask

    def ask_then_frozen_past_the_stale_limit(study, *args, **kwargs):
        trial = real_ask(study, *args, **kwargs)
        if trial.number == 1:  # what another process's recovery does while this one is frozen
            with Store.open(str(store_path)) as st:
                assert st.mark_dead_launches(st.get_study("frozen").id, now=1e12, stale_after=30.0)
            study.tell(trial, state=optuna.trial.TrialState.FAIL)
        return trial

    monkeypatch.setattr(optuna.Study, "ask", ask_then_frozen_past_the_stale_limit)
    clock = FakeClock()
    result = run_objective_study("frozen", quadratic(clock), SPACE, Budget(trials=4), store=str(store_path),
                                 direction="minimize", clock=clock, settings=settings())
    assert result.summary.lost and result.summary.counts["complete"] == 1  # nothing after it was declared dead
    with Store.open(str(store_path)) as st:
        assert [launch.state for launch in st.launches(st.get_study("frozen").id)] == ["lost"]
