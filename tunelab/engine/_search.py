"""The search loop: ask (TPE) → evaluate (runner) → tell, inside the study's budget.

One launch of this loop is one row in the store's launch table; a heartbeat keeps that row's
wall and CPU seconds current, so a crash loses at most one heartbeat interval of accounting.
"""

from __future__ import annotations

import os
import statistics
import threading
from dataclasses import dataclass, field
from typing import Any, Callable

from optuna.exceptions import UpdateFinishedTrialError
from optuna.trial import TrialState

from tunelab.engine._budget import Budget, Spent, remaining
from tunelab.engine._clock import Clock
from tunelab.engine._recovery import (
    INTERRUPTED,
    LAUNCH_ATTR,
    PHASE_ATTR,
    STATE_ATTR,
    recover,
)
from tunelab.engine._runner import Limits, Outcome
from tunelab.engine._stop import StopRequested, clear_stop, hold_stops, raise_pending
from tunelab.space import SpaceSpec
from tunelab.store import Store, StudyRecord


@dataclass
class Progress:
    """A snapshot for progress displays, sent after every trial."""

    started: float
    box_seconds: float | None
    trials: int
    counts: dict[str, int]
    best: float | None
    last_trial: int | None = None
    last_state: str = ""


@dataclass
class SearchSummary:
    """How a launch ended."""

    launch_id: int | None
    stop_reason: str
    elapsed: float
    counts: dict[str, int] = field(default_factory=dict)
    best_value: float | None = None
    best_trial: int | None = None
    signal_name: str | None = None
    exit_code: int = 0
    recovered: list[int] = field(default_factory=list)
    requeued: list[int] = field(default_factory=list)


@dataclass
class SearchSettings:
    """How a launch behaves: heartbeat interval, staleness, phase, and the launch kind."""

    heartbeat_interval: float | None = 2.0
    stale_after: float = 30.0
    recovery_interval: float = 2.0  # how often a launch looks for dead workers' trials to re-queue
    started: float | None = None  # when the user's launch began (process start), if before this call
    phase: int = 1
    kind: str = "run"


class _Heartbeat:
    """Writes the launch's spend every interval from a thread (or on demand with no thread)."""

    def __init__(self, store: Store, launch_id: int, clock: Clock, started: float,
                 interval: float | None, runner: Any) -> None:
        self.store, self.launch_id, self.clock, self.started = store, launch_id, clock, started
        self.interval, self.runner = interval, runner
        self.trials_done = 0
        self.cpu0 = _cpu_total()
        self._stop = threading.Event()
        self._lock = threading.Lock()
        self._thread: threading.Thread | None = None
        if interval:
            self._thread = threading.Thread(target=self._loop, name="tunelab-heartbeat", daemon=True)
            self._thread.start()

    def cpu_seconds(self) -> float:
        live = getattr(self.runner, "live_cpu", lambda: 0.0)()
        return _cpu_total() - self.cpu0 + live

    def beat(self) -> None:
        with self._lock:
            now = self.clock.now()
            self.store.beat(self.launch_id, now=now, wall_seconds=max(0.0, now - self.started),
                            cpu_seconds=self.cpu_seconds(), trials_done=self.trials_done)

    def _loop(self) -> None:
        while not self._stop.wait(self.interval):
            try:
                self.beat()
            except Exception:  # a missed beat is retried at the next interval
                continue

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(timeout=10)
        self.beat()


