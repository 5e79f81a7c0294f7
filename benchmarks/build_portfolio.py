"""Build the shipped portfolio: a few configurations that do well together across the open corpus.

Question: which K configurations, tried first on a table never seen, leave the least regret? The
build answers it offline, on the 63 tables of ``corpus.json`` (none of them in the suite), in three
seeded steps (greedy portfolio construction on normalised regret: Wistuba, Schilling & Schmidt-Thieme
2015, ICDM; Pfisterer, van Rijn, Probst, Müller & Bischl 2021, GECCO):

1. **Candidates** (:func:`sample_candidates`): each family's defaults as ``tunelab.models`` builds
   them, then a seeded sample over ``hist_gb``, ``random_forest``, ``extra_trees``, ``linear``,
   ``svm`` and ``knn`` (not the MLP: too costly offline) in ranges like the space builder's. Values
   that should move with the data are kept relative to it (``tunelab.space._portfolio.RELATIVE``):
   leaf sizes per training rows, neighbours per square root of the rows, the RBF kernel's gamma
   over the columns, the logistic inverse penalty ``C`` per rows per column; ridge's ``alpha`` per
   rows, as the builder scales it (its penalty is not divided by the rows). Each candidate serves
   the three tasks; ``linear`` draws one penalty strength for both ``C`` and ``alpha``.
2. **Score matrix** (:func:`evaluate_table`): every candidate on every corpus table, the table
   subsampled to ``--max-rows`` rows (seeded, stratified on a class target), 3-fold cross-validation
   under the task's default metric (ROC AUC, log loss, RMSE) with tunelab's own objective, one
   thread per fit, through a CSV as a user's file goes; the fit seconds are kept beside each score.
   The matrix is stored gzipped in ``records/portfolio/matrix.json.gz`` (scores to 4 significant
   digits, finer than the folds' noise, and seconds to 2: about 40 KB for the full build, under the
   50 KB a record folder may hold), rewritten after every table, so a stopped build resumes there.
3. **Greedy** (:func:`greedy`): per table, each candidate's score is normalised to [0, 1] between
   the worst and the best candidate there (a failed fit counts as the worst); a portfolio's regret
   on a table is 1 minus the normalised score of its best member. Starting empty, the candidate
   that most lowers the mean regret over the tables is added, until K members (ties: the cheaper).

Across tasks, not per task: every table counts once in one mean regret, so a member is chosen on
the evidence of all 63 tables rather than of the 12 multiclass ones alone, and a configuration good
on every task is preferred to one good on one; the runtime then offers each task the members that
serve it. K = 16 (``--k``): ``run`` tries at most a third of the trials its budget is expected to
finish, about 16 at a few minutes; and with 63 tables a 16th member is already chosen for what it
adds on about four of them, so more members would mostly fit the corpus's noise. The build prints
the mean regret by K in sample and leaving each table out, to check that choice.

The shipped file (``tunelab/space/portfolio.json``) records its inputs in ``built``: the corpus
file's sha256, the seeds, the tunelab commit the matrix was scored at, the tables used and left out,
the candidate count, and each member's cost (its mean fit seconds over those tables relative to the
cheapest member's). ``--exclude`` reruns only the greedy step from the stored matrix without some
tables (their scores and their fit seconds both left out), for anyone holding those tables back.

Usage (from the repository root)::

    python benchmarks/build_portfolio.py --estimate          # print the expected run time, run nothing
    python benchmarks/build_portfolio.py --jobs 2            # the full build (about 1 h on 2 cores)
    python benchmarks/build_portfolio.py --datasets mroz,biomass,vote92 --candidates 12 --max-rows 300
    python benchmarks/build_portfolio.py --exclude mroz,wells --out held-back.json   # greedy step only
    python benchmarks/build_portfolio.py --greedy-only --k 12                       # greedy step only

A run limited by ``--datasets``, ``--candidates`` or ``--max-rows`` writes its matrix and portfolio
under ``benchmarks/results/portfolio-quick/`` (not committed) unless ``--matrix``/``--out`` say
otherwise; only a full build writes the stored matrix and the shipped file by default.
"""

from __future__ import annotations

import argparse
import gzip
import hashlib
import json
import math
import os
import subprocess
import sys
import tempfile
import time
import warnings
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")  # one thread per fit, before numpy loads its pools

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from sklearn.model_selection import train_test_split  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from benchmarks import datasets  # noqa: E402
from tunelab.space import (  # noqa: E402
    SHIPPED_PORTFOLIO as SHIPPED,
    Member,
    portfolio_document,
)

