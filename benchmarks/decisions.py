"""Do the decisions decide, do they hold, and is the stop-or-continue forecast calibrated?

For every dataset and seed, driven through tunelab's own command line as a user would::

    tunelab run TRAIN.csv --target T --budget 2m30s --jobs 2 --seed S     # the first half
    (copy the store twice)
    frozen:   tunelab freeze STUDY --auto; tunelab resume STUDY --extend 2m30s --jobs 2
    unfrozen:                              tunelab resume STUDY --extend 2m30s --jobs 2
    each arm: tunelab export / predict on the held-out test rows, scored here

and once per dataset a separate 10-minute study (seed 100): a dropped family that holds that
study's best configuration is a *wrong drop*.  The forecast is fitted at cut points of every
unfrozen arm's ledger (60, 90, ..., 240 s, on the complete trials finished by then) for a stretch
of 60 s, and compared with the gain the study really made in that stretch.

Targets (issue "Decisions a user can act on"): something decided on >= 7 of 8 datasets; a family
dropped on >= 4 of 8; wrong drops <= 5 % of all drops; on >= 6 of 8 the frozen arm's pooled test
score not below the unfrozen arm's by more than one standard error of the paired per-seed
difference; the forecast's 80 % interval holding the realised gain in 70-90 % of >= 60 cases.

Run (about 8 minutes per dataset and seed, plus 10 per dataset)::

    .venv/bin/python benchmarks/decisions.py --datasets breast_cancer,titanic --seeds 0,1,2
    .venv/bin/python benchmarks/decisions.py --combine benchmarks/records/decisions/*.json
"""

from __future__ import annotations

import argparse
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import numpy as np

from benchmarks import datasets
from benchmarks._results import write_results
from benchmarks._scoring import PRIMARY_METRIC, orient, score_prediction_file
from benchmarks._summary import standard_error
from benchmarks._tunelab_cli import default_executable

DEFAULT_DATASETS = "breast_cancer,titanic,credit,digits,chile,hpc,wage,diamonds"
HALF = "2m30s"  # each half of a 5-minute study
REFERENCE = "10m"
CUTS = (60.0, 90.0, 120.0, 150.0, 180.0, 210.0, 240.0)
STRETCH = 60.0
EXECUTABLE: list[str] = []  # --tunelab: the build under test, when it is not the venv's


