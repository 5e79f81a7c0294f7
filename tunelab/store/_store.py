"""The study store: our tables for studies, phases, launches and exports; optuna's for trials.

Every write is one committed transaction.  SQLite runs in WAL mode with a busy timeout, so a
``kill -9`` at any moment leaves a consistent file.  Errors from SQLAlchemy and optuna are
translated here into :class:`~tunelab.errors.StoreError`.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import socket
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any, Literal

from sqlalchemy import create_engine, event, func, inspect, select, text, update
from sqlalchemy.engine import Engine
from sqlalchemy.exc import DBAPIError, SQLAlchemyError

from tunelab.errors import InputError, StoreError, StudyNotFound, first_line
from tunelab.store import _keys as k, _schema as s
from tunelab.store._location import Location, check_sqlite_file, resolve
from tunelab.store._migrations import MIGRATIONS
from tunelab.store._records import TrialRecord, best_of, record_of

BUSY_TIMEOUT_S = 60
WAL_CHECKPOINT_PAGES = 128
WAL_LIMIT_BYTES = 1 << 20
CONNECT_TIMEOUT_S = 5


def utc_iso(epoch: float) -> str:
    """An epoch time as a UTC ISO 8601 string."""
    return datetime.fromtimestamp(epoch, tz=timezone.utc).isoformat(timespec="seconds")


@dataclass(frozen=True)
class StudyRecord:
    """A study's fixed facts: its data identity, target, task, metric, budget and seed."""

    id: int
    name: str
    created_at: str
    data_path: str
    data_sha256: str
    fingerprint: str
    target: str
    task: str
    metric: str
    direction: Literal["minimize", "maximize"]
    seed: int
    budget_wall: float | None
    budget_cpu: float | None
    budget_trials: int | None
    settings: dict[str, Any]


@dataclass(frozen=True)
class LaunchRecord:
    """One process working on a study: when it started, its last heartbeat, what it spent."""

    id: int
    study_id: int
    kind: str
    host: str
    pid: int
    started_at: str
    started_epoch: float
    heartbeat_at: str
    heartbeat_epoch: float
    wall_seconds: float
    cpu_seconds: float
    trials_done: int
    state: str
    stop_reason: str


@dataclass(frozen=True)
class PhaseRecord:
    """One search space a study used, from trial ``first_trial`` on."""

    number: int
    created_at: str
    reason: str
    space_json: str
    first_trial: int


