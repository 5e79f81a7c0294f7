"""Which knobs can I stop turning, and at what value?

Pure functions over plain trial records (no database): each parameter gets a share of score
variance it explains, an 80 % interval from resampling the trials, the best value seen, how far
it moves the score in metric units, and a verdict in plain words.

How the pieces fit
------------------
* **Groups.** A parameter is judged among the trials that can show its effect. The ``family``
  parameter and every shared parameter (``prep.*`` and anything not named ``<family>.<name>``)
  are judged over all trials; a conditional parameter ``<family>.<name>`` only over that
  family's trials (with the shared ``prep.*`` parameters in the model as well, so their
  effect is not mistaken for noise).
* **Importance.** optuna's evaluators do the core computation on an in-memory study:
  fANOVA (Hutter, Hoos & Leyton-Brown, ICML 2014) gives the share of score variance explained
  by each parameter's main effect, not normalised, so the shares of a group add up to at most
  one and the remainder is interactions and noise; PED-ANOVA (Watanabe et al., IJCAI 2023)
  gives how much each parameter matters for reaching the top 10 % of scores, normalised to add
  up to one within a group.
* **Interval.** fANOVA fits a random forest in which every tree is grown on a bootstrap resample
  of the trials. We grow the trees one at a time (``n_bootstrap`` of them, each with its own
  seed), so each tree's answer is the answer of one bootstrap resample; the importance is their
  mean (which is exactly the forest's answer) and the interval is their 10th-90th percentile.
  A single resample's answer varies more than the mean does, so the interval errs wide, which
  errs towards "keep tuning". PED-ANOVA has no resampling of its own and a resampled study
  costs a full copy of the trials, so its interval comes from ``n_bootstrap`` random halves of
  the trials (half-sampling; for averages its spread matches the bootstrap's, from memory:
  Efron & Tibshirani 1993, *An Introduction to the Bootstrap*).
* **Spread.** A separate random forest predicts the score from a group's parameters; the
  predicted score is averaged over the observed trials while one parameter is set to each of
  its values in turn (partial dependence: Friedman 2001, *Annals of Statistics* 29(5)).
  Continuous parameters are binned into ``_SPREAD_BINS`` equal-width bins on their sampling
  scale (log for log-scaled ones); integers with few values and categoricals use each value.
  The spread is the max - min of that marginal mean score, in metric units.
* **Speed.** optuna's fANOVA walks every tree in Python once per split point, so its cost grows
  with tree size and with the number of distinct split points. Two measures keep 2,000 trials
  within seconds: numeric values are snapped to ``_FANOVA_BINS`` cells of their sampling scale
  before fitting (a step function on 32 cells keeps more than 99 % of a smooth main effect's
  variance), and the tree depth is the deepest whose estimated cost fits ``_WORK_BUDGET``
  (deep enough for few parameters, shallower for big spaces). The depth used is in the report.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from optuna.distributions import (
    BaseDistribution,
    CategoricalDistribution,
    FloatDistribution,
    IntDistribution,
)

from tunelab.errors import InputError

Direction = Literal["maximize", "minimize"]
Method = Literal["fanova", "ped-anova"]
Action = Literal["keep tuning", "freeze", "no measurable effect"]

FAMILY_PARAM = "family"
"""Name of the categorical parameter that picks the model family."""

SHARED_PREFIX = "prep."
"""Prefix of the preprocessing parameters that every trial samples."""

_FANOVA_BINS = 32  # numeric values are snapped to this many cells before fANOVA
_SPREAD_BINS = 10  # bins of the marginal mean score behind ``spread``
_SPREAD_TREES = 48
_SPREAD_BACKGROUND = 256  # trials the partial dependence averages over
_MIN_DEPTH, _MAX_DEPTH = 5, 10
# Estimated cost of one fANOVA tree is leaves x split points x parameters (see _choose_depth);
# this budget was measured to take about 4-5 s on a 2-core machine (benchmarks/importance_speed.py).
_WORK_BUDGET = 6.0e6
_PED_TARGET_QUANTILE = 0.1


@dataclass(frozen=True)
class TrialRecord:
    """One finished trial, as the importance table needs it.

    Parameters
    ----------
    number
        The trial number in its study.
    params
        Only the parameters this trial actually sampled (a conditional parameter is absent from
        trials of other families).
    value
        The metric value, raw, in metric units.
    state
        ``"complete"``, or ``"pruned"``: then ``value`` is the last intermediate value at the
        highest fidelity the trial reached.
    """

    number: int
    params: dict[str, Any]
    value: float
    state: str = "complete"

    def __post_init__(self) -> None:
        if self.state not in ("complete", "pruned"):
            raise InputError(
                f"trial {self.number} has state '{self.state}'; only complete and pruned trials have a score",
                "leave failed and interrupted trials out of the importance table",
            )


@dataclass(frozen=True)
class Thresholds:
    """When a parameter is judged worth tuning, safe to freeze, or without effect.

    Verdicts, in order (``high`` is the upper end of the importance interval):

    1. the group has too few trials (see ``min_trials``) -> "keep tuning";
    2. ``high < negligible_share`` and ``spread <= tolerance`` -> "no measurable effect";
    3. ``high < freeze_share`` and the best trial's value is also where the predicted score is
       best (within ``tolerance``) -> "freeze at VALUE";
    4. otherwise -> "keep tuning".

    Shares and tolerances are rules of thumb (common practice, no source).

    Parameters
    ----------
    negligible_share
        Importance (share of score variance, or of PED-ANOVA importance) below which a
        parameter's effect is negligible.
    freeze_share
        Importance below which a parameter with a clear best value may be frozen there.
    spread_tolerance
        Smallest move of the score that matters, in metric units (e.g. ``0.002`` for AUC).
        ``None``: ``relative_tolerance`` times the 10th-90th percentile range of the group's
        scores.
    relative_tolerance
        Used when ``spread_tolerance`` is ``None``.
    min_trials, trials_per_param
        A group needs at least ``max(min_trials, trials_per_param x its parameter count)``
        finished trials for a stable answer.
    """

    negligible_share: float = 0.05
    freeze_share: float = 0.10
    spread_tolerance: float | None = None
    relative_tolerance: float = 0.02
    min_trials: int = 20
    trials_per_param: int = 10

    def __post_init__(self) -> None:
        if not 0.0 <= self.negligible_share <= self.freeze_share <= 1.0:
            raise InputError(
                f"importance thresholds must satisfy 0 <= negligible ({self.negligible_share}) "
                f"<= freeze ({self.freeze_share}) <= 1",
                "give shares between 0 and 1 with the negligible share no larger than the freeze share",
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
        if self.min_trials < 2 or self.trials_per_param < 1:
            raise InputError(
                f"need min_trials >= 2 and trials_per_param >= 1, got {self.min_trials} and "
                f"{self.trials_per_param}",
                "raise the minimum trial counts",
            )


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
        Importance and its 80 % interval; ``None`` when there were too few trials to compute.
    best_value
        The parameter's value in the best trial that has it (``None`` without a complete trial).
    spread
        How far the predicted score moves across the parameter's values, in metric units.
    verdict
        "keep tuning", "freeze at VALUE" or "no measurable effect".
    action
        The verdict without the value, for programs.
    reason
        Why, in one line with the numbers.
    n_trials
        Trials the row was judged on.
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

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        return {
            "param": self.param,
            "family": self.family,
            "importance": self.importance,
            "low": self.low,
            "high": self.high,
            "best_value": _plain(self.best_value),
            "spread": self.spread,
            "verdict": self.verdict,
            "action": self.action,
            "reason": self.reason,
            "n_trials": self.n_trials,
        }


@dataclass(frozen=True)
class GroupNote:
    """What one group of trials could and could not tell.

    Attributes
    ----------
    family
        ``None`` for the group of all trials, else the family.
    params
        Parameters in the group's model.
    n_trials
        Finished trials in the group that have all of ``params``.
    trials_required
        ``max(min_trials, trials_per_param x len(params))``.
    trials_needed
        More trials this group needs for a stable answer (0 when it has enough).
    tolerance
        The spread tolerance used for the group, in metric units.
    message
        One line for a person.
    """

    family: str | None
    params: tuple[str, ...]
    n_trials: int
    trials_required: int
    trials_needed: int
    tolerance: float
    message: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        return {
            "family": self.family,
            "params": list(self.params),
            "n_trials": self.n_trials,
            "trials_required": self.trials_required,
            "trials_needed": self.trials_needed,
            "tolerance": self.tolerance,
            "message": self.message,
        }


@dataclass(frozen=True)
class ImportanceReport:
    """The importance table plus what each group of trials could tell.

    Attributes
    ----------
    rows
        One row per parameter: the all-trials group first, then each family, each sorted by
        importance (largest first).
    groups
        One note per group of trials.
    method, direction, n_bootstrap
        How the table was computed.
    tree_depth
        Depth of fANOVA's trees (``None`` for PED-ANOVA).
    trials_needed
        About how many more trials, at the current mix of families, before every group has
        enough (0 when all do).
    """

    rows: tuple[ImportanceRow, ...]
    groups: tuple[GroupNote, ...]
    method: Method
    direction: Direction
    n_bootstrap: int
    tree_depth: int | None
    trials_needed: int = field(default=0)

    @property
    def enough_trials(self) -> bool:
        """Whether every group had enough trials for a stable answer."""
        return self.trials_needed == 0

    def row(self, param: str, family: str | None = None) -> ImportanceRow:
        """The row of ``param`` (judged in ``family`` when it is given)."""
        for r in self.rows:
            if r.param == param and (family is None or r.family == family):
                return r
        raise KeyError(param)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values, for ``--json``."""
        return {
            "method": self.method,
            "direction": self.direction,
            "n_bootstrap": self.n_bootstrap,
            "tree_depth": self.tree_depth,
            "interval": "80% (10th-90th percentile across resamples)",
            "trials_needed": self.trials_needed,
            "enough_trials": self.enough_trials,
            "rows": [r.to_dict() for r in self.rows],
            "groups": [g.to_dict() for g in self.groups],
        }


