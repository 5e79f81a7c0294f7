"""How much of the feature set should each boosting split draw from?

The space builder centres histogram boosting's ``max_features`` (the share of features drawn for
each split) on 0.5.  This script checks that prior side by side: on each dataset's training split
(``benchmarks/datasets.py``), five seeded folds, the study's default metric, it scores tunelab's
own boosting pipeline at both of the builder's prior centres (``standard`` and ``regularised``,
200 rounds) under several feature shares, and prints each share's change against drawing all
features (positive is better, whichever way the metric runs).  Scores do not depend on the machine.

Usage (from the repository root)::

    python benchmarks/boosting_feature_share.py
    python benchmarks/boosting_feature_share.py --datasets credit,wage --seeds 100
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from pathlib import Path

os.environ.setdefault("OMP_NUM_THREADS", "1")  # before scikit-learn loads OpenMP: one thread a process

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks import datasets  # noqa: E402
from benchmarks.space_priors import DEFAULT_DATASETS  # noqa: E402
from tunelab.engine._folds import make_folds  # noqa: E402
from tunelab.engine._metrics import DEFAULT_METRIC, resolve_metric, score  # noqa: E402
from tunelab.models import build_pipeline  # noqa: E402
from tunelab.space._builder import _HIST_GB_PRIORS  # noqa: E402

SHARES = (0.2, 0.3, 0.5, 0.7, 1.0)
ROUNDS = 200


def _cv(name: str, seed: int) -> tuple[bool, dict[tuple[str, float], float]]:
    """Mean five-fold score of each (prior centre, share) on one seed's training split."""
    ds = datasets.training_dataset(name, seed)
    metric = resolve_metric(DEFAULT_METRIC[ds.task], ds.task)
    cardinality = {c.name: c.n_unique for c in ds.columns}
    folds = make_folds(ds.y, ds.task, seed, 5)
    out: dict[tuple[str, float], float] = {}
    for centre, prior in _HIST_GB_PRIORS.items():
        for share in SHARES:
            config = {"family": "hist_gb", "hist_gb.max_iter": ROUNDS, "hist_gb.max_features": share,
                      **{f"hist_gb.{k}": v for k, v in prior.items()}}
            fold_scores = []
            for train_rows, test_rows in folds:
                pipe = build_pipeline(config, ds.roles, cardinality, ds.task, seed=seed)
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    pipe.fit(ds.X.iloc[train_rows], ds.y[train_rows])
                fold_scores.append(score(metric, ds.y[test_rows], pipe, ds.X.iloc[test_rows]))
            out[(centre, share)] = float(np.mean(fold_scores))
    return metric.direction == "maximize", out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", default=",".join(DEFAULT_DATASETS),
                        help="comma-separated names from benchmarks/datasets.py")
    parser.add_argument("--seeds", default="100,101,102", help="seeds of the splits and folds, averaged")
    args = parser.parse_args(argv)
    seeds = [int(s) for s in args.seeds.split(",")]
    names = [n.strip() for n in args.datasets.split(",") if n.strip()]
    print(f"change against all features, mean of seeds {args.seeds}, five folds, {ROUNDS} rounds")
    print(f"{'dataset':14}{'centre':13}" + "".join(f"{s:>9}" for s in SHARES))
    half_wins = 0
    for name in names:
        per_seed = [_cv(name, seed) for seed in seeds]
        higher = per_seed[0][0]
        mean = {k: float(np.mean([s[k] for _, s in per_seed])) for k in per_seed[0][1]}
        wins = True
        for centre in _HIST_GB_PRIORS:
            base = mean[(centre, 1.0)]
            change = {s: (mean[(centre, s)] - base) / abs(base) * (1 if higher else -1) + 0.0 for s in SHARES}
            wins &= change[0.5] > 0
            print(f"{name:14}{centre:13}" + "".join(f"{change[s]:>+9.2%}" for s in SHARES), flush=True)
        half_wins += wins
    print(f"\na share of 0.5 beats all features at both centres on {half_wins} of {len(names)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