class Store:
    """An open store.  Use :meth:`open`; close with :meth:`close` or a ``with`` block."""

    def __init__(self, location: Location, engine: Engine) -> None:
        self.location = location
        self.engine = engine
        self._optuna: Any = None

    # ---- opening -------------------------------------------------------------------------
    @classmethod
    def open(cls, store: str | None = None, *, create: bool = False) -> Store:
        """Open (and with ``create``, initialise) the store at a path or URL.

        Raises
        ------
        StoreError
            Not a SQLite file, not a tunelab store, written by a newer tunelab, unreachable,
            or missing when ``create`` is false.
        """
        location = resolve(store)
        if location.path is not None:
            check_sqlite_file(location.path, create)
            engine = create_engine(location.url, connect_args={"timeout": BUSY_TIMEOUT_S})
            event.listen(engine, "connect", _sqlite_pragmas)
        else:
            engine = _server_engine(location)
        opened = cls(location, engine)
        try:
            opened._check_schema(create)
        except BaseException:
            engine.dispose()
            raise
        return opened

    def _check_schema(self, create: bool) -> None:
        with self._translate("open"):
            tables = set(inspect(self.engine).get_table_names())
            if "tl_meta" in tables:
                with self.engine.connect() as conn:
                    row = conn.execute(select(s.meta.c.value).where(s.meta.c.key == "schema_version")).first()
                if row is None and self._unfinished_init(tables):
                    # SQLite's driver commits each CREATE TABLE on its own: a fault while the store
                    # was first set up can leave tables without their version row.  Finish the setup.
                    if not create:
                        raise StoreError(f"store {self.location.display()} has no studies yet",
                                         "start one with `tunelab run`")
                    self._initialise()
                    return
                version = int(row[0]) if row else 0
                if version > s.SCHEMA_VERSION:
                    raise StoreError(
                        f"store {self.location.display()} was written by a newer tunelab (schema {version}, "
                        f"this tunelab reads up to {s.SCHEMA_VERSION})", "upgrade tunelab: pip install -U tunelab")
                if version < s.SCHEMA_VERSION:
                    self._migrate(version)
                return
            if tables - _OPTUNA_TABLES:
                raise StoreError(f"{self.location.display()} is a database but not a tunelab store",
                                 "pass another --store; tunelab does not write into foreign databases")
            if not create:
                raise StoreError(f"store {self.location.display()} has no studies yet", "start one with `tunelab run`")
            self._initialise()

    def _unfinished_init(self, tables: set[str]) -> bool:
        """Whether the store's tables exist without a version row and without any study."""
        if "tl_study" not in tables:
            return True
        with self.engine.connect() as conn:
            return conn.execute(select(func.count()).select_from(s.studies)).scalar() == 0

    def _initialise(self) -> None:
        """Create the store's tables (those missing) and its version row."""
        if self.location.path is not None:
            with self.engine.connect() as conn:
                conn.exec_driver_sql("PRAGMA journal_mode=WAL")
        with self.engine.begin() as conn:
            s.metadata.create_all(conn, checkfirst=True)
            conn.execute(s.meta.insert().values(key="schema_version", value=str(s.SCHEMA_VERSION)))

    def _migrate(self, version: int) -> None:
        """Bring an older schema up to date, one step per version, each in its own transaction."""
        for step in range(version, s.SCHEMA_VERSION):
            migration = MIGRATIONS.get(step)
            if migration is None:
                raise StoreError(f"no migration from store schema {step}", "export your studies with an older tunelab")
            with self.engine.begin() as conn:
                migration(conn)
                conn.execute(update(s.meta).where(s.meta.c.key == "schema_version").values(value=str(step + 1)))

    def close(self) -> None:
        if self._optuna is not None:
            with contextlib.suppress(Exception):
                self._optuna.dispose()
        self.engine.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextlib.contextmanager
    def _translate(self, doing: str) -> Iterator[None]:
        try:
            yield
        except StoreError:
            raise
        except DBAPIError as exc:
            raise _store_error(self.location, doing, exc) from exc
        except SQLAlchemyError as exc:
            raise StoreError(f"store error while trying to {doing}: {first_line(exc)}",
                             "run again with --debug for details") from exc

    def translate(self, exc: BaseException, doing: str, study: str | None = None) -> StoreError | None:
        """The store error behind ``exc`` (a database error anywhere in its chain, optuna's
        included), as one line that says what to do; ``None`` when the database is not the cause."""
        seen: BaseException | None = exc
        while seen is not None:
            if isinstance(seen, StoreError):
                return seen
            if isinstance(seen, DBAPIError):
                return _store_error(self.location, doing, seen, study)
            seen = seen.__cause__ or seen.__context__
        if isinstance(exc, SQLAlchemyError) or type(exc).__name__ == "StorageInternalError":
            return StoreError(f"store error while trying to {doing}: {first_line(exc)}",
                              "run again with --debug for details")
        return None

    @contextlib.contextmanager
    def guard(self, doing: str, study: str | None = None) -> Iterator[None]:
        """Turn a database fault inside the block (optuna's included) into a one-line store error."""
        try:
            yield
        except StoreError as exc:
            if exc.disk_full and study:
                raise StoreError(exc.message, _disk_full_hint(study), disk_full=True) from exc
            raise
        except Exception as exc:
            failure = self.translate(exc, doing, study)
            if failure is None:
                raise
            raise failure from exc

    def optuna_storage(self) -> Any:
        """optuna's RDB storage on the same database (trials, params, intermediate values).

        Wrapped so that the trials this process runs are written in a few transactions each
        (see ``LocalTrialStorage``).
        """
        if self._optuna is None:
            import optuna

            from tunelab.store._optuna_adapter import LocalTrialStorage

            kwargs: dict[str, Any] = {"pool_pre_ping": True}
            if self.location.path is not None:
                kwargs["connect_args"] = {"timeout": BUSY_TIMEOUT_S}
            elif self.location.url.startswith("postgresql"):
                kwargs["connect_args"] = {"connect_timeout": CONNECT_TIMEOUT_S}
            with self._translate("open the trial tables"):
                backend = optuna.storages.RDBStorage(self.location.url, engine_kwargs=kwargs)
                if self.location.path is not None:  # optuna's own connections get the store's pragmas too
                    event.listen(backend.engine, "connect", _sqlite_pragmas)
                    backend.engine.dispose()
                self._optuna = LocalTrialStorage(backend)
        return self._optuna

    # ---- studies ---------------------------------------------------------------------------
    def create_study(self, *, name: str, now: float, data_path: str, data_sha256: str, fingerprint: str,
                     target: str, task: str, metric: str, direction: str, seed: int,
                     budget_wall: float | None, budget_cpu: float | None, budget_trials: int | None,
                     settings: dict[str, Any], space_json: str, space_reason: str) -> StudyRecord:
        """Insert a study and its first phase in one transaction."""
        from sqlalchemy.exc import IntegrityError

        try:
            self._insert_study(name=name, now=now, data_path=data_path, data_sha256=data_sha256,
                               fingerprint=fingerprint, target=target, task=task, metric=metric, direction=direction,
                               seed=seed, budget_wall=budget_wall, budget_cpu=budget_cpu, budget_trials=budget_trials,
                               settings=settings, space_json=space_json, space_reason=space_reason)
        except StoreError as exc:
            if isinstance(exc.__cause__, IntegrityError):  # another launch created it a moment ago
                raise InputError(f"study '{name}' already exists in {self.location.display()}: another launch "
                                 f"created it a moment ago", f"join it with `tunelab worker {name}`, or pick another "
                                                             "--study name") from exc
            raise
        return self.get_study(name)

    def _insert_study(self, *, name: str, now: float, data_path: str, data_sha256: str, fingerprint: str,
                      target: str, task: str, metric: str, direction: str, seed: int, budget_wall: float | None,
                      budget_cpu: float | None, budget_trials: int | None, settings: dict[str, Any],
                      space_json: str, space_reason: str) -> None:
        with self._translate("create the study"), self.engine.begin() as conn:
            study_id = conn.execute(s.studies.insert().values(
                name=name, created_at=utc_iso(now), data_path=data_path, data_sha256=data_sha256,
                fingerprint=fingerprint, target=target, task=task, metric=metric, direction=direction,
                seed=seed, budget_wall=budget_wall, budget_cpu=budget_cpu, budget_trials=budget_trials,
                settings_json=json.dumps(settings),
            )).inserted_primary_key[0]  # type: ignore[index]  # never None after an insert
            conn.execute(s.phases.insert().values(study_id=study_id, number=1, created_at=utc_iso(now),
                                                  reason=space_reason, space_json=space_json, first_trial=0))

    def get_study(self, name: str) -> StudyRecord:
        """A study by name.  Raises StudyNotFound with the closest names as a hint."""
        with self._translate("read the study"), self.engine.connect() as conn:
            row = conn.execute(select(s.studies).where(s.studies.c.name == name)).mappings().first()
            if row is None:
                names = [r[0] for r in conn.execute(select(s.studies.c.name).order_by(s.studies.c.id))]
        if row is None:
            import difflib

            close = difflib.get_close_matches(name, names, n=3)
            hint = (f"did you mean {', '.join(close)}?" if close else
                    f"studies here: {', '.join(names[-5:])}" if names else "this store has no studies yet")
            raise StudyNotFound(f"no study named '{name}' in {self.location.display()}", hint)
        return _study(row)

    def list_studies(self) -> list[StudyRecord]:
        with self._translate("list studies"), self.engine.connect() as conn:
            rows = conn.execute(select(s.studies).order_by(s.studies.c.id)).mappings().all()
        return [_study(r) for r in rows]

    def study_names(self) -> set[str]:
        with self._translate("list studies"), self.engine.connect() as conn:
            return {r[0] for r in conn.execute(select(s.studies.c.name))}

    def update_study(self, study_id: int, **values: Any) -> None:
        """Change a study's budget or data record (``resume --extend``, ``--accept-changed-data``)."""
        if "settings" in values:
            values["settings_json"] = json.dumps(values.pop("settings"))
        with self._translate("update the study"), self.engine.begin() as conn:
            conn.execute(update(s.studies).where(s.studies.c.id == study_id).values(**values))

    # ---- phases ----------------------------------------------------------------------------
    def phases(self, study_id: int) -> list[PhaseRecord]:
        with self._translate("read the phases"), self.engine.connect() as conn:
            rows = conn.execute(select(s.phases).where(s.phases.c.study_id == study_id)
                                .order_by(s.phases.c.number)).mappings().all()
        return [PhaseRecord(r["number"], r["created_at"], r["reason"], r["space_json"], r["first_trial"]) for r in rows]

    def add_phase(self, study_id: int, *, now: float, reason: str, space_json: str, first_trial: int) -> int:
        """Attach a new search space to the study; the next trials use it."""
        with self._translate("add a phase"), self.engine.begin() as conn:
            last = conn.execute(select(func.max(s.phases.c.number)).where(s.phases.c.study_id == study_id)).scalar()
            number = int(last or 0) + 1
            conn.execute(s.phases.insert().values(study_id=study_id, number=number, created_at=utc_iso(now),
                                                  reason=reason, space_json=space_json, first_trial=first_trial))
        return number

    # ---- launches and the ledger -------------------------------------------------------------
    def start_launch(self, study_id: int, *, kind: str, now: float) -> int:
        with self._translate("record the launch"), self.engine.begin() as conn:
            return int(conn.execute(s.launches.insert().values(
                study_id=study_id, kind=kind, host=socket.gethostname(), pid=os.getpid(),
                started_at=utc_iso(now), started_epoch=now, heartbeat_at=utc_iso(now), heartbeat_epoch=now,
                wall_seconds=0.0, cpu_seconds=0.0, trials_done=0, state="running", stop_reason="",
            )).inserted_primary_key[0])  # type: ignore[index]  # never None after an insert

    def beat(self, launch_id: int, *, now: float, wall_seconds: float, cpu_seconds: float, trials_done: int) -> bool:
        """The heartbeat: what this launch has spent so far (a crash loses at most one interval).

        Written only while the launch is *running*: False means another process declared it dead
        (its heartbeat stopped for too long, as when a machine or process is frozen), and its time
        from then on is no longer the study's.
        """
        with self._translate("write the heartbeat"), self.engine.begin() as conn:
            result = conn.execute(update(s.launches).where(s.launches.c.id == launch_id)
                                  .where(s.launches.c.state == "running").values(
                heartbeat_at=utc_iso(now), heartbeat_epoch=now, wall_seconds=wall_seconds,
                cpu_seconds=cpu_seconds, trials_done=trials_done))
            return bool(result.rowcount == 1)

    def ping(self) -> None:
        """One round trip to the database (raises the translated store error when it does not answer)."""
        with self._translate("reach the store"), self.engine.connect() as conn:
            conn.execute(text("select 1"))

    def end_launch(self, launch_id: int, *, state: str, reason: str) -> None:
        with self._translate("close the launch"), self.engine.begin() as conn:
            conn.execute(update(s.launches).where(s.launches.c.id == launch_id).values(state=state, stop_reason=reason))

    def launches(self, study_id: int) -> list[LaunchRecord]:
        with self._translate("read the launches"), self.engine.connect() as conn:
            rows = conn.execute(select(s.launches).where(s.launches.c.study_id == study_id)
                                .order_by(s.launches.c.id)).mappings().all()
        return [LaunchRecord(**dict(r)) for r in rows]

    def mark_dead_launches(self, study_id: int, *, now: float, stale_after: float) -> list[int]:
        """Mark running launches that died (pid gone on this host, or heartbeat stale) as crashed.

        Returns only the launches *this* call flipped, so when several workers look at once,
        exactly one of them recovers each dead launch's trials.
        """
        host = socket.gethostname()
        dead = [ln.id for ln in self.launches(study_id) if ln.state == "running" and (
            (ln.host == host and ln.pid != os.getpid() and not _pid_alive(ln.pid))
            or now - ln.heartbeat_epoch > stale_after)]
        claimed = []
        for launch_id in dead:
            with self._translate("mark crashed launches"), self.engine.begin() as conn:
                result = conn.execute(update(s.launches).where(s.launches.c.id == launch_id)
                                      .where(s.launches.c.state == "running")
                                      .values(state="crashed", stop_reason="process died; heartbeat stopped"))
                if result.rowcount == 1:
                    claimed.append(launch_id)
        return claimed

    def claim_requeue(self, study_id: int, trial_number: int, *, now: float) -> bool:
        """Reserve the right to re-run an interrupted trial's config; False if another process did."""
        from sqlalchemy.exc import IntegrityError

        try:
            with self.engine.begin() as conn:
                conn.execute(s.requeues.insert().values(study_id=study_id, trial_number=trial_number,
                                                        created_at=utc_iso(now)))
            return True
        except IntegrityError:
            return False

    def requeued_trials(self, study_id: int) -> set[int]:
        with self._translate("read the re-queued trials"), self.engine.connect() as conn:
            return {r[0] for r in conn.execute(select(s.requeues.c.trial_number)
                                                .where(s.requeues.c.study_id == study_id))}

    def spent(self, study_id: int, extra: tuple[float, float] | None = None) -> tuple[float, float]:
        """Wall seconds (union of launch intervals, so parallel launches count once) and CPU seconds.

        ``extra`` adds an interval not yet recorded (a launch about to start, counted from its process start).
        """
        rows = self.launches(study_id)
        intervals = [(ln.started_epoch, ln.started_epoch + ln.wall_seconds) for ln in rows]
        if extra is not None:
            intervals.append(extra)
        return union_length(intervals), sum(ln.cpu_seconds for ln in rows)

    def count_finished(self, study_name: str) -> int:
        """Finished trials (complete, pruned, failed; not interrupted) of a study, by one SQL count.

        Reads optuna's tables directly so that a trial cap stays cheap at thousands of trials.
        """
        sql = text(
            "select count(*) from trials t join studies s on s.study_id = t.study_id "
            "where s.study_name = :name and t.state in ('COMPLETE', 'PRUNED', 'FAIL') and not exists ("
            "select 1 from trial_user_attributes a where a.trial_id = t.trial_id and a.key = :state_key "
            "and a.value_json = :interrupted)")
        with self._translate("count trials"), self.engine.connect() as conn:
            return int(conn.execute(sql, {"name": study_name, "state_key": k.STATE,
                                          "interrupted": json.dumps(k.INTERRUPTED)}).scalar() or 0)

    # ---- trials as plain records -------------------------------------------------------------
    def trials(self, study: StudyRecord | str) -> list[TrialRecord]:
        """Every trial of a study as a plain record, in trial-number order (none before the first)."""
        name = study if isinstance(study, str) else study.name
        storage = self.optuna_storage()
        with self._translate("read the trials"):
            try:
                study_id = storage.get_study_id_from_name(name)
            except KeyError:  # the study row exists but its trial tables were never written
                return []
            return [record_of(t) for t in storage.get_all_trials(study_id, deepcopy=False)]

    def best_trial(self, study: StudyRecord) -> TrialRecord | None:
        """The study's best complete trial, ``None`` when none is complete."""
        return best_of(self.trials(study), study.direction)

    # ---- out-of-fold predictions ---------------------------------------------------------------
    def keep_predictions(self, study: StudyRecord, trial_number: int, value: float, folds: list[Any],
                         *, keep: int) -> None:
        """Store a complete trial's held-out predictions, fold by fold, and keep only the best ``keep``
        trials' (one transaction: a crash leaves either the old set or the new one)."""
        import numpy as np

        rows = []
        for fold, array in enumerate(folds, start=1):
            data = np.ascontiguousarray(np.asarray(array, dtype="<f4"))
            matrix = data.reshape(len(data), -1)
            payload = matrix.tobytes()
            rows.append({"study_id": study.id, "trial_number": trial_number, "fold": fold, "value": float(value),
                         "n_rows": matrix.shape[0], "n_cols": matrix.shape[1], "data": payload,
                         "sha256": hashlib.sha256(payload).hexdigest()})
        order = s.predictions.c.value.desc() if study.direction == "maximize" else s.predictions.c.value.asc()
        with self._translate("store the trial's predictions"), self.engine.begin() as conn:
            conn.execute(s.predictions.insert(), rows)
            kept = [n for (n,) in conn.execute(
                select(s.predictions.c.trial_number).where(s.predictions.c.study_id == study.id)
                .where(s.predictions.c.fold == 1).order_by(order, s.predictions.c.trial_number).limit(keep))]
            conn.execute(s.predictions.delete().where(s.predictions.c.study_id == study.id)
                         .where(s.predictions.c.trial_number.not_in(kept)))

    def predictions(self, study: StudyRecord) -> dict[int, list[Any]]:
        """Every kept trial's held-out predictions by trial number: one float32 array per fold
        (rows, or rows x classes).  A damaged array is refused with a store error."""
        import numpy as np

        out: dict[int, list[Any]] = {}
        with self._translate("read the predictions"), self.engine.connect() as conn:
            rows = conn.execute(select(s.predictions).where(s.predictions.c.study_id == study.id)
                                .order_by(s.predictions.c.trial_number, s.predictions.c.fold)).mappings().all()
        for row in rows:
            payload = bytes(row["data"])
            if hashlib.sha256(payload).hexdigest() != row["sha256"] or \
                    len(payload) != 4 * row["n_rows"] * row["n_cols"]:
                raise StoreError(f"the stored predictions of trial {row['trial_number']} (fold {row['fold']}) of "
                                 f"study '{study.name}' are damaged", "export a single trial with --single, "
                                 "or run the study again to record them anew")
            array = np.frombuffer(payload, dtype="<f4").reshape(row["n_rows"], row["n_cols"])
            out.setdefault(int(row["trial_number"]), []).append(array[:, 0] if row["n_cols"] == 1 else array)
        return out

    def predictions_size(self, study: StudyRecord) -> tuple[int, int]:
        """Trials whose predictions are kept, and the bytes they take."""
        with self._translate("read the predictions"), self.engine.connect() as conn:
            trials, size = conn.execute(select(func.count(func.distinct(s.predictions.c.trial_number)),
                                               func.coalesce(func.sum(func.length(s.predictions.c.data)), 0))
                                        .where(s.predictions.c.study_id == study.id)).one()
        return int(trials), int(size)

    # ---- exports ---------------------------------------------------------------------------
    def record_export(self, study_id: int, *, now: float, path: str, sha256: str, trial_number: int) -> None:
        with self._translate("record the export"), self.engine.begin() as conn:
            conn.execute(s.exports.insert().values(study_id=study_id, created_at=utc_iso(now), path=path,
                                                   sha256=sha256, trial_number=trial_number))

    def integrity_ok(self) -> bool:
        """SQLite's own consistency check (always true for server databases)."""
        if self.location.path is None:
            return True
        with self.engine.connect() as conn:
            return conn.exec_driver_sql("PRAGMA integrity_check").scalar() == "ok"



