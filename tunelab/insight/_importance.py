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
* **Importance.** optuna's evaluators do the core computation on an in-memory study.
  fANOVA (Hutter, Hoos & Leyton-Brown, ICML 2014) gives the share of score variance explained
  by each parameter's main effect; it is not normalised, so the shares of a group add up to at
  most one and the rest is interactions and noise. PED-ANOVA (Watanabe et al., IJCAI 2023)
  gives how much each parameter matters for reaching the top ``top_quantile`` of scores,
  normalised to add up to one within a group.
* **Interval.** fANOVA fits a random forest in which every tree is grown on its own bootstrap
  resample of the trials. We grow the trees one at a time, each with its own seed, so each
  tree's answer is one bootstrap resample's answer: the importance is their mean (exactly the
  forest's answer) and the interval their 10th-90th percentile. One resample's answer varies
  more than the mean of many, so the interval errs wide, that is towards "keep tuning".
  PED-ANOVA has no resampling of its own and copying a resampled study costs as much as the
  computation, so its interval takes its width from random halves of the trials
  (half-sampling, whose spread matches the bootstrap's for averages; from memory: Efron &
  Tibshirani 1993, *An Introduction to the Bootstrap*), placed around the answer on all trials.
* **Spread.** A separate random forest predicts the score from a group's parameters. The
  predicted score is averaged over the trials while one parameter is set to each of its values
  in turn (partial dependence; from memory: Friedman 2001, *Annals of Statistics* 29(5)); continuous
  parameters are binned into ``_SPREAD_BINS`` equal-width bins on their sampling scale (log for
  log-scaled ones), integers with few values and categoricals use each value. The spread is
  the max - min of that marginal mean score, in metric units. The same forest also sees
  ``_N_PROBES`` made-up parameters drawn at random, which the score cannot depend on; the
  largest spread among them is the group's noise floor, the spread a knob that does nothing
  shows in these data (random probes, as in Boruta; from memory: Kursa & Rudnicki 2010,
  *Journal of Statistical Software* 36(11)).
* **Speed.** optuna's fANOVA walks each tree in Python once per split point and reads the whole
  study on every call, so its cost grows with tree size, split points and trials. Numeric
  values are snapped to ``_FANOVA_BINS`` cells of their sampling scale before fitting (cell
  means on 32 cells keep 99.9 % of a linear effect's variance and about 99 % of one that rises
  and falls twice across the range), and the trees are as deep as a time model allows
  (``_choose_depth``): depth 10 for a few parameters and 1,000 trials, 5 for a four-family
  space with 2,000 trials. The depth used is in the report.
"""

from __future__ import annotations

import logging
import math
import warnings
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
from optuna.distributions import (
    BaseDistribution,
    CategoricalDistribution,
    FloatDistribution,
    IntDistribution,
)

from tunelab.errors import InputError
from tunelab.space import ParamSpec
from tunelab.store import TrialRecord

Direction = Literal["maximize", "minimize"]
Method = Literal["fanova", "ped-anova"]
Action = Literal["keep tuning", "freeze", "no measurable effect"]

FAMILY_PARAM = "family"
"""Name of the categorical parameter that picks the model family."""

_FANOVA_BINS = 32  # numeric values are snapped to this many cells before fANOVA
_SPREAD_BINS = 10  # bins of the marginal mean score behind ``spread``
_SPREAD_TREES = 32
_SPREAD_BACKGROUND = 256  # trials the partial dependence averages over
_N_PROBES = 4  # made-up parameters that show the spread of a knob that does nothing
_MIN_DEPTH, _MAX_DEPTH = 5, 10
# Time model of optuna's fANOVA, measured on the 2-core development machine: one evaluation
# costs about _CALL_SECONDS per trial and parameter (it reads the whole study), and each tree
# about _LEAF_SECONDS per leaf and parameter (one walk per split point, at most _FANOVA_BINS).
_CALL_SECONDS = 15e-6
_LEAF_SECONDS = 1.0e-4
_FANOVA_SECONDS = 4.0  # the deepest trees whose estimate fits this are used


@dataclass(frozen=True)
class Thresholds:
    """When a parameter is worth tuning, safe to freeze, or without effect.

    Verdicts, in order (``high`` is the upper end of the importance interval, ``measurable`` the
    larger of ``tolerance`` and the group's noise floor, see the module docstring):

    1. the group has too few trials (see ``min_trials``) -> "keep tuning";
    2. ``high < negligible_share`` and ``spread <= measurable`` -> "no measurable effect";
    3. ``high < freeze_share`` and the best trial's value is also where the predicted score is
       best (within ``measurable``) -> "freeze at VALUE";
    4. otherwise -> "keep tuning".

    The default shares and tolerance are rules of thumb (common practice, no source).

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
    min_trials, trials_per_param
        A group needs at least ``max(min_trials, trials_per_param x its parameter count)``
        finished trials for a stable answer (common practice, no source).
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
        Importance and its 80 % interval; ``None`` when it could not be computed.
    best_value
        The parameter's value in the best complete trial that has it (``None`` if none).
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
            "best_value": self.best_value.item() if isinstance(self.best_value, np.generic) else self.best_value,
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
        Parameters in the group's models.
    n_trials
        Finished trials in the group that have every one of ``params``.
    trials_required
        ``max(min_trials, trials_per_param x len(params))``.
    trials_needed
        More trials this group needs for a stable answer (0 when it has enough).
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
    trials_required: int
    trials_needed: int
    tolerance: float
    noise_floor: float | None
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
            "noise_floor": self.noise_floor,
            "message": self.message,
        }


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
        About how many more trials, at the current mix of families, until every group has
        enough (0 when all do).
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
        """Whether every group had enough trials for a stable answer."""
        return self.trials_needed == 0

    def row(self, param: str, family: str | None = None) -> ImportanceRow:
        """The row of ``param`` (the one judged in ``family`` when that is given)."""
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
            "notes": list(self.notes),
        }


