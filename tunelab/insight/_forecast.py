"""Stop or go on: what another stretch of search is likely to buy, with an 80 % interval.

The method (our own simple model, named so it can be judged): **a smoothed bootstrap of the
recent trials' scores, drawn as many times as the stretch is expected to finish trials.**  A new
best can only come from a complete trial.  Over the recent half of the study's ledger time the
search finished complete trials at some rate and with some scores; another stretch of ``H``
seconds finishes a Poisson number of trials at that rate, each scoring like a recent one.  The
gain is how far the best of those beats today's best (0 when none does).  Resampling the recent
scores before each stretch (the bootstrap; from memory: Efron & Tibshirani 1993, *An
Introduction to the Bootstrap*) carries the uncertainty of having seen only a few of them, and
the draws are smoothed with a normal kernel of Silverman's bandwidth, taken from the better half
of the recent scores, whose spread is what a new best depends on (the smoothed bootstrap;
from memory: Silverman & Young 1987, *Biometrika* 74(3)), since a plain resample can never score
above the best seen and so would always forecast nothing.  The expected gain is the mean over the
simulations, the interval their 10th to 90th percentile.

The search's own improvement makes recent scores better than early ones; using only the recent
half keeps the model from being anchored on the start-up trials.  Its calibration (how often the
interval holds the realised gain) is measured in ``benchmarks/decisions.py``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tunelab.values import format_score as num

RECENT_SHARE = 0.5  # the recent part of the ledger the model learns from
MIN_RECENT = 8  # ... widened to at least this many complete trials
MIN_COMPLETE = 3  # fewer complete trials: no forecast
SIMULATIONS = 4000
MIN_SPENT = 1.0  # ledger seconds below which there is no pace to speak of
MAX_RATE = 50.0  # complete trials a second at most: beyond it the best of the draws no longer moves


@dataclass(frozen=True)
class Forecast:
    """What ``horizon`` more seconds of search are likely to buy, in metric units (positive = better).

    Attributes
    ----------
    horizon
        Ledger seconds of the stretch.
    expected, low, high
        Expected gain and its 80 % interval.
    worth
        The smallest gain the user calls worth it (``--worth``; by default the best trial's fold
        noise, the standard deviation of its fold scores over the square root of the folds).
    stop
        Whether the interval's upper end is below ``worth``.
    trials
        Complete trials the stretch is expected to finish.
    basis
        Complete trials the model learned from.
    """

    horizon: float
    expected: float
    low: float
    high: float
    worth: float
    stop: bool
    trials: float
    basis: int

    def words(self, metric: str) -> str:
        """``another 10 min: 0.0021 better expected (80 % interval 0.0000 to 0.0060); ...``."""
        head = (f"another {_duration(self.horizon)}: {num(self.expected)} better {metric} expected "
                f"(80 % interval {num(self.low)} to {num(self.high)})")
        if self.stop:
            return head + f"; stop: even the upper end is below what is worth it ({num(self.worth)})"
        return head + f"; worth going on: the upper end is above {num(self.worth)}"

    def to_dict(self) -> dict[str, float | bool | int]:
        return {"horizon_seconds": self.horizon, "expected": self.expected, "low": self.low, "high": self.high,
                "worth": self.worth, "stop": self.stop, "trials_expected": self.trials, "basis": self.basis}


def forecast(finished: Sequence[tuple[float, float]], spent: float, *, direction: str, horizon: float,
             worth: float, seed: int = 0) -> Forecast | None:
    """Forecast the gain of ``horizon`` more ledger seconds from the complete trials so far.

    Parameters
    ----------
    finished
        ``(ledger seconds when it finished, score)`` of every complete trial.
    spent
        Ledger seconds spent so far (at least the last finish).
    direction
        ``maximize`` or ``minimize``.
    horizon
        Ledger seconds of the stretch to forecast.
    worth
        The smallest gain worth a stretch, in metric units.
    seed
        Seeds the simulation: the same inputs give the same forecast.

    Returns
    -------
    Forecast or None
        ``None`` with fewer than ``MIN_COMPLETE`` complete trials.
    """
    points = sorted((float(t), float(v)) for t, v in finished if math.isfinite(v))
    if len(points) < MIN_COMPLETE or horizon <= 0 or spent < MIN_SPENT:
        return None
    sign = 1.0 if direction == "maximize" else -1.0
    spent = max(spent, points[-1][0])
    best = max(sign * v for _, v in points)
    cut = RECENT_SHARE * spent
    recent = [p for p in points if p[0] >= cut]
    if len(recent) < MIN_RECENT:
        recent = points[-MIN_RECENT:]
        earlier = points[-len(recent) - 1][0] if len(points) > len(recent) else 0.0
        cut = min(cut, earlier)
    window = max(spent - cut, MIN_SPENT)
    rate = min(len(recent) / window, MAX_RATE)
    pool = np.array([sign * v for _, v in recent])
    width = bandwidth(np.sort(pool)[len(pool) // 2:])  # a new best comes from the upper tail: smooth by its spread
    rng = np.random.default_rng(seed)
    counts = rng.poisson(rate * horizon, size=SIMULATIONS)
    gains = np.zeros(SIMULATIONS)
    for b, m in enumerate(counts):
        if m == 0:
            continue
        resampled = rng.choice(pool, size=len(pool), replace=True)
        draws = rng.choice(resampled, size=int(m), replace=True) + width * rng.standard_normal(int(m))
        gains[b] = max(0.0, float(draws.max()) - best)
    low, high = (float(q) for q in np.percentile(gains, [10, 90]))
    return Forecast(horizon=horizon, expected=float(gains.mean()), low=low, high=high, worth=float(worth),
                    stop=high < worth, trials=rate * horizon, basis=len(recent))


def bandwidth(values: np.ndarray) -> float:
    """Silverman's rule of thumb for a normal kernel: 0.9 min(sd, IQR / 1.34) n^(-1/5) (from memory:
    Silverman 1986, *Density Estimation for Statistics and Data Analysis*, eq. 3.31)."""
    if len(values) < 2:
        return 0.0
    sd = float(np.std(values, ddof=1))
    q75, q25 = np.percentile(values, [75, 25])
    spread = min(sd, float(q75 - q25) / 1.34) or sd
    return 0.9 * spread * len(values) ** -0.2


def _duration(seconds: float) -> str:
    if seconds % 3600 == 0:
        return f"{seconds / 3600:g} h"
    if seconds % 60 == 0:
        return f"{seconds / 60:g} min"
    return f"{seconds:g} s"


__all__ = ["Forecast", "bandwidth", "forecast"]