def search(store: Store, record: StudyRecord, study: Any, space: SpaceSpec, runner: Any, budget: Budget,
           *, clock: Clock, settings: SearchSettings | None = None,
           on_progress: Callable[[Progress], None] | None = None) -> SearchSummary:
    """Run trials until the budget, the trial cap, or a stop request ends the launch."""
    settings = settings or SearchSettings()
    started = settings.started if settings.started is not None else clock.now()
    fixes = recover(store, record, study, now=clock.now(), stale_after=settings.stale_after, phase=settings.phase)
    now = clock.now()
    # Wall time is the union of launch intervals: this launch counts from its process start, and
    # time other live launches already cover is not counted twice (a joining worker gets their deadline).
    wall_spent, cpu_spent = store.spent(record.id, extra=(started, now))
    done = store.count_finished(record.name)
    left_wall, left_cpu, left_trials = remaining(budget, Spent(wall_spent, cpu_spent, done))
    summary = SearchSummary(None, "", 0.0, recovered=fixes.interrupted, requeued=fixes.requeued)
    if left_wall == 0 or left_cpu == 0 or left_trials == 0:
        summary.stop_reason = "budget already spent"
        _fill_best(summary, study)
        return summary
    launch_id = store.start_launch(record.id, kind=settings.kind, now=started)
    summary.launch_id = launch_id
    deadline = None if left_wall is None else now + left_wall
    heartbeat = _Heartbeat(store, launch_id, clock, started, settings.heartbeat_interval, runner)
    heartbeat.beat()  # start-up time (imports, loading) is already spent: record it before the first trial
    owner = {LAUNCH_ATTR: launch_id, PHASE_ATTR: settings.phase}
    if hasattr(study._storage, "stamp"):
        study._storage.stamp = dict(owner)  # new trials are created carrying their owner
    durations: dict[str, list[float]] = _past_durations(study)
    counts = {"complete": 0, "pruned": 0, "failed": 0, "interrupted": 0}
    state = "finished"
    trial = None
    next_recovery = clock.now() + settings.recovery_interval
    try:
        while True:
            if clock.now() >= next_recovery:  # another worker may have died: re-queue its trials
                found = recover(store, record, study, now=clock.now(), stale_after=settings.stale_after,
                                phase=settings.phase, own_launch=launch_id)
                summary.recovered += found.interrupted
                summary.requeued += found.requeued
                next_recovery = clock.now() + settings.recovery_interval
            raise_pending()
            finished_total = store.count_finished(record.name) if budget.trials is not None else 0
            reason = _stop_reason(clock.now(), deadline, left_cpu, heartbeat, budget.trials, finished_total,
                                  durations)
            if reason:
                summary.stop_reason = reason
                break
            with hold_stops():  # a stop waits until the trial is claimed, stamped and its config stored
                trial = study.ask()
                _stamp(study, trial, owner)
                config = space.sample(trial)
                _flush(study)  # the config is in the store before the fit starts: a crash re-queues it
            t0 = clock.now()
            cpu_left = None if left_cpu is None else max(0.0, left_cpu - heartbeat.cpu_seconds())
            outcome = runner.run(config, _pruning_hook(trial), Limits(deadline, cpu_left), clock)
            with hold_stops():  # the outcome is recorded whole, then a stop acts
                kind = _record(study, trial, outcome, clock.now() - t0, getattr(runner, "objective", None))
                trial = None
                counts[kind] += 1
            if kind == "complete":
                durations.setdefault(str(config.get("family", "")), []).append(clock.now() - t0)
            heartbeat.trials_done += 1
            if settings.heartbeat_interval is None:
                heartbeat.beat()
            if on_progress is not None:
                on_progress(_progress(study, started, left_wall, counts, kind, outcome))
            if kind == INTERRUPTED:
                summary.stop_reason = outcome.extras.get("stopped_by", "time budget") + " spent during a trial"
                break
    except (KeyboardInterrupt, StopRequested) as exc:
        clear_stop()
        if trial is not None and _mark_interrupted(study, trial):
            counts[INTERRUPTED] += 1
        counts[INTERRUPTED] += _mark_orphans_interrupted(study)
        name = exc.signal_name if isinstance(exc, StopRequested) else "SIGINT"
        summary.signal_name = name
        summary.exit_code = exc.exit_code if isinstance(exc, StopRequested) else 130
        summary.stop_reason = f"stopped by {name}"
        state = "interrupted"
    except BaseException:
        if trial is not None:
            _mark_interrupted(study, trial)
        _mark_orphans_interrupted(study)
        state = "crashed"
        raise
    finally:
        runner.close()
        heartbeat.stop()
        store.end_launch(launch_id, state=state, reason=summary.stop_reason or "error")
    summary.elapsed = clock.now() - started
    summary.counts = counts
    _fill_best(summary, study)
    return summary


def _stamp(study: Any, trial: Any, owner: dict[str, Any]) -> None:
    """Record which launch and phase run the trial (new trials already carry it; queued ones do not)."""
    have = study._storage.get_trial(trial._trial_id).user_attrs
    for key, value in owner.items():
        if have.get(key) != value:
            study._storage.set_trial_user_attr(trial._trial_id, key, value)


def _flush(study: Any) -> None:
    flush = getattr(study._storage, "flush", None)
    if flush is not None:
        flush()


def _pruning_hook(trial: Any) -> Callable[[int, float], bool]:
    def should_prune(step: int, value: float) -> bool:
        trial.report(value, step)
        return bool(trial.should_prune())

    return should_prune