def importance_table(
    trials: Sequence[TrialRecord],
    distributions: Mapping[str, BaseDistribution],
    *,
    direction: Direction,
    method: Method = "fanova",
    family: str | None = None,
    thresholds: Thresholds = Thresholds(),
    n_bootstrap: int = 24,
    include_pruned: bool = True,
    seed: int = 0,
) -> ImportanceReport:
    """Judge every parameter: importance, interval, best value, spread and a verdict.

    Parameters
    ----------
    trials
        Finished trials. Pruned trials count by default: their value is a running
        cross-validation score on the same metric, and leaving them out would hide exactly the
        regions that a knob makes bad. Trials with a non-finite value are skipped.
    distributions
        The search space; parameters not in it are ignored.
    direction
        Whether larger or smaller scores are better (for the best value, the verdict and
        PED-ANOVA).
    method
        ``"fanova"``: share of score variance explained by each parameter's main effect.
        ``"ped-anova"``: share of how much each parameter matters for reaching the top 10 %.
    family
        Restrict the table to one family: its conditional parameters and the shared ``prep.*``
        parameters, all judged over that family's trials only.
    thresholds
        When to say "keep tuning", "freeze at VALUE" or "no measurable effect".
    n_bootstrap
        Resamples behind the interval (for fANOVA also the number of trees, since each tree is
        one resample). The default keeps 2,000 trials within about 10 s on 2 cores.
    include_pruned
        Whether pruned trials count (see ``trials``).
    seed
        Seed for every random choice; same inputs and seed give the same table.

    Returns
    -------
    ImportanceReport
        Rows, group notes, and how many more trials an under-sampled group needs. Too few
        trials never raise: the report says how many more are needed.

    Raises
    ------
    InputError
        A bad option, an unknown family, or a trial value outside its distribution.
    """
    if direction not in ("maximize", "minimize"):
        raise InputError(f"unknown direction '{direction}'", "use maximize or minimize")
    if method not in ("fanova", "ped-anova"):
        raise InputError(f"unknown importance method '{method}'", "use fanova or ped-anova")
    if n_bootstrap < 2:
        raise InputError(f"need at least 2 resamples for an interval, got {n_bootstrap}", "raise n_bootstrap")

    states = ("complete", "pruned") if include_pruned else ("complete",)
    finished = [t for t in trials if t.state in states and math.isfinite(float(t.value))]
    families = _family_choices(distributions)
    if family is not None and family not in families:
        known = ", ".join(str(f) for f in families) or "none"
        raise InputError(f"unknown family '{family}'", f"known families: {known}")

    groups = _make_groups(finished, distributions, families, family)
    n_total = len(finished)
    depth = _choose_depth(groups, n_bootstrap) if method == "fanova" else None
    rng = np.random.default_rng(seed)

    rows: list[ImportanceRow] = []
    notes: list[GroupNote] = []
    overall_needed = 0
    for group in groups:
        group_seed = int(rng.integers(2**31 - 1))
        group_rows, note = _judge_group(
            group, distributions, direction, method, thresholds, n_bootstrap, depth, group_seed
        )
        rows.extend(group_rows)
        notes.append(note)
        if note.trials_needed:
            share = _group_share(group, n_total, len(families))
            overall_needed = max(overall_needed, math.ceil(note.trials_needed / share))
    return ImportanceReport(
        rows=tuple(rows),
        groups=tuple(notes),
        method=method,
        direction=direction,
        n_bootstrap=n_bootstrap,
        tree_depth=depth,
        trials_needed=overall_needed,
    )