def importance_table(
    trials: Sequence[TrialRecord],
    distributions: Mapping[str, Any],
    *,
    direction: Direction,
    method: Method = "fanova",
    family: str | None = None,
    thresholds: Thresholds = Thresholds(),
    n_bootstrap: int = 16,
    top_quantile: float = 0.1,
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
        ``"ped-anova"``: share of how much each parameter matters for reaching the top
        ``top_quantile`` of scores.
    family
        Restrict the table to one family: its conditional parameters and the shared ``prep.*``
        parameters, all judged over that family's trials only.
    thresholds
        When to say "keep tuning", "freeze at VALUE" or "no measurable effect".
    n_bootstrap
        Resamples behind the interval; for fANOVA also the number of trees, since each tree is
        one resample. The default keeps 2,000 trials under 10 s on 2 cores.
    top_quantile
        PED-ANOVA only: the share of best trials whose parameter values are compared with all
        trials' (optuna's default, 0.1). Larger values ask about the broad shape of the
        response, smaller ones about what it takes to reach the very best scores.
    include_pruned
        Whether pruned trials count (see ``trials``).
    seed
        Seed for every random choice: the same inputs and seed give the same table.

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
    if not 0.0 < top_quantile < 1.0:
        raise InputError(f"top quantile must be between 0 and 1, got {top_quantile}", "try 0.1 or 0.25")

    distributions = _as_distributions(distributions)
    states = ("complete", "pruned") if include_pruned else ("complete",)
    finished = [t for t in trials if t.state in states and t.value is not None and math.isfinite(float(t.value))]
    families = _family_choices(distributions)
    if family is not None and family not in families:
        known = ", ".join(str(f) for f in families) or "none"
        raise InputError(f"unknown family '{family}'", f"known families: {known}")

    groups = _make_groups(finished, distributions, families, family)
    depth = _choose_depth(groups, n_bootstrap) if method == "fanova" else None
    settings = _Settings(direction, method, thresholds, n_bootstrap, depth, top_quantile)
    seeds = np.random.default_rng(seed).integers(2**31 - 1, size=len(groups))
    rows: list[ImportanceRow] = []
    notes: list[GroupNote] = []
    needed = 0
    for group, group_seed in zip(groups, seeds):
        group_rows, note = _judge_group(group, distributions, settings, int(group_seed))
        rows.extend(group_rows)
        notes.append(note)
        if note.trials_needed:
            share = _group_share(group, len(finished), len(families))
            needed = max(needed, math.ceil(note.trials_needed / share))
    return ImportanceReport(tuple(rows), tuple(notes), method, direction, n_bootstrap, depth, needed)


