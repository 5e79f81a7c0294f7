"""Choosing the pruner, and two pruning rules that compare trials at equal steps only.

Steps count work (see ``tunelab.engine._objective``): step 1 is a third of the first fold,
step 3 one fold, step 6 two folds.  Three things follow for a fair comparison:

* a trial is compared with the values other trials reported *at the same step* — optuna's own
  halving pruners instead take whatever value a trial had when it passed a rung, so a model
  that first reports after a whole fold would be ranked against models a third of the way
  through theirs;
* below one fold (steps 1 and 2) only forests are judged, and only against forests of their
  own family.  A forest's trees are independent, so a third of them scores close to all of
  them; a third of boosting's rounds or of the MLP's epochs is a point on a learning curve
  whose pace the learning rate sets, and ranking there prunes the slow learners that end
  best (``benchmarks/pruning.py``, diamonds: the three best boosting configurations of an
  unpruned search ranked 7th-10th of 18 at a third of their rounds, and 1st-4th of 26 after
  the fold).  Boosting and the MLP still report there; the values are kept with the trial.
  From step 3 on, every value is a fully fitted fold's held-out score, and all families meet;
* from one fold on, a trial must also be among the best share of *its own family* at that step.
  Weak families pad a rung that all families share, so the family a search settles on passed
  nearly every rung (``benchmarks/pruning.py``, diamonds, two seeds: 73-87 % of boosting trials
  went on after one fold and about 60 % after two, against the third that halving intends) and
  its five-fold fits took most of the budget.  Within the family the usual third goes on; a trial of a weak family
  is still stopped by the rung all families share.
* with rows as a fidelity (``row_rungs``), steps 1 and 2 are the first fold fully fitted on 1/9
  and 1/3 of its training rows: whole models, so every family is judged there, but only against
  its own family: on a sample, simple models can lead and trail on all rows (learning curves of
  logistic regression and trees cross: Perlich, Provost & Simonoff 2003, JMLR 4; from memory).  On
  a 100,000-row table at 40 s, judging across families there stopped every boosting trial behind
  linear models that it beat by 0.02 ROC AUC on all rows; each row rung is a rung;
* each family's best at the first fold goes on to a second once, whatever the rung all families
  share says (``second_fold``): until a trial of it has finished two folds, the family decisions
  (``tunelab.insight``) cannot drop it — a trial stopped at its first fold was stopped for that
  fold's score, and one-fold drops dropped the family a longer study found best
  (``docs/experiments/decisions.md``, seeds 6-8).  It costs about one fold per family;
* optionally (``margin_se``), a trial must trail the kept share by more than chance: a number
  of standard errors of the difference between two trials' running means (``fold_noise``,
  measured on the finished trials).  It keeps more of the trials that end best on the folds, but
  not of those that end best on new rows, so it is off by default (see ``MARGIN_SE``).  Under
  accuracy too: 0.75 standard errors, chosen on the development half, cost the held-back half its
  speed (1.2-2.0x the configurations per minute instead of 2.0-3.4x) and kept no more of the best
  (docs/experiments/pruning.md, seeds 47-49).  The noise is measured in the units the rungs rank by.

:class:`RungPruner` is asynchronous successive halving on that basis (``halving``, and
``hyperband`` as three brackets of it); :class:`MedianPruner` is the median rule.  Both are
stateless: everything they compare is in the store, so a resumed study prunes as before.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Callable, Iterable

import optuna
from optuna.pruners import BasePruner
from optuna.trial import FrozenTrial, TrialState

from tunelab.engine._objective import STEPS_PER_FOLD, fold_scores_from_reports
from tunelab.errors import InputError
from tunelab.stats import fit_folds

PRUNING_CHOICES = ("auto", "off", "median", "halving", "hyperband")

# Rungs at a third of the first fold and after every fold but the last (folds are at most five,
# see tunelab.evaluation).  With each trial also judged within its family, rungs after every
# fold measured 2.08-4.84x the configurations per minute of no pruning on six datasets (mean of
# two seeds, benchmarks/README.md) against 1.58-5.31x for rungs at one third, one and two folds
# judged across families only; the geometric ladder (1, 3, 9) saved less in replays.
RUNG_STEPS = (1, *(STEPS_PER_FOLD * fold for fold in range(1, 5)))  # rung_steps() without row rungs
RUNG_FACTOR = 3  # successive halving's reduction factor: the best third of a rung goes on
KEEP = 1 / RUNG_FACTOR  # the best third goes on: successive halving with factor 3 (Jamieson & Talwalkar 2016;
# asynchronous form: Li et al. 2020, "A System for Massively Parallel Hyperparameter Tuning"; from memory)
# Families whose partly grown model previews the whole (see the module docstring): judged below one fold.
PREVIEW_FAMILIES = frozenset({"random_forest", "extra_trees"})
MIN_PEERS = 2  # a rung prunes once it holds another value to compare with (common practice, no source)
MEDIAN_STARTUP = 5  # finished trials before the median rule prunes (common practice, no source)
MARGIN_SE = 0.0  # how far past the kept share a trial must trail, in standard errors of a paired fold
# difference (see fold_noise); off by default.  Replayed over twelve unpruned studies (benchmarks/pruning_replay.py,
# six datasets, two seeds), half a standard error stopped the search's eventual best in 2 of 12 against 7 with
# none; run for real (benchmarks/pruning.py, seeds 0-1) it found an equal or better best CV on 5 of 6 but an
# equal or better test score on 1 of 6, at 1.3-3.3x the configurations per minute (benchmarks/README.md)
FEW_TRIALS = 4  # below this many expected trials there is nothing to rank (common practice, no source); even
# at about 10 (hpc, 60 s) halving bought 1.9x the configurations and a better best CV score in benchmarks/pruning.py


def _maximise(study: optuna.Study) -> bool:
    return study.direction == optuna.study.StudyDirection.MAXIMIZE


def _judged_at(trial: FrozenTrial, step: int, row_rungs: int = 0) -> bool:
    """Whether a value at ``step`` may prune: from one fold on and on a row rung always, else only for forests."""
    return step >= STEPS_PER_FOLD or step <= row_rungs or trial.params.get("family") in PREVIEW_FAMILIES


def rung_steps(row_rungs: int = 0) -> tuple[int, ...]:
    """The rungs: every row rung (steps 1 … ``row_rungs``), else a third of fold 1; then each fold but the last."""
    below = tuple(range(1, row_rungs + 1)) if row_rungs else (1,)
    return (*below, *(STEPS_PER_FOLD * fold for fold in range(1, 5)))


def fold_noise(study: optuna.Study) -> float | None:
    """The spread of one fold's value, as the rungs compare it, that a comparison of two trials cannot explain.

    The residual of the additive fold model (``tunelab.stats``) fitted to the finished trials'
    per-fold values recovered from the running means they reported (folds 1 … k−1; the last fold
    is never reported).  These are in the units the rungs rank by: the metric, or for a coarse
    metric its smooth stand-in (``tunelab.evaluation.ranking_metric``).  Two trials' running means
    after ``k`` folds then differ by chance with a standard deviation of ``noise * sqrt(2 / k)``.
    None until two finished trials reported two folds or more.
    """
    rows = [fold_scores_from_reports(t.intermediate_values)
            for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))]
    fit = fit_folds(rows)
    return None if fit is None else fit.noise


def _peer_values(study: optuna.Study, trial: FrozenTrial, step: int, states: Iterable[TrialState],
                 also: Callable[[FrozenTrial], bool] | None = None) -> list[float]:
    """Values other trials reported at exactly ``step``; below one fold (a row rung too), from the same family only."""
    family = trial.params.get("family")
    values = []
    for other in study.get_trials(deepcopy=False, states=tuple(states)):
        if other.number == trial.number or (also is not None and not also(other)):
            continue
        if step < STEPS_PER_FOLD and other.params.get("family") != family:
            continue
        seen = other.intermediate_values.get(step)
        if seen is not None and not math.isnan(seen):
            values.append(seen)
    return values


def _family_first_past_fold(study: optuna.Study, trial: FrozenTrial, value: float) -> bool:
    """Whether ``value`` at the first fold is the best of the trial's family there, and no trial of
    the family has gone past the first fold yet (finished, or reported beyond it)."""
    family = trial.params.get("family")
    if family is None:  # a space of one family: there is no family decision to feed
        return False
    better = (lambda a, b: a > b) if _maximise(study) else (lambda a, b: a < b)
    for other in study.get_trials(deepcopy=False):
        if other.number == trial.number or other.params.get("family") != family:
            continue
        if other.state == TrialState.COMPLETE or any(s > STEPS_PER_FOLD for s in other.intermediate_values):
            return False
        seen = other.intermediate_values.get(STEPS_PER_FOLD)
        if seen is not None and not math.isnan(seen) and better(seen, value):
            return False
    return True


class RungPruner(BasePruner):
    """Asynchronous successive halving at fixed steps, comparing equal steps only.

    Rungs sit at ``rungs`` (by default a third of the first fold, then after each fold but the
    last: steps 1, 3, 6, 9, 12).  A trial that reports at a rung goes on only if its value is among the
    best ``keep`` share — rounded up, so at least the best one — of all values reported at that
    same step so far, its own included: by trials in any state, and in hyperband by trials of
    its bracket; with ``within_family``, from one fold on it must also be among the best share
    of the values its own family reported there.  A share with fewer than ``min_peers`` values
    prunes nothing.  A NaN value is always pruned.

    The textbook share is kept, 1/3.  Keeping half instead was measured in
    ``benchmarks/pruning.py`` (60 s, six datasets): 1.1-4.0x the configurations per minute of
    no pruning against 1.9-3.8x with a third, and no better final score.

    Parameters
    ----------
    rungs
        The steps that are rungs, in increasing order.
    keep
        Share of a rung that goes on (0 < keep < 1).
    min_peers
        Values a rung must hold, this trial's included, before it prunes.
    brackets
        With more than one bracket (hyperband), trial ``n`` belongs to bracket ``b = n % brackets``,
        is compared only within it, and is first judged at rung ``b``.
    within_family
        From one fold on, also require the best ``keep`` share of the trial's own family (see
        the module docstring); below one fold the comparison is within the family anyway.
    margin_se
        From one fold on, prune only a trial that trails the kept share by more than this many
        standard errors of a paired difference of running means (``fold_noise``); 0, the
        default, ranks by value alone.
    row_rungs
        Steps 1 … ``row_rungs`` are row rungs (whole fits on row samples): judged for every
        family, within its own family only.  With row rungs the default ``rungs`` are
        ``rung_steps(row_rungs)``.
    second_fold
        At the first fold, let a trial go on that is the best its family reported there while no
        trial of the family has gone past the first fold (see the module docstring).
    """

    def __init__(self, rungs: tuple[int, ...] | None = None, keep: float = KEEP, min_peers: int = MIN_PEERS,
                 brackets: int = 1, within_family: bool = True, margin_se: float = MARGIN_SE,
                 row_rungs: int = 0, second_fold: bool = True) -> None:
        rungs = rung_steps(row_rungs) if rungs is None else rungs
        if (not rungs or list(rungs) != sorted(set(rungs)) or rungs[0] < 1 or not 0.0 < keep < 1.0
                or min_peers < 1 or brackets < 1 or margin_se < 0):
            raise ValueError("increasing rungs from step 1, 0 < keep < 1, min_peers >= 1, brackets >= 1 "
                             "and margin_se >= 0 are required")
        self.rungs = tuple(rungs)
        self.keep = keep
        self.min_peers = min_peers
        self.brackets = brackets
        self.within_family = within_family
        self.margin_se = margin_se
        self.row_rungs = row_rungs
        self.second_fold = second_fold

    def rung_of(self, step: int) -> int | None:
        """The rung index of a step, or None between rungs."""
        return self.rungs.index(step) if step in self.rungs else None

    def prune(self, study: optuna.Study, trial: FrozenTrial) -> bool:
        step = trial.last_step
        if step is None:
            return False
        value = trial.intermediate_values[step]
        if math.isnan(value):
            return True
        if not _judged_at(trial, step, self.row_rungs):
            return False
        rung = self.rung_of(step)
        bracket = trial.number % self.brackets
        if rung is None or rung < bracket:
            return False
        same_bracket = None if self.brackets == 1 else (lambda t: t.number % self.brackets == bracket)
        states = (TrialState.COMPLETE, TrialState.PRUNED, TrialState.RUNNING, TrialState.FAIL)
        if self.second_fold and step == STEPS_PER_FOLD and _family_first_past_fold(study, trial, value):
            return False
        margin = self._margin(study, step)
        values = [value, *_peer_values(study, trial, step, states, same_bracket)]
        if self._below_share(study, value, values, margin):
            return True
        if self.within_family and step >= STEPS_PER_FOLD:
            family = trial.params.get("family")
            kin = [value, *_peer_values(study, trial, step, states,
                                        lambda t: t.params.get("family") == family
                                        and (same_bracket is None or same_bracket(t)))]
            return self._below_share(study, value, kin, margin)
        return False

    def _margin(self, study: optuna.Study, step: int) -> float:
        """How far past the kept share a value at ``step`` must be to prune: chance, from one fold on."""
        folds = step // STEPS_PER_FOLD
        if folds < 1 or self.margin_se == 0:
            return 0.0
        noise = fold_noise(study)
        return 0.0 if noise is None else self.margin_se * noise * math.sqrt(2.0 / folds)

    def _below_share(self, study: optuna.Study, value: float, values: list[float], margin: float = 0.0) -> bool:
        """Whether ``value`` trails the best ``keep`` share of ``values`` (its own included) by more than ``margin``."""
        if len(values) < self.min_peers:
            return False
        kept = max(1, math.ceil(len(values) * self.keep - 1e-9))
        threshold = sorted(values, reverse=_maximise(study))[kept - 1]
        return value < threshold - margin if _maximise(study) else value > threshold + margin


class MedianPruner(BasePruner):
    """Prune a trial whose value at a step is worse than the median of finished trials at that step.

    Nothing is pruned before ``startup`` trials have finished, nor at a step fewer than
    ``min_peers`` finished trials reported (below one fold: finished trials of the same family).
    A NaN value is always pruned.  As with :class:`RungPruner`, each family's best at the first
    fold goes on to a second once (``second_fold``).
    """

    def __init__(self, startup: int = MEDIAN_STARTUP, min_peers: int = 3, row_rungs: int = 0,
                 second_fold: bool = True) -> None:
        self.startup = startup
        self.min_peers = min_peers
        self.row_rungs = row_rungs
        self.second_fold = second_fold

    def prune(self, study: optuna.Study, trial: FrozenTrial) -> bool:
        step = trial.last_step
        if step is None:
            return False
        value = trial.intermediate_values[step]
        if math.isnan(value):
            return True
        if not _judged_at(trial, step, self.row_rungs):
            return False
        if len(study.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))) < self.startup:
            return False
        if self.second_fold and step == STEPS_PER_FOLD and _family_first_past_fold(study, trial, value):
            return False
        peers = _peer_values(study, trial, step, (TrialState.COMPLETE,))
        if len(peers) < self.min_peers:
            return False
        median = statistics.median(peers)
        return value < median if _maximise(study) else value > median


def choose_pruning(expected_trials: float | None) -> str:
    """What ``auto`` means for a launch expected to finish ``expected_trials`` trials.

    Ranking needs a population: with fewer than ``FEW_TRIALS`` trials nothing is pruned;
    otherwise successive halving, which lets a third of the first fold decide whether a model
    gets the whole fold, and each fold whether it gets the next.  The median rule stays a choice
    (``--pruning median``): it measured no better at any trial count in ``benchmarks/pruning.py``.
    ``tunelab run`` estimates the count from the budget and the space builder's cost probes
    (``SpaceSpec.trial_seconds``); without an estimate it gets halving.
    """
    if expected_trials is None:
        return "halving"
    return "off" if expected_trials < FEW_TRIALS else "halving"


def make_pruner(kind: str, *, max_steps: int | None = None, expected_trials: float | None = None,
                row_rungs: int = 0) -> BasePruner:
    """The pruner for ``kind`` (one of ``PRUNING_CHOICES``).

    Parameters
    ----------
    kind
        ``auto`` chooses with :func:`choose_pruning`; ``off``, ``median``, ``halving`` or
        ``hyperband`` force a rule.
    max_steps
        Accepted for callers that pass it; the rules here need no step count, because steps
        count work and the last fold is never reported.
    expected_trials
        Trials the launch is expected to finish (budget divided by a typical trial time), if known.
    row_rungs
        The study's row rungs (rows as a fidelity); ``auto`` then always means halving, which is
        what climbs the ladder, and ``off`` is refused (a study with row rungs needs a pruner).

    Raises
    ------
    InputError
        For an unknown ``kind``.
    """
    del max_steps
    if kind not in PRUNING_CHOICES:
        raise InputError(f"unknown pruning '{kind}'", f"use one of: {', '.join(PRUNING_CHOICES)}")
    if kind == "auto":
        kind = "halving" if row_rungs else choose_pruning(expected_trials)
    if kind == "off":
        if row_rungs:
            raise ValueError("a study with row rungs cannot be searched without pruning")
        return optuna.pruners.NopPruner()
    if kind == "median":
        return MedianPruner(row_rungs=row_rungs)
    if kind == "halving":
        return RungPruner(row_rungs=row_rungs)
    return RungPruner(brackets=3, row_rungs=row_rungs)
