"""Would shipping the average of a search's best few trials score better on new rows than the best one?

A search that keeps the configuration with the best cross-validated score keeps some of the
folds' luck with it (the winner's curse): in the space benchmark the built space's best CV score
beat the fixed space's on 9 of 10 tables while its test score did so on 5.  Re-choosing among the
leaders did not help (``rescore_leaders.py``); averaging them is the other common remedy, since
the leaders' errors are partly independent (Caruana et al. 2004, "Ensemble selection from
libraries of models", ICML; the plain average of the best k is their simplest baseline).

This checks it offline on the studies ``benchmarks/space_priors.py --keep DIR`` leaves
(``DIR/<dataset>-seed<N>/store-{fixed,built}.db`` beside ``train.csv`` and ``test.csv``): the
``--top`` best finished trials of each study are exported (refit on all training rows, as
``tunelab export`` does) and predict the test rows; probabilities or values are averaged over the
best k.  It prints, per arm, how the average of the best k compares with the best alone (relative
%, positive is better), and the space benchmark's verdict (pooled over seeds, wins of 10) when
both arms ship the best trial and when both ship the average.  About three refits per study::

    python benchmarks/space_priors.py --seeds 48,49 --keep /tmp/keep
    python benchmarks/blend_leaders.py /tmp/keep --top 3
"""

from __future__ import annotations

