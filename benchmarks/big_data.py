"""Generated big tables for ``big_tables.py``: seeded, with every parameter written down here.

The issue that asked for rows as a fidelity was found on a generated binary table of 400,000
rows × 33 columns (30 numeric, a 40-level and a 4-level categorical, a date); these tables are
that shape at 10^5, 4×10^5 and 10^6 rows (the last with 46 numeric columns, 50 in all with the
target).  Invented data, for measuring tunelab on size only: no column stands for anything real.

How the target is made (binary, about a quarter positive): a logit that sums

* a linear part on eight numeric columns, two of them heavy-tailed (log-normal);
* three interactions and thresholds that a linear model cannot see (``x01·x02``, ``sin(2·x03)``,
  ``x05`` only where ``x04 > 0.5``) and ``|x06|``;
* an effect per level of the 40-level categorical (levels drawn with Zipf frequencies, so some
  are rare) and of the 4-level one;
* a yearly season of the date;

plus logistic noise; the remaining numeric columns are pure noise, and two columns miss 3 % of
their values at random.  The true logit ranks the rows at a ROC AUC of 0.878 (``--check`` on
big-100k), the ceiling any model can reach; ``big_tables.py`` measures how far below it
library-default gradient boosting stays.

Run ``python benchmarks/big_data.py --table big-400k --out /tmp/big-400k.csv`` to write one
(``.parquet`` also works); ``--check`` prints the Bayes ROC AUC of the true logit.
"""

from __future__ import annotations

import argparse
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

TARGET = "target"


@dataclass(frozen=True)
class BigTable:
    """One generated table: its size and seed; the effect sizes are the module's constants."""

    name: str
    rows: int
    numeric: int  # numeric columns (at least 12: the first twelve carry signal or missing values)
    seed: int

    @property
    def columns(self) -> int:
        """Columns including the target: numeric, two categoricals, a date, the target."""
        return self.numeric + 4


TABLES: dict[str, BigTable] = {t.name: t for t in (
    BigTable("big-100k", 100_000, 30, seed=100),
    BigTable("big-400k", 400_000, 30, seed=400),
    BigTable("big-1m", 1_000_000, 46, seed=1000),
)}

# The logit's parts (invented; sized so that the noise leaves a Bayes ROC AUC near 0.88).
INTERCEPT = -2.56
LINEAR = (0.88, -0.72, 0.56, 0.48, -0.40, 0.32, 0.24, -0.16)  # on x00, x07 … x13 (x07, x08 log-normal)
INTERACTION = 0.96  # x01 · x02
WAVE = 0.8  # sin(2 · x03)
GATED = 1.12  # x05 where x04 > 0.5
ABSOLUTE = 0.64  # |x06|
LEVELS = 40
ZIPF = 1.1  # level frequencies ∝ 1 / rank^ZIPF
LEVEL_SPREAD = 0.72  # standard deviation of the 40 levels' effects
SMALL_EFFECTS = (0.0, 0.4, -0.32, 0.64)  # the 4-level categorical
SEASON = 0.56  # amplitude of the yearly season
MISSING = 0.03  # share of values missing in x09 and x10
START, DAYS = np.datetime64("2020-01-01"), 3 * 365


def generate(table: BigTable) -> pd.DataFrame:
    """The table as a frame, the same for the same ``BigTable`` on any machine (numpy's PCG64)."""
    if table.numeric < 14:
        raise ValueError("a big table needs at least 14 numeric columns")
    rng = np.random.default_rng(table.seed)
    n = table.rows
    x = rng.standard_normal((n, table.numeric)).astype(np.float64)
    x[:, 7] = np.exp(0.8 * x[:, 7])  # heavy right tails, as amounts have
    x[:, 8] = np.exp(1.0 * x[:, 8])
    logit = INTERCEPT + x[:, 0] * LINEAR[0]
    for k, weight in enumerate(LINEAR[1:], start=7):
        column = x[:, k]
        logit += weight * (np.log(column) if k in (7, 8) else column)
    logit += INTERACTION * x[:, 1] * x[:, 2] + WAVE * np.sin(2 * x[:, 3])
    logit += GATED * np.where(x[:, 4] > 0.5, x[:, 5], 0.0) + ABSOLUTE * np.abs(x[:, 6])
    weights = 1.0 / np.arange(1, LEVELS + 1) ** ZIPF
    level = rng.choice(LEVELS, size=n, p=weights / weights.sum())
    logit += rng.normal(0.0, LEVEL_SPREAD, LEVELS)[level]
    small = rng.integers(0, len(SMALL_EFFECTS), n)
    logit += np.asarray(SMALL_EFFECTS)[small]
    day = rng.integers(0, DAYS, n)
    logit += SEASON * np.sin(2 * np.pi * day / 365.25)
    y = (logit + rng.logistic(size=n) > 0).astype(np.int8)
    for k in (9, 10):
        x[rng.random(n) < MISSING, k] = np.nan
    frame = pd.DataFrame(x, columns=[f"x{k:02d}" for k in range(table.numeric)])
    frame["segment"] = _labels("s", level, LEVELS)
    frame["tier"] = _labels("t", small, len(SMALL_EFFECTS))
    frame["event_date"] = (START + day.astype("timedelta64[D]")).astype("datetime64[s]")
    frame[TARGET] = y
    frame.attrs["bayes_logit"] = logit  # not written: --check reads it
    return frame


def _labels(prefix: str, codes: np.ndarray, count: int) -> pd.Series:
    names = np.array([f"{prefix}{i:02d}" for i in range(count)], dtype=object)
    return pd.Series(names[codes], dtype=object)


def write(table: BigTable, path: Path) -> Path:
    """Write the table as CSV or Parquet (by the suffix), dates as ``YYYY-MM-DD``."""
    frame = generate(table)
    frame.attrs.clear()
    path.parent.mkdir(parents=True, exist_ok=True)
    if path.suffix.lower() in {".parquet", ".pq"}:
        frame.to_parquet(path, index=False)
    else:
        frame["event_date"] = frame["event_date"].dt.strftime("%Y-%m-%d")
        frame.to_csv(path, index=False, float_format="%.6g")
    return path


def _check(table: BigTable) -> None:
    from sklearn.metrics import roc_auc_score

    frame = generate(table)
    bayes = roc_auc_score(frame[TARGET], frame.attrs["bayes_logit"])
    print(f"{table.name}: {len(frame)} rows × {table.columns} columns, "
          f"{frame[TARGET].mean():.1%} positive, Bayes ROC AUC {bayes:.4f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--table", choices=sorted(TABLES), default="big-400k")
    parser.add_argument("--out", type=Path, help="write the table here (.csv or .parquet)")
    parser.add_argument("--check", action="store_true", help="print the share positive and the Bayes ROC AUC")
    args = parser.parse_args()
    table = TABLES[args.table]
    if args.check:
        _check(table)
    if args.out:
        print(f"wrote {write(table, args.out)}")


if __name__ == "__main__":
    main()
