"""Data-driven search space against the fixed generic one, same budget, same seeds, side by side.

For each dataset the same train/test split (``benchmarks/datasets.py``) is searched twice through
tunelab's Python API, once with the fixed wide space (``tunelab.space.default_space``) and once
with the space built from the data's meta-features (``tunelab.space.build_space``); each search
then exports its best model, predicts the test rows, and the benchmark scores the predictions
with scikit-learn's metrics (``benchmarks/_scoring.py``): ROC AUC for binary, log loss for
multiclass, RMSE for regression.

The built space pays for its own profiling: the seconds spent computing meta-features are taken
off its search budget, so both arms spend the same wall-clock time.  The two arms alternate which
runs first from one dataset to the next, so slow spells on a shared machine hit both alike.

With several seeds, each seed is its own split, folds and sampler; a dataset is judged on each
arm's test score averaged over the seeds, because one 60 s search on a test split of a few hundred
rows is a noisy sample (digits' log loss moved from 0.061 to 0.116 between two seeds for the same
space).  Each seed's own wins are printed as well.

Usage (from the repository root)::

    python benchmarks/space_priors.py                       # 60 s per search, ten datasets, seed 0
    python benchmarks/space_priors.py --budget 20s --datasets breast_cancer,wage
    python benchmarks/space_priors.py --seeds 0,1,2         # judged on the mean over three seeds
    python benchmarks/space_priors.py --combine results/space_priors-60s-seed0-*.json ...  # pool runs
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
import warnings
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from benchmarks import datasets  # noqa: E402
from benchmarks._results import write_results  # noqa: E402
from benchmarks._scoring import PRIMARY_METRIC, orient, score_prediction_file  # noqa: E402
from benchmarks._summary import standard_error  # noqa: E402

DEFAULT_DATASETS = ("breast_cancer", "titanic", "credit", "default", "digits", "chile", "hpc", "wage", "ames",
                    "diamonds")
ARMS = ("fixed", "built")
LOSS_TOLERANCE = 0.01  # "loses by more than 1 % of score"


@dataclass
class ArmResult:
    """One search on one dataset: its test score and what it did."""

    arm: str
    score: float | None
    scores: dict[str, float] = field(default_factory=dict)
    trials: dict[str, int] = field(default_factory=dict)
    best_family: str = ""
    cv_score: float | None = None
    search_seconds: float = 0.0
    profile_seconds: float = 0.0
    families: list[str] = field(default_factory=list)
    best_params: dict[str, Any] = field(default_factory=dict)  # the exported trial's config, e.g. boosting loss
    error: str = ""


def _space_for(arm: str, train: Path, spec: datasets.DatasetSpec, budget: float, seed: int) -> tuple[Any, float]:
    """The arm's space and the seconds spent building it (charged to the built arm only)."""
    from tunelab.data import load_dataset
    from tunelab.ops import built_space
    from tunelab.space import default_space

    started = time.perf_counter()
    dataset = load_dataset(train, spec.target, spec.task)
    if arm == "fixed":
        return default_space(dataset.task, dataset.roles), 0.0
    space = built_space(dataset, budget_seconds=budget, seed=seed)
    return space, time.perf_counter() - started


def run_arm(arm: str, train: Path, test: Path, spec: datasets.DatasetSpec, budget: float, seed: int,
            work: Path) -> ArmResult:
    """Search with one arm's space, export the best model, predict and score the test rows."""
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, export_model, predict_file, run_study

    result = ArmResult(arm, None)
    try:
        space, profile_s = _space_for(arm, train, spec, budget, seed)
        result.profile_seconds = profile_s
        result.families = list(space.families)
        space_file = work / f"space-{arm}.json"
        space_file.write_text(space.to_json(), encoding="utf-8")
        store = str(work / f"store-{arm}.db")
        started = time.perf_counter()
        run = run_study(RunRequest(data=train, target=spec.target, budget=Budget(max(1.0, budget - profile_s)),
                                   store=store, study=arm, task=spec.task, seed=seed, space_file=space_file))
        result.search_seconds = time.perf_counter() - started
        result.trials = dict(run.summary.counts)
        result.cv_score = run.summary.best_value
        model = work / f"model-{arm}.zip"
        exported = export_model(arm, model, store=store)
        result.best_family = exported.family
        result.best_params = _trial_params(store, arm, exported.trial)
        predictions = work / f"pred-{arm}.csv"
        predict_file(model, test, predictions)
        result.scores = score_prediction_file(spec.task, spec.target, test, predictions)
        result.score = result.scores[PRIMARY_METRIC[spec.task]]
    except Exception as exc:  # one failed arm is a result (a loss), not the end of the benchmark
        result.error = f"{type(exc).__name__}: {exc}".splitlines()[0]
    return result