def _as_distributions(space: Mapping[str, Any]) -> dict[str, BaseDistribution]:
    """The parameters as optuna distributions (the evaluators' input); fixed parameters left out."""
    out: dict[str, BaseDistribution] = {}
    for name, spec in space.items():
        dist = spec.distribution() if isinstance(spec, ParamSpec) else spec
        if dist is not None:
            out[name] = dist
    return out


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


def _family_choices(distributions: Mapping[str, BaseDistribution]) -> tuple[Any, ...]:
    dist = distributions.get(FAMILY_PARAM)
    return tuple(dist.choices) if isinstance(dist, CategoricalDistribution) else ()


def _owner(name: str, families: tuple[Any, ...]) -> str | None:
    """The family a conditional parameter belongs to, or None for a shared parameter."""
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


# ------------------------------------------------------------------------------- encoding


@dataclass(frozen=True)
class _Encoded:
    names: tuple[str, ...]  # the group's non-constant parameters: the models' columns
    unit: np.ndarray  # trials x names, on [0, 1] along each parameter's sampling scale
    y: np.ndarray  # scores


def _internal(name: str, dist: BaseDistribution, value: Any, number: int) -> float:
    try:
        internal = float(dist.to_internal_repr(value))
    except (ValueError, TypeError) as exc:
        raise InputError(
            f"trial {number}: {name}={value!r} is not in its search space",
            "pass the distributions the study was searched with",
        ) from exc
    if isinstance(dist, (FloatDistribution, IntDistribution)):
        slack = 1e-9 * (dist.high - dist.low)
        if not dist.low - slack <= internal <= dist.high + slack:
            raise InputError(
                f"trial {number}: {name}={value!r} is outside [{dist.low}, {dist.high}]",
                "pass the distributions the study was searched with",
            )
    return internal


def _unit(dist: BaseDistribution, values: np.ndarray) -> np.ndarray:
    """Internal values mapped to [0, 1] along the sampling scale.

    Log-scaled parameters map on the log scale, so a uniform measure on [0, 1] is the one the
    sampler searches; categorical choices and stepped numbers get equal-width cells.
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
    return np.asarray(np.clip(out, 0.0, 1.0))


def _snap(u: np.ndarray, bins: int) -> np.ndarray:
    return np.asarray((np.minimum(np.floor(u * bins), bins - 1) + 0.5) / bins)


def _encode(group: _Group, distributions: Mapping[str, BaseDistribution]) -> _Encoded:
    names = tuple(n for n in group.fit_params if not distributions[n].single())
    unit = np.empty((len(group.trials), len(names)))
    for j, name in enumerate(names):
        dist = distributions[name]
        internal = np.array([_internal(name, dist, t.params[name], t.number) for t in group.trials])
        unit[:, j] = _unit(dist, internal)
    return _Encoded(names, unit, np.array([float(t.value) for t in group.trials]))


# ------------------------------------------------------------------------------- importance


@contextmanager
def _quiet_optuna() -> Iterator[None]:
    """Drop optuna's "study created" chatter and warnings for our throw-away studies only."""
    logger = logging.getLogger("optuna.storages._in_memory")
    logger.addFilter(_drop_record)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield
    finally:
        logger.removeFilter(_drop_record)


def _drop_record(record: logging.LogRecord) -> bool:
    return False