_OPTUNA_TABLES = {
    "studies", "version_info", "study_directions", "study_user_attributes", "study_system_attributes",
    "trials", "trial_user_attributes", "trial_system_attributes", "trial_params", "trial_values",
    "trial_intermediate_values", "trial_heartbeats", "alembic_version",
}


def union_length(intervals: list[tuple[float, float]]) -> float:
    """Total length covered by possibly overlapping intervals."""
    total, end = 0.0, float("-inf")
    for a, b in sorted(intervals):
        if b <= end:
            continue
        total += b - max(a, end)
        end = b
    return total


def _server_engine(location: Location) -> Engine:
    """An engine for a database server URL; an unknown kind of database or a missing driver is a
    store error naming the URL's scheme, not a traceback."""
    from sqlalchemy.exc import ArgumentError

    kwargs: dict[str, Any] = {"pool_pre_ping": True}
    if location.url.startswith("postgresql"):
        kwargs["connect_args"] = {"connect_timeout": CONNECT_TIMEOUT_S}
    scheme = location.url.split("://", 1)[0]
    try:
        return create_engine(location.url, **kwargs)
    except (ArgumentError, ImportError) as exc:
        raise StoreError(f"cannot use store URL scheme '{scheme}': {first_line(exc)}",
                         "use a file path, sqlite:///PATH or postgresql://USER@HOST/DB") from exc


