"""The search loop: ask (TPE) → evaluate (runner) → tell, inside the study's budget.

One launch of this loop is one row in the store's launch table; a heartbeat keeps that row's
wall and CPU seconds current, so a crash loses at most one heartbeat interval of accounting.
"""

from __future__ import annotations

import contextlib
import os
import statistics
import threading
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from optuna.exceptions import UpdateFinishedTrialError
from optuna.trial import TrialState

from tunelab.engine._budget import Budget, Spent, remaining
from tunelab.engine._clock import Clock
from tunelab.engine._objective import fold_scores_from_reports
from tunelab.engine._recovery import recover
from tunelab.engine._runner import Limits, Outcome
from tunelab.engine._stop import StopRequested, clear_stop, hold_stops, raise_pending
from tunelab.engine._study import SearchStudy
from tunelab.space import SpaceSpec
from tunelab.store import Store, StudyRecord, keys

LOST = "lost"  # the state of a launch another process declared dead
KEEP_PREDICTIONS = "keep_predictions"  # study setting: how many best trials keep their held-out predictions
DEFAULT_KEEP_PREDICTIONS = 100


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
    lost: bool = False  # another process declared this launch dead; nothing it ran after that was recorded
    reconnected: int = 0  # times the store stopped answering and the launch waited for it


@dataclass
class SearchSettings:
    """How a launch behaves: heartbeat interval, staleness, phase, and the launch kind."""

    heartbeat_interval: float | None = 2.0
    stale_after: float = 30.0
    recovery_interval: float = 2.0  # how often a launch looks for dead workers' trials to re-queue
    started: float | None = None  # when the user's launch began (process start), if before this call
    phase: int = 1
    kind: str = "run"
    reconnect_seconds: float = 30.0  # how long a launch waits for a store that stopped answering


class _Heartbeat:
    """Writes the launch's spend every interval from a thread (or on demand with no thread)."""

    def __init__(self, store: Store, launch_id: int, clock: Clock, started: float,
                 interval: float | None, runner: Any) -> None:
        self.store, self.launch_id, self.clock, self.started = store, launch_id, clock, started
        self.interval, self.runner = interval, runner
        self.trials_done = 0
        self.lost = False  # another process declared this launch dead (see Store.beat)
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

    def beat(self) -> bool:
        """Write the launch's spend; False (and ``lost`` from then on) once it was declared dead."""
        with self._lock:
            if self.lost:
                return False
            now = self.clock.now()
            alive = self.store.beat(self.launch_id, now=now, wall_seconds=max(0.0, now - self.started),
                                    cpu_seconds=self.cpu_seconds(), trials_done=self.trials_done)
            self.lost = not alive
            return alive

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


def search(store: Store, record: StudyRecord, study: SearchStudy, space: SpaceSpec, runner: Any, budget: Budget,
           *, clock: Clock, settings: SearchSettings | None = None,
           on_progress: Callable[[Progress], None] | None = None) -> SearchSummary:
    """Run trials until the budget, the trial cap, or a stop request ends the launch."""
    settings = settings or SearchSettings()
    started = settings.started if settings.started is not None else clock.now()
    fixes = recover(store, record, study, now=clock.now(), stale_after=settings.stale_after, phase=settings.phase)
    summary = SearchSummary(None, "", 0.0, recovered=fixes.interrupted, requeued=fixes.requeued)
    box = _Box.left(store, record, budget, started, clock.now())
    if box.empty:
        summary.stop_reason = "budget already spent"
        _fill_best(summary, study)
        return summary
    launch = _Launch(store, record, study, space, runner, clock, settings, started, box, summary)
    state = "finished"
    try:
        while True:
            try:
                if launch.should_stop(budget):
                    break
                kind = launch.run_one_trial()
                if on_progress is not None:  # reads the best value from the store: inside the wait, too
                    on_progress(launch.progress(kind))
            except Exception as exc:  # the store may have stopped answering for a while
                launch.wait_for_store(exc)
                continue
            if kind in (keys.INTERRUPTED, LOST):
                break
        if summary.lost:
            state = LOST
    except (KeyboardInterrupt, StopRequested) as exc:
        launch.stopped_by(exc)
        state = "interrupted"
    except BaseException as exc:
        launch.abandon()
        state = "crashed"
        failure = store.translate(exc, "record a trial", record.name) if isinstance(exc, Exception) else None
        if failure is not None and failure is not exc:
            raise failure from exc
        raise
    finally:
        launch.close(state)
    summary.elapsed = clock.now() - started
    summary.counts = launch.counts
    _fill_best(summary, study)
    return summary