# ---------------------------------------------------------------------------- grouping


@dataclass(frozen=True)
class _Group:
    family: str | None
    fit_params: tuple[str, ...]  # inputs of the group's models
    report_params: tuple[str, ...]  # rows the group produces
    trials: tuple[TrialRecord, ...]  # trials of the group that have every fit param
    n_candidates: int  # trials of the group before requiring every fit param


def _family_choices(distributions: Mapping[str, BaseDistribution]) -> tuple[Any, ...]:
    dist = distributions.get(FAMILY_PARAM)
    return tuple(dist.choices) if isinstance(dist, CategoricalDistribution) else ()


def _owner(name: str, families: tuple[Any, ...]) -> str | None:
    """The family a conditional parameter belongs to, or None for shared parameters."""
    head, dot, _ = name.partition(".")
    return head if dot and head in families else None


def _make_groups(
    trials: list[TrialRecord],
    distributions: Mapping[str, BaseDistribution],
    families: tuple[Any, ...],
    only_family: str | None,
) -> list[_Group]:
    seen = {name for t in trials for name in t.params}
    names = [n for n in distributions if n in seen]
    shared = [n for n in names if _owner(n, families) is None]
    context = [n for n in shared if n != FAMILY_PARAM]

    def build(fam: str | None, fit: list[str], report: list[str], pool: list[TrialRecord]) -> _Group:
        kept = tuple(t for t in pool if all(n in t.params for n in fit))
        return _Group(fam, tuple(fit), tuple(report), kept, len(pool))

    def family_trials(fam: str) -> list[TrialRecord]:
        return [t for t in trials if t.params.get(FAMILY_PARAM) == fam]

    if only_family is not None:
        own = [n for n in names if _owner(n, families) == only_family]
        fit = own + context
        return [build(only_family, fit, fit, family_trials(only_family))]

    groups = [build(None, shared, shared, trials)] if shared else []
    for fam in families:
        own = [n for n in names if _owner(n, families) == fam]
        if own:
            groups.append(build(str(fam), own + context, own, family_trials(fam)))
    return groups


