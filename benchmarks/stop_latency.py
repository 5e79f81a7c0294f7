"""How fast tunelab lets go: a stop that lands while a trial runs, and a worker pointed at a dead database.

The tests check that both happen (the trial process is killed, the worker exits in one line); this
script measures how long they take, since the project never asserts a timing in a test::

    .venv/bin/python benchmarks/stop_latency.py --repeats 5

It prints the median and worst seconds of each, beside the machine's load.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from benchmarks._tunelab_cli import default_executable


def _sleeping_trial(config: dict[str, object], report: object) -> object:
    time.sleep(300)
    raise RuntimeError("never reached")


def stop_during_a_trial() -> float:
    """Seconds from a pending stop to the runner's return while a trial sleeps in its own process."""
    from tunelab.engine import FakeClock, ForkRunner, Limits, StopRequested, request_stop

    runner = ForkRunner(_sleeping_trial)
    request_stop(StopRequested("SIGTERM", 143))
    started = time.monotonic()
    try:
        runner.run({}, lambda step, value: False, Limits(None, None), FakeClock())
    except StopRequested:
        pass
    return time.monotonic() - started


def worker_on_a_dead_database() -> float:
    """Seconds a worker takes to give up on a database nobody listens for."""
    started = time.monotonic()
    subprocess.run([default_executable(), "worker", "anything", "--store", "postgresql://127.0.0.1:1/test"],
                   capture_output=True, text=True, timeout=120)
    return time.monotonic() - started


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    print(f"load {os.getloadavg()[0]:.1f}")
    for name, measure in (("stop during a trial", stop_during_a_trial),
                          ("worker on a dead database", worker_on_a_dead_database)):
        times = [measure() for _ in range(args.repeats)]
        print(f"{name:28} median {statistics.median(times):6.2f} s   worst {max(times):6.2f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