@dataclass
class _Box:
    """What is left of the study's budget for this launch, and when it must end."""

    wall: float | None
    cpu: float | None
    trials: int | None
    deadline: float | None

    @property
    def empty(self) -> bool:
        return self.wall == 0 or self.cpu == 0 or self.trials == 0

    @classmethod
    def left(cls, store: Store, record: StudyRecord, budget: Budget, started: float, now: float) -> _Box:
        # Wall time is the union of launch intervals: this launch counts from its process start, and
        # time other live launches already cover is not counted twice (a joining worker gets their deadline).
        wall_spent, cpu_spent = store.spent(record.id, extra=(started, now))
        done = store.count_finished(record.name)
        wall, cpu, trials = remaining(budget, Spent(wall_spent, cpu_spent, done))
        return cls(wall, cpu, trials, None if wall is None else now + wall)


class _Launch:
    """One launch's loop state: its ledger row and heartbeat, the trial in hand, and what it counted."""

    def __init__(self, store: Store, record: StudyRecord, study: SearchStudy, space: SpaceSpec, runner: Any,
                 clock: Clock, settings: SearchSettings, started: float, box: _Box, summary: SearchSummary) -> None:
        self.store, self.record, self.study, self.space, self.runner = store, record, study, space, runner
        self.clock, self.settings, self.started, self.box, self.summary = clock, settings, started, box, summary
        self.id = store.start_launch(record.id, kind=settings.kind, now=started)
        summary.launch_id = self.id
        self.heartbeat = _Heartbeat(store, self.id, clock, started, settings.heartbeat_interval, runner)
        self.heartbeat.beat()  # start-up time (imports, loading) is already spent: record it before the first trial
        self.owner = {keys.LAUNCH: self.id, keys.PHASE: settings.phase}
        study.stamp(self.owner)  # new trials are created carrying their owner
        self.durations = _past_durations(study)
        self.counts = {"complete": 0, "pruned": 0, "failed": 0, "interrupted": 0}
        self.trial: Any = None
        self.next_recovery = clock.now() + settings.recovery_interval

    def should_stop(self, budget: Budget) -> bool:
        """Re-queue dead workers' trials when due, act on a pending stop, then check the budget."""
        if self.clock.now() >= self.next_recovery:  # another worker may have died: re-queue its trials
            found = recover(self.store, self.record, self.study, now=self.clock.now(),
                            stale_after=self.settings.stale_after, phase=self.settings.phase, own_launch=self.id)
            self.summary.recovered += found.interrupted
            self.summary.requeued += found.requeued
            self.next_recovery = self.clock.now() + self.settings.recovery_interval
        raise_pending()
        if self.heartbeat.lost:
            self._lost()
            return True
        finished_total = self.store.count_finished(self.record.name) if budget.trials is not None else 0
        reason = _stop_reason(self.clock.now(), self.box.deadline, self.box.cpu, self.heartbeat, budget.trials,
                              finished_total, self.durations)
        self.summary.stop_reason = reason
        return bool(reason)

    def run_one_trial(self) -> str:
        """Ask for a config, evaluate it, and record the outcome whole; returns the trial's state.

        A trial found already ended means another process's recovery took it: this launch was
        declared dead while it held the trial (frozen past the stale limit), at any point from the
        claim to the record, so the launch is lost and records nothing more (seen after SIGSTOP,
        ``benchmarks/fault_loop.py`` and the frozen-worker fault test).
        """
        try:
            return self._run_one_trial()
        except UpdateFinishedTrialError:
            self._lost()
            return LOST

    def _run_one_trial(self) -> str:
        with hold_stops():  # a stop waits until the trial is claimed, stamped and its config stored
            self.trial = self.study.study.ask()
            _stamp(self.study, self.trial, self.owner)
            config = self.space.sample(self.trial)
            self.study.flush()  # the config is in the store before the fit starts: a crash re-queues it
        t0 = self.clock.now()
        cpu_left = None if self.box.cpu is None else max(0.0, self.box.cpu - self.heartbeat.cpu_seconds())
        hook = _PruningHook(self.trial)
        outcome = self.runner.run(config, hook, Limits(self.box.deadline, cpu_left), self.clock)
        with hold_stops():  # the outcome is recorded whole, then a stop acts
            if not self.heartbeat.beat():  # declared dead while the trial ran: its result is not ours to record
                self._lost()
                return LOST
            kind = _record(self.study, self.trial, outcome, self.clock.now() - t0, hook.reports,
                           getattr(self.runner, "objective", None))
            if kind == "complete" and outcome.result is not None and outcome.result.predictions is not None:
                keep = int(self.record.settings.get(KEEP_PREDICTIONS, DEFAULT_KEEP_PREDICTIONS))
                if keep > 0:
                    self.store.keep_predictions(self.record, self.trial.number, outcome.result.value,
                                                outcome.result.predictions, keep=keep)
            self.trial = None
            self.counts[kind] += 1
        if kind == "complete":
            self.durations.setdefault(str(config.get("family", "")), []).append(self.clock.now() - t0)
        self.heartbeat.trials_done += 1
        if self.settings.heartbeat_interval is None:
            self.heartbeat.beat()
        if kind == keys.INTERRUPTED:
            self.summary.stop_reason = outcome.extras.get("stopped_by", "time budget") + " spent during a trial"
        return kind

    def _lost(self) -> None:
        self.summary.lost = True
        self.summary.stop_reason = (f"lost: another process declared this launch dead after its heartbeat stopped "
                                    f"for more than {self.settings.stale_after:.0f}s, and re-queued its trial")
        self.trial = None

    def wait_for_store(self, exc: Exception) -> None:
        """A store error in the loop: wait for a store that stopped answering, else give up with it.

        A lost or refused connection is waited for with backoff (1, 2, 4 ... seconds) for at most
        ``reconnect_seconds``; once the store answers, the trial that was running is recorded as
        interrupted and re-queued once, as after a kill, and the search goes on.  Any other error,
        or a store still silent at the end, ends the launch with that error.
        """
        failure = self.store.translate(exc, "record a trial", self.record.name)
        if failure is None or not failure.transient:
            raise exc
        give_up = self.clock.now() + self.settings.reconnect_seconds
        pause = 1.0
        while True:
            if self.clock.now() + pause > give_up:
                raise failure from exc
            self.clock.sleep(pause)
            pause = min(2 * pause, 8.0)
            try:
                self.store.ping()
                self.abandon()  # the trial in hand (if any) is interrupted ...
                found = recover(self.store, self.record, self.study, now=self.clock.now(),  # ... and re-queued once
                                stale_after=self.settings.stale_after, phase=self.settings.phase, own_launch=self.id)
            except Exception as again:  # still away: wait on, up to the bound
                if self.store.translate(again, "reach the store") is None:
                    raise
                continue
            self.trial = None
            self.summary.reconnected += 1
            self.summary.recovered += found.interrupted
            self.summary.requeued += found.requeued
            return

    def progress(self, kind: str) -> Progress:
        return Progress(started=self.started, box_seconds=self.box.wall, trials=sum(self.counts.values()),
                        counts=dict(self.counts), best=_best_value(self.study), last_state=kind)

    def stopped_by(self, exc: BaseException) -> None:
        """A signal or Ctrl-C: the trial in hand and any orphan are recorded as interrupted."""
        clear_stop()
        if self.trial is not None and self.study.mark_interrupted(self.trial.number):
            self.counts[keys.INTERRUPTED] += 1
        self.counts[keys.INTERRUPTED] += _mark_orphans_interrupted(self.study)
        name = exc.signal_name if isinstance(exc, StopRequested) else "SIGINT"
        self.summary.signal_name = name
        self.summary.exit_code = exc.exit_code if isinstance(exc, StopRequested) else 130
        self.summary.stop_reason = f"stopped by {name}"

    def abandon(self) -> None:
        """An error ends the launch: leave no trial of this process running, where the store still
        takes writes (a full disk or a lost connection leaves them to the next launch's recovery)."""
        with contextlib.suppress(Exception):
            if self.trial is not None:
                self.study.mark_interrupted(self.trial.number)
            _mark_orphans_interrupted(self.study)

    def close(self, state: str) -> None:
        """Stop the runner and the heartbeat, and close the launch's ledger row.

        After a failed launch the row is closed where the store allows; where it does not, the row
        stays *running* and the next launch finds its process gone and closes it as crashed.
        """
        self.runner.close()
        failed = state == "crashed"
        try:
            self.heartbeat.stop()
            self.store.end_launch(self.id, state=state, reason=self.summary.stop_reason or "error")
        except Exception:
            if not failed:
                raise