def _group_share(group: _Group, n_total: int, n_families: int) -> float:
    """Fraction of new trials expected to land in ``group`` at the current family mix."""
    if group.family is None:
        return 1.0
    if n_total and group.n_candidates:
        return group.n_candidates / n_total
    return 1.0 / max(n_families, 1)


# ---------------------------------------------------------------------------- encoding


def _check_value(name: str, dist: BaseDistribution, value: Any, number: int) -> None:
    try:
        internal = dist.to_internal_repr(value)
    except (ValueError, TypeError) as exc:
        raise InputError(
            f"trial {number}: {name}={value!r} is not in its search space",
            "pass the distributions the study was searched with",
        ) from exc
    if isinstance(dist, (FloatDistribution, IntDistribution)):
        span = dist.high - dist.low
        if not dist.low - 1e-9 * span <= internal <= dist.high + 1e-9 * span:
            raise InputError(
                f"trial {number}: {name}={value!r} is outside [{dist.low}, {dist.high}]",
                "pass the distributions the study was searched with",
            )


def _unit(dist: BaseDistribution, values: np.ndarray) -> np.ndarray:
    """Map internal values to [0, 1] on the sampling scale, each value its own equal cell.

    Log-scaled parameters are mapped on the log scale, so a uniform measure on [0, 1] is the one
    the sampler searches; categoricals and stepped numbers get equal-width cells per value.
    """
    if isinstance(dist, CategoricalDistribution):
        return (values + 0.5) / len(dist.choices)
    assert isinstance(dist, (FloatDistribution, IntDistribution))
    low, high = float(dist.low), float(dist.high)
    if dist.log:
        out = (np.log(values) - math.log(low)) / (math.log(high) - math.log(low))
    elif dist.step is not None:
        step = float(dist.step)
        out = (values - low + step / 2) / (high - low + step)
    else:
        out = (values - low) / (high - low)
    return np.clip(out, 0.0, 1.0)


