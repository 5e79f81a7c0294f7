"""Side-by-side benchmark: library defaults, random search, plain TPE and tunelab.

Run from the repository root::

    python benchmarks/suite.py --budget 60s
    python benchmarks/suite.py --budget 30s --datasets titanic,wage --exclude tunelab
    python benchmarks/suite.py --budget 5m --plot anytime.png

Every method gets the same wall-clock budget on the same machine, one at a time, on the
same 75/25 split; the benchmark scores each from its test predictions. It prints a dataset ×
method table, then per method the mean rank, wins against the best default and mean
normalised score, and a Friedman test p-value across methods. Raw results go to
``benchmarks/results/`` as JSON. See ``benchmarks/README.md`` for the protocol.
"""

from __future__ import annotations

import argparse
import json
import platform
import re
import sys
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import optuna
import pandas as pd

from benchmarks import datasets
from benchmarks._baselines import (
    default_method,
    random_sampler,
    search_method,
    tpe_sampler,
)
from benchmarks._runner import Method, run_suite
from benchmarks._scoring import orient
from benchmarks._summary import friedman_p_value, method_summary
from benchmarks._tunelab_cli import tunelab_method

DEFAULT_METHODS = ["hgb_default", "rf_default", "linear_default"]
RESULTS_DIR = Path(__file__).resolve().parent / "results"
_BUDGET = re.compile(r"^(\d+(?:\.\d+)?)(s|m|h)$")
_UNIT_SECONDS = {"s": 1, "m": 60, "h": 3600}


def parse_budget(text: str) -> float:
    """Seconds in a budget written like ``30s``, ``60s``, ``5m`` or ``1h``."""
    match = _BUDGET.match(text.strip())
    if not match or float(match.group(1)) <= 0:
        raise argparse.ArgumentTypeError(f"budget {text!r} is not like 30s, 60s or 5m")
    return float(match.group(1)) * _UNIT_SECONDS[match.group(2)]


def all_methods(tunelab_executable: str | None = None) -> dict[str, Method]:
    """Every method of the suite by name, in the order they run on each dataset."""
    return {
        "hgb_default": default_method("hgb"),
        "rf_default": default_method("rf"),
        "linear_default": default_method("linear"),
        "random_search": search_method(random_sampler),
        "tpe": search_method(tpe_sampler),
        "tunelab": tunelab_method(tunelab_executable),
    }


def score_table(records: list[dict[str, Any]]) -> pd.DataFrame:
    """Dataset × method table of raw test scores (NaN where a method failed)."""
    frame = pd.DataFrame(
        [{"dataset": r["dataset"], "method": r["method"], "score": r["score"]} for r in records]
    )
    table = frame.pivot(index="dataset", columns="method", values="score").astype(float)
    order = list(dict.fromkeys(r["dataset"] for r in records))
    methods = list(dict.fromkeys(r["method"] for r in records))
    return table.loc[order, methods]


def oriented_table(records: list[dict[str, Any]]) -> pd.DataFrame:
    """The score table turned so that higher is better on every row."""
    table = score_table(records)
    metric = {r["dataset"]: r["metric"] for r in records}
    return table.apply(lambda row: row.map(lambda v: orient(metric[row.name], v)), axis=1)


def render(records: list[dict[str, Any]]) -> str:
    """The report printed at the end of a run."""
    table = score_table(records)
    oriented = oriented_table(records)
    metric = {r["dataset"]: r["metric"] for r in records}
    shown = table.apply(lambda col: col.map(lambda v: "failed" if pd.isna(v) else f"{v:.4g}"))
    for dataset, row in oriented.iterrows():
        if row.notna().any():  # idxmax raises on a row where every method failed
            shown.loc[dataset, row.idxmax()] += " *"
    shown.insert(0, "metric", [metric[d] for d in shown.index])
    lines = ["Test scores (roc_auc: higher is better; log_loss, rmse: lower; * best on row)",
             shown.to_string(), ""]

    accuracy = _accuracy_table(records)
    if not accuracy.empty:
        lines += ["Test accuracy (classification)", accuracy.to_string(float_format="%.4f"), ""]

    defaults = [m for m in DEFAULT_METHODS if m in oriented.columns]
    summary = method_summary(oriented, defaults)
    summary = summary.join(_timing_table(records))
    complete = len(oriented.dropna(axis=0, how="any"))
    lines += [
        f"Per method (defaults compared against: {', '.join(defaults) or 'none run'}; "
        f"all over the {complete} datasets every method scored)",
        summary.to_string(float_format="%.3f"),
        "",
    ]
    p_value, n, k = friedman_p_value(oriented)
    lines.append(
        f"Friedman test over {n} datasets x {k} methods: p = {p_value:.4g}"
        if p_value == p_value else
        f"Friedman test: not defined for {n} complete datasets x {k} methods (needs >= 2 x 3)"
    )
    return "\n".join(lines)


