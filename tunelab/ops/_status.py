"""The ``status`` verb: every study in one line each, or one study in detail."""

from __future__ import annotations

from dataclasses import asdict, dataclass, field, replace
from typing import Any

from tunelab.engine import STEPS_PER_FOLD, choose_pruning
from tunelab.evaluation import describe_ladder, share_words
from tunelab.insight import choose
from tunelab.ops._ensemble import ensemble_words
from tunelab.ops._insight import DecisionOptions, decisions_for
from tunelab.ops._trials import Phases, shown_params
from tunelab.store import TRIAL_STATES, Store, StudyRecord, TrialRecord, best_of, keys, ranked

STATES = TRIAL_STATES


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
    dropped: list[str] = field(default_factory=list)  # families the current phase no longer samples
    decisions: list[dict[str, Any]] = field(default_factory=list)  # one verdict per family
    forecast: dict[str, Any] | None = None
    forecast_line: str = ""
    runners_up: str = ""  # how close the runners-up are to the best (one standard error)
    predictions_kept: dict[str, int] = field(default_factory=dict)  # trials whose held-out predictions are kept, bytes
    ensemble: str = ""  # what an ensemble of the kept trials would add, cross-fitted
    within_one_se: list[int] = field(default_factory=list)  # complete trials within one standard error of the best
    row_ladder: str = ""  # rows as a fidelity: the ladder in force and how many trials reached each rung

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def list_studies(store: str | None) -> list[StudyLine]:
    """Every study in the store, oldest first."""
    with Store.open(store) as st:
        return [_line(st, record, st.trials(record)) for record in st.list_studies()]


def study_detail(name: str, store: str | None, top: int = 5,
                 options: DecisionOptions = DecisionOptions(rank_knobs=False)) -> StudyDetail:
    """One study: best config, score ± fold spread, the top trials, the budget, the family
    decisions and the forecast."""
    with Store.open(store) as st:
        record = st.get_study(name)
        decisions = decisions_for(st, record, replace(options, rank_knobs=False))
        choice = choose(st.trials(record), record.direction)
        kept, size = st.predictions_size(record)
        ensemble = ensemble_words(st, record) if kept >= 2 else ""
        trials = st.trials(record)
        line = _line(st, record, trials)
        best = ranked(trials, record.direction)
        wall, cpu = st.spent(record.id)
        left_wall = None if record.budget_wall is None else max(0.0, record.budget_wall - wall)
        launches = st.launches(record.id)
        workers = [{"launch": ln.id, "kind": ln.kind, "host": ln.host, "pid": ln.pid, "state": ln.state,
                    "started": ln.started_at, "last_heartbeat": ln.heartbeat_at, "trials_done": ln.trials_done,
                    "wall_seconds": round(ln.wall_seconds, 1), "stop_reason": ln.stop_reason} for ln in launches]
        phases = Phases.of(st, record)
        return StudyDetail(line=line, data_path=record.data_path, target=record.target, seed=record.seed,
                           best_trial=_trial_line(best[0]) if best else None,
                           top=[_trial_line(t) for t in best[:top]], cpu_spent=cpu, cpu_budget=record.budget_cpu,
                           wall_left=left_wall, workers=workers, pruning=_pruning_words(record),
                           phases=[{"phase": p.number, "created": p.created_at, "reason": p.reason,
                                    "first_trial": p.first_trial} for p in phases.records],
                           families=list(phases.current.families), dropped=list(phases.dropped),
                           decisions=[v.to_dict() for v in decisions.families],
                           forecast=None if decisions.forecast is None else decisions.forecast.to_dict(),
                           forecast_line=decisions.forecast_line(),
                           runners_up=choice.words(record.metric) if choice else "",
                           within_one_se=[t.number for t in choice.within] if choice else [],
                           predictions_kept={"trials": kept, "bytes": size}, ensemble=ensemble,
                           row_ladder=_ladder_words(record, trials))


def _ladder_words(record: StudyRecord, trials: list[TrialRecord]) -> str:
    """The row ladder in force, and how many trials were scored on each of its rungs (empty without one)."""
    shares = list(record.settings.get(keys.ROW_SHARES) or ())
    if not shares:
        return ""
    reached = [sum(1 for t in trials if t.state == "complete" or (t.step or 0) >= step)
               for step in range(1, len(shares) + 1)]
    full = sum(1 for t in trials if t.state == "complete" or (t.step or 0) >= STEPS_PER_FOLD)
    rungs = ", ".join(f"{n} on {share_words(s)}" for n, s in zip(reached, shares, strict=True))
    return f"{describe_ladder(shares)}; trials scored {rungs}, {full} on all rows"


def _pruning_words(record: StudyRecord) -> str:
    kind = str(record.settings.get("pruning", "auto"))
    if kind != "auto":
        return kind
    expected = record.settings.get("expected_trials")
    rule = "halving" if record.settings.get(keys.ROW_SHARES) else choose_pruning(expected)
    return f"auto: {rule}" + (f" (about {expected:.0f} trials expected)" if expected is not None else "")


def _line(st: Store, record: StudyRecord, trials: list[TrialRecord]) -> StudyLine:
    counts: dict[str, int] = {s: 0 for s in STATES}
    for t in trials:
        counts[t.state] += 1
    best = best_of(trials, record.direction)
    wall, _ = st.spent(record.id)
    launches = st.launches(record.id)
    last = max((ln.heartbeat_at for ln in launches), default=record.created_at)
    return StudyLine(record.name, record.task, record.metric, record.direction, None if best is None else best.value,
                     counts, wall, record.budget_wall, record.budget_trials, last)


def _trial_line(t: TrialRecord) -> TrialLine:
    return TrialLine(number=t.number, state=t.state, value=t.value, fold_std=t.fold_std, family=t.family,
                     duration=t.duration, params=shown_params(t), note=t.error, origin=t.origin)