def _sqlite_pragmas(dbapi_conn: Any, _record: Any) -> None:
    cursor = dbapi_conn.cursor()
    cursor.execute(f"PRAGMA busy_timeout={BUSY_TIMEOUT_S * 1000}")
    cursor.execute("PRAGMA foreign_keys=ON")
    # Keep the write-ahead log small: by default it grows to 1,000 pages (4 MB) before a checkpoint
    # and is never shrunk, which on a nearly full disk is what fills it (seen on a 4 MB mount: a
    # 160 KB store beside a 3.9 MB log).
    cursor.execute(f"PRAGMA wal_autocheckpoint={WAL_CHECKPOINT_PAGES}")
    cursor.execute(f"PRAGMA journal_size_limit={WAL_LIMIT_BYTES}")
    cursor.close()


def _pid_alive(pid: int) -> bool:
    """Whether a process on this host is alive; a zombie (killed, not yet reaped) counts as dead.

    psutil reads it on any platform (Linux's /proc, the BSDs' sysctl, Windows' process table).
    """
    import psutil

    try:
        return psutil.Process(pid).status() != psutil.STATUS_ZOMBIE
    except psutil.NoSuchProcess:
        return False
    except (psutil.AccessDenied, OSError):
        return True


def _study(row: Any) -> StudyRecord:
    data = dict(row)
    data["settings"] = json.loads(data.pop("settings_json") or "{}")
    return StudyRecord(**data)