def _snap(u: np.ndarray, bins: int) -> np.ndarray:
    return (np.minimum(np.floor(u * bins), bins - 1) + 0.5) / bins


@dataclass(frozen=True)
class _Encoded:
    names: tuple[str, ...]  # non-constant fit params, the model's columns
    internal: np.ndarray  # trials x names, optuna's internal representation
    unit: np.ndarray  # trials x names, on [0, 1] (sampling scale)
    y: np.ndarray  # scores


def _encode(group: _Group, distributions: Mapping[str, BaseDistribution]) -> _Encoded:
    names = tuple(n for n in group.fit_params if not distributions[n].single())
    n = len(group.trials)
    internal = np.empty((n, len(names)))
    for j, name in enumerate(names):
        dist = distributions[name]
        for i, t in enumerate(group.trials):
            _check_value(name, dist, t.params[name], t.number)
            internal[i, j] = dist.to_internal_repr(t.params[name])
    unit = np.empty_like(internal)
    for j, name in enumerate(names):
        unit[:, j] = _unit(distributions[name], internal[:, j])
    y = np.array([float(t.value) for t in group.trials])
    return _Encoded(names, internal, unit, y)


# ---------------------------------------------------------------------------- importance


def _choose_depth(groups: list[_Group], n_bootstrap: int) -> int:
    """Deepest tree whose estimated total fANOVA cost fits ``_WORK_BUDGET``.

    optuna walks a tree once per split point of the parameter being judged, visiting about as
    many nodes as the tree has leaves; a tree of depth d has at most ``min(2**d, n)`` leaves and
    a snapped parameter at most ``_FANOVA_BINS`` split points.
    """
    for depth in range(_MAX_DEPTH, _MIN_DEPTH - 1, -1):
        work = sum(
            n_bootstrap * len(g.fit_params) * min(2**depth, len(g.trials)) * _FANOVA_BINS
            for g in groups
        )
        if work <= _WORK_BUDGET:
            return depth
    return _MIN_DEPTH