def _timing_table(records: list[dict[str, Any]]) -> pd.DataFrame:
    frame = pd.DataFrame(records).reindex(
        columns=["method", "search_seconds", "over_budget_seconds"]
    )
    return frame.groupby("method").agg(
        **{"mean search s": ("search_seconds", "mean"),
           "max over budget s": ("over_budget_seconds", "max")}
    )


def _accuracy_table(records: list[dict[str, Any]]) -> pd.DataFrame:
    rows = [
        {"dataset": r["dataset"], "method": r["method"], "accuracy": r["scores"]["accuracy"]}
        for r in records if r["score"] is not None and "accuracy" in r.get("scores", {})
    ]
    if not rows:
        return pd.DataFrame()
    table = pd.DataFrame(rows).pivot(index="dataset", columns="method", values="accuracy")
    return table.loc[
        [d for d in dict.fromkeys(r["dataset"] for r in records) if d in table.index],
        [m for m in dict.fromkeys(r["method"] for r in records) if m in table.columns],
    ]


def _environment() -> dict[str, Any]:
    import numpy
    import sklearn

    return {
        "python": platform.python_version(),
        "machine": platform.platform(),
        "cpus": __import__("os").cpu_count(),
        "numpy": numpy.__version__,
        "pandas": pd.__version__,
        "scikit-learn": sklearn.__version__,
        "optuna": optuna.__version__,
    }


def _parse_args(argv: list[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--budget", default="60s",
                        help="wall-clock budget per method and dataset: 30s, 60s or 5m")
    parser.add_argument("--datasets", default="",
                        help=f"comma-separated subset of: {', '.join(datasets.names())}")
    parser.add_argument("--methods", default="",
                        help=f"comma-separated subset of: {', '.join(all_methods())}")
    parser.add_argument("--exclude", default="", help="comma-separated methods to leave out")
    parser.add_argument("--seed", type=int, default=0, help="seed of splits, folds and samplers")
    parser.add_argument("--threads", type=int, default=1,
                        help="BLAS/OpenMP thread cap, the same for every method")
    parser.add_argument("--plot", type=Path, default=None, help="write an anytime plot (PNG)")
    parser.add_argument("--results-dir", type=Path, default=RESULTS_DIR,
                        help="where the raw JSON results go")
    parser.add_argument("--tunelab", default=None, help="path of the tunelab executable")
    args = parser.parse_args(argv)
    try:
        args.budget_seconds = parse_budget(args.budget)
    except argparse.ArgumentTypeError as exc:
        parser.error(str(exc))
    return args


def _select(text: str, known: list[str], what: str) -> list[str]:
    chosen = [x.strip() for x in text.split(",") if x.strip()] or list(known)
    unknown = [x for x in chosen if x not in known]
    if unknown:
        raise SystemExit(f"unknown {what}: {', '.join(unknown)}; choose from {', '.join(known)}")
    return chosen


def main(argv: list[str] | None = None) -> int:
    """Run the suite from the command line; returns the process exit code."""
    args = _parse_args(argv)
    methods = all_methods(args.tunelab)
    chosen = _select(args.methods, list(methods), "method")
    excluded = set(_select(args.exclude, list(methods), "method")) if args.exclude else set()
    selected = {m: methods[m] for m in chosen if m not in excluded}
    names = _select(args.datasets, datasets.names(), "dataset")
    optuna.logging.set_verbosity(optuna.logging.WARNING)

    started = datetime.now(timezone.utc)
    records = run_suite(names, selected, args.budget_seconds, args.budget, args.seed,
                        threads=args.threads, want_curve=args.plot is not None)
    finished = datetime.now(timezone.utc)
    # Raw results first, so nothing is lost if rendering or plotting goes wrong.
    args.results_dir.mkdir(parents=True, exist_ok=True)
    stamp = started.strftime("%Y%m%dT%H%M%SZ")
    out = args.results_dir / f"suite-{args.budget}-{stamp}.json"
    payload = {
        "budget": args.budget, "budget_seconds": args.budget_seconds, "seed": args.seed,
        "threads": args.threads,
        "datasets": names, "methods": list(selected),
        "started": started.isoformat(), "finished": finished.isoformat(),
        "wall_seconds": round((finished - started).total_seconds(), 1),
        "environment": _environment(), "results": records,
    }
    out.write_text(json.dumps(payload, indent=1, default=str))
    print(render(records))
    print(f"\nRaw results: {out}  (wall time {payload['wall_seconds']:.0f} s)")
    if args.plot is not None:
        from benchmarks._plot import anytime_plot

        try:
            print(f"Anytime plot: {anytime_plot(records, args.plot, args.budget_seconds)}")
        except ImportError:
            print("Anytime plot skipped: matplotlib is not installed", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