def _trial_params(store: str, study: str, number: int) -> dict[str, Any]:
    import optuna

    from tunelab.store import Store

    with Store.open(store) as opened:
        trials = optuna.load_study(study_name=study, storage=opened.optuna_storage()).get_trials(deepcopy=False)
    return next((dict(t.params) for t in trials if t.number == number), {})


def compare(name: str, budget: float, seed: int, keep: Path | None = None) -> dict[str, Any]:
    """Both arms on one dataset; the arm order alternates with the dataset's position.

    With ``keep``, the split, spaces, stores and models stay in ``keep/<dataset>`` for a closer look.
    """
    spec = datasets.get(name)
    order = ARMS if datasets.names().index(name) % 2 == 0 else ARMS[::-1]
    with tempfile.TemporaryDirectory(prefix=f"space-priors-{name}-") as tmp:
        work = Path(tmp) if keep is None else keep / f"{name}-seed{seed}"
        work.mkdir(parents=True, exist_ok=True)
        train, test = datasets.write_split(name, work, seed=seed)
        results = {arm: run_arm(arm, train, test, spec, budget, seed, work) for arm in order}
    return {"dataset": name, "task": spec.task, "metric": PRIMARY_METRIC[spec.task], "seed": seed,
            "arms": {arm: vars(results[arm]) for arm in ARMS}}


def _relative_gain(metric: str, built: float | None, fixed: float | None) -> float | None:
    """Built minus fixed as a share of the fixed score, turned so that positive is better."""
    if built is None or fixed is None:
        return None
    return (orient(metric, built) - orient(metric, fixed)) / max(abs(fixed), 1e-12)


def summarise(rows: list[dict[str, Any]]) -> dict[str, Any]:
    """Mean rank (1 = best, ties shared), wins, and losses beyond the tolerance."""
    ranks = {arm: [] for arm in ARMS}
    wins = losses_beyond = ties = cv_wins = 0
    for row in rows:
        metric = row["metric"]
        scores = {arm: row["arms"][arm]["score"] for arm in ARMS}
        oriented = {arm: (orient(metric, s) if s is not None else float("-inf")) for arm, s in scores.items()}
        if oriented["built"] == oriented["fixed"]:
            ties += 1
            ranks["built"].append(1.5)
            ranks["fixed"].append(1.5)
        else:
            better = "built" if oriented["built"] > oriented["fixed"] else "fixed"
            ranks[better].append(1.0)
            ranks["fixed" if better == "built" else "built"].append(2.0)
            wins += better == "built"
        gain = _relative_gain(metric, scores["built"], scores["fixed"])
        row["relative_gain"] = gain
        cv = {arm: row["arms"][arm].get("cv_score") for arm in ARMS}
        if (cv["built"] is not None and cv["fixed"] is not None
                and orient(metric, cv["built"]) > orient(metric, cv["fixed"])):
            cv_wins += 1
        if gain is None and scores["built"] is None or gain is not None and gain < -LOSS_TOLERANCE:
            losses_beyond += 1
    n = len(rows)
    return {"datasets": n, "mean_rank": {arm: sum(r) / n for arm, r in ranks.items()} if n else {},
            "built_wins": wins, "ties": ties, "built_win_share": wins / n if n else 0.0,
            "built_losses_beyond_1pct": losses_beyond, "built_better_cv": cv_wins}


