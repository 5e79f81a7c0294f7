"""The Python API: the shell verbs as typed functions of ``import tunelab``, tested like the CLI."""

from __future__ import annotations

import inspect
import json
from pathlib import Path

import pandas as pd
import pytest

import tunelab
from tunelab.errors import TunelabError

VERBS = ("run", "resume", "status", "importance", "freeze", "export", "predict", "profile", "report")


def test_every_verb_is_a_typed_function_with_a_docstring():
    for name in VERBS:
        function = getattr(tunelab, name)
        assert function.__doc__ and function.__doc__.strip(), name
        hints = inspect.get_annotations(function)
        assert "return" in hints and all(p in hints for p in inspect.signature(function).parameters), name
    assert set(VERBS) <= set(tunelab.__all__)


def test_a_study_runs_end_to_end_from_python(tmp_path: Path, small_csv: Path) -> None:
    store = str(tmp_path / "api.db")
    result = tunelab.run(small_csv, "y", trials=8, store=store, study="api", seed=1)
    assert result.study == "api" and result.summary.best_value is not None
    assert result.decisions is not None  # the first look comes back with the result

    lines = tunelab.status(store=store)
    assert [line.name for line in lines] == ["api"]
    detail = tunelab.status("api", store=store)
    assert detail.line.counts["complete"] >= 1

    decisions = tunelab.importance("api", store=store)
    assert isinstance(decisions.firm(), list) and decisions.forecast_line()

    more = tunelab.resume("api", store=store, more_trials=2)
    assert sum(more.summary.counts.values()) == 2

    model = tmp_path / "model.zip"
    shipped = tunelab.export("api", model, store=store)
    assert shipped.path == str(model) and model.exists()
    preds = tmp_path / "preds.csv"
    tunelab.predict(model, small_csv, preds)
    assert list(pd.read_csv(preds).columns)[:1] == ["prediction"]

    page = tunelab.report("api", store=store, out=tmp_path / "api.html")
    assert Path(page.path).read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


def test_freeze_by_hand_adds_a_phase(tmp_path: Path, small_csv: Path) -> None:
    store = str(tmp_path / "freeze.db")
    tunelab.run(small_csv, "y", trials=3, store=store, study="f")
    frozen = tunelab.freeze("f", {"family": "linear"}, store=store)
    assert frozen.phase == 2 and frozen.frozen == {"family": "linear"}


def test_profile_returns_the_space_run_would_build(small_csv: Path) -> None:
    report = tunelab.profile(small_csv, "y", budget="1m")
    assert report.task == "binary" and report.space.families
    json.dumps(report.to_dict())


def test_errors_raise_with_a_hint_instead_of_exiting(tmp_path: Path, small_csv: Path) -> None:
    with pytest.raises(TunelabError) as info:
        tunelab.run(small_csv, "nope", trials=1, store=str(tmp_path / "x.db"))
    assert "nope" in info.value.message and info.value.hint
    with pytest.raises(TunelabError, match="cannot read budget"):
        tunelab.run(small_csv, "y", budget="soon", store=str(tmp_path / "x.db"))
    with pytest.raises(TunelabError, match="--worth must be a number"):
        tunelab.importance("any", store=str(tmp_path / "x.db"), worth="lots")
