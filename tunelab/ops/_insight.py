"""The ``importance`` and ``freeze`` verbs: what to drop, what to freeze, and whether to go on.

``importance`` reads a study as plain evidence (``study_evidence``) and asks ``tunelab.insight`` to
decide; ``freeze`` writes what was decided (or what the user says) as a new phase of the study.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

from tunelab.engine import Clock, SystemClock
from tunelab.errors import InputError, StudyStateError
from tunelab.insight import (
    DEFAULT_HORIZON,
    FANOVA_SECONDS,
    Decisions,
    Method,
    Pace,
    StudyEvidence,
    Thresholds,
    decide,
)
from tunelab.ops._trials import Ledger, Phases
from tunelab.space import SpaceSpec
from tunelab.store import FINISHED_STATES, Store, StudyRecord, TrialRecord
from tunelab.values import plain

# Smallest score change worth tuning for, by metric (common practice, no source); None = relative.
METRIC_TOLERANCE: dict[str, float | None] = {"roc_auc": 0.002, "accuracy": 0.002, "r2": 0.002,
                                             "log_loss": None, "rmse": None, "mae": None}
METHODS = ("fanova", "ped-anova")


@dataclass(frozen=True)
class DecisionOptions:
    """How to decide: the importance method, one family only, the tolerance, the forecast's stretch
    and what gain is worth it, and the seconds the importance computation may take."""

    method: Method = "fanova"
    family: str | None = None
    tolerance: float | None = None
    horizon: float = DEFAULT_HORIZON
    worth: float | None = None
    seconds: float | None = None
    rank_knobs: bool = True
    seed: int = 0

    def __post_init__(self) -> None:
        if self.method not in METHODS:
            raise InputError(f"unknown importance method '{self.method}'", "use fanova or ped-anova")
        if not (math.isfinite(self.horizon) and self.horizon > 0):
            raise InputError(f"--horizon must be a positive duration, got {self.horizon}", "e.g. --horizon 10m")
        if self.worth is not None and not (math.isfinite(self.worth) and self.worth >= 0):
            raise InputError(f"--worth must be a number of metric units >= 0, got {self.worth}",
                             "e.g. --worth 0.001 (the smallest gain worth another stretch)")


def study_evidence(st: Store, record: StudyRecord) -> StudyEvidence:
    """A study as the plain evidence the decisions rest on."""
    phases = Phases.of(st, record)
    trials = st.trials(record)
    ledger = Ledger.of(st.launches(record.id))
    named = [_with_family(t, phases) for t in trials]
    ended = [t for t in named if t.state in FINISHED_STATES]
    by_family: dict[str, int] = {}
    for t in ended:
        by_family[t.family] = by_family.get(t.family, 0) + 1
    current = phases.current
    pace = Pace(ledger.spent, len(ended), by_family, max(1, len(current.kept_families)))
    finished_at = {t.number: ledger.at(t.finished) for t in named if t.finished is not None}
    return StudyEvidence(trials=tuple(named), space=phases.distributions(), families=tuple(current.families),
                         dropped=current.dropped, direction=record.direction,
                         metric=record.metric, finished_at=finished_at, spent=ledger.spent, pace=pace)


def _with_family(trial: TrialRecord, phases: Phases) -> TrialRecord:
    """A trial of a one-family phase is judged as that family's trial (its params gain ``family``)."""
    if "family" in trial.params or len(phases.first.families) < 2:
        return trial
    from dataclasses import replace

    family = phases.family(trial)
    return replace(trial, params={**trial.params, "family": family}) if family else trial


def decisions_for(st: Store, record: StudyRecord, options: DecisionOptions = DecisionOptions()) -> Decisions:
    """Decide from a study already open in ``st`` (``run``'s first look, ``status``, the report)."""
    evidence = study_evidence(st, record)
    if options.family is not None and options.family not in evidence.families:
        raise InputError(f"study '{record.name}' has no family '{options.family}'",
                         f"families are: {', '.join(evidence.families) or '(none)'}")
    tolerance = options.tolerance if options.tolerance is not None else METRIC_TOLERANCE.get(record.metric)
    seconds = FANOVA_SECONDS if options.seconds is None else options.seconds
    decisions = decide(evidence, method=options.method, family=options.family,
                       thresholds=Thresholds(spread_tolerance=tolerance), horizon=options.horizon,
                       worth=options.worth, rank_knobs=options.rank_knobs, seed=options.seed, seconds=seconds)
    if decisions.importance is not None:
        notes = _ceiling_notes(list(evidence.trials), evidence.space)
        decisions = _with_notes(decisions, notes)
    return decisions


def study_importance(name: str, *, store: str | None = None, options: DecisionOptions = DecisionOptions()
                     ) -> tuple[StudyRecord, Decisions]:
    """The decisions of a study: family verdicts, the importance table with verdicts, the forecast.

    Raises
    ------
    StudyStateError
        No trial of the study has finished yet.
    """
    with Store.open(store) as st:
        record = st.get_study(name)
        if not any(t.state == "complete" for t in st.trials(record)):
            raise StudyStateError(f"study '{name}' has no finished trials yet, so nothing to rank",
                                  f"run more trials: tunelab resume {name} --extend 10m")
        return record, decisions_for(st, record, options)


