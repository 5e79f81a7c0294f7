"""Engine overhead per trial: tunelab on a SQLite store against plain optuna.

The objective does no work (a cheap function of the config), so the time between two
consecutive objective calls is what the loop itself costs per trial. Three methods search the
same space (two floats and one categorical) with the same sampler, ``make_sampler("tpe", seed)``
(multivariate, grouped, constant liar):

- ``optuna``: plain optuna, in-memory storage, ``study.optimize`` (the baseline);
- ``optuna-sqlite``: plain optuna on a SQLite file through its RDB storage, the same storage
  tunelab writes its trials through, so the gap between it and ``tunelab`` is tunelab's own
  per-trial work (launch and phase attributes, trial-cap count, heartbeat, recovery checks);
- ``tunelab``: ``run_objective_study`` with the in-process runner on a fresh SQLite store.

Run from the repository root::

    python benchmarks/overhead.py                            # 100 and 1,000 trials
    python benchmarks/overhead.py --sizes 100,1000,5000      # add 5,000 (long: see below)
    python benchmarks/overhead.py --methods optuna,tunelab   # skip the optuna-on-SQLite row

5,000 trials is not in the default run: at the ~0.1-0.3 s per trial measured for the two
SQLite methods on the shared 2-core machine, it alone takes 20-50 minutes; the default run
(100 and 1,000) takes about 5-10 minutes there.

TPE's own work grows with the number of finished trials, so a per-trial figure is only
meaningful with its study size; the table gives the median and 90th percentile over every
trial of the study, and the median over its last tenth (where TPE sees the most history).
Wall times on a shared machine include the neighbours; the CPU column (process CPU time, all
threads) is closer to what the loop costs on an idle machine, but leaves out the time spent
waiting for SQLite's fsync on every commit. The methods of one size run back to back in one
process; one run is one sample. The target this was written to check: tunelab's median at
1,000 trials is at most 20 ms per trial.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

if __package__ in (None, ""):  # run as a script: make `benchmarks` importable
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

DEFAULT_SIZES = (100, 1_000)
TARGET_MS = 20.0  # tunelab's median per trial at 1,000 trials
TARGET_SIZE = 1_000
CHOICES = ("a", "b", "c")
BONUS = {"a": 0.0, "b": 0.5, "c": 1.0}


@dataclass
class Timing:
    """Per-trial cycle times of one study, in milliseconds (wall and process CPU)."""

    key: str  # short name, as in --methods
    method: str
    trials: int
    wall_ms: list[float]
    cpu_ms: list[float]
    startup_s: float
    total_s: float

    def median(self) -> float:
        return statistics.median(self.wall_ms)

    def p90(self) -> float:
        return _quantile(self.wall_ms, 0.9)

    def tail_median(self) -> float:
        return statistics.median(self.wall_ms[-max(1, len(self.wall_ms) // 10):])

    def cpu_median(self) -> float:
        return statistics.median(self.cpu_ms)


class _Stamps:
    """Records wall and CPU time at every objective call; diffs are the per-trial cycle times."""

    def __init__(self) -> None:
        self.wall: list[float] = []
        self.cpu: list[float] = []

    def mark(self) -> None:
        self.wall.append(time.perf_counter())
        self.cpu.append(time.process_time())

    def timing(self, key: str, method: str, trials: int, began: float, ended: float) -> Timing:
        wall = [1000 * (b - a) for a, b in zip(self.wall, self.wall[1:])]
        cpu = [1000 * (b - a) for a, b in zip(self.cpu, self.cpu[1:])]
        return Timing(key, method, trials, wall, cpu, self.wall[0] - began, ended - began)


def value_of(config: Mapping[str, Any]) -> float:
    """A cheap function of the config with a known best (x = 1, y = -2, kind = c)."""
    return -((config["x"] - 1.0) ** 2) - (config["y"] + 2.0) ** 2 + BONUS[config["kind"]]


def time_tunelab(trials: int, seed: int, workdir: Path) -> Timing:
    """The full engine (store, ledger, recovery, in-process runner) on a fresh SQLite file."""
    from tunelab.engine import Budget, SearchSettings, TrialResult
    from tunelab.ops import run_objective_study
    from tunelab.space import ParamSpec, SpaceSpec

    space = SpaceSpec(params={
        "x": ParamSpec("float", low=-5.0, high=5.0),
        "y": ParamSpec("float", low=-5.0, high=5.0),
        "kind": ParamSpec("categorical", choices=CHOICES),
    })
    stamps = _Stamps()

    def objective(config: Mapping[str, Any], report: Callable[[int, float], None]) -> Any:
        stamps.mark()
        return TrialResult(value_of(config))

    store = workdir / f"overhead-{trials}.db"
    began = time.perf_counter()
    result = run_objective_study(f"overhead-{trials}", objective, space, Budget(trials=trials), store=str(store),
                                 direction="maximize", seed=seed, settings=SearchSettings(heartbeat_interval=2.0))
    ended = time.perf_counter()
    done = result.summary.counts.get("complete", 0)
    if done != trials:
        raise RuntimeError(f"tunelab finished {done} of {trials} trials ({result.summary.stop_reason})")
    return stamps.timing("tunelab", "tunelab (SQLite)", trials, began, ended)


def time_optuna(trials: int, seed: int, storage: str | None = None) -> Timing:
    """Plain optuna with the same sampler settings and space; in memory unless ``storage`` is a URL."""
    import optuna

    from tunelab.engine import make_sampler

    optuna.logging.set_verbosity(optuna.logging.WARNING)
    stamps = _Stamps()

    def objective(trial: Any) -> float:
        config = {"x": trial.suggest_float("x", -5.0, 5.0), "y": trial.suggest_float("y", -5.0, 5.0),
                  "kind": trial.suggest_categorical("kind", list(CHOICES))}
        stamps.mark()
        return value_of(config)

    began = time.perf_counter()
    study = optuna.create_study(storage=storage, direction="maximize", sampler=make_sampler("tpe", seed))
    study.optimize(objective, n_trials=trials)
    ended = time.perf_counter()
    if storage is None:
        return stamps.timing("optuna", "optuna (memory)", trials, began, ended)
    return stamps.timing("optuna-sqlite", "optuna (SQLite)", trials, began, ended)


METHODS = ("optuna", "optuna-sqlite", "tunelab")


def measure(sizes: tuple[int, ...], seed: int = 0, methods: tuple[str, ...] = METHODS) -> list[list[Timing]]:
    """For each size, every method back to back (in METHODS order); prints each size as it finishes."""
    rows = []
    with tempfile.TemporaryDirectory(prefix="tunelab-overhead-") as tmp:
        for n in sizes:
            timings = []
            for method in (m for m in METHODS if m in methods):
                if method == "optuna":
                    timings.append(time_optuna(n, seed))
                elif method == "optuna-sqlite":
                    timings.append(time_optuna(n, seed, storage=f"sqlite:///{Path(tmp) / f'optuna-{n}.db'}"))
                else:
                    timings.append(time_tunelab(n, seed, Path(tmp)))
            print_size(timings, flush=True)
            rows.append(timings)
    return rows


HEADER = (f"{'trials':>7}  {'method':<26} {'median ms':>9} {'p90 ms':>8} {'last 10% ms':>11} "
          f"{'CPU med ms':>10} {'start s':>7} {'total s':>8}")


def print_size(timings: list[Timing], flush: bool = False) -> None:
    """One block of the table: a row per method, then each method's ratio to the first (the baseline)."""
    for t in timings:
        print(f"{t.trials:>7}  {t.method:<26} {t.median():>9.2f} {t.p90():>8.2f} {t.tail_median():>11.2f} "
              f"{t.cpu_median():>10.2f} {t.startup_s:>7.2f} {t.total_s:>8.1f}", flush=flush)
    base = timings[0]
    for t in timings[1:]:
        label = f"ratio {t.key}/{base.key}"
        print(f"{'':>7}  {label:<26} {t.median() / base.median():>9.2f} {t.p90() / base.p90():>8.2f} "
              f"{t.tail_median() / base.tail_median():>11.2f} {t.cpu_median() / base.cpu_median():>10.2f}",
              flush=flush)


