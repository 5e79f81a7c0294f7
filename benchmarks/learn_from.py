"""A search that learns from an earlier study against one that starts cold, same budget, side by side.

The scenario ``run --learn-from`` serves: last quarter's data was tuned, this quarter's arrives. Each
dataset's training split (``benchmarks/datasets.py``) is cut in two halves by a seeded shuffle
(stratified for classification): the *earlier* half is searched first (``--earlier-budget``), then
the *later* half is searched twice with the same budget (``--budget``): once cold, once with
``learn_from=("earlier",)``. Both arms build their space from the later half the same way, so the
difference is only the carried configurations queued first. Each arm exports its best model,
predicts the shared test split, and the benchmark scores the predictions with scikit-learn's
metrics (``benchmarks/_scoring.py``).

The two halves come from one source, so this measures the favourable case (data like the earlier
data); it says nothing about learning across unrelated datasets. The two arms alternate which runs
first from one dataset to the next.

Usage (from the repository root)::

    python benchmarks/learn_from.py                          # six datasets, 30 s per arm, seed 0
    python benchmarks/learn_from.py --seeds 0,1 --budget 20s
    python benchmarks/learn_from.py --combine results/learn_from-*.json   # pool runs made side by side
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
import warnings
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import pandas as pd
from sklearn.model_selection import train_test_split

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from benchmarks import datasets  # noqa: E402
from benchmarks._results import write_results  # noqa: E402
from benchmarks._scoring import PRIMARY_METRIC, orient, score_prediction_file  # noqa: E402

DEFAULT_DATASETS = ("titanic", "credit", "default", "hpc", "wage", "diamonds")
ARMS = ("cold", "learned")


def _halves(train: pd.DataFrame, spec: datasets.DatasetSpec, seed: int) -> tuple[pd.DataFrame, pd.DataFrame]:
    stratify = train[spec.target] if spec.is_classification else None
    earlier, later = train_test_split(train, test_size=0.5, random_state=seed, stratify=stratify)
    return earlier, later


def _arm(arm: str, later: Path, test: Path, spec: datasets.DatasetSpec, budget: float, seed: int, store: str,
         work: Path) -> dict[str, Any]:
    """One search of the later half; its test score, best CV score and how many trials came from earlier."""
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, export_model, predict_file, run_study

    out: dict[str, Any] = {"score": None, "cv_score": None, "trials": 0, "carried": 0, "best_carried": False,
                           "error": ""}
    try:
        run = run_study(RunRequest(data=later, target=spec.target, budget=Budget(budget), store=store, study=arm,
                                   task=spec.task, seed=seed, learn_from=("earlier",) if arm == "learned" else ()))
        out["cv_score"] = run.summary.best_value
        out["trials"] = sum(run.summary.counts.values())
        out.update(_carried(store, arm, run.summary.best_trial))
        model = work / f"model-{arm}.zip"
        export_model(arm, model, store=store)
        predict_file(model, test, work / f"pred-{arm}.csv")
        out["score"] = score_prediction_file(spec.task, spec.target, test, work / f"pred-{arm}.csv")[
            PRIMARY_METRIC[spec.task]]
    except Exception as exc:  # one failed arm is a result (a loss), not the end of the benchmark
        out["error"] = f"{type(exc).__name__}: {exc}".splitlines()[0]
    return out


def _carried(store: str, study: str, best: int | None) -> dict[str, Any]:
    import optuna

    from tunelab.store import Store, keys

    with Store.open(store) as st:
        trials = optuna.load_study(study_name=study, storage=st.optuna_storage()).trials
    carried = [t.number for t in trials if t.user_attrs.get(keys.LEARNED_FROM)]
    return {"carried": len(carried), "best_carried": best in carried}


def compare(name: str, budget: float, earlier_budget: float, seed: int) -> dict[str, Any]:
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study

    spec = datasets.get(name)
    train, test_frame = datasets.split(name, seed=seed)
    earlier, later = _halves(train, spec, seed)
    order = ARMS if datasets.names().index(name) % 2 == 0 else ARMS[::-1]
    with tempfile.TemporaryDirectory(prefix=f"learn-from-{name}-") as tmp:
        work = Path(tmp)
        paths = {k: work / f"{k}.csv" for k in ("earlier", "later", "test")}
        for key, frame in (("earlier", earlier), ("later", later), ("test", test_frame)):
            frame.to_csv(paths[key], index=False)
        store = str(work / "store.db")
        first = run_study(RunRequest(data=paths["earlier"], target=spec.target, budget=Budget(earlier_budget),
                                     store=store, study="earlier", task=spec.task, seed=seed))
        arms = {arm: _arm(arm, paths["later"], paths["test"], spec, budget, seed, store, work) for arm in order}
    return {"dataset": name, "task": spec.task, "metric": PRIMARY_METRIC[spec.task], "seed": seed,
            "earlier_cv": first.summary.best_value, "arms": {arm: arms[arm] for arm in ARMS}}


def pool(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """One row per dataset, each arm's scores averaged over its seeds (a failed seed makes it None)."""
    by_name: dict[str, list[dict[str, Any]]] = {}
    for row in rows:
        by_name.setdefault(row["dataset"], []).append(row)
    out = []
    for name, group in by_name.items():
        arms = {}
        for arm in ARMS:
            arms[arm] = {}
            for key in ("score", "cv_score"):
                values = [r["arms"][arm][key] for r in group]
                arms[arm][key] = None if None in values else sum(values) / len(values)
            arms[arm]["carried"] = sum(r["arms"][arm]["carried"] for r in group) / len(group)
            arms[arm]["best_carried"] = sum(bool(r["arms"][arm]["best_carried"]) for r in group)
        out.append({"dataset": name, "metric": group[0]["metric"], "seeds": len(group), "arms": arms})
    return out


