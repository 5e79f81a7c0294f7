"""The crash test twenty times over: SIGKILL a real search at random moments, resume, check.

Each run starts a real ``tunelab run`` in a subprocess on a small data set in a fresh temporary
folder, kills it with SIGKILL once ``min_complete`` trials have finished and one is running,
plus ``extra_delay`` seconds, then runs ``tunelab resume`` and checks what
``tests/crash_harness.py`` checks: no completed trial lost, the killed trial marked interrupted
and re-run, the budget ledger within a heartbeat of the true time, ``PRAGMA integrity_check``
ok, resume exits 0, trial numbers unique. The kill moments are drawn from a seeded generator:
``min_complete`` uniform in 1..6, ``extra_delay`` uniform in 0..1.5 s, and the pruning rule
alternates median / halving. Run from the repository root::

    python benchmarks/crash_loop.py                  # 20 runs, seed 0 (about 10-20 minutes)
    python benchmarks/crash_loop.py --runs 5 --seed 3

Prints a line per run and a final "N passed, M failed" line; exits 1 if any run failed.
From Python: ``crash_loop(runs=20, seed=0)`` returns the list of :class:`CrashRun`.
"""

from __future__ import annotations

import argparse
import random
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

TESTS = Path(__file__).resolve().parents[1] / "tests"
if str(TESTS) not in sys.path:  # the harness and the data maker live with the tests
    sys.path.insert(0, str(TESTS))

from conftest import small_frame  # noqa: E402
from crash_harness import crash_and_resume  # noqa: E402

PRUNING_RULES = ("median", "halving")
MIN_COMPLETE = (1, 6)
MAX_DELAY_S = 1.5


@dataclass
class CrashRun:
    """One kill-and-resume: where the kill landed and what the checks found (empty = pass)."""

    index: int
    min_complete: int
    extra_delay: float
    pruning: str
    problems: list[str] = field(default_factory=list)
    killed_running: list[int] = field(default_factory=list)
    retried: dict[int, int] = field(default_factory=dict)
    ledger_error: float | None = None
    seconds: float = 0.0

    @property
    def passed(self) -> bool:
        return not self.problems

    def line(self, runs: int) -> str:
        verdict = "pass" if self.passed else "FAIL"
        ledger = "" if self.ledger_error is None else f" ledger err {self.ledger_error:+.2f}s"
        text = (f"run {self.index + 1:>2}/{runs} {verdict}  min_complete={self.min_complete} "
                f"delay={self.extra_delay:.2f}s pruning={self.pruning:<7} killed={self.killed_running} "
                f"retried={self.retried}{ledger} ({self.seconds:.0f}s)")
        return text if self.passed else text + "\n    " + "\n    ".join(self.problems)


def kill_moments(runs: int, seed: int) -> list[tuple[int, float, str]]:
    """The seeded (min_complete, extra_delay, pruning) of every run."""
    rng = random.Random(seed)
    return [(rng.randint(*MIN_COMPLETE), rng.uniform(0.0, MAX_DELAY_S), PRUNING_RULES[i % len(PRUNING_RULES)])
            for i in range(runs)]


def crash_once(index: int, min_complete: int, extra_delay: float, pruning: str, *, data_seed: int,
               trials_cap: int = 12) -> CrashRun:
    """One kill-and-resume in a fresh temporary folder; a harness error counts as a failure."""
    run = CrashRun(index, min_complete, extra_delay, pruning)
    began = time.monotonic()
    with tempfile.TemporaryDirectory(prefix="tunelab-crash-") as tmp:
        data = Path(tmp) / "small.csv"
        small_frame(seed=data_seed).to_csv(data, index=False)
        try:
            report = crash_and_resume(data, Path(tmp) / "crash.db", min_complete=min_complete,
                                      extra_delay=extra_delay, pruning=pruning, trials_cap=trials_cap)
        except Exception as exc:  # the run ended before the kill, a timeout, an unreadable store
            run.problems = [f"harness error: {type(exc).__name__}: {str(exc).strip()[-300:]}"]
        else:
            run.problems = report.problems()
            run.killed_running = report.killed_running
            run.retried = report.retried
            run.ledger_error = report.ledger_seconds - report.true_seconds
    run.seconds = time.monotonic() - began
    return run


def crash_loop(runs: int = 20, seed: int = 0, *, trials_cap: int = 12,
               on_run: Callable[[CrashRun], None] | None = None) -> list[CrashRun]:
    """Repeat the crash test ``runs`` times with seeded random kill moments.

    Parameters
    ----------
    runs
        How many kill-and-resume cycles (each in its own temporary folder).
    seed
        Seeds the kill moments and each run's data set, so a failing run can be replayed.
    trials_cap
        ``--trials`` of each study; the kill lands before it is reached.
    on_run
        Called with each result as it finishes (the command line prints it).
    """
    results = []
    for index, (min_complete, delay, pruning) in enumerate(kill_moments(runs, seed)):
        result = crash_once(index, min_complete, delay, pruning, data_seed=seed * 1000 + index,
                            trials_cap=trials_cap)
        if on_run is not None:
            on_run(result)
        results.append(result)
    return results


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=20)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--trials-cap", type=int, default=12, help="--trials of each study (default 12)")
    args = parser.parse_args(argv)
    if args.runs < 1 or args.trials_cap < MIN_COMPLETE[1] + 2:
        parser.error(f"--runs must be at least 1 and --trials-cap at least {MIN_COMPLETE[1] + 2}")
    results = crash_loop(args.runs, args.seed, trials_cap=args.trials_cap,
                         on_run=lambda r: print(r.line(args.runs), flush=True))
    failed = sum(not r.passed for r in results)
    print(f"{len(results) - failed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
