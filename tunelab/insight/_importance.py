"""Which knobs can I stop turning, and at what value?

Pure functions over plain trial records (no database): each parameter gets the share of score
variance it explains, an 80 % interval from resampling the trials, the best value seen, how far
it moves the score in metric units, and a verdict in plain words.

How the pieces fit
------------------
* **Groups.** A parameter is judged among the trials that can show its effect. The ``family``
  parameter and every shared parameter (``prep.*`` and anything not named ``<family>.<name>``)
  are judged over all trials; a conditional parameter ``<family>.<name>`` only over that
  family's trials. Asked about one family (``family=``), the table judges that family's
  parameters and the shared ones over that family's trials only.
* **Importance** (``_importance_methods``, the one module here that imports optuna): fANOVA gives
  the share of score variance explained by each parameter's main effect; it is not normalised,
  so the shares of a group add up to at most one and the rest is interactions and noise.
  PED-ANOVA gives how much each parameter matters for reaching the top ``top_quantile`` of
  scores, normalised to add up to one within a group.
* **Interval.** fANOVA's trees are grown one at a time on their own bootstrap resamples: the
  importance is their mean and the interval their 10th-90th percentile. PED-ANOVA's interval
  takes its width from random halves of the trials, placed around the answer on all trials.
* **Spread** (``_spread``): how far the predicted score moves across a parameter's values, in
  metric units, and the noise floor that made-up parameters show.
* **Speed.** Numeric values are snapped to cells of their sampling scale before fANOVA, and the
  trees are as deep as a time model allows (``_choose_depth``); the depth used is in the report.

Verdicts
--------
A verdict is said only with evidence (``Thresholds`` has the numbers):

* *no measurable effect*: the interval's upper end is below the negligible share, the parameter
  moves a trial's score (its *reach*, interactions included, see ``_spread``) by no more than is
  measurable — the larger of the tolerance and what made-up knobs doing nothing show — and the
  study could have seen an effect three times that size: planted in the scores, it is recovered above
  what is measurable (a power check, see ``_spread.planted_reach``), with at least
  ``absence_trials`` trials in the group.  Absence needs that power; without it a weak knob reads *freeze
  at VALUE* or *undecided*, never *no measurable effect*;
* *freeze at VALUE*: the upper end is below the freeze share and the best trial's value is where
  the predicted score is best;
* *keep tuning*: the interval's lower end is above the negligible share, or the parameter moves
  a trial's score (its reach, interactions included) by more than the tolerance and more than a
  made-up knob does;
* *undecided*: none of these yet. The reason says what would decide it — about how many more
  trials of the group, projected from how fast the interval narrows (its width shrinks as one
  over the square root of the trials), and how long that takes at the study's own pace.

Knobs of a dropped family read *family dropped*: they are never advised for tuning.

Before the decisions work, a group needed ``max(min_trials, trials_per_param x parameters)``
trials before any verdict, and until then every row said "keep tuning". ``trials_per_param``
is gone: the intervals themselves say when they decide. ``min_trials`` stays as the size below
which no interval is computed at all (a handful of trials cannot be resampled meaningfully).
``trials_needed`` in the JSON is now the largest "about N more trials" of the undecided rows,
study-wide, and ``enough_trials`` means no row is undecided.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np

from tunelab.errors import InputError
from tunelab.insight._encoding import Encoded, encode, is_constant, position
from tunelab.insight._importance_methods import fanova_replicates, ped_anova_replicates
from tunelab.insight._pace import Pace
from tunelab.insight._spread import Floor, Marginal, marginals, planted_reach
from tunelab.space import ParamSpec
from tunelab.store import TrialRecord, best_of
from tunelab.values import plain

Direction = Literal["maximize", "minimize"]
Method = Literal["fanova", "ped-anova"]
Action = Literal["keep tuning", "freeze", "no measurable effect", "undecided", "family dropped"]

FAMILY_PARAM = "family"
"""Name of the categorical parameter that picks the model family."""

_MIN_DEPTH, _MAX_DEPTH = 5, 10
# Time model of optuna's fANOVA, measured on the 2-core development machine: one evaluation
# costs about _CALL_SECONDS per trial and parameter (it reads the whole study), and each tree
# about _LEAF_SECONDS per leaf and parameter (one walk per split point, at most 32 cells).
_CALL_SECONDS = 15e-6
_LEAF_SECONDS = 1.0e-4
FANOVA_SECONDS = 4.0  # the deepest trees whose estimate fits this are used
_MAX_PROJECTION = 20  # an undecided row asks for at most this many times the group's trials
PLANTED = 3.0  # the power check plants an effect this many times what is measurable


@dataclass(frozen=True)
class Thresholds:
    """When a parameter is worth tuning, safe to freeze, or without effect.

    The shares and tolerance are rules of thumb (common practice, no source); see the module
    docstring for the verdicts they feed.

    Parameters
    ----------
    negligible_share
        Importance below which a parameter's effect is negligible.
    freeze_share
        Importance below which a parameter with a clear best value may be frozen there.
    spread_tolerance
        Smallest move of the score that matters, in metric units (e.g. ``0.002`` for AUC).
        ``None``: ``relative_tolerance`` times the 10th-90th percentile range of the group's
        scores.
    relative_tolerance
        Used when ``spread_tolerance`` is ``None``.
    min_trials
        A group with fewer trials gets no interval: its rows are undecided.
    absence_trials
        A group with fewer trials never reads "no measurable effect": measured on 3·x1 + x2 + noise
        (x2 explains a tenth of the variance), 10-30 random trials called x2 "no measurable effect"
        in 1-4 of 12 seeds despite the power check, 50 or more in none of 36.
    """

    negligible_share: float = 0.05
    freeze_share: float = 0.10
    spread_tolerance: float | None = None
    relative_tolerance: float = 0.02
    min_trials: int = 10
    absence_trials: int = 40

    def __post_init__(self) -> None:
        if not 0.0 <= self.negligible_share <= self.freeze_share <= 1.0:
            raise InputError(
                f"importance thresholds need 0 <= negligible share ({self.negligible_share}) "
                f"<= freeze share ({self.freeze_share}) <= 1",
                "give shares between 0 and 1, the negligible one no larger than the freeze one",
            )
        if self.spread_tolerance is not None and not (
            math.isfinite(self.spread_tolerance) and self.spread_tolerance >= 0
        ):
            raise InputError(
                f"spread tolerance must be a finite number >= 0, got {self.spread_tolerance}",
                "give the smallest score change that matters, in metric units",
            )
        if not (math.isfinite(self.relative_tolerance) and 0 <= self.relative_tolerance <= 1):
            raise InputError(
                f"relative tolerance must be in [0, 1], got {self.relative_tolerance}",
                "give a fraction of the score range, e.g. 0.02",
            )
        if self.min_trials < 3:
            raise InputError(f"need min_trials >= 3, got {self.min_trials}", "raise the minimum trial count")


@dataclass(frozen=True)
class ImportanceRow:
    """One parameter's line in the importance table.

    Attributes
    ----------
    param
        Parameter name.
    family
        The family whose trials judged it, or ``None`` when judged over all trials.
    importance, low, high
        Importance and its 80 % interval; ``None`` when it could not be computed.
    best_value
        The parameter's value in the best complete trial that has it (``None`` if none).
    spread
        How far the predicted score moves across the parameter's values, in metric units.
    verdict
        "keep tuning", "freeze at VALUE", "no measurable effect", "undecided" or "family dropped".
    action
        The verdict without the value, for programs.
    reason
        Why, in one line with the numbers; for "undecided", what would decide it.
    n_trials
        Trials the row was judged on.
    needed
        For "undecided": about how many more trials of the group would decide it.
    """

    param: str
    family: str | None
    importance: float | None
    low: float | None
    high: float | None
    best_value: Any
    spread: float | None
    verdict: str
    action: Action
    reason: str
    n_trials: int
    needed: int | None = None

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        return {"param": self.param, "family": self.family, "importance": self.importance, "low": self.low,
                "high": self.high, "best_value": plain(self.best_value), "spread": self.spread,
                "verdict": self.verdict, "action": self.action, "reason": self.reason, "n_trials": self.n_trials,
                "needed": self.needed}


@dataclass(frozen=True)
class GroupNote:
    """What one group of trials could tell.

    Attributes
    ----------
    family
        ``None`` for the group of all trials, else the family.
    params
        Parameters in the group's models.
    n_trials
        Trials in the group that have every one of ``params``.
    trials_needed
        About how many more trials of the group would decide its undecided rows (0 when none is).
    tolerance
        The spread tolerance used for the group, in metric units.
    noise_floor
        Largest spread shown by made-up parameters the score cannot depend on.
    message
        One line for a person.
    """

    family: str | None
    params: tuple[str, ...]
    n_trials: int
    trials_needed: int
    tolerance: float
    noise_floor: float | None
    message: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        return {"family": self.family, "params": list(self.params), "n_trials": self.n_trials,
                "trials_needed": self.trials_needed, "tolerance": self.tolerance, "noise_floor": self.noise_floor,
                "message": self.message}


@dataclass(frozen=True)
class ImportanceReport:
    """The importance table plus what each group of trials could tell.

    Attributes
    ----------
    rows
        One row per parameter: the all-trials group first, then each family, each group
        sorted by importance, largest first.
    groups
        One note per group of trials.
    method, direction, n_bootstrap
        How the table was computed.
    tree_depth
        Depth of fANOVA's trees (``None`` for PED-ANOVA).
    trials_needed
        About how many more trials, study-wide, would decide every undecided row (0 when none is).
    notes
        How to read particular rows (a parameter that is a ceiling rather than the value used).
    """

    rows: tuple[ImportanceRow, ...]
    groups: tuple[GroupNote, ...]
    method: Method
    direction: Direction
    n_bootstrap: int
    tree_depth: int | None
    trials_needed: int
    notes: tuple[str, ...] = ()

    @property
    def enough_trials(self) -> bool:
        """Whether every row is decided."""
        return not any(r.action == "undecided" for r in self.rows)

    def row(self, param: str, family: str | None = None) -> ImportanceRow:
        """The row of ``param`` (the one judged in ``family`` when that is given)."""
        for r in self.rows:
            if r.param == param and (family is None or r.family == family):
                return r
        raise KeyError(param)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values, for ``--json``."""
        return {"method": self.method, "direction": self.direction, "n_bootstrap": self.n_bootstrap,
                "tree_depth": self.tree_depth, "interval": "80% (10th-90th percentile across resamples)",
                "trials_needed": self.trials_needed, "enough_trials": self.enough_trials,
                "rows": [r.to_dict() for r in self.rows], "groups": [g.to_dict() for g in self.groups],
                "notes": list(self.notes)}


