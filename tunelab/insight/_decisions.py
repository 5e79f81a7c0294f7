"""What a user can decide from a study: families to drop, knobs to freeze, and whether to go on.

``decide`` puts the three together from plain evidence (``StudyEvidence``, which the ops layer
reads from the store): the family verdicts first (``_families``), then the importance table on the
comparable scores with the dropped families' knobs marked, then the stop-or-continue forecast
(``_forecast``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from tunelab.insight._evidence import comparable, fold_fit
from tunelab.insight._families import FamilyVerdict, family_verdicts
from tunelab.insight._forecast import Forecast, forecast
from tunelab.insight._importance import FANOVA_SECONDS, ImportanceReport, Method, Thresholds, importance_table
from tunelab.insight._pace import Pace
from tunelab.space import ParamSpec
from tunelab.store import TrialRecord, best_of

DEFAULT_HORIZON = 600.0  # seconds of ledger time a forecast looks ahead (--horizon)
FIRM_ACTIONS = ("freeze", "no measurable effect")


@dataclass(frozen=True)
class StudyEvidence:
    """Everything the decisions rest on, as plain values.

    Attributes
    ----------
    trials
        Every trial of the study.
    space
        Every parameter searched in any phase (``SpaceSpec.searched()``, widest phase first).
    families
        The families of the current phase's space, dropped ones included.
    dropped
        Families an earlier phase dropped.
    direction, metric
        The study's.
    finished_at
        Trial number -> ledger seconds when it finished (complete trials at least).
    spent
        Ledger seconds spent so far.
    pace
        The study's pace.
    """

    trials: tuple[TrialRecord, ...]
    space: Mapping[str, ParamSpec]
    families: tuple[str, ...]
    dropped: tuple[str, ...]
    direction: Literal["maximize", "minimize"]
    metric: str
    finished_at: Mapping[int, float]
    spent: float
    pace: Pace


@dataclass(frozen=True)
class Decisions:
    """Family verdicts, the importance table (or why there is none), and the forecast."""

    families: tuple[FamilyVerdict, ...]
    importance: ImportanceReport | None
    importance_note: str
    forecast: Forecast | None
    forecast_note: str
    metric: str

    @property
    def dropped(self) -> tuple[str, ...]:
        return tuple(f.family for f in self.families if f.action == "drop")

    def firm(self) -> list[str]:
        """One line per decision already firm: dropped families, then frozen and no-effect knobs."""
        lines = [f"drop {f.family}: {f.reason}" for f in self.families if f.action == "drop"]
        if self.importance is not None:
            lines += [f"{r.param}: {r.verdict}" for r in self.importance.rows if r.action in FIRM_ACTIONS]
        return lines

    def forecast_line(self) -> str:
        return self.forecast.words(self.metric) if self.forecast is not None else self.forecast_note

    def to_dict(self) -> dict[str, Any]:
        return {"families": [f.to_dict() for f in self.families],
                "knobs": [] if self.importance is None else [
                    {"param": r.param, "family": r.family, "action": r.action, "verdict": r.verdict, "reason": r.reason}
                    for r in self.importance.rows],
                "firm": self.firm(), "importance_note": self.importance_note}


def default_worth(trials: Sequence[TrialRecord], direction: str) -> float:
    """The best trial's fold noise: the standard deviation of its fold scores over sqrt(folds)."""
    best = best_of(trials, direction)
    if best is None or len(best.fold_scores) < 2:
        return 0.0
    return float(np.std(best.fold_scores) / math.sqrt(len(best.fold_scores)))


def decide(evidence: StudyEvidence, *, method: Method = "fanova", family: str | None = None,
           thresholds: Thresholds = Thresholds(), horizon: float = DEFAULT_HORIZON, worth: float | None = None,
           seconds: float = FANOVA_SECONDS, n_bootstrap: int = 16, rank_knobs: bool = True,
           seed: int = 0) -> Decisions:
    """Decide what can be decided from the study's evidence.

    Parameters
    ----------
    evidence
        The study, as plain values.
    method, family, thresholds, n_bootstrap
        For the importance table (see ``importance_table``).
    horizon
        Ledger seconds of the stretch the forecast looks at.
    worth
        The smallest gain worth a stretch, in metric units; ``None``: the best trial's fold noise.
    seconds
        The importance computation's time allowance.
    rank_knobs
        Whether to compute the importance table (``status`` shows families and the forecast only).
    seed
        Seeds every random choice.
    """
    trials = list(evidence.trials)
    verdicts = family_verdicts(trials, evidence.families, direction=evidence.direction, pace=evidence.pace,
                               dropped=evidence.dropped)
    dropped = sorted({*evidence.dropped, *(v.family for v in verdicts if v.action == "drop")})
    fit = fold_fit(trials)
    scored = [t for t in comparable(trials, fit) if t.params]
    importance: ImportanceReport | None = None
    note = ""
    if not rank_knobs:
        note = "see `tunelab importance` for the parameters"
    elif not any(t.state == "complete" for t in trials):
        note = "no trial has completed yet, so there is nothing to rank parameters by"
    elif not evidence.space:
        note = "the search space has no searched parameters to rank"
    else:
        narrowed = [_searched_only(t, evidence.space) for t in scored]
        importance = importance_table(narrowed, evidence.space, direction=evidence.direction, method=method,
                                      family=family, thresholds=thresholds, dropped=dropped, pace=evidence.pace,
                                      seconds=seconds, n_bootstrap=n_bootstrap, seed=seed)
    finished = [(evidence.finished_at[t.number], t.score) for t in trials
                if t.state == "complete" and t.scored and t.number in evidence.finished_at]
    gain_worth = default_worth(trials, evidence.direction) if worth is None else worth
    outlook = forecast(finished, evidence.spent, direction=evidence.direction, horizon=horizon, worth=gain_worth,
                       seed=seed)
    outlook_note = "" if outlook is not None else (
        f"no forecast yet: {len(finished)} complete trial{'s' if len(finished) != 1 else ''}, at least 3 needed")
    return Decisions(verdicts, importance, note, outlook, outlook_note, evidence.metric)


def _searched_only(trial: TrialRecord, space: Mapping[str, ParamSpec]) -> TrialRecord:
    from dataclasses import replace

    return replace(trial, params={k: v for k, v in trial.params.items() if k in space})


__all__ = ["DEFAULT_HORIZON", "Decisions", "StudyEvidence", "decide", "default_worth"]