FAMILIES = ("hist_gb", "random_forest", "extra_trees", "linear", "svm", "knn")
# The share of the sampled candidates each family is drawn with: boosting most, as it wins most often.
SHARES = {"hist_gb": 0.30, "random_forest": 0.15, "extra_trees": 0.15, "linear": 0.12, "svm": 0.14, "knn": 0.14}
TASKS = ("binary", "multiclass", "regression")
DEFAULT_SEED = 0
DEFAULT_CANDIDATES = 144
DEFAULT_MAX_ROWS = 2000
DEFAULT_K = 16
N_FOLDS = 3
MATRIX_FORMAT = "tunelab-portfolio-matrix"
RECORDS = ROOT / "benchmarks" / "records" / "portfolio"
MATRIX_FILE = RECORDS / "matrix.json.gz"
QUICK_DIR = ROOT / "benchmarks" / "results" / "portfolio-quick"
STORED_LIMIT = 50_000  # bytes a record folder may hold (benchmarks/README.md)
FULL_BUILD_HOURS = 3.0  # what the full build must fit in on two cores

# Each family's defaults, as tunelab.models builds the family when a config names no value (the
# SVM's gamma as 1 / columns, which is scikit-learn's "scale" on standardised columns).
ANCHORS: dict[str, dict[str, Any]] = {
    "hist_gb": {"learning_rate": 0.1, "max_iter": 200, "max_leaf_nodes": 31, "min_samples_leaf": 20,
                "l2_regularization": 0.0, "max_features": 1.0},
    "random_forest": {"n_estimators": 200, "max_features": 0.5, "min_samples_leaf": 1},
    "extra_trees": {"n_estimators": 200, "max_features": 0.5, "min_samples_leaf": 1},
    "linear": {"C": 1.0, "alpha": 1.0, "num_transform": "standard"},
    "svm": {"C": 1.0, "gamma": {"per": "columns", "value": 1.0}, "num_transform": "standard"},
    "knn": {"n_neighbors": 15, "weights": "distance", "num_transform": "standard"},
}


# --------------------------------------------------------------------------- candidates


def _sig(value: float, digits: int = 3) -> float:
    return float(f"{value:.{digits}g}")


def _log(rng: np.random.Generator, low: float, high: float) -> float:
    return float(np.exp(rng.uniform(np.log(low), np.log(high))))


def _relative(per: str, value: float) -> dict[str, Any]:
    return {"per": per, "value": _sig(value)}


def _draw(family: str, rng: np.random.Generator) -> dict[str, Any]:
    """One configuration of ``family``, in ranges like the space builder's (relative where it scales)."""
    if family == "hist_gb":
        return {"learning_rate": _sig(_log(rng, 0.01, 0.3)), "max_iter": round(_log(rng, 50, 500)),
                "max_leaf_nodes": round(_log(rng, 4, 128)),
                "min_samples_leaf": _relative("rows", _log(rng, 5e-4, 5e-2)),  # builder: rows/2000 .. rows/20
                "l2_regularization": _sig(_log(rng, 1e-4, 10.0)), "max_features": _sig(rng.uniform(0.2, 1.0))}
    if family in ("random_forest", "extra_trees"):
        return {"n_estimators": round(_log(rng, 50, 500)), "max_features": _sig(_log(rng, 0.05, 1.0)),
                "min_samples_leaf": _relative("rows", _log(rng, 2e-4, 2.5e-2))}  # builder: 1 .. rows/40
    transform = str(rng.choice(["standard", "quantile"]))
    if family == "linear":
        weak = rng.uniform()  # one strength for both tasks: 0 the strongest penalty, 1 the weakest
        return {"C": _relative("rows_per_column", 10 ** (-4 + 5 * weak)),
                "alpha": _relative("rows", 10 ** (-5 * weak)), "num_transform": transform}
    if family == "svm":
        return {"C": _sig(_log(rng, 0.01, 100.0)), "gamma": _relative("columns", _log(rng, 0.1, 10.0)),
                "num_transform": transform}
    if family == "knn":
        return {"n_neighbors": _relative("sqrt_rows", _log(rng, 0.05, 2.0)),
                "weights": str(rng.choice(["distance", "uniform"])), "num_transform": transform}
    raise ValueError(f"no candidate ranges for family {family!r}")


