"""How long the importance table takes for 500 and 2,000 trials (prints seconds; asserts nothing).

The search space has the shape of tunelab's generic space: a ``family`` choice among four model
families, two shared ``prep.*`` parameters, and 2-6 conditional parameters per family. Scores
are a synthetic AUC-like response (a few strong knobs, a few weak ones, noise), so the forests
grow as they would on a real study. The CPU time is what the wall time would be on an otherwise idle machine
(the work is single-threaded); on a shared machine the wall time can be several times larger. Run from the
repository root::

    python benchmarks/importance_speed.py              # fANOVA, 500 and 2,000 trials
    python benchmarks/importance_speed.py --method ped-anova --trials 500,2000,5000
"""

from __future__ import annotations

import argparse
import math
import time
from typing import Any

import numpy as np
from optuna.distributions import (
    BaseDistribution,
    CategoricalDistribution,
    FloatDistribution,
    IntDistribution,
)

from tunelab.insight import TrialRecord, importance_table

SPACE: dict[str, BaseDistribution] = {
    "family": CategoricalDistribution(["hist_gb", "random_forest", "extra_trees", "linear"]),
    "prep.text_features": IntDistribution(500, 20000, log=True),
    "prep.text_components": IntDistribution(8, 128, log=True),
    "hist_gb.learning_rate": FloatDistribution(0.01, 0.3, log=True),
    "hist_gb.max_iter": IntDistribution(50, 500, log=True),
    "hist_gb.max_leaf_nodes": IntDistribution(8, 128, log=True),
    "hist_gb.min_samples_leaf": IntDistribution(5, 100, log=True),
    "hist_gb.l2_regularization": FloatDistribution(1e-6, 10.0, log=True),
    "hist_gb.max_features": FloatDistribution(0.3, 1.0),
    "random_forest.n_estimators": IntDistribution(50, 400, log=True),
    "random_forest.max_features": FloatDistribution(0.1, 1.0),
    "random_forest.min_samples_leaf": IntDistribution(1, 32, log=True),
    "extra_trees.n_estimators": IntDistribution(50, 400, log=True),
    "extra_trees.max_features": FloatDistribution(0.1, 1.0),
    "extra_trees.min_samples_leaf": IntDistribution(1, 32, log=True),
    "linear.num_transform": CategoricalDistribution(["standard", "quantile"]),
    "linear.C": FloatDistribution(1e-4, 1e3, log=True),
}
BASE = {"hist_gb": 0.86, "random_forest": 0.84, "extra_trees": 0.835, "linear": 0.80}


def _draw(dist: BaseDistribution, rng: np.random.Generator) -> object:
    if isinstance(dist, CategoricalDistribution):
        return dist.choices[int(rng.integers(len(dist.choices)))]
    assert isinstance(dist, (FloatDistribution, IntDistribution))
    if dist.log:
        x = math.exp(rng.uniform(math.log(dist.low), math.log(dist.high)))
    else:
        x = rng.uniform(dist.low, dist.high)
    if isinstance(dist, IntDistribution):
        return int(min(max(round(x), dist.low), dist.high))
    return float(x)


def synthetic_trials(n: int, seed: int = 0) -> list[TrialRecord]:
    """``n`` random trials over SPACE with an AUC-like score (a few knobs matter, most barely)."""
    rng = np.random.default_rng(seed)
    out = []
    for number in range(n):
        family = str(_draw(SPACE["family"], rng))
        params: dict[str, Any] = {"family": family}
        for name, dist in SPACE.items():
            if name.startswith(("prep.", family + ".")):
                params[name] = _draw(dist, rng)
        score = BASE[family] + 0.002 * math.log10(float(params["prep.text_features"])) / 4
        if family == "hist_gb":
            score -= 0.03 * (math.log10(float(params["hist_gb.learning_rate"])) + 1.2) ** 2
            score -= 0.01 * abs(math.log2(float(params["hist_gb.max_leaf_nodes"])) - 5) / 2
        elif family in ("random_forest", "extra_trees"):
            score -= 0.03 * (float(params[f"{family}.max_features"]) - 0.4) ** 2
        else:
            score -= 0.004 * abs(math.log10(float(params["linear.C"])))
        score += 0.004 * rng.standard_normal()
        out.append(TrialRecord(number, params, score, "complete" if rng.random() > 0.2 else "pruned"))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", default="500,2000", help="comma-separated trial counts")
    parser.add_argument("--method", default="fanova", choices=["fanova", "ped-anova"])
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--show", action="store_true", help="print the table as well")
    args = parser.parse_args()
    importance_table(synthetic_trials(40, args.seed), SPACE, direction="maximize", method=args.method)  # imports
    for n in (int(s) for s in args.trials.split(",")):
        trials = synthetic_trials(n, args.seed)
        start, cpu_start = time.perf_counter(), time.process_time()
        report = importance_table(trials, SPACE, direction="maximize", method=args.method, seed=args.seed)
        seconds, cpu = time.perf_counter() - start, time.process_time() - cpu_start
        print(
            f"{args.method}: {n} trials, {len(report.rows)} rows, {report.n_bootstrap} resamples, "
            f"tree depth {report.tree_depth}: {seconds:.2f} s wall, {cpu:.2f} s CPU"
        )
        if args.show:
            for r in report.rows:
                print(
                    f"  {r.param:28s} {str(r.family):14s} {r.importance:6.3f} [{r.low:.3f}, {r.high:.3f}] "
                    f"spread {r.spread:.4f}  {r.verdict}"
                )


if __name__ == "__main__":
    main()