def importance_table(
    trials: Sequence[TrialRecord],
    space: Mapping[str, ParamSpec],
    *,
    direction: Direction,
    method: Method = "fanova",
    family: str | None = None,
    thresholds: Thresholds = Thresholds(),
    n_bootstrap: int = 16,
    top_quantile: float = 0.1,
    include_pruned: bool = True,
    dropped: Sequence[str] = (),
    pace: Pace | None = None,
    seconds: float = FANOVA_SECONDS,
    seed: int = 0,
) -> ImportanceReport:
    """Judge every parameter: importance, interval, best value, spread and a verdict.

    Parameters
    ----------
    trials
        Scored trials. A pruned trial's ``value`` must be comparable with a complete trial's
        (``tunelab.insight`` gives pruned trials their fold-adjusted mean); pruned trials count
        by default, since leaving them out would hide exactly the regions that a knob makes bad.
        Trials without a finite value, and failed or interrupted ones, are skipped.
    space
        The searched parameters (``SpaceSpec.searched()``); parameters not in it are ignored.
    direction
        Whether larger or smaller scores are better.
    method
        ``"fanova"`` or ``"ped-anova"`` (see the module docstring).
    family
        Restrict the table to one family: its conditional parameters and the shared ``prep.*``
        parameters, all judged over that family's trials only.
    thresholds
        When to say which verdict.
    n_bootstrap
        Resamples behind the interval; for fANOVA also the number of trees.
    top_quantile
        PED-ANOVA only: the share of best trials compared with all trials.
    include_pruned
        Whether pruned trials count (see ``trials``).
    dropped
        Families dropped from the search: their knobs read "family dropped".
    pace
        The study's pace, to say how long deciding an undecided row would take.
    seconds
        fANOVA's time allowance: the trees are as deep as fits it.
    seed
        Seed for every random choice: the same inputs and seed give the same table.

    Raises
    ------
    InputError
        A bad option, an unknown family, or a trial value outside its space.
    """
    if direction not in ("maximize", "minimize"):
        raise InputError(f"unknown direction '{direction}'", "use maximize or minimize")
    if method not in ("fanova", "ped-anova"):
        raise InputError(f"unknown importance method '{method}'", "use fanova or ped-anova")
    if n_bootstrap < 2:
        raise InputError(f"need at least 2 resamples for an interval, got {n_bootstrap}", "raise n_bootstrap")
    if not 0.0 < top_quantile < 1.0:
        raise InputError(f"top quantile must be between 0 and 1, got {top_quantile}", "try 0.1 or 0.25")
    space = {name: spec for name, spec in space.items() if spec.kind != "fixed"}
    states = ("complete", "pruned") if include_pruned else ("complete",)
    finished = [t for t in trials if t.state in states and t.value is not None and math.isfinite(float(t.value))]
    families = _family_choices(space)
    if family is not None and family not in families:
        known = ", ".join(str(f) for f in families) or "none"
        raise InputError(f"unknown family '{family}'", f"known families: {known}")

    groups = _make_groups(finished, space, families, family)
    depth = _choose_depth(groups, n_bootstrap, seconds) if method == "fanova" else None
    settings = _Settings(direction, method, thresholds, n_bootstrap, depth, top_quantile, tuple(dropped), pace)
    seeds = np.random.default_rng(seed).integers(2**31 - 1, size=len(groups))
    rows: list[ImportanceRow] = []
    notes: list[GroupNote] = []
    needed = 0
    for group, group_seed in zip(groups, seeds):
        group_rows, note = _judge_group(group, space, settings, int(group_seed))
        rows.extend(group_rows)
        notes.append(note)
        if note.trials_needed:
            share = _group_share(group, len(finished), len(families))
            needed = max(needed, math.ceil(note.trials_needed / share))
    return ImportanceReport(tuple(rows), tuple(notes), method, direction, n_bootstrap, depth, needed)


