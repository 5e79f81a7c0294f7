"""What earlier studies found best, to try first on new data (``run --learn-from STUDY``, ``--learn-nearest K``).

A practitioner tuning this quarter's churn file starts from what worked on last quarter's. The
earlier study's best complete trials are carried into the space built for the new data
(``tunelab.space.carry_config``) and queued ahead of the builder's own warm starts; after them TPE
searches as usual, so a carried config that does not suit the new data costs one trial.

When the user does not know which earlier study is like the new data, ``--learn-nearest K`` picks
the K studies of the same task whose stored meta-features are nearest (``tunelab.facts.meta_distance``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from tunelab.errors import InputError
from tunelab.facts import meta_distance
from tunelab.ops._trials import Phases
from tunelab.space import SpaceSpec, carry_configs
from tunelab.store import Store, best_of, keys, ranked, resolve

LEARN_TOP = 3  # best complete trials carried from each earlier study (common practice, no source)
LEARNED_ATTR = keys.LEARNED_FROM
SIMILARITY_KEY = "similarity"  # the study settings entry that holds its meta-feature vector


@dataclass
class Learned:
    """Configs to queue first, each with the study it came from, and a line per study for the user."""

    configs: list[tuple[str, dict[str, Any]]] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class Neighbour:
    """An earlier study and how far its data's meta-features are from the new data's (0 = alike)."""

    study: str
    distance: float


def nearest_studies(store: Store, vector: Mapping[str, float], task: str, count: int) -> list[Neighbour]:
    """The ``count`` studies of ``task`` whose stored meta-features are nearest to ``vector``, nearest first.

    Studies with no complete trial, and studies run with a ``--space`` file (no meta-features stored),
    are not candidates.
    """
    found: list[Neighbour] = []
    for record in store.list_studies():
        theirs = record.settings.get(SIMILARITY_KEY)
        if record.task != task or not theirs:
            continue
        distance = meta_distance(vector, theirs)
        if distance is None:
            continue
        if best_of(store.trials(record), record.direction) is not None:
            found.append(Neighbour(record.name, distance))
    return sorted(found, key=lambda n: (n.distance, n.study))[:count]


def similar_studies(store: str | None, vector: Mapping[str, float], task: str, count: int = 3) -> list[Neighbour]:
    """What ``--learn-nearest`` would pick for data with this vector; none when the store does not exist yet."""
    location = resolve(store)
    if location.path is not None and not location.path.exists():
        return []
    with Store.open(store) as opened:
        return nearest_studies(opened, vector, task, count)


def learn_from(store: Store, names: list[str], space: SpaceSpec, task: str,
               nearest: list[Neighbour] | None = None) -> Learned:
    """The best configs of each named study, then of each nearest one, carried into ``space``.

    Refuses a named study of another task or with no complete trial; the nearest are already
    filtered for both.
    """
    learned = Learned()
    distances = {n.study: n.distance for n in nearest or ()}
    for name in dict.fromkeys([*names, *distances]):
        record = store.get_study(name)
        if record.task != task:
            raise InputError(f"study '{name}' has task {record.task}; this data has task {task}",
                             "learn from a study of the same kind of task, or leave out --learn-from")
        carried = carry_configs(space, _best_configs(store, name, record.direction), LEARN_TOP)
        learned.configs.extend((name, config) for config in carried)
        why = f" (nearest data, distance {distances[name]:.2f})" if name in distances and name not in names else ""
        learned.notes.append(f"learning from study '{name}'{why}: " + (
            "none of its models' families is searched here" if not carried else
            "its best configuration runs first" if len(carried) == 1 else
            f"its best {len(carried)} configurations run first"))
    if nearest is not None and not nearest:
        learned.notes.append(f"no earlier {task} study in this store has meta-features to compare; "
                             "searching without carried configurations")
    return learned


def _best_configs(store: Store, name: str, direction: str) -> list[dict[str, Any]]:
    record = store.get_study(name)
    trials = ranked(store.trials(record), direction)
    if not trials:
        raise InputError(f"study '{name}' has no complete trial to learn from",
                         f"give it time with `tunelab resume {name}`, or leave out --learn-from")
    earlier = Phases.of(store, record).current
    return [earlier.complete(t.params) for t in trials]