def sample_candidates(count: int = DEFAULT_CANDIDATES, seed: int = DEFAULT_SEED) -> list[Member]:
    """The first ``count`` candidates: the six families' defaults, then seeded draws.

    Candidate ``i`` depends only on ``(seed, i)``, so a shorter list is the start of a longer one
    (a quick run scores the first candidates of the full build).
    """
    out: list[Member] = []
    for index in range(count):
        if index < len(FAMILIES):
            family, values = FAMILIES[index], ANCHORS[FAMILIES[index]]
        else:
            rng = np.random.default_rng([seed, index])
            family = str(rng.choice(FAMILIES, p=[SHARES[f] for f in FAMILIES]))
            values = _draw(family, rng)
        out.append(Member(f"c{index:03d}_{family}", family, TASKS, dict(values)))
    return out


def _member_json(member: Member) -> dict[str, Any]:
    return {"name": member.name, "family": member.family, "tasks": list(member.tasks), "values": dict(member.values)}


def _member_from(entry: Mapping[str, Any]) -> Member:
    return Member(str(entry["name"]), str(entry["family"]), tuple(entry["tasks"]), dict(entry["values"]))


# --------------------------------------------------------------------------- the score matrix


@dataclass(frozen=True)
class Table:
    """One table to score the candidates on, target included, already cut to the rows used."""

    name: str
    task: str
    target: str
    frame: pd.DataFrame


def subsample(frame: pd.DataFrame, target: str, task: str, max_rows: int, seed: int) -> pd.DataFrame:
    """At most ``max_rows`` rows, drawn with ``seed`` (stratified on a class target where every class has two)."""
    if len(frame) <= max_rows:
        return frame.reset_index(drop=True)
    stratify = None
    if task != "regression" and frame[target].value_counts().min() >= 2:
        stratify = frame[target]
    try:
        part, _ = train_test_split(frame, train_size=max_rows, random_state=seed, stratify=stratify)
    except ValueError:  # a class too rare for the sample to hold it
        part, _ = train_test_split(frame, train_size=max_rows, random_state=seed)
    return part.reset_index(drop=True)


def corpus_table(name: str, max_rows: int, seed: int = DEFAULT_SEED) -> Table:
    """A corpus table as ``datasets.load`` gives it, subsampled to ``max_rows``."""
    spec = datasets.corpus_get(name)
    frame = subsample(datasets.load(spec), spec.target, spec.task, max_rows, seed)
    return Table(name, spec.task, spec.target, frame)


def _dataset(table: Table) -> Any:
    from tunelab.data import load_dataset

    with tempfile.TemporaryDirectory(prefix="portfolio-") as tmp:
        path = Path(tmp) / f"{table.name}.csv"
        table.frame.to_csv(path, index=False)
        return load_dataset(path, table.target, table.task)


def _finite(value: Any) -> float | None:
    return float(value) if value is not None and math.isfinite(float(value)) else None


def evaluate_table(table: Table, candidates: Sequence[Member], *, seed: int = DEFAULT_SEED,
                   n_folds: int = N_FOLDS, say: Callable[[str], None] | None = None) -> dict[str, Any]:
    """Every candidate's cross-validated score on one table, and its fit seconds (``None`` where it failed)."""
    from tunelab.engine import CrossValidationObjective
    from tunelab.evaluation import resolve_metric
    from tunelab.ops import data_shape

    dataset = _dataset(table)
    metric = resolve_metric(None, dataset.task)
    objective = CrossValidationObjective(dataset, metric, seed=seed, n_threads=1, n_folds=n_folds)
    n_rows, n_columns = data_shape(dataset)
    scores: list[float | None] = []
    seconds: list[float | None] = []
    errors: dict[str, str] = {}
    started = time.perf_counter()
    for member in candidates:
        if dataset.task not in member.tasks:
            scores.append(None)
            seconds.append(None)
            continue
        t0 = time.perf_counter()
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                value = _finite(objective(member.config(n_rows, n_columns), lambda step, value: None).value)
        except Exception as exc:  # a candidate that cannot fit this table is a result: the worst score here
            value = None
            errors[member.name] = f"{type(exc).__name__}: {exc}".splitlines()[0][:200]
        scores.append(None if value is None else _sig(value, 4))
        seconds.append(_sig(time.perf_counter() - t0, 2))
    if say:
        say(f"[{table.name}] {table.task}, {n_rows} rows x {n_columns} columns: {len(candidates)} candidates "
            f"in {time.perf_counter() - started:.0f} s" + (f", {len(errors)} failed" if errors else ""))
    return {"name": table.name, "task": dataset.task, "metric": metric.name, "direction": metric.direction,
            "rows": n_rows, "columns": n_columns, "scores": scores, "seconds": seconds, "errors": errors}