# ------------------------------------------------------------------------------- grouping


@dataclass(frozen=True)
class _Group:
    family: str | None
    fit_params: tuple[str, ...]  # inputs of the group's models
    report_params: tuple[str, ...]  # the rows the group produces
    trials: tuple[TrialRecord, ...]  # the group's trials that have every fit param
    n_candidates: int  # the group's trials before requiring every fit param


@dataclass(frozen=True)
class _Settings:
    direction: Direction
    method: Method
    thresholds: Thresholds
    n_bootstrap: int
    depth: int | None
    top_quantile: float
    dropped: tuple[str, ...]
    pace: Pace | None


def _family_choices(space: Mapping[str, ParamSpec]) -> tuple[Any, ...]:
    spec = space.get(FAMILY_PARAM)
    return tuple(spec.choices) if spec is not None and spec.kind == "categorical" else ()


def _owner(name: str, families: tuple[Any, ...]) -> str | None:
    """The family a conditional parameter belongs to, or None for a shared parameter."""
    head, dot, _ = name.partition(".")
    return head if dot and head in families else None


def _make_groups(trials: list[TrialRecord], space: Mapping[str, ParamSpec], families: tuple[Any, ...],
                 only_family: str | None) -> list[_Group]:
    seen = {name for t in trials for name in t.params}
    names = [n for n in space if n in seen]
    shared = [n for n in names if _owner(n, families) is None]
    context = [n for n in shared if n != FAMILY_PARAM]

    def build(fam: str | None, fit: list[str], report: list[str], pool: list[TrialRecord]) -> _Group:
        kept = tuple(t for t in pool if all(n in t.params for n in fit))
        return _Group(fam, tuple(fit), tuple(report), kept, len(pool))

    def members(fam: Any) -> list[TrialRecord]:
        return [t for t in trials if t.params.get(FAMILY_PARAM) == fam]

    if only_family is not None:
        fit = [n for n in names if _owner(n, families) == only_family] + context
        return [build(only_family, fit, fit, members(only_family))]
    groups = [build(None, shared, shared, trials)] if shared else []
    for fam in families:
        own = [n for n in names if _owner(n, families) == fam]
        if own:
            groups.append(build(str(fam), own, own, members(fam)))
    return groups


