"""The ``status`` verb: every study in one line each, or one study in detail."""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

from tunelab.engine import ROUNDS_ATTR, settled_config, trial_state
from tunelab.engine._pruning import choose_pruning
from tunelab.engine._recovery import RETRY_ATTR
from tunelab.ops._learn import LEARNED_ATTR
from tunelab.space import SpaceSpec
from tunelab.store import Store, StudyRecord

STATES = ("complete", "pruned", "failed", "interrupted", "running", "waiting")


@dataclass
class StudyLine:
    """One study at a glance."""

    name: str
    task: str
    metric: str
    direction: str
    best: float | None
    counts: dict[str, int]
    wall_spent: float
    wall_budget: float | None
    trials_budget: int | None
    last_activity: str

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


@dataclass
class TrialLine:
    number: int
    state: str
    value: float | None
    fold_std: float | None
    family: str
    duration: float | None
    params: dict[str, Any]
    note: str = ""
    origin: str = "search"  # where the config came from: search, prior, retry of N, from STUDY


@dataclass
class StudyDetail:
    """One study in depth: best config with its spread, top trials, budget, phases and launches."""

    line: StudyLine
    data_path: str
    target: str
    seed: int
    best_trial: TrialLine | None
    top: list[TrialLine]
    cpu_spent: float
    cpu_budget: float | None
    wall_left: float | None
    phases: list[dict[str, Any]] = field(default_factory=list)
    workers: list[dict[str, Any]] = field(default_factory=list)
    pruning: str = ""  # the rule in force: "median", or "auto: median (about 24 trials expected)"
    families: list[str] = field(default_factory=list)  # of the current phase's space

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def list_studies(store: str | None) -> list[StudyLine]:
    """Every study in the store, oldest first."""
    with Store.open(store) as st:
        return [_line(st, record, _trials(st, record)) for record in st.list_studies()]


def study_detail(name: str, store: str | None, top: int = 5) -> StudyDetail:
    """One study: best config, score ± fold spread, the top trials, the budget."""
    with Store.open(store) as st:
        record = st.get_study(name)
        trials = _trials(st, record)
        line = _line(st, record, trials)
        finished = [t for t in trials if trial_state(t) == "complete"]
        reverse = record.direction == "maximize"
        ranked = sorted(finished, key=lambda t: t.value, reverse=reverse)
        wall, cpu = st.spent(record.id)
        left_wall = None if record.budget_wall is None else max(0.0, record.budget_wall - wall)
        launches = st.launches(record.id)
        workers = [{"launch": ln.id, "kind": ln.kind, "host": ln.host, "pid": ln.pid, "state": ln.state,
                    "started": ln.started_at, "last_heartbeat": ln.heartbeat_at, "trials_done": ln.trials_done,
                    "wall_seconds": round(ln.wall_seconds, 1), "stop_reason": ln.stop_reason} for ln in launches]
        phases = [{"phase": p.number, "created": p.created_at, "reason": p.reason, "first_trial": p.first_trial}
                  for p in st.phases(record.id)]
        space = SpaceSpec.from_json(st.phases(record.id)[-1].space_json)
        return StudyDetail(line=line, data_path=record.data_path, target=record.target, seed=record.seed,
                           best_trial=_trial_line(ranked[0]) if ranked else None,
                           top=[_trial_line(t) for t in ranked[:top]], cpu_spent=cpu, cpu_budget=record.budget_cpu,
                           wall_left=left_wall, phases=phases, workers=workers, pruning=_pruning_words(record),
                           families=list(space.families))


def _pruning_words(record: StudyRecord) -> str:
    kind = str(record.settings.get("pruning", "auto"))
    if kind != "auto":
        return kind
    expected = record.settings.get("expected_trials")
    rule = choose_pruning(expected)
    return f"auto: {rule}" + (f" (about {expected:.0f} trials expected)" if expected is not None else "")


def _trials(st: Store, record: StudyRecord) -> list[Any]:
    import optuna

    try:
        study = optuna.load_study(study_name=record.name, storage=st.optuna_storage())
    except KeyError:
        return []
    return study.get_trials(deepcopy=False)


def _line(st: Store, record: StudyRecord, trials: list[Any]) -> StudyLine:
    counts = {s: 0 for s in STATES}
    for t in trials:
        counts[trial_state(t)] += 1
    done = [t for t in trials if trial_state(t) == "complete"]
    best = None
    if done:
        pick = max if record.direction == "maximize" else min
        best = float(pick(t.value for t in done))
    wall, _ = st.spent(record.id)
    launches = st.launches(record.id)
    last = max((ln.heartbeat_at for ln in launches), default=record.created_at)
    return StudyLine(record.name, record.task, record.metric, record.direction, best, counts, wall,
                     record.budget_wall, record.budget_trials, last)


def _trial_line(t: Any) -> TrialLine:
    attrs = t.user_attrs
    return TrialLine(number=t.number, state=trial_state(t), value=t.value, fold_std=attrs.get("fold_std"),
                     family=str(t.params.get("family", "")),
                     duration=t.duration.total_seconds() if t.duration else None,
                     params=_shown_params(t.params, attrs.get(ROUNDS_ATTR)),
                     note=attrs.get("error", ""), origin=trial_origin(attrs))


def trial_origin(attrs: dict[str, Any]) -> str:
    """Where a trial's config came from, so a reader can tell what the search found from what it was given."""
    if attrs.get(LEARNED_ATTR):
        return f"from {attrs[LEARNED_ATTR]}"
    if attrs.get(RETRY_ATTR) is not None:
        return f"retry of {attrs[RETRY_ATTR]}"
    return "prior" if attrs.get("tl_warm_start") else "search"


def _shown_params(params: dict[str, Any], rounds: int | None) -> dict[str, Any]:
    """A trial's sampled parameters; a boosting trial's rounds as its folds fitted them."""
    if rounds is None or "family" not in params:
        return dict(params)
    return settled_config(params, rounds)
