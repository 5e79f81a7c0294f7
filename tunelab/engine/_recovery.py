"""Recovery after a crash: dead launches, their running trials marked interrupted, configs re-queued."""

from __future__ import annotations

from dataclasses import dataclass, field

from optuna.trial import TrialState

from tunelab.engine._study import SearchStudy
from tunelab.store import Store, StudyRecord, keys, state_of


@dataclass
class Recovery:
    """What a launch found and fixed before it started."""

    crashed_launches: list[int] = field(default_factory=list)
    interrupted: list[int] = field(default_factory=list)
    requeued: list[int] = field(default_factory=list)


def recover(store: Store, record: StudyRecord, study: SearchStudy, *, now: float, stale_after: float, phase: int,
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
    here = set(study.running_here())
    for trial in study.frozen(states=(TrialState.RUNNING,)):
        owner = trial.user_attrs.get(keys.LAUNCH)
        orphan = (owner is None and trial.number not in here
                  and (not others_live or _older_than(trial, now, stale_after)))
        if owner in report.crashed_launches or (owner is not None and owner not in live) or orphan:
            if study.mark_interrupted(trial.number):
                report.interrupted.append(trial.number)
    done = store.requeued_trials(record.id)
    for trial in study.frozen(states=(TrialState.FAIL,)):
        if (trial.user_attrs.get(keys.STATE) == keys.INTERRUPTED and trial.number not in done
                and trial.user_attrs.get(keys.PHASE, 1) == phase
                and store.claim_requeue(record.id, trial.number, now=now)):
            study.queue(trial.params, **{keys.RETRY_OF: trial.number})
            report.requeued.append(trial.number)
    return report


def _older_than(trial: object, now: float, seconds: float) -> bool:
    start = getattr(trial, "datetime_start", None)
    return start is not None and now - start.timestamp() > seconds


trial_state = state_of  # the engine's name for it, kept for callers of tunelab.engine