def pool_seeds(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """One row per dataset: each arm's scores averaged over the seeds it has rows for.

    A seed where an arm failed counts as a loss of that arm: its pooled score is None.
    """
    by_name: dict[str, list[dict[str, Any]]] = {}
    for row in rows:
        by_name.setdefault(row["dataset"], []).append(row)
    pooled = []
    for name, group in by_name.items():
        arms = {}
        for arm in ARMS:
            scores = [r["arms"][arm]["score"] for r in group]
            cvs = [r["arms"][arm].get("cv_score") for r in group]
            arms[arm] = {**group[0]["arms"][arm],
                         "score": None if None in scores else sum(scores) / len(scores),
                         "cv_score": None if None in cvs else sum(cvs) / len(cvs),
                         "trials": {"all": sum(sum(r["arms"][arm]["trials"].values()) for r in group) // len(group)},
                         "best_family": "/".join(sorted({r["arms"][arm]["best_family"] or "—" for r in group})),
                         "profile_seconds": sum(r["arms"][arm]["profile_seconds"] for r in group) / len(group),
                         "error": "; ".join(r["arms"][arm]["error"] for r in group if r["arms"][arm]["error"])}
        pooled.append({"dataset": name, "task": group[0]["task"], "metric": group[0]["metric"],
                       "seeds": sorted(r.get("seed", 0) for r in group), "arms": arms})
    return pooled


def paired_gains(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Per dataset, the per-seed gains as a paired sample: mean, standard error, seeds won, p value.

    Each seed is one split searched by both arms, so the pairs share their test rows; their spread
    says whether a mean gain is larger than the seed-to-seed noise.  The p value is the two-sided
    Wilcoxon signed-rank test (Wilcoxon 1945; ``scipy.stats.wilcoxon``) of the per-seed gains
    against zero; a report only, the issue's rule judges the pooled means.
    """
    from scipy import stats

    by_name: dict[str, list[float]] = {}
    for row in rows:
        arms = row["arms"]
        gain = _relative_gain(row["metric"], arms["built"]["score"], arms["fixed"]["score"])
        by_name.setdefault(row["dataset"], []).append(float("nan") if gain is None else gain)
    paired = []
    for name, gains in by_name.items():
        g = np.asarray(gains, dtype=float)
        g = g[np.isfinite(g)]
        n = len(g)
        nonzero = g[g != 0]
        p = float(stats.wilcoxon(nonzero).pvalue) if len(nonzero) >= 2 else None
        paired.append({"dataset": name, "seeds": n, "mean_gain": float(g.mean()) if n else None,
                       "standard_error": standard_error(g) if n >= 2 else None,
                       "won": int((g > 0).sum()), "lost": int((g < 0).sum()), "tied": int((g == 0).sum()),
                       "p_value": p})
    return paired


def print_paired(paired: list[dict[str, Any]]) -> None:
    print()
    print(f"{'per-seed gain':14s} {'mean %':>7s} {'± se %':>7s} {'won/lost/tied':>13s} {'p':>6s}")
    for row in paired:
        mean, se, p = row["mean_gain"], row["standard_error"], row["p_value"]
        print(f"{row['dataset']:14s} {'—' if mean is None else f'{100 * mean:+.2f}':>7s} "
              f"{'—' if se is None else f'{100 * se:.2f}':>7s} "
              f"{row['won']:>5d}/{row['lost']}/{row['tied']:<5d} {'—' if p is None else f'{p:.2f}':>6s}")


def _fmt(value: float | None) -> str:
    return "—" if value is None else f"{value:.4f}"


def print_table(rows: list[dict[str, Any]], summary: dict[str, Any]) -> None:
    head = (f"{'dataset':14s} {'task':10s} {'metric':8s} {'fixed':>8s} {'built':>8s} {'gain %':>7s} "
            f"{'trials f/b':>10s} {'best family f/b':27s} {'prof s':>6s}  built families")
    print(head)
    print("-" * len(head))
    for row in rows:
        f, b = row["arms"]["fixed"], row["arms"]["built"]
        gain = row.get("relative_gain")
        trials = f"{sum(f['trials'].values())}/{sum(b['trials'].values())}"
        fams = f"{f['best_family'] or '—'}/{b['best_family'] or '—'}"
        print(f"{row['dataset']:14s} {row['task']:10s} {row['metric']:8s} {_fmt(f['score']):>8s} "
              f"{_fmt(b['score']):>8s} {'—' if gain is None else f'{100 * gain:+.2f}':>7s} {trials:>10s} "
              f"{fams:27s} {b['profile_seconds']:6.1f}  {','.join(b['families'])}")
        for arm in ARMS:
            if row["arms"][arm]["error"]:
                print(f"    {arm} failed: {row['arms'][arm]['error']}")
    print()
    print(f"datasets: {summary['datasets']}   mean rank  fixed {summary['mean_rank'].get('fixed', 0):.2f}  "
          f"built {summary['mean_rank'].get('built', 0):.2f}")
    print(f"built wins {summary['built_wins']} of {summary['datasets']} ({summary['built_win_share']:.0%}), "
          f"ties {summary['ties']}, losses by more than {LOSS_TOLERANCE:.0%}: {summary['built_losses_beyond_1pct']}")
    # Both arms search the same folds, so their best cross-validated scores compare directly; the
    # test split (a few hundred rows on the small sets) adds noise of its own.
    print(f"best cross-validated score better with the built space: {summary['built_better_cv']} of "
          f"{summary['datasets']}")


def report(rows: list[dict[str, Any]]) -> dict[str, Any]:
    """Print the table (pooled over seeds when there are several) and return the summary."""
    seeds = sorted({r.get("seed", 0) for r in rows})
    pooled = pool_seeds(rows) if len(seeds) > 1 else rows
    summary = summarise(pooled)
    if len(seeds) > 1:
        summary["seeds"] = seeds
        summary["per_seed"] = {seed: summarise([r for r in rows if r.get("seed", 0) == seed]) for seed in seeds}
        print(f"test scores averaged over seeds {', '.join(map(str, seeds))}")
    print_table(pooled, summary)
    for seed, one in summary.get("per_seed", {}).items():
        print(f"  seed {seed}: built wins {one['built_wins']} of {one['datasets']}, losses by more than "
              f"{LOSS_TOLERANCE:.0%}: {one['built_losses_beyond_1pct']}, better cv {one['built_better_cv']}")
    if len(seeds) > 1:
        summary["paired"] = paired_gains(rows)
        print_paired(summary["paired"])
    return summary


def main(argv: list[str] | None = None) -> int:
    from tunelab.engine import parse_duration

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--budget", default="60s", help="search budget per arm and dataset (default 60s)")
    parser.add_argument("--datasets", default=",".join(DEFAULT_DATASETS),
                        help="comma-separated names from benchmarks/datasets.py, or 'all'")
    parser.add_argument("--seeds", "--seed", default="0",
                        help="comma-separated split and search seeds (default 0); several are judged on the mean")
    parser.add_argument("--results-dir", default=str(ROOT / "benchmarks" / "results"))
    parser.add_argument("--keep", type=Path, default=None, help="keep the stores and models in this folder")
    parser.add_argument("--combine", type=Path, nargs="+", default=None,
                        help="only pool the raw results (JSON) of earlier runs, e.g. one per seed run side by side")
    args = parser.parse_args(argv)
    if args.combine:
        rows = [row for path in args.combine for row in json.loads(path.read_text())["rows"]]
        report(rows)
        return 0
    budget = parse_duration(args.budget)
    seeds = [int(s) for s in args.seeds.split(",") if s.strip()]
    names = datasets.chosen(args.datasets)
    warnings.simplefilter("ignore")
    started = datetime.now(timezone.utc)
    rows = []
    for seed in seeds:
        for name in names:
            t0 = time.perf_counter()
            rows.append(compare(name, budget, seed, args.keep))
            arms = rows[-1]["arms"]
            print(f"[{name} seed {seed}] fixed {_fmt(arms['fixed']['score'])}  built {_fmt(arms['built']['score'])}  "
                  f"({time.perf_counter() - t0:.0f} s)", flush=True)
    print()
    summary = report(rows)
    write_results(args.results_dir, f"space_priors-{args.budget}-seed{'-'.join(map(str, seeds))}", started,
                  {"budget": args.budget, "budget_seconds": budget, "seeds": seeds, "rows": rows, "summary": summary})
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
