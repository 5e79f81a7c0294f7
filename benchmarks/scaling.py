"""Parallel workers on one study: trials per minute at 1, 2, 4 and 8 processes, SQLite beside PostgreSQL.

Run from the repository root (5-9 minutes with the defaults, most of it starting worker processes on a
busy machine; ``--real`` about 3 minutes; ``--file-backends`` about 6)::

    python benchmarks/scaling.py                            # sleep objective, 20 s per point
    python benchmarks/scaling.py --budget 30s --jobs 1,2,4,8 --stores sqlite,postgres
    python benchmarks/scaling.py --real                     # tunelab run --jobs 1 vs --jobs 2, 60 s each
    python benchmarks/scaling.py --file-backends            # plain optuna: SQLite WAL vs journal file

Sleep mode (the default) measures what the store and the sampler cost a worker, not what the
machine can compute: the objective sleeps ``--sleep`` seconds (0.25 by default) and returns a
cheap function of the config, so eight workers on two cores are limited only by the per-trial
work done outside the objective — asking TPE (constant liar) for a config, the store's writes,
heartbeats, the wall ledger.  For each store kind and each worker count, a fresh store (a new
SQLite file, or a new PostgreSQL database created and dropped around the point) gets one study
with the same wall budget; N processes started with the "spawn" context import everything,
wait at a barrier, then each calls ``tunelab.ops.join_objective_study`` at once.

*Trials per minute* counts only trials that ended complete inside the study's box: from the
first launch's start to that plus the budget (the ledger's union of launch intervals means the
box is one budget long however many workers join).  *Ratio* is against one worker on the same
store kind.  *Overhead ms/trial* is ``N × budget / complete − sleep``: the time a worker spends
per trial outside the objective.  The detail lines add the CPU the workers used per trial (the
database server's not counted; overall, and in steady state between a worker's first and last
trial), which tells CPU-bound overhead from waiting on locks.  *Same config* counts trials whose
parameters repeat another trial's exactly (workers sampling in lockstep).  *Errors* adds up
exceptions out of a worker, heartbeat writes that raised (the heartbeat thread retries them
silently, so the benchmark wraps ``Store.beat`` in its worker processes to see them), warnings
logged by optuna or SQLAlchemy, failed or interrupted trials, and non-zero exit codes; there
should be none.

The targets this was written to check are the project's own (no outside source): at least 7x at
8 workers on PostgreSQL, at least 3.5x at 4 workers on SQLite.

``--real`` runs ``tunelab run DATA --target COL --budget B --jobs N --store PATH --json -q`` on
an open data set from ``benchmarks/datasets.py`` (breast_cancer by default: scikit-learn's
``sklearn.datasets.load_breast_cancer``) with ``--jobs 1`` and then ``--jobs 2`` at the same
budget, and prints trials per minute (complete, and complete + pruned) and the ratio.  Which
configs the sampler picks differs between the two runs (a forest costs many times a linear
model), so a single pair's trial counts are noisy; the CPU seconds the trials' fits used inside
the box (recorded per trial by the engine) is printed beside them as a measure of work done, and
``--repeats`` averages pairs run in alternating order.  Target (the project's own): at least
1.7x on a 2-core machine.  Fits use the CPU, so other people's load on a shared machine lowers
it: the load average (``uptime``) is printed before and after.

``--file-backends`` decides which file backend several processes should share, by measurement:
plain optuna (no tunelab: no ledger, no heartbeat) runs the sleep objective above on two
backends side by side, each a fresh file per point: ``RDBStorage("sqlite:///FILE")`` with a
30 s busy timeout (the sqlite3 driver's ``timeout``) on a file switched to WAL once
(``PRAGMA journal_mode=WAL``) before the workers start, and ``JournalStorage(JournalFileBackend(FILE))``
(its default symlink lock; every append is fsynced).  For each worker count the parent creates
the study; N "spawn" processes each open their own storage, load the study with
``tunelab.ops._run.make_sampler("tpe", seed + worker index)``, wait at a barrier, then call
``study.optimize(objective, timeout=budget)``.  The box runs from the first worker's release to
that plus the budget; trials per minute and the ratio to one worker are counted as above, read
back through a fresh storage object.  Errors are exceptions out of a worker, warnings logged by
optuna or SQLAlchemy, trials not complete, and non-zero exit codes; "locked" counts those that
say "database is locked".  tunelab's own SQLite path (the sleep mode's point above, same budget
and worker counts) runs as a third column for comparison: what the ledger and heartbeats add on
top.  The verdict line names the backend with more trials per minute at the largest worker count.

Raw results go to ``benchmarks/results/scaling-*.json`` (not committed).  One run on a shared
machine is one sample.
"""

from __future__ import annotations

import argparse
import json
import logging
import multiprocessing as mp
import os
import subprocess
import sys
import tempfile
import time
import traceback
from collections import Counter
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