def verdict(rows: list[list[Timing]]) -> str:
    """Whether tunelab met the per-trial target at TARGET_SIZE trials."""
    at = [t for timings in rows for t in timings if t.key == "tunelab" and t.trials == TARGET_SIZE]
    if not at:
        return f"target not checked: run tunelab with {TARGET_SIZE} in --sizes"
    median = at[0].median()
    word = "met" if median <= TARGET_MS else "MISSED"
    return (f"target {word}: tunelab median {median:.2f} ms per trial at {TARGET_SIZE} trials "
            f"(target <= {TARGET_MS:.0f} ms)")


def _quantile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    k = (len(ordered) - 1) * q
    lo, hi = int(k), min(int(k) + 1, len(ordered) - 1)
    return ordered[lo] + (ordered[hi] - ordered[lo]) * (k - lo)


def _sizes(text: str) -> tuple[int, ...]:
    sizes = tuple(int(part.replace("_", "")) for part in text.split(",") if part.strip())
    if not sizes or min(sizes) < 2:
        raise argparse.ArgumentTypeError("sizes are trial counts of at least 2, e.g. 100,1000")
    return sizes


def _methods(text: str) -> tuple[str, ...]:
    methods = tuple(part.strip() for part in text.split(",") if part.strip())
    unknown = [m for m in methods if m not in METHODS]
    if not methods or unknown:
        raise argparse.ArgumentTypeError(f"methods are {', '.join(METHODS)}")
    return methods


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=_sizes, default=DEFAULT_SIZES,
                        help="comma-separated trial counts (default 100,1000; 5000 takes 20-50 minutes)")
    parser.add_argument("--methods", type=_methods, default=METHODS,
                        help="comma-separated, from optuna,optuna-sqlite,tunelab (default all three; "
                             "ratios are to the first one run)")
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args(argv)
    print("per-trial cycle time (ms) of a no-op objective; median and p90 over all trials of each study")
    print(HEADER)
    rows = measure(args.sizes, args.seed, args.methods)
    print(verdict(rows))
    return 0


if __name__ == "__main__":
    sys.exit(main())
