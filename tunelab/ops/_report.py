"""The ``report`` verb: read one study from the store and write it as one self-contained HTML file."""

from __future__ import annotations

import re
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from tunelab.engine import Clock, SystemClock
from tunelab.errors import InputError
from tunelab.files import write_atomically
from tunelab.insight import (
    GENERATOR,
    BestTrial,
    ChartPoint,
    Decisions,
    FamilyLine,
    ReportData,
    render_report,
    space_reasons,
)
from tunelab.ops._ensemble import ensemble_words
from tunelab.ops._insight import DecisionOptions, decisions_for
from tunelab.ops._trials import Phases
from tunelab.store import TRIAL_STATES, Store, best_of, utc_iso


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
                 clock: Clock | None = None, options: DecisionOptions = DecisionOptions()) -> ReportResult:
    """Write the study's report to ``out`` (default :func:`default_report_path`) in one step.

    The page is written to a temporary file beside ``out`` and renamed over it, so a reader never
    sees half a report. An existing file is replaced only if an earlier report wrote it: a slip
    such as ``--out data.csv`` must not destroy data.
    """
    path = out if out is not None else default_report_path(name)
    _check_out(path)
    data = report_data(name, store=store, clock=clock, options=options)
    page = render_report(data).encode("utf-8")
    write_atomically(path, lambda tmp: tmp.write_bytes(page), "report")
    total = sum(data.counts[s] for s in ("complete", "pruned", "failed", "interrupted"))
    return ReportResult(data.study, str(path), total, data.best.value if data.best else None, data.metric, len(page))


def report_data(name: str, *, store: str | None = None, clock: Clock | None = None,
                options: DecisionOptions = DecisionOptions()) -> ReportData:
    """Everything the report shows, read from the store as plain values (decisions included)."""
    clock = clock or SystemClock()
    with Store.open(store) as st:
        record = st.get_study(name)
        phases = Phases.of(st, record)
        launches = st.launches(record.id)
        wall, cpu = st.spent(record.id)
        trials = st.trials(record)
        decisions = decisions_for(st, record, options)
        ensemble = ensemble_words(st, record) if st.predictions_size(record)[0] >= 2 else ""
    counts: dict[str, int] = {s: 0 for s in TRIAL_STATES}
    points: list[ChartPoint] = []
    families: dict[str, dict[str, Any]] = {  # every family searched, tried or not
        fam: _empty_family() for number in sorted(phases.spaces) for fam in phases.spaces[number].families}
    maximize = record.direction == "maximize"

    def better(value: float, than: float | None) -> bool:
        return than is None or (value > than if maximize else value < than)

    for t in trials:
        counts[t.state] += 1
        if t.scored:
            points.append(ChartPoint(t.number, t.score, t.state))  # type: ignore[arg-type]  # scored: complete or pruned
        if t.state in ("running", "waiting"):
            continue
        family = phases.family(t)
        if family:
            line = families.setdefault(family, _empty_family())
            line["trials"] += 1
            line[t.state] = line.get(t.state, 0) + 1
            if t.state == "complete" and t.scored and better(t.score, line["best"]):
                line["best"], line["at"] = t.score, t.number
    best = best_of(trials, record.direction)
    importance, note = _importance(record.name, decisions)
    return ReportData(
        study=record.name, data_path=record.data_path, target=record.target, task=record.task, metric=record.metric,
        direction=record.direction,
        seed=record.seed, created_at=record.created_at,
        first_start=min((ln.started_at for ln in launches), default=None),
        last_activity=max((ln.heartbeat_at for ln in launches), default=None), launches=len(launches),
        wall_spent=wall, wall_budget=record.budget_wall, cpu_spent=cpu, cpu_budget=record.budget_cpu,
        trials_cap=record.budget_trials, counts=counts,
        best=None if best is None else BestTrial(best.number, best.score, best.fold_std,
                                                 phases.family(best), phases.config(best)),
        points=points, families=_family_lines(families, maximize),
        importance=importance, importance_note=note, reasons=space_reasons(phases.current),
        phases=[(p.number, p.first_trial, p.reason) for p in phases.records], written_at=utc_iso(clock.now()),
        family_verdicts=decisions.families, forecast=decisions.forecast_line(), ensemble=ensemble,
    )


def _empty_family() -> dict[str, Any]:
    return {"trials": 0, "complete": 0, "pruned": 0, "best": None, "at": None}


def _family_lines(families: dict[str, dict[str, Any]], maximize: bool) -> list[FamilyLine]:
    lines = [FamilyLine(name, f["trials"], f["complete"], f["pruned"], f["best"], f["at"])
             for name, f in families.items()]

    def rank(line: FamilyLine) -> tuple[bool, float]:  # best families first, those without a score last
        if line.best is None:
            return (True, 0.0)
        return (False, -line.best if maximize else line.best)

    return sorted(lines, key=rank)


def _importance(study: str, decisions: Decisions) -> tuple[Any, str]:
    """The importance table as ``tunelab importance`` computes it, or one plain line saying why not."""
    report = decisions.importance
    if report is None:
        return None, (decisions.importance_note[:1].upper() + decisions.importance_note[1:] + ".")
    if not report.rows:
        return None, "The search space has no searched parameters to rank."
    if all(r.action == "undecided" for r in report.rows):
        finished = max((g.n_trials for g in report.groups), default=0)
        return None, (f"Too few finished trials to say which parameters mattered: {finished} so far; about "
                      f"{report.trials_needed} more would decide (tunelab resume {study} --extend 10m).")
    if not report.enough_trials:
        return report, (f"Some rows are undecided; about {report.trials_needed} more trials would decide them "
                        f"(tunelab resume {study} --extend 10m).")
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