def _stamp(study: SearchStudy, trial: Any, owner: dict[str, Any]) -> None:
    """Record which launch and phase run the trial (new trials already carry it; queued ones do not)."""
    have = trial.user_attrs
    for key, value in owner.items():
        if have.get(key) != value:
            trial.set_user_attr(key, value)


class _PruningHook:
    """Hands each report to optuna's trial and asks its pruner; keeps the reports for the record."""

    def __init__(self, trial: Any) -> None:
        self.trial = trial
        self.reports: dict[int, float] = {}

    def __call__(self, step: int, value: float) -> bool:
        self.reports[step] = value
        self.trial.report(value, step)
        return bool(self.trial.should_prune())


def _record(study: SearchStudy, trial: Any, outcome: Outcome, seconds: float, reports: dict[int, float],
            objective: Any = None) -> str:
    if outcome.kind == "complete" and outcome.result is not None:
        result = outcome.result
        trial.set_user_attr(keys.FOLD_SCORES, result.fold_scores)
        for key, value in result.extras.items():
            trial.set_user_attr(key, value)
        trial.set_user_attr(keys.CPU_SECONDS, outcome.cpu_seconds)
        study.study.tell(trial, result.value)
        return "complete"
    if outcome.kind == "pruned":
        # How far it got and what it cost, so a pruned trial's saving can be read back; the folds it
        # finished, so it can be compared with other trials on the same folds.
        describe = getattr(objective, "describe_step", None)
        words = f" ({describe(outcome.last_step)})" if describe is not None else ""
        trial.set_user_attr(keys.FIDELITY, f"step {outcome.last_step}{words}")
        trial.set_user_attr(keys.SECONDS, seconds)
        trial.set_user_attr(keys.CPU_SECONDS, outcome.cpu_seconds)
        # The metric on the folds it finished: carried by the objective, or (an objective that
        # reports its metric itself) read back from the running means it reported.
        folds = outcome.fold_scores if outcome.fold_scores is not None else fold_scores_from_reports(reports)
        if folds:
            trial.set_user_attr(keys.FOLD_SCORES, folds)
        study.study.tell(trial, state=TrialState.PRUNED)
        return "pruned"
    if outcome.kind == "failed":
        trial.set_user_attr(keys.STATE, keys.FAILED)
        trial.set_user_attr(keys.ERROR, outcome.error)
        study.study.tell(trial, state=TrialState.FAIL)
        return "failed"
    study.mark_interrupted(trial.number)
    return keys.INTERRUPTED