def _record(study: Any, trial: Any, outcome: Outcome, seconds: float, objective: Any = None) -> str:
    storage = study._storage
    if outcome.kind == "complete" and outcome.result is not None:
        result = outcome.result
        storage.set_trial_user_attr(trial._trial_id, "fold_scores", result.fold_scores)
        for key, value in result.extras.items():
            storage.set_trial_user_attr(trial._trial_id, key, value)
        storage.set_trial_user_attr(trial._trial_id, "cpu_seconds", outcome.cpu_seconds)
        study.tell(trial, result.value)
        return "complete"
    if outcome.kind == "pruned":
        # How far it got and what it cost, so a pruned trial's saving can be read back.
        describe = getattr(objective, "describe_step", None)
        words = f" ({describe(outcome.last_step)})" if describe is not None else ""
        storage.set_trial_user_attr(trial._trial_id, "fidelity", f"step {outcome.last_step}{words}")
        storage.set_trial_user_attr(trial._trial_id, "seconds", seconds)
        storage.set_trial_user_attr(trial._trial_id, "cpu_seconds", outcome.cpu_seconds)
        study.tell(trial, state=TrialState.PRUNED)
        return "pruned"
    if outcome.kind == "failed":
        storage.set_trial_user_attr(trial._trial_id, STATE_ATTR, "failed")
        storage.set_trial_user_attr(trial._trial_id, "error", outcome.error)
        study.tell(trial, state=TrialState.FAIL)
        return "failed"
    _mark_interrupted(study, trial)
    return INTERRUPTED


def _mark_orphans_interrupted(study: Any) -> int:
    """Record as interrupted the trials this process started but holds no handle on.

    A stop can land inside ``study.ask()`` after the trial row is written and before the loop
    holds the trial (seen under load: Ctrl-C left one trial RUNNING).  The storage knows which
    trials this process runs, so none is left for the next launch's recovery to find.
    """
    running_here = getattr(study._storage, "running_here", None)
    if running_here is None:
        return 0
    marked = 0
    for number in running_here():
        try:
            trial_id = study._storage.get_trial_id_from_study_id_trial_number(study._study_id, number)
            study._storage.set_trial_user_attr(trial_id, STATE_ATTR, INTERRUPTED)
            study.tell(number, state=TrialState.FAIL)
            marked += 1
        except Exception:  # noqa: BLE001 - finished meanwhile, or the store is gone: recovery handles it
            continue
    return marked


def _mark_interrupted(study: Any, trial: Any) -> bool:
    """Record a running trial as interrupted; False when it had already been recorded (a stop between steps)."""
    if study._storage.get_trial(trial._trial_id).state.is_finished():
        return False
    try:
        study._storage.set_trial_user_attr(trial._trial_id, STATE_ATTR, INTERRUPTED)
        study.tell(trial, state=TrialState.FAIL)
    except UpdateFinishedTrialError:  # another worker recovered it meanwhile
        return False
    return True


def _stop_reason(now: float, deadline: float | None, left_cpu: float | None, heartbeat: _Heartbeat,
                 trials_cap: int | None, finished_total: int, durations: dict[str, list[float]]) -> str:
    if trials_cap is not None and finished_total >= trials_cap:
        return "trial count reached"
    if left_cpu is not None and heartbeat.cpu_seconds() >= left_cpu:
        return "CPU budget spent"
    if deadline is not None:
        left = deadline - now
        if left <= 0:
            return "time budget spent"
        fastest = _fastest_family(durations)
        if fastest is not None and left < fastest:
            return "time budget spent (no trial fits in what is left)"
    return ""


def _fastest_family(durations: dict[str, list[float]]) -> float | None:
    medians = [statistics.median(v) for v in durations.values() if len(v) >= 2]
    return min(medians) if medians else None


def _past_durations(study: Any) -> dict[str, list[float]]:
    out: dict[str, list[float]] = {}
    for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,)):
        if t.duration is not None:
            out.setdefault(str(t.params.get("family", "")), []).append(t.duration.total_seconds())
    return out


def _progress(study: Any, started: float, box: float | None, counts: dict[str, int], kind: str,
              outcome: Outcome) -> Progress:
    return Progress(started=started, box_seconds=box, trials=sum(counts.values()), counts=dict(counts),
                    best=_best_value(study), last_state=kind)


def _best_value(study: Any) -> float | None:
    try:
        return float(study.best_value)
    except ValueError:
        return None


def _fill_best(summary: SearchSummary, study: Any) -> None:
    try:
        best = study.best_trial
    except ValueError:
        return
    summary.best_value, summary.best_trial = float(best.value), best.number


def _cpu_total() -> float:
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system