def file_sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def tunelab_commit() -> str:
    """``git rev-parse HEAD`` of this checkout, with ``-dirty`` when tracked files have changed."""
    try:
        head = subprocess.run(["git", "rev-parse", "HEAD"], cwd=ROOT, capture_output=True, text=True,
                              check=True).stdout.strip()
        dirty = subprocess.run(["git", "status", "--porcelain", "--untracked-files=no"], cwd=ROOT,
                               capture_output=True, text=True, check=True).stdout.strip()
    except (OSError, subprocess.CalledProcessError):
        return "unknown"
    return head + ("-dirty" if dirty else "")


def new_matrix(candidates: Sequence[Member], *, seed: int, max_rows: int, n_folds: int = N_FOLDS,
               corpus_sha256: str | None = None, rows: Sequence[Mapping[str, Any]] = ()) -> dict[str, Any]:
    """The score matrix's document: how it was made, the candidates, and one row per table."""
    return {"format": MATRIX_FORMAT, "version": 1, "corpus_sha256": corpus_sha256, "tunelab_commit": tunelab_commit(),
            "seeds": {"candidates": seed, "subsample": seed, "folds": seed}, "n_folds": n_folds,
            "max_rows": max_rows, "threads_per_fit": 1,
            "candidates": [_member_json(m) for m in candidates], "datasets": [dict(r) for r in rows]}


def save_matrix(matrix: Mapping[str, Any], path: Path) -> int:
    """Write the matrix as gzipped compact JSON (byte-identical for identical content); returns its size."""
    path.parent.mkdir(parents=True, exist_ok=True)
    text = json.dumps(matrix, separators=(",", ":"), sort_keys=True).encode("utf-8")
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "wb") as raw, gzip.GzipFile(filename="", mode="wb", fileobj=raw, mtime=0, compresslevel=9) as gz:
        gz.write(text)
    tmp.replace(path)
    return path.stat().st_size


def load_matrix(path: Path) -> dict[str, Any]:
    """A matrix written by :func:`save_matrix` (gzipped, or plain JSON if the name does not end in .gz)."""
    raw = path.read_bytes()
    data = json.loads(gzip.decompress(raw) if path.suffix == ".gz" else raw)
    if data.get("format") != MATRIX_FORMAT:
        raise ValueError(f"{path} is not a portfolio score matrix")
    return data


# --------------------------------------------------------------------------- the greedy step


def normalised(rows: Sequence[Mapping[str, Any]], candidates: Sequence[Member]) -> np.ndarray:
    """Tables x candidates in [0, 1]: 0 the table's worst candidate, 1 its best; NaN rows have no score at all.

    A candidate that failed on a table, or does not serve its task, gets 0 there (never better
    than the worst that ran); a table where every candidate that ran scored the same gets 1 for each.
    """
    out = np.zeros((len(rows), len(candidates)))
    for i, row in enumerate(rows):
        values = np.array([np.nan if v is None else float(v) for v in row["scores"]], dtype=float)
        if row["direction"] == "minimize":
            values = -values
        serves = np.array([row["task"] in m.tasks for m in candidates])
        ran = np.isfinite(values) & serves
        if not ran.any():
            out[i] = np.nan
            continue
        low, high = values[ran].min(), values[ran].max()
        out[i, ran] = (values[ran] - low) / (high - low) if high > low else 1.0
    return out


def greedy(norm: np.ndarray, k: int, cost: np.ndarray | None = None) -> tuple[list[int], list[float]]:
    """Candidate indices in the order greedy construction adds them, and the mean regret after each.

    Each step adds the candidate that most lowers the mean over tables of ``1 - max`` normalised
    score of the chosen ones; a tie goes to the lower ``cost``, then the earlier candidate. It stops
    at ``k``, or earlier when no candidate lowers the regret any more.
    """
    n_tables, n_candidates = norm.shape
    cost = np.zeros(n_candidates) if cost is None else np.where(np.isfinite(cost), cost, np.inf)
    best = np.zeros(n_tables)
    picked: list[int] = []
    curve: list[float] = []
    while len(picked) < min(k, n_candidates) and n_tables:
        mean_best = np.maximum(best[:, None], norm).mean(axis=0)
        mean_best[picked] = -np.inf
        order = np.lexsort((np.arange(n_candidates), cost, -mean_best))
        choice = int(order[0])
        if picked and mean_best[choice] <= best.mean() + 1e-12:
            break  # nothing left lowers the regret
        picked.append(choice)
        best = np.maximum(best, norm[:, choice])
        curve.append(float(1.0 - best.mean()))
    return picked, curve


