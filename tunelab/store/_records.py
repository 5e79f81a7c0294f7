"""Trials as plain, typed records: what every reader of a study (status, insight, export) works on.

optuna keeps a trial as a ``FrozenTrial`` with our facts spread over its attributes
(``tunelab.store._keys``); this module turns one into a :class:`TrialRecord` once, so no reader
above the store needs optuna's types, its attribute names, or its state words.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

from tunelab.store import _keys as k

if TYPE_CHECKING:
    from optuna.trial import FrozenTrial

TrialState = Literal["complete", "pruned", "failed", "interrupted", "running", "waiting"]
TRIAL_STATES: tuple[TrialState, ...] = ("complete", "pruned", "failed", "interrupted", "running", "waiting")
FINISHED_STATES: tuple[TrialState, ...] = ("complete", "pruned", "failed", "interrupted")


@dataclass(frozen=True)
class TrialRecord:
    """One trial of a study, as plain values.

    Attributes
    ----------
    number
        The trial's number in its study (0, 1, ...).
    params
        The parameters the trial sampled (or was queued with); what its space fixed is not here
        (see ``SpaceSpec.complete``).
    value
        Complete: the cross-validated score. Pruned: the score at the last step it reached
        (``step``). Otherwise ``None``.
    state
        ``complete`` (scored on every fold), ``pruned`` (stopped early), ``failed``,
        ``interrupted`` (its process died or was stopped), ``running`` or ``waiting`` (queued).
    step
        The last step the trial reported (its fidelity), ``None`` if it reported none.
    intermediate
        Every reported step and its score.
    fold_scores
        The metric on each fold the trial finished, in fold order (a pruned trial's first folds).
    phase
        The search-space phase the trial was sampled in.
    launch
        The launch that ran it, ``None`` for a queued trial.
    origin
        Where its configuration came from: ``search``, ``prior`` (the builder's warm starts),
        ``retry of N``, ``from STUDY`` (``--learn-from``/``--learn-nearest``), ``portfolio``.
    started, finished
        Epoch seconds, ``None`` when not (yet) known.
    attrs
        The remaining recorded facts (``boosting_rounds``, ``cpu_seconds``, ``error``, ...).
    """

    number: int
    params: Mapping[str, Any]
    value: float | None = None
    state: TrialState = "complete"
    step: int | None = None
    intermediate: Mapping[int, float] = field(default_factory=dict)
    fold_scores: tuple[float, ...] = ()
    phase: int = 1
    launch: int | None = None
    origin: str = "search"
    started: float | None = None
    finished: float | None = None
    attrs: Mapping[str, Any] = field(default_factory=dict)

    @property
    def family(self) -> str:
        """The model family the trial sampled ("" in a one-family space, where it is not sampled)."""
        return str(self.params.get("family", ""))

    @property
    def duration(self) -> float | None:
        """Wall seconds from start to end, if both are known."""
        if self.started is None or self.finished is None:
            return None
        return max(0.0, self.finished - self.started)

    @property
    def rounds(self) -> int | None:
        """The boosting rounds the trial's folds fitted (its sampled ``max_iter`` is a ceiling)."""
        rounds = self.attrs.get(k.ROUNDS)
        return None if rounds is None else int(rounds)

    @property
    def fold_std(self) -> float | None:
        value = self.attrs.get(k.FOLD_STD)
        return None if value is None else float(value)

    @property
    def error(self) -> str:
        return str(self.attrs.get(k.ERROR, ""))

    @property
    def scored(self) -> bool:
        """Whether the trial has a finite score: complete, or pruned after a report."""
        return self.state in ("complete", "pruned") and self.value is not None and math.isfinite(self.value)

    @property
    def score(self) -> float:
        """The value as a number, for a trial that has one (``scored``, or complete and finite)."""
        if self.value is None:
            raise TypeError(f"trial {self.number} has no value")
        return float(self.value)


def best_of(trials: Iterable[TrialRecord], direction: str) -> TrialRecord | None:
    """The best complete trial (earliest on a tie), or ``None`` when none is complete."""
    best: TrialRecord | None = None
    for t in trials:
        if t.state != "complete" or t.value is None or not math.isfinite(t.value):
            continue
        if best is None or (t.value > best.score if direction == "maximize" else t.value < best.score):
            best = t
    return best


def ranked(trials: Iterable[TrialRecord], direction: str) -> list[TrialRecord]:
    """The complete trials, best first (earliest first among equals)."""
    done = [t for t in trials if t.state == "complete" and t.value is not None and math.isfinite(t.value)]
    sign = -1.0 if direction == "maximize" else 1.0
    return sorted(done, key=lambda t: (sign * t.score, t.number))


def origin_of(attrs: Mapping[str, Any]) -> str:
    """Where a trial's config came from, so a reader can tell what the search found from what it was given."""
    if attrs.get(k.LEARNED_FROM):
        return f"from {attrs[k.LEARNED_FROM]}"
    if attrs.get(k.RETRY_OF) is not None:
        return f"retry of {attrs[k.RETRY_OF]}"
    warm = attrs.get(k.WARM_START)
    if warm == "portfolio":
        return "portfolio"
    return "prior" if warm else "search"


def state_of(trial: FrozenTrial) -> TrialState:
    """Our state word for an optuna trial: FAIL means failed or interrupted, by our attribute."""
    name = trial.state.name
    if name == "COMPLETE":
        return "complete"
    if name == "PRUNED":
        return "pruned"
    if name == "FAIL":
        return "interrupted" if trial.user_attrs.get(k.STATE) == k.INTERRUPTED else "failed"
    if name == "RUNNING":
        return "running"
    return "waiting"


_RECORD_KEYS = {k.LAUNCH, k.PHASE, k.STATE, k.FOLD_SCORES}


def record_of(trial: FrozenTrial) -> TrialRecord:
    """The plain record of one optuna trial."""
    attrs = trial.user_attrs
    state = state_of(trial)
    value = float(trial.value) if trial.value is not None and state in ("complete", "pruned") else None
    folds = attrs.get(k.FOLD_SCORES)
    launch = attrs.get(k.LAUNCH)
    return TrialRecord(
        number=trial.number, state=state, params=dict(trial.params), value=value, step=trial.last_step,
        intermediate=dict(trial.intermediate_values),
        fold_scores=tuple(float(v) for v in folds) if isinstance(folds, list) else (),
        phase=int(attrs.get(k.PHASE, 1)), launch=None if launch is None else int(launch), origin=origin_of(attrs),
        started=trial.datetime_start.timestamp() if trial.datetime_start else None,
        finished=trial.datetime_complete.timestamp() if trial.datetime_complete else None,
        attrs={key: v for key, v in attrs.items() if key not in _RECORD_KEYS},
    )


__all__ = ["FINISHED_STATES", "TRIAL_STATES", "TrialRecord", "TrialState", "best_of", "origin_of", "ranked",
           "record_of", "state_of"]
