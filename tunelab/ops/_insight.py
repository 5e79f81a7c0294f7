"""The ``importance`` and ``freeze`` verbs: which knobs mattered, and narrowing the space to the rest."""

from __future__ import annotations

import dataclasses
import statistics
from dataclasses import asdict, dataclass
from typing import Any, Mapping

from tunelab.engine import Clock, SystemClock
from tunelab.values import plain
from tunelab.errors import InputError, StudyStateError
from tunelab.insight import ImportanceReport, Thresholds, importance_table
from tunelab.ops._trials import Phases
from tunelab.space import ParamSpec, SpaceSpec
from tunelab.store import Store, StudyRecord, TrialRecord

# Smallest score change worth tuning for, by metric (common practice, no source); None = relative.
METRIC_TOLERANCE: dict[str, float | None] = {"roc_auc": 0.002, "accuracy": 0.002, "r2": 0.002,
                                             "log_loss": None, "rmse": None, "mae": None}


def study_importance(name: str, *, store: str | None = None, method: str = "fanova", family: str | None = None,
                     tolerance: float | None = None, seed: int = 0) -> tuple[StudyRecord, ImportanceReport]:
    """The importance table of a study's finished trials (complete, and pruned at the fidelity they reached)."""
    if method not in ("fanova", "ped-anova"):
        raise InputError(f"unknown importance method '{method}'", "use fanova or ped-anova")
    with Store.open(store) as st:
        record = st.get_study(name)
        trials, distributions, notes = study_records(st, record)
    if not any(t.state == "complete" for t in trials):
        raise StudyStateError(f"study '{name}' has no finished trials yet, so nothing to rank",
                              f"run more trials: tunelab resume {name} --extend 10m")
    if family is not None and family not in _families(distributions):
        raise InputError(f"study '{name}' has no family '{family}'",
                         f"families are: {', '.join(_families(distributions)) or '(none)'}")
    if tolerance is None:
        tolerance = METRIC_TOLERANCE.get(record.metric)
    report = importance_table(trials, distributions, direction=record.direction,  # type: ignore[arg-type]
                              method=method, family=family,  # type: ignore[arg-type]
                              thresholds=Thresholds(spread_tolerance=tolerance), seed=seed)
    return record, dataclasses.replace(report, notes=report.notes + notes)


@dataclass
class FreezeResult:
    """The new phase: which parameters were frozen at which values, and why."""

    study: str
    phase: int
    frozen: dict[str, Any]
    reasons: dict[str, str]
    first_trial: int

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def freeze_parameters(name: str, assignments: Mapping[str, str], *, auto: bool = False, store: str | None = None,
                      clock: Clock | None = None) -> FreezeResult:
    """Attach a narrowed space to the study as a new phase; ``resume`` continues in it.

    ``assignments`` maps parameter names to values as typed (``hist_gb.max_iter=300``); ``auto``
    adds every parameter whose verdict is "freeze at VALUE" or "no measurable effect".
    """
    clock = clock or SystemClock()
    if not assignments and not auto:
        raise InputError("nothing to freeze", "name parameters as PARAM=VALUE, or pass --auto")
    with Store.open(store) as st:
        record = st.get_study(name)
        phases = st.phases(record.id)
        space = SpaceSpec.from_json(phases[-1].space_json)
        original = SpaceSpec.from_json(phases[0].space_json)  # ranges to check values against
    frozen: dict[str, Any] = {}
    reasons: dict[str, str] = {}
    for param, raw in assignments.items():
        frozen[param] = _parse_value(original, param, raw)
        reasons[param] = "set by hand"
    if auto:
        _, report = study_importance(name, store=store)
        for row in report.rows:
            if row.param in frozen or row.param == "family" or space.lookup(row.param) is None:
                continue
            if space.lookup(row.param).kind == "fixed":  # type: ignore[union-attr]
                continue
            if row.action in ("freeze", "no measurable effect") and row.best_value is not None:
                frozen[row.param] = plain(row.best_value)
                reasons[row.param] = row.verdict
    if not frozen:
        raise StudyStateError(f"no parameter of study '{name}' can be frozen yet",
                              "every parameter still matters, or more trials are needed (see `tunelab importance`)")
    narrowed = space.freeze(frozen, reason="frozen after importance")
    with Store.open(store) as st:
        first = len(st.trials(record))
        why = "; ".join(f"{p}={frozen[p]} ({reasons[p]})" for p in frozen)
        phase = st.add_phase(record.id, now=clock.now(), reason=f"froze {why}", space_json=narrowed.to_json(),
                             first_trial=first)
    return FreezeResult(record.name, phase, frozen, reasons, first)


def study_records(st: Store, record: StudyRecord) -> tuple[list[TrialRecord], dict[str, ParamSpec], tuple[str, ...]]:
    """A study's scored trials (complete, and pruned at the fidelity they reached), every parameter
    searched in any phase, and notes on reading the table."""
    phases = Phases.of(st, record)
    distributions = phases.distributions()
    trials = st.trials(record)
    return scored_records(trials, distributions), distributions, _ceiling_notes(trials, distributions)


def _ceiling_notes(trials: list[TrialRecord], distributions: Mapping[str, Any]) -> tuple[str, ...]:
    """Say which rows are ceilings: boosting keeps the rounds its first fold scored best."""
    used: dict[str, list[float]] = {}
    for t in trials:
        family = t.params.get("family")  # absent when the space has one family
        for key, ceiling in t.params.items():
            if (t.rounds is not None and key.endswith(".max_iter") and key in distributions and ceiling
                    and (family is None or key == f"{family}.max_iter")):
                used.setdefault(key, []).append(float(t.rounds) / float(ceiling))
    return tuple(f"{key} is a ceiling, not the rounds used: each trial kept the rounds its first fold scored best "
                 f"(median {statistics.median(shares):.0%} of the ceiling over {len(shares)} trials)"
                 for key, shares in sorted(used.items()))


def scored_records(trials: list[TrialRecord], distributions: Mapping[str, Any]) -> list[TrialRecord]:
    """The trials with a score, their parameters narrowed to the searched ones."""
    return [dataclasses.replace(t, params={k: v for k, v in t.params.items() if k in distributions})
            for t in trials if t.scored]


def _families(distributions: Mapping[str, Any]) -> list[str]:
    fam = distributions.get("family")
    if fam is not None:
        return [str(c) for c in fam.choices]
    return sorted({k.split(".", 1)[0] for k in distributions if "." in k and not k.startswith("prep.")})


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
    if spec.low is not None and not spec.low <= value <= spec.high:  # type: ignore[operator]
        raise InputError(f"{param}={value} is outside its range [{spec.low}, {spec.high}]",
                         "choose a value inside the searched range")
    return value


