"""The verbs that search: ``run`` starts a study, ``resume`` continues one, ``worker`` joins one."""

from __future__ import annotations

import functools
import os
import re
import signal
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from tunelab.data import Dataset, dataset_fingerprint, file_sha256, load_dataset
from tunelab.engine import (
    Budget,
    Clock,
    CrossValidationObjective,
    ForkRunner,
    InProcessRunner,
    Progress,
    SearchSettings,
    SearchStudy,
    SearchSummary,
    SystemClock,
    fold_count,
    make_pruner,
    make_sampler,
    open_search_study,
    resolve_metric,
    search,
    settled_config,
)
from tunelab.errors import InputError, StudyStateError
from tunelab.facts import similarity_vector
from tunelab.insight import Decisions
from tunelab.models import FAMILIES, preload
from tunelab.ops._insight import DecisionOptions, decisions_for
from tunelab.ops._jobs import Jobs, parse_jobs, resolve_jobs
from tunelab.ops._learn import LEARNED_ATTR, SIMILARITY_KEY, learn_from, nearest_studies
from tunelab.ops._portfolio import portfolio_starts
from tunelab.ops._profile import profile_facts, profile_metafeatures
from tunelab.ops._signals import stop_on_signals
from tunelab.ops._workers import WorkerGroup
from tunelab.space import SpaceSpec, build_space
from tunelab.store import Store, StudyRecord, keys

THREADS_PER_TRIAL = 1
ROWS_FIDELITY_CHOICES = ("auto", "off")
# The importance computation's allowance in run's first look; with the rest it stays within 5 s.
FIRST_LOOK_SECONDS = 2.0


@dataclass(frozen=True)
class RunRequest:
    """Everything ``run`` needs, validated before the store is touched."""

    data: Path
    target: str
    budget: Budget
    store: str | None = None
    study: str | None = None
    task: str | None = None
    metric: str | None = None
    seed: int = 0
    space_file: Path | None = None
    pruning: str = "auto"
    jobs: str | int | None = None  # worker processes: a number, auto, or None for TUNELAB_JOBS else auto
    learn_from: tuple[str, ...] = ()  # earlier studies in the same store whose best configs run first
    learn_nearest: int = 0  # also learn from this many earlier studies whose data looks most alike
    portfolio: bool = True  # queue the shipped portfolio's configurations (after learned ones, before priors)
    portfolio_file: Path | None = None  # a rebuilt portfolio to use instead of the shipped one
    rows_fidelity: str = "auto"  # auto: trials climb a row ladder on big tables (see tunelab.evaluation); off


@dataclass
class StudyStart:
    """What the user should know as a launch begins."""

    study: str
    store: str
    rows: int
    columns: int
    task: str
    metric: str
    direction: str
    budget: Budget
    spent_wall: float
    notes: list[str] = field(default_factory=list)
    resumed: bool = False
    verb: str = "study"
    workers: int = 1
    workers_why: str = ""


@dataclass
class RunResult:
    """A finished launch: the study, how it ended, and its best trial."""

    study: str
    store: str
    metric: str
    direction: str
    summary: SearchSummary
    best_config: dict[str, Any] = field(default_factory=dict)
    decisions: Decisions | None = None  # the first look: what is already decided, and the forecast


Announce = Callable[[StudyStart], None]
OnProgress = Callable[[Progress], None]