def _group_share(group: _Group, n_total: int, n_families: int) -> float:
    """Fraction of new trials expected to land in ``group`` at the current family mix."""
    if group.family is None:
        return 1.0
    if n_total and group.n_candidates:
        return group.n_candidates / n_total
    return 1.0 / max(n_families, 1)


def _choose_depth(groups: list[_Group], n_bootstrap: int, seconds: float) -> int:
    """Deepest fANOVA tree whose estimated total time fits ``seconds``.

    A tree on a bootstrap resample of n trials has at most ``min(2**depth, 0.63 n)`` leaves
    (0.63: the share of distinct trials in a bootstrap resample).
    """
    for depth in range(_MAX_DEPTH, _MIN_DEPTH - 1, -1):
        total = sum(
            n_bootstrap * len(g.fit_params)
            * (_CALL_SECONDS * len(g.trials) + _LEAF_SECONDS * min(2**depth, math.ceil(0.63 * len(g.trials))))
            for g in groups
        )
        if total <= seconds:
            return depth
    return _MIN_DEPTH


# ------------------------------------------------------------------------------- verdicts


@dataclass(frozen=True)
class _Stat:
    importance: float
    low: float
    high: float
    spread: float
    marginal: Marginal | None
    reach: float = 0.0


def _statistics(group: _Group, enc: Encoded, space: Mapping[str, ParamSpec], settings: _Settings,
                tolerance: float, seed: int) -> tuple[dict[str, _Stat], Floor | None, bool]:
    """Importance, interval and spread of each parameter; the noise floor; whether scores vary."""
    if not enc.names or np.ptp(enc.y) == 0:  # every score equal: nothing explains anything
        return {}, None, False
    imp_seed, spread_seed = (int(s) for s in np.random.default_rng(seed).integers(2**31 - 1, size=2))
    if settings.method == "fanova":
        assert settings.depth is not None
        reps = fanova_replicates(enc, settings.n_bootstrap, settings.depth, imp_seed)
        point = reps.mean(axis=0)
        low = np.minimum(np.percentile(reps, 10, axis=0), point)
        high = np.maximum(np.percentile(reps, 90, axis=0), point)
    else:
        # Halves see fewer top trials, which shifts PED-ANOVA's answer, so they give only
        # the width of the interval, placed around the answer on all trials.
        point, reps = ped_anova_replicates(group.trials, enc.names, space, minimize=settings.direction == "minimize",
                                           top_quantile=settings.top_quantile, n_halves=settings.n_bootstrap,
                                           seed=imp_seed)
        q10, q50, q90 = np.percentile(reps, [10, 50, 90], axis=0)
        low = np.clip(point - (q50 - q10), 0.0, point)
        high = np.clip(point + (q90 - q50), point, 1.0)
    curves, floor = marginals(enc, space, spread_seed)
    stats = {name: _Stat(float(point[j]), float(low[j]), float(high[j]), curves[j].spread, curves[j],
                         curves[j].reach) for j, name in enumerate(enc.names)}
    quiet = [s for s in stats.values() if s.high < settings.thresholds.negligible_share]
    if quiet:  # only a claim of no effect needs the power check
        size = PLANTED * max(tolerance, floor.reach)
        floor = replace(floor, planted=(size, planted_reach(enc, size, spread_seed + 1)))
    return stats, floor, True