@dataclass
class Choice:
    """What the greedy step chose from a matrix, and on which tables."""

    members: list[Member]
    curve: list[float]
    used: list[str]
    excluded: list[str]
    unscored: list[str]
    regret_by_task: dict[str, float] = field(default_factory=dict)


def _mean_seconds(rows: Sequence[Mapping[str, Any]], n_candidates: int) -> np.ndarray:
    seconds = np.array([[np.nan if s is None else float(s) for s in r["seconds"]] for r in rows], dtype=float)
    if not len(rows):
        return np.full(n_candidates, np.nan)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a candidate that never ran: NaN
        return np.nanmean(seconds, axis=0)


def choose(matrix: Mapping[str, Any], k: int = DEFAULT_K, exclude: Sequence[str] = ()) -> Choice:
    """Greedy construction from a stored matrix, the ``exclude`` tables left out entirely.

    A left-out table takes no part in anything: not in the regret, not in the tie-breaking costs,
    not in the members' costs. So the result is the one a matrix that never held it would give.
    """
    candidates = [_member_from(c) for c in matrix["candidates"]]
    names = [r["name"] for r in matrix["datasets"]]
    unknown = sorted(set(exclude) - set(names))
    if unknown:
        raise KeyError(f"not in the matrix: {', '.join(unknown)}; it holds {', '.join(names)}")
    rows = [r for r in matrix["datasets"] if r["name"] not in set(exclude)]
    norm = normalised(rows, candidates)
    scored = ~np.isnan(norm).any(axis=1)
    rows = [r for r, keep in zip(rows, scored, strict=True) if keep]
    norm = norm[scored]
    seconds = _mean_seconds(rows, len(candidates))
    picked, curve = greedy(norm, k, seconds)
    cheapest = min((seconds[i] for i in picked if np.isfinite(seconds[i]) and seconds[i] > 0), default=1.0)
    members = [Member(candidates[i].name, candidates[i].family, candidates[i].tasks, candidates[i].values,
                      _sig(float(seconds[i]) / cheapest) if np.isfinite(seconds[i]) else 1.0) for i in picked]
    by_task: dict[str, float] = {}
    best = norm[:, picked].max(axis=1) if picked else np.zeros(len(rows))
    for task in TASKS:
        mask = np.array([r["task"] == task for r in rows], dtype=bool)
        if mask.any():
            by_task[task] = round(float(1.0 - best[mask].mean()), 4)
    unscored = [n for n in names if n not in set(exclude) and n not in {r["name"] for r in rows}]
    return Choice(members, curve, [r["name"] for r in rows], sorted(set(exclude)), unscored, by_task)


def regret_by_size(matrix: Mapping[str, Any], sizes: Sequence[int]) -> dict[int, tuple[float, float]]:
    """Mean regret at each portfolio size: in sample, and on each table when the portfolio never saw it."""
    candidates = [_member_from(c) for c in matrix["candidates"]]
    rows = matrix["datasets"]
    norm = normalised(rows, candidates)
    keep = ~np.isnan(norm).any(axis=1)
    norm, rows = norm[keep], [r for r, k in zip(rows, keep, strict=True) if k]
    seconds = np.array([[np.nan if s is None else float(s) for s in r["seconds"]] for r in rows], dtype=float)
    top = max(sizes)
    picked_all, _ = greedy(norm, top, _mean_seconds(rows, len(candidates)))
    held = np.full((len(rows), top), np.nan)
    for i in range(len(rows)):
        others = np.delete(np.arange(len(rows)), i)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            cost = np.nanmean(seconds[others], axis=0)
        picked, _ = greedy(norm[others], top, cost)
        for size in range(1, top + 1):
            chosen = picked[:size]
            held[i, size - 1] = 1.0 - norm[i, chosen].max() if chosen else 1.0
    out = {}
    for size in sizes:
        inside = 1.0 - norm[:, picked_all[:size]].max(axis=1).mean() if picked_all else 1.0
        out[size] = (float(inside), float(np.nanmean(held[:, size - 1])))
    return out