def tunelab(*args: str, check: bool = True) -> subprocess.CompletedProcess[str]:
    env = {**os.environ, "OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}
    command = [*(EXECUTABLE or [default_executable()]), *args]
    done = subprocess.run(command, capture_output=True, text=True, env=env, timeout=3600)
    if check and done.returncode != 0:
        raise RuntimeError(f"tunelab {' '.join(args)} exited {done.returncode}: {done.stderr.strip()[-500:]}")
    return done


def copy_store(source: Path, target: Path) -> None:
    for suffix in ("", "-wal", "-shm"):
        if Path(f"{source}{suffix}").exists():
            shutil.copy(f"{source}{suffix}", f"{target}{suffix}")


def test_score(folder: Path, store: Path, study: str, task: str, target: str, test: Path) -> float:
    model, preds = folder / f"{store.stem}.zip", folder / f"{store.stem}.preds.csv"
    tunelab("export", study, "--store", str(store), "--out", str(model))
    tunelab("predict", str(model), str(test), "--out", str(preds))
    return score_prediction_file(task, target, test, preds)[PRIMARY_METRIC[task]]


def calibration(store: Path, study: str) -> list[dict[str, float]]:
    """The forecast at each cut point of the study's ledger against the gain it really made."""
    from tunelab.insight import default_worth, forecast
    from tunelab.ops import study_evidence
    from tunelab.store import Store

    with Store.open(str(store)) as st:
        record = st.get_study(study)
        evidence = study_evidence(st, record)
    sign = 1.0 if record.direction == "maximize" else -1.0
    done = sorted((evidence.finished_at[t.number], float(t.value)) for t in evidence.trials
                  if t.state == "complete" and t.scored and t.number in evidence.finished_at)
    cases = []
    for cut in CUTS:
        if cut + STRETCH > evidence.spent:
            break
        before = [(t, v) for t, v in done if t <= cut]
        upto = [(t, v) for t, v in done if t <= cut + STRETCH]
        if not before:
            continue
        trials = [t for t in evidence.trials if t.number in evidence.finished_at
                  and evidence.finished_at[t.number] <= cut]
        result = forecast(before, cut, direction=record.direction, horizon=STRETCH,
                          worth=default_worth(trials, record.direction))
        if result is None:
            continue
        best_then = max(sign * v for _, v in before)
        realised = max(sign * v for _, v in upto) - best_then
        cases.append({"cut": cut, "expected": result.expected, "low": result.low, "high": result.high,
                      "realised": realised, "covered": result.low - 1e-12 <= realised <= result.high + 1e-12})
    return cases


def one_seed(name: str, seed: int, folder: Path, half: str = HALF) -> dict[str, Any]:
    spec = datasets.get(name)
    train, test = datasets.write_split(name, folder, seed=seed)
    base = folder / "base.db"
    study = f"{name}-{seed}"
    first = json.loads(tunelab("run", str(train), "--target", spec.target, "--budget", half, "--jobs", "2",
                               "--seed", str(seed), "--store", str(base), "--study", study, "--json").stdout)
    decided = json.loads(tunelab("importance", study, "--store", str(base), "--json").stdout)
    frozen, unfrozen = folder / "frozen.db", folder / "unfrozen.db"
    copy_store(base, frozen)
    copy_store(base, unfrozen)
    froze = tunelab("freeze", study, "--auto", "--store", str(frozen), "--json", check=False)
    applied = json.loads(froze.stdout) if froze.returncode == 0 else {"frozen": {}, "dropped": {}}
    for store in (frozen, unfrozen):
        tunelab("resume", study, "--extend", half, "--jobs", "2", "--store", str(store), "-q")
    scores = {arm: test_score(folder, store, study, spec.task, spec.target, test)
              for arm, store in (("frozen", frozen), ("unfrozen", unfrozen))}
    knobs = [r for r in decided.get("rows", []) if r["action"] in ("freeze", "no measurable effect")]
    return {
        "dataset": name, "seed": seed, "task": spec.task, "metric": PRIMARY_METRIC[spec.task],
        "first_half_trials": first["trials"], "first_look": first.get("decisions"),
        "dropped": sorted(applied.get("dropped", {})), "frozen_knobs": sorted(applied.get("frozen", {})),
        "knob_verdicts": {r["param"]: r["action"] for r in decided.get("rows", [])},
        "families": {f["family"]: f["action"] for f in decided.get("families", [])},
        "decided": bool(applied.get("dropped") or knobs),
        "test": scores, "calibration": calibration(unfrozen, study),
    }


def reference_family(name: str, folder: Path, budget: str = REFERENCE) -> str:
    spec = datasets.get(name)
    train, _ = datasets.write_split(name, folder, seed=100)
    store = folder / "reference.db"
    tunelab("run", str(train), "--target", spec.target, "--budget", budget, "--jobs", "2", "--seed", "100",
            "--store", str(store), "--study", "reference", "-q")
    status = json.loads(tunelab("status", "reference", "--store", str(store), "--json").stdout)
    best = status.get("best_trial") or {}
    return str(best.get("family", ""))


def report(rows: list[dict[str, Any]], references: dict[str, str]) -> None:
    names = sorted({r["dataset"] for r in rows}, key=lambda n: [r["dataset"] for r in rows].index(n))
    print(f"{'dataset':14} {'seeds':>5} {'decided':>7} {'dropped':>24} {'knobs frozen':>12} "
          f"{'frozen - unfrozen (se)':>24} {'reference best':>15} {'wrong drops':>11}")
    decided = dropped_on = held = drops = wrong = 0
    for name in names:
        mine = [r for r in rows if r["dataset"] == name]
        diffs = np.array([orient(r["metric"], r["test"]["frozen"]) - orient(r["metric"], r["test"]["unfrozen"])
                          for r in mine])
        se = standard_error(diffs)
        mean = float(diffs.mean())
        ok = mean >= -se if math.isfinite(se) else mean >= 0
        families = sorted({f for r in mine for f in r["dropped"]})
        ref = references.get(name, "")
        bad = sum(1 for r in mine for f in r["dropped"] if f == ref)
        all_drops = sum(len(r["dropped"]) for r in mine)
        decided += any(r["decided"] for r in mine)
        dropped_on += bool(families)
        held += ok
        drops += all_drops
        wrong += bad
        knobs = sum(len(r["frozen_knobs"]) for r in mine) / len(mine)
        print(f"{name:14} {len(mine):5d} {sum(r['decided'] for r in mine):4d}/{len(mine)} "
              f"{','.join(families) or '-':>24} {knobs:12.1f} {mean:+14.5f} ({se:.5f})"
              f"{'  ok' if ok else '  LOW':>5} {ref or '?':>15} {bad:5d}/{all_drops}")
    cases = [c for r in rows for c in r["calibration"]]
    covered = sum(c["covered"] for c in cases)
    n = len(names)
    print(f"\nsomething decided on {decided} of {n} (target >= 7 of 8); a family dropped on {dropped_on} of {n} "
          f"(>= 4 of 8); wrong drops {wrong} of {drops} ({(wrong / drops if drops else 0):.0%}, <= 5 %); "
          f"frozen not below unfrozen beyond one se on {held} of {n} (>= 6 of 8)")
    if cases:
        print(f"forecast: the 80 % interval held the realised gain in {covered} of {len(cases)} cases "
              f"({covered / len(cases):.0%}; target 70-90 %, >= 60 cases)")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--datasets", default=DEFAULT_DATASETS)
    parser.add_argument("--seeds", default="0,1,2")
    parser.add_argument("--no-reference", action="store_true", help="skip the 10-minute reference studies")
    parser.add_argument("--half", default=HALF, help="each half of the study (a smoke test shortens it)")
    parser.add_argument("--reference", default=REFERENCE, help="the reference study's budget")
    parser.add_argument("--out", type=Path, default=Path("benchmarks/records/decisions"))
    parser.add_argument("--tunelab", default=None,
                        help="path of the tunelab executable under test (default: the venv's); run this "
                             "script from the same checkout so the forecast check imports the same build")
    parser.add_argument("--combine", type=Path, nargs="+", default=None, help="only reprint earlier runs' JSON")
    args = parser.parse_args()
    if args.tunelab:
        EXECUTABLE[:] = [args.tunelab]
    if args.combine:
        rows, refs = [], {}
        for path in args.combine:
            data = json.loads(path.read_text())
            rows += data["rows"]
            refs.update(data.get("references", {}))
        report(rows, refs)
        return 0
    started = datetime.now(timezone.utc)
    rows: list[dict[str, Any]] = []
    references: dict[str, str] = {}
    for name in datasets.chosen(args.datasets):
        for seed in (int(s) for s in args.seeds.split(",")):
            with tempfile.TemporaryDirectory() as tmp:
                rows.append(one_seed(name, seed, Path(tmp), args.half))
            print(f"{name} seed {seed}: dropped {rows[-1]['dropped']}, froze {rows[-1]['frozen_knobs']}, "
                  f"test {rows[-1]['test']}", flush=True)
        if not args.no_reference:
            with tempfile.TemporaryDirectory() as tmp:
                references[name] = reference_family(name, Path(tmp), args.reference)
            print(f"{name} reference best family: {references[name]}", flush=True)
        write_results(args.out, f"decisions-{args.seeds.replace(',', '-')}", started,
                      {"rows": rows, "references": references, "load": os.getloadavg()})
    report(rows, references)
    return 0


if __name__ == "__main__":
    sys.exit(main())
