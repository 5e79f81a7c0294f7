"""The ``report`` verb: read one study from the store and write it as one self-contained HTML file."""

from __future__ import annotations

import contextlib
import math
import os
import re
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from tunelab.engine import Clock, SystemClock
from tunelab.errors import InputError, TunelabError
from tunelab.insight import (
    GENERATOR,
    BestTrial,
    ChartPoint,
    FamilyLine,
    ImportanceReport,
    ReportData,
    Thresholds,
    importance_table,
    render_report,
    space_reasons,
)
from tunelab.ops._insight import METRIC_TOLERANCE, scored_records
from tunelab.ops._trials import Phases
from tunelab.store import TRIAL_STATES, Store, StudyRecord, TrialRecord, best_of, utc_iso


@dataclass
class ReportResult:
    """Where the report went and what it covers."""

    study: str
    path: str
    trials: int
    best_value: float | None
    metric: str
    bytes: int

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def default_report_path(study: str) -> Path:
    """``<study>.report.html`` in the current folder (characters unsafe in file names become ``-``)."""
    safe = re.sub(r"[^A-Za-z0-9_.-]+", "-", study).strip("-.") or "study"
    return Path(f"{safe}.report.html")


def write_report(name: str, *, store: str | None = None, out: Path | None = None,
                 clock: Clock | None = None) -> ReportResult:
    """Write the study's report to ``out`` (default :func:`default_report_path`) in one step.

    The page is written to a temporary file beside ``out`` and renamed over it, so a reader never
    sees half a report. An existing file is replaced only if an earlier report wrote it: a slip
    such as ``--out data.csv`` must not destroy data.
    """
    path = out if out is not None else default_report_path(name)
    _check_out(path)
    data = report_data(name, store=store, clock=clock)
    page = render_report(data).encode("utf-8")
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        tmp.write_bytes(page)
        os.replace(tmp, path)
    except OSError as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise InputError(f"cannot write the report to {path}: {exc.strerror or exc}",
                         "choose an --out path in a folder you can write to") from exc
    total = sum(data.counts[s] for s in ("complete", "pruned", "failed", "interrupted"))
    return ReportResult(data.study, str(path), total, data.best.value if data.best else None, data.metric, len(page))


def report_data(name: str, *, store: str | None = None, clock: Clock | None = None) -> ReportData:
    """Everything the report shows, read from the store as plain values (importance included)."""
    clock = clock or SystemClock()
    with Store.open(store) as st:
        record = st.get_study(name)
        phases = Phases.of(st, record)
        launches = st.launches(record.id)
        wall, cpu = st.spent(record.id)
        trials = st.trials(record)
    distributions = phases.distributions()
    counts = {s: 0 for s in TRIAL_STATES}
    points: list[ChartPoint] = []
    families: dict[str, dict[str, Any]] = {  # every family searched, tried or not
        fam: _empty_family() for number in sorted(phases.spaces) for fam in phases.spaces[number].families}
    maximize = record.direction == "maximize"

    def better(value: float, than: float | None) -> bool:
        return than is None or (value > than if maximize else value < than)

    for t in trials:
        counts[t.state] += 1
        if t.scored:
            points.append(ChartPoint(t.number, float(t.value), t.state))  # type: ignore[arg-type]
        if t.state in ("running", "waiting"):
            continue
        family = phases.family(t)
        if family:
            line = families.setdefault(family, _empty_family())
            line["trials"] += 1
            line[t.state] = line.get(t.state, 0) + 1
            if t.state == "complete" and t.scored and better(float(t.value), line["best"]):  # type: ignore[arg-type]
                line["best"], line["at"] = float(t.value), t.number  # type: ignore[arg-type]
    best = best_of(trials, record.direction)
    importance, note = _importance(record, scored_records(trials, distributions), distributions)
    return ReportData(
        study=record.name, data_path=record.data_path, target=record.target, task=record.task, metric=record.metric,
        direction=record.direction,  # type: ignore[arg-type]
        seed=record.seed, created_at=record.created_at,
        first_start=min((ln.started_at for ln in launches), default=None),
        last_activity=max((ln.heartbeat_at for ln in launches), default=None), launches=len(launches),
        wall_spent=wall, wall_budget=record.budget_wall, cpu_spent=cpu, cpu_budget=record.budget_cpu,
        trials_cap=record.budget_trials, counts=counts,
        best=None if best is None else BestTrial(best.number, float(best.value), best.fold_std,  # type: ignore[arg-type]
                                                 phases.family(best), phases.config(best)),
        points=points, families=_family_lines(families, maximize),
        importance=importance, importance_note=note, reasons=space_reasons(phases.current),
        phases=[(p.number, p.first_trial, p.reason) for p in phases.records], written_at=utc_iso(clock.now()),
    )


def _empty_family() -> dict[str, Any]:
    return {"trials": 0, "complete": 0, "pruned": 0, "best": None, "at": None}


def _family_lines(families: dict[str, dict[str, Any]], maximize: bool) -> list[FamilyLine]:
    lines = [FamilyLine(name, f["trials"], f["complete"], f["pruned"], f["best"], f["at"]) for name, f in families.items()]

    def rank(line: FamilyLine) -> tuple[bool, float]:  # best families first, those without a score last
        if line.best is None:
            return (True, 0.0)
        return (False, -line.best if maximize else line.best)

    return sorted(lines, key=rank)


def _importance(record: StudyRecord, trials: list[TrialRecord],
                distributions: dict[str, Any]) -> tuple[ImportanceReport | None, str]:
    """The importance table as ``tunelab importance`` computes it, or one plain line saying why not."""
    thresholds = Thresholds(spread_tolerance=METRIC_TOLERANCE.get(record.metric))
    finished = len(trials)
    if not any(t.state == "complete" for t in trials):
        return None, "No trial has completed yet, so there is nothing to rank parameters by."
    if finished < thresholds.min_trials:
        return None, (f"Too few finished trials to say which parameters mattered: {finished} so far, at least "
                      f"{thresholds.min_trials} needed; run more with: tunelab resume {record.name} --extend 10m")
    try:
        report = importance_table(trials, distributions, direction=record.direction,  # type: ignore[arg-type]
                                  thresholds=thresholds)
    except TunelabError as exc:
        return None, f"Parameter importance could not be computed: {exc.message}."
    if not report.rows:
        return None, "The search space has no searched parameters to rank."
    if all(g.trials_needed for g in report.groups):
        return None, (f"Too few finished trials to say which parameters mattered: {finished} so far; about "
                      f"{report.trials_needed} more would give a stable answer.")
    if not report.enough_trials:
        return report, (f"Some rows rest on too few trials (\u201ckeep tuning\u201d until then); about "
                        f"{report.trials_needed} more trials would make every row stable.")
    return report, ""


def _check_out(path: Path) -> None:
    if path.is_dir():
        raise InputError(f"--out {path} is a folder", "pass a file path such as report.html")
    if not path.parent.exists():
        raise InputError(f"folder {path.parent} does not exist", "create it, or choose another --out")
    if path.exists() and not _is_report(path):
        raise InputError(f"{path} exists and is not a report written by tunelab",
                         "pass a new file name (or delete the file first)")


def _is_report(path: Path) -> bool:
    try:
        with open(path, "rb") as handle:
            head = handle.read(600)
    except OSError:
        return False
    return f'<meta name="generator" content="{GENERATOR}">'.encode() in head
