"""Faults at random moments, many times over: does anything get lost, written twice, or miscounted?

Each fault is the real thing (see ``benchmarks/_faults.py``), hitting a search at a random moment:

* **disk full** — a 4 MB tmpfs holds the store and fills during ``run``; then space is freed and the
  study resumed (needs root);
* **connection drop** — PostgreSQL behind a proxy that cuts every connection for 2-10 s;
* **frozen worker** — one of ``--jobs 2`` workers stopped with SIGSTOP for 45 s, then continued.

After each one the store is read: *survived* means the commands ended with their expected exit code
and one-line message, the store passes its integrity check, and no trial is left running; *lost*
counts trials complete before the fault and missing after; *duplicated* counts configurations
re-queued more than once; the *ledger error* is how far the study's recorded wall time is from
the span its launches were alive (the first launch's start to the last one's end), for the frozen
worker whose frozen time must not count twice (target: within one 2 s heartbeat). Each run's line
also gives the process start-up and exit outside any launch, which the ledger does not count.
A *harness miss* is a run where the fault never happened (no worker found to freeze, or the frozen
worker woke before anyone declared it dead); it is printed and left out of the counts.

    .venv/bin/python benchmarks/fault_loop.py --runs 20
    .venv/bin/python benchmarks/fault_loop.py --faults disk --runs 3    # a quick look
"""

from __future__ import annotations

import argparse
import os
import random
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from benchmarks._faults import (
    TUNELAB,
    CuttableLink,
    fill,
    pg_database,
    pg_facts,
    read_store,
    small_disk,
    worker_processes,
)

FAULTS = ("disk", "connection", "frozen")


def _data(folder: Path) -> Path:
    from conftest import small_frame

    path = folder / "small.csv"
    small_frame(600).to_csv(path, index=False)
    return path


def _one_line(stderr: str) -> bool:
    lines = [ln for ln in stderr.strip().splitlines() if ln.strip()]
    return len(lines) == 1 and lines[0].startswith("tunelab: error: ") and "Traceback" not in stderr


def _last(stderr: str) -> str:
    lines = [ln for ln in (stderr or "").strip().splitlines() if ln.strip()]
    return lines[-1][:160] if lines else "(no message)"


def _ledger(store: str, study: str) -> tuple[float, float, float]:
    """The study's recorded wall seconds, and the first launch's start and the last one's end (epoch s)."""
    from tunelab.store import Store

    with Store.open(store) as st:
        study_id = st.get_study(study).id
        launches = st.launches(study_id)
        return (st.spent(study_id)[0], min(ln.started_epoch for ln in launches),
                max(ln.started_epoch + ln.wall_seconds for ln in launches))


def disk_full(rng: random.Random) -> dict[str, Any]:
    with tempfile.TemporaryDirectory() as tmp, small_disk(4096) as disk:
        data = _data(Path(tmp))
        store = disk / "s.db"
        filler = fill(disk, leave_kb=rng.randint(250, 900))
        first = subprocess.run([*TUNELAB, "run", str(data), "--target", "y", "--budget", "30s", "--store",
                                str(store), "--study", "f", "-q"], capture_output=True, text=True, timeout=300)
        before = read_store(store) if store.exists() else None
        filler.unlink()
        resumed = subprocess.run([*TUNELAB, "resume", "f", "--extend", "5s", "--store", str(store), "-q"],
                                 capture_output=True, text=True, timeout=300)
        after = read_store(store)
        ok = (first.returncode in (0, 2) and (first.returncode == 0 or _one_line(first.stderr))
              and resumed.returncode == 0 and after.integrity == "ok" and after.states.get("RUNNING", 0) == 0)
        return {"survived": ok, "lost": len(before.complete - after.complete) if before else 0,
                "duplicated": sum(n - 1 for n in after.retries.values() if n > 1),
                "ledger_error": None, "filled": first.returncode == 2,
                "why": f"run exit {first.returncode}, resume exit {resumed.returncode}: "
                       f"{_last(resumed.stderr or first.stderr)}"}