RESULTS_DIR = Path(__file__).resolve().parent / "results"
PG_ADMIN_URL = os.environ.get("TUNELAB_TEST_POSTGRES", "postgresql://127.0.0.1:5432/test")
# SQLAlchemy 2.1 reads a bare postgresql:// as psycopg 3; tunelab's stores use psycopg2, so the admin engine does too.
PG_DRIVER_URL = PG_ADMIN_URL.replace("postgresql://", "postgresql+psycopg2://", 1)
STORE_KINDS = ("sqlite", "postgres")
STORE_TITLES = {"sqlite": "SQLite", "postgres": "PostgreSQL"}
DEFAULT_JOBS = (1, 2, 4, 8)
STUDY = "scaling"
# Seconds a worker may take past the box before it is counted as hung: its last trial plus
# start-up and shutdown on a loaded machine (common practice, no source).
GRACE_SECONDS = 60.0
BARRIER_TIMEOUT_SECONDS = 180.0
ERROR_WORDS = ("locked", "deadlock", "could not serialize", "error", "exception", "traceback")


# --------------------------------------------------------------------------- sleep mode


class SleepObjective:
    """Sleep, then return the distance to a fixed point: costs wall time, not CPU.

    It also notes this process's CPU time at each call, so the CPU a worker spends per trial
    outside the objective can be read in steady state (start-up and joining left out).
    """

    def __init__(self, seconds: float = 0.25) -> None:
        self.seconds = seconds
        self.calls = 0
        self.first_cpu = self.last_cpu = 0.0

    def __call__(self, config: Mapping[str, Any], report: Any) -> Any:
        from tunelab.engine import TrialResult

        now = time.process_time()
        if self.calls == 0:
            self.first_cpu = now
        self.last_cpu, self.calls = now, self.calls + 1
        time.sleep(self.seconds)
        value = (config["x"] - 0.3) ** 2 + (config["y"] - 0.7) ** 2 + 0.1 * (config["kind"] != "b")
        return TrialResult(value=float(value))

    def steady_cpu(self) -> tuple[float, int]:
        """CPU seconds between the first and the last call, and the number of trial cycles between them."""
        return self.last_cpu - self.first_cpu, max(0, self.calls - 1)


def benchmark_space() -> Any:
    """Two floats and a categorical: small, so TPE's own arithmetic stays cheap."""
    from tunelab.space import ParamSpec, SpaceSpec

    return SpaceSpec(params={
        "x": ParamSpec("float", low=0.0, high=1.0),
        "y": ParamSpec("float", low=0.0, high=1.0),
        "kind": ParamSpec("categorical", choices=("a", "b", "c")),
    })