import argparse
import json
import re
import shutil
import sys
import tempfile
import warnings
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `tunelab` and `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np  # noqa: E402
import optuna  # noqa: E402
import pandas as pd  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

from benchmarks import datasets  # noqa: E402
from benchmarks._scoring import PRIMARY_METRIC, Predictions, orient, score_predictions  # noqa: E402
from benchmarks._tunelab_cli import read_predictions  # noqa: E402
from benchmarks.space_priors import ARMS, paired_gains, pool_seeds, print_paired, summarise  # noqa: E402
from tunelab.engine import trial_state  # noqa: E402
from tunelab.ops._ship import export_model, predict_file  # noqa: E402
from tunelab.store import Store  # noqa: E402

_FOLDER = re.compile(r"^(?P<dataset>.+)-seed(?P<seed>\d+)$")


def average(predictions: list[Predictions], task: str) -> Predictions:
    """The mean of several models' predictions: values for regression, class probabilities otherwise."""
    if task == "regression":
        return Predictions(values=np.mean([p.values for p in predictions], axis=0))
    columns = list(predictions[0].proba.columns)
    proba = sum(p.proba[columns].to_numpy(dtype=float) for p in predictions) / len(predictions)
    frame = pd.DataFrame(proba, columns=columns)
    return Predictions(values=np.asarray(columns)[proba.argmax(axis=1)], proba=frame)


def _leaders(done: list[Any], sign: float, top: int) -> dict[str, list[Any]]:
    """Two kinds of leaders, best first: the best ``top`` trials, and the best trial of each of the best ``top`` families."""
    ranked = sorted(done, key=lambda t: -sign * t.value)
    by_family: dict[str, Any] = {}
    for t in ranked:
        by_family.setdefault(str(t.params.get("family", "")), t)
    return {"trials": ranked[:top], "families": list(by_family.values())[:top]}


def leader_predictions(folder: Path, arm: str, top: int, workdir: Path) -> dict[str, list[Predictions]]:
    """Test-row predictions of one arm's leaders (see ``_leaders``), each exported once."""
    db = workdir / f"{folder.name}-store-{arm}.db"  # a copy: exporting records itself in the store
    shutil.copyfile(folder / f"store-{arm}.db", db)
    with Store.open(str(db)) as store:
        record = store.get_study(arm)
        study = optuna.load_study(study_name=record.name, storage=store.optuna_storage())
        done = [t for t in study.get_trials(deepcopy=False) if trial_state(t) == "complete"]
        sign = 1.0 if record.direction == "maximize" else -1.0
        task = record.task
    cache: dict[int, Predictions] = {}

    def predicted(number: int) -> Predictions:
        if number not in cache:
            model = workdir / f"{folder.name}-{arm}-{number}.zip"
            out = model.with_suffix(".csv")
            with threadpool_limits(1), warnings.catch_warnings():
                warnings.simplefilter("ignore")
                export_model(arm, model, store=str(db), trial=number)
                predict_file(model, folder / "test.csv", out)
            cache[number] = read_predictions(out, task)
        return cache[number]

    return {kind: [predicted(t.number) for t in trials] for kind, trials in _leaders(done, sign, top).items()}


def study_scores(folder: Path, ks: tuple[int, ...], workdir: Path) -> dict[str, Any]:
    """For one dataset and seed: each arm's test score with its best trial and with averages of its leaders.

    Keys of each arm: ``"best"``, ``"trials k"`` (the best k trials) and ``"families k"`` (the
    best trial of each of the best k families); with fewer leaders than k, all there are.
    """
    match = _FOLDER.match(folder.name)
    if match is None:
        raise ValueError(f"{folder} is not a <dataset>-seed<N> folder")
    spec = datasets.get(match["dataset"])
    truth = pd.read_csv(folder / "test.csv")[spec.target]
    metric = PRIMARY_METRIC[spec.task]
    arms: dict[str, dict[str, float]] = {}
    for arm in ARMS:
        leaders = leader_predictions(folder, arm, max(ks), workdir)
        scores = {"best": score_predictions(spec.task, truth, leaders["trials"][0])[metric]}
        for kind, preds in leaders.items():
            for k in ks:
                scores[f"{kind} {k}"] = score_predictions(spec.task, truth, average(preds[:k], spec.task))[metric]
        arms[arm] = scores
    return {"dataset": match["dataset"], "seed": int(match["seed"]), "task": spec.task, "metric": metric,
            "arms": arms}


def _gain(metric: str, new: float, old: float) -> float:
    """Relative change of a score in %, turned so that positive is better."""
    return 100.0 * (orient(metric, new) - orient(metric, old)) / abs(old)


def _verdict_rows(results: list[dict[str, Any]], choice: str) -> list[dict[str, Any]]:
    """The results as space-benchmark rows where both arms ship ``choice`` (a key of ``study_scores``)."""
    rows = []
    for r in results:
        arms = {arm: {"score": s[choice], "cv_score": None, "trials": {}, "best_family": "",
                      "profile_seconds": 0.0, "error": "", "families": []}
                for arm, s in r["arms"].items()}
        rows.append({"dataset": r["dataset"], "task": r["task"], "metric": r["metric"], "seed": r["seed"],
                     "arms": arms})
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folders", nargs="+", type=Path, help="folders left by benchmarks/space_priors.py --keep")
    parser.add_argument("--top", type=int, default=3, help="leaders to average per study (default 3)")
    parser.add_argument("--json", type=Path, default=None, help="also write the per-study scores to this file")
    parser.add_argument("--combine", type=Path, nargs="+", default=None,
                        help="only summarise the --json files of earlier runs")
    args = parser.parse_args(argv)
    optuna.logging.set_verbosity(optuna.logging.ERROR)
    ks = tuple(sorted({2, args.top}))
    choices = [f"{kind} {k}" for kind in ("trials", "families") for k in ks]
    if args.combine:
        results = [r for path in args.combine for r in json.loads(path.read_text())]
        report(results, choices)
        return 0
    studies = sorted(f for folder in args.folders for f in folder.iterdir()
                     if _FOLDER.match(f.name) and all((f / f"store-{arm}.db").exists() for arm in ARMS))
    if not studies:
        print("no <dataset>-seed<N>/store-{fixed,built}.db folders there", file=sys.stderr)
        return 2
    results = []
    print(f"{'study':26s} " + " ".join(f"{f'{arm[0]} {c}':>13s}" for arm in ARMS for c in choices))
    with tempfile.TemporaryDirectory() as tmp:
        for folder in studies:
            r = study_scores(folder, ks, Path(tmp))
            results.append(r)
            cells = [_gain(r["metric"], r["arms"][arm][c], r["arms"][arm]["best"]) for arm in ARMS for c in choices]
            print(f"{folder.name:26s} " + " ".join(f"{c:+12.2f}%" for c in cells), flush=True)
            if args.json:
                args.json.write_text(json.dumps(results, indent=1))
    report(results, choices)
    return 0


def report(results: list[dict[str, Any]], choices: list[str]) -> None:
    """Each average against the best trial alone, per arm; then the space benchmark's verdict under each."""
    print("\naverage of the leaders against the best trial alone, test score (positive is better):")
    for arm in ARMS:
        for c in choices:
            g = [_gain(r["metric"], r["arms"][arm][c], r["arms"][arm]["best"]) for r in results]
            print(f"  {arm:5s} {c:11s}: mean {np.mean(g):+.3f} %, better in {sum(x > 0 for x in g)}, "
                  f"worse in {sum(x < 0 for x in g)} of {len(g)}")
    for c in ("best", *choices):
        rows = _verdict_rows(results, c)
        summary = summarise(pool_seeds(rows))
        print(f"\nboth arms ship {'the best trial' if c == 'best' else f'the average of the best {c}'}: built wins "
              f"{summary['built_wins']} of {summary['datasets']}, losses beyond 1 %: "
              f"{summary['built_losses_beyond_1pct']}")
        print_paired(paired_gains(rows))


if __name__ == "__main__":
    sys.exit(main())
