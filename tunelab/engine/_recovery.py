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


def recover(store: Store, record: StudyRecord, study: Any, *, now: float, stale_after: float, phase: int,
            own_launch: int | None = None) -> Recovery:
    """Mark trials of dead launches interrupted and queue their configs (current phase) to run first.

    Safe with several workers at once: a dead launch is claimed by one worker (a conditional
    update), and each interrupted config is re-queued once (a unique row in ``tl_requeue``).
    A running trial without an owner (written by a version that tagged it after the claim) is an
    orphan at once when no other launch is live, else once it is older than ``stale_after``:
    a live worker may be between its claim and its tag.
    """
    report = Recovery(crashed_launches=store.mark_dead_launches(record.id, now=now, stale_after=stale_after))
    live = {ln.id for ln in store.launches(record.id) if ln.state == "running"}
    if own_launch is not None:
        live.add(own_launch)
    others_live = live - {own_launch}
    storage = study._storage
    here = set(storage.running_here()) if hasattr(storage, "running_here") else set()
    for trial in study.get_trials(deepcopy=False, states=(TrialState.RUNNING,)):
        owner = trial.user_attrs.get(LAUNCH_ATTR)
        orphan = owner is None and trial.number not in here and (not others_live or _older_than(trial, now, stale_after))
        if owner in report.crashed_launches or (owner is not None and owner not in live) or orphan:
            try:
                storage.set_trial_user_attr(trial._trial_id, STATE_ATTR, INTERRUPTED)
                storage.set_trial_state_values(trial._trial_id, TrialState.FAIL)
            except RuntimeError:  # finished meanwhile by its owner
                continue
            report.interrupted.append(trial.number)
    done = store.requeued_trials(record.id)
    for trial in study.get_trials(deepcopy=False, states=(TrialState.FAIL,)):
        if (trial.user_attrs.get(STATE_ATTR) == INTERRUPTED and trial.number not in done
                and trial.user_attrs.get(PHASE_ATTR, 1) == phase
                and store.claim_requeue(record.id, trial.number, now=now)):
            study.enqueue_trial(trial.params, user_attrs={RETRY_ATTR: trial.number})
            report.requeued.append(trial.number)
    return report


def _older_than(trial: Any, now: float, seconds: float) -> bool:
    return trial.datetime_start is not None and now - trial.datetime_start.timestamp() > seconds


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