def _judge_group(group: _Group, space: Mapping[str, ParamSpec], settings: _Settings,
                 seed: int) -> tuple[list[ImportanceRow], GroupNote]:
    th = settings.thresholds
    n = len(group.trials)
    scores = np.array([t.score for t in group.trials])
    tolerance = _tolerance(th, scores)
    stats: dict[str, _Stat] = {}
    floor: Floor | None = None
    varies = True
    enc = encode(group.trials, group.fit_params, space)  # refuses a value outside its space at any size
    if n >= th.min_trials:
        stats, floor, varies = _statistics(group, enc, space, settings, tolerance, seed)
    measurable = max(tolerance, floor.spread if floor else 0.0)
    best = best_of(group.trials, settings.direction)
    dropped = group.family in settings.dropped
    rows = []
    for name in group.report_params:
        best_value = best.params[name] if best is not None else None
        stat = stats.get(name)
        if stat is None and n >= th.min_trials and (not varies or is_constant(space[name])):
            stat = _Stat(0.0, 0.0, 0.0, 0.0, None)  # nothing varies: no effect can show
        clear = _best_is_clear(space[name], stat, best_value, settings.direction, measurable)
        rows.append(_row(name, group, stat, best_value, clear, settings, tolerance, floor or Floor(), dropped))
    rows.sort(key=lambda r: -1.0 if r.importance is None else r.importance, reverse=True)
    needed = max((r.needed or 0 for r in rows), default=0)
    return rows, GroupNote(group.family, group.fit_params, n, needed, tolerance, floor.spread if floor else None,
                           _group_message(group, rows, needed, settings.pace))


