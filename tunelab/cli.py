"""The shell interface: parse, call one library function per verb, render, map errors to exit codes.

This is the only module that imports typer and rich.
"""

from __future__ import annotations

import sys
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Protocol, TypeGuard

import typer

from tunelab.errors import TunelabError, first_line

if TYPE_CHECKING:
    from tunelab.ops import RunResult

app = typer.Typer(
    name="tunelab",
    help="Time-boxed, resumable hyperparameter search for tabular data.\n\n"
         "Start with `tunelab run data.csv --target y --budget 10m`; see a study with `tunelab status`.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)

EXIT_BAD_INPUT = 2
EXIT_BUG = 1  # something tunelab did not expect: a bug to report, not the user's input


@dataclass
class _Flags:
    debug: bool = False
    started: float = 0.0  # epoch seconds when the command began: the budget clock starts here


def _settings(ctx: typer.Context) -> Any:
    from tunelab.engine import SearchSettings

    return SearchSettings(started=ctx.obj.started if ctx.obj else None)


# ---- shared options, defined once ----------------------------------------------------------------
StoreOpt = typer.Option(None, "--store", envvar="TUNELAB_STORE", metavar="PATH|URL",
                        help="Study store: a SQLite file path or a database URL. [default: ./tunelab.db]")
JsonOpt = typer.Option(False, "--json", help="Print the result as JSON on stdout.")
QuietOpt = typer.Option(False, "-q", "--quiet", help="No progress output; results only.")
SeedOpt = typer.Option(0, "--seed", help="Seed for folds, models and the sampler.")
JobsOpt = typer.Option("auto", "--jobs", "-j", metavar="N|auto", envvar="TUNELAB_JOBS",
                       help="Worker processes on this machine, each running one trial at a time on one thread: a "
                            "number, or auto (the CPUs this process may use, capped by the memory one needs). "
                            "TUNELAB_JOBS sets the default.")
RowsFidelityOpt = typer.Option("auto", "--rows-fidelity", metavar="auto|off",
                               help="auto: on a big table where few full-data trials fit the budget, trials start on "
                                    "1/9, then 1/3 of a fold's rows, and only the good ones go on to all rows (or to "
                                    "the fixed sample of a family too slow for all of them; status shows the "
                                    "ladder). off: every trial on all rows. --pruning off also turns it off.")
HorizonOpt = typer.Option("10m", "--horizon", metavar="DURATION",
                          help="The stretch of search the forecast looks at, in study time, e.g. 10m or 1h.")
WorthOpt = typer.Option(None, "--worth", metavar="GAIN",
                        help="The smallest gain worth another stretch, in metric units; the forecast says stop "
                             "when even its upper end is below it. [default: the best trial's fold noise]")


def _decision_options(horizon: str, worth: str | None, **more: Any) -> Any:
    """Parse --horizon and --worth into the options every deciding verb takes."""
    from tunelab.api import decision_options

    return decision_options(horizon, worth, **more)


@app.callback()
def _root(ctx: typer.Context,
          debug: bool = typer.Option(False, "--debug", help="Show full tracebacks on errors.")) -> None:
    ctx.obj.debug = debug


def _search_output(result: RunResult, json_out: bool) -> int:
    from tunelab import _render as r

    s = result.summary
    look = result.decisions
    if json_out:
        r.emit_json({"study": result.study, "store": result.store, "metric": result.metric,
                     "stop_reason": s.stop_reason, "elapsed_seconds": round(s.elapsed, 2), "trials": s.counts,
                     "best_value": s.best_value, "best_trial": s.best_trial, "best_config": result.best_config,
                     "recovered_trials": s.recovered, "requeued_trials": s.requeued,
                     "decisions": None if look is None else look.to_dict(),
                     "forecast": None if look is None or look.forecast is None else look.forecast.to_dict()})
    else:
        c = s.counts
        r.out.print(f"study {result.study}: {s.stop_reason} after {r.format_duration(s.elapsed)}; "
                    f"{sum(c.values())} trials ({c.get('complete', 0)} complete, {c.get('pruned', 0)} pruned, "
                    f"{c.get('failed', 0)} failed, {c.get('interrupted', 0)} interrupted)")
        if s.best_value is not None:
            r.out.print(f"best {result.metric} {s.best_value:.4f} (trial {s.best_trial})")
            r.out.print(r.config_table(result.best_config))
            if look is not None:
                r.print_first_look(result.study, look)
            r.out.print(f"next: tunelab export {result.study} --out {result.study}.model.zip"
                        + ("" if s.exit_code == 0 else f"   or continue: tunelab resume {result.study}"))
        else:
            r.out.print(f"no finished trial yet; continue with: tunelab resume {result.study} --extend 5m")
    return s.exit_code


def _check_study_exists(study: str, store: str | None) -> None:
    from tunelab.store import Store

    with Store.open(store) as st:
        st.get_study(study)


def _progress_hooks(metric_holder: dict[str, Any], quiet: bool) -> tuple[Any, Any, Any]:
    from tunelab import _render as r

    state: dict[str, Any] = {"bar": None, "stop": threading.Event()}

    def announce(start: Any) -> None:
        if quiet:
            return
        verb = start.verb
        budget = start.budget
        box = "-" if budget.wall_seconds is None else r.format_duration(budget.wall_seconds)
        workers = f" · {start.workers} worker{'s' if start.workers != 1 else ''} ({start.workers_why})" \
            if start.workers_why else ""
        r.err.print(f"{verb} {start.study} · store {start.store} · {start.rows} rows × {start.columns} columns · "
                    f"{start.task}, {start.metric} ({start.direction}) · budget {box}"
                    + (f", {r.format_duration(start.spent_wall)} already spent" if start.spent_wall else "")
                    + workers)
        for note in start.notes:
            r.err.print(f"  note: {note}")
        bar = r.LiveProgress(start.metric, enabled=True)
        left = None if budget.wall_seconds is None else max(0.0, budget.wall_seconds - start.spent_wall)
        bar.start(left, budget.trials)
        state["bar"] = bar
        state["t0"] = __import__("time").monotonic()

        def ticker() -> None:
            while not state["stop"].wait(0.5):
                bar.tick(__import__("time").monotonic() - state["t0"])

        threading.Thread(target=ticker, daemon=True).start()

    def progress(p: Any) -> None:
        if state["bar"] is not None:
            state["bar"].update(p)

    def close() -> None:
        state["stop"].set()
        if state["bar"] is not None:
            state["bar"].stop()

    return announce, progress, close


@app.command()
def run(
    ctx: typer.Context,
    data: Path = typer.Argument(..., help="CSV (any common delimiter, UTF-8) or Parquet file."),
    target: str = typer.Option(..., "--target", "-t", help="Column to predict."),
    budget: str | None = typer.Option(None, "--budget", "-b",
                                      help="Total wall-clock time, e.g. 90s, 10m, 2h (summed over every launch). "
                                           "[default: 10m unless --trials is given]"),
    cpu_budget: str | None = typer.Option(None, "--cpu-budget", help="Cap on CPU time over all processes, e.g. 20m."),
    trials: int | None = typer.Option(None, "--trials", help="Cap on the number of finished trials."),
    metric: str | None = typer.Option(None, "--metric", "-m",
                                      help="roc_auc, accuracy, log_loss (classification); rmse, mae, r2 "
                                           "(regression). [default: roc_auc binary, log_loss multiclass, rmse]"),
    task: str | None = typer.Option(None, "--task", help="binary, multiclass or regression. [default: inferred]"),
    study: str | None = typer.Option(None, "--study", "-s", help="Study name. [default: the data file's name]"),
    space: Path | None = typer.Option(None, "--space", help="Search space JSON to use instead of the built one."),
    pruning: str = typer.Option("auto", "--pruning",
                                help="auto, off, median, halving or hyperband. auto counts the trials the budget "
                                     "should finish: off under 4, successive halving from there."),
    rows_fidelity: str = RowsFidelityOpt,
    jobs: str = JobsOpt,
    learn: list[str] | None = typer.Option(None, "--learn-from", metavar="STUDY",
                                           help="An earlier study in the same store (same kind of task): its "
                                                "best 3 configurations run first, moved into this data's ranges. "
                                                "Repeat to learn from several."),
    nearest: int = typer.Option(0, "--learn-nearest", metavar="K", min=0,
                                help="Also learn from the K earlier studies in the store (same kind of task) whose "
                                     "data looks most alike by meta-features; their best configurations run first."),
    no_portfolio: bool = typer.Option(False, "--no-portfolio",
                                      help="Do not start from the shipped portfolio (configurations chosen offline to "
                                           "do well together across many open datasets, which otherwise run first)."),
    portfolio_file: Path | None = typer.Option(None, "--portfolio", metavar="FILE",
                                               help="A rebuilt portfolio to start from instead of the shipped one "
                                                    "(benchmarks/build_portfolio.py writes one)."),
    seed: int = SeedOpt,
    horizon: str = HorizonOpt,
    worth: str | None = WorthOpt,
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
    quiet: bool = QuietOpt,
) -> None:
    """Profile a data file and search it for the best pipeline within a budget.

    When the launch ends it prints what is already decided (families dropped, knobs to freeze or
    without effect) and whether another stretch looks worth it; `tunelab importance` shows the rest.

    Example: tunelab run sales.csv --target churned --budget 10m

    Start from what worked on earlier data: tunelab run q4.csv --target churned --learn-from q3

    Or let tunelab pick the earlier data most like this one: tunelab run q4.csv --target churned --learn-nearest 2
    """
    from tunelab.engine import Budget, parse_duration
    from tunelab.ops import RunRequest, run_study

    look = _decision_options(horizon, worth)
    wall = parse_duration(budget) if budget else (None if trials else 600.0)
    box = Budget(wall, parse_duration(cpu_budget, "--cpu-budget") if cpu_budget else None, trials)
    request = RunRequest(data=data, target=target, budget=box, store=store, study=study, task=task, metric=metric,
                         seed=seed, space_file=space, pruning=pruning, jobs=jobs,
                         learn_from=tuple(learn or ()), learn_nearest=nearest, portfolio=not no_portfolio,
                         portfolio_file=portfolio_file, rows_fidelity=rows_fidelity)
    announce, progress, close = _progress_hooks({}, quiet or json_out)
    try:
        result = run_study(request, announce=announce, on_progress=progress, settings=_settings(ctx), look=look)
    finally:
        close()
    raise typer.Exit(_search_output(result, json_out))


@app.command()
def resume(
    ctx: typer.Context,
    study: str = typer.Argument(..., help="Name of the study to continue."),
    extend: str | None = typer.Option(None, "--extend", help="Add this much time to the study's budget, e.g. 10m."),
    more_trials: int = typer.Option(0, "--more-trials", help="Add this many trials to the study's trial cap."),
    data: Path | None = typer.Option(None, "--data", help="The data file's new place, if it moved."),
    accept_changed_data: bool = typer.Option(False, "--accept-changed-data",
                                             help="Continue even though the data file's bytes changed."),
    jobs: str = JobsOpt,
    horizon: str = HorizonOpt,
    worth: str | None = WorthOpt,
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
    quiet: bool = QuietOpt,
) -> None:
    """Continue a study after a crash, Ctrl-C or reboot, with the budget that is left.

    Trials that were running when the process died are recorded as interrupted and run again first.
    """
    _check_study_exists(study, store)  # fail fast, before the heavy imports
    from tunelab.engine import parse_duration
    from tunelab.ops import resume_study

    look = _decision_options(horizon, worth)
    seconds = parse_duration(extend, "--extend") if extend else 0.0
    announce, progress, close = _progress_hooks({}, quiet or json_out)
    try:
        result = resume_study(study, store=store, extend_seconds=seconds, extend_trials=more_trials, data=data,
                              accept_changed_data=accept_changed_data, announce=announce, on_progress=progress,
                              jobs=jobs, settings=_settings(ctx), look=look)
    finally:
        close()
    raise typer.Exit(_search_output(result, json_out))


@app.command()
def worker(
    ctx: typer.Context,
    study: str = typer.Argument(..., help="Name of a study to join (it must exist in the store)."),
    data: Path | None = typer.Option(None, "--data", help="Where the study's data file is on this machine."),
    jobs: str = JobsOpt,
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
    quiet: bool = QuietOpt,
) -> None:
    """Join a study from this machine and work on it until its budget is spent.

    Point every machine at the same database, e.g.
    tunelab worker sales --store postgresql://alex@db-host/studies --jobs 4
    """
    _check_study_exists(study, store)  # fail fast, before the heavy imports
    from tunelab.ops import resume_study

    announce, progress, close = _progress_hooks({}, quiet or json_out)
    try:
        result = resume_study(study, store=store, data=data, announce=announce, on_progress=progress, jobs=jobs,
                              settings=_settings(ctx), kind="worker")
    finally:
        close()
    raise typer.Exit(_search_output(result, json_out))


@app.command()
def status(
    study: str | None = typer.Argument(None, help="A study to show in detail; omit to list every study."),
    top: int = typer.Option(5, "--top", help="How many of the best trials to show."),
    horizon: str = HorizonOpt,
    worth: str | None = WorthOpt,
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
) -> None:
    """List the studies in a store, or show one: best config, score ± fold spread, top trials, budget,
    which model families to drop, and whether another stretch of search looks worth it."""
    from tunelab import _render as r
    from tunelab.ops import list_studies, study_detail

    options = _decision_options(horizon, worth, rank_knobs=False)

    if study is None:
        lines = list_studies(store)
        if json_out:
            r.emit_json([line.to_dict() for line in lines])
            return
        r.out.print(r.study_list_table(lines))
        return
    detail = study_detail(study, store, top=top, options=options)
    if json_out:
        r.emit_json(detail.to_dict())
        return
    r.print_detail(detail)


@app.command()
def export(
    study: str = typer.Argument(..., help="Study whose best pipeline to ship."),
    out: Path = typer.Option(..., "--out", "-o", help="Model file to write, e.g. model.zip."),
    trial: int | None = typer.Option(None, "--trial", help="Export this trial instead of the best one."),
    choose: str = typer.Option("best", "--choose", metavar="RULE",
                               help="Which trial to ship: best (the best cross-validated score) or one-se (the "
                                    "cheapest within one standard error of it; `status` shows how many are)."),
    ensemble: bool | None = typer.Option(None, "--ensemble/--single",
                                         help="Ship an ensemble of the best trials (weights from ensemble selection "
                                              "on their held-out predictions), or a single trial. [default: the "
                                              "ensemble when it beats the best trial by more than its fold noise]"),
    max_members: int = typer.Option(10, "--max-members", help="Most trials an ensemble may hold."),
    max_predict_ms: float | None = typer.Option(None, "--max-predict-ms", metavar="MS",
                                                help="Most milliseconds an ensemble may take to predict 1,000 rows; "
                                                     "its lightest members are dropped until it fits."),
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
) -> None:
    """Refit the best pipeline on all rows and write a model file (its sha256 goes into the store).

    The refit uses the rows the trial was scored on: all of them, or its row cap's sample; a refit
    expected to take more than a few seconds says how long first and shows its progress.

    Model files hold pickles: load only files you trust.
    """
    from tunelab import _render as r
    from tunelab.ops import export_model

    progress = r.RefitProgress(enabled=not json_out)
    try:
        result = export_model(study, out, store=store, trial=trial, choose_by=choose, ensemble=ensemble,
                              max_members=max_members, max_predict_ms=max_predict_ms, on_refit=progress.start)
    finally:
        progress.stop()
    if json_out:
        r.emit_json(result.to_dict())
        return
    r.print_export(result)


@app.command()
def predict(
    model: Path = typer.Argument(..., help="Model file written by `tunelab export`."),
    data: Path = typer.Argument(..., help="Rows to predict (CSV or Parquet) with the training columns."),
    out: Path = typer.Option(..., "--out", "-o", help="CSV to write: `prediction`, plus `proba_<class>` columns."),
    json_out: bool = JsonOpt,
) -> None:
    """Check a model file's hash and the input columns, then write predictions."""
    from tunelab import _render as r
    from tunelab.ops import predict_file

    result = predict_file(model, data, out)
    if json_out:
        r.emit_json(result.to_dict())
        return
    r.out.print(f"wrote {result.rows} predictions to {result.path} ({', '.join(result.columns)})")
    if result.extra_columns:
        r.err.print(f"note: ignored columns the model does not use: {', '.join(result.extra_columns[:10])}")


@app.command()
def profile(
    data: Path = typer.Argument(..., help="CSV or Parquet file."),
    target: str = typer.Option(..., "--target", "-t", help="Column to predict."),
    task: str | None = typer.Option(None, "--task", help="binary, multiclass or regression. [default: inferred]"),
    budget: str | None = typer.Option(None, "--budget", "-b", help="Plan the search space for this budget, e.g. 10m."),
    metric: str | None = typer.Option(None, "--metric", "-m",
                                      help="Plan for this metric, as run --metric would score. [default: the task's]"),
    write_space: Path | None = typer.Option(None, "--write-space", help="Write the search space JSON here "
                                                                          "(edit it, then pass it to run --space)."),
    seed: int = SeedOpt,
    jobs: str = JobsOpt,
    rows_fidelity: str = RowsFidelityOpt,
    no_portfolio: bool = typer.Option(False, "--no-portfolio", help="Leave the shipped portfolio out, as run would."),
    portfolio_file: Path | None = typer.Option(None, "--portfolio", metavar="FILE",
                                               help="A rebuilt portfolio, as run --portfolio would use."),
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
) -> None:
    """Describe a data file: column roles, meta-features, and the search space `run` would build, with reasons.

    When the store holds earlier studies of the same task, it also lists the three whose data looks
    most alike (what `run --learn-nearest 3` would learn from).

    Example: tunelab profile sales.csv --target churned --budget 30m --write-space space.json
    """
    from tunelab import _render as r
    from tunelab.engine import parse_duration
    from tunelab.facts import similarity_vector
    from tunelab.ops import profile_data, similar_studies

    seconds = parse_duration(budget) if budget else None
    report = profile_data(data, target, task, budget_seconds=seconds, metric=metric, seed=seed, jobs=jobs,
                          portfolio=not no_portfolio, portfolio_file=portfolio_file, rows_fidelity=rows_fidelity)
    similar = similar_studies(store, similarity_vector(report.meta), report.task)
    if write_space is not None:
        from tunelab.files import write_atomically

        text = report.space.to_json() + "\n"
        write_atomically(write_space, lambda tmp: tmp.write_text(text, encoding="utf-8"), "space file")
    if json_out:
        r.emit_json({**report.to_dict(),
                     "similar_studies": [{"study": n.study, "distance": n.distance} for n in similar]})
        return
    r.print_profile(report)
    r.print_similar(similar, report.task)
    if write_space is not None:
        r.out.print(f"wrote the search space to {write_space}; use it with: tunelab run {data} --target {target} "
                    f"--space {write_space}")


@app.command()
def importance(
    study: str = typer.Argument(..., help="Study whose finished trials to analyse."),
    method: str = typer.Option("fanova", "--method",
                               help="fanova (variance shares) or ped-anova (what the top trials share)."),
    family: str | None = typer.Option(None, "--family", help="Only this model family's parameters and trials."),
    tolerance: float | None = typer.Option(None, "--tolerance",
                                           help="Smallest score change that matters, in metric units. "
                                                "[default: 0.002 for roc_auc/accuracy/r2, else 2% of the score range]"),
    horizon: str = HorizonOpt,
    worth: str | None = WorthOpt,
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
) -> None:
    """What to stop tuning: model families to drop, knobs to freeze or without effect, and whether to go on.

    Families: "drop FAMILY" when its best trails the leader by more than chance (80% interval of the
    paired difference on the same folds), else "keep" or "leads"; "undecided" until one of its trials
    finishes a fold.

    Knobs: the share of score variance each explains (80% interval), how far it moves the score,
    and a verdict: "keep tuning" (evidence it matters), "freeze at VALUE", "no measurable effect",
    or "undecided", which says about how many more trials would decide it and how long that takes
    at this study's pace.

    Act on them with `tunelab freeze STUDY --auto`, then `tunelab resume STUDY --extend 10m`.
    """
    from tunelab import _render as r
    from tunelab.ops import study_importance

    options = _decision_options(horizon, worth, method=method, family=family, tolerance=tolerance)
    record, decisions = study_importance(study, store=store, options=options)
    if json_out:
        report = decisions.importance
        r.emit_json({"study": record.name, "metric": record.metric, **(report.to_dict() if report else {}),
                     "families": [f.to_dict() for f in decisions.families],
                     "forecast": None if decisions.forecast is None else decisions.forecast.to_dict(),
                     "forecast_note": decisions.forecast_note, "importance_note": decisions.importance_note})
        return
    r.print_importance(record, decisions)


@app.command()
def freeze(
    study: str = typer.Argument(..., help="Study to narrow."),
    assignments: list[str] | None = typer.Argument(None, help="PARAM=VALUE pairs, e.g. hist_gb.max_iter=300."),
    auto: bool = typer.Option(False, "--auto", help="Drop the families and freeze the knobs `tunelab importance` "
                                                    "decided: \"drop FAMILY\", \"freeze at VALUE\", "
                                                    "\"no measurable effect\"."),
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
) -> None:
    """Hold parameters at fixed values from now on: a new phase of the study that `resume` continues.

    Earlier trials stay in the study and stay comparable.
    """
    from tunelab import _render as r
    from tunelab.ops import freeze_parameters

    pairs: dict[str, str] = {}
    for item in assignments or []:
        key, sep, value = item.partition("=")
        if not sep or not key:
            raise typer.BadParameter(f"expected PARAM=VALUE, got '{item}'")
        pairs[key.strip()] = value.strip()
    result = freeze_parameters(study, pairs, auto=auto, store=store)
    if json_out:
        r.emit_json(result.to_dict())
        return
    r.out.print(f"study {result.study}: phase {result.phase} starts at trial {result.first_trial}")
    for family, why in result.dropped.items():
        r.out.print(f"  dropped {family}  ({why})")
    for key, value in result.frozen.items():
        r.out.print(f"  {key} = {value}  ({result.reasons[key]})")
    r.out.print(f"continue with: tunelab resume {result.study} --extend 10m")


@app.command()
def report(
    study: str = typer.Argument(..., help="Study to summarise."),
    out: Path | None = typer.Option(None, "--out", "-o", help="HTML file to write. [default: ./STUDY.report.html]"),
    horizon: str = HorizonOpt,
    worth: str | None = WorthOpt,
    store: str | None = StoreOpt,
    json_out: bool = JsonOpt,
    quiet: bool = typer.Option(False, "-q", "--quiet", help="Print only the written file's path."),
) -> None:
    """Write one self-contained HTML page about a study, to open in a browser or attach to a message.

    It holds the study's facts and budget, the best trial and its configuration, a chart of every
    trial's score, each model family's results, which parameters mattered, and why the search
    space looks as it does. No scripts and no links: it reads the same offline. An existing
    file is replaced only when it is an earlier report.

    \b
    Example:
      tunelab report sales                        # writes ./sales.report.html
      tunelab report sales --out /tmp/sales.html --store studies.db
    """
    from tunelab import _render as r
    from tunelab.ops import write_report

    result = write_report(study, store=store, out=out, options=_decision_options(horizon, worth))
    if json_out:
        r.emit_json(result.to_dict())
    elif quiet:
        r.out.print(result.path)
    else:
        r.out.print(f"wrote {result.path}: report on study {result.study} ({result.trials} trials); "
                    "open it in a browser")


class _UsageError(Protocol):
    exit_code: int

    def format_message(self) -> str: ...


def _is_usage_error(exc: BaseException) -> TypeGuard[_UsageError]:
    """typer's usage errors (a bad option value, a missing argument) carry exit code 2 and a message."""
    return getattr(exc, "exit_code", None) == EXIT_BAD_INPUT and callable(getattr(exc, "format_message", None))


def main(argv: list[str] | None = None) -> None:
    """Entry point: run the app; map TunelabError and usage errors to one line on stderr and exit code 2."""
    import time

    flags = _Flags(debug="--debug" in (argv if argv is not None else sys.argv[1:]), started=time.time())
    import logging

    # Libraries' log records (optuna's "falling back to a slower alternative" while the database is
    # gone) are not for the user: errors only, warnings too with --debug.  optuna resets its logger
    # when it is first imported, so the engine applies the "tunelab" logger's level to it then.
    level = logging.WARNING if flags.debug else logging.ERROR
    logging.getLogger("tunelab").setLevel(level)
    logging.getLogger("optuna").setLevel(level)
    try:
        code = app(args=argv, obj=flags, prog_name="tunelab", standalone_mode=False)
    except TunelabError as exc:
        if flags.debug:
            raise
        hint = f" — {exc.hint}" if exc.hint else ""
        sys.stderr.write(f"tunelab: error: {exc.message}{hint}\n")
        sys.exit(EXIT_BAD_INPUT)
    except (KeyboardInterrupt, typer.Abort):
        sys.stderr.write("tunelab: stopped\n")
        sys.exit(130)
    except BrokenPipeError:
        # The reader went away (`tunelab status --json | head -1`): nothing to say, and nowhere to say it.
        import os

        sys.stdout = open(os.devnull, "w")  # where the interpreter flushes what is left, at exit
        sys.exit(EXIT_BUG)
    except Exception as exc:
        if flags.debug:
            raise
        if not _is_usage_error(exc):
            # A bug: one line that names it and how to see more, not a page of traceback.
            detail = f": {first_line(exc)}" if str(exc).strip() else ""
            sys.stderr.write(f"tunelab: internal error: {type(exc).__name__}{detail}"
                             " — a bug in tunelab; run again with --debug for the traceback, and report it\n")
            sys.exit(EXIT_BUG)
        ctx = getattr(exc, "ctx", None)
        name = getattr(ctx, "info_name", None)
        where = f"tunelab {name}" if name and name != "tunelab" else "tunelab"
        message = " ".join(exc.format_message().split())
        sys.stderr.write(f"tunelab: error: {message} — see `{where} --help`\n")
        sys.exit(EXIT_BAD_INPUT)
    sys.exit(code if isinstance(code, int) else 0)


if __name__ == "__main__":  # pragma: no cover
    main()