def _choose_depth(groups: list[_Group], n_bootstrap: int) -> int:
    """Deepest fANOVA tree whose estimated total time fits ``_FANOVA_SECONDS``.

    A tree on a bootstrap resample of n trials has at most ``min(2**depth, 0.63 n)`` leaves
    (0.63: the share of distinct trials in a bootstrap resample).
    """
    for depth in range(_MAX_DEPTH, _MIN_DEPTH - 1, -1):
        seconds = sum(
            n_bootstrap
            * len(g.fit_params)
            * (_CALL_SECONDS * len(g.trials) + _LEAF_SECONDS * min(2**depth, math.ceil(0.63 * len(g.trials))))
            for g in groups
        )
        if seconds <= _FANOVA_SECONDS:
            return depth
    return _MIN_DEPTH


def _fanova_replicates(enc: _Encoded, n_bootstrap: int, depth: int, seed: int) -> np.ndarray:
    """Importance of each column by ``n_bootstrap`` one-tree forests (resamples x columns).

    Every column enters as a number on [0, 1] snapped to ``_FANOVA_BINS`` cells; categorical
    choices become equal cells, so each choice weighs the same in fANOVA's uniform marginal
    (optuna's one-hot coding would also weigh impossible combinations and cost 2**k walks).
    """
    import optuna
    from optuna.importance import FanovaImportanceEvaluator

    unit: BaseDistribution = FloatDistribution(0.0, 1.0)
    dists = {name: unit for name in enc.names}
    x = _snap(enc.unit, _FANOVA_BINS)
    out = np.zeros((n_bootstrap, len(enc.names)))
    with _quiet_optuna():
        study = optuna.create_study(direction="minimize")
        study.add_trials(
            [
                optuna.trial.create_trial(params=dict(zip(enc.names, map(float, row))), distributions=dists, value=float(v))
                for row, v in zip(x, enc.y)
            ]
        )
        for b, tree_seed in enumerate(np.random.default_rng(seed).integers(2**31 - 1, size=n_bootstrap)):
            evaluator = FanovaImportanceEvaluator(n_trees=1, max_depth=depth, seed=int(tree_seed))
            try:
                result = evaluator.evaluate(study)
            except RuntimeError:  # this resample's tree saw no variance: nothing explains anything
                continue
            out[b] = [result[name] for name in enc.names]
    return out


