"""The shell verbs as typed Python functions, for notebooks and scripts.

::

    import tunelab

    result = tunelab.run("sales.csv", target="churned", budget="2m", store="studies.db")
    decisions = tunelab.importance(result.study, store="studies.db")
    print(decisions.firm(), decisions.forecast_line())
    tunelab.freeze(result.study, auto=True, store="studies.db")
    tunelab.resume(result.study, extend="2m", store="studies.db")
    tunelab.export(result.study, "model.zip", store="studies.db")

Each function does what its verb does and returns the value the verb renders (``--json`` prints
the same data).  Errors a user can act on raise :class:`tunelab.TunelabError` with a ``hint``;
nothing here prints or exits.  Durations are strings as on the command line (``"90s"``,
``"10m"``, ``"1h30m"``) or seconds as a number.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # types only: the heavy modules load when a function runs
    from tunelab.engine import Progress
    from tunelab.insight import Decisions
    from tunelab.ops import (
        DecisionOptions,
        ExportResult,
        FreezeResult,
        PredictResult,
        ProfileReport,
        ReportResult,
        RunResult,
        StudyDetail,
        StudyLine,
    )

Duration = str | float


def seconds(value: Duration, what: str = "budget") -> float:
    """A duration as seconds: ``"10m"`` -> 600.0; a number is taken as seconds."""
    from tunelab.engine import parse_duration

    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return parse_duration(str(float(value)), what)
    return parse_duration(str(value), what)


def decision_options(horizon: Duration = "10m", worth: float | str | None = None, **more: Any) -> DecisionOptions:
    """How ``importance``, ``status``, ``report`` and the end of ``run`` decide: the forecast's
    stretch (``horizon``) and the smallest gain worth it (``worth``, metric units)."""
    from tunelab.errors import InputError
    from tunelab.ops import DecisionOptions

    gain = None
    if worth is not None:
        try:
            gain = float(worth)
        except ValueError:
            raise InputError(f"--worth must be a number in metric units, got '{worth}'",
                             "e.g. --worth 0.001: the smallest gain worth another stretch") from None
    return DecisionOptions(horizon=seconds(horizon, "--horizon"), worth=gain, **more)


def run(data: str | Path, target: str, *, budget: Duration | None = None, trials: int | None = None,
        cpu_budget: Duration | None = None, metric: str | None = None, task: str | None = None,
        study: str | None = None, store: str | None = None, seed: int = 0, space: str | Path | None = None,
        pruning: str = "auto", jobs: str | int | None = None, learn_from: Sequence[str] = (), learn_nearest: int = 0,
        portfolio: bool = True, portfolio_file: str | Path | None = None, rows_fidelity: str = "auto",
        horizon: Duration = "10m", worth: float | None = None,
        on_progress: Callable[[Progress], None] | None = None) -> RunResult:
    """Profile a data file, build its search space and search it within a budget (``tunelab run``).

    ``budget`` is the study's total wall-clock time (default 10 minutes unless ``trials`` caps the
    count); ``jobs`` the worker processes (a number or ``"auto"``; default ``TUNELAB_JOBS``, else
    auto); ``rows_fidelity`` ``"auto"`` lets trials on a big table start on row samples (``"off"``:
    every trial on all rows).  The result holds the best trial, how the launch ended, and the first
    look at what is already decided (``result.decisions``).
    """
    from tunelab.engine import Budget
    from tunelab.ops import RunRequest, run_study

    wall = seconds(budget) if budget is not None else (None if trials else 600.0)
    box = Budget(wall, seconds(cpu_budget, "--cpu-budget") if cpu_budget is not None else None, trials)
    request = RunRequest(data=Path(data), target=target, budget=box, store=store, study=study, task=task,
                         metric=metric, seed=seed, space_file=Path(space) if space else None, pruning=pruning,
                         jobs=jobs, learn_from=tuple(learn_from), learn_nearest=learn_nearest, portfolio=portfolio,
                         portfolio_file=Path(portfolio_file) if portfolio_file else None,
                         rows_fidelity=rows_fidelity)
    return run_study(request, on_progress=on_progress, look=decision_options(horizon, worth))


def resume(study: str, *, store: str | None = None, extend: Duration | None = None, more_trials: int = 0,
           data: str | Path | None = None, accept_changed_data: bool = False, jobs: str | int | None = None,
           horizon: Duration = "10m", worth: float | None = None,
           on_progress: Callable[[Progress], None] | None = None) -> RunResult:
    """Continue a study with the budget that is left, plus ``extend`` (``tunelab resume``)."""
    from tunelab.ops import resume_study

    return resume_study(study, store=store, extend_seconds=seconds(extend, "--extend") if extend else 0.0,
                        extend_trials=more_trials, data=Path(data) if data else None,
                        accept_changed_data=accept_changed_data, jobs=jobs, on_progress=on_progress,
                        look=decision_options(horizon, worth))


def status(study: str | None = None, *, store: str | None = None, top: int = 5, horizon: Duration = "10m",
           worth: float | None = None) -> list[StudyLine] | StudyDetail:
    """Every study of the store, one line each; or one study in detail (``tunelab status``)."""
    from tunelab.ops import list_studies, study_detail

    if study is None:
        return list_studies(store)
    return study_detail(study, store, top=top, options=decision_options(horizon, worth, rank_knobs=False))


def importance(study: str, *, store: str | None = None, method: str = "fanova", family: str | None = None,
               tolerance: float | None = None, horizon: Duration = "10m",
               worth: float | None = None) -> Decisions:
    """Families to drop, knobs to freeze or without effect, and the forecast (``tunelab importance``)."""
    from tunelab.ops import study_importance

    options = decision_options(horizon, worth, method=method, family=family, tolerance=tolerance)
    return study_importance(study, store=store, options=options)[1]


def freeze(study: str, assignments: Mapping[str, Any] | None = None, *, auto: bool = False,
           store: str | None = None) -> FreezeResult:
    """Hold knobs at values and drop decided families: a new phase of the study (``tunelab freeze``).

    ``assignments`` maps parameters to values (``{"hist_gb.max_iter": 300}``); ``auto`` adds what
    ``importance`` decided.
    """
    from tunelab.ops import freeze_parameters

    return freeze_parameters(study, {k: str(v) for k, v in (assignments or {}).items()}, auto=auto, store=store)


def export(study: str, out: str | Path, *, store: str | None = None, trial: int | None = None,
           choose: str = "best") -> ExportResult:
    """Refit the best (or a chosen) trial on all rows and write a model file (``tunelab export``).

    ``choose="one-se"`` ships the cheapest trial within one standard error of the best instead.
    """
    from tunelab.ops import export_model

    return export_model(study, Path(out), store=store, trial=trial, choose_by=choose)


def predict(model: str | Path, data: str | Path, out: str | Path) -> PredictResult:
    """Check a model file and the input columns, then write predictions (``tunelab predict``)."""
    from tunelab.ops import predict_file

    return predict_file(Path(model), Path(data), Path(out))


def profile(data: str | Path, target: str, *, task: str | None = None, budget: Duration | None = None,
            metric: str | None = None, seed: int = 0) -> ProfileReport:
    """Column roles, meta-features and the search space ``run`` would build, with reasons (``tunelab profile``)."""
    from tunelab.ops import profile_data

    return profile_data(data, target, task, budget_seconds=seconds(budget) if budget is not None else None,
                        metric=metric, seed=seed)


def report(study: str, *, store: str | None = None, out: str | Path | None = None, horizon: Duration = "10m",
           worth: float | None = None) -> ReportResult:
    """Write the study's one-file HTML report (``tunelab report``)."""
    from tunelab.ops import write_report

    return write_report(study, store=store, out=Path(out) if out else None, options=decision_options(horizon, worth))


__all__ = ["decision_options", "export", "freeze", "importance", "predict", "profile", "report", "resume", "run",
           "seconds", "status"]
