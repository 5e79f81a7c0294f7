"""Would re-scoring a search's leaders on a fresh fold split choose a better model for new rows?

A search that evaluates many configurations on the same folds picks the one that did best on
*those* folds, and some of its lead is the folds' luck (the winner's curse).  A common remedy is
to score the few leading configurations again on a different split and choose by the mean of
both estimates.  This checks that remedy offline, on the studies ``benchmarks/pruning.py --keep
DIR`` leaves (``DIR/<dataset>/{off,auto}.db`` with ``DIR/<dataset>/data/``): for each study the
``--top`` best finished trials are cross-validated again on folds drawn with another seed, and
each is exported and scored on the dataset's test rows, as ``tunelab export`` / ``predict`` would.

Per study it prints how the test score of the leader chosen by both estimates compares with the
study's own choice (relative %, positive is better), for the best 2, 3 and ``--top``, and how far
the best test score among the leaders is (what a perfect choice could gain).  Costs ``--top``
cross-validations and refits per study: about 2-3 minutes for six datasets and two settings::

    python benchmarks/pruning.py --seed 0 --keep /tmp/p0
    python benchmarks/rescore_leaders.py /tmp/p0
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import warnings
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `tunelab` and `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import optuna  # noqa: E402
import pandas as pd  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402

from benchmarks._scoring import PRIMARY_METRIC, score_predictions  # noqa: E402
from benchmarks._tunelab_cli import read_predictions  # noqa: E402
from tunelab.data import load_dataset  # noqa: E402
from tunelab.engine import METRICS, CrossValidationObjective  # noqa: E402
from tunelab.ops._ship import export_model, predict_file  # noqa: E402
from tunelab.space import SpaceSpec  # noqa: E402
from tunelab.store import Store  # noqa: E402

FRESH_SEED_OFFSET = 7  # the fresh split's seed: the study's seed plus this


def leaders(db: Path, top: int, workdir: Path) -> dict[str, Any]:
    """The ``top`` best finished trials of the study in ``db``: CV score, fresh-split CV score, test score."""
    name = db.parent.name
    with Store.open(str(db)) as store:
        record = store.get_study(name)
        study = optuna.load_study(study_name=record.name, storage=store.optuna_storage())
        phases = {p.number: p for p in store.phases(record.id)}
        space = SpaceSpec.from_json(phases[min(phases)].space_json)
    sign = 1.0 if record.direction == "maximize" else -1.0
    done = [t for t in study.get_trials(deepcopy=False) if t.state == optuna.trial.TrialState.COMPLETE]
    best = sorted(done, key=lambda t: -sign * t.value)[:top]
    dataset = load_dataset(Path(record.data_path), record.target, record.task)
    folds = len(best[0].user_attrs.get("fold_scores") or [0] * 5)
    fresh_split = CrossValidationObjective(dataset, METRICS[record.metric], seed=record.seed + FRESH_SEED_OFFSET,
                                           n_folds=folds)
    test = pd.read_csv(db.parent / "data" / "test.csv")
    rows = []
    for trial in best:
        with threadpool_limits(1), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fresh = fresh_split(space.complete(trial.params), lambda step, value: None).value
            model = workdir / f"{name}-{db.stem}-{trial.number}.zip"
            export_model(name, model, store=str(db), trial=trial.number)
            predicted = model.with_suffix(".csv")
            predict_file(model, db.parent / "data" / "test_features.csv", predicted)
        scores = score_predictions(record.task, test[record.target], read_predictions(predicted, record.task))
        rows.append({"trial": trial.number, "cv": trial.value, "fresh": fresh,
                     "test": scores[PRIMARY_METRIC[record.task]]})
    return {"study": f"{db.parent.parent.name}/{name}/{db.stem}", "setting": db.stem, "sign": sign, "rows": rows}


def gains(result: dict[str, Any], ks: tuple[int, ...]) -> tuple[list[float], float]:
    """Relative test gain (%) of choosing among the best k by the mean of both CV estimates; and a perfect choice's."""
    sign, rows = result["sign"], result["rows"]
    chosen = rows[0]["test"]

    def rel(score: float) -> float:
        return 100.0 * sign * (score - chosen) / abs(chosen) or 0.0  # never "-0.00"

    by_both = [rel(max(rows[:k], key=lambda r: sign * (r["cv"] + r["fresh"]))["test"]) for k in ks]
    return by_both, rel(max(rows, key=lambda r: sign * r["test"])["test"])


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folders", nargs="+", type=Path, help="folders left by benchmarks/pruning.py --keep")
    parser.add_argument("--top", type=int, default=5, help="leading trials to re-score per study (default 5)")
    args = parser.parse_args(argv)
    optuna.logging.set_verbosity(optuna.logging.ERROR)
    dbs = [db for folder in args.folders for db in sorted(folder.glob("*/*.db"))]
    if not dbs:
        print("no studies (<dataset>/*.db) under those folders", file=sys.stderr)
        return 2
    ks = tuple(sorted({2, 3, args.top}))
    totals: dict[tuple[str, int], list[float]] = {}
    print(f"{'study':28s} " + " ".join(f"{f'best {k}':>9s}" for k in ks) + f" {'perfect':>9s}")
    with tempfile.TemporaryDirectory() as tmp:
        for db in dbs:
            result = leaders(db, args.top, Path(tmp))
            by_both, perfect = gains(result, ks)
            for k, gain in zip(ks, by_both):
                totals.setdefault((result["setting"], k), []).append(gain)
            print(f"{result['study']:28s} " + " ".join(f"{g:+8.2f}%" for g in by_both) + f" {perfect:+8.2f}%",
                  flush=True)
    print("\nchoosing by both estimates, test score against the study's own choice (positive is better):")
    for (setting, k), values in sorted(totals.items()):
        print(f"  {setting:5s} best {k}: mean {sum(values) / len(values):+.3f} %, better in "
              f"{sum(v > 0 for v in values)}, worse in {sum(v < 0 for v in values)} of {len(values)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