def connection_drop(rng: random.Random) -> dict[str, Any]:
    link = CuttableLink(("127.0.0.1", 5432))
    with tempfile.TemporaryDirectory() as tmp, pg_database() as url:
        data = _data(Path(tmp))
        proxied = url.replace("127.0.0.1:5432", f"127.0.0.1:{link.port}")
        run = subprocess.Popen([*TUNELAB, "run", str(data), "--target", "y", "--budget", "40s", "--study", "c",
                                "-q", "--store", proxied], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        time.sleep(rng.uniform(12, 30))
        before = pg_facts(url)
        link.cut()
        time.sleep(rng.uniform(2, 10))
        link.restore()
        _, err = run.communicate(timeout=300)
        after = pg_facts(url)
    link.close()
    ok = run.returncode == 0 and "Traceback" not in err and after.states.get("RUNNING", 0) == 0
    return {"survived": ok, "lost": len(before.complete - after.complete),
            "duplicated": sum(n - 1 for n in after.retries.values() if n > 1), "ledger_error": None,
            "why": f"run exit {run.returncode}: {_last(err)}"}


def frozen_worker(rng: random.Random) -> dict[str, Any]:
    import psutil

    with tempfile.TemporaryDirectory() as tmp:
        data = _data(Path(tmp))
        store = Path(tmp) / "w.db"
        started = time.time()
        run = subprocess.Popen([*TUNELAB, "run", str(data), "--target", "y", "--budget", "80s", "--jobs", "2",
                                "--store", str(store), "--study", "w", "-q"], stdout=subprocess.PIPE,
                               stderr=subprocess.PIPE, text=True)
        time.sleep(rng.uniform(12, 25))
        kids = worker_processes(run.pid, store)
        patience = time.monotonic() + 20  # on a loaded machine the worker's launch row can come late
        while not kids and time.monotonic() < patience and run.poll() is None:
            time.sleep(0.5)
            kids = worker_processes(run.pid, store)
        if not kids:  # nothing was frozen: a miss of this harness, not a result about tunelab
            run.communicate(timeout=300)
            return {"survived": False, "miss": True, "lost": 0, "duplicated": 0, "ledger_error": None,
                    "outside": 0.0, "raw_ledger_error": 0.0, "why": "harness: no worker process found to freeze"}
        frozen = [kids[0], *kids[0].children(recursive=True)]
        for proc in frozen:
            proc.send_signal(signal.SIGSTOP)
        before = read_store(store)
        time.sleep(45)
        for proc in frozen:
            try:
                proc.send_signal(signal.SIGCONT)
            except psutil.NoSuchProcess:
                pass
        _, err = run.communicate(timeout=300)
        ended = time.time()
        after = read_store(store)
        ledger, first_start, last_end = _ledger(str(store), "w")
        states = [state for _, state in after.launches]
        clean = run.returncode == 0 and after.integrity == "ok" and after.states.get("RUNNING", 0) == 0
        # A worker nobody declared dead (the other one checked no time inside the freeze) woke and
        # finished: the fault under test never happened, which is this harness's miss, not a result.
        missed = clean and states[1:] == ["finished"]
        return {"survived": clean and states[1:] == ["lost"], "miss": missed,
                "lost": len(before.complete - after.complete),
                "duplicated": sum(n - 1 for n in after.retries.values() if n > 1),
                # against the span from the first launch's start to the last one's end; the raw error
                # also holds the start-up before the first launch row and the exit after the last
                "ledger_error": abs(ledger - (last_end - first_start)),
                "raw_ledger_error": abs(ledger - (ended - started)),
                "outside": (first_start - started) + (ended - last_end),
                "why": f"run exit {run.returncode}, launches {states}: {_last(err)}"}


RUNNERS = {"disk": disk_full, "connection": connection_drop, "frozen": frozen_worker}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--faults", default=",".join(FAULTS))
    parser.add_argument("--runs", type=int, default=20)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()
    rng = random.Random(args.seed)
    print(f"load {os.getloadavg()[0]:.1f}; {args.runs} runs of each of {args.faults}", flush=True)
    print(f"{'fault':12} {'runs':>5} {'survived':>9} {'trials lost':>12} {'duplicated':>11} {'ledger error (s)':>17}")
    for fault in args.faults.split(","):
        results = []
        for i in range(args.runs):
            result = RUNNERS[fault](rng)
            results.append(result)
            ledger = result.get("ledger_error")
            verdict = "harness miss" if result.get("miss") else "survived" if result["survived"] else "FAILED"
            print(f"  {fault} {i + 1}/{args.runs}: {verdict}, "
                  f"lost {result['lost']}, duplicated {result['duplicated']}"
                  + (f", ledger error {ledger:.1f} s (against the process's whole life "
                     f"{result['raw_ledger_error']:.1f} s, of which start-up and exit outside any launch "
                     f"{result['outside']:.1f} s)" if ledger is not None else "") + f" ({result['why']})",
                  file=sys.stderr, flush=True)
        misses = sum(1 for r in results if r.get("miss"))
        results = [r for r in results if not r.get("miss")]  # a run where the fault never happened counts for nothing
        errors = [r["ledger_error"] for r in results if r.get("ledger_error") is not None]
        worst = f"{max(errors):.1f}" if errors else "-"
        print(f"{fault:12} {len(results):5d} {sum(r['survived'] for r in results):9d} "
              f"{sum(r['lost'] for r in results):12d} {sum(r['duplicated'] for r in results):11d} {worst:>17}"
              + (f"   ({misses} harness misses left out)" if misses else ""), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
