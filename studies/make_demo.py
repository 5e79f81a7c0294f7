"""Generate the demo data: an invented tool-lending library and whether members renew.

Everything here is made up by a seeded generator: no real people, organisations or places.
The renewal signal is real (a logistic function of usage, lateness, distance and the tone of
the member's feedback), so a good search finds it.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
import pandas as pd

CATEGORIES = ["garden", "woodwork", "kitchen", "electronics", "camping", "sewing", "bicycle"]
TIERS = ["basic", "plus", "family"]
GOOD = ["handy", "friendly", "great", "reliable", "useful", "tidy", "quick", "helpful"]
BAD = ["broken", "late", "confusing", "dusty", "slow", "missing", "crowded", "rude"]
FILLER = ["the", "drill", "ladder", "staff", "shelf", "booking", "visit", "saw", "tent", "pump"]


def make_members(n: int = 3000, seed: int = 7) -> pd.DataFrame:
    """One row per member of the invented lending library, with the ``renewed`` target."""
    rng = np.random.default_rng(seed)
    since = pd.Timestamp("2019-01-01") + pd.to_timedelta(rng.integers(0, 5 * 365, n), unit="D")
    borrows = rng.poisson(rng.gamma(2.0, 4.0, n))
    late = rng.binomial(np.maximum(borrows, 1), rng.beta(1.5, 8.0, n))
    workshops = rng.poisson(1.2, n)
    distance = np.round(rng.lognormal(1.2, 0.8, n), 1)
    tier = rng.choice(TIERS, n, p=[0.6, 0.25, 0.15])
    category = rng.choice(CATEGORIES, n)
    newsletter = rng.random(n) < 0.4
    mood = rng.normal(0, 1, n)
    feedback = [_feedback(rng, m) for m in mood]
    logit = (0.12 * borrows - 0.35 * late + 0.25 * workshops - 0.18 * distance + 0.9 * mood
             + np.where(tier == "family", 0.6, 0.0) + 0.3 * newsletter - 0.2)
    renewed = rng.random(n) < 1 / (1 + np.exp(-logit))
    frame = pd.DataFrame({
        "member_id": [f"M{100000 + i}" for i in range(n)],
        "member_since": since.strftime("%Y-%m-%d"),
        "tier": tier,
        "favourite_category": category,
        "borrows_last_year": borrows,
        "late_returns": late,
        "workshops_attended": workshops,
        "distance_km": distance,
        "newsletter": newsletter,
        "feedback": feedback,
        "renewed": np.where(renewed, "yes", "no"),
    })
    frame.loc[rng.random(n) < 0.08, "distance_km"] = np.nan
    frame.loc[rng.random(n) < 0.05, "tier"] = np.nan
    frame.loc[rng.random(n) < 0.10, "feedback"] = np.nan
    return frame


def _feedback(rng: np.random.Generator, mood: float) -> str:
    k = int(rng.integers(4, 10))
    p_good = 1 / (1 + np.exp(-1.5 * mood))
    words = [(rng.choice(GOOD) if rng.random() < p_good else rng.choice(BAD)) if rng.random() < 0.4
             else rng.choice(FILLER) for _ in range(k)]
    return " ".join(words)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=3000)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--out", type=Path, default=Path(__file__).with_name("tool_library.csv"))
    args = parser.parse_args()
    make_members(args.rows, args.seed).to_csv(args.out, index=False)
    print(f"wrote {args.rows} rows to {args.out}")


if __name__ == "__main__":
    main()