def built_record(matrix: Mapping[str, Any], choice: Choice, k: int) -> dict[str, Any]:
    """The ``built`` section of a portfolio file: every input the file depends on."""
    return {
        "by": "benchmarks/build_portfolio.py",
        "method": "greedy construction on normalised regret, across tasks, each table counted once",
        "datasets": len(choice.used),
        "dataset_names": choice.used,
        "excluded": choice.excluded,
        "unscored": choice.unscored,
        "corpus": "benchmarks/corpus.json",
        "corpus_sha256": matrix.get("corpus_sha256"),
        "seeds": matrix.get("seeds"),
        "tunelab_commit": matrix.get("tunelab_commit"),
        "candidates": len(matrix["candidates"]),
        "k": k,
        "n_folds": matrix.get("n_folds"),
        "max_rows": matrix.get("max_rows"),
        "metric": "each task's default: roc_auc (binary), log_loss (multiclass), rmse (regression)",
        "mean_regret": round(choice.curve[-1], 4) if choice.curve else None,
        "regret_by_task": choice.regret_by_task,
        "regret_curve": [round(r, 4) for r in choice.curve],
        "cost": "mean fit seconds of one 3-fold cross-validation over the tables used, relative to the cheapest "
                "member",
    }


def write_portfolio(matrix: Mapping[str, Any], out: Path, k: int = DEFAULT_K, exclude: Sequence[str] = ()) -> Choice:
    """Choose from ``matrix`` without ``exclude`` and write the portfolio file ``out`` (``portfolio_document``)."""
    choice = choose(matrix, k, exclude)
    document = portfolio_document(choice.members, built_record(matrix, choice, k))
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(document, indent=2) + "\n", encoding="utf-8")
    return choice


# --------------------------------------------------------------------------- the run-time estimate

# A rough model of one fold's seconds with one thread, fitted to timings of 35 candidates on three
# corpus tables of 2,000 rows (cells: binary, 56 columns; exam: regression, 8; car_choice: 6 classes,
# 69) on the shared 2-core machine under a load of 3 to 4 (so on the slow side; on car_choice it
# predicted 35 s for 21 candidates that took 35 s). Rows are thousands of training rows of a fold;
# work is hundreds of boosting rounds or trees; a forest pays for each tree whatever the rows (0.08 s
# a hundred), then grows with the features each split tries; the SVM's kernel grows with rows squared
# (its probability calibration fits five more models).
FOLD_OVERHEAD_S = 0.02


def predicted_seconds(member: Member, rows: int, columns: int, classes: int = 2, n_folds: int = N_FOLDS) -> float:
    """The expected seconds of one cross-validation of ``member`` on ``rows`` x ``columns`` (a rough model).

    Boosting, the SVM and the linear model fit a part per class (or pair of classes) when there are
    more than two; with early stopping and smaller parts, that costs about sqrt(classes / 2) times more.
    """
    fit_rows = rows * (n_folds - 1) / n_folds / 1000
    width = max(columns, 1) / 10
    values, family = member.values, member.family
    if family == "hist_gb":
        per_fold = 0.03 + 0.035 * float(values.get("max_iter", 200)) / 100 * fit_rows * math.sqrt(width)
    elif family in ("random_forest", "extra_trees"):
        share = float(values.get("max_features", 0.5))
        tried = max(1.0, share * max(columns, 1)) / 10
        base, slope = (0.05, 0.35) if family == "random_forest" else (0.03, 0.08)
        per_fold = float(values.get("n_estimators", 200)) / 100 * (0.08 + fit_rows * (base + slope * tried))
    elif family == "svm":
        per_fold = 0.1 * fit_rows ** 2 * math.sqrt(width)
    else:  # linear, knn
        per_fold = 0.02 * fit_rows * math.sqrt(width)
    if classes > 2 and family in ("hist_gb", "svm", "linear"):
        per_fold *= math.sqrt(classes / 2)  # a model per class (or pair), each stopping sooner
    return n_folds * (FOLD_OVERHEAD_S + per_fold)


def shape(table: Table) -> tuple[int, int, int]:
    """What the run-time model needs of a table: rows, feature columns, classes (1 for regression)."""
    classes = int(table.frame[table.target].nunique()) if table.task != "regression" else 1
    return len(table.frame), table.frame.shape[1] - 1, classes


def estimate_seconds(shapes: Mapping[str, tuple[int, int, int]], candidates: Sequence[Member]) -> float:
    """Expected seconds of scoring every candidate on tables of these (rows, columns, classes), one process."""
    return sum(predicted_seconds(m, *s) for s in shapes.values() for m in candidates)


def _hours(seconds: float) -> str:
    return f"{seconds / 3600:.1f} h" if seconds >= 3600 else f"{seconds / 60:.0f} min" if seconds >= 60 \
        else f"{seconds:.0f} s"


