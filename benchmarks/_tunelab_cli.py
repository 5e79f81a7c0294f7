"""The tunelab method: the tool driven through its own command line, as a user would.

::

    tunelab run TRAIN.csv --target COL --budget 60s --store STORE.db --study NAME --seed 0 -q [--metric M]
    tunelab export NAME --store STORE.db --out MODEL.zip
    tunelab predict MODEL.zip TEST.csv --out PREDS.csv

``run`` gets the budget, and ``--metric`` when the run searches under a metric a user picked;
``export`` (refit of the best config) and ``predict`` are timed apart, like the refit of the
baseline searches. The predictions file must hold a ``prediction``
column and, for classifiers, one ``proba_<class>`` column per class. The benchmark scores it
itself; nothing tunelab prints is used as a score.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import time
import zipfile
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd

from benchmarks._outcome import Outcome, Problem
from benchmarks._scoring import Predictions

PROBA_PREFIX = "proba_"


class CommandFailed(RuntimeError):
    """A tunelab command exited non-zero, hung, or wrote an unusable file.

    ``log`` keeps every command run so far with its exit code and output tails, so the raw
    results show exactly what the tool did.
    """

    def __init__(self, message: str, log: list[dict[str, object]] | None = None) -> None:
        super().__init__(message)
        self.log = log or []


def default_executable() -> str:
    """``tunelab`` beside the running Python (the project venv), else on PATH."""
    beside = Path(sys.executable).with_name("tunelab")
    if beside.exists():
        return str(beside)
    return shutil.which("tunelab") or "tunelab"


def _run(command: list[str], timeout: float, log: list[dict[str, object]], threads: int) -> float:
    # The same thread cap the in-process methods run under; read by OpenMP, BLAS and torch.
    env = dict(os.environ)
    for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env[name] = str(threads)
    start = time.monotonic()
    try:
        done = subprocess.run(
            command, capture_output=True, text=True, timeout=timeout, env=env
        )
    except subprocess.TimeoutExpired as exc:
        raise CommandFailed(f"timed out after {timeout:.0f} s: {' '.join(command)}") from exc
    except FileNotFoundError as exc:
        raise CommandFailed(f"not found: {command[0]}") from exc
    seconds = time.monotonic() - start
    log.append(
        {
            "command": command,
            "exit_code": done.returncode,
            "seconds": round(seconds, 3),
            "stdout_tail": done.stdout[-2000:],
            "stderr_tail": done.stderr[-2000:],
        }
    )
    if done.returncode != 0:
        raise CommandFailed(
            f"exit code {done.returncode}: {' '.join(command)}\n{done.stderr[-2000:].strip()}"
        )
    return seconds


def chosen_trial(exe: str, study: str, store: Path) -> dict[str, object]:
    """What tunelab chose, as ``status --json`` tells it: the trial export ships with ``--single``,
    its cross-validated score, fold spread, family and configuration.  A diagnostic beside the score
    (the random and TPE arms record theirs); a status that fails leaves it empty."""
    try:
        done = subprocess.run([exe, "status", study, "--store", str(store), "--json"],
                              capture_output=True, text=True, timeout=120)
        best = json.loads(done.stdout).get("best_trial") or {}
    except (subprocess.SubprocessError, OSError, ValueError):
        return {}
    keep = ("number", "value", "fold_std", "family", "params", "origin")
    return {key: best[key] for key in keep if key in best}


def read_predictions(path: Path, task: str) -> Predictions:
    """Read a predictions file written by ``tunelab predict``."""
    frame = pd.read_csv(path)
    if "prediction" not in frame.columns:
        raise CommandFailed(f"{path.name} has no 'prediction' column: {list(frame.columns)}")
    if task == "regression":
        return Predictions(values=frame["prediction"].to_numpy(dtype=float))
    proba_columns = [c for c in frame.columns if c.startswith(PROBA_PREFIX)]
    if not proba_columns:
        raise CommandFailed(f"{path.name} has no '{PROBA_PREFIX}<class>' columns")
    proba = frame[proba_columns].rename(columns=lambda c: c[len(PROBA_PREFIX):])
    return Predictions(values=frame["prediction"].astype(str).to_numpy(), proba=proba)


def tunelab_method(executable: str | None = None) -> Callable[[Problem], Outcome]:
    """A method that runs, exports and predicts with the tunelab command line."""

    def run(problem: Problem) -> Outcome:
        exe = executable or default_executable()
        store = problem.workdir / "store.db"
        model = problem.workdir / "model.zip"
        preds = problem.workdir / "preds.csv"
        study = f"bench-{problem.name}"
        # Generous time-outs only guard against a hang; the budget is tunelab's to keep.
        grace = 2 * problem.budget_seconds + 300
        log: list[dict[str, object]] = []
        try:
            metric = ["--metric", problem.metric] if problem.metric else []
            search = _run(
                [exe, "run", str(problem.train_csv), "--target", problem.target,
                 "--budget", problem.budget_text, "--store", str(store), "--study", study,
                 "--seed", str(problem.seed), "-q", "--jobs", "1", *metric],  # one core, as every method
                grace, log, problem.threads,
            )
            chosen = chosen_trial(exe, study, store)
            refit = _run(
                [exe, "export", study, "--store", str(store), "--out", str(model), "--single"],
                grace, log, problem.threads,
            )
            _run([exe, "predict", str(model), str(problem.test_features_csv), "--out",
                  str(preds)], grace, log, problem.threads)
            predictions = read_predictions(preds, problem.task)
        except CommandFailed as exc:
            raise CommandFailed(str(exc), log) from exc
        if len(predictions.values) != len(problem.test_features):
            raise CommandFailed(
                f"{len(predictions.values)} predictions for {len(problem.test_features)} test rows",
                log,
            )
        curve = [(search, predictions)] if problem.want_curve else []
        return Outcome(
            predictions=predictions,
            search_seconds=search,
            refit_seconds=refit,
            curve=curve,
            details={"commands": log, "chosen": chosen, "overshoot_seconds": float(
                np.round(search - problem.budget_seconds, 3))},
        )

    return run


def tunelab_ensemble_method(executable: str | None = None, always: bool = False) -> Callable[[Problem], Outcome]:
    """The same study as the ``tunelab`` arm, shipped by ``export``'s default: the ensemble selection
    picks where it beats the best trial by more than its fold noise, else that trial (``--single``
    is what the ``tunelab`` arm ships).  With ``always``, ``export --ensemble``: the ensemble
    whatever the cross-fitted comparison says, so the ensemble itself is measured, not the default.

    It searches nothing itself: it reads the store the ``tunelab`` arm left beside its own folder
    (that arm runs first), so the two arms differ only in what ``export`` ships.  The export time,
    the prediction time and the store's kept predictions are reported beside the score.
    """

    def run(problem: Problem) -> Outcome:
        exe = executable or default_executable()
        sibling = problem.workdir.parent / f"tunelab-{problem.metric}" if problem.metric else \
            problem.workdir.parent / "tunelab"
        store = sibling / "store.db"
        if not store.exists():
            raise CommandFailed(f"the tunelab arm left no study at {store}")
        study = f"bench-{problem.name}"
        model, preds = problem.workdir / "model.zip", problem.workdir / "preds.csv"
        grace = 2 * problem.budget_seconds + 300
        log: list[dict[str, object]] = []
        try:
            refit = _run([exe, "export", study, "--store", str(store), "--out", str(model),
                          *(["--ensemble"] if always else [])],
                         grace, log, problem.threads)  # by default: the ensemble where it is worth it
            with zipfile.ZipFile(model) as archive:
                shipped = json.loads(archive.read("meta.json")).get("ensemble", {})
            predict = _run([exe, "predict", str(model), str(problem.test_features_csv), "--out", str(preds)],
                           grace, log, problem.threads)
            predictions = read_predictions(preds, problem.task)
        except (CommandFailed, ValueError) as exc:
            raise CommandFailed(str(exc), log) from exc
        return Outcome(predictions=predictions, search_seconds=0.0, refit_seconds=refit, curve=[],
                       details={"commands": log, "predict_seconds": predict, "model_bytes": model.stat().st_size,
                                "members": [{"trial": m["trial"], "weight": m["weight"]}
                                            for m in shipped.get("members", [])],
                                "cross_fitted": {k: shipped.get(k) for k in ("score", "single", "gain", "noise")},
                                "predict_ms_per_1000": shipped.get("predict_ms_per_1000"),
                                "store_bytes": store.stat().st_size})

    return run


__all__ = ["CommandFailed", "default_executable", "read_predictions", "tunelab_ensemble_method", "tunelab_method"]
