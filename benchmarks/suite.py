"""Side-by-side benchmark: library defaults, random search, plain TPE and tunelab, per metric and half.

Run from the repository root::

    python benchmarks/suite.py --budget 60s                          # thirty tables, seeds 0,1,2
    python benchmarks/suite.py --budget 60s --half dev --seeds 0     # the development half, one seed
    python benchmarks/suite.py --budget 30s --datasets titanic,wage --exclude tunelab
    python benchmarks/suite.py --combine benchmarks/results/suite-*.json   # re-print, runs nothing
    python benchmarks/suite.py --combine FILES --summary OUT.json.gz       # a compact summary to commit
    python benchmarks/suite.py --combine FILES --markdown held             # the half as one table

Protocol. Every task is scored under the two metrics a user most often picks for it (binary:
ROC AUC and log loss; multiclass: accuracy and log loss; regression: RMSE and MAE;
``_scoring.METRICS``). tunelab runs once per metric with ``--metric``, as a user would; random
search and plain TPE search once per metric, under it; the three library defaults are fitted
once and scored under both. Every run gets the same wall-clock budget on the same machine, one
at a time, on the same 75/25 split of its seed, one thread per fit. A seed fixes the split, the
folds and the samplers; per table, a method's score is its mean over the seeds (pooled).

Halves. The thirty tables were split in two before any change they are to judge: a development
half, to try changes on, and a held-back half, which decides. Procedure (:func:`halves`; a test
checks the lists below against it): for each task in turn (binary, multiclass, regression),
``numpy.random.default_rng(HALVES_SEED)``, one generator for the three tasks, with
``HALVES_SEED = 2026``, permutes the task's tables that the first, 16-table protocol did not
have, then permutes those it had (each sorted by name first); the held-back half takes the
first half of that order, the development half the rest. So the held-back half is balanced by
task and holds as many tables that no earlier benchmark of tunelab has looked at as each task
allows (13 of its 15; every binary table new to the suite, and two drawn from the earlier ones).

Development half (15): credit, default, fair, oj, titanic (binary); beps, chile, digits, hpc,
wvs (multiclass); ames, diamonds, ncbirths, slid, wage (regression).

Held-back half (15): anes96, attrition, breast_cancer, nass_cds, telco_churn (binary); fishing,
happiness, hawks, olive, stackoverflow (multiclass); computers, concrete, cps1988, hotel_rates,
saratoga (regression).

Report, for each half and each metric: per table the pooled test score of every method; mean
rank, wins over the best default and mean normalised score (0 = worst default, 1 = best seen);
head to head, on how many tables tunelab's pooled score beats random search's and plain TPE's;
and the tables where tunelab is below the best library default by more than the seed spread
(the standard error of the per-seed difference); and the same study shipped two more ways,
``export``'s default (``tunelab_ensemble``) and always an ensemble (``tunelab_ensemble_always``),
each against the single trial. Raw results go to ``benchmarks/results/`` as
JSON, rewritten after every table so that a stopped run keeps what it finished. See
``benchmarks/README.md`` for the shared protocol.
"""

from __future__ import annotations

import argparse
import gzip
import json
import platform
import re
import sys
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np
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
from benchmarks._scoring import HIGHER_IS_BETTER, METRICS, orient
from benchmarks._summary import (
    friedman_p_value,
    gaps_to_best_default,
    head_to_head,
    method_summary,
    never_ran,
    per_seed_table,
    pool_seeds,
)
from benchmarks._tunelab_cli import tunelab_ensemble_method, tunelab_method

DEFAULT_METHODS = ["hgb_default", "rf_default", "linear_default"]
# Methods that search under a metric, so run once per metric; the defaults fit once.
SEARCHES = ("random_search", "tpe", "tunelab", "tunelab_ensemble", "tunelab_ensemble_always")
# What tunelab is compared with head to head.
RIVALS = ("random_search", "tpe")
# The two arms exported from one study: export's default (an ensemble where it is worth it) and one trial.
ENSEMBLE, SINGLE = "tunelab_ensemble", "tunelab"
# A third arm from the same study: always the ensemble (export --ensemble), the ensemble itself measured.
ALWAYS = "tunelab_ensemble_always"
ENSEMBLE_ARMS = (ENSEMBLE, ALWAYS)
ENSEMBLE_KEYS = {ENSEMBLE: "ensemble", ALWAYS: "ensemble_always"}  # where metric_report puts each arm's duel
RESULTS_DIR = Path(__file__).resolve().parent / "results"
_BUDGET = re.compile(r"^(\d+(?:\.\d+)?)(s|m|h)$")
_UNIT_SECONDS = {"s": 1, "m": 60, "h": 3600}

