"""Recovery after a crash: dead launches, their running trials marked interrupted, configs re-queued."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from optuna.trial import TrialState

from tunelab.store import Store, StudyRecord

STATE_ATTR = "tl_state"
LAUNCH_ATTR = "tl_launch"
RETRY_ATTR = "tl_retry_of"
PHASE_ATTR = "tl_phase"
INTERRUPTED = "interrupted"


@dataclass
class Recovery:
    """What a launch found and fixed before it started."""

    crashed_launches: list[int] = field(default_factory=list)
    interrupted: list[int] = field(default_factory=list)
    requeued: list[int] = field(default_factory=list)


def recover(store: Store, record: StudyRecord, study: Any, *, now: float, stale_after: float, phase: int) -> Recovery:
    """Mark trials of dead launches interrupted and queue their configs (current phase) to run first."""
    report = Recovery(crashed_launches=store.mark_dead_launches(record.id, now=now, stale_after=stale_after))
    live = {ln.id for ln in store.launches(record.id) if ln.state == "running"}
    storage = study._storage
    for trial in study.get_trials(deepcopy=False, states=(TrialState.RUNNING,)):
        if trial.user_attrs.get(LAUNCH_ATTR) not in live:
            storage.set_trial_user_attr(trial._trial_id, STATE_ATTR, INTERRUPTED)
            storage.set_trial_state_values(trial._trial_id, TrialState.FAIL)
            report.interrupted.append(trial.number)
    trials = study.get_trials(deepcopy=False)
    retried = {t.user_attrs.get(RETRY_ATTR) for t in trials}
    for trial in trials:
        if (trial.state == TrialState.FAIL and trial.user_attrs.get(STATE_ATTR) == INTERRUPTED
                and trial.number not in retried and trial.user_attrs.get(PHASE_ATTR, 1) == phase):
            study.enqueue_trial(trial.params, user_attrs={RETRY_ATTR: trial.number})
            report.requeued.append(trial.number)
    return report


def trial_state(trial: Any) -> str:
    """Our state words: complete, pruned, failed, interrupted, running, waiting."""
    if trial.state == TrialState.COMPLETE:
        return "complete"
    if trial.state == TrialState.PRUNED:
        return "pruned"
    if trial.state == TrialState.FAIL:
        return INTERRUPTED if trial.user_attrs.get(STATE_ATTR) == INTERRUPTED else "failed"
    if trial.state == TrialState.RUNNING:
        return "running"
    return "waiting"
