"""Does ``--learn-nearest`` find data like the new data? Retrieval of a table's own earlier part.

Each open dataset (``benchmarks/datasets.py``) is cut in two by a seeded shuffle (stratified for
classification): an *earlier* part, 40 % of the rows with a seeded quarter of the feature columns
left out (last quarter's extract was narrower, ``--drop``), stands for a study already in a store;
the *later* part, the other 60 % with every column, for new data. For every later part the earlier
parts of the same task are ranked by the distance ``run --learn-nearest`` uses
(``tunelab.data._similarity``); the right answer is the table's own earlier part. Side by side, on
the same parts:

* ``meta-features``: tunelab's vector, as stored with each study;
* ``shape only``: the same distance over its two size entries (log rows, log columns), the
  similarity a user gets by eye from a file listing;
* ``random``: pick any earlier part of the task (expected top-1 = 1 / candidates).

Printed: top-1 share and mean rank of the right answer per method, and the top-1 ratio of
tunelab's vector to each baseline. This is a favourable case (the right answer comes from the
same source); it checks the vector can tell tables apart, not that carried configurations help.

Usage (from the repository root)::

    python benchmarks/nearest_retrieval.py                  # every dataset, seeds 0,1,2
    python benchmarks/nearest_retrieval.py --seeds 0 --datasets titanic,credit,oj
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import pandas as pd
from sklearn.model_selection import train_test_split

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from benchmarks import datasets  # noqa: E402

SHAPE_KEYS = ("log_rows", "log_columns")


def _parts(name: str, seed: int, drop: float) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Earlier part (40 % of rows, a seeded ``drop`` share of feature columns missing), later part (the rest)."""
    spec = datasets.get(name)
    frame = datasets.load(name)
    strata = frame[spec.target] if spec.task != "regression" else None
    first, second = train_test_split(frame, train_size=0.4, random_state=seed, stratify=strata)
    features = [c for c in frame.columns if c != spec.target]
    gone = pd.Series(features).sample(frac=drop, random_state=seed).tolist()[: len(features) - 1]
    return first.drop(columns=gone), second


def _vector(frame: pd.DataFrame, target: str, task: str, seed: int) -> dict[str, float]:
    from tunelab.data import prepare_frame
    from tunelab.data._similarity import similarity_vector
    from tunelab.ops._profile import profile_metafeatures

    return similarity_vector(profile_metafeatures(prepare_frame(frame.reset_index(drop=True), target, task),
                                                  seed=seed))


def _rank(new: dict[str, float], earlier: dict[str, dict[str, float]], own: str, keys: tuple[str, ...] | None) -> int:
    from tunelab.data._similarity import meta_distance

    def pick(v: dict[str, float]) -> dict[str, float]:
        return v if keys is None else {k: v[k] for k in keys if k in v}

    order = sorted(earlier, key=lambda n: (meta_distance(pick(new), pick(earlier[n])) or 0.0, n))
    return order.index(own) + 1


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--datasets", default="all", help="comma-separated names, or all (default)")
    parser.add_argument("--seeds", default="0,1,2", help="comma-separated shuffle seeds (default 0,1,2)")
    parser.add_argument("--drop", type=float, default=0.25,
                        help="share of feature columns the earlier part lacks (default 0.25)")
    args = parser.parse_args(argv)
    warnings.filterwarnings("ignore")
    names = datasets.chosen(args.datasets)
    seeds = [int(s) for s in args.seeds.split(",")]
    rows = []
    for seed in seeds:
        earlier: dict[str, dict[str, dict[str, float]]] = {}
        later: dict[str, dict[str, float]] = {}
        for name in names:
            spec = datasets.get(name)
            started = time.perf_counter()
            first, second = _parts(name, seed, args.drop)
            earlier.setdefault(spec.task, {})[name] = _vector(first, spec.target, spec.task, seed)
            later[name] = _vector(second, spec.target, spec.task, seed)
            print(f"[seed {seed}] {name}: meta-features of both parts in {time.perf_counter() - started:.1f} s",
                  file=sys.stderr, flush=True)
        for name in names:
            task = datasets.get(name).task
            pool = earlier[task]
            rows.append({"seed": seed, "dataset": name, "task": task, "candidates": len(pool),
                         "meta": _rank(later[name], pool, name, None),
                         "shape": _rank(later[name], pool, name, SHAPE_KEYS)})
    table = pd.DataFrame(rows)
    print(table.pivot_table(index="dataset", columns="seed", values=["meta", "shape"]).to_string())
    top1 = {m: float((table[m] == 1).mean()) for m in ("meta", "shape")}
    top1["random"] = float((1.0 / table["candidates"]).mean())
    mean_rank = {m: float(table[m].mean()) for m in ("meta", "shape")}
    mean_rank["random"] = float(((table["candidates"] + 1) / 2).mean())
    print(f"\n{len(table)} retrievals ({len(names)} datasets x {len(seeds)} seeds); the right answer is rank 1")
    for label, key in (("meta-features", "meta"), ("shape only", "shape"), ("random", "random")):
        print(f"  {label:14s} top-1 {top1[key]:6.1%}   mean rank {mean_rank[key]:.2f}")
    print(f"  ratio of top-1: meta-features / shape only = {top1['meta'] / max(top1['shape'], 1e-9):.2f}, "
          f"meta-features / random = {top1['meta'] / top1['random']:.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
