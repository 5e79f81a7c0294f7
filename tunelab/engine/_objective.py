"""Objectives: what one trial computes, reporting intermediate values so it can be pruned.

An objective is a callable ``objective(config, report) -> TrialResult``.  ``report(step, value)``
hands an intermediate value to the engine and raises :class:`PruneSignal` when the trial should
stop.  Objectives never touch the store or the terminal.

Steps of the cross-validation objective
---------------------------------------
A pruner compares trials *at equal steps*, so a step must mean the same amount of work and the
same kind of value for every family.  Here a step is a unit of work — one third of a fold
(``STEPS_PER_FOLD = 3``) — and the value is always the study's *ranking score* on held-out rows:
its metric, or for a metric too coarse to rank on part of the data (accuracy) a smooth proper
scoring rule of the same predictions (``tunelab.evaluation.ranking_metric``).  The fold scores
a trial keeps, and the score a complete trial is chosen by, are always the study's metric; a
pruned trial carries the metric on the folds it finished (``PruneSignal.fold_scores``):

==========================  ========================================================
step                        value reported
==========================  ========================================================
1, 2                        within the first fold, after 1/3 and 2/3 of the model's
                            training (boosting rounds, trees of a forest, planned epochs
                            of the MLP): the metric on the first fold's held-out rows
3                           the first fold fully fitted: its held-out score (gradient
                            boosting: grown until its held-out loss stops improving,
                            then scored at the round count its held-out curve chose,
                            see ``best_rounds``; the later folds fit that many)
3·f (f = 2 … k-1)           after fold f: the mean of the held-out scores of folds 1 … f
==========================  ========================================================

Families whose fit cannot be cut into parts (linear models, k-NN, SVM) first report at step 3.

Rows as a fidelity (a study with ``row_shares``, see ``tunelab.evaluation``'s row ladder) gives
steps 1 and 2 another meaning: the first fold *fully fitted on 1/9, then 1/3 of its training rows*
(nested, stratified samples), scored on all of its held-out rows.  Step 3 and on are as above, on
every row.  Every family reports there and is compared with every other, as from step 3 on; the
thirds of training are then not reported (they would need steps of their own).
Because step numbers count work, a pruner's rungs placed at steps 1, 3, 6 mean "a third of a
fold, one fold, two folds" for every family (the default rungs go on after every fold).  How far a third of the
training takes a model along its learning curve differs between families (a third of a forest's trees is nearly the
whole forest; a third of the boosting rounds is not), so the pruners in ``_pruning.py`` judge
steps below ``STEPS_PER_FOLD`` only for forests, within their own family; from step 3 on, every value is a fully
fitted model's held-out score and all families are compared.  The last fold is not reported: the trial is
then complete, and pruning it would only throw its result away.  Losses on other scales (the
MLP's inner validation loss, training loss) are never reported.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from threadpoolctl import threadpool_limits

from tunelab.data import Dataset
from tunelab.evaluation import (
    MIN_RUNG_ROWS,
    Metric,
    better,
    make_folds,
    nested_prefixes,
    ranking_metric,
    rung_rows,
    score,
    score_output,
    share_words,
    stratified_order,
)
from tunelab.store import keys

Report = Callable[[int, float], None]

STEPS_PER_FOLD = 3
# An MLP with early stopping typically stops after about four times its patience (the space
# builder measured ~40 epochs at patience 10); the first-fold checkpoints are thirds of that.
PATIENCES_PLANNED = 4
# The warm-up (see CrossValidationObjective.warm_up): rows of the first fold, and the size every
# work knob (boosting rounds, trees, epochs) is cut to, enough to run the chunked path.
WARM_UP_ROWS = 200
WARM_UP_WORK = STEPS_PER_FOLD
_WORK_KNOBS = {"max_iter", "n_estimators", "max_epochs"}
# Points along a boosting model's rounds where the first fold's held-out score is checked to
# choose how many rounds the other folds (and the final refit) use; see ``best_rounds``.
ROUND_CHECKS = 20
# The first fold stops growing a boosting model after this share of its ceiling (at least this
# many rounds) without a better held-out loss; see ``_stop_on_held_out``.  Common practice, no source.
EARLY_STOP_SHARE = 0.1
EARLY_STOP_MIN_ROUNDS = 10
ROUNDS_ATTR = keys.ROUNDS


class PruneSignal(Exception):
    """Raised inside an objective (via ``report``) when the engine decides to prune the trial.

    On its way out of the cross-validation objective it picks up ``fold_scores``: the study's
    metric on each fold the trial finished.
    """

    fold_scores: list[float] | None = None


@dataclass
class TrialResult:
    """A finished evaluation: the value, per-fold scores, and anything worth recording."""

    value: float
    fold_scores: list[float] = field(default_factory=list)
    extras: dict[str, Any] = field(default_factory=dict)
    # The predictions on each fold's held-out rows (positive-class probability for two classes, one
    # column per class for more, values for regression), kept for ensemble selection.
    predictions: list[np.ndarray] | None = None


class Objective(Protocol):
    def __call__(self, config: Mapping[str, Any], report: Report) -> TrialResult: ...


def fold_step(fold: int) -> int:
    """The step reported when fold ``fold`` (counted from 1) is done."""
    return STEPS_PER_FOLD * fold


def fold_scores_from_reports(reports: Mapping[int, float]) -> list[float]:
    """Each finished fold's own score, from the running means reported after folds 1, 2, ...

    A trial reports the mean of folds 1 … f at step ``fold_step(f)``, so fold f scored
    ``f · mean_f − (f − 1) · mean_(f−1)``; a pruned trial's finished folds are compared with
    other trials' scores on the same folds this way.
    """
    scores: list[float] = []
    previous = 0.0
    fold = 1
    while fold_step(fold) in reports:
        mean = float(reports[fold_step(fold)])
        scores.append(fold * mean - (fold - 1) * previous)
        previous = mean
        fold += 1
    return scores


def step_folds(step: int) -> float:
    """The work a step stands for, in folds (step 1 is a third of a fold)."""
    return step / STEPS_PER_FOLD


def describe_step(step: int, n_folds: int, row_shares: tuple[float, ...] = ()) -> str:
    """Plain words for how far a trial got: ``"2/3 of fold 1"``, ``"fold 1 on 1/9 of its rows"``, ``"2 of 5 folds"``."""
    if step < STEPS_PER_FOLD and step <= len(row_shares):
        return f"fold 1 on {share_words(row_shares[step - 1])} of its training rows"
    if step < STEPS_PER_FOLD:
        return f"{step}/{STEPS_PER_FOLD} of fold 1"
    return f"{step // STEPS_PER_FOLD} of {n_folds} folds"


def _silent(step: int, value: float) -> None:
    """A report that goes nowhere: the thirds of training on a row rung are not steps of their own."""


@dataclass
class CrossValidationObjective:
    """k-fold cross-validation of the pipeline a config describes, reporting on the step scale above.

    Parameters
    ----------
    dataset
        The prepared data.
    metric
        What to score on each held-out fold.
    seed
        Seeds the folds and the models, so the same config gives the same score.
    n_threads
        Cores a model may use inside one trial.
    n_folds
        Folds to use; by default chosen from the data size (see ``fold_count``).
    row_shares
        The row ladder's sample shares (at most ``STEPS_PER_FOLD - 1``, increasing), or none: the
        first fold is then fitted on those shares of its training rows first (steps 1, 2 …).
    min_rung_rows
        A row-capped family climbs its ladder only when the bottom rung of its sample has this
        many rows.
    """

    dataset: Dataset
    metric: Metric
    seed: int = 0
    n_threads: int = 1
    n_folds: int | None = None
    row_shares: tuple[float, ...] = ()
    min_rung_rows: int = MIN_RUNG_ROWS

    def __post_init__(self) -> None:
        if len(self.row_shares) >= STEPS_PER_FOLD or list(self.row_shares) != sorted(set(self.row_shares)):
            raise ValueError(f"at most {STEPS_PER_FOLD - 1} increasing row shares are allowed")
        self.folds = make_folds(self.dataset.y, self.dataset.task, self.seed, self.n_folds)
        self.cardinality = self.dataset.cardinality
        train = self.folds[0][0]
        # One seeded, stratified order of the first fold's training rows; each rung takes a prefix
        # (nested), and so does a row-capped family's sample, the top of its ladder.
        self.rung_order = stratified_order(train, self.dataset.y, self.dataset.task, self.seed + 1) \
            if self.row_shares else None

    def describe_step(self, step: int) -> str:
        """How far a trial that stopped at ``step`` got, in words."""
        return describe_step(step, len(self.folds), self.row_shares)

    def warm_up(self, configs: Iterable[Mapping[str, Any]]) -> None:
        """Run each config's first-fold path once, on a few rows and tiny models, in this process.

        Trials run in forked children, which inherit what the parent has imported and cached
        but lose whatever they load themselves when they exit: scikit-learn's lazy imports and
        threadpoolctl's scan of the loaded libraries cost about 0.1 s in every trial when the
        parent never fitted anything (measured on a 3,000-row table, where one fold of a linear
        model takes 0.11 s).  A warm-up that fails is ignored: the trial itself will report it.
        """
        train, test = self.folds[0]
        train, test = train[:WARM_UP_ROWS], test[:WARM_UP_ROWS // 2]
        X, y = self.dataset.X, self.dataset.y
        for config in configs:
            small = {k: (WARM_UP_WORK if k.rsplit(".", 1)[-1] in _WORK_KNOBS else v) for k, v in config.items()}
            try:
                from tunelab.models import build_pipeline

                pipeline = build_pipeline(small, self.dataset.roles, self.cardinality, self.dataset.task,
                                          seed=self.seed, n_threads=self.n_threads)
                with warnings.catch_warnings(), threadpool_limits(self.n_threads):
                    warnings.simplefilter("ignore")
                    held_out = _HeldOut(self.metric, y[test], self.dataset.classes)
                    fit_in_parts(pipeline, X.iloc[train], y[train], X.iloc[test], held_out, lambda step, value: None)
            except Exception:  # only a warm-up
                continue

    def __call__(self, config: Mapping[str, Any], report: Report) -> TrialResult:
        from tunelab.models import build_pipeline, capped_rows, row_cap

        X, y = self.dataset.X, self.dataset.y
        cap = row_cap(config)
        scores: list[float] = []  # the study's metric, fold by fold
        ranks: list[float] = []  # what the rungs rank by (the metric, or its smooth stand-in)
        predictions: list[np.ndarray | None] = []  # held-out predictions, fold by fold
        rounds: int | None = None
        started = time.perf_counter()
        try:
            for fold, (train, test) in enumerate(self.folds, start=1):
                samples: list[np.ndarray] = []
                if fold == 1 and self.rung_order is not None:
                    train, samples = self.first_fold_rows(cap)
                else:
                    train = capped_rows(train, y, self.dataset.task, cap, self.seed + fold)
                pipeline = build_pipeline(settled_config(config, rounds), self.dataset.roles, self.cardinality,
                                          self.dataset.task, seed=self.seed, n_threads=self.n_threads)
                with warnings.catch_warnings(), threadpool_limits(self.n_threads):
                    warnings.simplefilter("ignore")
                    held_out = _HeldOut(self.metric, y[test], self.dataset.classes)
                    if samples:
                        self._climb(config, samples, X.iloc[test], held_out, report)
                        first = fit_in_parts(pipeline, X.iloc[train], y[train], X.iloc[test], held_out, _silent)
                        fitted, rank, rounds, output = first.score, first.rank, first.rounds, first.output
                    elif fold == 1:
                        first = fit_in_parts(pipeline, X.iloc[train], y[train], X.iloc[test], held_out, report)
                        fitted, rank, rounds, output = first.score, first.rank, first.rounds, first.output
                    else:
                        pipeline.fit(X.iloc[train], y[train])
                        fitted, rank = held_out.both(pipeline, X.iloc[test])
                        output = held_out.predictions(pipeline, X.iloc[test])
                scores.append(fitted)
                predictions.append(output)
                ranks.append(rank)
                if fold < len(self.folds):
                    report(fold_step(fold), float(np.mean(ranks)))
        except PruneSignal as stop:
            stop.fold_scores = list(scores)
            raise
        extras: dict[str, Any] = {
            keys.FOLD_STD: float(np.std(scores)), keys.FIT_SECONDS: time.perf_counter() - started,
            keys.FIDELITY: f"{len(scores)}/{len(self.folds)} folds"
                           + (f", {cap} training rows per fold" if cap else ""),
        }
        if rounds is not None:
            extras[keys.ROUNDS] = rounds
        kept = [p for p in predictions if p is not None] if all(p is not None for p in predictions) else None
        return TrialResult(value=float(np.mean(scores)), fold_scores=scores, extras=extras, predictions=kept)

    def first_fold_rows(self, cap: int | None) -> tuple[np.ndarray, list[np.ndarray]]:
        """With a row ladder: the first fold's training rows (all, or a capped family's sample) and the
        rung samples below them.

        All are prefixes of one stratified order, so they are nested.  A capped family's sample whose
        bottom rung would train on fewer than ``MIN_RUNG_ROWS`` rows gets no rungs (its trials start
        on the whole sample); the uncapped top was checked when the ladder was chosen.
        """
        if self.rung_order is None:
            raise ValueError("this objective has no row ladder")
        capped = cap is not None and cap < len(self.rung_order)
        top = self.rung_order[:cap] if capped else self.rung_order
        if capped and rung_rows(self.row_shares[0], len(top)) < self.min_rung_rows:
            return np.sort(top), []
        return np.sort(top), nested_prefixes(top, self.row_shares)

    def _climb(self, config: Mapping[str, Any], samples: list[np.ndarray], X_test: Any, held_out: _HeldOut,
               report: Report) -> None:
        """The row rungs: the first fold fitted whole on each nested sample, its ranking score reported."""
        from tunelab.models import build_pipeline

        X, y = self.dataset.X, self.dataset.y
        for step, sample in enumerate(samples, start=1):
            pipeline = build_pipeline(dict(config), self.dataset.roles, self.cardinality, self.dataset.task,
                                      seed=self.seed, n_threads=self.n_threads)
            fitted = fit_in_parts(pipeline, X.iloc[sample], y[sample], X_test, held_out, _silent)
            report(step, fitted.rank)


def settled_config(config: Mapping[str, Any], rounds: int | None) -> dict[str, Any]:
    """The config with the boosting rounds its first fold chose (see ``best_rounds``), if any.

    A trial's sampled ``max_iter`` is a ceiling; the rounds the first fold's held-out curve
    chose are what the other folds fitted, so a refit of the trial must use them too.
    """
    settled = dict(config)
    if rounds is not None:  # recorded for boosting trials only
        settled[f"{config.get('family')}.max_iter"] = int(rounds)
    return settled


@dataclass
class FirstFold:
    """The first fold's held-out score and ranking score, and the boosting rounds chosen on it
    (None if not boosting)."""

    score: float
    rounds: int | None = None
    rank: float = math.nan
    output: np.ndarray | None = None  # the held-out predictions (see ``_HeldOut.predictions``)

    def __post_init__(self) -> None:
        if math.isnan(self.rank):
            self.rank = self.score


@dataclass
class _HeldOut:
    """The held-out rows' target and how to score a fitted model on them: by the study's metric,
    and by what the rungs rank on (the same metric unless it is too coarse, see ``ranking_metric``)."""

    metric: Metric
    y: np.ndarray
    classes: Any

    @property
    def ranker(self) -> Metric:
        return ranking_metric(self.metric)

    def score(self, model: Any, X: Any) -> float:
        return score(self.metric, self.y, model, X, self.classes)

    def rank(self, model: Any, X: Any) -> float:
        return score(self.ranker, self.y, model, X, self.classes)

    def predictions(self, model: Any, X: Any) -> np.ndarray:
        """What ensembles are built from: the positive class's probability for two classes, a column
        per class for more (in the model's class order), predicted values for regression."""
        if hasattr(model, "predict_proba") and len(self.classes):
            return as_prediction(model.predict_proba(X))
        return np.asarray(model.predict(X), dtype=np.float32)

    def both(self, model: Any, X: Any) -> tuple[float, float]:
        """The metric and the ranking score, from one prediction when they agree."""
        value = self.score(model, X)
        return value, (value if self.ranker is self.metric else self.rank(model, X))


def fit_in_parts(pipeline: Any, X_train: Any, y_train: np.ndarray, X_test: Any, held_out: _HeldOut,
                 report: Report) -> FirstFold:
    """Fit the first fold, reporting the held-out score at steps 1 … STEPS_PER_FOLD-1 where the model allows.

    Ensembles are grown in chunks with ``warm_start`` — boosting rounds for gradient boosting,
    trees for forests — which gives the same model as a single fit; the MLP is scored on the
    held-out rows at a third and two thirds of its planned epochs (see ``_epoch_reporter``).
    Any other model is fitted once.
    Returns the fitted model's held-out score; for gradient boosting, the score at the round
    count ``best_rounds`` chooses, and that count.
    """
    model = pipeline.steps[-1][1]
    size = _growth_parameter(model)
    if size is not None and int(getattr(model, size)) >= STEPS_PER_FOLD:
        prep = pipeline[:-1]
        Xt_train = prep.fit_transform(X_train, y_train)
        Xt_test = prep.transform(X_test)
        _grow_in_chunks(model, size, Xt_train, y_train, Xt_test, held_out, report)
        if size == "max_iter":
            return best_rounds(model, Xt_test, held_out)
        return _first(held_out, model, Xt_test)
    if _is_torch_mlp(model):
        live = _watching(model)
        pipeline.set_params(model=live)
        prep = pipeline[:-1]
        Xt_train = prep.fit_transform(X_train, y_train)
        Xt_test = prep.transform(X_test)
        live.fit(Xt_train, y_train, epoch_callback=_epoch_reporter(live, Xt_test, held_out, report))
        return _first(held_out, live, Xt_test)
    pipeline.fit(X_train, y_train)
    return _first(held_out, pipeline, X_test)


def _first(held_out: _HeldOut, model: Any, X: Any) -> FirstFold:
    """The first fold of a model fitted once: its score, ranking score and held-out predictions."""
    value, rank = held_out.both(model, X)
    return FirstFold(value, None, rank, held_out.predictions(model, X))


def as_prediction(proba: np.ndarray) -> np.ndarray:
    """Class probabilities as kept: the second column alone for two classes, float32."""
    proba = np.asarray(proba, dtype=np.float32)
    return proba[:, 1].copy() if proba.ndim == 2 and proba.shape[1] == 2 else proba


def best_rounds(model: Any, X_test: Any, held_out: _HeldOut) -> FirstFold:
    """The round count of a fitted boosting model with the best held-out score, and that score.

    Boosting run past its best round keeps lowering the training loss while the held-out score
    gets worse — most in log loss, whose probabilities grow overconfident (hpc: 0.46 after a
    third of a trial's rounds, 0.58–0.64 after all of them).  The staged predictions give the
    held-out score after every round for the price of one prediction; it is checked at
    ``ROUND_CHECKS`` evenly spaced counts, and the fewest rounds with the best score win, so a
    flat curve keeps the cheaper model.  This is early stopping judged once, on the first fold:
    the other folds then fit only the chosen rounds, which saves their time as well.  The rounds
    are chosen by the ranking score (for accuracy, the Brier score of the same predictions: a
    handful of rows changing class says little about which round is best).
    """
    total = int(model.n_iter_)
    checks = set(chunk_ends(total, min(ROUND_CHECKS, total)))
    ranker = held_out.ranker
    labels = list(getattr(model, "classes_", ()))
    staged = model.staged_predict_proba(X_test) if ranker.needs_proba else model.staged_predict(X_test)
    chosen, best, output_at = total, math.nan, None
    for rounds, output in enumerate(staged, start=1):
        if rounds not in checks:
            continue
        value = score_output(ranker, held_out.y, output, labels)
        if math.isnan(best) or better(ranker, value, best):
            chosen, best, output_at = rounds, value, output
    kept = None if output_at is None else (as_prediction(output_at) if ranker.needs_proba
                                            else np.asarray(output_at, dtype=np.float32))
    if ranker is held_out.metric or output_at is None:
        return FirstFold(best, chosen, output=kept)
    # The study's metric at the chosen rounds, from the same staged output (labels from probabilities).
    predicted = np.asarray(labels)[np.argmax(output_at, axis=1)]
    return FirstFold(score_output(held_out.metric, held_out.y, predicted, labels), chosen, best, kept)


def chunk_ends(total: int, parts: int = STEPS_PER_FOLD) -> list[int]:
    """Where each of ``parts`` near-equal chunks of ``total`` rounds ends (the last is ``total``)."""
    return [math.ceil(total * k / parts) for k in range(1, parts + 1)]


_GROWN_BY = {"HistGradientBoostingClassifier": "max_iter", "HistGradientBoostingRegressor": "max_iter",
             "RandomForestClassifier": "n_estimators", "RandomForestRegressor": "n_estimators",
             "ExtraTreesClassifier": "n_estimators", "ExtraTreesRegressor": "n_estimators"}


def _growth_parameter(model: Any) -> str | None:
    """The parameter that ``warm_start`` grows for this model, or None if it cannot be grown.

    Read from the class name, so that a linear or kernel trial does not import
    ``sklearn.ensemble`` (90 ms in every forked trial whose parent never imported it).
    """
    if not type(model).__module__.startswith("sklearn.ensemble"):
        return None
    return _GROWN_BY.get(type(model).__name__)


def _grow_in_chunks(model: Any, size: str, X: Any, y: np.ndarray, X_test: Any, held_out: _HeldOut,
                    report: Report) -> None:
    # scikit-learn keeps the seeds of the first call when warm-starting (boosting keeps its
    # feature-subsampling generator, forests draw the same tree seeds), so growing a model to
    # its full size in chunks gives the model one fit would (checked in tests/test_pruning.py).
    total = int(getattr(model, size))
    ends = chunk_ends(total)
    fit_kwargs = _stop_on_held_out(model, total, y, X_test, held_out) if size == "max_iter" else {}
    model.set_params(warm_start=True)
    stopped = False
    for step, end in enumerate(ends, start=1):
        if not stopped:
            model.set_params(**{size: end})
            model.fit(X, y, **fit_kwargs)
            stopped = bool(fit_kwargs) and int(model.n_iter_) < end
        if step < len(ends):
            report(step, held_out.rank(model, X_test))
    model.set_params(warm_start=False, **({"early_stopping": False} if fit_kwargs else {}))


def early_stop_patience(ceiling: int) -> int:
    """Rounds without a better held-out loss before the first fold stops growing a boosting model."""
    return max(EARLY_STOP_MIN_ROUNDS, math.ceil(EARLY_STOP_SHARE * ceiling))


def _stop_on_held_out(model: Any, ceiling: int, y_train: np.ndarray, X_test: Any,
                      held_out: _HeldOut) -> dict[str, Any]:
    """Make the first fold's boosting stop once its held-out loss has stopped improving.

    The sampled round count is a ceiling (see ``best_rounds``).  In ``benchmarks/pruning.py``
    stores (unpruned searches of hpc, diamonds and default, seeds 2-3) the first fold chose a
    median 33-66 % of it in four of the six (100 % in two), yet fitted all of it, so the first
    fold — all a trial pruned there costs — took up to three times as long as each later fold.
    scikit-learn's own early stopping, on the fold's held-out rows and the model's loss (log
    loss, squared error), stops ``early_stop_patience`` rounds after the best; the trees up to
    there are the trees a full fit grows, so ``best_rounds`` chooses among them as before.
    Returns the ``fit`` keywords, or nothing when the held-out rows hold a class the training
    rows lack (a row-capped trial), which the model could not encode.
    """
    if type(model).__name__.endswith("Classifier") and not set(np.unique(held_out.y)) <= set(np.unique(y_train)):
        return {}
    model.set_params(early_stopping=True, scoring="loss", n_iter_no_change=early_stop_patience(ceiling))
    return {"X_val": X_test, "y_val": held_out.y}


def _is_torch_mlp(model: Any) -> bool:
    # Checked by module name so that torch and the MLP module load only for MLP trials.
    return type(model).__module__ == "tunelab.models._mlp"


def _watching(model: Any) -> Any:
    """A copy of an MLP estimator that can predict between epochs.

    The MLP keeps the network it trains local to ``fit`` until training ends; this subclass
    also publishes it as ``module_`` when training starts, so the epoch callback can score the
    held-out rows on the study's metric.  If the estimator ever trains differently, the copy
    simply never becomes ready and the first fold reports only when it is done.
    """
    base = type(model)

    class Watching(base):  # type: ignore[misc, valid-type]
        def _train(self, network: Any, *args: Any, **kwargs: Any) -> Any:
            self.module_ = network
            return super()._train(network, *args, **kwargs)

    Watching.__name__ = Watching.__qualname__ = base.__name__
    return Watching(**model.get_params())


def _epoch_reporter(model: Any, X_test: Any, held_out: _HeldOut, report: Report) -> Callable[[int, float], None]:
    """An ``epoch_callback`` that reports the held-out score at a third and two thirds of the planned epochs.

    Early stopping usually ends training long before ``max_epochs``, so the planned length is
    ``min(max_epochs, PATIENCES_PLANNED * patience)``; otherwise most MLPs would stop before the
    first checkpoint and never be judged within the first fold.
    """
    planned = min(int(model.max_epochs), PATIENCES_PLANNED * int(model.patience))
    ends = chunk_ends(planned)[:-1] if planned >= STEPS_PER_FOLD else []
    checkpoints = {end: step for step, end in enumerate(ends, start=1)}

    def on_epoch(epoch: int, validation_loss: float) -> None:
        step = checkpoints.get(epoch)
        if step is None or not hasattr(model, "module_"):
            return
        if not math.isfinite(validation_loss):
            return  # the MLP stops on its own; the fold's final score is reported as usual
        report(step, held_out.rank(model, X_test))

    return on_epoch