# The tables of the first, 16-table protocol, which tunelab's development has looked at.
FIRST_PROTOCOL_TABLES = (
    "breast_cancer", "titanic", "credit", "default", "oj", "fair", "anes96", "digits", "chile", "wvs", "hpc",
    "wage", "slid", "ames", "diamonds", "ncbirths",
)
HALVES_SEED = 2026
DEV_HALF = (
    "credit", "default", "fair", "oj", "titanic",
    "beps", "chile", "digits", "hpc", "wvs",
    "ames", "diamonds", "ncbirths", "slid", "wage",
)
HELD_HALF = (
    "anes96", "attrition", "breast_cancer", "nass_cds", "telco_churn",
    "fishing", "happiness", "hawks", "olive", "stackoverflow",
    "computers", "concrete", "cps1988", "hotel_rates", "saratoga",
)
HALVES = {"dev": DEV_HALF, "held": HELD_HALF}
HALF_TITLES = {"dev": "Development half (for trying changes)",
               "held": "Held-back half (this half decides)"}
DECIDES = ("The held-back half decides: a claim that tunelab beats random search counts only where it holds "
           "on the held-back tables; the development half is for trying changes.")
# Report order: the first metric of each task, then the second (log loss for both classifications).
METRIC_ORDER = ("roc_auc", "accuracy", "rmse", "log_loss", "mae")