def _group_message(group: _Group, rows: list[ImportanceRow], needed: int, pace: Pace | None) -> str:
    where = "all trials" if group.family is None else f"family {group.family}"
    undecided = sum(1 for r in rows if r.action == "undecided")
    text = f"{where}: {len(group.trials)} trials; {len(rows) - undecided} of {len(rows)} parameters decided"
    if undecided:
        more = pace.words(needed, group.family) if pace is not None else f"about {needed} more trials"
        text += f"; {more} would decide the rest"
    if len(group.trials) < group.n_candidates:
        text += f" ({group.n_candidates - len(group.trials)} trials lacked one of the parameters and were left out)"
    return text


def _tolerance(thresholds: Thresholds, scores: np.ndarray) -> float:
    if thresholds.spread_tolerance is not None:
        return thresholds.spread_tolerance
    if len(scores) < 2:
        return 0.0
    q10, q90 = np.percentile(scores, [10, 90])
    return float(thresholds.relative_tolerance * (q90 - q10))


def _best_is_clear(spec: ParamSpec, stat: _Stat | None, best_value: Any, direction: Direction,
                   measurable: float) -> bool:
    """Whether the best trial's value is also where the predicted score is best."""
    if best_value is None or stat is None:
        return False
    if stat.marginal is None:  # a constant parameter, or a group whose scores are all equal
        return True
    curve = stat.marginal
    at_best = curve.score[int(np.argmin(np.abs(curve.grid - position(spec, best_value))))]
    optimum = curve.score.max() if direction == "maximize" else curve.score.min()
    return bool(abs(optimum - at_best) <= measurable)