def _mark_orphans_interrupted(study: SearchStudy) -> int:
    """Record as interrupted the trials this process started but holds no handle on.

    A stop can land inside ``ask()`` after the trial row is written and before the loop
    holds the trial (seen under load: Ctrl-C left one trial RUNNING).  The storage knows which
    trials this process runs, so none is left for the next launch's recovery to find.
    """
    marked = 0
    for number in study.running_here():
        try:
            marked += study.mark_interrupted(number)
        except Exception:  # the store is gone: the next launch's recovery handles it
            continue
    return marked


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


def _past_durations(study: SearchStudy) -> dict[str, list[float]]:
    out: dict[str, list[float]] = {}
    for t in study.frozen(states=(TrialState.COMPLETE,)):
        if t.duration is not None:
            out.setdefault(str(t.params.get("family", "")), []).append(t.duration.total_seconds())
    return out


def _best_value(study: SearchStudy) -> float | None:
    try:
        return float(study.study.best_value)
    except ValueError:
        return None


def _fill_best(summary: SearchSummary, study: SearchStudy) -> None:
    try:
        best = study.study.best_trial
    except ValueError:
        return
    assert best.value is not None  # optuna's best trial is a complete one
    summary.best_value, summary.best_trial = float(best.value), best.number


def _cpu_total() -> float:
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system