# --------------------------------------------------------------------------- command line


def _names(text: str | None) -> list[str]:
    return [n.strip() for n in (text or "").split(",") if n.strip()]


def _score_tables(tables: list[Table], candidates: list[Member], matrix: dict[str, Any], path: Path, seed: int,
                  jobs: int, shapes: Mapping[str, tuple[int, int, int]]) -> None:
    """Score every table not in ``matrix`` yet, rewriting the matrix file after each one."""
    order = {t.name: i for i, t in enumerate(tables)}
    done = {r["name"] for r in matrix["datasets"]}
    pending = [t for t in tables if t.name not in done]
    if done:
        print(f"reusing {len(done)} table(s) already in {path}")
    expected_left = sum(estimate_seconds({t.name: shapes[t.name]}, candidates) for t in pending)
    expected_all = expected_left
    spent = 0.0
    started = time.perf_counter()

    def keep(row: dict[str, Any]) -> None:
        nonlocal spent, expected_left
        matrix["datasets"].append(row)
        matrix["datasets"].sort(key=lambda r: order.get(r["name"], len(order)))
        size = save_matrix(matrix, path)
        expected = estimate_seconds({row["name"]: shapes[row["name"]]}, candidates)
        spent += expected
        expected_left -= expected
        ratio = (time.perf_counter() - started) * jobs / max(spent, 1e-9)
        print(f"    {len(matrix['datasets'])}/{len(tables)} tables, matrix {size / 1000:.0f} KB; about "
              f"{_hours(max(0.0, expected_left) * ratio / jobs)} left", flush=True)

    if jobs <= 1:
        for table in pending:
            keep(evaluate_table(table, candidates, seed=seed, say=print))
    else:
        import multiprocessing as mp

        with ProcessPoolExecutor(max_workers=jobs, mp_context=mp.get_context("fork")) as pool:
            futures = [pool.submit(evaluate_table, table, candidates, seed=seed) for table in pending]
            for future in as_completed(futures):
                row = future.result()
                print(f"[{row['name']}] {row['task']}, {row['rows']} rows x {row['columns']} columns"
                      + (f", {len(row['errors'])} failed" if row["errors"] else ""), flush=True)
                keep(row)
    print(f"scored {len(pending)} table(s) in {_hours(time.perf_counter() - started)} "
          f"(expected {_hours(expected_all / jobs)})")


def _print_choice(choice: Choice, out: Path) -> None:
    print(f"\nportfolio of {len(choice.members)} from {len(choice.used)} tables"
          + (f" (left out: {', '.join(choice.excluded)})" if choice.excluded else "")
          + (f" (no score at all: {', '.join(choice.unscored)})" if choice.unscored else "") + f" -> {out}")
    print(f"{'#':>3s} {'member':24s} {'cost':>6s} {'mean regret':>11s}")
    for i, (member, regret) in enumerate(zip(choice.members, choice.curve, strict=True), start=1):
        print(f"{i:3d} {member.name:24s} {member.cost:6.2f} {regret:11.4f}")
    print("regret by task: " + ", ".join(f"{t} {r:.4f}" for t, r in choice.regret_by_task.items()))