def run_study(request: RunRequest, *, clock: Clock | None = None, announce: Announce | None = None,
              on_progress: OnProgress | None = None, runner_factory: Callable[[Any], Any] = ForkRunner,
              settings: SearchSettings | None = None, look: DecisionOptions | None = None) -> RunResult:
    """Create a study for a data file and search it within its budget.

    With ``look``, the result carries the first look at the decisions (``FIRST_LOOK_SECONDS`` of
    work after the launch closes, not charged to the budget).
    """
    parse_jobs(request.jobs)  # a bad --jobs is refused before any work
    if request.rows_fidelity not in ROWS_FIDELITY_CHOICES:
        raise InputError(f"unknown --rows-fidelity '{request.rows_fidelity}'",
                         f"use one of: {', '.join(ROWS_FIDELITY_CHOICES)}")
    if request.study is not None and not request.study.strip():
        raise InputError("--study is empty",
                         "give the study a name, or leave out --study to name it after the data file")
    clock = clock or SystemClock()
    dataset = load_dataset(request.data, request.target, request.task)
    metric = resolve_metric(request.metric, dataset.task)
    # The space comes from the data's meta-features (``tunelab profile`` shows it, with reasons);
    # profiling runs inside the launch, so its seconds are charged to the budget like any other.
    similarity: dict[str, float] = {}
    workers = _workers(request.jobs)
    # The row ladder needs the pruner that climbs it: --pruning off means every trial on all rows.
    rows_mode = "off" if request.pruning == "off" else request.rows_fidelity
    if request.space_file:
        space = _load_space(request.space_file)
        if rows_mode == "off":
            space = replace(space, row_shares=())
        if request.learn_nearest:  # only then is it worth the seconds of meta-features
            similarity = similarity_vector(profile_metafeatures(dataset, seed=request.seed))
    else:
        facts = profile_facts(dataset, metric=metric.name, seed=request.seed)
        space = build_space(facts, budget_seconds=request.budget.wall_seconds, workers=workers.count,
                            rows_fidelity=rows_mode)
        similarity = similarity_vector(facts.meta)
    _check_space_fits(space, dataset)
    pruner_kind = request.pruning
    expected = _expected_trials(space, request.budget, workers.count)
    make_pruner(pruner_kind, max_steps=5)  # validate before the store is touched
    with Store.open(request.store, create=True) as store:
        name = request.study or _unique_name(request.data.stem, store.study_names())
        if request.study and request.study in store.study_names():
            raise InputError(f"study '{request.study}' already exists in {store.location.display()}",
                             f"continue it with `tunelab resume {request.study}`, or pick another --study name")
        nearest = nearest_studies(store, similarity, dataset.task, request.learn_nearest) \
            if request.learn_nearest else None
        learned = learn_from(store, list(request.learn_from), space, dataset.task, nearest)
        # Warm starts take at most a third of the trials the budget is expected to finish.
        room = None if expected is None else max(2, int(expected // 3)) - len(learned.configs)
        shipped = portfolio_starts(space, dataset, use=request.portfolio, path=request.portfolio_file,
                                   limit=None if room is None else max(0, room))
        record = store.create_study(
            name=name, now=clock.now(), data_path=str(request.data.resolve()),
            data_sha256=dataset.sha256, fingerprint=dataset.fingerprint, target=request.target,
            task=dataset.task, metric=metric.name, direction=metric.direction, seed=request.seed,
            budget_wall=request.budget.wall_seconds, budget_cpu=request.budget.cpu_seconds,
            budget_trials=request.budget.trials,
            settings={"pruning": pruner_kind, "jobs": workers.count, "expected_trials": expected,
                      "n_folds": fold_count(dataset.n_rows, dataset.task, dataset.y),
                      **({keys.ROW_SHARES: list(space.row_shares)} if space.row_shares else {}),
                      **({SIMILARITY_KEY: similarity} if similarity else {})},
            space_json=space.to_json(), space_reason=space.family_reason or "initial search space",
        )
        with store.guard("create the study", name):
            study = open_search_study(store, record, launch_number=0, create=True)
            for source, config in learned.configs:
                study.queue(config, **{keys.WARM_START: True, LEARNED_ATTR: source})
            for member, config in shipped.configs:
                study.queue(config, **{keys.WARM_START: "portfolio", keys.PORTFOLIO_MEMBER: member})
            for start in space.warm_starts:
                study.queue(start, **{keys.WARM_START: True})
        with store.guard("run the study", name):
            return _launch(store, record, study, dataset, space, request.budget, dataset_path=request.data.resolve(),
                           clock=clock, announce=announce,
                           on_progress=on_progress, runner_factory=runner_factory, settings=settings, resumed=False,
                           jobs=workers, notes=[*dataset.notes, *learned.notes, *shipped.notes], look=look)


def resume_study(name: str, *, store: str | None = None, extend_seconds: float = 0.0, extend_trials: int = 0,
                 data: Path | None = None, accept_changed_data: bool = False, clock: Clock | None = None,
                 announce: Announce | None = None, on_progress: OnProgress | None = None,
                 runner_factory: Callable[[Any], Any] = ForkRunner, settings: SearchSettings | None = None,
                 jobs: str | int | None = None, kind: str = "resume",
                 look: DecisionOptions | None = None, loaded: Dataset | None = None) -> RunResult:
    """Continue a study with what is left of its budget (plus any extension).

    ``loaded`` is the study's data already read and checked by the launch this worker was forked
    from (see ``WorkerGroup``): it is not read or hashed again.

    ``kind="worker"`` joins a study other processes are working on (``tunelab worker``): the same
    path, recorded as a worker launch.
    """
    clock = clock or SystemClock()
    with Store.open(store) as st:
        record = st.get_study(name)
        path = Path(data) if data else Path(record.data_path)
        if not path.exists():
            raise StudyStateError(f"the data file of study '{name}' is gone: {path}",
                                  "point to its new place with --data PATH")
        if loaded is not None:  # forked from a launch that has just read and checked it
            dataset = loaded
        else:
            try:
                dataset = load_dataset(path, record.target, record.task)
            except InputError:
                if file_sha256(path) != record.data_sha256 and not accept_changed_data:
                    raise _changed(path, name) from None
                raise
        sha = dataset.sha256
        if sha != record.data_sha256 and not accept_changed_data:
            raise _changed(path, name)
        updates: dict[str, Any] = {}
        if kind != "worker" and (sha != record.data_sha256 or str(path.resolve()) != record.data_path):
            updates.update(data_sha256=sha, data_path=str(path.resolve()),
                           fingerprint=dataset_fingerprint(sha, record.target, record.task))
        budget = Budget(record.budget_wall, record.budget_cpu, record.budget_trials)
        if extend_seconds or extend_trials:
            budget = budget.extended(extend_seconds, extend_trials)
            updates.update(budget_wall=budget.wall_seconds, budget_trials=budget.trials)
        if updates:
            st.update_study(record.id, **updates)
            record = st.get_study(name)
        phases = st.phases(record.id)
        space = SpaceSpec.from_json(phases[-1].space_json)
        launches = len(st.launches(record.id))
        with st.guard("open the study", name):
            study = open_search_study(st, record, launch_number=launches, create=False,
                                      salt=os.getpid() if kind == "worker" else 0, dropped=space.dropped)
            if study.fresh:  # its creation was cut short before the warm starts were queued
                for config in space.warm_starts:
                    study.queue(config, **{keys.WARM_START: True})
        settings = settings or SearchSettings()
        settings.phase = phases[-1].number
        settings.kind = kind
        with st.guard("run the study", name):
            return _launch(st, record, study, dataset, space, budget, dataset_path=path.resolve(), clock=clock,
                           announce=announce,
                           on_progress=on_progress, runner_factory=runner_factory, settings=settings, resumed=True,
                           jobs=_workers(jobs), notes=dataset.notes, look=look)


def _changed(path: Path, name: str) -> StudyStateError:
    return StudyStateError(f"data file {path} changed since study '{name}' started (sha256 differs)",
                           "restore the original file, start a new study, or pass --accept-changed-data")


def _launch(store: Store, record: StudyRecord, study: SearchStudy, dataset: Dataset, space: SpaceSpec,
            budget: Budget, *, dataset_path: Path,
            clock: Clock, announce: Announce | None, on_progress: OnProgress | None,
            runner_factory: Callable[[Any], Any], settings: SearchSettings | None, resumed: bool, jobs: Jobs,
            notes: list[str], look: DecisionOptions | None = None) -> RunResult:
    metric = resolve_metric(record.metric, record.task)
    spent_wall, _ = store.spent(record.id)
    if announce is not None:
        announce(StudyStart(record.name, store.location.display(), dataset.n_rows, dataset.X.shape[1],
                            record.task, record.metric, record.direction, budget, spent_wall, notes, resumed,
                            {"run": "study", "resume": "resuming", "worker": "joining"}.get(
                                settings.kind if settings else "run", "study"), jobs.count, jobs.why))
    # One thread per trial: OpenMP pools spin-wait, and on a shared or busy machine two-thread
    # fits measured 10-17x slower than one-thread fits here. Parallelism comes from --jobs.
    threads = THREADS_PER_TRIAL
    objective = CrossValidationObjective(dataset, metric, seed=record.seed, n_threads=threads,
                                         n_folds=record.settings.get("n_folds"),
                                         row_shares=tuple(record.settings.get(keys.ROW_SHARES) or ()))
    preload(space.kept_families or ["hist_gb"], record.task)
    objective.warm_up(_warm_up_configs(space))
    runner = runner_factory(objective)
    with stop_on_signals():
        if jobs.count > 1:
            work = functools.partial(_forked_worker, record.name, store.location.url, dataset, dataset_path)
            with WorkerGroup(jobs.count - 1, work) as group:
                summary = search(store, record, study, space, runner, budget, clock=clock, settings=settings,
                                 on_progress=on_progress)
                if summary.exit_code:
                    group.signal_all(signal.SIGTERM)
                group.wait(timeout=_worker_grace(budget))
            _add_worker_counts(store, record, summary, group.pids)
        else:
            summary = search(store, record, study, space, runner, budget, clock=clock, settings=settings,
                             on_progress=on_progress)
    if summary.lost:
        raise StudyStateError(f"this {settings.kind if settings else 'run'} of study '{record.name}' was declared dead "
                              f"after its heartbeat stopped (the process or machine was frozen); another worker "
                              f"re-queued its trial, and nothing it ran after that was recorded",
                              f"if the study has budget left, join it again: tunelab worker {record.name}")
    return RunResult(record.name, store.location.display(), record.metric, record.direction, summary,
                     _best_config(store, record, summary, space), _first_look(store, record, summary, look))


def _forked_worker(name: str, store_url: str, dataset: Dataset, path: Path) -> int:
    """A worker forked from a launch: it joins the study as ``tunelab worker`` would, on the data already loaded."""
    result = resume_study(name, store=store_url, data=path, kind="worker", jobs=1, loaded=dataset)
    return result.summary.exit_code


def _first_look(store: Store, record: StudyRecord, summary: SearchSummary,
                look: DecisionOptions | None) -> Decisions | None:
    """The decisions already firm and the forecast, after the launch closed (not charged to the budget)."""
    if look is None or summary.best_trial is None:
        return None
    return decisions_for(store, record, replace(look, seconds=FIRST_LOOK_SECONDS))


def _best_config(store: Store, record: StudyRecord, summary: SearchSummary, space: SpaceSpec) -> dict[str, Any]:
    """The best trial's sampled parameters, and the boosting rounds its cross-validation used."""
    trial = next((t for t in store.trials(record) if t.number == summary.best_trial), None)
    if trial is None:
        return {}
    config = space.complete(trial.params)
    settled = settled_config(config, trial.rounds)
    return {k: v for k, v in settled.items() if k in trial.params or v != config.get(k)}


def _warm_up_configs(space: SpaceSpec) -> list[dict[str, Any]]:
    """One config per family of the space, for the objective's warm-up: its warm start, or the family's defaults."""
    configs: dict[str, dict[str, Any]] = {}
    for warm in space.warm_starts:
        configs.setdefault(str(warm.get("family", "hist_gb")), space.complete(warm))
    for family in space.kept_families or ["hist_gb"]:
        configs.setdefault(family, space.complete({"family": family}))
    return list(configs.values())


def _workers(requested: str | int | None) -> Jobs:
    """The worker count for ``--jobs``, with the data already loaded in this process (its size caps ``auto``)."""
    import psutil

    return resolve_jobs(parse_jobs(requested), process_bytes=psutil.Process().memory_info().rss)


def _expected_trials(space: SpaceSpec, budget: Budget, jobs: int) -> float | None:
    """Trials the whole budget should finish, from the builder's cost estimate; picks the ``auto`` pruning rule."""
    by_time = None
    if budget.wall_seconds is not None and space.trial_seconds:
        by_time = round(jobs * budget.wall_seconds / space.trial_seconds, 1)
    if budget.trials is None:
        return by_time
    return float(budget.trials) if by_time is None else min(float(budget.trials), by_time)


def _worker_grace(budget: Budget) -> float:
    """How long the parent waits for workers after its own loop ends: their last trial plus margin."""
    return 60.0 if budget.wall_seconds is None else max(10.0, 0.05 * budget.wall_seconds + 10.0)


def _add_worker_counts(store: Store, record: StudyRecord, summary: SearchSummary, pids: list[int]) -> None:
    """Fold the worker processes' trials into the launch summary, so the user sees the whole run."""
    ids = {ln.id for ln in store.launches(record.id) if ln.pid in pids and ln.kind == "worker"}
    for trial in store.trials(record):
        if trial.launch in ids and trial.state in summary.counts:
            summary.counts[trial.state] += 1
    best = store.best_trial(record)
    if best is not None:
        summary.best_value, summary.best_trial = best.value, best.number


def create_objective_study(name: str, space: SpaceSpec, budget: Budget, *, store: str | None = None,
                           direction: str = "maximize", metric: str = "value", seed: int = 0, sampler: str = "tpe",
                           pruning: str = "off", clock: Clock | None = None) -> StudyRecord:
    """Record a study of an arbitrary objective (no data file): same budget, ledger and trial records."""
    clock = clock or SystemClock()
    make_sampler(sampler, seed)
    with Store.open(store, create=True) as st:
        if name in st.study_names():
            raise InputError(f"study '{name}' already exists", "pick another name")
        record = st.create_study(
            name=name, now=clock.now(), data_path="(objective)", data_sha256="", fingerprint="", target="",
            task="objective", metric=metric, direction=direction, seed=seed, budget_wall=budget.wall_seconds,
            budget_cpu=budget.cpu_seconds, budget_trials=budget.trials,
            settings={"pruning": pruning, "sampler": sampler, "n_folds": 1}, space_json=space.to_json(),
            space_reason="objective study")
        open_search_study(st, record, launch_number=0, create=True)
        return record


def join_objective_study(name: str, objective: Any, *, store: str | None = None, clock: Clock | None = None,
                         runner_factory: Callable[[Any], Any] | None = None, settings: SearchSettings | None = None,
                         on_progress: OnProgress | None = None, kind: str = "run") -> RunResult:
    """Work on an objective study until its budget is spent (several processes may join at once)."""
    clock = clock or SystemClock()
    with Store.open(store) as st:
        record = st.get_study(name)
        phase = st.phases(record.id)[-1]
        space = SpaceSpec.from_json(phase.space_json)
        budget = Budget(record.budget_wall, record.budget_cpu, record.budget_trials)
        study = open_search_study(st, record, launch_number=len(st.launches(record.id)),
                                  create=False, salt=os.getpid() if kind == "worker" else 0, dropped=space.dropped)
        settings = settings or SearchSettings()
        settings.phase = phase.number
        settings.kind = kind
        runner = (runner_factory or InProcessRunner)(objective)
        with stop_on_signals():
            summary = search(st, record, study, space, runner, budget, clock=clock, settings=settings,
                             on_progress=on_progress)
        return RunResult(record.name, st.location.display(), record.metric, record.direction, summary,
                         _best_config(st, record, summary, space))


def run_objective_study(name: str, objective: Any, space: SpaceSpec, budget: Budget, *, store: str | None = None,
                        direction: str = "maximize", metric: str = "value", seed: int = 0, sampler: str = "tpe",
                        pruning: str = "off", clock: Clock | None = None,
                        runner_factory: Callable[[Any], Any] | None = None,
                        settings: SearchSettings | None = None, on_progress: OnProgress | None = None) -> RunResult:
    """Search any objective ``objective(config, report) -> TrialResult`` with the full engine and store.

    Used for test functions with known answers and for measuring the engine itself.
    """
    clock = clock or SystemClock()
    create_objective_study(name, space, budget, store=store, direction=direction, metric=metric, seed=seed,
                           sampler=sampler, pruning=pruning, clock=clock)
    return join_objective_study(name, objective, store=store, clock=clock, runner_factory=runner_factory,
                                settings=settings, on_progress=on_progress)


def _unique_name(stem: str, taken: set[str]) -> str:
    base = re.sub(r"[^A-Za-z0-9_.-]+", "-", stem).strip("-") or "study"
    if base not in taken:
        return base
    n = 2
    while f"{base}-{n}" in taken:
        n += 1
    return f"{base}-{n}"


def _load_space(path: Path) -> SpaceSpec:
    if not path.exists():
        raise InputError(f"search space file not found: {path}", "write one with `tunelab profile --write-space FILE`")
    return SpaceSpec.from_json(path.read_text(encoding="utf-8"))


def _check_space_fits(space: SpaceSpec, dataset: Dataset) -> None:
    unknown = [f for f in space.families if f not in FAMILIES]
    if unknown:
        raise InputError(f"search space names unknown families: {', '.join(unknown)}",
                         f"families are: {', '.join(FAMILIES)}")
    _check_boosting_loss(space, dataset)


def _check_boosting_loss(space: SpaceSpec, dataset: Dataset) -> None:
    """A log-link boosting loss needs a target above zero (gamma) or not below it (poisson)."""
    boosting = space.families.get("hist_gb")
    loss = boosting.params.get("loss") if boosting is not None else None
    if dataset.task != "regression" or loss is None or not len(dataset.y):
        return
    offered = set(loss.choices or ()) | {loss.value}
    low = float(min(dataset.y))
    needs = [name for name, ok in (("gamma", low > 0), ("poisson", low >= 0)) if name in offered and not ok]
    if needs:
        above = "above zero" if "gamma" in needs else "of zero or more"
        raise InputError(f"search space offers hist_gb.loss {'/'.join(needs)}, which needs a target {above}, "
                         f"but '{dataset.target}' goes down to {low:g}",
                         "drop that choice from the space file, or let tunelab build the space")