def _fanova_replicates(enc: _Encoded, n_bootstrap: int, depth: int, seed: int) -> np.ndarray:
    """Importance of each column from ``n_bootstrap`` one-tree forests (resamples x columns)."""
    import optuna
    from optuna.importance import FanovaImportanceEvaluator

    dist = FloatDistribution(0.0, 1.0)
    dists = {name: dist for name in enc.names}
    x = _snap(enc.unit, _FANOVA_BINS)
    study = optuna.create_study(direction="minimize")
    study.add_trials(
        [
            optuna.trial.create_trial(
                params={name: float(x[i, j]) for j, name in enumerate(enc.names)},
                distributions=dists,
                value=float(enc.y[i]),
            )
            for i in range(len(enc.y))
        ]
    )
    seeds = np.random.default_rng(seed).integers(2**31 - 1, size=n_bootstrap)
    out = np.zeros((n_bootstrap, len(enc.names)))
    for b, tree_seed in enumerate(seeds):
        evaluator = FanovaImportanceEvaluator(n_trees=1, max_depth=depth, seed=int(tree_seed))
        try:
            result = evaluator.evaluate(study)
        except RuntimeError:  # the tree saw no variance at all: nothing explains anything
            continue
        out[b] = [result[name] for name in enc.names]
    return out