def _again(study: str | None) -> str:
    """How to go on after a store fault: the study is intact, so resume it (or repeat a command outside one)."""
    return f"tunelab resume {study}" if study else "run the command again"


def _disk_full_hint(study: str | None) -> str:
    return f"free space, then {_again(study)}"


def _store_error(location: Location, doing: str, exc: DBAPIError, study: str | None = None) -> StoreError:
    text = first_line(exc.orig if exc.orig is not None else exc)
    where = location.display()
    lowered = text.lower()
    again = _again(study)
    if "disk is full" in lowered or "no space left" in lowered or "disk full" in lowered:
        return StoreError(f"disk full at {where}", _disk_full_hint(study), disk_full=True)
    if "not a database" in lowered or "malformed" in lowered:
        return StoreError(f"{where} is corrupt or not a SQLite database",
                          "pass another --store; keep the file for inspection")
    if "authentication" in lowered or ("role" in lowered and "does not exist" in lowered):
        return StoreError(f"cannot log in to {where}: {text}", "check the user and password in the store URL")
    if "could not connect" in lowered or "connection refused" in lowered or "timeout expired" in lowered \
            or "could not translate host" in lowered:
        return StoreError(f"cannot reach the database at {where}: {text}",
                          "check the host, port and that the server runs", transient=True)
    if exc.connection_invalidated or "server closed the connection" in lowered or "could not receive data" in lowered \
            or "connection" in lowered and ("lost" in lowered or "closed" in lowered or "terminat" in lowered):
        return StoreError(f"lost the connection to the database at {where}: {text}",
                          f"check the network and the server, then {again}", transient=True)
    if "does not exist" in lowered and "database" in lowered:
        return StoreError(f"database in {where} does not exist: {text}", "create it first, e.g. createdb NAME")
    if "readonly" in lowered or "read-only" in lowered or "permission" in lowered:
        return StoreError(f"cannot write to {where}: {text}", "fix permissions or pass another --store")
    if "locked" in lowered:
        return StoreError(f"store {where} stayed locked for {BUSY_TIMEOUT_S}s while trying to {doing}",
                          "another process holds a long write; try again")
    return StoreError(f"store error while trying to {doing}: {text}", "run again with --debug for details")
