"""A study's trials with what their phase's space fixed: the configuration each one really ran.

Rebuilding a trial's configuration needs three things — its sampled parameters, what its phase's
space held fixed (one family, frozen knobs), and the boosting rounds its folds fitted — and every
verb that shows or refits a trial uses this one function for it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from tunelab.engine import settled_config
from tunelab.space import ParamSpec, SpaceSpec
from tunelab.store import LaunchRecord, PhaseRecord, Store, StudyRecord, TrialRecord, union_length


@dataclass(frozen=True)
class Phases:
    """A study's phases and their spaces, by phase number."""

    records: tuple[PhaseRecord, ...]
    spaces: dict[int, SpaceSpec]

    @classmethod
    def of(cls, store: Store, record: StudyRecord) -> Phases:
        rows = tuple(store.phases(record.id))
        return cls(rows, {p.number: SpaceSpec.from_json(p.space_json) for p in rows})

    @property
    def current(self) -> SpaceSpec:
        return self.spaces[max(self.spaces)]

    @property
    def first(self) -> SpaceSpec:
        return self.spaces[min(self.spaces)]

    def space_of(self, trial: TrialRecord) -> SpaceSpec:
        return self.spaces.get(trial.phase, self.first)

    def config(self, trial: TrialRecord) -> dict[str, Any]:
        """The full configuration a trial ran: its phase's fixed values and its boosting rounds filled in."""
        return settled_config(self.space_of(trial).complete(trial.params), trial.rounds)

    def family(self, trial: TrialRecord) -> str:
        return str(self.config(trial).get("family", ""))

    @property
    def dropped(self) -> tuple[str, ...]:
        """Families the current phase dropped."""
        return self.current.dropped

    def distributions(self) -> dict[str, ParamSpec]:
        """Every parameter searched in any phase, by name (the earliest, widest phase wins)."""
        out: dict[str, ParamSpec] = {}
        for number in sorted(self.spaces):
            for key, spec in self.spaces[number].searched().items():
                out.setdefault(key, spec)
        return out


def shown_params(trial: TrialRecord) -> dict[str, Any]:
    """A trial's sampled parameters; a boosting trial's rounds as its folds fitted them."""
    if trial.rounds is None or "family" not in trial.params:
        return dict(trial.params)
    return settled_config(trial.params, trial.rounds)


@dataclass(frozen=True)
class Ledger:
    """The study's working time: the union of its launches' intervals (parallel workers count once)."""

    intervals: tuple[tuple[float, float], ...]

    @classmethod
    def of(cls, launches: list[LaunchRecord]) -> Ledger:
        return cls(tuple((ln.started_epoch, ln.started_epoch + ln.wall_seconds) for ln in launches))

    @property
    def spent(self) -> float:
        return union_length(list(self.intervals))

    def at(self, epoch: float) -> float:
        """Ledger seconds spent up to a moment (epoch seconds)."""
        return union_length([(a, min(b, epoch)) for a, b in self.intervals if a < epoch])