def halves(seed: int = HALVES_SEED) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The development and held-back halves by the procedure of the module docstring."""
    rng = np.random.default_rng(seed)
    dev: list[str] = []
    held: list[str] = []
    for task in ("binary", "multiclass", "regression"):
        names = sorted(n for n in datasets.names() if datasets.get(n).task == task)
        new = [str(n) for n in rng.permutation([n for n in names if n not in FIRST_PROTOCOL_TABLES])]
        seen = [str(n) for n in rng.permutation([n for n in names if n in FIRST_PROTOCOL_TABLES])]
        order = new + seen
        held += sorted(order[: len(names) // 2])
        dev += sorted(order[len(names) // 2:])
    return tuple(dev), tuple(held)


def half_of(name: str) -> str | None:
    """``"dev"`` or ``"held"`` for a suite table; ``None`` for a name in neither half."""
    return next((half for half, names in HALVES.items() if name in names), None)


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
        # The tunelab arm's study shipped by export's default (an ensemble where it is worth it).
        "tunelab_ensemble": tunelab_ensemble_method(tunelab_executable),
        # The same study, always shipped as an ensemble (export --ensemble).
        ALWAYS: tunelab_ensemble_method(tunelab_executable, always=True),
    }


# --------------------------------------------------------------------------- the report


def _long(records: list[dict[str, Any]]) -> pd.DataFrame:
    """One row per run: dataset, seed, method, raw score and oriented score (higher is better)."""
    rows = [{"dataset": r["dataset"], "seed": r["seed"], "method": r["method"],
             "raw": np.nan if r["score"] is None else float(r["score"]),
             "score": np.nan if r["score"] is None else orient(r["metric"], float(r["score"]))}
            for r in records]
    return pd.DataFrame(rows, columns=["dataset", "seed", "method", "raw", "score"])


def metric_report(records: list[dict[str, Any]]) -> dict[str, Any]:
    """The numbers of one metric over some tables (records of that one metric).

    Returns
    -------
    dict
        ``pooled`` (dataset × method, raw scores, mean over seeds), ``oriented`` (the same,
        higher is better), ``not_run`` (dataset × method, no run at all), ``seeds`` (per
        dataset, the seeds pooled), ``summary`` (per method: mean rank, wins over the best
        default, mean normalised score), ``friedman`` (p, datasets, methods), ``head_to_head``
        (rival -> wins, ties, losses of tunelab, over the tables both ran), ``below_default``
        (per table tunelab ran: best default, gap, spread, seeds, below, failed) and ``ensemble``
        (``None`` unless both export arms ran: wins, ties, losses of the ensemble arm against the
        single trial, and the tables where it is worse by more than the seed spread).
    """
    long = _long(records)
    per_seed = per_seed_table(long)
    oriented = pool_seeds(per_seed)
    raw = pool_seeds(long.assign(score=long["raw"]).pipe(per_seed_table))
    not_run = never_ran(long).reindex(index=oriented.index, columns=oriented.columns)
    seeds = per_seed.index.to_frame(index=False).groupby("dataset", sort=False)["seed"].agg(list)
    defaults = [m for m in DEFAULT_METHODS if m in oriented.columns]
    compared = "tunelab" in oriented.columns
    below = pd.DataFrame(columns=["best_default", "gap", "spread", "seeds", "below", "failed"])
    if compared and defaults:
        ran_tunelab = [d for d in oriented.index if not not_run.loc[d, "tunelab"]]
        below = gaps_to_best_default(per_seed.loc[ran_tunelab], "tunelab", defaults)
    return {
        "pooled": raw,
        "oriented": oriented,
        "not_run": not_run,
        "seeds": seeds,
        "summary": method_summary(oriented, defaults),
        "friedman": friedman_p_value(oriented),
        "head_to_head": {rival: head_to_head(oriented[~(not_run["tunelab"] | not_run[rival])], "tunelab", rival)
                         for rival in RIVALS if compared and rival in oriented.columns},
        "below_default": below,
        **{key: _ensemble_against_single(per_seed, oriented, not_run, arm) for arm, key in ENSEMBLE_KEYS.items()},
    }


def _ensemble_against_single(per_seed: pd.DataFrame, oriented: pd.DataFrame, not_run: pd.DataFrame,
                             arm: str = ENSEMBLE) -> dict[str, Any] | None:
    """An export arm (by default export's default) against one trial from the same study, per table:
    the pooled score and the seed spread."""
    if arm not in oriented.columns or SINGLE not in oriented.columns:
        return None
    both = [d for d in oriented.index if not (not_run.loc[d, arm] or not_run.loc[d, SINGLE])]
    wins, ties, losses = head_to_head(oriented.loc[both], arm, SINGLE)
    gaps = gaps_to_best_default(per_seed.loc[both], arm, [SINGLE]) if both else pd.DataFrame(columns=["below"])
    return {"wins": wins, "ties": ties, "losses": losses, "worse": [str(d) for d in gaps[gaps["below"]].index]}


def _seed_text(seeds: list[int]) -> str:
    return ", ".join(str(s) for s in sorted(seeds))


def _tables_text(n: int) -> str:
    return f"{n} table" if n == 1 else f"{n} tables"


def _render_metric(metric: str, records: list[dict[str, Any]]) -> tuple[list[str], dict[str, Any]]:
    report = metric_report(records)
    pooled, oriented = report["pooled"], report["oriented"]
    tasks = {r["dataset"]: r["task"] for r in records}
    all_seeds = sorted({s for seeds in report["seeds"] for s in seeds})
    direction = "higher" if HIGHER_IS_BETTER[metric] else "lower"
    shown = pooled.apply(lambda col: col.map(lambda v: "failed" if pd.isna(v) else f"{v:.4g}"))
    shown = shown.mask(report["not_run"], "not run")
    for dataset, row in oriented.iterrows():
        if row.notna().any():  # idxmax raises on a row where every method failed
            shown.loc[dataset, row.idxmax()] += " *"
    shown.insert(0, "seeds", [len(report["seeds"][d]) for d in shown.index])
    shown.insert(0, "task", [tasks[d] for d in shown.index])
    lines = [f"-- {metric} ({direction} is better; * best on row): {_tables_text(len(pooled))}, "
             f"mean over seeds {_seed_text(all_seeds)}",
             shown.to_string(), ""]
    complete = len(oriented.dropna(axis=0, how="any"))
    lines += [f"Per method, over the {_tables_text(complete)} every method scored "
              "(normalised: 0 = worst default, 1 = best seen):",
              report["summary"].to_string(float_format="%.3f")]
    p_value, n, k = report["friedman"]
    lines.append(f"Friedman test over {_tables_text(n)} x {k} methods: p = {p_value:.4g}" if p_value == p_value
                 else f"Friedman test: not defined for {_tables_text(n)} x {k} methods (needs >= 2 x 3)")
    for rival, (wins, ties, losses) in report["head_to_head"].items():
        lines.append(f"tunelab against {rival}: better on {wins} of {_tables_text(wins + ties + losses)} "
                     f"(tied {ties}, worse or failed {losses})")
    for arm, key in ENSEMBLE_KEYS.items():
        ensemble = report[key]
        if ensemble is None:
            continue
        worse = ensemble["worse"]
        lines.append(f"{arm} against {SINGLE} (one trial, same study): better on {ensemble['wins']} of "
                     f"{_tables_text(ensemble['wins'] + ensemble['ties'] + ensemble['losses'])} (tied "
                     f"{ensemble['ties']}, worse or failed {ensemble['losses']}); worse beyond the seed spread on "
                     f"{len(worse)}" + (f": {', '.join(worse)}" if worse else ""))
    below = report["below_default"]
    if "tunelab" in oriented.columns:
        flagged = below[below["below"]]
        lines.append(f"tunelab below the best default by more than the seed spread: {len(flagged)} of "
                     f"{_tables_text(len(below))}" + (":" if len(flagged) else ""))
        for dataset, row in flagged.iterrows():
            if row["failed"]:
                lines.append(f"    {dataset}: tunelab failed on a seed where {row['best_default']} scored")
                continue
            spread = "one seed, no spread" if row["seeds"] < 2 else f"spread {row['spread']:.4g}"
            lines.append(f"    {dataset}: {abs(row['gap']):.4g} {metric} worse than {row['best_default']} "
                         f"({spread})")
    return lines + [""], report


def _render_half(half: str, records: list[dict[str, Any]]) -> list[str]:
    names = HALVES[half]
    ran = [n for n in names if any(r["dataset"] == n for r in records)]
    lines = [f"==== {HALF_TITLES[half]}: {len(ran)} of its {len(names)} tables run ===="]
    if not records:
        return lines + ["not run", ""]
    totals = {rival: [0, 0] for rival in RIVALS}
    below = []
    arms: dict[str, list[Any]] = {arm: [0, 0, []] for arm in ENSEMBLE_ARMS}  # wins, pairs, pairs worse beyond spread
    for metric in METRIC_ORDER:
        chosen = [r for r in records if r["metric"] == metric]
        if not chosen:
            continue
        metric_lines, report = _render_metric(metric, chosen)
        lines += metric_lines
        for rival, (wins, ties, losses) in report["head_to_head"].items():
            totals[rival][0] += wins
            totals[rival][1] += wins + ties + losses
        flagged = report["below_default"]
        below += [f"{d} ({metric})" for d in flagged[flagged["below"]].index]
        for arm, key in ENSEMBLE_KEYS.items():
            found = report[key]
            if found is not None:
                arms[arm][0] += found["wins"]
                arms[arm][1] += found["wins"] + found["ties"] + found["losses"]
                arms[arm][2] += [f"{d} ({metric})" for d in found["worse"]]
    if any(total for _, total in totals.values()):
        pairs = ", ".join(f"{rival} on {wins} of {total}" for rival, (wins, total) in totals.items() if total)
        lines.append(f"{HALF_TITLES[half].split(' (')[0]}, all metrics (table x metric pairs): "
                     f"tunelab better than {pairs}; below the best default beyond the seed spread on "
                     f"{len(below)}" + (f": {', '.join(below)}" if below else ""))
    for arm, (wins, pairs, worse) in arms.items():
        if not pairs:
            continue
        lines.append(f"{HALF_TITLES[half].split(' (')[0]}, all metrics: {arm} better than {SINGLE} on "
                     f"{wins} of {pairs} pairs; worse beyond the seed spread on {len(worse)}"
                     + (f": {', '.join(worse)}" if worse else ""))
        lines += _ensemble_costs([r for r in records if r["method"] in (arm, SINGLE)], arm)
    return lines + [""]


def _ensemble_costs(records: list[dict[str, Any]], arm: str = ENSEMBLE) -> list[str]:
    """What shipping an export arm costs beside one trial: export and prediction time, kept predictions."""
    mine = [r for r in records if r["method"] == arm and r.get("score") is not None]
    single = [r for r in records if r["method"] == SINGLE and r.get("score") is not None]
    if not mine:
        return []
    shipped = [r for r in mine if r["details"].get("members")]
    per_1000 = [r["details"]["predict_ms_per_1000"] for r in shipped if r["details"].get("predict_ms_per_1000")]
    store_mb = [r["details"]["store_bytes"] / 1e6 for r in mine if r["details"].get("store_bytes")]
    return [f"    export shipped an ensemble on {len(shipped)} of {len(mine)} runs (else the best trial); "
            f"export s mean {np.mean([r['refit_seconds'] for r in mine]):.1f} against "
            f"{np.mean([r['refit_seconds'] for r in single]) if single else float('nan'):.1f} for one trial; "
            f"predict s mean {np.mean([r['details']['predict_seconds'] for r in mine]):.1f}"
            + (f"; ensemble predict ms per 1,000 rows mean {np.mean(per_1000):.0f}, max {max(per_1000):.0f}"
               if per_1000 else "")
            + (f"; store with kept predictions mean {np.mean(store_mb):.1f} MB, max {max(store_mb):.1f} MB"
               if store_mb else "")]


def headline(records: list[dict[str, Any]], half: str) -> str:
    """One half's result as a Markdown table, a row per metric: what the README quotes, regenerated."""
    chosen = [r for r in records if half_of(r["dataset"]) == half]
    rows = ["| metric | tables | seeds | tunelab better than random search | than plain TPE | mean normalised "
            "score: tunelab / random / TPE | below the best default beyond the seed spread | ensemble better "
            "than single |", "|---|---:|---|---:|---:|---|---:|---:|"]
    for metric in METRIC_ORDER:
        mine = [r for r in chosen if r["metric"] == metric]
        if not mine:
            continue
        report = metric_report(mine)
        tables = len(report["pooled"])
        seeds = sorted({s for seeds in report["seeds"] for s in seeds})
        duel = {rival: f"{w} of {w + t + lost}" for rival, (w, t, lost) in report["head_to_head"].items()}
        summary = report["summary"]["mean normalised score"]
        normalised = " / ".join(f"{summary[m]:.3f}" if m in summary.index else "—"
                                for m in ("tunelab", "random_search", "tpe"))
        below = report["below_default"]
        counts = {key: None if report[key] is None else
                  f"{report[key]['wins']} of {report[key]['wins'] + report[key]['ties'] + report[key]['losses']}"
                  for key in ENSEMBLE_KEYS.values()}
        versus = counts["ensemble"] or "—"
        if counts["ensemble_always"]:
            versus += f" (always an ensemble: {counts['ensemble_always']})"
        rows.append(f"| {metric} | {tables} | {_seed_text(seeds)} | {duel.get('random_search', '—')} | "
                    f"{duel.get('tpe', '—')} | "
                    f"{normalised} | {int(below['below'].sum())} of {len(below)} | {versus} |")
    return "\n".join(rows)


def compact(records: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """The fields the report reads, without command logs and curves: small enough to commit."""
    keep = ("dataset", "method", "seed", "task", "metric", "score", "search_seconds", "over_budget_seconds",
            "refit_seconds", "n_trials")
    out = []
    for r in records:
        row = {k: r.get(k) for k in keep}
        details = r.get("details") or {}
        if r["method"] in ENSEMBLE_ARMS:
            row["details"] = {"members": details.get("members", []), "predict_seconds": details.get("predict_seconds"),
                              "predict_ms_per_1000": details.get("predict_ms_per_1000"),
                              "store_bytes": details.get("store_bytes")}
        chosen = _chosen(details)
        if chosen:
            row["chosen"] = chosen
        row["error"] = (r.get("error") or "")[:200] or None
        out.append(row)
    return out


def _chosen(details: dict[str, Any]) -> dict[str, Any]:
    """What a search chose, its cross-validated score and family: for tunelab as ``status`` told it,
    for the baseline searches their best config.  Where a method's test score came from."""
    if details.get("chosen"):
        picked = details["chosen"]
        return {"cv": picked.get("value"), "fold_std": picked.get("fold_std"), "family": picked.get("family")}
    if details.get("best_config"):
        return {"cv": details.get("best_cv"), "family": details["best_config"].get("family")}
    return {}


def _timing_table(records: list[dict[str, Any]]) -> pd.DataFrame:
    frame = pd.DataFrame(records).reindex(
        columns=["method", "search_seconds", "over_budget_seconds"]
    )
    return frame.groupby("method", sort=False).agg(
        **{"mean search s": ("search_seconds", "mean"),
           "max over budget s": ("over_budget_seconds", "max")}
    )


def render(records: list[dict[str, Any]]) -> str:
    """The report: both halves, each per metric, then the time each method took."""
    seeds = sorted({r["seed"] for r in records})
    methods = list(dict.fromkeys(r["method"] for r in records))
    lines = [f"Suite report: {len(methods)} methods, seeds {_seed_text(seeds)}. {DECIDES}", ""]
    for half in HALVES:
        lines += _render_half(half, [r for r in records if half_of(r["dataset"]) == half])
    outside = sorted({r["dataset"] for r in records if half_of(r["dataset"]) is None})
    if outside:
        lines += [f"Left out of the report, in neither half: {', '.join(outside)}", ""]
    lines += ["Time per run (defaults: one fit; searches: the budgeted part)",
              _timing_table(records).to_string(float_format="%.3f"), "", DECIDES]
    return "\n".join(lines)


# --------------------------------------------------------------------------- running and combining


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


def _read(path: Path) -> str:
    raw = Path(path).read_bytes()
    return (gzip.decompress(raw) if str(path).endswith(".gz") else raw).decode("utf-8")


def read_results(paths: list[Path]) -> list[dict[str, Any]]:
    """The records of several raw result files, checked to pool: one budget, no run twice."""
    records: list[dict[str, Any]] = []
    budgets = set()
    for path in paths:
        payload = json.loads(_read(path))
        budgets.add(payload["budget"])
        records += payload["results"]
    if len(budgets) > 1:
        raise SystemExit(f"cannot pool runs of different budgets: {', '.join(sorted(budgets))}")
    seen: set[tuple[Any, ...]] = set()
    for r in records:
        key = (r["dataset"], r["method"], r["seed"], r["metric"])
        if key in seen:
            raise SystemExit(f"{r['dataset']} {r['method']} seed {r['seed']} {r['metric']} is in two files")
        seen.add(key)
    return records


def _parse_args(argv: list[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--budget", default="60s",
                        help="wall-clock budget per method, metric and dataset: 30s, 60s or 5m")
    parser.add_argument("--half", choices=["dev", "held", "all"], default="all",
                        help="which half of the tables to run (the report shows both halves)")
    parser.add_argument("--datasets", default="",
                        help=f"comma-separated subset of: {', '.join(datasets.names())}")
    parser.add_argument("--methods", default="",
                        help=f"comma-separated subset of: {', '.join(all_methods())}")
    parser.add_argument("--exclude", default="", help="comma-separated methods to leave out")
    parser.add_argument("--seeds", default="0,1,2",
                        help="comma-separated seeds of splits, folds and samplers, pooled in the report")
    parser.add_argument("--threads", type=int, default=1,
                        help="BLAS/OpenMP thread cap, the same for every method")
    parser.add_argument("--plot", type=Path, default=None,
                        help="write an anytime plot (PNG) of the first seed under each task's first metric")
    parser.add_argument("--results-dir", type=Path, default=RESULTS_DIR,
                        help="where the raw JSON results go")
    parser.add_argument("--tunelab", default=None, help="path of the tunelab executable")
    parser.add_argument("--combine", nargs="+", type=Path, metavar="FILE",
                        help="re-print the report of raw result files (pooled; .json or .json.gz); runs nothing")
    parser.add_argument("--markdown", choices=["dev", "held"], default=None,
                        help="with --combine: print that half's one-table summary (Markdown) instead")
    parser.add_argument("--summary", type=Path, default=None, metavar="OUT.json.gz",
                        help="with --combine: also write the pooled records, compacted and gzipped, to commit")
    args = parser.parse_args(argv)
    try:
        args.budget_seconds = parse_budget(args.budget)
        args.seed_list = [int(s) for s in args.seeds.split(",") if s.strip()]
    except (argparse.ArgumentTypeError, ValueError) as exc:
        parser.error(str(exc))
    if not args.seed_list:
        parser.error("--seeds names no seed")
    return args


def _select(text: str, known: list[str], what: str) -> list[str]:
    chosen = [x.strip() for x in text.split(",") if x.strip()] or list(known)
    unknown = [x for x in chosen if x not in known]
    if unknown:
        raise SystemExit(f"unknown {what}: {', '.join(unknown)}; choose from {', '.join(known)}")
    return chosen


def _tables(args: argparse.Namespace) -> list[str]:
    in_half = [n for n in datasets.names() if args.half == "all" or half_of(n) == args.half]
    return _select(args.datasets, in_half, f"dataset in half '{args.half}'")


def main(argv: list[str] | None = None) -> int:
    """Run the suite (or re-print runs with ``--combine``); returns the process exit code."""
    args = _parse_args(argv)
    if args.combine:
        records = read_results(args.combine)
        print(headline(records, args.markdown) if args.markdown else render(records))
        if args.summary is not None:
            budget = json.loads(_read(args.combine[0]))["budget"]
            args.summary.write_bytes(gzip.compress(json.dumps({"budget": budget, "results": compact(records)},
                                                              separators=(",", ":")).encode("utf-8"), mtime=0))
        return 0
    methods = all_methods(args.tunelab)
    chosen = _select(args.methods, list(methods), "method")
    excluded = set(_select(args.exclude, list(methods), "method")) if args.exclude else set()
    selected = {m: methods[m] for m in chosen if m not in excluded}
    names = _tables(args)
    optuna.logging.set_verbosity(optuna.logging.WARNING)

    started = datetime.now(timezone.utc)
    args.results_dir.mkdir(parents=True, exist_ok=True)
    seeds_text = "-".join(str(s) for s in args.seed_list)
    out = args.results_dir / f"suite-{args.budget}-{args.half}-seeds-{seeds_text}-{started:%Y%m%dT%H%M%SZ}.json"
    payload: dict[str, Any] = {
        "budget": args.budget, "budget_seconds": args.budget_seconds, "seeds": args.seed_list,
        "half": args.half, "threads": args.threads, "datasets": names, "methods": list(selected),
        "metrics": METRICS, "started": started.isoformat(), "environment": _environment(),
        "complete": False, "results": [],
    }
    for seed in args.seed_list:
        for name in names:
            payload["results"] += run_suite([name], selected, args.budget_seconds, args.budget, seed,
                                            threads=args.threads, want_curve=args.plot is not None,
                                            searches=SEARCHES)
            # After every table, so that a stopped run keeps what it finished.
            out.write_text(json.dumps(payload, indent=1, default=str))
    finished = datetime.now(timezone.utc)
    payload.update(complete=True, finished=finished.isoformat(),
                   wall_seconds=round((finished - started).total_seconds(), 1))
    out.write_text(json.dumps(payload, indent=1, default=str))
    records = payload["results"]
    print(render(records))
    print(f"\nRaw results: {out}  (wall time {payload['wall_seconds']:.0f} s)")
    if args.plot is not None:
        from benchmarks._plot import anytime_plot

        first = [r for r in records if r["seed"] == args.seed_list[0] and r["metric"] == METRICS[r["task"]][0]]
        try:
            print(f"Anytime plot: {anytime_plot(first, args.plot, args.budget_seconds)}")
        except ImportError:
            print("Anytime plot skipped: matplotlib is not installed", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