def _ped_anova_replicates(
    enc: _Encoded,
    group: _Group,
    distributions: Mapping[str, BaseDistribution],
    direction: Direction,
    n_bootstrap: int,
    seed: int,
) -> tuple[np.ndarray, np.ndarray]:
    """PED-ANOVA shares on all trials and on ``n_bootstrap`` random halves of them."""
    import optuna
    from optuna.importance import PedAnovaImportanceEvaluator

    dists = {name: distributions[name] for name in enc.names}
    sign = 1.0 if direction == "minimize" else -1.0
    study = optuna.create_study(direction="minimize")
    study.add_trials(
        [
            optuna.trial.create_trial(
                params={name: t.params[name] for name in enc.names},
                distributions=dists,
                value=sign * float(t.value),
                user_attrs={"row": i},
            )
            for i, t in enumerate(group.trials)
        ]
    )
    n = len(enc.y)
    evaluator = PedAnovaImportanceEvaluator(target_quantile=_PED_TARGET_QUANTILE)

    def shares(keep: np.ndarray | None) -> np.ndarray:
        def target(trial: Any) -> float:
            row = trial.user_attrs["row"]
            return float(trial.value) if keep is None or keep[row] else math.nan

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = evaluator.evaluate(study, params=list(enc.names), target=target)
        raw = np.array([result[name] for name in enc.names])
        total = raw.sum()
        return raw / total if total > 0 else raw

    rng = np.random.default_rng(seed)
    point = shares(None)
    halves = np.empty((n_bootstrap, len(enc.names)))
    for b in range(n_bootstrap):
        keep = np.zeros(n, dtype=bool)
        keep[rng.choice(n, size=n // 2, replace=False)] = True
        halves[b] = shares(keep)
    return point, halves


# ---------------------------------------------------------------------------- spread


@dataclass(frozen=True)
class _Marginal:
    grid: np.ndarray  # unit-scale positions the score was predicted at
    score: np.ndarray  # mean predicted score at each position


def _marginals(enc: _Encoded, distributions: Mapping[str, BaseDistribution], seed: int) -> list[_Marginal]:
    """Partial dependence of the predicted score on each column, on a binned grid."""
    from sklearn.ensemble import RandomForestRegressor

    n = len(enc.y)
    forest = RandomForestRegressor(
        n_estimators=_SPREAD_TREES,
        min_samples_leaf=max(3, n // 100),
        random_state=seed,
    )
    forest.fit(enc.unit, enc.y)
    rng = np.random.default_rng(seed)
    background = enc.unit if n <= _SPREAD_BACKGROUND else enc.unit[rng.choice(n, _SPREAD_BACKGROUND, replace=False)]
    out = []
    for j, name in enumerate(enc.names):
        grid = _grid(distributions[name], enc.unit[:, j])
        batch = np.repeat(background[None, :, :], len(grid), axis=0)
        batch[:, :, j] = grid[:, None]
        pred = forest.predict(batch.reshape(-1, batch.shape[-1])).reshape(len(grid), -1)
        out.append(_Marginal(grid, pred.mean(axis=1)))
    return out


def _grid(dist: BaseDistribution, unit: np.ndarray) -> np.ndarray:
    """Observed values, binned to ``_SPREAD_BINS`` equal-width bins when there are more."""
    values = np.unique(unit)
    if isinstance(dist, CategoricalDistribution) or len(values) <= _SPREAD_BINS:
        return values
    return np.unique(_snap(values, _SPREAD_BINS))


def _position(grid: np.ndarray, unit_value: float) -> int:
    return int(np.argmin(np.abs(grid - unit_value)))


# ---------------------------------------------------------------------------- verdicts


def _judge_group(
    group: _Group,
    distributions: Mapping[str, BaseDistribution],
    direction: Direction,
    method: Method,
    thresholds: Thresholds,
    n_bootstrap: int,
    depth: int | None,
    seed: int,
) -> tuple[list[ImportanceRow], GroupNote]:
    n = len(group.trials)
    required = max(thresholds.min_trials, thresholds.trials_per_param * len(group.fit_params))
    needed = max(0, required - n)
    scores = np.array([float(t.value) for t in group.trials])
    tolerance = _tolerance(thresholds, scores)
    where = "all trials" if group.family is None else f"family {group.family}"
    if needed:
        message = (
            f"{where}: {n} finished trials, {required} needed for a stable answer "
            f"({len(group.fit_params)} parameters); run {needed} more in this group"
        )
    else:
        message = f"{where}: {n} finished trials, enough for {len(group.fit_params)} parameters"
    if n < group.n_candidates:
        message += f"; {group.n_candidates - n} trials lacked one of the parameters and were left out"
    note = GroupNote(group.family, group.fit_params, n, required, needed, tolerance, message)

    enc = _encode(group, distributions)
    stats: dict[str, tuple[float, float, float]] = {}
    spreads: dict[str, float] = {}
    marg: dict[str, _Marginal] = {}
    if n >= 3 and enc.names and np.ptp(enc.y) > 0:
        rng = np.random.default_rng(seed)
        imp_seed, spread_seed = (int(s) for s in rng.integers(2**31 - 1, size=2))
        if method == "fanova":
            assert depth is not None
            reps = _fanova_replicates(enc, n_bootstrap, depth, imp_seed)
            point = reps.mean(axis=0)
        else:
            point, reps = _ped_anova_replicates(enc, group, distributions, direction, n_bootstrap, imp_seed)
        low = np.minimum(np.percentile(reps, 10, axis=0), point)
        high = np.maximum(np.percentile(reps, 90, axis=0), point)
        for j, name in enumerate(enc.names):
            stats[name] = (float(point[j]), float(low[j]), float(high[j]))
        for name, m in zip(enc.names, _marginals(enc, distributions, spread_seed)):
            marg[name] = m
            spreads[name] = float(np.ptp(m.score))
    elif n >= 1:  # every score equal, or nothing varies: no parameter explains anything
        for name in enc.names:
            stats[name] = (0.0, 0.0, 0.0)
            spreads[name] = 0.0

    best = _best_trial(group.trials, direction)
    rows = []
    for name in group.report_params:
        dist = distributions[name]
        if dist.single():  # a one-value range: already frozen
            stats.setdefault(name, (0.0, 0.0, 0.0))
            spreads.setdefault(name, 0.0)
        best_value = best.params[name] if best is not None else None
        clear = _best_is_clear(dist, marg.get(name), best_value, direction, tolerance)
        rows.append(
            _row(name, group, stats.get(name), spreads.get(name), best_value, clear, thresholds, tolerance, needed)
        )
    rows.sort(key=lambda r: -1.0 if r.importance is None else r.importance, reverse=True)
    return rows, note


def _tolerance(thresholds: Thresholds, scores: np.ndarray) -> float:
    if thresholds.spread_tolerance is not None:
        return thresholds.spread_tolerance
    if len(scores) < 2:
        return 0.0
    q10, q90 = np.percentile(scores, [10, 90])
    return float(thresholds.relative_tolerance * (q90 - q10))


def _best_trial(trials: Sequence[TrialRecord], direction: Direction) -> TrialRecord | None:
    complete = [t for t in trials if t.state == "complete"]
    if not complete:
        return None
    pick = max if direction == "maximize" else min
    return pick(complete, key=lambda t: float(t.value))


def _best_is_clear(
    dist: BaseDistribution, marginal: _Marginal | None, best_value: Any, direction: Direction, tolerance: float
) -> bool:
    """Whether the best trial's value is also where the predicted score is best."""
    if best_value is None:
        return False
    if marginal is None:  # constant parameter
        return True
    unit_value = float(_unit(dist, np.array([dist.to_internal_repr(best_value)]))[0])
    at_best = marginal.score[_position(marginal.grid, unit_value)]
    optimum = marginal.score.max() if direction == "maximize" else marginal.score.min()
    return bool(abs(optimum - at_best) <= tolerance)


def _row(
    name: str,
    group: _Group,
    stat: tuple[float, float, float] | None,
    spread: float | None,
    best_value: Any,
    clear_best: bool,
    thresholds: Thresholds,
    tolerance: float,
    needed: int,
) -> ImportanceRow:
    importance, low, high = stat if stat is not None else (None, None, None)
    action: Action = "keep tuning"
    verdict = "keep tuning"
    if needed:
        reason = f"too few trials to judge: {needed} more needed"
    elif importance is None or high is None or spread is None:
        reason = "importance could not be computed"
    elif high < thresholds.negligible_share and spread <= tolerance:
        action, verdict = "no measurable effect", "no measurable effect"
        reason = (
            f"importance at most {high:.3f} < {thresholds.negligible_share:g} and the score moves "
            f"{spread:.3g} <= {tolerance:.3g}"
        )
    elif high < thresholds.freeze_share and clear_best:
        action, verdict = "freeze", f"freeze at {_format_value(best_value)}"
        reason = (
            f"importance at most {high:.3f} < {thresholds.freeze_share:g} and the best trial's value "
            "is where the predicted score is best"
        )
    elif high < thresholds.freeze_share:
        reason = f"importance at most {high:.3f} but no clear best value yet"
    else:
        reason = f"importance up to {high:.3f} >= {thresholds.freeze_share:g}; the score moves {spread:.3g}"
    return ImportanceRow(
        param=name,
        family=group.family,
        importance=importance,
        low=low,
        high=high,
        best_value=best_value,
        spread=spread,
        verdict=verdict,
        action=action,
        reason=reason,
        n_trials=len(group.trials),
    )


def _format_value(value: Any) -> str:
    if isinstance(value, float):
        return f"{value:.3g}"
    return str(value)


def _plain(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    return value


__all__ = [
    "FAMILY_PARAM",
    "SHARED_PREFIX",
    "GroupNote",
    "ImportanceReport",
    "ImportanceRow",
    "Thresholds",
    "TrialRecord",
    "importance_table",
]
