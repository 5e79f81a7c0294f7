"""What earlier studies found best, to try first on new data (``run --learn-from STUDY``).

A practitioner tuning this quarter's churn file starts from what worked on last quarter's. The
earlier study's best complete trials are carried into the space built for the new data
(``tunelab.space.carry_config``) and queued ahead of the builder's own warm starts; after them TPE
searches as usual, so a carried config that does not suit the new data costs one trial.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from tunelab.errors import InputError
from tunelab.space import SpaceSpec, carry_configs
from tunelab.store import Store

LEARN_TOP = 3  # best complete trials carried from each earlier study (common practice, no source)
LEARNED_ATTR = "tl_learned_from"


@dataclass
class Learned:
    """Configs to queue first, each with the study it came from, and a line per study for the user."""

    configs: list[tuple[str, dict[str, Any]]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def learn_from(store: Store, names: list[str], space: SpaceSpec, task: str) -> Learned:
    """The best configs of each named study, carried into ``space``; refuses studies of another task."""
    from optuna.trial import TrialState

    learned = Learned()
    storage = store.optuna_storage()
    for name in dict.fromkeys(names):
        record = store.get_study(name)
        if record.task != task:
            raise InputError(f"study '{name}' has task {record.task}; this data has task {task}",
                             "learn from a study of the same kind of task, or leave out --learn-from")
        trials = storage.get_all_trials(storage.get_study_id_from_name(name), deepcopy=False,
                                        states=(TrialState.COMPLETE,))
        trials = sorted((t for t in trials if t.value is not None), key=lambda t: t.value,
                        reverse=record.direction == "maximize")
        if not trials:
            raise InputError(f"study '{name}' has no complete trial to learn from",
                             f"give it time with `tunelab resume {name}`, or leave out --learn-from")
        earlier = SpaceSpec.from_json(store.phases(record.id)[-1].space_json)
        carried = carry_configs(space, [earlier.complete(t.params) for t in trials], LEARN_TOP)
        learned.configs.extend((name, config) for config in carried)
        learned.notes.append(f"learning from study '{name}': " + (
            "none of its models' families is searched here" if not carried else
            "its best configuration runs first" if len(carried) == 1 else
            f"its best {len(carried)} configurations run first"))
    return learned