class _ErrorLog(logging.Handler):
    """Keeps warnings and errors logged by optuna and SQLAlchemy inside a worker process."""

    def __init__(self) -> None:
        super().__init__(level=logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        self.messages.append(f"log {record.name}: {record.getMessage().splitlines()[0][:300]}")


def _worker_main(store: str, study: str, sleep_seconds: float, barrier: Any, results: Any) -> None:
    """One worker process: import everything, wait for the others, then join the study."""
    errors: list[str] = []
    summary: dict[str, Any] = {"pid": os.getpid()}
    try:
        import optuna  # noqa: F401  (imported before the barrier: start-up is not what is measured)
        import sqlalchemy  # noqa: F401

        from tunelab.ops import join_objective_study
        from tunelab.store import Store

        handler = _ErrorLog()
        for name in ("optuna", "sqlalchemy", "tunelab"):
            logging.getLogger(name).addHandler(handler)
        original_beat = Store.beat

        def counted_beat(self: Any, *args: Any, **kwargs: Any) -> None:
            try:
                original_beat(self, *args, **kwargs)
            except Exception as exc:
                errors.append(f"heartbeat: {type(exc).__name__}: {str(exc).splitlines()[0][:300]}")
                raise

        Store.beat = counted_beat  # type: ignore[method-assign]  # this process only
        objective = SleepObjective(sleep_seconds)
        barrier.wait(timeout=BARRIER_TIMEOUT_SECONDS)
        cpu0 = time.process_time()
        result = join_objective_study(study, objective, store=store, kind="worker")
        s = result.summary
        summary.update(counts=s.counts, stop_reason=s.stop_reason, elapsed=s.elapsed, launch_id=s.launch_id,
                       cpu_seconds=time.process_time() - cpu0, steady_cpu=objective.steady_cpu())
        errors.extend(handler.messages)
    except BaseException as exc:  # every failure goes back to the parent as text
        errors.extend(_failure_lines(exc))
    summary["errors"] = errors
    results.put(summary)


@contextmanager
def fresh_store(kind: str, workdir: Path, tag: str) -> Iterator[str]:
    """A new, empty store: a SQLite file in ``workdir``, or a PostgreSQL database dropped afterwards."""
    if kind == "sqlite":
        yield str(workdir / f"{tag}.db")
        return
    from benchmarks._faults import pg_database

    with pg_database() as url:
        yield url


def run_point(kind: str, jobs: int, budget: float, sleep_seconds: float, seed: int, workdir: Path) -> dict[str, Any]:
    """One store kind, one worker count: a fresh study, ``jobs`` processes, then the store read back."""
    from tunelab.engine import Budget
    from tunelab.ops import create_objective_study

    ctx = mp.get_context("spawn")
    load_before = os.getloadavg()[0]
    with fresh_store(kind, workdir, f"{kind}-{jobs}") as store:
        create_objective_study(STUDY, benchmark_space(), Budget(wall_seconds=budget), store=store,
                               direction="minimize", seed=seed, sampler="tpe", pruning="off")
        summaries, errors, released, walls = _release_workers(
            ctx, jobs, budget, lambda i, barrier, results: (_worker_main, (store, STUDY, sleep_seconds, barrier,
                                                                           results)))
        measured = measure_store(store, STUDY, budget)
    errors.extend(measured.pop("trial_errors"))
    complete = measured["complete_in_box"]
    worker_trials = [sum(s.get("counts", {}).values()) for s in summaries]
    cpu = sum(s.get("cpu_seconds", 0.0) for s in summaries)
    steady_cpu = sum(s.get("steady_cpu", (0.0, 0))[0] for s in summaries)
    steady_cycles = sum(s.get("steady_cpu", (0.0, 0))[1] for s in summaries)
    return {
        "store": kind, "workers": jobs, "budget_seconds": budget, "sleep_seconds": sleep_seconds,
        **measured,
        "per_minute": 60.0 * complete / budget,
        "overhead_ms": 1000.0 * (jobs * budget / complete - sleep_seconds) if complete else None,
        "worker_trials": sorted(worker_trials),
        # CPU the worker processes used (the database server's not included): per trial, and in cores.
        "cpu_ms_per_trial": 1000.0 * cpu / sum(worker_trials) if sum(worker_trials) else None,
        # ... and in steady state: between a worker's first and last trial, so joining is left out.
        "steady_cpu_ms_per_trial": 1000.0 * steady_cpu / steady_cycles if steady_cycles else None,
        "cpu_cores": cpu / budget,
        "stop_reasons": sorted({s.get("stop_reason", "") for s in summaries}),
        "seconds_to_last_exit": round(walls, 2),
        "errors": len(errors), "locked_errors": sum("locked" in e.lower() for e in errors),
        "error_texts": errors[:20],
        "load_before": load_before, "load_after": os.getloadavg()[0],
    }


def _failure_lines(exc: BaseException) -> list[str]:
    """A worker's exception as two lines of text for the parent: what was raised, and where."""
    first = str(exc).splitlines()[0][:300] if str(exc) else ""
    return [f"worker raised {type(exc).__name__}: {first}", traceback.format_exc(limit=3)[-1500:]]


def _release_workers(ctx: Any, jobs: int, budget: float,
                     make: Callable[[int, Any, Any], tuple[Callable[..., None], tuple[Any, ...]]],
                     ) -> tuple[list[dict[str, Any]], list[str], float, float]:
    """Start ``jobs`` processes (``make(i, barrier, results)`` gives target and args), release them at once.

    Returns their summaries, the errors seen, the release time and the seconds until all reported.
    """
    barrier = ctx.Barrier(jobs + 1)
    results = ctx.Queue()
    procs = []
    for i in range(jobs):
        target, args = make(i, barrier, results)
        procs.append(ctx.Process(target=target, args=args))
    for proc in procs:
        proc.start()
    errors: list[str] = []
    try:
        barrier.wait(timeout=BARRIER_TIMEOUT_SECONDS)
    except Exception as exc:
        errors.append(f"workers never all started: {type(exc).__name__}")
    released = time.time()
    summaries = _collect(procs, results, released + budget + GRACE_SECONDS, errors)
    walls = time.time() - released
    for summary in summaries:
        errors.extend(summary["errors"])
    return summaries, errors, released, walls


def _collect(procs: list[Any], results: Any, deadline: float, errors: list[str]) -> list[dict[str, Any]]:
    """Wait for every worker's summary and exit; a worker still running past ``deadline`` is an error."""
    import queue

    summaries: list[dict[str, Any]] = []
    while len(summaries) < len(procs) and time.time() < deadline:
        try:
            summaries.append(results.get(timeout=1.0))
        except queue.Empty:
            if not any(p.is_alive() for p in procs) and results.empty():
                break
    for proc in procs:
        proc.join(timeout=max(1.0, deadline - time.time()))
        if proc.is_alive():
            errors.append(f"worker {proc.pid} still running {GRACE_SECONDS:.0f} s after the budget; terminated")
            proc.terminate()
            proc.join(timeout=10)
        elif proc.exitcode != 0:
            errors.append(f"worker {proc.pid} exit code {proc.exitcode}")
    if len(summaries) < len(procs):
        errors.append(f"{len(procs) - len(summaries)} worker(s) sent no summary")
    return summaries


def measure_store(store: str, study: str, budget: float) -> dict[str, Any]:
    """Trials read back from the store, timed against the study's box (first launch start + budget)."""
    import optuna
    from optuna.trial import TrialState

    from tunelab.engine import trial_state
    from tunelab.store import Store

    with Store.open(store) as st:
        record = st.get_study(study)
        launches = st.launches(record.id)
        spent_wall, _ = st.spent(record.id)
        trials = optuna.load_study(study_name=study, storage=st.optuna_storage()).get_trials(deepcopy=False)
    box_start = min((ln.started_epoch for ln in launches), default=time.time())
    box_end = box_start + budget
    states = Counter(trial_state(t) for t in trials)
    complete = [t for t in trials if t.state == TrialState.COMPLETE]
    in_box = [t for t in complete if t.datetime_complete is not None and t.datetime_complete.timestamp() <= box_end]
    pruned_in_box = [t for t in trials if t.state == TrialState.PRUNED and t.datetime_complete is not None
                     and t.datetime_complete.timestamp() <= box_end]
    last = max((t.datetime_complete.timestamp() for t in complete if t.datetime_complete), default=box_start)
    params = Counter(json.dumps(t.params, sort_keys=True) for t in trials if t.params)
    trial_errors = [f"trial {t.number} {trial_state(t)}: {t.user_attrs.get('error', '')}"[:300]
                    for t in trials if trial_state(t) in ("failed", "interrupted")]
    # CPU seconds the trials' own fits used (recorded per trial by the engine): useful work done in the
    # box, whatever mix of fast and slow configs the sampler happened to pick.
    fit_cpu = sum(float(t.user_attrs.get("cpu_seconds", 0.0)) for t in in_box + pruned_in_box)
    by_launch = Counter(t.user_attrs.get("tl_launch") for t in in_box)
    per_launch = [{"kind": ln.kind, "start_offset": round(ln.started_epoch - box_start, 2),
                   "wall_seconds": round(ln.wall_seconds, 2), "complete_in_box": by_launch.get(ln.id, 0)}
                  for ln in launches]
    return {
        "per_launch": per_launch,
        "fit_cpu_seconds": round(fit_cpu, 2),
        "complete_in_box": len(in_box), "pruned_in_box": len(pruned_in_box),
        "complete_late": len(complete) - len(in_box),
        "states": dict(states), "launches": len(launches), "ledger_seconds": round(spent_wall, 2),
        "last_complete_after_box_start": round(last - box_start, 2),
        "same_config": sum(n - 1 for n in params.values() if n > 1),
        "trial_errors": trial_errors,
    }


def print_sleep_table(rows: list[dict[str, Any]], kinds: list[str], jobs: list[int]) -> None:
    """Workers down the side; per store kind: trials per minute, ratio to one worker, errors."""
    by = {(r["store"], r["workers"]): r for r in rows}
    head = f"{'workers':>7}"
    for kind in kinds:
        t = STORE_TITLES[kind]
        head += f" | {t + ' trials/min':>22} {'ratio':>6} {'errors':>6} {'ovh ms':>7} {'same cfg':>8}"
    print(head)
    print("-" * len(head))
    for n in jobs:
        line = f"{n:>7}"
        for kind in kinds:
            r = by.get((kind, n))
            one = by.get((kind, 1))
            if r is None:
                line += f" | {'-':>22} {'-':>6} {'-':>6} {'-':>7} {'-':>8}"
                continue
            ratio = r["per_minute"] / one["per_minute"] if one and one["per_minute"] else float("nan")
            ovh = f"{r['overhead_ms']:.0f}" if r["overhead_ms"] is not None else "-"
            line += (f" | {r['per_minute']:>22.1f} {ratio:>5.2f}x {r['errors']:>6d} {ovh:>7} "
                     f"{r['same_config']:>8d}")
        print(line)
    print()
    for r in rows:
        print(f"  {STORE_TITLES[r['store']]:<10} {r['workers']} workers: {r['complete_in_box']} complete in the box, "
              f"{r['complete_late']} after it (last at {r['last_complete_after_box_start']:.1f} s), "
              f"per worker {r['worker_trials']}, ledger {r['ledger_seconds']} s, "
              f"worker CPU {_fmt(r['cpu_ms_per_trial'])} ms/trial ({_fmt(r['steady_cpu_ms_per_trial'])} in steady "
              f"state; {r['cpu_cores']:.2f} cores), "
              f"'database is locked' {r['locked_errors']}, load {r['load_before']:.2f} -> {r['load_after']:.2f}")
        for text in r["error_texts"][:5]:
            print(f"      {text}")


def _fmt(value: float | None) -> str:
    return "-" if value is None else f"{value:.0f}"


def sleep_mode(args: argparse.Namespace, budget: float) -> list[dict[str, Any]]:
    kinds = [k.strip() for k in args.stores.split(",") if k.strip()]
    jobs = [int(j) for j in args.jobs.split(",")]
    unknown = set(kinds) - set(STORE_KINDS)
    if unknown:
        raise SystemExit(f"unknown store kind(s) {', '.join(sorted(unknown))}; use {', '.join(STORE_KINDS)}")
    if "postgres" in kinds and not _pg_available():
        raise SystemExit(f"PostgreSQL is not reachable at {PG_ADMIN_URL}; pass --stores sqlite or start it")
    print(f"sleep objective {args.sleep} s, budget {budget:.0f} s per point, workers {jobs}, "
          f"stores {', '.join(STORE_TITLES[k] for k in kinds)}")
    print(f"uptime before: {_uptime()}")
    rows = []
    with tempfile.TemporaryDirectory(prefix="tl-scaling-") as tmp:
        # Interleave store kinds at each worker count, so a burst of load hits both alike.
        for n in jobs:
            for kind in kinds:
                row = run_point(kind, n, budget, args.sleep, args.seed, Path(tmp))
                print(f"  {STORE_TITLES[kind]:<10} {n} workers: {row['per_minute']:.1f} trials/min, "
                      f"{row['errors']} errors", flush=True)
                rows.append(row)
    print(f"uptime after:  {_uptime()}\n")
    print_sleep_table(rows, kinds, jobs)
    return rows


# --------------------------------------------------------------------------- file-backends mode


FILE_BACKENDS = ("sqlite_wal", "journal", "tunelab")
FILE_TITLES = {"sqlite_wal": "SQLite WAL", "journal": "journal file", "tunelab": "tunelab SQLite"}
SQLITE_BUSY_TIMEOUT_SECONDS = 30  # the sqlite3 driver's busy timeout, passed as connect_args


def plain_storage(backend: str, path: str) -> Any:
    """The optuna storage a plain-optuna worker opens: each process builds its own, as separate machines would."""
    import optuna

    if backend == "sqlite_wal":
        return optuna.storages.RDBStorage(f"sqlite:///{path}",
                                          engine_kwargs={"connect_args": {"timeout": SQLITE_BUSY_TIMEOUT_SECONDS}})
    if backend == "journal":
        return optuna.storages.JournalStorage(optuna.storages.journal.JournalFileBackend(path))
    raise ValueError(f"unknown file backend {backend!r}")


class PlainSleepObjective:
    """The sleep objective as a plain optuna objective: same space, same sleep, same value as ``SleepObjective``."""

    def __init__(self, seconds: float = 0.25) -> None:
        self.seconds = seconds
        self.calls = 0
        self.first_cpu = self.last_cpu = 0.0

    def __call__(self, trial: Any) -> float:
        now = time.process_time()
        if self.calls == 0:
            self.first_cpu = now
        self.last_cpu, self.calls = now, self.calls + 1
        x = trial.suggest_float("x", 0.0, 1.0)
        y = trial.suggest_float("y", 0.0, 1.0)
        kind = trial.suggest_categorical("kind", ["a", "b", "c"])
        time.sleep(self.seconds)
        return (x - 0.3) ** 2 + (y - 0.7) ** 2 + 0.1 * (kind != "b")

    def steady_cpu(self) -> tuple[float, int]:
        """CPU seconds between the first and the last call, and the number of trial cycles between them."""
        return self.last_cpu - self.first_cpu, max(0, self.calls - 1)


def _plain_worker_main(backend: str, path: str, index: int, seed: int, budget: float, sleep_seconds: float,
                       barrier: Any, results: Any) -> None:
    """One plain-optuna worker: open the storage and load the study, wait for the others, then optimize."""
    import warnings

    errors: list[str] = []
    summary: dict[str, Any] = {"pid": os.getpid(), "index": index}
    try:
        import optuna

        from tunelab.engine import make_sampler

        optuna.logging.set_verbosity(optuna.logging.WARNING)  # "Trial N finished" lines are not errors
        handler = _ErrorLog()
        for name in ("optuna", "sqlalchemy"):
            logging.getLogger(name).addHandler(handler)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            study = optuna.load_study(study_name=STUDY, storage=plain_storage(backend, path),
                                      sampler=make_sampler("tpe", seed + index))
        objective = PlainSleepObjective(sleep_seconds)
        barrier.wait(timeout=BARRIER_TIMEOUT_SECONDS)
        summary["started_epoch"] = time.time()
        cpu0 = time.process_time()
        try:
            study.optimize(objective, timeout=budget, catch=())
        finally:
            summary.update(calls=objective.calls, cpu_seconds=time.process_time() - cpu0,
                           steady_cpu=objective.steady_cpu())
        errors.extend(handler.messages)
    except BaseException as exc:  # every failure goes back to the parent as text
        errors.extend(_failure_lines(exc))
    summary["errors"] = errors
    results.put(summary)


def run_plain_point(backend: str, jobs: int, budget: float, sleep_seconds: float, seed: int,
                    workdir: Path) -> dict[str, Any]:
    """One file backend, one worker count: a fresh file, one study, ``jobs`` plain-optuna processes."""
    import sqlite3
    import warnings

    import optuna

    ctx = mp.get_context("spawn")
    load_before = os.getloadavg()[0]
    path = str(workdir / f"{backend}-{jobs}.{'db' if backend == 'sqlite_wal' else 'log'}")
    journal_mode = None
    if backend == "sqlite_wal":
        # WAL is a property of the file: set once here, every later connection uses it.
        conn = sqlite3.connect(path)
        try:
            journal_mode = conn.execute("PRAGMA journal_mode=WAL").fetchone()[0]
        finally:
            conn.close()
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
        storage = plain_storage(backend, path)
        optuna.create_study(study_name=STUDY, storage=storage, direction="minimize")
    summaries, errors, released, walls = _release_workers(
        ctx, jobs, budget, lambda i, barrier, results: (_plain_worker_main, (backend, path, i, seed, budget,
                                                                             sleep_seconds, barrier, results)))
    # Read back with a fresh storage object: what another process would see, not this one's cache.
    from optuna.trial import TrialState

    trials = optuna.load_study(study_name=STUDY, storage=plain_storage(backend, path)).get_trials(deepcopy=False)
    box_start = min((s["started_epoch"] for s in summaries if "started_epoch" in s), default=released)
    box_end = box_start + budget
    states = Counter(t.state.name.lower() for t in trials)
    complete = [t for t in trials if t.state == TrialState.COMPLETE]
    in_box = [t for t in complete if t.datetime_complete is not None and t.datetime_complete.timestamp() <= box_end]
    last = max((t.datetime_complete.timestamp() for t in complete if t.datetime_complete), default=box_start)
    params = Counter(json.dumps(t.params, sort_keys=True) for t in trials if t.params)
    # optimize(timeout=) stops between trials, so every trial should end complete; anything else is an error.
    errors.extend(f"trial {t.number} {t.state.name.lower()}" for t in trials if t.state != TrialState.COMPLETE)
    n_complete = len(in_box)
    cpu = sum(s.get("cpu_seconds", 0.0) for s in summaries)
    calls = sum(s.get("calls", 0) for s in summaries)
    steady_cpu = sum(s.get("steady_cpu", (0.0, 0))[0] for s in summaries)
    steady_cycles = sum(s.get("steady_cpu", (0.0, 0))[1] for s in summaries)
    return {
        "store": backend, "workers": jobs, "budget_seconds": budget, "sleep_seconds": sleep_seconds,
        "journal_mode": journal_mode, "file_bytes": os.path.getsize(path),
        "complete_in_box": n_complete, "complete_late": len(complete) - n_complete, "states": dict(states),
        "last_complete_after_box_start": round(last - box_start, 2),
        "same_config": sum(n - 1 for n in params.values() if n > 1),
        "per_minute": 60.0 * n_complete / budget,
        "overhead_ms": 1000.0 * (jobs * budget / n_complete - sleep_seconds) if n_complete else None,
        "worker_trials": sorted(s.get("calls", 0) for s in summaries),
        "cpu_ms_per_trial": 1000.0 * cpu / calls if calls else None,
        "steady_cpu_ms_per_trial": 1000.0 * steady_cpu / steady_cycles if steady_cycles else None,
        "cpu_cores": cpu / budget,
        "seconds_to_last_exit": round(walls, 2),
        "errors": len(errors), "locked_errors": sum("locked" in e.lower() for e in errors),
        "error_texts": errors[:20],
        "load_before": load_before, "load_after": os.getloadavg()[0],
    }


def print_file_table(rows: list[dict[str, Any]], backends: list[str], jobs: list[int]) -> str:
    """Workers down the side; per backend: trials per minute, ratio to one worker, errors, 'locked'; then the
    verdict."""
    by = {(r["store"], r["workers"]): r for r in rows}
    head = f"{'workers':>7}"
    for b in backends:
        head += f" | {FILE_TITLES[b] + ' trials/min':>25} {'ratio':>6} {'errors':>6} {'locked':>6}"
    print(head)
    print("-" * len(head))

    def ratio(b: str, n: int) -> float:
        r, one = by.get((b, n)), by.get((b, 1))
        return r["per_minute"] / one["per_minute"] if r and one and one["per_minute"] else float("nan")

    for n in jobs:
        line = f"{n:>7}"
        for b in backends:
            r = by.get((b, n))
            if r is None:
                line += f" | {'-':>25} {'-':>6} {'-':>6} {'-':>6}"
                continue
            line += f" | {r['per_minute']:>25.1f} {ratio(b, n):>5.2f}x {r['errors']:>6d} {r['locked_errors']:>6d}"
        print(line)
    print()
    for r in rows:
        print(f"  {FILE_TITLES[r['store']]:<14} {r['workers']} workers: {r['complete_in_box']} complete in the box, "
              f"{r['complete_late']} after it (last at {r['last_complete_after_box_start']:.1f} s), "
              f"per worker {r['worker_trials']}, overhead {_fmt(r['overhead_ms'])} ms/trial, "
              f"worker CPU {_fmt(r['cpu_ms_per_trial'])} ms/trial ({_fmt(r['steady_cpu_ms_per_trial'])} in steady "
              f"state; {r['cpu_cores']:.2f} cores), same cfg {r['same_config']}, "
              f"load {r['load_before']:.2f} -> {r['load_after']:.2f}")
        for text in r["error_texts"][:5]:
            print(f"      {text}")
    n = max(jobs)
    wal, jrn = by.get(("sqlite_wal", n)), by.get(("journal", n))
    if not (wal and jrn and wal["per_minute"] and jrn["per_minute"]):
        verdict = f"verdict: no comparison at {n} workers (a backend finished no trial)"
    else:
        best, other = (jrn, wal) if jrn["per_minute"] > wal["per_minute"] else (wal, jrn)
        verdict = (f"verdict: at {n} workers {FILE_TITLES[best['store']]} scaled better: "
                   f"{best['per_minute']:.1f} vs {other['per_minute']:.1f} trials/min "
                   f"({best['per_minute'] / other['per_minute']:.2f}x); ratio to 1 worker "
                   f"{ratio(best['store'], n):.2f}x vs {ratio(other['store'], n):.2f}x; "
                   f"errors {best['errors']} vs {other['errors']}")
    print(f"\n{verdict}")
    return verdict


def file_backends_mode(args: argparse.Namespace, budget: float) -> list[dict[str, Any]]:
    """Plain optuna on SQLite (WAL, busy timeout) and on the journal file, with tunelab's SQLite path beside them."""
    jobs = [int(j) for j in args.jobs.split(",")]
    print(f"file backends, plain optuna: sleep objective {args.sleep} s, budget {budget:.0f} s per point, "
          f"workers {jobs}; tunelab's own SQLite path beside them")
    uptime_before = _uptime()
    print(f"uptime before: {uptime_before}")
    rows = []
    with tempfile.TemporaryDirectory(prefix="tl-scaling-files-") as tmp:
        # Interleave backends at each worker count, so a burst of load hits all alike.
        for n in jobs:
            for b in FILE_BACKENDS:
                if b == "tunelab":
                    row = run_point("sqlite", n, budget, args.sleep, args.seed, Path(tmp))
                    row["store"] = "tunelab"
                else:
                    row = run_plain_point(b, n, budget, args.sleep, args.seed, Path(tmp))
                print(f"  {FILE_TITLES[b]:<14} {n} workers: {row['per_minute']:.1f} trials/min, "
                      f"{row['errors']} errors", flush=True)
                rows.append(row)
    uptime_after = _uptime()
    print(f"uptime after:  {uptime_after}\n")
    verdict = print_file_table(rows, list(FILE_BACKENDS), jobs)
    rows.append({"summary": True, "verdict": verdict, "uptime_before": uptime_before, "uptime_after": uptime_after})
    return rows


# --------------------------------------------------------------------------- real mode


def real_mode(args: argparse.Namespace, budget: float) -> list[dict[str, Any]]:
    """``tunelab run --jobs 1`` then ``--jobs 2`` on one open data set at the same budget."""
    from benchmarks import datasets

    spec = datasets.get(args.dataset)
    rows = []
    with tempfile.TemporaryDirectory(prefix="tl-scaling-real-") as tmp:
        data = Path(tmp) / f"{spec.name}.csv"
        datasets.load(spec.name).to_csv(data, index=False)
        print(f"{spec.name} ({spec.source}), budget {budget:.0f} s, pruning {args.pruning}")
        uptime_before = _uptime()
        print(f"uptime before: {uptime_before}")
        for rep in range(args.repeats):
            order = (1, 2) if rep % 2 == 0 else (2, 1)
            for jobs in order:
                row = _real_run(data, spec.target, jobs, budget, args, Path(tmp) / f"r{rep}-j{jobs}.db")
                row["repeat"] = rep
                starts = ", ".join(f"{ln['kind']} at +{ln['start_offset']:.1f} s" for ln in row["per_launch"])
                print(f"  --jobs {jobs}: {row['per_minute']:.1f} trials/min (complete + pruned), "
                      f"{row['complete_per_minute']:.1f} complete/min, {row['errors']} errors, "
                      f"load {row['load_before']:.2f} -> {row['load_after']:.2f}; launches: {starts}", flush=True)
                rows.append(row)
        uptime_after = _uptime()
        print(f"uptime after:  {uptime_after}\n")
    one = [r for r in rows if r["jobs"] == 1]
    two = [r for r in rows if r["jobs"] == 2]

    def mean(rs: list[dict[str, Any]], key: str) -> float:
        return sum(r[key] for r in rs) / len(rs)

    print(f"{'jobs':>4} | {'trials/min':>10} {'complete/min':>12} {'fit CPU s/min':>13} {'complete':>8} "
          f"{'pruned':>6} {'errors':>6}")
    for label, rs in (("1", one), ("2", two)):
        print(f"{label:>4} | {mean(rs, 'per_minute'):>10.1f} {mean(rs, 'complete_per_minute'):>12.1f} "
              f"{mean(rs, 'fit_cpu_per_minute'):>13.1f} {mean(rs, 'complete_in_box'):>8.1f} "
              f"{mean(rs, 'pruned_in_box'):>6.1f} {sum(r['errors'] for r in rs):>6d}")

    def ratio_of(key: str) -> float:
        return mean(two, key) / mean(one, key) if mean(one, key) else float("nan")

    ratio, ratio_c, ratio_cpu = ratio_of("per_minute"), ratio_of("complete_per_minute"), ratio_of("fit_cpu_per_minute")
    print(f"ratio --jobs 2 / --jobs 1: {ratio:.2f}x trials (complete + pruned), {ratio_c:.2f}x complete only, "
          f"{ratio_cpu:.2f}x fit CPU; target >= 1.7x")
    for r in rows:
        for text in r["error_texts"][:5]:
            print(f"      jobs {r['jobs']}: {text}")
    rows.append({"summary": True, "ratio": ratio, "ratio_complete": ratio_c, "ratio_fit_cpu": ratio_cpu,
                 "uptime_before": uptime_before, "uptime_after": uptime_after})
    return rows


def _real_run(data: Path, target: str, jobs: int, budget: float, args: argparse.Namespace,
              store: Path) -> dict[str, Any]:
    from benchmarks._tunelab_cli import default_executable

    command = [args.tunelab or default_executable(), "run", str(data), "--target", target,
               "--budget", f"{budget:g}s", "--jobs", str(jobs), "--store", str(store), "--study", "real",
               "--seed", str(args.seed), "--pruning", args.pruning, "--json", "-q"]
    load_before = os.getloadavg()[0]
    start = time.monotonic()
    done = subprocess.run(command, capture_output=True, text=True, timeout=budget + 10 * GRACE_SECONDS)
    seconds = time.monotonic() - start
    errors = [] if done.returncode == 0 else [f"exit code {done.returncode}: {done.stderr.strip()[-500:]}"]
    errors += [line.strip()[:300] for line in done.stderr.splitlines()
               if any(w in line.lower() for w in ERROR_WORDS)]
    try:
        printed = json.loads(done.stdout)
    except json.JSONDecodeError:
        printed = {}
        errors.append(f"stdout is not JSON: {done.stdout[-300:]!r}")
    measured = measure_store(str(store), "real", budget)
    errors.extend(e for e in measured.pop("trial_errors") if "interrupted" not in e)  # the last one is cut off
    finished = measured["complete_in_box"] + measured["pruned_in_box"]
    return {
        "jobs": jobs, "budget_seconds": budget, "command": command, "seconds": round(seconds, 2),
        **measured, "printed": printed,
        "per_minute": 60.0 * finished / budget, "complete_per_minute": 60.0 * measured["complete_in_box"] / budget,
        "fit_cpu_per_minute": 60.0 * measured["fit_cpu_seconds"] / budget,
        "errors": len(errors), "error_texts": errors[:20],
        "load_before": load_before, "load_after": os.getloadavg()[0],
    }


# --------------------------------------------------------------------------- shared


def _pg_available() -> bool:
    from sqlalchemy import create_engine, text

    engine = create_engine(PG_DRIVER_URL, connect_args={"connect_timeout": 3})
    try:
        with engine.connect() as conn:
            conn.execute(text("select 1"))
        return True
    except Exception:
        return False
    finally:
        engine.dispose()


def _uptime() -> str:
    try:
        return subprocess.run(["uptime"], capture_output=True, text=True, timeout=10).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        one, five, fifteen = os.getloadavg()
        return f"load average: {one:.2f}, {five:.2f}, {fifteen:.2f}"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--budget", default=None, help="wall budget per point: 20s (sleep mode), 60s (--real)")
    parser.add_argument("--jobs", default=",".join(map(str, DEFAULT_JOBS)), help="worker counts, e.g. 1,2,4,8")
    parser.add_argument("--stores", default=",".join(STORE_KINDS), help="sqlite,postgres")
    parser.add_argument("--sleep", type=float, default=0.25, help="seconds the sleep objective sleeps")
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--real", action="store_true", help="tunelab run --jobs 1 vs --jobs 2 on a real data set")
    parser.add_argument("--file-backends", action="store_true",
                        help="plain optuna on SQLite WAL vs the journal file, tunelab's SQLite beside them")
    parser.add_argument("--dataset", default="breast_cancer", help="a name from benchmarks/datasets.py (--real)")
    parser.add_argument("--pruning", default="auto", help="--pruning passed to tunelab run (--real)")
    parser.add_argument("--repeats", type=int, default=1, help="pairs of runs, order alternating (--real)")
    parser.add_argument("--tunelab", default=None, help="tunelab executable (--real) [default: beside this Python]")
    parser.add_argument("--results-dir", type=Path, default=RESULTS_DIR)
    args = parser.parse_args(argv)

    from tunelab.engine import parse_duration

    budget = parse_duration(args.budget or ("60s" if args.real else "20s"))
    # One thread per process, as tunelab's own trials run: spin-waiting pools on 2 cores measure the neighbours.
    for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(name, "1")
    if args.real and args.file_backends:
        raise SystemExit("--real and --file-backends are separate modes; pass one")
    mode = "real" if args.real else "file-backends" if args.file_backends else "sleep"
    run = {"real": real_mode, "file-backends": file_backends_mode, "sleep": sleep_mode}[mode]
    rows = run(args, budget)
    args.results_dir.mkdir(parents=True, exist_ok=True)
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    out = args.results_dir / f"scaling-{mode}-{budget:.0f}s-{stamp}.json"
    out.write_text(json.dumps(rows, indent=2, default=str), encoding="utf-8")
    print(f"\nraw results: {out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
