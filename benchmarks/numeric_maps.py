"""Does the linear model's best numeric map predict the other scaled families' best map?

The space builder orders the numeric maps (plain scaling, signed log, quantile) that the scaled
families search by one probe: the linear pipeline fitted under each map on a row sample
(``tunelab/space/_transform_probe.py``).  This script checks the stand-in side by side: on each
dataset's training split (``benchmarks/datasets.py``), a row sample, three seeded folds, the study's
default metric, it scores tunelab's own linear, RBF SVM and k-nearest-neighbour pipelines (family
defaults) under each map, and prints per family the best map and how much the linear model's
choice gives up against it.  Timings are not the point; the scores do not depend on the machine.

Usage (from the repository root)::

    python benchmarks/numeric_maps.py
    python benchmarks/numeric_maps.py --datasets digits,hpc --rows 1000 --seed 1
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")  # before NumPy and scikit-learn load their thread pools

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks import datasets  # noqa: E402
from tunelab.engine._folds import make_folds  # noqa: E402
from tunelab.engine._metrics import DEFAULT_METRIC, resolve_metric, score  # noqa: E402
from tunelab.models import build_pipeline  # noqa: E402

MAPS = ("standard", "log", "quantile")
FAMILIES = ("linear", "svm", "knn")
DEFAULT_DATASETS = "digits,hpc,credit,titanic,ames,wage"


def _scores(name: str, rows: int, seed: int) -> tuple[str, bool, dict[tuple[str, str], float]]:
    ds = datasets.training_dataset(name, seed)
    metric = resolve_metric(DEFAULT_METRIC[ds.task], ds.task)
    sample = np.sort(np.random.default_rng(seed).choice(ds.n_rows, min(rows, ds.n_rows), replace=False))
    X, y = ds.X.iloc[sample], ds.y[sample]
    cardinality = {c.name: c.n_unique for c in ds.columns}
    out: dict[tuple[str, str], float] = {}
    for family in FAMILIES:
        for kind in MAPS:
            fold_scores = []
            for train_rows, test_rows in make_folds(y, ds.task, seed, 3):
                pipe = build_pipeline({"family": family, f"{family}.num_transform": kind}, ds.roles, cardinality,
                                      ds.task, seed=seed)
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    pipe.fit(X.iloc[train_rows], y[train_rows])
                fold_scores.append(score(metric, y[test_rows], pipe, X.iloc[test_rows]))
            out[(family, kind)] = float(np.mean(fold_scores))
    return metric.name, metric.direction == "maximize", out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", default=DEFAULT_DATASETS, help="comma-separated names from benchmarks/datasets.py")
    parser.add_argument("--rows", type=int, default=1500, help="rows sampled from each training split")
    parser.add_argument("--seed", type=int, default=0, help="seed of the split, the sample and the folds")
    args = parser.parse_args(argv)
    agree = 0
    names = [n.strip() for n in args.datasets.split(",") if n.strip()]
    for name in names:
        metric, higher, s = _scores(name, args.rows, args.seed)
        pick = (max if higher else min)(MAPS, key=lambda k: s[("linear", k)])
        print(f"{name} ({metric}, {'higher' if higher else 'lower'} is better); linear model's pick: {pick}")
        print(f"  {'family':8}" + "".join(f"{k:>12}" for k in MAPS) + f"{'best':>10}{'pick gives up':>15}")
        others_ok = True
        for family in FAMILIES:
            best = (max if higher else min)(MAPS, key=lambda k: s[(family, k)])
            loss = abs(s[(family, pick)] - s[(family, best)]) / max(abs(s[(family, best)]), 1e-12)
            others_ok &= family == "linear" or loss <= 0.01
            print(f"  {family:8}" + "".join(f"{s[(family, k)]:>12.4g}" for k in MAPS) + f"{best:>10}{loss:>14.2%}")
        agree += others_ok
    print(f"\nthe linear model's pick is within 1 % of the best map for the SVM and kNN on {agree} of {len(names)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