def _ped_anova_replicates(
    group: _Group,
    enc: _Encoded,
    distributions: Mapping[str, BaseDistribution],
    settings: _Settings,
    seed: int,
) -> tuple[np.ndarray, np.ndarray]:
    """PED-ANOVA shares on all trials, and on ``n_bootstrap`` random halves of them."""
    import optuna
    from optuna.importance import PedAnovaImportanceEvaluator

    dists = {name: distributions[name] for name in enc.names}
    sign = 1.0 if settings.direction == "minimize" else -1.0  # the evaluator's target is minimised
    n = len(group.trials)
    evaluator = PedAnovaImportanceEvaluator(target_quantile=settings.top_quantile)
    rng = np.random.default_rng(seed)
    with _quiet_optuna():
        study = optuna.create_study(direction="minimize")
        study.add_trials(
            [
                optuna.trial.create_trial(
                    params={name: t.params[name] for name in enc.names}, distributions=dists, value=sign * float(t.value)
                )
                for t in group.trials
            ]
        )

        def shares(keep: np.ndarray) -> np.ndarray:
            # A non-finite target leaves a trial out, so one study serves every half.
            result = evaluator.evaluate(
                study, params=list(enc.names), target=lambda t: t.value if keep[t.number] and t.value is not None else math.nan
            )
            raw = np.array([result[name] for name in enc.names])
            return raw / raw.sum() if raw.sum() > 0 else raw

        point = shares(np.ones(n, dtype=bool))
        halves = np.empty((settings.n_bootstrap, len(enc.names)))
        for b in range(settings.n_bootstrap):
            keep = np.zeros(n, dtype=bool)
            keep[rng.choice(n, size=n // 2, replace=False)] = True
            halves[b] = shares(keep)
    return point, halves


# ------------------------------------------------------------------------------- spread


@dataclass(frozen=True)
class _Marginal:
    grid: np.ndarray  # positions on [0, 1] where the score was predicted
    score: np.ndarray  # mean predicted score at each position


def _grid(dist: BaseDistribution | None, unit: np.ndarray) -> np.ndarray:
    """Observed positions, binned to ``_SPREAD_BINS`` equal-width bins when there are more."""
    values = np.unique(unit)
    if isinstance(dist, CategoricalDistribution) or len(values) <= _SPREAD_BINS:
        return values
    return np.unique(_snap(values, _SPREAD_BINS))


def _marginals(
    enc: _Encoded, distributions: Mapping[str, BaseDistribution], seed: int
) -> tuple[list[_Marginal], float]:
    """Partial dependence of the predicted score on each column, and the probes' noise floor."""
    from sklearn.ensemble import RandomForestRegressor  # type: ignore[import-untyped]

    rng = np.random.default_rng(seed)
    n, p = enc.unit.shape
    x = np.hstack([enc.unit, rng.random((n, _N_PROBES))])
    forest = RandomForestRegressor(
        n_estimators=_SPREAD_TREES, min_samples_leaf=max(3, n // 100), random_state=int(rng.integers(2**31 - 1))
    )
    forest.fit(x, enc.y)
    background = x if n <= _SPREAD_BACKGROUND else x[rng.choice(n, _SPREAD_BACKGROUND, replace=False)]
    grids = [_grid(distributions[enc.names[j]] if j < p else None, x[:, j]) for j in range(p + _N_PROBES)]
    batches = []
    for j, grid in enumerate(grids):  # every column at every grid value, predicted in one call
        batch = np.repeat(background[None, :, :], len(grid), axis=0)
        batch[:, :, j] = grid[:, None]
        batches.append(batch.reshape(-1, x.shape[1]))
    pred = np.split(forest.predict(np.vstack(batches)), np.cumsum([len(b) for b in batches])[:-1])
    out = [_Marginal(grid, y.reshape(len(grid), -1).mean(axis=1)) for grid, y in zip(grids, pred)]
    floor = max(float(np.ptp(m.score)) for m in out[p:])
    return out[:p], floor


# ------------------------------------------------------------------------------- verdicts


def _judge_group(
    group: _Group, distributions: Mapping[str, BaseDistribution], settings: _Settings, seed: int
) -> tuple[list[ImportanceRow], GroupNote]:
    th = settings.thresholds
    n = len(group.trials)
    required = max(th.min_trials, th.trials_per_param * len(group.fit_params))
    needed = max(0, required - n)
    enc = _encode(group, distributions)
    tolerance = _tolerance(th, enc.y)

    stats: dict[str, tuple[float, float, float]] = {n_: (0.0, 0.0, 0.0) for n_ in group.report_params}
    spreads: dict[str, float] = {n_: 0.0 for n_ in group.report_params}
    marginals: dict[str, _Marginal] = {}
    floor: float | None = None
    if n < 3:  # nothing to compute on
        stats, spreads = {}, {}
    elif enc.names and np.ptp(enc.y) > 0:  # else every score is equal: nothing explains anything
        imp_seed, spread_seed = (int(s) for s in np.random.default_rng(seed).integers(2**31 - 1, size=2))
        if settings.method == "fanova":
            assert settings.depth is not None
            reps = _fanova_replicates(enc, settings.n_bootstrap, settings.depth, imp_seed)
            point = reps.mean(axis=0)
            low = np.minimum(np.percentile(reps, 10, axis=0), point)
            high = np.maximum(np.percentile(reps, 90, axis=0), point)
        else:
            # Halves see fewer top trials, which shifts PED-ANOVA's answer, so they give only
            # the width of the interval, placed around the answer on all trials.
            point, reps = _ped_anova_replicates(group, enc, distributions, settings, imp_seed)
            q10, q50, q90 = np.percentile(reps, [10, 50, 90], axis=0)
            low = np.clip(point - (q50 - q10), 0.0, point)
            high = np.clip(point + (q90 - q50), point, 1.0)
        curves, floor = _marginals(enc, distributions, spread_seed)
        for j, name in enumerate(enc.names):
            stats[name] = (float(point[j]), float(low[j]), float(high[j]))
            spreads[name] = float(np.ptp(curves[j].score))
            marginals[name] = curves[j]

    measurable = max(tolerance, floor or 0.0)
    best = _best_trial(group.trials, settings.direction)
    rows = []
    for name in group.report_params:
        best_value = best.params[name] if best is not None else None
        clear = _best_is_clear(distributions[name], marginals.get(name), best_value, settings.direction, measurable)
        rows.append(_row(name, group, stats.get(name), spreads.get(name), best_value, clear, th, measurable, needed))
    rows.sort(key=lambda r: -1.0 if r.importance is None else r.importance, reverse=True)
    return rows, GroupNote(
        group.family, group.fit_params, n, required, needed, tolerance, floor, _group_message(group, required, needed)
    )


def _group_message(group: _Group, required: int, needed: int) -> str:
    where = "all trials" if group.family is None else f"family {group.family}"
    n, k = len(group.trials), len(group.fit_params)
    if needed:
        text = f"{where}: {n} finished trials, {required} needed for a stable answer on {k} parameters; run {needed} more"
    else:
        text = f"{where}: {n} finished trials, enough for {k} parameters"
    if n < group.n_candidates:
        text += f" ({group.n_candidates - n} trials lacked one of the parameters and were left out)"
    return text


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
    dist: BaseDistribution, marginal: _Marginal | None, best_value: Any, direction: Direction, measurable: float
) -> bool:
    """Whether the best trial's value is also where the predicted score is best."""
    if best_value is None:
        return False
    if marginal is None:  # a constant parameter, or a group whose scores are all equal
        return True
    position = float(_unit(dist, np.array([dist.to_internal_repr(best_value)]))[0])
    at_best = marginal.score[int(np.argmin(np.abs(marginal.grid - position)))]
    optimum = marginal.score.max() if direction == "maximize" else marginal.score.min()
    return bool(abs(optimum - at_best) <= measurable)


def _row(
    name: str,
    group: _Group,
    stat: tuple[float, float, float] | None,
    spread: float | None,
    best_value: Any,
    clear_best: bool,
    th: Thresholds,
    measurable: float,
    needed: int,
) -> ImportanceRow:
    importance, low, high = stat if stat is not None else (None, None, None)
    action: Action = "keep tuning"
    verdict = "keep tuning"
    if needed:
        reason = f"too few trials to judge: {needed} more needed in this group"
    elif importance is None or high is None or spread is None:
        reason = "too few trials to compute an importance"
    elif high < th.negligible_share and spread <= measurable:
        action = verdict = "no measurable effect"
        reason = f"importance at most {high:.3f} < {th.negligible_share:g}; score moves {spread:.3g} <= {measurable:.3g}"
    elif high < th.freeze_share and clear_best:
        action, verdict = "freeze", f"freeze at {_format_value(best_value)}"
        reason = f"importance at most {high:.3f} < {th.freeze_share:g}; the best trial's value is where the predicted score is best"
    elif high < th.freeze_share:
        reason = f"importance at most {high:.3f}, but the best value is not clear yet; score moves {spread:.3g}"
    else:
        reason = f"importance up to {high:.3f} >= {th.freeze_share:g}; score moves {spread:.3g}"
    return ImportanceRow(name, group.family, importance, low, high, best_value, spread, verdict, action, reason, len(group.trials))


def _format_value(value: Any) -> str:
    return f"{value:.3g}" if isinstance(value, float) else str(value)


__all__ = [
    "FAMILY_PARAM",
    "GroupNote",
    "ImportanceReport",
    "ImportanceRow",
    "Thresholds",
    "TrialRecord",
    "importance_table",
]
