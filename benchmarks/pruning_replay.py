"""Replay unpruned searches through pruning rules, offline: work saved, and whether the best survives.

An unpruned study holds every trial's value after each third of the first fold and after each
fold, so any rung rule can be tried on it without fitting a model again: the trials are fed, in
their original order, to tunelab's own pruner in an in-memory optuna study, each stopping where
the rule would have stopped it.  Two figures per study and rule:

* *work ratio* — the study's trial seconds over the seconds the rule would have spent on the
  same trials (a trial stopped at step s of n costs s/n of its fit time, plus a fixed
  ``--overhead`` per trial for start-up and scoring);
* *best pruned* — whether the rule would have stopped the trial the unpruned search ended with.

It ignores what the saved time would have bought (the sampler sees different results once
trials are pruned), so it ranks rules before they are measured for real with
``benchmarks/pruning.py``, which is the figure that counts.  Input: the folders that
``benchmarks/pruning.py --keep DIR`` leaves (``DIR/<dataset>/off.db``)::

    python benchmarks/pruning.py --keep /tmp/p0 --seed 0
    python benchmarks/pruning_replay.py /tmp/p0
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `tunelab` importable from the checkout
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import optuna  # noqa: E402
from optuna.trial import TrialState  # noqa: E402

from tunelab.engine._objective import STEPS_PER_FOLD  # noqa: E402
from tunelab.engine._pruning import KEEP, RUNG_STEPS, RungPruner  # noqa: E402

RULES: dict[str, dict[str, Any]] = {
    "no margin (default)": dict(rungs=RUNG_STEPS, keep=KEEP),
    "margin 0.5 SE": dict(rungs=RUNG_STEPS, keep=KEEP, margin_se=0.5),
    "margin 1 SE": dict(rungs=RUNG_STEPS, keep=KEEP, margin_se=1.0),
    "no margin, all families": dict(rungs=RUNG_STEPS, keep=KEEP, within_family=False, margin_se=0.0),
}


def replay(trials: list[optuna.trial.FrozenTrial], direction: str, rule: dict[str, Any],
           overhead: float) -> tuple[float, bool]:
    """The work ratio of one rule (``RungPruner`` arguments) on one unpruned study, and whether its best trial would be pruned."""
    study = optuna.create_study(direction=direction, pruner=RungPruner(**rule))
    best = study.direction == optuna.study.StudyDirection.MAXIMIZE
    best_number = (max if best else min)(trials, key=lambda t: t.value).number
    n_steps = STEPS_PER_FOLD * _folds(trials)
    spent = used = 0.0
    best_pruned = False
    for frozen in trials:
        seconds = frozen.duration.total_seconds()
        study.enqueue_trial({"family": frozen.params.get("family")})
        trial = study.ask()
        trial.suggest_categorical("family", sorted({str(t.params.get("family")) for t in trials}))
        stopped = None
        for step, value in sorted(frozen.intermediate_values.items()):
            trial.report(value, step)
            if trial.should_prune():
                stopped = step
                break
        if stopped is None:
            if "fold_scores" in frozen.user_attrs:  # what the margin's fold noise is measured from
                trial.set_user_attr("fold_scores", frozen.user_attrs["fold_scores"])
            study.tell(trial, frozen.value)
        else:
            study.tell(trial, state=TrialState.PRUNED)
            best_pruned |= frozen.number == best_number
        spent += seconds
        share = 1.0 if stopped is None else stopped / n_steps
        used += overhead + max(0.0, seconds - overhead) * share
    return spent / max(used, 1e-9), best_pruned


def _folds(trials: list[optuna.trial.FrozenTrial]) -> int:
    # The last fold is never reported: a complete trial's last report is fold k-1.
    last = max(max(t.intermediate_values, default=0) for t in trials)
    return last // STEPS_PER_FOLD + 1


def studies(folders: list[Path]) -> list[tuple[str, list[Any], str]]:
    """(label, complete trials, direction) of every unpruned study under the folders."""
    out = []
    for folder in folders:
        for db in sorted(folder.glob("*/off.db")):
            name = db.parent.name
            study = optuna.load_study(study_name=name, storage=f"sqlite:///{db}")
            trials = [t for t in study.trials if t.state == TrialState.COMPLETE and t.intermediate_values]
            if len(trials) >= 2:
                out.append((f"{folder.name}/{name}", trials, study.direction.name.lower()))
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folders", nargs="+", type=Path, help="folders left by benchmarks/pruning.py --keep")
    parser.add_argument("--overhead", type=float, default=0.12,
                        help="seconds a trial costs however early it stops (fork, pipeline, scoring)")
    args = parser.parse_args(argv)
    optuna.logging.set_verbosity(optuna.logging.ERROR)
    found = studies(args.folders)
    if not found:
        print("no unpruned studies (<dataset>/off.db) under those folders", file=sys.stderr)
        return 2
    totals = {rule: [] for rule in RULES}
    print(f"{'study':24s} " + " ".join(f"{rule[:22]:>24s}" for rule in RULES))
    for label, trials, direction in found:
        cells = []
        for rule, settings in RULES.items():
            ratio, pruned = replay(trials, direction, settings, args.overhead)
            totals[rule].append((ratio, pruned))
            cells.append(f"{ratio:5.2f}x{' best pruned' if pruned else '            '}      ")
        print(f"{label:24s} " + " ".join(f"{c:>24s}" for c in cells))
    print()
    for rule, results in totals.items():
        ratios = [r for r, _ in results]
        print(f"{rule:32s} mean work ratio {sum(ratios) / len(ratios):.2f}x, >= 2x in {sum(r >= 2 for r in ratios)} "
              f"of {len(ratios)}, best trial pruned in {sum(p for _, p in results)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