def _gain(metric: str, new: float | None, base: float | None) -> float | None:
    """Learned minus cold as a share of the cold score, turned so that positive is better."""
    if new is None or base is None:
        return None
    return (orient(metric, new) - orient(metric, base)) / max(abs(base), 1e-12)


def report(rows: list[dict[str, Any]]) -> dict[str, Any]:
    seeds = sorted({r["seed"] for r in rows})
    pooled = pool(rows)
    print(f"test scores averaged over seed(s) {', '.join(map(str, seeds))}")
    head = (f"{'dataset':14s} {'metric':8s} {'cold':>10s} {'learned':>10s} {'gain %':>7s} {'cv gain %':>9s} "
            f"{'carried':>7s} {'best was carried':>16s}")
    print(head)
    print("-" * len(head))
    wins = cv_wins = 0
    for row in pooled:
        c, lr = row["arms"]["cold"], row["arms"]["learned"]
        gain = _gain(row["metric"], lr["score"], c["score"])
        cv_gain = _gain(row["metric"], lr["cv_score"], c["cv_score"])
        wins += gain is not None and gain > 0
        cv_wins += cv_gain is not None and cv_gain > 0
        fmt = (lambda v: "—" if v is None else f"{v:10.4f}")
        print(f"{row['dataset']:14s} {row['metric']:8s} {fmt(c['score'])} {fmt(lr['score'])} "
              f"{'—' if gain is None else f'{100 * gain:+.2f}':>7s} "
              f"{'—' if cv_gain is None else f'{100 * cv_gain:+.2f}':>9s} "
              f"{lr['carried']:7.1f} {str(lr['best_carried']) + ' of ' + str(row['seeds']):>16s}")
    print(f"\nlearned start better on test: {wins} of {len(pooled)}; better best CV: {cv_wins} of {len(pooled)}")
    return {"datasets": len(pooled), "learned_wins": wins, "learned_better_cv": cv_wins, "seeds": seeds}


def main(argv: list[str] | None = None) -> int:
    from tunelab.engine import parse_duration

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--budget", default="30s", help="search budget of each arm on the later half (default 30s)")
    parser.add_argument("--earlier-budget", default="60s", help="search budget on the earlier half (default 60s)")
    parser.add_argument("--datasets", default=",".join(DEFAULT_DATASETS),
                        help="comma-separated names from benchmarks/datasets.py, or 'all'")
    parser.add_argument("--seeds", "--seed", default="0", help="comma-separated split and search seeds (default 0)")
    parser.add_argument("--results-dir", default=str(ROOT / "benchmarks" / "results"))
    parser.add_argument("--combine", type=Path, nargs="+", default=None, help="only pool earlier runs' JSON")
    args = parser.parse_args(argv)
    if args.combine:
        report([row for path in args.combine for row in json.loads(path.read_text())["rows"]])
        return 0
    budget, earlier_budget = parse_duration(args.budget), parse_duration(args.earlier_budget)
    seeds, names = [int(s) for s in args.seeds.split(",") if s.strip()], datasets.chosen(args.datasets)
    warnings.simplefilter("ignore")
    started = datetime.now(timezone.utc)
    rows = []
    for seed, name in ((seed, name) for seed in seeds for name in names):
        t0 = time.perf_counter()
        rows.append(compare(name, budget, earlier_budget, seed))
        cold, learned = (rows[-1]["arms"][arm]["score"] for arm in ARMS)
        print(f"[{name} seed {seed}] cold {cold}  learned {learned}  ({time.perf_counter() - t0:.0f} s)", flush=True)
    print()
    summary = report(rows)
    write_results(args.results_dir, f"learn_from-{args.budget}-seed{'-'.join(map(str, seeds))}", started,
                  {"budget": args.budget, "earlier_budget": args.earlier_budget, "seeds": seeds, "rows": rows,
                   "summary": summary})
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