@dataclass
class FreezeResult:
    """The new phase: which parameters were frozen at which values, which families dropped, and why."""

    study: str
    phase: int
    frozen: dict[str, Any]
    reasons: dict[str, str]
    first_trial: int
    dropped: dict[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def freeze_parameters(name: str, assignments: Mapping[str, str], *, auto: bool = False, store: str | None = None,
                      clock: Clock | None = None) -> FreezeResult:
    """Attach a narrowed space to the study as a new phase; ``resume`` continues in it.

    ``assignments`` maps parameter names to values as typed (``hist_gb.max_iter=300``); ``auto``
    drops every family whose verdict is "drop" and freezes every knob whose verdict is "freeze at
    VALUE" or "no measurable effect".
    """
    clock = clock or SystemClock()
    if not assignments and not auto:
        raise InputError("nothing to freeze", "name parameters as PARAM=VALUE, or pass --auto")
    with Store.open(store) as st:
        record = st.get_study(name)
        phases = Phases.of(st, record)
    space, original = phases.current, phases.first  # values are checked against the first, widest ranges
    frozen: dict[str, Any] = {}
    reasons: dict[str, str] = {}
    dropped: dict[str, str] = {}
    for param, raw in assignments.items():
        frozen[param] = _parse_value(original, param, raw)
        reasons[param] = "set by hand"
    if auto:
        _, decisions = study_importance(name, store=store)
        dropped = {f.family: f.reason for f in decisions.families
                   if f.action == "drop" and f.family not in space.dropped and f.family in space.families}
        for row in decisions.importance.rows if decisions.importance is not None else ():
            spec = space.lookup(row.param)
            if row.param in frozen or row.param == "family" or spec is None or spec.kind == "fixed":
                continue
            if row.family in dropped or row.family in space.dropped:
                continue
            if row.action in ("freeze", "no measurable effect") and row.best_value is not None:
                frozen[row.param] = plain(row.best_value)
                reasons[row.param] = row.verdict
    if not frozen and not dropped:
        raise StudyStateError(f"nothing in study '{name}' can be dropped or frozen yet",
                              "every family and knob is still a contender or undecided (see `tunelab importance`)")
    narrowed = space.freeze(frozen, reason="frozen after importance", drop=tuple(dropped))
    with Store.open(store) as st:
        first = len(st.trials(record))
        why = "; ".join([*(f"dropped {f}" for f in dropped), *(f"{p}={frozen[p]} ({reasons[p]})" for p in frozen)])
        phase = st.add_phase(record.id, now=clock.now(), reason=f"froze {why}" if frozen and not dropped else why,
                             space_json=narrowed.to_json(), first_trial=first)
    return FreezeResult(record.name, phase, frozen, reasons, first, dropped)


def _with_notes(decisions: Decisions, notes: tuple[str, ...]) -> Decisions:
    from dataclasses import replace

    report = decisions.importance
    assert report is not None  # only called when there is an importance table
    return replace(decisions, importance=replace(report, notes=report.notes + notes))


def _ceiling_notes(trials: list[TrialRecord], space: Mapping[str, Any]) -> tuple[str, ...]:
    """Say which rows are ceilings: boosting keeps the rounds its first fold scored best."""
    used: dict[str, list[float]] = {}
    for t in trials:
        family = t.params.get("family")  # absent when the space has one family
        for key, ceiling in t.params.items():
            if (t.rounds is not None and key.endswith(".max_iter") and key in space and ceiling
                    and (family is None or key == f"{family}.max_iter")):
                used.setdefault(key, []).append(float(t.rounds) / float(ceiling))
    return tuple(f"{key} is a ceiling, not the rounds used: each trial kept the rounds its first fold scored best "
                 f"(median {statistics.median(shares):.0%} of the ceiling over {len(shares)} trials)"
                 for key, shares in sorted(used.items()))


def _parse_value(space: SpaceSpec, param: str, raw: str) -> Any:
    spec = space.lookup(param)
    if spec is None:
        known = ", ".join(sorted(space.distributions()))
        raise InputError(f"unknown parameter '{param}'", f"parameters are: {known}")
    try:
        if spec.kind == "float":
            value: Any = float(raw)
        elif spec.kind == "int":
            value = int(float(raw))
        elif spec.kind == "categorical" or param == "family":
            matches = [c for c in spec.choices if str(c) == raw]
            if not matches:
                raise InputError(f"'{raw}' is not a choice of {param}",
                                 f"choices are: {', '.join(map(str, spec.choices))}")
            return matches[0]
        else:
            return spec.value
    except ValueError as exc:
        raise InputError(f"'{raw}' is not a number, as {param} needs", f"give {param}=NUMBER") from exc
    if spec.low is not None and not spec.low <= value <= spec.high:
        raise InputError(f"{param}={value} is outside its range [{spec.low}, {spec.high}]",
                         "choose a value inside the searched range")
    return value
