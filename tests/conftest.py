"""Shared fixtures: small data files, fresh store paths, and an in-process CLI runner."""

from __future__ import annotations

import hashlib
import os
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "studies"))
# Tests run one worker unless they test parallelism (those pass --jobs): the default is auto, the
# CPUs this machine gives, which would make every search a parallel one.
os.environ["TUNELAB_JOBS"] = "1"


@dataclass
class CliResult:
    code: int
    out: str
    err: str


@pytest.fixture
def cli(capsys: pytest.CaptureFixture[str]):
    """Run ``tunelab ARGS`` in-process; returns exit code, stdout and stderr."""
    from tunelab.cli import main

    def invoke(*args: str) -> CliResult:
        code = 0
        try:
            main(list(args))
        except SystemExit as exc:
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
        captured = capsys.readouterr()
        return CliResult(code, captured.out, captured.err)

    return invoke


@pytest.fixture
def store_path(tmp_path: Path) -> Path:
    return tmp_path / "studies.db"


def small_frame(n: int = 240, seed: int = 0) -> pd.DataFrame:
    """A small mixed-type binary dataset with a learnable signal (for fast engine tests)."""
    rng = np.random.default_rng(seed)
    x1, x2 = rng.normal(size=n), rng.normal(size=n)
    colour = rng.choice(["red", "green", "blue"], n)
    logit = 2 * x1 - x2 + np.where(colour == "red", 1.0, 0.0)
    y = np.where(rng.random(n) < 1 / (1 + np.exp(-logit)), "yes", "no")
    frame = pd.DataFrame({"x1": x1, "x2": x2, "colour": colour, "y": y})
    frame.loc[rng.random(n) < 0.05, "x2"] = np.nan
    return frame


@pytest.fixture
def small_csv(tmp_path: Path) -> Path:
    path = tmp_path / "small.csv"
    small_frame().to_csv(path, index=False)
    return path


def digest(path: Path) -> str:
    """sha256 of a file, or of nothing when it does not exist (for byte-identical checks)."""
    return hashlib.sha256(path.read_bytes()).hexdigest() if path.exists() else "absent"
