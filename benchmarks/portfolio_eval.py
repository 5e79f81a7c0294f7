"""Leave one table out: the portfolio's warm start against today's cold start, on corpus tables it never saw.

Question: does starting from a portfolio chosen on other tables end with a better model than a cold
start of the same budget, on a table the portfolio never saw? For each corpus table of the stored
score matrix (``build_portfolio.py``), a portfolio is chosen from the matrix *without that table*
(``build_portfolio.write_portfolio(..., exclude=[table])``, what ``--exclude`` does), the table is
split 75/25 with the seed (``datasets.split``, stratified on a class target), and tunelab's command
line runs the training part twice at each budget, as a user would (one core, ``--jobs 1``):

* **warm**: ``tunelab run ... --portfolio FILE`` (the held-out portfolio, queued before the priors);
* **cold**: ``tunelab run ... --no-portfolio`` (today's start: the builder's priors, then search).

Budgets: 10 trials (``--trials 10``), 20 s and 60 s (``--budgets 10t,20s,60s``); seeds 0 and 1 at
least (a seed fixes the split, the folds and the sampler). Each arm exports its best trial
(``--single``) and predicts the test part; the script scores the predictions itself under the task's
default metric (``_scoring.py``: ROC AUC, log loss, RMSE), the metric both arms search under.

Report, per budget: per table, each arm's test score pooled over the seeds and warm's gain; on how
many held-out tables warm beats cold (a failed run loses, ``_summary.head_to_head``); the tables where
warm is below cold by more than the seed-to-seed spread (standard error of the per-seed difference,
``_summary.gaps_to_best_default``); and warm's mean relative gain over the tables with its spread
over the seeds. Targets, declared here before any run: warm better on at least 70 % of the held-out
tables at 10 trials and at 20 s; at 60 s, warm not worse than cold beyond the seed-to-seed spread
(its mean gain over the tables not below zero by more than that spread).

Usage (from the repository root)::

    python benchmarks/portfolio_eval.py --estimate               # the expected run time, run nothing
    python benchmarks/portfolio_eval.py                           # every table of the matrix, seeds 0,1
    python benchmarks/portfolio_eval.py --datasets mroz,wells --seeds 0,1,2
    python benchmarks/portfolio_eval.py --combine benchmarks/results/portfolio_eval-*.json   # re-print
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from benchmarks import build_portfolio as bp, datasets  # noqa: E402
from benchmarks._results import write_results  # noqa: E402
from benchmarks._scoring import PRIMARY_METRIC, orient, score_predictions  # noqa: E402
from benchmarks._summary import gaps_to_best_default, head_to_head, per_seed_table, pool_seeds, standard_error  # noqa: E402
from benchmarks._tunelab_cli import CommandFailed, _run, default_executable, read_predictions  # noqa: E402

ARMS = ("warm", "cold")
DEFAULT_BUDGETS = ("10t", "20s", "60s")
# The targets, declared before any run (see the docstring).
WIN_SHARE_TARGET = 0.70
WIN_BUDGETS = ("10t", "20s")
NOT_WORSE_BUDGET = "60s"
TRIALS_SECONDS_GUESS = 30.0  # what 10 trials take on a corpus table, for the estimate only
COMMAND_SECONDS = 6.0  # starting tunelab, export and predict: per arm and budget, for the estimate only


def budget_args(budget: str) -> list[str]:
    """``10t`` -> ``--trials 10``; ``20s`` (any duration) -> ``--budget 20s``."""
    if budget.endswith("t") and budget[:-1].isdigit():
        return ["--trials", budget[:-1]]
    return ["--budget", budget]


def budget_seconds(budget: str) -> float:
    """Wall seconds a budget is expected to take (a guess for a trial count)."""
    from tunelab.engine import parse_duration

    if budget.endswith("t") and budget[:-1].isdigit():
        return TRIALS_SECONDS_GUESS * int(budget[:-1]) / 10
    return parse_duration(budget)


def _trials(store: Path, study: str) -> dict[str, Any]:
    """How many trials ran, how many came from the portfolio, and whether the best one did."""
    from tunelab.store import Store

    with Store.open(str(store)) as st:
        record = st.get_study(study)
        trials = st.trials(record)
        best = st.best_trial(record)
    ran = [t for t in trials if t.state not in ("waiting", "running")]
    return {"trials": sum(t.state == "complete" for t in trials),
            "portfolio_trials": sum(t.origin == "portfolio" for t in ran),
            "best_from_portfolio": bool(best is not None and best.origin == "portfolio"),
            "cv_score": None if best is None else best.value}


def run_arm(arm: str, budget: str, work: Path, spec: datasets.DatasetSpec, test: pd.DataFrame, seed: int,
            portfolio: Path, exe: str) -> dict[str, Any]:
    """One search, export and prediction through the command line; its test score (None when it failed)."""
    study = f"{arm}-{budget}"
    store, model, preds = work / f"{study}.db", work / f"{study}.zip", work / f"{study}.csv"
    start = ["--portfolio", str(portfolio)] if arm == "warm" else ["--no-portfolio"]
    grace = 4 * budget_seconds(budget) + 300  # only guards against a hang
    log: list[dict[str, object]] = []
    out: dict[str, Any] = {"score": None, "search_seconds": None, "error": ""}
    try:
        out["search_seconds"] = _run(
            [exe, "run", str(work / "train.csv"), "--target", spec.target, "--task", spec.task, *budget_args(budget),
             "--store", str(store), "--study", study, "--seed", str(seed), "-q", "--jobs", "1", *start],
            grace, log, 1)
        _run([exe, "export", study, "--store", str(store), "--out", str(model), "--single"], grace, log, 1)
        _run([exe, "predict", str(model), str(work / "test_features.csv"), "--out", str(preds)], grace, log, 1)
        scores = score_predictions(spec.task, test[spec.target], read_predictions(preds, spec.task))
        out["score"] = scores[PRIMARY_METRIC[spec.task]]
        out.update(_trials(store, study))
    except (CommandFailed, ValueError) as exc:  # a failed arm is a result (it loses), not the end of the run
        out["error"] = str(exc).splitlines()[0][:300]
        out["commands"] = log
    return out


def compare(name: str, matrix: dict[str, Any], k: int, seed: int, budgets: list[str], exe: str,
            position: int) -> dict[str, Any]:
    """Both arms at every budget on one held-out table and seed."""
    spec = datasets.corpus_get(name)
    order = ARMS if (position + seed) % 2 == 0 else ARMS[::-1]  # arms alternate which runs first
    with tempfile.TemporaryDirectory(prefix=f"portfolio-eval-{name}-") as tmp:
        work = Path(tmp)
        portfolio = work / "portfolio.json"
        choice = bp.write_portfolio(matrix, portfolio, k, exclude=[name])
        train, test = datasets.split(spec, seed=seed)
        train.to_csv(work / "train.csv", index=False)
        test.drop(columns=[spec.target]).to_csv(work / "test_features.csv", index=False)
        runs = {b: {arm: run_arm(arm, b, work, spec, test, seed, portfolio, exe) for arm in order} for b in budgets}
    return {"dataset": name, "task": spec.task, "metric": PRIMARY_METRIC[spec.task], "seed": seed,
            "train_rows": len(train), "portfolio": [m.name for m in choice.members],
            "runs": {b: {arm: runs[b][arm] for arm in ARMS} for b in budgets}}


# --------------------------------------------------------------------------- the report


def _long(rows: list[dict[str, Any]], budget: str) -> pd.DataFrame:
    out = []
    for row in rows:
        for arm in ARMS:
            run = row["runs"].get(budget, {}).get(arm)
            if run is None:
                continue
            score = np.nan if run["score"] is None else orient(row["metric"], float(run["score"]))
            out.append({"dataset": row["dataset"], "seed": row["seed"], "method": arm, "score": score})
    return pd.DataFrame(out, columns=["dataset", "seed", "method", "score"])


def _gains(rows: list[dict[str, Any]], budget: str) -> pd.DataFrame:
    """(dataset, seed) -> warm's gain over cold as a share of cold's score, positive when warm is better."""
    out = []
    for row in rows:
        runs = row["runs"].get(budget, {})
        warm, cold = (runs.get(arm, {}).get("score") for arm in ARMS)
        if warm is None or cold is None:
            continue
        gain = (orient(row["metric"], warm) - orient(row["metric"], cold)) / max(abs(cold), 1e-12)
        out.append({"dataset": row["dataset"], "seed": row["seed"], "gain": gain})
    return pd.DataFrame(out, columns=["dataset", "seed", "gain"])


def summarise(rows: list[dict[str, Any]], budget: str) -> dict[str, Any] | None:
    """Wins, tables below cold beyond the seed spread, and the mean gain with its spread over seeds."""
    long = _long(rows, budget)
    if long.empty:
        return None
    per_seed = per_seed_table(long)
    pooled = pool_seeds(per_seed)
    wins, ties, losses = head_to_head(pooled, "warm", "cold")
    gaps = gaps_to_best_default(per_seed, "warm", ["cold"])
    gains = _gains(rows, budget)
    by_seed = gains.groupby("seed")["gain"].mean() if not gains.empty else pd.Series(dtype=float)
    spread = standard_error(by_seed)
    mean_gain = float(by_seed.mean()) if len(by_seed) else float("nan")
    tables = wins + ties + losses
    summary = {"budget": budget, "tables": tables, "wins": wins, "ties": ties, "losses": losses,
               "win_share": wins / tables if tables else float("nan"),
               "below_beyond_spread": sorted(gaps.index[gaps["below"]].tolist()),
               "mean_gain": mean_gain, "gain_spread": spread, "seeds": sorted(by_seed.index.tolist())}
    if budget in WIN_BUDGETS:
        summary["target_met"] = bool(tables and summary["win_share"] >= WIN_SHARE_TARGET)
    elif budget == NOT_WORSE_BUDGET:
        # With one seed there is no spread to judge by: then any loss counts.
        summary["target_met"] = bool(np.isfinite(mean_gain) and (mean_gain >= 0 or -mean_gain <= spread))
    return summary


def _fmt(value: float | None) -> str:
    return "—" if value is None or not np.isfinite(value) else f"{value:.5g}"


def print_targets() -> None:
    print(f"targets: warm better on at least {WIN_SHARE_TARGET:.0%} of the held-out tables at "
          f"{' and '.join(WIN_BUDGETS)}; at {NOT_WORSE_BUDGET}, warm not worse than cold beyond the seed-to-seed "
          "spread (mean gain over the tables not below zero by more than its standard error over the seeds)")


def report(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    budgets = list(dict.fromkeys(b for row in rows for b in row["runs"]))
    seeds = sorted({row["seed"] for row in rows})
    print(f"held-out test scores, mean over seed(s) {', '.join(map(str, seeds))}; gain: warm over cold, "
          "positive when warm is better")
    print_targets()
    summaries = []
    for budget in budgets:
        summary = summarise(rows, budget)
        if summary is None:
            continue
        gains = _gains(rows, budget).groupby("dataset")["gain"].mean()
        print(f"\n== {budget} ({' '.join(budget_args(budget))})")
        head = (f"{'dataset':18s} {'metric':8s} {'cold':>10s} {'warm':>10s} {'gain %':>7s} {'portfolio trials':>16s} "
                f"{'best from portfolio':>19s}")
        print(head)
        print("-" * len(head))
        for name in dict.fromkeys(r["dataset"] for r in rows):
            group = [r for r in rows if r["dataset"] == name and budget in r["runs"]]
            if not group:
                continue
            means = {}
            for arm in ARMS:
                values = [r["runs"][budget][arm]["score"] for r in group]
                means[arm] = None if None in values else float(np.mean(values))
            best = sum(bool(r["runs"][budget]["warm"].get("best_from_portfolio")) for r in group)
            tried = np.mean([r["runs"][budget]["warm"].get("portfolio_trials") or 0 for r in group])
            gain = gains.get(name)
            shown = "—" if gain is None or not np.isfinite(gain) else f"{100 * gain:+.2f}"
            print(f"{name:18s} {group[0]['metric']:8s} {_fmt(means['cold']):>10s} {_fmt(means['warm']):>10s} "
                  f"{shown:>7s} {tried:16.1f} {f'{best} of {len(group)}':>19s}")
        below = summary["below_beyond_spread"]
        print(f"warm better on {summary['wins']} of {summary['tables']} held-out tables "
              f"({100 * summary['win_share']:.0f} %; {summary['ties']} tied, {summary['losses']} worse); "
              f"below cold beyond the seed spread on {len(below)}" + (f": {', '.join(below)}" if below else ""))
        print(f"mean gain over the tables {100 * summary['mean_gain']:+.2f} % ± "
              f"{_fmt(100 * summary['gain_spread'])} % (standard error over seeds {summary['seeds']})")
        if "target_met" in summary:
            print(f"target: {'met' if summary['target_met'] else 'NOT met'}")
        summaries.append(summary)
    return summaries


def estimate_seconds(tables: int, seeds: int, budgets: list[str]) -> float:
    """Expected wall seconds: both arms at every budget, plus starting the commands, per table and seed."""
    return tables * seeds * len(ARMS) * sum(budget_seconds(b) + COMMAND_SECONDS for b in budgets)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--matrix", type=Path, default=bp.MATRIX_FILE, help="the stored score matrix")
    parser.add_argument("--datasets", default="all", help="comma-separated tables of the matrix, or 'all'")
    parser.add_argument("--seeds", default="0,1", help="comma-separated split and search seeds (default 0,1)")
    parser.add_argument("--budgets", default=",".join(DEFAULT_BUDGETS),
                        help="comma-separated: NNt for a trial count, or a duration (default 10t,20s,60s)")
    parser.add_argument("--k", type=int, default=bp.DEFAULT_K, help="members of each held-out portfolio")
    parser.add_argument("--executable", default=None, help="the tunelab command (default: beside this Python)")
    parser.add_argument("--results-dir", default=str(ROOT / "benchmarks" / "results"))
    parser.add_argument("--estimate", action="store_true", help="print the expected run time and stop")
    parser.add_argument("--combine", type=Path, nargs="+", default=None, help="only re-print earlier runs' JSON")
    args = parser.parse_args(argv)
    if args.combine:
        report([row for path in args.combine for row in json.loads(path.read_text())["rows"]])
        return 0
    matrix = bp.load_matrix(args.matrix)
    held = [r["name"] for r in matrix["datasets"]]
    names = held if args.datasets == "all" else bp._names(args.datasets)
    missing = [n for n in names if n not in held]
    if missing:
        parser.error(f"not in the matrix {args.matrix}: {', '.join(missing)}")
    seeds = [int(s) for s in args.seeds.split(",") if s.strip()]
    budgets = bp._names(args.budgets)
    for budget in budgets:
        budget_seconds(budget)  # a bad duration fails before anything runs
    expected = estimate_seconds(len(names), len(seeds), budgets)
    print(f"{len(names)} held-out tables x {len(seeds)} seeds x {len(budgets)} budgets x 2 arms: expected "
          f"{bp._hours(expected)} (10 trials taken as {TRIALS_SECONDS_GUESS:.0f} s)")
    print_targets()
    if args.estimate:
        return 0
    exe = args.executable or default_executable()
    started = datetime.now(timezone.utc)
    rows: list[dict[str, Any]] = []
    commit = bp.tunelab_commit()

    def save(done: list[dict[str, Any]], summaries: list[dict[str, Any]]) -> None:
        write_results(args.results_dir, f"portfolio_eval-seed{'-'.join(map(str, seeds))}", started,
                      {"matrix": str(args.matrix), "matrix_commit": matrix.get("tunelab_commit"), "k": args.k,
                       "budgets": budgets, "seeds": seeds, "tunelab_commit": commit, "rows": done,
                       "summary": summaries})

    for seed in seeds:
        for position, name in enumerate(names):
            t0 = time.perf_counter()
            rows.append(compare(name, matrix, args.k, seed, budgets, exe, position))
            said = "  ".join(f"{b}: cold {_fmt(rows[-1]['runs'][b]['cold']['score'])} warm "
                             f"{_fmt(rows[-1]['runs'][b]['warm']['score'])}" for b in budgets)
            print(f"[{name} seed {seed}] {said}  ({time.perf_counter() - t0:.0f} s)", flush=True)
            save(rows, [])  # rewritten after every table, so a stopped run keeps what it finished
    print()
    save(rows, report(rows))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