def _row(name: str, group: _Group, stat: _Stat | None, best_value: Any, clear_best: bool, settings: _Settings,
         tolerance: float, floor: Floor, dropped: bool) -> ImportanceRow:
    th = settings.thresholds
    n = len(group.trials)

    def make(action: Action, verdict: str, reason: str, needed: int | None = None) -> ImportanceRow:
        if stat is None:
            return ImportanceRow(name, group.family, None, None, None, best_value, None, verdict, action, reason, n,
                                 needed)
        return ImportanceRow(name, group.family, stat.importance, stat.low, stat.high, best_value, stat.spread,
                             verdict, action, reason, n, needed)

    if dropped:
        return make("family dropped", "family dropped",
                    f"family {group.family} was dropped: its best trails the leader")
    if stat is None:
        more = max(1, th.min_trials - n)
        return make("undecided", "undecided", _undecided_words(more, group.family, settings.pace,
                                                               f"{n} trials, {th.min_trials} before an interval"), more)
    imp, low, high, spread = stat.importance, stat.low, stat.high, stat.spread
    measurable_reach = max(tolerance, floor.reach)
    if (high < th.negligible_share and stat.reach <= measurable_reach and n >= th.absence_trials
            and floor.powered(measurable_reach)):
        assert floor.planted is not None  # powered() says so
        size, seen = floor.planted
        return make("no measurable effect", "no measurable effect",
                    f"importance at most {high:.3f} < {th.negligible_share:g}; it moves a trial's score by "
                    f"{stat.reach:.3g}, no more than a knob doing nothing ({measurable_reach:.3g}), while a planted "
                    f"effect of {size:.3g} shows as {seen:.3g}: an effect that size would have shown")
    if high < th.freeze_share and clear_best:
        return make("freeze", f"freeze at {_format_value(best_value)}",
                    f"importance at most {high:.3f} < {th.freeze_share:g}; the best trial's value is where the "
                    f"predicted score is best")
    if low > th.negligible_share:
        return make("keep tuning", "keep tuning", f"importance at least {low:.3f} > {th.negligible_share:g}; "
                                                  f"score moves {spread:.3g}")
    beyond_chance = max(tolerance, floor.reach)
    if stat.reach > beyond_chance:
        return make("keep tuning", "keep tuning", f"it moves a trial's score by {stat.reach:.3g}, more than a knob "
                                                  f"doing nothing ({beyond_chance:.3g}); importance up to {high:.3f}")
    more = _projected(imp, low, high, n, th)
    return make("undecided", "undecided",
                _undecided_words(more, group.family, settings.pace,
                                 f"importance {imp:.3f} (80 % interval {low:.3f}-{high:.3f})"), more)


def _projected(point: float, low: float, high: float, n: int, th: Thresholds) -> int:
    """About how many more trials until the interval clears a threshold, if it narrows as 1/sqrt(n).

    With ``n'`` trials the interval's sides scale by ``sqrt(n / n')``: the upper end falls below the
    freeze share when ``(high - point) sqrt(n / n') < freeze - point``, the lower end rises above
    the negligible share when ``(point - low) sqrt(n / n') < point - negligible``.  The nearer of
    the two is asked for, at most ``_MAX_PROJECTION`` times the trials so far.  When the interval
    already clears the freeze share (what is missing is a clear best value), as many trials again.
    """
    targets = []
    if high < th.freeze_share:
        targets.append(2.0 * n)
    elif point < th.freeze_share and high > point:
        targets.append(n * ((high - point) / (th.freeze_share - point)) ** 2)
    if point > th.negligible_share and point > low:
        targets.append(n * ((point - low) / (point - th.negligible_share)) ** 2)
    cap = _MAX_PROJECTION * max(n, 1)
    total = min(targets + [cap])
    return max(1, math.ceil(total - n))


def _undecided_words(more: int, family: str | None, pace: Pace | None, evidence: str) -> str:
    ask = pace.words(more, family) if pace is not None else f"about {more} more trials" + (
        f" of {family}" if family else "")
    return f"{evidence}; {ask} would decide"


def _format_value(value: Any) -> str:
    return f"{value:.3g}" if isinstance(value, float) else str(value)


__all__ = ["FAMILY_PARAM", "FANOVA_SECONDS", "GroupNote", "ImportanceReport", "ImportanceRow", "Thresholds",
           "importance_table"]