def _print_sizes(matrix: Mapping[str, Any], k: int) -> None:
    rows = [r for r in matrix["datasets"]]
    if len(rows) < 3:
        return
    sizes = sorted({s for s in (1, 2, 4, 8, 12, 16, 24, 32, k) if s <= len(matrix["candidates"])})
    table = regret_by_size(matrix, sizes)
    print("\nmean regret by portfolio size K: in sample | each table left out of its own portfolio")
    print("  ".join(f"K={s}: {a:.3f} | {b:.3f}" for s, (a, b) in table.items()))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", default="all", help="comma-separated corpus tables, or 'all' (default)")
    parser.add_argument("--candidates", type=int, default=None,
                        help=f"candidates to score, the first of the seeded list (default {DEFAULT_CANDIDATES})")
    parser.add_argument("--max-rows", type=int, default=None,
                        help=f"rows a table is subsampled to (default {DEFAULT_MAX_ROWS})")
    parser.add_argument("--k", type=int, default=DEFAULT_K, help=f"portfolio members (default {DEFAULT_K})")
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="seed of the candidates, subsamples and folds")
    parser.add_argument("--jobs", type=int, default=1, help="tables scored side by side, one thread each (default 1)")
    parser.add_argument("--matrix", type=Path, default=None, help=f"the score matrix (default {MATRIX_FILE})")
    parser.add_argument("--out", type=Path, default=None, help=f"the portfolio file to write (default {SHIPPED})")
    parser.add_argument("--exclude", default="", help="tables to leave out: reruns only the greedy step, from the "
                                                      "stored matrix")
    parser.add_argument("--greedy-only", action="store_true", help="rerun only the greedy step, from the stored matrix")
    parser.add_argument("--fresh", action="store_true", help="score every table again, even those in the matrix")
    parser.add_argument("--estimate", action="store_true", help="print the expected run time and stop")
    args = parser.parse_args(argv)

    limited = args.datasets != "all" or args.candidates is not None or args.max_rows is not None
    matrix_path = args.matrix or (QUICK_DIR / "matrix.json.gz" if limited else MATRIX_FILE)
    exclude = _names(args.exclude)
    if exclude or args.greedy_only:
        if not matrix_path.exists():
            parser.error(f"no score matrix at {matrix_path}: score the tables first (without --exclude/--greedy-only)")
        matrix = load_matrix(matrix_path)
        out = args.out or (ROOT / "benchmarks" / "results" / f"portfolio-without-{'-'.join(exclude)}.json"
                           if exclude else QUICK_DIR / "portfolio.json" if limited else SHIPPED)
        try:
            choice = write_portfolio(matrix, out, args.k, exclude)
        except KeyError as exc:
            parser.error(str(exc.args[0]))
        _print_choice(choice, out)
        return 0

    names = datasets.corpus_names() if args.datasets == "all" else _names(args.datasets)
    for name in names:
        datasets.corpus_get(name)  # a bad name fails before anything runs
    count = args.candidates or DEFAULT_CANDIDATES
    max_rows = args.max_rows or DEFAULT_MAX_ROWS
    candidates = sample_candidates(count, args.seed)
    warnings.simplefilter("ignore")
    tables = [corpus_table(name, max_rows, args.seed) for name in names]
    shapes = {t.name: shape(t) for t in tables}
    one_core = estimate_seconds(shapes, candidates)
    jobs = max(1, args.jobs)
    print(f"{len(tables)} tables x {count} candidates x {N_FOLDS} folds, at most {max_rows} rows: expected "
          f"{_hours(one_core / jobs)} with {jobs} process(es), one thread each ({_hours(one_core)} on one core)")
    full = one_core if not limited else estimate_seconds(
        {n: shape(corpus_table(n, DEFAULT_MAX_ROWS, args.seed)) for n in datasets.corpus_names()},
        sample_candidates(DEFAULT_CANDIDATES, args.seed))
    print(f"the full build ({len(datasets.corpus_names())} tables x {DEFAULT_CANDIDATES} candidates, at most "
          f"{DEFAULT_MAX_ROWS} rows): expected {_hours(full / 2)} with --jobs 2 on two cores (it must fit in "
          f"{FULL_BUILD_HOURS:g} h)")
    if args.estimate:
        return 0

    matrix = None
    if matrix_path.exists() and not args.fresh:
        stored = load_matrix(matrix_path)
        same = (stored["candidates"] == [_member_json(m) for m in candidates] and stored["max_rows"] == max_rows
                and stored["seeds"]["candidates"] == args.seed and stored["n_folds"] == N_FOLDS)
        if same:
            stored["datasets"] = [r for r in stored["datasets"] if r["name"] in set(names)]
            matrix = stored
            if stored["datasets"] and stored.get("tunelab_commit") != tunelab_commit():
                print(f"note: the stored tables were scored at {stored.get('tunelab_commit')}, which the "
                      f"matrix keeps; this checkout is {tunelab_commit()} (--fresh scores every table again)")
    if matrix is None:
        corpus_sha = file_sha256(datasets.CORPUS_FILE)
        matrix = new_matrix(candidates, seed=args.seed, max_rows=max_rows, corpus_sha256=corpus_sha)
    _score_tables(tables, candidates, matrix, matrix_path, args.seed, jobs, shapes)
    size = save_matrix(matrix, matrix_path)
    print(f"matrix: {matrix_path} ({size / 1000:.1f} KB" + (", over the 50 KB a record folder may hold)"
                                                            if size > STORED_LIMIT else ")"))
    out = args.out or (QUICK_DIR / "portfolio.json" if limited else SHIPPED)
    choice = write_portfolio(matrix, out, args.k)
    _print_choice(choice, out)
    _print_sizes(matrix, args.k)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
